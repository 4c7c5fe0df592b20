"""Combine a pair's assessments into a status, a probability and the reasons.

Association
    Each ``association`` assessment contributes its strength, a log10
    likelihood ratio physical : optical, capped at ±``max_strength`` so that
    no single model of the field population can decide alone. Their sum,
    plus ``prior_log10_odds``, is the log10 posterior odds, treating the
    lines of evidence as independent (they use different measurements:
    parallaxes, motions, the density of the field).
    P(physical) = 1 / (1 + 10^−odds).

Orbit
    An ``orbit`` assessment (a spectroscopic orbit) counts in both sums
    below: periodic motion about a common centre shows a physical, bound pair.

Binding
    Each ``binding`` assessment gives the log10 likelihood ratio
    bound : unbound of a measured velocity difference (tangential, radial).
    Capped the same way and added to ``prior_bound_log10_odds``, they give
    P(bound | physical). Motion tests are necessary, not sufficient:
    projection can only hide motion and separation.

Status
    ``bound`` when P(physical) ≥ ``physical_threshold`` and
    P(bound | physical) ≥ ``bound_threshold``, with probability
    P(physical) × P(bound | physical). ``co-moving`` when P(physical) ≥
    ``physical_threshold`` and P(bound | physical) ≤ ``unbound_threshold``,
    with probability P(physical) × (1 − P(bound | physical)). ``optical``
    when P(physical) ≤ ``optical_threshold``, with probability
    1 − P(physical). ``undetermined`` otherwise (including when no motion
    test could be made), with P(physical) given.

Reasons
    Reasons are given relative to the status: for an optical pair, a
    parallax disagreement is a reason for; for a co-moving pair, motion
    beyond the escape speed is. Every assessment that argues against the
    status is listed among the reasons against: a verdict never hides a
    contradicting line of evidence.
"""

from __future__ import annotations

import numpy as np

from dossier.fmt import p_statement
from dossier.rules.base import Assessment, Verdict
from dossier.schema.settings import VerdictSettings

#: Status names by the codes :func:`combine_arrays` returns.
STATUSES = ("bound", "co-moving", "optical", "undetermined")


def _p_from_log_odds(x: np.ndarray) -> np.ndarray:
    with np.errstate(over="ignore"):
        return np.where(x > -300, 1.0 / (1.0 + np.power(10.0, -np.maximum(x, -300))), 0.0)


def combine_arrays(association: np.ndarray, binding: np.ndarray, settings: VerdictSettings) -> dict[str, np.ndarray]:
    """The verdicts of many pairs at once, from their strengths.

    Parameters
    ----------
    association, binding : ndarray, shape (n, k) and (n, m)
        log10 likelihood ratios physical : optical and bound : unbound of
        each pair's assessments (an ``orbit`` assessment in both), NaN where
        a rule gave none. Columns are summed in order.
    settings
        The project's verdict settings.

    Returns
    -------
    dict of arrays: ``status`` (index into :data:`STATUSES`), ``probability``,
    ``p_physical``, ``p_bound`` and ``log10_odds`` (NaN where undefined).
    """
    cap = settings.max_strength
    association, binding = np.atleast_2d(association), np.atleast_2d(binding)
    n = max(association.shape[0], binding.shape[0])
    has_assoc = np.isfinite(association).any(axis=1) if association.shape[1] else np.zeros(n, bool)
    has_binding = np.isfinite(binding).any(axis=1) if binding.shape[1] else np.zeros(n, bool)
    capped = lambda a: np.where(np.isnan(a), 0.0, np.clip(a, -cap, cap))  # noqa: E731
    log_odds = settings.prior_log10_odds + capped(association).sum(axis=1) if association.shape[1] \
        else np.full(n, settings.prior_log10_odds)
    bound_odds = settings.prior_bound_log10_odds + capped(binding).sum(axis=1) if binding.shape[1] \
        else np.full(n, settings.prior_bound_log10_odds)
    p_phys = np.where(has_assoc, _p_from_log_odds(log_odds), np.nan)
    p_bound = np.where(has_binding, _p_from_log_odds(bound_odds), np.nan)
    physical = has_assoc & (p_phys >= settings.physical_threshold)
    bound = physical & has_binding & (p_bound >= settings.bound_threshold)
    comoving = physical & has_binding & (p_bound <= settings.unbound_threshold)
    optical = has_assoc & ~bound & ~comoving & (p_phys <= settings.optical_threshold)
    status = np.select([bound, comoving, optical], [0, 1, 2], default=3).astype(np.int8)
    probability = np.select([bound, comoving, optical, has_assoc],
                            [p_phys * p_bound, p_phys * (1 - p_bound), 1 - p_phys, p_phys], default=np.nan)
    return {"status": status, "probability": probability, "p_physical": p_phys, "p_bound": p_bound,
            "log10_odds": np.where(has_assoc, log_odds, np.nan)}


def _direction(a: Assessment, status: str) -> int:
    """+1 if the assessment speaks for the status, −1 against, 0 neither."""
    sign = {"supports": 1, "against": -1}.get(a.outcome, 0)
    if a.question in ("association", "orbit"):
        return -sign if status == "optical" else sign
    if a.question == "binding":
        if status == "co-moving":
            return -sign
        if status == "optical":
            return 0
        return sign
    return 0


def strongest(assessments: list[Assessment], status: str) -> tuple[Assessment | None, Assessment | None]:
    """The assessment with the largest |log10 likelihood ratio| for the status, and the one against it."""
    def pick(direction: int) -> Assessment | None:
        found = [a for a in assessments if _direction(a, status) == direction and a.strength is not None]
        return max(found, key=lambda a: abs(a.strength), default=None)  # first of equals: registry order

    return pick(1), pick(-1)


def combine(pair: str, assessments: list[Assessment], settings: VerdictSettings) -> Verdict:
    assoc = [a for a in assessments if a.question in ("association", "orbit") and a.strength is not None]
    binding = [a for a in assessments if a.question in ("binding", "orbit") and a.strength is not None]
    numbers = combine_arrays(np.array([[a.strength for a in assoc]], float).reshape(1, -1),
                             np.array([[a.strength for a in binding]], float).reshape(1, -1), settings)
    log_odds = float(numbers["log10_odds"][0]) if assoc else settings.prior_log10_odds
    p_phys = float(numbers["p_physical"][0]) if assoc else None
    p_bound = float(numbers["p_bound"][0]) if binding else None
    status, prob = STATUSES[int(numbers["status"][0])], float(numbers["probability"][0])

    if p_phys is None:
        prob = None
        summary = "No line of evidence on association could be weighed."
    elif status == "bound":
        summary = (f"Physical ({p_statement('P', p_phys)}) and bound: its motion allows a bound orbit "
                   f"({p_statement('P(bound)', p_bound)}).")
    elif status == "co-moving":
        summary = (f"Physical ({p_statement('P', p_phys)}) but moving too fast for a bound orbit "
                   f"({p_statement('P(bound)', p_bound)}): a co-moving, unbound pair.")
    elif status == "optical":
        summary = f"An optical pair: {p_statement('P(physical)', p_phys)}."
    elif p_phys >= settings.physical_threshold:
        summary = (f"Physical ({p_statement('P', p_phys)}), but whether it is bound is open"
                   + (" (no motion test could be made)." if p_bound is None
                      else f" ({p_statement('P(bound)', p_bound)})."))
    else:
        summary = f"The evidence is not decisive: {p_statement('P(physical)', p_phys)}."

    def line(a: Assessment) -> str:
        return f"{a.title}: {a.explanation}"

    reasons_for = tuple(line(a) for a in assessments if _direction(a, status) > 0)
    reasons_against = tuple(line(a) for a in assessments if _direction(a, status) < 0)
    missing = tuple(line(a) for a in assessments if a.outcome in ("insufficient", "error"))
    return Verdict(
        pair=pair,
        status=status,  # type: ignore[arg-type]
        probability=prob,
        p_physical=p_phys,
        p_bound_given_physical=p_bound,
        log10_odds=log_odds,
        summary=summary,
        reasons_for=reasons_for,
        reasons_against=reasons_against,
        missing=missing,
    )
