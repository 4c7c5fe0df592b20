"""Tests for dossier.astro.distance.

References: numpy/scipy (reference libraries) for the weighted mean and chi2;
an independent transcription of the Bailer-Jones 2015, PASP 127, 994 posterior
integrated with scipy.integrate.quad and inverted with scipy.optimize.brentq.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, optimize, stats

from dossier.astro.distance import (
    combine_parallaxes,
    edsd_log_marginal,
    edsd_mode,
    edsd_quantiles,
    fractional_error_class,
)

L_KPC = 1.35

# ---------------------------------------------------------------- combination


def test_combine_hand_values_match_numpy_and_scipy() -> None:
    x = np.array([1.00, 1.20, 0.90, 1.05])
    s = np.array([0.10, 0.20, 0.05, 0.08])
    res = combine_parallaxes(x, s)
    w = 1.0 / s**2
    mean = np.average(x, weights=w)  # reference: numpy.average
    chi2 = np.sum(w * (x - mean) ** 2)  # common practice: chi2 about the weighted mean
    assert res.mean == pytest.approx(mean, rel=1e-14)
    assert res.error == pytest.approx(1.0 / np.sqrt(w.sum()), rel=1e-14)  # common practice
    assert res.chi2 == pytest.approx(chi2, rel=1e-12)
    assert res.dof == 3 and res.n_sources == 4
    assert res.p_value == pytest.approx(stats.chi2.sf(chi2, 3), rel=1e-12)  # reference: scipy.stats.chi2
    birge = np.sqrt(chi2 / 3)
    assert res.birge_ratio == pytest.approx(birge, rel=1e-12)
    # Birge 1932, Phys. Rev. 40, 207: inflate by the ratio only when it exceeds 1.
    assert res.error_inflated == pytest.approx(res.error * max(1.0, birge), rel=1e-12)


def test_combine_nan_padding_equals_unpadded_rows() -> None:
    values = np.array(
        [
            [1.0, 1.2, np.nan, 0.9],
            [2.0, np.nan, np.nan, np.nan],
            [np.nan, np.nan, np.nan, np.nan],
            [0.5, 0.52, 0.49, 0.8],
        ]
    )
    errors = np.array(
        [
            [0.1, 0.2, np.nan, 0.05],
            [0.3, 0.1, 0.1, 0.1],
            [0.1, 0.1, 0.1, 0.1],
            [0.01, 0.02, 0.01, 0.02],
        ]
    )
    res = combine_parallaxes(values, errors)
    for row in (0, 1, 3):
        keep = np.isfinite(values[row])
        single = combine_parallaxes(values[row][keep], errors[row][keep])
        for name in ("mean", "error", "chi2", "dof", "birge_ratio", "n_sources"):
            np.testing.assert_allclose(getattr(res, name)[row], getattr(single, name), rtol=1e-14, equal_nan=True)
    assert list(res.n_sources) == [3, 1, 0, 4]
    # One source: no scatter to judge; zero sources: nothing at all.
    assert res.chi2[1] == 0.0 and res.dof[1] == 0 and np.isnan(res.p_value[1]) and np.isnan(res.birge_ratio[1])
    assert res.error_inflated[1] == res.error[1]
    assert np.isnan(res.mean[2]) and np.isnan(res.error[2]) and res.discordant[2] == -1
    assert np.isnan(res.residual_sigma[0, 2])  # a missing source has no residual


def _loo_chi2(x: np.ndarray, s: np.ndarray) -> np.ndarray:
    """Brute-force chi2 with each source left out (numpy.average as reference)."""
    out = []
    for i in range(x.size):
        keep = np.arange(x.size) != i
        w = 1.0 / s[keep] ** 2
        m = np.average(x[keep], weights=w)
        out.append(np.sum(w * (x[keep] - m) ** 2))
    return np.array(out)


def test_combine_discordant_is_brute_force_leave_one_out() -> None:
    rng = np.random.default_rng(3)
    for _ in range(50):
        k = rng.integers(3, 7)
        x = rng.normal(2.0, 0.2, k)
        s = rng.uniform(0.02, 0.3, k)
        res = combine_parallaxes(x, s)
        loo = _loo_chi2(x, s)
        assert res.discordant == int(np.argmin(loo))
        # Identity of weighted least squares (common practice): removing source i
        # lowers chi2 by residual_sigma_i^2.
        np.testing.assert_allclose(res.chi2 - loo, res.residual_sigma**2, rtol=1e-9, atol=1e-12)
        # residual_sigma from its definition, written out here.
        i = 0
        w_other = 1.0 / s[1:] ** 2
        m_other = np.average(x[1:], weights=w_other)
        expected = (x[0] - m_other) / np.sqrt(s[0] ** 2 + 1.0 / w_other.sum())
        assert res.residual_sigma[i] == pytest.approx(expected, rel=1e-12)


def test_combine_two_sources_has_no_discordant() -> None:
    res = combine_parallaxes([1.0, 1.5], [0.1, 0.2])
    assert res.discordant == -1
    # Hand value: each residual is the difference over the quadrature sum of errors.
    z = 0.5 / np.hypot(0.1, 0.2)
    np.testing.assert_allclose(res.residual_sigma, [-z, z], rtol=1e-12)
    assert res.chi2 == pytest.approx(z**2, rel=1e-12)


def test_combine_batch_shapes() -> None:
    res = combine_parallaxes(np.ones((5, 3)), np.full((5, 3), 0.1))
    assert res.mean.shape == (5,) and res.residual_sigma.shape == (5, 3)
    np.testing.assert_allclose(res.chi2, 0.0)
    np.testing.assert_allclose(res.p_value, 1.0)


# ------------------------------------------------------------ EDSD posterior


def _log_post(r: float, w: float, s: float, L: float) -> float:
    """Bailer-Jones 2015, PASP 127, 994: ln[r^2 exp(-r/L) exp(-(w - 1/r)^2 / (2 s^2))]."""
    if r <= 0:
        return -np.inf
    return 2.0 * np.log(r) - r / L - (w - 1.0 / r) ** 2 / (2.0 * s**2)


def _local_maxima(w: float, s: float, L: float) -> list[float]:
    """Local maxima of the posterior: dense scan, then bounded Brent (scipy reference)."""
    r = np.geomspace(1e-5, 200.0 * L, 40001)
    lp = np.array([_log_post(x, w, s, L) for x in r])
    peaks = np.flatnonzero((lp[1:-1] > lp[:-2]) & (lp[1:-1] >= lp[2:])) + 1
    found = []
    for i in peaks:
        opt = optimize.minimize_scalar(
            lambda x: -_log_post(x, w, s, L),
            bounds=(r[i - 1], r[i + 1]),
            method="bounded",
            options={"xatol": 1e-13 * r[i]},
        )
        found.append(opt.x)
    return found


GRID = [(w, s) for w in (-2.0, -0.1, 0.01, 0.5, 1.0, 3.0, 10.0) for s in (0.01, 0.1, 0.5, 1.0, 3.0, 30.0)]


@pytest.mark.parametrize(("w", "s"), GRID)
def test_edsd_mode_against_numerical_maximum(w: float, s: float) -> None:
    peaks = _local_maxima(w, s, L_KPC)
    if w <= 0:
        assert len(peaks) == 1  # the paper: one positive root for a non-positive parallax
    # Paper's rule: the smallest root (nearest peak) when w > 0, the positive one otherwise.
    # Tolerance 1e-6: a bounded Brent search locates a flat maximum to ~sqrt(eps).
    assert edsd_mode(w, s, L_KPC) == pytest.approx(peaks[0], rel=1e-6)


def test_edsd_mode_bimodal_case_takes_the_near_peak() -> None:
    # Found by scanning: three real roots at about 0.371, 0.535 and 1.094 kpc for L = 1.
    w, s, L = 5.4789, 5.4789 * 0.3917, 1.0
    peaks = _local_maxima(w, s, L)
    assert len(peaks) == 2
    assert edsd_mode(w, s, L) == pytest.approx(peaks[0], rel=1e-6)


def test_edsd_mode_limits_from_the_paper() -> None:
    # Bailer-Jones 2015, PASP 127, 994: sigma -> 0 gives 1/parallax, sigma -> inf gives 2L.
    w = np.array([0.1, 1.0, 10.0, 100.0])
    np.testing.assert_allclose(edsd_mode(w, 1e-6 * w, L_KPC), 1.0 / w, rtol=1e-9)
    np.testing.assert_allclose(edsd_mode(np.array([-5.0, 0.0, 5.0]), 1e8, L_KPC), 2.0 * L_KPC, rtol=1e-9)


def test_edsd_mode_shapes_and_invalid_input() -> None:
    assert np.ndim(edsd_mode(1.0, 0.1, L_KPC)) == 0
    out = edsd_mode(np.ones((2, 3)), np.array([0.1, 0.2, 0.3]), L_KPC)
    assert out.shape == (2, 3)
    assert np.isnan(edsd_mode([1.0, 1.0, np.nan], [0.0, -1.0, 0.1], L_KPC)).all()


def _reference_posterior(w: float, s: float, L: float):
    """Normalisation, CDF and ln m of the posterior with scipy.integrate.quad."""
    peaks = _local_maxima(w, s, L)
    top = max(_log_post(p, w, s, L) for p in peaks)

    def f(r: float) -> float:
        return np.exp(_log_post(r, w, s, L) - top) if r > 0 else 0.0

    # Break points around every peak at multiples of its own numerical width.
    breaks = {0.0}
    for p in peaks:
        h = 1e-4 * p
        curv = -(_log_post(p + h, w, s, L) - 2 * _log_post(p, w, s, L) + _log_post(p - h, w, s, L)) / h**2
        width = 1.0 / np.sqrt(max(curv, 1e-300))
        breaks.update(x for k in (-8, -4, -2, -1, 0, 1, 2, 4, 8, 16) if (x := p + k * width) > 0)
    breaks.add(max(breaks) + 40.0 * L)
    edges = sorted(breaks)
    pieces = [integrate.quad(f, a, b, epsabs=1e-20, epsrel=1e-11, limit=400)[0] for a, b in zip(edges[:-1], edges[1:])]
    pieces.append(integrate.quad(f, edges[-1], np.inf, epsabs=1e-20, epsrel=1e-11, limit=400)[0])
    z = sum(pieces)
    cum = np.concatenate([[0.0], np.cumsum(pieces[:-1])])

    def cdf(x: float) -> float:
        j = np.searchsorted(edges, x, side="right") - 1
        return (cum[j] + integrate.quad(f, edges[j], x, epsabs=1e-20, epsrel=1e-11, limit=400)[0]) / z

    def quantile(q: float) -> float:
        return optimize.brentq(lambda x: cdf(x) - q, 1e-9, edges[-1] + 200.0 * L, xtol=1e-15, rtol=1e-14)

    # ln m = ln of integral of N(w | 1/r, s) r^2 exp(-r/L) / (2 L^3) dr.
    log_m = top + np.log(z) - np.log(2.0 * L**3) - np.log(s * np.sqrt(2.0 * np.pi))
    return quantile, log_m


CASES = [
    (10.0, 1.0, 1.35),  # 10 % error
    (10.0, 0.001, 1.35),  # very precise
    (1.0, 0.5, 1.35),
    (0.1, 1.0, 1.35),  # prior-dominated
    (-1.0, 0.3, 1.35),  # negative parallax
    (0.0, 0.5, 0.5),
    (2.0, 100.0, 1.35),  # huge error: posterior -> prior
    (5.4789, 5.4789 * 0.3917, 1.0),  # bimodal
    (17.8, 4.09, 3.27),  # bimodal, far peak holds the mass
]
QS = (0.01, 0.16, 0.5, 0.84, 0.99)


@pytest.mark.parametrize(("w", "s", "L"), CASES)
def test_edsd_quantiles_and_marginal_against_quad(w: float, s: float, L: float) -> None:
    quantile, log_m = _reference_posterior(w, s, L)
    expected = np.array([quantile(q) for q in QS])
    # Reference: scipy.integrate.quad + scipy.optimize.brentq. Tolerances: rtol
    # 1e-4 on the quantiles (the kernel's CDF is linear between grid nodes, good
    # to ~1e-5) and 1e-8 relative on m (trapezoid in the sinh variable).
    np.testing.assert_allclose(edsd_quantiles(w, s, L, QS), expected, rtol=1e-4)
    assert edsd_log_marginal(w, s, L) == pytest.approx(log_m, abs=1e-8)


def test_edsd_quantiles_and_marginal_vectorise() -> None:
    w = np.array([[10.0, 1.0], [-1.0, 0.1]])
    s = np.array([1.0, 0.5])
    q = edsd_quantiles(w, s, L_KPC)
    assert q.shape == (2, 2, 3)
    lm = edsd_log_marginal(w, s, L_KPC)
    assert lm.shape == (2, 2)
    # Element by element agrees with the batch.
    for i in range(2):
        for j in range(2):
            np.testing.assert_allclose(edsd_quantiles(w[i, j], s[j], L_KPC), q[i, j], rtol=1e-12)
            assert edsd_log_marginal(w[i, j], s[j], L_KPC) == pytest.approx(lm[i, j], rel=1e-12)
    assert np.isnan(edsd_quantiles(1.0, -0.1, L_KPC)).all()
    assert np.isnan(edsd_log_marginal(np.nan, 0.1, L_KPC))
    with pytest.raises(ValueError, match="Fix:"):
        edsd_quantiles(1.0, 0.1, L_KPC, q=(0.5, 1.0))


def test_edsd_marginal_precise_limit_is_gaussian_in_parallax() -> None:
    # From memory (Laplace's method): as s -> 0, m -> p_r(1/w) / w^2, the prior
    # density of the parallax at w, with p_r(r) = r^2 exp(-r/L) / (2 L^3).
    w, s = 5.0, 1e-4
    r = 1.0 / w
    expected = np.log(r**2 * np.exp(-r / L_KPC) / (2 * L_KPC**3) / w**2)
    # The O(s^2) correction is ~1e-8 here; tolerance 1e-7 in ln m.
    assert edsd_log_marginal(w, s, L_KPC) == pytest.approx(expected, abs=1e-7)


@settings(max_examples=150, deadline=None)
@given(
    w=st.floats(-5.0, 20.0),
    log_s=st.floats(np.log(0.005), np.log(50.0)),
    L=st.floats(0.1, 5.0),
)
def test_edsd_quantiles_ordered_and_bracket_the_mode(w: float, log_s: float, L: float) -> None:
    s = float(np.exp(log_s))
    q = edsd_quantiles(w, s, L, QS)
    assert np.all(np.isfinite(q)) and q[0] > 0
    assert np.all(np.diff(q) > 0)
    # Where the posterior is unimodal (one real root of the paper's cubic, via
    # numpy.roots), its mode lies inside the central 98 %. A bimodal posterior
    # can put its near peak below the 1st percentile (see edsd_mode's notes).
    roots = np.roots([1.0 / L, -2.0, w / s**2, -1.0 / s**2])
    if np.sum(np.abs(roots.imag) <= 1e-9 * np.abs(roots)) == 1:
        mode = edsd_mode(w, s, L)
        assert q[0] <= mode <= q[-1]


# ------------------------------------------------------------ fractional error


def test_fractional_error_class() -> None:
    w = np.array([10.0, 10.0, 10.0, 10.0, -1.0, 0.0, np.nan])
    s = np.array([0.5, 1.0, 2.0, 2.5, 0.1, 1.0, 0.1])
    # METHODS.md thresholds: < 0.1 precise, 0.1-0.2 usable, above or non-positive imprecise.
    expected = ["precise", "usable", "usable", "imprecise", "imprecise", "imprecise", "imprecise"]
    assert fractional_error_class(w, s).tolist() == expected
    assert fractional_error_class(10.0, 0.1).item() == "precise"


# ------------------------------------------------------ fast paths for precise parallaxes

NARROW_CASES = [
    (10.0, 0.001, 1.35),
    (10.0, 0.5, 1.35),
    (2.0, 0.15, 1.35),  # near the slope limit (s·|d ln p/du| = 0.33)
    (0.5, 0.02, 0.5),  # small w·L: the prior's exp(−1/(uL)) dominates the slope
    (50.0, 0.1, 1.35),
]


@pytest.mark.parametrize(("w", "s", "L"), NARROW_CASES)
def test_narrow_posteriors_take_the_fast_paths_and_match_quad(w: float, s: float, L: float) -> None:
    from dossier.astro.distance import _narrow

    assert _narrow(np.array([w]), np.array([s]), np.array([L]))[0]
    quantile, log_m = _reference_posterior(w, s, L)
    expected = np.array([quantile(q) for q in QS])
    # Reference: scipy.integrate.quad + scipy.optimize.brentq. Gauss–Hermite (16 nodes) for m, the cubic
    # Hermite integral on a z-grid of step 1/8 for the quantiles: far tighter than the sinh grid's 1e-4.
    np.testing.assert_allclose(edsd_quantiles(w, s, L, QS), expected, rtol=1e-6)
    assert edsd_log_marginal(w, s, L) == pytest.approx(log_m, abs=1e-10)


def test_fast_paths_and_sinh_grid_agree_across_the_border() -> None:
    # Reference: the sinh-grid quadrature (itself checked against scipy.integrate.quad above) on rows drawn
    # around the limits of _narrow, so that a row moving across the border changes its numbers only within
    # the grid's own accuracy.
    from dossier.astro import distance

    rng = np.random.default_rng(3)
    n = 3000
    L = rng.uniform(0.3, 3.0, n)
    w = 10 ** rng.uniform(-1, 2, n)
    s = w * 10 ** rng.uniform(-3, np.log10(0.1), n)
    narrow = distance._narrow(w, s, L)
    assert 0.3 < narrow.mean() < 0.95
    w, s, L = w[narrow], s[narrow], L[narrow]
    np.testing.assert_allclose(distance._gh_log_marginal(w, s, L), distance._grid_log_marginal(w, s, L),
                               rtol=0, atol=1e-8)
    qs = np.array(QS)
    np.testing.assert_allclose(distance._z_quantiles(w, s, L, qs), distance._grid_quantiles(w, s, L, qs), rtol=2e-5)
