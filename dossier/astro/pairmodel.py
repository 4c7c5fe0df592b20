"""The pair model: one joint likelihood of three hypotheses for two stars.

Every candidate pair, in ``dossier screen`` (millions at once) and in
``dossier weigh`` (one pair at a time), goes through :func:`evaluate`. It
weighs three hypotheses with all the astrometry at once:

``bound``
    The companion is on a Keplerian orbit about the primary, with an
    isotropic orientation, a uniform mean anomaly, a thermal eccentricity
    distribution f(e) = 2e (Jeans 1919, MNRAS 79, 408) and a semimajor axis
    drawn from a broken power law, dN/dlog a flat (Öpik 1924, Publ. Tartu
    25, 6) below ``bound_break_au`` and falling as a^slope beyond it
    (slope −0.6, i.e. dN/ds ∝ s^−1.6; El-Badry & Rix 2018, MNRAS 480, 4884).
    The mass is the evidence's, or estimated, with its uncertainty.
``co-moving``
    Born together but not bound: a 3-D separation whose density per
    decade grows as s³ (co-natal stars spread with a uniform space density)
    up to ``comoving_scale_au`` (about 1 pc, beyond the tidal limit of a
    wide binary) and is flat beyond it to ``comoving_max_au``, and a velocity difference
    drawn from an isotropic Gaussian of ``comoving_dispersion_kms`` per axis
    (a shared birth velocity; the internal dispersions of young associations
    are of order 1 km/s, e.g. Wright & Mamajek 2018, MNRAS 476, 381).
``chance``
    An unrelated field star: at its own distance from the exponentially
    decreasing space density prior (Bailer-Jones 2015, PASP 127, 994), with
    its own velocity from the field's velocity ellipsoids (thin disc, thick
    disc, halo; Bensby, Feltzing & Lundström 2003, A&A 410, 527, Table 1)
    about their mean streaming motion, minus the Sun's motion relative to
    the LSR (Schönrich, Binney & Dehnen 2010, MNRAS 403, 1829), projected
    at the star's own position; its chance of lying this close on the sky
    is set by the surface density of field stars (Bloom, Kulkarni &
    Djorgovski 2002, AJ 123, 1111).

The likelihood
    For each hypothesis, the parallaxes, proper motions and radial
    velocities of both stars are weighed together, marginalised over the
    distance by quadrature on equal-probability points of its posterior:

    * physical (bound or co-moving): one distance d for both stars (star 2
      allowed a line-of-sight depth of one projected separation); the
      pair's mean velocity from the field's distribution; the velocity
      difference Δv from the hypothesis;
    * chance: each star at its own distance with its own field velocity.

    Velocity differences are taken in 3-D: each star's velocity vector is
    built at its own position (v = 4.74047 μ d along the local east and
    north, RV along the line of sight) and the difference projected on the
    axes at the pair's mid-point. Where a star has no RV, the pair's common
    radial velocity (the other star's RV, else the field's mean in that
    direction, with its dispersion) stands in for it, so that the same space
    velocity seen at two positions (perspective) gives no difference.

    The bound hypothesis' distribution of Δv at projected separation s is
    tabulated once by a quasi-random Monte Carlo over orbits (Δv in units
    of the circular speed at s, and s/a), re-weighted for each pair by the
    semimajor-axis prior at a = s / (s/a); each tabulated orbit is smoothed
    by a Gaussian kernel whose width includes the mass uncertainty.

Unresolved companions
    Each star hides with probability ``inner_fraction`` an unresolved
    companion that moves it: its single-epoch RV by its orbital velocity,
    its proper motion by the photocentre's mean motion over the
    catalogue's baseline (α = a (f − β); f mass fraction, β light
    fraction, L ∝ M⁴). Periods are log-normal (Raghavan et al. 2010, ApJS
    190, 1), mass ratios uniform. The extra velocity difference is a scale
    mixture of Gaussians tabulated by Monte Carlo from that distribution.
    A star known to be a binary gets probability 1, and a star whose RV is
    the systemic velocity of a fitted orbit no radial perturbation.

Errors
    Every catalogue error is multiplied by ``error_inflation`` (by
    ``close_inflation`` below ``close_separation_arcsec``, where El-Badry,
    Rix & Heintz 2021, MNRAS 506, 2269 found them underestimated) and a
    floor is added in quadrature. Each measurement of the physical
    hypotheses may, with probability ``outlier_fraction``, be wrong by up
    to ``outlier_scale`` error bars: a robust likelihood whose tails, not a
    cap, limit how far one bad number can move the verdict: a wrong
    parallax makes the pair's two parallaxes no more informative than two
    field stars', a wrong motion makes the velocity difference as broad as
    the field's. No one line of evidence can therefore move the odds by
    more than a factor of about 1/``outlier_fraction``.

Contributions
    The log10 posterior odds physical : chance are the sum of three terms
    that are reported as used: the separation prior (companions against
    field stars at this separation, at the pair's median distance), the
    parallaxes (their Bayes factor), and the motions (the rest of the joint
    likelihood: proper motions and RVs given the parallaxes). The odds
    bound : co-moving are the ratio of the two separation priors plus the
    motions.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Mapping

import numpy as np
from numpy.typing import NDArray

from dossier.astro import binary, distance

#: km/s per (mas/yr × kpc): 1 au per Julian year (El-Badry, Rix & Heintz 2021; IAU 2012 au).
K = binary.KM_S_PER_AU_YR
LN10 = math.log(10.0)
ARCSEC_PER_DEG2 = 3600.0**2
#: Points of the distance posterior the likelihood is averaged over, by the fractional error of the pair's
#: mean parallax: (largest fractional error, points). A precise parallax leaves the integrand nearly constant
#: across its posterior, so one point (the median) is enough; a loose one needs six.
DISTANCE_NODES = ((0.005, 1), (0.02, 2), (0.08, 4), (math.inf, 6))
#: Orbits of the bound hypothesis' table.
ORBIT_SAMPLES = 128
#: Kernel width of each tabulated orbit, in units of the circular speed.
ORBIT_BANDWIDTH = 0.06
#: Relative uncertainty (in ln M) of a mass estimated from a magnitude, and of a mass with no estimate at all.
ESTIMATED_MASS_LN_ERROR = 0.3
UNKNOWN_MASS_LN_ERROR = 0.7
UNKNOWN_MASS_MSUN = 1.0
#: Pairs per block: temporaries of DISTANCE_NODES × ORBIT_SAMPLES × mixture per pair stay small.
BLOCK = 256

HYPOTHESES = ("bound", "co-moving", "chance")

#: Input columns (the fields of ``dossier screen``); NaN where missing.
INPUTS = ("ra1", "dec1", "ra2", "dec2", "parallax1", "parallax_error1", "parallax2", "parallax_error2",
          "pmra1", "pmra_error1", "pmdec1", "pmdec_error1", "pmra_pmdec_corr1",
          "pmra2", "pmra_error2", "pmdec2", "pmdec_error2", "pmra_pmdec_corr2",
          "rv1", "rv_error1", "rv2", "rv_error2", "mass1", "mass_error1", "mass2", "mass_error2",
          "field_density", "inner1", "inner2", "rv_systemic1", "rv_systemic2", "shared_parallax")


# ----------------------------------------------------------------------------
# Tables computed once


@functools.cache
def icrs_to_galactic() -> NDArray:
    """The rotation matrix R with x_galactic = R x_icrs, from astropy's frames."""
    from astropy.coordinates import ICRS, CartesianRepresentation, Galactic

    eye = CartesianRepresentation(np.eye(3))
    gal = ICRS(eye).transform_to(Galactic()).cartesian.xyz.value  # column j: image of ICRS axis j
    return np.asarray(gal, dtype=float)


def field_moments(settings) -> tuple[NDArray, NDArray, NDArray]:
    """Weights, heliocentric means (ICRS, km/s) and covariances of the field's velocity components."""
    R = icrs_to_galactic()
    u_sun, v_sun, w_sun = settings.solar_motion_kms
    comps = settings.field_components
    weights = np.array([c.fraction for c in comps], float)
    weights /= weights.sum()
    means, covs = [], []
    for c in comps:
        mean_gal = np.array([-u_sun, c.asymmetric_drift_kms - v_sun, -w_sun])
        cov_gal = np.diag([c.sigma_u_kms**2, c.sigma_v_kms**2, c.sigma_w_kms**2])
        means.append(R.T @ mean_gal)
        covs.append(R.T @ cov_gal @ R)
    return weights, np.array(means), np.array(covs)


def _stratified(dims: int, n: int, seed: int) -> NDArray:
    """n points in the unit cube of ``dims`` dimensions, one in each of n equal slices of every axis (a Latin
    hypercube; McKay, Beckman & Conover 1979, Technometrics 21, 239), from numpy's PCG64 with a fixed seed:
    the same table on every machine. Stratified, so a table of a hundred orbits averages like a much larger
    random one; numpy only, so that weighing one pair does not import scipy.stats."""
    rng = np.random.default_rng(seed)
    cols = [(rng.permutation(n) + rng.random(n)) / n for _ in range(dims)]
    return np.stack(cols, axis=1)


@functools.cache
def orbit_table(n: int = ORBIT_SAMPLES) -> tuple[NDArray, NDArray, NDArray]:
    """Orbits with thermal eccentricities, isotropic orientations and uniform phases.

    Returns ``xi`` = s/a (projected separation over semimajor axis), ``ut`` and ``ur``: the
    projected (tangential, ≥ 0) and line-of-sight relative speeds in units of the circular speed
    √(GM/s) at the projected separation. Stratified (Latin hypercube) points with a fixed seed: the same table
    on every machine up to rounding.
    """
    q = _stratified(5, n, seed=20261204)
    e = np.sqrt(q[:, 0])  # thermal: F(e) = e²
    M = 2 * np.pi * q[:, 1]
    cos_i = 2 * q[:, 2] - 1
    node, peri = 2 * np.pi * q[:, 3], 2 * np.pi * q[:, 4]
    E = binary.solve_kepler(M, e)
    b = np.sqrt(1 - e**2)
    x, y = np.cos(E) - e, b * np.sin(E)               # a = 1, GM = 1
    den = 1 - e * np.cos(E)
    vx, vy = -np.sin(E) / den, b * np.cos(E) / den    # mean motion 1
    sin_i = np.sqrt(1 - cos_i**2)
    cw, sw, cn, sn = np.cos(peri), np.sin(peri), np.cos(node), np.sin(node)

    def rotate(px, py):  # orbital plane -> sky (X, Y) and line of sight Z (textbook; Hilditch 2001, ch. 2)
        xw, yw = px * cw - py * sw, px * sw + py * cw
        return xw * cn - yw * cos_i * sn, xw * sn + yw * cos_i * cn, yw * sin_i

    X, Y, _ = rotate(x, y)
    VX, VY, VZ = rotate(vx, vy)
    xi = np.hypot(X, Y)
    scale = np.sqrt(xi)  # v / √(GM/s) = w √(s/a)
    return xi, np.hypot(VX, VY) * scale, VZ * scale


@functools.cache
def projection_table(n: int = ORBIT_SAMPLES) -> NDArray:
    """sin ψ of isotropic directions: projected over 3-D separation of a co-moving pair."""
    cos_psi = _stratified(1, n, seed=7)[:, 0]
    return np.sqrt(1 - cos_psi**2)


#: Power with which the rates fall outside their ranges (a steep taper, not a wall, so that no hypothesis is
#: ever excluded outright by the prior and every term of the odds stays a finite number).
TAPER = 4.0


def bound_rate(a_au: NDArray, settings) -> NDArray:
    """dN/dlog10 a of bound companions per star: a broken power law, tapered as (a/min)^4 below
    ``bound_min_au`` and (a/max)^−4 beyond ``bound_max_au`` (tidal disruption)."""
    a = np.asarray(a_au, float)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        rate = settings.bound_rate_per_decade * np.where(
            a <= settings.bound_break_au, 1.0, (a / settings.bound_break_au) ** settings.bound_slope)
        taper = np.minimum(1.0, (a / settings.bound_min_au) ** TAPER) * \
            np.minimum(1.0, (settings.bound_max_au / a) ** TAPER)
    return rate * taper


def comoving_rate(s_au: NDArray, settings) -> NDArray:
    """dN/dlog10 s (3-D) of co-moving unbound companions per star: ∝ s³ below the scale (uniform space density of
    co-natal stars), flat beyond it, tapered as (s/max)^−4 beyond ``comoving_max_au``."""
    s = np.asarray(s_au, float)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        rate = settings.comoving_rate_per_decade * np.minimum(1.0, (s / settings.comoving_scale_au) ** 3)
        return rate * np.minimum(1.0, (settings.comoving_max_au / s) ** TAPER)


@functools.lru_cache(maxsize=8)
def _inner_mixture(fraction_key: tuple) -> tuple[NDArray, NDArray, NDArray]:
    """Equal-weight scale mixture (σ_t, σ_r per axis, km/s at 1 M☉) of the velocity difference that unresolved
    inner companions add to a pair in which at least one star has one."""
    mean_logp, sd_logp, max_p_days, baseline_yr, fraction = fraction_key
    n = 4096
    q = _stratified(8, n, seed=2010)
    from scipy.special import ndtr, ndtri

    lo, hi = ndtr((0.0 - mean_logp) / sd_logp), ndtr((math.log10(max_p_days) - mean_logp) / sd_logp)

    def one_star(cols):
        u_p, u_q, u_ci, u_ph, u_node = (q[:, c] for c in cols)
        log_p = mean_logp + sd_logp * ndtri(lo + (hi - lo) * u_p)   # truncated log-normal (Raghavan et al. 2010)
        p_yr = 10**log_p / 365.25
        mq = 0.1 + 0.9 * u_q                                         # mass ratio, uniform
        m_tot = 1.0 + mq
        a = (m_tot * p_yr**2) ** (1 / 3)                             # au; Kepler's third law, M☉, yr
        v_rel = 2 * np.pi * a / p_yr * K                             # km/s, circular
        f, beta = mq / m_tot, mq**4 / (1 + mq**4)
        cos_i, phase, node = 2 * u_ci - 1, 2 * np.pi * u_ph, 2 * np.pi * u_node
        sin_i = np.sqrt(1 - cos_i**2)
        # visible star's RV: its share f of the relative orbital velocity, projected
        v_r = f * v_rel * np.cos(phase) * sin_i
        # photocentre: circle of radius α = a (f − β); its mean velocity over the baseline is the chord / baseline
        alpha = a * np.abs(f - beta)
        half = np.pi * baseline_yr / p_yr
        chord = 2 * alpha * np.abs(np.sin(half))
        # direction of the chord in the orbital plane is perpendicular to the mid-phase radius: project it
        dx, dy = -np.sin(phase), np.cos(phase)
        cn, sn = np.cos(node), np.sin(node)
        sky_x, sky_y = dx * cn - dy * cos_i * sn, dx * sn + dy * cos_i * cn
        v_t = chord / baseline_yr * K * np.hypot(sky_x, sky_y)       # km/s
        return v_t, v_r

    vt1, vr1 = one_star((0, 1, 2, 3, 4))
    vt2, vr2 = one_star((5, 6, 7, 3, 4))
    # a pair with at least one inner companion: one (probability ∝ 2f(1−f)) or both (∝ f²)
    both = q[:, 7] < fraction / (2 - fraction)
    vt = np.where(both, np.hypot(vt1, vt2), vt1)
    vr = np.where(both, np.hypot(vr1, vr2), np.abs(vr1))
    total = np.hypot(vt, vr)
    order = np.argsort(total)
    groups = np.array_split(order, 2)
    sig_t = np.array([math.sqrt(np.mean(vt[g] ** 2) / 2) for g in groups])  # per axis of the plane
    sig_r = np.array([math.sqrt(np.mean(vr[g] ** 2)) for g in groups])
    return np.full(2, 1 / 2), sig_t, sig_r


def inner_mixture(settings) -> tuple[NDArray, NDArray, NDArray]:
    return _inner_mixture((*settings.inner_log10_period_days, settings.inner_max_period_days,
                           settings.astrometric_baseline_yr, settings.inner_fraction))


# ----------------------------------------------------------------------------
# Gaussians on stacked small matrices


def _logpdf2(x0, x1, c00, c01, c11):
    det = c00 * c11 - c01 * c01
    q = (c11 * x0 * x0 - 2 * c01 * x0 * x1 + c00 * x1 * x1) / det
    return -0.5 * q - 0.5 * np.log(det) - math.log(2 * math.pi)


def _logpdf3(x, c):
    """log N(x | 0, c) for x (..., 3) and symmetric c (..., 3, 3), written out (no batched linalg)."""
    a, b, cc = c[..., 0, 0], c[..., 0, 1], c[..., 0, 2]
    d, e, f = c[..., 1, 1], c[..., 1, 2], c[..., 2, 2]
    A, B, C = d * f - e * e, -(b * f - cc * e), b * e - cc * d
    D, E, F = a * f - cc * cc, -(a * e - b * cc), a * d - b * b
    det = a * A + b * B + cc * C
    x0, x1, x2 = x[..., 0], x[..., 1], x[..., 2]
    q = (A * x0 * x0 + D * x1 * x1 + F * x2 * x2 + 2 * (B * x0 * x1 + C * x0 * x2 + E * x1 * x2)) / det
    return -0.5 * q - 0.5 * np.log(det) - 1.5 * math.log(2 * math.pi)


# ----------------------------------------------------------------------------
# Geometry


def _basis(ra_deg: NDArray, dec_deg: NDArray) -> NDArray:
    """Rows ê (east), n̂ (north), r̂ (line of sight) in ICRS Cartesian, shape (n, 3, 3)."""
    a, d = np.radians(ra_deg), np.radians(dec_deg)
    ca, sa, cd, sd = np.cos(a), np.sin(a), np.cos(d), np.sin(d)
    zero = np.zeros_like(a)
    east = np.stack([-sa, ca, zero], -1)
    north = np.stack([-sd * ca, -sd * sa, cd], -1)
    radial = np.stack([cd * ca, cd * sa, sd], -1)
    return np.stack([east, north, radial], -2)


# ----------------------------------------------------------------------------
# The model


def _errors(c: Mapping[str, NDArray], rho: NDArray, settings) -> dict[str, NDArray]:
    """Catalogue errors inflated and floored (the model's error model)."""
    infl = settings.error_inflation * np.where(rho < settings.close_separation_arcsec, settings.close_inflation, 1.0)
    out = {}
    for name, floor in (("parallax_error", settings.parallax_floor_mas), ("pmra_error", settings.pm_floor_masyr),
                        ("pmdec_error", settings.pm_floor_masyr), ("rv_error", settings.rv_floor_kms)):
        for i in "12":
            out[name + i] = np.hypot(c[name + i] * infl, floor)
    return out


def _masses(c: Mapping[str, NDArray]) -> tuple[NDArray, NDArray]:
    """Total mass (M☉) and its uncertainty in ln M, from the members' masses (unknown: 1 M☉, ±0.7 in ln)."""
    parts, var = [], []
    for i in "12":
        m, e = c["mass" + i], c["mass_error" + i]
        known = np.isfinite(m) & (m > 0)
        rel = np.where(np.isfinite(e) & (e >= 0), e / np.where(known, m, 1.0), ESTIMATED_MASS_LN_ERROR)
        parts.append(np.where(known, m, UNKNOWN_MASS_MSUN))
        var.append(np.where(known, (np.where(known, m, 0) * rel) ** 2,
                            (UNKNOWN_MASS_MSUN * UNKNOWN_MASS_LN_ERROR) ** 2))
    total = parts[0] + parts[1]
    return total, np.sqrt(var[0] + var[1]) / total


def evaluate(columns: Mapping[str, NDArray], settings, length_scale_kpc: float) -> dict[str, NDArray]:
    """The pair model for many pairs at once (one pair: arrays of length 1).

    Parameters
    ----------
    columns
        Arrays of one length, keyed by :data:`INPUTS` (missing keys count as NaN): positions
        (deg), parallaxes (mas), proper motions (mas/yr, RA × cos δ) and their correlation,
        RVs (km/s), masses (M☉), ``field_density`` (field stars per deg² at least as bright as
        the fainter star), ``inner1``/``inner2`` (probability that the star hides an unresolved
        companion; NaN: the setting), ``rv_systemic1``/``rv_systemic2`` (1 where the RV is the
        systemic velocity of an orbit) and ``shared_parallax`` (1 where both stars have the one
        parallax of the astrometric solution that does not resolve them: it then carries no
        evidence of association, only the distance).
    settings
        :class:`~dossier.schema.settings.PairModelSettings`.
    length_scale_kpc
        L of the distance prior.

    Returns
    -------
    dict of ndarray, shape (n,)
        ``usable`` (bool: positions, both parallaxes and a field density are known),
        ``log_bound``, ``log_comoving``, ``log_chance`` (natural-log evidences, up to a common
        factor), ``p_bound``, ``p_comoving``, ``p_chance``, ``p_physical``,
        ``p_bound_given_physical``; contributions (log10) ``prior_log10``, ``parallax_log10``,
        ``motion_log10`` (physical : chance; their sum is the log10 odds used) and
        ``binding_prior_log10``, ``binding_motion_log10`` (bound : co-moving); and diagnostics
        ``distance_pc``, ``separation_arcsec``, ``projected_separation_au``, ``circular_speed_kms``,
        ``delta_v_tangential_kms``, ``delta_v_radial_kms`` (perspective-corrected),
        ``sigma_v_tangential_kms`` (per axis), ``has_motion``, ``has_rv``, ``total_mass_msun``.
    """
    from dossier.astro import angles

    n = len(np.atleast_1d(columns["ra1"]))
    c = {k: np.broadcast_to(np.asarray(columns[k], float) if k in columns else np.nan, (n,)).astype(float)
         for k in INPUTS}
    rho, _ = angles.separation_pa(c["ra1"], c["dec1"], c["ra2"], c["dec2"])
    rho = np.asarray(rho, float)
    sigma_field = np.where(np.isfinite(c["field_density"]) & (c["field_density"] > 0), c["field_density"],
                           np.nan if settings.field_density_per_deg2 is None else settings.field_density_per_deg2)
    err = _errors(c, rho, settings)
    usable = (np.isfinite(rho) & (rho > 0) & np.isfinite(sigma_field)
              & np.isfinite(c["parallax1"]) & np.isfinite(c["parallax2"])
              & (err["parallax_error1"] > 0) & (err["parallax_error2"] > 0))
    names = ("log_bound", "log_comoving", "log_chance", "prior_log10", "parallax_log10", "motion_log10",
             "binding_prior_log10", "binding_motion_log10", "distance_pc", "projected_separation_au",
             "circular_speed_kms", "delta_v_tangential_kms", "delta_v_radial_kms", "sigma_v_tangential_kms")
    out = {k: np.full(n, np.nan) for k in names}
    out["usable"] = usable
    out["separation_arcsec"] = rho
    mass, mass_ln_err = _masses(c)
    out["total_mass_msun"] = mass
    has_pm = np.ones(n, bool)
    for i in "12":
        has_pm &= np.isfinite(c["pmra" + i]) & np.isfinite(c["pmdec" + i])
    out["has_motion"] = has_pm
    out["has_rv"] = np.isfinite(c["rv1"]) & np.isfinite(c["rv2"])
    with np.errstate(divide="ignore", invalid="ignore"):
        w1, w2 = 1 / err["parallax_error1"] ** 2, 1 / err["parallax_error2"] ** 2
        frac = (1 / np.sqrt(w1 + w2)) / np.abs((w1 * c["parallax1"] + w2 * c["parallax2"]) / (w1 + w2))
    lower = 0.0
    for upper, nodes in DISTANCE_NODES:
        rows = np.flatnonzero(usable & (frac >= lower) & ~(frac >= upper))
        lower = upper
        for start in range(0, rows.size, BLOCK):
            idx = rows[start:start + BLOCK]
            part = _block({k: v[idx] for k, v in c.items()}, {k: v[idx] for k, v in err.items()}, rho[idx],
                          sigma_field[idx], mass[idx], mass_ln_err[idx], settings, length_scale_kpc, nodes)
            for k, v in part.items():
                out[k][idx] = v
    logs = np.stack([out["log_bound"], out["log_comoving"], out["log_chance"]])
    with np.errstate(invalid="ignore"):
        top = np.max(np.where(np.isfinite(logs), logs, -np.inf), axis=0)
        top = np.where(np.isfinite(top), top, 0.0)
        w = np.exp(logs - top)
        total = w.sum(axis=0)
        p = w / total
        out["p_bound"], out["p_comoving"], out["p_chance"] = p[0], p[1], p[2]
        out["p_physical"] = p[0] + p[1]
        # from the log ratio, so that it stays defined when both physical evidences underflow
        out["p_bound_given_physical"] = 1.0 / (1.0 + np.exp(out["log_comoving"] - out["log_bound"]))
    for k in ("p_bound", "p_comoving", "p_chance", "p_physical", "p_bound_given_physical"):
        out[k] = np.where(usable, out[k], np.nan)
    return out


def _block(c, err, rho, sigma_field, mass, mass_ln_err, settings, L, J) -> dict[str, NDArray]:
    m = rho.size
    qs = (np.arange(J) + 0.5) / J
    p1, p2 = c["parallax1"], c["parallax2"]
    s1, s2 = err["parallax_error1"], err["parallax_error2"]
    w1, w2 = 1 / s1**2, 1 / s2**2
    pbar = (w1 * p1 + w2 * p2) / (w1 + w2)
    sbar = 1 / np.sqrt(w1 + w2)
    rho_rad = np.radians(rho / 3600.0)
    # line-of-sight depth of a physical pair: one projected separation, in parallax at the mean parallax
    depth = np.maximum(pbar, 0.0) * rho_rad
    s_diff = np.sqrt(s1**2 + s2**2 + depth**2)
    eps = settings.outlier_fraction
    log_m = distance.edsd_log_marginal(np.concatenate([pbar, p1, p2]), np.concatenate([sbar, s1, s2]), L)
    log_m_bar, log_m1, log_m2 = log_m[:m], log_m[m:2 * m], log_m[2 * m:]
    d_all = distance.edsd_quantiles(np.concatenate([pbar, p1, p2]), np.concatenate([sbar, s1, s2]), L, q=qs)
    d_bar, d_1, d_2 = d_all[:m], d_all[m:2 * m], d_all[2 * m:]   # kpc, (m, J)
    # physical: one distance, Δϖ within errors and depth; or (chance ε) one parallax is wrong beyond its error
    # bar, and then the two carry no more information than two field stars' would
    log_gauss = -0.5 * ((p1 - p2) / s_diff) ** 2 - np.log(s_diff) - 0.5 * math.log(2 * math.pi)
    phys_common = np.logaddexp(math.log(1 - eps) + log_gauss + log_m_bar, math.log(eps) + log_m1 + log_m2)
    # a close pair inside one astrometric solution: one parallax for both, which says nothing of association
    shared = c["shared_parallax"] == 1
    phys_common = np.where(shared, log_m1, phys_common)
    log_m2 = np.where(shared, 0.0, log_m2)
    parallax_log = phys_common - log_m1 - log_m2

    B1, B2 = _basis(c["ra1"], c["dec1"]), _basis(c["ra2"], c["dec2"])
    mid = B1[:, 2] + B2[:, 2]
    mid /= np.linalg.norm(mid, axis=-1, keepdims=True)
    Bm = _basis(np.degrees(np.arctan2(mid[:, 1], mid[:, 0])), np.degrees(np.arcsin(np.clip(mid[:, 2], -1, 1))))
    weights_f, means_f, covs_f = field_moments(settings)

    has_pm = np.isfinite(c["pmra1"]) & np.isfinite(c["pmdec1"]) & np.isfinite(c["pmra2"]) & np.isfinite(c["pmdec2"])
    has_rv1, has_rv2 = np.isfinite(c["rv1"]), np.isfinite(c["rv2"])
    both_rv = has_rv1 & has_rv2

    # separation priors at the physical distance nodes: per arcsec of ρ, per star
    s_au = rho[:, None] * d_bar * 1000.0                      # (m, J)
    _, ut, ur = orbit_table()
    rate_b, log_dens_b, log_dens_c = _separation_priors(s_au, d_bar, settings)
    dens_f = 2 * np.pi * rho * sigma_field / ARCSEC_PER_DEG2  # per arcsec
    # ... and at the median distance, for the terms reported
    d_med = distance.edsd_quantiles(pbar, sbar, L, q=(0.5,))   # (m, 1) kpc
    s_med = rho[:, None] * d_med * 1000.0
    _, log_dens_b_med, log_dens_c_med = _separation_priors(s_med, d_med, settings)

    # --- velocities (only where both proper motions are known) ---------------------------------
    def star_cov(i):  # 2×2 proper-motion covariance, mas²/yr²
        ea, ed = err["pmra_error" + i], err["pmdec_error" + i]
        r = np.where(np.isfinite(c["pmra_pmdec_corr" + i]), c["pmra_pmdec_corr" + i], 0.0)
        return ea**2, r * ea * ed, ed**2

    v_field_phys = np.zeros((m, J))
    v_field_1 = np.zeros((m, J))
    v_field_2 = np.zeros((m, J))
    log_dv_b = np.zeros((m, J))
    log_dv_c = np.zeros((m, J))
    diag = {k: np.full(m, np.nan) for k in ("dvt", "dvr", "sig", "vc")}
    if has_pm.any():
        C1, C2 = star_cov("1"), star_cov("2")
        # the field's mean radial velocity and its variance in each star's direction (moment-matched mixture)
        mean_all = np.einsum("c,ck->k", weights_f, means_f)
        cov_all = np.einsum("c,ckl->kl", weights_f, covs_f + np.einsum("ck,cl->ckl", means_f - mean_all,
                                                                        means_f - mean_all))
        r1, r2 = B1[:, 2], B2[:, 2]
        field_rv1, field_rv2 = r1 @ mean_all, r2 @ mean_all
        # common radial velocity for the perspective correction: a measured RV, else the field's mean
        u_common = np.where(has_rv1, c["rv1"], np.where(has_rv2, c["rv2"], 0.5 * (field_rv1 + field_rv2)))
        field_var = float(np.trace(cov_all)) / 3                                # per axis, (km/s)²
        u_var = np.where(has_rv1, err["rv_error1"] ** 2, np.where(has_rv2, err["rv_error2"] ** 2,
                                                                   np.einsum("ik,kl,il->i", mid, cov_all, mid)))
        rv1 = np.where(has_rv1, c["rv1"], u_common)
        rv2 = np.where(has_rv2, c["rv2"], u_common)
        kd = K * d_bar                                                           # (m, J) km/s per mas/yr
        pm1 = np.nan_to_num(np.stack([c["pmra1"], c["pmdec1"]], -1))
        pm2 = np.nan_to_num(np.stack([c["pmra2"], c["pmdec2"]], -1))
        # 3-D velocity of each star at its own position, (m, J, 3)
        v1 = kd[..., None] * (pm1[:, None, 0, None] * B1[:, None, 0] + pm1[:, None, 1, None] * B1[:, None, 1]) \
            + rv1[:, None, None] * B1[:, None, 2]
        v2 = kd[..., None] * (pm2[:, None, 0, None] * B2[:, None, 0] + pm2[:, None, 1, None] * B2[:, None, 1]) \
            + rv2[:, None, None] * B2[:, None, 2]
        dv = np.einsum("mkl,mjl->mjk", Bm, v2 - v1)                             # on the mid-point axes
        vbar = np.einsum("mkl,mjl->mjk", Bm, 0.5 * (v1 + v2))
        # measurement covariance of the difference on the sky (km/s)², with the common-RV uncertainty where
        # a star has no RV of its own (its radial velocity was taken from the other star or the field)
        g = np.einsum("mkl,ml->mk", Bm[:, :2], r2 - r1)                          # perspective lever, (m, 2)
        pers_var = np.where(both_rv, 0.0, u_var)
        ct00 = kd**2 * (C1[0] + C2[0])[:, None] + (pers_var * g[:, 0] ** 2)[:, None]
        ct01 = kd**2 * (C1[1] + C2[1])[:, None] + (pers_var * g[:, 0] * g[:, 1])[:, None]
        ct11 = kd**2 * (C1[2] + C2[2])[:, None] + (pers_var * g[:, 1] ** 2)[:, None]
        # (1.0 where there is no radial difference: a placeholder that is never used, but keeps the arithmetic finite)
        cr = np.where(both_rv, err["rv_error1"] ** 2 + err["rv_error2"] ** 2, 1.0)[:, None]
        # Jacobian: four proper-motion components become velocities at (k d)
        log_jac_phys = 4 * np.log(kd)
        # --- the pair's mean velocity under the field distribution -----------------------------
        var_rv_bar = np.where(both_rv, 0.25 * (err["rv_error1"] ** 2 + err["rv_error2"] ** 2),
                              np.where(has_rv1, err["rv_error1"] ** 2, err["rv_error2"] ** 2))
        v_field_phys = _log_field(vbar, Bm, kd, 0.25 * np.array(C1) + 0.25 * np.array(C2), var_rv_bar,
                                  has_rv1 | has_rv2, weights_f, means_f, covs_f) + log_jac_phys
        # --- each star alone in the field (chance), at its own distance nodes -----------------
        for i, (d_i, B_i, pm_i, C_i, rv_ok) in enumerate(((d_1, B1, pm1, C1, has_rv1), (d_2, B2, pm2, C2, has_rv2))):
            kdi = K * d_i
            rv_i = c["rv1" if i == 0 else "rv2"]
            vi = np.stack([kdi * pm_i[:, None, 0], kdi * pm_i[:, None, 1],
                           np.broadcast_to(np.nan_to_num(rv_i)[:, None], kdi.shape)], -1)
            e_rv = err["rv_error1" if i == 0 else "rv_error2"] ** 2
            lf = _log_field(vi, B_i, kdi, np.array(C_i), np.where(rv_ok, e_rv, np.nan), rv_ok,
                            weights_f, means_f, covs_f) + 2 * np.log(kdi)
            if i == 0:
                v_field_1 = lf
            else:
                v_field_2 = lf
        # --- the velocity difference under each physical hypothesis -----------------------------
        mix_w, mix_t, mix_r = inner_mixture(settings)
        f1 = np.where(np.isfinite(c["inner1"]), c["inner1"], settings.inner_fraction)
        f2 = np.where(np.isfinite(c["inner2"]), c["inner2"], settings.inner_fraction)
        p_none = (1 - f1) * (1 - f2)
        radial_share = np.where(both_rv, np.sqrt(0.5 * ((c["rv_systemic1"] != 1).astype(float)
                                                         + (c["rv_systemic2"] != 1).astype(float))), 1.0)
        mscale = (0.5 * mass) ** (1 / 3)                                         # velocities ∝ m^(1/3) at fixed P
        comps_w = [(1 - eps) * p_none] + [(1 - eps) * (1 - p_none) * w for w in mix_w]
        comps_t = [np.zeros(m)] + [mscale * s for s in mix_t]
        comps_r = [np.zeros(m)] + [mscale * s * radial_share for s in mix_r]
        vc = np.sqrt(binary.GM_SUN_M3_S2 * mass[:, None] / (s_au * 1.495978707e11)) / 1000.0   # km/s (m, J)
        dvt = np.hypot(dv[..., 0], dv[..., 1])
        dvr = dv[..., 2]
        logw_b = _orbit_log_weights(rate_b)
        g2 = settings.comoving_dispersion_kms**2

        def gaussian_difference(extra_t2, extra_r2):  # Δv ~ N(0, errors + extra) on the sky and along the line of sight
            lg = _logpdf2(dv[..., 0], dv[..., 1], ct00 + extra_t2, ct01, ct11 + extra_t2)
            var = cr + extra_r2
            return lg + np.where(both_rv[:, None], -0.5 * dvr**2 / var - 0.5 * np.log(2 * np.pi * var), 0.0)

        lb, lc = [], []
        for wgt, st, sr in zip(comps_w, comps_t, comps_r):
            lw = np.log(np.maximum(wgt, 1e-300))[:, None]
            lc.append(lw + gaussian_difference(g2 + (st**2)[:, None], g2 + (sr**2)[:, None]))
            sig_t2 = 0.5 * (ct00 + ct11) + (st**2)[:, None]                     # isotropic per-axis variance
            lb.append(lw + _log_bound(dvt, dvr, sig_t2, cr + (sr**2)[:, None], vc, mass_ln_err, ut, ur, logw_b,
                                      both_rv))
        # a wrong measurement (a blend, a mismatch): the difference is then as broad as the field's
        outlier = math.log(eps) + gaussian_difference(field_var, field_var)
        lb.append(outlier)
        lc.append(outlier)
        log_dv_b = _lse(np.stack(lb), axis=0)
        log_dv_c = _lse(np.stack(lc), axis=0)
        diag["dvt"] = np.median(dvt, axis=1)
        diag["dvr"] = np.where(both_rv, np.median(dvr, axis=1), np.nan)
        diag["sig"] = np.median(np.sqrt(0.5 * (ct00 + ct11)), axis=1)
        diag["vc"] = np.median(vc, axis=1)
        keep = has_pm[:, None]
        v_field_phys = np.where(keep, v_field_phys, 0.0)
        v_field_1, v_field_2 = np.where(keep, v_field_1, 0.0), np.where(keep, v_field_2, 0.0)
        log_dv_b, log_dv_c = np.where(keep, log_dv_b, 0.0), np.where(keep, log_dv_c, 0.0)

    # --- assemble: average over the distance nodes (equal-probability points of each posterior) -----
    logJ = math.log(J)
    log_bound = phys_common + _lse(log_dens_b + v_field_phys + log_dv_b, axis=1) - logJ
    log_comoving = phys_common + _lse(log_dens_c + v_field_phys + log_dv_c, axis=1) - logJ
    log_chance = (np.log(dens_f) + log_m1 + _lse(v_field_1, axis=1) - logJ
                  + log_m2 + _lse(v_field_2, axis=1) - logJ)
    # contributions as used: separation prior at the median distance, parallaxes, and the rest
    prior = np.logaddexp(log_dens_b_med[:, 0], log_dens_c_med[:, 0]) - np.log(dens_f)
    log_phys = np.logaddexp(log_bound, log_comoving)
    total = log_phys - log_chance
    bprior = log_dens_b_med[:, 0] - log_dens_c_med[:, 0]
    bind_total = log_bound - log_comoving
    return {
        "log_bound": log_bound, "log_comoving": log_comoving, "log_chance": log_chance,
        "prior_log10": prior / LN10, "parallax_log10": parallax_log / LN10,
        "motion_log10": (total - prior - parallax_log) / LN10,
        "binding_prior_log10": bprior / LN10,
        "binding_motion_log10": (bind_total - bprior) / LN10,
        "distance_pc": 1000.0 * d_med[:, 0],
        "projected_separation_au": s_med[:, 0],
        "circular_speed_kms": diag["vc"], "delta_v_tangential_kms": diag["dvt"],
        "delta_v_radial_kms": diag["dvr"], "sigma_v_tangential_kms": diag["sig"],
    }


def _separation_priors(s_au: NDArray, d_kpc: NDArray, settings) -> tuple[NDArray, NDArray, NDArray]:
    """At projected separations s (au) and distances d (kpc), shape (m, J): the bound prior at each tabulated
    orbit's a = s/ξ, (m, J, K), and ln of the bound and co-moving companion densities per arcsec of ρ."""
    xi, _, _ = orbit_table()
    rate_b = bound_rate(s_au[..., None] / xi, settings)              # dN/dlog10 a at a = s/ξ
    d_pc = d_kpc * 1000.0
    dens_b = rate_b.mean(-1) / (s_au * LN10) * d_pc                  # per au of s, times ds/dρ = d
    dens_c = comoving_rate(s_au[..., None] / projection_table(), settings).mean(-1) / (s_au * LN10) * d_pc
    with np.errstate(divide="ignore"):
        return rate_b, np.log(dens_b), np.log(dens_c)


def _log_field(v, B, kd, C_pm, var_rv, rv_ok, weights, means, covs) -> NDArray:
    """ln of the field's velocity density at observed velocities v (m, J, 3) seen along basis B (m, 3, 3),
    with proper-motion covariance C_pm (3 entries, mas²/yr², (m,)) scaled by (k d)² and RV variance; the
    radial coordinate is used only where ``rv_ok``."""
    C_pm = np.asarray(C_pm)
    out = []
    for w, mu, S in zip(weights, means, covs):
        mean_loc = np.einsum("mkl,l->mk", B, mu)                                # (m, 3)
        cov_loc = np.einsum("mkl,ln,mpn->mkp", B, S, B)                         # (m, 3, 3)
        x = v - mean_loc[:, None, :]
        cov = np.broadcast_to(cov_loc[:, None], x.shape[:2] + (3, 3)).copy()
        kd2 = kd**2
        cov[..., 0, 0] += kd2 * C_pm[0][:, None]
        cov[..., 0, 1] += kd2 * C_pm[1][:, None]
        cov[..., 1, 0] += kd2 * C_pm[1][:, None]
        cov[..., 1, 1] += kd2 * C_pm[2][:, None]
        cov[..., 2, 2] += np.where(rv_ok, np.nan_to_num(var_rv), 0.0)[:, None]
        l3 = _logpdf3(x, cov)
        l2 = _logpdf2(x[..., 0], x[..., 1], cov[..., 0, 0], cov[..., 0, 1], cov[..., 1, 1])
        out.append(math.log(w) + np.where(rv_ok[:, None], l3, l2))
    return _lse(np.stack(out), axis=0)


def _orbit_log_weights(rate: NDArray) -> NDArray:
    """ln of each tabulated orbit's normalised weight (the semimajor-axis prior at a = s/ξ), (m, J, K)."""
    wsum = rate.sum(-1, keepdims=True)
    with np.errstate(divide="ignore", invalid="ignore"):
        # no tabulated orbit has a semimajor axis the prior allows: the bound hypothesis has no weight here
        return np.where(wsum > 0, np.log(rate) - np.log(np.where(wsum > 0, wsum, 1.0)), -np.inf)


def _log_bound(dvt, dvr, sig_t2, var_r, vc, mass_ln_err, ut, ur, logw, both_rv) -> NDArray:
    """ln p(Δv | bound) at each distance node: the tabulated orbits, weighted by the semimajor-axis prior at
    a = s/ξ (``logw``), each smoothed by a Gaussian (kernel width, mass uncertainty) and convolved with the
    errors. Tangential part: the 2-D isotropic Gaussian about a ring (Rice density); radial: a Gaussian."""
    from scipy.special import i0e

    speed_t = ut * vc[..., None]                                                 # (m, J, K)
    smooth = (ORBIT_BANDWIDTH * vc[..., None]) ** 2
    mass_w = (0.5 * mass_ln_err[:, None, None]) ** 2
    s2 = sig_t2[..., None] + smooth + mass_w * speed_t**2
    d = dvt[..., None]
    # −(D² + S²)/(2s²) + ln I0(DS/s²) = −(D − S)²/(2s²) + ln i0e(DS/s²)
    log_t = -(d - speed_t) ** 2 / (2 * s2) + np.log(i0e(d * speed_t / s2) / (2 * np.pi * s2))
    if both_rv.any():
        speed_r = ur * vc[..., None]
        sr2 = var_r[..., None] + smooth + mass_w * speed_r**2
        # each tabulated orbit and its mirror image (the line-of-sight speed of either sign), so that the
        # likelihood is even in Δv_r and swapping the stars changes nothing
        x = dvr[..., None]
        log_r = np.logaddexp(-0.5 * (x - speed_r) ** 2 / sr2, -0.5 * (x + speed_r) ** 2 / sr2) \
            - 0.5 * np.log(2 * np.pi * sr2) - math.log(2.0)
        log_t = log_t + np.where(both_rv[:, None, None], log_r, 0.0)
    return _lse(logw + log_t, axis=-1)


def _lse(a: NDArray, axis: int) -> NDArray:
    """log Σ exp along an axis (max-shifted; −inf where every term is −inf)."""
    top = np.max(a, axis=axis, keepdims=True)
    top = np.where(np.isfinite(top), top, 0.0)
    with np.errstate(divide="ignore"):
        return np.log(np.sum(np.exp(a - top), axis=axis)) + np.squeeze(top, axis=axis)
