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
    assert a.outcome == "insufficient"
    assert "curvature" in a.explanation or "% of the fitted period" in a.explanation or "converge" in a.explanation


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
