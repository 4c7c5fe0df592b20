"""One seeded harness for the rules' tests: simulated pairs whose truth is known.

``simulate(kind, seed)`` builds a two-star system at a random distance and
separation, measured with realistic errors:

* ``bound``: one distance; the companion's velocity differs by a random
  orbital velocity of a bound orbit at that separation (below the circular
  speed at the projected separation);
* ``optical``: the companion is an unrelated field star at another
  distance, with a field velocity (25 km/s per axis);
* ``co-moving``: one distance (within the pair's width), far apart
  (2–4 pc, beyond the tidal limit of a wide binary, about 1 pc for a
  solar-mass pair: Jiang & Tremaine 2010, MNRAS 401, 977; from memory) and a
  velocity difference of 0.3–1 km/s, well above the escape speed there.
  Closer in, an excess velocity of that size is as well explained by an
  unresolved companion of a bound pair (the pair model's mixture term), so
  the harness does not claim to know the answer there.

Positions are placed with astropy's ``directional_offset_by`` so that the
tests do not depend on the kernels they test. Invented numbers, as the demo.
"""

from __future__ import annotations

import math

import numpy as np
from astropy import units as u
from astropy.coordinates import SkyCoord

from dossier.astro.binary import KM_S_PER_AU_YR
from dossier.schema.models import System
from dossier.schema.settings import Settings

REF = "sim-1"
KINDS = ("bound", "optical", "co-moving")


def settings(**verdict) -> Settings:
    return Settings.model_validate({
        "project": {"title": "harness"},
        "field_density": [
            {"band": "V", "brighter_than": 9.0, "per_square_degree": [2.0, 0.2], "ref": REF},
            {"band": "V", "brighter_than": 12.0, "per_square_degree": [40.0, 4.0], "ref": REF},
            {"band": "V", "brighter_than": 15.0, "per_square_degree": [480.0, 48.0], "ref": REF},
        ],
        "verdict": verdict,
    })


def simulate(kind: str, seed: int, *, with_rv: bool = True) -> System:
    rng = np.random.default_rng(seed)
    d_pc = rng.uniform(30, 200)
    m1, m2 = rng.uniform(0.8, 1.5), rng.uniform(0.4, 0.9)
    ra, dec = rng.uniform(0, 360), rng.uniform(-60, 60)
    plx_err, pm_err, rv_err = 0.03, 0.04, 0.3
    v1 = rng.normal(0, 25, 3)  # km/s: (ra, dec, radial) of the primary
    if kind == "bound":
        sep_au = 10 ** rng.uniform(2.3, 3.3)
        v_circ = 29.7847 * math.sqrt((m1 + m2) / sep_au)  # km/s per sqrt(M/au), common practice
        direction = rng.normal(size=3)
        dv = direction / np.linalg.norm(direction) * v_circ * rng.uniform(0.2, 0.9)
        d2_pc = d_pc
    elif kind == "co-moving":
        sep_au = rng.uniform(2.0, 4.0) * 206264.8
        direction = rng.normal(size=3)
        dv = direction / np.linalg.norm(direction) * rng.uniform(0.3, 1.0)
        d2_pc = d_pc
    else:
        sep_au = 10 ** rng.uniform(2.3, 3.5)
        dv = rng.normal(0, 25, 3)
        d2_pc = d_pc * rng.choice([rng.uniform(0.2, 0.6), rng.uniform(2.0, 8.0)])
    rho = sep_au / d_pc  # arcsec
    theta = rng.uniform(0, 360)
    c1 = SkyCoord(ra * u.deg, dec * u.deg)
    c2 = c1.directional_offset_by(theta * u.deg, rho * u.arcsec)

    def star(plx, v, pos, mag, mass):
        k = KM_S_PER_AU_YR * (1000.0 / plx) / 1000.0  # km/s per mas/yr
        return {
            "magnitudes": {"V": [round(mag, 3), 0.02]},
            "astrometry": [{
                "ref": REF, "epoch": "J2016.0",
                "ra": [float(pos.ra.deg), 0.02], "dec": [float(pos.dec.deg), 0.02],
                "parallax": [float(plx + rng.normal(0, plx_err)), plx_err],
                "pmra": [float(v[0] / k + rng.normal(0, pm_err)), pm_err],
                "pmdec": [float(v[1] / k + rng.normal(0, pm_err)), pm_err],
            }],
            **({"radial_velocity": [float(v[2] + rng.normal(0, rv_err)), rv_err, {"ref": REF}]} if with_rv else {}),
            "physical": {"ref": REF, "mass": [round(mass, 3), 0.05]},
        }

    data = {
        "id": f"sim-{kind}-{seed}",
        "title": f"simulated {kind} pair",
        "position": {"ra": ra, "dec": dec},
        "components": {
            "A": star(1000.0 / d_pc, v1, c1, 7.0 + 5 * math.log10(d_pc / 50), m1),
            "B": star(1000.0 / d2_pc, v1 + dv, c2, 9.5 + 5 * math.log10(d2_pc / 50), m2),
        },
        "pairs": [{"id": "AB", "members": ["A", "B"]}],
    }
    return System.model_validate(data)
