"""Screen many candidate pairs at once with the vectorised kernels of the pair rules.

``dossier screen PAIRS --out RESULT`` reads a table of candidate pairs (CSV
or Parquet, one pair per row), streams it in chunks so that memory stays
bounded whatever its size, runs on every row the kernels that the rules
themselves use (``kernel()`` in each rule module: parallax agreement,
proper motion against the bound-orbit limit, radial-velocity agreement,
chance alignment) and the verdict (:func:`dossier.rules.verdict.combine_arrays`),
and writes one row per pair (CSV or Parquet, by the extension of RESULT).
Because ``weigh`` computes its numbers through the same kernels, the two give
the same numbers for the same pair.

Input columns (``--map column=field`` renames others): see :data:`FIELDS`.
Output columns: see :data:`OUTPUT_COLUMNS` (also in the README).
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from dossier.errors import DossierError

#: Input fields: (name, unit, required).
FIELDS: tuple[tuple[str, str, bool], ...] = (
    ("pair_id", "", True),
    ("ra1", "deg", True), ("dec1", "deg", True), ("ra2", "deg", True), ("dec2", "deg", True),
    ("parallax1", "mas", False), ("parallax_error1", "mas", False),
    ("parallax2", "mas", False), ("parallax_error2", "mas", False),
    ("pmra1", "mas/yr", False), ("pmra_error1", "mas/yr", False), ("pmdec1", "mas/yr", False),
    ("pmdec_error1", "mas/yr", False),
    ("pmra2", "mas/yr", False), ("pmra_error2", "mas/yr", False), ("pmdec2", "mas/yr", False),
    ("pmdec_error2", "mas/yr", False),
    ("rv1", "km/s", False), ("rv_error1", "km/s", False), ("rv2", "km/s", False), ("rv_error2", "km/s", False),
    ("mag1", "mag", False), ("mag2", "mag", False),
    ("mass1", "Msun", False), ("mass2", "Msun", False),
)
NUMERIC = tuple(name for name, _, _ in FIELDS if name != "pair_id")

#: Output columns and what they hold.
OUTPUT_COLUMNS: dict[str, str] = {
    "pair_id": "the input pair id",
    "separation_arcsec": "angular separation of 2 from 1 (arcsec)",
    "position_angle_deg": "position angle of 2 from 1, north through east (deg)",
    "projected_separation_au": "separation at the pair's parallax (au): the members' weighted mean, or the first's "
                               "when they differ by more than 3σ",
    "total_mass_msun": "mass1 + mass2, estimated where missing (solar masses)",
    "mass_estimated": "true where a mass was estimated from the magnitude and parallax",
    "period_yr": "Kepler period of a circular orbit with a = projected separation (yr)",
}

DEFAULT_CHUNK = 250_000


def parse_map(pairs: tuple[str, ...]) -> dict[str, str]:
    """``("PA=pmra1", ...)`` from ``--map``: input column name -> field name."""
    known = {name for name, _, _ in FIELDS}
    out = {}
    for item in pairs:
        column, sep, field = item.partition("=")
        if not sep or not column or field not in known:
            raise DossierError(f"--map '{item}' is not COLUMN=FIELD with a known field. "
                               f"Fix: use one of: {', '.join(sorted(known))}.")
        out[column] = field
    return out


# ----------------------------------------------------------------------------
# Reading and writing in chunks


@dataclass(frozen=True)
class Table:
    """One chunk of input: the pair ids and every numeric field as float64 (NaN when missing)."""

    pair_id: np.ndarray
    columns: dict[str, np.ndarray]

    def __len__(self) -> int:
        return len(self.pair_id)


def _kind(path: Path) -> str:
    suffix = path.suffix.lower()
    if suffix in (".csv", ".txt"):
        return "csv"
    if suffix in (".parquet", ".pq"):
        return "parquet"
    raise DossierError(f"{path}: unknown table format '{suffix}'. Fix: use a .csv or .parquet file.")


def _to_table(batch, names: dict[str, str], source: str, first_row: int) -> Table:
    import pyarrow as pa
    import pyarrow.compute as pc

    fields = {names.get(n, n): i for i, n in enumerate(batch.schema.names)}
    missing = [name for name, _, required in FIELDS if required and name not in fields]
    if missing:
        raise DossierError(f"{source}: no column for {', '.join(missing)} (columns: {', '.join(batch.schema.names)}). "
                           "Fix: rename them, or map them with --map COLUMN=FIELD.")
    columns = {}
    for name in NUMERIC:
        if name not in fields:
            columns[name] = np.full(batch.num_rows, np.nan)
            continue
        col = batch.column(fields[name])
        try:
            col = pc.cast(col, pa.float64())
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            bad = _first_bad(col)
            raise DossierError(f"{source}: row {first_row + bad + 1}: column '{batch.schema.names[fields[name]]}' "
                               f"({name}) is not a number. Fix: correct or empty that cell.") from None
        columns[name] = col.to_numpy(zero_copy_only=False).astype(float, copy=False)
    ids = batch.column(fields["pair_id"]).cast(pa.string()).to_numpy(zero_copy_only=False)
    return Table(ids, columns)


def _first_bad(col) -> int:
    for i, value in enumerate(col.to_pylist()):
        try:
            if value is not None and value != "":
                float(value)
        except (TypeError, ValueError):
            return i
    return 0


def read_chunks(path: Path, names: dict[str, str], chunk_rows: int = DEFAULT_CHUNK) -> Iterator[Table]:
    """The pairs of a CSV or Parquet file, ``chunk_rows`` at a time (memory bounded by the chunk)."""
    path = Path(path)
    if not path.is_file():
        raise DossierError(f"{path}: no such file. Fix: give the path of a CSV or Parquet table of pairs.")
    import pyarrow as pa

    row = 0
    if _kind(path) == "csv":
        import pyarrow.csv as pcsv

        # pyarrow infers each column's type; a column it reads as text fails the cast in _to_table,
        # which names the first bad row
        try:
            reader = pcsv.open_csv(path, read_options=pcsv.ReadOptions(block_size=1 << 22),
                                   convert_options=pcsv.ConvertOptions(strings_can_be_null=True))
        except pa.ArrowInvalid as exc:
            raise DossierError(f"{path}: not a readable CSV table ({exc}). Fix: one header row, then one pair per "
                               "row, separated by commas.") from None
        batches = reader
    else:
        import pyarrow.parquet as pq

        batches = pq.ParquetFile(path).iter_batches(batch_size=chunk_rows)
    pending = []
    size = 0
    try:
        for batch in batches:
            pending.append(batch)
            size += batch.num_rows
            if size >= chunk_rows:
                yield from _flush(pending, names, str(path), row)
                row += size
                pending, size = [], 0
    except pa.ArrowInvalid as exc:  # a malformed line deep in a CSV file
        raise DossierError(f"{path}: {exc}. Fix: correct that line; nothing was written.") from None
    if pending:
        yield from _flush(pending, names, str(path), row)


def _flush(batches, names, source, first_row) -> Iterator[Table]:
    import pyarrow as pa

    table = pa.Table.from_batches(batches).combine_chunks()
    for batch in table.to_batches():
        yield _to_table(batch, names, source, first_row)
        first_row += batch.num_rows


class Writer:
    """Write result chunks to a temporary file, renamed into place only when all went well."""

    def __init__(self, path: Path):
        self.path = Path(path)
        self.kind = _kind(self.path)
        self.path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(dir=self.path.parent, prefix=f".{self.path.name}.", suffix=".tmp")
        os.close(fd)
        self.tmp = Path(tmp)
        self._writer = None

    def write(self, columns: dict[str, np.ndarray]) -> None:
        import pyarrow as pa

        table = pa.table(columns)
        if self._writer is None:
            if self.kind == "csv":
                import pyarrow.csv as pcsv

                self._writer = pcsv.CSVWriter(self.tmp, table.schema)
            else:
                import pyarrow.parquet as pq

                self._writer = pq.ParquetWriter(self.tmp, table.schema)
        self._writer.write_table(table)

    def close(self, ok: bool) -> None:
        if self._writer is not None:
            self._writer.close()
        if ok:
            os.replace(self.tmp, self.path)
        else:
            self.tmp.unlink(missing_ok=True)


# ----------------------------------------------------------------------------
# The computation


def estimate_mass(mag: np.ndarray, parallax_mas: np.ndarray) -> np.ndarray:
    """Main-sequence mass from the apparent magnitude and parallax (NaN where either is missing).

    The absolute magnitude gives L/L☉ = 10^(−0.4 (M − 4.83)) with no
    bolometric correction, and the mass is the one whose zero-age
    main-sequence luminosity (Tout et al. 1996, MNRAS 281, 257, solar
    metallicity) is that L, clipped to 0.1–20 M☉. A rough estimate for
    dwarfs, said so in the output (``mass_estimated``).
    """
    from dossier.astro.stars import zams_luminosity

    grid = np.geomspace(0.1, 20.0, 400)
    log_l_grid = np.log10(zams_luminosity(grid))
    with np.errstate(divide="ignore", invalid="ignore"):
        absolute = mag + 5.0 * np.log10(parallax_mas / 100.0)
        log_l = -0.4 * (absolute - 4.83)
    mass = np.interp(log_l, log_l_grid, grid)
    return np.where(np.isfinite(log_l) & (parallax_mas > 0), mass, np.nan)


def screen_table(t: Table, settings) -> dict[str, np.ndarray]:
    """Every output column for one chunk of pairs."""
    from dossier.astro import angles, binary

    c = t.columns
    rho, pa = angles.separation_pa(c["ra1"], c["dec1"], c["ra2"], c["dec2"])
    m1, m2 = c["mass1"], c["mass2"]
    est1, est2 = np.isnan(m1), np.isnan(m2)
    m1 = np.where(est1, estimate_mass(c["mag1"], c["parallax1"]), m1)
    m2 = np.where(est2, estimate_mass(c["mag2"], c["parallax2"]), m2)
    total = m1 + m2
    plx, _ = pair_parallax(c["parallax1"], c["parallax_error1"], c["parallax2"], c["parallax_error2"])
    with np.errstate(divide="ignore", invalid="ignore"):
        s_au = np.where(plx > 0, rho / plx * 1000.0, np.nan)
    out: dict[str, np.ndarray] = {
        "pair_id": t.pair_id,
        "separation_arcsec": rho,
        "position_angle_deg": pa,
        "projected_separation_au": s_au,
        "total_mass_msun": total,
        "mass_estimated": (est1 | est2) & np.isfinite(total),
        "period_yr": binary.kepler_period_yr(s_au, total),
    }
    out.update(run_rules(c, rho, total, settings))
    return out


def pair_parallax(p1: np.ndarray, e1: np.ndarray, p2: np.ndarray, e2: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The parallax of each pair as ``SystemFacts.pair_parallax`` takes it: the inverse-variance mean of
    the members', or the first member's where they differ by more than 3σ (or the second's is missing)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        both = np.isfinite(p1) & np.isfinite(p2) & (e1 > 0) & (e2 > 0)
        agree = both & ~(np.abs(p1 - p2) > 3 * np.hypot(e1, e2))
        w1, w2 = 1 / e1**2, 1 / e2**2
        mean = np.where(agree, (w1 * p1 + w2 * p2) / (w1 + w2), np.where(np.isfinite(p1), p1, p2))
        error = np.where(agree, 1 / np.sqrt(w1 + w2), np.where(np.isfinite(p1), e1, e2))
    return mean, error


def _fainter(c: dict[str, np.ndarray]) -> np.ndarray:
    m1, m2 = c["mag1"], c["mag2"]
    return np.where(np.isnan(m1), m2, np.where(np.isnan(m2), m1, np.maximum(m1, m2)))


def run_rules(c: dict[str, np.ndarray], rho: np.ndarray, total: np.ndarray, settings) -> dict[str, np.ndarray]:
    """The kernel of each screened rule, then the verdict: columns ``<rule>_outcome``, ``_statistic``, ``_strength``,
    ``p_physical``, ``p_bound``, ``status`` and ``probability``."""
    from dossier.astro import distance
    from dossier.rules import chance_alignment, parallax_agreement, proper_motion_orbit, radial_velocity
    from dossier.rules import distance as distance_rule
    from dossier.rules.base import OUTCOME_NAMES
    from dossier.rules.registry import RULES, rule_settings
    from dossier.rules.verdict import STATUSES, combine_arrays

    def config(rule):
        return rule_settings(settings.rules, rule.RULE)

    length = rule_settings(settings.rules, distance_rule.RULE).length_scale_kpc
    plx, plx_err = pair_parallax(c["parallax1"], c["parallax_error1"], c["parallax2"], c["parallax_error2"])
    results = {
        "parallax-agreement": parallax_agreement.kernel(
            c["parallax1"], c["parallax_error1"], c["parallax2"], c["parallax_error2"], rho,
            config(parallax_agreement), length),
        "chance-alignment": _chance(c, rho, settings, config(chance_alignment), length),
        "proper-motion-orbit": proper_motion_orbit.kernel(
            c["pmra1"], c["pmra_error1"], c["pmdec1"], c["pmdec_error1"],
            c["pmra2"], c["pmra_error2"], c["pmdec2"], c["pmdec_error2"], rho, plx, total,
            config(proper_motion_orbit)),
    }
    has_rv = np.isfinite(c["rv1"]) & np.isfinite(c["rv2"]) & np.isfinite(plx) & (plx_err > 0)
    dist = np.full(len(rho), np.nan)
    if has_rv.any():  # the distance posterior only where a radial-velocity test can be made
        dist[has_rv] = 1000.0 * distance.edsd_quantiles(plx[has_rv], plx_err[has_rv], length, q=(0.5,))[:, 0]
    results["radial-velocity-agreement"] = radial_velocity.kernel(c["rv1"], c["rv_error1"], c["rv2"], c["rv_error2"], rho,
                                                        dist, total, config(radial_velocity))
    order = [r for r in RULES if r.id in results]  # registry order, as weigh sums them
    out: dict[str, np.ndarray] = {}
    association, binding = [], []
    for rule in order:
        res = results[rule.id]
        key = rule.id.replace("-", "_")
        out[f"{key}_outcome"] = np.array(OUTCOME_NAMES, dtype=object)[res["outcome"].astype(int) + 2]
        out[f"{key}_statistic"] = res["statistic"]
        out[f"{key}_strength"] = res["strength"]
        if rule.question in ("association", "orbit"):
            association.append(res["strength"])
        if rule.question in ("binding", "orbit"):
            binding.append(res["strength"])
    n = len(rho)
    verdict = combine_arrays(np.column_stack(association) if association else np.empty((n, 0)),
                             np.column_stack(binding) if binding else np.empty((n, 0)), settings.verdict)
    out["p_physical"] = verdict["p_physical"]
    out["p_bound"] = verdict["p_bound"]
    out["status"] = np.array(STATUSES, dtype=object)[verdict["status"]]
    out["probability"] = verdict["probability"]
    return out


def _chance(c, rho, settings, rule_config, length) -> dict[str, np.ndarray]:
    """Chance alignment against the project's field-star table (the first band it lists)."""
    from dossier.rules import chance_alignment

    table = list(settings.field_density)
    if table:
        band = table[0].band
        table = [row for row in table if row.band == band]
    return chance_alignment.kernel(
        rho, _fainter(c), rule_config, length,
        table_magnitudes=np.array([row.brighter_than for row in table], float),
        table_densities=np.array([row.per_square_degree.value for row in table], float),
        table_density_errors=np.array([row.per_square_degree.uncertainty for row in table], float))


def screen(pairs: Path, out: Path, names: dict[str, str] | None = None, settings=None,
           chunk_rows: int = DEFAULT_CHUNK, progress: Callable[[int], None] | None = None) -> int:
    """Screen every pair of ``pairs`` into ``out``; return the number of pairs.

    Nothing is written to ``out`` unless every chunk succeeds.
    """
    from dossier.schema.settings import Settings

    settings = settings or Settings.model_validate({"project": {"title": "screen"}})
    writer = Writer(out)
    done = 0
    ok = False
    try:
        for table in read_chunks(pairs, names or {}, chunk_rows):
            writer.write(screen_table(table, settings))
            done += len(table)
            if progress is not None:
                progress(len(table))
        ok = True
    finally:
        writer.close(ok)
    return done
