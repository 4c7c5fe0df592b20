"""A seeded small calibration run (dossier calibrate): the probabilities against a population of known truth."""

from __future__ import annotations

import json

from click.testing import CliRunner

from dossier.cli import cli


def test_a_seeded_calibration_run_writes_its_report_and_its_probabilities_are_calibrated(tmp_path):
    # ECE of Naeini, Cooper & Hauskrecht 2015 (AAAI): on ~10,000 synthetic pairs drawn from the model's own priors
    # by the independent generator, P(physical) must be calibrated to well within the 0.02 target; P(bound |
    # physical) rests on ~100 physical pairs here, so it is held to its own sampling noise (95th percentile of
    # a perfectly calibrated classifier with the same predictions, from the report) plus the target.
    out = tmp_path / "calibration"
    result = CliRunner().invoke(cli, ["calibrate", "--out", str(out), "--stars", "1500", "--seed", "3"])
    assert result.exit_code == 0, result.output
    assert {"index.html", "reliability.json"} <= {p.name for p in out.iterdir()}
    report = json.loads((out / "reliability.json").read_text(encoding="utf-8"))
    physical = report["physical"]["ece"]
    assert physical["n"] > 5000
    assert physical["ece"] <= 0.02
    bound = report["bound_given_physical"]["ece"]
    assert bound["ece"] <= bound["calibrated_p95"] + 0.02
    assert report["undetermined"]["fraction"] <= 0.05
    for row in report["wrong_by_class"].values():
        assert row["model"] <= row["baseline"]
    assert "ECE of P(physical)" in result.output
