"""Chance alignment of an unrelated star within a given separation.

Units: separations in arcsec, surface densities per square arcsec unless a
name says otherwise, magnitudes in any one band.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

# 1 degree = 3600 arcsec exactly, so 1 deg^2 = 3600^2 arcsec^2.
ARCSEC2_PER_DEG2 = 3600.0**2


def chance_alignment_probability(sep_arcsec: ArrayLike, density_per_sq_arcsec: ArrayLike) -> NDArray[np.float64]:
    """Probability that at least one unrelated star lies within ``sep_arcsec``.

    Parameters
    ----------
    sep_arcsec : array_like
        Angular separation of the companion, arcsec.
    density_per_sq_arcsec : array_like
        Surface density of stars at least as bright as the companion, per
        square arcsec, counted locally.

    Returns
    -------
    ndarray
        P = 1 - exp(-pi rho^2 Sigma), the Poisson probability of one or more
        stars in the disc.
    """
    rho = np.asarray(sep_arcsec, dtype=float)
    sigma = np.asarray(density_per_sq_arcsec, dtype=float)
    # Bloom, Kulkarni & Djorgovski 2002, AJ 123, 1111; -expm1 keeps full
    # relative precision when the expected number pi rho^2 Sigma is tiny.
    return -np.expm1(-np.pi * rho**2 * sigma)


def density_at_magnitude(
    mag: ArrayLike, table_mag: ArrayLike, table_density: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.bool_]]:
    """Cumulative surface density of stars brighter than ``mag``, from a table.

    Parameters
    ----------
    mag : array_like
        Magnitudes at which to evaluate.
    table_mag : array_like, shape (k,)
        Limiting magnitudes, strictly increasing.
    table_density : array_like, shape (k,)
        Surface density of stars brighter than each limit (any area unit; the
        result has the same unit), all > 0.

    Returns
    -------
    density : ndarray
        log10(density) interpolated linearly in magnitude; outside the table
        the first or last segment's slope is carried on. A one-row table gives
        that row's density everywhere: an upper bound for a companion brighter
        than the row, an underestimate for a fainter one.
    extrapolated : ndarray of bool
        True where ``mag`` lies outside the table's range (for a one-row table:
        wherever it differs from the row's magnitude).
    """
    m = np.asarray(mag, dtype=float)
    tm = np.atleast_1d(np.asarray(table_mag, dtype=float))
    td = np.atleast_1d(np.asarray(table_density, dtype=float))
    if tm.ndim != 1 or tm.shape != td.shape or tm.size == 0:
        raise ValueError(
            f"density table has magnitudes of shape {tm.shape} and densities of shape {td.shape}. "
            "Fix: give two 1-D sequences of the same, non-zero length."
        )
    if np.any(np.diff(tm) <= 0) or not np.all(np.isfinite(tm)):
        raise ValueError(
            "density table magnitudes must be finite and strictly increasing. "
            "Fix: sort the rows by magnitude and drop duplicates."
        )
    if not np.all((td > 0) & np.isfinite(td)):
        raise ValueError(
            "density table values must be positive and finite. "
            "Fix: drop empty bins or give a lower limit instead of zero."
        )
    extrapolated = (m < tm[0]) | (m > tm[-1])
    if tm.size == 1:
        return np.broadcast_to(td[0], m.shape).astype(float), np.asarray(m != tm[0])
    log_d = np.log10(td)
    inside = np.interp(m, tm, log_d)
    slope_lo = (log_d[1] - log_d[0]) / (tm[1] - tm[0])
    slope_hi = (log_d[-1] - log_d[-2]) / (tm[-1] - tm[-2])
    log_out = np.where(m < tm[0], log_d[0] + slope_lo * (m - tm[0]), inside)
    log_out = np.where(m > tm[-1], log_d[-1] + slope_hi * (m - tm[-1]), log_out)
    return 10.0**log_out, np.asarray(extrapolated)


def per_sq_deg_to_per_sq_arcsec(x: ArrayLike) -> NDArray[np.float64]:
    """Convert a surface density from per square degree to per square arcsec (exact)."""
    return np.asarray(x, dtype=float) / ARCSEC2_PER_DEG2
