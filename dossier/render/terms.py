"""How each assessment entered its pair's verdict, so that every output shows the number the verdict used.

The verdict (:mod:`dossier.rules.verdict`) weighs the data of some rules
inside the joint pair model (``JOINT_RULES``): their own strengths are
standalone diagnostics, never multiplied in, and can be far beyond anything
the verdict used (a parallax disagreement of −22267 in log10). The other
lines of evidence are multiplied in through a robust mixture, so the value
used differs from the line's own when the line is strong. Pages, the
terminal, the JSON and the diffs all ask :func:`assessment_use` what to show
beside an assessment, and name every probability by :func:`probability_label`.
"""

from __future__ import annotations

from dataclasses import dataclass

from dossier.fmt import fmt_log10, fmt_probability

#: Which odds a term of each question moves.
ODDS = {"association": "physical : chance alignment", "binding": "bound : co-moving", "orbit": "bound : the rest"}

#: What a status' probability is the probability of (as :data:`dossier.rules.verdict.PROBABILITY_OF`; repeated
#: here so that a release's stored state, which may predate the label, is read without weighing anything).
STATUS_PROBABILITY = {"bound": "P(bound)", "co-moving": "P(co-moving)", "optical": "P(chance alignment)",
                      "undetermined": "P(physical)"}

#: The value of the ``in_verdict`` key of an assessment in ``weigh --json``, by :attr:`Use.role`.
IN_VERDICT = {"model": "pair-model", "diagnostic": "diagnostic", "term": "term"}


@dataclass(frozen=True)
class Use:
    """What an assessment's number is to its pair's verdict.

    ``role``: ``model`` (the pair model itself: ``log10`` is its own log10 odds physical : chance alignment),
    ``diagnostic`` (the pair model weighs this rule's data; its own strength, ``alone``, is not used),
    ``term`` (an independent line: ``log10`` as the verdict used it, ``alone`` the line's own), ``standalone``
    (a strength no verdict uses: a component's, or a line of context) or ``none`` (no strength).
    """

    role: str
    log10: float | None
    alone: float | None = None

    @property
    def differs(self) -> bool:
        """Whether the line's own value reads differently from the value used (a term only)."""
        return self.role == "term" and self.alone is not None and fmt_log10(self.alone) != fmt_log10(self.log10)

    @property
    def in_verdict(self) -> str | None:
        return IN_VERDICT.get(self.role)


def assessment_use(assessment, verdict) -> Use:
    """How ``assessment`` entered ``verdict`` (its pair's :class:`dossier.rules.base.Verdict`, or None)."""
    from dossier.rules.verdict import JOINT_RULES, MODEL_RULE

    a = assessment
    if a.subject_kind == "pair" and a.rule == MODEL_RULE:
        return Use("model", a.strength)
    if a.subject_kind == "pair" and a.rule in JOINT_RULES:
        return Use("diagnostic", None, a.strength)
    if verdict is not None and a.subject_kind == "pair":
        for c in verdict.contributions:
            if c.alone is not None and tuple(c.rules) == (a.rule,):
                return Use("term", c.log10, c.alone)
    return Use("none" if a.strength is None else "standalone", a.strength)


def uses(result) -> dict[tuple[str, str, str], Use]:
    """:func:`assessment_use` of every assessment of a weighed system, by (rule, subject kind, subject)."""
    return {(a.rule, a.subject_kind, a.subject): assessment_use(
        a, result.verdicts.get(a.subject) if a.subject_kind == "pair" else None) for a in result.assessments}


def probability_label(status: str, stored: str | None = None) -> str:
    """What the probability of a verdict of ``status`` is the probability of."""
    return stored or STATUS_PROBABILITY.get(status, "P(status)")


def labelled(p: float | None, label: str, limit: float | None = None) -> str:
    """'P(chance alignment) > 0.999999 (limit of the model)', 'P(bound) = 0.9980', 'P(physical): not computed'."""
    text = fmt_probability(p, limit)
    if text == "—":
        return f"{label}: not computed"
    return f"{label} {text}" if text[0] in "<>" else f"{label} = {text}"
