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
    ("probability_of", None, "What probability is the probability of: P(bound), P(co-moving), P(chance alignment) "
                             "or P(physical)"),
    ("probability", "", "Probability of the status, named by probability_of (NaN when nothing could be weighed)"),
    ("limited_by_model", None, "Whether the probability is nearer 0 or 1 than the model's limit (model_limit): "
                               "then it is a limit of the model, not a measurement"),
    ("p_bound", "", "P(bound) (NaN if the verdict has none)"),
    ("p_comoving", "", "P(co-moving), physical but not bound (NaN if none)"),
    ("p_chance", "", "P(chance alignment), an optical pair (NaN if none)"),
    ("p_physical", "", "P(physical) = P(bound) + P(co-moving) (NaN if none)"),
    ("p_bound_given_physical", "", "P(bound | physical) (NaN if none)"),
    ("log10_odds_physical", "", "log10 odds physical : chance alignment, as the verdict used them (NaN if none)"),
    ("log10_odds_bound", "", "log10 odds bound : co-moving, as the verdict used them (NaN if none)"),
    ("rho", "arcsec", "Separation"),
    ("theta", "deg", "Position angle, north through east"),
    ("distance", "pc", "Distance of the pair (posterior median)"),
)
#: The columns that hold text (the others are floats, NaN where there is no value; limited_by_model is a bool).
TEXT_COLUMNS = ("system", "pair", "first", "second", "status", "probability_of")


def _nan(x: float | None) -> float:
    return math.nan if x is None else float(x)


def pair_rows(sid: str, result: SystemResult) -> list[tuple]:
    """The catalogue's rows of one system, one per pair (values in the order of :data:`COLUMNS`)."""
    rows = []
    for pair in result.system.pairs:
        v = result.verdicts[pair.id]
        f = result.facts.pairs[pair.id]
        dist = result.facts.pair_distance_pc(pair.id)
        rows.append((sid, pair.id, pair.members[0], pair.members[1], v.status, v.probability_of,
                     _nan(v.probability), bool(v.limited_by_model), _nan(v.p_bound), _nan(v.p_comoving),
                     _nan(v.p_chance), _nan(v.p_physical), _nan(v.p_bound_given_physical), _nan(v.log10_odds),
                     _nan(v.log10_bound_odds), _nan(f.rho_arcsec), _nan(f.theta_deg),
                     _nan(dist[1] if dist else None)))
    return rows


def catalogue_table(results: dict[str, SystemResult]):
    return rows_table([row for sid, result in results.items() for row in pair_rows(sid, result)])


def rows_table(rows: list[tuple]):
    """The catalogue table from :func:`pair_rows` of every system (the incremental build caches them)."""
    from astropy.table import Table

    rows = [tuple(row) for row in rows]
    names = [c[0] for c in COLUMNS]
    dtype = [str if n in TEXT_COLUMNS else bool if n == "limited_by_model" else float for n in names]
    table = Table(rows=rows, names=names, dtype=dtype) if rows else Table(names=names, dtype=dtype)
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
