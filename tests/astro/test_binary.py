"""Tests for dossier.astro.binary against astropy constants/units, mpmath and
published values."""

from __future__ import annotations

import astropy.units as u
import mpmath
import numpy as np
import pytest
from astropy import constants as const
from scipy import stats

from dossier.astro.binary import (
    AU_M,
    GM_SUN_M3_S2,
    KM_S_PER_AU_YR,
    circular_speed_kms,
    delta_mu_escape,
    delta_mu_orbit,
    escape_speed_kms,
    kepler_period_yr,
    projected_separation_ratio,
    sample_eccentricity,
    semimajor_axis_au,
    sigma_delta_mu,
    solve_kepler,
)


def test_constants_against_astropy() -> None:
    # Reference: astropy units (Julian year) and constants (IAU 2012 B2, IAU 2015 B3).
    assert KM_S_PER_AU_YR == pytest.approx((1 * u.au / u.yr).to_value(u.km / u.s), rel=1e-15)
    assert AU_M == const.au.to_value(u.m)
    assert GM_SUN_M3_S2 == pytest.approx((const.G * const.M_sun).to_value(u.m**3 / u.s**2), rel=1e-15)


def test_delta_mu_orbit_paper_coefficient() -> None:
    # El-Badry, Rix & Heintz 2021, MNRAS 506, 2269: 0.44 mas/yr at M = 5 M_sun,
    # parallax 1 mas, separation 1 arcsec (two significant figures in the paper).
    assert delta_mu_orbit(5.0, 1.0, 1.0) == pytest.approx(0.44, abs=0.005)
    # METHODS.md: 2 pi / sqrt(1000) per sqrt(M_sun) in Kepler units (yr, au, M_sun),
    # which hold to 2e-5 against GM_sun.
    assert delta_mu_orbit(1.0, 1.0, 1.0) == pytest.approx(2 * np.pi / np.sqrt(1000.0), rel=2e-5)


def test_delta_mu_orbit_from_astropy_units() -> None:
    rng = np.random.default_rng(5)
    m = rng.uniform(0.1, 20.0, 200)
    plx = rng.uniform(0.1, 300.0, 200)
    sep = rng.uniform(0.1, 3000.0, 200)
    # Reference: astropy. Distance d = 1/parallax, projected separation s = theta d,
    # circular speed v = sqrt(G M / s), proper motion mu = v / d; tolerance 1e-6.
    d = (plx * u.mas).to(u.pc, equivalencies=u.parallax())
    s = (sep * u.arcsec).to_value(u.rad) * d
    v = np.sqrt(const.G * m * const.M_sun / s)
    mu = (v / d).to(u.mas / u.yr, equivalencies=u.dimensionless_angles())
    np.testing.assert_allclose(delta_mu_orbit(m, plx, sep), mu.value, rtol=1e-6)
    np.testing.assert_allclose(delta_mu_escape(m, plx, sep), np.sqrt(2) * mu.value, rtol=1e-6)


def test_speeds_against_astropy() -> None:
    m = np.array([0.5, 1.0, 3.0])
    a = np.array([1.0, 10.0, 1e4])
    # Reference: astropy constants, v = sqrt(G M / a).
    v = np.sqrt(const.G * m * const.M_sun / (a * u.au)).to_value(u.km / u.s)
    np.testing.assert_allclose(circular_speed_kms(m, a), v, rtol=1e-12)
    # Escape speed is sqrt(2) times the circular speed (textbook, from memory).
    np.testing.assert_allclose(escape_speed_kms(m, a), np.sqrt(2) * v, rtol=1e-14)
    # From memory: the mean orbital speed of a planet at 1 au around 1 M_sun is ~29.78 km/s.
    assert circular_speed_kms(1.0, 1.0) == pytest.approx(29.78, abs=0.01)


def test_kepler_third_law_against_astropy() -> None:
    a = np.array([0.1, 1.0, 40.0, 1e4])
    m = np.array([0.3, 1.0, 2.5, 10.0])
    # Reference: astropy constants, P = 2 pi sqrt(a^3 / (G M)) in Julian years.
    # P^2 = a^3/M holds to 2e-5 (METHODS.md).
    p = (2 * np.pi * np.sqrt((a * u.au) ** 3 / (const.G * m * const.M_sun))).to_value(u.yr)
    np.testing.assert_allclose(kepler_period_yr(a, m), p, rtol=2e-5)
    np.testing.assert_allclose(semimajor_axis_au(kepler_period_yr(a, m), m), a, rtol=1e-14)
    assert kepler_period_yr(1.0, 1.0) == 1.0  # definition of the units


def test_sigma_delta_mu_hand_values() -> None:
    # El-Badry, Rix & Heintz 2021, MNRAS 506, 2269 formula, hand values:
    # along an axis only that axis's variance counts; equal variances give that variance.
    assert sigma_delta_mu(3.0, 0.0, 4.0, 100.0) == pytest.approx(2.0)
    assert sigma_delta_mu(0.0, -3.0, 100.0, 9.0) == pytest.approx(3.0)
    assert sigma_delta_mu(1.0, 1.0, 2.0, 4.0) == pytest.approx(np.sqrt(3.0))
    assert sigma_delta_mu(5.0, 7.0, 0.25, 0.25) == pytest.approx(0.5)
    # Zero difference: documented fallback, root of the mean variance.
    assert sigma_delta_mu(0.0, 0.0, 2.0, 4.0) == pytest.approx(np.sqrt(3.0))
    assert sigma_delta_mu(np.zeros(3), np.ones(3), 1.0, 1.0).shape == (3,)


def test_sigma_delta_mu_matches_monte_carlo_for_a_strong_signal() -> None:
    # Common practice: first-order error propagation of |dmu| agrees with the
    # scatter of simulated |dmu| when the signal is many sigma.
    rng = np.random.default_rng(8)
    dx, dy, vx, vy = 30.0, -40.0, 0.04, 0.25
    n = 400_000
    sim = np.hypot(dx + rng.normal(0, np.sqrt(vx), n), dy + rng.normal(0, np.sqrt(vy), n))
    # Standard error of a sample standard deviation ~ sigma / sqrt(2n): 0.1 %; allow 1 %.
    assert np.std(sim) == pytest.approx(sigma_delta_mu(dx, dy, vx, vy), rel=0.01)


E_GRID = [0.0, 0.1, 0.3, 0.5, 0.7, 0.8, 0.81, 0.9, 0.95, 0.99, 0.999]
M_GRID = [0.0, 1e-8, 1e-3, 0.5, 1.0, 2.0, np.pi - 1e-6, np.pi, 3.5, 5.0, 2 * np.pi - 1e-3, -0.7, -4.0, 100.0, -50.0]


def test_solve_kepler_against_mpmath() -> None:
    e = np.array(E_GRID)[:, None]
    m = np.array(M_GRID)[None, :]
    got = solve_kepler(m, e)
    assert got.shape == (len(E_GRID), len(M_GRID))
    for i, ei in enumerate(E_GRID):
        for j, mj in enumerate(M_GRID):
            # Reference: mpmath.findroot at 30 digits on E - e sin E = M, bracketed
            # by [M - e, M + e] (the root lies there); tolerance 1e-14 in E (radians).
            lo, hi = mpmath.mpf(mj) - ei - 0.01, mpmath.mpf(mj) + ei + 0.01
            with mpmath.workdps(30):
                ref = mpmath.findroot(lambda x: x - ei * mpmath.sin(x) - mpmath.mpf(mj), (lo, hi), solver="illinois")
            assert abs(got[i, j] - float(ref)) < 1e-14, (ei, mj)


def test_solve_kepler_identity_on_random_inputs() -> None:
    rng = np.random.default_rng(9)
    m = rng.uniform(-20, 20, 10_000)
    e = rng.uniform(0, 0.9999, 10_000)
    E = solve_kepler(m, e)
    # Kepler's equation itself (textbook): residual at rounding level.
    np.testing.assert_allclose(E - e * np.sin(E), m, rtol=0, atol=1e-13)
    assert np.all(np.abs(E - m) <= e + 1e-15)


@pytest.mark.parametrize("e", [0.0, 0.5, 0.9])
def test_projected_separation_mean(e: float) -> None:
    rng = np.random.default_rng(10)
    n = 400_000
    ratio = projected_separation_ratio(rng, n, np.full(n, e))
    assert ratio.shape == (n,)
    assert np.all(ratio >= 0) and np.all(ratio <= 1 + e + 1e-12)
    # Textbook result, from memory: isotropic orientation gives <sin> = pi/4 for
    # the projection and the time-averaged radius is a (1 + e^2 / 2).
    expected = np.pi / 4 * (1 + e**2 / 2)
    stderr = ratio.std() / np.sqrt(n)
    assert abs(ratio.mean() - expected) < 5 * stderr


def test_projected_separation_scalar_eccentricity_broadcasts() -> None:
    ratio = projected_separation_ratio(np.random.default_rng(1), 10, 0.3)
    assert ratio.shape == (10,)


def test_sample_eccentricity() -> None:
    rng = np.random.default_rng(4)
    thermal = sample_eccentricity(rng, 50_000, "thermal")
    # Jeans 1919 (MNRAS 79, 408; from memory): f(e) = 2e, so the CDF is e^2.
    # Reference: scipy.stats.kstest.
    assert stats.kstest(thermal, lambda x: np.clip(x, 0, 1) ** 2).pvalue > 1e-3
    assert thermal.mean() == pytest.approx(2 / 3, abs=0.01)
    uniform = sample_eccentricity(rng, 50_000, "uniform")
    assert stats.kstest(uniform, "uniform").pvalue > 1e-3
    fixed = sample_eccentricity(rng, 5, 0.25)
    assert fixed.tolist() == [0.25] * 5
    with pytest.raises(ValueError, match="Fix: use 'thermal', 'uniform'"):
        sample_eccentricity(rng, 5, "flat")
    with pytest.raises(ValueError, match="Fix:"):
        sample_eccentricity(rng, 5, 1.0)
