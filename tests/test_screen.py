"""dossier screen: streaming CSV/Parquet, clear errors, nothing half-written, same numbers as weigh."""

from __future__ import annotations

import csv
import math
from pathlib import Path

import pytest
from click.testing import CliRunner

from dossier.cli import cli
from dossier.errors import DossierError
from dossier.screen import FIELDS, parse_map, screen
from tests.conftest import DEMO

HEADER = [name for name, _, _ in FIELDS]


def write_csv(path: Path, rows: list[dict]) -> Path:
    with open(path, "w", newline="", encoding="utf-8") as fh:
        writer = csv.DictWriter(fh, fieldnames=HEADER)
        writer.writeheader()
        for row in rows:
            writer.writerow({k: ("" if v is None else v) for k, v in row.items()})
    return path


def pair(i: int, **extra) -> dict:
    row = {k: None for k in HEADER}
    row.update(pair_id=f"cand-{i}", ra1=10.0 + i, dec1=20.0, ra2=10.0 + i, dec2=20.0 + 10 / 3600,
               parallax1=10.0, parallax_error1=0.05, parallax2=10.02, parallax_error2=0.05,
               pmra1=30.0, pmra_error1=0.05, pmdec1=-10.0, pmdec_error1=0.05,
               pmra2=30.2, pmra_error2=0.05, pmdec2=-10.1, pmdec_error2=0.05, mag1=8.0, mag2=10.0)
    row.update(extra)
    return row


def read_result(path: Path) -> list[dict]:
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def test_separation_and_position_angle_of_a_pair_due_north(tmp_path):
    source = write_csv(tmp_path / "pairs.csv", [pair(0)])
    assert screen(source, tmp_path / "out.csv") == 1
    row = read_result(tmp_path / "out.csv")[0]
    # 10″ due north: θ = 0° and ρ = 10″ (definition of position angle, common practice)
    assert float(row["separation_arcsec"]) == pytest.approx(10.0, rel=1e-9)
    assert float(row["position_angle_deg"]) == pytest.approx(0.0, abs=1e-6)
    # projected separation s = ρ/ϖ au with ϖ in arcsec (definition of the parsec): 10″ / 0.01001″
    assert float(row["projected_separation_au"]) == pytest.approx(10.0 / 0.01001, rel=1e-9)
    assert row["mass_estimated"] == "true"


def test_chunks_stream_and_give_the_same_result_as_one_chunk(tmp_path):
    rows = [pair(i, pmra2=30.0 + i % 7) for i in range(2500)]
    source = write_csv(tmp_path / "pairs.csv", rows)
    screen(source, tmp_path / "one.csv", chunk_rows=100_000)
    screen(source, tmp_path / "many.csv", chunk_rows=1000)
    assert (tmp_path / "one.csv").read_bytes() == (tmp_path / "many.csv").read_bytes()
    assert len(read_result(tmp_path / "many.csv")) == 2500


def test_parquet_in_and_out(tmp_path):
    import pyarrow.csv as pcsv
    import pyarrow.parquet as pq

    source = write_csv(tmp_path / "pairs.csv", [pair(i) for i in range(10)])
    pq.write_table(pcsv.read_csv(source), tmp_path / "pairs.parquet")
    screen(tmp_path / "pairs.parquet", tmp_path / "out.parquet")
    screen(source, tmp_path / "out.csv")
    from_parquet = pq.read_table(tmp_path / "out.parquet").to_pylist()
    from_csv = read_result(tmp_path / "out.csv")
    assert [r["pair_id"] for r in from_parquet] == [r["pair_id"] for r in from_csv]
    assert [r["status"] for r in from_parquet] == [r["status"] for r in from_csv]


def test_map_renames_columns(tmp_path):
    rows = [pair(0)]
    source = write_csv(tmp_path / "pairs.csv", rows)
    text = source.read_text().replace("pair_id", "name", 1)
    source.write_text(text)
    result = CliRunner().invoke(cli, ["screen", str(source), "--out", str(tmp_path / "o.csv"), "--map", "name=pair_id"])
    assert result.exit_code == 0, result.output
    assert read_result(tmp_path / "o.csv")[0]["pair_id"] == "cand-0"
    with pytest.raises(DossierError, match="--map 'name=id' is not COLUMN=FIELD"):
        parse_map(("name=id",))


def test_a_missing_column_is_named_and_nothing_is_written(tmp_path):
    source = tmp_path / "pairs.csv"
    source.write_text("pair_id,ra1,dec1,ra2\nx,1,2,3\n")
    result = CliRunner().invoke(cli, ["screen", str(source), "--out", str(tmp_path / "o.csv")])
    assert result.exit_code == 2
    assert "no column for dec2" in result.output and "--map COLUMN=FIELD" in result.output
    assert sorted(p.name for p in tmp_path.iterdir()) == ["pairs.csv"]


def test_a_bad_cell_is_reported_with_its_row_and_nothing_is_written(tmp_path):
    rows = [pair(i) for i in range(5)]
    rows[3]["parallax2"] = "ten"
    source = write_csv(tmp_path / "pairs.csv", rows)
    result = CliRunner().invoke(cli, ["screen", str(source), "--out", str(tmp_path / "o.csv")])
    assert result.exit_code == 2
    assert "row 4: column 'parallax2' (parallax2) is not a number" in result.output
    assert sorted(p.name for p in tmp_path.iterdir()) == ["pairs.csv"]


def test_missing_values_make_a_rule_insufficient_not_an_error(tmp_path):
    source = write_csv(tmp_path / "pairs.csv", [pair(0, rv1=None, rv2=None, parallax2=None, parallax_error2=None)])
    screen(source, tmp_path / "out.csv")
    row = read_result(tmp_path / "out.csv")[0]
    assert row["parallax_agreement_outcome"] == "insufficient"
    assert row["radial_velocity_agreement_outcome"] == "insufficient"
    assert row["status"] in ("bound", "co-moving", "optical", "undetermined")


@pytest.mark.parametrize("system", ["wren-9", "alder-4"])
def test_screen_and_weigh_give_the_same_numbers_for_the_same_pair(tmp_path, system):
    """The pair as weigh sees it (combined parallaxes, motions, positions, masses, RVs), screened as a row."""
    from dossier.engine import weigh_project
    from dossier.schema.loader import load_project

    project = load_project(DEMO, only=system)
    result = weigh_project(project, use_cache=False)[system]
    facts = result.facts
    pair = facts.pairs["AB"]
    a, b = facts.stars[pair.first], facts.stars[pair.second]
    row = {k: None for k in HEADER}
    row.update(pair_id=f"{system}-AB", ra1=a.position.ra, dec1=a.position.dec, ra2=b.position.ra, dec2=b.position.dec,
               parallax1=a.parallax.mean, parallax_error1=a.parallax.error_inflated,
               parallax2=b.parallax.mean, parallax_error2=b.parallax.error_inflated,
               pmra1=a.motion.pmra, pmra_error1=a.motion.pmra_error, pmdec1=a.motion.pmdec,
               pmdec_error1=a.motion.pmdec_error, pmra2=b.motion.pmra, pmra_error2=b.motion.pmra_error,
               pmdec2=b.motion.pmdec, pmdec_error2=b.motion.pmdec_error,
               rv1=a.radial_velocity.value, rv_error1=a.radial_velocity.uncertainty,
               rv2=b.radial_velocity.value, rv_error2=b.radial_velocity.uncertainty,
               mag1=a.magnitudes["V"].value, mag2=b.magnitudes["V"].value, mass1=a.mass.value, mass2=b.mass.value,
               mass_error1=a.mass.uncertainty, mass_error2=b.mass.uncertainty)
    # weigh places the second star at the pair's separation and angle from the first (positions of other epochs)
    from dossier.astro.angles import offset_position

    ra2, dec2 = offset_position(a.position.ra, a.position.dec, pair.rho_arcsec, pair.theta_deg)
    row.update(ra2=float(ra2), dec2=float(dec2))
    source = tmp_path / "pairs.csv"
    with open(source, "w", newline="", encoding="utf-8") as fh:  # repr: every digit of every float
        writer = csv.DictWriter(fh, fieldnames=HEADER)
        writer.writeheader()
        writer.writerow({k: ("" if v is None else repr(v) if isinstance(v, float) else v) for k, v in row.items()})
    screen(source, tmp_path / "out.csv", settings=project.settings)
    out = read_result(tmp_path / "out.csv")[0]
    assert float(out["separation_arcsec"]) == pytest.approx(pair.rho_arcsec, rel=1e-12)
    for a_ in result.for_subject("AB"):
        key = a_.rule.replace("-", "_")
        if f"{key}_outcome" not in out:
            continue
        assert out[f"{key}_outcome"] == a_.outcome, a_.rule
        for name, value in (("strength", a_.strength), ("statistic", a_.statistic.value if a_.statistic else None)):
            got = out[f"{key}_{name}"]
            if value is None or (isinstance(value, float) and math.isnan(value)):
                assert got == "", (a_.rule, name, got)
            else:
                assert float(got) == pytest.approx(value, rel=1e-9, abs=1e-12), (a_.rule, name)
    # the pair model's numbers are the same in both; the screen's verdict is weigh's verdict from the pair model
    # alone (a screen has no observing log, orbits or ages)
    from dossier.rules.verdict import combine

    model = next(a_ for a_ in result.for_subject("AB") if a_.rule == "pair-model")
    numbers = {q.name: q.value for q in model.quantities}
    for key in ("prior_log10", "parallax_log10", "motion_log10", "binding_prior_log10", "binding_motion_log10",
                "p_bound", "p_comoving", "p_chance"):
        assert float(out[key]) == pytest.approx(numbers[key], rel=1e-9, abs=1e-12), key
    verdict = combine("AB", [model], project.settings.verdict, project.settings.pair_model.model_limit)
    assert out["status"] == verdict.status
    assert out["probability_of"] == verdict.probability_of
    assert float(out["probability"]) == pytest.approx(verdict.probability, rel=1e-9)
    assert float(out["p_physical"]) == pytest.approx(verdict.p_physical, rel=1e-9)
    assert float(out["p_bound_given_physical"]) == pytest.approx(verdict.p_bound_given_physical, rel=1e-9)


def test_negative_and_tiny_parallaxes_are_data_not_errors(tmp_path):
    # a distant pair: negative parallaxes are valid measurements (common practice), the motion test is undecided
    source = write_csv(tmp_path / "pairs.csv", [pair(0, parallax1=-0.3, parallax2=-0.25, parallax_error1=0.2,
                                                     parallax_error2=0.2, mass1=1.0, mass2=1.0),
                                                pair(1, parallax1=1e-6, parallax2=2e-6, mass1=1.0, mass2=1.0)])
    screen(source, tmp_path / "out.csv")
    rows = read_result(tmp_path / "out.csv")
    assert rows[0]["proper_motion_orbit_outcome"] == "insufficient"
    assert rows[0]["parallax_agreement_outcome"] == "supports"  # they agree, within their errors
    assert rows[1]["proper_motion_orbit_outcome"] in ("supports", "neutral", "against")
    assert all(r["status"] in ("bound", "co-moving", "optical", "undetermined") for r in rows)
