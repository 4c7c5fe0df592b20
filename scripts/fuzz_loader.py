"""Fuzz the project loader: whatever the files say, ``load_project`` returns a project or raises
``ProblemsFound`` with printable problems; any other exception is a bug.

Not part of the test suite (it runs until stopped). With atheris (``pip install atheris``;
coverage-guided, libFuzzer options on the command line)::

    python scripts/fuzz_loader.py -max_total_time=120          # two minutes
    python scripts/fuzz_loader.py -runs=20000 fuzz-corpus/     # keep the inputs that found new paths

Without atheris it falls back to random mutations from a seeded generator::

    python scripts/fuzz_loader.py --plain 5000                 # 5000 inputs

Each input starts from a fresh copy of the demo project and changes one of its files: replaced by
raw bytes, bytes spliced into the text, or one YAML value swapped for a value of another type
(a list for a number, a huge or non-finite number, a deep nesting, a long or non-UTF-8 string).
A crash prints the file, the input that caused it and the traceback; atheris also saves the input
as ``crash-*``, which ``python scripts/fuzz_loader.py crash-…`` replays.
"""

from __future__ import annotations

import atexit
import random
import shutil
import sys
import tempfile
import traceback
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
DEMO = REPO / "demo_project"
FILES = ("systems/heron-1/evidence.yaml", "systems/alder-4/evidence.yaml", "systems/wren-9/evidence.yaml",
         "references.yaml", "dossier.toml", "systems/heron-1/log.csv", "systems/alder-4/log.csv")
ODD_VALUES = [None, True, 0, -1, 10**400, 1e308, float("nan"), float("inf"), "", "x" * 100_000, "\udcff",
              "\x00", "J99999999.0", "2019-02-30", "BJD", [], {}, [[]], {"ref": None}, ["a", "b", "c", "d"],
              {"value": "1", "uncertainty": [1]}, "*anchor", "<<: *x", "&a [*a]"]


class Workspace:
    """A copy of the demo project whose files are reset after every input."""

    def __init__(self) -> None:
        # One fixed folder, emptied at the start: libFuzzer ends the process without running atexit hooks,
        # so a fresh temporary folder per run would be left behind. (Run one fuzzer at a time.)
        top = Path(tempfile.gettempdir()) / "dossier-fuzz-loader"
        shutil.rmtree(top, ignore_errors=True)
        atexit.register(shutil.rmtree, top, ignore_errors=True)
        self.root = top / "project"
        shutil.copytree(DEMO, self.root, ignore=shutil.ignore_patterns(".dossier-cache", "releases"))
        self.original = {name: (self.root / name).read_bytes() for name in FILES}

    def reset(self, name: str) -> None:
        (self.root / name).write_bytes(self.original[name])


def _yaml_values(node, path=()):
    """(path, value) of every scalar of a plain YAML tree."""
    if isinstance(node, dict):
        for k, v in node.items():
            yield from _yaml_values(v, path + (k,))
    elif isinstance(node, list):
        for i, v in enumerate(node):
            yield from _yaml_values(v, path + (i,))
    else:
        yield path, node


def _replace_value(text: bytes, pick, value) -> bytes:
    """The YAML document with the value at one path (chosen by ``pick``) replaced by ``value``."""
    import io

    from ruamel.yaml import YAML

    yaml = YAML(typ="safe", pure=True)
    tree = yaml.load(text)
    paths = [p for p, _ in _yaml_values(tree) if p]
    if not paths:
        return text
    path = paths[pick(len(paths))]
    node = tree
    for key in path[:-1]:
        node = node[key]
    node[path[-1]] = value
    out = io.StringIO()
    try:
        yaml.dump(tree, out)
    except Exception:  # noqa: BLE001 - a value ruamel cannot write (e.g. a lone surrogate): write it by hand
        return text + f"\nextra: {value!r}\n".encode("utf-8", "surrogateescape")
    return out.getvalue().encode("utf-8", "surrogatepass")


def _deep(depth: int, kind: int) -> bytes:
    return (b"[" * depth + b"]" * depth) if kind % 2 else (b"{a: " * depth + b"1" + b"}" * depth)


def mutate(original: bytes, name: str, choose, pick, raw: bytes) -> bytes:
    """One fuzzed version of a file. ``choose(n)``/``pick(n)`` draw integers below n; ``raw`` is spare bytes."""
    how = choose(5)
    if how == 0:
        return raw
    if how == 1:  # splice the spare bytes in
        at = pick(len(original) + 1)
        cut = pick(64)
        return original[:at] + raw + original[at + cut:]
    if how == 2 and name.endswith(".yaml"):
        return _replace_value(original, pick, ODD_VALUES[choose(len(ODD_VALUES))])
    if how == 3 and name.endswith(".yaml"):
        at = original.find(b"\n", pick(len(original))) + 1
        return original[:at] + b"extra: " + _deep(1 + pick(5000), pick(2)) + b"\n" + original[at:]
    # a line dropped or doubled (keeps most of the file valid, so the deeper checks run)
    lines = original.splitlines(keepends=True)
    k = pick(len(lines))
    return b"".join(lines[:k] + lines[k + 1:]) if choose(2) else b"".join(lines[:k + 1] + lines[k:])


def check(space: Workspace, name: str, data: bytes) -> None:
    """Load the project with ``data`` as the file ``name``: a project, or ProblemsFound that prints."""
    from dossier.errors import ProblemsFound
    from dossier.schema.loader import load_project

    (space.root / name).write_bytes(data)
    # Only the system whose file changed (settings and references are read in any case): 3× faster.
    only = name.split("/")[1] if name.startswith("systems/") else "wren-9"
    try:
        load_project(space.root, only=only)
    except ProblemsFound as found:
        assert found.problems, "ProblemsFound without a problem"
        for problem in found.problems:
            text = str(problem)
            assert isinstance(problem.line, int) and problem.line >= 0, problem
            assert "\x00" not in text, text
    except RecursionError as exc:  # reported, but as its own kind of crash
        raise AssertionError(f"RecursionError loading {name}") from exc
    finally:
        space.reset(name)


def report(name: str, data: bytes) -> None:
    sys.stderr.write(f"\n=== crash loading {name} with {len(data)} bytes: {data[:400]!r}\n")
    traceback.print_exc()


def run_atheris(argv: list[str]) -> None:
    import atheris

    with atheris.instrument_imports(include=["dossier"]):
        import dossier.logbook
        import dossier.schema.loader  # noqa: F401
    space = Workspace()

    def one_input(buffer: bytes) -> None:
        fdp = atheris.FuzzedDataProvider(buffer)
        name = FILES[fdp.ConsumeIntInRange(0, len(FILES) - 1)]
        choose = lambda n: fdp.ConsumeIntInRange(0, n - 1)
        pick = lambda n: fdp.ConsumeIntInRange(0, max(n - 1, 0))
        seed = fdp.ConsumeIntInRange(0, 4)
        raw = fdp.ConsumeBytes(fdp.ConsumeIntInRange(0, 256))
        data = mutate(space.original[name], name, lambda n: (choose(n) + seed) % n, pick, raw)
        try:
            check(space, name, data)
        except BaseException:
            report(name, data)
            raise

    atheris.Setup(argv, one_input)
    atheris.Fuzz()


def run_plain(count: int, seed: int = 0) -> int:
    rng = random.Random(seed)
    space = Workspace()
    crashes = 0
    for i in range(count):
        name = rng.choice(FILES)
        raw = bytes(rng.randrange(256) for _ in range(rng.randrange(64)))
        data = mutate(space.original[name], name, rng.randrange, lambda n: rng.randrange(max(n, 1)), raw)
        try:
            check(space, name, data)
        except Exception:  # noqa: BLE001 - every crash is counted and reported
            crashes += 1
            report(name, data)
        if (i + 1) % 500 == 0:
            print(f"{i + 1} inputs, {crashes} crashes", flush=True)
    print(f"{count} inputs, {crashes} crashes")
    return 1 if crashes else 0


if __name__ == "__main__":
    sys.path.insert(0, str(REPO))
    if len(sys.argv) > 1 and sys.argv[1] == "--plain":
        sys.exit(run_plain(int(sys.argv[2]) if len(sys.argv) > 2 else 1000))
    import importlib.util

    if importlib.util.find_spec("atheris") is None:
        print("atheris is not installed: pip install atheris, or run with --plain N", file=sys.stderr)
        sys.exit(2)
    run_atheris(sys.argv)
