"""Luminosity of a component, two ways, and whether they agree.

Method
    From radius and temperature, L = R² (T / 5772 K)⁴ in the IAU 2015
    nominal solar units (Resolution B3). From the apparent V magnitude, the
    distance, the extinction A_V (zero when not given, and said so) and the
    bolometric correction BC_V(T_eff) of Flower 1996, ApJ 469, 355 with the
    corrected coefficients of Torres 2010, AJ 140, 1158, with M_bol☉ = 4.74
    (IAU 2015 Resolution B2). A component without a parallax of its own (a
    star resolved inside an unresolved component) takes the distance of the
    component it belongs to. Uncertainties by first-order propagation.

Outcome
    ``neutral`` (context); the explanation says whether the two agree
    within 3σ in log L, which checks the radius, temperature, photometry and
    distance against each other.

Insufficient data
    No temperature, or neither a radius nor a V magnitude with a distance.
"""

from __future__ import annotations

import math

from pydantic import Field

from dossier.fmt import fmt_fixed, fmt_sig
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    band: str = Field(default="V", description="Band of the magnitude (the bolometric corrections are for V).")


def applies(facts: SystemFacts, subject: str) -> bool:
    phys = facts.system.components[subject].physical
    return phys is not None and phys.teff is not None


def parallax_for(facts: SystemFacts, component: str):
    """The component's parallax, or that of the component it is resolved from."""
    star = facts.stars[component]
    if star.parallax is not None:
        return star.parallax
    for pair in facts.system.pairs:
        if component in pair.members and pair.parent is not None:
            return parallax_for(facts, facts.representative(pair.parent))
    return None


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    from dossier.astro import stars

    phys = facts.system.components[subject].physical
    if phys is None or phys.teff is None:
        return RULE.insufficient(subject, f"{subject} has no effective temperature.")
    t, st = phys.teff.value, phys.teff.uncertainty
    quantities, logs = [], []
    text = f"{subject} (T(eff) = {fmt_fixed(t, 0)} ± {fmt_fixed(st, 0)} K):"
    if phys.radius is not None:
        r, sr = phys.radius.value, phys.radius.uncertainty
        lum = float(stars.luminosity_from_radius_teff(r, t))
        s_log = math.hypot(2 * sr / r, 4 * st / t) / math.log(10)
        quantities.append(Quantity("L_radius", "L from radius and temperature", lum, "L☉", lum * s_log * math.log(10),
                                   how="R² (T/5772 K)⁴, IAU 2015 B3"))
        logs.append((math.log10(lum), s_log))
        text += f" L = {fmt_sig(lum, 3)} L☉ from its radius"
    mag = facts.stars[subject].magnitudes.get(settings.band)
    plx = parallax_for(facts, subject)
    if mag is not None and plx is not None and plx.mean > 0:
        d = 1000.0 / plx.mean
        bc, clamped = stars.bolometric_correction_v(t)
        bc_hi = float(stars.bolometric_correction_v(t + st).bc)
        bc_lo = float(stars.bolometric_correction_v(t - st).bc)
        s_bc = abs(bc_hi - bc_lo) / 2
        av = phys.extinction_v.value if phys.extinction_v is not None else 0.0
        s_av = phys.extinction_v.uncertainty if phys.extinction_v is not None else 0.0
        lum = float(stars.luminosity_from_magnitude(mag.value, d, float(bc), av))
        s_d = 5 * (plx.error_inflated / plx.mean) / math.log(10)
        s_log = 0.4 * math.sqrt(mag.uncertainty**2 + s_d**2 + s_av**2 + s_bc**2)
        quantities.append(Quantity("bc_v", "Bolometric correction BC(V)", float(bc), "mag", s_bc,
                                   how="Flower 1996 / Torres 2010" + (" (clamped: outside its range)" if clamped else "")))
        quantities.append(Quantity("L_magnitude", "L from magnitude and distance", lum, "L☉", lum * s_log * math.log(10),
                                   how=f"V = {fmt_fixed(mag.value, 2)}, d = {fmt_fixed(d, 1)} pc, A(V) = {fmt_sig(av, 6)}"
                                   + ("" if phys.extinction_v is not None else " (not given)")))
        logs.append((math.log10(lum), s_log))
        text += ("," if len(logs) > 1 else "") + f" L = {fmt_sig(lum, 3)} L☉ from its magnitude and distance"
    if not logs:
        return RULE.insufficient(subject, f"{subject} has neither a radius nor a {settings.band} magnitude with a distance.")
    if len(logs) == 2:
        z = abs(logs[0][0] - logs[1][0]) / math.hypot(logs[0][1], logs[1][1])
        quantities.append(Quantity("agreement", "Difference of the two in log L", z, "σ"))
        text += f": {'they agree' if z < 3 else 'they disagree'} ({fmt_fixed(z, 1)}σ)."
    else:
        text += "."
    return RULE.assessment(subject, "neutral", text, quantities=tuple(quantities),
                           sources=tuple(r for r in (phys.ref, mag.ref if mag else None) if r))


RULE = Rule(
    id="luminosity",
    title="Luminosity two ways",
    version=1,
    subject="component",
    question="context",
    needs=("T(eff)", "a radius, or a V magnitude and a distance"),
    citation="IAU 2015 Resolutions B2 and B3 (nominal solar values); Flower, P. J. 1996, ApJ 469, 355 with "
    "Torres, G. 2010, AJ 140, 1158 (bolometric corrections)",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
    applies=applies,
)
