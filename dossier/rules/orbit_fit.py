"""An orbit fitted to the observing log, with honest uncertainties, where the arc allows it.

Method
    The posterior of the seven Campbell elements (P, T, e, a, i, Ω, ω) given
    the nightly means of the log (``SystemFacts.visual_posteriors``,
    :mod:`dossier.astro.orbit_posterior`) by importance sampling in
    (ln P, e, phase): given those three the positions are linear in the
    Thiele–Innes constants A, B, F, G (Heintz 1978, Double Stars, ch. 4),
    which are drawn from their Gaussian conditional; the proposal adapts to
    where the weight lies and is resampled at the end (an ensemble MCMC,
    emcee, Foreman-Mackey et al. 2013, PASP 125, 306, is the fallback).
    Priors, those of Blunt et al. 2017, AJ 153, 229: e, ω, cos i and the
    periastron phase uniform, a log-uniform, the pair parallax, and unless
    the arc spans half a period the total mass (sum of the component masses,
    else a broad log-normal). Each element and the dynamical mass
    a³/(ϖ³P²) are reported as the median with the 16–84 % interval. The
    adequacy of the arc is judged from the posterior: the probability that
    the data span at least ``min_coverage`` of the period, and the width of
    the period interval. An orbit is only attempted when the path is curved
    by the same test and threshold as the relative-motion rule
    (``[log] curvature_p``).

Strength
    The log10 Bayes factor of the orbit over a straight line in the Schwarz
    (BIC) approximation, (χ²_line − χ²_orbit − (7 − 4) ln N) / (2 ln 10),
    floored at zero: the orbit has 7 free parameters for both coordinates
    together (P, T, e, a, i, Ω, ω), the straight line 4 (a position and a
    rate in each of x and y), N = 2 × nights data values; χ²_orbit is the
    lowest χ² among the posterior draws. Only given when the orbit is found.
    When a published orbit exists this fit is shown for comparison only (no
    strength): the published orbit is weighed by the orbit-consistency rule
    and the same measures must not count twice; that comparison fit is made
    only when ``refit_published`` is set.

Outcome
    ``supports`` when the orbit is found, i.e. the arc determines it
    (status "orbit determined"), the best orbit fits the data (χ² p-value
    with 2N − 7 degrees of freedom at least ``fit_p``), and the strength
    exceeds ``decisive``. Otherwise ``neutral``, saying why the orbit was
    not found ("partial arc: period constrained only within …", or the fit
    does not describe the measures).

Insufficient data
    Too few nights, no significant curvature (the arc is too short to show
    an orbit), or an arc too short to constrain an orbit by the posterior,
    with the reason.
"""

from __future__ import annotations

import math

import numpy as np
from pydantic import Field

from dossier.astro import orbit_posterior as op
from dossier.fmt import fmt_fixed, fmt_sig, plural
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts

#: Free parameters of the two models compared (both coordinates together).
ORBIT_PARAMETERS = 7
LINE_PARAMETERS = 4


class Settings(RuleSettings):
    min_coverage: float = Field(default=0.3, gt=0, le=1,
                                description="Fraction of the period the log must span, with posterior probability "
                                            "at least 0.9, for an orbit to be called determined.")
    max_period_width: float = Field(default=0.2, gt=0,
                                    description="Largest fractional width (P84 − P16)/P50 of a determined period.")
    fit_p: float = Field(default=1e-3, gt=0, lt=1,
                         description="χ² p-value of the best orbit below which it does not describe the measures.")
    min_nights: int = Field(default=8, ge=7)
    decisive: float = Field(default=0.5, gt=0)
    refit_published: bool = Field(
        default=False,
        description="Also fit pairs that have a published visual orbit, for comparison (costs about a second a pair).",
    )


def bic_log10_bayes(chi2_line: float, chi2_orbit: float, n_data: int) -> float:
    """log10 Bayes factor orbit : straight line in the Schwarz approximation (see the module docstring)."""
    extra = ORBIT_PARAMETERS - LINE_PARAMETERS
    return (chi2_line - chi2_orbit - extra * math.log(n_data)) / (2 * math.log(10))


def interval_quantities(post: op.OrbitPosterior, plx) -> list[Quantity]:
    """Median and 16–84 % interval of each element (uncertainty = half the interval) and the mass."""
    names = (("P", "Period P", "yr"), ("T", "Periastron time T", "yr"), ("e", "Eccentricity e", ""),
             ("a", "Semimajor axis a", "″"), ("i", "Inclination i", "°"), ("node", "Node Ω", "°"),
             ("omega", "Argument of periastron ω", "°"))
    out = []
    for k, label, unit in names:
        lo, mid, hi = (float(v) for v in post.quantiles(k))
        out.append(Quantity(f"orbit_{k}", label, mid, unit, 0.5 * (hi - lo), low=lo, high=hi,
                            how=f"median, 68 % interval {fmt_sig(lo, 4)} – {fmt_sig(hi, 4)} ({post.method})"))
    if plx is not None and np.isfinite(post.mass).any():
        lo, mid, hi = (float(v) for v in post.quantiles("mass"))
        out.append(Quantity("dynamical_mass", "Dynamical total mass", mid, "M☉", 0.5 * (hi - lo), low=lo, high=hi,
                            how=f"a³/(ϖ³P²), median, 68 % interval {fmt_sig(lo, 3)} – {fmt_sig(hi, 3)}; ϖ = {fmt_fixed(plx[0], 3)} ± "
                                f"{fmt_fixed(plx[1], 3)} mas"))
    return out


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    from scipy import stats

    log = facts.logs.get(subject)
    if log is None:
        return RULE.insufficient(subject, "No measures of this pair in the observing log.")
    if len(log.mt) < settings.min_nights:
        return RULE.insufficient(subject, f"{plural(len(log.mt), 'night')} of measures; an orbit fit needs {settings.min_nights}.")
    p_curv = facts.settings.log.curvature_p
    if not log.is_curved(p_curv):
        p = "untested" if log.curvature is None else f"p = {fmt_sig(log.curvature.p_value, 2)}"
        return RULE.insufficient(subject, f"The path shows no significant curvature ({p}, threshold {fmt_sig(p_curv, 6)}): "
                                 "the arc is too short to show an orbit.")
    published = facts.visual_orbit(subject)
    post = facts.visual_posteriors.get(subject)
    if published is not None and post is None:
        return RULE.assessment(subject, "neutral", f"A published orbit ({published.ref}) is weighed by the "
                               "orbit-consistency rule; set refit_published = true under [rules.orbit-fit] to fit "
                               "the log as well, for comparison.")
    if post is None or len(post) == 0:
        return RULE.insufficient(subject, "No orbit could be sampled from the measures.")
    span = log.span_years
    adequate = op.adequacy(post, span, min_coverage=settings.min_coverage, max_width=settings.max_period_width)
    if adequate.status == "too-short":
        return RULE.insufficient(subject, f"The measures span {fmt_fixed(span, 0)} yr: arc too short to constrain an orbit "
                                 f"(posterior probability {fmt_fixed(adequate.prob_coverage, 2)} that they cover "
                                 f"{fmt_fixed(100 * settings.min_coverage, 0)} % of the period).")
    n_data = 2 * len(log.mt)
    dof = n_data - ORBIT_PARAMETERS
    chi2_min = float(np.nanmin(post.chi2))
    p_fit = float(stats.chi2.sf(chi2_min, dof)) if dof > 0 else math.nan
    fits = not (p_fit < settings.fit_p)
    plx = facts.pair_parallax(subject)
    quantities = interval_quantities(post, plx)
    cq = adequate.coverage_q
    quantities += [
        Quantity("coverage", "Fraction of the period covered", cq[1], "", 0.5 * (cq[2] - cq[0]),
                 how=f"span / P over the posterior, 68 % interval {fmt_fixed(cq[0], 2)} – {fmt_fixed(cq[2], 2)}"),
        Quantity("p_coverage", f"Posterior probability of covering {fmt_fixed(100 * settings.min_coverage, 0)} % of the period",
                 adequate.prob_coverage, ""),
        Quantity("period_width", "Fractional width of the period interval", adequate.width, ""),
        Quantity("chi2_orbit", "Lowest χ² of the orbit draws", chi2_min, "", how=f"{dof} dof, p = {fmt_sig(p_fit, 2)}"),
        Quantity("p_fit", "χ² p-value of the best orbit", p_fit, ""),
    ]
    P = quantities[0]
    text = (f"Orbits drawn for {len(log.mt)} nights over {fmt_fixed(span, 0)} yr ({post.method}, {len(post)} draws): "
            f"P = {fmt_sig(P.value, 3)} yr (68 %: {fmt_sig(post.quantiles('P')[0], 3)} – {fmt_sig(post.quantiles('P')[2], 3)}), "
            f"e = {fmt_fixed(quantities[2].value, 2)} ± {fmt_fixed(quantities[2].uncertainty, 2)}, a = {fmt_fixed(quantities[3].value, 3)} ± "
            f"{fmt_fixed(quantities[3].uncertainty, 3)}″, covering {fmt_fixed(100 * cq[1], 0)} % of the period: {adequate.text}.")
    mass_q = next((q for q in quantities if q.name == "dynamical_mass"), None)
    if mass_q is not None:
        text += f" Dynamical mass {fmt_fixed(mass_q.value, 2)} ± {fmt_fixed(mass_q.uncertainty, 2)} M☉."
    if published is not None:
        text += f" Shown beside the published orbit ({published.ref}), which is the one weighed."
        return RULE.assessment(subject, "neutral", text, quantities=tuple(quantities), sources=("observing log",))
    if not fits:
        text += (f" The best orbit leaves χ² = {fmt_fixed(chi2_min, 0)} for {dof} dof (p = {fmt_sig(p_fit, 2)}): it does not describe "
                 "the measures, so no orbit was found.")
        return RULE.assessment(subject, "neutral", text, quantities=tuple(quantities), sources=("observing log",))
    if not adequate.determined:
        text += " The orbit is not determined yet, so none is claimed."
        return RULE.assessment(subject, "neutral", text, quantities=tuple(quantities), sources=("observing log",))
    strength = max(0.0, bic_log10_bayes(float(log.linear.chi2), chi2_min, n_data))
    quantities.append(Quantity("delta_bic", "ΔBIC (orbit − straight line)",
                               chi2_min - float(log.linear.chi2)
                               + (ORBIT_PARAMETERS - LINE_PARAMETERS) * math.log(n_data), "",
                               how="7 against 4 free parameters"))
    outcome = "supports" if strength > settings.decisive else "neutral"
    text += " The orbit is found." if outcome == "supports" else " The orbit is not decisively better than a line."
    return RULE.assessment(subject, outcome, text, strength=strength, quantities=tuple(quantities),
                           sources=("observing log",))


RULE = Rule(
    id="orbit-fit",
    title="Orbit fitted to the observing log",
    version=2,
    subject="pair",
    question="binding",
    needs=("eight or more nights of measures with a curved path", "a parallax (for the mass and the period prior)",
           "component masses (mass prior on short arcs; optional)"),
    citation="Blunt, S. et al. 2017, AJ 153, 229 (priors of Orbits For The Impatient); Thiele–Innes constants "
    "(Heintz, W. D. 1978, Double Stars, ch. 4); Foreman-Mackey, D. et al. 2013, PASP 125, 306 (emcee, fallback); "
    "Schwarz, G. 1978, Ann. Stat. 6, 461 (BIC)",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
)
