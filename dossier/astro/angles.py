"""Angles on the sky: separation, position angle, tangent-plane offsets, linear motion.

All angles in degrees unless a name says otherwise (``_arcsec``, ``_mas``).
Position angles count from north through east, in [0, 360).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

ARCSEC_PER_RAD = 180.0 / np.pi * 3600.0
MAS_PER_RAD = ARCSEC_PER_RAD * 1000.0


def separation_pa(
    ra1: ArrayLike, dec1: ArrayLike, ra2: ArrayLike, dec2: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Angular separation and position angle of point 2 as seen from point 1.

    Parameters
    ----------
    ra1, dec1, ra2, dec2 : array_like
        Right ascension and declination in degrees; broadcast together.

    Returns
    -------
    separation_arcsec : ndarray
        Great-circle separation in arcsec, accurate at all separations.
    position_angle_deg : ndarray
        Position angle of 2 from 1 in degrees, north through east, in [0, 360).
        Coincident points give 0.
    """
    a1, d1, a2, d2 = (np.radians(np.asarray(x, dtype=float)) for x in (ra1, dec1, ra2, dec2))
    dra = a2 - a1
    sin_d1, cos_d1, sin_d2, cos_d2 = np.sin(d1), np.cos(d1), np.sin(d2), np.cos(d2)
    east = cos_d2 * np.sin(dra)
    north = cos_d1 * sin_d2 - sin_d1 * cos_d2 * np.cos(dra)
    # Vincenty 1975, Survey Review 23, 88: the sphere case of the inverse geodesic,
    # an atan2 form that stays accurate at tiny and near-antipodal separations.
    sep = np.arctan2(np.hypot(east, north), sin_d1 * sin_d2 + cos_d1 * cos_d2 * np.cos(dra))
    # Position angle from the spherical triangle pole-1-2 (Smart 1977, Textbook on
    # Spherical Astronomy, 6th ed., CUP, ch. 1; from memory): tan PA = east / north.
    pa = np.mod(np.degrees(np.arctan2(east, north)), 360.0)
    # np.mod can return 360.0 for a tiny negative angle; fold it back to 0.
    pa = np.where(pa >= 360.0, 0.0, pa)
    return sep * ARCSEC_PER_RAD, pa


def tangent_offsets(
    ra0: ArrayLike, dec0: ArrayLike, ra: ArrayLike, dec: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Gnomonic (tangent-plane) standard coordinates of (ra, dec) about (ra0, dec0).

    Parameters
    ----------
    ra0, dec0 : array_like
        Tangent point in degrees.
    ra, dec : array_like
        Projected point in degrees; broadcast with the tangent point.

    Returns
    -------
    xi_east_arcsec, eta_north_arcsec : ndarray
        Standard coordinates in arcsec, xi towards east and eta towards north.
        Points 90 degrees or more from the tangent point have no gnomonic image
        and give NaN.
    """
    a0, d0, a, d = (np.radians(np.asarray(x, dtype=float)) for x in (ra0, dec0, ra, dec))
    dra = a - a0
    # Calabretta & Greisen 2002, A&A 395, 1077 (TAN projection), written as
    # standard coordinates: xi = x/z, eta = y/z in the frame of the tangent point.
    cos_c = np.sin(d0) * np.sin(d) + np.cos(d0) * np.cos(d) * np.cos(dra)
    with np.errstate(divide="ignore", invalid="ignore"):
        xi = np.cos(d) * np.sin(dra) / cos_c
        eta = (np.cos(d0) * np.sin(d) - np.sin(d0) * np.cos(d) * np.cos(dra)) / cos_c
    behind = ~(cos_c > 0.0)
    xi = np.where(behind, np.nan, xi)
    eta = np.where(behind, np.nan, eta)
    return xi * ARCSEC_PER_RAD, eta * ARCSEC_PER_RAD


def _from_tangent(
    a0: NDArray[np.float64], d0: NDArray[np.float64], xi: NDArray[np.float64], eta: NDArray[np.float64]
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Inverse gnomonic projection; all in radians (Calabretta & Greisen 2002, A&A 395, 1077)."""
    denom = np.cos(d0) - eta * np.sin(d0)
    a = a0 + np.arctan2(xi, denom)
    d = np.arctan2(np.sin(d0) + eta * np.cos(d0), np.hypot(xi, denom))
    return a, d


def propagate_linear(
    ra: ArrayLike, dec: ArrayLike, pmra: ArrayLike, pmdec: ArrayLike, dt_yr: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Move a position by its proper motion along a straight line for ``dt_yr`` years.

    The displacement (pmra * dt, pmdec * dt) is laid on the tangent plane at the
    starting position and projected back to the sphere. This is straight-line
    space motion with no radial velocity, and agrees to first order with the
    small-angle form ra + pmra dt / cos(dec), dec + pmdec dt while staying well
    behaved near the poles. It ignores radial velocity (perspective acceleration)
    and light time, so it is meant for differences of years to decades.

    Parameters
    ----------
    ra, dec : array_like
        Position at the starting epoch, degrees.
    pmra : array_like
        Proper motion in right ascension including the cos(dec) factor, mas/yr.
    pmdec : array_like
        Proper motion in declination, mas/yr.
    dt_yr : array_like
        Time to move forward (negative: backward), Julian years.

    Returns
    -------
    ra, dec : ndarray
        Moved position in degrees, right ascension in [0, 360).
    """
    a0 = np.radians(np.asarray(ra, dtype=float))
    d0 = np.radians(np.asarray(dec, dtype=float))
    dt = np.asarray(dt_yr, dtype=float)
    xi = np.asarray(pmra, dtype=float) * dt / MAS_PER_RAD
    eta = np.asarray(pmdec, dtype=float) * dt / MAS_PER_RAD
    a, d = _from_tangent(a0, d0, xi, eta)
    return np.mod(np.degrees(a), 360.0), np.degrees(d)


def offset_position(ra: ArrayLike, dec: ArrayLike, rho_arcsec: ArrayLike, theta_deg: ArrayLike
                    ) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """The position at separation ρ and position angle θ (north through east) from (ra, dec), degrees.

    A point at angular distance ρ has gnomonic standard coordinates of radius tan ρ (xi = tan ρ sin θ east,
    eta = tan ρ cos θ north), projected back to the sphere (Calabretta & Greisen 2002, A&A 395, 1077): the
    great-circle separation is ρ exactly, for ρ < 90°.
    """
    a0, d0 = np.radians(np.asarray(ra, dtype=float)), np.radians(np.asarray(dec, dtype=float))
    r = np.tan(np.asarray(rho_arcsec, dtype=float) / ARCSEC_PER_RAD)
    t = np.radians(np.asarray(theta_deg, dtype=float))
    a, d = _from_tangent(a0, d0, r * np.sin(t), r * np.cos(t))
    return np.mod(np.degrees(a), 360.0), np.degrees(d)
