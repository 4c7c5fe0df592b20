"""Benchmark of ``dossier screen``: compute time, speed-up over a per-pair loop, memory when streaming.

Run with ``python benchmarks/screen.py [N] [N_STREAM] [CHUNK] [--dask]`` (defaults 10^4, 5×10^4 and 10^4: the
targets are for 10^6 and 10^7 pairs, which the present parallax Bayes factor makes too slow to run
routinely; the figures are scaled to 10^6 and the README says so).

1. The kernels and the verdict on N synthetic pairs held in memory, one
   core (numpy's element-wise loops are single-threaded): target ≤ 1 s for 10^6.
2. A straightforward per-pair loop on a sample (astropy SkyCoord for the
   separation and position angle, then the same rules one pair at a time
   through their scalar path), scaled to N: target ≥ 100× slower.
3. ``dossier screen`` on a Parquet file of N_STREAM pairs in a fresh process,
   reporting its peak resident memory: target ≤ 1 GB for 10^7.
4. Only with ``--dask``: ``dossier screen --engine dask`` on the same N_STREAM pairs
   as a folder of Parquet files of CHUNK pairs each, on a local cluster of one
   worker process per core (start-up of the cluster included), beside 3.

The pairs are invented (seeded): a mix of physical pairs (shared parallax
and motion) and optical ones.
"""

from __future__ import annotations

import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(REPO))


def synthetic_pairs(n: int, seed: int = 1) -> dict[str, np.ndarray]:
    """Invented candidate pairs: half physical (shared parallax and motion), half optical."""
    rng = np.random.default_rng(seed)
    physical = rng.random(n) < 0.5
    ra1 = rng.uniform(0, 360, n)
    dec1 = np.degrees(np.arcsin(rng.uniform(-1, 1, n)))
    sep_deg = rng.uniform(1, 120, n) / 3600
    angle = rng.uniform(0, 2 * np.pi, n)
    ra2 = ra1 + sep_deg * np.sin(angle) / np.cos(np.radians(dec1))
    dec2 = np.clip(dec1 + sep_deg * np.cos(angle), -90, 90)
    plx1 = rng.uniform(1, 30, n)
    plx2 = np.where(physical, plx1 + rng.normal(0, 0.05, n), rng.uniform(0.2, 30, n))
    pm1 = rng.normal(0, 40, (2, n))
    pm2 = np.where(physical, pm1 + rng.normal(0, 0.3, (2, n)), rng.normal(0, 40, (2, n)))
    has_rv = rng.random(n) < 0.3
    rv1 = np.where(has_rv, rng.normal(0, 30, n), np.nan)
    rv2 = np.where(has_rv, np.where(physical, rv1 + rng.normal(0, 1, n), rng.normal(0, 30, n)), np.nan)
    err = lambda scale: rng.uniform(0.5, 2.0, n) * scale  # noqa: E731
    mag1 = rng.uniform(6, 15, n)
    return {
        "pair_id": np.char.add("cand-", np.arange(n).astype(str)),
        "ra1": ra1, "dec1": dec1, "ra2": ra2, "dec2": dec2,
        "parallax1": plx1, "parallax_error1": err(0.03), "parallax2": plx2, "parallax_error2": err(0.04),
        "pmra1": pm1[0], "pmra_error1": err(0.03), "pmdec1": pm1[1], "pmdec_error1": err(0.03),
        "pmra2": pm2[0], "pmra_error2": err(0.04), "pmdec2": pm2[1], "pmdec_error2": err(0.04),
        "rv1": rv1, "rv_error1": np.where(has_rv, err(0.5), np.nan),
        "rv2": rv2, "rv_error2": np.where(has_rv, err(0.5), np.nan),
        "mag1": mag1, "mag2": mag1 + rng.uniform(0, 5, n),
        "mass1": np.full(n, np.nan), "mass2": np.full(n, np.nan),
        "field_density": 10 ** rng.uniform(2, 3.5, n),  # field stars per deg², so that the pair model runs everywhere
    }


def settings():
    from dossier.schema.settings import Settings

    return Settings.model_validate({"project": {"title": "benchmark"}, "field_density": [
        {"band": "V", "brighter_than": 9.0, "per_square_degree": [2.0, 0.3], "ref": "x"},
        {"band": "V", "brighter_than": 12.0, "per_square_degree": [40.0, 5.0], "ref": "x"},
        {"band": "V", "brighter_than": 15.0, "per_square_degree": [480.0, 50.0], "ref": "x"},
        {"band": "V", "brighter_than": 20.0, "per_square_degree": [5000.0, 500.0], "ref": "x"}]})


def in_memory(n: int) -> float:
    from dossier.screen import Table, screen_table

    data = synthetic_pairs(n)
    table = Table(data.pop("pair_id"), data)
    s = settings()
    screen_table(Table(table.pair_id[:1000], {k: v[:1000] for k, v in data.items()}), s)  # imports, caches
    start = time.perf_counter()
    screen_table(table, s)
    return time.perf_counter() - start


def per_pair_loop(sample: int) -> float:
    """Seconds per pair for the obvious loop: SkyCoord per pair, then the screen one row at a time."""
    import astropy.units as u
    from astropy.coordinates import SkyCoord

    from dossier.screen import Table, screen_table

    data = synthetic_pairs(sample, seed=2)
    ids = data.pop("pair_id")
    s = settings()
    start = time.perf_counter()
    for i in range(sample):
        one = SkyCoord(data["ra1"][i] * u.deg, data["dec1"][i] * u.deg)
        two = SkyCoord(data["ra2"][i] * u.deg, data["dec2"][i] * u.deg)
        one.separation(two)
        one.position_angle(two)
        screen_table(Table(ids[i:i + 1], {k: v[i:i + 1] for k, v in data.items()}), s)
    return (time.perf_counter() - start) / sample


def streamed(n: int, folder: Path, chunk: int) -> tuple[float, float]:
    """(seconds, peak resident MB) of `dossier screen` on a Parquet file of n pairs, in a fresh process."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    path = folder / "pairs.parquet"
    writer = None
    for first in range(0, n, 1_000_000):
        part = synthetic_pairs(min(1_000_000, n - first), seed=first + 3)
        table = pa.table(part)
        writer = writer or pq.ParquetWriter(path, table.schema)
        writer.write_table(table)
    writer.close()
    start = time.perf_counter()
    subprocess.run([sys.executable, "-m", "dossier", "screen", str(path), "--out", str(folder / "result.parquet"),
                    "--chunk", str(chunk)], check=True, stdout=subprocess.DEVNULL)
    seconds = time.perf_counter() - start
    peak_mb = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024  # kB on Linux
    return seconds, peak_mb


def streamed_dask(n: int, folder: Path, chunk: int) -> float:
    """Seconds of `dossier screen --engine dask` on the pairs of `streamed`, as Parquet files of `chunk` pairs."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    (folder / "pairs").mkdir()
    k = 0
    for first in range(0, n, 1_000_000):
        table = pa.table(synthetic_pairs(min(1_000_000, n - first), seed=first + 3))
        for start in range(0, table.num_rows, chunk):
            pq.write_table(table.slice(start, chunk), folder / "pairs" / f"pairs-{k:05d}.parquet")
            k += 1
    start = time.perf_counter()
    subprocess.run([sys.executable, "-m", "dossier", "screen", str(folder / "pairs"), "--out", str(folder / "result"),
                    "--engine", "dask", "--chunk", str(chunk)], check=True, stdout=subprocess.DEVNULL)
    return time.perf_counter() - start


def main() -> int:
    args = [a for a in sys.argv[1:] if a != "--dask"]
    n = int(args[0]) if len(args) > 0 else 10_000
    n_stream = int(args[1]) if len(args) > 1 else 50_000
    chunk = int(args[2]) if len(args) > 2 else 10_000
    compute = in_memory(n)
    per_million = compute * 1e6 / n
    loop = per_pair_loop(200)
    ratio = loop * n / compute
    print(f"screen {n:,} pairs in memory (one core): {compute:.2f} s, {per_million:,.0f} s per 10^6   "
          f"target ≤ 1 s per 10^6: {'ok' if per_million <= 1 else 'MISSED'}")
    print(f"per-pair loop (SkyCoord + the same kernels a pair at a time, 200-pair sample): {loop * 1e3:.2f} ms a pair: "
          f"the vectorised screen is {ratio:,.1f}× faster   target ≥ 100×: {'ok' if ratio >= 100 else 'MISSED'}")
    with tempfile.TemporaryDirectory() as tmp:
        seconds, peak = streamed(n_stream, Path(tmp), chunk)
    print(f"dossier screen on {n_stream:,} pairs (Parquet, chunks of {chunk:,}): {seconds:.1f} s, peak memory "
          f"{peak:.0f} MB   target ≤ 1024 MB: {'ok' if peak <= 1024 else 'MISSED'}")
    if "--dask" in sys.argv[1:]:
        from dask.system import CPU_COUNT

        with tempfile.TemporaryDirectory() as tmp:
            on_dask = streamed_dask(n_stream, Path(tmp), chunk)
        print(f"dossier screen --engine dask on the same pairs ({-(-n_stream // chunk)} Parquet files, local cluster "
              f"of {CPU_COUNT} worker processes, start-up included): {on_dask:.1f} s, "
              f"{seconds / on_dask:.2f}× the speed of one process")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
