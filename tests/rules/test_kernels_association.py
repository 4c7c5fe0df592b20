"""The vectorised kernels of the parallax-agreement and chance-alignment rules.

``weigh`` computes its numbers by calling ``kernel()`` with one pair, so the kernel on many pairs at
once must give exactly the assessments' numbers (the screen of many pairs relies on it), give
"insufficient" for missing inputs without a warning, and keep the arithmetic the rules had before
they had kernels, bit for bit.
"""

from __future__ import annotations

import dataclasses
import math
import warnings
from functools import cache

import numpy as np
import pytest
from scipy import stats

from dossier.astro import distance
from dossier.astro.binary import python_square
from dossier.engine import weigh_project, weigh_system
from dossier.rules import chance_alignment, parallax_agreement
from dossier.rules.base import OUTCOME_CODES
from dossier.rules.registry import rule_settings
from dossier.schema.loader import load_project
from tests.conftest import DEMO
from tests.rules import harness

SEEDS = range(12)
NAN = float("nan")


@cache
def _weighed() -> dict[str, list]:
    """Every weighed system, by origin: the demo project and the simulated pairs of the harness."""
    project = load_project(DEMO)
    demo = [(r, project.settings) for r in weigh_project(project, use_cache=False).values()]
    sims = [(weigh_system(harness.simulate(kind, seed), harness.settings()), harness.settings())
            for kind in harness.KINDS for seed in SEEDS]
    return {"demo": demo, "harness": sims}


def _value(x) -> float:
    return NAN if x is None else float(x)


def _quantity(a, name: str) -> float:
    q = a.quantity(name)
    return NAN if q is None else _value(q.value)


def _uncertainty(a, name: str) -> float:
    q = a.quantity(name)
    return NAN if q is None else _value(q.uncertainty)


def _assessment(result, rule_id: str, pair_id: str):
    return next(a for a in result.for_subject(pair_id) if a.rule == rule_id)


# -- parallax agreement ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize("origin", ["demo", "harness"])
def test_parallax_kernel_on_all_pairs_at_once_gives_the_assessments_numbers(origin):
    # Reference: the assessments of `weigh`, one pair at a time (which calls the kernel with one pair).
    weighed = _weighed()[origin]
    rows, expected = [], []
    settings = length_scale = None
    for result, project_settings in weighed:
        rule_set = rule_settings(project_settings.rules, parallax_agreement.RULE)
        assert settings in (None, rule_set) and length_scale in (None, result.facts.length_scale_kpc)
        settings, length_scale = rule_set, result.facts.length_scale_kpc
        for pair_id, pair in result.facts.pairs.items():
            if pair.first == pair.second:  # both members stand for one star: weigh says so before any number
                continue
            a, b = (result.facts.stars[m].parallax for m in (pair.first, pair.second))
            rows.append((NAN if a is None else a.mean, NAN if a is None else a.error_inflated,
                         NAN if b is None else b.mean, NAN if b is None else b.error_inflated,
                         _value(pair.rho_arcsec)))
            expected.append(_assessment(result, parallax_agreement.RULE.id, pair_id))
    assert len(rows) >= (5 if origin == "demo" else 36)
    p1, e1, p2, e2, rho = np.array(rows).T
    got = parallax_agreement.kernel(p1, e1, p2, e2, rho, settings, length_scale)

    assert got["outcome"].dtype == np.int8
    np.testing.assert_array_equal(got["outcome"], [OUTCOME_CODES[a.outcome] for a in expected])
    np.testing.assert_array_equal(got["strength"], [_value(a.strength) for a in expected])
    np.testing.assert_array_equal(got["statistic"], [_value(a.statistic and a.statistic.value) for a in expected])
    for name in ("delta_parallax", "depth_allowance", "threshold"):
        np.testing.assert_array_equal(got[name], [_quantity(a, name) for a in expected])
    np.testing.assert_array_equal(got["delta_parallax_uncertainty"],
                                  [_uncertainty(a, "delta_parallax") for a in expected])
    if origin == "demo":  # the demo has pairs of every kind this rule distinguishes
        assert {a.outcome for a in expected} == {"supports", "against", "insufficient"}


def _random_parallax_pairs(n: int, seed: int = 11):
    rng = np.random.default_rng(seed)
    p1 = rng.uniform(0.2, 30, n)
    p2 = p1 + rng.normal(0, 1, n) * rng.choice([0.05, 3.0], n)
    e1, e2 = rng.uniform(0.01, 0.8, n), rng.uniform(0.01, 0.8, n)
    rho = 10 ** rng.uniform(-0.5, 3.5, n)  # both sides of the 4″ threshold, and wide enough for depth to count
    rho[::7] = NAN
    return p1, e1, p2, e2, rho


def test_parallax_kernel_gives_every_pair_the_numbers_it_gives_that_pair_alone():
    # Reference: the kernel with one pair, as weigh calls it (rows are independent, bit for bit).
    inputs = _random_parallax_pairs(120)
    settings = parallax_agreement.Settings()
    together = parallax_agreement.kernel(*inputs, settings, 1.35)
    for i in range(inputs[0].size):
        alone = parallax_agreement.kernel(*(np.array([x[i]]) for x in inputs), settings, 1.35)
        for key, value in alone.items():
            np.testing.assert_array_equal(together[key][i : i + 1], value, err_msg=f"{key} of pair {i}")


def _parallax_version_1(p1, e1, p2, e2, rho, settings, l_kpc):
    """The rule's arithmetic as weigh wrote it with Python floats before the kernel existed."""
    diff = p1 - p2
    sigma = math.hypot(e1, e2)
    close = rho is not None and rho < settings.close_separation_arcsec
    threshold = 6.0 if close else 3.0
    w = np.array([1 / e1**2, 1 / e2**2])
    mean = float((w[0] * p1 + w[1] * p2) / w.sum())
    depth = settings.depth_factor * max(mean, 0.0) * (rho or 0.0) * parallax_agreement.ARCSEC_IN_RAD
    sigma_total = math.hypot(sigma, depth)
    consistent = abs(diff) < threshold * sigma_total
    scale = 2.0 if close else 1.0
    s_bf = scale * sigma_total
    mean_err = 1 / math.sqrt(w.sum())
    log_m = distance.edsd_log_marginal(np.array([mean, p1, p2]), scale * np.array([mean_err, e1, e2]), l_kpc)
    log_gauss = -0.5 * (diff / s_bf) ** 2 - math.log(s_bf * math.sqrt(2 * math.pi))
    strength = float((log_gauss + log_m[0] - log_m[1] - log_m[2]) / math.log(10))
    return {"outcome": 1 if consistent else -1, "strength": strength, "statistic": abs(diff) / sigma_total,
            "delta_parallax": diff, "delta_parallax_uncertainty": sigma, "depth_allowance": depth,
            "threshold": threshold}


def test_parallax_kernel_keeps_the_arithmetic_of_rule_version_1_to_rounding():
    # Reference: CPython's math.hypot, float ** and math.log, in the scalar code the rule had before. Compared
    # to 1e-12 relative: pow, hypot and log of different C maths libraries differ in the last bits, so a
    # bit-for-bit check passes on one machine and fails on another.
    inputs = _random_parallax_pairs(150, seed=5)
    settings = parallax_agreement.Settings()
    got = parallax_agreement.kernel(*inputs, settings, 1.35)
    for i, row in enumerate(zip(*(x.tolist() for x in inputs))):
        p1, e1, p2, e2, rho = row
        want = _parallax_version_1(p1, e1, p2, e2, None if math.isnan(rho) else rho, settings, 1.35)
        for key, value in want.items():
            assert got[key][i] == pytest.approx(value, rel=1e-12, abs=1e-300), (key, i)


def test_parallax_kernel_without_strength_skips_only_the_bayes_factor():
    inputs = _random_parallax_pairs(60)
    settings = parallax_agreement.Settings()
    full = parallax_agreement.kernel(*inputs, settings, 1.35)
    fast = parallax_agreement.kernel(*inputs, settings, 1.35, with_strength=False)
    assert np.isnan(fast["strength"]).all()
    for key in full:
        if key != "strength":
            np.testing.assert_array_equal(fast[key], full[key], err_msg=key)


def test_parallax_kernel_missing_inputs_are_insufficient_without_warnings():
    ok = (5.0, 0.05, 5.02, 0.06)
    rows = [ok + (10.0,), ok + (NAN,),  # a missing separation is allowed: wide threshold, no depth
            (NAN, 0.05, 5.0, 0.06, 10.0), (5.0, NAN, 5.0, 0.06, 10.0), (5.0, 0.05, NAN, 0.06, 10.0),
            (5.0, 0.05, 5.0, NAN, 10.0), (5.0, 0.0, 5.0, 0.06, 10.0), (5.0, 0.05, math.inf, 0.06, 10.0),
            (NAN, NAN, NAN, NAN, NAN)]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        got = parallax_agreement.kernel(*np.array(rows).T, parallax_agreement.Settings(), 1.35)
    np.testing.assert_array_equal(got["outcome"], [1, 1] + [-2] * 7)
    assert got["threshold"][1] == 3.0 and got["depth_allowance"][1] == 0.0
    for key, value in got.items():
        if key != "outcome":
            assert np.isnan(value[2:]).all(), key
            assert np.isfinite(value[:2]).all(), key
    empty = parallax_agreement.kernel(*(np.array([]),) * 5, parallax_agreement.Settings())
    assert all(v.shape == (0,) for v in empty.values())


def test_hypot_port_is_cpython_math_hypot_bit_for_bit():
    # Reference: CPython's math.hypot itself (Modules/mathmodule.c, vector_norm), on random and special values.
    rng = np.random.default_rng(3)
    x = np.concatenate([10 ** rng.uniform(-5, 5, 20000), 10 ** rng.uniform(-300, 300, 2000),
                        rng.uniform(0, 1, 200) * 1e-310, [0.0, -0.0, 1.0, math.inf, -math.inf, NAN, 5e-324, 1e308]])
    y = np.concatenate([10 ** rng.uniform(-5, 5, 20000), 10 ** rng.uniform(-300, 300, 2000),
                        rng.uniform(0, 1, 200) * 1e-312, [0.0, 3.0, NAN, NAN, 1.0, math.inf, 5e-324, 1e308]])
    want = np.array([math.hypot(a, b) for a, b in zip(x.tolist(), y.tolist())])
    np.testing.assert_array_equal(parallax_agreement._hypot(x, y), want)


def test_square_port_is_python_float_power_to_rounding():
    # Reference: CPython's float ** 2 (C pow). Whether pow and x * x agree in the last bit depends on the C maths
    # library, so the check is to a few units in the last place (rtol 1e-15), never bit for bit.
    x = 10 ** np.random.default_rng(4).uniform(-4, 4, 50000)
    want = np.array([v**2 for v in x.tolist()])
    np.testing.assert_allclose(python_square(x), want, rtol=1e-15, atol=0)


# -- chance alignment -----------------------------------------------------------------------------------------------

def _chance_inputs(result, pair_id: str, project_settings):
    """(table rows, ρ, the companion's magnitude) as the rule chooses them: the first band of the table that
    both members have, the fainter member; NaN where there is none."""
    facts = result.facts
    pair = facts.pairs[pair_id]
    table = facts.system.field_density or project_settings.field_density
    a, b = facts.stars[pair.first], facts.stars[pair.second]
    band = next((band for band in dict.fromkeys(r.band for r in table)
                 if band in a.magnitudes and band in b.magnitudes), None)
    mag = NAN if band is None else max(a.magnitudes[band].value, b.magnitudes[band].value)
    rows = tuple((r.brighter_than, r.per_square_degree.value, r.per_square_degree.uncertainty)
                 for r in table if r.band == (band or table[0].band))
    return rows, _value(pair.rho_arcsec), mag


@pytest.mark.parametrize("origin", ["demo", "harness"])
def test_chance_kernel_on_all_pairs_at_once_gives_the_assessments_numbers(origin):
    # Reference: the assessments of `weigh`, one pair at a time (which calls the kernel with one pair).
    groups: dict[tuple, list] = {}  # one kernel call per density table (a system may have its own)
    settings = None
    for result, project_settings in _weighed()[origin]:
        rule_set = rule_settings(project_settings.rules, chance_alignment.RULE)
        assert settings in (None, rule_set)
        settings = rule_set
        for pair_id in result.facts.pairs:
            rows, rho, mag = _chance_inputs(result, pair_id, project_settings)
            groups.setdefault(rows, []).append((rho, mag, _assessment(result, chance_alignment.RULE.id, pair_id)))
    assert sum(len(g) for g in groups.values()) >= (6 if origin == "demo" else 36)
    outcomes = set()
    for rows, members in groups.items():
        tm, td, te = np.array(rows).T
        rho, mag = np.array([(r, m) for r, m, _ in members]).T
        got = chance_alignment.kernel(rho, mag, settings, table_magnitudes=tm, table_densities=td,
                                      table_density_errors=te)
        expected = [a for _, _, a in members]
        outcomes |= {a.outcome for a in expected}
        assert got["outcome"].dtype == np.int8
        np.testing.assert_array_equal(got["outcome"], [OUTCOME_CODES[a.outcome] for a in expected])
        np.testing.assert_array_equal(got["strength"], [_value(a.strength) for a in expected])
        np.testing.assert_array_equal(got["statistic"], [_value(a.statistic and a.statistic.value) for a in expected])
        for name in ("density", "expected", "p_chance"):
            np.testing.assert_array_equal(got[name], [_quantity(a, name) for a in expected])
            np.testing.assert_array_equal(got[f"{name}_uncertainty"], [_uncertainty(a, name) for a in expected])
        np.testing.assert_array_equal(got["extrapolated"], ["extrapolated" in a.explanation for a in expected])
    if origin == "demo":
        assert outcomes == {"supports", "against", "insufficient"}


TABLE = {"table_magnitudes": np.array([9.0, 12.0, 15.0]), "table_densities": np.array([2.0, 40.0, 480.0])}


def _random_chance_pairs(n: int, seed: int = 2):
    rng = np.random.default_rng(seed)
    rho = 10 ** rng.uniform(-1.5, 2.5, n)
    mag = rng.uniform(6, 18, n)  # inside the table and beyond both of its ends
    rho[::9], mag[::11] = NAN, NAN
    return rho, mag


def test_chance_kernel_gives_every_pair_the_numbers_it_gives_that_pair_alone():
    # Reference: the kernel with one pair, as weigh calls it.
    rho, mag = _random_chance_pairs(300)
    settings = chance_alignment.Settings()
    together = chance_alignment.kernel(rho, mag, settings, **TABLE)
    for i in range(rho.size):
        alone = chance_alignment.kernel(rho[i : i + 1], mag[i : i + 1], settings, **TABLE)
        for key, value in alone.items():
            np.testing.assert_array_equal(together[key][i : i + 1], value, err_msg=f"{key} of pair {i}")
    assert {-2, -1, 0, 1} <= set(together["outcome"].tolist())


def test_chance_kernel_keeps_the_arithmetic_of_rule_version_1_to_rounding():
    # Reference: CPython's float ** and math.log10, in the scalar code the rule had before it had a kernel;
    # to 1e-12 relative, since C maths libraries differ in the last bits.
    from dossier.astro import chance

    rho, mag = _random_chance_pairs(400, seed=8)
    settings = chance_alignment.Settings()
    got = chance_alignment.kernel(rho, mag, settings, **TABLE)
    for i, (r, m) in enumerate(zip(rho.tolist(), mag.tolist())):
        if math.isnan(r) or math.isnan(m):
            continue
        density_deg, _ = chance.density_at_magnitude(m, TABLE["table_magnitudes"], TABLE["table_densities"])
        sigma_arcsec = float(chance.per_sq_deg_to_per_sq_arcsec(density_deg))
        lam = math.pi * r**2 * sigma_arcsec
        p = float(chance.chance_alignment_probability(r, sigma_arcsec))
        strength = math.log10(settings.companion_rate_per_decade / (2 * math.log(10) * lam))
        assert (got["density"][i], got["expected"][i], got["p_chance"][i], got["strength"][i]) == \
            pytest.approx((float(density_deg), lam, p, strength), rel=1e-12), i


def test_chance_kernel_is_the_poisson_probability_and_interpolates_the_table_in_log_density():
    # Bloom, Kulkarni & Djorgovski 2002, AJ 123, 1111: P = 1 − exp(−λ) = Poisson P(N ≥ 1) (scipy.stats), with
    # λ = π ρ² Σ; at a table magnitude the density is the table's, and halfway between two rows it is their
    # geometric mean (linear interpolation of log10 density: common practice).
    rho = np.array([1.0, 5.0, 30.0, 120.0])
    mag = np.array([9.0, 10.5, 12.0, 13.5])
    got = chance_alignment.kernel(rho, mag, chance_alignment.Settings(), **TABLE)
    np.testing.assert_allclose(got["density"], [2.0, math.sqrt(2 * 40), 40.0, math.sqrt(40 * 480)], rtol=1e-14)
    lam = math.pi * rho**2 * got["density"] / 3600**2
    np.testing.assert_allclose(got["expected"], lam, rtol=1e-14)
    np.testing.assert_allclose(got["p_chance"], stats.poisson.sf(0, lam), rtol=1e-12)
    np.testing.assert_allclose(got["strength"], np.log10(0.1 / (2 * math.log(10) * lam)), rtol=1e-13)


def test_chance_kernel_missing_inputs_are_insufficient_without_warnings():
    rho = np.array([2.0, NAN, 2.0, NAN, 0.0, math.inf])
    mag = np.array([11.0, 11.0, NAN, NAN, 11.0, 11.0])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        got = chance_alignment.kernel(rho, mag, chance_alignment.Settings(), **TABLE)
        none = chance_alignment.kernel(rho, mag, chance_alignment.Settings(), table_magnitudes=np.array([]),
                                       table_densities=np.array([]))
    np.testing.assert_array_equal(got["outcome"], [1, -2, -2, -2, -2, -2])
    np.testing.assert_array_equal(none["outcome"], [-2] * 6)
    for result in (got, none):
        for key in ("strength", "statistic", "density", "expected", "p_chance"):
            assert np.isnan(result[key][1:]).all() and not result["extrapolated"].any()
    assert np.isfinite(got["strength"][0])


def test_chance_kernel_sorts_the_table_as_weigh_does():
    rho, mag = _random_chance_pairs(50)
    order = [2, 0, 1]
    shuffled = {k: v[order] for k, v in TABLE.items()}
    settings = chance_alignment.Settings()
    a = chance_alignment.kernel(rho, mag, settings, **TABLE)
    b = chance_alignment.kernel(rho, mag, settings, **shuffled)
    for key in a:
        np.testing.assert_array_equal(a[key], b[key], err_msg=key)


def test_a_zero_separation_is_insufficient_data_not_a_failed_rule():
    # Before the kernel, ρ = 0 divided by zero and the engine reported a failed rule.
    system = harness.simulate("bound", 1).model_copy(deep=True)
    result = weigh_system(system, harness.settings())
    result.facts.pairs["AB"] = dataclasses.replace(result.facts.pairs["AB"], rho_arcsec=0.0)
    a = chance_alignment.weigh(result.facts, "AB", chance_alignment.Settings())
    assert a.outcome == "insufficient" and "separation is zero" in a.explanation
