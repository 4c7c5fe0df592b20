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

With ``--engine dask`` (:func:`screen_dask`), PAIRS may also be a folder of
Parquet (or CSV) files; each partition (a CSV file, or about ``--chunk`` pairs
of whole row groups of a Parquet file) goes through the same reader, kernels
and writer on a dask worker, into one Parquet part of the folder RESULT.

Input columns (``--map column=field`` renames others): see :data:`FIELDS`.
Output columns: see :data:`OUTPUT_COLUMNS` (also in the README).
"""

from __future__ import annotations

import os
import re
import tempfile
from collections.abc import Callable, Iterator
from contextlib import contextmanager
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
    ("mass_error1", "Msun", False), ("mass_error2", "Msun", False),
    ("pmra_pmdec_corr1", "", False), ("pmra_pmdec_corr2", "", False),
    ("field_density", "deg-2", False),
    ("inner1", "", False), ("inner2", "", False),
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
#: The pair model's and the verdict's columns, after each diagnostic rule's ``_outcome``, ``_statistic``, ``_strength``.
VERDICT_COLUMNS: dict[str, str] = {
    "field_density_used": "field stars per square degree at least as bright as the fainter star (input, table or "
                          "setting)",
    "prior_log10": "log10 odds physical : chance from the separation prior (companions against field stars)",
    "parallax_log10": "log10 odds physical : chance from the parallaxes",
    "motion_log10": "log10 odds physical : chance from the proper motions and RVs, given the parallaxes",
    "binding_prior_log10": "log10 odds bound : co-moving from the separation prior",
    "binding_motion_log10": "log10 odds bound : co-moving from the velocity difference",
    "delta_v_tangential_kms": "velocity difference on the sky, perspective removed (km/s)",
    "circular_speed_kms": "circular speed at the projected separation (km/s)",
    "p_bound": "P(bound)", "p_comoving": "P(co-moving)", "p_chance": "P(chance alignment)",
    "p_physical": "P(bound) + P(co-moving)", "p_bound_given_physical": "P(bound) / P(physical)",
    "status": "bound, co-moving, optical or undetermined",
    "probability": "the probability of the status (probability_of says which)",
    "probability_of": "P(bound), P(co-moving), P(chance alignment), or P(physical) for undetermined",
    "limited_by_model": "true where the probability is nearer 0 or 1 than the model's limit (shown as a limit)",
    "moved_most": "the term that moved the verdict most towards its status",
}

DEFAULT_CHUNK = 250_000
_UMASK = os.umask(0o022)
os.umask(_UMASK)


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


def read_chunks(path: Path, names: dict[str, str], chunk_rows: int = DEFAULT_CHUNK, *,
                row_groups: tuple[int, ...] | None = None, first_row: int = 0,
                source: str | None = None) -> Iterator[Table]:
    """The pairs of a CSV or Parquet file, ``chunk_rows`` at a time (memory bounded by the chunk).

    ``row_groups`` reads only those row groups of a Parquet file, whose first row is row ``first_row``
    of the file (so that errors name the right row); ``source`` is the name errors give the file.
    """
    path = Path(path)
    source = source or str(path)
    if path.is_dir():
        raise DossierError(f"{source}: is a folder; the local engine reads one file. Fix: give a CSV or Parquet "
                           "file, or screen the folder's Parquet files with --engine dask.")
    if not path.is_file():
        raise DossierError(f"{source}: no such file. Fix: give the path of a CSV or Parquet table of pairs.")
    import pyarrow as pa

    row = first_row
    if _kind(path) == "csv":
        import pyarrow.csv as pcsv

        # pyarrow infers each column's type; a column it reads as text fails the cast in _to_table,
        # which names the first bad row
        try:
            reader = pcsv.open_csv(path, read_options=pcsv.ReadOptions(block_size=1 << 22),
                                   convert_options=pcsv.ConvertOptions(strings_can_be_null=True))
        except pa.ArrowInvalid as exc:
            raise DossierError(f"{source}: not a readable CSV table ({exc}). Fix: one header row, then one pair per "
                               "row, separated by commas.") from None
        batches = reader
    else:
        import pyarrow.parquet as pq

        try:
            # one row group at a time, without read-ahead: memory is bounded by the chunk and the file's
            # largest row group, whatever the number of rows
            file = pq.ParquetFile(path, pre_buffer=False)
            groups = range(file.num_row_groups) if row_groups is None else row_groups
            batches = (batch for group in groups
                       for batch in file.iter_batches(batch_size=chunk_rows, row_groups=[group], use_threads=False))
        except pa.ArrowInvalid as exc:
            raise DossierError(f"{source}: not a readable Parquet file ({exc}). Fix: rewrite it with a Parquet "
                               "writer, or give a CSV table.") from None
    pending = []
    size = 0
    try:
        for batch in batches:
            pending.append(batch)
            size += batch.num_rows
            if size >= chunk_rows:
                yield from _flush(pending, names, source, row)
                row += size
                pending, size = [], 0
    except pa.ArrowInvalid as exc:  # a malformed line deep in a CSV file
        raise DossierError(f"{source}: {exc}. Fix: correct that line; nothing was written.") from None
    if pending:
        yield from _flush(pending, names, source, row)


def _flush(batches, names, source, first_row) -> Iterator[Table]:
    import pyarrow as pa

    table = pa.Table.from_batches(batches).combine_chunks()
    for batch in table.to_batches():
        yield _to_table(batch, names, source, first_row)
        first_row += batch.num_rows


class Writer:
    """Write result chunks to a temporary file, renamed into place only when all went well."""

    def __init__(self, path: Path, make_parent: bool = True):
        self.path = Path(path)
        self.kind = _kind(self.path)
        if make_parent:  # the dask engine's parts never recreate a temporary folder removed after a failure
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
            os.chmod(self.tmp, 0o666 & ~_UMASK)  # as an ordinary new file, not mkstemp's owner-only mode
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

    # every field, NaN where the table has no column (as the reader gives them)
    c = {name: t.columns[name] if name in t.columns else np.full(len(t), np.nan) for name in NUMERIC}
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
    from dossier.astro.pairmodel import ESTIMATED_MASS_LN_ERROR

    filled = dict(c, mass1=m1, mass2=m2,
                  mass_error1=np.where(est1, ESTIMATED_MASS_LN_ERROR * m1, c["mass_error1"]),
                  mass_error2=np.where(est2, ESTIMATED_MASS_LN_ERROR * m2, c["mass_error2"]))
    out.update(run_rules(filled, rho, total, settings))
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
    for rule in order:
        res = results[rule.id]
        key = rule.id.replace("-", "_")
        out[f"{key}_outcome"] = np.array(OUTCOME_NAMES, dtype=object)[res["outcome"].astype(int) + 2]
        out[f"{key}_statistic"] = res["statistic"]
        out[f"{key}_strength"] = res["strength"]
    out.update(verdict_columns(c, rho, results["chance-alignment"]["density"], settings, length))
    return out


def verdict_columns(c: dict[str, np.ndarray], rho: np.ndarray, table_density: np.ndarray, settings,
                    length_scale_kpc: float) -> dict[str, np.ndarray]:
    """The pair model (:func:`dossier.astro.pairmodel.evaluate`) and the verdict of each pair: the same
    function ``dossier weigh`` uses, with no independent lines (a screen has no log, orbits or ages)."""
    from dossier.astro import pairmodel
    from dossier.rules.verdict import MODEL_TERMS, PROBABILITY_OF, STATUSES, Model, combine_arrays, strongest_arrays

    density = np.where(np.isfinite(c["field_density"]), c["field_density"], table_density)
    cols = dict(c, field_density=density)
    r = pairmodel.evaluate(cols, settings.pair_model, length_scale_kpc)
    model = Model(r["log_bound"], r["log_comoving"], r["log_chance"], {k: r[k] for k, *_ in MODEL_TERMS})
    n = len(rho)
    empty = np.empty((n, 0))
    v = combine_arrays(model, empty, empty, empty, settings.verdict)
    out: dict[str, np.ndarray] = {"field_density_used": np.where(np.isfinite(density), density,
                                                                 np.nan if settings.pair_model.field_density_per_deg2
                                                                 is None else settings.pair_model.field_density_per_deg2)}
    for k, *_ in MODEL_TERMS:
        out[k] = r[k]
    out["delta_v_tangential_kms"] = r["delta_v_tangential_kms"]
    out["circular_speed_kms"] = r["circular_speed_kms"]
    for k in ("p_bound", "p_comoving", "p_chance", "p_physical", "p_bound_given_physical", "probability"):
        out[k] = v[k]
    status = np.array(STATUSES, dtype=object)[v["status"]]
    out["status"] = status
    out["probability_of"] = np.array([PROBABILITY_OF[s] for s in STATUSES], dtype=object)[v["status"]]
    p = v["probability"]
    limit = settings.pair_model.model_limit
    out["limited_by_model"] = np.isfinite(p) & (np.minimum(p, 1 - p) < limit)
    out["moved_most"] = strongest_arrays(model.terms, v["status"])
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


def _default_settings():
    from dossier.schema.settings import Settings

    return Settings.model_validate({"project": {"title": "screen"}})


def _screen_stream(tables: Iterator[Table], writer: Writer, settings,
                   progress: Callable[[int], None] | None = None) -> int:
    """Screen every chunk of ``tables`` into ``writer``; the loop both engines run."""
    done = 0
    for table in tables:
        writer.write(screen_table(table, settings))
        done += len(table)
        if progress is not None:
            progress(len(table))
    return done


def screen(pairs: Path, out: Path, names: dict[str, str] | None = None, settings=None,
           chunk_rows: int = DEFAULT_CHUNK, progress: Callable[[int], None] | None = None) -> int:
    """Screen every pair of ``pairs`` into ``out``; return the number of pairs.

    Nothing is written to ``out`` unless every chunk succeeds.
    """
    if Path(out).is_dir():
        raise DossierError(f"{out}: is a folder; the local engine writes one .csv or .parquet file. Fix: give a file "
                           "name, or use --engine dask, which writes a folder of Parquet parts.")
    settings = settings or _default_settings()
    writer = Writer(out)
    ok = False
    try:
        done = _screen_stream(read_chunks(pairs, names or {}, chunk_rows), writer, settings, progress)
        ok = True
    finally:
        writer.close(ok)
    return done


# ----------------------------------------------------------------------------
# The dask engine: the same reading, kernels and writing, one partition per task


#: Seconds to wait for a dask scheduler given with ``--scheduler``.
CONNECT_TIMEOUT = 20
PART_PATTERN = re.compile(r"part-\d+\.parquet")
DASK_MISSING = ("the dask engine needs the optional packages dask and distributed, which are not installed. "
                "Fix: pip install 'dossier[dask]'.")


@dataclass(frozen=True)
class Partition:
    """One task of the dask engine: a CSV file, or consecutive row groups of a Parquet file."""

    path: str                         # absolute, so that a worker in another folder or machine finds it
    source: str                       # the name errors give it: the path as the user wrote it
    row_groups: tuple[int, ...] | None  # None: the whole file
    first_row: int                    # row of the file the partition starts at (0-based)
    name: str = ""                    # its part of the result: part-00000.parquet, …


def partitions(pairs: Path, chunk_rows: int = DEFAULT_CHUNK) -> list[Partition]:
    """The partitions of a Parquet or CSV file, or of a folder of them (a partitioned dataset).

    A folder is searched recursively for ``.parquet``, ``.pq`` and ``.csv`` files, in the order of
    their paths, skipping names that begin with ``.`` or ``_`` (as Parquet dataset readers do). A
    Parquet file is cut between row groups into partitions of about ``chunk_rows`` pairs (at least
    one row group each); a CSV file is one partition.
    """
    pairs = Path(pairs)
    if pairs.is_dir():
        files = sorted(p for p in pairs.rglob("*")
                       if p.suffix.lower() in (".parquet", ".pq", ".csv") and p.is_file()
                       and not any(n.startswith((".", "_")) for n in p.relative_to(pairs).parts))
        if not files:
            raise DossierError(f"{pairs}: no .parquet or .csv files in this folder. Fix: give a folder of Parquet "
                               "files of pairs (a partitioned dataset), or one file.")
    elif pairs.is_file():
        _kind(pairs)
        files = [pairs]
    else:
        raise DossierError(f"{pairs}: no such file or folder. Fix: give a Parquet or CSV table of pairs, or a "
                           "folder of Parquet files.")
    import pyarrow as pa
    import pyarrow.parquet as pq

    found: list[Partition] = []
    for file in files:
        path, source = str(file.resolve()), str(file)
        if _kind(file) == "csv":
            found.append(Partition(path, source, None, 0))
            continue
        try:
            meta = pq.ParquetFile(file).metadata
        except (pa.ArrowInvalid, OSError) as exc:
            raise DossierError(f"{source}: not a readable Parquet file ({exc}). Fix: rewrite it with a Parquet "
                               "writer, or move it out of the folder.") from None
        group: list[int] = []
        start = offset = rows = 0
        for i in range(meta.num_row_groups):
            n = meta.row_group(i).num_rows
            if group and rows + n > chunk_rows:
                if rows:
                    found.append(Partition(path, source, tuple(group), start))
                group, rows = [], 0
            if not group:
                start = offset
            group.append(i)
            rows += n
            offset += n
        if group and rows:
            found.append(Partition(path, source, tuple(group), start))
    width = max(5, len(str(len(found) - 1)))
    return [Partition(p.path, p.source, p.row_groups, p.first_row, f"part-{i:0{width}d}.parquet")
            for i, p in enumerate(found)]


def screen_partition(part: Partition, folder: str, names: dict[str, str], settings, chunk_rows: int) -> int:
    """Screen one partition into ``folder/part.name`` (run on a dask worker); return its number of pairs."""
    writer = Writer(Path(folder) / part.name, make_parent=False)
    done = 0
    try:
        done = _screen_stream(read_chunks(Path(part.path), names, chunk_rows, row_groups=part.row_groups,
                                          first_row=part.first_row, source=part.source), writer, settings)
    finally:
        writer.close(done > 0)  # an empty partition leaves no part (an empty file is not Parquet)
    return done


def screen_dask(pairs: Path, out: Path, names: dict[str, str] | None = None, settings=None,
                chunk_rows: int = DEFAULT_CHUNK, scheduler: str | None = None, workers: int | None = None,
                progress: Callable[[int], None] | None = None) -> int:
    """Screen every pair of ``pairs`` (a file, or a folder of Parquet or CSV files) into the folder ``out``,
    one Parquet part per partition, on a dask cluster; return the number of pairs.

    ``scheduler`` is the address of a running dask scheduler (its workers must see ``pairs`` and ``out``
    at the same paths, and have Dossier installed); without it a local cluster of ``workers`` processes
    (default: one per core) is started and closed afterwards. The parts are written into a temporary
    folder beside ``out``, renamed to ``out`` only when every partition succeeded.
    """
    try:
        import distributed
    except ImportError:
        raise DossierError(DASK_MISSING) from None
    out = Path(out)
    if _kind_of_result(out) == "csv":
        raise DossierError(f"{out}: the dask engine writes a folder of Parquet parts, not a CSV file. Fix: give a "
                           "folder name (result/ or result.parquet), or use --engine local for one CSV file.")
    _check_replaceable(out)
    if Path(pairs).is_dir() and Path(pairs).resolve() in (out.resolve(), *out.resolve().parents):
        raise DossierError(f"{out}: is inside the folder of pairs {pairs}, whose next screen would read it. Fix: "
                           "write the result outside that folder.")
    settings = settings or _default_settings()
    parts = partitions(pairs, chunk_rows)
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(dir=out.parent, prefix=f".{out.name}.", suffix=".tmp"))
    ok = False
    done = 0
    try:
        with _client(distributed, scheduler, workers) as client:
            futures = client.map(screen_partition, parts, folder=str(tmp.resolve()), names=names or {},
                                 settings=settings, chunk_rows=chunk_rows, pure=False)
            which = dict(zip(futures, parts))
            try:
                for future in distributed.as_completed(futures, loop=client.loop):
                    try:
                        n = future.result()
                    except distributed.KilledWorker:
                        raise DossierError(f"{which[future].source}: a dask worker died screening it (out of memory?). "
                                           "Fix: a smaller --chunk, or more memory per worker.") from None
                    done += n
                    if progress is not None:
                        progress(n)
            except BaseException:
                client.cancel(futures)
                raise
        _replace_folder(tmp, out)
        ok = True
    finally:
        if not ok:
            _remove_folder(tmp)
    return done


def _kind_of_result(out: Path) -> str:
    return "csv" if out.suffix.lower() in (".csv", ".txt") else "parquet"


def _is_result_folder(path: Path) -> bool:
    return path.is_dir() and all(PART_PATTERN.fullmatch(p.name) and p.is_file() for p in path.iterdir())


def _check_replaceable(out: Path) -> None:
    if out.exists() and not _is_result_folder(out):
        raise DossierError(f"{out}: exists and is not a folder of screen results (part-*.parquet only). Fix: give a "
                           "new folder name, or move it away; the dask engine replaces only an earlier result.")


def _replace_folder(tmp: Path, out: Path) -> None:
    """Rename ``tmp`` to ``out``; an earlier result at ``out`` is swapped out atomically (else moved aside
    first), then removed."""
    _check_replaceable(out)
    os.chmod(tmp, 0o777 & ~_UMASK)  # as an ordinary new folder, not mkdtemp's owner-only mode
    if not out.exists():
        os.replace(tmp, out)
        return
    from dossier.durable import exchange

    if exchange(tmp, out):  # one atomic step where the system has it, as the site's swap does
        _remove_folder(tmp)  # now the earlier result
        return
    old = Path(tempfile.mkdtemp(dir=out.parent, prefix=f".{out.name}.", suffix=".old"))
    os.replace(out, old)  # onto the empty folder mkdtemp made
    try:
        os.replace(tmp, out)
    except BaseException:
        os.replace(old, out)
        raise
    _remove_folder(old)


def _remove_folder(path: Path) -> None:
    """Remove a temporary folder, trying again while a cancelled task still finishes a file in it."""
    import shutil
    import time

    for _ in range(50):
        try:
            shutil.rmtree(path)
            return
        except FileNotFoundError:
            return
        except OSError:
            time.sleep(0.1)
    shutil.rmtree(path, ignore_errors=True)


@contextmanager
def _client(distributed, scheduler: str | None, workers: int | None):
    """A dask client of the scheduler at ``scheduler``, or of a local cluster closed on exit."""
    import logging

    if scheduler:
        try:
            client = distributed.Client(scheduler, timeout=CONNECT_TIMEOUT, set_as_default=False)
        except (OSError, ValueError, TypeError) as exc:
            raise DossierError(f"--scheduler {scheduler}: could not reach a dask scheduler there ({exc}). Fix: start "
                               "one (dask scheduler) and give its address, like tcp://host:8786, or leave "
                               "--scheduler out to use this machine's cores.") from None
        with client:
            yield client
        return
    from dask.system import CPU_COUNT

    # one single-threaded process per core: the kernels are numpy loops that hold the GIL
    try:
        cluster = distributed.LocalCluster(n_workers=workers or CPU_COUNT, threads_per_worker=1, processes=True,
                                           dashboard_address=None, silence_logs=logging.CRITICAL)
    except (RuntimeError, OSError) as exc:
        raise DossierError(f"could not start a local dask cluster ({exc}). Fix: fewer --workers; from a Python "
                           "script, call screen_dask under `if __name__ == \"__main__\":`.") from None
    with cluster, distributed.Client(cluster, set_as_default=False) as client:
        yield client
