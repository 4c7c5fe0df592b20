"""Radial-velocity agreement of a pair against the largest orbital speed.

Method
    The members' radial-velocity difference ΔRV is compared with the
    speeds a bound orbit allows at the projected separation s = ρ d: the
    circular speed v_c = √(G M / s) and the escape speed √2 v_c (Kepler's
    third law; common practice). Since the true separation is at least s,
    these are upper limits. A systematic allowance ``systematic_kms`` is
    added in quadrature for the difference in gravitational redshift and
    convective blueshift between stars of different kinds (a few hundred
    m/s between a giant and a dwarf; common practice, from memory).

Strength
    The log10 likelihood ratio bound : unbound of the measured ΔRV
    (:mod:`dossier.astro.binding`): bound, the true difference lies within
    the escape speed; unbound, it is above it, drawn from a loose group's
    dispersion ``group_dispersion_kms``. An imprecise ΔRV gives a ratio
    near 1. This line alone: the verdict does not multiply it in, because
    the pair model (``pair-model``) weighs the same velocities jointly.

Outcome
    ``supports`` above +0.5, ``against`` below −0.5, ``neutral`` between.

Insufficient data
    A member lacks a radial velocity, or the pair lacks a parallax, a
    separation or a total mass. A component with a radial-velocity series
    but no single value is a spectroscopic binary whose systemic velocity is
    needed: that comes with the orbit fit.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray
from pydantic import Field

from dossier.astro import binary, binding
from dossier.astro.binary import python_square
from dossier.fmt import fmt_fixed, fmt_signed
from dossier.rules.base import (
    OUTCOME_CODES,
    OUTCOME_NAMES,
    Assessment,
    Quantity,
    Rule,
    RuleSettings,
    columns,
    unfilled,
)
from dossier.rules.facts import SystemFacts
from dossier.rules.proper_motion_orbit import (
    LN_STRENGTH_LIMIT,
    binding_strength,
    outcome_codes,
)


class Settings(RuleSettings):
    systematic_kms: float = Field(default=0.5, ge=0, description="Systematic allowance between two stars' RVs (km/s).")
    group_dispersion_kms: float = Field(default=1.0, gt=0, description="Per-axis dispersion of unbound group members (km/s).")
    decisive: float = Field(default=0.5, gt=0)


KERNEL_KEYS = ("outcome", "strength", "statistic", "delta_rv", "delta_rv_uncertainty", "projected_separation",
               "circular_speed", "escape_speed", "p_bound")


def kernel(rv1: ArrayLike, rv_error1: ArrayLike, rv2: ArrayLike, rv_error2: ArrayLike, separation_arcsec: ArrayLike,
           distance_pc: ArrayLike, total_mass_msun: ArrayLike, settings: Settings) -> dict[str, NDArray]:
    """The rule's numbers for many pairs at once.

    Parameters
    ----------
    rv1, rv_error1, rv2, rv_error2 : array_like
        Radial velocities of the two members and their 1σ errors, km/s.
    separation_arcsec : array_like
        Separation of the pair, arcsec.
    distance_pc : array_like
        Distance of the pair, pc: the median of its posterior (``SystemFacts.pair_distance_pc``,
        the middle value).
    total_mass_msun : array_like
        Total mass of the pair, solar masses.
    settings : Settings
        The rule's settings.

    All of one shape (or broadcastable); NaN means missing.

    Returns
    -------
    dict of ndarray
        ``outcome`` (int8, :data:`~dossier.rules.base.OUTCOME_CODES`; −2 where an input is NaN),
        ``strength`` (log10 likelihood ratio bound : unbound, clipped to ±99), ``statistic``
        (|ΔRV| / σ), ``delta_rv`` and ``delta_rv_uncertainty`` (km/s, σ with the systematic
        allowance), ``projected_separation`` (au), ``circular_speed`` and ``escape_speed`` (km/s)
        and ``p_bound`` (P(bound) at even odds); NaN where insufficient.
    """
    cols, complete = columns(rv1, rv_error1, rv2, rv_error2, separation_arcsec, distance_pc, total_mass_msun)
    out = unfilled(complete.shape, KERNEL_KEYS[1:])
    if not complete.any():
        return out
    rows = ... if complete.all() else complete  # every pair complete: views, no copies
    v1, e1, v2, e2, rho, dist, mass = (c[rows] for c in cols)
    diff = v1 - v2
    sigma = np.sqrt(python_square(e1) + python_square(e2) + settings.systematic_kms**2)
    s_au = rho * dist
    v_c = binary.circular_speed_kms(mass, s_au)
    v_esc = binary.escape_speed_kms(mass, s_au)
    strength, p_bound = binding_strength(binding.log_lr_bound_line(diff, sigma, v_esc, settings.group_dispersion_kms,
                                                                   beyond=LN_STRENGTH_LIMIT))
    for name, value in (("outcome", outcome_codes(strength, settings.decisive)), ("strength", strength),
                        ("statistic", np.abs(diff) / sigma), ("delta_rv", diff), ("delta_rv_uncertainty", sigma),
                        ("projected_separation", s_au), ("circular_speed", v_c), ("escape_speed", v_esc),
                        ("p_bound", p_bound)):
        out[name][rows] = value
    return out


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    pair = facts.pairs[subject]
    a, b = facts.stars[pair.first], facts.stars[pair.second]
    missing = [f"radial velocity of {s.id}" for s in (a, b) if s.radial_velocity is None]
    dist = facts.pair_distance_pc(subject)
    mass = facts.pair_mass(subject)
    if dist is None:
        missing.append("parallax")
    if pair.rho_arcsec is None:
        missing.append("separation")
    if mass is None:
        missing.append("total mass")
    if missing:
        return RULE.insufficient(subject, f"Needs {', '.join(missing)}.")
    if pair.first == pair.second:
        return RULE.insufficient(subject, f"Both members are represented by {pair.first}.")
    assert a.radial_velocity and b.radial_velocity and dist and mass and pair.rho_arcsec
    one = kernel(*([v] for v in (a.radial_velocity.value, a.radial_velocity.uncertainty, b.radial_velocity.value,
                                 b.radial_velocity.uncertainty, pair.rho_arcsec, dist[1], mass[0])), settings=settings)
    if one["outcome"][0] == OUTCOME_CODES["insufficient"]:
        return RULE.insufficient(subject, "Needs numbers: a radial velocity, the distance, the separation or the total "
                                          "mass is not a number.")
    if one["delta_rv_uncertainty"][0] == 0.0:
        raise ZeroDivisionError("float division by zero")  # as the scalar formulas did: the rule fails
    diff, sigma, s_au, v_c, v_esc, strength, p_bound = (
        float(one[k][0]) for k in ("delta_rv", "delta_rv_uncertainty", "projected_separation", "circular_speed",
                                   "escape_speed", "strength", "p_bound"))
    outcome = OUTCOME_NAMES[int(one["outcome"][0]) + 2]
    text = (f"ΔRV = {fmt_signed(diff, 2)} ± {fmt_fixed(sigma, 2)} km/s against a circular speed of {fmt_fixed(v_c, 2)} km/s and an escape speed of "
            f"{fmt_fixed(v_esc, 2)} km/s for {fmt_fixed(mass[0], 2)} M☉ at {fmt_fixed(s_au, 0)} au. A diagnostic: the verdict weighs the RVs in the pair model.")
    for star in (a, b):
        if star.rv_from_orbit:
            text += f" {star.id}'s velocity is the systemic γ of its {star.radial_velocity.ref}."
    if outcome == "against":
        text += " The pair moves too fast to be bound."
    elif outcome == "neutral":
        text += " The measurement cannot tell bound from unbound."
    refs = [r for r in (a.radial_velocity.ref, b.radial_velocity.ref) if r]
    return RULE.assessment(
        subject, outcome, text, strength=strength, probability=p_bound,
        statistic=Quantity("z", "|ΔRV| / σ", float(one["statistic"][0]), "σ"),
        quantities=(
            Quantity("delta_rv", "Radial-velocity difference", diff, "km/s", sigma),
            Quantity("projected_separation", "Projected separation", s_au, "au"),
            Quantity("circular_speed", "Circular speed at that separation", v_c, "km/s"),
            Quantity("escape_speed", "Escape speed at that separation", v_esc, "km/s"),
            Quantity("p_bound", "P(bound) from this line alone, even prior", p_bound, ""),
        ),
        sources=tuple(dict.fromkeys((*refs, *mass[2]))),
    )


RULE = Rule(
    id="radial-velocity-agreement",
    title="Radial-velocity agreement",
    version=2,  # 2: likelihood ratio in closed form (normal CDFs)
    subject="pair",
    question="binding",
    needs=("a radial velocity for each member", "a parallax", "the separation", "the total mass"),
    citation="Kepler's third law (circular and escape speed at the projected separation); common practice",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
)
