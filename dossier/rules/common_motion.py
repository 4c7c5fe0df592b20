"""Common motion: do the two stars move together through space?

Method
    The members' proper-motion difference (Δμα*, Δμδ) and, when both have
    one, their radial-velocity difference ΔRV are compared under two
    hypotheses. If the pair is physical, each velocity component differs by
    the pair's internal motion only: its orbital motion, at most the
    circular speed at the projected separation (per-axis dispersion v²/3 for
    a random orientation), plus the velocity dispersion of a loose group
    (``group_dispersion_kms``) for pairs that are associated but unbound.
    If the pair is optical, the companion's velocity is that of an unrelated
    field star, per-axis dispersion ``field_dispersion_kms`` (the
    solar-neighbourhood disc value, Dehnen & Binney 1998, MNRAS 298, 387,
    rounded; from memory). Proper motions are converted to velocities with
    v = 4.74047 μ d at the pair's distance (El-Badry, Rix & Heintz 2021,
    MNRAS 506, 2269, §2). Each hypothesis is a Gaussian in every velocity
    component, with the measurement uncertainties added.

Strength
    log10 of the likelihood ratio physical : optical of the measured
    differences, for this line alone. A diagnostic: the verdict does not
    multiply it in, because the pair model (``pair-model``) weighs the same
    motions jointly with the parallaxes.

Outcome
    ``supports`` when the strength exceeds +0.5, ``against`` below −0.5,
    ``neutral`` between.

Insufficient data
    Either member lacks a proper motion, or the pair has no distance.
"""

from __future__ import annotations

import math

from pydantic import Field

from dossier.astro import binary
from dossier.fmt import fmt_fixed
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    field_dispersion_kms: float = Field(
        default=25.0, gt=0, description="Per-axis velocity dispersion of field stars (km/s)."
    )
    group_dispersion_kms: float = Field(
        default=1.0, ge=0, description="Per-axis velocity dispersion allowed to associated but unbound pairs (km/s)."
    )
    decisive: float = Field(default=0.5, gt=0, description="|strength| above which the outcome is not neutral.")


def _log_gauss(x: float, s: float) -> float:
    return -0.5 * (x / s) ** 2 - math.log(s * math.sqrt(2 * math.pi))


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    pair = facts.pairs[subject]
    a, b = facts.stars[pair.first], facts.stars[pair.second]
    missing = [s.id for s in (a, b) if s.motion is None]
    if missing:
        return RULE.insufficient(subject, f"No proper motion for {' and '.join(missing)}.")
    if pair.first == pair.second:
        return RULE.insufficient(subject, f"Both members are represented by {pair.first}.")
    dist = facts.pair_distance_pc(subject)
    if dist is None:
        return RULE.insufficient(subject, "Neither member has a parallax, so motions cannot be turned into velocities.")
    assert a.motion is not None and b.motion is not None
    d_kpc = dist[1] / 1000.0
    k = binary.KM_S_PER_AU_YR * d_kpc  # km/s per mas/yr at the pair's distance
    d_ra, d_dec = a.motion.pmra - b.motion.pmra, a.motion.pmdec - b.motion.pmdec
    e_ra = math.hypot(a.motion.pmra_error, b.motion.pmra_error)
    e_dec = math.hypot(a.motion.pmdec_error, b.motion.pmdec_error)
    mass = facts.pair_mass(subject)
    v_orb = 0.0
    note = ""
    if mass is not None and pair.rho_arcsec is not None:
        v_orb = float(binary.circular_speed_kms(mass[0], pair.rho_arcsec * dist[1]))
    else:
        note = " No total mass (or separation): orbital motion is not allowed for, which leans against a physical pair."
    sigma_int = math.sqrt(v_orb**2 / 3 + settings.group_dispersion_kms**2)
    # components in km/s: (difference, measurement error)
    parts = [(d_ra * k, e_ra * k), (d_dec * k, e_dec * k)]
    used_rv = a.radial_velocity is not None and b.radial_velocity is not None
    sources = [a.motion.ref, b.motion.ref]
    if used_rv:
        ra_, rb_ = a.radial_velocity, b.radial_velocity
        parts.append((ra_.value - rb_.value, math.hypot(ra_.uncertainty, rb_.uncertainty)))
        sources += [r for r in (ra_.ref, rb_.ref) if r]
    log_lr = sum(
        _log_gauss(x, math.hypot(e, sigma_int)) - _log_gauss(x, math.hypot(e, settings.field_dispersion_kms))
        for x, e in parts
    )
    strength = log_lr / math.log(10)
    dv = math.sqrt(sum(x**2 for x, _ in parts))
    dmu = math.hypot(d_ra, d_dec)
    outcome = "supports" if strength > settings.decisive else "against" if strength < -settings.decisive else "neutral"
    what = "tangential and radial" if used_rv else "tangential"
    text = (f"The {what} velocity difference is {fmt_fixed(dv, 2)} km/s (Δμ = {fmt_fixed(dmu, 2)} mas/yr at {fmt_fixed(dist[1], 0)} pc); a physical "
            f"pair allows about {fmt_fixed(sigma_int, 2)} km/s per axis, a field star {fmt_fixed(settings.field_dispersion_kms, 0)} km/s. "
            f"A diagnostic: the verdict weighs the motions jointly in the pair model.{note}")
    quantities = (
        Quantity("delta_pm", "Proper-motion difference Δμ", dmu, "mas/yr"),
        Quantity("delta_v", f"Velocity difference ({what})", dv, "km/s", how="4.74047 μ d"),
        Quantity("orbital_speed", "Circular speed at the projected separation", v_orb, "km/s"),
        Quantity("sigma_internal", "Allowed internal dispersion per axis", sigma_int, "km/s"),
    )
    return RULE.assessment(subject, outcome, text, strength=strength, quantities=quantities,
                           statistic=Quantity("log10_lr", "log10 likelihood ratio", strength, ""),
                           sources=tuple(dict.fromkeys(sources)))


RULE = Rule(
    id="common-motion",
    title="Common motion through space",
    version=1,
    subject="pair",
    question="association",
    needs=("a proper motion for each member", "a parallax", "total mass (optional)", "radial velocities (optional)"),
    citation="El-Badry, K., Rix, H.-W. & Heintz, T. M. 2021, MNRAS 506, 2269 (velocities from proper motions); "
    "Dehnen, W. & Binney, J. J. 1998, MNRAS 298, 387 (field velocity dispersion)",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
)
