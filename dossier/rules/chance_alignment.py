"""Chance alignment: how likely is an unrelated star this bright this close?

Method
    With Σ the surface density of field stars at least as bright as the
    companion (from the system's field-density table, or the project's), the
    number of unrelated stars expected within the separation ρ is
    λ = π ρ² Σ, and the probability of at least one is
    P_chance = 1 − exp(−λ) (Bloom, Kulkarni & Djorgovski 2002, AJ 123, 1111).
    The companion is the fainter member in the first band of the table that
    both the table and the member have.

Strength
    P_chance alone is not the probability that the pair is optical: that
    also depends on how common physical companions are. The strength is the
    log10 ratio of the separation densities of physical and optical
    companions at ρ: physical companions spread about evenly in log
    separation, f per decade (``companion_rate_per_decade``, about 0.1 for
    solar-type stars near the peak of the separation distribution; Raghavan
    et al. 2010, ApJS 190, 1; from memory), optical ones as dλ/dρ = 2πρΣ, so
    the ratio is f / (2 ln 10 · λ). This term plays the role of the prior
    odds in the verdict.

Outcome
    ``supports`` when the strength is above +0.5, ``against`` below −0.5,
    ``neutral`` between.

Insufficient data
    No separation, no density table, or no magnitude of the fainter member
    in a band of the table.
"""

from __future__ import annotations

import math

import numpy as np
from pydantic import Field

from dossier.astro import chance
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    companion_rate_per_decade: float = Field(
        default=0.1, gt=0, lt=10, description="Physical companions per star per decade of separation."
    )
    decisive: float = Field(default=0.5, gt=0)


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    pair = facts.pairs[subject]
    if pair.rho_arcsec is None:
        return RULE.insufficient(subject, "No separation.")
    table = facts.system.field_density or facts.settings.field_density
    if not table:
        return RULE.insufficient(subject, "No field-star density: give field_density in the evidence or dossier.toml.")
    a, b = facts.stars[pair.first], facts.stars[pair.second]
    for band in dict.fromkeys(row.band for row in table):
        if band in a.magnitudes and band in b.magnitudes:
            break
    else:
        return RULE.insufficient(subject, "The members have no magnitude in a band of the field-density table.")
    faint = a if a.magnitudes[band].value > b.magnitudes[band].value else b
    mag = faint.magnitudes[band].value
    rows = sorted((r for r in table if r.band == band), key=lambda r: r.brighter_than)
    density_deg, extrapolated = chance.density_at_magnitude(
        mag, [r.brighter_than for r in rows], [r.per_square_degree.value for r in rows]
    )
    rel_err = max(r.per_square_degree.uncertainty / r.per_square_degree.value for r in rows)
    sigma_arcsec = float(chance.per_sq_deg_to_per_sq_arcsec(density_deg))
    lam = math.pi * pair.rho_arcsec**2 * sigma_arcsec
    p = float(chance.chance_alignment_probability(pair.rho_arcsec, sigma_arcsec))
    strength = math.log10(settings.companion_rate_per_decade / (2 * math.log(10) * lam))
    outcome = "supports" if strength > settings.decisive else "against" if strength < -settings.decisive else "neutral"
    text = (f"With {float(density_deg):.3g} stars per square degree brighter than {band} = {mag:.2f}, an unrelated star "
            f"within {pair.rho_arcsec:.2f}″ has probability {p:.2g}; physical companions are {10**strength:.2g} times "
            "as dense as optical ones at this separation.")
    if bool(np.any(extrapolated)):
        text += " The density was extrapolated beyond the table."
    refs = [r.per_square_degree.ref or r.ref for r in rows]
    return RULE.assessment(
        subject, outcome, text, strength=strength,
        statistic=Quantity("p_chance", "P(chance alignment)", p, "", p * rel_err),
        quantities=(
            Quantity("density", f"Field stars brighter than {band} = {mag:.2f}", float(density_deg), "deg⁻²",
                     float(density_deg) * rel_err),
            Quantity("expected", "Expected unrelated stars within ρ (λ)", lam, "", lam * rel_err),
            Quantity("p_chance", "P(chance alignment)", p, "", p * rel_err, how="1 − exp(−π ρ² Σ)"),
        ),
        sources=tuple(dict.fromkeys(r for r in refs if r)),
    )


RULE = Rule(
    id="chance-alignment",
    title="Chance alignment",
    version=1,
    subject="pair",
    question="association",
    needs=("the separation", "a field-star density table", "the companion's magnitude"),
    citation="Bloom, J. S., Kulkarni, S. R. & Djorgovski, S. G. 2002, AJ 123, 1111",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
)
