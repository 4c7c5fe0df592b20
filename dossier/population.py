"""A synthetic population of candidate pairs with known truth, for calibration.

The population is drawn from the priors of ``[pair_model]``
(:class:`dossier.schema.settings.PairModelSettings`) by code written apart
from the pair model itself: it shares the settings, never the kernels. Its
projections of space velocities into proper motions and radial velocities go
through astropy's frames, not through a closed form of our own.

What is simulated
-----------------
Primaries
    Positions uniform on the whole sphere; distances from the exponentially
    decreasing space density prior p(r) ∝ r² exp(−r/L) (Bailer-Jones 2015,
    PASP 127, 994), i.e. a gamma distribution of shape 3 and scale L; masses
    from a Salpeter initial mass function dN/dm ∝ m^−2.35 (Salpeter 1955,
    ApJ 121, 161) truncated to 0.5–2.5 Msun; heliocentric velocities from
    the field: −(solar motion) + (0, asymmetric drift, 0) + a Gaussian of
    the component's dispersions in Galactic (U, V, W), the component chosen
    with the normalised ``field_components`` fractions.
Companions, as Poisson processes per primary
    *bound*: dN/dlog10 a from the ``bound_*`` rates, with their tapers
    (a/min)^4 below ``bound_min_au`` and (a/max)^−4 beyond ``bound_max_au``;
    a Keplerian orbit with a thermal eccentricity distribution f(e) = 2e
    (Jeans 1919, MNRAS 79, 408), isotropic orientation and uniform mean
    anomaly; mass ratio uniform in [0.1, 1].
    *co-moving*: dN/dlog10 s from the ``comoving_*`` rates, with (s/scale)^3
    below ``comoving_scale_au`` and the taper (s/max)^−4 beyond
    ``comoving_max_au``; isotropic offset; velocity that of the primary plus
    a Gaussian of ``comoving_dispersion_kms`` per axis.
    *chance*: field stars uniform in area between ``rho_min_arcsec`` and
    ``rho_max_arcsec`` at a field density drawn per primary, log-uniform in
    ``field_density_range``; each with its own distance, mass and velocity
    from the same priors as a primary.
Unresolved inner companions
    Each star with probability ``inner_fraction``: log10 P (days) normal,
    truncated to 1 d ≤ P ≤ ``inner_max_period_days``; q uniform in [0.1, 1];
    circular orbit, isotropic orientation, random phase. The radial velocity
    is the visible star's at the epoch; the proper motion is the mean motion
    of the photocentre over ``astrometric_baseline_yr`` (photocentre offset
    α = a (f − β), f mass fraction, β light fraction with L ∝ M⁴, common
    practice). The hidden star's mass counts in the wide orbit's dynamics
    and its light in the magnitude, but ``mass1``/``mass2`` report the
    visible star only.
Measurement errors (common practice, magnitude-dependent)
    Absolute magnitude 4.83 − 2.5 log10 ΣM⁴ (L ∝ M⁴); σϖ = 0.02 mas ×
    10^(0.2 (mag − 12)), at least 0.015 mas; σμ = 1.1 σϖ per axis (mas/yr)
    with a correlation uniform in [−0.3, 0.3]; RV with probability 0.6 for
    mag < 13, σ = 0.3 km/s × 10^(0.2 (mag − 10)), at least 0.2 km/s; mass
    reported with a lognormal scatter of 10 % and an error of 10 %. The
    noise added is the catalogue error times ``error_inflation``, combined
    in quadrature with the floors, and times ``close_inflation`` below
    ``close_separation_arcsec`` (El-Badry, Rix & Heintz 2021, MNRAS 506,
    2269); the columns report the catalogue error alone.
Preselection
    A pair is kept only if |ϖ1 − ϖ2| < ``preselect_sigma`` × √(σ1² + σ2²)
    with the reported errors, as a candidate search would.

A primary is one star: its position, velocity, hidden companion and
measurement noise are the same in every pair it belongs to, except that in
a bound pair it moves about that pair's barycentre (the field velocity drawn
for the primary is the barycentre's).
"""

from __future__ import annotations

import functools
import math
from typing import Any

import numpy as np

from dossier.schema.settings import PairModelSettings

#: The true classes, in the order rows of one primary are listed.
CLASSES: tuple[str, ...] = ("bound", "co-moving", "chance")

#: Salpeter 1955, ApJ 121, 161: dN/dm ∝ m^-2.35, truncated to this range (Msun).
IMF_SLOPE = 2.35
IMF_RANGE_MSUN = (0.5, 2.5)
#: Mass ratio range of companions, wide and inner (uniform).
Q_RANGE = (0.1, 1.0)
#: Absolute magnitude of the Sun (common practice), with L ∝ M⁴ on the main sequence.
SUN_ABS_MAG = 4.83
#: Error model (common practice): parallax error at magnitude 12 and its floor (mas).
PARALLAX_ERROR_AT_12_MAS = 0.02
PARALLAX_ERROR_MIN_MAS = 0.015
PM_PER_PARALLAX_ERROR = 1.1
RV_FRACTION = 0.6
RV_MAG_LIMIT = 13.0
RV_ERROR_AT_10_KMS = 0.3
RV_ERROR_MIN_KMS = 0.2
PM_CORR_MAX = 0.3
MASS_SCATTER = 0.10
DAYS_PER_YEAR = 365.25  # Julian year, as astropy's ``u.yr``


@functools.cache
def _constants() -> tuple[float, float, float]:
    """G (au³ Msun⁻¹ yr⁻²), km/s per au/yr and pc per au, from astropy."""
    import astropy.constants as const
    import astropy.units as u

    g_au = float(const.G.to_value(u.au**3 / u.Msun / u.yr**2))
    kms_per_au_yr = float((1.0 * u.au / u.yr).to_value(u.km / u.s))
    pc_per_au = float(u.au.to(u.pc))
    return g_au, kms_per_au_yr, pc_per_au


# --------------------------------------------------------------------------- rates

def _segments(kind: str, s: PairModelSettings) -> list[tuple[float, float, float, float]]:
    """The prior dN/dlog10 x of one kind of companion as pieces (x0, x1, k, c) in x = log10(au).

    On a piece the rate is c · 10^(k (x − x_ref)) per decade, with x_ref = x0,
    or x1 when x0 is −∞; every piece is continuous with its neighbours.
    """
    if kind == "bound":
        lo, br, hi = math.log10(s.bound_min_au), math.log10(s.bound_break_au), math.log10(s.bound_max_au)
        if not lo <= br <= hi:
            raise ValueError(
                f"[pair_model] needs bound_min_au ≤ bound_break_au ≤ bound_max_au, got {s.bound_min_au}, "
                f"{s.bound_break_au}, {s.bound_max_au}. Fix: reorder the three semimajor axes.")
        r, k = s.bound_rate_per_decade, s.bound_slope
        return [(-math.inf, lo, 4.0, r), (lo, br, 0.0, r), (br, hi, k, r),
                (hi, math.inf, -4.0, r * 10.0 ** (k * (hi - br)))]
    if kind == "co-moving":
        sc, hi = math.log10(s.comoving_scale_au), math.log10(s.comoving_max_au)
        if not sc <= hi:
            raise ValueError(
                f"[pair_model] needs comoving_scale_au ≤ comoving_max_au, got {s.comoving_scale_au}, "
                f"{s.comoving_max_au}. Fix: make comoving_max_au the larger.")
        r = s.comoving_rate_per_decade
        return [(-math.inf, sc, 3.0, r), (sc, hi, 0.0, r), (hi, math.inf, -4.0, r)]
    raise ValueError(f"unknown companion kind {kind!r}. Fix: use 'bound' or 'co-moving'.")


def _segment_weight(x0: float, x1: float, k: float, c: float) -> float:
    """Expected number of companions on one piece (the integral over log10 x)."""
    if math.isinf(x0):
        return c / (k * math.log(10.0))
    if math.isinf(x1):
        return c / (-k * math.log(10.0))
    if k == 0.0:
        return c * (x1 - x0)
    return c * (10.0 ** (k * (x1 - x0)) - 1.0) / (k * math.log(10.0))


def _segment_sample(x0: float, x1: float, k: float, u: np.ndarray) -> np.ndarray:
    """Inverse-CDF draws of log10 x on one piece from uniforms ``u`` in (0, 1]."""
    t = k * math.log(10.0)
    if math.isinf(x0):
        return x1 + np.log(u) / t
    if math.isinf(x1):
        return x0 + np.log(u) / t
    if k == 0.0:
        return x0 + (1.0 - u) * (x1 - x0)
    return x0 + np.log1p((1.0 - u) * math.expm1(t * (x1 - x0))) / t


def expected_companions_per_primary(settings: PairModelSettings | None = None, *, rho_min_arcsec: float = 1.0,
                                    rho_max_arcsec: float = 300.0,
                                    field_density_range: tuple[float, float] = (50.0, 3000.0)) -> dict[str, float]:
    """Expected number of companions per primary before any cut, from the priors integrated analytically.

    Parameters
    ----------
    settings
        The priors; the defaults when None.
    rho_min_arcsec, rho_max_arcsec
        Annulus (arcsec) in which chance neighbours are drawn.
    field_density_range
        Range (stars per square degree) of the log-uniform field density.

    Returns
    -------
    dict
        ``"bound"`` and ``"co-moving"``: the rate integrated over all log10 a
        (or s), tapers included; ``"chance"``: π (ρmax² − ρmin²) ⟨Σ⟩ with
        the mean of the log-uniform density.
    """
    s = settings or PairModelSettings()
    out = {kind: sum(_segment_weight(*seg) for seg in _segments(kind, s)) for kind in ("bound", "co-moving")}
    lo, hi = field_density_range
    mean_density = lo if hi == lo else (hi - lo) / math.log(hi / lo)
    out["chance"] = _annulus_deg2(rho_min_arcsec, rho_max_arcsec) * mean_density
    return out


def _annulus_deg2(rho_min_arcsec: float, rho_max_arcsec: float) -> float:
    """Area (deg²) of the annulus in the flat-sky approximation (exact to (ρ/rad)² ~ 1e-6 at 300″)."""
    return math.pi * (rho_max_arcsec**2 - rho_min_arcsec**2) / 3600.0**2


def draw_companions(rng: np.random.Generator, n_primaries: int,
                    settings: PairModelSettings) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """Draw the bound and co-moving companions of every primary from the priors, before any cut.

    Parameters
    ----------
    rng
        The random generator (consumed).
    n_primaries
        Number of primaries.
    settings
        The priors.

    Returns
    -------
    dict
        ``"bound"``: (primary index, semimajor axis in au); ``"co-moving"``:
        (primary index, 3-D separation in au). Indices ascending.
    """
    out: dict[str, tuple[np.ndarray, np.ndarray]] = {}
    for kind in ("bound", "co-moving"):
        segs = _segments(kind, settings)
        weights = np.array([_segment_weight(*seg) for seg in segs])
        counts = rng.poisson(weights.sum(), n_primaries)
        owner = np.repeat(np.arange(n_primaries), counts)
        piece = rng.choice(len(segs), size=owner.size, p=weights / weights.sum())
        u = 1.0 - rng.random(owner.size)  # in (0, 1]
        x = np.empty(owner.size)
        for j, (x0, x1, k, _) in enumerate(segs):
            sel = piece == j
            x[sel] = _segment_sample(x0, x1, k, u[sel])
        out[kind] = (owner, 10.0**x)
    return out


# --------------------------------------------------------------------------- stars

def _unit_vectors(rng: np.random.Generator, n: int) -> np.ndarray:
    """Isotropic unit vectors, shape (3, n)."""
    z = rng.uniform(-1.0, 1.0, n)
    phi = rng.uniform(0.0, 2.0 * math.pi, n)
    rxy = np.sqrt(1.0 - z**2)
    return np.array([rxy * np.cos(phi), rxy * np.sin(phi), z])


def _draw_masses(rng: np.random.Generator, n: int) -> np.ndarray:
    """Masses (Msun) from the truncated Salpeter IMF, by inverse CDF."""
    p = 1.0 - IMF_SLOPE
    lo, hi = IMF_RANGE_MSUN[0] ** p, IMF_RANGE_MSUN[1] ** p
    return (lo + rng.random(n) * (hi - lo)) ** (1.0 / p)


def _draw_distances_pc(rng: np.random.Generator, n: int, length_scale_kpc: float) -> np.ndarray:
    """Distances (pc) from p(r) ∝ r² exp(−r/L): a gamma distribution of shape 3, scale L (Bailer-Jones 2015)."""
    return rng.gamma(3.0, 1000.0 * length_scale_kpc, n)


def draw_field_velocities(rng: np.random.Generator, n: int, settings: PairModelSettings) -> np.ndarray:
    """Heliocentric velocities of field stars in Galactic Cartesian (U, V, W), km/s, shape (3, n).

    U points to the Galactic centre, V in the direction of rotation, W to the
    north Galactic pole. Each star: −solar motion + (0, asymmetric drift, 0)
    + Gaussian(σU, σV, σW) of a component drawn with the normalised
    fractions (Schönrich, Binney & Dehnen 2010, MNRAS 403, 1829; Bensby,
    Feltzing & Lundström 2003, A&A 410, 527).
    """
    comps = settings.field_components
    frac = np.array([c.fraction for c in comps], float)
    which = rng.choice(len(comps), size=n, p=frac / frac.sum())
    sigma = np.array([[c.sigma_u_kms, c.sigma_v_kms, c.sigma_w_kms] for c in comps])[which].T
    drift = np.array([c.asymmetric_drift_kms for c in comps])[which]
    v = rng.normal(size=(3, n)) * sigma
    v -= np.asarray(settings.solar_motion_kms, float)[:, None]
    v[1] += drift
    return v


def _draw_inner(rng: np.random.Generator, m_vis: np.ndarray, s: PairModelSettings) -> dict[str, np.ndarray]:
    """Hidden inner companions of stars of visible mass ``m_vis`` (Msun); zero mass where there is none."""
    from scipy.special import ndtr, ndtri

    n = m_vis.size
    has = rng.random(n) < s.inner_fraction
    q = rng.uniform(*Q_RANGE, n)
    mu, sd = s.inner_log10_period_days
    lo, hi = ndtr((0.0 - mu) / sd), ndtr((math.log10(s.inner_max_period_days) - mu) / sd)
    log_p = mu + sd * ndtri(lo + rng.random(n) * (hi - lo))  # truncated normal, by inverse CDF
    normal = _unit_vectors(rng, n)
    phase = rng.uniform(0.0, 2.0 * math.pi, n)
    return {"has": has, "m_in": np.where(has, q * m_vis, 0.0), "period_yr": 10.0**log_p / DAYS_PER_YEAR,
            "normal": normal, "phase": phase}


def _inner_motion(inner: dict[str, np.ndarray], m_vis: np.ndarray, baseline_yr: float) -> tuple[np.ndarray, np.ndarray]:
    """Velocity perturbations (km/s, (3, n)) from the hidden companion: photocentre mean over the baseline, and the
    visible star's velocity at the epoch (the middle of the baseline)."""
    g_au, kms, _ = _constants()
    m_in, period = inner["m_in"], inner["period_yr"]
    mass = m_vis + m_in
    a = np.cbrt(g_au * mass * period**2 / (4.0 * math.pi**2))  # Kepler's third law (au)
    f = m_in / mass
    beta = m_in**4 / (m_vis**4 + m_in**4)  # light fraction, L ∝ M⁴ (common practice)
    nrm = inner["normal"]
    # an orthonormal basis (p, q) of the orbital plane; the random phase makes the choice immaterial
    ref = np.zeros_like(nrm)  # the pole, or the x axis for normals near the pole
    near_pole = np.abs(nrm[2]) >= 0.9
    ref[2, ~near_pole], ref[0, near_pole] = 1.0, 1.0
    p = np.cross(nrm, ref, axis=0)
    p /= np.linalg.norm(p, axis=0)
    q = np.cross(nrm, p, axis=0)
    omega = 2.0 * math.pi / period  # rad/yr
    phi0 = inner["phase"]

    def rel(phi: np.ndarray) -> np.ndarray:  # companion relative to the visible star (au)
        return a * (np.cos(phi) * p + np.sin(phi) * q)

    half = 0.5 * omega * baseline_yr
    photo_shift = -(f - beta) * (rel(phi0 + half) - rel(phi0 - half))  # photocentre = −(f − β) r_rel
    v_photo = photo_shift / baseline_yr * kms
    v_vis = -f * a * omega * (-np.sin(phi0) * p + np.cos(phi0) * q) * kms  # visible star = −f r_rel
    return v_photo, v_vis


def _draw_noise(rng: np.random.Generator, n: int) -> dict[str, np.ndarray]:
    """Standard-normal noise and the per-star random choices of the error model."""
    return {"z_plx": rng.normal(size=n), "z_pm": rng.normal(size=(2, n)), "z_rv": rng.normal(size=n),
            "corr": rng.uniform(-PM_CORR_MAX, PM_CORR_MAX, n), "rv_draw": rng.random(n),
            "z_mass": rng.normal(size=n)}


def _magnitude(m_vis: np.ndarray, m_in: np.ndarray, distance_pc: np.ndarray) -> np.ndarray:
    """Apparent magnitude from the light of both stars, L ∝ M⁴, M_sun = 4.83 (common practice)."""
    return SUN_ABS_MAG - 2.5 * np.log10(m_vis**4 + m_in**4) + 5.0 * np.log10(distance_pc / 10.0)


def _catalogue_errors(mag: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Reported errors: parallax (mas), proper motion per axis (mas/yr), RV (km/s)."""
    plx = np.maximum(PARALLAX_ERROR_AT_12_MAS * 10.0 ** (0.2 * (mag - 12.0)), PARALLAX_ERROR_MIN_MAS)
    rv = np.maximum(RV_ERROR_AT_10_KMS * 10.0 ** (0.2 * (mag - 10.0)), RV_ERROR_MIN_KMS)
    return plx, PM_PER_PARALLAX_ERROR * plx, rv


def _noise_scale(reported: np.ndarray, floor: float, rho_arcsec: np.ndarray, s: PairModelSettings) -> np.ndarray:
    """Standard deviation of the noise actually added: inflated catalogue error ⊕ floor, × close-pair factor."""
    close = np.where(rho_arcsec < s.close_separation_arcsec, s.close_inflation, 1.0)
    return np.hypot(s.error_inflation * reported, floor) * close


# --------------------------------------------------------------------------- geometry (astropy)

def _galactic_xyz(ra_deg: np.ndarray, dec_deg: np.ndarray, distance_pc: np.ndarray) -> np.ndarray:
    """Heliocentric Galactic Cartesian position (pc, (3, n)) of ICRS positions, via astropy."""
    import astropy.units as u
    from astropy.coordinates import SkyCoord

    c = SkyCoord(ra=ra_deg * u.deg, dec=dec_deg * u.deg, distance=distance_pc * u.pc, frame="icrs")
    return c.galactic.cartesian.xyz.to_value(u.pc)


def _sky(xyz_pc: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """ICRS (ra, dec) in deg and distance in pc of Galactic Cartesian positions, via astropy."""
    import astropy.units as u
    from astropy.coordinates import SkyCoord

    c = SkyCoord(u=xyz_pc[0] * u.pc, v=xyz_pc[1] * u.pc, w=xyz_pc[2] * u.pc, frame="galactic",
                 representation_type="cartesian").icrs
    return c.ra.deg, c.dec.deg, c.distance.to_value(u.pc)


def _project(xyz_pc: np.ndarray, v_kms: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Proper motion (mas/yr, RA × cos δ) and RV (km/s) of a Galactic Cartesian velocity at its position (astropy).

    Each star's own position is used, so perspective is included.
    """
    import astropy.units as u
    from astropy.coordinates import SkyCoord

    kms = u.km / u.s
    c = SkyCoord(u=xyz_pc[0] * u.pc, v=xyz_pc[1] * u.pc, w=xyz_pc[2] * u.pc,
                 U=v_kms[0] * kms, V=v_kms[1] * kms, W=v_kms[2] * kms, frame="galactic",
                 representation_type="cartesian", differential_type="cartesian").icrs  # ICRS: spherical, cos-lat
    return (c.pm_ra_cosdec.to_value(u.mas / u.yr), c.pm_dec.to_value(u.mas / u.yr),
            c.radial_velocity.to_value(kms))


def _separation_arcsec(ra1: np.ndarray, dec1: np.ndarray, ra2: np.ndarray, dec2: np.ndarray) -> np.ndarray:
    """Angular separation (arcsec), astropy's Vincenty formula."""
    from astropy.coordinates import angular_separation

    return np.degrees(angular_separation(np.radians(ra1), np.radians(dec1), np.radians(ra2),
                                         np.radians(dec2))) * 3600.0


def draw_orbit_elements(rng: np.random.Generator, n: int) -> dict[str, np.ndarray]:
    """Eccentricity, orientation and phase of wide orbits.

    Eccentricity thermal, f(e) = 2e (Jeans 1919, MNRAS 79, 408): e = √u;
    orientation isotropic (cos i uniform in [−1, 1], Ω and ω uniform); mean
    anomaly uniform. Angles in radians.
    """
    e = np.sqrt(rng.random(n))
    cos_i = rng.uniform(-1.0, 1.0, n)
    node = rng.uniform(0.0, 2.0 * math.pi, n)
    peri = rng.uniform(0.0, 2.0 * math.pi, n)
    mean_anomaly = rng.uniform(0.0, 2.0 * math.pi, n)
    return {"e": e, "cos_i": cos_i, "node": node, "peri": peri, "mean_anomaly": mean_anomaly}


def solve_kepler(mean_anomaly: np.ndarray, e: np.ndarray, tol: float = 1e-13) -> np.ndarray:
    """Eccentric anomaly E from E − e sin E = M by Newton's method (radians).

    Starting at E = π converges for every e < 1 and M in [0, 2π)
    (Charles & Tatum 1998, CeMDA 69, 357).
    """
    m = np.mod(mean_anomaly, 2.0 * math.pi)
    big_e = np.full_like(m, math.pi)
    for _ in range(100):
        step = (big_e - e * np.sin(big_e) - m) / (1.0 - e * np.cos(big_e))
        big_e -= step
        if np.all(np.abs(step) < tol):
            break
    return big_e


def keplerian_state(a_au: np.ndarray, elements: dict[str, np.ndarray],
                    total_mass_msun: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Relative position (au) and velocity (km/s), shape (3, n), of the secondary about the primary.

    Parameters
    ----------
    a_au
        Semimajor axis of the relative orbit (au).
    elements
        From :func:`draw_orbit_elements`.
    total_mass_msun
        m1 + m2 (Msun), hidden companions included.

    Notes
    -----
    Mean motion n = √(G M / a³) with astropy's G; the orbit is rotated by
    Rz(Ω) Rx(i) Rz(ω) into the Galactic Cartesian axes (the orientation is
    isotropic, so any fixed axes would do).
    """
    g_au, kms, _ = _constants()
    e = elements["e"]
    big_e = solve_kepler(elements["mean_anomaly"], e)
    n_rad_yr = np.sqrt(g_au * total_mass_msun / a_au**3)
    cos_e, sin_e = np.cos(big_e), np.sin(big_e)
    root = np.sqrt(1.0 - e**2)
    x, y = a_au * (cos_e - e), a_au * root * sin_e
    rate = a_au * n_rad_yr / (1.0 - e * cos_e)  # au/yr
    vx, vy = -rate * sin_e, rate * root * cos_e
    cw, sw = np.cos(elements["peri"]), np.sin(elements["peri"])
    co, so = np.cos(elements["node"]), np.sin(elements["node"])
    ci = elements["cos_i"]
    si = np.sqrt(1.0 - ci**2)
    p_hat = np.array([co * cw - so * sw * ci, so * cw + co * sw * ci, sw * si])
    q_hat = np.array([-co * sw - so * cw * ci, -so * sw + co * cw * ci, cw * si])
    return x * p_hat + y * q_hat, (vx * p_hat + vy * q_hat) * kms


# --------------------------------------------------------------------------- the population

def draw_population(n_primaries: int, seed: int, settings: PairModelSettings | None = None, *,
                    length_scale_kpc: float = 0.25, rho_min_arcsec: float = 1.0, rho_max_arcsec: float = 300.0,
                    preselect_sigma: float = 5.0, field_density_range: tuple[float, float] = (50.0, 3000.0)
                    ) -> dict[str, np.ndarray]:
    """Draw candidate pairs of known truth from the priors of the pair model.

    Parameters
    ----------
    n_primaries
        Number of primary stars (each brings its companions and chance neighbours).
    seed
        Seed of ``numpy.random.default_rng``: same seed, same population.
    settings
        The priors (``[pair_model]``); the defaults when None.
    length_scale_kpc
        L of the distance prior p(r) ∝ r² exp(−r/L) (kpc).
    rho_min_arcsec, rho_max_arcsec
        Pairs are kept with rho_min ≤ ρ ≤ rho_max (arcsec).
    preselect_sigma
        Keep a pair only if |ϖ1 − ϖ2| < this × √(σ1² + σ2²) (reported errors);
        ``math.inf`` keeps every pair.
    field_density_range
        Range of the field density (stars per square degree), log-uniform per primary.

    Returns
    -------
    dict of str to numpy.ndarray
        One row per pair, star 1 the primary. Input columns of ``dossier
        screen`` (deg, mas, mas/yr with RA × cos δ, km/s, mag, Msun; RV and
        its error NaN where a star has none), ``field_density`` (deg⁻²), and
        truth: ``true_class``, ``true_inner1/2``, ``true_distance1/2_pc``,
        ``true_semimajor_au`` (NaN unless bound), ``true_eccentricity`` (NaN
        unless bound), ``true_total_mass_msun`` (both stars with their hidden
        companions), ``true_u1_kms`` … ``true_w2_kms`` (each star's velocity,
        the barycentre of its inner pair, heliocentric Galactic, km/s),
        ``true_pmra1`` … ``true_rv2`` (noise-free observables, hidden
        companions' effect included) and ``true_primary`` (index of the
        primary: rows that share a star).
    """
    if n_primaries < 1:
        raise ValueError(f"n_primaries must be at least 1, got {n_primaries}. Fix: ask for one or more primaries.")
    if not 0.0 <= rho_min_arcsec < rho_max_arcsec:
        raise ValueError(f"need 0 ≤ rho_min_arcsec < rho_max_arcsec, got {rho_min_arcsec}, {rho_max_arcsec}. "
                         "Fix: swap or correct them.")
    if not length_scale_kpc > 0.0:
        raise ValueError(f"length_scale_kpc must be positive, got {length_scale_kpc}. Fix: give a length in kpc.")
    lo_density, hi_density = field_density_range
    if not 0.0 < lo_density <= hi_density:
        raise ValueError(f"field_density_range must be 0 < low ≤ high, got {field_density_range}. Fix: reorder it.")
    s = settings or PairModelSettings()
    _, _, pc_per_au = _constants()
    rng = np.random.default_rng(seed)

    # 1. primaries: one star each, shared by all its pairs
    n = n_primaries
    ra_p = rng.uniform(0.0, 360.0, n)
    dec_p = np.degrees(np.arcsin(rng.uniform(-1.0, 1.0, n)))
    d_p = _draw_distances_pc(rng, n, length_scale_kpc)
    m_p = _draw_masses(rng, n)
    v_p = draw_field_velocities(rng, n, s)
    density = np.exp(rng.uniform(math.log(lo_density), math.log(hi_density), n))
    inner_p = _draw_inner(rng, m_p, s)
    noise_p = _draw_noise(rng, n)
    xyz_p = _galactic_xyz(ra_p, dec_p, d_p)
    mag_p = _magnitude(m_p, inner_p["m_in"], d_p)
    eplx_p, _, _ = _catalogue_errors(mag_p)
    plx_p = 1000.0 / d_p

    def preselected(prim: np.ndarray, plx2: np.ndarray, z2: np.ndarray, eplx2: np.ndarray,
                    rho: np.ndarray) -> np.ndarray:
        """Rows that pass the parallax preselection, with the noise the measurement will carry."""
        m1 = plx_p[prim] + noise_p["z_plx"][prim] * _noise_scale(eplx_p[prim], s.parallax_floor_mas, rho, s)
        m2 = plx2 + z2 * _noise_scale(eplx2, s.parallax_floor_mas, rho, s)
        return np.abs(m1 - m2) < preselect_sigma * np.hypot(eplx_p[prim], eplx2)

    blocks: list[dict[str, Any]] = []
    drawn = draw_companions(rng, n, s)

    # 2. bound and co-moving companions
    for code, kind in ((0, "bound"), (1, "co-moving")):
        prim, sep_au = drawn[kind]
        k = prim.size
        m2 = rng.uniform(*Q_RANGE, k) * m_p[prim]
        inner2 = _draw_inner(rng, m2, s)
        noise2 = _draw_noise(rng, k)
        if kind == "bound":
            elements = draw_orbit_elements(rng, k)
            m1_all = m_p[prim] + inner_p["m_in"][prim]
            m2_all = m2 + inner2["m_in"]
            r_rel, v_rel = keplerian_state(sep_au, elements, m1_all + m2_all)
            vel1 = v_p[:, prim] - m2_all / (m1_all + m2_all) * v_rel
            vel2 = v_p[:, prim] + m1_all / (m1_all + m2_all) * v_rel
            semimajor, ecc = sep_au, elements["e"]
        else:
            r_rel = sep_au * _unit_vectors(rng, k)
            vel1 = v_p[:, prim]
            vel2 = vel1 + rng.normal(0.0, s.comoving_dispersion_kms, (3, k))
            semimajor, ecc = np.full(k, np.nan), np.full(k, np.nan)
        # star 1 stays at the primary's drawn position (the same in all its rows), so a bound pair's barycentre
        # sits m2/M · r from it: a shift of au in a position drawn uniformly over pc, immaterial to the statistics
        xyz2 = xyz_p[:, prim] + r_rel * pc_per_au
        ra2, dec2, d2 = _sky(xyz2)
        rho = _separation_arcsec(ra_p[prim], dec_p[prim], ra2, dec2)
        mag2 = _magnitude(m2, inner2["m_in"], d2)
        eplx2, _, _ = _catalogue_errors(mag2)
        keep = (rho >= rho_min_arcsec) & (rho <= rho_max_arcsec)
        keep &= preselected(prim, 1000.0 / d2, noise2["z_plx"], eplx2, rho)
        blocks.append({"code": np.full(keep.sum(), code), "prim": prim[keep], "ra2": ra2[keep], "dec2": dec2[keep],
                       "d2": d2[keep], "xyz2": xyz2[:, keep], "vel1": vel1[:, keep], "vel2": vel2[:, keep],
                       "m2": m2[keep], "inner2": {key: val[..., keep] for key, val in inner2.items()},
                       "noise2": {key: val[..., keep] for key, val in noise2.items()}, "rho": rho[keep],
                       "semimajor": semimajor[keep], "ecc": ecc[keep], "order": np.flatnonzero(keep)})

    # 3. chance neighbours: positions, distances and parallaxes first; kinematics for the survivors only
    prim = np.repeat(np.arange(n), rng.poisson(_annulus_deg2(rho_min_arcsec, rho_max_arcsec) * density))
    k = prim.size
    rho = np.sqrt(rng.uniform(rho_min_arcsec**2, rho_max_arcsec**2, k))  # uniform in area
    pa = rng.uniform(0.0, 2.0 * math.pi, k)
    d2 = _draw_distances_pc(rng, k, length_scale_kpc)
    m2 = _draw_masses(rng, k)
    inner2 = _draw_inner(rng, m2, s)
    noise2 = _draw_noise(rng, k)
    mag2 = _magnitude(m2, inner2["m_in"], d2)
    eplx2, _, _ = _catalogue_errors(mag2)
    keep = preselected(prim, 1000.0 / d2, noise2["z_plx"], eplx2, rho)
    from astropy.coordinates import offset_by

    lon, lat = offset_by(np.radians(ra_p[prim[keep]]), np.radians(dec_p[prim[keep]]), pa[keep],
                         np.radians(rho[keep] / 3600.0))
    ra2, dec2 = np.asarray(lon.deg) % 360.0, np.asarray(lat.deg)  # astropy returns a Longitude and a Latitude
    vel2 = draw_field_velocities(rng, int(keep.sum()), s)
    blocks.append({"code": np.full(keep.sum(), 2), "prim": prim[keep], "ra2": ra2, "dec2": dec2, "d2": d2[keep],
                   "xyz2": _galactic_xyz(ra2, dec2, d2[keep]), "vel1": v_p[:, prim[keep]], "vel2": vel2,
                   "m2": m2[keep], "inner2": {key: val[..., keep] for key, val in inner2.items()},
                   "noise2": {key: val[..., keep] for key, val in noise2.items()}, "rho": rho[keep],
                   "semimajor": np.full(keep.sum(), np.nan), "ecc": np.full(keep.sum(), np.nan),
                   "order": np.flatnonzero(keep)})

    # 4. all rows, listed by primary, then class, then order of drawing
    def cat(key: str) -> np.ndarray:
        return np.concatenate([b[key] for b in blocks], axis=-1)

    code, prim, order = cat("code"), cat("prim"), cat("order")
    sort = np.lexsort((order, code, prim))
    code, prim = code[sort], prim[sort]
    row = {key: cat(key)[..., sort] for key in ("ra2", "dec2", "d2", "xyz2", "vel1", "vel2", "m2", "rho",
                                                 "semimajor", "ecc")}
    inner2 = {key: np.concatenate([b["inner2"][key] for b in blocks], axis=-1)[..., sort] for key in inner_p}
    noise2 = {key: np.concatenate([b["noise2"][key] for b in blocks], axis=-1)[..., sort] for key in noise_p}
    inner1 = {key: val[..., prim] for key, val in inner_p.items()}
    noise1 = {key: val[..., prim] for key, val in noise_p.items()}
    rho = row["rho"]

    # 5. observe both stars: true values, then the noise
    cols: dict[str, np.ndarray] = {"pair_id": np.array([f"sim-{i + 1:06d}" for i in range(prim.size)])}
    cols["ra1"], cols["dec1"], cols["ra2"], cols["dec2"] = ra_p[prim], dec_p[prim], row["ra2"], row["dec2"]
    truth: dict[str, np.ndarray] = {}
    stars = ((1, xyz_p[:, prim], d_p[prim], m_p[prim], row["vel1"], inner1, noise1),
             (2, row["xyz2"], row["d2"], row["m2"], row["vel2"], inner2, noise2))
    for i, xyz, dist, m_vis, vel, inner, noise in stars:
        v_photo, v_vis = _inner_motion(inner, m_vis, s.astrometric_baseline_yr)
        pmra, pmdec, _ = _project(xyz, vel + v_photo)
        _, _, rv = _project(xyz, vel + v_vis)
        mag = _magnitude(m_vis, inner["m_in"], dist)
        eplx, epm, erv = _catalogue_errors(mag)
        sd_plx = _noise_scale(eplx, s.parallax_floor_mas, rho, s)
        sd_pm = _noise_scale(epm, s.pm_floor_masyr, rho, s)
        sd_rv = _noise_scale(erv, s.rv_floor_kms, rho, s)
        corr = noise["corr"]
        z_ra, z_dec = noise["z_pm"]
        has_rv = (mag < RV_MAG_LIMIT) & (noise["rv_draw"] < RV_FRACTION)
        mass = m_vis * np.exp(MASS_SCATTER * noise["z_mass"])  # lognormal scatter of 10 %
        cols[f"parallax{i}"] = 1000.0 / dist + sd_plx * noise["z_plx"]
        cols[f"parallax_error{i}"] = eplx
        cols[f"pmra{i}"] = pmra + sd_pm * z_ra
        cols[f"pmra_error{i}"] = epm
        cols[f"pmdec{i}"] = pmdec + sd_pm * (corr * z_ra + np.sqrt(1.0 - corr**2) * z_dec)
        cols[f"pmdec_error{i}"] = epm
        cols[f"pmra_pmdec_corr{i}"] = corr
        cols[f"rv{i}"] = np.where(has_rv, rv + sd_rv * noise["z_rv"], np.nan)
        cols[f"rv_error{i}"] = np.where(has_rv, erv, np.nan)
        cols[f"mag{i}"] = mag
        cols[f"mass{i}"] = mass
        cols[f"mass_error{i}"] = MASS_SCATTER * mass
        truth[f"true_inner{i}"] = inner["has"]
        truth[f"true_distance{i}_pc"] = dist
        for axis, name in enumerate("uvw"):
            truth[f"true_{name}{i}_kms"] = vel[axis]
        truth[f"true_pmra{i}"], truth[f"true_pmdec{i}"], truth[f"true_rv{i}"] = pmra, pmdec, rv
        truth[f"true_mass{i}_msun"] = m_vis + inner["m_in"]
    cols["field_density"] = density[prim]
    cols["true_class"] = np.array(CLASSES, dtype=object)[code].astype(str)
    cols["true_semimajor_au"] = row["semimajor"]
    cols["true_eccentricity"] = row["ecc"]
    cols["true_total_mass_msun"] = truth.pop("true_mass1_msun") + truth.pop("true_mass2_msun")
    cols.update(truth)
    cols["true_primary"] = prim
    return cols


def population_summary(columns: dict[str, np.ndarray]) -> dict[str, Any]:
    """Counts of a population's pairs per true class and per state of the hidden companions.

    Parameters
    ----------
    columns
        The output of :func:`draw_population` (or any table with its truth columns).

    Returns
    -------
    dict
        ``pairs``: number of rows; ``by_class``: rows per true class;
        ``by_inner``: rows whose star 1 only, star 2 only, both or neither
        hides a companion; ``by_class_and_inner``: the same per class.
    """
    cls = np.asarray(columns["true_class"])
    i1 = np.asarray(columns["true_inner1"], bool)
    i2 = np.asarray(columns["true_inner2"], bool)
    states = {"neither": ~i1 & ~i2, "star 1": i1 & ~i2, "star 2": ~i1 & i2, "both": i1 & i2}
    return {
        "pairs": int(cls.size),
        "by_class": {c: int(np.sum(cls == c)) for c in CLASSES},
        "by_inner": {name: int(sel.sum()) for name, sel in states.items()},
        "by_class_and_inner": {c: {name: int(np.sum(sel & (cls == c))) for name, sel in states.items()}
                               for c in CLASSES},
    }
