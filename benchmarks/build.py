"""Benchmark of ``dossier build --no-pdf`` on a synthetic catalogue: cold, unchanged, one system changed.

Run with ``python benchmarks/build.py [N] [--jobs J] [--keep DIR]`` (default N = 1000). It writes N
invented systems (``benchmarks/synthetic.py``, seed 1) into a temporary folder and times, each in a
fresh process (start-up and imports included, as a user sees them):

1. the first build, with an empty cache: target ≤ 60 s for 1,000 systems on 2 cores;
2. the same build again, nothing changed: target ≤ 2 s;
3. a build after one value of one system's evidence changed: target ≤ 3 s;
4. (no target) a build into a new folder with the cache warm: every page comes from the cache and the
   whole site is written, which is what (3) costs beyond computing its one system.

The load average of the machine is printed before and after: on a shared machine the figures are
only as good as it was quiet.
"""

from __future__ import annotations

import argparse
import os
import re
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(REPO / "benchmarks"))

from synthetic import make_project

TARGETS = {"cold": 60.0, "unchanged": 2.0, "one changed": 3.0}


def timed(args: list[str]) -> float:
    start = time.perf_counter()
    done = subprocess.run([sys.executable, "-m", "dossier", *args], cwd=REPO, stdout=subprocess.DEVNULL,
                          stderr=subprocess.PIPE, text=True, check=False)
    if done.returncode != 0:
        raise SystemExit(f"dossier {' '.join(args)} failed:\n{done.stderr}")
    return time.perf_counter() - start


def change_one_value(project: Path) -> None:
    """Add 0.2 mas to the first parallax of the first system."""
    path = project / "systems" / "synth-0001" / "evidence.yaml"
    text = path.read_text(encoding="utf-8")
    found = re.search(r"parallax: \[([0-9.]+),", text)
    path.write_text(text[: found.start(1)] + f"{float(found.group(1)) + 0.2:.3f}" + text[found.end(1):],
                    encoding="utf-8")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("n", type=int, nargs="?", default=1000, help="number of systems (default 1000)")
    parser.add_argument("--jobs", type=int, help="passed to dossier build --jobs")
    parser.add_argument("--keep", type=Path, help="build in this folder and keep it (default: a temporary one)")
    args = parser.parse_args(argv)
    jobs = ["--jobs", str(args.jobs)] if args.jobs else []
    print(f"load average before: {' '.join(f'{x:.1f}' for x in os.getloadavg())} on {os.cpu_count()} cores")
    with tempfile.TemporaryDirectory() as tmp:
        base = args.keep or Path(tmp)
        project = make_project(args.n, base / "project", seed=1)
        site = base / "site"
        timed(["--version"])  # byte-code compiled, files in the page cache
        rows = []
        build = ["build", str(project), "--out", str(site), "--no-pdf", "--no-progress", *jobs]
        rows.append(("cold", timed(build)))
        rows.append(("unchanged", timed(build)))
        change_one_value(project)
        rows.append(("one changed", timed(build)))
        rows.append(("warm cache, new folder", timed(["build", str(project), "--out", str(base / "site-2"),
                                                      "--no-pdf", "--no-progress", *jobs])))
    print(f"load average after:  {' '.join(f'{x:.1f}' for x in os.getloadavg())}")
    print(f"{'dossier build --no-pdf, ' + str(args.n) + ' systems':<40} {'s':>8}  target")
    failed = False
    for name, seconds in rows:
        target = TARGETS.get(name)
        verdict = "" if target is None else f"≤ {target:g} s " + ("ok" if seconds <= target else "MISSED")
        failed |= target is not None and seconds > target
        print(f"{name:<40} {seconds:8.2f}  {verdict}")
    return 1 if failed else 0


if __name__ == "__main__":
    raise SystemExit(main())
