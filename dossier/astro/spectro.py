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

from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import special

from dossier.astro.binary import AU_M, GM_SUN_M3_S2, solve_kepler

__all__ = [
    "LOG10_P_POSSIBLY_VARIABLE",
    "LOG10_P_VARIABLE",
    "RSUN_KM",
    "A1SinI",
    "KeplerFit",
    "Periodogram",
    "Variability",
    "a1_sin_i",
    "fit_keplerian",
    "mass_function",
    "mass_function_uncertainty",
    "minimum_companion_mass",
    "periodogram",
    "rv_model",
    "variability",
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
_N_ELEMENTS = 6


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
    """Result of ``periodogram`` (unpacks as a 4-tuple)."""

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


def _period_range(t: NDArray[np.float64], min_period: float | None, max_period: float | None) -> tuple[float, float]:
    span = float(np.ptp(t))
    if min_period is None:
        gaps = np.diff(np.unique(t))
        # 1.5 d, or twice the smallest spacing of the epochs where that is
        # longer: no pair of epochs samples a shorter period twice per cycle
        # (the pseudo-Nyquist limit of uneven sampling discussed by VanderPlas
        # 2018, ApJS 236, 16; from memory). The floor keeps the grid small
        # when two spectra were taken minutes apart; search shorter periods by
        # giving min_period.
        min_period = max(1.5, 2.0 * float(gaps.min()))
    if max_period is None:
        max_period = 3.0 * span
    if not 0 < min_period < max_period:
        raise ValueError(
            f"period range [{min_period:g}, {max_period:g}] d is empty. Fix: give 0 < min_period < max_period."
        )
    return float(min_period), float(max_period)


def periodogram(
    t: ArrayLike,
    v: ArrayLike,
    sigma: ArrayLike,
    min_period: float | None = None,
    max_period: float | None = None,
    samples_per_peak: int = 10,
) -> Periodogram:
    """Generalised (floating-mean) Lomb-Scargle periodogram of radial velocities.

    Parameters
    ----------
    t : array_like, shape (N,)
        Times, days.
    v : array_like, shape (N,)
        Radial velocities, km/s.
    sigma : array_like
        1-sigma uncertainties, km/s (> 0; add any jitter in quadrature first).
    min_period : float, optional
        Shortest trial period, days. Default: 1.5 d, or twice the smallest
        spacing of the epochs where that is longer (give a shorter one to
        search for close binaries).
    max_period : float, optional
        Longest trial period, days. Default: 3 times the time span.
    samples_per_peak : int
        Frequency samples across the width 1 / span of a peak.

    Returns
    -------
    Periodogram
        ``frequency`` (1/day, ascending), ``power`` (standard normalisation,
        0 to 1), ``best_period`` (days, at the highest power) and the
        ``false_alarm_probability`` of that peak over the searched range.

    Notes
    -----
    ``astropy.timeseries.LombScargle`` with a floating mean (Zechmeister &
    Kürster 2009, A&A 496, 577) and weights 1 / sigma^2; the false-alarm
    probability is Baluev's (2008, MNRAS 385, 1279) analytic upper bound,
    ``method="baluev"``.
    """
    from astropy.timeseries import LombScargle

    t_, v_, s_ = _series(t, v, sigma)
    p_lo, p_hi = _period_range(t_, min_period, max_period)
    ls = LombScargle(t_, v_, s_, fit_mean=True, center_data=True)
    # Evenly spaced in frequency, samples_per_peak steps per peak width 1 / span
    # (VanderPlas 2018, ApJS 236, 16, from memory; the rule of astropy's
    # ``LombScargle.autofrequency``), kept inside [1 / max_period, 1 / min_period].
    f_lo, f_hi = 1.0 / p_hi, 1.0 / p_lo
    df = 1.0 / (samples_per_peak * float(np.ptp(t_)))
    freq = f_lo + df * np.arange(int(np.floor((f_hi - f_lo) / df)) + 1)
    power = ls.power(freq)
    k = int(np.argmax(power))
    fap = ls.false_alarm_probability(
        power[k], method="baluev", minimum_frequency=f_lo, maximum_frequency=f_hi
    )
    return Periodogram(
        frequency=freq, power=power, best_period=float(1.0 / freq[k]), false_alarm_probability=float(fap)
    )


def _top_peaks(freq: NDArray[np.float64], power: NDArray[np.float64], n: int) -> list[float]:
    """Periods (days) of the n highest local maxima of the power."""
    padded = np.concatenate(([-np.inf], power, [-np.inf]))
    is_max = (padded[1:-1] >= padded[:-2]) & (padded[1:-1] > padded[2:])
    idx = np.flatnonzero(is_max)
    return [float(1.0 / freq[k]) for k in idx[np.argsort(power[idx])[::-1]][:n]]


# ---------------------------------------------------------------------------
# Keplerian fit
# ---------------------------------------------------------------------------


class KeplerFit(NamedTuple):
    """Result of ``fit_keplerian``; units as in the module docstring.

    ``sigma_*`` are 1-sigma uncertainties from (J^T J)^-1 in these elements,
    scaled by chi2 / dof when that exceeds 1; inf where the data leave an
    element undetermined (omega and T of a circular orbit). K >= 0, omega in
    [0, 360), and T is the periastron passage nearest the middle of the data.
    ``rms`` is the unweighted root-mean-square residual, km/s.
    """

    P: float
    K: float
    e: float
    omega: float
    T: float
    gamma: float
    sigma_P: float
    sigma_K: float
    sigma_e: float
    sigma_omega: float
    sigma_T: float
    sigma_gamma: float
    chi2: float
    dof: int
    converged: bool
    rms: float


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


def _element_jacobian(
    t: NDArray[np.float64], P: float, K: float, e: float, omega_deg: float, T: float
) -> NDArray[np.float64]:
    """d v / d (P, K, e, omega [deg], T, gamma) of ``rv_model``, shape (N, 6)."""
    w = np.radians(omega_deg)
    M = _TWO_PI * (t - T) / P
    nu, nu_M, nu_e = _anomaly_terms(M, e)
    s, c = np.sin(nu + w), np.cos(nu + w)
    dv_dM = -K * s * nu_M
    return np.column_stack(
        [
            dv_dM * (-M / P),  # dM/dP = -M / P
            c + e * np.cos(w),
            -K * s * nu_e + K * np.cos(w),
            -K * (s + e * np.sin(w)) * (np.pi / 180.0),
            dv_dM * (-_TWO_PI / P),  # dM/dT = -2 pi / P
            np.ones_like(t),
        ]
    )


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
    tc: NDArray[np.float64], v: NDArray[np.float64], wgt: NDArray[np.float64], P: float
) -> NDArray[np.float64]:
    """Internal parameters of the best orbit on a grid of e and periastron phase at period P.

    For fixed (P, e, T) the velocity v = gamma + A (cos nu + e) + B sin nu is
    linear in (gamma, A, B), with A = K cos omega and B = -K sin omega
    (expand cos(nu + omega)); solve them by weighted least squares at every
    grid point and keep the lowest chi2.
    """
    M0 = _TWO_PI * np.arange(_SEED_PHASES) / _SEED_PHASES  # mean anomaly at t0
    e = _SEED_E[:, None, None]
    M, e_full = np.broadcast_arrays(_TWO_PI * tc[None, None, :] / P + M0[None, :, None], e)
    nu = _true_anomaly(M, e_full)
    X = np.stack([np.ones_like(nu), np.cos(nu) + e, np.sin(nu)], axis=-1)  # (e, phase, N, 3)
    Xw = X * wgt[:, None]
    A = np.einsum("...ni,...nj->...ij", Xw, X)
    b = np.einsum("...ni,n->...i", Xw, v)
    # A tiny ridge keeps the 3x3 systems solvable where a column vanishes.
    ridge = 1e-12 * np.trace(A, axis1=-2, axis2=-1)[..., None, None] * np.eye(3)
    coef = np.linalg.solve(A + ridge, b[..., None])[..., 0]
    chi2 = np.einsum("...n,n->...", (np.einsum("...ni,...i->...n", X, coef) - v) ** 2, wgt)
    ie, ip = np.unravel_index(int(np.argmin(chi2)), chi2.shape)
    gamma, a_, b_ = coef[ie, ip]
    K, w = float(np.hypot(a_, b_)), float(np.arctan2(-b_, a_))
    e0 = max(float(_SEED_E[ie]), 0.05)  # off e = 0, where the gradient in (x, y) vanishes
    s = np.sqrt(e0 / (1.0 - e0))
    return np.array([np.log(P), K, s * np.cos(w), s * np.sin(w), float(M0[ip]) + w, float(gamma)])


def fit_keplerian(
    t: ArrayLike,
    v: ArrayLike,
    sigma: ArrayLike,
    *,
    periods: ArrayLike | None = None,
    jitter: float = 0.0,
    n_starts: int = 5,
) -> KeplerFit:
    """Least-squares Keplerian orbit of a single-lined spectroscopic binary.

    Parameters
    ----------
    t : array_like, shape (N,)
        Times, days; N >= 6.
    v : array_like, shape (N,)
        Radial velocities, km/s.
    sigma : array_like
        1-sigma uncertainties, km/s; broadcast to (N,).
    periods : array_like, optional
        Further starting periods, days (e.g. a published period).
    jitter : float
        Extra scatter added to sigma in quadrature, km/s.
    n_starts : int
        Number of periodogram peaks (``periodogram`` with its default range,
        ``Periodogram.top_periods``) used as starting periods; 0 uses only
        ``periods`` (pass ``pg.top_periods(n)`` there to reuse a periodogram).

    Returns
    -------
    KeplerFit

    Notes
    -----
    Each starting period is seeded by a grid in e and periastron phase on
    which the model is linear in (gamma, K cos omega, K sin omega) (see
    ``_seed``), then refined with ``scipy.optimize.least_squares``
    (trust-region, analytic Jacobian) in (ln P, K, sqrt-e cos omega,
    sqrt-e sin omega, mean longitude at the middle epoch, gamma), a form with
    no boundaries (P > 0 and 0 <= e < 1 by construction); the lowest chi2
    wins. A negative K is folded into omega + 180 deg. The covariance is
    (J^T J)^-1 with J the Jacobian of the weighted residuals by
    (P, K, e, omega, T, gamma) at the solution, scaled by chi2 / dof when
    that exceeds 1 (dof = N - 6).
    """
    from scipy.optimize import least_squares

    t_, v_, s_ = _series(t, v, sigma, jitter)
    n = t_.size
    if n < _N_ELEMENTS:
        raise ValueError(f"{n} velocities cannot fix 6 elements. Fix: give at least 6 velocities.")
    starts: list[float] = []
    if n_starts > 0:
        starts += periodogram(t_, v_, s_).top_periods(n_starts)
    if periods is not None:
        starts += [float(p) for p in np.atleast_1d(np.asarray(periods, dtype=float))]
    if not starts or any(not (p > 0 and np.isfinite(p)) for p in starts):
        raise ValueError("no valid starting period. Fix: give n_starts >= 1 or periods > 0 in days.")

    t0 = 0.5 * (float(t_.max()) + float(t_.min()))
    tc = t_ - t0
    wgt = 1.0 / s_**2
    last: dict[bytes, tuple[NDArray[np.float64], NDArray[np.float64]]] = {}

    def cached(q: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        # least_squares asks for residuals and Jacobian at the same point:
        # solve Kepler's equation once for both.
        key = q.tobytes()
        if key not in last:
            last.clear()
            last[key] = _model_and_jacobian(q, tc)
        return last[key]

    best = None
    for P0 in starts:
        res = least_squares(
            lambda q: (cached(q)[0] - v_) / s_,
            _seed(tc, v_, wgt, P0),
            jac=lambda q: cached(q)[1] / s_[:, None],
            method="trf",
            x_scale="jac",
            xtol=1e-12,
            ftol=1e-12,
            gtol=1e-12,
            # A well-posed fit converges in tens of evaluations; an unconstrained
            # one would wander towards e -> 1 or P -> infinity.
            max_nfev=100,
        )
        if best is None or res.cost < best.cost:
            best = res

    P, K, e, w, lam0, gamma, _ = _unpack(best.x)
    if K < 0:  # K >= 0 by convention: (-K, omega) is the orbit (K, omega + 180)
        K, w = -K, w + np.pi
    omega = float(np.degrees(w) % 360.0)
    # lambda0 = M0 + omega with M0 = 2 pi (t0 - T) / P; the sign flip of K
    # shifted omega and the mean anomaly is unchanged, so use the fitted omega.
    M0 = lam0 - float(np.arctan2(best.x[3], best.x[2]))
    T = t0 - P * M0 / _TWO_PI
    T = T - P * np.round((T - t0) / P)  # the periastron nearest the middle of the data
    resid = v_ - rv_model(t_, P, K, e, omega, T, gamma)
    chi2 = float(np.sum(resid**2 * wgt))
    dof = n - _N_ELEMENTS
    J = _element_jacobian(t_, P, K, e, omega, T) / s_[:, None]
    scale = max(1.0, chi2 / dof) if dof > 0 else 1.0
    with np.errstate(all="ignore"):
        try:
            var = np.diag(np.linalg.inv(J.T @ J)) * scale
        except np.linalg.LinAlgError:
            var = np.full(_N_ELEMENTS, np.inf)
    sig = np.where(np.isfinite(var) & (var >= 0), np.sqrt(np.abs(var)), np.inf)
    return KeplerFit(
        P=P,
        K=K,
        e=e,
        omega=omega,
        T=float(T),
        gamma=gamma,
        sigma_P=float(sig[0]),
        sigma_K=float(sig[1]),
        sigma_e=float(sig[2]),
        sigma_omega=float(sig[3]),
        sigma_T=float(sig[4]),
        sigma_gamma=float(sig[5]),
        chi2=chi2,
        dof=dof,
        converged=bool(best.success),
        rms=float(np.sqrt(np.mean(resid**2))),
    )


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


def mass_function_uncertainty(
    P_days: ArrayLike,
    sigma_P: ArrayLike,
    K: ArrayLike,
    sigma_K: ArrayLike,
    e: ArrayLike,
    sigma_e: ArrayLike,
) -> NDArray[np.float64]:
    """First-order 1-sigma uncertainty of ``mass_function``, solar masses.

    Parameters
    ----------
    P_days, sigma_P : array_like
        Period and its uncertainty, days.
    K, sigma_K : array_like
        Semi-amplitude and its uncertainty, km/s.
    e, sigma_e : array_like
        Eccentricity and its uncertainty.

    Returns
    -------
    ndarray
        f sqrt((sP / P)^2 + 9 (sK / K)^2 + (3 e se / (1 - e^2))^2): linear
        propagation for independent errors (the logarithmic derivatives of
        f = c (1 - e^2)^1.5 K^3 P are 1, 3 and -3 e / (1 - e^2)). Correlations
        between the fitted P, K and e are ignored; K and e are nearly
        uncorrelated in a well-sampled orbit.
    """
    P, sP, K_, sK, e_, se = (np.asarray(x, dtype=float) for x in (P_days, sigma_P, K, sigma_K, e, sigma_e))
    rel = np.sqrt((sP / P) ** 2 + 9.0 * (sK / K_) ** 2 + (3.0 * e_ * se / (1.0 - e_**2)) ** 2)
    return mass_function(P, K_, e_) * rel


def _min_mass_one(f: float, m1: float) -> float:
    if not (np.isfinite(f) and np.isfinite(m1)):
        return float("nan")
    if f == 0.0:
        return 0.0
    # m2^3 / (m1 + m2)^2 = f is the cubic m2^3 - f m2^2 - 2 f m1 m2 - f m1^2 = 0, whose
    # coefficients change sign once: exactly one positive real root (Descartes' rule of signs).
    # numpy.roots (companion-matrix eigenvalues) finds it without importing scipy.optimize.
    roots = np.roots([1.0, -f, -2.0 * f * m1, -f * m1 * m1])
    real = roots[np.abs(roots.imag) <= 1e-9 * np.abs(roots)].real
    return float(real[real > 0].max())


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
        masses: the one positive root of the cubic, by ``numpy.roots``,
        element by element; NaN where an input is NaN.
    """
    f_, m1_ = np.broadcast_arrays(np.asarray(f, dtype=float), np.asarray(m1, dtype=float))
    if np.any(f_ < 0) or np.any(m1_ <= 0):
        raise ValueError("mass function < 0 or primary mass <= 0. Fix: give f >= 0 and m1 > 0 in solar masses.")
    out = np.array([_min_mass_one(float(a), float(b)) for a, b in zip(f_.ravel(), m1_.ravel())], dtype=float)
    return out.reshape(f_.shape)


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
