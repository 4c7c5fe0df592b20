"""The spectroscopic-orbit rule on invented single-lined binaries (truth known by construction)."""

from __future__ import annotations

import numpy as np

from dossier.astro.spectro import rv_model
from dossier.rules import spectroscopic_orbit
from dossier.rules.facts import SystemFacts
from dossier.rules.registry import BY_ID, rule_settings
from dossier.schema.models import System
from tests.rules.harness import REF, settings


def _system(t_jd, v, sigma, stage="main-sequence", instrument=None) -> System:
    series = [{"epoch": f"JD{t:.5f}", "velocity": [round(float(x), 4), sigma, {"ref": REF}],
               **({"instrument": instrument[k]} if instrument is not None else {})}
              for k, (t, x) in enumerate(zip(t_jd, v))]
    return System.model_validate({
        "id": "sim-sb1", "title": "simulated single-lined binary", "position": {"ra": 10.0, "dec": 20.0},
        "components": {
            "Aa": {"radial_velocity_series": series, "physical": {"ref": REF, "mass": [1.2, 0.1], "stage": stage}},
            "Ab": {"physical": {"ref": REF, "mass": [0.5, 0.1]}},
        },
        "pairs": [{"id": "Aa-Ab", "members": ["Aa", "Ab"]}],
    })


def _weigh(system: System):
    s = settings()
    facts = SystemFacts(system, s)
    return facts, spectroscopic_orbit.weigh(facts, "Aa-Ab", rule_settings(s.rules, BY_ID["spectroscopic-orbit"]))


def test_found_orbit_supports_with_intervals():
    # Invented truth: P = 12.3 d, K = 25 km/s, e = 0.35, 30 velocities of 0.5 km/s over 200 d.
    rng = np.random.default_rng(11)
    t = np.sort(rng.uniform(2455000.0, 2455200.0, 30))
    v = rv_model(t, 12.3, 25.0, 0.35, 110.0, 2455003.1, -8.0) + rng.normal(0, 0.5, 30)
    facts, a = _weigh(_system(t, v, 0.5))
    assert spectroscopic_orbit.RULE.version == 2
    assert a.outcome == "supports" and a.strength > 20
    p = a.quantity("orbit_P")
    assert p.low < p.value < p.high and abs(p.value - 12.3) < 3 * p.uncertainty + 1e-6
    assert a.quantity("m2_min").value > 0
    # the systemic velocity other rules use is the posterior γ
    gamma = facts.systemic_velocity("Aa")
    assert abs(gamma.value - a.quantity("orbit_gamma").value) < 1e-12


def test_wrongly_sampled_short_period_is_never_a_wrong_found_period():
    # The reported case: P = 5.3 d, K = 30 km/s, errors 0.2 km/s, about monthly for two years.
    rng = np.random.default_rng(0)
    t = 2458000.0 + np.sort(30.0 * np.arange(25) + rng.uniform(-5, 5, 25)) + rng.uniform(0.6, 0.9, 25)
    v = rv_model(t, 5.3, 30.0, 0.1, 40.0, 2458001.3, 12.0) + rng.normal(0.0, 0.2, 25)
    facts, a = _weigh(_system(t, v, 0.2))
    orbit = facts.rv_orbits["Aa-Ab"]
    if orbit.detected:
        assert abs(a.quantity("orbit_P").value / 5.3 - 1) < 0.01
    else:
        assert a.outcome == "neutral" and "not determined" in a.explanation


def test_variable_without_a_period_is_neutral_with_candidates():
    # Noise far above the errors and no orbit: variable, but no period passes the gates.
    rng = np.random.default_rng(3)
    t = np.sort(rng.uniform(2455000.0, 2455700.0, 20))
    v = rng.normal(0, 3.0, 20)
    facts, a = _weigh(_system(t, v, 0.2))
    assert facts.rv_orbits["Aa-Ab"].status == "variable, period not determined"
    assert a.outcome == "neutral" and a.strength == 0.0
    assert "candidate periods" in a.explanation and a.quantity("candidate_1") is not None
    assert facts.systemic_velocity("Aa") is None
