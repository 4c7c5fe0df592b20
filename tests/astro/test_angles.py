"""Tests for dossier.astro.angles against astropy (reference library)."""

from __future__ import annotations

import warnings

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import SkyCoord
from astropy.time import Time

from dossier.astro.angles import propagate_linear, separation_pa, tangent_offsets

ARCSEC_PER_RAD = 206264.80624709636


def _wrap180(x: np.ndarray) -> np.ndarray:
    return (x + 180.0) % 360.0 - 180.0


def _random_points(rng: np.random.Generator, n: int) -> tuple[np.ndarray, np.ndarray]:
    return rng.uniform(0.0, 360.0, n), np.degrees(np.arcsin(rng.uniform(-1.0, 1.0, n)))


def _check_against_astropy(ra1, dec1, ra2, dec2) -> None:
    sep, pa = separation_pa(ra1, dec1, ra2, dec2)
    c1, c2 = SkyCoord(ra1 * u.deg, dec1 * u.deg), SkyCoord(ra2 * u.deg, dec2 * u.deg)
    # Reference: astropy SkyCoord.separation / position_angle; tolerance 1e-9 deg.
    np.testing.assert_allclose(sep / 3600.0, c1.separation(c2).deg, rtol=0, atol=1e-9)
    assert np.max(np.abs(_wrap180(pa - c1.position_angle(c2).deg))) < 1e-9
    assert np.all((pa >= 0.0) & (pa < 360.0))


def test_separation_pa_random_pairs() -> None:
    rng = np.random.default_rng(11)
    ra1, dec1 = _random_points(rng, 2000)
    ra2, dec2 = _random_points(rng, 2000)
    _check_against_astropy(ra1, dec1, ra2, dec2)


def test_separation_pa_close_pairs_near_the_poles() -> None:
    rng = np.random.default_rng(12)
    n = 2000
    ra1 = rng.uniform(0.0, 360.0, n)
    dec1 = rng.uniform(89.9, 90.0, n) * rng.choice([-1.0, 1.0], n)
    ra2 = ra1 + rng.normal(0.0, 0.01, n)
    dec2 = np.clip(dec1 + rng.normal(0.0, 0.001, n), -90.0, 90.0)
    _check_against_astropy(ra1, dec1, ra2, dec2)


def test_separation_pa_across_ra_zero() -> None:
    rng = np.random.default_rng(13)
    n = 500
    ra1 = rng.uniform(359.0, 360.0, n)
    ra2 = rng.uniform(0.0, 1.0, n)
    dec1, dec2 = rng.uniform(-80, 80, n), rng.uniform(-80, 80, n)
    _check_against_astropy(ra1, dec1, ra2, dec2)
    # Hand value (geometry): due east of a point on the equator, 0.2 deg across RA = 0.
    sep, pa = separation_pa(359.9, 0.0, 0.1, 0.0)
    assert sep == pytest.approx(720.0, rel=1e-12)
    assert pa == pytest.approx(90.0, abs=1e-12)


def test_separation_pa_broadcasts_scalars_and_arrays() -> None:
    sep, pa = separation_pa(10.0, 20.0, np.array([10.0, 10.0, 11.0]), np.array([20.0, 21.0, 20.0]))
    assert sep.shape == pa.shape == (3,)
    assert sep[0] == 0.0 and pa[0] == 0.0  # coincident points: PA 0 by convention
    assert pa[1] == pytest.approx(0.0, abs=1e-12)  # due north (geometry)
    sep0, pa0 = separation_pa(0.0, 0.0, 0.0, 1.0)
    assert np.ndim(sep0) == 0 and sep0 == pytest.approx(3600.0, rel=1e-14)


def test_tangent_offsets_small_field_match_astropy_offsets() -> None:
    rng = np.random.default_rng(14)
    n = 2000
    ra0, dec0 = rng.uniform(0, 360, n), rng.uniform(-89.0, 89.0, n)
    c0 = SkyCoord(ra0 * u.deg, dec0 * u.deg)
    target = c0.directional_offset_by(rng.uniform(0, 360, n) * u.deg, rng.uniform(0, 10, n) * u.arcsec)
    xi, eta = tangent_offsets(ra0, dec0, target.ra.deg, target.dec.deg)
    dlon, dlat = c0.spherical_offsets_to(target)
    # Reference: astropy spherical_offsets_to (SkyOffsetFrame longitude/latitude).
    # Gnomonic and spherical offsets differ at third order, tan(x) - x ~ x^3/3:
    # under 8e-9 arcsec within 10 arcsec, so the tolerance is 1e-8 arcsec.
    np.testing.assert_allclose(xi, dlon.arcsec, rtol=0, atol=1e-8)
    np.testing.assert_allclose(eta, dlat.arcsec, rtol=0, atol=1e-8)


def test_tangent_offsets_wide_field_exact_relation_to_offset_frame() -> None:
    rng = np.random.default_rng(15)
    n = 2000
    ra0, dec0 = rng.uniform(0, 360, n), rng.uniform(-89.0, 89.0, n)
    c0 = SkyCoord(ra0 * u.deg, dec0 * u.deg)
    target = c0.directional_offset_by(rng.uniform(0, 360, n) * u.deg, rng.uniform(0, 60, n) * u.deg)
    xi, eta = tangent_offsets(ra0, dec0, target.ra.deg, target.dec.deg)
    lon, lat = c0.spherical_offsets_to(target)
    # Reference: astropy SkyOffsetFrame. In that frame the point is
    # (cos b cos l, cos b sin l, sin b), so the gnomonic coordinates are exactly
    # xi = tan l and eta = tan b / cos l (geometry); tolerance 1e-12 (radians).
    np.testing.assert_allclose(xi / ARCSEC_PER_RAD, np.tan(lon.rad), rtol=0, atol=1e-12)
    np.testing.assert_allclose(eta / ARCSEC_PER_RAD, np.tan(lat.rad) / np.cos(lon.rad), rtol=0, atol=1e-12)


def test_tangent_offsets_beyond_the_horizon_are_nan() -> None:
    xi, eta = tangent_offsets(0.0, 0.0, np.array([90.5, 180.0, 1.0]), np.array([0.0, 0.0, 0.0]))
    assert np.isnan(xi[:2]).all() and np.isnan(eta[:2]).all()
    # Hand value (geometry): 1 deg east on the equator projects to tan(1 deg).
    assert xi[2] == pytest.approx(np.tan(np.radians(1.0)) * ARCSEC_PER_RAD, rel=1e-13)


def test_propagate_linear_matches_astropy_space_motion() -> None:
    rng = np.random.default_rng(16)
    n = 2000
    ra0, dec0 = rng.uniform(0, 360, n), rng.uniform(-89.9, 89.9, n)
    pmra, pmdec = rng.uniform(-3000, 3000, n), rng.uniform(-3000, 3000, n)
    dt = rng.uniform(-50, 50, n)
    ra, dec = propagate_linear(ra0, dec0, pmra, pmdec, dt)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # ERFA warns about the dubious year of J2000 + dt
        start = SkyCoord(
            ra0 * u.deg,
            dec0 * u.deg,
            pm_ra_cosdec=pmra * u.mas / u.yr,
            pm_dec=pmdec * u.mas / u.yr,
            distance=100 * u.pc,
            radial_velocity=0 * u.km / u.s,
            obstime=Time("J2000"),
        )
        moved = start.apply_space_motion(dt=dt * u.yr)
    # Reference: astropy apply_space_motion (ERFA straight-line space motion).
    # With zero radial velocity a straight line through space projects to a
    # straight line on the tangent plane, so the two agree exactly apart from
    # ERFA's light-time and rounding terms, second order in the motion: for
    # motions up to 3 arcsec/yr over 50 yr the tolerance is 1e-8 arcsec.
    gap = SkyCoord(ra * u.deg, dec * u.deg).separation(moved).arcsec
    assert np.max(gap) < 1e-8
    assert np.all((ra >= 0) & (ra < 360))


def test_propagate_linear_small_angle_limit() -> None:
    # Common practice: for small motions, dRA = pmra dt / cos(dec), dDec = pmdec dt;
    # the forms differ at second order, (0.1 arcsec)^2 tan(dec) ~ 1e-11 deg here.
    ra, dec = propagate_linear(359.99999, 60.0, 100.0, -50.0, 1.0)
    assert ra == pytest.approx((359.99999 + 0.1 / 3600 / np.cos(np.radians(60.0))) % 360, abs=1e-10)
    assert ra < 1.0  # wrapped across RA = 0
    assert dec == pytest.approx(60.0 - 0.05 / 3600, abs=1e-10)
