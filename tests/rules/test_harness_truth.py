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
    # the verdict lists the parallax disagreement among its reasons
    assert any("Parallax agreement" in r for r in result.verdicts["AB"].reasons_for)


def test_comoving_pairs_are_called_comoving_unless_projection_hides_their_motion():
    # Projection can hide a velocity difference that lies along the line of sight: then the
    # sky-plane motion is honestly compatible with a bound orbit. Demand the right call where the
    # sky-plane difference exceeds escape, and a physical call (never optical) everywhere.
    called = []
    for seed in range(24):
        result = weigh_system(harness.simulate("co-moving", seed), harness.settings())
        pm = next(a for a in result.for_subject("AB") if a.rule == "proper-motion-orbit")
        status = result.verdicts["AB"].status
        assert status != "optical", seed
        dmu, escape = pm.quantity("delta_pm"), pm.quantity("escape_limit")
        if dmu.value - 3 * dmu.uncertainty > escape.value:
            assert status == "co-moving", seed
        called.append(status == "co-moving")
    assert sum(called) >= 0.7 * len(called)


def test_missing_radial_velocities_leave_that_rule_insufficient_not_failing():
    result = weigh_system(harness.simulate("bound", 3, with_rv=False), harness.settings())
    rv = next(a for a in result.for_subject("AB") if a.rule == "radial-velocity-agreement")
    assert rv.outcome == "insufficient"
    assert "radial velocity of A" in rv.explanation
    assert result.verdicts["AB"].status == "bound"
    assert any("Radial-velocity agreement" in m for m in result.verdicts["AB"].missing)
