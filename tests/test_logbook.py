"""The observing log: reading with line numbers, safe appends, `dossier log add` and `dossier log import`."""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
from pathlib import Path

import pytest
from click.testing import CliRunner
from hypothesis import given, settings
from hypothesis import strategies as st

from dossier import cli_log
from dossier.cli import cli
from dossier.errors import ProblemsFound
from dossier.logbook import append_measures, read_log, write_log
from dossier.schema.log import COLUMNS, LogMeasure
from tests.conftest import REPO

HEADER = ",".join(COLUMNS) + "\n"
SYSTEM = "wren-9"  # one pair, AB
SHOWN = "systems/wren-9/log.csv"


@pytest.fixture
def project(demo_copy: Path) -> Path:
    """A demo copy whose wren-9 starts with no log."""
    (demo_copy / SHOWN).unlink(missing_ok=True)
    return demo_copy


def log_file(project: Path) -> Path:
    return project / SHOWN


def run(*args: str):
    return CliRunner().invoke(cli, [str(a) for a in args])


def add(project: Path, *options: str, pair: str = "AB"):
    return run("log", "add", project, SYSTEM, pair, *options)


BASIC = ("--epoch", "J2024.512", "--theta", "123.4", "--rho", "2.51", "--method", "imaging")


def measure(**values) -> LogMeasure:
    base = dict(pair="AB", epoch="J2024.5", theta=10.0, rho=1.0, method="speckle")
    return LogMeasure(**{**base, **values})


# ----------------------------------------------------------------------------
# log add


def test_add_then_read_back_exactly(project):
    result = add(project, "--epoch", "2024-05-03T22:10", "--theta", "123.456", "--theta-error", "0.3",
                 "--rho", "2.5125", "--rho-error", "0.004", "--delta-mag", "-0.25", "--band", "V",
                 "--method", "filar-micrometer", "--aperture-cm", "20.3", "--observer", "circle-member-3",
                 "--site", "quarry-lane", "--nights", "3", "--quality", "seeing 2\"", "--notes", "steady, 'good'",
                 "--ref", "sky-survey-3")
    assert result.exit_code == 0, result.output
    assert result.output == (
        f"added to {SHOWN}, line 2: pair=AB epoch=2024-05-03T22:10 theta=123.456 theta_error=0.3 rho=2.5125 "
        "rho_error=0.004 delta_mag=-0.25 band=V method=filar-micrometer equinox=date aperture_cm=20.3 "
        "observer=circle-member-3 site=quarry-lane nights=3 quality='seeing 2\"' notes=\"steady, 'good'\" "
        "ref=sky-survey-3\n")
    measures, problems = read_log(log_file(project), SHOWN)
    assert problems == []
    assert measures == [LogMeasure(
        pair="AB", epoch="2024-05-03T22:10", theta=123.456, theta_error=0.3, rho=2.5125, rho_error=0.004,
        delta_mag=-0.25, band="V", method="filar-micrometer", equinox="date", aperture_cm=20.3,
        observer="circle-member-3", site="quarry-lane", nights=3, quality='seeing 2"', notes="steady, 'good'",
        ref="sky-survey-3")]
    assert log_file(project).read_text().splitlines()[0] == ",".join(COLUMNS)


def test_add_appends_and_keeps_existing_rows_byte_for_byte(project):
    old = HEADER + "AB,J1964.395,74.17,,21.480,,,V,eyepiece-micrometer,,20,,,1,,,\n"
    log_file(project).write_text(old)
    assert add(project, *BASIC).exit_code == 0
    text = log_file(project).read_text()
    assert text == old + "AB,J2024.512,123.4,,2.51,,,,imaging,J2000,,,,,,,\n"


def test_exact_duplicate_is_refused(project):
    assert add(project, *BASIC).exit_code == 0
    before = log_file(project).read_bytes()
    result = add(project, *BASIC)
    assert result.exit_code == 1
    assert result.output.splitlines() == [
        f"{SHOWN}:2:0: the same measure is already in the log, so it was not added again. "
        "Fix: nothing to do; a new measure differs from it in at least one value.",
        "1 problem(s) found.",
    ]
    assert log_file(project).read_bytes() == before
    # any difference makes it another measure
    assert add(project, *BASIC, "--notes", "second look").exit_code == 0


def test_unknown_pair_is_refused_with_did_you_mean(project):
    result = add(project, *BASIC, pair="AC")
    assert result.exit_code == 1
    assert result.output.splitlines() == [
        "command line: PAIR: 'AC' is not a pair of system 'wren-9'. Fix: did you mean 'AB'?",
        "1 problem(s) found.",
    ]
    assert not log_file(project).exists()


def test_bad_values_are_refused_together_and_the_file_is_untouched(project):
    assert add(project, *BASIC).exit_code == 0
    before = log_file(project).read_bytes()
    result = add(project, "--epoch", "2024.5", "--theta", "400", "--rho", "abc", "--method", "imaging",
                 "--nights", "0", "--ref", "sky-survey3")
    assert result.exit_code == 1
    assert "Traceback" not in result.output
    assert result.output.splitlines() == [
        "command line: --epoch: '2024.5' is ambiguous: a Julian or a Besselian year? Fix: write J2024.5 or B2024.5.",
        "command line: --nights: '0' is out of range. Fix: give a value at least 1.",
        "command line: --ref: source 'sky-survey3' is not in references.yaml. Fix: did you mean 'sky-survey-3'?",
        "command line: --rho: 'abc' is not a number. Fix: write a number in arcsec.",
        "command line: --theta: '400' is out of range. Fix: give a value less than 360.0.",
        "5 problem(s) found.",
    ]
    assert log_file(project).read_bytes() == before


def test_a_missing_system_is_named_with_did_you_mean(project):
    result = run("log", "add", project, "wren-8", "AB", *BASIC)
    assert result.exit_code == 1
    assert result.output.splitlines() == [
        "systems/wren-8: there is no system 'wren-8'. Fix: did you mean 'wren-9'?",
        "1 problem(s) found.",
    ]


def test_a_log_with_problems_is_not_written_over(project):
    broken = HEADER + "AB,J2024.5,abc,,1.0,,,,imaging,,,,,,,,\n"
    log_file(project).write_text(broken)
    result = add(project, *BASIC)
    assert result.exit_code == 1
    # the project (log included) is checked before anything is written
    assert result.output.splitlines() == [
        f"{SHOWN}:2:0: theta: 'abc' is not a number. Fix: write a number in deg.",
        "1 problem(s) found.",
    ]
    assert log_file(project).read_text() == broken


# ----------------------------------------------------------------------------
# reading


def test_a_missing_log_is_empty(tmp_path):
    assert read_log(tmp_path / "log.csv", "log.csv") == ([], [])


def test_bad_rows_are_reported_with_their_line_in_the_file(tmp_path):
    path = tmp_path / "log.csv"
    path.write_text(
        "pair,epoch,theta,rho,method,nots\n"  # 1: a misspelt column
        'AB,J2020.5,10.0,1.0,imaging,"two\nlines"\n'  # 2-3: a note over two lines
        "AB,2020.5,10.0,,imaging,\n"  # 4: bare year, empty rho
        "\n"  # 5: blank
        "AB,J2021.5,10.0,1.0,imaging,,extra\n"  # 6: a cell beyond the header
        "AB,J2022.5,10.0,1.0,speckel,\n"  # 7: a misspelt method
    )
    measures, problems = read_log(path, "log.csv")
    assert [str(p) for p in problems] == [
        "log.csv:1:0: nots: unknown column 'nots'. Fix: did you mean 'notes'?",
        "log.csv:4:0: epoch: '2020.5' is ambiguous: a Julian or a Besselian year? Fix: write J2020.5 or B2020.5.",
        "log.csv:4:0: rho: a required value is empty. Fix: fill it in (Separation [arcsec]).",
        "log.csv:6:0: the row has 7 cells, the header names 6 columns. "
        "Fix: remove the extra cells, or name their columns in the header.",
        "log.csv:7:0: method: 'speckel' is not allowed here. Fix: did you mean 'speckle'?",
    ]
    assert [m.epoch for m in measures] == ["J2020.5"]


def test_a_log_with_columns_in_another_order_is_rewritten_in_the_standard_order(tmp_path):
    path = tmp_path / "log.csv"
    path.write_text("method,rho,theta,epoch,pair\nimaging,21.480,74.17,J1964.395,AB\n")
    append_measures(path, [measure()], "log.csv")
    assert path.read_text() == (HEADER + "AB,J1964.395,74.17,,21.480,,,,imaging,,,,,,,,\n"
                                "AB,J2024.5,10.0,,1.0,,,,speckle,J2000,,,,,,,\n")


# ----------------------------------------------------------------------------
# numbers round-trip exactly

positive = st.floats(min_value=5e-324, max_value=1e300, allow_nan=False, allow_infinity=False)


@settings(max_examples=200, deadline=None)
@given(theta=st.floats(min_value=0, max_value=360, exclude_max=True), rho=positive, error=positive,
       delta=st.floats(allow_nan=False, allow_infinity=False), nights=st.integers(min_value=1, max_value=10**18))
def test_floats_round_trip_exactly(theta, rho, error, delta, nights):
    given_ = measure(theta=theta, rho=rho, rho_error=error, delta_mag=delta, nights=nights, notes="a, \"b\"\nc")
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "log.csv"
        write_log(path, [given_])
        measures, problems = read_log(path, "log.csv")
    assert problems == []
    assert measures == [given_]  # == on floats: bit for bit, not within a tolerance


def test_tricky_floats_are_written_with_repr(tmp_path):
    path = tmp_path / "log.csv"
    values = [0.1 + 0.2, 1 / 3, 359.99999999999994, 5e-324, 1e-05]
    append_measures(path, [measure(theta=v, rho=1.0, notes=str(i)) for i, v in enumerate(values[:3])]
                    + [measure(rho=v, notes=f"rho{i}") for i, v in enumerate(values[3:])], "log.csv")
    measures, problems = read_log(path, "log.csv")
    assert problems == []
    assert [m.theta for m in measures[:3]] == values[:3] and [m.rho for m in measures[3:]] == values[3:]
    assert "0.30000000000000004" in path.read_text() and "5e-324" in path.read_text()


def test_exact_duplicates_are_refused_by_the_library(tmp_path):
    path = tmp_path / "log.csv"
    append_measures(path, [measure()], "log.csv")
    with pytest.raises(ProblemsFound):
        append_measures(path, [measure(epoch="J2025.5"), measure()], "log.csv")
    assert len(read_log(path, "log.csv")[0]) == 1  # all or nothing


# ----------------------------------------------------------------------------
# log import


def write_csv(folder: Path, text: str) -> Path:
    path = folder / "export.csv"
    path.write_text(text)
    return path


MAP = ("--map", "PA=theta", "--map", "Sep=rho", "--map", "Date=epoch")


def test_import_with_map(project, tmp_path):
    source = write_csv(tmp_path, "Date,PA,Sep,pair,method,notes\n"
                                 "J2024.5,123.4,2.5,AB,imaging,first\n"
                                 "2024-09-01,123.9,2.49,AB,speckle,\n")
    result = run("log", "import", project, SYSTEM, source, *MAP)
    assert result.exit_code == 0, result.output
    assert result.output == f"imported 2 measure(s) into {SHOWN} (lines 2–3).\n"
    measures, problems = read_log(log_file(project), SHOWN)
    assert problems == []
    assert measures == [measure(epoch="J2024.5", theta=123.4, rho=2.5, method="imaging", notes="first"),
                        measure(epoch="2024-09-01", theta=123.9, rho=2.49, method="speckle")]


def test_import_names_unknown_columns_with_did_you_mean(project, tmp_path):
    source = write_csv(tmp_path, "pair,epoch,thta,rho,method\nAB,J2024.5,1.0,1.0,imaging\n")
    result = run("log", "import", project, SYSTEM, source)
    assert result.exit_code == 1
    assert result.output.splitlines() == [
        f"{source}:1:0: theta: required column 'theta' is missing. Fix: add the column 'theta' (Position angle, "
        "north through east [deg]), or name the column that holds it with --map 'COLUMN=theta'.",
        f"{source}:1:0: thta: unknown column 'thta'. Fix: did you mean 'theta'? Rename the column or give "
        "--map 'thta=theta'.",
        "2 problem(s) found.",
    ]
    assert run("log", "import", project, SYSTEM, source, "--map", "thta=theta").exit_code == 0


def test_import_with_a_bad_row_imports_nothing_and_names_the_line(project, tmp_path):
    source = write_csv(tmp_path, "Date,PA,Sep,pair,method\n"
                                 "J2024.5,123.4,2.5,AB,imaging\n"
                                 "J2024.6,400,2.5,AB,imaging\n"
                                 "J2024.7,124.0,2.5,AC,imaging\n")
    result = run("log", "import", project, SYSTEM, source, *MAP)
    assert result.exit_code == 1
    assert result.output.splitlines() == [
        f"{source}: 2 of 3 row(s) are bad, so nothing was imported. "
        "Fix: correct them, or give --skip-bad to import the others and set the bad ones aside.",
        f"{source}:3:0: PA: '400' is out of range. Fix: give a value less than 360.0.",
        f"{source}:4:0: pair: 'AC' is not a pair of system 'wren-9'. Fix: did you mean 'AB'?",
        "3 problem(s) found.",
    ]
    assert not log_file(project).exists()


def test_import_with_skip_bad_imports_the_good_rows_and_sets_the_bad_ones_aside(project, tmp_path):
    source = write_csv(tmp_path, "Date,PA,Sep,pair,method\n"
                                 "J2024.5,123.4,2.5,AB,imaging\n"
                                 "J2024.6,400,2.5,AB,imaging\n"
                                 "J2024.7,124.0,2.5,AB,imaging\n")
    result = run("log", "import", project, SYSTEM, source, *MAP, "--skip-bad")
    assert result.exit_code == 0, result.output
    side = tmp_path / "export.rejected.csv"
    assert result.output.splitlines() == [
        f"{source}:3:0: PA: '400' is out of range. Fix: give a value less than 360.0.",
        f"imported 2 measure(s) into {SHOWN} (lines 2–3).",
        f"rejected 1 bad row(s); they are in {side} with their problems in the last column.",
    ]
    assert [m.epoch for m in read_log(log_file(project), SHOWN)[0]] == ["J2024.5", "J2024.7"]
    assert side.read_text() == ("Date,PA,Sep,pair,method,problem\n"
                                f"J2024.6,400,2.5,AB,imaging,{source}:3:0: PA: '400' is out of range. "
                                "Fix: give a value less than 360.0.\n")


def test_import_skips_duplicates_and_never_doubles_a_measure(project, tmp_path):
    assert add(project, "--epoch", "J2024.5", "--theta", "123.4", "--rho", "2.5", "--method", "imaging").exit_code == 0
    source = write_csv(tmp_path, HEADER
                       + "AB,J2024.5,123.4,,2.5,,,,imaging,,,,,,,,\n"  # already in the log (equinox defaults alike)
                       + "AB,J2024.6,123.5,,2.5,,,,imaging,,,,,,,,\n"
                       + "AB,J2024.6,123.50,,2.50,,,,imaging,J2000,,,,,,,\n")  # the same measure again
    result = run("log", "import", project, SYSTEM, source)
    assert result.exit_code == 0, result.output
    assert result.output.splitlines() == [
        f"skipped {source}:2: the same measure is already in {SHOWN} at line 2.",
        f"skipped {source}:4: it repeats line 3.",
        f"imported 1 measure(s) into {SHOWN} (line 3).",
    ]
    again = run("log", "import", project, SYSTEM, source)
    assert again.output.splitlines()[-1] == f"imported 0 measure(s) into {SHOWN}."
    assert len(read_log(log_file(project), SHOWN)[0]) == 2


@pytest.mark.parametrize(("fmt", "stored"), [("jyear", "J1925.476"), ("byear", "B1925.476")])
def test_bare_years_are_imported_once_their_kind_is_given(project, tmp_path, fmt, stored):
    source = write_csv(tmp_path, "pair,epoch,theta,rho,method\nAB,1925.476,79.42,24.458,filar-micrometer\n"
                                 "AB,2019-05-03,80.0,24.0,imaging\n")
    refused = run("log", "import", project, SYSTEM, source)
    assert refused.exit_code == 1
    assert refused.output.splitlines()[1] == (
        f"{source}:2:0: epoch: '1925.476' is ambiguous: a Julian or a Besselian year? Fix: write J1925.476 or "
        "B1925.476, or give --epoch-format jyear (or byear) to read every bare number so.")
    result = run("log", "import", project, SYSTEM, source, "--epoch-format", fmt)
    assert result.exit_code == 0, result.output
    assert [m.epoch for m in read_log(log_file(project), SHOWN)[0]] == [stored, "2019-05-03"]


def test_a_bad_map_is_named(project, tmp_path):
    source = write_csv(tmp_path, "Date,PA,Sep,pair,method\n")
    result = run("log", "import", project, SYSTEM, source, "--map", "Pa=theta", "--map", "Sep=rhoo", "--map", "Date")
    assert result.exit_code == 1
    assert result.output.splitlines() == [
        "command line: --map: 'Date' is not of the form COLUMN=FIELD. Fix: write for example --map 'PA=theta'.",
        "command line: --map: 'rhoo' is not a field of the log. Fix: did you mean 'rho'?",
        f"command line: --map: {source} has no column 'Pa'. Fix: did you mean 'PA'?",
        "3 problem(s) found.",
    ]


def test_the_progress_bar_shows_only_for_long_imports_on_a_terminal(monkeypatch):
    rows = list(range(201))
    monkeypatch.setattr(sys.stderr, "isatty", lambda: False, raising=False)
    assert cli_log._track(rows, len(rows)) is rows
    monkeypatch.setattr(sys.stderr, "isatty", lambda: True, raising=False)
    assert cli_log._track(rows[:200], 200) == rows[:200]
    bar = cli_log._track(rows, len(rows))
    assert bar is not rows and list(bar) == rows


# ----------------------------------------------------------------------------
# concurrency: separate processes, as two people (or two scripts) would run them


def _env() -> dict[str, str]:
    return {**os.environ, "PYTHONPATH": os.pathsep.join([str(REPO), os.environ.get("PYTHONPATH", "")])}


def test_concurrent_log_add_from_several_processes_loses_nothing(project):
    epochs = [f"J2024.{i + 1}" for i in range(8)]
    processes = [
        subprocess.Popen([sys.executable, "-m", "dossier", "log", "add", str(project), SYSTEM, "AB", "--epoch", epoch,
                          "--theta", "10.5", "--rho", "1.25", "--method", "imaging"],
                         cwd=REPO, env=_env(), stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
        for epoch in epochs
    ]
    outcomes = [p.communicate(timeout=120) + (p.returncode,) for p in processes]
    assert all(code == 0 for _, _, code in outcomes), outcomes
    measures, problems = read_log(log_file(project), SHOWN)
    assert problems == []
    assert sorted(m.epoch for m in measures) == sorted(epochs)
    assert not list(log_file(project).parent.glob("*.tmp"))  # no temporary file left behind


def test_concurrent_appends_in_tight_loops_lose_nothing(tmp_path):
    # many quick appends per process, so that the processes really contend for the lock
    path = tmp_path / "log.csv"
    script = (
        "import sys; from pathlib import Path\n"
        "from dossier.logbook import append_measures\n"
        "from dossier.schema.log import LogMeasure\n"
        "for i in range(25):\n"
        "    m = LogMeasure(pair='AB', epoch=f'J2024.{sys.argv[2]}{i:02d}', theta=1.0, rho=1.0, method='imaging')\n"
        "    append_measures(Path(sys.argv[1]), [m], 'log.csv')\n"
    )
    processes = [subprocess.Popen([sys.executable, "-c", script, str(path), str(k)], cwd=REPO, env=_env())
                 for k in range(1, 5)]
    assert [p.wait(timeout=120) for p in processes] == [0] * 4
    measures, problems = read_log(path, "log.csv")
    assert problems == []
    assert sorted(m.epoch for m in measures) == sorted(f"J2024.{k}{i:02d}" for k in range(1, 5) for i in range(25))
