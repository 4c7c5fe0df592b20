"""Galactic space velocity (U, V, W) of a component.

Method
    The position, parallax, proper motion and radial velocity are turned
    into heliocentric Galactic velocities with astropy's coordinate frames
    (ICRS to Galactic, Cartesian differentials; Astropy Collaboration 2022,
    ApJ 935, 167): U towards the Galactic centre, V towards Galactic
    rotation, W towards the north Galactic pole, not corrected for the solar
    motion. Uncertainties by Monte Carlo sampling of the inputs
    (:func:`dossier.astro.kinematics.space_velocity`). A component whose
    velocity comes from a fitted spectroscopic orbit uses its systemic γ.

Outcome
    Always ``neutral``: context for the neighbours and for the reader.

Insufficient data
    Not given: the rule speaks only about components with a position, a
    parallax, a proper motion and a radial velocity.
"""

from __future__ import annotations

import numpy as np
from pydantic import Field

from dossier.cache import Cache
from dossier.fmt import fmt_fixed
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    samples: int = Field(default=4000, ge=500)
    seed: int = Field(default=20261203)


def applies(facts: SystemFacts, subject: str) -> bool:
    s = facts.stars[subject]
    return None not in (s.parallax, s.motion, s.position, s.radial_velocity)


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    from dossier.astro import kinematics

    s = facts.stars[subject]
    if not applies(facts, subject):
        return RULE.insufficient(subject, f"{subject} lacks a position, parallax, proper motion or radial velocity.")
    args = [s.position.ra, s.position.dec, s.parallax.mean, s.motion.pmra, s.motion.pmdec, s.radial_velocity.value,
            s.parallax.error_inflated, s.motion.pmra_error, s.motion.pmdec_error, s.radial_velocity.uncertainty]

    def compute() -> dict:  # astropy's frames are slow to import: cached (dossier/cache.py)
        uvw = kinematics.space_velocity(*args, n_samples=settings.samples, rng=settings.seed)
        return {"mean": np.asarray(uvw.mean).tolist(), "std": np.asarray(uvw.std).tolist()}

    stored = (facts.cache or Cache(None)).get_or_compute(
        "uvw-one", {"inputs": args, "n": settings.samples, "seed": settings.seed}, compute)
    (u, v, w), (su, sv, sw) = stored["mean"], stored["std"]
    text = (f"{subject} moves at (U, V, W) = ({fmt_fixed(u, 2)} ± {fmt_fixed(su, 2)}, {fmt_fixed(v, 2)} ± {fmt_fixed(sv, 2)}, {fmt_fixed(w, 2)} ± {fmt_fixed(sw, 2)}) km/s, "
            "heliocentric.")
    if s.rv_from_orbit:
        text += f" Its radial velocity is the systemic γ of its {s.radial_velocity.ref}."
    return RULE.assessment(
        subject, "neutral", text,
        quantities=(Quantity("U", "U (towards the Galactic centre)", u, "km/s", su),
                    Quantity("V", "V (towards Galactic rotation)", v, "km/s", sv),
                    Quantity("W", "W (towards the north Galactic pole)", w, "km/s", sw)),
        sources=tuple(dict.fromkeys(r for r in (s.motion.ref, s.radial_velocity.ref) if r)),
    )


RULE = Rule(
    id="space-velocity",
    title="Galactic space velocity",
    version=1,
    subject="component",
    question="context",
    needs=("position, parallax, proper motion and radial velocity",),
    citation="Astropy Collaboration 2022, ApJ 935, 167 (coordinate frames); Monte Carlo propagation (common practice)",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
    applies=applies,
)
