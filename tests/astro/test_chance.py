"""Tests for dossier.astro.chance against scipy, mpmath and astropy units."""

from __future__ import annotations

import astropy.units as u
import mpmath
import numpy as np
import pytest
from scipy import stats

from dossier.astro.chance import (
    chance_alignment_probability,
    density_at_magnitude,
    per_sq_deg_to_per_sq_arcsec,
)


def test_probability_is_poisson_one_or_more() -> None:
    sep = np.array([0.5, 2.0, 10.0, 60.0, 600.0])
    density = np.array([1e-4, 1e-3, 1e-3, 1e-3, 1e-3])
    lam = np.pi * sep**2 * density
    # Bloom, Kulkarni & Djorgovski 2002, AJ 123, 1111: P = 1 - exp(-pi rho^2 Sigma),
    # the Poisson probability of at least one star; reference: scipy.stats.poisson.sf(0, lambda).
    np.testing.assert_allclose(chance_alignment_probability(sep, density), stats.poisson.sf(0, lam), rtol=1e-12)


def test_probability_keeps_precision_at_tiny_lambda() -> None:
    sep, density = 0.1, 1e-12
    # Reference: mpmath at 30 digits; 1 - exp(-x) computed naively would lose all digits.
    with mpmath.workdps(30):
        expected = float(-mpmath.expm1(-mpmath.pi * mpmath.mpf(sep) ** 2 * mpmath.mpf(density)))
    assert chance_alignment_probability(sep, density) == pytest.approx(expected, rel=1e-14)
    assert chance_alignment_probability(0.0, 1.0) == 0.0


def test_unit_conversion_against_astropy() -> None:
    # Reference: astropy units; 1 deg^-2 in arcsec^-2 is exactly 3600^-2.
    x = np.array([1.0, 2500.0, 1e5])
    np.testing.assert_allclose(per_sq_deg_to_per_sq_arcsec(x), (x / u.deg**2).to_value(1 / u.arcsec**2), rtol=1e-15)


TABLE_MAG = np.array([8.0, 10.0, 12.0, 14.0, 16.0])
TABLE_DENSITY = np.array([5.0, 30.0, 150.0, 900.0, 4000.0])  # per deg^2, invented, rising with magnitude


def test_interpolation_reproduces_table_points() -> None:
    d, extra = density_at_magnitude(TABLE_MAG, TABLE_MAG, TABLE_DENSITY)
    np.testing.assert_allclose(d, TABLE_DENSITY, rtol=1e-13)
    assert not extra.any()


def test_interpolation_is_log_linear_and_monotone() -> None:
    # Common practice: star counts interpolated linearly in log(density) with magnitude.
    d, _ = density_at_magnitude(11.0, TABLE_MAG, TABLE_DENSITY)
    assert d == pytest.approx(np.sqrt(30.0 * 150.0), rel=1e-13)  # geometric midpoint
    mags = np.linspace(5.0, 20.0, 3001)
    d, extra = density_at_magnitude(mags, TABLE_MAG, TABLE_DENSITY)
    assert np.all(np.diff(d) > 0)
    np.testing.assert_array_equal(extra, (mags < 8.0) | (mags > 16.0))


def test_extrapolation_uses_end_slopes() -> None:
    d, extra = density_at_magnitude(np.array([6.0, 18.0]), TABLE_MAG, TABLE_DENSITY)
    assert extra.all()
    # Hand values: carry each end segment's slope in log10(density) per magnitude.
    assert d[0] == pytest.approx(5.0 * (5.0 / 30.0), rel=1e-13)
    assert d[1] == pytest.approx(4000.0 * (4000.0 / 900.0), rel=1e-13)


def test_single_row_table() -> None:
    d, extra = density_at_magnitude(np.array([9.0, 12.0, 15.0]), [12.0], [150.0])
    np.testing.assert_allclose(d, 150.0)
    assert extra.tolist() == [True, False, True]


def test_bad_tables_raise_with_a_fix() -> None:
    with pytest.raises(ValueError, match="Fix: sort the rows"):
        density_at_magnitude(10.0, [12.0, 10.0], [1.0, 2.0])
    with pytest.raises(ValueError, match="Fix: drop empty bins"):
        density_at_magnitude(10.0, [10.0, 12.0], [0.0, 2.0])
    with pytest.raises(ValueError, match="Fix: give two 1-D sequences"):
        density_at_magnitude(10.0, [10.0, 12.0], [1.0])
