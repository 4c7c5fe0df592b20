"""The provenance table and its PROV-JSON form, on the demo project.

Outside reference for the document's shape: W3C PROV-JSON Member Submission
(Huynh et al. 2013, https://www.w3.org/Submission/prov-json/), its section 3
(top-level keys) and its JSON Schema (https://www.w3.org/Submission/prov-json/schema):
generation and usage relate ``prov:entity`` and ``prov:activity``, derivation
``prov:generatedEntity`` and ``prov:usedEntity``, association
``prov:activity`` and ``prov:agent``; typed literals are ``{"$": ..., "type": ...}``.
"""

from __future__ import annotations

import csv
import json
import re
from collections import Counter

import pytest
from ruamel.yaml import YAML

from dossier.engine import weigh_project
from dossier.provenance import LOG_SOURCE, ProvRow, prov_json, provenance_rows
from dossier.rules import distance
from dossier.schema.loader import _refs_in, load_project
from tests.conftest import DEMO

SYSTEM = "heron-1"
SURVEYS = ("sky-survey-1", "sky-survey-2", "sky-survey-3")

#: Top-level keys the submission defines (section 3 and its schema).
PROV_KEYS = {
    "prefix", "entity", "activity", "agent", "wasGeneratedBy", "used", "wasInformedBy", "wasStartedBy",
    "wasEndedBy", "wasInvalidatedBy", "wasDerivedFrom", "wasAttributedTo", "wasAssociatedWith",
    "actedOnBehalfOf", "wasInfluencedBy", "specializationOf", "alternateOf", "hadMember", "bundle",
}
#: Relation → (attribute that must name an entity/activity/agent, the kind it names).
RELATION_ROLES = {
    "wasGeneratedBy": {"prov:entity": "entity", "prov:activity": "activity"},
    "used": {"prov:activity": "activity", "prov:entity": "entity"},
    "wasDerivedFrom": {"prov:generatedEntity": "entity", "prov:usedEntity": "entity"},
    "wasAssociatedWith": {"prov:activity": "activity", "prov:agent": "agent"},
}
#: A qualified name prefix:local whose local part needs no escaping in PROV-N.
QNAME = re.compile(r"^(dossier:|_:)[A-Za-z0-9._%-]+$")


@pytest.fixture(scope="module")
def weighed():
    project = load_project(DEMO)
    return project, weigh_project(project, use_cache=False)[SYSTEM]


@pytest.fixture(scope="module")
def rows(weighed) -> list[ProvRow]:
    return provenance_rows(*weighed)


@pytest.fixture(scope="module")
def references() -> dict:
    """references.yaml read directly, not through the loader."""
    return YAML(typ="safe").load((DEMO / "references.yaml").read_text(encoding="utf-8"))


def test_every_measured_value_has_its_citation(weighed, rows, references):
    project, result = weighed
    measured = [r for r in rows if r.kind == "measured" and not r.field.startswith("log.")]
    expected = [loc for loc, _, is_measured in _refs_in(result.system, (), None) if is_measured]
    if not result.system.field_density:
        expected += [loc for loc, _, m in _refs_in(project.settings.field_density, (), None) if m]
    assert len(measured) == len(expected) > 50
    assert len({r.field for r in measured}) == len(measured)
    for row in measured:
        source = references[row.source_id]
        assert row.citation == source["citation"]
        assert row.doi == source.get("doi")
        assert row.consulted == source.get("consulted")
        assert row.value is not None and row.uncertainty is not None and row.uncertainty > 0


def test_a_measured_value_as_written_in_the_evidence(rows):
    # evidence.yaml of heron-1: component A, second astrometric solution, parallax [8.71, 0.06], ref sky-survey-2
    (row,) = [r for r in rows if r.field == "components.A.astrometry[1].parallax"]
    assert (row.subject, row.value, row.uncertainty, row.unit) == ("A", 8.71, 0.06, "mas")
    assert (row.source_id, row.doi) == ("sky-survey-2", "10.99999/demo.survey.2")
    # a value with its own ref inside a record: the magnitude keeps photometry-1
    (mag,) = [r for r in rows if r.field == "components.A.magnitudes.V"]
    assert (mag.value, mag.unit, mag.source_id) == (5.91, "mag", "photometry-1")


def test_observing_log_is_one_row_per_pair(rows):
    with (DEMO / "systems" / SYSTEM / "log.csv").open(encoding="utf-8", newline="") as handle:
        counts = Counter(line["pair"] for line in csv.DictReader(handle))
    log_rows = [r for r in rows if r.field.startswith("log.")]
    assert sorted(r.subject for r in log_rows) == sorted(counts)
    for row in log_rows:
        assert row.source_id == LOG_SOURCE
        assert row.citation.startswith(f"observing log, {counts[row.subject]} measures of {row.subject}")
        assert "observers " in row.citation


def test_provenance_chain_of_a_derived_value(weighed, rows, references):
    """The combined parallax of A: rule, version, published method and its three inputs."""
    (row,) = [r for r in rows if r.field == "assessments.distance.A.parallax"]
    assert row.kind == "derived" and row.subject == "A"
    assert (row.rule, row.rule_version, row.method) == ("distance", distance.RULE.version, distance.RULE.citation)
    assert sorted(row.inputs) == list(SURVEYS)
    assert row.unit == "mas" and row.value is not None
    # each input leads back to measured parallaxes of A with their citations
    for survey in row.inputs:
        measured = [r for r in rows if r.kind == "measured" and r.subject == "A" and r.source_id == survey
                    and r.field.endswith(".parallax")]
        assert measured and measured[0].citation == references[survey]["citation"]

    # the same chain in PROV-JSON
    doc = prov_json(*weighed)
    entity = f"dossier:{SYSTEM}.assessments.distance.A.parallax"
    (gen,) = [g for g in doc["wasGeneratedBy"].values() if g["prov:entity"] == entity]
    activity = doc["activity"][gen["prov:activity"]]
    assert activity["dossier:rule"] == "distance" and activity["dossier:method"] == distance.RULE.citation
    used = sorted(u["prov:entity"] for u in doc["used"].values() if u["prov:activity"] == gen["prov:activity"])
    assert used == [f"dossier:source.{s}" for s in SURVEYS]
    derived_from = sorted(d["prov:usedEntity"] for d in doc["wasDerivedFrom"].values()
                          if d["prov:generatedEntity"] == entity)
    assert derived_from == used
    for survey in SURVEYS:
        source = doc["entity"][f"dossier:source.{survey}"]
        assert source["dossier:citation"] == references[survey]["citation"]
        assert source["dossier:doi"] == references[survey]["doi"]
        assert source["dossier:consulted"] == {"$": references[survey]["consulted"].isoformat(), "type": "xsd:date"}


def test_every_derived_quantity_has_a_row(weighed, rows):
    _, result = weighed
    derived = [r for r in rows if r.kind == "derived"]
    assert len(derived) >= sum(len(a.quantities) for a in result.assessments) > 0
    assert all(r.rule and r.rule_version and r.method for r in derived)


def test_prov_json_structure(weighed):
    doc = prov_json(*weighed)
    assert set(doc) <= PROV_KEYS
    assert {"prefix", "entity", "activity", "agent", "wasGeneratedBy", "used", "wasDerivedFrom"} <= set(doc)
    assert re.match(r"^https?://\S+$", doc["prefix"]["dossier"])
    ids = {kind: set(doc[kind]) for kind in ("entity", "activity", "agent")}
    assert not (ids["entity"] & ids["activity"]) and not (ids["entity"] & ids["agent"])
    for kind in ("entity", "activity", "agent"):
        for name, attrs in doc[kind].items():
            assert QNAME.match(name), name
            assert isinstance(attrs, dict)
            kind_attr = attrs.get("prov:type")
            assert kind_attr is None or set(kind_attr) == {"$", "type"}
    (agent,) = doc["agent"].values()
    assert agent["prov:type"]["$"] == "prov:SoftwareAgent" and agent["dossier:version"]
    for relation, roles in RELATION_ROLES.items():
        assert doc[relation], relation
        for name, attrs in doc[relation].items():
            assert QNAME.match(name), name
            for role, kind in roles.items():
                assert attrs[role] in ids[kind], (relation, name, role, attrs[role])
            assert set(attrs) <= set(roles) | {"prov:activity", "prov:type", "prov:time", "prov:generation",
                                                "prov:usage", "prov:plan", "prov:role"}
    # every derived value is generated by a rule application
    generated = {g["prov:entity"] for g in doc["wasGeneratedBy"].values()}
    for name, attrs in doc["entity"].items():
        if attrs["prov:type"]["$"] == "dossier:DerivedValue":
            assert name in generated


def test_prov_json_is_deterministic(weighed):
    project, result = weighed
    first = json.dumps(prov_json(project, result), sort_keys=True, indent=2)
    again = json.dumps(prov_json(project, result), sort_keys=True, indent=2)
    assert first == again
    fresh_project = load_project(DEMO)
    fresh = weigh_project(fresh_project, use_cache=False)[SYSTEM]
    assert json.dumps(prov_json(fresh_project, fresh), sort_keys=True, indent=2) == first
    assert provenance_rows(fresh_project, fresh) == provenance_rows(project, result)
    assert "NaN" not in first and "Infinity" not in first
