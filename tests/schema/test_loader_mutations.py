"""Property: whatever is done to an evidence file or a log, the loader answers with problems, never a crash.

Starting from the demo's files, random mutations (delete, duplicate or swap
lines, replace a scalar with random text, a number or a NaN, insert random
bytes, truncate) are applied; loading must then either succeed or give
problems that each name the file and say what to do. Any other exception is
a bug in the loader.
"""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from dossier.errors import Problem, ProblemsFound
from dossier.logbook import read_log
from dossier.schema.loader import load_project, load_references, load_system
from tests.conftest import DEMO

SYSTEM = "alder-4"  # a small file: parsing with positions is what each example costs (heron-1 is 5 times slower)
EVIDENCE = DEMO / "systems" / SYSTEM / "evidence.yaml"
LOG = DEMO / "systems" / "alder-4" / "log.csv"
SHOWN = f"systems/{SYSTEM}/evidence.yaml"

# a scalar in flow or block YAML, or a CSV cell: the text between separators
SCALAR = re.compile(rb"(?<=[\s\[{,:])[^\s\[\]{},:#]+(?=[\s,\]}]|$)", re.MULTILINE)
CELL = re.compile(rb"(?<=[,\n])[^,\n]*(?=[,\n])")

SPECIAL = [b".nan", b".NaN", b".inf", b"-.inf", b"nan", b"inf", b"null", b"~", b"true", b"[]", b"{}", b"''", b'""',
           b"2019-02-30", b"J2999.5", b"B1950.0", b"-0.0", b"1e999", b"99999999999999999999999", b"&a", b"*a",
           b"!!float x", b"!tag x", b'"\\ud800"', b"\xef\xbb\xbf", b"\x00", b"\xe9", b"\t", b"[[[[", b"- x", b"? x",
           b"|", b">", b"---", b"...", b"%YAML 1.1", b"<<: *a"]

replacement = st.one_of(
    st.sampled_from(SPECIAL),
    st.text(max_size=12).map(lambda s: s.encode("utf-8", "surrogatepass")),
    st.floats(allow_nan=True, allow_infinity=True).map(lambda x: repr(x).encode()),
    st.integers(min_value=-10**30, max_value=10**30).map(lambda n: str(n).encode()),
)

mutation = st.one_of(
    st.tuples(st.just("delete"), st.integers(min_value=0)),
    st.tuples(st.just("duplicate"), st.integers(min_value=0)),
    st.tuples(st.just("swap"), st.integers(min_value=0), st.integers(min_value=0)),
    st.tuples(st.just("scalar"), st.integers(min_value=0), replacement),
    st.tuples(st.just("bytes"), st.integers(min_value=0), st.binary(min_size=1, max_size=8)),
    st.tuples(st.just("truncate"), st.integers(min_value=0)),
)


def mutate(data: bytes, steps: list[tuple], scalar: re.Pattern[bytes]) -> bytes:
    for step in steps:
        kind, where = step[0], step[1]
        lines = data.splitlines(keepends=True) or [b""]
        i = where % len(lines)
        if kind == "delete":
            del lines[i]
        elif kind == "duplicate":
            lines.insert(i, lines[i])
        elif kind == "swap":
            j = step[2] % len(lines)
            lines[i], lines[j] = lines[j], lines[i]
        elif kind == "scalar":
            found = list(scalar.finditer(data))
            if found:
                match = found[where % len(found)]
                data = data[: match.start()] + step[2] + data[match.end():]
            continue
        elif kind == "bytes":
            at = where % (len(data) + 1)
            data = data[:at] + step[2] + data[at:]
            continue
        elif kind == "truncate":
            data = data[: where % (len(data) + 1)]
            continue
        data = b"".join(lines)
    return data


@pytest.fixture(scope="module")
def project(tmp_path_factory) -> Path:
    target = tmp_path_factory.mktemp("mutations") / "project"
    shutil.copytree(DEMO, target, ignore=shutil.ignore_patterns(".dossier-cache", "releases"))
    return target


def assert_usable(problems: list[Problem], shown: str) -> None:
    for problem in problems:
        assert isinstance(problem, Problem)
        assert problem.file == shown
        assert problem.line >= 0 and problem.column >= 0
        assert problem.message and problem.fix
        assert "Fix: " in str(problem)


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(steps=st.lists(mutation, min_size=1, max_size=4))
def test_a_mutated_evidence_file_loads_or_gives_problems(project, steps):
    refs, ref_problems = load_references(project)
    assert not ref_problems
    path = project / "systems" / SYSTEM / "evidence.yaml"
    path.write_bytes(mutate(EVIDENCE.read_bytes(), steps, SCALAR))
    system, problems = load_system(project, SYSTEM, refs)  # any exception other than a problem fails the test
    assert system is not None or problems
    assert_usable(problems, SHOWN)


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(steps=st.lists(mutation, min_size=1, max_size=4))
def test_a_mutated_log_reads_or_gives_problems(project, steps):
    path = project / "systems" / "alder-4" / "log.csv"
    path.write_bytes(mutate(LOG.read_bytes(), steps, CELL))
    measures, problems = read_log(path, "systems/alder-4/log.csv", pairs={"AB"}, refs={"speckle-1986"})
    assert_usable(problems, "systems/alder-4/log.csv")


@settings(max_examples=20, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(steps=st.lists(mutation, min_size=1, max_size=3))
def test_the_whole_project_loads_or_raises_problems_found(project, steps):
    # the same, through load_project (what check, weigh and build call): only ProblemsFound may come out
    (project / "systems" / "alder-4" / "log.csv").write_bytes(LOG.read_bytes())  # undo the log test's mutations
    path = project / "systems" / SYSTEM / "evidence.yaml"
    path.write_bytes(mutate(EVIDENCE.read_bytes(), steps, SCALAR))
    try:
        load_project(project)
    except ProblemsFound as exc:
        assert exc.problems
        assert all("Fix: " in str(p) for p in exc.problems)
