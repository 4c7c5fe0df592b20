"""``dossier new``: scaffold a system's evidence file with commented examples.

The file it writes validates as it stands (one component, no pairs), so
``dossier check`` passes until the user starts filling it in; every other
field is shown as a commented example with its unit.

The id names a folder and the files built from it, so it is refused unless
it is a plain id (:func:`dossier.schema.loader.system_id_problem`: no path
separators, no '..', no spaces, control characters or look-alike letters,
not too long, not a name Windows reserves) and differs from every existing
system's id by more than case. The file appears whole or not at all, and
never replaces one that exists.
"""

from __future__ import annotations

import contextlib
import os
from pathlib import Path

from dossier.errors import DossierError
from dossier.schema.loader import EVIDENCE_FILE, SETTINGS_FILE, SYSTEMS_DIR, printable, system_id_problem

TEMPLATE = """\
# Evidence for {system_id}. Units: angles in degrees (position angle north
# through east), separations in arcsec, parallax in mas, proper motion in
# mas/yr (RA component multiplied by cos dec), radial velocity in km/s, masses
# and radii in solar units, temperatures in K, ages in Myr.
# A measured value is [value, uncertainty] or [value, uncertainty, {{ref: source-id}}];
# every source id must be listed in references.yaml.
# Schema: schemas/evidence.schema.json. Check with: dossier check PROJECT
id: {system_id}
title: {title}
position: {{ra: 0.0, dec: 0.0, frame: icrs, epoch: J2016.0}}   # deg, the primary's position

components:
  A:                                   # the primary comes first
    spectral_type: null                # e.g. G2 V
    # magnitudes: {{V: [7.81, 0.01, {{ref: photometry-1}}]}}
    # astrometry:                      # one entry per source; all of them are weighed
    #   - ref: survey-1                # default source of every value in this entry
    #     epoch: J2016.0               # J2016.0, B1950.0 or 2019-05-03
    #     ra: [312.0871553, 0.02]      # value in deg, uncertainty in mas
    #     dec: [-41.2264018, 0.02]
    #     parallax: [14.21, 0.03]      # mas
    #     pmra: [85.31, 0.03]          # mas/yr, multiplied by cos dec
    #     pmdec: [-40.12, 0.03]        # mas/yr
    #     correlations: {{parallax_pmra: 0.1}}
    # radial_velocity: [22.1, 0.5, {{ref: spectro-1}}]          # km/s
    # radial_velocity_series:
    #   - {{epoch: 2015-02-08, velocity: [-7.20, 0.15], ref: spectro-1}}
    # physical: {{ref: paper-1, mass: [1.3, 0.1], teff: [6500, 80], radius: [1.4, 0.1], stage: main-sequence}}
  # B: {{...}}

pairs: []
#  - {{id: AB, members: [A, B]}}
#  - {{id: Aa-Ab, members: [Aa, Ab], parent: A}}    # a sub-pair resolving A

# Field-star density for the chance-alignment rule (else the project's default):
# field_density:
#   - {{band: V, brighter_than: 12.0, per_square_degree: [40, 5], ref: counts-1}}

# claims:          # claimed companions (the companion must be a component)
#   - {{companion: C, around: A, method: speckle-interferometry, epoch: 1985.4, rho: [0.21, 0.02], theta: [145, 3], delta_mag: [3.2, 0.3], ref: paper-2}}
# non_detections:  # searches that found nothing, with their sensitivity
#   - {{around: A, method: adaptive-optics, epoch: 2019.6, rho_range: [0.05, 2.0], contrast: 6.0, ref: paper-3}}
# orbits:          # published orbits
#   - {{pair: AB, kind: spectroscopic, period: [812.4, 2.1], eccentricity: [0.31, 0.02], ref: paper-4}}
# reviews:
#   - {{by: reviewer-1, on: 2026-11-20, decision: approve, comment: "..."}}

notes: |
  Markdown notes about {system_id} (raw HTML is not rendered).
"""


def new_system(project: Path, system_id: str) -> Path:
    """Create ``systems/<id>/evidence.yaml``; refuse to overwrite anything."""
    project = Path(project)
    bad = system_id_problem(system_id)
    if bad is not None:
        what, fix = bad
        raise DossierError(f"{what} Nothing was written. Fix: {fix}")
    if not (project / SETTINGS_FILE).is_file():
        raise DossierError(f"{printable(str(project))} has no {SETTINGS_FILE}, so it is not a project folder. "
                           "Fix: give the folder that holds dossier.toml.")
    systems = project / SYSTEMS_DIR
    if systems.is_dir():
        for existing in systems.iterdir():
            if existing.name != system_id and existing.name.casefold() == system_id.casefold():
                raise DossierError(f"the system '{existing.name}' exists, and '{system_id}' differs from it only in case "
                                   "(one folder on macOS and Windows). Nothing was written. Fix: choose another id, "
                                   f"or edit {SYSTEMS_DIR}/{existing.name}/{EVIDENCE_FILE}.")
    folder = systems / system_id
    path = folder / EVIDENCE_FILE
    if path.exists():
        raise DossierError(f"{path} already exists; nothing was written. Fix: choose another id or edit that file.")
    folder.mkdir(parents=True, exist_ok=True)
    text = TEMPLATE.format(system_id=system_id, title=f"{system_id} (title to be written)")
    tmp = folder / f".{EVIDENCE_FILE}.{os.getpid()}.tmp"
    try:
        with open(tmp, "x", encoding="utf-8") as handle:
            handle.write(text)
            handle.flush()
            os.fsync(handle.fileno())
        os.link(tmp, path)  # fails if the file appeared meanwhile: an existing file is never replaced
    except FileExistsError:
        raise DossierError(f"{path} already exists; nothing was written. Fix: choose another id or edit that file.") from None
    finally:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
    return path
