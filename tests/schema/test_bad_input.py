"""Hostile and mistaken input (issue 9): every class of bad input gives a problem, never a traceback.

Each test copies the demo project, breaks one file in one way and runs the
command line as a user would. A problem must name the file, the line (where
there is one), the field (where there is one) and say what to do ("Fix:");
the exit code is 1 for problems, 0 for input that is accepted (a byte-order
mark, a negative parallax, an empty log); nothing is written when there are
problems.
"""

from __future__ import annotations

import hashlib
import os
import shutil
import time
from pathlib import Path

import pytest
from click.testing import CliRunner

from dossier.cli import cli
from tests.conftest import DEMO

ALDER = "systems/alder-4/evidence.yaml"
HERON = "systems/heron-1/evidence.yaml"
LOG = "systems/alder-4/log.csv"
REFS = "references.yaml"
TOML = "dossier.toml"
FIRST_ROW = "AB,B1912.583,80.82,,25.494,,,V,filar-micrometer,,46,observer-h,old-refractor-site,1,,,"
BOM = b"\xef\xbb\xbf"


@pytest.fixture
def project(tmp_path: Path) -> Path:
    target = tmp_path / "project"
    shutil.copytree(DEMO, target, ignore=shutil.ignore_patterns(".dossier-cache"))
    return target


def replace(path: Path, old: str, new: str) -> None:
    """Replace exactly one occurrence (bytes, so that a test can write any encoding)."""
    data = path.read_bytes()
    assert data.count(old.encode()) == 1, f"{old!r} occurs {data.count(old.encode())} times in {path}"
    path.write_bytes(data.replace(old.encode(), new.encode() if isinstance(new, str) else new))


def run(project: Path, command: str = "check", *args: str):
    result = CliRunner().invoke(cli, [command, str(project), *args])
    assert "Traceback" not in result.output
    assert "internal error" not in result.output
    assert result.exception is None or isinstance(result.exception, SystemExit), result.exception
    return result


def expect(result, file: str, line: int | None, field: str, *words: str) -> str:
    """The problem about ``file`` at ``line`` (``None``: no line) with ``field`` and ``words``; it has a fix."""
    assert result.exit_code == 1, result.output
    start = f"{file}:{line}:" if line else f"{file}: "
    found = [text for text in result.output.splitlines()
             if text.startswith(start) and (not field or f": {field}: " in text) and all(w in text for w in words)]
    assert found, f"no problem {start} {field} {words} in:\n{result.output}"
    assert "Fix: " in found[0]
    return found[0]


def count(result) -> int:
    return int(result.output.strip().splitlines()[-1].split()[0])


def tree_hash(folder: Path) -> str:
    digest = hashlib.sha256()
    for path in sorted(folder.rglob("*")):
        digest.update(str(path.relative_to(folder)).encode() + b"\0")
        if path.is_file():
            digest.update(path.read_bytes())
    return digest.hexdigest()


# ----------------------------------------------------------------------------
# 1. malformed YAML, TOML and CSV


@pytest.mark.parametrize("file, old, new, line, words", [
    (ALDER, "  - {id: AB, members: [A, B]}", "  - {id: AB, members: [A, B]\n", 40, ("YAML syntax error", "flow mapping at line 37")),
    (ALDER, "title: A nearby", "title: A nearby: colon", 4, ("YAML syntax error",)),
    (ALDER, "    spectral_type: F5 V", "\tspectral_type: F5 V", 9, ("YAML syntax error", "indent with spaces, not tabs")),
    (REFS, "sky-survey-2:\n", "sky-survey-2: [unclosed\n", 10, ("YAML syntax error",)),
    (TOML, "physical_threshold = 0.99", "physical_threshold = = 0.99", 30, ("TOML syntax error",)),
    (TOML, '[project]', '[project', 4, ("TOML syntax error",)),
])
def test_malformed_yaml_and_toml_name_the_position(project, file, old, new, line, words):
    replace(project / file, old, new)
    result = run(project)
    expect(result, file, line, "", *words)
    assert count(result) == 1  # a broken references.yaml does not make every citation 'unknown' as well


@pytest.mark.parametrize("row, line, field, words", [
    (FIRST_ROW + ",x,y", 2, "", ("the row has 19 cells, the header names 17 columns",)),
    ("AB,B1912.583,80.82,,25.494", 2, "method", ("the row has 5 cells", "it ends before the required column 'method'")),
    (FIRST_ROW.replace(",V,", ',"V,'), 2, "", ("a quote opened in the row on line 2 is never closed",)),
    (FIRST_ROW.replace(",V,", ',"V"x,'), 2, "", ("a quoted cell is followed by more text",)),
    (FIRST_ROW.replace(",V,", ",V\0,"), 2, "", ("NUL byte",)),
])
def test_malformed_log_csv_names_the_row(project, row, line, field, words):
    replace(project / LOG, FIRST_ROW, row)
    result = run(project)
    expect(result, LOG, line, field, *words)


# ----------------------------------------------------------------------------
# 2. wrong types, wrong or missing units


@pytest.mark.parametrize("file, old, new, line, field, words", [
    (ALDER, "parallax: [14.21, 0.03]", "parallax: [abc, 0.03]", 17, "components.A.astrometry[1].parallax.value",
     ("'abc' is not a number", "in mas")),
    (ALDER, "parallax: [14.21, 0.03]", "parallax: [14.21 mas, 0.03]", 17, "components.A.astrometry[1].parallax.value",
     ("units are not written in the file", "write the number alone in mas")),
    (ALDER, "parallax: [14.21, 0.03]", "parallax: [0.01421 arcsec, 0.03]", 17,
     "components.A.astrometry[1].parallax.value", ("units are not written", "convert it first")),
    (ALDER, "parallax: [14.21, 0.03]", "parallax: [true, 0.03]", 17, "components.A.astrometry[1].parallax.value",
     ("true is not a number",)),
    (ALDER, "parallax: [14.21, 0.03]", "parallax: 14.21", 17, "components.A.astrometry[1].parallax",
     ("has no uncertainty",)),
    (ALDER, "parallax: [14.21, 0.03]", "parallax: {value: 14.21}", 17,
     "components.A.astrometry[1].parallax.uncertainty", ("required field 'uncertainty' is missing",)),
    (ALDER, "title: A nearby dwarf and a distant giant in the same line of sight", "title: [a, list]", 4, "title",
     ("is not text",)),
    (ALDER, "position: {ra: 312.0871553, dec: -41.2264018}", "position: [312.0871553, -41.2264018]", 5, "position",
     ("expected a mapping",)),
    (ALDER, "stage: giant", "stage: 3", 34, "components.B.physical.stage", ("is not allowed here",)),
    (ALDER, "on: 2026-11-21", "on: yesterday", 40, "reviews[0].on", ("is not a date",)),
    (ALDER, "epoch: J2016.0\n        ra: [312.0871553", "epoch: 2016-13-45\n        ra: [312.0871553", 14, "",
     ("this value cannot be read", "month must be in 1..12")),
    (TOML, "physical_threshold = 0.99", 'physical_threshold = "high"', 30, "verdict.physical_threshold",
     ("is not a number",)),
])
def test_wrong_types_and_units_are_named_with_the_unit(project, file, old, new, line, field, words):
    replace(project / file, old, new)
    expect(run(project), file, line, field, *words)


def test_wrong_type_in_the_log_names_the_column_and_unit(project):
    replace(project / LOG, FIRST_ROW, FIRST_ROW.replace("80.82", "80.82 deg"))
    expect(run(project), LOG, 2, "theta", "'80.82 deg' is not a number", "in deg")


# ----------------------------------------------------------------------------
# 3. unknown keys: the closest known key is suggested


@pytest.mark.parametrize("file, old, new, line, field, suggestion", [
    (ALDER, "        parallax: [14.21, 0.03]", "        paralax: [14.21, 0.03]", 17, "components.A.astrometry[1].paralax",
     "parallax"),
    (ALDER, "title: A nearby", "titel: A nearby", 4, "titel", "title"),
    (ALDER, "    spectral_type: F5 V", "    spectraltype: F5 V", 9, "components.A.spectraltype", "spectral_type"),
    (REFS, '  citation: "First', '  citaton: "First', 6, "sky-survey-1.citaton", "citation"),
    (TOML, "optical_threshold = 0.01", "optical_treshold = 0.01", 31, "verdict.optical_treshold", "optical_threshold"),
])
def test_unknown_keys_suggest_the_closest_known_key(project, file, old, new, line, field, suggestion):
    replace(project / file, old, new)
    result = run(project)
    expect(result, file, line, field, "unknown key", f"Fix: did you mean '{suggestion}'?")
    # a reference with a bad key is not also reported as missing wherever it is cited
    assert "'sky-survey-1' is not in references.yaml" not in result.output


def test_unknown_log_column_suggests_the_closest(project):
    replace(project / LOG, "pair,epoch,theta,", "pair,epoch,theat,")
    expect(run(project), LOG, 1, "theat", "unknown column", "did you mean 'theta'?")


# ----------------------------------------------------------------------------
# 4. references that do not resolve


@pytest.mark.parametrize("file, old, new, line, field, words", [
    (ALDER, "{ref: spectro-rv-2}]\n    physical: {ref: masses-1, mass: [1.32", "{ref: spectro-rv-9}]\n    physical: "
     "{ref: masses-1, mass: [1.32", 20, "components.A.radial_velocity[2].ref",
     ("source 'spectro-rv-9' is not in references.yaml", "did you mean 'spectro-rv-2'?")),
    (ALDER, "      - ref: sky-survey-3\n        epoch: J2016.0\n        ra: [312.0871553",
     "      - ref: no-such-source\n        epoch: J2016.0\n        ra: [312.0871553", 13, "components.A.astrometry[1].ref",
     ("source 'no-such-source' is not in references.yaml", "add 'no-such-source' to references.yaml")),
    (ALDER, "members: [A, B]", "members: [A, C]", 37, "pairs[0].members[1]",
     ("'C' is neither a component nor a pair of this system",)),
    (HERON, "{id: Aa-Ab, members: [Aa, Ab], parent: A}", "{id: Aa-Ab, members: [Aa, Ab], parent: Q}", 99,
     "pairs[1].parent", ("parent 'Q' is neither a component nor a pair",)),
    (LOG, FIRST_ROW, FIRST_ROW.replace("AB,", "AC,", 1), 2, "pair", ("'AC' is not a pair of this system",)),
    (LOG, FIRST_ROW, FIRST_ROW + "sky-survey-9", 2, "ref", ("source 'sky-survey-9' is not in references.yaml",)),
])
def test_references_that_do_not_resolve(project, file, old, new, line, field, words):
    replace(project / file, old, new)
    expect(run(project), file, line, field, *words)


# ----------------------------------------------------------------------------
# 5. NaN and infinities


@pytest.mark.parametrize("file, old, new, line, field", [
    (ALDER, "parallax: [14.21, 0.03]", "parallax: [.nan, 0.03]", 17, "components.A.astrometry[1].parallax.value"),
    (ALDER, "parallax: [14.21, 0.03]", "parallax: [.NaN, 0.03]", 17, "components.A.astrometry[1].parallax.value"),
    (ALDER, "parallax: [14.21, 0.03]", "parallax: [14.21, .inf]", 17, "components.A.astrometry[1].parallax.uncertainty"),
    (ALDER, "parallax: [14.21, 0.03]", "parallax: [-.inf, 0.03]", 17, "components.A.astrometry[1].parallax.value"),
    (ALDER, "parallax: [14.21, 0.03]", "parallax: [nan, 0.03]", 17, "components.A.astrometry[1].parallax.value"),
    (ALDER, "parallax: [14.21, 0.03]", "parallax: [1e999, 0.03]", 17, "components.A.astrometry[1].parallax.value"),
    (LOG, FIRST_ROW, FIRST_ROW.replace("80.82", "nan"), 2, "theta"),
    (LOG, FIRST_ROW, FIRST_ROW.replace("25.494", "inf"), 2, "rho"),
    (LOG, FIRST_ROW, FIRST_ROW.replace(",V,", ",V,").replace(",,,V,", ",,-inf,V,"), 2, "delta_mag"),
    (TOML, "physical_threshold = 0.99", "physical_threshold = nan", 30, "verdict.physical_threshold"),
    (TOML, "length_scale_kpc = 1.35", "length_scale_kpc = inf", 34, "rules.distance.length_scale_kpc"),
])
def test_nan_and_infinite_values_are_refused(project, file, old, new, line, field):
    replace(project / file, old, new)
    expect(run(project), file, line, field, "is not a finite number")


def test_nan_epoch_is_refused(project):
    replace(project / ALDER, "epoch: J2016.0\n        ra: [312.0871553", "epoch: .nan\n        ra: [312.0871553")
    expect(run(project), ALDER, 14, "components.A.astrometry[1].epoch", "is not an epoch")


# ----------------------------------------------------------------------------
# 6. out-of-range angles, future epochs, uncertainties that are not positive


@pytest.mark.parametrize("file, old, new, line, field, words", [
    (ALDER, "position: {ra: 312.0871553, dec: -41.2264018}", "position: {ra: 312.0871553, dec: -95.0}", 5,
     "position.dec", ("out of range",)),
    (ALDER, "position: {ra: 312.0871553, dec: -41.2264018}", "position: {ra: 372.0, dec: -41.2264018}", 5,
     "position.ra", ("out of range",)),
    (ALDER, "dec: [-41.2264018, 0.02]", "dec: [-141.2264018, 0.02]", 16, "components.A.astrometry[1].dec",
     ("the declination -141.226 is out of range: it must be [-90, 90]",)),
    (ALDER, "ra: [312.0871553, 0.02]", "ra: [20.8, 0.02]\n        # was in hours", None, None, ()),  # in range: fine
    (ALDER, "  - {id: AB, members: [A, B]}", "  - id: AB\n    members: [A, B]\n    measures:\n"
     "      - {epoch: J2010.5, theta: [365.0, 0.5], rho: [18.0, 0.1], ref: speckle-1986}", 40,
     "pairs[0].measures[0].theta", ("the position angle 365 is out of range: it must be [0, 360)", "subtract 360")),
    (ALDER, "  - {id: AB, members: [A, B]}", "  - id: AB\n    members: [A, B]\n    measures:\n"
     "      - {epoch: J2010.5, theta: [-5.0, 0.5], rho: [18.0, 0.1], ref: speckle-1986}", 40,
     "pairs[0].measures[0].theta", ("the position angle -5 is out of range",)),
    (ALDER, "  - {id: AB, members: [A, B]}", "  - id: AB\n    members: [A, B]\n    measures:\n"
     "      - {epoch: J2010.5, theta: [5.0, 0.5], rho: [-18.0, 0.1], ref: speckle-1986}", 40,
     "pairs[0].measures[0].rho", ("the separation -18 is out of range",)),
    (ALDER, "  - {id: AB, members: [A, B]}", "  - id: AB\n    members: [A, B]\n    measures:\n"
     "      - {epoch: J2999.5, theta: [5.0, 0.5], rho: [18.0, 0.1], ref: speckle-1986}", 40,
     "pairs[0].measures[0].epoch", ("the epoch J2999.5 is later than today", "an observation cannot be in the future")),
    (ALDER, "parallax: [14.21, 0.03]", "parallax: [14.21, 0]", 17, "components.A.astrometry[1].parallax.uncertainty",
     ("the uncertainty 0 is not positive",)),
    (ALDER, "parallax: [14.21, 0.03]", "parallax: [14.21, -0.03]", 17,
     "components.A.astrometry[1].parallax.uncertainty", ("the uncertainty -0.03 is not positive",)),
    (HERON, "theta: [145.0, 3.0]", "theta: [445.0, 3.0]", 110, "claims[0].theta", ("the position angle 445 is out of range",)),
    (HERON, "rho: [0.21, 0.02]", "rho: [0.0, 0.02]", 110, "claims[0].rho", ("the separation 0 is out of range",)),
    (HERON, "epoch: 1985.42", "epoch: 2985.42", 110, "claims[0].epoch", ("later than today",)),
    (HERON, "rho_range: [0.05, 2.0]", "rho_range: [-0.05, 2.0]", 112, "non_detections[0].rho_range",
     ("a separation cannot be negative",)),
    (HERON, "inclination: [63.0, 2.0]", "inclination: [243.0, 2.0]", 124, "orbits[1].inclination",
     ("the inclination 243 is out of range: it must be [0, 180]",)),
    (HERON, "node: [117.5, 1.5]", "node: [-117.5, 1.5]", 125, "orbits[1].node", ("the node -117.5 is out of range",)),
    (HERON, "eccentricity: [0.40, 0.03]", "eccentricity: [1.40, 0.03]", 122, "orbits[1].eccentricity",
     ("the eccentricity 1.4 is out of range: it must be [0, 1)",)),
    (HERON, "epoch: 2015-11-26", "epoch: 2999-11-26", None, "", ("later than today",)),
    (LOG, FIRST_ROW, FIRST_ROW.replace("80.82", "360"), 2, "theta", ("out of range", "less than 360")),
    (LOG, FIRST_ROW, FIRST_ROW.replace("25.494", "-25.494"), 2, "rho", ("out of range",)),
    (LOG, FIRST_ROW, FIRST_ROW.replace("80.82,", "80.82,0"), 2, "theta_error", ("the uncertainty '0' is not positive",)),
    (LOG, FIRST_ROW, FIRST_ROW.replace("B1912.583", "J2999.5"), 2, "epoch",
     ("the epoch J2999.5 is later than today", "check the year, and J or B")),
    (LOG, FIRST_ROW, FIRST_ROW.replace("B1912.583", "2999-01-01"), 2, "epoch", ("later than today",)),
])
def test_out_of_range_angles_future_epochs_and_uncertainties(project, file, old, new, line, field, words):
    replace(project / file, old, new)
    result = run(project)
    if field is None:
        assert result.exit_code == 0, result.output
        return
    if line is None:  # the line depends on the demo's layout: find it
        line = next(i for i, t in enumerate((project / file).read_text().splitlines(), start=1) if new in t)
    expect(result, file, line, field, *words)


@pytest.mark.parametrize("parallax", ["-0.21", "-3.5", "0.0", "0.0001", "1e-9"])
def test_negative_and_tiny_parallaxes_are_valid(project, parallax):
    replace(project / ALDER, "parallax: [0.62, 0.03]", f"parallax: [{parallax}, 0.03]")
    result = run(project)
    assert result.exit_code == 0, result.output
    assert run(project, "weigh", "--system", "alder-4", "--json").exit_code == 0


# ----------------------------------------------------------------------------
# 7. duplicate ids


@pytest.mark.parametrize("file, old, new, line, field, words", [
    (ALDER, "  B:\n    spectral_type: K3 III", "  A:\n    spectral_type: K3 III", 22, "", ('duplicate key "A"',)),
    (REFS, "sky-survey-2:\n", "sky-survey-1:\n", 9, "", ('duplicate key "sky-survey-1"', "starts at line 2")),
    (ALDER, "title: A nearby", "id: alder-4\ntitle: A nearby", 4, "", ('duplicate key "id"',)),
    (ALDER, "  - {id: AB, members: [A, B]}", "  - {id: AB, members: [A, B]}\n  - {id: AB, members: [B, A]}", 38,
     "pairs[1].id", ("the id 'AB' is already used",)),
    (ALDER, "  - {id: AB, members: [A, B]}", "  - {id: A, members: [A, B]}", 37, "pairs[0].id",
     ("the id 'A' is already used",)),
    (HERON, "  - id: field-2\n", "  - id: field-1\n", 134, "neighbours[1].id",
     ("the neighbour id 'field-1' is already used by neighbours[0]",)),
])
def test_duplicate_ids_are_refused(project, file, old, new, line, field, words):
    replace(project / file, old, new)
    expect(run(project), file, line, field, *words)


# ----------------------------------------------------------------------------
# 8. hierarchies with a cycle, or a missing component


@pytest.mark.parametrize("pairs, line, field, cycle", [
    ("  - {id: AB, members: [A, CD]}\n  - {id: CD, members: [B, AB]}", 38, "pairs[1].members[1]", "AB → CD → AB"),
    ("  - {id: P1, members: [A, P2]}\n  - {id: P2, members: [B, P3]}\n  - {id: P3, members: [A, P1]}", 39,
     "pairs[2].members[1]", "P1 → P2 → P3 → P1"),
    ("  - {id: AB, members: [A, B], parent: A}", 37, "pairs[0].members[0]", "A → AB → A"),
    ("  - {id: AB, members: [A, B]}\n  - {id: X, members: [A, B], parent: X}", 38, "pairs[1].parent", "X → X"),
    ("  - {id: AB, members: [A, B], parent: CD}\n  - {id: CD, members: [A, B], parent: AB}", 37, "pairs[0].parent",
     "AB → CD → AB"),
])
def test_hierarchy_cycles_are_refused(project, pairs, line, field, cycle):
    replace(project / ALDER, "  - {id: AB, members: [A, B]}", pairs)
    expect(run(project), ALDER, line, field, f"the hierarchy has a cycle: {cycle}")
    assert run(project, "weigh", "--system", "alder-4").exit_code == 1  # refused before any rule recurses


def test_a_missing_component_is_named(project):
    replace(project / ALDER, "  - {id: AB, members: [A, B]}", "  - {id: AB, members: [A, Bb]}")
    expect(run(project), ALDER, 37, "pairs[0].members[1]", "'Bb' is neither a component nor a pair",
           "did you mean 'B'?")


# ----------------------------------------------------------------------------
# 9. encodings: invalid UTF-8 is named by offset, line and column; a byte-order mark is accepted


@pytest.mark.parametrize("file, after, line", [
    (ALDER, "title: A nearby", 4),
    (REFS, '"First', 6),
    (TOML, "(demo", 5),
    (LOG, "observer-k", 3),
])
def test_invalid_utf8_names_byte_line_and_column(project, file, after, line):
    path = project / file
    data = path.read_bytes()
    offset = data.index(after.encode()) + len(after)
    column = offset - data.rfind(b"\n", 0, offset)  # 1-based; the lines before the byte are ASCII
    path.write_bytes(data[:offset] + b"\xe9" + data[offset:])  # 'é' in Latin-1
    problem = expect(run(project), file, line, "", "is not UTF-8 text", f"byte 0xE9 at byte offset {offset}",
                     "in Latin-1/Windows-1252 it would be 'é'", "save the file as UTF-8")
    assert problem.startswith(f"{file}:{line}:{column}:")


@pytest.mark.parametrize("file", [ALDER, REFS, TOML, LOG])
def test_a_byte_order_mark_is_accepted(project, file):
    path = project / file
    path.write_bytes(BOM + path.read_bytes())
    result = run(project)
    assert result.exit_code == 0, result.output
    # and read correctly: the weighing is the same as without the mark
    assert run(project, "weigh", "--json").output == run(DEMO, "weigh", "--json").output


# ----------------------------------------------------------------------------
# 10. empty and huge files


@pytest.mark.parametrize("file, content, words", [
    (ALDER, b"", ("the evidence file is empty",)),
    (ALDER, b"# only a comment\n", ("the evidence file is empty",)),
    (ALDER, b"[]\n", ("must be a mapping of keys",)),
    (TOML, b"", ("required field 'project' is missing", "add a table [project] with title = ...")),
])
def test_empty_files_are_named(project, file, content, words):
    (project / file).write_bytes(content)
    expect(run(project), file, None if content in (b"", b"# only a comment\n") else 1, "", *words)


def test_an_empty_references_file_leaves_every_citation_unresolved(project):
    (project / REFS).write_bytes(b"")
    result = run(project)
    expect(result, ALDER, 12, "components.A.astrometry[0].ref", "source 'sky-survey-1' is not in references.yaml",
           "add 'sky-survey-1' to references.yaml")


@pytest.mark.parametrize("content", [b"", b"\n\n", ",".join(["pair", "epoch", "theta", "rho", "method"]).encode() + b"\n"])
def test_an_empty_log_is_an_empty_log(project, content):
    (project / LOG).write_bytes(content)
    assert run(project).exit_code == 0


def test_the_size_limit_is_a_setting(project):
    replace(project / TOML, "[release]", "[limits]\nmax_yaml_mb = 0.001\nmax_log_mb = 0.0005\n\n[release]")
    result = run(project)
    expect(result, ALDER, None, "", "the file is 0.0 MB, larger than the limit of 0.001 MB",
           "raise [limits] max_yaml_mb in dossier.toml")
    expect(result, LOG, None, "", "larger than the limit of 0.0005 MB", "raise [limits] max_log_mb")
    replace(project / TOML, "max_yaml_mb = 0.001\nmax_log_mb = 0.0005", "max_yaml_mb = 2\nmax_log_mb = 2")
    assert run(project).exit_code == 0


@pytest.mark.slow
@pytest.mark.parametrize("file", [ALDER, LOG])
def test_a_huge_file_is_refused_quickly(project, file):
    path = project / file
    padding = (b"# " + b"x" * 97 + b"\n") if file == ALDER else FIRST_ROW.encode() + b"\n"
    block = padding * (1_000_000 // len(padding))
    with open(path, "ab") as handle:
        for _ in range(101):  # just over 100 MB
            handle.write(block)
    assert path.stat().st_size > 100e6
    started = time.monotonic()
    result = run(project)
    elapsed = time.monotonic() - started
    expect(result, file, None, "", "the file is 10", "MB, larger than the limit of", "so it was not read")
    assert elapsed < 10, f"{elapsed:.1f} s"


# ----------------------------------------------------------------------------
# 11. ids and folder names that would escape the project or make unsafe file names


@pytest.mark.parametrize("system_id, words", [
    ("../escape", ("is not a valid system id: it starts with '.'",)),
    ("/tmp/escape", ("it contains '/'",)),
    ("a/b", ("it contains '/'",)),
    ("..", ("it starts with '.'",)),
    ("two words", ("it contains ' '",)),
    ("line\nbreak", ("it contains '\\n'",)),
    ("nul\0byte", ("it contains '\\x00'",)),
    ("\u0430lder-5", ("U+0430 CYRILLIC SMALL LETTER A",)),
    ("Alder-4", ("differs from it only in case",)),
    ("nul", ("Windows reserves",)),
    ("x" * 65, ("65 characters long",)),
    ("", ("the system id is empty",)),
    ("alder-4", ("already exists",)),
])
def test_dossier_new_refuses_unsafe_ids(project, system_id, words):
    before = tree_hash(project)
    result = CliRunner().invoke(cli, ["new", str(project), system_id])
    assert result.exit_code == 2, result.output
    assert "Traceback" not in result.output
    assert all(w in result.output for w in words), result.output
    assert "Fix: " in result.output
    assert tree_hash(project) == before  # nothing written, not even a folder
    assert not (project.parent / "escape").exists()


def test_dossier_new_writes_a_safe_id(project):
    result = CliRunner().invoke(cli, ["new", str(project), "kite-3.b+c_d"])
    assert result.exit_code == 0, result.output
    assert sorted(p.name for p in (project / "systems/kite-3.b+c_d").iterdir()) == ["evidence.yaml"]  # no temporary
    assert run(project).exit_code == 0


@pytest.mark.parametrize("folder, words", [
    ("two words", ("the folder name 'two words' is not a valid system id", "for example 'two-words'")),
    ("\u0430lder-4", ("U+0430 CYRILLIC SMALL LETTER A",)),
    ("Wren-9", ("the folder names 'Wren-9' and 'wren-9' differ only in case",)),
    ("tab\tname", ("'tab\\tname'",)),
    ("con", ("Windows reserves",)),
])
def test_system_folders_with_unsafe_names_are_refused(project, folder, words):
    shutil.copytree(project / "systems/wren-9", project / "systems" / folder)
    result = run(project)
    assert result.exit_code == 1
    line = next((t for t in result.output.splitlines() if all(w in t for w in words)), None)
    assert line is not None, result.output
    assert line.startswith("systems/") and "Fix: rename" in line


def test_a_system_folder_linking_outside_the_project_is_refused(project, tmp_path):
    outside = tmp_path / "elsewhere"
    shutil.copytree(project / "systems/wren-9", outside)
    os.symlink(outside, project / "systems/elsewhere")
    expect(run(project), "systems/elsewhere", None, "", "is a link to", "outside the project")


def test_hidden_folders_are_not_systems(project):
    shutil.copytree(project / "systems/wren-9", project / "systems/.wren-9.backup")
    assert run(project).exit_code == 0


@pytest.mark.parametrize("value", ["../wren-9", "/etc", "wren 9", "wren-9/..", "\u0430lder"])
def test_an_id_field_that_is_not_an_id_is_refused(project, value):
    replace(project / "systems/wren-9/evidence.yaml", "id: wren-9", f"id: '{value}'")
    expect(run(project), "systems/wren-9/evidence.yaml", 4, "id", "is not a valid id")


def test_selecting_a_system_by_a_path_is_refused(project):
    result = run(project, "weigh", "--system", "../wren-9")
    expect(result, "systems/../wren-9", None, "", "there is no system '../wren-9'")


# ----------------------------------------------------------------------------
# weigh and build load through the same loader; a failed build writes nothing


def test_weigh_reports_the_same_problems_as_check(project):
    replace(project / ALDER, "parallax: [14.21, 0.03]", "parallax: [.nan, 0.03]")
    checked, weighed = run(project), run(project, "weigh")
    assert weighed.exit_code == checked.exit_code == 1
    assert weighed.output == checked.output


def test_build_on_a_bad_project_leaves_the_existing_site_untouched(project, tmp_path):
    from dossier.site import MARKER

    site = tmp_path / "site"
    site.mkdir()
    (site / MARKER).write_text("built by dossier; this folder is replaced on every build\n", encoding="utf-8")
    (site / "index.html").write_text("<p>the previous build</p>\n", encoding="utf-8")
    before = tree_hash(site)
    replace(project / LOG, FIRST_ROW, FIRST_ROW.replace("B1912.583", "J2999.5"))
    result = run(project, "build", "--out", str(site), "--no-pdf")
    expect(result, LOG, 2, "epoch", "later than today")
    assert tree_hash(site) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["project", "site"]  # no staging folder left behind


def test_control_characters_from_a_file_are_escaped_in_messages(project):
    # a key or id written with an escape sequence cannot clear or recolour the user's terminal
    replace(project / ALDER, "members: [A, B]", 'members: [A, "B\\e[2J"]')
    result = run(project)
    assert "\x1b" not in result.output
    expect(result, ALDER, 37, "pairs[0].members[1]", "'B\\x1b[2J' is neither a component nor a pair")
