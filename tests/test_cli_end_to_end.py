"""End to end on the demo project: weigh --json, build, new."""

from __future__ import annotations

import json
import re

import pytest
from click.testing import CliRunner

from dossier.cli import cli
from tests.conftest import DEMO

EXPECTED = {  # the demo's fictional scenario (demo_project/systems/*/evidence.yaml, header comments)
    ("alder-4", "AB"): "optical",
    ("heron-1", "AB"): "bound",
    ("heron-1", "Aa-Ab"): "bound",
    ("heron-1", "AC"): "undetermined",
    ("heron-1", "Ba-Bb"): "bound",
    ("heron-1", "AD"): "optical",
    ("wren-9", "AB"): "undetermined",  # physical, but bound only if one star hides a companion: binding open
}
#: What each status' probability is the probability of (dossier/rules/verdict.py, "Status").
PROBABILITY_OF = {"bound": "P(bound)", "co-moving": "P(co-moving)", "optical": "P(chance alignment)",
                  "undetermined": "P(physical)"}
#: Rules whose data the pair model weighs: their own strengths are diagnostics, never terms of a verdict.
JOINT_RULES = {"parallax-agreement", "common-motion", "chance-alignment", "proper-motion-orbit",
               "radial-velocity-agreement"}


@pytest.fixture(scope="module")
def weighed() -> dict:
    result = CliRunner().invoke(cli, ["weigh", str(DEMO), "--json"])
    assert result.exit_code == 0, result.output
    return json.loads(result.output)


def test_weigh_json_is_the_documented_format(weighed):
    assert weighed["format"] == "dossier-weigh" and weighed["format_version"] == 1
    assert [s["id"] for s in weighed["systems"]] == ["alder-4", "heron-1", "wren-9"]
    for system in weighed["systems"]:
        for a in system["assessments"]:
            assert set(a) == {"rule", "rule_version", "title", "subject", "subject_kind", "question", "outcome",
                              "strength", "probability", "statistic", "quantities", "explanation", "method",
                              "sources", "grade", "reasons", "in_verdict"}
        for v in system["verdicts"]:
            assert set(v) == {"pair", "status", "probability", "probability_of", "limited_by_model", "p_physical",
                              "p_bound_given_physical", "p_bound", "p_comoving", "p_chance", "log10_odds_physical",
                              "log10_odds_bound", "contributions", "moved_most", "summary", "reasons_for",
                              "reasons_against", "missing"}
            for term in v["contributions"]:
                assert set(term) == {"line", "question", "log10_used", "rules", "log10_alone"}


def test_every_verdict_names_its_probability_and_the_term_that_moved_it(weighed):
    limit = 1e-6  # [pair_model] model_limit, default (the demo does not set it)
    for system in weighed["systems"]:
        for v in system["verdicts"]:
            assert v["probability_of"] == PROBABILITY_OF[v["status"]], (system["id"], v["pair"])
            p = v["probability"]
            if p is None:
                assert v["contributions"] == [] and v["moved_most"] is None
                continue
            named = {"P(bound)": v["p_bound"], "P(co-moving)": v["p_comoving"], "P(chance alignment)": v["p_chance"],
                     "P(physical)": v["p_physical"]}
            assert p == named[v["probability_of"]]
            assert v["limited_by_model"] == (min(p, 1 - p) < limit)
            if v["limited_by_model"]:
                assert f"{v['probability_of']} > 0.999999 (limit of the model)" in v["summary"]
            assert v["moved_most"] in {t["line"] for t in v["contributions"]}
            assert f"Moved most by: {v['moved_most'].lower()}" in v["summary"]


def test_diagnostics_of_the_pair_model_are_no_terms_of_the_verdict(weighed):
    for system in weighed["systems"]:
        verdicts = {v["pair"]: v for v in system["verdicts"]}
        for a in system["assessments"]:
            if a["subject_kind"] != "pair":
                assert a["in_verdict"] is None
            elif a["rule"] in JOINT_RULES:
                assert a["in_verdict"] == "diagnostic"
            elif a["rule"] == "pair-model":
                assert a["in_verdict"] == "pair-model"
            elif a["in_verdict"] == "term":
                used = [t for t in verdicts[a["subject"]]["contributions"] if t["rules"] == [a["rule"]]]
                assert len(used) == 1 and used[0]["log10_alone"] == a["strength"]
        for v in system["verdicts"]:
            for term in v["contributions"]:  # an independent line carries its own value beside the one used
                assert (term["log10_alone"] is None) == bool(set(term["rules"]) & JOINT_RULES or not term["rules"])
                assert abs(term["log10_used"]) <= abs(term["log10_alone"] if term["log10_alone"] is not None
                                                      else term["log10_used"]) + 1e-9


def test_weigh_reaches_the_demo_scenario(weighed):
    got = {(s["id"], v["pair"]): v["status"] for s in weighed["systems"] for v in s["verdicts"]}
    assert got == EXPECTED


def test_the_disagreeing_parallax_sources_of_the_demo_are_named(weighed):
    heron = next(s for s in weighed["systems"] if s["id"] == "heron-1")
    dist = next(a for a in heron["assessments"] if a["rule"] == "distance" and a["subject"] == "A")
    assert "The sources disagree" in dist["explanation"] and "sky-survey-2 deviates most" in dist["explanation"]


def test_the_demo_claims_are_graded_with_their_reasons(weighed):
    heron = next(s for s in weighed["systems"] if s["id"] == "heron-1")
    grades = {a["subject"]: a for a in heron["assessments"] if a["rule"] == "companion-claims"}
    assert grades["Ab"]["grade"] == "confirmed"  # a spectroscopic orbit from two independent sources
    assert grades["C"]["grade"] == "doubtful"
    assert any("Not seen by adaptive-optics in J2019.61 (ao-2019)" in r for r in grades["C"]["reasons"])
    orbit = next(a for a in heron["assessments"] if a["rule"] == "spectroscopic-orbit")
    period = next(q for q in orbit["quantities"] if q["name"] == "orbit_P")
    # the demo's invented truth is P = 812.4 d (demo_project/systems/heron-1/evidence.yaml, published orbit)
    assert abs(period["value"] - 812.4) < 3 * period["uncertainty"] + 1.0
    rv = next(a for a in heron["assessments"] if a["rule"] == "radial-velocity-agreement" and a["subject"] == "AB")
    assert "systemic γ of its fitted orbit of Aa-Ab" in rv["explanation"]


def test_weigh_json_is_byte_stable():
    runs = [CliRunner().invoke(cli, ["weigh", str(DEMO), "--json"]).output for _ in range(2)]
    assert runs[0] == runs[1]


def test_weigh_one_system_in_the_terminal():
    result = CliRunner().invoke(cli, ["weigh", str(DEMO), "--system", "wren-9"], env={"COLUMNS": "120"})
    assert result.exit_code == 0
    assert "Pair AB (A + B): UNDETERMINED  P(physical) > 0.999999 (limit of the model)" in result.output
    assert re.search(r"P\(bound \| physical\) = 0\.\d+", result.output)  # physical, binding open
    assert "Terms of the verdict" in result.output and "(moved it most)" in result.output
    row = next(line for line in result.output.splitlines() if "proper-motion-orbit" in line)
    assert row.split("│")[3].strip() == "in the pair model"  # its standalone −99 is no term of the verdict
    assert "alder-4" not in result.output


def test_weigh_unknown_system_is_a_clear_error():
    result = CliRunner().invoke(cli, ["weigh", str(DEMO), "--system", "wren-8"])
    assert result.exit_code == 1
    assert result.output.splitlines()[0] == "systems/wren-8: there is no system 'wren-8'. Fix: did you mean 'wren-9'?"


def test_new_scaffolds_a_valid_system_and_never_overwrites(demo_copy):
    runner = CliRunner()
    result = runner.invoke(cli, ["new", str(demo_copy), "kite-2"])
    assert result.exit_code == 0
    path = demo_copy / "systems/kite-2/evidence.yaml"
    assert path.is_file()
    assert runner.invoke(cli, ["check", str(demo_copy)]).exit_code == 0
    before = path.read_text()
    again = runner.invoke(cli, ["new", str(demo_copy), "kite-2"])
    assert again.exit_code == 2 and "already exists; nothing was written" in again.output
    assert path.read_text() == before


def test_the_scaffolds_commented_examples_are_valid_when_uncommented(demo_copy):
    # every example line, uncommented, must validate: the template cannot teach a wrong key
    from dossier.scaffold import TEMPLATE
    from dossier.schema.loader import _plain, _yaml
    from dossier.schema.models import System

    text = TEMPLATE.format(system_id="kite-3", title="t")
    lines = []
    for line in text.splitlines():
        match = re.match(r"^(\s*)# (\s*(?:- |[a-z_]+:).*)$", line)  # a commented YAML line, not prose
        lines.append(match.group(1) + match.group(2) if match else line)
    uncommented = "\n".join(lines).replace("pairs: []", "pairs:")
    data = _plain(_yaml().load(uncommented))
    data["components"]["B"] = {}
    data["components"]["C"] = {}
    data["components"]["Aa"] = {}
    data["components"]["Ab"] = {}
    System.model_validate(data)


def test_new_refuses_a_bad_id(demo_copy):
    result = CliRunner().invoke(cli, ["new", str(demo_copy), "bad id!"])
    assert result.exit_code == 2
    assert "not a valid system id" in result.output
