"""Closest approach of the system to the Sun.

Method
    In the linear-motion approximation of Bailer-Jones 2015, A&A 575, A35:
    with distance d, radial velocity v_r and tangential velocity
    v_t = 4.74047 μ d, the total speed is v² = v_r² + v_t², the time of
    closest approach t = −d v_r / v² (1 pc per km/s = 0.977792 Myr) and the
    distance then d_min = d v_t / v. Uncertainties by Monte Carlo over the
    parallax, proper motion and radial velocity. The peak apparent magnitude
    is m + 5 log10(d_min / d) for the combined light of the components that
    share the primary's parallax within 3σ (the paper warns that the linear
    approximation is biased for distant encounters: it ignores the Galactic
    potential).

Outcome
    Always ``neutral``: context.

Insufficient data
    The primary lacks a parallax, a proper motion or a radial velocity.
"""

from __future__ import annotations

import math

from pydantic import Field

from dossier.fmt import fmt_fixed
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    band: str = Field(default="V", description="Band of the peak magnitude.")
    samples: int = Field(default=10000, ge=500)
    seed: int = Field(default=20261202)


def applies(facts: SystemFacts, subject: str) -> bool:
    return subject == facts.system.primary


def combined_magnitude(facts: SystemFacts, band: str) -> tuple[float, list[str]] | None:
    """Magnitude of the light of the top-level components at the primary's distance."""
    primary = facts.stars[facts.system.primary]
    children = {m for p in facts.system.pairs if p.parent is not None for m in p.members}
    flux, used = 0.0, []
    for cid, star in facts.stars.items():
        if cid in children or band not in star.magnitudes:
            continue
        if cid != primary.id:
            if star.parallax is None or primary.parallax is None:
                continue
            z = abs(star.parallax.mean - primary.parallax.mean) / math.hypot(star.parallax.error_inflated,
                                                                              primary.parallax.error_inflated)
            if z > 3:
                continue
        flux += 10 ** (-0.4 * star.magnitudes[band].value)
        used.append(cid)
    return (-2.5 * math.log10(flux), used) if flux > 0 else None


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    from dossier.astro import kinematics

    star = facts.stars[subject]
    rv = star.radial_velocity
    if star.parallax is None or star.motion is None or rv is None:
        return RULE.insufficient(subject, f"{subject} lacks a parallax, a proper motion or a radial velocity.")
    enc = kinematics.closest_approach(star.parallax.mean, star.motion.pmra, star.motion.pmdec, rv.value,
                                      star.parallax.error_inflated, star.motion.pmra_error, star.motion.pmdec_error,
                                      rv.uncertainty, n_samples=settings.samples, rng=settings.seed)
    t, d, v = enc.time_myr, enc.distance_pc, enc.speed_kms
    quantities = [
        Quantity("time", "Time of closest approach", float(t.median), "Myr", low=float(t.p16), high=float(t.p84),
                 how="median and 16–84 % of the Monte Carlo"),
        Quantity("distance", "Distance at closest approach", float(d.median), "pc", low=float(d.p16), high=float(d.p84)),
        Quantity("speed", "Speed relative to the Sun", float(v.median), "km/s", low=float(v.p16), high=float(v.p84)),
    ]
    when = "from now" if t.median > 0 else "ago"
    text = (f"On straight-line motion the system passes the Sun {fmt_fixed(abs(float(t.median)), 2)} Myr {when} "
            f"(16–84 %: {fmt_fixed(float(t.p16), 2)} to {fmt_fixed(float(t.p84), 2)} Myr) at {fmt_fixed(float(d.median), 1)} pc "
            f"({fmt_fixed(float(d.p16), 1)}–{fmt_fixed(float(d.p84), 1)})")
    mag = combined_magnitude(facts, settings.band)
    if mag is not None:
        d_now = 1000.0 / star.parallax.mean
        peak = float(kinematics.peak_magnitude(mag[0], d_now, float(d.median)))
        quantities.append(Quantity("peak_magnitude", f"Peak combined {settings.band} magnitude", peak, "mag",
                                   how=f"light of {', '.join(mag[1])}"))
        text += f", when it shines at {settings.band} = {fmt_fixed(peak, 2)} (now {fmt_fixed(mag[0], 2)})"
    text += ". The linear approximation ignores the Galaxy's gravity and is biased for distant encounters."
    return RULE.assessment(subject, "neutral", text, quantities=tuple(quantities),
                           sources=tuple(dict.fromkeys(r for r in (star.motion.ref, rv.ref) if r)))


RULE = Rule(
    id="closest-approach",
    title="Closest approach to the Sun",
    version=1,
    subject="component",
    question="context",
    needs=("the primary's parallax, proper motion and radial velocity",),
    citation="Bailer-Jones, C. A. L. 2015, A&A 575, A35 (linear-motion approximation)",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
    applies=applies,
)
