"""Grade of a claimed companion, from its detections, the searches that missed it and its motion.

Method
    Every detection of the companion is gathered: the claims of the
    evidence (speckle, adaptive optics, lucky imaging, occultation,
    astrometric acceleration, ...) and, for the secondary of a pair whose
    primary has a radial-velocity series, a significant spectroscopic orbit
    (from the spectroscopic-orbit rule's inputs), one detection per source.
    Detections from different sources count as independent confirmations
    (different teams, instruments or epochs). A search that found nothing
    (``non_detections``) should have seen the companion when the claimed
    separation lies in the searched range and the claimed Δm is within the
    search's contrast, with a margin of ``band_margin`` magnitudes when the
    bands differ (a companion's Δm changes with wavelength; common
    practice). Two imaging detections at different epochs are checked for a
    motion possible in a bound orbit: the displacement rate must not exceed
    the escape speed at that separation for twice the host's mass (a
    generous total mass; Kepler's third law).

Grade (our own scale)
    confirmed: two or more independent detections, consistent motion, no
    search that should have seen it. probable: two or more independent
    detections but a search that missed it, or a single source with a
    significant spectroscopic orbit. candidate: one detection, no search
    that should have seen it. doubtful: one detection and one search that
    should have seen it, or motion impossible for a bound orbit. refuted:
    one detection and two or more searches that should have seen it.
    Every grade lists its reasons.

Outcome
    ``supports`` for confirmed and probable, ``neutral`` for candidate,
    ``against`` for doubtful and refuted. No strength: a grade qualifies the
    claim, it does not weigh the pair's membership.

Insufficient data
    Not given: the rule speaks only about components that are claimed.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from pydantic import Field

from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts, julian_years


class Settings(RuleSettings):
    band_margin: float = Field(default=1.0, ge=0, description="Δm margin (mag) when claim and search bands differ.")
    mass_factor: float = Field(default=2.0, ge=1, description="Total mass allowed, in units of the host's mass.")


@dataclass(frozen=True)
class Detection:
    method: str
    epoch: str
    year: float
    rho: float | None
    theta: float | None
    delta_mag: float | None
    band: str | None
    ref: str


def _host(facts: SystemFacts, companion: str) -> str | None:
    claim = next((c for c in facts.system.claims if c.companion == companion and c.around), None)
    if claim is not None:
        return claim.around
    pair = next((p for p in facts.system.pairs if p.members[1] == companion), None)
    return pair.members[0] if pair is not None else None


def _spectroscopic(facts: SystemFacts, companion: str) -> list[Detection]:
    out = []
    for pair in facts.system.pairs:
        if pair.members[1] != companion:
            continue
        orbit = facts.rv_orbits.get(pair.id)
        if orbit is None or not orbit.detected:
            continue
        for ref, years in orbit.epochs_by_ref().items():
            mid = sum(years) / len(years)
            out.append(Detection("spectroscopy", f"{min(years):.1f}–{max(years):.1f}", mid, None, None, None, None, ref))
    return out


def detections(facts: SystemFacts, companion: str) -> list[Detection]:
    claims = [c for c in facts.system.claims if c.companion == companion]
    years = julian_years([c.epoch for c in claims]) if claims else []
    imaging = [
        Detection(c.method, c.epoch, float(y), c.rho.value if c.rho else None, c.theta.value if c.theta else None,
                  c.delta_mag.value if c.delta_mag else None, c.band, c.ref)
        for c, y in zip(claims, years)
    ]
    return imaging + _spectroscopic(facts, companion)


def applies(facts: SystemFacts, subject: str) -> bool:
    return any(c.companion == subject for c in facts.system.claims) or any(
        p.members[1] == subject and p.id in facts.rv_orbits for p in facts.system.pairs
    )


def weigh(facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    found = detections(facts, subject)
    if not found:
        return RULE.insufficient(subject, f"No detection of {subject} is recorded.")
    host = _host(facts, subject)
    reasons: list[str] = []
    sources = sorted({d.ref for d in found})
    # independent confirmations: detections reported by different sources
    independent = len(sources)
    for d in sorted(found, key=lambda d: d.year):
        what = f"ρ = {d.rho:.3g}″" if d.rho is not None else "an orbit"
        dm = f", Δm = {d.delta_mag:.1f}" + (f" ({d.band})" if d.band else "") if d.delta_mag is not None else ""
        reasons.append(f"Detected by {d.method} in {d.epoch} ({d.ref}): {what}{dm}.")
    # searches that should have seen it
    missed = []
    for nd in facts.system.non_detections:
        if host is not None and nd.around != host:
            continue
        for d in found:
            if d.rho is None or d.delta_mag is None:
                continue
            margin = 0.0 if (nd.band is None or d.band is None or nd.band == d.band) else settings.band_margin
            inside = nd.rho_range[0] <= d.rho <= nd.rho_range[1]
            if inside and d.delta_mag + margin <= nd.contrast:
                missed.append(nd)
                reasons.append(
                    f"Not seen by {nd.method} in {nd.epoch} ({nd.ref}), which reached Δm = {nd.contrast:.1f}"
                    + (f" ({nd.band})" if nd.band else "") + f" between {nd.rho_range[0]:g}″ and {nd.rho_range[1]:g}″: "
                    f"the claimed companion (Δm = {d.delta_mag:.1f} at {d.rho:.3g}″) should have been seen"
                    + (f" even allowing {margin:.1f} mag for the different band." if margin else "."))
                break
    # motion between imaging epochs against a bound orbit
    impossible = False
    host_mass = facts.member_mass(host) if host is not None else None
    plx = facts.stars[facts.representative(host)].parallax if host is not None and facts.representative(host) in facts.stars else None
    pos = sorted((d for d in found if d.rho is not None and d.theta is not None), key=lambda d: d.year)
    if host_mass is not None and plx is not None and plx.mean > 0:
        for d1, d2 in zip(pos, pos[1:]):
            if d2.year - d1.year < 0.1:
                continue
            x1, y1 = d1.rho * math.cos(math.radians(d1.theta)), d1.rho * math.sin(math.radians(d1.theta))
            x2, y2 = d2.rho * math.cos(math.radians(d2.theta)), d2.rho * math.sin(math.radians(d2.theta))
            rate = math.hypot(x2 - x1, y2 - y1) / (d2.year - d1.year)  # arcsec/yr
            s_au = min(d1.rho, d2.rho) * 1000.0 / plx.mean
            # escape speed √(2GM/s) in au/yr is 2π√(2M/s) (Kepler's third law), times ϖ in arcsec
            escape = 2 * math.pi * math.sqrt(2 * settings.mass_factor * host_mass[0] / s_au) * plx.mean / 1000.0
            if rate > escape:
                impossible = True
                reasons.append(f"The move from {d1.epoch} to {d2.epoch} ({1000 * rate:.0f} mas/yr) exceeds the escape "
                               f"speed for {settings.mass_factor * host_mass[0]:.1f} M☉ ({1000 * escape:.0f} mas/yr): "
                               "not one bound companion.")
            else:
                reasons.append(f"The move from {d1.epoch} to {d2.epoch} is possible for a bound orbit.")
    spectro_only = all(d.method == "spectroscopy" for d in found)
    if impossible:
        grade = "doubtful"
    elif independent >= 2:
        grade = "probable" if missed else "confirmed"
    elif len(missed) >= 2:
        grade = "refuted"
    elif missed:
        grade = "doubtful"
    elif spectro_only:
        grade = "probable"
    else:
        grade = "candidate"
    outcome = {"confirmed": "supports", "probable": "supports", "candidate": "neutral"}.get(grade, "against")
    text = (f"{subject} is {grade}: {len(found)} detection(s) from {len(sources)} source(s)"
            + (f", {len(missed)} search(es) that should have seen it" if missed else ", no search that should have seen it")
            + ".")
    return RULE.assessment(
        subject, outcome, text, grade=grade, reasons=tuple(reasons), sources=tuple(sources),
        quantities=(Quantity("detections", "Detections", float(len(found)), ""),
                    Quantity("independent", "Independent confirmations", float(independent), ""),
                    Quantity("missed", "Searches that should have seen it", float(len(missed)), "")),
    )


RULE = Rule(
    id="companion-claims",
    title="Grade of a claimed companion",
    version=1,
    subject="component",
    question="context",
    needs=("claims of detection", "non-detections with their sensitivity", "a spectroscopic orbit (optional)",
           "the host's mass and parallax (for the motion check)"),
    citation="Our own grading scale; detectability from the searches' stated contrast limits (common practice); "
    "escape speed from Kepler's third law",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
    applies=applies,
)
