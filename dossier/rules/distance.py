"""Distance of a component from all its parallax sources.

Method
    The parallaxes of the sources are combined by inverse-variance weighting.
    Their mutual consistency is tested with χ² about the weighted mean
    (N−1 degrees of freedom); when the Birge ratio R = √(χ²/(N−1)) exceeds
    one, the combined uncertainty is multiplied by R (Birge 1932, Phys. Rev.
    40, 207), and the source that deviates most from the mean of the others
    is named as discordant. The distance is the posterior with the
    exponentially decreasing space density prior of length scale L
    (Bailer-Jones 2015, PASP 127, 994): its mode and 16/50/84 % quantiles.
    1/ϖ is quoted only when σ/ϖ < 0.1 (the paper's advice), with a warning
    up to 0.2.

Outcome
    Always ``neutral``: a distance is context for the pair rules, not
    evidence for or against a pair. The explanation says when the sources
    disagree (p < ``discord_p``).

Insufficient data
    The component has no parallax.
"""

from __future__ import annotations

from pydantic import Field

from dossier.fmt import fmt_fixed, fmt_sig, plural
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    length_scale_kpc: float = Field(
        default=1.35,
        gt=0,
        description="Length scale L of the exponentially decreasing space density prior (kpc). 1.35 kpc is the "
        "single value used for a whole-sky survey release by Astraatmadja & Bailer-Jones 2016, ApJ 833, 119 "
        "(value from memory).",
    )
    discord_p: float = Field(
        default=0.01, gt=0, lt=1, description="Below this χ² p-value the parallax sources are called discordant."
    )


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    star = facts.stars[subject]
    plx = star.parallax
    if plx is None:
        return RULE.insufficient(subject, f"{subject} has no parallax from any source.")
    q = [
        Quantity("parallax", "Combined parallax", plx.mean, "mas", plx.error_inflated,
                 how=f"inverse-variance mean of {plural(len(plx.sources), 'source')}"
                 + (f"; uncertainty ×{fmt_fixed(plx.birge_ratio, 2)} (Birge ratio)" if plx.birge_ratio > 1 else "")),
        Quantity("distance_mode", "Distance (posterior mode)", plx.distance_mode_pc, "pc",
                 how=f"exponentially decreasing space density prior, L = {settings.length_scale_kpc} kpc"),
        Quantity("distance", "Distance (median, 16–84 %)", plx.distance_q50_pc, "pc",
                 low=plx.distance_q16_pc, high=plx.distance_q84_pc, how="posterior quantiles"),
    ]
    if plx.precision == "precise":
        q.append(Quantity("inverse_parallax", "Distance 1/ϖ", 1000.0 / plx.mean, "pc",
                          1000.0 * plx.error_inflated / plx.mean**2, how="σ/ϖ < 0.1, first-order propagation"))
    stat = None
    text = f"{subject}: ϖ = {fmt_fixed(plx.mean, 3)} ± {fmt_fixed(plx.error_inflated, 3)} mas from {plural(len(plx.sources), 'source')}, "
    text += f"distance {fmt_fixed(plx.distance_q50_pc, 1)} pc (16–84 %: {fmt_fixed(plx.distance_q16_pc, 1)}–{fmt_fixed(plx.distance_q84_pc, 1)})."
    if plx.dof >= 1:
        stat = Quantity("chi2", "χ² of the sources about the mean", plx.chi2, "",
                        how=f"{plural(plx.dof, 'degree')} of freedom, p = {fmt_sig(plx.p_value, 2)}")
        q.append(Quantity("birge_ratio", "Birge ratio", plx.birge_ratio, ""))
        if plx.p_value < settings.discord_p:
            text += (f" The sources disagree (χ² = {fmt_fixed(plx.chi2, 1)} for {plx.dof} dof, p = {fmt_sig(plx.p_value, 1)});"
                     f" {plx.discordant} deviates most; the uncertainty is inflated by {fmt_fixed(plx.birge_ratio, 2)}.")
    if plx.precision == "usable":
        text += " σ/ϖ is between 0.1 and 0.2: 1/ϖ would be biased, the posterior is used."
    elif plx.precision == "imprecise":
        text += " The parallax is imprecise (σ/ϖ > 0.2 or ϖ ≤ 0): the distance leans on the prior."
    return RULE.assessment(subject, "neutral", text, statistic=stat, quantities=tuple(q),
                           sources=tuple(dict.fromkeys(s.ref for s in plx.sources)))


RULE = Rule(
    id="distance",
    title="Distance from all parallax sources",
    version=2,  # 2: quantiles of precise parallaxes on a z-grid (a few parts in 10^8 closer)
    subject="component",
    question="context",
    needs=("parallaxes with uncertainties, one or more sources",),
    citation="Bailer-Jones, C. A. L. 2015, PASP 127, 994 (distance posterior); Birge, R. T. 1932, Phys. Rev. 40, 207 "
    "(inflation of the uncertainty of discordant measurements)",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
)
