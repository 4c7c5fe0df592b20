"""Neighbours: does the system share its motion with the stars around it?

Method
    For the system's primary and every neighbour listed in the evidence with
    a parallax and a proper motion, the Galactic space velocity (U, V, W) is
    computed with astropy's coordinate frames, its uncertainty propagated by
    Monte Carlo sampling of the parallax, proper motion and radial velocity
    (:func:`dossier.astro.kinematics.space_velocity`). For each neighbour:
    the separation in space from the system and the size of the velocity
    difference |Δv|. A neighbour shares the system's motion when
    |Δv| − 2σ is below ``group_dispersion_kms``, the internal velocity
    dispersion of a loose group (1–2 km/s; common practice). Without a radial
    velocity only the tangential difference can be tested (v_t = 4.74047 μ d
    at each star's own distance): the neighbour is then listed as
    ``unknown`` unless the tangential difference alone already excludes
    common motion.

Outcome
    Always ``neutral``: context for a reader judging whether the system
    belongs to a wider group. The details list every neighbour.

Insufficient data
    The primary lacks a parallax, a proper motion or a radial velocity, or no
    neighbour has astrometry.
"""

from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
from pydantic import Field

from dossier.cache import Cache
from dossier.fmt import fmt_fixed, fmt_sig
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts


class Settings(RuleSettings):
    group_dispersion_kms: float = Field(default=2.0, gt=0, description="Velocity dispersion of a loose group (km/s).")
    samples: int = Field(default=4000, ge=500)
    seed: int = Field(default=20261201)


def applies(facts: SystemFacts, subject: str) -> bool:
    return subject == facts.system.primary and bool(facts.system.neighbours)


def _neighbour_astrometry(n):
    best = [a for a in n.astrometry if a.ra is not None and a.parallax is not None and a.pmra is not None]
    return min(best, key=lambda a: a.parallax.uncertainty) if best else None


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    from dossier.astro import binary, kinematics

    star = facts.stars[subject]
    if star.parallax is None or star.motion is None or star.position is None:
        return RULE.insufficient(subject, f"{subject} lacks a parallax, a proper motion or a position.")
    rows = []
    for n in facts.system.neighbours:
        a = _neighbour_astrometry(n)
        if a is not None:
            rows.append((n, a))
    if not rows:
        return RULE.insufficient(subject, "No neighbour has a position, a parallax and a proper motion.")
    rv = star.radial_velocity
    ra = np.array([star.position.ra] + [a.ra.value for _, a in rows])
    dec = np.array([star.position.dec] + [a.dec.value for _, a in rows])
    plx = np.array([star.parallax.mean] + [a.parallax.value for _, a in rows])
    splx = np.array([star.parallax.error_inflated] + [a.parallax.uncertainty for _, a in rows])
    pmra = np.array([star.motion.pmra] + [a.pmra.value for _, a in rows])
    spmra = np.array([star.motion.pmra_error] + [a.pmra.uncertainty for _, a in rows])
    pmdec = np.array([star.motion.pmdec] + [a.pmdec.value for _, a in rows])
    spmdec = np.array([star.motion.pmdec_error] + [a.pmdec.uncertainty for _, a in rows])
    has_rv = np.array([rv is not None] + [n.radial_velocity is not None for n, _ in rows])
    vr = np.array([rv.value if rv else 0.0] + [n.radial_velocity.value if n.radial_velocity else 0.0 for n, _ in rows])
    svr = np.array([rv.uncertainty if rv else 0.0] +
                   [n.radial_velocity.uncertainty if n.radial_velocity else 0.0 for n, _ in rows])
    def compute() -> dict:  # astropy's frames cost ~0.8 s to import: the result is cached (dossier/cache.py)
        uvw = kinematics.space_velocity(ra, dec, plx, pmra, pmdec, vr, splx, spmra, spmdec, svr,
                                        n_samples=settings.samples, rng=settings.seed)
        diff = kinematics.velocity_difference(uvw.samples[1:], uvw.samples[0][None, :, :])
        return {"mean": uvw.mean.tolist(), "std": uvw.std.tolist(), "median": diff.median.tolist(),
                "p16": diff.p16.tolist(), "p84": diff.p84.tolist()}

    inputs = [a.tolist() for a in (ra, dec, plx, pmra, pmdec, vr, splx, spmra, spmdec, svr)]
    cache = facts.cache or Cache(None)
    stored = cache.get_or_compute("uvw", {"inputs": inputs, "n": settings.samples, "seed": settings.seed}, compute)
    uvw = SimpleNamespace(mean=np.array(stored["mean"]), std=np.array(stored["std"]))
    diff = SimpleNamespace(median=np.array(stored["median"]), p16=np.array(stored["p16"]), p84=np.array(stored["p84"]))
    dist = 1000.0 / plx
    sep = kinematics.separation_3d(ra[0], dec[0], dist[0], ra[1:], dec[1:], dist[1:])
    k = binary.KM_S_PER_AU_YR
    details, shares_motion, sharing = [], [], 0  # shares_motion: 1 yes, 0 no, NaN unknown
    for i, (n, _) in enumerate(rows):
        if has_rv[0] and has_rv[i + 1]:
            half = (diff.p84[i] - diff.p16[i]) / 2
            shares = diff.median[i] - 2 * half < settings.group_dispersion_kms
            verdict = "shares the motion" if shares else "moves differently"
            sharing += int(shares)
            shares_motion.append(1.0 if shares else 0.0)
            details.append(f"{n.id}: {fmt_fixed(sep[i], 1)} pc away, |Δv| = {fmt_fixed(diff.median[i], 1)} (16–84 %: {fmt_fixed(diff.p16[i], 1)}–"
                           f"{fmt_fixed(diff.p84[i], 1)}) km/s: {verdict}.")
        else:
            # tangential velocities at each star's own distance
            vt0 = k * np.array([pmra[0], pmdec[0]]) / plx[0]
            vt = k * np.array([pmra[i + 1], pmdec[i + 1]]) / plx[i + 1]
            dvt = float(np.hypot(*(vt - vt0)))
            excluded = dvt > 3 * settings.group_dispersion_kms
            shares_motion.append(0.0 if excluded else math.nan)
            details.append(f"{n.id}: {fmt_fixed(sep[i], 1)} pc away, no radial velocity; tangential |Δv| = {fmt_fixed(dvt, 1)} km/s: "
                           + ("moves differently." if excluded else "unknown."))
    per_star = []
    for i, (n, a) in enumerate(rows):
        share = shares_motion[i]
        per_star += [
            Quantity(f"pm_{n.id}", f"Proper motion of {n.id} (east, north)", float(math.hypot(pmra[i + 1], pmdec[i + 1])),
                     "mas/yr", float(max(spmra[i + 1], spmdec[i + 1])), low=float(pmra[i + 1]), high=float(pmdec[i + 1]),
                     how="low = μα*, high = μδ"),
            Quantity(f"shares_{n.id}", f"{n.id} shares the motion (1 yes, 0 no)", share, ""),
        ]
        if has_rv[i + 1] and has_rv[0]:
            per_star += [Quantity(f"U_{n.id}", f"U of {n.id}", float(uvw.mean[i + 1][0]), "km/s", float(uvw.std[i + 1][0])),
                         Quantity(f"V_{n.id}", f"V of {n.id}", float(uvw.mean[i + 1][1]), "km/s", float(uvw.std[i + 1][1]))]
    u, v, w = uvw.mean[0]
    su, sv, sw = uvw.std[0]
    quantities = (
        Quantity("U", "U of the primary (towards the Galactic centre)", float(u), "km/s", float(su)),
        Quantity("V", "V (towards Galactic rotation)", float(v), "km/s", float(sv)),
        Quantity("W", "W (towards the north Galactic pole)", float(w), "km/s", float(sw)),
        Quantity("sharing", "Neighbours sharing the motion", float(sharing), "", how=f"of {len(rows)}"),
        *per_star,
    )
    text = (f"{subject} moves at (U, V, W) = ({fmt_fixed(u, 1)}, {fmt_fixed(v, 1)}, {fmt_fixed(w, 1)}) ± ({fmt_fixed(su, 1)}, {fmt_fixed(sv, 1)}, {fmt_fixed(sw, 1)}) km/s "
            "(heliocentric, not corrected for the solar motion); "
            f"{sharing} of {len(rows)} neighbours share it within {fmt_sig(settings.group_dispersion_kms, 6)} km/s.")
    if not has_rv[0]:
        text += f" {subject} has no radial velocity: W and the differences are only tangential."
    refs = sorted({a.ref for _, a in rows})
    return RULE.assessment(subject, "neutral", text, quantities=quantities, reasons=tuple(details),
                           sources=tuple(refs))


RULE = Rule(
    id="neighbours",
    title="Motion shared with neighbours",
    version=1,
    subject="component",
    question="context",
    needs=("neighbours with positions, parallaxes and proper motions", "radial velocities (for 3-D velocities)"),
    citation="Galactic space velocities with astropy's frames (Astropy Collaboration 2022, ApJ 935, 167); "
    "a velocity-difference test against a group dispersion of 1–2 km/s (common practice)",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
    applies=applies,
)
