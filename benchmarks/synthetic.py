"""A synthetic project of N invented systems, for benchmarks and scale tests.

Run with ``python benchmarks/synthetic.py N OUT_DIR [--seed S]``, or import
:func:`make_project`. Every name and number is invented (systems
``synth-0001`` …, sources ``synth-survey-1`` …); the files follow the demo
project's shape (``demo_project/``) and pass ``dossier check``. The same
seed gives the same bytes.

Each system has 2 to 4 stars, each measured by one to three astrometric
sources (parallax, proper motion, a position from the newest one), some
magnitudes, colours, radial velocities and physical parameters; pairs of the
primary with each other star, physical (shared distance and motion) or
optical (a background star); a few companion claims with or without a later
non-detection, a few reviews, and for about half of the systems an observing
log of position angle and separation of one or two pairs over decades.
"""

from __future__ import annotations

import argparse
import datetime as dt
import math
import random
import shutil
import sys
from pathlib import Path

SURVEYS = (("synth-survey-1", "J1991.25", 0.8), ("synth-survey-2", "J2015.5", 0.07), ("synth-survey-3", "J2016.0", 0.04))
SPECTRAL = {  # an invented but plausible spread of dwarfs and giants: type, mass, teff, radius, stage, abs. V mag
    "F5 V": (1.3, 6500, 1.4, "main-sequence", 3.4), "G2 V": (1.0, 5800, 1.0, "main-sequence", 4.8),
    "G8 V": (0.9, 5400, 0.9, "main-sequence", 5.6), "K2 V": (0.75, 4950, 0.75, "main-sequence", 6.3),
    "K5 V": (0.68, 4400, 0.68, "main-sequence", 7.3), "M0 V": (0.55, 3900, 0.58, "main-sequence", 8.9),
    "M3 V": (0.36, 3400, 0.37, "main-sequence", 11.2), "A2 V": (2.1, 8900, 1.9, "main-sequence", 1.3),
    "K0 III": (2.4, 4800, 11.0, "core-helium-burning", 0.7), "K3 III": (1.6, 4300, 18.0, "giant", 0.3),
}
WORDS = ("a quiet", "a sparse", "a crowded", "a dusty", "a southern", "a northern", "a rich", "an empty")
TOPICS = ("a common-motion pair", "a hierarchical triple", "a line-of-sight neighbour", "a disputed close claim",
          "a slow visual pair", "a quadruple in a sparse field", "a wide pair of dwarfs", "a giant and its companions")


def _num(x: float, digits: int) -> str:
    text = f"{x:.{digits}f}"
    return "0." + "0" * digits if text in ("-0." + "0" * digits,) else text


def _m(value: float, error: float, digits: int, ref: str | None = None) -> str:
    """A measured value as the demo writes it: ``[value, error]`` or ``[value, error, {ref: id}]``."""
    error = max(error, 10.0 ** -digits)
    text = f"[{_num(value, digits)}, {_num(error, digits)}"
    return text + (f", {{ref: {ref}}}]" if ref else "]")


def references_text() -> str:
    refs = {
        "field-counts": "Synthetic Star Counts Group 2024, star counts in invented fields, note 1 (fictional)",
        "synth-survey-1": "First Invented Astrometric Survey 1997, Fictional Astrometry Series 1, 1",
        "synth-survey-2": "Second Invented Astrometric Survey 2018, Fictional Astrometry Series 2, 1",
        "synth-survey-3": "Second Invented Astrometric Survey 2022, third release, Fictional Astrometry Series 3, 1",
        "synth-phot-1": "Invented Photometry Programme 2010, Journal of Made-up Photometry 13, 5",
        "synth-rv-1": "Invented Velocity Survey 2021, Demo Astronomical Journal 50, 7",
        "synth-masses-1": "Synthetic Masses Group 2025, masses from invented tracks, note 2 (fictional)",
        "synth-speckle-1": "Invented Speckle Team 1990, Demo Letters 12, 40",
        "synth-ao-1": "Invented Adaptive Optics Survey 2021, Demo Astronomical Journal 49, 88",
        "synth-measures-1": "Invented Measures Compilation 1960, Demo Circulars 3, 1",
    }
    out = ["# Every source of the synthetic project; all of them are invented.\n"]
    for key, citation in refs.items():
        out.append(f"{key}:\n  citation: \"{citation}\"\n  consulted: 2026-10-01\n")
    return "".join(out)


def settings_text(n: int, seed: int) -> str:
    return f'''# A synthetic project of invented systems, made by benchmarks/synthetic.py (seed {seed}).

[project]
title = "Synthetic catalogue of {n} invented systems"
base_url = "https://example.org/synthetic/"
authors = ["Synthetic Circle (fictional)"]
description = "Invented systems for timing and testing the build; nothing here is real."

[[field_density]]
band = "V"
brighter_than = 9.0
per_square_degree = [2.0, 0.3]
ref = "field-counts"

[[field_density]]
band = "V"
brighter_than = 12.0
per_square_degree = [40.0, 5.0]
ref = "field-counts"

[[field_density]]
band = "V"
brighter_than = 15.0
per_square_degree = [480.0, 50.0]
ref = "field-counts"

[verdict]
physical_threshold = 0.99
optical_threshold = 0.01

[rules.distance]
length_scale_kpc = 1.35
'''


class _Star:
    def __init__(self, cid: str, sptype: str, plx: float, pmra: float, pmdec: float, east: float, north: float,
                 rv: float):
        self.cid, self.sptype, self.plx, self.pmra, self.pmdec = cid, sptype, plx, pmra, pmdec
        self.east, self.north, self.rv = east, north, rv  # offsets from the primary, arcsec; km/s

    @property
    def vmag(self) -> float:
        return SPECTRAL[self.sptype][4] + 5 * math.log10(100.0 / self.plx)


def _system(rng: random.Random, k: int) -> tuple[str, str, str]:
    """(id, evidence.yaml text, log.csv text or '') of one invented system."""
    sid = f"synth-{k:04d}"
    ra = rng.uniform(0.5, 359.5)
    dec = math.degrees(math.asin(rng.uniform(-0.95, 0.95)))
    plx = rng.uniform(2.0, 40.0)
    pm = (rng.gauss(0, 60), rng.gauss(0, 60))
    rv0 = rng.gauss(0, 25)
    types = list(SPECTRAL)
    n_stars = rng.choice((2, 2, 2, 3, 3, 4))
    stars = [_Star("A", rng.choice(types), plx, pm[0], pm[1], 0.0, 0.0, rv0)]
    kinds = []
    for i in range(1, n_stars):
        cid = "ABCD"[i]
        kind = rng.choice(("physical", "physical", "optical")) if i < 3 else "optical"
        sep = 10 ** rng.uniform(0.3, 2.0)
        angle = rng.uniform(0, 2 * math.pi)
        east, north = sep * math.sin(angle), sep * math.cos(angle)
        sptype = rng.choice([t for t in types if "III" not in t] if kind == "physical" else types)
        if kind == "physical":
            star = _Star(cid, sptype, plx + rng.gauss(0, 0.03), pm[0] + rng.gauss(0, 0.5), pm[1] + rng.gauss(0, 0.5),
                         east, north, rv0 + rng.gauss(0, 0.6))
        else:
            star = _Star(cid, sptype, rng.uniform(0.3, 3.0), rng.gauss(0, 8), rng.gauss(0, 8), east, north,
                         rng.gauss(0, 40))
        stars.append(star)
        kinds.append(kind)
    cos_dec = math.cos(math.radians(dec))
    lines = [f"# {sid}: an invented system made by benchmarks/synthetic.py; every number is made up.",
             f"id: {sid}",
             f"title: {rng.choice(TOPICS).capitalize()} in {rng.choice(WORDS)} field ({k})",
             f"position: {{ra: {ra:.7f}, dec: {dec:.7f}, frame: icrs, epoch: J2016.0}}",
             "", "components:"]
    claims = []
    for star in stars:
        lines.append(f"  {star.cid}:")
        lines.append(f"    spectral_type: {star.sptype}")
        vmag = star.vmag
        mags = [f"V: {_m(vmag, 0.01 + 0.002 * max(vmag - 8, 0), 2, 'synth-phot-1')}"]
        if rng.random() < 0.5:  # a colour: B as well as V
            bv = {"F": 0.45, "G": 0.65, "K": 1.05, "M": 1.45, "A": 0.05}[star.sptype[0]] + rng.gauss(0, 0.03)
            mags.append(f"B: {_m(vmag + bv, 0.02, 2, 'synth-phot-1')}")
        lines.append(f"    magnitudes: {{{', '.join(mags)}}}")
        lines.append("    astrometry:")
        n_src = rng.choice((1, 2, 2, 3)) if star.cid == "A" else rng.choice((1, 1, 2, 3))
        for ref, epoch, scale in SURVEYS[-n_src:]:
            err = scale * rng.uniform(0.8, 1.5) * (1 + star.plx / 200)
            value = star.plx + rng.gauss(0, err)
            entry = [f"ref: {ref}", f"epoch: {epoch}"]
            if ref == "synth-survey-3":
                s_ra = ra + star.east / 3600 / cos_dec
                s_dec = dec + star.north / 3600
                entry += [f"ra: [{s_ra % 360:.7f}, 0.03]", f"dec: [{s_dec:.7f}, 0.03]"]
            entry += [f"parallax: {_m(value, err, 3)}",
                      f"pmra: {_m(star.pmra + rng.gauss(0, err), err * 1.2, 3)}",
                      f"pmdec: {_m(star.pmdec + rng.gauss(0, err), err * 1.1, 3)}"]
            lines.append(f"      - {{{', '.join(entry)}}}")
        if rng.random() < 0.4:
            lines.append(f"    radial_velocity: {_m(star.rv, rng.uniform(0.2, 0.8), 2, 'synth-rv-1')}")
        if rng.random() < 0.6:
            mass, teff, radius, stage, _ = SPECTRAL[star.sptype]
            parts = ["ref: synth-masses-1", f"mass: {_m(mass * rng.uniform(0.95, 1.05), mass * 0.06, 2)}"]
            if rng.random() < 0.6:
                parts.append(f"teff: {_m(teff * rng.uniform(0.97, 1.03), 70, 0)}")
                parts.append(f"radius: {_m(radius * rng.uniform(0.95, 1.05), radius * 0.06, 2)}")
            parts.append(f"stage: {stage}")
            lines.append(f"    physical: {{{', '.join(parts)}}}")
    has_claim = rng.random() < 0.12
    if has_claim:
        lines.append("  X:")
        lines.append("    note: Claimed once by speckle interferometry; see the claims.")
    has_series = rng.random() < 0.03
    if has_series:  # the primary resolved into a spectroscopic binary: a velocity series of Aa
        period, k_amp, t0 = rng.uniform(150, 1500), rng.uniform(4, 15), rng.uniform(0, 1)
        lines.append("  Aa:")
        lines.append("    radial_velocity_series:")
        day0 = dt.date(2010, 1, 1)
        for day in sorted(rng.sample(range(4400), 14)):
            v = rv0 + k_amp * math.sin(2 * math.pi * (day / period + t0)) + rng.gauss(0, 0.15)
            lines.append(f"      - {{epoch: {(day0 + dt.timedelta(days=day)).isoformat()}, velocity: {_m(v, 0.15, 2)}, "
                         "instrument: echelle-1, ref: synth-rv-1}")
        lines.append("  Ab:")
        lines.append("    note: Seen only in the velocities of Aa.")
    lines.append("")
    lines.append("pairs:")
    pair_ids = []
    for star in stars[1:]:
        pid = f"A{star.cid}"
        pair_ids.append(pid)
        lines.append(f"  - {{id: {pid}, members: [A, {star.cid}]}}")
    if has_series:
        lines.append("  - {id: Aa-Ab, members: [Aa, Ab], parent: A}")
    if has_claim:
        lines.append("  - {id: AX, members: [A, X]}")
        epoch = rng.uniform(1984, 1996)
        claims.append(f"  - {{companion: X, around: A, method: speckle-interferometry, epoch: {epoch:.2f}, "
                      f"rho: {_m(rng.uniform(0.1, 0.6), 0.02, 2)}, theta: {_m(rng.uniform(0, 360), 3.0, 1)}, "
                      f"delta_mag: {_m(rng.uniform(1.5, 4.0), 0.3, 1)}, band: V, ref: synth-speckle-1}}")
    if claims:
        lines += ["", "claims:", *claims]
        if rng.random() < 0.6:
            lines += ["non_detections:",
                      (f"  - {{around: A, method: adaptive-optics, epoch: {rng.uniform(2015, 2024):.2f}, "
                       f"rho_range: [0.05, 2.0], contrast: {rng.uniform(4, 7):.1f}, band: H, ref: synth-ao-1}}")]
    if rng.random() < 0.25:
        lines += ["", "reviews:",
                  (f"  - {{by: reviewer-{rng.randint(1, 5)}, on: 2026-{rng.randint(1, 12):02d}-"
                   f"{rng.randint(1, 28):02d}, decision: {rng.choice(('approve', 'comment', 'request-changes'))}, "
                   f"comment: \"Checked against the sources ({k}).\"}}")]
    kind_text = ", ".join(f"A{s.cid} {kd}" for s, kd in zip(stars[1:], kinds))
    lines += ["", "notes: |", f"  Invented for timing the build: {kind_text} by construction.",
              f"  The primary is a **{stars[0].sptype}** star at about {1000 / plx:.0f} pc.", ""]
    log = _log(rng, stars, kinds) if rng.random() < 0.5 else ""
    return sid, "\n".join(lines), log


def _log(rng: random.Random, stars: list[_Star], kinds: list[str]) -> str:
    """Measures of position angle and separation of one or two pairs of the primary, over decades."""
    rows = [("pair,epoch,theta,theta_error,rho,rho_error,delta_mag,band,method,equinox,aperture_cm,observer,site,"
             "nights,quality,notes,ref")]
    for star, _kind in list(zip(stars[1:], kinds))[: rng.choice((1, 1, 2))]:
        # relative motion: almost none for a physical pair, the primary's motion for an optical one (″/yr)
        dx = (star.pmra - stars[0].pmra) / 1000.0
        dy = (star.pmdec - stars[0].pmdec) / 1000.0
        n = rng.randint(4, 16)
        first = rng.uniform(1890, 1960)
        epochs = sorted(rng.uniform(first, 2025) for _ in range(n))
        for t in epochs:
            east = star.east + dx * (t - 2016.0)
            north = star.north + dy * (t - 2016.0)
            rho = math.hypot(east, north)
            theta = math.degrees(math.atan2(east, north)) % 360
            if t < 1975:
                method, epoch = "filar-micrometer", f"B{t:.3f}"
                row = [f"{(theta + rng.gauss(0, 0.3)) % 360:.2f}", "", f"{rho + rng.gauss(0, 0.15):.3f}", ""]
                extra = ["V", method, "", "46", f"observer-{rng.randint(1, 4)}", "old-refractor-site",
                         str(rng.randint(1, 3)), "", "", ""]
            else:
                year = int(t)
                day = min(int((t - year) * 365) + 1, 365)
                date = dt.date(year, 1, 1) + dt.timedelta(days=day - 1)
                epoch = date.isoformat()
                row = [f"{(theta + rng.gauss(0, 0.06)) % 360:.2f}", "0.06", f"{rho + rng.gauss(0, 0.02):.3f}", "0.020"]
                extra = ["V", "imaging", "", "35", f"circle-member-{rng.randint(1, 3)}", "synthetic-site",
                         str(rng.randint(1, 3)), "", "", ""]
            rows.append(",".join([f"A{star.cid}", epoch, *row, "", *extra]))
    return "\n".join(rows) + "\n"


def make_project(n: int, out_dir: Path | str, seed: int = 1) -> Path:
    """Write a project of ``n`` invented systems into ``out_dir`` (replaced if it is a synthetic project)."""
    out = Path(out_dir)
    if out.exists():
        if (out / "dossier.toml").is_file() and "synthetic" in (out / "dossier.toml").read_text(encoding="utf-8"):
            shutil.rmtree(out)
        elif any(out.iterdir()):
            raise SystemExit(f"{out} is not empty and holds no synthetic project; choose a new folder.")
    (out / "systems").mkdir(parents=True, exist_ok=True)
    (out / "dossier.toml").write_text(settings_text(n, seed), encoding="utf-8")
    (out / "references.yaml").write_text(references_text(), encoding="utf-8")
    rng = random.Random(seed)
    for k in range(1, n + 1):
        sid, evidence, log = _system(random.Random(rng.getrandbits(64)), k)
        folder = out / "systems" / sid
        folder.mkdir()
        (folder / "evidence.yaml").write_text(evidence, encoding="utf-8")
        if log:
            (folder / "log.csv").write_text(log, encoding="utf-8")
    return out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("n", type=int, help="number of systems")
    parser.add_argument("out_dir", type=Path, help="folder to write the project into")
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args(argv)
    make_project(args.n, args.out_dir, args.seed)
    print(f"wrote {args.n} invented systems into {args.out_dir}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
