"""Benchmarks: wall-clock time of the commands a user runs, on the demo project.

Run with ``python benchmarks/run.py`` (after ``pip install -e .``). Each
command runs in a fresh process, so start-up and imports are included, as a
user experiences them. Targets (from the issues): ``dossier weigh`` on the
demo under 2 s including start-up, once its spectroscopic fit is cached (the
first run, with an empty cache, also imports the period search and the
least-squares solver and is reported on its own line).
"""

from __future__ import annotations

import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
DEMO = REPO / "demo_project"
TARGETS = {"weigh": 2.0}


def timed(args: list[str], repeat: int) -> list[float]:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        subprocess.run([sys.executable, "-m", "dossier", *args], check=True, stdout=subprocess.DEVNULL)
        times.append(time.perf_counter() - start)
    return times


def main() -> int:
    import shutil

    repeat = int(sys.argv[1]) if len(sys.argv) > 1 else 5
    timed(["check", str(DEMO)], 1)  # warm the file cache and byte-code
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        # a copy of the demo, so that the cache of fits (dossier/cache.py) starts empty
        project = Path(tmp) / "demo"
        shutil.copytree(DEMO, project, ignore=shutil.ignore_patterns(".dossier-cache"))
        cold = timed(["weigh", str(project), "--json"], 1)[0]
        rows.append(("weigh, empty cache", cold, cold, cold))
        # the PDFs of a first build are rendered (in parallel); later builds take unchanged ones from the cache
        first = timed(["build", str(project), "--out", str(Path(tmp) / "first")], 1)[0]
        rows.append(("build, empty cache", first, first, first))
        cases = {
            "check": ["check", str(DEMO)],
            "weigh": ["weigh", str(project), "--json"],
            "build --no-pdf": ["build", str(project), "--out", str(Path(tmp) / "site"), "--no-pdf"],
            "build": ["build", str(project), "--out", str(Path(tmp) / "site")],
            "plan": ["plan", str(project), "--site", "48.2,11.6,520", "--date", "2026-12-02"],
        }
        for name, args in cases.items():
            times = timed(args, repeat)
            rows.append((name, statistics.median(times), min(times), max(times)))
    failed = False
    print(f"{'command':<20} {'median s':>9} {'min s':>7} {'max s':>7}  target")
    for name, median, low, high in rows:
        target = TARGETS.get(name)
        verdict = "" if target is None else (f"< {target:.1f} s " + ("ok" if median < target else "MISSED"))
        failed |= target is not None and median >= target
        print(f"{name:<20} {median:9.2f} {low:7.2f} {high:7.2f}  {verdict}")
    return 1 if failed else 0


if __name__ == "__main__":
    raise SystemExit(main())
