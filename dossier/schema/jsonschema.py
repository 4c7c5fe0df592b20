"""JSON Schema of the project's files, generated from the pydantic models."""

from __future__ import annotations

import json
from pathlib import Path

from dossier.schema.models import Reference, System
from dossier.schema.settings import Settings

SCHEMA_DIALECT = "https://json-schema.org/draft/2020-12/schema"


def schemas() -> dict[str, dict]:
    """File name -> schema, in a fixed order."""
    from pydantic import RootModel

    references = RootModel[dict[str, Reference]]
    out = {}
    for name, model, title in (
        ("evidence.schema.json", System, "Dossier evidence file (systems/<id>/evidence.yaml)"),
        ("references.schema.json", references, "Dossier references file (references.yaml)"),
        ("settings.schema.json", Settings, "Dossier project settings (dossier.toml)"),
    ):
        schema = model.model_json_schema()
        schema = {"$schema": SCHEMA_DIALECT, "$id": name, "title": title, **{k: v for k, v in schema.items() if k != "title"}}
        out[name] = schema
    return out


def render(schema: dict) -> str:
    return json.dumps(schema, indent=2, ensure_ascii=False) + "\n"


def write_schemas(out_dir: Path) -> list[Path]:
    out_dir.mkdir(parents=True, exist_ok=True)
    paths = []
    for name, schema in schemas().items():
        path = out_dir / name
        path.write_text(render(schema), encoding="utf-8")
        paths.append(path)
    return paths
