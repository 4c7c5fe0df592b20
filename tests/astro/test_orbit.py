"""Tests for dossier.astro.orbit against Heintz's formulas, a numerical two-body
integration (scipy), Meeus's worked example, astropy units and Monte Carlo."""

from __future__ import annotations

import astropy.units as u
import numpy as np
import pytest
from astropy import constants as const
from scipy.integrate import solve_ivp

from dossier.astro.orbit import (
    OrbitFit,
    arc_coverage,
    campbell_from_thiele_innes,
    dynamical_mass,
    dynamical_mass_uncertainty,
    ephemeris,
    ephemeris_xy,
    fit_orbit,
    thiele_innes,
)

ELEMENTS = ("P", "T", "e", "a", "i", "node", "omega")
# A made-up pair: 12-year period, moderately eccentric and inclined.
TRUTH = {"P": 12.0, "T": 2007.3, "e": 0.45, "a": 0.85, "i": 48.0, "node": 112.0, "omega": 250.0}


def _wrap(d: np.ndarray | float, period: float) -> np.ndarray | float:
    """Difference reduced to [-period / 2, period / 2)."""
    return (np.asarray(d) + 0.5 * period) % period - 0.5 * period


def _normalised_errors(fit: OrbitFit, truth: dict[str, float]) -> dict[str, float]:
    """(fit - truth) / sigma per element; T compared modulo P, angles modulo a turn."""
    diff = {k: getattr(fit, k) - truth[k] for k in ELEMENTS}
    diff["T"] = float(_wrap(diff["T"], truth["P"]))
    # (Omega, omega) ~ (Omega + 180, omega + 180): match the node first, then
    # shift omega by the same half turns (Heintz 1978, ch. 4).
    d_node = float(_wrap(diff["node"], 180.0))
    half_turns = round((diff["node"] - d_node) / 180.0)
    diff["node"] = d_node
    diff["omega"] = float(_wrap(diff["omega"] - 180.0 * half_turns, 360.0))
    return {k: diff[k] / getattr(fit, f"sigma_{k}") for k in ELEMENTS}


def _observe(
    rng: np.random.Generator, truth: dict[str, float], n: int, n_periods: float, sigma: float, t_start: float = 2000.0
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    t = np.sort(rng.uniform(t_start, t_start + n_periods * truth["P"], n))
    x, y = ephemeris_xy(t, **truth)
    return t, x + rng.normal(0.0, sigma, n), y + rng.normal(0.0, sigma, n)


# --- Thiele-Innes constants ---------------------------------------------------------


def test_thiele_innes_round_trip() -> None:
    # Reference: Heintz 1978, Double Stars, ch. 4 (METHODS.md): A, B, F, G from
    # (a, i, Omega, omega) and back. i kept 1 degree from 0 and 180, where Omega
    # and omega separately become undefined (only omega +- Omega survives) and
    # rounding in A - G, B + F grows as 1 / (1 - cos i); tolerance 1e-10.
    rng = np.random.default_rng(20240611)
    n = 20_000
    a = rng.uniform(0.001, 50.0, n)
    i = rng.uniform(1.0, 179.0, n)
    node = rng.uniform(0.0, 180.0, n)
    omega = rng.uniform(0.0, 360.0, n)
    a2, i2, node2, omega2 = campbell_from_thiele_innes(*thiele_innes(a, i, node, omega))
    np.testing.assert_allclose(a2, a, rtol=1e-10, atol=0)
    np.testing.assert_allclose(i2, i, rtol=0, atol=1e-10)
    np.testing.assert_allclose(_wrap(node2 - node, 180.0), 0.0, atol=1e-10)
    np.testing.assert_allclose(_wrap(omega2 - omega, 360.0), 0.0, atol=1e-10)


def test_visual_ambiguity_of_node_and_omega() -> None:
    # Heintz 1978, ch. 4 (METHODS.md): (Omega, omega) and (Omega + 180, omega + 180)
    # are the same visual orbit; the inverse returns Omega in [0, 180).
    rng = np.random.default_rng(7)
    a, i = rng.uniform(0.1, 5.0, 500), rng.uniform(1.0, 179.0, 500)
    node, omega = rng.uniform(180.0, 360.0, 500), rng.uniform(0.0, 360.0, 500)
    np.testing.assert_allclose(
        np.array(thiele_innes(a, i, node, omega)), np.array(thiele_innes(a, i, node - 180.0, omega + 180.0)), atol=1e-13
    )
    _, _, node2, omega2 = campbell_from_thiele_innes(*thiele_innes(a, i, node, omega))
    assert np.all((node2 >= 0.0) & (node2 < 180.0))
    np.testing.assert_allclose(node2, node - 180.0, atol=1e-10)
    np.testing.assert_allclose(_wrap(omega2 - (omega + 180.0), 360.0), 0.0, atol=1e-10)


# --- Ephemeris ----------------------------------------------------------------------


def _two_body_xy(t: np.ndarray, P: float, T: float, e: float, a: float, i: float, node: float, omega: float):
    """Relative orbit by numerical integration and an independent projection.

    Kepler's third law in au, yr, M_sun fixes GM = 4 pi^2 a^3 / P^2; the orbit
    starts at periastron (r = a (1 - e), vis-viva speed) in its own plane, and
    the plane is turned onto the sky by Rz(Omega) Rx(i) Rz(omega) (Green 1985,
    Spherical Astronomy, CUP, ch. 17, from memory; axes: north, east, line of sight).
    """
    parallax_arcsec = 0.05  # any value: it only converts arcsec to au and back
    a_au = a / parallax_arcsec
    gm = 4.0 * np.pi**2 * a_au**3 / P**2  # au^3 / yr^2

    def rhs(_t: float, s: np.ndarray) -> np.ndarray:
        r3 = np.linalg.norm(s[:3]) ** 3
        return np.concatenate([s[3:], -gm * s[:3] / r3])

    r_peri = a_au * (1.0 - e)
    v_peri = np.sqrt(gm * (1.0 + e) / r_peri)  # vis-viva at periastron
    sol = solve_ivp(
        rhs, (T, float(t.max())), [r_peri, 0.0, 0.0, 0.0, v_peri, 0.0],
        method="DOP853", t_eval=t, rtol=1e-13, atol=1e-13 * a_au,
    )
    assert sol.success
    pos = sol.y[:3] * parallax_arcsec

    def rz(deg: float) -> np.ndarray:
        c, s = np.cos(np.radians(deg)), np.sin(np.radians(deg))
        return np.array([[c, -s, 0.0], [s, c, 0.0], [0.0, 0.0, 1.0]])

    def rx(deg: float) -> np.ndarray:
        c, s = np.cos(np.radians(deg)), np.sin(np.radians(deg))
        return np.array([[1.0, 0.0, 0.0], [0.0, c, -s], [0.0, s, c]])

    sky = rz(node) @ rx(i) @ rz(omega) @ pos
    return sky[0], sky[1]


@pytest.mark.parametrize(
    "elements",
    [
        {"P": 12.0, "T": 2001.0, "e": 0.45, "a": 0.85, "i": 48.0, "node": 112.0, "omega": 250.0},
        {"P": 3.7, "T": 1999.2, "e": 0.05, "a": 0.12, "i": 131.0, "node": 17.0, "omega": 40.0},
        {"P": 80.0, "T": 1990.0, "e": 0.9, "a": 2.5, "i": 85.0, "node": 160.0, "omega": 300.0},
    ],
)
def test_ephemeris_against_two_body_integration(elements: dict[str, float]) -> None:
    # Reference: scipy.integrate.solve_ivp (DOP853) of the two-body problem,
    # projected independently (see _two_body_xy); over 1.5 periods from periastron.
    # Agreement 1e-8 of the separation.
    P, T = elements["P"], elements["T"]
    t = np.linspace(T + 0.01 * P, T + 1.5 * P, 61)
    x_ref, y_ref = _two_body_xy(t, **elements)
    x, y = ephemeris_xy(t, **elements)
    err = np.hypot(x - x_ref, y - y_ref) / np.hypot(x_ref, y_ref)
    assert err.max() < 1e-8


def test_meeus_worked_example() -> None:
    # Meeus 1998, Astronomical Algorithms, 2nd ed., Example 57.a (p. 398):
    # P = 41.623 yr, T = 1934.008, e = 0.2763, a = 0.907", i = 59.025 deg,
    # Omega = 23.717 deg, omega = 219.907 deg; for 1980.0 theta = 318.4 deg,
    # rho = 0.411". Numbers checked against the transcription of this example
    # in soniakeys/meeus (v3/binary/binary_test.go), not against the book itself.
    # Tolerance: half a unit of the last printed digit.
    rho, theta = ephemeris(1980.0, 41.623, 1934.008, 0.2763, 0.907, 59.025, 23.717, 219.907)
    assert theta == pytest.approx(318.4, abs=0.05)
    assert rho == pytest.approx(0.411, abs=0.0005)


def test_direct_motion_below_90_degrees() -> None:
    # METHODS.md / Heintz 1978, ch. 4: i < 90 deg means theta increases with time
    # (and i > 90 deg that it decreases).
    t = np.linspace(2000.0, 2012.0, 400)
    for i, sign in ((30.0, 1.0), (150.0, -1.0)):
        x, y = ephemeris_xy(t, 12.0, 2003.0, 0.3, 1.0, i, 70.0, 20.0)
        # d theta / dt has the sign of x dy/dt - y dx/dt (angular momentum).
        lz = x[:-1] * np.diff(y) - y[:-1] * np.diff(x)
        assert np.all(np.sign(lz) == sign)


def test_ephemeris_broadcasts_over_epochs_and_elements() -> None:
    # Consistency with scalar calls (no outside source: same function). Vectorised
    # and scalar numpy math may differ in the last bit, hence rtol 1e-13.
    t = np.linspace(2000.0, 2030.0, 7)
    P = np.array([5.0, 12.0, 40.0])[:, None]
    e = np.array([0.0, 0.5, 0.9])[:, None]
    rho, theta = ephemeris(t, P, 2001.0, e, 1.0, 60.0, 30.0, 100.0)
    assert rho.shape == theta.shape == (3, 7)
    for k in range(3):
        for j in range(7):
            r1, th1 = ephemeris(t[j], float(P[k, 0]), 2001.0, float(e[k, 0]), 1.0, 60.0, 30.0, 100.0)
            np.testing.assert_allclose([rho[k, j], theta[k, j]], [r1, th1], rtol=1e-13, atol=0)
    assert np.all((theta >= 0.0) & (theta < 360.0))


# --- Dynamical mass -----------------------------------------------------------------


def test_dynamical_mass_against_astropy() -> None:
    # Reference: Kepler's third law in SI with astropy constants,
    # M = 4 pi^2 (a d)^3 / (G P^2) with d = 1 / parallax. Tolerance 1e-4: the
    # law in (au, yr, M_sun) with Julian years is 3.8e-5 below the SI mass
    # (the Julian year is not the Gaussian year).
    rng = np.random.default_rng(11)
    a = rng.uniform(0.05, 20.0, 100)
    plx = rng.uniform(1.0, 300.0, 100)
    P = rng.uniform(1.0, 2000.0, 100)
    d = (plx * u.mas).to(u.pc, equivalencies=u.parallax())
    a_m = (a * u.arcsec).to_value(u.rad) * d
    mass = (4 * np.pi**2 * a_m**3 / (const.G * (P * u.yr) ** 2)).to_value(u.M_sun)
    np.testing.assert_allclose(dynamical_mass(a, plx, P), mass, rtol=1e-4)


def test_dynamical_mass_uncertainty_against_monte_carlo() -> None:
    # Reference: Monte Carlo with independent Gaussian a, parallax, P (seeded);
    # the standard deviation of M within 5 % of the first-order propagation.
    rng = np.random.default_rng(3)
    a, sa, plx, splx, P, sP = 0.8, 0.008, 40.0, 0.5, 25.0, 0.4
    n = 400_000
    m = dynamical_mass(rng.normal(a, sa, n), rng.normal(plx, splx, n), rng.normal(P, sP, n))
    sigma = dynamical_mass_uncertainty(a, sa, plx, splx, P, sP)
    assert sigma == pytest.approx(np.std(m), rel=0.05)


# --- Orbit fit ----------------------------------------------------------------------


def test_arc_coverage() -> None:
    # Definition: span of the epochs over the period.
    t = np.array([2003.0, 2000.0, 2009.0])
    assert arc_coverage(t, 12.0) == pytest.approx(0.75)
    np.testing.assert_allclose(arc_coverage(t, np.array([3.0, 90.0])), [3.0, 0.1])


def test_fit_recovers_synthetic_orbit_within_three_sigma() -> None:
    # Reference: the known truth of a simulated orbit (Heintz 1978 model via
    # ephemeris_xy, itself checked above against a two-body integration),
    # 60 epochs over 1.3 periods, 0.01" Gaussian noise; default grids.
    rng = np.random.default_rng(42)
    sigma = 0.01
    t, x, y = _observe(rng, TRUTH, 60, 1.3, sigma)
    fit = fit_orbit(t, x, y, sigma, sigma)
    assert fit.converged
    assert fit.dof == 2 * 60 - 7
    # chi2 of a correct model: mean dof, sd sqrt(2 dof) = 15; allow 4 sd.
    assert abs(fit.chi2 - fit.dof) < 4 * np.sqrt(2 * fit.dof)
    assert fit.coverage == pytest.approx(arc_coverage(t, fit.P))
    assert fit.coverage > 1.2
    z = _normalised_errors(fit, TRUTH)
    assert all(abs(v) < 3.0 for v in z.values()), z
    assert 0.0 <= fit.node < 180.0 and 0.0 <= fit.omega < 360.0
    assert abs(fit.T - 0.5 * (t.min() + t.max())) <= 0.5 * fit.P


def test_fit_uncertainties_have_unit_spread() -> None:
    # Reference: the truth of simulated orbits; if the reported sigmas are right,
    # (fit - truth) / sigma has standard deviation 1. 40 seeds x 7 elements;
    # the sampling error of the pooled sd is about 0.05 (elements of one fit are
    # correlated), allow 0.75 to 1.3. A period grid around the truth keeps this
    # fast; the default search is tested above.
    sigma = 0.01
    z = []
    for seed in range(40):
        rng = np.random.default_rng(1000 + seed)
        t, x, y = _observe(rng, TRUTH, 40, 1.25, sigma)
        fit = fit_orbit(t, x, y, sigma, sigma, P_grid=np.geomspace(8.0, 18.0, 40))
        assert fit.converged
        z.append([v for v in _normalised_errors(fit, TRUTH).values()])
    z_arr = np.array(z)
    assert 0.75 < np.std(z_arr) < 1.3, np.std(z_arr, axis=0)
    assert np.all(np.abs(np.mean(z_arr, axis=0)) < 0.6), np.mean(z_arr, axis=0)


def test_fit_covariance_matches_finite_difference_jacobian() -> None:
    # Definition: sigma = sqrt(diag((J^T J)^-1)) (times chi2/dof when > 1), J the
    # Jacobian of the weighted residuals by (P, T, e, a, i, Omega, omega); here J
    # by central differences of ephemeris_xy instead of the fit's analytic chain
    # rule. Agreement 1e-4 (finite-difference error).
    rng = np.random.default_rng(42)
    sigma = 0.01
    t, x, y = _observe(rng, TRUTH, 60, 1.3, sigma)
    fit = fit_orbit(t, x, y, sigma, sigma, P_grid=np.geomspace(8.0, 18.0, 40))
    p = np.array([getattr(fit, k) for k in ELEMENTS])

    def resid(q: np.ndarray) -> np.ndarray:
        xm, ym = ephemeris_xy(t, *q)
        return np.concatenate([(xm - x) / sigma, (ym - y) / sigma])

    assert np.sum(resid(p) ** 2) == pytest.approx(fit.chi2, rel=1e-10)
    h = np.array([1e-6, 1e-6, 1e-7, 1e-7, 1e-5, 1e-5, 1e-5])
    step = np.diag(h)
    J = np.column_stack([(resid(p + step[k]) - resid(p - step[k])) / (2 * h[k]) for k in range(7)])
    expected = np.sqrt(np.diag(np.linalg.inv(J.T @ J)) * max(1.0, fit.chi2 / fit.dof))
    np.testing.assert_allclose([getattr(fit, f"sigma_{k}") for k in ELEMENTS], expected, rtol=1e-4)


def test_fit_scales_sigmas_by_reduced_chi2() -> None:
    # Definition in the brief: covariance scaled by chi2 / dof when above 1.
    # Errors stated 4x too small give chi2 / dof ~ 16 and sigmas back near those
    # of the honest errors (ratio 1 within 15 %, the spread of sqrt(chi2/dof)).
    rng = np.random.default_rng(5)
    sigma = 0.01
    t, x, y = _observe(rng, TRUTH, 60, 1.3, sigma)
    honest = fit_orbit(t, x, y, sigma, sigma, P_grid=np.geomspace(8.0, 18.0, 40))
    small = fit_orbit(t, x, y, sigma / 4, sigma / 4, P_grid=np.geomspace(8.0, 18.0, 40))
    assert small.chi2 / small.dof > 10
    for k in ELEMENTS:
        assert getattr(small, f"sigma_{k}") == pytest.approx(getattr(honest, f"sigma_{k}"), rel=0.15)


def test_fit_short_arc_reports_low_coverage() -> None:
    # A short arc (15 % of the true period) cannot fix the orbit: the fit must
    # say so through its coverage (span / fitted period).
    rng = np.random.default_rng(9)
    sigma = 0.005
    t, x, y = _observe(rng, TRUTH, 30, 0.15, sigma)
    fit = fit_orbit(t, x, y, sigma, sigma)
    assert fit.coverage == pytest.approx(arc_coverage(t, fit.P))
    assert fit.coverage < 0.5


def test_fit_rejects_too_few_observations() -> None:
    with pytest.raises(ValueError) as info:
        fit_orbit([2000.0, 2001.0, 2002.0], [0.1, 0.2, 0.3], [0.0, 0.1, 0.2], 0.01, 0.01)
    assert str(info.value) == "3 observations cannot fix 7 elements. Fix: give at least 4 (x, y) pairs."
