"""Posterior of visual orbits: importance sampling, OFTI (Blunt et al. 2017, AJ 153, 229), the ensemble sampler."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pytest

from dossier.astro import orbit as orbits
from dossier.astro import orbit_posterior as op
from dossier.astro.binary import solve_kepler

EL = dict(P=200.0, T=1990.0, e=0.4, a=1.0, i=50.0, node=30.0, omega=100.0)


def test_thiele_innes_jacobian_is_a_cubed_sin_squared_i():
    # reference: central finite differences of dossier.astro.orbit.thiele_innes (Heintz 1978, ch. 4 formulas);
    # the importance sampler's prior density 1 / (a^4 sin^2 i) in (A, B, F, G) rests on this determinant
    def ti(p):
        return np.array(orbits.thiele_innes(p[0], np.degrees(np.arccos(p[1])), np.degrees(p[2]), np.degrees(p[3])))

    rng = np.random.default_rng(3)
    for _ in range(5):
        p = np.array([rng.uniform(0.3, 3), rng.uniform(-0.95, 0.95), rng.uniform(0, 6), rng.uniform(0, 6)])
        J = np.column_stack([(ti(p + h) - ti(p - h)) / 2e-6 for h in 1e-6 * np.eye(4)])
        assert abs(np.linalg.det(J)) == pytest.approx(p[0] ** 3 * (1 - p[1] ** 2), rel=1e-6)


def test_conditional_thiele_innes_matches_weighted_least_squares():
    # reference: numpy.linalg.lstsq on the weighted design [X, Y] (Thiele-Innes model, Heintz 1978, ch. 4)
    t, x, y, s = short_arc()
    rng = np.random.default_rng(0)
    lnP, e, phi = np.log([150.0]), np.array([0.3]), np.array([0.2])
    A, B, F, G, chi2, log_ev = op._conditional_thiele_innes(t, x, y, np.full(6, s**-2), np.full(6, s**-2), lnP, e,
                                                            phi, 2015.0, rng, 20000)
    E = solve_kepler(2 * np.pi * (phi + (t - 2015.0) / np.exp(lnP)), e)
    D = np.column_stack([np.cos(E) - e, np.sqrt(1 - e**2) * np.sin(E)]) / s
    (a_ls, f_ls), res, _, _ = np.linalg.lstsq(D, x / s, rcond=None)
    cov = np.linalg.inv(D.T @ D)
    assert np.mean(A) == pytest.approx(a_ls, abs=4 * np.sqrt(cov[0, 0] / 20000))
    assert np.std(F) == pytest.approx(np.sqrt(cov[1, 1]), rel=0.03)
    assert np.corrcoef(A[0], F[0])[0, 1] == pytest.approx(cov[0, 1] / np.sqrt(cov[0, 0] * cov[1, 1]), abs=0.03)
    (b_ls, g_ls), res_y, _, _ = np.linalg.lstsq(D, y / s, rcond=None)
    chi2_min = res[0] + res_y[0]
    # chi2 of the draws: chi2_min plus a chi-square with 4 degrees of freedom (median 3.357, scipy.stats.chi2(4))
    assert np.min(chi2) >= chi2_min - 1e-9 and np.median(chi2) == pytest.approx(chi2_min + 3.357, abs=0.2)
    # the integrated likelihood: exp(-chi2_min / 2) (2 pi)^2 sqrt(det Cov_x det Cov_y), constants dropped
    assert log_ev[0] == pytest.approx(-0.5 * chi2_min + np.log(np.linalg.det(cov)), rel=1e-9)


def test_ln_k_prior_is_the_lognormal_mass_prior_shifted():
    # reference: closed form: with a fixed parallax, ln K = ln M + 3 ln(parallax) is Gaussian for a lognormal M
    prior = op._LnKPrior(op.MassPrior(1.5, 0.7, "lognormal"), 20.0, 0.0)
    lnK = np.log(1.5) + 3 * np.log(20.0) + np.array([-1.0, 0.0, 0.7])
    dens = np.exp(prior(lnK))
    expected = np.exp(-0.5 * ((lnK - np.log(1.5) - 3 * np.log(20.0)) / 0.7) ** 2) / (0.7 * np.sqrt(2 * np.pi))
    assert dens == pytest.approx(expected, rel=1e-3)


# Predictions from posterior draws (quantiles, the wrap at north) are tested in tests/test_ephemerides.py.


def test_from_published_truncates_and_holds_fixed_elements():
    post = op.OrbitPosterior.from_published(dict(EL, e=0.95), {"e": 0.2, "P": 5.0}, 2000, 7)
    assert np.all((post.e >= 0) & (post.e < 1)) and np.all(post.P > 0)
    assert np.all(post.a == EL["a"]) and np.all(post.i == EL["i"])


def short_arc(seed=4, n=6, sigma=0.05):
    rng = np.random.default_rng(seed)
    t = np.linspace(2010.0, 2020.0, n)
    x, y = orbits.ephemeris_xy(t, *EL.values())
    return t, x + sigma * rng.standard_normal(n), y + sigma * rng.standard_normal(n), sigma


def test_ofti_short_arc_contains_the_truth_and_is_reproducible():
    t, x, y, s = short_arc()
    mass = (1000 * EL["a"] / 20.0) ** 3 / EL["P"] ** 2  # Kepler's third law (METHODS.md)
    kw = dict(parallax_mas=20.0, sigma_parallax_mas=0.2, mass_prior=(mass, 0.2 * mass), n_samples=500)
    post = op.sample_ofti(t, x, y, s, s, **kw)
    assert post.method == "ofti" and len(post) == 500
    # the simulation's truth inside the 2.5-97.5 % interval (a 95 % interval misses 1 time in 20 by design)
    for k in ("P", "a", "e", "i"):
        lo, hi = post.quantiles(k, (0.025, 0.975))
        assert lo <= EL[k] <= hi, k
    again = op.sample_ofti(t, x, y, s, s, **kw)
    assert np.array_equal(post.P, again.P) and np.array_equal(post.omega, again.omega)  # seeded from the data


def test_importance_short_arc_contains_the_truth_and_is_reproducible():
    t, x, y, s = short_arc(sigma=0.01)
    mass = (1000 * EL["a"] / 20.0) ** 3 / EL["P"] ** 2  # Kepler's third law (METHODS.md)
    kw = dict(parallax_mas=20.0, sigma_parallax_mas=0.2, mass_prior=(mass, 0.2 * mass), n_samples=1000)
    post = op.posterior(t, x, y, s, s, **kw)
    assert post.method == "importance" and len(post) == 1000
    # the simulation's truth inside the 2.5-97.5 % interval (a 95 % interval misses 1 time in 20 by design)
    for k in ("P", "a", "e", "i"):
        lo, hi = post.quantiles(k, (0.025, 0.975))
        assert lo <= EL[k] <= hi, k
    again = op.posterior(t, x, y, s, s, **kw)
    assert np.array_equal(post.P, again.P) and np.array_equal(post.mass, again.mass)  # seeded from the data


def test_full_revolution_is_determined_and_matches_least_squares():
    el = dict(EL, P=48.0)
    rng = np.random.default_rng(2)
    t = np.sort(rng.uniform(1970.0, 2018.0, 30))
    x, y = orbits.ephemeris_xy(t, *el.values())
    x, y = x + 0.005 * rng.standard_normal(30), y + 0.005 * rng.standard_normal(30)
    post = op.posterior(t, x, y, 0.005, 0.005, parallax_mas=20.0, sigma_parallax_mas=0.2)
    assert post.method == "importance"
    verdict = op.adequacy(post, float(np.ptp(t)))
    assert verdict.status == "determined" and verdict.text == "orbit determined"
    # reference: the least-squares orbit (fit_orbit) and its sigmas; for a well-determined orbit the posterior
    # is near Gaussian and should agree with them (Bayesian and least-squares results coincide; generous: 20 %)
    fit = orbits.fit_orbit(t, x, y, 0.005, 0.005)
    for k in ("P", "e", "a", "i"):
        lo, mid, hi = post.quantiles(k)
        assert abs(mid - getattr(fit, k)) < 0.5 * getattr(fit, "sigma_" + k), k
        assert (hi - lo) / 2 == pytest.approx(getattr(fit, "sigma_" + k), rel=0.2), k
    lo, mid, hi = post.quantiles("P")
    assert abs(mid - el["P"]) < 3 * (hi - lo) / 2  # and the simulation's truth within 3 sigma


def test_adequacy_of_a_flat_period_posterior_is_too_short():
    post = op.OrbitPosterior.from_published(dict(EL, P=1000.0), {"P": 900.0}, 1000, 5)
    assert op.adequacy(post, 5.0).status == "too-short"


def test_posterior_json_round_trip_is_exact():
    post = op.OrbitPosterior.from_published(EL, {"P": 5.0, "e": 0.01}, 50, 1, parallax_mas=20.0,
                                            sigma_parallax_mas=0.5)
    back = op.OrbitPosterior.from_json(post.to_json())
    assert all(np.array_equal(getattr(post, k), getattr(back, k), equal_nan=True) for k in (*op.ELEMENTS, "mass"))


@pytest.mark.slow
@pytest.mark.parametrize("sigma", [0.05, 0.01])
def test_intervals_are_calibrated_on_simulated_arcs(sigma):
    # Bayesian calibration over orbits drawn from the priors (Cook, Gelman & Rubin 2006, J. Comput. Graph.
    # Stat. 15, 675; from memory): the 68 % intervals contain the truth 68 % of the time. With 150 trials the
    # binomial standard error is 0.038, so each element is held within 3 of them (0.114), and their mean, whose
    # error is smaller (the elements are correlated, so not √5 smaller), within 0.05 (the README's 68 ± 5 %
    # target is checked by the benchmark at 300 trials). Errors of 50 mas give vague posteriors, 10 mas sharper
    # curved ones. The first samplers, which this guards against, held the truth a third of the time at 10 mas.
    import sys

    spec = importlib.util.spec_from_file_location(
        "visual_orbit_recovery", Path(__file__).resolve().parents[2] / "benchmarks" / "visual_orbit_recovery.py")
    bench = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = bench  # dataclasses look their module up there
    spec.loader.exec_module(bench)
    out = bench.run(150, sigma=sigma)
    for k, f in out["fractions"].items():
        assert abs(f - 0.68) < 0.114, (k, f)
    assert abs(np.mean(list(out["fractions"].values())) - 0.68) < 0.05, out["fractions"]
