"""Ephemerides from orbit posteriors: predictions, their intervals, O−C, the outlook, the chart and the formatting."""

from __future__ import annotations

import math
import numpy as np
import pytest
from scipy.optimize import brentq

from dossier.astro.orbit_posterior import OrbitPosterior
from dossier.ephemerides import QUANTILES, o_minus_c, outlook, predict, table
from dossier.fmt import fmt_interval

# An orbit of our own (demo-like numbers): P, T, e, a, i, node, omega.
ELEMENTS = (296.0, 1961.8, 0.40, 0.44, 63.0, 117.5, 242.0)


def posterior(n: int, scale: float = 0.0, seed: int = 3, **override) -> OrbitPosterior:
    """n orbits about ELEMENTS, each element perturbed by ``scale`` times a tenth of its size (0: all equal)."""
    rng = np.random.default_rng(seed)
    names = ("P", "T", "e", "a", "i", "node", "omega")
    sizes = (30.0, 3.0, 0.03, 0.04, 3.0, 3.0, 5.0)
    values = {k: v + scale * s * rng.standard_normal(n) for k, v, s in zip(names, ELEMENTS, sizes)}
    values.update(override)
    values = {k: np.broadcast_to(np.asarray(v, dtype=float), (n,)).copy() for k, v in values.items()}
    nan = np.full(n, np.nan)
    return OrbitPosterior(**values, mass=nan, chi2=nan, method="published")


def classical_position(t: float, P: float, T: float, e: float, a: float, i: float, node: float, omega: float):
    """ρ, θ by the classical formulas (Aitken, R. G. 1935, The Binary Stars, ch. 4; from memory):
    M = 2π(t − T)/P, E − e sin E = M (solved with scipy's brentq), tan(ν/2) = √((1+e)/(1−e)) tan(E/2),
    r = a(1 − e cos E), tan(θ − Ω) = tan(ν + ω) cos i, ρ = r cos(ν + ω) / cos(θ − Ω)."""
    M = 2 * math.pi * (t - T) / P
    M = math.remainder(M, 2 * math.pi)
    E = brentq(lambda E: E - e * math.sin(E) - M, -math.pi - 1, math.pi + 1, xtol=1e-14)
    nu = 2 * math.atan2(math.sqrt(1 + e) * math.sin(E / 2), math.sqrt(1 - e) * math.cos(E / 2))
    r = a * (1 - e * math.cos(E))
    u = nu + math.radians(omega)
    y, x = math.sin(u) * math.cos(math.radians(i)), math.cos(u)
    theta = (math.degrees(math.atan2(y, x)) + node) % 360.0
    rho = r * math.hypot(x, y)
    return rho, theta


def test_a_posterior_of_one_orbit_predicts_that_orbit():
    epochs = np.array([1950.0, 1990.5, 2026.9, 2100.0])
    p = predict(posterior(50), epochs)
    for k, t in enumerate(epochs):
        rho, theta = classical_position(float(t), *ELEMENTS)
        # every quantile is the one orbit; tolerance: Kepler solved to 1e-12 rad in both (≪ 1e-9″, 1e-7°)
        assert p.rho[:, k] == pytest.approx(np.full(5, rho), abs=1e-9)
        dev = (p.theta[:, k] - theta + 180.0) % 360.0 - 180.0
        assert np.all(np.abs(dev) < 1e-7)
    assert np.all(p.spread < 1e-12)
    assert p.samples == 50


def test_intervals_are_the_quantiles_of_the_sampled_positions():
    post = posterior(4000, scale=1.0)
    t = np.array([2030.0])
    p = predict(post, t)
    rho = np.array([classical_position(2030.0, *el)[0] for el in zip(post.P, post.T, post.e, post.a, post.i,
                                                                      post.node, post.omega)])
    # numpy's quantiles of an independent computation of the same samples (reference: the classical formulas)
    assert p.rho[:, 0] == pytest.approx(np.quantile(rho, QUANTILES), rel=1e-9)
    assert p.rho[0, 0] < p.rho[1, 0] < p.rho[2, 0] < p.rho[3, 0] < p.rho[4, 0]


def test_position_angles_straddling_north_keep_one_branch():
    # Nodes spread about a value that puts the secondary near θ = 0: the samples fall on both sides of north.
    base = predict(posterior(1), [2030.0]).theta[2, 0]
    post = posterior(2000, node=ELEMENTS[5] - base + np.random.default_rng(5).normal(0.0, 2.0, 2000))
    q = predict(post, [2030.0]).theta[:, 0]
    assert 0.0 <= q[2] < 360.0
    assert np.all(np.diff(q) > 0)  # lower < median < upper on one branch
    # the 68 % width is that of the node's spread, 2 × 2° (normal quantiles; the node moves θ one for one)
    assert q[3] - q[1] == pytest.approx(4.0, rel=0.1)


def test_o_minus_c_in_units_of_the_combined_uncertainty():
    post = posterior(20)
    rho, theta = classical_position(2020.0, *ELEMENTS)
    d_theta, d_rho, z = o_minus_c(post, [2020.0], [rho + 0.01], [theta - 1.0], [0.01], [1.0])
    # an exact orbit: the prediction adds nothing, so 1σ in each coordinate gives z = √2 (arithmetic)
    assert d_theta[0] == pytest.approx(-1.0, abs=1e-6)
    assert d_rho[0] == pytest.approx(0.01, abs=1e-9)
    assert z[0] == pytest.approx(math.sqrt(2.0), rel=1e-6)
    # a broad prediction makes the same offsets less significant
    assert o_minus_c(posterior(2000, scale=1.0), [2020.0], [rho + 0.01], [theta - 1.0], [0.01], [1.0])[2][0] < z[0]


def test_outlook_finds_the_widest_separation_and_the_loosest_prediction():
    post = posterior(500, scale=1.0)
    look = outlook(post, 2000.0, years=300.0, step_yr=1.0)
    # widest: apastron side of the one orbit; compare with a dense scan of the classical formulas
    scan = np.arange(2000.0, 2301.0, 1.0)
    rho = [classical_position(float(t), *ELEMENTS)[0] for t in scan]
    assert abs(look.best_resolved - scan[int(np.argmax(rho))]) <= 15.0  # the median of a spread posterior, not the mean orbit
    assert look.best_resolved_rho == pytest.approx(max(rho), rel=0.05)
    assert look.spread_over_measure > 0
    with pytest.raises(ValueError, match="Fix"):
        outlook(post, 2000.0, years=0.0)


def test_table_rows_every_step_with_intervals():
    rows, look = table(posterior(300, scale=1.0), 2020.0, years=30.0, step_yr=5.0)
    assert [r.epoch for r in rows] == [2020.0, 2025.0, 2030.0, 2035.0, 2040.0, 2045.0, 2050.0]
    assert all(" to " in r.theta and " to " in r.rho for r in rows)
    assert look.prediction.t[0] == 2020.0


def test_interval_precision_follows_the_interval():
    # two significant figures of the narrower half-width (common practice for quoting uncertainties)
    assert fmt_interval(104.66, 101.3, 108.2) == "104.7 (101.3 to 108.2)"
    assert fmt_interval(0.4712, 0.4501, 0.4933) == "0.471 (0.450 to 0.493)"
    assert fmt_interval(float("nan"), 0.0, 1.0) == "—"


def test_ephemeris_chart_draws_bands_and_measures():
    from dossier.figures.ephemeris_chart import build_ephemeris_chart, ephemeris_chart

    p = predict(posterior(300, scale=1.0), np.linspace(2010.0, 2040.0, 61))
    fig = build_ephemeris_chart(p, [(2012.0, float(p.theta[2, 4]), float(p.rho[2, 4]), 0.5, 0.005)],
                                title="t", latest=2012.0, source="published orbit")
    theta_ax = next(a for a in fig.axes if a.get_label() == "theta")
    assert len(theta_ax.collections) >= 2  # the 95 % and 68 % bands (and the error bars)
    svg = ephemeris_chart(p, [], title="t", source="published orbit", alt="Predicted position")
    assert svg.startswith("<svg") and "Predicted position" in svg
    with pytest.raises(ValueError, match="Fix"):
        ephemeris_chart(predict(posterior(5), [2010.0]), [], title="t", source="x")


def test_period_gain_is_the_variance_a_measure_would_remove():
    # Reference: the conditional variance of a Gaussian, computed independently as 1 − R² of an ordinary
    # least-squares regression of ln P on the noisy predicted position over the same samples (numpy lstsq).
    from dossier.ephemerides import period_gain

    post = posterior(20000, scale=1.0, seed=11)
    t, sigma = np.array([2030.0, 2080.0]), 0.01
    gain = period_gain(post, t, sigma)
    rng = np.random.default_rng(2)
    x, y = post.xy(t)
    lnp = np.log(post.P)
    for k in range(t.size):
        z = np.column_stack([np.ones(lnp.size), x[:, k] + sigma * rng.standard_normal(lnp.size),
                             y[:, k] + sigma * rng.standard_normal(lnp.size)])
        coef, *_ = np.linalg.lstsq(z, lnp, rcond=None)
        r2 = 1.0 - np.var(lnp - z @ coef) / np.var(lnp)
        assert gain[k] == pytest.approx(r2, abs=0.02)  # sampling noise of R² at 20,000 samples ≪ 0.02
    assert np.all((gain >= 0) & (gain <= 1))
    assert np.all(period_gain(posterior(10), t, sigma) == 0)  # a posterior of one period: nothing to learn
