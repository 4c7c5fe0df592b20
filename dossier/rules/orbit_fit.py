"""An orbit fitted to the observing log, where the arc allows it.

Method
    Least squares over the seven Campbell elements: a grid over P, T and e
    on which the Thiele–Innes constants are solved linearly, refined with
    scipy's least_squares (Hartkopf, McAlister & Franz 1989, AJ 98, 1014
    describe the grid approach; from memory); uncertainties from the
    covariance, scaled by the reduced χ² when it exceeds one. The dynamical
    mass a³/(ϖ³P²) follows. An orbit is only attempted when the path is
    significantly curved, and only reported when the measures span at least
    ``min_coverage`` of the fitted period.

Strength
    When no published orbit exists: the log10 Bayes factor of the orbit
    over a straight line in the Schwarz approximation,
    (χ²_line − χ²_orbit − 3 ln N) / (2 ln 10), floored at zero (three more
    free parameters, N data). When a published orbit exists this fit is
    shown for comparison only (no strength): the published orbit is weighed
    by the orbit-consistency rule and the same measures must not count twice;
    that comparison fit is made only when ``refit_published`` is set.

Outcome
    ``supports`` when the strength exceeds +0.5, else ``neutral``.

Insufficient data
    No significant curvature, too few nights, a fit that does not converge,
    or an arc shorter than ``min_coverage`` of the period, with the reason.
"""

from __future__ import annotations

import math

import numpy as np
from pydantic import Field

from dossier.astro import orbit as orbits
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    min_coverage: float = Field(default=0.3, gt=0, le=1, description="Fraction of the period the log must span.")
    curvature_p: float = Field(default=1e-3, gt=0, lt=1, description="Curvature p-value below which a fit is tried.")
    min_nights: int = Field(default=8, ge=7)
    decisive: float = Field(default=0.5, gt=0)
    refit_published: bool = Field(
        default=False,
        description="Also fit pairs that have a published visual orbit, for comparison (costs about 0.5 s a pair).",
    )


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    log = facts.logs.get(subject)
    if log is None:
        return RULE.insufficient(subject, "No measures of this pair in the observing log.")
    if len(log.mt) < settings.min_nights:
        return RULE.insufficient(subject, f"{len(log.mt)} night(s) of measures; an orbit fit needs {settings.min_nights}.")
    if log.curvature is None or log.curvature.p_value > settings.curvature_p:
        return RULE.insufficient(subject, "The path shows no significant curvature: the arc is too short for an orbit.")
    published = facts.visual_orbit(subject)
    if published is not None and not settings.refit_published:
        return RULE.assessment(subject, "neutral", f"A published orbit ({published.ref}) is weighed by the "
                               "orbit-consistency rule; set refit_published = true under [rules.orbit-fit] to fit "
                               "the log as well, for comparison.")
    p_grid = None
    if published is not None:  # search around the published period: faster, and the comparison is the point
        p_grid = np.geomspace(0.5 * published.period_years, 2.0 * published.period_years, 60)
    fit = orbits.fit_orbit(log.mt, log.mx, log.my, log.msx, log.msy, P_grid=p_grid,
                           n_starts=1 if published is not None else 3)
    coverage = fit.coverage
    if not fit.converged:
        return RULE.insufficient(subject, "The orbit fit did not converge: the measures do not fix an orbit yet.")
    if coverage < settings.min_coverage:
        return RULE.insufficient(subject, f"The measures span {100 * coverage:.0f} % of the fitted period "
                                 f"({fit.P:.0f} yr); an orbit needs {100 * settings.min_coverage:.0f} %.")
    names = (("P", "Period P", "yr"), ("T", "Periastron time T", "yr"), ("e", "Eccentricity e", ""),
             ("a", "Semimajor axis a", "″"), ("i", "Inclination i", "°"), ("node", "Node Ω", "°"),
             ("omega", "Argument of periastron ω", "°"))
    quantities = [Quantity(f"orbit_{k}", label, float(getattr(fit, k)), unit, float(getattr(fit, f"sigma_{k}")))
                  for k, label, unit in names]
    quantities.append(Quantity("coverage", "Fraction of the period covered", coverage, ""))
    quantities.append(Quantity("chi2_orbit", "χ² of the fitted orbit", float(fit.chi2), "", how=f"{fit.dof} dof"))
    text = (f"An orbit fitted to {len(log.mt)} nights: P = {fit.P:.0f} ± {fit.sigma_P:.0f} yr, e = {fit.e:.2f} ± "
            f"{fit.sigma_e:.2f}, a = {fit.a:.3f} ± {fit.sigma_a:.3f}″, i = {fit.i:.1f}°, covering {100 * coverage:.0f} % "
            "of the period.")
    plx = facts.pair_parallax(subject)
    if plx is not None:
        m = float(orbits.dynamical_mass(fit.a, plx[0], fit.P))
        sm = float(orbits.dynamical_mass_uncertainty(fit.a, fit.sigma_a, plx[0], plx[1], fit.P, fit.sigma_P))
        quantities.append(Quantity("dynamical_mass", "Dynamical total mass", m, "M☉", sm))
        text += f" Dynamical mass {m:.2f} ± {sm:.2f} M☉."
    n = 2 * len(log.mt)
    if published is not None:
        text += f" Shown beside the published orbit ({published.ref}), which is the one weighed."
        return RULE.assessment(subject, "neutral", text, quantities=tuple(quantities), sources=("observing log",))
    strength = max(0.0, (float(log.linear.chi2) - float(fit.chi2) - 3 * math.log(n)) / (2 * math.log(10)))
    outcome = "supports" if strength > settings.decisive else "neutral"
    return RULE.assessment(subject, outcome, text, strength=strength, quantities=tuple(quantities),
                           sources=("observing log",))


RULE = Rule(
    id="orbit-fit",
    title="Orbit fitted to the observing log",
    version=1,
    subject="pair",
    question="binding",
    needs=("eight or more nights of measures with a curved path", "a parallax (for the mass)"),
    citation="Thiele–Innes least squares on a grid of (P, T, e) (Heintz, W. D. 1978, Double Stars, ch. 4; "
    "Hartkopf, W. I., McAlister, H. A. & Franz, O. G. 1989, AJ 98, 1014)",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
)
