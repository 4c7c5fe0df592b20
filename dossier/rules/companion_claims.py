"""Grade of a claimed companion, from its detections, the searches that missed it and its motion.

Method
    Every detection of the companion is gathered: the claims of the
    evidence (speckle, adaptive optics, lucky imaging, occultation,
    astrometric acceleration, ...) and, for the secondary of a pair whose
    primary has a radial-velocity series, a significant spectroscopic orbit
    (from the spectroscopic-orbit rule's inputs), one detection per source.
    Detections from different sources count as independent confirmations
    (different teams, instruments or epochs). A search that found nothing
    (``non_detections``) should have seen the companion when the
    probability that it could have, P = P(inside) × P(bright enough),
    reaches ``detect_probability`` (0.9 by default); the reasons give P.

    P(inside): the companion moves between the claim and the search. Orbits
    are drawn that pass through the claimed separation at the claim epoch
    (random orientation, thermal eccentricity f(e) = 2e, random phase; the
    semimajor axis scaled so that the projected separation matches the
    claim, the scale-and-rotate idea of OFTI, Blunt et al. 2017, AJ 153,
    229, without its rejection step: one epoch constrains nothing more),
    their periods from Kepler's third law with the host's mass (plus the
    companion's when known) and the host's parallax, and advanced to the
    search epoch; P(inside) is the fraction inside the searched range.
    Without a mass or parallax the companion is taken not to move (said so).

    P(bright enough): the claimed Δm, drawn from its uncertainty, is
    converted to the search's band when the bands differ: the companion's
    zero-age main-sequence mass is found whose blackbody contrast with the
    host matches the claim at the claim band's effective wavelength (Tout et
    al. 1996, MNRAS 281, 257 for L and R; T_eff from L = 4πR²σT⁴; Planck's
    law; host T_eff and R from the evidence, else from its mass on the main
    sequence), and the contrast at the search band's wavelength follows
    (:func:`dossier.astro.hierarchy.band_delta_mag`; wavelengths of
    Bessell, Castelli & Plez 1998, A&A 333, 231). Blackbodies are an
    approximation: ``colour_model_sigma`` (0.3 mag) is added. Without the
    band wavelengths or the host's temperature, Δm is carried over with
    ``unknown_band_sigma`` (1 mag) more uncertainty. P(bright enough) is
    the fraction of draws with Δm ≤ the search's contrast. The draws are
    seeded by a hash of their inputs.

    Two imaging detections at different epochs are checked for a
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

import numpy as np
from pydantic import Field

from dossier.astro import binary, hierarchy
from dossier.astro.seeding import seed_from
from dossier.fmt import fmt_fixed, fmt_sig, plural
from dossier.rules.base import Assessment, Quantity, Rule, RuleSettings
from dossier.rules.facts import SystemFacts, julian_years


class Settings(RuleSettings):
    detect_probability: float = Field(default=0.9, gt=0, lt=1, description=(
        "Probability of detection from which a search that found nothing counts as one that should have seen the "
        "companion."))
    samples: int = Field(default=4000, ge=500, le=1_000_000, description="Monte Carlo draws per claim and search.")
    colour_model_sigma: float = Field(default=0.3, ge=0, description=(
        "Uncertainty (mag) of the blackbody conversion of Δm between bands."))
    unknown_band_sigma: float = Field(default=1.0, ge=0, description=(
        "Extra uncertainty (mag) of Δm when the bands differ and cannot be converted."))
    band_wavelengths_um: dict[str, float] = Field(default_factory=dict, description=(
        "Effective wavelengths (µm) of bands beyond UBVRIJHKL (or replacing them)."))
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


def _draw(rng: np.random.Generator, value: float, sigma: float | None, n: int, positive: bool = False) -> np.ndarray:
    x = rng.normal(value, sigma or 0.0, n)
    return np.where(x > 0, x, value) if positive else x


def _host_star(facts: SystemFacts, host: str | None, rng: np.random.Generator, n: int):
    """Draws of the host's T_eff (K) and R (R☉) and how they were obtained, or None."""
    comp = facts.system.components.get(host) if host is not None else None
    phys = comp.physical if comp is not None else None
    if phys is None:
        return None
    if phys.teff is not None and phys.radius is not None:
        return (_draw(rng, phys.teff.value, phys.teff.uncertainty, n, True),
                _draw(rng, phys.radius.value, phys.radius.uncertainty, n, True), "the host's T(eff) and R")
    if phys.mass is not None and phys.stage in (None, "main-sequence"):
        t, r = hierarchy.zams_teff_radius(_draw(rng, phys.mass.value, phys.mass.uncertainty, n, True))
        return t, r, "the host on the main sequence from its mass"
    return None


def detectability(facts: SystemFacts, subject: str, host: str | None, d: Detection, nd, settings: Settings):
    """P(detectable) = P(inside the searched range) × P(Δm in the search band ≤ its contrast), and how each was got."""
    n = settings.samples
    claim = next((c for c in facts.system.claims if c.companion == subject and c.ref == d.ref and c.epoch == d.epoch),
                 None)
    s_rho = claim.rho.uncertainty if claim is not None and claim.rho is not None else 0.0
    s_dm = claim.delta_mag.uncertainty if claim is not None and claim.delta_mag is not None else 0.0
    t_search = float(julian_years([nd.epoch])[0])
    rng = np.random.default_rng(seed_from(subject, host, d.rho, s_rho, d.delta_mag, s_dm, d.band, d.year,
                                                    nd.rho_range, nd.contrast, nd.band, t_search, n))
    rho0 = _draw(rng, d.rho, s_rho, n, True)
    lo, hi = nd.rho_range
    # expected motion between the claim and the search
    mass = facts.member_mass(host) if host is not None else None
    rep = facts.representative(host) if host is not None else None
    plx = facts.stars[rep].parallax if rep in facts.stars else None
    dt = t_search - d.year
    if mass is not None and plx is not None and plx.mean > 0 and abs(dt) > 0:
        companion = facts.stars[subject].mass if subject in facts.stars else None
        total = _draw(rng, mass[0], mass[1], n, True) + (0.0 if companion is None else companion.value)
        orbits = hierarchy.draw_sky_orbits(rng, n)
        a = rho0 / hierarchy.sky_ratio(orbits.mean_anomaly, orbits.e, orbits.cos_i, orbits.omega)  # arcsec
        period = binary.kepler_period_yr(a * 1000.0 / plx.mean, total)
        rho1 = a * hierarchy.sky_ratio(orbits.mean_anomaly + 2.0 * np.pi * dt / period, orbits.e, orbits.cos_i,
                                       orbits.omega)
        lo_q, hi_q = np.percentile(rho1, [16, 84])
        how_in = f"expected at {fmt_sig(lo_q, 2)}–{fmt_sig(hi_q, 2)}″ (16–84 %) after {fmt_fixed(dt, 1)} yr of orbital motion"
    else:
        rho1 = rho0
        how_in = "no mass or parallax of the host: the companion is taken not to move"
    p_in = float(np.mean((rho1 >= lo) & (rho1 <= hi)))
    # contrast in the search's band
    dm = _draw(rng, d.delta_mag, s_dm, n)
    waves = {**hierarchy.BAND_WAVELENGTH_UM, **settings.band_wavelengths_um}
    if nd.band is None or d.band is None or nd.band == d.band:
        how_dm = "same band" if nd.band == d.band and nd.band is not None else "band not stated, taken as the same"
    else:
        host_star = _host_star(facts, host, rng, n) if d.band in waves and nd.band in waves else None
        if host_star is not None:
            th, rh, source = host_star
            known = facts.stars[subject].mass if subject in facts.stars else None
            if known is not None:
                tc, rc = hierarchy.zams_teff_radius(_draw(rng, known.value, known.uncertainty, n, True))
            else:
                m2, _ = hierarchy.companion_mass_from_delta_mag(dm, waves[d.band], th, rh)
                tc, rc = hierarchy.zams_teff_radius(m2)
            colour = (hierarchy.band_delta_mag(th, rh, tc, rc, waves[nd.band])
                      - hierarchy.band_delta_mag(th, rh, tc, rc, waves[d.band]))
            dm = dm + colour + rng.normal(0.0, settings.colour_model_sigma, n)
            q16, q50, q84 = np.percentile(dm, [16, 50, 84])
            how_dm = (f"Δm({nd.band}) ≈ {fmt_fixed(q50, 1)} ({fmt_fixed(q16, 1)}–{fmt_fixed(q84, 1)}) from Δm({d.band}) by blackbody contrasts at "
                      f"{fmt_sig(waves[d.band], 6)} and {fmt_sig(waves[nd.band], 6)} µm, {source}, the companion on the main sequence")
        else:
            dm = dm + rng.normal(0.0, settings.unknown_band_sigma, n)
            how_dm = (f"Δm({d.band}) carried over to {nd.band} with {fmt_sig(settings.unknown_band_sigma, 6)} mag more uncertainty: "
                      + ("no effective wavelength for these bands" if not (d.band in waves and nd.band in waves)
                         else "no temperature for the host"))
    p_dm = float(np.mean(dm <= nd.contrast))
    return p_in * p_dm, p_in, p_dm, how_in, how_dm


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
        what = f"ρ = {fmt_sig(d.rho, 3)}″" if d.rho is not None else "an orbit"
        dm = f", Δm = {fmt_fixed(d.delta_mag, 1)}" + (f" ({d.band})" if d.band else "") if d.delta_mag is not None else ""
        reasons.append(f"Detected by {d.method} in {d.epoch} ({d.ref}): {what}{dm}.")
    # searches that should have seen it
    missed = []
    for nd in facts.system.non_detections:
        if host is not None and nd.around != host:
            continue
        for d in found:
            if d.rho is None or d.delta_mag is None:
                continue
            p, p_in, p_dm, how_in, how_dm = detectability(facts, subject, host, d, nd, settings)
            searched = (f"{nd.method} in {nd.epoch} ({nd.ref}), which reached Δm = {fmt_fixed(nd.contrast, 1)}"
                        + (f" ({nd.band})" if nd.band else "") + f" between {fmt_sig(nd.rho_range[0], 6)}″ and {fmt_sig(nd.rho_range[1], 6)}″")
            odds = (f"P(detectable) = {fmt_fixed(p, 2)}: P(inside the range) = {fmt_fixed(p_in, 2)} ({how_in}) × "
                    f"P(bright enough) = {fmt_fixed(p_dm, 2)} ({how_dm})")
            if p >= settings.detect_probability:
                missed.append(nd)
                reasons.append(f"Not seen by {searched}: the claimed companion (Δm = {fmt_fixed(d.delta_mag, 1)} at {fmt_sig(d.rho, 3)}″ "
                               f"in {d.epoch}) should have been seen, {odds}.")
                break
            reasons.append(f"Searched by {searched}: not counted as missed, {odds}, below "
                           f"{fmt_sig(settings.detect_probability, 6)}.")
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
                reasons.append(f"The move from {d1.epoch} to {d2.epoch} ({fmt_fixed(1000 * rate, 0)} mas/yr) exceeds the escape "
                               f"speed for {fmt_fixed(settings.mass_factor * host_mass[0], 1)} M☉ ({fmt_fixed(1000 * escape, 0)} mas/yr): "
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
    text = (f"{subject} is {grade}: {plural(len(found), 'detection')} from {plural(len(sources), 'source')}"
            + (f", {plural(len(missed), 'search', 'searches')} that should have seen it" if missed else ", no search that should have seen it")
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
    version=2,
    subject="component",
    question="context",
    needs=("claims of detection", "non-detections with their sensitivity", "a spectroscopic orbit (optional)",
           "the host's mass and parallax (for the motion check)"),
    citation="Our own grading scale; detectability from the searches' stated contrast limits with the companion's "
    "expected orbital motion (random orbits scaled to the claim, cf. Blunt, S. et al. 2017, AJ 153, 229) and its "
    "contrast converted between bands by blackbodies (Tout, C. A. et al. 1996, MNRAS 281, 257; effective wavelengths "
    "of Bessell, M. S., Castelli, F. & Plez, B. 1998, A&A 333, 231); escape speed from Kepler's third law",
    settings=Settings,
    weigh=weigh,
    doc=__doc__ or "",
    applies=applies,
)
