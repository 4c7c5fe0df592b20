"""Hierarchical multiples: dynamical stability of triples, photocentres of unresolved pairs, and orbits
drawn from one projected separation.

Conventions as in :mod:`dossier.astro.orbit`: separations in au or arcsec, periods in Julian years,
masses in M☉, angles in degrees, proper motions in mas/yr (RA component × cos δ), offsets north (x)
and east (y). Every kernel takes numpy arrays.

Stability (Mardling & Aarseth 2001, MNRAS 321, 398)
    A triple whose inner pair (masses m₁, m₂, semimajor axis a_in) is orbited by a third body
    (m₃; a_out, e_out) is stable when the outer periastron distance is far enough out:

        a_out (1 − e_out) / a_in > 2.8 (1 − 0.3 i/180°) [(1 + q_out)(1 + e_out) / √(1 − e_out)]^(2/5),

    q_out = m₃/(m₁ + m₂), i the mutual inclination of the two orbits in degrees (the inclination
    factor is the authors' heuristic, linear in i/π radians). Equivalently a_out/a_in >
    2.8 (1 + q_out)^(2/5) (1 + e_out)^(2/5) (1 − e_out)^(−6/5) (1 − 0.3 i/180°). The same expression
    is the stability test of the authors' N-body codes (coefficient 2.8, exponent 0.4, factor
    1 − 0.3 i/π on the periastron ratio; checked against a public copy of that routine). The
    criterion ignores the inner eccentricity and was calibrated on systems with comparable masses;
    it is a boundary with a width, not a sharp line (later N-body work finds a gradual transition).

Photocentre of an unresolved pair
    With r the position of the secondary relative to the primary, the barycentre sits at B r from
    the primary (B = m₂/(m₁ + m₂)) and the photocentre of the blended light at β r (β = L₂/(L₁ + L₂)
    in the band of the astrometry; β = 1/(1 + 10^(0.4 Δm))). So the photocentre moves about the
    barycentre as (β − B) r: by |B − β| times the relative orbit, on the side of the primary when
    B > β (textbook, e.g. van de Kamp 1967, Principles of Astrometry, ch. 13; from memory). Its
    velocity is (β − B) dr/dt; the astrometry of the blend measures the barycentre's proper motion
    plus that velocity.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from dossier.astro.binary import solve_kepler
from dossier.astro.seeding import seed_from

__all__ = [
    "SkyOrbits",
    "StabilityDraws",
    "draw_sky_orbits",
    "BAND_WAVELENGTH_UM",
    "band_delta_mag",
    "companion_mass_from_delta_mag",
    "light_fraction",
    "ma01_critical_ratio",
    "ma01_stable",
    "mutual_inclination",
    "photocentre_factor",
    "photocentre_velocity",
    "rms_photocentre_velocity",
    "sample_thermal",
    "sky_ratio",
    "stability_probability",
]

MA01_COEFFICIENT = 2.8


def ma01_critical_ratio(q_out: ArrayLike, e_out: ArrayLike, i_mut_deg: ArrayLike = 0.0) -> NDArray[np.float64]:
    """Smallest stable a_out/a_in of a hierarchical triple (Mardling & Aarseth 2001, MNRAS 321, 398).

    Parameters
    ----------
    q_out : array_like
        Outer mass ratio m_out/(m_in,1 + m_in,2).
    e_out : array_like
        Outer eccentricity in [0, 1).
    i_mut_deg : array_like, optional
        Mutual inclination of the inner and outer orbits, degrees in [0, 180] (0: coplanar prograde).

    Returns
    -------
    ndarray
        2.8 (1 + q)^(2/5) (1 + e)^(2/5) (1 − e)^(−6/5) (1 − 0.3 i/180°).
    """
    q, e, i = (np.asarray(v, dtype=float) for v in (q_out, e_out, i_mut_deg))
    # periastron form R_p/a_in > 2.8 (1 − 0.3 i/π) [(1 + q)(1 + e)/√(1 − e)]^(2/5), divided by (1 − e)
    return MA01_COEFFICIENT * ((1.0 + q) * (1.0 + e)) ** 0.4 * (1.0 - e) ** -1.2 * (1.0 - 0.3 * i / 180.0)


def ma01_stable(a_in: ArrayLike, a_out: ArrayLike, q_out: ArrayLike, e_out: ArrayLike,
                i_mut_deg: ArrayLike = 0.0) -> NDArray[np.bool_]:
    """Whether a triple is stable by Mardling & Aarseth (2001): a_out/a_in above the critical ratio."""
    ratio = np.asarray(a_out, dtype=float) / np.asarray(a_in, dtype=float)
    return ratio > ma01_critical_ratio(q_out, e_out, i_mut_deg)


@dataclass(frozen=True)
class SkyOrbits:
    """Random orbits seen at a random moment: eccentricity, cos i, ω (rad) and mean anomaly (rad)."""

    e: NDArray[np.float64]
    cos_i: NDArray[np.float64]
    omega: NDArray[np.float64]
    mean_anomaly: NDArray[np.float64]


def draw_sky_orbits(rng: np.random.Generator, n: int, e: ArrayLike | None = None) -> SkyOrbits:
    """n orbits with isotropic orientation (cos i uniform, ω uniform) at a uniform mean anomaly.

    ``e``: the eccentricities (shape (n,) or scalar); by default thermal, f(e) = 2e (Jeans 1919,
    MNRAS 79, 408; as :func:`dossier.astro.binary.sample_eccentricity`).
    """
    ecc = np.sqrt(rng.uniform(0.0, 1.0, n)) if e is None else np.broadcast_to(np.asarray(e, float), (n,)).copy()
    return SkyOrbits(ecc, rng.uniform(-1.0, 1.0, n), rng.uniform(0.0, 2.0 * np.pi, n), rng.uniform(0.0, 2.0 * np.pi, n))


def sky_ratio(mean_anomaly: ArrayLike, e: ArrayLike, cos_i: ArrayLike, omega: ArrayLike) -> NDArray[np.float64]:
    """Projected separation over semimajor axis, s/a, of an orbit at a mean anomaly.

    r/a = 1 − e cos E; the line-of-sight part of the unit radius vector is sin(ν + ω) sin i
    (textbook orbit geometry; the same expression as
    :func:`dossier.astro.binary.projected_separation_ratio`).
    """
    e_ = np.asarray(e, dtype=float)
    E = solve_kepler(mean_anomaly, e_)
    r = 1.0 - e_ * np.cos(E)
    nu = 2.0 * np.arctan2(np.sqrt(1.0 + e_) * np.sin(E / 2.0), np.sqrt(1.0 - e_) * np.cos(E / 2.0))
    sin2_i = 1.0 - np.asarray(cos_i, dtype=float) ** 2
    return r * np.sqrt(1.0 - np.sin(nu + np.asarray(omega, dtype=float)) ** 2 * sin2_i)


@dataclass(frozen=True)
class StabilityDraws:
    """The Monte Carlo of :func:`stability_probability`: per draw a_in, a_out (au), e_out, i (deg)."""

    probability: float
    a_in: NDArray[np.float64]
    a_out: NDArray[np.float64]
    e_out: NDArray[np.float64]
    i_mut: NDArray[np.float64]
    critical: NDArray[np.float64]
    stable: NDArray[np.bool_]

    @property
    def ratio(self) -> NDArray[np.float64]:
        return self.a_out / self.a_in


def stability_probability(
    rng: np.random.Generator,
    n: int,
    q_out: ArrayLike,
    *,
    s_in: ArrayLike | None = None,
    s_out: ArrayLike | None = None,
    a_in: ArrayLike | None = None,
    a_out: ArrayLike | None = None,
    e_out: ArrayLike | None = None,
    i_mut_deg: ArrayLike | None = None,
) -> StabilityDraws:
    """Probability that a triple known only in part is stable by Mardling & Aarseth (2001).

    Each orbit is given either by its semimajor axis (``a_in``/``a_out``, e.g. from a published
    orbit) or by a projected separation (``s_in``/``s_out``), from which the semimajor axis is
    drawn as a = s/(s/a) with a random orientation, a random moment and a thermal eccentricity.
    The outer eccentricity, when not given, is the one drawn for the outer orbit (thermal); the
    mutual inclination, when not given, is isotropic (cos i uniform). Every argument may be an
    array of n draws (e.g. the masses' or distance's uncertainty drawn by the caller).

    Returns
    -------
    StabilityDraws
        The fraction of draws that are stable, and the draws.
    """
    def semimajor(a, s, e_given):
        if a is not None:
            ecc = sample_thermal(rng, n) if e_given is None else np.broadcast_to(np.asarray(e_given, float), (n,))
            return np.broadcast_to(np.asarray(a, float), (n,)), ecc
        if s is None:
            raise ValueError("give a semimajor axis or a projected separation for each orbit. "
                             "Fix: pass a_in or s_in, and a_out or s_out.")
        orbits = draw_sky_orbits(rng, n, e_given)
        ratio = sky_ratio(orbits.mean_anomaly, orbits.e, orbits.cos_i, orbits.omega)
        return np.asarray(s, float) / ratio, orbits.e

    ain, _ = semimajor(a_in, s_in, None)
    aout, eout = semimajor(a_out, s_out, e_out)
    if i_mut_deg is None:
        imut = np.degrees(np.arccos(rng.uniform(-1.0, 1.0, n)))
    else:
        imut = np.broadcast_to(np.asarray(i_mut_deg, float), (n,))
    q = np.broadcast_to(np.asarray(q_out, float), (n,))
    crit = ma01_critical_ratio(q, eout, imut)
    stable = (aout / ain) > crit
    return StabilityDraws(float(np.mean(stable)), np.asarray(ain), np.asarray(aout), np.asarray(eout),
                          np.asarray(imut), crit, stable)


def sample_thermal(rng: np.random.Generator, n: int) -> NDArray[np.float64]:
    """n eccentricities from f(e) = 2e (inverse CDF of F(e) = e²)."""
    return np.sqrt(rng.uniform(0.0, 1.0, n))


def mutual_inclination(i1: ArrayLike, node1: ArrayLike, i2: ArrayLike, node2: ArrayLike) -> NDArray[np.float64]:
    """Mutual inclination (deg) of two orbits from their inclinations and nodes (deg).

    cos Φ = cos i₁ cos i₂ + sin i₁ sin i₂ cos(Ω₁ − Ω₂) (spherical trigonometry; e.g. Fekel 1981,
    ApJ 246, 879; from memory). Visual orbits alone leave each Ω ambiguous by 180°: call twice.
    """
    a1, n1, a2, n2 = (np.radians(np.asarray(v, dtype=float)) for v in (i1, node1, i2, node2))
    c = np.cos(a1) * np.cos(a2) + np.sin(a1) * np.sin(a2) * np.cos(n1 - n2)
    return np.degrees(np.arccos(np.clip(c, -1.0, 1.0)))


# ----------------------------------------------------------------------------
# Photocentres of unresolved pairs


def light_fraction(delta_mag: ArrayLike) -> NDArray[np.float64]:
    """β = L₂/(L₁ + L₂) = 1/(1 + 10^(0.4 Δm)), Δm = m₂ − m₁ in the band of the astrometry (Pogson)."""
    return 1.0 / (1.0 + 10.0 ** (0.4 * np.asarray(delta_mag, dtype=float)))


def photocentre_factor(m1: ArrayLike, m2: ArrayLike, delta_mag: ArrayLike) -> NDArray[np.float64]:
    """B − β: the photocentre's orbit about the barycentre, in units of the relative orbit.

    B = m₂/(m₁ + m₂) (masses, M☉), β from Δm (:func:`light_fraction`). Zero for twins (B = β = ½)
    and for a dark companion it is B. The photocentre offset from the barycentre is −(B − β) r,
    r the position of the secondary relative to the primary.
    """
    m1_, m2_ = np.asarray(m1, dtype=float), np.asarray(m2, dtype=float)
    return m2_ / (m1_ + m2_) - light_fraction(delta_mag)


def photocentre_velocity(t: ArrayLike, factor: ArrayLike, P: ArrayLike, T: ArrayLike, e: ArrayLike, a: ArrayLike,
                         i: ArrayLike, node: ArrayLike, omega: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Velocity of the photocentre about the barycentre at epochs t, from a visual orbit.

    Parameters
    ----------
    t : array_like
        Epochs, Julian years.
    factor : array_like
        B − β (:func:`photocentre_factor`).
    P, T, e, a, i, node, omega : array_like
        Campbell elements of the relative orbit as :func:`dossier.astro.orbit.ephemeris_xy` takes
        them (yr, Julian year, -, arcsec, deg, deg, deg).

    Returns
    -------
    v_east, v_north : ndarray
        mas/yr: east (the pmra × cos δ direction) and north. Subtract them from the proper motion
        of the blend to get the barycentre's.

    Notes
    -----
    d r/dt by a central difference of :func:`dossier.astro.orbit.ephemeris_xy` with a step of
    10⁻⁵ of the time scale P (1 − e)^(3/2) of periastron passage (truncation error ~10⁻¹⁰ relative).
    """
    from dossier.astro.orbit import ephemeris_xy

    P_, e_ = np.asarray(P, dtype=float), np.asarray(e, dtype=float)
    h = 1e-5 * P_ * (1.0 - e_) ** 1.5
    t_ = np.asarray(t, dtype=float)
    x1, y1 = ephemeris_xy(t_ + h, P_, T, e_, a, i, node, omega)
    x0, y0 = ephemeris_xy(t_ - h, P_, T, e_, a, i, node, omega)
    k = -np.asarray(factor, dtype=float) * 1000.0 / (2.0 * h)  # offset −(B − β) r; arcsec → mas
    return k * (y1 - y0), k * (x1 - x0)


def rms_photocentre_velocity(factor: ArrayLike, a_mas: ArrayLike, P_yr: ArrayLike) -> NDArray[np.float64]:
    """Root-mean-square photocentre velocity per sky axis (mas/yr) of an orbit of unknown orientation and phase.

    Averaged over time, ⟨v²⟩ = GM/a = (2π a/P)² for any eccentricity (vis-viva with ⟨1/r⟩ = 1/a);
    an isotropic orientation puts a third of it on each axis. So v_rms = |B − β| 2π a / (P √3),
    a the angular semimajor axis of the relative orbit (mas) and P in years.
    """
    f, a, p = (np.asarray(v, dtype=float) for v in (factor, a_mas, P_yr))
    return np.abs(f) * 2.0 * np.pi * a / (p * np.sqrt(3.0))


# ----------------------------------------------------------------------------
# A companion's contrast in another band (blackbody approximation)

#: Effective wavelengths (µm) of the common broad bands for a Vega-like spectrum: Bessell, Castelli &
#: Plez 1998, A&A 333, 231, Table A2 (UBVRIJHKL; from memory, to about 1 %), Ks from common practice.
#: A 1 % change of λ changes a blackbody contrast far less than the model uncertainty carried with it.
BAND_WAVELENGTH_UM: dict[str, float] = {
    "U": 0.366, "B": 0.438, "V": 0.545, "R": 0.641, "I": 0.798,
    "J": 1.22, "H": 1.63, "K": 2.19, "Ks": 2.16, "L": 3.45,
}

#: Second radiation constant c₂ = hc/k, µm K (CODATA 2018: 1.438776877 × 10⁻² m K).
C2_UM_K = 14387.76877


def band_delta_mag(teff1: ArrayLike, r1: ArrayLike, teff2: ArrayLike, r2: ArrayLike,
                   wavelength_um: ArrayLike) -> NDArray[np.float64]:
    """Δm = m₂ − m₁ at one wavelength of two blackbodies of temperatures T (K) and radii R (R☉).

    Δm = −2.5 log₁₀[(R₂/R₁)² B_λ(T₂)/B_λ(T₁)], B_λ ∝ λ⁻⁵/(exp(c₂/λT) − 1) (Planck's law). An
    approximation: real spectra depart from blackbodies by tenths of a magnitude in the optical for
    cool stars (molecular bands); the callers carry a model uncertainty for it.
    """
    lam = np.asarray(wavelength_um, dtype=float)
    x1 = C2_UM_K / (lam * np.asarray(teff1, dtype=float))
    x2 = C2_UM_K / (lam * np.asarray(teff2, dtype=float))
    ratio = (np.asarray(r2, dtype=float) / np.asarray(r1, dtype=float)) ** 2 * np.expm1(x1) / np.expm1(x2)
    return -2.5 * np.log10(ratio)


def zams_teff_radius(mass: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """T_eff (K) and R (R☉) on the zero-age main sequence (Tout et al. 1996, MNRAS 281, 257; Z = 0.02),
    T_eff = 5772 K (L/R²)^(1/4) (IAU 2015 B3 nominal values)."""
    from dossier.astro import stars

    L = stars.zams_luminosity(mass)
    R = stars.zams_radius(mass)
    return stars.T_SUN_K * (L / R**2) ** 0.25, R


#: Masses (M☉) over which a companion's mass is sought from its contrast: the validity of the
#: Tout et al. (1996) fits.
_MASS_GRID = np.geomspace(0.1, 100.0, 241)


def companion_mass_from_delta_mag(delta_mag: ArrayLike, wavelength_um: ArrayLike, host_teff: ArrayLike,
                                  host_radius: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.bool_]]:
    """The zero-age main-sequence mass whose blackbody contrast with the host is Δm at λ.

    Returns the masses (M☉) and whether each was clamped at the ends of 0.1–100 M☉ (a companion
    fainter than a 0.1 M☉ dwarf, or brighter than the grid's top).
    """
    dm = np.atleast_1d(np.asarray(delta_mag, dtype=float))
    n = dm.size
    t_grid, r_grid = zams_teff_radius(_MASS_GRID)
    lam = np.broadcast_to(np.asarray(wavelength_um, float), (n,))[:, None]
    ht = np.broadcast_to(np.asarray(host_teff, float), (n,))[:, None]
    hr = np.broadcast_to(np.asarray(host_radius, float), (n,))[:, None]
    grid = band_delta_mag(ht, hr, t_grid[None, :], r_grid[None, :], lam)  # (n, grid), decreasing with mass
    k = np.clip((grid > dm[:, None]).sum(axis=1), 1, _MASS_GRID.size - 1)
    rows = np.arange(n)
    d0, d1 = grid[rows, k - 1], grid[rows, k]
    w = np.clip((d0 - dm) / (d0 - d1), 0.0, 1.0)
    logm = np.log(_MASS_GRID)
    mass = np.exp(logm[k - 1] + w * (logm[k] - logm[k - 1]))
    clamped = (dm > grid[:, 0]) | (dm < grid[:, -1])
    return mass, clamped


# ----------------------------------------------------------------------------
# The proper motion of an unresolved pair, referred to its barycentre

#: Time span (yr) of a typical modern astrometric solution (common practice: a few years). Orbital
#: motion with a shorter period is largely averaged out of the fitted proper motion, so neither the
#: correction nor the inflation is applied then.
ASTROMETRIC_SPAN_YR = 3.0


def photocentre_velocity_draws(
    rng: np.random.Generator,
    n: int,
    t: float,
    m1: tuple[float, float],
    m2: tuple[float, float],
    delta_mag: tuple[float, float],
    elements: tuple[tuple[float, float], ...],
) -> tuple[float, float, float, float]:
    """Photocentre velocity (mas/yr, east and north) at epoch t from a visual orbit, with its uncertainty.

    Every input is a (value, 1σ) pair; ``elements`` are (P yr, T, e, a ″, i, Ω, ω). The masses, Δm
    and elements are drawn as independent normals (masses kept positive, e kept in [0, 0.99]) and
    the velocity's mean and standard deviation over n draws are returned: (v_east, v_north,
    σ_east, σ_north). Correlations of published elements are rarely given, so they are ignored.
    """
    def draw(pair, low=None, high=None):
        x = rng.normal(pair[0], pair[1], n)
        return np.clip(x, low, high) if (low is not None or high is not None) else x

    a1, a2 = draw(m1, 1e-3), draw(m2, 1e-3)
    dm = draw(delta_mag)
    P, T, e, a, i, node, omega = (draw(el) for el in elements)
    P, e, a = np.maximum(P, 1e-6), np.clip(e, 0.0, 0.99), np.maximum(a, 0.0)
    ve, vn = photocentre_velocity(t, photocentre_factor(a1, a2, dm), P, T, e, a, i, node, omega)
    return float(np.mean(ve)), float(np.mean(vn)), float(np.std(ve)), float(np.std(vn))
