"""The checked-in schemas/ are exactly what the models generate, and they describe the demo."""

from __future__ import annotations

import json

from click.testing import CliRunner

from dossier.cli import cli
from dossier.schema.jsonschema import render, schemas
from tests.conftest import DEMO, REPO


def test_checked_in_schemas_match_the_models():
    for name, schema in schemas().items():
        on_disk = (REPO / "schemas" / name).read_text(encoding="utf-8")
        assert on_disk == render(schema), f"schemas/{name} is stale: run 'dossier schema --out schemas/'"


def test_schema_command_writes_the_same_files(tmp_path):
    result = CliRunner().invoke(cli, ["schema", "--out", str(tmp_path)])
    assert result.exit_code == 0
    for name in schemas():
        assert (tmp_path / name).read_text() == (REPO / "schemas" / name).read_text()


def test_measured_values_accept_both_spellings_in_the_schema():
    evidence = schemas()["evidence.schema.json"]
    measured = evidence["$defs"]["Measured"]
    kinds = [branch.get("type") for branch in measured["anyOf"]]
    assert "array" in kinds
    # units are recorded beside the fields that carry them
    astrometry = evidence["$defs"]["Astrometry"]["properties"]
    assert astrometry["parallax"]["unit"] == "mas"
    assert astrometry["pmra"]["unit"] == "mas/yr"


def test_demo_files_validate_against_the_json_schemas():
    # jsonschema is an independent validator of the generated schemas (reference library)
    import datetime as dt
    import tomllib

    from jsonschema import Draft202012Validator
    from ruamel.yaml import YAML

    def plain(value):  # YAML dates become strings, as in a JSON document
        return json.loads(json.dumps(value, default=lambda v: v.isoformat() if isinstance(v, dt.date) else str(v)))

    generated = schemas()
    evidence = Draft202012Validator(generated["evidence.schema.json"])
    for path in sorted((DEMO / "systems").glob("*/evidence.yaml")):
        errors = list(evidence.iter_errors(plain(YAML(typ="safe").load(path.read_text()))))
        assert errors == [], (path, [e.message for e in errors])
    refs = plain(YAML(typ="safe").load((DEMO / "references.yaml").read_text()))
    assert list(Draft202012Validator(generated["references.schema.json"]).iter_errors(refs)) == []
    settings = plain(tomllib.loads((DEMO / "dossier.toml").read_text()))
    assert list(Draft202012Validator(generated["settings.schema.json"]).iter_errors(settings)) == []
    # and the schema rejects what the loader rejects: an unknown key
    bad = plain(YAML(typ="safe").load((DEMO / "systems/wren-9/evidence.yaml").read_text()))
    bad["components"]["A"]["paralax"] = [1.0, 0.1]
    assert any("paralax" in e.message for e in evidence.iter_errors(bad))
