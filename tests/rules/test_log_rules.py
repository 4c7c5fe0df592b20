"""Rules that read the observing log: relative motion, orbit consistency, orbit fit.

Logs are simulated with known truth: an optical pair moving in a straight line at its
relative proper motion, and a bound pair on a known orbit (ephemeris from dossier.astro.orbit,
itself checked against an independent two-body integration in tests/astro/test_orbit.py).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from dossier.astro import orbit as orbits
from dossier.engine import weigh_system
from dossier.schema.log import LogMeasure
from dossier.schema.models import System
from tests.rules import harness

ELEMENTS = dict(P=120.0, T=1975.0, e=0.35, a=0.8, i=55.0, node=40.0, omega=110.0)


def log_from_path(pair, times, x, y, sigma_theta, sigma_rho, rng):
    rho, theta = np.hypot(x, y), np.degrees(np.arctan2(y, x)) % 360
    out = []
    for t, r, th in zip(times, rho, theta):
        out.append(LogMeasure(pair=pair, epoch=f"J{t:.4f}", theta=float((th + rng.normal(0, sigma_theta)) % 360),
                              theta_error=sigma_theta, rho=float(r + rng.normal(0, sigma_rho)), rho_error=sigma_rho,
                              method="speckle"))
    return tuple(out)


def optical_log(seed=1):
    system = harness.simulate("optical", seed)
    result = weigh_system(system, harness.settings())
    a, b = result.facts.stars["A"], result.facts.stars["B"]
    pair = result.facts.pairs["AB"]
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(1900, 2025, 30))
    x0 = pair.rho_arcsec * math.cos(math.radians(pair.theta_deg))
    y0 = pair.rho_arcsec * math.sin(math.radians(pair.theta_deg))
    vx, vy = (b.motion.pmdec - a.motion.pmdec) / 1000, (b.motion.pmra - a.motion.pmra) / 1000
    return system, log_from_path("AB", t, x0 + vx * (t - 2016), y0 + vy * (t - 2016), 0.05, 0.01, rng)


def orbit_system(with_published: bool) -> System:
    data = harness.simulate("bound", 2).model_dump(exclude_none=True)
    data["components"]["Ba"] = {"physical": {"ref": harness.REF, "mass": [1.0, 0.05]}}
    data["components"]["Bb"] = {"physical": {"ref": harness.REF, "mass": [0.6, 0.05]}}
    data["pairs"].append({"id": "Ba-Bb", "members": ["Ba", "Bb"], "parent": "B"})
    if with_published:
        e = ELEMENTS
        data["orbits"] = [{"pair": "Ba-Bb", "kind": "visual", "ref": harness.REF, "period": [e["P"], 2.0],
                           "period_unit": "yr", "periastron_time": [e["T"], 0.5], "eccentricity": [e["e"], 0.01],
                           "semimajor_axis": [e["a"], 0.01], "inclination": [e["i"], 1.0], "node": [e["node"], 1.0],
                           "periastron_argument": [e["omega"], 2.0]}]
    return System.model_validate(data)


def orbit_log(seed=3, start=1950.0, end=2025.0, n=40):
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(start, end, n))
    x, y = orbits.ephemeris_xy(t, *ELEMENTS.values())
    return log_from_path("Ba-Bb", t, x, y, 0.3, 0.004, rng)


def assessment(result, pair, rule):
    return next(a for a in result.for_subject(pair) if a.rule == rule)


def test_an_optical_pair_moves_straight_at_its_relative_proper_motion():
    system, log = optical_log()
    result = weigh_system(system, harness.settings(), log)
    a = assessment(result, "AB", "relative-motion")
    assert a.outcome == "neutral" and a.strength == 0.0
    # the fitted rate equals the relative proper motion (the simulation's truth) within 3σ
    assert a.quantity("rate_vs_pm").value < 3
    assert a.quantity("p_curvature").value > 1e-3


def test_linear_rate_matches_numpy_polyfit_on_the_same_offsets():
    # numpy.polyfit with w = 1/σ (reference library) on the nightly means the rule fitted
    system, log = optical_log(4)
    result = weigh_system(system, harness.settings(), log)
    plog = result.facts.logs["AB"]
    slope_e = np.polyfit(plog.mt, plog.my, 1, w=1 / plog.msy)[0]
    slope_n = np.polyfit(plog.mt, plog.mx, 1, w=1 / plog.msx)[0]
    a = assessment(result, "AB", "relative-motion")
    assert a.quantity("rate_east").value == pytest.approx(1000 * slope_e, rel=1e-9)
    assert a.quantity("rate_north").value == pytest.approx(1000 * slope_n, rel=1e-9)


def test_an_orbital_arc_is_curved_and_counts_for_a_physical_pair():
    result = weigh_system(orbit_system(False), harness.settings(), orbit_log())
    a = assessment(result, "Ba-Bb", "relative-motion")
    assert a.outcome == "supports" and a.strength > 2
    assert result.verdicts["Ba-Bb"].p_physical > 0.99


def test_published_orbit_fits_a_log_drawn_from_it():
    result = weigh_system(orbit_system(True), harness.settings(), orbit_log())
    a = assessment(result, "Ba-Bb", "orbit-consistency")
    assert a.outcome == "supports"
    # O−C scatter equals the simulated noise (0.3° in θ, 0.004″ in ρ), within sampling error
    assert a.quantity("rms_theta").value == pytest.approx(0.3, rel=0.35)
    assert a.quantity("rms_rho").value == pytest.approx(0.004, rel=0.35)
    # dynamical mass a³/(ϖ³P²) (Kepler's third law), ϖ taken from the parent B
    plx = result.facts.stars["B"].parallax.mean
    expected = ELEMENTS["a"] ** 3 / ((plx / 1000) ** 3 * ELEMENTS["P"] ** 2)
    assert a.quantity("dynamical_mass").value == pytest.approx(expected, rel=1e-9)
    assert result.verdicts["Ba-Bb"].status == "bound"


def test_a_wrong_published_orbit_gets_no_credit():
    system = orbit_system(True)
    data = system.model_dump(exclude_none=True)
    data["orbits"][0]["node"] = [ELEMENTS["node"] + 90, 1.0]
    data["orbits"][0]["periastron_argument"] = [ELEMENTS["omega"] + 60, 2.0]
    result = weigh_system(System.model_validate(data), harness.settings(), orbit_log())
    a = assessment(result, "Ba-Bb", "orbit-consistency")
    assert a.strength == 0.0 and a.outcome == "neutral"


def test_a_right_orbit_with_underestimated_errors_keeps_its_credit_and_says_so():
    # the log scattered 3 times more than its stated errors: χ²/dof ≈ 9, which the rule states, and
    # the comparison with a straight line uses errors widened by the Birge ratio (Birge 1932, Phys.
    # Rev. 40, 207), so the orbit is still far better than a line
    rng = np.random.default_rng(5)
    t = np.sort(rng.uniform(1950.0, 2025.0, 40))
    x, y = orbits.ephemeris_xy(t, *ELEMENTS.values())
    noisy = log_from_path("Ba-Bb", t, x, y, 0.9, 0.012, rng)
    stated = tuple(m.model_copy(update={"theta_error": 0.3, "rho_error": 0.004}) for m in noisy)
    result = weigh_system(orbit_system(True), harness.settings(), stated)
    a = assessment(result, "Ba-Bb", "orbit-consistency")
    assert a.quantity("p_fit").value < 1e-3
    assert "more scatter than the measures' stated errors allow" in a.explanation
    assert a.outcome == "supports" and a.strength > 2


def test_orbit_fit_recovers_the_elements_when_the_arc_allows():
    result = weigh_system(orbit_system(False), harness.settings(), orbit_log(start=1900.0, end=2025.0, n=50))
    a = assessment(result, "Ba-Bb", "orbit-fit")
    assert a.outcome == "supports"
    for key in ("P", "e", "a", "i"):
        q = a.quantity(f"orbit_{key}")
        assert abs(q.value - ELEMENTS[key]) < 4 * q.uncertainty, (key, q)


def test_orbit_fit_refuses_a_short_arc_with_the_reason():
    result = weigh_system(orbit_system(False), harness.settings(), orbit_log(start=2010.0, end=2025.0, n=20))
    a = assessment(result, "Ba-Bb", "orbit-fit")
    # 15 yr of a 120-yr orbit: never an orbit found; either no curvature, a partial arc with the period's
    # interval, or an arc too short (orbit-fit version 2 judges the arc from the posterior)
    assert a.outcome in ("insufficient", "neutral") and a.strength in (None, 0.0)
    assert ("curvature" in a.explanation or "partial arc: period constrained only within" in a.explanation
            or "arc too short" in a.explanation)


def test_outliers_are_flagged_with_their_reason_and_kept():
    log = list(orbit_log())
    bad = log[10]
    log[10] = bad.model_copy(update={"theta": (bad.theta + 180) % 360})  # a quadrant slip
    result = weigh_system(orbit_system(True), harness.settings(), tuple(log))
    plog = result.facts.logs["Ba-Bb"]
    assert len(plog.measures) == len(log)
    assert plog.flagged.sum() == 1
    k = int(np.flatnonzero(plog.flagged)[0])
    assert plog.measures[k].theta == log[10].theta
    assert "from the published orbit" in plog.reasons[k]


def full_revolution_log(seed=11, n=40):
    """Noisy measures over exactly one period (48 yr) of an orbit of known elements."""
    el = dict(ELEMENTS, P=48.0, T=1990.0)
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(1975.0, 1975.0 + el["P"], n))
    x, y = orbits.ephemeris_xy(t, *el.values())
    return el, log_from_path("Ba-Bb", t, x, y, 0.3, 0.004, rng)


def test_a_full_revolution_is_curved_for_both_rules_and_never_too_short():
    # the issue: one whole revolution was called "arc too short" by orbit-fit and curved by relative-motion
    for seed in (11, 12):
        el, log = full_revolution_log(seed)
        result = weigh_system(orbit_system(False), harness.settings(), log)
        rm, of = assessment(result, "Ba-Bb", "relative-motion"), assessment(result, "Ba-Bb", "orbit-fit")
        assert "The path is curved" in rm.explanation
        assert "too short" not in of.explanation and "no significant curvature" not in of.explanation
        assert of.outcome == "supports", of.explanation
        # truth (the simulation's elements) inside a generous 4-half-interval band of the posterior
        for key in ("P", "e", "a"):
            q = of.quantity(f"orbit_{key}")
            assert abs(q.value - el[key]) < 4 * q.uncertainty + 1e-9, (key, q)


def test_one_curvature_threshold_read_by_both_rules():
    # raising [log] curvature_p to 1 - tiny makes any path "curved" for both; the setting is the only threshold
    system, log = optical_log()
    base = harness.settings()
    strict = base.model_copy(update={"log": base.log.model_copy(update={"curvature_p": 1e-300})})
    result = weigh_system(system, strict, log)
    a = assessment(result, "AB", "relative-motion")
    assert "No significant curvature" in a.explanation and a.strength == 0.0


def test_refit_published_changes_the_orbit_consistency_output():
    base = assessment(weigh_system(orbit_system(True), harness.settings(), orbit_log()), "Ba-Bb", "orbit-consistency")
    base_settings = harness.settings()
    settings = base_settings.model_copy(update={"rules": {"orbit-consistency": {"refit_published": True}}})
    refit = assessment(weigh_system(orbit_system(True), settings, orbit_log()), "Ba-Bb", "orbit-consistency")
    names = {q.name for q in refit.quantities}
    assert not any(q.name.startswith("refit_") for q in base.quantities)
    assert {"refit_delta_P", "refit_delta_e", "refit_delta_chi2"} <= names
    assert "Refitted from the log" in refit.explanation
    # the published orbit is the truth: the refit agrees within a few sigma in every element
    assert all(abs(q.value) < 4 for q in refit.quantities if q.name.startswith("refit_delta_") and q.unit == "σ")


def test_orbit_consistency_reports_chi2_p_value_and_bic():
    a = assessment(weigh_system(orbit_system(True), harness.settings(), orbit_log()), "Ba-Bb", "orbit-consistency")
    n = 2 * 40  # at most 40 nights of simulated measures
    # the simulated noise equals the stated errors, so χ² is typical for its dof (scipy.stats.chi2 reference)
    assert a.quantity("p_fit").value > 1e-3
    assert a.quantity("delta_bic").value < 0 and a.outcome == "supports"
    assert a.quantity("chi2_orbit").value < 2 * n
