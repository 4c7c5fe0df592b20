"""`dossier check`: every problem at once, each as file:line:column: field: what. Fix: what to do."""

from __future__ import annotations

from click.testing import CliRunner

from dossier.cli import cli
from tests.conftest import DEMO, edit


def run_check(project) -> tuple[int, list[str]]:
    result = CliRunner().invoke(cli, ["check", str(project)])
    return result.exit_code, result.output.splitlines()


def test_demo_project_is_clean():
    code, lines = run_check(DEMO)
    assert code == 0
    assert lines == [f"{DEMO}: 3 system(s), 11 source(s): no problems found."]


def test_every_problem_is_reported_with_its_position(demo_copy):
    alder = demo_copy / "systems/alder-4/evidence.yaml"
    edit(alder, "        parallax: [14.21, 0.03]", "        paralax: [14.21, 0.03]")
    edit(alder, "{ref: spectro-rv-2}]\n    physical: {ref: masses-1, mass: [1.32",
         "{ref: spectro-rv-9}]\n    physical: {ref: masses-1, mass: [1.32")
    edit(alder, "pmdec: [-3.82, 0.03]", "pmdec: [abc, 0.03]")
    edit(alder, "magnitudes: {V: [10.93, 0.03, {ref: photometry-1}]}", "magnitudes: {V: [10.93]}")
    edit(alder, "stage: giant", "stage: red-giant")
    edit(alder, "members: [A, B]", "members: [A, Q]")
    wren = demo_copy / "systems/wren-9/evidence.yaml"
    edit(wren, "id: wren-9", "id: wren-8")
    edit(wren, "parallax: [24.968, 0.030]", "parallax: [24.968, 0.030, {ref: sky-survey-4}]")
    toml = demo_copy / "dossier.toml"
    edit(toml, "length_scale_kpc = 1.35", "length_scale = 1.35")
    edit(toml, "[rules.separation-period]", "[rules.separation-periods]")

    code, lines = run_check(demo_copy)
    assert code == 1
    assert lines == [
        "dossier.toml:34:1: rules.distance.length_scale: unknown key 'length_scale'. Fix: did you mean 'length_scale_kpc'?",
        "dossier.toml:36:1: rules.separation-periods: there is no rule 'separation-periods'. "
        "Fix: did you mean 'separation-period'?",
        "systems/alder-4/evidence.yaml:17:9: components.A.astrometry[1].paralax: unknown key 'paralax'. "
        "Fix: did you mean 'parallax'?",
        "systems/alder-4/evidence.yaml:20:40: components.A.radial_velocity[2].ref: source 'spectro-rv-9' is not in "
        "references.yaml. Fix: did you mean 'spectro-rv-2'?",
        "systems/alder-4/evidence.yaml:24:21: components.B.magnitudes.V: a measured value needs a value and an "
        "uncertainty, got 1 item(s). Fix: write [value, uncertainty] or [value, uncertainty, {ref: source-id}].",
        "systems/alder-4/evidence.yaml:32:16: components.B.astrometry[0].pmdec.value: 'abc' is not a number. "
        "Fix: write a number in mas/yr.",
        "systems/alder-4/evidence.yaml:34:56: components.B.physical.stage: 'red-giant' is not allowed here. "
        "Fix: use one of: 'pre-main-sequence', 'main-sequence', 'leaving-main-sequence', 'subgiant', 'giant', "
        "'core-helium-burning', 'asymptotic-giant', 'white-dwarf' or 'brown-dwarf'.",
        "systems/alder-4/evidence.yaml:37:27: pairs[0].members[1]: 'Q' is neither a component nor a pair of this "
        "system. Fix: declare it under 'components'.",
        "systems/wren-9/evidence.yaml:4:5: id: the system id 'wren-8' differs from its folder name 'wren-9'. "
        "Fix: write id: wren-9, or rename the folder.",
        "systems/wren-9/evidence.yaml:31:41: components.B.astrometry[0].parallax[2].ref: source 'sky-survey-4' is "
        "not in references.yaml. Fix: did you mean 'sky-survey-3'?",
        "10 problem(s) found.",
    ]


def test_yaml_syntax_error_gives_its_position(demo_copy):
    path = demo_copy / "systems/wren-9/evidence.yaml"
    edit(path, "pairs:\n  - {id: AB, members: [A, B]}", "pairs:\n  - {id: AB, members: [A, B]\n")
    code, lines = run_check(demo_copy)
    assert code == 1
    assert lines[0] == ("systems/wren-9/evidence.yaml:41:1: YAML syntax error: expected ',' or '}', but got "
                        "'<scalar>' (while parsing a flow mapping at line 38). Fix: correct the YAML syntax at this "
                        "position (indentation, a missing ':' or an unclosed bracket).")


def test_duplicate_key_is_an_error(demo_copy):
    path = demo_copy / "systems/wren-9/evidence.yaml"
    edit(path, "title: Two dwarfs", "title: x\ntitle: Two dwarfs")
    code, lines = run_check(demo_copy)
    assert code == 1
    assert "duplicate key" in lines[0]
    assert lines[0].endswith("Fix: keep one of the two entries with this key.")


def test_value_without_source_is_refused(demo_copy):
    path = demo_copy / "systems/wren-9/evidence.yaml"
    edit(path, "magnitudes: {V: [9.84, 0.02, {ref: photometry-1}]}", "magnitudes: {V: [9.84, 0.02]}")
    code, lines = run_check(demo_copy)
    assert code == 1
    assert lines[0] == ("systems/wren-9/evidence.yaml:11:21: components.A.magnitudes.V: this measured value has no "
                        "source. Fix: add {ref: source-id} to the value, or ref: to the record it belongs to.")


def test_number_without_uncertainty_is_refused(demo_copy):
    path = demo_copy / "systems/wren-9/evidence.yaml"
    edit(path, "radial_velocity: [18.2, 0.3, {ref: spectro-rv-2}]", "radial_velocity: 18.2")
    code, lines = run_check(demo_copy)
    assert lines[0] == ("systems/wren-9/evidence.yaml:21:22: components.A.radial_velocity: 18.2 has no uncertainty; "
                        "every measured value needs one. Fix: write [18.2, uncertainty] with the 1-sigma uncertainty.")


def test_missing_settings_and_references_files(tmp_path):
    (tmp_path / "systems").mkdir()
    code, lines = run_check(tmp_path)
    assert code == 1
    assert lines[:2] == [
        f"dossier.toml: dossier.toml is missing from {tmp_path}. Fix: create it with at least [project] "
        'title = "..." (see demo_project/dossier.toml).',
        "references.yaml: references.yaml is missing. Fix: create it: one entry per source id with its citation.",
    ]


def test_json_format_lists_problems_for_machines(demo_copy):
    import json

    edit(demo_copy / "systems/wren-9/evidence.yaml", "id: wren-9", "id: wren-8")
    result = CliRunner().invoke(cli, ["check", str(demo_copy), "--format", "json"])
    assert result.exit_code == 1
    problems = json.loads(result.output)
    assert problems == [{
        "file": "systems/wren-9/evidence.yaml", "line": 4, "column": 5, "field": "id",
        "message": "the system id 'wren-8' differs from its folder name 'wren-9'.",
        "fix": "write id: wren-9, or rename the folder.",
    }]


def test_log_rows_are_checked_with_their_line_numbers(demo_copy):
    log = demo_copy / "systems/alder-4/log.csv"
    lines = log.read_text().splitlines()
    lines[3] = lines[3].replace("AB,", "AC,", 1)
    lines[5] = lines[5].replace(",filar-micrometer,", ",filar,", 1)
    log.write_text("\n".join(lines) + "\n")
    code, out = run_check(demo_copy)
    assert code == 1
    assert out[0] == "systems/alder-4/log.csv:4:0: pair: 'AC' is not a pair of this system. Fix: did you mean 'AB'?"
    assert out[1].startswith("systems/alder-4/log.csv:6:0: method: 'filar' is not allowed here.")
