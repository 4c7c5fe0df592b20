"""Space motions: Galactic UVW velocities, velocity differences, 3-D separations
and closest approaches to the Sun, with Monte Carlo uncertainties.

Units: ra, dec in degrees; parallaxes in mas; proper motions in mas/yr (pmra
includes the cos(dec) factor); radial velocities and speeds in km/s;
distances in pc; times in Myr (Julian: 1 Myr = 10^6 x 365.25 d).

Uncertainties come from Monte Carlo sampling of the inputs: independent
Gaussians for each quantity, the parallax truncated to positive values so that
every sample has a distance d = 1000/parallax. Correlations between the
astrometric parameters (which survey catalogues publish) are not modelled, and 1/parallax
is a fair distance only for fractional errors below about 0.1-0.2
(Bailer-Jones 2015, PASP 127, 994); see ``dossier.astro.distance`` for the
posterior that should be used beyond that.

The closest approach uses the linear motion approximation of Bailer-Jones
2015, A&A 575, A35: the star and the Sun move on straight lines with constant
relative velocity. The paper (abstract and its comparison with orbit
integration in a Galactic potential) shows that this approximation gives
inaccurate and biased times and distances for many encounters, above all for
distant ones (large current distance, long time to the encounter), where the
Galactic potential bends the paths. Treat the results as a first estimate.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import special

from dossier.astro.angles import ARCSEC_PER_RAD, separation_pa
from dossier.astro.binary import AU_M, JULIAN_YEAR_S, KM_S_PER_AU_YR

# IAU 2015 Resolution B2: 1 pc = (648 000 / pi) au exactly.
PC_KM = AU_M / 1000.0 * 648_000.0 / np.pi
# Time to travel 1 pc at 1 km/s, in Julian Myr: 0.977792 (Bailer-Jones 2015,
# A&A 575, A35 quotes the same conversion for the linear approximation).
MYR_PER_PC_PER_KMS = PC_KM / (1.0e6 * JULIAN_YEAR_S)

DEFAULT_SAMPLES = 10_000
_QUANTILES = (16.0, 50.0, 84.0)


class SpaceVelocity(NamedTuple):
    """Galactic space velocities (U, V, W) of one or more stars, km/s.

    The inputs broadcast to a shape ``S`` (``()`` for one star). Along the last
    axis of length 3: U towards the Galactic centre (l = 0, b = 0), V towards
    Galactic rotation (l = 90 deg, b = 0), W towards the north Galactic pole.

    ``nominal`` (S + (3,)): the transformation of the input values themselves,
    no sampling (NaN when parallax <= 0). ``mean``, ``std`` (S + (3,)) and
    ``covariance`` (S + (3, 3)): of the Monte Carlo samples. ``samples``
    (S + (n_samples, 3)).
    """

    nominal: NDArray[np.float64]
    mean: NDArray[np.float64]
    std: NDArray[np.float64]
    covariance: NDArray[np.float64]
    samples: NDArray[np.float64]


class VelocityDifference(NamedTuple):
    """|v_a - v_b| in km/s: ``median``, ``p16``, ``p84`` (shape S) and ``samples`` (S + (n,))."""

    median: NDArray[np.float64]
    p16: NDArray[np.float64]
    p84: NDArray[np.float64]
    samples: NDArray[np.float64]


class Summary(NamedTuple):
    """One quantity: ``nominal`` (from the input values, no sampling) and the
    ``median``, ``p16`` and ``p84`` percentiles of its Monte Carlo samples."""

    nominal: NDArray[np.float64]
    median: NDArray[np.float64]
    p16: NDArray[np.float64]
    p84: NDArray[np.float64]


class Encounter(NamedTuple):
    """Closest approach to the Sun in the linear motion approximation.

    ``time_myr``: time of closest approach from the epoch of the data, Myr
    (negative: in the past, for a receding star). ``distance_pc``: the
    closest-approach distance, pc. ``speed_kms``: the heliocentric speed, which
    is also the speed at closest approach in this approximation, km/s. Each is
    a ``Summary`` of shape S. ``samples``: S + (n_samples, 3), the columns
    time (Myr), distance (pc), speed (km/s).
    """

    time_myr: Summary
    distance_pc: Summary
    speed_kms: Summary
    samples: NDArray[np.float64]


def _as_rng(rng: np.random.Generator | int) -> np.random.Generator:
    """A Generator passes through; an integer seeds a new one."""
    return np.random.default_rng(rng)


def _check_errors(**errors: NDArray[np.float64]) -> None:
    bad = [name for name, e in errors.items() if np.any(e < 0.0) or np.any(np.isnan(e))]
    if bad:
        raise ValueError(
            f"negative or NaN uncertainty in {', '.join(bad)}. "
            "Fix: give standard errors >= 0 (0 means a value known exactly)."
        )


def _positive_normal(
    mu: NDArray[np.float64], sigma: NDArray[np.float64], n: int, rng: np.random.Generator
) -> NDArray[np.float64]:
    """n draws per element of N(mu, sigma^2) truncated to x > 0; shape mu.shape + (n,).

    Inverse-CDF sampling written for the lower tail so that it stays accurate
    when mu is many sigma below zero: with x = mu - sigma w, the condition x > 0
    is w < mu/sigma, and w = Phi^-1(u Phi(mu/sigma)) for u uniform on (0, 1],
    evaluated in logarithms (scipy.special.log_ndtr and ndtri_exp). sigma = 0
    gives mu when mu > 0 and NaN otherwise.
    """
    m, s = mu[..., None], sigma[..., None]
    u = 1.0 - rng.uniform(size=mu.shape + (n,))  # in (0, 1], so log(u) is finite
    with np.errstate(divide="ignore", invalid="ignore"):
        w = special.ndtri_exp(np.log(u) + special.log_ndtr(m / s))
        x = m - s * w
    # Guard against round-off to zero deep in the tail (x > 0 analytically).
    x = np.maximum(x, np.finfo(float).tiny)
    exact = np.broadcast_to(np.where(m > 0.0, m, np.nan), x.shape)
    return np.where(s == 0.0, exact, x)


def _sample_motion(
    parallax: ArrayLike,
    pmra: ArrayLike,
    pmdec: ArrayLike,
    rv: ArrayLike,
    parallax_error: ArrayLike,
    pmra_error: ArrayLike,
    pmdec_error: ArrayLike,
    rv_error: ArrayLike,
    n_samples: int,
    rng: np.random.Generator | int,
    *extra: ArrayLike,
) -> tuple[tuple[NDArray[np.float64], ...], tuple[NDArray[np.float64], ...], tuple[NDArray[np.float64], ...]]:
    """Broadcast the inputs and draw the samples.

    Returns the broadcast nominal values (parallax NaN where <= 0), the
    samples (each shape S + (n_samples,)) and the broadcast ``extra`` arrays.
    """
    if int(n_samples) < 1:
        raise ValueError(f"n_samples = {n_samples}. Fix: draw at least 1 sample (thousands for percentiles).")
    n = int(n_samples)
    arrays = np.broadcast_arrays(
        *(np.asarray(x, dtype=float) for x in (parallax, pmra, pmdec, rv)),
        *(np.asarray(x, dtype=float) for x in (parallax_error, pmra_error, pmdec_error, rv_error)),
        *(np.asarray(x, dtype=float) for x in extra),
    )
    plx, mra, mdec, vr, e_plx, e_mra, e_mdec, e_vr = arrays[:8]
    _check_errors(parallax_error=e_plx, pmra_error=e_mra, pmdec_error=e_mdec, rv_error=e_vr)
    gen = _as_rng(rng)
    # Fixed order of draws, so one seed always gives the same samples.
    plx_s = _positive_normal(plx, e_plx, n, gen)
    mra_s = mra[..., None] + e_mra[..., None] * gen.standard_normal(plx.shape + (n,))
    mdec_s = mdec[..., None] + e_mdec[..., None] * gen.standard_normal(plx.shape + (n,))
    vr_s = vr[..., None] + e_vr[..., None] * gen.standard_normal(plx.shape + (n,))
    nominal = (np.where(plx > 0.0, plx, np.nan), mra, mdec, vr)
    return nominal, (plx_s, mra_s, mdec_s, vr_s), tuple(arrays[8:])


def _galactic_uvw(
    ra: NDArray[np.float64],
    dec: NDArray[np.float64],
    parallax: NDArray[np.float64],
    pmra: NDArray[np.float64],
    pmdec: NDArray[np.float64],
    rv: NDArray[np.float64],
) -> NDArray[np.float64]:
    """(U, V, W) in km/s, shape ra.shape + (3,), from one astropy transformation.

    ICRS and astropy's Galactic frame share their origin (the solar-system
    barycentre), so the transformation only rotates the velocity; astropy
    defines the Galactic frame from the IAU 1958 system through FK4 B1950
    (Blaauw et al. 1960, MNRAS 121, 123), as its documentation states.
    """
    import astropy.units as u
    from astropy.coordinates import SkyCoord

    with np.errstate(divide="ignore", invalid="ignore"):
        distance_pc = np.where(parallax > 0.0, 1000.0 / parallax, np.nan)
    coord = SkyCoord(
        ra=ra * u.deg,
        dec=dec * u.deg,
        distance=distance_pc * u.pc,
        pm_ra_cosdec=pmra * u.mas / u.yr,
        pm_dec=pmdec * u.mas / u.yr,
        radial_velocity=rv * u.km / u.s,
        frame="icrs",
    )
    velocity = coord.galactic.velocity  # CartesianDifferential in the Galactic axes
    return np.stack([c.to_value(u.km / u.s) for c in (velocity.d_x, velocity.d_y, velocity.d_z)], axis=-1)


def space_velocity(
    ra: ArrayLike,
    dec: ArrayLike,
    parallax: ArrayLike,
    pmra: ArrayLike,
    pmdec: ArrayLike,
    rv: ArrayLike,
    parallax_error: ArrayLike,
    pmra_error: ArrayLike,
    pmdec_error: ArrayLike,
    rv_error: ArrayLike,
    *,
    n_samples: int = DEFAULT_SAMPLES,
    rng: np.random.Generator | int = 0,
) -> SpaceVelocity:
    """Galactic space velocities (U, V, W) with Monte Carlo uncertainties.

    Parameters
    ----------
    ra, dec : array_like
        ICRS position, degrees (not sampled: positional errors are negligible
        here).
    parallax : array_like
        Parallax, mas. Values <= 0 are valid data when their error is positive
        (the samples are truncated to positive parallaxes).
    pmra, pmdec : array_like
        Proper motion, mas/yr; pmra includes the cos(dec) factor.
    rv : array_like
        Radial velocity, km/s (positive: receding).
    parallax_error, pmra_error, pmdec_error, rv_error : array_like
        Standard errors in the same units, >= 0. All inputs broadcast together
        to a shape S.
    n_samples : int, optional
        Monte Carlo samples per star.
    rng : numpy.random.Generator or int, optional
        The generator, or a seed for a new one (default seed 0), so that the
        result is reproducible.

    Returns
    -------
    SpaceVelocity
        ``nominal``, ``mean``, ``std`` (km/s, S + (3,)), ``covariance``
        ((km/s)^2, S + (3, 3)) and ``samples`` (km/s, S + (n_samples, 3)).

    Raises
    ------
    ValueError
        For a negative or NaN uncertainty, or n_samples < 1.

    Notes
    -----
    U points to the Galactic centre, V in the direction of Galactic rotation,
    W to the north Galactic pole: a right-handed system, the axes of Johnson &
    Soderblom 1987, AJ 93, 864 (from memory). Some software (e.g. the IDL
    astrolib ``GAL_UVW``) counts U positive towards the anticentre instead;
    flip the sign of U to compare. The velocities are heliocentric
    (strictly, relative to the solar-system barycentre): they are NOT corrected
    for the solar motion with respect to the local standard of rest, nor for
    Galactic rotation. Velocity differences between stars are unaffected.

    The transformation is astropy's: a ``SkyCoord`` in ICRS with distance =
    1000/parallax pc, ``pm_ra_cosdec``, ``pm_dec`` and ``radial_velocity``,
    transformed to ``galactic``, whose ``velocity`` (a CartesianDifferential)
    gives (d_x, d_y, d_z) = (U, V, W). The nominal values and every sample of
    every star go through a single ``SkyCoord``.

    Each sample draws the parallax from a normal distribution truncated to
    positive values and the proper motions and radial velocity from normal
    distributions, all independent. A star with parallax <= 0 and zero
    parallax error has no distance and gives NaN.
    """
    nominal, (plx_s, mra_s, mdec_s, vr_s), (ra_b, dec_b) = _sample_motion(
        parallax, pmra, pmdec, rv, parallax_error, pmra_error, pmdec_error, rv_error, n_samples, rng, ra, dec
    )
    shape = ra_b.shape
    n = plx_s.shape[-1]
    # Column 0 holds the nominal values, columns 1..n the samples: one SkyCoord.
    columns = [
        np.concatenate([nom[..., None], samp], axis=-1)
        for nom, samp in zip(nominal, (plx_s, mra_s, mdec_s, vr_s), strict=True)
    ]
    ra_all = np.broadcast_to(ra_b[..., None], shape + (n + 1,))
    dec_all = np.broadcast_to(dec_b[..., None], shape + (n + 1,))
    uvw = _galactic_uvw(ra_all, dec_all, *columns)  # S + (n + 1, 3)
    samples = uvw[..., 1:, :]
    mean = samples.mean(axis=-2)
    centred = samples - mean[..., None, :]
    ddof = 1 if n > 1 else 0
    covariance = np.einsum("...ni,...nj->...ij", centred, centred) / (n - ddof)
    std = np.sqrt(np.diagonal(covariance, axis1=-2, axis2=-1))
    return SpaceVelocity(nominal=uvw[..., 0, :], mean=mean, std=std, covariance=covariance, samples=samples)


def velocity_difference(uvw_a_samples: ArrayLike, uvw_b_samples: ArrayLike) -> VelocityDifference:
    """Size of the 3-D velocity difference of two stars, from paired samples.

    Parameters
    ----------
    uvw_a_samples, uvw_b_samples : array_like, shape S + (n, 3)
        Velocity samples in km/s (e.g. ``SpaceVelocity.samples``), broadcast
        together; sample i of one star is paired with sample i of the other.

    Returns
    -------
    VelocityDifference
        ``median``, ``p16``, ``p84`` of |v_a - v_b| (km/s, shape S) and the
        ``samples`` (km/s, S + (n,)).

    Notes
    -----
    Pairing independent samples is correct when the two stars' errors are
    independent. When they share an error (e.g. a common parallax adopted for
    both components of a pair), draw the samples with the shared value, or the
    spread is overstated. |Δv| cannot be negative, so when the uncertainties
    are comparable to the true difference the median is biased high (the
    3-D analogue of the Rice distribution; for a zero true difference it
    follows a Maxwell distribution).
    """
    a = np.asarray(uvw_a_samples, dtype=float)
    b = np.asarray(uvw_b_samples, dtype=float)
    if a.shape[-1:] != (3,) or b.shape[-1:] != (3,):
        raise ValueError(
            f"velocity samples of shapes {a.shape} and {b.shape}. "
            "Fix: give arrays of shape (..., n_samples, 3) in km/s."
        )
    speed = np.linalg.norm(a - b, axis=-1)
    p16, p50, p84 = np.percentile(speed, _QUANTILES, axis=-1)
    return VelocityDifference(median=p50, p16=p16, p84=p84, samples=speed)


def separation_3d(
    ra1: ArrayLike, dec1: ArrayLike, d1: ArrayLike, ra2: ArrayLike, dec2: ArrayLike, d2: ArrayLike
) -> NDArray[np.float64]:
    """Distance in space between two points given by position and distance.

    Parameters
    ----------
    ra1, dec1, ra2, dec2 : array_like
        Positions in degrees.
    d1, d2 : array_like
        Distances, pc (any length unit; the result is in the same unit).

    Returns
    -------
    ndarray
        Separation in pc, all inputs broadcast together.

    Notes
    -----
    The law of cosines, s^2 = d1^2 + d2^2 - 2 d1 d2 cos(theta), written in the
    equivalent half-angle form s^2 = (d1 - d2)^2 + 4 d1 d2 sin^2(theta/2),
    which does not lose precision to cancellation for close pairs at nearly
    equal distances (the usual case for a binary). The angle theta comes from
    ``dossier.astro.angles.separation_pa`` (Vincenty's formula).
    """
    sep_arcsec, _ = separation_pa(ra1, dec1, ra2, dec2)
    theta = sep_arcsec / ARCSEC_PER_RAD
    r1 = np.asarray(d1, dtype=float)
    r2 = np.asarray(d2, dtype=float)
    return np.sqrt((r1 - r2) ** 2 + 4.0 * r1 * r2 * np.sin(0.5 * theta) ** 2)


def _linear_encounter(
    parallax: NDArray[np.float64], pmra: NDArray[np.float64], pmdec: NDArray[np.float64], rv: NDArray[np.float64]
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Time (Myr), distance (pc) and speed (km/s) of closest approach, linear motion."""
    with np.errstate(divide="ignore", invalid="ignore"):
        d_pc = np.where(parallax > 0.0, 1000.0 / parallax, np.nan)
        # Bailer-Jones 2015, A&A 575, A35 (linear motion approximation):
        # v_t = 4.74047 mu d (mu in mas/yr and d in kpc, or arcsec/yr and pc),
        # v^2 = v_r^2 + v_t^2, t = -d v_r / v^2, d_min = d v_t / v.
        v_t = KM_S_PER_AU_YR * np.hypot(pmra, pmdec) * d_pc / 1000.0
        v = np.hypot(rv, v_t)
        moving = v > 0.0
        t_myr = np.where(moving, -d_pc * rv / v**2, 0.0) * MYR_PER_PC_PER_KMS
        d_min = np.where(moving, d_pc * v_t / v, d_pc)
    # A star at rest relative to the Sun is closest now, at its present distance.
    t_myr = np.where(np.isnan(d_pc), np.nan, t_myr)
    return t_myr, d_min, v


def _summary(nominal: NDArray[np.float64], samples: NDArray[np.float64]) -> Summary:
    p16, p50, p84 = np.percentile(samples, _QUANTILES, axis=-1)
    return Summary(nominal=nominal, median=p50, p16=p16, p84=p84)


def closest_approach(
    parallax: ArrayLike,
    pmra: ArrayLike,
    pmdec: ArrayLike,
    rv: ArrayLike,
    parallax_error: ArrayLike,
    pmra_error: ArrayLike,
    pmdec_error: ArrayLike,
    rv_error: ArrayLike,
    *,
    n_samples: int = DEFAULT_SAMPLES,
    rng: np.random.Generator | int = 0,
) -> Encounter:
    """Closest approach of a star to the Sun on straight-line relative motion.

    Parameters
    ----------
    parallax : array_like
        Parallax, mas (values <= 0 are valid when their error is positive).
    pmra, pmdec : array_like
        Proper motion, mas/yr; pmra includes the cos(dec) factor.
    rv : array_like
        Radial velocity, km/s (negative: approaching).
    parallax_error, pmra_error, pmdec_error, rv_error : array_like
        Standard errors in the same units, >= 0. All inputs broadcast together
        to a shape S.
    n_samples : int, optional
        Monte Carlo samples per star.
    rng : numpy.random.Generator or int, optional
        The generator, or a seed for a new one (default seed 0).

    Returns
    -------
    Encounter
        Time (Myr), distance (pc) and speed (km/s) of closest approach, each
        with its nominal value, median and 16th/84th percentiles, and the
        samples.

    Raises
    ------
    ValueError
        For a negative or NaN uncertainty, or n_samples < 1.

    Notes
    -----
    The linear motion approximation of Bailer-Jones 2015, A&A 575, A35, with
    d = 1000/parallax pc and mu = sqrt(pmra^2 + pmdec^2):

        v_t = 4.74047 mu d,  v^2 = v_r^2 + v_t^2,
        t_min = -d v_r / v^2,  d_min = d v_t / v,

    with 1 pc per km/s = 0.977792 Myr. t_min < 0 means the closest approach is
    past (a receding star); a star with no relative motion is closest now.

    The paper warns that this approximation is inaccurate and biased for many
    encounters, increasingly so for distant ones (large present distance, long
    times), where the Galactic potential curves the paths and an orbit
    integration is needed; it also ignores the mutual gravity of the two
    stars. The sampling is as in ``space_velocity``: independent Gaussians,
    parallax truncated to positive values (Bailer-Jones 2015 samples the full
    covariance of the astrometry instead). Quote the median and the 16-84 %
    interval: the distribution of d_min is skewed, and the nominal value is
    not its centre when the errors are large.
    """
    nominal, sampled, _ = _sample_motion(
        parallax, pmra, pmdec, rv, parallax_error, pmra_error, pmdec_error, rv_error, n_samples, rng
    )
    t0, d0, v0 = _linear_encounter(*nominal)
    ts, ds, vs = _linear_encounter(*sampled)
    return Encounter(
        time_myr=_summary(t0, ts),
        distance_pc=_summary(d0, ds),
        speed_kms=_summary(v0, vs),
        samples=np.stack([ts, ds, vs], axis=-1),
    )


def peak_magnitude(m_now: ArrayLike, d_now: ArrayLike, d_min: ArrayLike) -> NDArray[np.float64]:
    """Apparent magnitude of a star at its closest approach.

    Parameters
    ----------
    m_now : array_like
        Apparent magnitude now, mag.
    d_now, d_min : array_like
        Distance now and at closest approach, pc (any common unit).

    Returns
    -------
    ndarray
        m_now + 5 log10(d_min / d_now), mag (Bailer-Jones 2015, A&A 575, A35;
        the inverse-square law in Pogson's magnitudes). Interstellar
        extinction, which falls as the star approaches, is ignored, so the
        result is a faint limit for a reddened star.
    """
    m = np.asarray(m_now, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return m + 5.0 * np.log10(np.asarray(d_min, dtype=float) / np.asarray(d_now, dtype=float))
