"""The catalogue index: its rows and the search index built with the site."""

from __future__ import annotations

import csv
import json
import re

import pytest

from dossier.engine import weigh_project
from dossier.render.catalogue import search_index_js, system_row
from dossier.schema.loader import load_project
from tests.conftest import DEMO, edit


@pytest.fixture(scope="module")
def rows():
    project = load_project(DEMO)
    return [system_row(r, {"releases": []}) for r in weigh_project(project).values()]


def _index(text: str) -> dict:
    match = re.fullmatch(r"// [^\n]*\nwindow\.DOSSIER_SEARCH = (\{.*\});\n", text, re.S)
    assert match, text[:200]
    return json.loads(match.group(1))


def test_rows_give_last_observation_and_open_claims(rows):
    by_id = {row["id"]: row for row in rows}
    # the latest epoch in each demo log, read with the csv module (an independent reading of the same file)
    with open(DEMO / "systems/heron-1/log.csv", newline="", encoding="utf-8") as fh:
        epochs = [r["epoch"] for r in csv.DictReader(line for line in fh if not line.startswith("#"))]
    assert by_id["heron-1"]["last_observed"] == max(e for e in epochs if e[0].isdigit())  # ISO dates sort as text; Besselian epochs are older
    assert by_id["wren-9"]["last_observed"] is None  # no log
    assert by_id["heron-1"]["open_claims"] == ["C"]  # Ab is confirmed; C is doubtful, so still open
    assert by_id["alder-4"]["open_claims"] == []
    assert by_id["heron-1"]["components"] == 8


def test_search_index_maps_words_to_systems(rows):
    index = _index(search_index_js(rows))
    ids = index["systems"]
    assert ids == [row["id"] for row in rows]
    found = lambda word: sorted(ids[i] for i in index["words"][word])  # noqa: E731
    assert found("heron-1") == ["heron-1"]  # ids kept whole
    assert found("photocentre") == ["heron-1"]  # a word of the notes
    assert found("giant") == ["alder-4", "heron-1"]  # titles
    assert found("ba-bb") == ["heron-1"]  # pair ids, lower-cased


def test_search_index_cannot_close_a_script(demo_copy):
    edit(demo_copy / "systems/wren-9/evidence.yaml", "title: ", "title: </script><script>alert(1)</script> ")
    project = load_project(demo_copy, only="wren-9")
    text = search_index_js([system_row(r, {}) for r in weigh_project(project).values()])
    assert "</script" not in text and "<\\/script" not in text  # words only: markup never reaches the index
    assert "alert" in _index(text)["words"]
