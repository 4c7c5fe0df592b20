"""Every rule and the verdict on simulated pairs of known truth (tests/rules/harness.py)."""

from __future__ import annotations

import pytest

from dossier.engine import weigh_system
from tests.rules import harness

SEEDS = range(12)


@pytest.mark.parametrize("seed", SEEDS)
def test_bound_pairs_are_called_bound(seed):
    result = weigh_system(harness.simulate("bound", seed), harness.settings())
    by_rule = {a.rule: a for a in result.for_subject("AB")}
    assert by_rule["parallax-agreement"].outcome == "supports"
    assert by_rule["common-motion"].outcome == "supports"
    assert by_rule["proper-motion-orbit"].outcome in ("supports", "neutral")
    assert result.verdicts["AB"].status == "bound"


@pytest.mark.parametrize("seed", SEEDS)
def test_optical_pairs_are_called_optical(seed):
    result = weigh_system(harness.simulate("optical", seed), harness.settings())
    by_rule = {a.rule: a for a in result.for_subject("AB")}
    assert by_rule["parallax-agreement"].outcome == "against"
    assert result.verdicts["AB"].status == "optical"
    # the verdict lists the parallax disagreement among its reasons, with the value it used
    assert any(r.startswith("Parallaxes: \u2212") for r in result.verdicts["AB"].reasons_for)


def test_comoving_pairs_beyond_the_tidal_limit_are_called_comoving():
    # Projection can hide most of a velocity difference (a small difference on the sky is what a bound
    # pair shows too): such a pair may stay undetermined, never bound or optical.
    called = []
    for seed in range(12):
        result = weigh_system(harness.simulate("co-moving", seed), harness.settings())
        v = result.verdicts["AB"]
        assert v.status in ("co-moving", "undetermined"), (seed, v.summary)
        assert v.p_physical > 0.99, (seed, v.summary)
        called.append(v.status == "co-moving")
    assert sum(called) >= 10


def test_missing_radial_velocities_leave_that_rule_insufficient_not_failing():
    result = weigh_system(harness.simulate("bound", 3, with_rv=False), harness.settings())
    rv = next(a for a in result.for_subject("AB") if a.rule == "radial-velocity-agreement")
    assert rv.outcome == "insufficient"
    assert "radial velocity of A" in rv.explanation
    assert result.verdicts["AB"].status == "bound"
    assert any("Radial-velocity agreement" in m for m in result.verdicts["AB"].missing)
