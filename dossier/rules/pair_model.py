"""The pair model: bound, co-moving or a chance alignment, from all the astrometry at once.

Method
    One joint likelihood of the two stars' parallaxes, proper motions and
    radial velocities under three hypotheses (:mod:`dossier.astro.pairmodel`):
    a bound Keplerian orbit, a co-moving but unbound pair, and an unrelated
    field star seen close by chance. Distances are marginalised with the
    exponentially decreasing space density prior (Bailer-Jones 2015, PASP
    127, 994); the bound hypothesis takes random orientations, phases and a
    thermal eccentricity distribution with a semimajor-axis prior after
    Öpik 1924 and El-Badry & Rix 2018 (MNRAS 480, 4884); the field star
    takes the velocity ellipsoids of Bensby, Feltzing & Lundström 2003 (A&A
    410, 527) about the mean streaming motion, seen from the Sun (Schönrich,
    Binney & Dehnen 2010, MNRAS 403, 1829), and the density of field stars
    (Bloom, Kulkarni & Djorgovski 2002, AJ 123, 1111). Velocity differences
    are taken in 3-D with the perspective of the two positions; unresolved
    inner companions are a mixture term (periods after Raghavan et al.
    2010, ApJS 190, 1); errors get floors, inflation and an outlier
    fraction. The priors are ``[pair_model]`` settings, each with its
    source on the page "How verdicts are computed".

Strength
    The log10 posterior odds physical : chance alignment that the joint
    likelihood and the separation prior give (before any independent line
    of evidence); its terms (separation prior, parallaxes, motions) and
    those of bound : co-moving are in the quantities and in the verdict.

Outcome
    ``supports`` when the odds exceed +1 (ten to one), ``against`` below −1,
    ``neutral`` between.

Insufficient data
    A member without a parallax, no separation, or no field-star density
    (from the evidence, dossier.toml or ``[pair_model] field_density_per_deg2``).
"""

from __future__ import annotations

import math

import numpy as np
from pydantic import Field

from dossier.astro import angles, pairmodel
from dossier.fmt import fmt_fixed, fmt_signed
from dossier.rules import chance_alignment
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    decisive: float = Field(default=1.0, gt=0, description="|log10 odds| above which the outcome is not neutral.")


def columns(facts: SystemFacts, subject: str) -> dict[str, np.ndarray] | str:
    """The pair's input to :func:`dossier.astro.pairmodel.evaluate` (one row), or why there is none."""
    pair = facts.pairs[subject]
    if pair.first == pair.second:
        return f"Both members are represented by {pair.first}."
    a, b = facts.stars[pair.first], facts.stars[pair.second]
    plx = {s.id: s.parallax for s in (a, b)}
    shared = False
    parent = facts.pair_ids[subject].parent
    if any(p is None for p in plx.values()) and parent is not None:
        # a close pair that the astrometry does not resolve: both members share the parent's parallax
        host = facts.stars.get(facts.representative(parent))
        if host is not None and host.parallax is not None:
            plx = {k: host.parallax for k in plx}
            shared = True
    missing = [k for k, p in plx.items() if p is None]
    if missing:
        return f"No parallax for {' and '.join(missing)}."
    if pair.rho_arcsec is None or pair.rho_arcsec <= 0:
        return "No separation."
    found = chance_alignment.density_table(facts, subject)
    density = math.nan
    if not isinstance(found, str):
        density = chance_alignment.density_at(found[1], found[2])
    elif facts.settings.pair_model.field_density_per_deg2 is None:
        return found + " (or set [pair_model] field_density_per_deg2)"
    # positions: the first member's (else the system's), the second at the pair's separation and angle
    first = a.position or facts.system.position
    ra1, dec1 = first.ra, first.dec
    ra1 = getattr(ra1, "value", ra1)
    dec1 = getattr(dec1, "value", dec1)
    ra2, dec2 = angles.offset_position(ra1, dec1, pair.rho_arcsec, pair.theta_deg or 0.0)
    row: dict[str, float] = {"ra1": ra1, "dec1": dec1, "ra2": float(ra2), "dec2": float(dec2),
                             "field_density": density, "shared_parallax": 1.0 if shared else 0.0}
    parents = {p.parent for p in facts.system.pairs if p.parent}
    pair_members = facts.pair_ids[subject].members
    for i, (member, star) in enumerate(zip(pair_members, (a, b)), 1):
        p = plx[star.id]
        assert p is not None
        row[f"parallax{i}"], row[f"parallax_error{i}"] = p.mean, p.error_inflated
        if star.motion is not None:
            m = star.motion
            row.update({f"pmra{i}": m.pmra, f"pmra_error{i}": m.pmra_error, f"pmdec{i}": m.pmdec,
                        f"pmdec_error{i}": m.pmdec_error, f"pmra_pmdec_corr{i}": m.correlation})
        if star.radial_velocity is not None:
            row[f"rv{i}"], row[f"rv_error{i}"] = star.radial_velocity.value, star.radial_velocity.uncertainty
            row[f"rv_systemic{i}"] = 1.0 if star.rv_from_orbit else 0.0
        mass = facts.member_mass(member)
        if mass is not None:
            row[f"mass{i}"], row[f"mass_error{i}"] = mass[0], mass[1]
        elif "V" in star.magnitudes:  # as dossier screen does: main-sequence mass from the magnitude
            from dossier.screen import estimate_mass

            m = float(estimate_mass(np.array([star.magnitudes["V"].value]), np.array([p.mean]))[0])
            if math.isfinite(m):
                row[f"mass{i}"], row[f"mass_error{i}"] = m, pairmodel.ESTIMATED_MASS_LN_ERROR * m
        # a member that is itself a pair, or that has a companion of its own, is a known binary
        known_binary = member not in facts.system.components or member in parents or star.rv_from_orbit
        row[f"inner{i}"] = 1.0 if known_binary else math.nan
    return {k: np.array([v], float) for k, v in row.items()}


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    cols = columns(facts, subject)
    if isinstance(cols, str):
        return RULE.insufficient(subject, cols)
    r = pairmodel.evaluate(cols, facts.settings.pair_model, facts.length_scale_kpc)
    if not bool(r["usable"][0]):
        return RULE.insufficient(subject, "The parallaxes, separation or field density are not usable numbers.")
    v = {k: float(np.asarray(x)[0]) for k, x in r.items()}
    odds = math.log10(math.e) * (float(np.logaddexp(v["log_bound"], v["log_comoving"])) - v["log_chance"])
    outcome = "supports" if odds > settings.decisive else "against" if odds < -settings.decisive else "neutral"
    pair = facts.pairs[subject]
    motion = ("proper motions and radial velocities" if bool(r["has_rv"][0]) else
              "proper motions" if bool(r["has_motion"][0]) else "no motions (none known for both stars)")
    text = (f"Weighed jointly: separation prior {fmt_signed(v['prior_log10'], 2)}, parallaxes {fmt_signed(v['parallax_log10'], 2)}, "
            f"{motion} {fmt_signed(v['motion_log10'], 2)} in log10 odds physical : chance; bound : co-moving "
            f"{fmt_signed(v['binding_prior_log10'] + v['binding_motion_log10'], 2)}.")
    if bool(r["has_motion"][0]):
        text += (f" Velocity difference {fmt_fixed(v['delta_v_tangential_kms'], 2)} ± {fmt_fixed(v['sigma_v_tangential_kms'], 2)} km/s on "
                 f"the sky (corrected for perspective) against a circular speed of {fmt_fixed(v['circular_speed_kms'], 2)} km/s "
                 f"at {fmt_fixed(v['projected_separation_au'], 0)} au.")
    def q(name, label, unit="", how=""):
        return Quantity(name, label, v[name], unit, how=how)

    quantities = (
        q("p_bound", "P(bound), this model alone"), q("p_comoving", "P(co-moving), this model alone"),
        q("p_chance", "P(chance alignment), this model alone"),
        q("prior_log10", "Separation prior, log10 odds physical : chance", how="companion against field-star density"),
        q("parallax_log10", "Parallaxes, log10 odds physical : chance", how="Bayes factor, robust"),
        q("motion_log10", "Motions, log10 odds physical : chance", how="joint likelihood given the parallaxes"),
        q("binding_prior_log10", "Separation prior, log10 odds bound : co-moving"),
        q("binding_motion_log10", "Motions, log10 odds bound : co-moving"),
        q("log_bound", "ln evidence, bound"), q("log_comoving", "ln evidence, co-moving"),
        q("log_chance", "ln evidence, chance alignment"),
        q("distance_pc", "Distance (median of the pair's posterior)", "pc"),
        q("projected_separation_au", "Projected separation", "au"),
        q("circular_speed_kms", "Circular speed at the projected separation", "km/s"),
        q("delta_v_tangential_kms", "Velocity difference on the sky (perspective removed)", "km/s"),
        q("delta_v_radial_kms", "Radial-velocity difference (perspective removed)", "km/s"),
        q("total_mass_msun", "Total mass used", "M☉"),
    )
    a, b = facts.stars[pair.first], facts.stars[pair.second]
    sources = [s.ref for st in (a, b) if st.parallax for s in st.parallax.sources]
    if cols["shared_parallax"][0] == 1:
        text += " Both members have the one parallax of the unresolved component: it gives the distance only."
    sources += [st.motion.ref for st in (a, b) if st.motion]
    for name, st in ((pair.first, a), (pair.second, b)):
        if st.motion is not None and st.motion.how:
            text += f" Proper motion of {name}: {st.motion.how}."
    sources += [st.radial_velocity.ref for st in (a, b) if st.radial_velocity and st.radial_velocity.ref]
    return RULE.assessment(subject, outcome, text, strength=odds, quantities=quantities,
                           statistic=Quantity("log10_odds", "log10 odds physical : chance", odds, ""),
                           sources=tuple(dict.fromkeys(sources)))


RULE = Rule(
    id="pair-model",
    title="Pair model (bound, co-moving or chance)",
    version=1,
    subject="pair",
    question="joint",
    needs=("a parallax for each member", "the separation", "a field-star density",
           "proper motions, radial velocities and masses (optional)"),
    citation="Bailer-Jones, C. A. L. 2015, PASP 127, 994; El-Badry, K. & Rix, H.-W. 2018, MNRAS 480, 4884; "
    "Bensby, T., Feltzing, S. & Lundström, I. 2003, A&A 410, 527; Schönrich, R., Binney, J. & Dehnen, W. 2010, "
    "MNRAS 403, 1829; Raghavan, D. et al. 2010, ApJS 190, 1; Bloom, J. S., Kulkarni, S. R. & Djorgovski, S. G. "
    "2002, AJ 123, 1111",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
)
