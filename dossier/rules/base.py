"""What a rule is, and what it returns.

A rule weighs one line of evidence for one subject (a pair or a component)
and returns an :class:`Assessment`. Rules are pure: the evidence and the
settings come in, an assessment goes out; a rule never reads files.

Each assessment answers one *question*:

``association``
    Are the two stars physically associated (bound or co-moving) rather than
    an optical line-of-sight pair? ``strength`` is the log10 likelihood ratio
    (Bayes factor) physical : optical that this evidence contributes.
``binding``
    Given that they are associated, does their relative motion allow a bound
    orbit? ``probability`` is P(motion allows a bound orbit) and ``strength``
    its log10 odds.
``orbit``
    Periodic motion about a common centre (a spectroscopic orbit): evidence
    both that the pair is physical and that it is bound; ``strength`` counts
    for both questions.
``joint``
    The pair model (:mod:`dossier.astro.pairmodel`): all the astrometry of
    a pair weighed at once against three hypotheses; the verdict starts
    from it.
``context``
    Derived quantities that other rules and the reader use (distances,
    separations, periods); no strength.

Rules that grade companion claims set ``grade`` (one of :data:`GRADES`).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray
from pydantic import BaseModel, ConfigDict

Outcome = Literal["supports", "against", "neutral", "insufficient", "error"]
Question = Literal["association", "binding", "orbit", "joint", "context"]
SubjectKind = Literal["pair", "component"]

GRADES = ("confirmed", "probable", "candidate", "doubtful", "refuted")

OUTCOME_WORDS: dict[str, str] = {
    "supports": "supports a physical pair",
    "against": "argues against",
    "neutral": "neutral",
    "insufficient": "insufficient data",
    "error": "rule failed",
}

#: Outcome codes of the rules' vectorised kernels (int8 arrays), and back: ``OUTCOME_NAMES[code + 2]``.
OUTCOME_CODES: dict[str, int] = {"supports": 1, "neutral": 0, "against": -1, "insufficient": -2}
OUTCOME_NAMES: tuple[str, ...] = ("insufficient", "against", "neutral", "supports")


class RuleSettings(BaseModel):
    """Base of every rule's settings table in ``dossier.toml``."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    enabled: bool = True


@dataclass(frozen=True)
class Quantity:
    """A derived quantity, with how it was obtained.

    ``low``/``high`` carry an interval (for example 16th and 84th
    percentiles) when a single symmetric uncertainty would mislead.
    """

    name: str
    label: str
    value: float | None
    unit: str = ""
    uncertainty: float | None = None
    low: float | None = None
    high: float | None = None
    how: str = ""

    def to_dict(self) -> dict[str, Any]:
        return {
            "name": self.name,
            "label": self.label,
            "value": self.value,
            "uncertainty": self.uncertainty,
            "low": self.low,
            "high": self.high,
            "unit": self.unit,
            "how": self.how,
        }


@dataclass(frozen=True)
class Assessment:
    """One rule's judgement of one subject."""

    rule: str
    rule_version: int
    title: str
    subject: str
    subject_kind: SubjectKind
    question: Question
    outcome: Outcome
    explanation: str
    method: str
    strength: float | None = None
    probability: float | None = None
    statistic: Quantity | None = None
    quantities: tuple[Quantity, ...] = ()
    sources: tuple[str, ...] = ()
    grade: str | None = None
    reasons: tuple[str, ...] = ()

    def quantity(self, name: str) -> Quantity | None:
        return next((q for q in self.quantities if q.name == name), None)

    def to_dict(self) -> dict[str, Any]:
        return {
            "rule": self.rule,
            "rule_version": self.rule_version,
            "title": self.title,
            "subject": self.subject,
            "subject_kind": self.subject_kind,
            "question": self.question,
            "outcome": self.outcome,
            "strength": self.strength,
            "probability": self.probability,
            "statistic": self.statistic.to_dict() if self.statistic else None,
            "quantities": [q.to_dict() for q in self.quantities],
            "explanation": self.explanation,
            "method": self.method,
            "sources": list(self.sources),
            "grade": self.grade,
            "reasons": list(self.reasons),
        }


@dataclass(frozen=True)
class Rule:
    """The declaration of one rule module.

    Parameters
    ----------
    id
        Stable kebab-case id; never reused for a different method.
    title
        Readable name.
    version
        Bumped whenever the method or its defaults change.
    subject
        ``pair`` or ``component``.
    question
        What the assessment answers (see the module docstring).
    needs
        The evidence it needs, in words (shown in the docs and dossiers).
    citation
        Full citation of the published method.
    settings
        The pydantic model of its ``[rules.<id>]`` table.
    weigh
        ``weigh(facts, subject_id, settings) -> Assessment``.
    doc
        The rule's page: the module docstring.
    applies
        ``applies(facts, subject_id) -> bool``: the subjects the rule speaks
        about (default: all of its kind), e.g. only claimed companions.
    """

    id: str
    title: str
    version: int
    subject: SubjectKind
    question: Question
    needs: tuple[str, ...]
    citation: str
    settings: type[RuleSettings]
    weigh: Callable[..., Assessment]
    doc: str = ""
    applies: Callable[..., bool] | None = None

    def assessment(self, subject: str, outcome: Outcome, explanation: str, **kwargs: Any) -> Assessment:
        """Build an assessment of this rule (fills in the rule's identity)."""
        return Assessment(
            rule=self.id,
            rule_version=self.version,
            title=self.title,
            subject=subject,
            subject_kind=self.subject,
            question=self.question,
            outcome=outcome,
            explanation=explanation,
            method=self.citation,
            **kwargs,
        )

    def insufficient(self, subject: str, reason: str) -> Assessment:
        return self.assessment(subject, "insufficient", reason)


@dataclass(frozen=True)
class Contribution:
    """One term of a verdict's log10 odds, as the verdict used it.

    ``question`` is ``association`` (physical : chance), ``binding`` (bound : co-moving) or ``orbit``
    (bound : the rest); ``rules`` are the rules whose data the term weighs; ``alone`` is the line's own
    log10 likelihood ratio before the robust transform (independent lines only).
    """

    line: str
    question: str
    log10: float
    rules: tuple[str, ...] = ()
    alone: float | None = None

    def to_dict(self) -> dict[str, Any]:
        return {"line": self.line, "question": self.question, "log10_used": self.log10, "rules": list(self.rules),
                "log10_alone": self.alone}


@dataclass(frozen=True)
class Verdict:
    """A pair's status from all its assessments."""

    pair: str
    status: Literal["bound", "co-moving", "optical", "undetermined"]
    probability: float | None
    p_physical: float | None
    p_bound_given_physical: float | None
    log10_odds: float | None
    summary: str
    reasons_for: tuple[str, ...] = ()
    reasons_against: tuple[str, ...] = ()
    missing: tuple[str, ...] = field(default=())
    probability_of: str = "P(physical)"
    p_bound: float | None = None
    p_comoving: float | None = None
    p_chance: float | None = None
    log10_bound_odds: float | None = None
    contributions: tuple[Contribution, ...] = ()
    moved_most: str | None = None
    limited_by_model: bool = False

    def to_dict(self) -> dict[str, Any]:
        return {
            "pair": self.pair,
            "status": self.status,
            "probability": self.probability,
            "probability_of": self.probability_of,
            "limited_by_model": self.limited_by_model,
            "p_physical": self.p_physical,
            "p_bound_given_physical": self.p_bound_given_physical,
            "p_bound": self.p_bound,
            "p_comoving": self.p_comoving,
            "p_chance": self.p_chance,
            "log10_odds_physical": self.log10_odds,
            "log10_odds_bound": self.log10_bound_odds,
            "contributions": [c.to_dict() for c in self.contributions],
            "moved_most": self.moved_most,
            "summary": self.summary,
            "reasons_for": list(self.reasons_for),
            "reasons_against": list(self.reasons_against),
            "missing": list(self.missing),
        }


# ----------------------------------------------------------------------------
# Helpers of the rules' vectorised kernels


def columns(*arrays: ArrayLike) -> tuple[list[NDArray], NDArray]:
    """The arguments of a kernel as float64 arrays of one shape, and where none of them is NaN (missing)."""
    cols = [np.asarray(a, dtype=float) for a in arrays]
    shape = np.broadcast_shapes(*(c.shape for c in cols))
    cols = [np.broadcast_to(c, shape) for c in cols]
    complete = np.ones(shape, dtype=bool)
    for c in cols:
        complete &= ~np.isnan(c)
    return cols, complete


def unfilled(shape: tuple[int, ...], names: tuple[str, ...]) -> dict[str, NDArray]:
    """A kernel's result before any pair is weighed: every pair insufficient, every number NaN."""
    out: dict[str, NDArray] = {"outcome": np.full(shape, OUTCOME_CODES["insufficient"], dtype=np.int8)}
    out.update({name: np.full(shape, np.nan) for name in names})
    return out
