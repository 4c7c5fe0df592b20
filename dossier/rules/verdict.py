"""Combine a pair's evidence into a status, its probability and the reasons.

The pair model
    The parallaxes, proper motions, radial velocities, masses and the
    density of field stars are weighed together in one joint likelihood of
    three hypotheses, bound, co-moving (unbound) and chance alignment
    (``pair-model``, :mod:`dossier.astro.pairmodel`). The rules that look at
    the same numbers one at a time (parallax agreement, common motion,
    chance alignment, proper motion and radial velocity against a bound
    orbit) are shown as diagnostics beside it; their own ratios are never
    multiplied in, because they share data.

Independent lines
    Evidence from other data multiplies the joint model's odds: the
    observing log (relative motion, published and fitted orbits), ages
    (co-evality) and a spectroscopic orbit. Each such line may be wrong in
    a way its own error model misses (a misidentified star, an orbit fitted
    to noise): with probability ε (``line_outlier_fraction``) it carries no
    information. Its likelihood ratio R then becomes R / (1 − ε + εR) when
    R ≥ 1 and (1 − ε) R + ε when R < 1, so that no single line moves the
    odds by more than 1/ε. The value used is the one shown.

    ``association`` lines multiply bound and co-moving against chance;
    ``binding`` lines multiply bound against co-moving; ``orbit`` lines (a
    spectroscopic orbit: periodic motion about a common centre) multiply
    bound against both.

Probabilities
    P(bound), P(co-moving) and P(chance) are the normalised evidences;
    P(physical) = P(bound) + P(co-moving) and P(bound | physical) =
    P(bound) / P(physical). Nearer 0 or 1 than ``model_limit`` (10⁻⁶ by
    default), a probability is shown as limited by the model: the model's
    own assumptions (its priors, its outlier fraction) are not known that
    well.

Status
    ``bound`` when P(physical) ≥ ``physical_threshold`` and
    P(bound | physical) ≥ ``bound_threshold``, with probability P(bound);
    ``co-moving`` when P(physical) ≥ ``physical_threshold`` and
    P(bound | physical) ≤ ``unbound_threshold``, with probability
    P(co-moving); ``optical`` when P(physical) ≤ ``optical_threshold``,
    with probability P(chance); ``undetermined`` otherwise, with
    P(physical) given. Every probability is named by what it is the
    probability of.

Reasons
    Each term of the log10 odds is shown as used: the separation prior, the
    parallaxes and the motions of the joint model, and each independent
    line. The verdict names the term that moved it most towards its status,
    and lists every term and every diagnostic that argues against it: a
    verdict never hides a contradicting line of evidence.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from dossier.fmt import fmt_signed, p_statement
from dossier.rules.base import Assessment, Contribution, Verdict
from dossier.schema.settings import VerdictSettings

#: Status names by the codes :func:`combine_arrays` returns.
STATUSES = ("bound", "co-moving", "optical", "undetermined")
#: What each status' probability is the probability of.
PROBABILITY_OF = {"bound": "P(bound)", "co-moving": "P(co-moving)", "optical": "P(chance alignment)",
                  "undetermined": "P(physical)"}
#: Rules whose data the joint pair model weighs: shown as diagnostics, never multiplied in.
JOINT_RULES = ("parallax-agreement", "common-motion", "chance-alignment", "proper-motion-orbit",
               "radial-velocity-agreement")
MODEL_RULE = "pair-model"
LN10 = math.log(10.0)


def robust_log10(strength: np.ndarray, eps: float) -> np.ndarray:
    """log10 of a line's likelihood ratio as used: with probability ε the line carries no information.

    R / (1 − ε + εR) for R ≥ 1, (1 − ε) R + ε for R < 1 (continuous at R = 1, and the inverse for 1/R),
    computed in logs so that no R overflows.
    """
    x = np.asarray(strength, float) * LN10
    a = abs(x)
    used = a - np.logaddexp(math.log1p(-eps), math.log(eps) + a)
    return np.sign(x) * used / LN10


@dataclass(frozen=True)
class Model:
    """What the joint pair model gives the verdict (natural-log evidences and the log10 terms)."""

    log_bound: np.ndarray
    log_comoving: np.ndarray
    log_chance: np.ndarray
    terms: dict[str, np.ndarray]  # prior_log10, parallax_log10, motion_log10, binding_prior_log10, ...


def combine_arrays(model: Model, association: np.ndarray, binding: np.ndarray, orbit: np.ndarray,
                   settings: VerdictSettings) -> dict[str, np.ndarray]:
    """The verdicts of many pairs at once.

    Parameters
    ----------
    model
        The pair model's evidences, shape (n,) each; NaN where the model could not be applied.
    association, binding, orbit : ndarray, shape (n, k)
        log10 likelihood ratios of the independent lines (NaN where a rule gave none), before the
        robust transform.
    settings
        The project's verdict settings.

    Returns
    -------
    dict of arrays: ``status`` (index into :data:`STATUSES`), ``probability`` (of the status),
    ``p_bound``, ``p_comoving``, ``p_chance``, ``p_physical``, ``p_bound_given_physical``,
    ``log10_odds`` (physical : chance, as used), ``log10_bound_odds`` (bound : co-moving), and the
    used log10 value of every independent line (``association_used``, ``binding_used``,
    ``orbit_used``, same shapes as the inputs, 0 where missing).
    """
    eps = settings.line_outlier_fraction
    used = {}
    for name, lines in (("association", association), ("binding", binding), ("orbit", orbit)):
        lines = np.atleast_2d(np.asarray(lines, float))
        used[name] = np.where(np.isnan(lines), 0.0, robust_log10(np.nan_to_num(lines), eps))
    add_a = used["association"].sum(axis=1) * LN10
    add_b = used["binding"].sum(axis=1) * LN10
    add_o = used["orbit"].sum(axis=1) * LN10
    lb = model.log_bound + add_a + add_b + add_o
    lc = model.log_comoving + add_a
    lf = np.asarray(model.log_chance, float)
    has = np.isfinite(lf) & (np.isfinite(lb) | np.isfinite(lc))
    logs = np.stack([lb, lc, lf])
    top = np.max(np.where(np.isfinite(logs), logs, -np.inf), axis=0)
    top = np.where(np.isfinite(top), top, 0.0)
    with np.errstate(invalid="ignore", over="ignore"):
        w = np.exp(logs - top)
        p = w / w.sum(axis=0)
        log_phys = np.logaddexp(lb, lc)
        odds = (log_phys - lf) / LN10
        bound_odds = (lb - lc) / LN10
        p_bg = 1.0 / (1.0 + np.exp(np.clip(lc - lb, -700, 700)))
    p_b, p_c, p_f = (np.where(has, x, np.nan) for x in p)
    p_phys = np.where(has, p_b + p_c, np.nan)
    p_bg = np.where(has, p_bg, np.nan)
    physical = has & (p_phys >= settings.physical_threshold)
    bound = physical & (p_bg >= settings.bound_threshold)
    comoving = physical & (p_bg <= settings.unbound_threshold)
    optical = has & (p_phys <= settings.optical_threshold)
    status = np.select([bound, comoving, optical], [0, 1, 2], default=3).astype(np.int8)
    probability = np.select([bound, comoving, optical, has], [p_b, p_c, p_f, p_phys], default=np.nan)
    return {"status": status, "probability": probability, "p_bound": p_b, "p_comoving": p_c, "p_chance": p_f,
            "p_physical": p_phys, "p_bound_given_physical": p_bg,
            "log10_odds": np.where(has, odds, np.nan), "log10_bound_odds": np.where(has, bound_odds, np.nan),
            "association_used": used["association"], "binding_used": used["binding"], "orbit_used": used["orbit"]}


# ----------------------------------------------------------------------------
# One pair, with its reasons

#: The joint model's terms: (key, line, question, rules whose data it weighs).
MODEL_TERMS = (
    ("prior_log10", "Separation and field density (prior)", "association", ("chance-alignment",)),
    ("parallax_log10", "Parallaxes", "association", ("parallax-agreement",)),
    ("motion_log10", "Proper motions and radial velocities", "association", ("common-motion",)),
    ("binding_prior_log10", "Separation (bound against co-moving prior)", "binding", ()),
    ("binding_motion_log10", "Velocity difference against a bound orbit", "binding",
     ("proper-motion-orbit", "radial-velocity-agreement")),
)


def _direction(question: str, sign: float, status: str) -> int:
    """+1 if a term of this sign speaks for the status, −1 against, 0 neither."""
    s = 1 if sign > 0 else -1 if sign < 0 else 0
    if question in ("association", "orbit"):
        if status == "optical":
            return -s
        if question == "association" or status == "undetermined":
            return s
        return s if status == "bound" else -s
    if question == "binding":
        return {"bound": s, "co-moving": -s}.get(status, 0)
    return 0


def _assessment_direction(a: Assessment, status: str) -> int:
    return _direction(a.question, {"supports": 1, "against": -1}.get(a.outcome, 0), status)


def strongest(contributions: tuple[Contribution, ...], status: str) -> tuple[Contribution | None, Contribution | None]:
    """The term that moved the verdict most towards its status, and the one most against it."""
    def pick(direction: int) -> Contribution | None:
        found = [c for c in contributions if _direction(c.question, c.log10, status) == direction and c.log10 != 0]
        return max(found, key=lambda c: abs(c.log10), default=None)

    return pick(1), pick(-1)


def strongest_arrays(terms: dict[str, np.ndarray], status: np.ndarray) -> np.ndarray:
    """For many pairs (no independent lines): the title of the model term that moved each verdict most
    towards its status (status codes of :data:`STATUSES`), or None."""
    n = len(status)
    best = np.full(n, None, dtype=object)
    size = np.zeros(n)
    for key, title, question, _ in MODEL_TERMS:
        x = np.nan_to_num(np.asarray(terms[key], float))
        direction = np.zeros(n)
        for code, name in enumerate(STATUSES):
            here = status == code
            direction[here] = np.sign(x[here]) * _direction(question, 1.0, name)
        better = (direction > 0) & (np.abs(x) > size)
        best[better] = title
        size[better] = np.abs(x[better])
    return best


def _model_numbers(a: Assessment | None) -> Model | None:
    if a is None or a.outcome in ("insufficient", "error"):
        return None
    q = {x.name: x.value for x in a.quantities}
    terms = {k: np.array([q[k]], float) for k, *_ in MODEL_TERMS}
    return Model(np.array([q["log_bound"]]), np.array([q["log_comoving"]]), np.array([q["log_chance"]]), terms)


def combine(pair: str, assessments: list[Assessment], settings: VerdictSettings, model_limit: float = 1e-6) -> Verdict:
    model_a = next((a for a in assessments if a.rule == MODEL_RULE), None)
    model = _model_numbers(model_a)
    independent = [a for a in assessments if a.rule not in JOINT_RULES and a.rule != MODEL_RULE
                   and a.question in ("association", "binding", "orbit") and a.strength is not None]
    by_q = {q: [a for a in independent if a.question == q] for q in ("association", "binding", "orbit")}
    reasons_missing = tuple(f"{a.title}: {a.explanation}" for a in assessments if a.outcome in ("insufficient", "error"))
    note = ""
    if model is None:
        why = model_a.explanation if model_a is not None else "The pair model is switched off."
        if not any(by_q.values()):
            return Verdict(pair=pair, status="undetermined", probability=None, p_physical=None,
                           p_bound_given_physical=None, log10_odds=None,
                           summary=f"The pair model could not be applied ({why.rstrip('.')}), and no other line of "
                                   "evidence weighs on association.",
                           reasons_against=tuple(f"{a.title}: {a.explanation}" for a in assessments
                                                 if a.outcome == "against" and a.question != "context"),
                           missing=reasons_missing, probability_of=PROBABILITY_OF["undetermined"])
        # the independent lines alone, from even prior odds among the three hypotheses
        zero = np.zeros(1)
        model = Model(zero, zero.copy(), zero.copy(), {k: zero.copy() for k, *_ in MODEL_TERMS})
        note = (f" The pair model could not be applied ({why.rstrip('.')}): this rests on the other lines alone, "
                "from even prior odds of bound, co-moving and chance alignment.")
    arrays = {q: np.array([[a.strength for a in by_q[q]]], float).reshape(1, -1) for q in by_q}
    n = combine_arrays(model, arrays["association"], arrays["binding"], arrays["orbit"], settings)
    status = STATUSES[int(n["status"][0])]
    prob = float(n["probability"][0])
    p_phys, p_bg = float(n["p_physical"][0]), float(n["p_bound_given_physical"][0])
    contributions = [Contribution(line=title, question=question, log10=float(model.terms[key][0]), rules=rules)
                     for key, title, question, rules in MODEL_TERMS if not note]
    for q in ("association", "binding", "orbit"):
        for a, used in zip(by_q[q], n[f"{q}_used"][0]):
            contributions.append(Contribution(line=a.title, question=q, log10=float(used), rules=(a.rule,),
                                              alone=float(a.strength)))
    contributions_t = tuple(contributions)
    top, against = strongest(contributions_t, status)

    def p(label: str, value: float) -> str:
        return p_statement(label, value, model_limit)

    if status == "bound":
        summary = (f"Bound: {p('P(bound)', prob)} ({p('P(physical)', p_phys)}, "
                   f"{p('P(bound | physical)', p_bg)}).")
    elif status == "co-moving":
        summary = (f"Co-moving but not bound: {p('P(co-moving)', prob)} ({p('P(physical)', p_phys)}, "
                   f"{p('P(bound | physical)', p_bg)}).")
    elif status == "optical":
        summary = f"An optical pair (chance alignment): {p('P(chance alignment)', prob)}."
    elif p_phys >= settings.physical_threshold:
        summary = (f"Physical ({p('P(physical)', p_phys)}), but whether it is bound is open: "
                   f"{p('P(bound | physical)', p_bg)}.")
    else:
        summary = f"Undetermined: {p('P(physical)', p_phys)}, the evidence is split."
    summary += note
    if top is not None:
        summary += f" Moved most by: {top.line.lower()} ({fmt_signed(top.log10, 1)} in log10 odds, as used)."
    reasons_for = tuple(f"{c.line}: {fmt_signed(c.log10, 2)} (log10 odds, as used)" for c in contributions_t
                        if _direction(c.question, c.log10, status) > 0)
    reasons_against = tuple(f"{c.line}: {fmt_signed(c.log10, 2)} (log10 odds, as used)" for c in contributions_t
                            if _direction(c.question, c.log10, status) < 0)
    diagnostics_against = tuple(f"{a.title} (diagnostic, weighed inside the pair model): {a.explanation}"
                                for a in assessments if a.rule in JOINT_RULES and _assessment_direction(a, status) < 0)
    # a line that qualifies the description rather than the odds (e.g. an unstable hierarchy) still argues
    # against the verdict as written, and is never hidden
    context_against = tuple(f"{a.title} (context, not in the odds): {a.explanation}"
                            for a in assessments if a.question == "context" and a.outcome == "against")
    limited = bool(prob is not None and min(prob, 1 - prob) < model_limit)
    return Verdict(
        pair=pair,
        status=status,  # type: ignore[arg-type]
        probability=prob,
        p_physical=p_phys,
        p_bound_given_physical=p_bg,
        log10_odds=float(n["log10_odds"][0]),
        summary=summary,
        reasons_for=reasons_for,
        reasons_against=reasons_against + diagnostics_against + context_against,
        missing=reasons_missing,
        probability_of=PROBABILITY_OF[status],
        p_bound=float(n["p_bound"][0]),
        p_comoving=float(n["p_comoving"][0]),
        p_chance=float(n["p_chance"][0]),
        log10_bound_odds=float(n["log10_bound_odds"][0]),
        contributions=contributions_t,
        moved_most=top.line if top is not None else None,
        limited_by_model=limited,
    )
