"""Orbits of bound pairs: proper-motion differences, speeds, Kepler's laws, and
Monte Carlo of projected separations.

Units: masses in solar masses, separations in au or arcsec, parallaxes in mas,
proper motions in mas/yr, speeds in km/s, times in Julian years.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

# IAU 2012 Resolution B2: 1 au = 149 597 870 700 m exactly.
AU_M = 149_597_870_700.0
# Julian year, 365.25 d of 86 400 s (IAU convention).
JULIAN_YEAR_S = 365.25 * 86_400.0
# 1 au per Julian year in km/s, the 4.74047 of v_t = 4.74047 mu d.
KM_S_PER_AU_YR = 4.740470463533348
# IAU 2015 Resolution B3: nominal solar mass parameter GM_sun, m^3 s^-2.
GM_SUN_M3_S2 = 1.3271244e20
# Circular speed at 1 au around 1 solar mass, km/s: sqrt(GM_sun / au).
_V_CIRC_1AU_KMS = float(np.sqrt(GM_SUN_M3_S2 / AU_M)) / 1000.0
# Delta-mu_orbit coefficient, mas/yr, for M = 1, parallax 1 mas, theta 1 arcsec:
# (v at a = 1000 au) * parallax / 4.74047. Equals 2 pi / sqrt(1000) = 0.198692 to
# 2e-5 (the gap is the Julian year versus the year implied by GM_sun).
_DMU_ORBIT_COEFF = _V_CIRC_1AU_KMS / np.sqrt(1000.0) / KM_S_PER_AU_YR
# 2 pi in three parts for angle reduction (Cody & Waite 1980, Software Manual for
# the Elementary Functions, Prentice-Hall; from memory): _HI is float(2 pi) with
# its last 21 mantissa bits cleared, so that k * _HI is exact for |k| < 2^21
# turns; _HI + _MID == float(2 pi) exactly; _LO = 2 pi - float(2 pi).
_TWO_PI_HI = 6.2831853069365025
_TWO_PI_MID = 2.430837753308879e-10
_TWO_PI_LO = 2.4492935982947064e-16


def delta_mu_orbit(total_mass_msun: ArrayLike, parallax_mas: ArrayLike, sep_arcsec: ArrayLike) -> NDArray[np.float64]:
    """Relative proper motion of a circular orbit whose radius is the projected separation.

    The orbital speed sqrt(G M / s) seen across the sky at the parallax
    distance: the largest difference a bound pair on a circular orbit can show.

    Parameters
    ----------
    total_mass_msun : array_like
        Total mass of the pair, solar masses.
    parallax_mas : array_like
        Parallax, mas.
    sep_arcsec : array_like
        Angular separation, arcsec (taken as the orbital radius).

    Returns
    -------
    ndarray
        Delta-mu_orbit in mas/yr, about 0.1987 sqrt(M) parallax^1.5 sep^-0.5.
    """
    m, plx, sep = (np.asarray(v, dtype=float) for v in (total_mass_msun, parallax_mas, sep_arcsec))
    # El-Badry, Rix & Heintz 2021, MNRAS 506, 2269: 0.44 mas/yr (plx/mas)^1.5
    # (theta/arcsec)^-0.5 for M = 5 M_sun, here for any mass with the coefficient
    # from GM_sun and the au (see _DMU_ORBIT_COEFF).
    return _DMU_ORBIT_COEFF * np.sqrt(m) * plx**1.5 / np.sqrt(sep)


def delta_mu_escape(total_mass_msun: ArrayLike, parallax_mas: ArrayLike, sep_arcsec: ArrayLike) -> NDArray[np.float64]:
    """Proper-motion difference at the escape speed: sqrt(2) * ``delta_mu_orbit``, mas/yr."""
    return np.sqrt(2.0) * delta_mu_orbit(total_mass_msun, parallax_mas, sep_arcsec)


def python_square(x: ArrayLike) -> NDArray[np.float64]:
    """``x ** 2`` as Python computes it for a float (the C library's ``pow``); numpy's ``x ** 2`` is
    ``x * x``, which differs from it in the last bit for about 0.1 % of inputs. numpy's ``power`` with an
    array exponent calls that ``pow``, except on CPUs where it uses its own AVX-512 ``pow``."""
    return np.power(x, np.full_like(x, 2.0))


def python_hypot(x: ArrayLike, y: ArrayLike) -> NDArray[np.float64]:
    """``math.hypot(x, y)`` element by element, to the last bit.

    numpy's ``hypot`` (the C library's) differs from Python's in the last bit for about 0.6 % of
    random inputs; the rules computed Δμ with ``math.hypot`` one pair at a time, and their kernels
    must give the same numbers. This is CPython 3.11's ``vector_norm`` for two coordinates
    (Modules/mathmodule.c: power-of-two scaling, Veltkamp–Dekker splitting, compensated sums, a
    differential correction of the square root; below 2^-1024, division by the larger value),
    written with numpy's IEEE operations in the same order, in blocks that stay in cache.
    """
    ax, ay = np.broadcast_arrays(np.abs(np.asarray(x, dtype=float)), np.abs(np.asarray(y, dtype=float)))
    shape = ax.shape
    ax, ay = ax.reshape(-1), ay.reshape(-1)
    out = np.empty(ax.size)
    for start in range(0, ax.size, 65536):
        out[start:start + 65536] = _hypot_block(ax[start:start + 65536], ay[start:start + 65536])
    return out.reshape(shape)


def _hypot_block(ax: NDArray, ay: NDArray) -> NDArray:
    big = np.fmax(ax, ay)  # CPython keeps the largest non-NaN value
    _, max_e = np.frexp(big)
    split = 134217729.0  # 2**27 + 1
    with np.errstate(all="ignore"):  # zeros, infinities, NaNs and the tiny rows are set below
        scale = np.ldexp(1.0, -max_e)
        csum, frac1, frac2, frac3 = np.ones_like(big), np.zeros_like(big), np.zeros_like(big), np.zeros_like(big)
        for v in (ax, ay):
            v = v * scale
            t = v * split
            hi = t - (t - v)
            lo = v - hi
            term = hi * hi
            old, csum = csum, csum + term
            frac1 = frac1 + ((old - csum) + term)
            term = 2.0 * hi * lo
            old, csum = csum, csum + term
            frac2 = frac2 + ((old - csum) + term)
            frac3 = frac3 + lo * lo
        h = np.sqrt(csum - 1.0 + (frac1 + frac2 + frac3))
        t = h * split
        hi = t - (t - h)
        lo = h - hi
        term = -hi * hi
        old, csum = csum, csum + term
        frac1 = frac1 + ((old - csum) + term)
        term = -2.0 * hi * lo
        old, csum = csum, csum + term
        frac2 = frac2 + ((old - csum) + term)
        term = -lo * lo
        old, csum = csum, csum + term
        frac3 = frac3 + ((old - csum) + term)
        out = (h + (csum - 1.0 + (frac1 + frac2 + frac3)) / (2.0 * h)) / scale
    tiny = np.flatnonzero((max_e < -1023) & (big > 0))
    if tiny.size:
        m, tsum, tfrac = big[tiny], np.ones(tiny.size), np.zeros(tiny.size)
        for v in (ax[tiny], ay[tiny]):
            v = v / m
            v = v * v
            old, tsum = tsum, tsum + v
            tfrac = tfrac + ((old - tsum) + v)
        out[tiny] = m * np.sqrt(tsum - 1.0 + tfrac)
    out[big == 0.0] = 0.0
    out[np.isnan(ax) | np.isnan(ay)] = np.nan
    out[np.isinf(big)] = np.inf
    return out


def sigma_delta_mu(
    dmu_ra: ArrayLike, dmu_dec: ArrayLike, var_ra: ArrayLike, var_dec: ArrayLike
) -> NDArray[np.float64]:
    """Uncertainty of the size of a proper-motion difference.

    Parameters
    ----------
    dmu_ra, dmu_dec : array_like
        Difference of proper motions (pmra includes cos dec), mas/yr.
    var_ra, var_dec : array_like
        Summed variances of both stars on each axis, (mas/yr)^2.

    Returns
    -------
    ndarray
        sigma_Delta-mu in mas/yr. Where the difference is exactly zero the
        direction is undefined and the root of the mean variance,
        sqrt((var_ra + var_dec) / 2), is returned.
    """
    dx, dy, vx, vy = (np.asarray(v, dtype=float) for v in (dmu_ra, dmu_dec, var_ra, var_dec))
    d2 = dx**2 + dy**2
    with np.errstate(divide="ignore", invalid="ignore"):
        # El-Badry, Rix & Heintz 2021, MNRAS 506, 2269: error propagated along
        # the direction of the difference.
        var = (vx * dx**2 + vy * dy**2) / d2
    return np.sqrt(np.where(d2 > 0, var, 0.5 * (vx + vy)))


def circular_speed_kms(total_mass_msun: ArrayLike, sep_au: ArrayLike) -> NDArray[np.float64]:
    """Circular orbital speed sqrt(G M / s) in km/s (mass in solar masses, s in au)."""
    m, s = np.asarray(total_mass_msun, dtype=float), np.asarray(sep_au, dtype=float)
    # Newtonian circular orbit, v^2 = G M / s (textbook).
    return _V_CIRC_1AU_KMS * np.sqrt(m / s)


def escape_speed_kms(total_mass_msun: ArrayLike, sep_au: ArrayLike) -> NDArray[np.float64]:
    """Escape speed sqrt(2 G M / s) in km/s: sqrt(2) times the circular speed."""
    return np.sqrt(2.0) * circular_speed_kms(total_mass_msun, sep_au)


def kepler_period_yr(a_au: ArrayLike, total_mass_msun: ArrayLike) -> NDArray[np.float64]:
    """Orbital period from Kepler's third law, P^2 = a^3 / M (yr, au, solar masses).

    In these units the law holds to 2e-5 against GM_sun, the au and the Julian year.
    """
    a, m = np.asarray(a_au, dtype=float), np.asarray(total_mass_msun, dtype=float)
    # Kepler's third law in solar units (textbook; METHODS.md).
    return np.sqrt(a**3 / m)


def semimajor_axis_au(period_yr: ArrayLike, total_mass_msun: ArrayLike) -> NDArray[np.float64]:
    """Semimajor axis from Kepler's third law, a = (P^2 M)^(1/3) (au, yr, solar masses)."""
    p, m = np.asarray(period_yr, dtype=float), np.asarray(total_mass_msun, dtype=float)
    return np.cbrt(p**2 * m)


def solve_kepler(mean_anomaly: ArrayLike, e: ArrayLike) -> NDArray[np.float64]:
    """Eccentric anomaly E from Kepler's equation E - e sin E = M.

    Parameters
    ----------
    mean_anomaly : array_like
        Mean anomaly M in radians, any value.
    e : array_like
        Eccentricity in [0, 1); broadcast with ``mean_anomaly``.

    Returns
    -------
    ndarray
        E in radians, on the same turn as M: E - e sin E = M holds for the
        input M itself (so |E - M| <= e), to machine precision.

    Notes
    -----
    Halley's method on |M| reduced to [0, pi], started at Danby's
    E = |M| + 0.85 e (Danby, J. M. A. 1988, Fundamentals of Celestial
    Mechanics, 2nd ed., Willmann-Bell, sect. 6.6; from memory), from which it
    converges cubically for every e < 1: four or five steps reach machine
    precision even at e = 0.99, so batches of millions of orbits (the
    posterior samplers) need no separate, faster solver.
    """
    m, ecc = np.broadcast_arrays(np.asarray(mean_anomaly, dtype=float), np.asarray(e, dtype=float))
    # Reduce M to [-pi, pi] with 2 pi split in two parts (Cody-Waite), so that an
    # M just below a whole turn keeps its precision; solve for |M| in [0, pi] and
    # restore the sign (E is odd in M).
    turns = np.round(m / (2.0 * np.pi))
    m0 = ((m - turns * _TWO_PI_HI) - turns * _TWO_PI_MID) - turns * _TWO_PI_LO
    sign, m_abs = np.where(m0 < 0, -1.0, 1.0), np.abs(m0)
    E = np.minimum(m_abs + 0.85 * ecc, np.pi)
    for _ in range(100):
        s, c = np.sin(E), np.cos(E)
        f = E - ecc * s - m_abs
        fp = 1.0 - ecc * c
        step = f / (fp - 0.5 * f * ecc * s / fp)
        E = E - step
        if np.all(np.abs(step) <= 1e-15 * np.maximum(1.0, np.abs(E))):
            break
    return ((sign * E + turns * _TWO_PI_LO) + turns * _TWO_PI_MID) + turns * _TWO_PI_HI


def projected_separation_ratio(rng: np.random.Generator, n: int, e: ArrayLike) -> NDArray[np.float64]:
    """Monte Carlo samples of projected separation over semimajor axis, s/a.

    Parameters
    ----------
    rng : numpy.random.Generator
        Source of randomness.
    n : int
        Number of samples.
    e : array_like
        Eccentricities, shape (n,) or scalar (the caller samples them, e.g.
        with ``sample_eccentricity``).

    Returns
    -------
    ndarray, shape (n,)
        s/a for isotropic orientations (cos i uniform, argument of periastron
        uniform) and a uniform mean anomaly (a random moment in time).
    """
    ecc = np.broadcast_to(np.asarray(e, dtype=float), (n,))
    mean_anomaly = rng.uniform(0.0, 2.0 * np.pi, n)
    cos_i = rng.uniform(-1.0, 1.0, n)
    omega = rng.uniform(0.0, 2.0 * np.pi, n)
    E = solve_kepler(mean_anomaly, ecc)
    r_over_a = 1.0 - ecc * np.cos(E)
    nu = 2.0 * np.arctan2(np.sqrt(1.0 + ecc) * np.sin(E / 2.0), np.sqrt(1.0 - ecc) * np.cos(E / 2.0))
    # Line-of-sight component of the unit radius vector is sin(nu + omega) sin i
    # (textbook orbit geometry, e.g. Hilditch 2001, CUP, ch. 2; from memory).
    sin2_i = 1.0 - cos_i**2
    return r_over_a * np.sqrt(1.0 - np.sin(nu + omega) ** 2 * sin2_i)


def sample_eccentricity(rng: np.random.Generator, n: int, distribution: str | float) -> NDArray[np.float64]:
    """Draw n orbital eccentricities.

    Parameters
    ----------
    rng : numpy.random.Generator
        Source of randomness.
    n : int
        Number of samples.
    distribution : {"thermal", "uniform"} or float
        ``"thermal"``: f(e) = 2e, the steady state of a population relaxed by
        encounters (Jeans 1919, MNRAS 79, 408, from memory; the 2e law is
        restated in Jeans 1928, Astronomy and Cosmogony, CUP, section 275,
        checked). ``"uniform"``: f(e) = 1 on [0, 1) (common practice for wide
        pairs). A number in [0, 1): that eccentricity for every sample.

    Returns
    -------
    ndarray, shape (n,)
        Eccentricities in [0, 1).
    """
    if isinstance(distribution, str):
        if distribution == "thermal":
            return np.sqrt(rng.uniform(0.0, 1.0, n))  # inverse CDF of F(e) = e^2
        if distribution == "uniform":
            return rng.uniform(0.0, 1.0, n)
        raise ValueError(
            f"unknown eccentricity distribution {distribution!r}. Fix: use 'thermal', 'uniform' or a number in [0, 1)."
        )
    value = float(distribution)
    if not 0.0 <= value < 1.0:
        raise ValueError(f"eccentricity {value} is outside [0, 1). Fix: give a bound-orbit eccentricity, 0 <= e < 1.")
    return np.full(n, value)
