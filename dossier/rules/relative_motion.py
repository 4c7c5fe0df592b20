"""Relative motion read from the observing log.

Method
    Each measure of the log is precessed to the J2000 equinox when it was
    referred to the equinox of date (Δθ = 0.00557° sin α sec δ per year),
    turned into offsets (Δα cos δ, Δδ), given its uncertainty (stated, else
    the method's default) and averaged night by night after robust outlier
    flagging (flagged measures are kept in the log and shown, never deleted).
    A weighted straight line is fitted to the offsets against time; its
    rate is compared with the relative proper motion of the members, which
    an optical pair follows exactly. A quadratic fit tests for curvature
    (F-test for the two extra terms; Bevington & Robinson 2003, Data
    Reduction and Error Analysis, ch. 11).

Strength
    Curvature of the relative path means acceleration, which only gravity
    between the two stars can give over decades: evidence for a physical
    pair. The strength is the log10 Bayes factor of the quadratic over the
    straight path in the Schwarz approximation, −ΔBIC / (2 ln 10) (Schwarz
    1978, Ann. Stat. 6, 461; Kass & Raftery 1995, JASA 90, 773), floored at
    zero: a straight path is what an optical pair shows, but also what a
    wide bound pair shows over a short arc, so it is not evidence against.
    The path counts as curved only when the F-test's p-value is below
    ``[log] curvature_p`` (default 10⁻³), the one threshold the orbit-fit
    rule uses too; otherwise the strength is zero.

Outcome
    ``supports`` when the path is curved and the strength exceeds +0.5; otherwise ``neutral``. The
    explanation says whether the fitted rate agrees with the relative proper
    motion (within 3σ).

Insufficient data
    Fewer than three nights of unflagged measures.
"""

from __future__ import annotations

import math

import numpy as np
from pydantic import Field

from dossier.fmt import fmt_fixed, fmt_sig, fmt_signed, plural
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    decisive: float = Field(default=0.5, gt=0)


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    log = facts.logs.get(subject)
    if log is None:
        return RULE.insufficient(subject, "No measures of this pair in the observing log.")
    if log.linear is None:
        return RULE.insufficient(subject, f"Only {plural(len(log.mt), 'night')} of unflagged measures; a motion needs three.")
    lin = log.linear
    # rates in mas/yr: x north, y east
    rate_n, rate_e = 1000 * lin.coef_x[1], 1000 * lin.coef_y[1]
    err_n, err_e = 1000 * math.sqrt(lin.cov_x[1, 1]), 1000 * math.sqrt(lin.cov_y[1, 1])
    span = log.span_years
    n_flag = int(np.sum(log.flagged))
    quantities = [
        Quantity("rate_east", "Fitted rate in Δα cos δ", rate_e, "mas/yr", err_e, how="weighted straight line"),
        Quantity("rate_north", "Fitted rate in Δδ", rate_n, "mas/yr", err_n),
        Quantity("span", "Time covered", span, "yr", how=f"{len(log.mt)} nights, {len(log.t)} measures"),
        Quantity("chi2_linear", "χ² of the straight line", lin.chi2, "", how=f"{lin.dof} degrees of freedom"),
    ]
    text = (f"{len(log.t)} measures on {len(log.mt)} nights over {fmt_fixed(span, 0)} yr"
            + (f" ({n_flag} flagged as outliers, kept in the log)" if n_flag else "")
            + f" move at ({fmt_signed(rate_e, 2)} ± {fmt_fixed(err_e, 2)}, {fmt_signed(rate_n, 2)} ± {fmt_fixed(err_n, 2)}) mas/yr in (east, north).")
    pair = facts.pairs[subject]
    a, b = facts.stars.get(pair.first), facts.stars.get(pair.second)
    if a is not None and b is not None and a.motion and b.motion and pair.first != pair.second:
        d_e, d_n = b.motion.pmra - a.motion.pmra, b.motion.pmdec - a.motion.pmdec
        s_e = math.hypot(math.hypot(a.motion.pmra_error, b.motion.pmra_error), err_e)
        s_n = math.hypot(math.hypot(a.motion.pmdec_error, b.motion.pmdec_error), err_n)
        z = math.hypot((rate_e - d_e) / s_e, (rate_n - d_n) / s_n)
        quantities.append(Quantity("pm_difference", "Relative proper motion (east, north)", math.hypot(d_e, d_n),
                                   "mas/yr", how=f"({fmt_signed(d_e, 2)}, {fmt_signed(d_n, 2)}) from the astrometric solutions"))
        quantities.append(Quantity("rate_vs_pm", "Fitted rate − relative proper motion", z, "σ"))
        text += (f" The relative proper motion is ({fmt_signed(d_e, 2)}, {fmt_signed(d_n, 2)}) mas/yr: "
                 + ("they agree" if z < 3 else "they differ") + f" ({fmt_fixed(z, 1)}σ).")
    strength = 0.0
    outcome = "neutral"
    stat = None
    if log.curvature is not None:
        c = log.curvature
        strength = max(0.0, -c.delta_bic / (2 * math.log(10)))
        stat = Quantity("F", "F-test, quadratic against straight", c.F, "", how=f"p = {fmt_sig(c.p_value, 2)}")
        quantities.append(Quantity("p_curvature", "p-value of no curvature", c.p_value, ""))
        quantities.append(Quantity("delta_bic", "ΔBIC (quadratic − straight)", c.delta_bic, ""))
        # one threshold for "curved", shared with the orbit-fit rule: [log] curvature_p in dossier.toml
        curved = bool(c.p_value < facts.settings.log.curvature_p)
        if not curved:
            strength = 0.0
        if curved and strength > settings.decisive:
            outcome = "supports"
            text += (f" The path is curved (F = {fmt_fixed(c.F, 1)}, p = {fmt_sig(c.p_value, 2)}, ΔBIC = {fmt_fixed(c.delta_bic, 1)}): "
                     "orbital acceleration, which only a physical pair shows.")
        elif curved:
            text += (f" The path is curved (p = {fmt_sig(c.p_value, 2)}), but the quadratic's gain is not decisive "
                     f"(ΔBIC = {fmt_fixed(c.delta_bic, 1)}).")
        else:
            text += f" No significant curvature (p = {fmt_sig(c.p_value, 2)})."
    else:
        text += " Too few nights to test for curvature."
    refs = sorted({m.ref for m in log.measures if m.ref})
    return RULE.assessment(subject, outcome, text, strength=strength, statistic=stat, quantities=tuple(quantities),
                           sources=("observing log", *refs))


RULE = Rule(
    id="relative-motion",
    title="Relative motion from the observing log",
    version=2,
    subject="pair",
    question="association",
    needs=("three or more nights of measures in the observing log", "proper motions (for the comparison)"),
    citation="Bevington, P. R. & Robinson, D. K. 2003, Data Reduction and Error Analysis, 3rd ed., ch. 11 (F-test); "
    "Schwarz, G. 1978, Ann. Stat. 6, 461 (BIC); Kass, R. E. & Raftery, A. E. 1995, JASA 90, 773",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
)
