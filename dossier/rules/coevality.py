"""Co-evality: could the stars of a pair have formed together?

Method
    For every star of each member (a member resolved into stars is
    represented by them) with a mass and an evolutionary stage, the ages the
    stage allows at that mass (mass ± 2σ) from the analytic lifetimes of
    Hurley, Pols & Tout 2000, MNRAS 315, 543 at the metallicity given
    (Z = 0.02 × 10^[Fe/H], solar by default; common practice), e.g. [0, t_MS]
    on the main sequence, [t_HeI, t_HeI + t_He] for core helium burning,
    never beyond the age of the Universe (``max_age_myr``). A
    member's interval is the overlap of its stars'; the pair is co-eval when
    the members' intervals overlap, and the common range is reported. The
    rule of thumb t ≈ 10 Gyr (M/M☉)^−2.5 is quoted as a cross-check.

Strength
    log10 likelihood ratio physical : optical of the ages. Overlapping: an
    unrelated field star, of any age up to ``disc_age_myr`` with equal
    probability, overlaps by chance with probability about
    (w₁ + w₂)/T_disc (w the widths), so the strength is
    −log10 min(1, (w₁ + w₂)/T_disc) ≥ 0: narrow intervals that agree (two
    evolved stars) are strong evidence, two main-sequence stars none.
    Not overlapping even at ±2σ in mass: −z²/(2 ln 10) with
    z = 2 + gap/``age_systematic_dex`` (gap in dex), an approximate tension.

Outcome
    ``supports`` above +0.5, ``against`` below −0.5, else ``neutral``.

Insufficient data
    A member has no star with both a mass and a stage.
"""

from __future__ import annotations

import math

from pydantic import Field

from dossier.fmt import fmt_fixed, fmt_sig
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    disc_age_myr: float = Field(default=10000.0, gt=0, description="Age of the Galactic disc (common practice).")
    age_systematic_dex: float = Field(default=0.1, gt=0, description="Systematic uncertainty of model ages (dex).")
    max_age_myr: float = Field(default=13800.0, gt=0, description="No star is older than the Universe (Myr).")
    decisive: float = Field(default=0.5, gt=0)


def stars_of(facts: SystemFacts, member: str) -> list[str]:
    """The resolved stars a member stands for: itself, or the members of the pair(s) that resolve it."""
    resolving = [p for p in facts.system.pairs if p.parent == member or p.id == member]
    if not resolving:
        return [member] if member in facts.system.components else []
    return [s for p in resolving for m in p.members for s in stars_of(facts, m)]


def intervals(facts: SystemFacts, member: str, max_age: float = 13800.0):
    from dossier.astro import stars

    out = []
    for cid in stars_of(facts, member):
        phys = facts.system.components[cid].physical
        if phys is None or phys.mass is None or phys.stage is None or phys.stage in ("white-dwarf", "brown-dwarf"):
            continue
        z = 0.02 * 10 ** phys.metallicity.value if phys.metallicity is not None else 0.02
        low, high = stars.age_interval(phys.mass.value, phys.mass.uncertainty, phys.stage, z)
        out.append((cid, phys.stage, phys.mass.value, min(float(low), max_age), min(float(high), max_age)))
    return out


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    from dossier.astro import stars

    pair = facts.pair_ids[subject]
    first, second = (intervals(facts, m, settings.max_age_myr) for m in pair.members)
    missing = [m for m, iv in zip(pair.members, (first, second)) if not iv]
    if missing:
        return RULE.insufficient(subject, f"No star of {' or '.join(missing)} has both a mass and a stage.")
    lines = [f"{cid} ({stage}, {fmt_fixed(m, 2)} M☉): {fmt_sig(low, 4)}–{fmt_sig(high, 4)} Myr" for cid, stage, m, low, high in first + second]
    member_iv = []
    for iv in (first, second):
        o = stars.coeval_overlap([x[3] for x in iv], [x[4] for x in iv])
        member_iv.append((float(o.common_low), float(o.common_high)) if bool(o.consistent) else None)
    if any(m is None for m in member_iv):
        return RULE.assessment(subject, "neutral", "The stars within one member do not share an age: "
                               + "; ".join(lines) + ".", reasons=tuple(lines))
    (l1, h1), (l2, h2) = member_iv
    both = stars.coeval_overlap([l1, l2], [h1, h2])
    quantities = [Quantity(f"age_{m}", f"Ages allowed for {m}", (lo + hi) / 2, "Myr", low=lo, high=hi)
                  for m, (lo, hi) in zip(pair.members, member_iv)]
    if bool(both.consistent):
        chance = min(1.0, ((h1 - l1) + (h2 - l2)) / settings.disc_age_myr)
        strength = 0.0 - math.log10(max(chance, 1e-12))  # 0.0 - … keeps +0.0 when the chance is 1
        quantities.append(Quantity("common_age", "Common age range", (float(both.common_low) + float(both.common_high)) / 2,
                                   "Myr", low=float(both.common_low), high=float(both.common_high)))
        text = (f"The members can share an age: {fmt_sig(float(both.common_low), 4)}–{fmt_sig(float(both.common_high), 4)} Myr; "
                f"an unrelated star would overlap by chance with probability about {fmt_sig(chance, 2)}.")
    else:
        z = 2 + float(both.gap_dex) / settings.age_systematic_dex
        strength = -z * z / (2 * math.log(10))
        quantities.append(Quantity("gap", "Gap between the age ranges", float(both.gap_dex), "dex"))
        text = (f"The members cannot share an age even with their masses at ±2σ: the ranges are "
                f"{fmt_fixed(float(both.gap_dex), 2)} dex apart.")
    outcome = "supports" if strength > settings.decisive else "against" if strength < -settings.decisive else "neutral"
    return RULE.assessment(subject, outcome, text, strength=strength, quantities=tuple(quantities), reasons=tuple(lines))


RULE = Rule(
    id="coevality",
    title="Co-evality of the members",
    version=1,
    subject="pair",
    question="association",
    needs=("masses and evolutionary stages of the members' stars", "metallicity (optional)"),
    citation="Hurley, J. R., Pols, O. R. & Tout, C. A. 2000, MNRAS 315, 543 (lifetimes)",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
)
