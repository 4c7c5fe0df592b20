"""Where every number of a system's dossier came from.

Two views of the same facts:

:func:`provenance_rows`
    A flat table, one :class:`ProvRow` per number: every *measured* value of
    the evidence file (with its source's full citation, DOI and date
    consulted, from ``references.yaml``), one row per pair for the observing
    log, and every *derived* quantity of every assessment (with the rule id,
    its version, the published method it applies and the inputs it used).
:func:`prov_json`
    The same as a W3C PROV-JSON document (Huynh, Jewell, Keshavarz, Michaelides,
    Yang & Moreau 2013, "The PROV-JSON Serialization", W3C Member Submission,
    https://www.w3.org/Submission/prov-json/), over the PROV data model
    (Moreau & Missier 2013, "PROV-DM: The PROV Data Model", W3C Recommendation).

Both are pure functions of the loaded project and the weighed result: no
clock, no random ids, so the same evidence gives the same bytes.
"""

from __future__ import annotations

import datetime as dt
import math
import re
from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any, Literal

from pydantic import BaseModel

from dossier import __version__
from dossier.engine import SystemResult
from dossier.rules.base import Assessment, Quantity
from dossier.schema.loader import Project, _refs_in
from dossier.schema.models import System

#: The source id that assessments give for a system's own observing log.
LOG_SOURCE = "observing log"

#: Namespace of our own ids when the project has no ``base_url``.
DEFAULT_NAMESPACE = "https://example.org/dossier#"

@dataclass(frozen=True)
class ProvRow:
    """One number of the dossier and where it came from.

    ``field`` is a dotted path: ``components.A.astrometry[1].parallax`` for a
    measured value, ``log.AB`` for a pair's observing log,
    ``assessments.distance.A.parallax`` for a derived quantity.
    """

    kind: Literal["measured", "derived"]
    subject: str
    field: str
    value: float | None
    uncertainty: float | None
    unit: str
    source_id: str | None = None
    citation: str | None = None
    doi: str | None = None
    consulted: dt.date | None = None
    rule: str | None = None
    rule_version: int | None = None
    method: str | None = None
    inputs: tuple[str, ...] = ()


# ----------------------------------------------------------------------------
# The table


def _dotted(loc: tuple[Any, ...]) -> str:
    text = ""
    for part in loc:
        text += f"[{part}]" if isinstance(part, int) else (f".{part}" if text else str(part))
    return text


def _at(root: Any, loc: tuple[Any, ...]) -> Any:
    node = root
    for part in loc:
        node = node[part] if isinstance(node, (dict, list, tuple)) else getattr(node, part)
    return node


def _subject(system: System, loc: tuple[Any, ...]) -> str:
    """The component or pair a measured value describes (the system id otherwise)."""
    head = loc[0] if loc else None
    if head == "components":
        return str(loc[1])
    item = _at(system, loc[:2]) if head in ("pairs", "claims", "orbits", "neighbours") else None
    if isinstance(item, BaseModel):
        for name in ("id", "companion", "pair"):
            if isinstance(getattr(item, name, None), str):
                return getattr(item, name)
    return system.id


def _unit_of(root: Any, loc: tuple[Any, ...]) -> str:
    """The unit the schema records for the field at ``loc`` (``json_schema_extra['unit']``)."""
    for j in range(len(loc) - 1, -1, -1):
        parent = _at(root, loc[:j])
        if isinstance(parent, BaseModel) and loc[j] in type(parent).model_fields:
            if loc[j] == "period" and hasattr(parent, "period_unit"):
                return parent.period_unit
            extra = type(parent).model_fields[loc[j]].json_schema_extra
            return str(extra.get("unit", "")) if isinstance(extra, dict) else ""
    return ""


def _number(value: Any) -> float | None:
    """A JSON-safe float: ``None`` for missing or non-finite values."""
    if value is None or isinstance(value, bool):
        return None if value is None else float(value)
    value = float(value)
    return value if math.isfinite(value) else None


def _measured_rows(project: Project, system: System, log: tuple) -> Iterator[ProvRow]:
    refs = project.references
    walks = [(system, ())]
    if not system.field_density:  # the project's default table is the one the rules use
        walks.append((project.settings.field_density, ("settings", "field_density")))
    for root, prefix in walks:
        for loc, ref, is_measured in _refs_in(root, prefix, None):
            if not is_measured:
                continue
            value = _at(root, loc[len(prefix):])
            source = refs.get(ref) if ref else None
            unit = _unit_of(root, loc[len(prefix):])
            yield ProvRow(
                kind="measured", subject=_subject(system, loc) if not prefix else system.id, field=_dotted(loc),
                value=_number(value.value), uncertainty=_number(value.uncertainty), unit=unit,
                source_id=ref, citation=source.citation if source else None,
                doi=source.doi if source else None, consulted=source.consulted if source else None,
            )
    # the observing log: one row per pair and source (the log itself, or a paper a measure was copied from)
    groups: dict[tuple[str, str | None], list] = {}
    for measure in log:
        groups.setdefault((measure.pair, measure.ref), []).append(measure)
    for (pair, ref), measures in sorted(groups.items(), key=lambda kv: (kv[0][0], kv[0][1] or "")):
        observers = sorted({m.observer for m in measures if m.observer})
        epochs = [m.epoch for m in measures]
        text = (f"observing log, {len(measures)} measure{'s' if len(measures) != 1 else ''}"
                f" of {pair} from {epochs[0]} to {epochs[-1]}"
                + (f", observers {', '.join(observers)}" if observers else ""))
        source = refs.get(ref) if ref else None
        yield ProvRow(
            kind="measured", subject=pair, field=f"log.{pair}" + (f"[{ref}]" if ref else ""),
            value=None, uncertainty=None, unit="",
            source_id=ref or LOG_SOURCE,
            citation=f"{text}; copied from {source.citation}" if source else text,
            doi=source.doi if source else None, consulted=source.consulted if source else None,
        )


def _quantities(a: Assessment) -> list[Quantity]:
    """Every quantity of an assessment, its statistic included when not already listed."""
    found = list(a.quantities)
    if a.statistic is not None and all(q.name != a.statistic.name for q in found):
        found.append(a.statistic)
    return found


def _derived_rows(result: SystemResult) -> Iterator[ProvRow]:
    for a in result.assessments:
        for q in _quantities(a):
            yield ProvRow(
                kind="derived", subject=a.subject, field=f"assessments.{a.rule}.{a.subject}.{q.name}",
                value=_number(q.value), uncertainty=_number(q.uncertainty), unit=q.unit,
                rule=a.rule, rule_version=a.rule_version, method=a.method, inputs=tuple(a.sources),
            )


def cited_sources(project: Project, result: SystemResult) -> list[tuple[str, object]]:
    """The sources a system's dossier cites (evidence, assessments, field-star table), by id, sorted."""
    ids = {ref for _, ref, _ in _refs_in(result.system, (), None) if ref}
    for a in result.assessments:
        ids.update(a.sources)
    ids.update(m.ref for m in project.logs.get(result.system.id, ()) if m.ref)
    table = result.system.field_density or project.settings.field_density
    ids.update(r.per_square_degree.ref or r.ref for r in table if (r.per_square_degree.ref or r.ref))
    return [(ref, project.references[ref]) for ref in sorted(ids) if ref in project.references]


def _natural(text: str) -> tuple:
    return tuple(int(t) if t.isdigit() else t for t in re.split(r"(\d+)", text))


def provenance_rows(project: Project, result: SystemResult) -> list[ProvRow]:
    """The provenance table of one weighed system.

    Parameters
    ----------
    project
        The loaded project (its ``references`` give citations, DOIs and dates).
    result
        The system as weighed by :func:`dossier.engine.weigh_system`.

    Returns
    -------
    Measured rows, then derived rows; within each, grouped by subject
    (natural order), and in the order of the evidence file (measured) or of
    the rule registry and each rule's quantities (derived). The order depends
    only on the inputs.
    """
    log = project.logs.get(result.system.id, ())
    rows = list(_measured_rows(project, result.system, log)) + list(_derived_rows(result))
    rank = {"measured": 0, "derived": 1}
    order = sorted(range(len(rows)), key=lambda i: (rank[rows[i].kind], _natural(rows[i].subject), i))
    return [rows[i] for i in order]


# ----------------------------------------------------------------------------
# PROV-JSON


def _local(text: str) -> str:
    """A safe local part of a qualified name: letters, digits, '.', '-', '_'; others %-encoded."""
    text = re.sub(r"\[([^\]]*)\]", r".\1", text)
    return "".join(c if re.match(r"[A-Za-z0-9._-]", c) else "".join(f"%{b:02X}" for b in c.encode()) for c in text)


def _typed(value: Any, kind: str) -> dict[str, str]:
    return {"$": str(value), "type": kind}


def _clean(attrs: dict[str, Any]) -> dict[str, Any]:
    return {k: v for k, v in attrs.items() if v is not None and v != ""}


def prov_json(project: Project, result: SystemResult) -> dict[str, Any]:
    """One weighed system's provenance as a W3C PROV-JSON document.

    Entities are the sources (``dossier:source.<id>``), the measured values
    (``dossier:<system>.<field>``) and the derived values
    (``dossier:<system>.assessments.<rule>.<subject>.<name>``); activities
    are the rule applications (``dossier:<system>.rule.<rule>.<subject>``),
    associated with the software agent ``dossier:software.dossier``. A
    measured value ``wasDerivedFrom`` its source (typed ``prov:PrimarySource``);
    a derived value ``wasGeneratedBy`` its rule application and
    ``wasDerivedFrom`` each of the sources the application ``used``.
    Every id is built from names in the evidence: the same inputs give the
    same document. Serialise with ``json.dumps(doc, sort_keys=True, indent=2)``.
    """
    system = result.system
    sid = system.id
    base = project.settings.project.base_url
    namespace = (base.rstrip("/") + "/provenance#") if base else DEFAULT_NAMESPACE
    rows = provenance_rows(project, result)

    entity: dict[str, dict[str, Any]] = {}
    activity: dict[str, dict[str, Any]] = {}
    generated: dict[str, dict[str, str]] = {}
    used: dict[str, dict[str, str]] = {}
    derived: dict[str, dict[str, str]] = {}
    associated: dict[str, dict[str, str]] = {}
    agent_id = "dossier:software.dossier"
    agent = {agent_id: {"prov:type": _typed("prov:SoftwareAgent", "prov:QUALIFIED_NAME"),
                        "prov:label": f"Dossier {__version__}", "dossier:version": __version__}}

    def source_entity(source: str, subject: str) -> str:
        """The entity of a source id as an assessment or a measured value names it."""
        if source in project.references:
            ref = project.references[source]
            eid = f"dossier:source.{_local(source)}"
            entity.setdefault(eid, _clean({
                "prov:type": _typed("dossier:Source", "prov:QUALIFIED_NAME"),
                "prov:label": ref.citation, "dossier:citation": ref.citation, "dossier:doi": ref.doi,
                "dossier:url": ref.url,
                "dossier:consulted": _typed(ref.consulted.isoformat(), "xsd:date") if ref.consulted else None,
            }))
            return eid
        if source == LOG_SOURCE:
            pairs = {m.pair for m in project.logs.get(sid, ())}
            scope = subject if subject in pairs else None
            eid = f"dossier:{_local(sid)}.log" + (f".{_local(scope)}" if scope else "")
            label = f"observing log of {sid}" + (f", pair {scope}" if scope else "")
        else:  # an input named in words by a rule (e.g. an orbit fitted by another rule)
            eid = f"dossier:{_local(sid)}.input.{_local(source)}"
            label = source
        entity.setdefault(eid, {"prov:type": _typed("dossier:Input", "prov:QUALIFIED_NAME"), "prov:label": label})
        return eid

    for row in rows:
        if row.kind != "measured":
            continue
        if row.field.startswith("log."):
            eid = source_entity(LOG_SOURCE, row.subject)
            if row.source_id == LOG_SOURCE:
                entity[eid]["prov:label"] = row.citation
            else:  # measures copied from a paper
                src = source_entity(row.source_id, row.subject)
                derived[f"_:derived.{eid[8:]}.{src[8:]}"] = {
                    "prov:generatedEntity": eid, "prov:usedEntity": src,
                    "prov:type": _typed("prov:PrimarySource", "prov:QUALIFIED_NAME")}
            continue
        eid = f"dossier:{_local(sid)}.{_local(row.field)}"
        entity[eid] = _clean({
            "prov:type": _typed("dossier:MeasuredValue", "prov:QUALIFIED_NAME"), "prov:label": row.field,
            "prov:value": row.value, "dossier:uncertainty": row.uncertainty, "dossier:unit": row.unit,
            "dossier:subject": row.subject,
        })
        if row.source_id:
            src = source_entity(row.source_id, row.subject)
            derived[f"_:derived.{eid[8:]}"] = {
                "prov:generatedEntity": eid, "prov:usedEntity": src,
                "prov:type": _typed("prov:PrimarySource", "prov:QUALIFIED_NAME")}

    for a in result.assessments:
        aid = f"dossier:{_local(sid)}.rule.{_local(a.rule)}.{_local(a.subject)}"
        activity[aid] = _clean({
            "prov:type": _typed("dossier:RuleApplication", "prov:QUALIFIED_NAME"),
            "prov:label": f"{a.title} ({a.rule} v{a.rule_version}) on {a.subject}",
            "dossier:rule": a.rule, "dossier:ruleVersion": a.rule_version, "dossier:subject": a.subject,
            "dossier:method": a.method, "dossier:outcome": a.outcome,
        })
        associated[f"_:assoc.{aid[8:]}"] = {"prov:activity": aid, "prov:agent": agent_id}
        sources = [source_entity(s, a.subject) for s in a.sources]
        for src in sources:
            used[f"_:used.{aid[8:]}.{src[8:]}"] = {"prov:activity": aid, "prov:entity": src}
        for q in _quantities(a):
            eid = f"dossier:{_local(sid)}.assessments.{_local(a.rule)}.{_local(a.subject)}.{_local(q.name)}"
            entity[eid] = _clean({
                "prov:type": _typed("dossier:DerivedValue", "prov:QUALIFIED_NAME"), "prov:label": q.label,
                "prov:value": _number(q.value), "dossier:uncertainty": _number(q.uncertainty),
                "dossier:low": _number(q.low), "dossier:high": _number(q.high), "dossier:unit": q.unit,
                "dossier:how": q.how, "dossier:subject": a.subject,
            })
            generated[f"_:gen.{eid[8:]}"] = {"prov:entity": eid, "prov:activity": aid}
            for src in sources:
                derived[f"_:derived.{eid[8:]}.{src[8:]}"] = {
                    "prov:generatedEntity": eid, "prov:usedEntity": src, "prov:activity": aid}

    return {
        "prefix": {"dossier": namespace},
        "entity": entity,
        "activity": activity,
        "agent": agent,
        "wasGeneratedBy": generated,
        "used": used,
        "wasDerivedFrom": derived,
        "wasAssociatedWith": associated,
    }
