"""Parallax agreement of a pair.

Method
    The difference of the members' combined parallaxes, Δϖ = ϖ₁ − ϖ₂, is
    compared with its combined uncertainty σ = √(σ₁² + σ₂²) widened by the
    physical depth a bound pair may have along the line of sight,
    σ_depth = k ϖ ρ (ρ in radians, k = ``depth_factor``). Following El-Badry,
    Rix & Heintz 2021 (MNRAS 506, 2269, §2) the parallaxes agree when
    |Δϖ| < b σ, with b = 3 for ρ > 4″ and b = 6 closer in, where the
    uncertainties of close pairs are underestimated (by the same reasoning,
    σ is doubled inside 4″ for the strength).

Strength
    The log10 Bayes factor physical : optical of the two parallaxes. If
    physical, both stars share one distance r; if optical, each has its own
    distance drawn from the exponentially decreasing space density prior of
    length scale L (Bailer-Jones 2015, PASP 127, 994). Because the product of
    two Gaussians in 1/r is a Gaussian in Δϖ times a Gaussian in the
    weighted mean ϖ̄, the factor is

        B = N(Δϖ | 0, σ) · m(ϖ̄, σ̄) / [m(ϖ₁, σ₁) · m(ϖ₂, σ₂)],

    with m(ϖ, σ) = ∫ N(ϖ | 1/r, σ) p(r) dr the marginal likelihood under the
    prior. Agreement of two precise parallaxes is strong evidence, because a
    random field star rarely has so close a parallax.

Outcome
    ``supports`` when the parallaxes agree by the criterion above,
    ``against`` when they do not.

Insufficient data
    Either member has no parallax.
"""

from __future__ import annotations

import math

import numpy as np
from pydantic import Field

from dossier.astro import distance
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts

ARCSEC_IN_RAD = math.pi / (180.0 * 3600.0)


class Settings(RuleSettings):
    depth_factor: float = Field(
        default=2.0, ge=0,
        description="Line-of-sight depth allowed to a bound pair, in units of its projected separation.",
    )
    close_separation_arcsec: float = Field(
        default=4.0, gt=0, description="Below this separation the threshold b is 6 instead of 3 (El-Badry et al. 2021)."
    )


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    pair = facts.pairs[subject]
    a, b = facts.stars[pair.first].parallax, facts.stars[pair.second].parallax
    missing = [m for m, p in ((pair.first, a), (pair.second, b)) if p is None]
    if missing:
        return RULE.insufficient(subject, f"No parallax for {' and '.join(missing)}.")
    if pair.first == pair.second:
        return RULE.insufficient(subject, f"Both members are represented by {pair.first}; their parallaxes are one.")
    assert a is not None and b is not None
    l_kpc = facts.length_scale_kpc
    diff = a.mean - b.mean
    sigma = math.hypot(a.error_inflated, b.error_inflated)
    rho = pair.rho_arcsec
    close = rho is not None and rho < settings.close_separation_arcsec
    threshold = 6.0 if close else 3.0
    w = np.array([1 / a.error_inflated**2, 1 / b.error_inflated**2])
    mean = float((w[0] * a.mean + w[1] * b.mean) / w.sum())
    depth = settings.depth_factor * max(mean, 0.0) * (rho or 0.0) * ARCSEC_IN_RAD
    sigma_total = math.hypot(sigma, depth)
    consistent = abs(diff) < threshold * sigma_total
    scale = 2.0 if close else 1.0
    s_bf = scale * sigma_total
    mean_err = 1 / math.sqrt(w.sum())
    log_m = distance.edsd_log_marginal(
        np.array([mean, a.mean, b.mean]), scale * np.array([mean_err, a.error_inflated, b.error_inflated]), l_kpc
    )
    log_gauss = -0.5 * (diff / s_bf) ** 2 - math.log(s_bf * math.sqrt(2 * math.pi))
    strength = float((log_gauss + log_m[0] - log_m[1] - log_m[2]) / math.log(10))
    z = abs(diff) / sigma_total
    quantities = (
        Quantity("delta_parallax", "Parallax difference ϖ₁ − ϖ₂", diff, "mas", sigma),
        Quantity("depth_allowance", "Allowance for physical depth", depth, "mas",
                 how=f"{settings.depth_factor} × ϖ × ρ"),
        Quantity("threshold", "Agreement threshold b", threshold, "σ",
                 how="El-Badry et al. 2021: 6 below 4″, else 3"),
    )
    stat = Quantity("z", "|Δϖ| / σ", z, "σ")
    if consistent:
        text = (f"The parallaxes of {pair.first} ({a.mean:.3f} ± {a.error_inflated:.3f} mas) and {pair.second} "
                f"({b.mean:.3f} ± {b.error_inflated:.3f} mas) agree within {z:.1f}σ (threshold {threshold:.0f}σ).")
    else:
        text = (f"The parallaxes of {pair.first} ({a.mean:.3f} ± {a.error_inflated:.3f} mas) and {pair.second} "
                f"({b.mean:.3f} ± {b.error_inflated:.3f} mas) differ by {z:.1f}σ, beyond the {threshold:.0f}σ "
                "a physical pair allows.")
    return RULE.assessment(
        subject, "supports" if consistent else "against", text, strength=strength, statistic=stat,
        quantities=quantities, sources=tuple(dict.fromkeys(s.ref for s in a.sources + b.sources)),
    )


RULE = Rule(
    id="parallax-agreement",
    title="Parallax agreement",
    version=1,
    subject="pair",
    question="association",
    needs=("a parallax for each member",),
    citation="El-Badry, K., Rix, H.-W. & Heintz, T. M. 2021, MNRAS 506, 2269 (agreement criterion); "
    "Bailer-Jones, C. A. L. 2015, PASP 127, 994 (distance prior of the Bayes factor)",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
)
