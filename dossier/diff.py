"""What a dossier says, as comparable data, and what changed between two of them.

:func:`state_of` reduces one weighed system to a *state*: a JSON-ready
dictionary of what its dossier says (measured values with their sources,
observing-log summaries, derived values, cited sources, assessments (with
how the verdict used each), verdicts (the status and its named
probability), the terms of each verdict's odds as used, and companion-claim
grades). A release stores its state, so that what a dossier said then is
kept even when Dossier's rules change later.

:func:`compare` lists the :class:`Change` entries between two states;
:func:`to_markdown` and :func:`print_changes` show them, for a review
(``dossier diff``) or a release's "what changed" page.

Keys are chosen to survive reordering: an entry of a list that names its
source (``components.A.astrometry[1].parallax`` with ``ref: survey-b``) is
keyed by the source (``components.A.astrometry[survey-b].parallax``), so
adding a third astrometric solution does not show the other two as changed.
"""

from __future__ import annotations

import math
import re
from collections import Counter
from dataclasses import dataclass
from typing import Any, Literal

from dossier.fmt import fmt_log10, fmt_number
from dossier.render.terms import ODDS, labelled, probability_label

#: Format of a state; bumped when a key changes meaning or goes away.
STATE_FORMAT_VERSION = 1

Kind = Literal["value", "log", "derived", "source", "assessment", "verdict", "term", "grade", "system"]
KIND_TITLES: dict[str, str] = {
    "system": "Systems",
    "verdict": "Verdicts",
    "term": "Terms of the verdicts",
    "grade": "Companion-claim grades",
    "source": "Sources",
    "value": "Measured values",
    "log": "Observing logs",
    "assessment": "Assessments",
    "derived": "Derived values",
}


def _num(value: Any) -> float | None:
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def _label(items: Any, index: int) -> str:
    """How a key names entry ``index`` of a list: its id, else its source when unique in the list, else the index."""
    item = items[index]
    for name in ("id", "companion", "pair"):
        value = getattr(item, name, None)
        if isinstance(value, str) and sum(getattr(x, name, None) == value for x in items) == 1:
            return value
    for name in ("ref", "epoch"):
        value = getattr(item, name, None)
        if isinstance(value, str) and sum(getattr(x, name, None) == value for x in items) == 1:
            return value
    return str(index)


def stable_key(root: Any, field: str) -> str:
    """``field`` (a dotted path with list indices) with each index replaced by the entry's own name."""
    node, out = root, ""
    for name, index in re.findall(r"\.?([^.\[\]]+)|\[(\d+)\]", field):
        if name:
            out += ("." if out else "") + name
            try:
                node = node[name] if isinstance(node, dict) else getattr(node, name)
            except (KeyError, AttributeError, TypeError):
                node = None
        else:
            i = int(index)
            label = _label(node, i) if isinstance(node, (list, tuple)) and i < len(node) else index
            out += f"[{label}]"
            node = node[i] if isinstance(node, (list, tuple)) and i < len(node) else None
    return out


def _fmt_raw(value: float) -> str:
    return format(value, ".10g")


def state_of(project, result) -> dict[str, Any]:
    """What the dossier of one weighed system says, as a JSON-ready dictionary.

    Parameters
    ----------
    project : dossier.schema.loader.Project
        The loaded project (for citations and the observing log).
    result : dossier.engine.SystemResult
        The weighed system.
    """
    from dossier.provenance import LOG_SOURCE, cited_sources, provenance_rows

    rows = provenance_rows(project, result)
    measured = [r for r in rows if r.kind == "measured" and not r.field.startswith("log.")]
    values = {}
    for row in measured:
        key = stable_key(project if row.field.startswith("settings.") else result.system, row.field)
        values[key if key not in values else row.field] = {"subject": row.subject, "value": _num(row.value), "uncertainty": _num(row.uncertainty),
                       "unit": row.unit, "source": row.source_id}
    logs: dict[str, dict[str, Any]] = {}
    for m in project.logs.get(result.system.id, ()):
        entry = logs.setdefault(m.pair, {"measures": 0, "first": None, "last": None, "sources": set()})
        entry["measures"] += 1
        epoch = str(m.epoch)
        entry["first"] = epoch if entry["first"] is None else entry["first"]
        entry["last"] = epoch
        entry["sources"].add(m.ref or LOG_SOURCE)
    for entry in logs.values():
        entry["sources"] = sorted(entry["sources"])
    derived = {}
    for row in rows:
        if row.kind == "derived":
            derived[row.field] = {"subject": row.subject, "value": _num(row.value),
                                  "uncertainty": _num(row.uncertainty), "unit": row.unit, "rule": row.rule}
    from dossier.render.terms import uses

    assessments = {}
    used = uses(result)
    for a in result.assessments:
        entry = {"rule": a.rule, "rule_version": a.rule_version, "subject": a.subject, "outcome": a.outcome,
                 "strength": _num(a.strength), "explanation": a.explanation}
        role = used[(a.rule, a.subject_kind, a.subject)].in_verdict
        if role is not None:  # how the verdict used it: a diagnostic's strength is not a term of the odds
            entry["in_verdict"] = role
        assessments[f"{a.rule} · {a.subject}"] = entry
    limit = project.settings.pair_model.model_limit
    verdicts = {pid: {"status": v.status, "probability": _num(v.probability), "probability_of": v.probability_of,
                      "model_limit": limit, "summary": v.summary}
                for pid, v in result.verdicts.items()}
    terms = {f"{pid} · {c.line}": {"pair": pid, "line": c.line, "question": c.question, "log10": _num(c.log10),
                                   "alone": _num(c.alone), "rules": list(c.rules)}
             for pid, v in result.verdicts.items() for c in v.contributions}
    grades = {a.subject: {"grade": a.grade, "reasons": list(a.reasons)}
              for a in result.assessments if a.grade is not None}
    system = result.system
    return {
        "format": "dossier-state",
        "format_version": STATE_FORMAT_VERSION,
        "system": system.id,
        "title": system.title,
        "values": values,
        "logs": dict(sorted(logs.items())),
        "derived": derived,
        "sources": {ref: source.citation for ref, source in cited_sources(project, result)},
        "assessments": assessments,
        "verdicts": verdicts,
        "terms": terms,
        "grades": grades,
        "reviews": [{"by": r.by, "on": r.on.isoformat(), "decision": r.decision, "comment": r.comment}
                    for r in system.reviews],
    }


# ----------------------------------------------------------------------------
# Comparing two states


@dataclass(frozen=True)
class Change:
    """One difference between two states of a system's dossier.

    ``before`` and ``after`` are short human-readable texts (``None`` when
    the entry was added or withdrawn).
    """

    system: str
    kind: Kind
    key: str
    before: str | None
    after: str | None

    @property
    def action(self) -> str:
        if self.before is None:
            return "added"
        if self.after is None:
            return "withdrawn" if self.kind in ("source", "value", "log", "system") else "removed"
        return "changed"

    def to_dict(self) -> dict[str, Any]:
        return {"system": self.system, "kind": self.kind, "key": self.key, "action": self.action,
                "before": self.before, "after": self.after}


def _fmt_value(entry: dict[str, Any]) -> str:
    """A measured value as recorded (ten significant digits at most); a derived one as the dossier shows it."""
    raw = "rule" not in entry
    if entry["value"] is None:
        text = "—"
    else:
        text = _fmt_raw(entry["value"]) if raw else fmt_number(entry["value"], 4)
        if entry.get("uncertainty") is not None:
            text += f" ± {_fmt_raw(entry['uncertainty']) if raw else fmt_number(entry['uncertainty'], 3)}"
    if entry.get("unit"):
        text += f" {entry['unit']}"
    if entry.get("source"):
        text += f" [{entry['source']}]"
    return text


def _fmt_log(entry: dict[str, Any]) -> str:
    n = entry["measures"]
    return f"{n} measure{'s' if n != 1 else ''}, {entry['first']} to {entry['last']} ({', '.join(entry['sources'])})"


def _fmt_assessment(entry: dict[str, Any]) -> str:
    """An assessment as the dossier shows it: a diagnostic of the pair model shows no log10 of its own, which
    the verdict does not use (states of releases made before the pair model have no ``in_verdict``)."""
    role = entry.get("in_verdict")
    if role == "diagnostic":
        strength = ", weighed in the pair model"
    elif entry["strength"] is None:
        strength = ""
    elif role == "pair-model":
        strength = f", log10 odds physical : chance alignment {fmt_log10(entry['strength'])}"
    else:
        strength = f", log10 LR {fmt_log10(entry['strength'])}"
    return f"{entry['outcome']}{strength}: {entry['explanation']}"


def verdict_label(entry: dict[str, Any]) -> str:
    """What a stored verdict's probability is the probability of (older states name it by the status)."""
    return probability_label(entry["status"], entry.get("probability_of"))


def _fmt_verdict(entry: dict[str, Any]) -> str:
    """'optical (P(chance alignment) > 0.999999 (limit of the model))': the status and its named probability."""
    return f"{entry['status']} ({labelled(entry['probability'], verdict_label(entry), entry.get('model_limit'))})"


def _fmt_term(entry: dict[str, Any]) -> str:
    """'+3.00 in log10 odds physical : chance alignment (alone +1719)': a term of a verdict as used."""
    text = f"{fmt_log10(entry['log10'])} in log10 odds {ODDS.get(entry['question'], entry['question'])}"
    alone = entry.get("alone")
    if alone is not None and fmt_log10(alone) != fmt_log10(entry["log10"]):
        text += f" (alone {fmt_log10(alone)})"
    return text


def _fmt_grade(entry: dict[str, Any]) -> str:
    return entry["grade"] + (f" ({' '.join(entry['reasons'])})" if entry["reasons"] else "")


def _same_measured(a: dict[str, Any], b: dict[str, Any]) -> bool:
    """Measured values are compared exactly: any edit of the evidence shows."""
    return a == b


def _same_shown(fmt):
    """Derived numbers, assessments and verdicts are compared as the dossier shows them, so that
    floating-point noise in the last digits is not reported as a change."""
    return lambda a, b: fmt(a) == fmt(b) and a.get("rule_version") == b.get("rule_version")


_SECTIONS = (
    # (kind, state key, formatter, equality)
    ("verdict", "verdicts", _fmt_verdict, _same_shown(_fmt_verdict)),
    ("term", "terms", _fmt_term, _same_shown(_fmt_term)),
    ("grade", "grades", _fmt_grade, _same_measured),
    ("source", "sources", str, _same_measured),
    ("value", "values", _fmt_value, _same_measured),
    ("log", "logs", _fmt_log, _same_measured),
    ("assessment", "assessments", _fmt_assessment, _same_shown(_fmt_assessment)),
    ("derived", "derived", _fmt_value, _same_shown(_fmt_value)),
)


def compare(before: dict[str, Any] | None, after: dict[str, Any] | None) -> list[Change]:
    """Every change from the state ``before`` to the state ``after`` of one system.

    ``None`` on one side stands for a system that does not exist there: the
    result is then one ``system`` change. Within a kind, changes follow the
    order of the keys in ``after`` (then withdrawn keys in ``before``'s order),
    which is the order of the dossier.
    """
    if before is None and after is None:
        return []
    sid = (after or before)["system"]  # type: ignore[index]
    if before is None or after is None:
        title = (after or before)["title"]  # type: ignore[index]
        return [Change(sid, "system", sid, None if before is None else title, None if after is None else title)]
    changes: list[Change] = []
    for kind, key, fmt, same in _SECTIONS:
        old, new = before.get(key, {}), after.get(key, {})
        for name, entry in new.items():
            if name not in old:
                changes.append(Change(sid, kind, name, None, fmt(entry)))  # type: ignore[arg-type]
            elif not same(old[name], entry):
                changes.append(Change(sid, kind, name, fmt(old[name]), fmt(entry)))  # type: ignore[arg-type]
        for name, entry in old.items():
            if name not in new:
                changes.append(Change(sid, kind, name, fmt(entry), None))  # type: ignore[arg-type]
    return changes


def compare_projects(before: dict[str, dict[str, Any]], after: dict[str, dict[str, Any]]) -> list[Change]:
    """Changes between two sets of states keyed by system id (systems in sorted order)."""
    changes: list[Change] = []
    for sid in sorted(set(before) | set(after)):
        changes += compare(before.get(sid), after.get(sid))
    return changes


# ----------------------------------------------------------------------------
# Showing changes


def grouped(changes: list[Change]) -> list[tuple[str, str, list[Change]]]:
    """(system, kind title, changes) in system order, then the order of :data:`KIND_TITLES`."""
    out = []
    for sid in dict.fromkeys(c.system for c in changes):
        for kind, title in KIND_TITLES.items():
            found = [c for c in changes if c.system == sid and c.kind == kind]
            if found:
                out.append((sid, title, found))
    return out


def summary(changes: list[Change]) -> str:
    """'2 verdicts; 1 sources; …': how many changes of each kind, in the order of :data:`KIND_TITLES`."""
    counts = Counter(c.kind for c in changes)
    return "; ".join(f"{counts[k]} {KIND_TITLES[k].lower()}" for k in KIND_TITLES if counts[k])


def _md(text: str | None) -> str:
    if text is None:
        return "—"
    return text.replace("\\", "\\\\").replace("|", "\\|").replace("\n", " ").replace("<", "&lt;")


def to_markdown(changes: list[Change], heading: str) -> str:
    """The changes as Markdown (GitHub-flavoured tables), to paste into a review."""
    lines = [f"## {heading}", ""]
    if not changes:
        lines += ["No change in values, sources, assessments, verdicts or grades.", ""]
        return "\n".join(lines)
    lines += [f"Changed entries: {summary(changes)}.", ""]
    for sid, title, found in grouped(changes):
        lines += [f"### {sid}: {title}", "", "| Entry | Change | Before | After |", "|---|---|---|---|"]
        for c in found:
            lines.append(f"| `{_md(c.key)}` | {c.action} | {_md(c.before)} | {_md(c.after)} |")
        lines.append("")
    return "\n".join(lines)


def print_changes(console, changes: list[Change], heading: str) -> None:
    """The changes as rich tables, one per system and kind."""
    from rich.table import Table
    from rich.text import Text

    console.rule(Text(heading, style="bold"))
    if not changes:
        console.print("No change in values, sources, assessments, verdicts or grades.")
        return
    style = {"added": "green", "withdrawn": "red", "removed": "red", "changed": "yellow"}
    for sid, title, found in grouped(changes):
        table = Table(title=f"{sid}: {title}", title_justify="left", expand=True, show_lines=True)
        table.add_column("Entry", ratio=2, overflow="fold")
        table.add_column("Change", no_wrap=True)
        table.add_column("Before", ratio=3)
        table.add_column("After", ratio=3)
        for c in found:
            table.add_row(c.key, Text(c.action, style=style[c.action]), c.before or "—", c.after or "—")
        console.print(table)
