"""The vectorised kernels of the proper-motion-orbit and radial-velocity-agreement rules.

``weigh`` computes its numbers by calling ``kernel()`` with one pair, so the kernel on many pairs at
once must give exactly the assessments' numbers (the screen of many pairs relies on it), give
"insufficient" for missing inputs without a warning, and keep the arithmetic the rules had before
they had kernels, bit for bit (Python's ``math.hypot`` and ``x ** 2`` included). The likelihood
ratios of rows clipped at ±99 may be settled from bounds instead of the quadrature: that must not
change a single strength.
"""

from __future__ import annotations

import math
import sys
import warnings
from functools import cache

import numpy as np
import pytest

from dossier.astro import binary, binding
from dossier.engine import weigh_project, weigh_system
from dossier.rules import proper_motion_orbit, radial_velocity
from dossier.rules.base import OUTCOME_CODES
from dossier.rules.registry import rule_settings
from dossier.schema.loader import load_project
from tests.conftest import DEMO
from tests.rules import harness

SEEDS = range(12)
NAN = float("nan")
LN_LIMIT = 99 * math.log(10)


def _numpy_power_is_the_c_pow() -> bool:
    """Whether numpy's ``power`` with an array exponent calls the C library's ``pow``, as Python's float ``**``
    does. It does not where numpy uses its AVX-512 pow; there the kernels' squares (``python_square``) may
    differ from the scalar rules' in the last bit, as ``x * x`` would."""
    x = np.random.default_rng(0).uniform(0, 3, 20_000)
    return bool(np.array_equal(proper_motion_orbit.python_square(x), [v**2 for v in x.tolist()]))


POWER_IS_C_POW = _numpy_power_is_the_c_pow()


@cache
def _weighed() -> dict[str, list]:
    """Every weighed system, by origin: the demo project and the simulated pairs of the harness."""
    project = load_project(DEMO)
    demo = [(r, project.settings) for r in weigh_project(project, use_cache=False).values()]
    sims = [(weigh_system(harness.simulate(kind, seed), harness.settings()), harness.settings())
            for kind in harness.KINDS for seed in SEEDS]
    sims.append((weigh_system(harness.simulate("bound", 3, with_rv=False), harness.settings()), harness.settings()))
    return {"demo": demo, "harness": sims}


def _value(x) -> float:
    return NAN if x is None else float(x)


def _gather(origin: str, rule, inputs) -> tuple[object, list[tuple[float, ...]], list]:
    """The kernel's input rows of every pair of an origin (``inputs(facts, pair_id)``) and its assessments."""
    rows, expected, settings = [], [], None
    for result, project_settings in _weighed()[origin]:
        rule_set = rule_settings(project_settings.rules, rule.RULE)
        assert settings in (None, rule_set)
        settings = rule_set
        for pair_id, pair in result.facts.pairs.items():
            if pair.first == pair.second:  # both members stand for one star: weigh says so before any number
                continue
            rows.append(inputs(result.facts, pair_id))
            expected.append(next(a for a in result.for_subject(pair_id) if a.rule == rule.RULE.id))
    return settings, rows, expected


def _check(result: dict[str, np.ndarray], expected: list, quantities: tuple[str, ...]) -> None:
    np.testing.assert_array_equal(result["outcome"], [OUTCOME_CODES[a.outcome] for a in expected])
    np.testing.assert_array_equal(result["strength"], [_value(a.strength) for a in expected])
    np.testing.assert_array_equal(result["statistic"],
                                  [NAN if a.statistic is None else _value(a.statistic.value) for a in expected])
    np.testing.assert_array_equal(result["p_bound"], [_value(a.probability) for a in expected])
    for name in quantities:
        np.testing.assert_array_equal(result[name], [_value(a.quantity(name).value) if a.quantity(name) else NAN
                                                     for a in expected], err_msg=name)


def _pm_inputs(facts, pair_id: str) -> tuple[float, ...]:
    pair = facts.pairs[pair_id]
    a, b = (facts.stars[m].motion for m in (pair.first, pair.second))
    motions = [NAN] * 8
    for k, m in enumerate((a, b)):
        if m is not None:
            motions[4 * k:4 * k + 4] = [m.pmra, m.pmra_error, m.pmdec, m.pmdec_error]
    plx, mass = facts.pair_parallax(pair_id), facts.pair_mass(pair_id)
    return (*motions, _value(pair.rho_arcsec), NAN if plx is None else plx[0], NAN if mass is None else mass[0])


def _rv_inputs(facts, pair_id: str) -> tuple[float, ...]:
    pair = facts.pairs[pair_id]
    velocities = []
    for m in (pair.first, pair.second):
        v = facts.stars[m].radial_velocity
        velocities += [NAN, NAN] if v is None else [v.value, v.uncertainty]
    dist, mass = facts.pair_distance_pc(pair_id), facts.pair_mass(pair_id)
    return (*velocities, _value(pair.rho_arcsec), NAN if dist is None else dist[1], NAN if mass is None else mass[0])


# -- the kernels on all pairs at once give the assessments' numbers -------------------------------------------------

@pytest.mark.parametrize("origin", ["demo", "harness"])
def test_proper_motion_kernel_on_all_pairs_at_once_gives_the_assessments_numbers(origin):
    # Reference: the assessments of `weigh`, one pair at a time.
    settings, rows, expected = _gather(origin, proper_motion_orbit, _pm_inputs)
    result = proper_motion_orbit.kernel(*np.array(rows).T, settings=settings)
    _check(result, expected, ("delta_pm", "orbit_limit", "escape_limit"))
    np.testing.assert_array_equal(result["delta_pm_uncertainty"],
                                  [_value(a.quantity("delta_pm").uncertainty) if a.quantity("delta_pm") else NAN
                                   for a in expected])
    within = [("within the El-Badry" in a.explanation) for a in expected]
    np.testing.assert_array_equal(result["within_limit"], within)
    assert {a.outcome for a in expected} >= ({"supports", "against", "insufficient"} if origin == "demo"
                                             else {"supports", "against"})


@pytest.mark.parametrize("origin", ["demo", "harness"])
def test_radial_velocity_kernel_on_all_pairs_at_once_gives_the_assessments_numbers(origin):
    # Reference: the assessments of `weigh`, one pair at a time.
    settings, rows, expected = _gather(origin, radial_velocity, _rv_inputs)
    result = radial_velocity.kernel(*np.array(rows).T, settings=settings)
    _check(result, expected, ("projected_separation", "circular_speed", "escape_speed", "delta_rv"))
    np.testing.assert_array_equal(result["delta_rv_uncertainty"],
                                  [_value(a.quantity("delta_rv").uncertainty) if a.quantity("delta_rv") else NAN
                                   for a in expected])
    assert "insufficient" in {a.outcome for a in expected}


# -- missing inputs ----------------------------------------------------------------------------------------------------

PM_ROW = (12.0, 0.05, -30.0, 0.05, 11.2, 0.06, -29.5, 0.06, 20.0, 10.0, 2.0)
RV_ROW = (10.0, 0.3, 10.4, 0.3, 20.0, 100.0, 2.0)


@pytest.mark.parametrize("rule, row", [(proper_motion_orbit, PM_ROW), (radial_velocity, RV_ROW)],
                         ids=["proper-motion-orbit", "radial-velocity-agreement"])
def test_a_missing_input_gives_insufficient_without_a_warning(rule, row):
    # one NaN per row, in turn in every column; a complete first row; then no rows at all
    n = len(row)
    table = np.tile(np.array(row), (n + 1, 1))
    table[np.arange(1, n + 1), np.arange(n)] = np.nan
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        result = rule.kernel(*table.T, settings=rule.Settings())
        empty = rule.kernel(*np.empty((n, 0)), settings=rule.Settings())
    assert result["outcome"][0] != OUTCOME_CODES["insufficient"] and np.isfinite(result["strength"][0])
    assert np.all(result["outcome"][1:] == OUTCOME_CODES["insufficient"])
    for name, values in result.items():
        if values.dtype == np.float64:
            assert np.all(np.isnan(values[1:])), name
    assert set(empty) == set(result) and all(v.shape == (0,) for v in empty.values())


def test_the_kernels_numbers_against_textbook_values():
    # Pythagoras: Δμ of a (3, 4) mas/yr difference is 5 mas/yr; σ_Δμ with equal errors on both axes is
    # that error (El-Badry, Rix & Heintz 2021, MNRAS 506, 2269: propagation along the difference)
    pm = proper_motion_orbit.kernel(3.0, 0.03, 4.0, 0.03, 0.0, 0.04, 0.0, 0.04, 10.0, 10.0, 5.0,
                                    settings=proper_motion_orbit.Settings())
    assert pm["delta_pm"][()] == 5.0 and pm["delta_pm_uncertainty"][()] == pytest.approx(0.05, rel=1e-12)
    # El-Badry et al. 2021, eq. 1: 0.44 mas/yr (ϖ/mas)^1.5 (θ/″)^-0.5 for 5 M☉ (the paper rounds 0.4443)
    assert pm["orbit_limit"][()] == pytest.approx(0.44 * 10**1.5 / math.sqrt(10.0), rel=0.012)
    # 1 au at 1 pc subtends 1″ (definition of the parsec); Earth's mean orbital speed is 29.78 km/s
    # (common knowledge, from memory)
    rv = radial_velocity.kernel(1.0, 0.3, 0.0, 0.3, 1.0, 1.0, 1.0, settings=radial_velocity.Settings())
    assert rv["projected_separation"][()] == 1.0
    assert rv["circular_speed"][()] == pytest.approx(29.78, abs=0.01)
    assert rv["escape_speed"][()] == pytest.approx(29.78 * math.sqrt(2), abs=0.02)
    # P(bound) at even odds from the log10 ratio: 1 / (1 + 10^-strength) (Bayes' rule)
    for res in (pm, rv):
        assert res["p_bound"][()] == pytest.approx(1 / (1 + 10 ** -res["strength"][()]), rel=1e-15)


# -- the arithmetic of the scalar rules, bit for bit -------------------------------------------------------------------

def _assert_same(got: list, expected: list, k: int) -> None:
    """Bit for bit; to 1e-12 where numpy's power is not the C library's pow (see above)."""
    if POWER_IS_C_POW:
        assert got == expected, k
    else:
        np.testing.assert_allclose(np.array(got, dtype=float), np.array(expected, dtype=float), rtol=1e-12,
                                   err_msg=str(k))


def _strength(log_lr: float) -> tuple[float, float]:
    """The scalar clipping the rules had: max(-99, min(99, x)), a NaN becoming +99."""
    s = max(-99.0, min(99.0, log_lr / math.log(10)))
    return s, 1.0 / (1.0 + 10.0 ** (-s))


def _random_pm_rows(rng, n):
    physical = rng.random(n) < 0.5
    pm1 = rng.normal(0, 40, (2, n))
    pm2 = np.where(physical, pm1 + rng.normal(0, 1, (2, n)) * 10 ** rng.uniform(-1.5, 0.5, n), rng.normal(0, 40, (2, n)))
    err = 10 ** rng.uniform(-2, 0, (4, n))
    return np.array([pm1[0], err[0], pm1[1], err[1], pm2[0], err[2], pm2[1], err[3],
                     10 ** rng.uniform(-0.5, 2.3, n), 10 ** rng.uniform(-0.5, 1.7, n), rng.uniform(0.2, 5, n)])


def test_proper_motion_kernel_keeps_the_scalar_arithmetic():
    # Reference: the rule's formulas as they were, one pair at a time in Python floats (math.hypot,
    # ** 2, math.sqrt), with the astro kernels on scalars and without the bounds that settle clipped rows.
    settings = proper_motion_orbit.Settings()
    rows = _random_pm_rows(np.random.default_rng(3), 300)
    result = proper_motion_orbit.kernel(*rows, settings=settings)
    for k, (a1, ea1, d1, ed1, a2, ea2, d2, ed2, rho, plx, mass) in enumerate(rows.T.tolist()):
        d_ra, d_dec = a1 - a2, d1 - d2
        var_ra, var_dec = ea1**2 + ea2**2, ed1**2 + ed2**2
        dmu = math.hypot(d_ra, d_dec)
        sigma = float(binary.sigma_delta_mu(d_ra, d_dec, var_ra, var_dec))
        orbit = float(binary.delta_mu_orbit(mass, plx, rho))
        escape = float(binary.delta_mu_escape(mass, plx, rho))
        group = settings.group_dispersion_kms / (binary.KM_S_PER_AU_YR * (1.0 / plx))
        strength, p_bound = _strength(float(binding.log_lr_bound_planar(dmu, math.sqrt((var_ra + var_dec) / 2),
                                                                         escape, group)))
        got = [result[name][k] for name in ("delta_pm", "delta_pm_uncertainty", "orbit_limit", "escape_limit",
                                            "strength", "p_bound", "statistic", "within_limit")]
        _assert_same(got, [dmu, sigma, orbit, escape, strength, p_bound, dmu / orbit,
                           dmu < orbit + settings.acceptance_sigma * sigma], k)
    assert {-1, 0, 1} <= set(result["outcome"].tolist())


def test_radial_velocity_kernel_keeps_the_scalar_arithmetic():
    # Reference: the rule's formulas as they were, one pair at a time in Python floats.
    settings = radial_velocity.Settings()
    rng = np.random.default_rng(4)
    n = 300
    v1 = rng.normal(0, 30, n)
    v2 = np.where(rng.random(n) < 0.5, v1 + rng.normal(0, 1, n) * 10 ** rng.uniform(-1, 0.7, n), rng.normal(0, 30, n))
    rows = np.array([v1, 10 ** rng.uniform(-1.5, 0.5, n), v2, 10 ** rng.uniform(-1.5, 0.5, n),
                     10 ** rng.uniform(-0.5, 2.3, n), 10 ** rng.uniform(1, 3, n), rng.uniform(0.2, 5, n)])
    result = radial_velocity.kernel(*rows, settings=settings)
    for k, (r1, e1, r2, e2, rho, dist, mass) in enumerate(rows.T.tolist()):
        diff = r1 - r2
        sigma = math.sqrt(e1**2 + e2**2 + settings.systematic_kms**2)
        s_au = rho * dist
        v_c, v_esc = float(binary.circular_speed_kms(mass, s_au)), float(binary.escape_speed_kms(mass, s_au))
        strength, p_bound = _strength(float(binding.log_lr_bound_line(diff, sigma, v_esc,
                                                                      settings.group_dispersion_kms)))
        got = [result[name][k] for name in ("delta_rv", "delta_rv_uncertainty", "projected_separation",
                                            "circular_speed", "escape_speed", "strength", "p_bound", "statistic")]
        _assert_same(got, [diff, sigma, s_au, v_c, v_esc, strength, p_bound, abs(diff) / sigma], k)
    assert {-1, 0, 1} <= set(result["outcome"].tolist())


@pytest.mark.skipif(sys.version_info[:2] != (3, 11), reason="mirrors CPython 3.11's math.hypot")
def test_python_hypot_is_math_hypot_to_the_last_bit():
    # Reference: CPython's math.hypot itself, on random, huge, tiny, subnormal and special values.
    rng = np.random.default_rng(5)
    x = np.concatenate([rng.normal(0, 10, 200_000), 10 ** rng.uniform(-320, 308, 20_000) * rng.choice([-1, 1], 20_000),
                        rng.uniform(-1, 1, 5_000) * 1e-310])
    y = np.concatenate([rng.normal(0, 10, 200_000), 10 ** rng.uniform(-320, 308, 20_000), rng.uniform(-1, 1, 5_000) * 1e-309])
    special = np.array([0.0, -0.0, np.inf, -np.inf, np.nan, 1.0, 5e-324, 1.7976931348623157e308, 3.0])
    sx, sy = np.meshgrid(special, special)
    x, y = np.concatenate([x, sx.ravel()]), np.concatenate([y, sy.ravel()])
    expected = [math.hypot(a, b) for a, b in zip(x.tolist(), y.tolist())]
    np.testing.assert_array_equal(binary.python_hypot(x, y), expected)


@pytest.mark.skipif(not POWER_IS_C_POW, reason="numpy's power is not the C library's pow on this CPU")
def test_python_square_is_python_float_power():
    # Reference: Python's float ** 2 (the C library's pow), which differs from x * x in the last bit at times.
    x = np.concatenate([np.random.default_rng(6).uniform(0, 3, 100_000), 10 ** np.linspace(-150, 150, 1001)])
    np.testing.assert_array_equal(proper_motion_orbit.python_square(x), [v**2 for v in x.tolist()])


# -- rows settled from bounds, and rows computed in blocks -------------------------------------------------------------

def _random_ratio_inputs(rng, n):
    d = 10 ** rng.uniform(-3, 2.5, n) * (rng.random(n) > 0.05)  # some exact zeros
    s, R, g = 10 ** rng.uniform(-2.5, 1, n), 10 ** rng.uniform(-2, 1.5, n), 10 ** rng.uniform(-1.5, 1, n)
    near = rng.random(n) < 0.2  # differences right at the escape speed
    d = np.where(near, R * (1 + rng.normal(0, 0.05, n)), d)
    return np.abs(d), s, R, g


def _quadrature_only(*columns):
    """A closed form that holds nowhere: every row takes the quadrature (and, with ``beyond``, the bounds)."""
    return np.full(columns[0].shape, np.nan), np.zeros(columns[0].shape, dtype=bool)


@pytest.mark.parametrize("form", ["planar", "line"])
def test_rows_settled_from_bounds_have_the_strength_of_the_full_quadrature(form):
    # Reference: the quadrature itself (checked against scipy in tests/astro/test_binding.py) on every row.
    # The closed forms now take almost every row; the bounds serve the rows left to the quadrature.
    rng = np.random.default_rng(7 if form == "planar" else 8)
    d, s, R, g = _random_ratio_inputs(rng, 2000)
    if form == "line":
        d = d * rng.choice([-1.0, 1.0], d.size)
    rows, side = getattr(binding, f"_{form}_rows"), getattr(binding, f"_{form}_side")
    full = binding._by_rows(_quadrature_only, rows, side, None, d, s, R, g)
    fast = binding._by_rows(_quadrature_only, rows, side, LN_LIMIT, d, s, R, g)
    settled = np.isinf(fast)
    assert settled.sum() > 500  # the bounds do settle most clipped rows
    np.testing.assert_array_equal(fast[~settled], full[~settled])
    np.testing.assert_array_equal(np.sign(fast[settled]), np.sign(full[settled]))
    assert np.all(np.abs(full[settled]) >= LN_LIMIT)
    strength = proper_motion_orbit.binding_strength
    np.testing.assert_array_equal(strength(fast)[0], strength(full)[0])


@pytest.mark.parametrize("form", ["planar", "line"])
def test_closed_forms_agree_with_the_quadrature_where_it_resolves_the_integrand(form):
    # Reference: the Gauss–Legendre quadrature of earlier versions (itself checked against scipy's dblquad
    # and quad in tests/astro/test_binding.py) on rows where its pieces resolve both integrands: the
    # measurement no sharper than a fiftieth of the escape speed and the group dispersion, and the
    # difference not many σ past the escape speed (where the quadrature's pieces miss the integrand's
    # scale near R; the closed forms are checked there against scipy in tests/astro/test_binding.py).
    rng = np.random.default_rng(11)
    d, s, R, g = _random_ratio_inputs(rng, 3000)
    keep = (s > R / 50) & (s > g / 50) & (np.abs(d - R) < 6 * s)
    d, s, R, g = d[keep], s[keep], R[keep], g[keep]
    assert d.size > 200
    with np.errstate(all="ignore"):
        closed, held = getattr(binding, f"_{form}_closed")(d, s, R, g)
    quad = getattr(binding, f"_{form}_rows")(d, s, R, g)
    # a planar probability that underflows (R many times the group dispersion) is left to the quadrature
    assert held.all() if form == "line" else held.mean() > 0.8
    # atol: the quadrature's own error on a few rows with a disc far smaller than σ (chndtr checked there against
    # scipy.integrate.quad in tests/astro/test_binding.py)
    np.testing.assert_allclose(closed[held], quad[held], rtol=1e-9, atol=1e-6)


@pytest.mark.parametrize("form", ["planar", "line"])
def test_a_row_does_not_depend_on_the_rows_computed_with_it(form):
    # Reference: the same function on each row alone (0-d inputs, as the scalar rules called it).
    d, s, R, g = _random_ratio_inputs(np.random.default_rng(9), 600)  # more than two blocks
    f = getattr(binding, f"log_lr_bound_{form}")
    alone = [float(f(float(a), float(b), float(c), float(e))) for a, b, c, e in zip(d, s, R, g)]
    np.testing.assert_array_equal(f(d, s, R, g), alone)
