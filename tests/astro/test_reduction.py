"""Tests for dossier.astro.reduction against astropy, numpy, scipy and hand values."""

from __future__ import annotations

import astropy.units as u
import numpy as np
import pytest
import scipy.stats
from astropy.coordinates import FK5, SkyCoord
from astropy.time import Time

from dossier.astro.reduction import (
    DEFAULT_METHOD_ERRORS,
    ONE_NIGHT_YR,
    ONE_SEASON_YR,
    MethodErrors,
    curvature_test,
    fit_motion,
    fit_motion_robust,
    flag_outliers,
    group_means,
    measure_sigmas,
    precess_theta,
    to_offsets,
    to_polar,
)


def _wrap180(a: np.ndarray) -> np.ndarray:
    return (np.asarray(a) + 180.0) % 360.0 - 180.0


def _simulate_motion(
    seed: int, n: int = 30, accel: float = 0.0, sigma: float = 0.05
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Seeded measures of a companion moving along a line (or a parabola), with known truth.

    Returns t, x, y, sx, sy (arcsec, Julian years) and the true x, y at t.
    """
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(1900.0, 2020.0, n))
    tau = t - 1960.0
    x_true = 3.0 + 0.010 * tau + accel * tau**2
    y_true = -2.0 + 0.015 * tau - 0.5 * accel * tau**2
    sx = sigma * rng.uniform(0.5, 2.0, n)
    sy = sigma * rng.uniform(0.5, 2.0, n)
    return t, x_true + rng.normal(0, sx), y_true + rng.normal(0, sy), sx, sy, x_true, y_true


# ---------------------------------------------------------------------------
# precess_theta
# ---------------------------------------------------------------------------


def _astropy_pa_pair(ra, dec, theta_j2000, t_from, t_to, rho_arcsec=5.0):
    """Position angles at two equinoxes of one pair placed in FK5(J2000) (astropy, rigorous)."""
    primary = SkyCoord(ra * u.deg, dec * u.deg, frame=FK5(equinox=Time("J2000")))
    companion = primary.directional_offset_by(theta_j2000 * u.deg, rho_arcsec * u.arcsec)
    out = []
    for epoch in (t_from, t_to):
        frame = FK5(equinox=Time(epoch, format="jyear"))
        out.append(primary.transform_to(frame).position_angle(companion.transform_to(frame)).deg)
    return out


# Tolerance: the formula is first order in the precession (a midpoint rule with
# alpha, delta at the mid-epoch); the neglected terms grow as sec(delta) and the
# cube of the interval. Observed maxima over a century: 4e-5 deg at the equator,
# 6e-4 deg at |delta| = 75, 1.6e-3 at 80, 8.6e-3 at 85; the tolerances leave a
# margin. 0.001 deg is far below any measuring error of a position angle.
@pytest.mark.parametrize(
    ("dec", "tol_deg"),
    [
        (0.0, 1e-4), (30.0, 1e-4), (-45.0, 2e-4), (60.0, 3e-4),
        (75.0, 1e-3), (-75.0, 1e-3), (80.0, 2.5e-3), (85.0, 1.5e-2),
    ],
)
@pytest.mark.parametrize(("t_from", "t_to"), [(1900.0, 2000.0), (2000.0, 2100.0), (1950.0, 2050.0), (1985.3, 2000.0)])
def test_precess_theta_matches_astropy_fk5(dec: float, tol_deg: float, t_from: float, t_to: float) -> None:
    rng = np.random.default_rng(int(dec * 10 + t_from))
    ra = rng.uniform(0.0, 360.0, 40)
    theta = rng.uniform(0.0, 360.0, 40)
    # Reference: astropy FK5 transformation between equinoxes (IAU 2006 precession).
    pa_from, pa_to = _astropy_pa_pair(ra, np.full(40, dec), theta, t_from, t_to)
    got = precess_theta(pa_from, ra, dec, t_from, t_to)
    assert np.max(np.abs(_wrap180(got - pa_to))) < tol_deg
    # The correction is real: well above the tolerance wherever sin(alpha) is not small.
    assert np.max(np.abs(_wrap180(pa_to - pa_from))) > 20 * tol_deg


def test_precess_theta_rate_and_sign_by_hand() -> None:
    # METHODS.md: +0.00557 deg per year times sin(alpha) sec(delta); at alpha = 90,
    # delta = 0 and mid-epoch J2000 the rate is n = 20.043"/yr = 0.0055675 deg/yr.
    assert precess_theta(10.0, 90.0, 0.0, 1999.5, 2000.5) == pytest.approx(10.0 + 20.043109 / 3600, abs=1e-7)
    # alpha = 0 at the mid-epoch: north does not turn (geometry).
    assert precess_theta(10.0, 0.0, 0.0, 1999.5, 2000.5) == pytest.approx(10.0, abs=1e-12)
    # sec(delta): at delta = 60 the same interval gives twice the turn.
    d60 = precess_theta(10.0, 90.0, 60.0, 1999.5, 2000.5) - 10.0
    assert d60 == pytest.approx(2 * 20.043109 / 3600, rel=1e-3)


def test_precess_theta_defaults_wraps_and_inverts() -> None:
    # Default target equinox J2000.0; result in [0, 360).
    out = precess_theta(359.99, 90.0, 70.0, 1900.0)
    assert 0.0 <= out < 360.0 and _wrap180(out - 359.99) > 1.0
    assert precess_theta(0.001, 270.0, 70.0, 1900.0) > 358.0
    # Same mid-epoch both ways, so there and back is the identity (up to rounding).
    rng = np.random.default_rng(5)
    ra, dec, th = rng.uniform(0, 360, 100), rng.uniform(-80, 80, 100), rng.uniform(0, 360, 100)
    back = precess_theta(precess_theta(th, ra, dec, 1920.0, 2010.0), ra, dec, 2010.0, 1920.0)
    assert np.max(np.abs(_wrap180(back - th))) < 1e-10
    assert precess_theta(th, ra, dec, 2000.0).shape == (100,)


# ---------------------------------------------------------------------------
# to_offsets, to_polar
# ---------------------------------------------------------------------------


def test_to_offsets_match_astropy_spherical_offsets() -> None:
    rng = np.random.default_rng(21)
    n = 500
    ra, dec = rng.uniform(0, 360, n), rng.uniform(-85, 85, n)
    rho, theta = rng.uniform(0.1, 20.0, n), rng.uniform(0, 360, n)
    primary = SkyCoord(ra * u.deg, dec * u.deg)
    companion = primary.directional_offset_by(theta * u.deg, rho * u.arcsec)
    # Reference: astropy spherical_offsets_to gives (delta-alpha cos delta, delta-delta)
    # = (east, north); equal to rho (sin, cos) theta to O(rho^3) ~ 1e-9 arcsec here.
    d_east, d_north = primary.spherical_offsets_to(companion)
    x, y, _, _ = to_offsets(rho, theta, 0.01, 0.1)
    np.testing.assert_allclose(x, d_north.to_value(u.arcsec), rtol=0, atol=1e-6)
    np.testing.assert_allclose(y, d_east.to_value(u.arcsec), rtol=0, atol=1e-6)


def test_to_offsets_errors_by_hand_and_monte_carlo() -> None:
    # Geometry: at theta = 0 the radial error lies along north, the tangential one along east.
    _, _, sx, sy = to_offsets(2.0, 0.0, 0.05, np.degrees(0.01))
    assert sx == pytest.approx(0.05, rel=1e-12) and sy == pytest.approx(0.02, rel=1e-12)
    _, _, sx, sy = to_offsets(2.0, 90.0, 0.05, np.degrees(0.01))
    assert sx == pytest.approx(0.02, rel=1e-12) and sy == pytest.approx(0.05, rel=1e-12)
    # Independent computation: Monte Carlo of (rho, theta) with small errors; the
    # first-order widths agree to the sampling error (~0.3% for 2e5 draws).
    rng = np.random.default_rng(22)
    rho, theta, s_rho, s_theta = 3.0, 37.0, 0.06, 0.8
    r = rng.normal(rho, s_rho, 200_000)
    t = np.radians(rng.normal(theta, s_theta, 200_000))
    _, _, sx, sy = to_offsets(rho, theta, s_rho, s_theta)
    assert sx == pytest.approx(np.std(r * np.cos(t)), rel=0.01)
    assert sy == pytest.approx(np.std(r * np.sin(t)), rel=0.01)


def test_to_polar_inverts_and_hand_values() -> None:
    rng = np.random.default_rng(23)
    rho, theta = rng.uniform(0.01, 50, 1000), rng.uniform(0, 360, 1000)
    x, y, _, _ = to_offsets(rho, theta, 0.0, 0.0)
    r2, t2 = to_polar(x, y)
    np.testing.assert_allclose(r2, rho, rtol=1e-13)
    assert np.max(np.abs(_wrap180(t2 - theta))) < 1e-10
    # Hand values (geometry): north 0, east 90, south 180, west 270; origin 0.
    r, t = to_polar([1.0, 0.0, -1.0, 0.0, 0.0, 1.0], [0.0, 1.0, 0.0, -1.0, 0.0, -1e-300])
    np.testing.assert_allclose(r, [1, 1, 1, 1, 0, 1])
    np.testing.assert_allclose(t, [0, 90, 180, 270, 0, 0], atol=1e-12)
    assert np.all(t < 360.0)


# ---------------------------------------------------------------------------
# measure_sigmas
# ---------------------------------------------------------------------------


def test_default_method_errors_cover_the_methods() -> None:
    assert set(DEFAULT_METHOD_ERRORS) == {
        "eyepiece-micrometer", "filar-micrometer", "imaging", "speckle",
        "lucky-imaging", "eyepiece-estimate", "literature",
    }
    for d in DEFAULT_METHOD_ERRORS.values():
        assert d.theta_deg > 0 and d.rho_arcsec >= 0 and d.rho_fraction >= 0
        assert d.rho_arcsec + d.rho_fraction > 0


def test_measure_sigmas_keeps_given_and_fills_missing() -> None:
    defaults = {"imaging": MethodErrors(0.3, 0.1, 0.0), "visual": (1.0, 0.2, 0.05, True)}
    st, sr = measure_sigmas(
        rho=[4.0, 4.0, 4.0, 4.0],
        theta_err=[0.7, np.nan, 0.0, np.nan],
        rho_err=[0.02, np.nan, np.nan, -1.0],
        method=["imaging", "imaging", "visual", "visual"],
        aperture_cm=np.nan,
        defaults=defaults,
    )
    np.testing.assert_allclose(st, [0.7, 0.3, 1.0, 1.0])
    # sigma_rho = hypot(floor, fraction * rho): hypot(0.2, 0.2) for the visual rows.
    np.testing.assert_allclose(sr, [0.02, 0.1, np.hypot(0.2, 0.2), np.hypot(0.2, 0.2)])


def test_measure_sigmas_aperture_term() -> None:
    # Common practice: Dawes limit R = 11.6"/D(cm); D = 11.6 cm gives R = 1".
    # Documented law f = sqrt(1 + (R/rho)^2): sqrt(2) at rho = R, sqrt(5) at R/2.
    d = DEFAULT_METHOD_ERRORS["filar-micrometer"]
    rho = np.array([1.0, 0.5, 100.0])
    st, sr = measure_sigmas(rho, np.nan, np.nan, "filar-micrometer", 11.6, DEFAULT_METHOD_ERRORS)
    f = np.array([np.sqrt(2.0), np.sqrt(5.0), np.sqrt(1.0 + 1e-4)])
    np.testing.assert_allclose(st, d.theta_deg * f, rtol=1e-12)
    np.testing.assert_allclose(sr, np.hypot(d.rho_arcsec, d.rho_fraction * rho) * f, rtol=1e-12)
    # Not visual: no aperture term even with an aperture given.
    st_img, _ = measure_sigmas(0.5, np.nan, np.nan, "imaging", 11.6, DEFAULT_METHOD_ERRORS)
    assert st_img == pytest.approx(DEFAULT_METHOD_ERRORS["imaging"].theta_deg)
    # Unknown aperture: no term.
    st_unk, _ = measure_sigmas(0.5, np.nan, np.nan, "filar-micrometer", np.nan, DEFAULT_METHOD_ERRORS)
    assert st_unk == pytest.approx(d.theta_deg)


def test_measure_sigmas_unknown_method_message() -> None:
    with pytest.raises(ValueError) as info:
        measure_sigmas(2.0, np.nan, 0.1, "speckel", np.nan, DEFAULT_METHOD_ERRORS)
    assert str(info.value) == (
        "no default uncertainties for method 'speckel'. Fix: give the errors, "
        "or add the method to the defaults. Did you mean one of: speckle?"
    )
    # An unknown method is fine when nothing is missing.
    st, sr = measure_sigmas(2.0, 0.5, 0.1, "speckel", np.nan, DEFAULT_METHOD_ERRORS)
    assert (st, sr) == (0.5, 0.1)


# ---------------------------------------------------------------------------
# group_means
# ---------------------------------------------------------------------------


def test_group_means_groups_greedily_and_averages() -> None:
    rng = np.random.default_rng(31)
    night = ONE_NIGHT_YR
    t = np.array([2010.0, 2010.0 + 0.3 * night, 2010.0 + 0.9 * night, 2010.0 + 1.5 * night, 2012.0])
    x = rng.normal(1.0, 0.01, 5)
    y = rng.normal(2.0, 0.01, 5)
    sx, sy = rng.uniform(0.01, 0.03, 5), rng.uniform(0.01, 0.03, 5)
    perm = rng.permutation(5)
    tm, xm, ym, sxm, sym, n, gi = group_means(t[perm], x[perm], y[perm], sx[perm], sy[perm], night)
    # Greedy: {0, 0.3, 0.9} nights, then {1.5}, then 2012.
    np.testing.assert_array_equal(n, [3, 1, 1])
    np.testing.assert_array_equal(gi, np.array([0, 0, 0, 1, 2])[perm])
    first = slice(0, 3)
    # Reference: numpy.average with inverse-variance weights.
    assert xm[0] == pytest.approx(np.average(x[first], weights=sx[first] ** -2), rel=1e-14)
    assert ym[0] == pytest.approx(np.average(y[first], weights=sy[first] ** -2), rel=1e-14)
    w_t = sx[first] ** -2 + sy[first] ** -2
    assert tm[0] == pytest.approx(np.average(t[first], weights=w_t), rel=1e-15)
    # A group of one keeps its own values.
    assert tm[2] == t[4]
    np.testing.assert_allclose([xm[2], ym[2], sxm[2], sym[2]], [x[4], y[4], sx[4], sy[4]], rtol=1e-15)
    # Internal error 1/sqrt(sum w) is kept when the scatter is smaller (Birge ratio < 1).
    chi2 = np.sum((x[first] - xm[0]) ** 2 / sx[first] ** 2)
    expected = np.sqrt(1 / np.sum(sx[first] ** -2)) * max(1.0, np.sqrt(chi2 / 2))
    assert sxm[0] == pytest.approx(expected, rel=1e-12)
    # A season groups all of the first four.
    *_, n_season, _ = group_means(t, x, y, sx, sy, ONE_SEASON_YR)
    np.testing.assert_array_equal(n_season, [4, 1])


def test_group_means_inflates_by_the_scatter() -> None:
    # Hand value: two measures 1" apart with errors 0.1": internal error 0.0707",
    # external (scatter) error of the mean of two = |x1 - x2| / 2 = 0.5".
    tm, xm, ym, sxm, sym, n, _ = group_means([2000.0, 2000.001], [0.0, 1.0], [5.0, 5.0], [0.1, 0.1], [0.1, 0.1])
    assert n.tolist() == [2]
    assert xm[0] == pytest.approx(0.5) and sxm[0] == pytest.approx(0.5, rel=1e-12)
    assert ym[0] == pytest.approx(5.0) and sym[0] == pytest.approx(0.1 / np.sqrt(2), rel=1e-12)


def test_group_means_rejects_missing_errors() -> None:
    with pytest.raises(ValueError, match="Fix: fill missing ones with measure_sigmas"):
        group_means([2000.0], [1.0], [1.0], [np.nan], [0.1])


# ---------------------------------------------------------------------------
# fit_motion
# ---------------------------------------------------------------------------


@pytest.mark.parametrize("degree", [1, 2])
def test_fit_motion_matches_numpy_polyfit(degree: int) -> None:
    t, x, y, sx, sy, _, _ = _simulate_motion(41, accel=2e-5)
    fit = fit_motion(t, x, y, sx, sy, degree)
    # Default t0: the weighted mean epoch, weights 1/sx^2 + 1/sy^2.
    assert fit.t0 == pytest.approx(np.average(t, weights=sx**-2 + sy**-2), rel=1e-15)
    tau = t - fit.t0
    cases = ((x, sx, fit.coef_x, fit.cov_x, fit.resid_x), (y, sy, fit.coef_y, fit.cov_y, fit.resid_y))
    for v, s, coef, cov, resid in cases:
        # Reference: numpy.polyfit (highest power first) with w = 1/sigma, cov='unscaled'.
        p, c = np.polyfit(tau, v, degree, w=1 / s, cov="unscaled")
        np.testing.assert_allclose(coef, p[::-1], rtol=1e-9, atol=1e-15)
        np.testing.assert_allclose(cov, c[::-1, ::-1], rtol=1e-8, atol=1e-20)
        np.testing.assert_allclose(resid, v - np.polyval(p, tau), rtol=0, atol=1e-12)
    chi2 = np.sum((fit.resid_x / sx) ** 2) + np.sum((fit.resid_y / sy) ** 2)
    assert fit.chi2 == pytest.approx(chi2, rel=1e-12)
    assert fit.dof == 2 * t.size - 2 * (degree + 1) and fit.n == t.size


def test_fit_motion_predict_and_given_t0() -> None:
    t, x, y, sx, sy, _, _ = _simulate_motion(42)
    fit = fit_motion(t, x, y, sx, sy, 2, t0=1950.0)
    p = np.polyfit(t - 1950.0, x, 2, w=1 / sx)  # numpy.polyfit as reference
    px, py, psx, psy = fit.predict(np.array([1950.0, 2030.0]))
    np.testing.assert_allclose(px, np.polyval(p, [0.0, 80.0]), rtol=1e-9)
    # At t0 the prediction error is the error of the constant term.
    assert psx[0] == pytest.approx(np.sqrt(fit.cov_x[0, 0]), rel=1e-12)
    assert psy[0] == pytest.approx(np.sqrt(fit.cov_y[0, 0]), rel=1e-12)
    assert psx[1] > psx[0]


def test_fit_motion_recovers_exact_motion_and_rejects_bad_input() -> None:
    t = np.array([1990.0, 2000.0, 2010.0, 2020.0])
    x, y = 1.0 + 0.02 * (t - 2000) + 1e-4 * (t - 2000) ** 2, -0.5 - 0.01 * (t - 2000)
    fit = fit_motion(t, x, y, np.full(4, 0.01), np.full(4, 0.01), 2, t0=2000.0)
    np.testing.assert_allclose(fit.coef_x, [1.0, 0.02, 1e-4], atol=1e-12)
    np.testing.assert_allclose(fit.coef_y, [-0.5, -0.01, 0.0], atol=1e-12)
    assert fit.chi2 < 1e-15
    with pytest.raises(ValueError, match=r"degree = 3 is not supported\. Fix: use 1"):
        fit_motion(t, x, y, np.full(4, 0.01), np.full(4, 0.01), 3)
    with pytest.raises(ValueError, match="needs at least 3 distinct epochs, got 2"):
        fit_motion([2000.0, 2000.0, 2001.0], [1, 1, 1], [1, 1, 1], [0.1] * 3, [0.1] * 3, 2)


# ---------------------------------------------------------------------------
# curvature_test
# ---------------------------------------------------------------------------


def test_curvature_test_against_scipy_and_hand_formulas() -> None:
    t, x, y, sx, sy, _, _ = _simulate_motion(51, accel=1e-4)
    lin, quad = fit_motion(t, x, y, sx, sy, 1), fit_motion(t, x, y, sx, sy, 2)
    res = curvature_test(lin, quad)
    f_expected = (lin.chi2 - quad.chi2) / 2 / (quad.chi2 / quad.dof)
    assert res.F == pytest.approx(f_expected, rel=1e-12)
    # Reference: scipy.stats.f.sf, the survival function of F(2, dof).
    assert res.p_value == pytest.approx(scipy.stats.f.sf(res.F, 2, quad.dof), rel=1e-10)
    # AIC = chi2 + 2k, BIC = chi2 + k ln N with k = 4, 6 and N = 2n (Akaike 1974; Schwarz 1978).
    assert res.delta_aic == pytest.approx(quad.chi2 + 12 - lin.chi2 - 8, rel=1e-12)
    assert res.delta_bic == pytest.approx(quad.chi2 - lin.chi2 + 2 * np.log(2 * t.size), rel=1e-12)
    # Curved truth: detected.
    assert res.p_value < 1e-6 and res.delta_aic < -10 and res.delta_bic < -10
    # The same fits swapped: refused with the fix.
    with pytest.raises(ValueError, match="Fix: pass the linear fit first"):
        curvature_test(quad, lin)


def test_curvature_test_false_alarm_rate_on_linear_motion() -> None:
    # scipy.stats: with Gaussian errors of the stated size the F statistic follows
    # F(2, dof) exactly, so p < 0.05 in 5% of linear simulations (binomial sd 0.7%
    # for 1000 trials; we allow 3 sd).
    p = []
    for seed in range(1000):
        t, x, y, sx, sy, _, _ = _simulate_motion(10_000 + seed, n=12)
        p.append(curvature_test(fit_motion(t, x, y, sx, sy, 1), fit_motion(t, x, y, sx, sy, 2)).p_value)
    frac = np.mean(np.array(p) < 0.05)
    assert abs(frac - 0.05) < 0.021
    # And the p-values are uniform (Kolmogorov-Smirnov against U(0, 1), scipy.stats).
    assert scipy.stats.kstest(p, "uniform").pvalue > 0.001


# ---------------------------------------------------------------------------
# flag_outliers, fit_motion_robust
# ---------------------------------------------------------------------------


def test_flag_outliers_scale_and_reasons() -> None:
    rng = np.random.default_rng(61)
    n = 40
    sx, sy = np.full(n, 0.05), np.full(n, 0.05)
    rx, ry = rng.normal(0, 0.1, n), rng.normal(0, 0.1, n)  # scatter twice the quoted errors
    rx[7] = 1.5
    flags, reasons = flag_outliers(rx, ry, sx, sy)
    z = np.concatenate([rx / sx, ry / sy])
    # Reference: scipy.stats.median_abs_deviation(scale='normal'), 1.482602 x MAD
    # (common practice); our 1.4826 differs by 1e-6 relative.
    scale = scipy.stats.median_abs_deviation(z, scale="normal")
    assert scale > 1.0
    score = np.hypot(rx / sx, ry / sy) / scale
    np.testing.assert_array_equal(flags, score > 3.5)
    assert flags.sum() == 1 and flags[7]
    assert reasons[7] == f"{score[7]:.1f}σ from the fitted motion (robust scale)"
    assert all(r == "" for i, r in enumerate(reasons) if i != 7)
    assert len(reasons) == n  # never deletes


def test_flag_outliers_floor_at_the_quoted_errors() -> None:
    # Residuals far smaller than the errors: the scale is floored at 1, so only a
    # measure beyond 3.5 of its own quoted errors is flagged (common practice).
    rx = np.array([0.001, -0.001, 0.002, 0.0, 0.2, 0.17])
    ry = np.zeros(6)
    flags, reasons = flag_outliers(rx, ry, np.full(6, 0.05), np.full(6, 0.05))
    np.testing.assert_array_equal(flags, [False, False, False, False, True, False])
    assert reasons[4] == "4.0σ from the fitted motion (quoted errors)"
    flags, _ = flag_outliers(rx, ry, np.full(6, 0.05), np.full(6, 0.05), threshold=3.0)
    assert flags[5]


def test_fit_motion_robust_finds_planted_outliers() -> None:
    t, x, y, sx, sy, _, _ = _simulate_motion(71, n=40)
    x[[5, 22]] += np.array([1.0, -0.8])
    y[30] += 0.9
    res = fit_motion_robust(t, x, y, sx, sy, 1)
    assert res.converged and 2 <= res.iterations <= 5
    np.testing.assert_array_equal(np.flatnonzero(res.flags), [5, 22, 30])
    assert all("σ from the fitted motion" in res.reasons[i] for i in (5, 22, 30))
    keep = ~res.flags
    clean = fit_motion(t[keep], x[keep], y[keep], sx[keep], sy[keep], 1)
    np.testing.assert_allclose(res.fit.coef_x, clean.coef_x, rtol=1e-12)
    np.testing.assert_allclose(res.fit.coef_y, clean.coef_y, rtol=1e-12)
    assert res.fit.n == 37


def test_fit_motion_robust_clean_data_and_iteration_cap() -> None:
    t, x, y, sx, sy, _, _ = _simulate_motion(72, n=25)
    res = fit_motion_robust(t, x, y, sx, sy, 2)
    assert res.converged and res.iterations == 1 and not res.flags.any()
    # Capped at one fit: the flags found are not applied, and the result says so.
    x[3] += 2.0
    capped = fit_motion_robust(t, x, y, sx, sy, 1, max_iter=1)
    assert not capped.converged and not capped.flags.any() and capped.fit.n == 25
