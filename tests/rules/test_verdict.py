"""Combining the pair model and the independent lines into a verdict (dossier/rules/verdict.py)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from dossier.rules.base import Assessment, Quantity
from dossier.rules.verdict import combine, robust_log10
from dossier.schema.settings import VerdictSettings

LN10 = math.log(10)


def make(rule, question, outcome, strength, title=None):
    return Assessment(rule=rule, rule_version=1, title=title or rule, subject="AB", subject_kind="pair",
                      question=question, outcome=outcome, explanation=f"{rule} says {outcome}", method="test",
                      strength=strength)


def model(log_b, log_c, log_f, prior=0.0, parallax=0.0, binding_prior=0.0):
    """A pair-model assessment with the given natural-log evidences; the motion terms take up the rest."""
    total = (np.logaddexp(log_b, log_c) - log_f) / LN10
    values = {"log_bound": log_b, "log_comoving": log_c, "log_chance": log_f, "prior_log10": prior,
              "parallax_log10": parallax, "motion_log10": total - prior - parallax,
              "binding_prior_log10": binding_prior, "binding_motion_log10": (log_b - log_c) / LN10 - binding_prior}
    return Assessment(rule="pair-model", rule_version=1, title="Pair model", subject="AB", subject_kind="pair",
                      question="joint", outcome="supports", explanation="joint", method="test", strength=total,
                      quantities=tuple(Quantity(k, k, v) for k, v in values.items()))


def test_the_three_hypotheses_are_normalised_evidences():
    # Bayes' theorem (textbook): P(H_i | D) = Z_i / Σ Z_j for evidences Z_i that include the priors
    v = combine("AB", [model(math.log(6.0), math.log(3.0), math.log(1.0))], VerdictSettings())
    assert (v.p_bound, v.p_comoving, v.p_chance) == pytest.approx((0.6, 0.3, 0.1))
    assert v.p_physical == pytest.approx(0.9)
    assert v.p_bound_given_physical == pytest.approx(2 / 3)
    assert v.log10_odds == pytest.approx(math.log10(9.0))
    assert v.status == "undetermined" and v.probability_of == "P(physical)" and v.probability == pytest.approx(0.9)


def test_a_robust_line_never_moves_the_odds_beyond_one_over_epsilon():
    # R / (1 − ε + εR) for R ≥ 1 and (1 − ε) R + ε below (the mixture with an uninformative outlier), direct
    eps = 1e-3
    for x in (0.0, 0.3, 1.0, 2.5, 4.0):
        r = 10**x
        assert robust_log10(np.array(x), eps) == pytest.approx(math.log10(r / (1 - eps + eps * r)), abs=1e-12)
        assert robust_log10(np.array(-x), eps) == pytest.approx(math.log10((1 - eps) / r + eps), abs=1e-12)
    huge = robust_log10(np.array([2667.5, -1e6]), eps)
    assert huge == pytest.approx([3.0, -3.0], abs=1e-3)  # log10(1/ε)


def test_independent_lines_multiply_the_hypotheses_they_speak_of():
    # association multiplies bound and co-moving; binding multiplies bound; orbit multiplies bound (textbook
    # Bayes with independent data: the evidences multiply)
    eps = VerdictSettings().line_outlier_fraction
    base = model(0.0, 0.0, 0.0)
    a = robust_log10(np.array(1.0), eps) * LN10
    v = combine("AB", [base, make("relative-motion", "association", "supports", 1.0)], VerdictSettings())
    z = np.array([math.exp(a), math.exp(a), 1.0])
    assert (v.p_bound, v.p_comoving, v.p_chance) == pytest.approx(tuple(z / z.sum()))
    v = combine("AB", [base, make("orbit-fit", "binding", "supports", 1.0)], VerdictSettings())
    z = np.array([math.exp(a), 1.0, 1.0])
    assert (v.p_bound, v.p_comoving, v.p_chance) == pytest.approx(tuple(z / z.sum()))
    v = combine("AB", [base, make("spectroscopic-orbit", "orbit", "supports", 1.0)], VerdictSettings())
    assert (v.p_bound, v.p_comoving, v.p_chance) == pytest.approx(tuple(z / z.sum()))
    # every term shown is the one used
    used = {c.line: c.log10 for c in v.contributions}
    assert used["spectroscopic-orbit"] == pytest.approx(a / LN10)
    assert next(c for c in v.contributions if c.line == "spectroscopic-orbit").alone == 1.0


def test_lines_that_share_the_models_data_are_shown_but_never_multiplied():
    base = model(math.log(6.0), math.log(3.0), math.log(1.0))
    joint = [make("parallax-agreement", "association", "against", -22267.6),
             make("proper-motion-orbit", "binding", "supports", 99.0)]
    v = combine("AB", [base, *joint], VerdictSettings())
    assert (v.p_bound, v.p_comoving, v.p_chance) == pytest.approx((0.6, 0.3, 0.1))
    assert all(c.rules != ("parallax-agreement",) or c.alone is None for c in v.contributions)
    # the disagreeing diagnostic is listed against the verdict, marked as weighed inside the model
    assert any("parallax-agreement (diagnostic" in r for r in v.reasons_against)


def test_statuses_name_the_probability_they_show():
    s = VerdictSettings()
    bound = combine("AB", [model(math.log(1e4), 0.0, -10.0)], s)
    assert bound.status == "bound" and bound.probability_of == "P(bound)"
    assert bound.probability == pytest.approx(bound.p_bound)
    comoving = combine("AB", [model(0.0, math.log(1e4), -10.0)], s)
    assert comoving.status == "co-moving" and comoving.probability_of == "P(co-moving)"
    optical = combine("AB", [model(-8.0, -8.0, 0.0)], s)
    assert optical.status == "optical" and optical.probability_of == "P(chance alignment)"
    assert optical.probability == pytest.approx(optical.p_chance)
    assert "P(chance alignment)" in optical.summary


def test_probabilities_beyond_the_models_limit_are_shown_as_limits_not_tiny_numbers():
    v = combine("AB", [model(-2000.0, -2000.0, 0.0)], VerdictSettings(), model_limit=1e-6)
    assert v.status == "optical" and v.limited_by_model
    assert "> 0.999999 (limit of the model)" in v.summary
    assert "e-" not in v.summary and "10^" not in v.summary


def test_contradicting_terms_are_never_hidden_and_the_strongest_is_named():
    v = combine("AB", [model(math.log(1e5), math.log(1e3), 0.0, prior=-1.5, parallax=4.0)], VerdictSettings())
    assert v.status == "bound"
    assert any(r.startswith("Separation and field density (prior): \u22121.50") for r in v.reasons_against)
    assert v.moved_most == "Parallaxes"
    assert "Moved most by: parallaxes (+4.0" in v.summary


def test_without_the_model_the_other_lines_start_from_even_odds():
    eps = VerdictSettings().line_outlier_fraction
    insufficient = Assessment(rule="pair-model", rule_version=1, title="Pair model", subject="AB",
                              subject_kind="pair", question="joint", outcome="insufficient",
                              explanation="No separation.", method="test")
    v = combine("AB", [insufficient, make("spectroscopic-orbit", "orbit", "supports", 40.0)], VerdictSettings())
    r = 10 ** robust_log10(np.array(40.0), eps)
    assert v.p_bound == pytest.approx(r / (r + 2))
    assert "could not be applied" in v.summary
    nothing = combine("AB", [insufficient], VerdictSettings())
    assert nothing.status == "undetermined" and nothing.probability is None


def test_a_resolved_inner_pair_without_its_published_orbit_is_judged_by_its_data(demo_copy):
    # Reported: with its published orbit removed, the demo's Ba-Bb read "undetermined" beside
    # a probability of 0.99999999. Its log, parallaxes and motions still speak: the status must
    # follow the probability it shows (the thresholds of VerdictSettings).
    from dossier.engine import weigh_project
    from dossier.schema.loader import load_project

    evidence = demo_copy / "systems" / "heron-1" / "evidence.yaml"
    text = evidence.read_text(encoding="utf-8")
    start = text.index("  - pair: Ba-Bb\n")
    end = text.index("\nneighbours:")
    evidence.write_text(text[:start] + text[end:], encoding="utf-8")
    project = load_project(demo_copy)
    assert not [o for o in project.systems["heron-1"].orbits if o.pair == "Ba-Bb"]
    verdict = weigh_project(project)["heron-1"].verdicts["Ba-Bb"]
    settings = VerdictSettings()
    assert verdict.status == "bound"
    assert verdict.p_bound >= settings.bound_threshold


def test_a_context_line_against_the_description_is_listed_but_not_multiplied():
    # e.g. a hierarchy the Mardling & Aarseth (2001) criterion finds unstable: it questions the
    # description, not the odds, and must still be shown among the reasons against
    base = model(math.log(6.0), math.log(3.0), math.log(1.0))
    v = combine("AB", [base, make("triple-stability", "context", "against", None)], VerdictSettings())
    assert (v.p_bound, v.p_comoving, v.p_chance) == pytest.approx((0.6, 0.3, 0.1))  # the model's own normalised evidences
    assert any(r.startswith("triple-stability (context, not in the odds)") for r in v.reasons_against)
