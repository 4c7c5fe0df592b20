"""Spectroscopic orbits of single-lined binaries: the radial-velocity curve, a
test for variability, a period search, a Keplerian fit, the mass function and
the projected semimajor axis.

Units: times in days (JD, BJD or either minus any constant; floats); radial
velocities, semi-amplitudes and jitter in km/s; period P in days; time of
periastron T in days on the same scale as the data; argument of periastron
omega in degrees, of the observed star's orbit (the companion's is omega + 180);
masses in solar masses.

References: Hilditch, R. W. 2001, An Introduction to Close Binary Stars (CUP),
ch. 2 (the velocity curve, mass function, a1 sin i; from memory); Maxted, P. F. L.,
Heber, U., Marsh, T. R. & North, R. C. 2001, MNRAS 326, 1391 (variability
thresholds; see ``variability``); Lomb 1976, Ap&SS 39, 447; Scargle 1982, ApJ
263, 835; Zechmeister & Kürster 2009, A&A 496, 577 (floating mean); Baluev 2008,
MNRAS 385, 1279 (false-alarm probability); VanderPlas 2018, ApJS 236, 16
(frequency grid). Periodogram references from memory.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, replace
from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import special

from dossier.astro.binary import AU_M, GM_SUN_M3_S2, solve_kepler
from dossier.astro.seeding import seed_from

__all__ = [
    "FOUND",
    "LOG10_P_POSSIBLY_VARIABLE",
    "MAX_PERIOD_SPANS",
    "MIN_PERIOD_DAYS",
    "NOT_DETERMINED",
    "Candidate",
    "Interval",
    "OrbitFit",
    "OrbitSolution",
    "Posterior",
    "LOG10_P_VARIABLE",
    "RSUN_KM",
    "A1SinI",
    "Periodogram",
    "Variability",
    "a1_sin_i",
    "frequency_grid",
    "mass_function",
    "minimum_companion_mass",
    "rv_model",
    "solve_orbit",
    "spectral_window",
    "variability",
    "window_peaks",
]

_TWO_PI = 2.0 * np.pi
_DAY_S = 86_400.0
# Mass function coefficient, M_sun per (km/s)^3 day: P K^3 / (2 pi G M_sun) with
# GM_sun of IAU 2015 B3, = 1.036149e-7. The textbook value is 1.0361e-7
# (Hilditch 2001, ch. 2, eq. 2.53; from memory); the two agree to its digits.
_MASS_FUNCTION_COEFF = _DAY_S * 1e9 / (_TWO_PI * GM_SUN_M3_S2)
# a1 sin i coefficient, km per (km/s) day: 86 400 / (2 pi) = 13 750.987, the
# 1.3751e4 of Hilditch 2001, ch. 2 (from memory).
_A1SINI_KM_COEFF = _DAY_S / _TWO_PI
# IAU 2015 Resolution B3: nominal solar radius, 695 700 km.
RSUN_KM = 695_700.0
_AU_KM = AU_M / 1000.0

# Maxted et al. 2001, MNRAS 326, 1391 (thresholds from memory: the paper was
# found, ar5iv astro-ph/0103342, but its text on them was not): a star is
# variable when the probability of its chi2 about a constant velocity is
# log10 p < -4, possibly variable for -4 <= log10 p < -1.3 (p < 5 %).
LOG10_P_VARIABLE = -4.0
LOG10_P_POSSIBLY_VARIABLE = -1.3

# Eccentricities tried per starting period when seeding the Keplerian fit, and
# periastron phases per period (see ``_seed``).
_SEED_E = np.array([0.0, 0.15, 0.3, 0.45, 0.6, 0.75, 0.9])
_SEED_PHASES = 24
# Default period range of the search: 0.5 d (see ``_period_range``) to three
# times the time span (a longer period shows as a trend, not an orbit).
MIN_PERIOD_DAYS = 0.5
MAX_PERIOD_SPANS = 3.0


# ---------------------------------------------------------------------------
# Velocity curve
# ---------------------------------------------------------------------------


def _true_anomaly(M: NDArray[np.float64], e: NDArray[np.float64]) -> NDArray[np.float64]:
    """True anomaly nu (radians) from the mean anomaly M (radians) through Kepler's equation."""
    E = solve_kepler(M, e)
    # Half-angle form, exact at every E and e < 1 (METHODS.md; Hilditch 2001, ch. 2).
    return 2.0 * np.arctan2(np.sqrt(1.0 + e) * np.sin(E / 2.0), np.sqrt(1.0 - e) * np.cos(E / 2.0))


def _check_e(e: NDArray[np.float64]) -> None:
    if np.any((e < 0.0) | (e >= 1.0)):
        raise ValueError("eccentricity outside [0, 1). Fix: give a bound-orbit eccentricity, 0 <= e < 1.")


def rv_model(
    t: ArrayLike,
    P: ArrayLike,
    K: ArrayLike,
    e: ArrayLike,
    omega_deg: ArrayLike,
    T: ArrayLike,
    gamma: ArrayLike,
) -> NDArray[np.float64]:
    """Radial velocity of the observed star of a Keplerian orbit.

    Parameters
    ----------
    t : array_like
        Times, days.
    P : array_like
        Period, days (> 0).
    K : array_like
        Semi-amplitude, km/s.
    e : array_like
        Eccentricity in [0, 1).
    omega_deg : array_like
        Argument of periastron of the observed star, degrees.
    T : array_like
        Time of a periastron passage, days (same scale as ``t``).
    gamma : array_like
        Systemic velocity, km/s.

    Returns
    -------
    ndarray
        v = gamma + K [cos(nu + omega) + e cos omega] in km/s, all arguments
        broadcast (Hilditch 2001, ch. 2; METHODS.md). Positive = receding.
    """
    t_, P_, K_, e_, w_, T_, g_ = (np.asarray(x, dtype=float) for x in (t, P, K, e, omega_deg, T, gamma))
    _check_e(e_)
    w = np.radians(w_)
    nu = _true_anomaly(_TWO_PI * (t_ - T_) / P_, e_)
    return g_ + K_ * (np.cos(nu + w) + e_ * np.cos(w))


# ---------------------------------------------------------------------------
# Variability
# ---------------------------------------------------------------------------


class Variability(NamedTuple):
    """Result of ``variability``: chi2 of the velocities about their weighted mean.

    ``log10_p`` stays finite where ``p_value`` underflows to 0.
    """

    weighted_mean: float
    chi2: float
    dof: int
    p_value: float
    log10_p: float


def _log_gammaincc_cf(a: float, x: float) -> float:
    """ln Q(a, x), the regularised upper incomplete gamma function, for x > a + 1.

    Continued fraction evaluated by the modified Lentz method (Press et al.
    2007, Numerical Recipes, 3rd ed., section 6.2, ``gcf``; from memory), in
    logarithms so that it holds where Q itself underflows.
    """
    tiny = 1e-300
    b = x + 1.0 - a
    c = 1.0 / tiny
    d = 1.0 / b
    h = d
    for i in range(1, 10_000):
        an = -i * (i - a)
        b += 2.0
        d = an * d + b
        d = tiny if abs(d) < tiny else d
        c = b + an / c
        c = tiny if abs(c) < tiny else c
        d = 1.0 / d
        delta = d * c
        h *= delta
        if abs(delta - 1.0) < 1e-16:
            break
    return -x + a * np.log(x) - float(special.gammaln(a)) + np.log(h)


def variability(v: ArrayLike, sigma: ArrayLike, jitter: float = 0.0) -> Variability:
    """Is a series of radial velocities consistent with a constant velocity?

    Parameters
    ----------
    v : array_like, shape (N,)
        Radial velocities, km/s; N >= 2.
    sigma : array_like
        Their 1-sigma uncertainties, km/s; broadcast to (N,).
    jitter : float
        Extra scatter added in quadrature, km/s (intrinsic to the star, e.g.
        a few hundred m/s for giants); default 0.

    Returns
    -------
    Variability
        The weighted mean (km/s), chi2 = sum((v - mean)^2 / (sigma^2 + jitter^2)),
        dof = N - 1, p = P(chi2' > chi2) for chi2 with dof degrees of freedom
        (``scipy.special.chdtrc``), and log10 p.

    Notes
    -----
    Callers classify with ``LOG10_P_VARIABLE`` (log10 p < -4: variable) and
    ``LOG10_P_POSSIBLY_VARIABLE`` (-4 <= log10 p < -1.3: possibly variable),
    the thresholds of Maxted et al. 2001, MNRAS 326, 1391 (from memory).
    Where p underflows (below 1e-300), log10 p comes from a continued fraction
    for the upper incomplete gamma function instead.
    """
    v_ = np.asarray(v, dtype=float)
    if v_.ndim != 1 or v_.size < 2:
        raise ValueError(f"got {v_.size} velocities. Fix: give at least 2 velocities as a 1-D series.")
    s2 = np.broadcast_to(np.asarray(sigma, dtype=float), v_.shape) ** 2 + float(jitter) ** 2
    if not np.all(s2 > 0):
        raise ValueError("uncertainties must be > 0. Fix: give the 1-sigma errors in km/s, or a jitter > 0.")
    w = 1.0 / s2
    mean = float(np.sum(w * v_) / np.sum(w))
    chi2 = float(np.sum(w * (v_ - mean) ** 2))
    dof = v_.size - 1
    p = float(special.chdtrc(dof, chi2))
    if p > 1e-300:
        log10_p = float(np.log10(p))
    else:
        # chi2 with k dof is a gamma variate: p = Q(k / 2, chi2 / 2).
        log10_p = float(_log_gammaincc_cf(0.5 * dof, 0.5 * chi2) / np.log(10.0))
    return Variability(weighted_mean=mean, chi2=chi2, dof=dof, p_value=p, log10_p=log10_p)


# ---------------------------------------------------------------------------
# Period search
# ---------------------------------------------------------------------------


class Periodogram(NamedTuple):
    """The periodogram searched by ``solve_orbit`` (unpacks as a 4-tuple)."""

    frequency: NDArray[np.float64]
    power: NDArray[np.float64]
    best_period: float
    false_alarm_probability: float

    def top_periods(self, n: int) -> list[float]:
        """Periods (days) of the n highest peaks, best first: starting periods for a fit."""
        return _top_peaks(np.asarray(self.frequency), np.asarray(self.power), n)


def _series(t: ArrayLike, v: ArrayLike, sigma: ArrayLike, jitter: float = 0.0) -> tuple[NDArray, NDArray, NDArray]:
    """Validated 1-D arrays t, v and the effective sigma sqrt(sigma^2 + jitter^2)."""
    t_ = np.asarray(t, dtype=float)
    v_ = np.asarray(v, dtype=float)
    if t_.ndim != 1 or v_.shape != t_.shape:
        raise ValueError(
            f"t and v must be 1-D of one length, got shapes {t_.shape} and {v_.shape}. "
            "Fix: pass one velocity per epoch."
        )
    s_ = np.hypot(np.broadcast_to(np.asarray(sigma, dtype=float), t_.shape), float(jitter))
    if not np.all(s_ > 0):
        raise ValueError("uncertainties must be > 0. Fix: give the 1-sigma errors in km/s.")
    if not (np.all(np.isfinite(t_)) and np.all(np.isfinite(v_)) and np.all(np.isfinite(s_))):
        raise ValueError("t, v or sigma holds NaN or infinity. Fix: drop the incomplete measurements.")
    if np.ptp(t_) <= 0:
        raise ValueError("all epochs are equal. Fix: give velocities at two or more epochs.")
    return t_, v_, s_


def _top_peaks(freq: NDArray[np.float64], power: NDArray[np.float64], n: int) -> list[float]:
    """Periods (days) of the n highest local maxima of the power."""
    padded = np.concatenate(([-np.inf], power, [-np.inf]))
    is_max = (padded[1:-1] >= padded[:-2]) & (padded[1:-1] > padded[2:])
    idx = np.flatnonzero(is_max)
    return [float(1.0 / freq[k]) for k in idx[np.argsort(power[idx])[::-1]][:n]]


# ---------------------------------------------------------------------------
# Keplerian fit
# ---------------------------------------------------------------------------


def _anomaly_terms(
    M: NDArray[np.float64], e: float
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """nu, d nu / d M and d nu / d e at fixed M (radians).

    d nu / d M = (1 + e cos nu)^2 / (1 - e^2)^(3/2) (Kepler's second law) and
    d nu / d e = sin nu (2 + e cos nu) / (1 - e^2) (Murray & Dermott 1999,
    Solar System Dynamics, CUP, ch. 2; from memory; checked against finite
    differences in the tests).
    """
    nu = _true_anomaly(M, np.asarray(e))
    q = 1.0 - e * e
    cn = np.cos(nu)
    return nu, (1.0 + e * cn) ** 2 / q**1.5, np.sin(nu) * (2.0 + e * cn) / q


def _unpack(q: NDArray[np.float64]) -> tuple[float, float, float, float, float, float, float]:
    """(P, K, e, omega [rad], lambda0, gamma, s^2) from the internal parameters.

    Internal parameters: ln P; K (any sign); x = s cos omega and y = s sin omega
    with e = s^2 / (1 + s^2), so every (x, y) is a bound orbit and x, y ~
    sqrt(e) (cos omega, sin omega) for small e; lambda0 = M0 + omega, the mean
    longitude at the reference epoch t0 (defined for circular orbits too); gamma.
    """
    lnP, K, x, y, lam0, gamma = (float(v) for v in q)
    s2 = x * x + y * y
    return float(np.exp(lnP)), K, s2 / (1.0 + s2), float(np.arctan2(y, x)), lam0, gamma, s2


def _model_and_jacobian(
    q: NDArray[np.float64], tc: NDArray[np.float64]
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Velocities at tc = t - t0 and their Jacobian by the internal parameters, shape (N, 6)."""
    P, K, e, w, lam0, gamma, s2 = _unpack(q)
    x, y = float(q[2]), float(q[3])
    n = _TWO_PI / P
    M = n * tc + lam0 - w
    nu, nu_M, nu_e = _anomaly_terms(M, e)
    s, c = np.sin(nu + w), np.cos(nu + w)
    v = gamma + K * (c + e * np.cos(w))
    dv_dM = -K * s * nu_M
    dv_de = -K * s * nu_e + K * np.cos(w)
    # At fixed lambda0 the mean anomaly moves with omega: dM/domega = -1.
    dv_dw = -K * (s + e * np.sin(w)) - dv_dM
    de = 2.0 / (1.0 + s2) ** 2  # de/dx = de * x, de/dy = de * y
    inv_s2 = 1.0 / s2 if s2 > 0 else 0.0  # at e = 0, dv_dw = 0 exactly
    J = np.column_stack(
        [
            dv_dM * (-n * tc),  # by ln P: dM/dlnP = -n tc
            c + e * np.cos(w),
            dv_de * de * x - dv_dw * y * inv_s2,  # domega/dx = -y / s^2
            dv_de * de * y + dv_dw * x * inv_s2,  # domega/dy = x / s^2
            dv_dM,
            np.ones_like(tc),
        ]
    )
    return v, J


def _seed(
    tc: NDArray[np.float64],
    v: NDArray[np.float64],
    wgt: NDArray[np.float64],
    P: float,
    inst: NDArray[np.intp] | None = None,
) -> NDArray[np.float64]:
    """Internal parameters of the best orbit on a grid of e and periastron phase at period P.

    For fixed (P, e, T) the velocity v = gamma_i + A (cos nu + e) + B sin nu is
    linear in (gamma_i, A, B), with A = K cos omega and B = -K sin omega
    (expand cos(nu + omega)) and one gamma_i per instrument (``inst`` gives
    each velocity's instrument index; None = one instrument); solve them by
    weighted least squares at every grid point and keep the lowest chi2.
    Returns (ln P, K, x, y, lambda0, gamma_0, gamma_1, ...).
    """
    inst = np.zeros(tc.size, dtype=np.intp) if inst is None else inst
    n_inst = int(inst.max()) + 1
    M0 = _TWO_PI * np.arange(_SEED_PHASES) / _SEED_PHASES  # mean anomaly at t0
    e = _SEED_E[:, None, None]
    M, e_full = np.broadcast_arrays(_TWO_PI * tc[None, None, :] / P + M0[None, :, None], e)
    nu = _true_anomaly(M, e_full)
    onehot = np.broadcast_to((inst[:, None] == np.arange(n_inst)[None, :]).astype(float), nu.shape + (n_inst,))
    X = np.concatenate([onehot, np.stack([np.cos(nu) + e, np.sin(nu)], axis=-1)], axis=-1)  # (e, phase, N, m+2)
    Xw = X * wgt[:, None]
    A = np.einsum("...ni,...nj->...ij", Xw, X)
    b = np.einsum("...ni,n->...i", Xw, v)
    # A tiny ridge keeps the small systems solvable where a column vanishes.
    ridge = 1e-12 * np.trace(A, axis1=-2, axis2=-1)[..., None, None] * np.eye(n_inst + 2)
    coef = np.linalg.solve(A + ridge, b[..., None])[..., 0]
    chi2 = np.einsum("...n,n->...", (np.einsum("...ni,...i->...n", X, coef) - v) ** 2, wgt)
    ie, ip = np.unravel_index(int(np.argmin(chi2)), chi2.shape)
    gammas, a_, b_ = coef[ie, ip, :n_inst], coef[ie, ip, n_inst], coef[ie, ip, n_inst + 1]
    K, w = float(np.hypot(a_, b_)), float(np.arctan2(-b_, a_))
    e0 = max(float(_SEED_E[ie]), 0.05)  # off e = 0, where the gradient in (x, y) vanishes
    s = np.sqrt(e0 / (1.0 - e0))
    return np.concatenate([[np.log(P), K, s * np.cos(w), s * np.sin(w), float(M0[ip]) + w], gammas])


# ---------------------------------------------------------------------------
# Masses and sizes
# ---------------------------------------------------------------------------


def mass_function(P_days: ArrayLike, K: ArrayLike, e: ArrayLike) -> NDArray[np.float64]:
    """Spectroscopic mass function of a single-lined binary.

    Parameters
    ----------
    P_days : array_like
        Period, days.
    K : array_like
        Semi-amplitude of the observed star, km/s.
    e : array_like
        Eccentricity in [0, 1).

    Returns
    -------
    ndarray
        f(M) = (m2 sin i)^3 / (m1 + m2)^2 = 1.0361e-7 (1 - e^2)^1.5 K^3 P in
        solar masses (Hilditch 2001, ch. 2, eq. 2.53; from memory); the
        coefficient is computed from GM_sun (IAU 2015 B3), 1.036149e-7.
    """
    P, K_, e_ = (np.asarray(x, dtype=float) for x in (P_days, K, e))
    _check_e(e_)
    return _MASS_FUNCTION_COEFF * (1.0 - e_**2) ** 1.5 * np.abs(K_) ** 3 * P


def minimum_companion_mass(f: ArrayLike, m1: ArrayLike) -> NDArray[np.float64]:
    """Smallest companion mass allowed by a mass function (orbit seen edge-on).

    Parameters
    ----------
    f : array_like
        Mass function, solar masses (>= 0).
    m1 : array_like
        Mass of the observed star, solar masses (> 0).

    Returns
    -------
    ndarray
        m2 solving m2^3 / (m1 + m2)^2 = f (sin i = 1; METHODS.md), solar
        masses; NaN where an input is NaN. Vectorised (posterior samples).

    Notes
    -----
    g(m2) = m2^3 / (m1 + m2)^2 rises monotonically from 0 (its derivative is
    m2^2 (m2 + 3 m1) / (m1 + m2)^3 > 0), and g(3 f + 3 m1) > f because
    (3 f + 3 m1) / (m1 + 3 f + 3 m1) >= 3/4: bisection on [0, 3 f + 3 m1],
    halved 110 times, pins the one root to machine precision.
    """
    f_, m1_ = np.broadcast_arrays(np.asarray(f, dtype=float), np.asarray(m1, dtype=float))
    with np.errstate(invalid="ignore"):
        if np.any(f_ < 0) or np.any(m1_ <= 0):
            raise ValueError("mass function < 0 or primary mass <= 0. Fix: give f >= 0 and m1 > 0 in solar masses.")
    lo = np.zeros(f_.shape)
    hi = 3.0 * f_ + 3.0 * m1_
    for _ in range(110):
        mid = 0.5 * (lo + hi)
        above = mid**3 / (m1_ + mid) ** 2 > f_
        hi = np.where(above, mid, hi)
        lo = np.where(above, lo, mid)
    out = np.where(f_ == 0.0, 0.0, 0.5 * (lo + hi))
    return np.where(np.isfinite(f_) & np.isfinite(m1_), out, np.nan)


class A1SinI(NamedTuple):
    """Projected semimajor axis of the observed star's orbit, in two units."""

    au: NDArray[np.float64]
    rsun: NDArray[np.float64]


def a1_sin_i(P_days: ArrayLike, K: ArrayLike, e: ArrayLike) -> A1SinI:
    """Projected semimajor axis a1 sin i of the observed star about the centre of mass.

    Parameters
    ----------
    P_days : array_like
        Period, days.
    K : array_like
        Semi-amplitude, km/s.
    e : array_like
        Eccentricity in [0, 1).

    Returns
    -------
    A1SinI
        a1 sin i = 1.3751e4 sqrt(1 - e^2) K P km (Hilditch 2001, ch. 2; from
        memory; the coefficient is 86 400 / 2 pi), in au (IAU 2012 B2) and in
        nominal solar radii (IAU 2015 B3, 695 700 km).
    """
    P, K_, e_ = (np.asarray(x, dtype=float) for x in (P_days, K, e))
    _check_e(e_)
    km = _A1SINI_KM_COEFF * np.sqrt(1.0 - e_**2) * np.abs(K_) * P
    return A1SinI(au=km / _AU_KM, rsun=km / RSUN_KM)


# ---------------------------------------------------------------------------
# Orbit solution: candidate periods, aliases, instrument offsets, jitter and a
# posterior
# ---------------------------------------------------------------------------

FOUND = "found"
NOT_DETERMINED = "not determined"
_LN10 = float(np.log(10.0))
# Prior bounds of the posterior (see ``solve_orbit``): K in [1 m/s, 1000 km/s],
# e below 0.99 (an orbit this eccentric is sampled only at periastron).
_LN_K_RANGE = (np.log(1e-3), np.log(1e3))
_E_MAX = 0.99
_LN_JITTER_RANGE = (np.log(1e-5), np.log(1e3))


@dataclass(frozen=True)
class Interval:
    """16th, 50th and 84th percentiles of a posterior distribution (a 68 % interval about the median)."""

    q16: float
    q50: float
    q84: float

    @property
    def minus(self) -> float:
        return self.q50 - self.q16

    @property
    def plus(self) -> float:
        return self.q84 - self.q50

    @property
    def half_width(self) -> float:
        return 0.5 * (self.q84 - self.q16)


@dataclass(frozen=True)
class Candidate:
    """One trial period: a periodogram peak or a window-function alias of the top peak, fitted.

    ``start`` is the period the fit started from and ``period`` where it
    converged (days); ``fap`` the Baluev false-alarm probability of the
    periodogram power at ``start``; ``delta_bic`` the candidate's BIC minus
    the best candidate's (every candidate has the same number of parameters,
    so this is the difference of -2 ln L).
    """

    start: float
    period: float
    kind: str
    fap: float
    delta_bic: float


@dataclass(frozen=True)
class OrbitFit:
    """Maximum-likelihood Keplerian orbit with one systemic velocity per instrument and a jitter.

    Units as in the module docstring; ``gamma`` in the order of
    ``OrbitSolution.instruments``; ``jitter`` km/s (maximum a posteriori with
    the stage prior); ``chi2`` uses the fitted jitter, ``dof`` = N - 5 - n_inst;
    ``ln_like`` the Gaussian log-likelihood; ``bic`` = -2 ln L + k ln N with
    k = 5 + n_inst + 1. ``sigma_*`` are the 68 % half-widths of the posterior
    (NaN when no posterior was sampled).
    """

    P: float
    K: float
    e: float
    omega: float
    T: float
    gamma: tuple[float, ...]
    jitter: float
    chi2: float
    dof: int
    ln_like: float
    bic: float
    rms: float
    converged: bool
    sigma_P: float = float("nan")
    sigma_K: float = float("nan")
    sigma_e: float = float("nan")
    sigma_omega: float = float("nan")
    sigma_T: float = float("nan")
    sigma_gamma: tuple[float, ...] = ()


@dataclass(frozen=True)
class Posterior:
    """Summary of the emcee posterior (see ``solve_orbit``).

    Intervals of P (d), K (km/s), e, omega (deg), T (days, the periastron
    nearest the maximum-likelihood one), jitter (km/s), gamma per instrument
    (km/s), the mass function (M_sun) and, with a primary mass, the minimum
    companion mass (M_sun). ``converged`` when the kept chain is at least
    ``50 tau_max`` steps long (emcee documentation, "Autocorrelation analysis
    & convergence"), tau_max the longest integrated autocorrelation time.
    """

    P: Interval
    K: Interval
    e: Interval
    omega: Interval
    T: Interval
    jitter: Interval
    gamma: tuple[Interval, ...]
    mass_function: Interval
    m2_min: Interval | None
    n_walkers: int
    n_steps: int
    n_discard: int
    tau_max: float
    converged: bool
    acceptance: float


@dataclass(frozen=True)
class OrbitSolution:
    """Result of ``solve_orbit``.

    ``status`` is ``FOUND`` or ``NOT_DETERMINED`` (``reasons`` say why);
    ``fap`` is the false-alarm probability of the top periodogram peak;
    ``window_frequencies`` the peaks (1/d) of the spectral window used for the
    alias check; ``candidates`` every trial period, best fit first; ``fit``
    the best one; ``log10_p_adequacy`` the log10 p-value of its chi2 with the
    stage jitter widened by the tolerance; ``bic_constant`` the BIC of a
    constant velocity per instrument with a jitter; ``log10_bayes_factor``
    (BIC_constant - BIC_orbit) / (2 ln 10); ``posterior`` the emcee summary
    (None when the period is not determined before sampling).
    """

    status: str
    reasons: tuple[str, ...]
    instruments: tuple[str, ...]
    periodogram: Periodogram
    fap: float
    window_frequencies: tuple[float, ...]
    candidates: tuple[Candidate, ...]
    fit: OrbitFit | None
    log10_p_adequacy: float
    bic_constant: float
    log10_bayes_factor: float
    posterior: Posterior | None

    @property
    def found(self) -> bool:
        return self.status == FOUND

    def to_json(self) -> dict:
        """A JSON-ready dict (floats, lists), read back by ``from_json``."""
        d = asdict(self)
        pg = self.periodogram
        d["periodogram"] = [np.asarray(pg.frequency).tolist(), np.asarray(pg.power).tolist(),
                            float(pg.best_period), float(pg.false_alarm_probability)]
        return d

    @classmethod
    def from_json(cls, d: dict) -> OrbitSolution:
        freq, power, best, fap = d["periodogram"]
        post = d["posterior"]
        if post is not None:
            iv = {k: Interval(*v.values()) if isinstance(v, dict) else v for k, v in post.items()}
            iv["gamma"] = tuple(Interval(*g.values()) for g in post["gamma"])
            post = Posterior(**iv)
        fit = d["fit"]
        return cls(
            status=d["status"],
            reasons=tuple(d["reasons"]),
            instruments=tuple(d["instruments"]),
            periodogram=Periodogram(np.array(freq), np.array(power), float(best), float(fap)),
            fap=float(d["fap"]),
            window_frequencies=tuple(d["window_frequencies"]),
            candidates=tuple(Candidate(**c) for c in d["candidates"]),
            fit=None if fit is None else OrbitFit(**{**fit, "gamma": tuple(fit["gamma"]),
                                                     "sigma_gamma": tuple(fit["sigma_gamma"])}),
            log10_p_adequacy=float(d["log10_p_adequacy"]),
            bic_constant=float(d["bic_constant"]),
            log10_bayes_factor=float(d["log10_bayes_factor"]),
            posterior=post,
        )


def frequency_grid(
    t: ArrayLike, min_period: float = MIN_PERIOD_DAYS, span_multiple: float = MAX_PERIOD_SPANS,
    samples_per_peak: int = 10,
) -> NDArray[np.float64]:
    """Trial frequencies (1/day, ascending) of a period search.

    From 1 / (span_multiple x time span) to 1 / min_period, evenly spaced
    with ``samples_per_peak`` steps across a peak's width 1 / span (VanderPlas
    2018, ApJS 236, 16, section 7.1; the rule of astropy's
    ``LombScargle.autofrequency``).
    """
    t_ = np.asarray(t, dtype=float)
    span = float(np.ptp(t_))
    f_lo, f_hi = 1.0 / (span_multiple * span), 1.0 / min_period
    if not 0 < f_lo < f_hi:
        raise ValueError("empty period range. Fix: give min_period > 0 below span_multiple times the time span.")
    df = 1.0 / (samples_per_peak * span)
    return f_lo + df * np.arange(int(np.floor((f_hi - f_lo) / df)) + 1)


def spectral_window(t: ArrayLike, frequency: ArrayLike) -> NDArray[np.float64]:
    """Spectral window of the sampling times, |sum_k exp(2 pi i f t_k)|^2 / N^2 (0 to 1).

    The periodogram of a pure sinusoid of frequency f0 is, roughly, the
    window shifted to +-f0: a peak of the window at f_w puts aliases at
    f0 +- f_w (Deeming 1975, Ap&SS 36, 137; Dawson & Fabrycky 2010, ApJ 722,
    937, section 2; from memory).
    """
    t_ = np.asarray(t, dtype=float)
    f = np.asarray(frequency, dtype=float)
    tc = t_ - t_.mean()
    out = np.empty(f.shape)
    for a in range(0, f.size, 4096):  # in blocks: N x 4096 phases at a time
        ph = _TWO_PI * np.outer(f[a:a + 4096], tc)
        out[a:a + 4096] = (np.cos(ph).sum(axis=1) ** 2 + np.sin(ph).sum(axis=1) ** 2) / tc.size**2
    return out


def window_peaks(t: ArrayLike, frequency: ArrayLike, n: int) -> list[float]:
    """Frequencies (1/d) of the n highest local maxima of the spectral window beyond its central lobe.

    Only f > 1.5 / span counts: the central lobe (width ~1 / span) and its
    first side lobes would make aliases within one peak width of the peak
    itself.
    """
    t_ = np.asarray(t, dtype=float)
    f = np.asarray(frequency, dtype=float)
    f = f[f > 1.5 / float(np.ptp(t_))]
    if f.size < 3 or n <= 0:
        return []
    w = spectral_window(t_, f)
    return [1.0 / p for p in _top_peaks(f, w, n)]


def _instrument_index(instrument: ArrayLike | None, n: int) -> tuple[NDArray[np.intp], tuple[str, ...]]:
    """Index of each velocity's instrument, in order of first appearance; None or '' = one default."""
    if instrument is None:
        return np.zeros(n, dtype=np.intp), ("",)
    names = [str(x or "") for x in instrument]
    if len(names) != n:
        raise ValueError(f"{len(names)} instruments for {n} velocities. Fix: give one instrument per velocity.")
    order = tuple(dict.fromkeys(names))
    idx = np.array([order.index(x) for x in names], dtype=np.intp)
    return idx, order


def _ml_jitter(r2: NDArray, s2: NDArray, ln_s0: float, prior_w: float) -> float:
    """Jitter (km/s) maximising the Gaussian likelihood of residuals r times the log-normal stage prior."""
    from scipy.optimize import minimize_scalar

    def nlp(u: float) -> float:
        var = s2 + np.exp(2.0 * u)
        return float(np.sum(r2 / var + np.log(var))) + ((u - ln_s0) / prior_w) ** 2

    res = minimize_scalar(nlp, bounds=_LN_JITTER_RANGE, method="bounded", options={"xatol": 1e-4})
    return float(np.exp(res.x))


def _neg2_ln_like(r: NDArray, s2: NDArray, jitter: float) -> float:
    var = s2 + jitter**2
    return float(np.sum(r**2 / var + np.log(_TWO_PI * var)))


def _constant_fit(v: NDArray, s2: NDArray, inst: NDArray, n_inst: int, ln_s0: float, prior_w: float
                  ) -> tuple[NDArray, float, float]:
    """One velocity per instrument and a jitter: (gammas, jitter, -2 ln L)."""
    jit = float(np.exp(ln_s0))
    for _ in range(20):
        w = 1.0 / (s2 + jit**2)
        g = np.bincount(inst, w * v, n_inst) / np.bincount(inst, w, n_inst)
        new = _ml_jitter((v - g[inst]) ** 2, s2, ln_s0, prior_w)
        done = abs(np.log(new / jit)) < 1e-3
        jit = new
        if done:
            break
    return g, jit, _neg2_ln_like(v - g[inst], s2, jit)


def _fit_with_offsets(tc: NDArray, v: NDArray, s2: NDArray, inst: NDArray, n_inst: int, P0: float,
                      ln_s0: float, prior_w: float) -> tuple[NDArray, float, bool]:
    """Keplerian with per-instrument gammas and a jitter, from starting period P0.

    Alternates weighted least squares of the orbit at fixed jitter
    (``scipy.optimize.least_squares``, analytic Jacobian, internal parameters
    of ``_unpack`` with the gammas appended) with the jitter of greatest
    posterior density at fixed orbit. Returns (internal parameters, jitter,
    converged).
    """
    from scipy.optimize import least_squares

    onehot = (inst[:, None] == np.arange(n_inst)[None, :]).astype(float)
    jit = float(np.exp(ln_s0))
    q = _seed(tc, v, 1.0 / (s2 + jit**2), P0, inst)
    ok = False
    for _ in range(4):
        sig = np.sqrt(s2 + jit**2)
        last: dict[bytes, tuple[NDArray, NDArray]] = {}

        def cached(q: NDArray) -> tuple[NDArray, NDArray]:
            key = q.tobytes()
            if key not in last:
                last.clear()
                m, J = _model_and_jacobian(np.r_[q[:5], 0.0], tc)
                last[key] = (m + q[5:][inst], np.hstack([J[:, :5], onehot]))
            return last[key]

        res = least_squares(lambda q: (cached(q)[0] - v) / sig, q, jac=lambda q: cached(q)[1] / sig[:, None],
                            method="trf", x_scale="jac", xtol=1e-10, ftol=1e-10, gtol=1e-10, max_nfev=100)
        q, ok = res.x, bool(res.success)
        new = _ml_jitter((cached(q)[0] - v) ** 2, s2, ln_s0, prior_w)
        done = abs(np.log(new / jit)) < 0.01
        jit = new
        if done:
            break
    return q, jit, ok


def _elements(q: NDArray, t0: float) -> tuple[float, float, float, float, float, float]:
    """(P, K >= 0, e, omega [rad], T [nearest t0], lambda0 consistent with K >= 0) from internal parameters."""
    P, K, e, w, lam0, _, _ = _unpack(np.r_[q[:5], 0.0])
    if K < 0:  # (-K, omega) is the orbit (K, omega + 180 deg) at the same mean anomaly
        K, w, lam0 = -K, w + np.pi, lam0 + np.pi
    M0 = lam0 - w
    T = t0 - P * M0 / _TWO_PI
    T = T - P * np.round((T - t0) / P)
    return P, K, e, float(w % _TWO_PI), float(T), float(lam0)


class _LogPosterior:
    """Vectorised log posterior of theta = (ln P, ln K, sqrt(e) cos w, sqrt(e) sin w, lambda0, gamma_i..., ln s)."""

    def __init__(self, tc, v, s2, inst, n_inst, ln_p_range, ln_s0, prior_w):
        self.tc, self.v, self.s2, self.inst, self.n_inst = tc, v, s2, inst, n_inst
        self.ln_p_range, self.ln_s0, self.prior_w = ln_p_range, ln_s0, prior_w

    def model(self, th: NDArray) -> NDArray:
        lnP, lnK, a, b, lam = th[:, 0], th[:, 1], th[:, 2], th[:, 3], th[:, 4]
        e = np.minimum(a * a + b * b, _E_MAX)[:, None]
        w = np.arctan2(b, a)[:, None]
        M = _TWO_PI * self.tc[None, :] / np.exp(lnP)[:, None] + (lam[:, None] - w)
        E = solve_kepler(M, e)
        cE, sE = np.cos(E), np.sin(E)
        den = 1.0 - e * cE
        cw, sw = np.cos(w), np.sin(w)
        shape = cw * (cE - e) / den - sw * np.sqrt(1.0 - e * e) * sE / den + e * cw
        return th[:, 5:5 + self.n_inst][:, self.inst] + np.exp(lnK)[:, None] * shape

    def __call__(self, th: NDArray) -> NDArray:
        th = np.atleast_2d(th)
        lnP, lnK, e = th[:, 0], th[:, 1], th[:, 2] ** 2 + th[:, 3] ** 2
        lns = th[:, -1]
        ok = ((lnP >= self.ln_p_range[0]) & (lnP <= self.ln_p_range[1]) & (lnK >= _LN_K_RANGE[0])
              & (lnK <= _LN_K_RANGE[1]) & (e < _E_MAX) & (lns > _LN_JITTER_RANGE[0]) & (lns < _LN_JITTER_RANGE[1]))
        out = np.full(th.shape[0], -np.inf)
        if ok.any():
            t = th[ok]
            var = self.s2[None, :] + np.exp(2.0 * t[:, -1])[:, None]
            r = self.v[None, :] - self.model(t)
            ll = -0.5 * np.sum(r * r / var + np.log(var), axis=1)
            out[ok] = ll - 0.5 * ((t[:, -1] - self.ln_s0) / self.prior_w) ** 2
        return out


def _interval(x: NDArray) -> Interval:
    q = np.percentile(x, [16.0, 50.0, 84.0])
    return Interval(float(q[0]), float(q[1]), float(q[2]))


def _sample_posterior(lp: _LogPosterior, theta0: NDArray, t0: float, T_ml: float, omega_ml: float, *,
                      n_walkers: int, n_steps: int, max_steps: int, seed: int, m1: float | None,
                      sigma_m1: float) -> Posterior:
    import emcee

    rng = np.random.default_rng(seed)
    ndim = theta0.size
    # Starting ball: the Fisher covariance of the orbit and gammas at the best fit,
    # 0.1 in ln s (the jitter is weakly constrained); walkers drawn outside the
    # prior are pulled back to the best fit.
    h = np.maximum(1e-6, 1e-6 * np.abs(theta0))
    J = np.empty((lp.tc.size, ndim - 1))
    for k in range(ndim - 1):
        up, dn = theta0.copy(), theta0.copy()
        up[k] += h[k]
        dn[k] -= h[k]
        J[:, k] = (lp.model(up[None])[0] - lp.model(dn[None])[0]) / (2 * h[k])
    var = lp.s2 + np.exp(2 * theta0[-1])
    F = J.T @ (J / var[:, None])
    try:
        cov = np.linalg.inv(F + 1e-10 * np.trace(F) * np.eye(ndim - 1))
        L = np.linalg.cholesky(0.5 * (cov + cov.T))
    except np.linalg.LinAlgError:
        L = np.diag(1e-4 * np.maximum(1.0, np.abs(theta0[:-1])))
    p0 = np.empty((n_walkers, ndim))
    p0[:, :-1] = theta0[:-1] + 0.3 * rng.standard_normal((n_walkers, ndim - 1)) @ L.T
    p0[:, -1] = theta0[-1] + 0.1 * rng.standard_normal(n_walkers)
    # Every walker must start inside the prior's support: one at zero density never moves (emcee
    # compares -inf with -inf) and would stay in the chain. Redraw those outside, in a ball shrinking
    # towards the best fit (which is inside by construction).
    if not np.isfinite(lp(theta0[None])[0]):
        raise ValueError("the best fit lies outside the prior. Fix: widen the period or jitter range.")
    scale = 1.0
    for _ in range(60):
        bad = ~np.isfinite(lp(p0))
        if not bad.any():
            break
        scale *= 0.5
        nb = int(bad.sum())
        p0[bad, :-1] = theta0[:-1] + 0.3 * scale * rng.standard_normal((nb, ndim - 1)) @ L.T
        p0[bad, -1] = theta0[-1] + 0.1 * scale * rng.standard_normal(nb)
    else:
        raise ValueError("could not start the sampler inside the prior. Fix: widen the period or jitter range.")
    # Differential-evolution moves suit a near-Gaussian, correlated posterior
    # (emcee documentation, "Moves"; Ter Braak 2006, Stat. Comput. 16, 239; from
    # memory): on these orbits their autocorrelation time is ~25 steps against
    # ~80 for the default stretch move (measured while writing this).
    sampler = emcee.EnsembleSampler(n_walkers, ndim, lp, vectorize=True, moves=emcee.moves.DEMove())
    sampler.random_state = np.random.RandomState(seed % 2**32).get_state()
    sampler.run_mcmc(p0, n_steps, progress=False)
    while True:
        # A walker that (almost) never moves is stranded in a pocket of low probability and would bias the
        # intervals: such walkers are left out of the chain (pruning of stranded walkers, Hou, F. et al.
        # 2012, ApJ 745, 198, sect. 3; from memory), keeping at least half of them.
        acc = sampler.acceptance_fraction
        alive = acc >= 0.2 * float(np.median(acc))
        if alive.sum() < n_walkers // 2:
            alive[:] = True
        chain = sampler.get_chain()[:, alive, :]
        # The walkers start in a ball about the optimum, so burn-in is short:
        # discard the first quarter (at least ~10 tau in a converged chain).
        discard = chain.shape[0] // 4
        with np.errstate(invalid="ignore", divide="ignore"):  # a parameter constant along one walker
            tau = emcee.autocorr.integrated_time(chain[discard:], tol=0)
        tau_max = float(np.nanmax(tau)) if np.isfinite(tau).any() else float("inf")
        converged = bool(chain.shape[0] - discard >= 50.0 * tau_max)
        if converged or chain.shape[0] >= max_steps:
            break
        sampler.run_mcmc(None, min(n_steps, max_steps - chain.shape[0]), progress=False)
    flat = chain[discard:].reshape(-1, ndim)
    P = np.exp(flat[:, 0])
    K = np.exp(flat[:, 1])
    e = flat[:, 2] ** 2 + flat[:, 3] ** 2
    w = np.arctan2(flat[:, 3], flat[:, 2])
    lam = flat[:, 4]
    T = t0 - P * (lam - w) / _TWO_PI
    T = T - P * np.round((T - T_ml) / P)
    w_deg = np.degrees(w)
    w_deg = w_deg - 360.0 * np.round((w_deg - omega_ml) / 360.0)  # the turn of the best fit
    fM = mass_function(P, K, e)
    m2 = None
    if m1 is not None and np.isfinite(m1) and m1 > 0:
        k = np.linspace(0, flat.shape[0] - 1, min(flat.shape[0], 4000)).astype(int)
        m1s = m1 + (sigma_m1 if np.isfinite(sigma_m1) else 0.0) * rng.standard_normal(k.size)
        m1s = np.where(m1s > 0.05 * m1, m1s, 0.05 * m1)  # a normal error truncated far below the mass
        m2 = _interval(minimum_companion_mass(fM[k], m1s))
    return Posterior(
        P=_interval(P), K=_interval(K), e=_interval(e), omega=_interval(w_deg), T=_interval(T),
        jitter=_interval(np.exp(flat[:, -1])),
        gamma=tuple(_interval(flat[:, 5 + i]) for i in range(ndim - 6)),
        mass_function=_interval(fM), m2_min=m2, n_walkers=n_walkers, n_steps=int(chain.shape[0]),
        n_discard=int(discard), tau_max=tau_max, converged=converged,
        acceptance=float(np.mean(sampler.acceptance_fraction[alive])),
    )


def solve_orbit(
    t: ArrayLike,
    v: ArrayLike,
    sigma: ArrayLike,
    instrument: ArrayLike | None = None,
    *,
    stage_jitter: float = 0.005,
    jitter_prior_dex: float = 1.0,
    jitter_tolerance: float = 3.0,
    min_period: float = MIN_PERIOD_DAYS,
    span_multiple: float = MAX_PERIOD_SPANS,
    samples_per_peak: int = 10,
    n_peaks: int = 5,
    n_window_peaks: int = 3,
    max_fap: float = 1e-2,
    alias_delta_bic: float = 10.0,
    min_log10_p_adequacy: float = -3.0,
    max_period_rel_error: float = 0.003,
    min_dof: int = 5,
    n_walkers: int = 32,
    n_steps: int = 1800,
    max_steps: int = 3600,
    m1: float | None = None,
    sigma_m1: float = 0.0,
    seed: int | None = None,
) -> OrbitSolution:
    """Period search, alias check, Keplerian fit with instrument offsets and jitter, and posterior.

    Parameters
    ----------
    t, v, sigma : array_like, shape (N,)
        Times (days), radial velocities and their 1-sigma errors (km/s).
    instrument : sequence of str, optional
        Instrument of each velocity; each gets its own systemic velocity
        (zero point). None or '' = one default instrument.
    stage_jitter : float
        Jitter expected for the star's evolutionary stage, km/s: the median
        of the log-normal prior on the jitter, and the reference of the
        adequacy check.
    jitter_prior_dex : float
        Width (1 sigma, dex) of that log-normal prior.
    jitter_tolerance : float
        The adequacy check allows a jitter up to this multiple of ``stage_jitter``.
    min_period, span_multiple, samples_per_peak
        Frequency grid (``frequency_grid``): shortest period (days), longest
        period as a multiple of the time span, samples per peak width.
    n_peaks : int
        Periodogram peaks fitted as candidates.
    n_window_peaks : int
        Peaks of the spectral window whose aliases of the top peak are fitted.
    max_fap : float
        The top peak's false-alarm probability must be below this.
    alias_delta_bic : float
        A candidate at another period (more than half a peak width away)
        within this BIC of the best makes the period ambiguous.
    min_log10_p_adequacy : float
        The fit is adequate when log10 p of its chi2 (errors widened by
        ``jitter_tolerance`` x ``stage_jitter``, N - 5 - n_inst degrees of
        freedom) is at least this.
    max_period_rel_error : float
        The 68 % half-width of the posterior period over its median must be
        below this (0.003: a 1 % error is then more than 3 sigma).
    min_dof : int
        Degrees of freedom the fit must leave (N - 5 - n_inst): with fewer,
        an eccentric orbit at a wrong period can pass through nearly every
        velocity, and no test of adequacy has power.
    n_walkers, n_steps, max_steps : int
        emcee ensemble size, steps per run and the most steps in all.
    m1, sigma_m1 : float, optional
        Primary mass and its 1-sigma error (M_sun), for the minimum companion mass.
    seed : int, optional
        Seed of the sampler; default a hash of the inputs (deterministic).

    Returns
    -------
    OrbitSolution

    Notes
    -----
    1. Generalised Lomb-Scargle periodogram (astropy, floating mean, errors
       widened by the stage jitter) on ``frequency_grid``; false-alarm
       probability of the top peak by Baluev 2008, MNRAS 385, 1279
       (``method="baluev"``).
    2. Candidates: the ``n_peaks`` highest peaks, the aliases f0 +- f_w of
       the top peak f0 for the ``n_window_peaks`` highest peaks f_w of the
       spectral window (Dawson & Fabrycky 2010, ApJ 722, 937), and 1/2, 2
       and 3 times the top peak's period (an eccentric orbit puts much of its
       power at harmonics of its frequency; common practice), and five
       periods from half the span to the longest searched (an eccentric
       orbit longer than the data makes no clear peak). Each is fitted
       (``_fit_with_offsets``); all have the same parameters, so the BIC
       (Schwarz 1978, Ann. Stat. 6, 461) ranks them by likelihood.
    3. Status ``FOUND`` when: FAP < ``max_fap``; no candidate at another
       period within ``alias_delta_bic``; at least ``min_dof`` degrees of
       freedom; the chi2 test of adequacy passes; the posterior sampler
       converged; and the posterior period is precise to
       ``max_period_rel_error``.
       Otherwise ``NOT_DETERMINED`` with the reasons.
    4. Posterior (only when 1-3 pass): emcee (Foreman-Mackey et al. 2013,
       PASP 125, 306), vectorised over walkers, in theta = (ln P, ln K,
       sqrt(e) cos w, sqrt(e) sin w, lambda0 = mean longitude at the middle
       epoch, gamma per instrument, ln jitter). Priors: ln P uniform over the
       searched range; ln K uniform on [ln 1 m/s, ln 1000 km/s]; (sqrt(e) cos w,
       sqrt(e) sin w) uniform in the disc e < 0.99 (e and w uniform);
       lambda0 uniform (periodic); gamma uniform; ln jitter normal about
       ln ``stage_jitter`` with ``jitter_prior_dex`` x ln 10. Likelihood:
       Gaussian with variance sigma^2 + jitter^2. The chain is started in a
       ball from the Fisher covariance at the best fit, the first quarter is
       discarded, and it is extended up to ``max_steps`` until it is 50
       autocorrelation times long.
    """
    t_, v_, s_ = _series(t, v, sigma)
    n = t_.size
    inst, names = _instrument_index(instrument, n)
    n_inst = len(names)
    k_orbit = 5 + n_inst + 1
    if n < k_orbit + 2:
        raise ValueError(f"{n} velocities cannot fix {k_orbit} parameters. Fix: give at least {k_orbit + 2}.")
    if seed is None:
        seed = seed_from(t_, v_, s_, inst, [stage_jitter, jitter_prior_dex, min_period, span_multiple]).entropy
    s2 = s_**2
    ln_s0, prior_w = float(np.log(stage_jitter)), jitter_prior_dex * _LN10
    t0 = 0.5 * (float(t_.max()) + float(t_.min()))
    tc = t_ - t0
    span = float(np.ptp(t_))

    # 1. periodogram (astropy's generalised Lomb-Scargle) and Baluev FAP
    from astropy.timeseries import LombScargle

    freq = frequency_grid(t_, min_period, span_multiple, samples_per_peak)
    s_eff = np.sqrt(s2 + stage_jitter**2)
    ls = LombScargle(t_, v_, s_eff, fit_mean=True, center_data=True)
    power = ls.power(freq)
    k_top = int(np.argmax(power))
    f_lo, f_hi = float(freq[0]), float(freq[-1])

    def fap_of(pw: NDArray) -> NDArray:
        return np.asarray(ls.false_alarm_probability(pw, method="baluev", minimum_frequency=f_lo,
                                                     maximum_frequency=f_hi), dtype=float)

    fap_top = float(fap_of(power[k_top]))
    pg = Periodogram(freq, power, float(1.0 / freq[k_top]), fap_top)

    # 2. candidates: periodogram peaks and window aliases of the top peak
    starts: list[tuple[float, str]] = [(p, "peak") for p in _top_peaks(freq, power, n_peaks)]
    wfreq = window_peaks(t_, freq, n_window_peaks)
    f0 = float(freq[k_top])
    # long periods: an eccentric orbit longer than the data puts little power in any peak, so it is started
    # from a few periods between half the span and the longest searched
    longs = np.geomspace(0.5 * span, 1.0 / f_lo, 5) if 1.0 / f_lo > 0.5 * span else np.array([])
    for fa, kind in [(f, "alias") for fw in wfreq for f in (f0 + fw, abs(f0 - fw))] + \
            [(f0 * h, "harmonic") for h in (2.0, 0.5, 1.0 / 3.0)] + [(1.0 / p, "long period") for p in longs]:
        if f_lo <= fa <= f_hi and all(abs(fa - 1.0 / p) > 0.5 / span for p, _ in starts):
            starts.append((1.0 / fa, kind))
    fits = []
    for P0, kind in starts:
        # a start far from any orbit can wander towards P -> infinity before it stops: that fit loses on
        # its BIC, and the overflow on the way is no news for the user
        with np.errstate(over="ignore", invalid="ignore"):
            q, jit, ok = _fit_with_offsets(tc, v_, s2, inst, n_inst, P0, ln_s0, prior_w)
        m, _ = _model_and_jacobian(np.r_[q[:5], 0.0], tc)
        r = v_ - (m + q[5:][inst])
        n2ll = _neg2_ln_like(r, s2, jit)
        fits.append((n2ll + k_orbit * np.log(n), q, jit, ok, r, P0, kind))
    order = sorted(range(len(fits)), key=lambda i: fits[i][0])
    best = fits[order[0]]
    bic_best, q, jit, ok, resid, _, _ = best
    P, K, e, w, T, lam0 = _elements(q, t0)
    cand_power = np.interp(1.0 / np.array([f[5] for f in fits]), freq, power)
    cand_fap = fap_of(cand_power)
    candidates = tuple(
        Candidate(start=float(fits[i][5]), period=float(np.exp(fits[i][1][0])), kind=fits[i][6],
                  fap=float(cand_fap[i]), delta_bic=float(fits[i][0] - bic_best))
        for i in order
    )
    chi2 = float(np.sum(resid**2 / (s2 + jit**2)))
    dof = n - 5 - n_inst
    fit = OrbitFit(P=P, K=K, e=e, omega=float(np.degrees(w)), T=T, gamma=tuple(float(g) for g in q[5:]),
                   jitter=jit, chi2=chi2, dof=dof, ln_like=-0.5 * (bic_best - k_orbit * np.log(n)), bic=bic_best,
                   rms=float(np.sqrt(np.mean(resid**2))), converged=ok)
    _, _, n2ll_const = _constant_fit(v_, s2, inst, n_inst, ln_s0, prior_w)
    bic_const = n2ll_const + (n_inst + 1) * np.log(n)
    log10_bf = float((bic_const - bic_best) / (2.0 * _LN10))

    # 3. the gates
    reasons = []
    if not fap_top < max_fap:
        reasons.append(f"the highest periodogram peak has a false-alarm probability of {fap_top:.2g} "
                       f"(needs < {max_fap:g})")
    rivals = [c for c in candidates[1:]
              if c.delta_bic < alias_delta_bic and abs(1.0 / c.period - 1.0 / P) > 0.5 / span]
    if rivals:
        c = rivals[0]
        reasons.append(f"the period is ambiguous: {c.period:.6g} d ({c.kind}) fits almost as well "
                       f"(ΔBIC = {c.delta_bic:.1f} < {alias_delta_bic:g})")
    if dof < min_dof:
        reasons.append(f"{n} velocities leave {dof} degrees of freedom beyond the orbit's {5 + n_inst} parameters "
                       f"(needs {min_dof}): too few to test whether the orbit fits")
    chi2_stage = float(np.sum(resid**2 / (s2 + (jitter_tolerance * stage_jitter) ** 2)))
    log10_p = _log10_chi2_sf(chi2_stage, dof)
    if not log10_p >= min_log10_p_adequacy:
        reasons.append(f"the best orbit does not fit: χ² = {chi2_stage:.1f} for {dof} dof with a jitter of "
                       f"{jitter_tolerance * stage_jitter:g} km/s (log10 p = {log10_p:.1f}); fitted jitter "
                       f"{jit:.3g} km/s, residual rms {fit.rms:.3g} km/s")
    posterior = None
    if not reasons:
        lp = _LogPosterior(tc, v_, s2, inst, n_inst, (np.log(freq[-1] ** -1), np.log(freq[0] ** -1)), ln_s0,
                           prior_w)
        se = np.sqrt(e)
        theta0 = np.r_[np.log(P), np.log(max(K, 1.01e-3)), se * np.cos(w), se * np.sin(w), lam0, q[5:],
                       np.log(jit)]
        # inside the prior's support, so that no walker starts at zero density
        theta0[0] = np.clip(theta0[0], lp.ln_p_range[0] + 1e-9, lp.ln_p_range[1] - 1e-9)
        theta0[1] = np.clip(theta0[1], _LN_K_RANGE[0] + 1e-6, _LN_K_RANGE[1] - 1e-6)
        theta0[2:4] *= min(1.0, np.sqrt(0.98) / max(np.hypot(theta0[2], theta0[3]), 1e-300))
        theta0[-1] = np.clip(theta0[-1], _LN_JITTER_RANGE[0] + 1e-3, _LN_JITTER_RANGE[1] - 1e-3)
        posterior = _sample_posterior(lp, theta0, t0, T, float(np.degrees(w)), n_walkers=n_walkers,
                                      n_steps=n_steps, max_steps=max_steps, seed=seed, m1=m1, sigma_m1=sigma_m1)
        fit = replace(fit, sigma_P=posterior.P.half_width, sigma_K=posterior.K.half_width,
                      sigma_e=posterior.e.half_width, sigma_omega=posterior.omega.half_width,
                      sigma_T=posterior.T.half_width, sigma_gamma=tuple(g.half_width for g in posterior.gamma))
        rel = posterior.P.half_width / posterior.P.q50
        if not posterior.converged:
            reasons.append(f"the posterior sampler did not converge ({posterior.n_steps} steps against an "
                           f"autocorrelation time of {posterior.tau_max:.0f}): the period and its interval "
                           "cannot be trusted")
        if not rel < max_period_rel_error:
            reasons.append(f"the period is known only to ±{100 * rel:.2g} % (68 %; needs < "
                           f"{100 * max_period_rel_error:g} %)")
    return OrbitSolution(
        status=NOT_DETERMINED if reasons else FOUND, reasons=tuple(reasons), instruments=names, periodogram=pg,
        fap=fap_top, window_frequencies=tuple(float(x) for x in wfreq), candidates=candidates, fit=fit,
        log10_p_adequacy=float(log10_p), bic_constant=float(bic_const), log10_bayes_factor=log10_bf,
        posterior=posterior,
    )


def _log10_chi2_sf(chi2: float, dof: int) -> float:
    """log10 of P(chi2' > chi2) for dof degrees of freedom (scipy; continued fraction where it underflows)."""
    if dof <= 0:
        return 0.0
    p = float(special.chdtrc(dof, chi2))
    if p > 1e-300:
        return float(np.log10(p))
    return float(_log_gammaincc_cf(0.5 * dof, 0.5 * chi2) / _LN10)
