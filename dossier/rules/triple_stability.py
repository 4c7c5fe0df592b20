"""Dynamical stability of a hierarchical triple.

Method
    A pair one of whose members is itself a pair (a member that is a pair id, or a component
    resolved by a pair whose ``parent`` it is) is a hierarchical triple (or a 2+2 quadruple: each
    inner pair is checked against the outer orbit, with the other member's total mass as the third
    body). It is stable, by the criterion of Mardling & Aarseth (2001, MNRAS 321, 398), when

        a_out/a_in > 2.8 (1 + q_out)^(2/5) (1 + e_out)^(2/5) (1 − e_out)^(−6/5) (1 − 0.3 i/180°),

    q_out = m_out/(m_in,1 + m_in,2), i the mutual inclination in degrees
    (:func:`dossier.astro.hierarchy.ma01_critical_ratio`). Usually only projected separations are
    known: the semimajor axes are then drawn as a = s/(s/a) for random orientations and moments
    and thermal eccentricities (f(e) = 2e), the mutual inclination isotropically, and the
    probability of stability is the fraction of stable draws. A published orbit of either pair
    fixes its semimajor axis (Kepler's third law from its period and the pair's mass) and, for
    the outer pair, its eccentricity; two visual orbits fix the mutual inclination up to the 180°
    ambiguity of each node (both values are drawn equally). Masses and the distance are drawn
    from their uncertainties. The draw is seeded by a hash of the inputs, so a dossier rebuilds
    byte for byte.

Outcome
    ``against`` when P(stable) < ``unstable_below``: the triple cannot be as described (a
    projected separation, a mass or the hierarchy itself is wrong, or a member is a chance
    neighbour). ``neutral`` otherwise. The question is ``context``: the assessment never enters
    the membership odds, but a contradiction is shown with the evidence.

Insufficient data
    No inner pair; a mass missing; neither a separation nor a published orbit for one of the
    orbits; no distance when one orbit is known in au and the other only in arcsec.
"""

from __future__ import annotations

import math

import numpy as np
from pydantic import Field

from dossier.astro import binary, hierarchy
from dossier.astro.seeding import seed_from
from dossier.fmt import fmt_fixed, fmt_sig
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    samples: int = Field(default=20000, ge=1000, le=2_000_000, description="Monte Carlo draws.")
    unstable_below: float = Field(default=0.05, gt=0, lt=1,
                                  description="P(stable) below which the triple is reported as unstable.")
    seed: int = Field(default=20260101, description="Mixed with a hash of the inputs into the seed of the draw.")


def inner_pairs(facts: SystemFacts, pair_id: str) -> list[tuple[str, str]]:
    """(member, inner pair id) for each member of a pair that is itself resolved into a pair."""
    pair = facts.pair_ids[pair_id]
    out = []
    for m in pair.members:
        if m in facts.pair_ids:
            out.append((m, m))
            continue
        inner = next((p for p in facts.system.pairs if p.parent == m and p.id != pair_id), None)
        if inner is not None:
            out.append((m, inner.id))
    return out


def applies(facts: SystemFacts, subject: str) -> bool:
    return bool(inner_pairs(facts, subject))


def _mass(facts: SystemFacts, member: str) -> tuple[float, float, tuple[str, ...]] | None:
    """A member's total mass: that of the pair resolving it when there is one, else its own."""
    inner = next((p.id for p in facts.system.pairs if p.parent == member), None)
    if inner is not None:
        m = facts.pair_mass(inner)
        if m is not None:
            return m
    return facts.member_mass(member)


def _orbit(facts: SystemFacts, pair_id: str):
    """The first published orbit of a pair that has a period (any kind)."""
    return next((o for o in facts.system.orbits if o.pair == pair_id), None)


def _draw_positive(rng: np.random.Generator, value: float, sigma: float, n: int) -> np.ndarray:
    x = rng.normal(value, sigma, n)
    return np.where(x > 0, x, value)  # a negative draw of a mass is no mass: keep the central value


def _split_normal(rng: np.random.Generator, q16: float, q50: float, q84: float, n: int) -> np.ndarray:
    z = rng.standard_normal(n)
    return np.where(z < 0, q50 + z * (q50 - q16), q50 + z * (q84 - q50))


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    inners = inner_pairs(facts, subject)
    if not inners:
        return RULE.insufficient(subject, "Neither member is resolved into a pair: not a hierarchical triple.")
    outer = facts.pairs[subject]
    outer_orbit = _orbit(facts, subject)
    dist = facts.pair_distance_pc(subject)
    worst = None
    for member, inner_id in inners:
        other = next(m for m in facts.pair_ids[subject].members if m != member)
        m_in, m_out = facts.pair_mass(inner_id), _mass(facts, other)
        if m_in is None or m_out is None:
            missing = inner_id if m_in is None else other
            return RULE.insufficient(subject, f"No mass for {missing}: the stability criterion needs all three masses.")
        inner_f = facts.pairs[inner_id]
        inner_orbit = _orbit(facts, inner_id)
        if inner_orbit is None and inner_f.rho_arcsec is None:
            return RULE.insufficient(subject, f"Neither a separation nor a published orbit of {inner_id}.")
        if outer_orbit is None and outer.rho_arcsec is None:
            return RULE.insufficient(subject, f"Neither a separation nor a published orbit of {subject}.")
        mixed_units = (inner_orbit is None) != (outer_orbit is None)
        if mixed_units and dist is None:
            return RULE.insufficient(subject, "No distance to compare a published orbit (au) with a separation (″).")
        inputs = (settings.seed, subject, inner_id, m_in[:2], m_out[:2], inner_f.rho_arcsec, outer.rho_arcsec,
                  dist, None if inner_orbit is None else inner_orbit.model_dump_json(),
                  None if outer_orbit is None else outer_orbit.model_dump_json())
        rng = np.random.default_rng(seed_from(*inputs))
        n = settings.samples
        mi = _draw_positive(rng, m_in[0], m_in[1], n)
        mo = _draw_positive(rng, m_out[0], m_out[1], n)
        d = _split_normal(rng, *dist, n) if dist is not None else np.full(n, 1.0)
        d = np.where(d > 0, d, dist[1] if dist is not None else 1.0)
        how = []
        kwargs: dict = {}
        if inner_orbit is not None:
            kwargs["a_in"] = binary.semimajor_axis_au(inner_orbit.period_years, mi)
            how.append(f"a(in) from the published orbit of {inner_id} (P = {fmt_sig(inner_orbit.period_years, 3)} yr)")
        else:
            kwargs["s_in"] = inner_f.rho_arcsec * d
            how.append(f"a(in) drawn from ρ = {fmt_sig(inner_f.rho_arcsec, 3)}″ of {inner_id}")
        if outer_orbit is not None:
            kwargs["a_out"] = binary.semimajor_axis_au(outer_orbit.period_years, mi + mo)
            if outer_orbit.eccentricity is not None:
                kwargs["e_out"] = outer_orbit.eccentricity.value
            how.append(f"a(out) from the published orbit of {subject}")
        else:
            kwargs["s_out"] = outer.rho_arcsec * d
            how.append(f"a(out) drawn from ρ = {fmt_sig(outer.rho_arcsec, 3)}″")
        vis_in, vis_out = facts.visual_orbit(inner_id), facts.visual_orbit(subject)
        if vis_in is not None and vis_out is not None:
            i1, n1, i2, n2 = (vis_in.inclination.value, vis_in.node.value, vis_out.inclination.value, vis_out.node.value)
            both = np.array([hierarchy.mutual_inclination(i1, n1, i2, n2), hierarchy.mutual_inclination(i1, n1 + 180.0, i2, n2)])
            kwargs["i_mut_deg"] = both[rng.integers(0, 2, n)]
            how.append(f"mutual inclination {fmt_fixed(both[0], 0)}° or {fmt_fixed(both[1], 0)}° (nodes ambiguous by 180°)")
        else:
            how.append("mutual inclination isotropic")
        draws = hierarchy.stability_probability(rng, n, mo / mi, **kwargs)
        refs = tuple(m_in[2]) + tuple(m_out[2])
        if worst is None or draws.probability < worst[1].probability:
            worst = (inner_id, draws, how, refs, m_in, m_out)
    inner_id, draws, how, refs, m_in, m_out = worst
    p = draws.probability
    r16, r50, r84 = np.percentile(draws.ratio, [16, 50, 84])
    c16, c50, c84 = np.percentile(draws.critical, [16, 50, 84])
    q = m_out[0] / m_in[0]
    quantities = (
        Quantity("p_stable", "P(stable)", p, "", how="; ".join(how)),
        Quantity("a_ratio", "a(out)/a(in)", float(r50), "", low=float(r16), high=float(r84),
                 how=f"inner pair {inner_id}, Monte Carlo of {draws.a_in.size} draws"),
        Quantity("critical_ratio", "Critical a(out)/a(in) (Mardling & Aarseth 2001)", float(c50), "", low=float(c16),
                 high=float(c84), how=f"q(out) = {fmt_fixed(q, 2)}"),
        Quantity("q_out", "Outer mass ratio q(out)", q, ""),
    )
    verdict = ("unstable" if p < settings.unstable_below else "possibly unstable" if p < 0.5
               else "probably stable" if p < 1 - settings.unstable_below else "stable")
    text = (f"With {inner_id} inside, {subject} is {verdict} by the Mardling & Aarseth criterion: {_p_stable(p, settings.samples)} "
            f"(a(out)/a(in) ≈ {fmt_sig(r50, 3)}, 16–84 %: {fmt_sig(r16, 3)}–{fmt_sig(r84, 3)}; critical ≈ {fmt_sig(c50, 3)}).")
    if p < settings.unstable_below:
        text += (" A triple so tight cannot last: a separation, a mass or the hierarchy as described is wrong, "
                 "or a member is a chance neighbour.")
    outcome = "against" if p < settings.unstable_below else "neutral"
    sources = tuple(dict.fromkeys(r for r in refs + facts.pairs[inner_id].separation_refs + facts.pairs[subject].separation_refs if r))
    return RULE.assessment(subject, outcome, text, probability=p, quantities=quantities, sources=sources,
                           statistic=quantities[0])


def _p_stable(p: float, n: int) -> str:
    """'P(stable) = 0.77', at the precision of the other probabilities; beyond what n draws resolve, a bound."""
    from dossier.fmt import fmt_number, p_statement

    if p <= 0.0:
        return f"P(stable) < {fmt_number(1.0 / n, 1)} (no stable draw of {n})"
    if p >= 1.0:
        return f"P(stable) > {fmt_number(1.0 - 1.0 / n, 6)} (every one of {n} draws stable)"
    return p_statement("P(stable)", p)


RULE = Rule(
    id="triple-stability",
    title="Dynamical stability of the hierarchy",
    version=1,
    subject="pair",
    question="context",
    needs=("an inner pair (a member resolved into a pair)", "the masses of all three stars",
           "separations or published orbits of both pairs", "a parallax (when one orbit is known in au)"),
    citation="Mardling, R. A. & Aarseth, S. J. 2001, MNRAS 321, 398 (stability criterion); semimajor axes drawn "
    "from projected separations for random orbits (thermal eccentricities: Jeans 1919, MNRAS 79, 408)",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
    applies=applies,
)
