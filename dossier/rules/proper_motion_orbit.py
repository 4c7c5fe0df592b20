"""Proper-motion difference against the largest motion of a bound orbit.

Method
    A bound pair of total mass M at projected separation θ and parallax ϖ
    cannot show a relative proper motion larger than its orbital speed
    allows. For a circular orbit seen face-on at the projected separation,
    Δμ_orbit = 0.1987 √(M/M☉) (ϖ/mas)^1.5 (θ/″)^−0.5 mas/yr (El-Badry, Rix &
    Heintz 2021, MNRAS 506, 2269, eq. 1, there for M = 5 M☉ where the
    coefficient is 0.44; written here for any mass), and no bound orbit at
    all can exceed the escape value √2 Δμ_orbit. The uncertainty of Δμ is
    their σ_Δμ (same paper). Accepted as consistent with a bound orbit when
    Δμ < Δμ_orbit + 2σ_Δμ, the paper's criterion.

Strength
    The log10 likelihood ratio bound : unbound of the measured Δμ
    (:mod:`dossier.astro.binding`): bound pairs have a true difference
    anywhere within the escape value, unbound members of a loose group one
    above it, drawn from the group's dispersion ``group_dispersion_kms``.
    A Δμ measured less precisely than the escape value gives a ratio near 1.
    Projection makes the test one-sided: the true 3-D speed and separation
    can only make a bound orbit harder, so passing it is necessary, not
    sufficient.

Outcome
    ``supports`` when the strength is above +0.5 (and the El-Badry et al.
    criterion Δμ < Δμ_orbit + 2σ_Δμ is reported beside it); ``against``
    below −0.5; ``neutral`` between.

Insufficient data
    A member lacks a proper motion, the pair lacks a parallax, a
    separation or a total mass.
"""

from __future__ import annotations

import math

from pydantic import Field

from dossier.astro import binary, binding
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    acceptance_sigma: float = Field(default=2.0, gt=0, description="The '+2σ' of the El-Badry et al. criterion.")
    group_dispersion_kms: float = Field(
        default=1.0, gt=0, description="Per-axis velocity dispersion of unbound group members (km/s)."
    )
    decisive: float = Field(default=0.5, gt=0, description="|strength| above which the outcome is not neutral.")


STRENGTH_LIMIT = 99.0


def binding_strength(log_lr: float) -> tuple[float, float]:
    """log10 likelihood ratio (clipped to ±99 for display and JSON) and P(bound) at even prior odds."""
    strength = max(-STRENGTH_LIMIT, min(STRENGTH_LIMIT, log_lr / math.log(10)))
    return strength, 1.0 / (1.0 + 10.0 ** (-strength))


def lr_text(strength: float) -> str:
    """'10^1.3', or 'below 10^-99' / 'above 10^99' where the strength was clipped."""
    if strength <= -STRENGTH_LIMIT:
        return f"below 10^-{STRENGTH_LIMIT:.0f}"
    if strength >= STRENGTH_LIMIT:
        return f"above 10^{STRENGTH_LIMIT:.0f}"
    return f"10^{strength:.1f}"


def outcome_of(strength: float, decisive: float) -> str:
    return "supports" if strength > decisive else "against" if strength < -decisive else "neutral"


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    pair = facts.pairs[subject]
    a, b = facts.stars[pair.first], facts.stars[pair.second]
    missing = [f"proper motion of {s.id}" for s in (a, b) if s.motion is None]
    plx = facts.pair_parallax(subject)
    mass = facts.pair_mass(subject)
    if plx is None:
        missing.append("parallax")
    if pair.rho_arcsec is None:
        missing.append("separation")
    if mass is None:
        missing.append("total mass")
    if missing:
        return RULE.insufficient(subject, f"Needs {', '.join(missing)}.")
    if pair.first == pair.second:
        return RULE.insufficient(subject, f"Both members are represented by {pair.first}.")
    assert a.motion and b.motion and plx and mass and pair.rho_arcsec
    d_ra, d_dec = a.motion.pmra - b.motion.pmra, a.motion.pmdec - b.motion.pmdec
    var_ra = a.motion.pmra_error**2 + b.motion.pmra_error**2
    var_dec = a.motion.pmdec_error**2 + b.motion.pmdec_error**2
    dmu = math.hypot(d_ra, d_dec)
    sigma = float(binary.sigma_delta_mu(d_ra, d_dec, var_ra, var_dec))
    orbit = float(binary.delta_mu_orbit(mass[0], plx[0], pair.rho_arcsec))
    escape = float(binary.delta_mu_escape(mass[0], plx[0], pair.rho_arcsec))
    d_kpc = 1.0 / plx[0]
    group = settings.group_dispersion_kms / (binary.KM_S_PER_AU_YR * d_kpc)
    sigma_axis = math.sqrt((var_ra + var_dec) / 2)
    strength, p_bound = binding_strength(float(binding.log_lr_bound_planar(dmu, sigma_axis, escape, group)))
    outcome = outcome_of(strength, settings.decisive)
    el_badry = dmu < orbit + settings.acceptance_sigma * sigma
    text = (f"Δμ = {dmu:.3f} ± {sigma:.3f} mas/yr against {orbit:.3f} mas/yr for a circular orbit of {mass[0]:.2f} M☉ "
            f"at {pair.rho_arcsec:.2f}″ and {escape:.3f} mas/yr for escape: "
            + ("within the El-Badry et al. limit" if el_badry else "beyond the El-Badry et al. limit")
            + f"; likelihood ratio bound : unbound {lr_text(strength)}.")
    if outcome == "against":
        text += " The pair moves too fast to be bound."
    elif outcome == "neutral":
        text += " The measurement cannot tell bound from unbound."
    quantities = (
        Quantity("delta_pm", "Proper-motion difference Δμ", dmu, "mas/yr", sigma, how="σ_Δμ of El-Badry et al. 2021"),
        Quantity("orbit_limit", "Largest circular-orbit Δμ", orbit, "mas/yr",
                 how=f"M = {mass[0]:.2f} M☉, ϖ = {plx[0]:.3f} mas, θ = {pair.rho_arcsec:.3f}″"),
        Quantity("escape_limit", "Escape Δμ", escape, "mas/yr", how="√2 × the circular limit"),
        Quantity("p_bound", "P(bound) from this line alone, even prior", p_bound, ""),
    )
    return RULE.assessment(
        subject, outcome, text, strength=strength, probability=p_bound,
        statistic=Quantity("ratio", "Δμ / Δμ_orbit", dmu / orbit, ""), quantities=quantities,
        sources=tuple(dict.fromkeys((a.motion.ref, b.motion.ref, *mass[2]))),
    )


RULE = Rule(
    id="proper-motion-orbit",
    title="Proper motion against a bound orbit",
    version=1,
    subject="pair",
    question="binding",
    needs=("a proper motion for each member", "a parallax", "the separation", "the total mass"),
    citation="El-Badry, K., Rix, H.-W. & Heintz, T. M. 2021, MNRAS 506, 2269",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
)
