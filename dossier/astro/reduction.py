"""Reduction of double-star measures: precession of position angles, polar and
Cartesian offsets, default uncertainties per method, nightly or seasonal means,
polynomial fits of the relative motion, a curvature test and robust flagging.

Conventions: position angle theta in degrees, north through east; separation
rho in arcsec; x = rho cos(theta) is the offset of the companion towards north
and y = rho sin(theta) towards east (so y = delta-alpha cos(delta) and
x = delta-delta), both in arcsec; times are Julian years (floats, e.g. 2015.5).
"""

from __future__ import annotations

import difflib
from collections.abc import Mapping, Sequence
from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray

# ---------------------------------------------------------------------------
# Precession of position angles
# ---------------------------------------------------------------------------

# Lieske et al. 1977, A&A 58, 1 (IAU 1976 precession), angles from J2000.0 with
# t in Julian centuries, arcsec. astropy's FK5 uses IAU 2006 (Capitaine et al.
# 2003, A&A 412, 567), whose rates differ by about 0.3"/century: irrelevant here,
# where the angles only place the star at the mid-epoch. Coefficients from memory;
# the positions they give agree with astropy to that 0.3"/century.
_ZETA = (2306.2181, 0.30188, 0.017998)
_Z = (2306.2181, 1.09468, 0.018203)
_THETA = (2004.3109, -0.42665, -0.041833)
# Rate of the precession in declination, n, arcsec per Julian century as a
# function of T (centuries from J2000): the t-coefficient of theta_A about an
# arbitrary epoch (Lieske et al. 1977). n(0) = 20.043"/yr (METHODS.md).
_N_RATE = (2004.3109, -0.85330, -0.000217)


def _precess_from_j2000(
    ra_deg: NDArray[np.float64], dec_deg: NDArray[np.float64], epoch: NDArray[np.float64]
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Rigorous precession of J2000.0 coordinates to the equinox ``epoch`` (degrees in, radians out)."""
    t = (epoch - 2000.0) / 100.0
    # The angles have no constant term: coefficients of t, t^2, t^3.
    zeta, z, theta = (np.radians(t * np.polynomial.polynomial.polyval(t, c) / 3600.0) for c in (_ZETA, _Z, _THETA))
    a0, d0 = np.radians(ra_deg), np.radians(dec_deg)
    # Meeus 1998, Astronomical Algorithms, 2nd ed., ch. 21, eq. 21.4 (from memory): the rotation
    # R3(-z) R2(theta) R3(-zeta) written out; atan2 keeps it exact at the pole.
    a = np.cos(d0) * np.sin(a0 + zeta)
    b = np.cos(theta) * np.cos(d0) * np.cos(a0 + zeta) - np.sin(theta) * np.sin(d0)
    c = np.sin(theta) * np.cos(d0) * np.cos(a0 + zeta) + np.cos(theta) * np.sin(d0)
    return np.arctan2(a, b) + z, np.arctan2(c, np.hypot(a, b))


def precess_theta(
    theta_deg: ArrayLike,
    ra_deg: ArrayLike,
    dec_deg: ArrayLike,
    epoch_from: ArrayLike,
    epoch_to: ArrayLike = 2000.0,
) -> NDArray[np.float64]:
    """Refer a position angle measured at one equinox to another.

    Precession turns the direction of north at the star, so a position angle
    measured against the equator of date differs from the same angle referred
    to J2000.0. To first order (METHODS.md, "Precession of position angles"):

        theta_to = theta_from + n sin(alpha) sec(delta) (epoch_to - epoch_from)

    with n the precession in declination, 20.043"/yr = 0.00557 deg/yr at J2000.
    Here alpha, delta and n are taken at the mid-epoch (epoch_from + epoch_to)/2
    (a midpoint rule for the slowly turning rate): the J2000 position is
    precessed rigorously to the mid-epoch with the IAU 1976 angles (Lieske et
    al. 1977, A&A 58, 1) and n = 2004.3109" - 0.85330" T - 0.000217" T^2 per
    century, T in centuries from J2000 (same source). Against a rigorous
    transformation (astropy FK5, IAU 2006 precession) the error is the
    neglected higher-order terms: below 0.001 deg for |delta| <= 75 deg and a
    century of equinox difference, about 0.002 deg at 80 deg, 0.01 deg at
    85 deg, and degrees within a degree or so of the pole, where the first-
    order expansion breaks down (use a rigorous rotation there). With the J2000
    alpha, delta instead of the mid-epoch ones the error would reach 0.06 deg
    at 75 deg over a century. The small rotation of north caused by
    the pair's own proper motion is not included.

    Parameters
    ----------
    theta_deg : array_like
        Position angle at the equinox ``epoch_from``, degrees, north through east.
    ra_deg, dec_deg : array_like
        Right ascension and declination of the pair at equinox J2000.0 (ICRS is
        close enough), degrees.
    epoch_from : array_like
        Equinox of the measure, usually its epoch of observation, Julian years.
    epoch_to : array_like, optional
        Equinox to refer the angle to, Julian years; default 2000.0.

    Returns
    -------
    ndarray
        Position angle at ``epoch_to``, degrees in [0, 360). All inputs broadcast.
    """
    theta = np.asarray(theta_deg, dtype=float)
    ra, dec = np.asarray(ra_deg, dtype=float), np.asarray(dec_deg, dtype=float)
    t1, t2 = np.asarray(epoch_from, dtype=float), np.asarray(epoch_to, dtype=float)
    t_mid = 0.5 * (t1 + t2)
    a_mid, d_mid = _precess_from_j2000(ra, dec, t_mid)
    n_deg_per_yr = np.polynomial.polynomial.polyval((t_mid - 2000.0) / 100.0, _N_RATE) / 100.0 / 3600.0
    out = np.mod(theta + n_deg_per_yr * np.sin(a_mid) / np.cos(d_mid) * (t2 - t1), 360.0)
    return np.where(out >= 360.0, 0.0, out)


# ---------------------------------------------------------------------------
# Polar and Cartesian offsets
# ---------------------------------------------------------------------------


def to_offsets(
    rho: ArrayLike, theta: ArrayLike, rho_err: ArrayLike, theta_err: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """North and east offsets of the companion, with first-order errors.

    x = rho cos(theta), y = rho sin(theta). The errors follow from the Jacobian
    (first-order propagation; Bevington & Robinson 2003, Data Reduction and
    Error Analysis, 3rd ed., ch. 3; from memory), with sigma_rho and the
    tangential error rho sigma_theta (theta in radians) independent:

        sx^2 = cos^2(theta) sigma_rho^2 + sin^2(theta) (rho sigma_theta)^2
        sy^2 = sin^2(theta) sigma_rho^2 + cos^2(theta) (rho sigma_theta)^2

    Approximation: the covariance
    cov_xy = sin(theta) cos(theta) (sigma_rho^2 - (rho sigma_theta)^2) is not
    returned, and the fits in this module treat x and y as independent. It is
    zero when the radial and tangential errors are equal (the usual case for
    images) and small whenever they are comparable; an eyepiece estimate with
    a loose separation and a tight angle is where it matters most.

    Parameters
    ----------
    rho : array_like
        Separation, arcsec.
    theta : array_like
        Position angle, degrees, north through east.
    rho_err : array_like
        Standard error of rho, arcsec.
    theta_err : array_like
        Standard error of theta, degrees.

    Returns
    -------
    x, y : ndarray
        North and east offsets, arcsec.
    sx, sy : ndarray
        Their standard errors, arcsec. All inputs broadcast.
    """
    r = np.asarray(rho, dtype=float)
    th = np.radians(np.asarray(theta, dtype=float))
    s_rad = np.asarray(rho_err, dtype=float)
    s_tan = r * np.radians(np.asarray(theta_err, dtype=float))
    c, s = np.cos(th), np.sin(th)
    x, y = r * c, r * s
    sx = np.sqrt((c * s_rad) ** 2 + (s * s_tan) ** 2)
    sy = np.sqrt((s * s_rad) ** 2 + (c * s_tan) ** 2)
    return x, y, sx, sy


def to_polar(x: ArrayLike, y: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Separation and position angle from north and east offsets.

    Parameters
    ----------
    x, y : array_like
        North and east offsets, arcsec.

    Returns
    -------
    rho : ndarray
        Separation, arcsec.
    theta : ndarray
        Position angle, degrees in [0, 360), north through east; 0 at the origin.
    """
    xa, ya = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    theta = np.mod(np.degrees(np.arctan2(ya, xa)), 360.0)
    # np.mod can return 360.0 for a tiny negative angle; fold it back to 0.
    return np.hypot(xa, ya), np.where(theta >= 360.0, 0.0, theta)


# ---------------------------------------------------------------------------
# Default uncertainties per method of measurement
# ---------------------------------------------------------------------------

# Dawes limit, arcsec times cm of aperture: R = 11.6"/D(cm) (common practice;
# Dawes's empirical resolution limit for two equal stars of about 6th mag).
DAWES_ARCSEC_CM = 11.6


class MethodErrors(NamedTuple):
    """Typical uncertainties of one method of measurement.

    ``sigma_rho = hypot(rho_arcsec, rho_fraction * rho)``: a floor in arcsec and
    a part proportional to the separation (set either to 0 to drop it).
    ``aperture_term``: inflate both errors at separations near and below the
    resolution limit of the telescope (visual work; see ``measure_sigmas``).
    """

    theta_deg: float
    rho_arcsec: float
    rho_fraction: float
    aperture_term: bool = False


# Common practice, from memory: order-of-magnitude values for a single measure
# (one night), not taken from a published calibration. Callers with better
# knowledge (an observer's own scatter, a catalogue's stated errors) should pass
# their own mapping to ``measure_sigmas``.
DEFAULT_METHOD_ERRORS: dict[str, MethodErrors] = {
    # Reticle (scale) eyepiece at the telescope: a few tenths of an arcsec.
    "eyepiece-micrometer": MethodErrors(theta_deg=1.0, rho_arcsec=0.3, rho_fraction=0.03, aperture_term=True),
    # Filar micrometer, experienced observer, mean of several settings.
    "filar-micrometer": MethodErrors(theta_deg=0.5, rho_arcsec=0.1, rho_fraction=0.01, aperture_term=True),
    # CCD/CMOS frames with an astrometric calibration, seeing-limited.
    "imaging": MethodErrors(theta_deg=0.3, rho_arcsec=0.1, rho_fraction=0.0),
    # Speckle interferometry on a moderate telescope: a few mas.
    "speckle": MethodErrors(theta_deg=0.5, rho_arcsec=0.005, rho_fraction=0.005),
    # Lucky imaging (short exposures, shift-and-add), small telescope.
    "lucky-imaging": MethodErrors(theta_deg=0.3, rho_arcsec=0.03, rho_fraction=0.005),
    # Angle and separation judged by eye against the field: coarse.
    "eyepiece-estimate": MethodErrors(theta_deg=5.0, rho_arcsec=0.5, rho_fraction=0.2, aperture_term=True),
    # A literature value without stated errors, method unknown: conservative.
    "literature": MethodErrors(theta_deg=1.0, rho_arcsec=0.1, rho_fraction=0.03),
}


def measure_sigmas(
    rho: ArrayLike,
    theta_err: ArrayLike,
    rho_err: ArrayLike,
    method: str | Sequence[str] | NDArray[np.str_],
    aperture_cm: ArrayLike,
    defaults: Mapping[str, MethodErrors | tuple[float, float, float] | tuple[float, float, float, bool]],
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Fill missing uncertainties of measures from per-method defaults.

    A given uncertainty (finite and positive) is kept as it is. A missing one
    (NaN, infinite, zero or negative) is taken from ``defaults[method]``:
    sigma_theta = theta_deg and sigma_rho = hypot(rho_arcsec, rho_fraction rho).
    For methods with ``aperture_term`` (visual work) both filled values are then
    multiplied by

        f = sqrt(1 + (R / rho)^2),   R = 11.6" / D(cm) (Dawes limit)

    so that a pair at the resolution limit gets errors 1.4 times the default,
    at half the limit 2.2 times, and wide pairs the default (common practice:
    visual measures of pairs near the limit of the telescope scatter more; the
    quadrature law is our simple choice, not a published calibration). An
    unknown aperture (NaN) adds no term.

    Parameters
    ----------
    rho : array_like
        Separation, arcsec.
    theta_err : array_like
        Given standard error of theta, degrees; NaN where missing.
    rho_err : array_like
        Given standard error of rho, arcsec; NaN where missing.
    method : str or sequence of str
        Method of each measure (a key of ``defaults``), or one for all.
    aperture_cm : array_like
        Telescope aperture, cm; NaN where unknown.
    defaults : mapping of str to MethodErrors
        Per-method defaults, e.g. ``DEFAULT_METHOD_ERRORS``; plain tuples
        ``(theta_deg, rho_arcsec, rho_fraction[, aperture_term])`` also work.

    Returns
    -------
    sigma_theta_deg : ndarray
        Standard error of theta, degrees.
    sigma_rho_arcsec : ndarray
        Standard error of rho, arcsec. Both broadcast over all inputs.

    Raises
    ------
    ValueError
        When a method has no entry in ``defaults`` and some error is missing.
    """
    numbers = [np.asarray(v, dtype=float) for v in (rho, theta_err, rho_err, aperture_cm)]
    methods = np.asarray(method, dtype=object)
    shape = np.broadcast_shapes(methods.shape, *(v.shape for v in numbers))
    r, st, sr, ap = (np.broadcast_to(v, shape) for v in numbers)
    methods = np.broadcast_to(methods, shape)
    miss_t = ~(np.isfinite(st) & (st > 0.0))
    miss_r = ~(np.isfinite(sr) & (sr > 0.0))
    out_t, out_r = st.astype(float, copy=True), sr.astype(float, copy=True)
    need = miss_t | miss_r
    for name in np.unique(methods[need]) if need.any() else ():
        if name not in defaults:
            close = difflib.get_close_matches(str(name), list(defaults), n=3)
            hint = ", ".join(close) if close else ", ".join(sorted(defaults))
            raise ValueError(
                f"no default uncertainties for method {name!r}. Fix: give the errors, "
                f"or add the method to the defaults. Did you mean one of: {hint}?"
            )
        d = MethodErrors(*defaults[name])
        sel = methods == name
        with np.errstate(divide="ignore", invalid="ignore"):
            # Dawes limit R = 11.6"/D(cm) (common practice); unknown aperture: no term.
            ratio = np.where(np.isfinite(ap) & (ap > 0.0), DAWES_ARCSEC_CM / ap / r, 0.0)
        factor = np.sqrt(1.0 + ratio**2) if d.aperture_term else np.ones_like(r)
        fill_t = sel & miss_t
        fill_r = sel & miss_r
        out_t[fill_t] = (d.theta_deg * factor)[fill_t]
        out_r[fill_r] = (np.hypot(d.rho_arcsec, d.rho_fraction * r) * factor)[fill_r]
    return out_t, out_r


# ---------------------------------------------------------------------------
# Means of measures within a night or a season
# ---------------------------------------------------------------------------

ONE_NIGHT_YR = 1.0 / 365.25
ONE_SEASON_YR = 0.5


def _check_sigmas(*sigmas: NDArray[np.float64]) -> None:
    for s in sigmas:
        if not np.all(np.isfinite(s) & (s > 0.0)):
            raise ValueError(
                "uncertainties must be finite and positive. "
                "Fix: fill missing ones with measure_sigmas before averaging or fitting."
            )


def _epoch_weights(sx: NDArray[np.float64], sy: NDArray[np.float64]) -> NDArray[np.float64]:
    """Weight of a measure's epoch: the sum of its x and y weights."""
    return 1.0 / sx**2 + 1.0 / sy**2


def group_means(
    t: ArrayLike,
    x: ArrayLike,
    y: ArrayLike,
    sx: ArrayLike,
    sy: ArrayLike,
    window_yr: float = ONE_NIGHT_YR,
) -> tuple[
    NDArray[np.float64],
    NDArray[np.float64],
    NDArray[np.float64],
    NDArray[np.float64],
    NDArray[np.float64],
    NDArray[np.int64],
    NDArray[np.int64],
]:
    """Weighted means of measures taken within one night or one season.

    Grouping is greedy over the time-sorted measures: a group starts at the
    earliest measure not yet grouped and takes every later measure up to
    ``window_yr`` after it (span <= window_yr). ``ONE_NIGHT_YR`` (1/365.25) and
    ``ONE_SEASON_YR`` (0.5) are the usual choices.

    Within a group, x and y are averaged separately with weights w = 1/sigma^2;
    the epoch is averaged with the weights 1/sx^2 + 1/sy^2. The error of a
    mean is the internal one, 1/sqrt(sum w), multiplied by the Birge ratio
    sqrt(chi2 / (n - 1)) when that exceeds 1, i.e. the larger of the internal
    and the external (scatter) error (Bevington & Robinson 2003, Data
    Reduction and Error Analysis, 3rd ed., ch. 4; Birge 1932, Phys. Rev. 40,
    207; from memory). A group of one keeps its own errors.

    Parameters
    ----------
    t : array_like, shape (n,)
        Epochs, Julian years.
    x, y : array_like, shape (n,)
        North and east offsets, arcsec.
    sx, sy : array_like, shape (n,)
        Their standard errors, arcsec; finite and positive.
    window_yr : float, optional
        Largest span of a group, Julian years; default one night.

    Returns
    -------
    t_mean, x_mean, y_mean, sx_mean, sy_mean : ndarray, shape (g,)
        Per group in order of time: epoch (Julian years), offsets and their
        errors (arcsec).
    n : ndarray of int, shape (g,)
        Number of measures in each group.
    group_index : ndarray of int, shape (n,)
        Group of each input measure, in the input order.
    """
    tt, xx, yy, ex, ey = (np.atleast_1d(np.asarray(v, dtype=float)) for v in (t, x, y, sx, sy))
    _check_sigmas(ex, ey)
    if window_yr < 0.0:
        raise ValueError(f"window_yr = {window_yr} is negative. Fix: give a span in years, e.g. 1/365.25 or 0.5.")
    order = np.argsort(tt, kind="stable")
    ts = tt[order]
    sorted_group = np.empty(ts.size, dtype=np.int64)
    start, g = 0, 0
    while start < ts.size:
        stop = int(np.searchsorted(ts, ts[start] + window_yr, side="right"))
        sorted_group[start:stop] = g
        start, g = stop, g + 1
    group_index = np.empty_like(sorted_group)
    group_index[order] = sorted_group

    n = np.bincount(group_index, minlength=g)
    wt = _epoch_weights(ex, ey)
    # Average the time since each group's first epoch: no rounding at the level
    # of the year number, and a group of one keeps its epoch exactly.
    t_first = ts[np.searchsorted(sorted_group, np.arange(g))]
    dt = tt - t_first[group_index]
    t_mean = t_first + np.bincount(group_index, wt * dt, g) / np.bincount(group_index, wt, g)

    def mean_and_error(v: NDArray[np.float64], e: NDArray[np.float64]) -> tuple[NDArray[np.float64], ...]:
        w = 1.0 / e**2
        sw = np.bincount(group_index, w, g)
        m = np.bincount(group_index, w * v, g) / sw
        chi2 = np.bincount(group_index, w * (v - m[group_index]) ** 2, g)
        with np.errstate(divide="ignore", invalid="ignore"):
            birge = np.where(n > 1, np.sqrt(chi2 / (n - 1)), 1.0)
        return m, np.maximum(birge, 1.0) / np.sqrt(sw)

    x_mean, sx_mean = mean_and_error(xx, ex)
    y_mean, sy_mean = mean_and_error(yy, ey)
    return t_mean, x_mean, y_mean, sx_mean, sy_mean, n, group_index


# ---------------------------------------------------------------------------
# Polynomial fits of the relative motion
# ---------------------------------------------------------------------------


class MotionFit(NamedTuple):
    """Weighted polynomial fit of x(t) and y(t), fitted separately.

    ``coef_x[k]``, ``coef_y[k]`` multiply (t - t0)^k (arcsec per year^k, in
    increasing powers, the reverse of ``numpy.polyfit``); ``cov_x``, ``cov_y``
    are their covariance matrices from the quoted errors alone (not scaled by
    the reduced chi2). ``chi2`` sums x and y, ``dof = 2 n - 2 (degree + 1)``;
    ``resid_x``, ``resid_y`` are data minus model (arcsec) of the ``n``
    measures fitted, in their input order.
    """

    t0: float
    degree: int
    coef_x: NDArray[np.float64]
    coef_y: NDArray[np.float64]
    cov_x: NDArray[np.float64]
    cov_y: NDArray[np.float64]
    chi2: float
    dof: int
    resid_x: NDArray[np.float64]
    resid_y: NDArray[np.float64]
    n: int

    def predict(
        self, t: ArrayLike
    ) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
        """Fitted offsets at epochs ``t`` (Julian years) and their 1-sigma errors from the covariance.

        Returns
        -------
        x, y, sx, sy : ndarray
            North and east offsets and their standard errors, arcsec.
        """
        tau = np.asarray(t, dtype=float) - self.t0
        v = tau[..., None] ** np.arange(self.degree + 1)
        x, y = v @ self.coef_x, v @ self.coef_y
        sx = np.sqrt(np.einsum("...i,ij,...j->...", v, self.cov_x, v))
        sy = np.sqrt(np.einsum("...i,ij,...j->...", v, self.cov_y, v))
        return x, y, sx, sy


def _wls(
    a: NDArray[np.float64], b: NDArray[np.float64], sigma: NDArray[np.float64]
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Weighted linear least squares by QR of the whitened design matrix.

    Minimises sum ((b - a c) / sigma)^2; covariance (A^T W A)^-1 = R^-1 R^-T
    (Press et al. 2007, Numerical Recipes, 3rd ed., sect. 15.4; from memory).
    """
    aw = a / sigma[:, None]
    q, r = np.linalg.qr(aw)
    coef = np.linalg.solve(r, q.T @ (b / sigma))
    r_inv = np.linalg.inv(r)
    return coef, r_inv @ r_inv.T, b - a @ coef


def fit_motion(
    t: ArrayLike,
    x: ArrayLike,
    y: ArrayLike,
    sx: ArrayLike,
    sy: ArrayLike,
    degree: int,
    t0: float | None = None,
) -> MotionFit:
    """Weighted polynomial least squares of the relative motion.

    x(t) = sum_k coef_x[k] (t - t0)^k and likewise y(t), each fitted on its
    own with weights 1/sx^2 and 1/sy^2 (the x-y covariance of a measure is
    ignored; see ``to_offsets``). Degree 1 is uniform linear motion, degree 2
    adds a constant acceleration (curvature of the path).

    Parameters
    ----------
    t : array_like, shape (n,)
        Epochs, Julian years.
    x, y : array_like, shape (n,)
        North and east offsets, arcsec.
    sx, sy : array_like, shape (n,)
        Their standard errors, arcsec; finite and positive.
    degree : int
        1 (linear) or 2 (quadratic).
    t0 : float, optional
        Reference epoch, Julian years; default the weighted mean epoch with
        weights 1/sx^2 + 1/sy^2 (which makes the offset and the rate nearly
        uncorrelated).

    Returns
    -------
    MotionFit
        Coefficients, covariances, chi2, dof, residuals (see the class).

    Raises
    ------
    ValueError
        For a degree other than 1 or 2, mismatched shapes, bad errors, or fewer
        distinct epochs than coefficients.
    """
    if degree not in (1, 2):
        raise ValueError(f"degree = {degree!r} is not supported. Fix: use 1 (linear) or 2 (quadratic).")
    tt, xx, yy, ex, ey = (np.atleast_1d(np.asarray(v, dtype=float)) for v in (t, x, y, sx, sy))
    if not (tt.ndim == 1 and tt.shape == xx.shape == yy.shape == ex.shape == ey.shape):
        raise ValueError("t, x, y, sx and sy must be 1-D arrays of one length. Fix: pass one value per measure.")
    _check_sigmas(ex, ey)
    n_distinct = np.unique(tt).size
    if n_distinct < degree + 1:
        raise ValueError(
            f"a degree-{degree} fit needs at least {degree + 1} distinct epochs, got {n_distinct}. "
            "Fix: add measures or lower the degree."
        )
    if t0 is None:
        w = _epoch_weights(ex, ey)
        t0 = float(np.sum(w * tt) / np.sum(w))
    tau = tt - t0
    design = tau[:, None] ** np.arange(degree + 1)
    cx, vx, rx = _wls(design, xx, ex)
    cy, vy, ry = _wls(design, yy, ey)
    chi2 = float(np.sum((rx / ex) ** 2) + np.sum((ry / ey) ** 2))
    return MotionFit(
        t0=float(t0),
        degree=degree,
        coef_x=cx,
        coef_y=cy,
        cov_x=vx,
        cov_y=vy,
        chi2=chi2,
        dof=2 * tt.size - 2 * (degree + 1),
        resid_x=rx,
        resid_y=ry,
        n=tt.size,
    )


class CurvatureTest(NamedTuple):
    """F statistic and p-value for the quadratic terms, and information-criterion differences.

    ``delta_aic`` and ``delta_bic`` are quadratic minus linear: negative values
    favour the curved path.
    """

    F: float
    p_value: float
    delta_aic: float
    delta_bic: float


def curvature_test(fit_lin: MotionFit, fit_quad: MotionFit) -> CurvatureTest:
    """Does a curved (quadratic) path fit significantly better than a straight one?

    F-test for the two additional parameters (the x and y quadratic terms),
    nested models on the same measures (Bevington & Robinson 2003, Data
    Reduction and Error Analysis, 3rd ed., ch. 11, the F test for an additional
    term; from memory):

        F = [(chi2_lin - chi2_quad) / 2] / [chi2_quad / dof_quad],

    distributed as F(2, dof_quad) when the motion is linear; p = P(F' > F)
    from ``scipy.special.fdtrc``. With Gaussian errors of known size,
    -2 ln L = chi2 + const, so AIC = chi2 + 2k (Akaike 1974, IEEE Trans. Autom.
    Control 19, 716) and BIC = chi2 + k ln N (Schwarz 1978, Ann. Stat. 6, 461),
    with k = 4 or 6 parameters and N = 2n data values (x and y of n measures).

    Parameters
    ----------
    fit_lin, fit_quad : MotionFit
        Degree-1 and degree-2 fits of the same measures.

    Returns
    -------
    CurvatureTest
        ``F``, ``p_value`` (NaN when the quadratic fit has no degrees of
        freedom left), ``delta_aic``, ``delta_bic``.
    """
    from scipy import special  # imported here: scipy costs time at import

    if fit_lin.degree != 1 or fit_quad.degree != 2:
        raise ValueError(
            f"got fits of degree {fit_lin.degree} and {fit_quad.degree}. "
            "Fix: pass the linear fit first, then the quadratic fit."
        )
    if fit_lin.n != fit_quad.n:
        raise ValueError(
            f"the fits use {fit_lin.n} and {fit_quad.n} measures. Fix: fit both models to the same measures."
        )
    extra = 2
    d_chi2 = fit_lin.chi2 - fit_quad.chi2
    if fit_quad.dof > 0:
        reduced = fit_quad.chi2 / fit_quad.dof
        # A perfect quadratic fit (chi2 = 0) leaves F infinite and p = 0.
        f_stat = d_chi2 / extra / reduced if reduced > 0.0 else float("inf")
        p = float(special.fdtrc(extra, fit_quad.dof, f_stat)) if np.isfinite(f_stat) else 0.0
    else:
        f_stat, p = float("nan"), float("nan")
    n_data = 2 * fit_quad.n
    delta_aic = -d_chi2 + 2.0 * extra
    delta_bic = -d_chi2 + extra * float(np.log(n_data))
    return CurvatureTest(F=f_stat, p_value=p, delta_aic=delta_aic, delta_bic=delta_bic)


# ---------------------------------------------------------------------------
# Robust flagging of outlying measures
# ---------------------------------------------------------------------------

# Iglewicz & Hoaglin 1993, How to Detect and Handle Outliers (ASQC), modified
# z-score cut of 3.5 (from memory). For a good measure with correct errors the
# 2-D normalised distance exceeds 3.5 with probability exp(-3.5^2/2) = 0.2%.
OUTLIER_THRESHOLD = 3.5
# MAD to standard deviation for a normal distribution, 1/Phi^-1(3/4) (common practice).
MAD_TO_SIGMA = 1.4826


def flag_outliers(
    residual_x: ArrayLike,
    residual_y: ArrayLike,
    sx: ArrayLike,
    sy: ArrayLike,
    threshold: float = OUTLIER_THRESHOLD,
) -> tuple[NDArray[np.bool_], list[str]]:
    """Flag measures that lie far from the fitted motion, judged on a robust scale.

    Each residual is normalised by its quoted error, z = r / sigma. The scale
    s = 1.4826 MAD of the pooled z_x and z_y (median absolute deviation about
    the median; common practice) measures how well the errors describe the
    scatter; it is floored at 1, so that a measure is never flagged for lying
    within ``threshold`` of its own quoted errors. The score of a measure is
    its normalised distance hypot(z_x, z_y) / s, and it is flagged above
    ``threshold``. Nothing is deleted: the caller refits without the flagged
    measures (``fit_motion_robust`` does so).

    Parameters
    ----------
    residual_x, residual_y : array_like, shape (n,)
        Data minus fitted motion, north and east, arcsec.
    sx, sy : array_like, shape (n,)
        Standard errors of the measures, arcsec.
    threshold : float, optional
        Cut on the score, in robust sigmas; default 3.5.

    Returns
    -------
    flags : ndarray of bool, shape (n,)
        True for a flagged measure.
    reasons : list of str, length n
        E.g. "4.2σ from the fitted motion (robust scale)" for a flagged measure
        ("(quoted errors)" when the floor of the scale applied), "" otherwise.
    """
    rx, ry, ex, ey = (np.atleast_1d(np.asarray(v, dtype=float)) for v in (residual_x, residual_y, sx, sy))
    _check_sigmas(ex, ey)
    zx, zy = rx / ex, ry / ey
    z = np.concatenate([zx, zy])
    scale = MAD_TO_SIGMA * float(np.median(np.abs(z - np.median(z)))) if z.size else 0.0
    robust = scale > 1.0
    score = np.hypot(zx, zy) / max(scale, 1.0)
    flags = score > threshold
    label = "robust scale" if robust else "quoted errors"
    reasons = [f"{s:.1f}σ from the fitted motion ({label})" if f else "" for s, f in zip(score, flags)]
    return flags, reasons


class RobustMotionFit(NamedTuple):
    """Result of ``fit_motion_robust``.

    ``fit`` is the fit to the measures whose ``flags`` are False; ``flags`` and
    ``reasons`` cover every input measure, in input order; ``iterations`` is
    the number of fits made; ``converged`` is False when the flags still
    changed at the last iteration or when a further flagging would have left
    too few measures (the flags are then those of the last usable fit).
    """

    fit: MotionFit
    flags: NDArray[np.bool_]
    reasons: list[str]
    iterations: int
    converged: bool


def fit_motion_robust(
    t: ArrayLike,
    x: ArrayLike,
    y: ArrayLike,
    sx: ArrayLike,
    sy: ArrayLike,
    degree: int,
    t0: float | None = None,
    threshold: float = OUTLIER_THRESHOLD,
    max_iter: int = 5,
) -> RobustMotionFit:
    """Fit, flag outliers against the fit, refit without them; repeat until the flags settle.

    Every measure is scored against the current fit (``flag_outliers``), also
    those left out of it, so a measure flagged early can return when the fit
    moves. The loop stops when the flags repeat, after ``max_iter`` fits, or
    when the new flags would leave fewer than degree + 2 distinct epochs (too
    few to fit and still judge the scatter).

    Parameters
    ----------
    t, x, y, sx, sy, degree, t0
        As for ``fit_motion``.
    threshold : float, optional
        As for ``flag_outliers``.
    max_iter : int, optional
        Largest number of fits, default 5.

    Returns
    -------
    RobustMotionFit
        Final fit, flags and reasons for every measure, iterations, converged.
    """
    tt, xx, yy, ex, ey = (np.atleast_1d(np.asarray(v, dtype=float)) for v in (t, x, y, sx, sy))
    flags = np.zeros(tt.size, dtype=bool)
    reasons = [""] * tt.size
    fit = fit_motion(tt, xx, yy, ex, ey, degree, t0)
    iterations = 1
    while True:
        px, py, _, _ = fit.predict(tt)
        new_flags, new_reasons = flag_outliers(xx - px, yy - py, ex, ey, threshold)
        if np.array_equal(new_flags, flags):
            return RobustMotionFit(fit, flags, new_reasons, iterations, True)
        keep = ~new_flags
        if iterations >= max_iter or np.unique(tt[keep]).size < degree + 2:
            return RobustMotionFit(fit, flags, reasons, iterations, False)
        flags, reasons = new_flags, new_reasons
        fit = fit_motion(tt[keep], xx[keep], yy[keep], ex[keep], ey[keep], degree, t0)
        iterations += 1
