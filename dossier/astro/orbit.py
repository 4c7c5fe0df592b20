"""Visual (relative) orbits of double stars: Thiele-Innes constants, ephemerides,
dynamical masses and a least-squares orbit fit.

Conventions: position angle theta in degrees, counted from north through east;
separation rho in arcsec; offsets of the secondary from the primary
x = rho cos theta (north) and y = rho sin theta (east), arcsec; times and
periastron epochs in Julian years; period P in years; the angles of the
elements (i, Omega, omega) in degrees; semimajor axis a in arcsec; parallax in
mas. An inclination below 90 degrees means theta increases with time.

References: Heintz, W. D. 1978, Double Stars (Reidel), ch. 4; Aitken, R. G.
1935, The Binary Stars, 2nd ed. (McGraw-Hill), ch. 4; Meeus, J. 1998,
Astronomical Algorithms, 2nd ed. (Willmann-Bell), ch. 57.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray

from dossier.astro.binary import solve_kepler

__all__ = [
    "OrbitFit",
    "arc_coverage",
    "campbell_from_thiele_innes",
    "dynamical_mass",
    "dynamical_mass_uncertainty",
    "ephemeris",
    "ephemeris_xy",
    "fit_orbit",
    "thiele_innes",
]

_TWO_PI = 2.0 * np.pi
# Mean anomalies per turn in the grid search's table of E(M) (see _grid_chi2).
_KEPLER_TABLE_SIZE = 1024
# (P, e, T, epoch) cells per pass of the grid search: bounds memory and keeps
# the working arrays near cache size (faster than one pass over the whole grid).
_GRID_CELLS_PER_CHUNK = 200_000
# Eccentricity ceiling in the refinement: keeps sqrt(1 - e^2) away from zero.
_E_MAX_FIT = 0.999


def thiele_innes(
    a: ArrayLike, i: ArrayLike, node: ArrayLike, omega: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Thiele-Innes constants A, B, F, G from the Campbell elements.

    Parameters
    ----------
    a : array_like
        Semimajor axis of the relative orbit, arcsec.
    i : array_like
        Inclination, degrees (below 90: position angle increases with time).
    node : array_like
        Position angle of the ascending node Omega, degrees.
    omega : array_like
        Argument of periastron omega of the secondary's relative orbit, degrees.

    Returns
    -------
    A, B, F, G : ndarray
        Thiele-Innes constants, arcsec; broadcast shape of the inputs. The
        north offset is x = A X + F Y and the east offset y = B X + G Y, with
        X = cos E - e and Y = sqrt(1 - e^2) sin E.
    """
    a_, i_, n_, w_ = (np.asarray(v, dtype=float) for v in (a, i, node, omega))
    ci = np.cos(np.radians(i_))
    cn, sn = np.cos(np.radians(n_)), np.sin(np.radians(n_))
    cw, sw = np.cos(np.radians(w_)), np.sin(np.radians(w_))
    # Heintz 1978, Double Stars, ch. 4 (METHODS.md, "Visual orbits").
    A = a_ * (cw * cn - sw * sn * ci)
    B = a_ * (cw * sn + sw * cn * ci)
    F = a_ * (-sw * cn - cw * sn * ci)
    G = a_ * (-sw * sn + cw * cn * ci)
    return A, B, F, G


def campbell_from_thiele_innes(
    A: ArrayLike, B: ArrayLike, F: ArrayLike, G: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Campbell elements a, i, Omega, omega from the Thiele-Innes constants.

    Parameters
    ----------
    A, B, F, G : array_like
        Thiele-Innes constants, arcsec; broadcast together.

    Returns
    -------
    a : ndarray
        Semimajor axis, arcsec.
    i : ndarray
        Inclination in [0, 180] degrees.
    node : ndarray
        Position angle of the node Omega in [0, 180) degrees.
    omega : ndarray
        Argument of periastron in [0, 360) degrees.

    Notes
    -----
    A visual orbit alone does not tell the ascending node from the descending
    one: (Omega, omega) and (Omega + 180, omega + 180) give the same A, B, F, G
    (Heintz 1978, ch. 4). This function returns the pair with Omega in
    [0, 180); a radial velocity decides which node is ascending. At i = 0 only
    omega + Omega is defined, at i = 180 only omega - Omega; the undefined
    combination is returned as 0.
    """
    A_, B_, F_, G_ = (np.asarray(v, dtype=float) for v in (A, B, F, G))
    # From the forward formulas (Heintz 1978, ch. 4):
    #   A + G = a (1 + cos i) cos(omega + Omega),  B - F = a (1 + cos i) sin(omega + Omega),
    #   A - G = a (1 - cos i) cos(omega - Omega),  B + F = -a (1 - cos i) sin(omega - Omega).
    # Both amplitudes are >= 0, so atan2 gives the sum and difference of the
    # angles, and a = (r_plus + r_minus) / 2, tan^2(i / 2) = r_minus / r_plus
    # without the cancellation of arccos near i = 0 or 180.
    r_plus = np.hypot(A_ + G_, B_ - F_)
    r_minus = np.hypot(A_ - G_, B_ + F_)
    a = 0.5 * (r_plus + r_minus)
    i = np.degrees(2.0 * np.arctan2(np.sqrt(r_minus), np.sqrt(r_plus)))
    w_plus_n = np.arctan2(B_ - F_, A_ + G_)
    w_minus_n = np.arctan2(-(B_ + F_), A_ - G_)
    node = np.degrees(0.5 * (w_plus_n - w_minus_n))
    omega = np.degrees(0.5 * (w_plus_n + w_minus_n))
    # Halving leaves (Omega, omega) determined only up to a common 180 degrees,
    # the visual-orbit ambiguity itself: pick Omega in [0, 180).
    shift = np.floor(node / 180.0) * 180.0
    node = node - shift
    omega = np.mod(omega - shift, 360.0)
    # Guard the rounding of node = 180 - tiny to 180.0 and omega = 360 - tiny to 360.0.
    node = np.where(node >= 180.0, node - 180.0, node)
    omega = np.where(omega >= 360.0, omega - 360.0, omega)
    return a, i, node[()], omega[()]


def _thiele_innes_jacobian(a: float, i: float, node: float, omega: float) -> NDArray[np.float64]:
    """d(A, B, F, G) / d(a, i, Omega, omega), 4 x 4, angles per degree."""
    A, B, F, G = (float(v) for v in thiele_innes(a, i, node, omega))
    si = np.sin(np.radians(i))
    cn, sn = np.cos(np.radians(node)), np.sin(np.radians(node))
    cw, sw = np.cos(np.radians(omega)), np.sin(np.radians(omega))
    deg = np.pi / 180.0
    # Derivatives of Heintz's formulas (thiele_innes): by Omega and omega they
    # permute A, B, F, G; by i only the cos i terms change.
    return np.array(
        [
            [A / a, a * sw * sn * si * deg, -B * deg, F * deg],
            [B / a, -a * sw * cn * si * deg, A * deg, G * deg],
            [F / a, a * cw * sn * si * deg, -G * deg, -A * deg],
            [G / a, -a * cw * cn * si * deg, F * deg, -B * deg],
        ]
    )


def _xy_unit(
    t: ArrayLike, P: ArrayLike, T: ArrayLike, e: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Elliptic rectangular coordinates X = cos E - e, Y = sqrt(1 - e^2) sin E."""
    t_, P_, T_, e_ = (np.asarray(v, dtype=float) for v in (t, P, T, e))
    # Mean anomaly M = 2 pi (t - T) / P (Heintz 1978, ch. 4; Meeus 1998, eq. 57.1).
    E = solve_kepler(_TWO_PI * (t_ - T_) / P_, e_)
    return np.cos(E) - e_, np.sqrt(1.0 - e_**2) * np.sin(E)


def ephemeris_xy(
    t: ArrayLike,
    P: ArrayLike,
    T: ArrayLike,
    e: ArrayLike,
    a: ArrayLike,
    i: ArrayLike,
    node: ArrayLike,
    omega: ArrayLike,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Offsets of the secondary from the primary at epochs t.

    Parameters
    ----------
    t : array_like
        Epochs, Julian years.
    P : array_like
        Period, years.
    T : array_like
        Epoch of periastron passage, Julian years.
    e : array_like
        Eccentricity in [0, 1).
    a : array_like
        Semimajor axis, arcsec.
    i, node, omega : array_like
        Inclination, position angle of the node and argument of periastron,
        degrees.

    Returns
    -------
    x_north, y_east : ndarray
        North and east offsets, arcsec, in the broadcast shape of all inputs
        (numpy rules: for K orbits at N epochs give the elements shape (K, 1)
        and t shape (N,)).
    """
    X, Y = _xy_unit(t, P, T, e)
    A, B, F, G = thiele_innes(a, i, node, omega)
    # Heintz 1978, ch. 4 (METHODS.md): x = A X + F Y (north), y = B X + G Y (east).
    return A * X + F * Y, B * X + G * Y


def ephemeris(
    t: ArrayLike,
    P: ArrayLike,
    T: ArrayLike,
    e: ArrayLike,
    a: ArrayLike,
    i: ArrayLike,
    node: ArrayLike,
    omega: ArrayLike,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Separation and position angle of the secondary at epochs t.

    Parameters are those of ``ephemeris_xy``.

    Returns
    -------
    rho : ndarray
        Separation, arcsec.
    theta : ndarray
        Position angle, degrees north through east, in [0, 360).
    """
    x, y = ephemeris_xy(t, P, T, e, a, i, node, omega)
    # rho = sqrt(x^2 + y^2), theta = atan2(y, x) (METHODS.md; Meeus 1998, ch. 57).
    theta = np.mod(np.degrees(np.arctan2(y, x)), 360.0)
    # np.mod can round -tiny up to 360.0; [()] turns 0-d results into scalars.
    return np.hypot(x, y), np.where(theta >= 360.0, 0.0, theta)[()]


def dynamical_mass(a_arcsec: ArrayLike, parallax_mas: ArrayLike, P_yr: ArrayLike) -> NDArray[np.float64]:
    """Total mass of a visual pair from Kepler's third law.

    Parameters
    ----------
    a_arcsec : array_like
        Semimajor axis of the relative orbit, arcsec.
    parallax_mas : array_like
        Parallax, mas.
    P_yr : array_like
        Period, years.

    Returns
    -------
    ndarray
        M = a^3 / (parallax^3 P^2) in solar masses (a and parallax in the same
        angular unit). In these units Kepler's law is 3.8e-5 below the mass
        from GM_sun, the au and the Julian year (the Julian year is not the
        Gaussian year).
    """
    a, plx, P = (np.asarray(v, dtype=float) for v in (a_arcsec, parallax_mas, P_yr))
    # Kepler's third law in solar units, a / parallax = a in au (Heintz 1978,
    # ch. 4; METHODS.md). 1000 mas per arcsec.
    return (1000.0 * a / plx) ** 3 / P**2


def dynamical_mass_uncertainty(
    a_arcsec: ArrayLike,
    sigma_a_arcsec: ArrayLike,
    parallax_mas: ArrayLike,
    sigma_parallax_mas: ArrayLike,
    P_yr: ArrayLike,
    sigma_P_yr: ArrayLike,
) -> NDArray[np.float64]:
    """First-order 1-sigma uncertainty of ``dynamical_mass``.

    Parameters
    ----------
    a_arcsec, sigma_a_arcsec : array_like
        Semimajor axis and its uncertainty, arcsec.
    parallax_mas, sigma_parallax_mas : array_like
        Parallax and its uncertainty, mas.
    P_yr, sigma_P_yr : array_like
        Period and its uncertainty, years.

    Returns
    -------
    ndarray
        sigma_M in solar masses, M sqrt(9 (sa/a)^2 + 9 (splx/plx)^2 + 4 (sP/P)^2).

    Notes
    -----
    Linear propagation for independent errors; good while the relative errors
    are small (the mass goes as the cube of the parallax, so at 10 % in the
    parallax the distribution of M is already visibly skewed). The a and P of
    one orbit fit are correlated; this formula ignores that.
    """
    a, sa, plx, splx, P, sP = (
        np.asarray(v, dtype=float)
        for v in (a_arcsec, sigma_a_arcsec, parallax_mas, sigma_parallax_mas, P_yr, sigma_P_yr)
    )
    # First-order propagation of M = a^3 plx^-3 P^-2: exponents 3, -3, -2.
    rel = np.sqrt(9.0 * (sa / a) ** 2 + 9.0 * (splx / plx) ** 2 + 4.0 * (sP / P) ** 2)
    return dynamical_mass(a, plx, P) * rel


def arc_coverage(t: ArrayLike, P: ArrayLike) -> NDArray[np.float64]:
    """Time spanned by the observations in units of the period.

    Parameters
    ----------
    t : array_like, shape (..., N)
        Epochs of observation, Julian years (last axis).
    P : array_like
        Period(s), years; broadcast with the span.

    Returns
    -------
    ndarray
        (max t - min t) / P. Below 1 the data cover only part of the orbit;
        1 or more means at least one whole revolution.
    """
    t_ = np.asarray(t, dtype=float)
    return (np.max(t_, axis=-1) - np.min(t_, axis=-1)) / np.asarray(P, dtype=float)


class OrbitFit(NamedTuple):
    """Result of ``fit_orbit``; units as in the module docstring.

    ``sigma_*`` are 1-sigma uncertainties from (J^T J)^-1 in the Campbell
    elements, scaled by chi2 / dof when that exceeds 1; inf where the data
    leave an element undetermined (e.g. omega and T of a circular orbit).
    T is the periastron passage nearest the middle of the observed span, and
    Omega is in [0, 180) (see ``campbell_from_thiele_innes``).
    """

    P: float
    T: float
    e: float
    a: float
    i: float
    node: float
    omega: float
    sigma_P: float
    sigma_T: float
    sigma_e: float
    sigma_a: float
    sigma_i: float
    sigma_node: float
    sigma_omega: float
    chi2: float
    dof: int
    converged: bool
    coverage: float


def _kepler_tables(e_grid: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """X(M) and Y(M) at K + 1 equally spaced mean anomalies in [0, 2 pi], per eccentricity."""
    M = np.linspace(0.0, _TWO_PI, _KEPLER_TABLE_SIZE + 1)
    E = solve_kepler(M[None, :], e_grid[:, None])
    return np.cos(E) - e_grid[:, None], np.sqrt(1.0 - e_grid[:, None] ** 2) * np.sin(E)


def _grid_chi2(
    tc: NDArray[np.float64],
    x: NDArray[np.float64],
    y: NDArray[np.float64],
    wx: NDArray[np.float64],
    wy: NDArray[np.float64],
    P_grid: NDArray[np.float64],
    e_grid: NDArray[np.float64],
    phase: NDArray[np.float64],
) -> NDArray[np.float64]:
    """chi2 of the best linear A, B, F, G at every (P, e, periastron phase).

    tc are epochs relative to a reference epoch t0 and the periastron passage
    of phase p is T = t0 - p P. Returns an array of shape (nP, ne, nphase).
    """
    n = tc.size
    tab_X, tab_Y = _kepler_tables(e_grid)
    slope_X, slope_Y = np.diff(tab_X, axis=1), np.diff(tab_Y, axis=1)
    K = _KEPLER_TABLE_SIZE
    wxx, wyy = wx * x, wy * y
    sum_wx2, sum_wy2 = float(wxx @ x), float(wyy @ y)
    out = np.empty((P_grid.size, e_grid.size, phase.size))
    step = max(1, _GRID_CELLS_PER_CHUNK // (e_grid.size * phase.size * n))
    # Chunks over P only, for memory; each chunk is one vectorised pass over
    # all its (P, e, T) cells and epochs.
    for start in range(0, P_grid.size, step):
        P = P_grid[start : start + step]
        # Mean anomaly in turns, M / 2 pi = (t - T) / P, shape (nP, nphase, N).
        turns = tc[None, None, :] / P[:, None, None] + phase[None, :, None]
        u = (turns - np.floor(turns)) * K
        j = np.minimum(u.astype(np.intp), K - 1)
        w = u - j
        # Linear interpolation in the tables of the exact solution (solve_kepler):
        # a grid only needs to land in the basin of the refinement.
        X = tab_X[:, j] + slope_X[:, j] * w  # (ne, nP, nphase, N)
        Y = tab_Y[:, j] + slope_Y[:, j] * w
        # Weighted normal equations of x = A X + F Y and y = B X + G Y, each
        # linear in two constants (Thiele-Innes method; Heintz 1978, ch. 4).
        XX, XY, YY = X * X, X * Y, Y * Y
        chi2 = sum_wx2 + sum_wy2
        for wv, wd in ((wx, wxx), (wy, wyy)):
            s11, s12, s22 = XX @ wv, XY @ wv, YY @ wv
            b1, b2 = X @ wd, Y @ wd
            det = s11 * s22 - s12**2
            with np.errstate(divide="ignore", invalid="ignore"):
                # chi2 = sum w d^2 - b^T S^-1 b for the 2 x 2 solve in closed form.
                explained = (s22 * b1**2 - 2.0 * s12 * b1 * b2 + s11 * b2**2) / det
            chi2 = chi2 - np.where(det > 1e-12 * s11 * s22, explained, -np.inf)
        out[start : start + step] = np.moveaxis(chi2, 0, 1)
    return out


def _linear_thiele_innes(
    X: NDArray[np.float64],
    Y: NDArray[np.float64],
    x: NDArray[np.float64],
    y: NDArray[np.float64],
    wx: NDArray[np.float64],
    wy: NDArray[np.float64],
) -> NDArray[np.float64]:
    """Weighted least-squares (A, B, F, G) for given X, Y (all 1-D, length N)."""
    out = []
    for wv, d in ((wx, x), (wy, y)):
        S = np.array([[wv @ (X * X), wv @ (X * Y)], [wv @ (X * Y), wv @ (Y * Y)]])
        b = np.array([wv @ (X * d), wv @ (Y * d)])
        out.append(np.linalg.lstsq(S, b, rcond=None)[0])
    (A, F), (B, G) = out
    return np.array([A, B, F, G])


def _profile_minima(chi2_P: NDArray[np.float64], n: int) -> list[int]:
    """Indices of the n lowest local minima of chi2 along the period grid."""
    padded = np.concatenate(([np.inf], chi2_P, [np.inf]))
    is_min = (padded[1:-1] <= padded[:-2]) & (padded[1:-1] <= padded[2:]) & np.isfinite(chi2_P)
    idx = np.flatnonzero(is_min)
    return [int(k) for k in idx[np.argsort(chi2_P[idx])][:n]]


def fit_orbit(
    t: ArrayLike,
    x: ArrayLike,
    y: ArrayLike,
    sx: ArrayLike,
    sy: ArrayLike,
    *,
    P_grid: ArrayLike | None = None,
    e_grid: ArrayLike | None = None,
    n_T: int = 36,
    n_starts: int = 3,
) -> OrbitFit:
    """Least-squares visual orbit from relative positions.

    Parameters
    ----------
    t : array_like, shape (N,)
        Epochs of observation, Julian years; N >= 4.
    x, y : array_like, shape (N,)
        North and east offsets of the secondary, arcsec.
    sx, sy : array_like
        1-sigma uncertainties of x and y, arcsec (> 0); broadcast to (N,).
    P_grid : array_like, optional
        Trial periods, years. Default: log-spaced from 0.5 to 20 times the
        observed span, with a step small enough (2 %) that the orbital phase
        drifts by at most a quarter radian across the data between neighbours
        at the shortest period. Give a grid to search elsewhere (any P > 0).
    e_grid : array_like, optional
        Trial eccentricities in [0, 1). Default 0, 0.05, ..., 0.95.
    n_T : int
        Trial periastron epochs per period, equally spaced over one period.
    n_starts : int
        Number of local minima of the grid (in P) refined; the best is kept.

    Returns
    -------
    OrbitFit

    Notes
    -----
    For fixed (P, T, e) the offsets are linear in the Thiele-Innes constants,
    x = A X + F Y and y = B X + G Y (Heintz 1978, ch. 4), so the grid solves
    A, B, F, G in closed form by weighted least squares at every grid point
    (vectorised; the Kepler solution comes from a table of ``solve_kepler``
    at 1024 mean anomalies per eccentricity). The best grid points are refined
    with ``scipy.optimize.least_squares`` (trust-region, analytic Jacobian) in
    (P, T, e, A, B, F, G), the same seven-parameter orbit without the
    singularities of the Campbell angles at i = 0 or 180; the covariance of
    (P, T, e, a, i, Omega, omega) is (J^T J)^-1 with J the Jacobian of the
    weighted residuals by the Campbell elements at the solution.
    """
    from scipy.optimize import least_squares

    t_ = np.asarray(t, dtype=float)
    x_ = np.asarray(x, dtype=float)
    y_ = np.asarray(y, dtype=float)
    if t_.ndim != 1 or x_.shape != t_.shape or y_.shape != t_.shape:
        raise ValueError(
            f"t, x and y must be 1-D of one length, got shapes {t_.shape}, {x_.shape}, {y_.shape}. "
            "Fix: pass one observation per element."
        )
    n = t_.size
    if n < 4:
        raise ValueError(f"{n} observations cannot fix 7 elements. Fix: give at least 4 (x, y) pairs.")
    sx_ = np.broadcast_to(np.asarray(sx, dtype=float), t_.shape)
    sy_ = np.broadcast_to(np.asarray(sy, dtype=float), t_.shape)
    if not (np.all(sx_ > 0) and np.all(sy_ > 0)):
        raise ValueError("uncertainties sx, sy must be > 0. Fix: give the 1-sigma errors in arcsec.")
    span = float(t_.max() - t_.min())
    if span <= 0:
        raise ValueError("all epochs are equal. Fix: give observations at two or more epochs.")
    wx, wy = 1.0 / sx_**2, 1.0 / sy_**2
    t0 = 0.5 * (float(t_.max()) + float(t_.min()))
    tc = t_ - t0

    if P_grid is None:
        p_lo, p_hi = 0.5 * span, 20.0 * span
        # Neighbours P and P (1 + d) drift in phase by 2 pi d span / P over the
        # data; d = 0.02 keeps that <= 0.25 rad at P = span / 2.
        P_grid_ = np.geomspace(p_lo, p_hi, int(np.ceil(np.log(p_hi / p_lo) / 0.02)) + 1)
    else:
        P_grid_ = np.atleast_1d(np.asarray(P_grid, dtype=float))
    e_grid_ = np.linspace(0.0, 0.95, 20) if e_grid is None else np.atleast_1d(np.asarray(e_grid, dtype=float))
    if np.any(P_grid_ <= 0) or np.any((e_grid_ < 0) | (e_grid_ >= 1)):
        raise ValueError("grid out of range. Fix: periods > 0 and eccentricities in [0, 1).")
    phase = np.arange(n_T) / n_T

    chi2_grid = _grid_chi2(tc, x_, y_, wx, wy, P_grid_, e_grid_, phase)
    starts = _profile_minima(chi2_grid.reshape(P_grid_.size, -1).min(axis=1), max(1, n_starts))
    if not starts:
        raise ValueError(
            "no grid orbit fits the data (every trial leaves A, B, F, G undetermined). "
            "Fix: give epochs spread over the orbit, or a P_grid that matches their spacing."
        )

    sig = np.concatenate([sx_, sy_])

    def model_jac(p: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        P, T, e, A, B, F, G = p
        M = _TWO_PI * (tc - T) / P
        E = solve_kepler(M, e)
        cE, sE = np.cos(E), np.sin(E)
        q = np.sqrt(1.0 - e**2)
        X, Y = cE - e, q * sE
        # Derivatives of Kepler's equation E - e sin E = M (textbook calculus).
        dE_dM = 1.0 / (1.0 - e * cE)
        dX_dE, dY_dE = -sE, q * cE
        cols_XY = []
        for dE, dX_extra, dY_extra in (
            (dE_dM * (-M / P), 0.0, 0.0),  # by P: dM/dP = -M / P
            (dE_dM * (-_TWO_PI / P), 0.0, 0.0),  # by T: dM/dT = -2 pi / P
            (sE * dE_dM, -1.0, -e * sE / q),  # by e at fixed M
        ):
            dX = dX_dE * dE + dX_extra
            dY = dY_dE * dE + dY_extra
            cols_XY.append(np.concatenate([A * dX + F * dY, B * dX + G * dY]))
        zero = np.zeros(n)
        cols_lin = [
            np.concatenate([X, zero]),  # A
            np.concatenate([zero, X]),  # B
            np.concatenate([Y, zero]),  # F
            np.concatenate([zero, Y]),  # G
        ]
        model = np.concatenate([A * X + F * Y, B * X + G * Y])
        return model, np.column_stack(cols_XY + cols_lin)

    data = np.concatenate([x_, y_])
    last: dict[bytes, tuple[NDArray[np.float64], NDArray[np.float64]]] = {}

    def cached(p: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        # least_squares asks for residuals and Jacobian at the same point: solve
        # Kepler's equation once for both.
        key = p.tobytes()
        if key not in last:
            last.clear()
            last[key] = model_jac(p)
        return last[key]

    def resid(p: NDArray[np.float64]) -> NDArray[np.float64]:
        return (cached(p)[0] - data) / sig

    def jac(p: NDArray[np.float64]) -> NDArray[np.float64]:
        return cached(p)[1] / sig[:, None]

    # Only P > 0 and 0 <= e <= _E_MAX_FIT are constrained.
    lower = np.array([1e-6 * float(P_grid_.min()), -np.inf, 0.0, -np.inf, -np.inf, -np.inf, -np.inf])
    upper = np.array([np.inf, np.inf, _E_MAX_FIT, np.inf, np.inf, np.inf, np.inf])
    best = None  # the refinement with the lowest chi2
    for k in starts:
        ie, ip = np.unravel_index(np.argmin(chi2_grid[k]), chi2_grid[k].shape)
        P0, e0 = float(P_grid_[k]), min(float(e_grid_[ie]), _E_MAX_FIT)
        T0 = -float(phase[ip]) * P0  # relative to t0
        X0, Y0 = _xy_unit(tc, P0, T0, e0)
        p0 = np.concatenate([[P0, T0, e0], _linear_thiele_innes(X0, Y0, x_, y_, wx, wy)])
        res = least_squares(
            resid,
            p0,
            jac=jac,
            bounds=(lower, upper),
            x_scale="jac",
            method="trf",
            xtol=1e-12,
            ftol=1e-12,
            gtol=1e-12,
            # Well-posed fits converge in a few dozen evaluations; an arc too
            # short to fix the orbit would wander towards e -> 1, P -> infinity.
            max_nfev=100,
        )
        if best is None or res.cost < best.cost:
            best = res

    P, T, e, A, B, F, G = (float(v) for v in best.x)
    a, i, node, omega = (float(v) for v in campbell_from_thiele_innes(A, B, F, G))
    # The periastron passage nearest the middle of the data (least correlated with P).
    T = T - P * np.round(T / P)
    chi2 = float(2.0 * best.cost)
    dof = 2 * n - 7
    # Jacobian by the Campbell elements: chain rule through the Thiele-Innes map.
    D = np.eye(7)
    D[3:, 3:] = _thiele_innes_jacobian(a, i, node, omega)
    J = jac(np.array([P, T, e, A, B, F, G])) @ D
    # Covariance (J^T J)^-1, scaled by the reduced chi2 when the scatter
    # exceeds the stated errors (dof = 2N - 7 >= 1 since N >= 4).
    try:
        var = np.diag(np.linalg.inv(J.T @ J)) * max(1.0, chi2 / dof)
    except np.linalg.LinAlgError:
        var = np.full(7, np.inf)
    sigmas = np.where(np.isfinite(var) & (var >= 0), np.sqrt(np.abs(var)), np.inf)
    return OrbitFit(
        P=P,
        T=float(T + t0),
        e=e,
        a=a,
        i=i,
        node=node,
        omega=omega,
        sigma_P=float(sigmas[0]),
        sigma_T=float(sigmas[1]),
        sigma_e=float(sigmas[2]),
        sigma_a=float(sigmas[3]),
        sigma_i=float(sigmas[4]),
        sigma_node=float(sigmas[5]),
        sigma_omega=float(sigmas[6]),
        chi2=chi2,
        dof=dof,
        converged=bool(best.success),
        coverage=float(arc_coverage(t_, P)),
    )
