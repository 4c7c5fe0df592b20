"""Machine-readable exports of the catalogue: ECSV and VOTable through astropy.

One row per pair of every system: the verdict, its probabilities and the
pair's separation and distance. Both files are written from one
``astropy.table.Table`` with units and descriptions, so that what is read
back with astropy equals what was written.
"""

from __future__ import annotations

import io
import math

from dossier.engine import SystemResult

COLUMNS = (
    ("system", None, "System id"),
    ("pair", None, "Pair id"),
    ("first", None, "First member"),
    ("second", None, "Second member"),
    ("status", None, "bound, co-moving, optical or undetermined"),
    ("probability", "", "Probability of the status (NaN when nothing could be weighed)"),
    ("p_physical", "", "P(physical) from the association evidence (NaN if none)"),
    ("p_bound_given_physical", "", "P(bound | physical) from the binding evidence (NaN if none)"),
    ("log10_odds_physical", "", "log10 posterior odds physical : optical"),
    ("rho", "arcsec", "Separation"),
    ("theta", "deg", "Position angle, north through east"),
    ("distance", "pc", "Distance of the pair (posterior median)"),
)


def _nan(x: float | None) -> float:
    return math.nan if x is None else float(x)


def pair_rows(sid: str, result: SystemResult) -> list[tuple]:
    """The catalogue's rows of one system, one per pair (values in the order of :data:`COLUMNS`)."""
    rows = []
    for pair in result.system.pairs:
        v = result.verdicts[pair.id]
        f = result.facts.pairs[pair.id]
        dist = result.facts.pair_distance_pc(pair.id)
        rows.append((sid, pair.id, pair.members[0], pair.members[1], v.status, _nan(v.probability),
                     _nan(v.p_physical), _nan(v.p_bound_given_physical), float(v.log10_odds),
                     _nan(f.rho_arcsec), _nan(f.theta_deg), _nan(dist[1] if dist else None)))
    return rows


def catalogue_table(results: dict[str, SystemResult]):
    return rows_table([row for sid, result in results.items() for row in pair_rows(sid, result)])


def rows_table(rows: list[tuple]):
    """The catalogue table from :func:`pair_rows` of every system (the incremental build caches them)."""
    from astropy.table import Table

    rows = [tuple(row) for row in rows]
    table = Table(rows=rows, names=[c[0] for c in COLUMNS],
                  dtype=[str, str, str, str, str] + [float] * 7) if rows else Table(names=[c[0] for c in COLUMNS])
    for name, unit, description in COLUMNS:
        if unit is not None:
            table[name].unit = unit or None
        table[name].description = description
    table.meta["description"] = "Pairs and their verdicts; statistical statements about the evidence at hand."
    return table


def catalogue_ecsv(results: dict[str, SystemResult]) -> str:
    return ecsv_text(catalogue_table(results))


def catalogue_votable(results: dict[str, SystemResult]) -> str:
    return votable_text(catalogue_table(results))


def ecsv_text(table) -> str:
    buffer = io.StringIO()
    table.write(buffer, format="ascii.ecsv")
    return buffer.getvalue()


def votable_text(table) -> str:
    buffer = io.BytesIO()
    table.write(buffer, format="votable")
    return buffer.getvalue().decode("utf-8")
