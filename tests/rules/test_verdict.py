"""Combining assessments into a verdict (the arithmetic of dossier/rules/verdict.py)."""

from __future__ import annotations

import math

import pytest

from dossier.rules.base import Assessment
from dossier.rules.verdict import combine
from dossier.schema.settings import VerdictSettings


def make(rule, question, outcome, strength):
    return Assessment(rule=rule, rule_version=1, title=rule, subject="AB", subject_kind="pair", question=question,
                      outcome=outcome, explanation=f"{rule} says {outcome}", method="test", strength=strength,
                      probability=None if question != "binding" else 1 / (1 + 10 ** -strength))


def test_log_odds_add_and_give_a_probability():
    # Bayes' theorem with independent evidence: posterior odds = product of likelihood ratios (textbook)
    v = combine("AB", [make("a", "association", "supports", 1.0), make("b", "association", "against", -0.5)],
                VerdictSettings())
    assert v.log10_odds == pytest.approx(0.5)
    assert v.p_physical == pytest.approx(10**0.5 / (1 + 10**0.5))
    assert v.status == "undetermined"


def test_each_line_of_evidence_is_capped():
    v = combine("AB", [make("a", "association", "supports", 50.0), make("b", "association", "against", -3.0),
                       make("c", "binding", "supports", 9.0)], VerdictSettings(max_strength=4.0))
    assert v.log10_odds == pytest.approx(1.0)
    assert v.p_bound_given_physical == pytest.approx(1 / (1 + 10**-4))


def test_statuses_and_their_probabilities():
    s = VerdictSettings()
    bound = combine("AB", [make("a", "association", "supports", 3.0), make("m", "binding", "supports", 2.0)], s)
    assert bound.status == "bound"
    assert bound.probability == pytest.approx((1 / (1 + 1e-3)) * (1 / (1 + 1e-2)))
    comoving = combine("AB", [make("a", "association", "supports", 3.0), make("m", "binding", "against", -2.0)], s)
    assert comoving.status == "co-moving"
    assert comoving.probability == pytest.approx((1 / (1 + 1e-3)) * (1 - 1 / (1 + 1e2)))
    optical = combine("AB", [make("a", "association", "against", -3.0)], s)
    assert optical.status == "optical" and optical.probability == pytest.approx(1 - 1 / (1 + 1e3))
    physical_only = combine("AB", [make("a", "association", "supports", 3.0)], s)
    assert physical_only.status == "undetermined"
    assert "no motion test" in physical_only.summary
    nothing = combine("AB", [make("a", "association", "insufficient", None)], s)
    assert nothing.status == "undetermined" and nothing.probability is None


def test_contradicting_evidence_is_never_hidden():
    v = combine("AB", [make("plx", "association", "supports", 4.0), make("pm", "association", "supports", 4.0),
                       make("chance", "association", "against", -1.0), make("m", "binding", "supports", 2.0)],
                VerdictSettings())
    assert v.status == "bound"
    assert v.reasons_against == ("chance: chance says against",)
    # relative to an optical verdict, a parallax disagreement is a reason for it
    o = combine("AB", [make("plx", "association", "against", -4.0), make("chance", "association", "supports", 1.0)],
                VerdictSettings())
    assert o.status == "optical"
    assert o.reasons_for == ("plx: plx says against",)
    assert o.reasons_against == ("chance: chance says supports",)


def test_prior_odds_setting_shifts_the_verdict():
    a = [make("a", "association", "supports", 1.5)]
    assert combine("AB", a, VerdictSettings()).p_physical == pytest.approx(1 / (1 + 10**-1.5))
    assert combine("AB", a, VerdictSettings(prior_log10_odds=-1.5)).p_physical == pytest.approx(0.5)
    assert math.isclose(combine("AB", a, VerdictSettings(prior_log10_odds=1.0)).log10_odds, 2.5)
