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
from dataclasses import dataclass, field
from typing import Any, Literal

from dossier.fmt import fmt_fixed, fmt_log10, fmt_number, p_statement
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
    for field_key, text in quantity_labels(result).items():  # so that a release names its quantities in words
        if field_key in derived:
            derived[field_key]["label"] = text
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
    the entry was added or withdrawn); ``old`` and ``new`` are the entries of
    the two states themselves, for :func:`describe` (not compared, not in
    :meth:`to_dict`).
    """

    system: str
    kind: Kind
    key: str
    before: str | None
    after: str | None
    old: Any = field(default=None, compare=False, repr=False)
    new: Any = field(default=None, compare=False, repr=False)

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
        return [Change(sid, "system", sid, None if before is None else title, None if after is None else title,
                       before, after)]
    changes: list[Change] = []
    for kind, key, fmt, same in _SECTIONS:
        old, new = before.get(key, {}), after.get(key, {})
        for name, entry in new.items():
            if name not in old:
                changes.append(Change(sid, kind, name, None, fmt(entry), None, entry))  # type: ignore[arg-type]
            elif not same(old[name], entry):
                changes.append(Change(sid, kind, name, fmt(old[name]), fmt(entry),  # type: ignore[arg-type]
                                      old[name], entry))
        for name, entry in old.items():
            if name not in new:
                changes.append(Change(sid, kind, name, fmt(entry), None, entry, None))  # type: ignore[arg-type]
    return changes


def compare_projects(before: dict[str, dict[str, Any]], after: dict[str, dict[str, Any]]) -> list[Change]:
    """Changes between two sets of states keyed by system id (systems in sorted order)."""
    changes: list[Change] = []
    for sid in sorted(set(before) | set(after)):
        changes += compare(before.get(sid), after.get(sid))
    return changes


# ----------------------------------------------------------------------------
# Changes in words: quantities by their labels, values in their units


def quantity_labels(result) -> dict[str, str]:
    """The label of every derived quantity of a weighed system, by its state key
    (``assessments.parallax-agreement.AD.delta_parallax``: 'Parallax difference ϖ₁ − ϖ₂')."""
    labels: dict[str, str] = {}
    for a in result.assessments:
        found = list(a.quantities) + ([a.statistic] if a.statistic is not None else [])
        for q in found:
            labels.setdefault(f"assessments.{a.rule}.{a.subject}.{q.name}", q.label)
    return labels


#: Angles in degrees per unit, to give an angle's uncertainty the precision of its value in the value's unit.
_DEGREES = {"deg": 1.0, "°": 1.0, "arcmin": 1 / 60, "′": 1 / 60, "arcsec": 1 / 3600, "″": 1 / 3600,
            "mas": 1 / 3_600_000, "µas": 1 / 3_600_000_000}
#: Units written as a symbol right after the number.
_SYMBOLS = {"deg": "°", "°": "°", "arcmin": "′", "′": "′", "arcsec": "″", "″": "″"}
#: A schema unit that records value and uncertainty in different units: 'deg (uncertainty in mas)'.
_SPLIT_UNIT = re.compile(r"^(?P<value>.+?) \(uncertainty in (?P<uncertainty>.+)\)$")


def split_unit(unit: str | None) -> tuple[str, str]:
    """(unit of the value, unit of the uncertainty): ('deg', 'mas') for 'deg (uncertainty in mas)'."""
    unit = unit or ""
    m = _SPLIT_UNIT.match(unit)
    return (m["value"], m["uncertainty"]) if m else (unit, unit)


def _with_unit(number: str, unit: str) -> str:
    if not unit:
        return number
    return number + _SYMBOLS[unit] if unit in _SYMBOLS else f"{number} {unit}"


def _two_figures(uncertainty: float) -> int:
    """Decimals that give ``uncertainty`` two significant figures (common practice); negative for tens and up."""
    decimals = 1 - math.floor(math.log10(uncertainty))
    rounded = round(uncertainty, decimals)  # 0.0996 rounds to 0.10: two figures of the rounded number
    return 1 - math.floor(math.log10(rounded)) if rounded > 0 else decimals


def _fixed(value: float, decimals: int) -> str:
    """``value`` at ``decimals`` (negative: rounded to tens, hundreds …), with a true minus sign."""
    return fmt_fixed(value, decimals) if decimals >= 0 else fmt_fixed(round(value, decimals), 0)


def _recorded_decimals(value: float) -> int:
    """The decimals a recorded value was written with (its shortest repr): 201.3171123 → 7, 8.0 → 0."""
    text = repr(float(value))
    if "e" in text:
        mantissa, exponent = text.split("e")
        digits = len(mantissa.split(".")[1].rstrip("0")) if "." in mantissa else 0
        return max(0, digits - int(exponent))
    whole, _, frac = text.partition(".")
    return len(frac.rstrip("0"))


def fmt_measure(value: float | None, uncertainty: float | None = None, unit: str | None = "",
                recorded: bool = False) -> str:
    """A value with its uncertainty, each in its own unit, at the precision the uncertainty sets.

    The uncertainty is given two significant figures and the value is rounded to the same decimal
    place (common practice): 7.311 ± 0.109 mas reads '7.31 ± 0.11 mas'. An angle whose uncertainty is
    recorded in another unit (the schema's 'deg (uncertainty in mas)') is rounded at the uncertainty
    converted into the value's unit, and each part carries its own unit: '201.3171123° ± 0.060 mas'.
    A ``recorded`` value (a measured one, as written in the evidence) never gains digits it was not
    written with when its uncertainty is in another unit. Minus signs are true minus signs (U+2212);
    '—' for no value.
    """
    if value is None or not math.isfinite(value):
        return "—"
    value_unit, unc_unit = split_unit(unit)
    usable = uncertainty is not None and math.isfinite(uncertainty) and uncertainty > 0
    if not usable:
        text = _fmt_raw(value) if recorded else fmt_number(value, 4)
        text = "\u2212" + text[1:] if text.startswith("-") else text
        if uncertainty == 0:
            text += f" ± 0"
        return _with_unit(text, value_unit)
    unc_decimals = _two_figures(uncertainty)
    unc_text = _fixed(uncertainty, unc_decimals)
    if unc_unit == value_unit:
        if value_unit in _SYMBOLS:  # '2.47° ± 0.12°': a symbol binds to its own number
            return f"{_with_unit(_fixed(value, unc_decimals), value_unit)} ± {_with_unit(unc_text, unc_unit)}"
        return _with_unit(f"{_fixed(value, unc_decimals)} ± {unc_text}", value_unit)
    if value_unit in _DEGREES and unc_unit in _DEGREES:
        decimals = _two_figures(uncertainty * _DEGREES[unc_unit] / _DEGREES[value_unit])
        if recorded:
            decimals = min(decimals, _recorded_decimals(value))
        number = _fixed(value, decimals)
    else:  # units this module cannot convert: the value as recorded
        number = _fmt_raw(value).replace("-", "\u2212")
    return f"{_with_unit(number, value_unit)} ± {_with_unit(unc_text, unc_unit)}"


def _measure_text(entry: dict[str, Any] | None, recorded: bool) -> str | None:
    if entry is None:
        return None
    return fmt_measure(entry.get("value"), entry.get("uncertainty"), entry.get("unit"), recorded=recorded)


def _humanised(name: str) -> str:
    return name.replace("_", " ")


def _schema_label(key: str) -> str:
    """The schema's description of a measured value's field, shortened to a label ('Parallax')."""
    from typing import get_args

    from pydantic import BaseModel

    from dossier.schema.models import System

    def models_in(annotation: Any) -> list[Any]:
        if isinstance(annotation, type) and issubclass(annotation, BaseModel):
            return [annotation]
        return [m for arg in get_args(annotation) for m in models_in(arg)]

    names = re.findall(r"\.?([^.\[\]]+)|\[[^\]]*\]", key)
    names = [n for n in names if n]
    model: Any = System
    label, tail = None, []
    i = 0
    while i < len(names):
        name = names[i]
        info = model.model_fields.get(name) if model is not None else None
        if info is None:
            tail.append(name)
            i += 1
            continue
        label = info.description or _humanised(name)
        found = models_in(info.annotation)
        is_mapping = "dict" in str(info.annotation)
        i += 1
        if is_mapping and i < len(names):  # components.A, magnitudes.V: a key of a mapping
            if not found:
                tail.append(names[i])
            i += 1
        model = found[0] if found else None
        if found:
            tail = []
    if label is None:
        return _humanised(names[-1]) if names else key
    label = re.split(r" \[|: |, multiplied", label)[0].rstrip(".")
    label = re.sub(r" per [a-z ]+$", "", label)
    if label.endswith("(ICRS)"):
        label = label[: -len(" (ICRS)")]
    return " ".join([label, *tail]) if tail else label


def _rule_title(rule_id: str) -> str:
    from dossier.rules.registry import BY_ID

    rule = BY_ID.get(rule_id)
    return rule.title if rule is not None else rule_id


def _subject_of_key(key: str) -> tuple[str, str]:
    """('D', 'sky-survey-3') of 'components.D.astrometry[sky-survey-3].ra': the subject and the source in the key."""
    parts = key.split(".")
    subject = parts[1] if len(parts) > 1 and parts[0] in ("components", "pairs", "claims", "orbits") else ""
    source = re.search(r"\[([^\]]+)\]", key)
    return subject, source.group(1) if source and not source.group(1).isdigit() else ""


#: How a change of a kind named by its key alone is described.
_NAMED_BY_KEY = {"system": "System {key}", "verdict": "Verdict on {key}", "grade": "Grade of the claimed companion {key}",
                 "source": "Source {key}", "log": "Observing log of {key}"}


def describe(change: Change, labels: dict[str, str] | None = None) -> str:
    """A change in words, without its raw key: 'Parallax of D from sky-survey-3', 'Parallax agreement
    on AD: parallax difference ϖ₁ − ϖ₂', 'Verdict on AD'.

    ``labels``: labels of derived quantities by state key (:func:`quantity_labels`), for states that
    do not record them (releases made before they did).
    """
    entry = change.new if change.new is not None else change.old
    entry = entry if isinstance(entry, dict) else {}
    key = change.key
    if change.kind in _NAMED_BY_KEY:
        return _NAMED_BY_KEY[change.kind].format(key=key)
    if change.kind == "term":
        return f"Term of the verdict on {entry.get('pair', key)}: {entry.get('line', key)}"
    if change.kind == "assessment":
        rule, _, subject = key.partition(" · ")
        return f"{_rule_title(entry.get('rule', rule))} on {subject or entry.get('subject', '')}".strip()
    if change.kind == "value":
        subject, source = _subject_of_key(key)
        text = _schema_label(key)
        if subject and not re.search(rf"\b{re.escape(subject)}\b", text):
            text += f" of {subject}"
        return text + (f" from {source}" if source else "")
    if change.kind == "derived":
        parts = key.split(".")
        rule = entry.get("rule") or (parts[1] if len(parts) > 3 else "")
        label = entry.get("label") or (labels or {}).get(key) or _humanised(parts[-1])
        subject = entry.get("subject") or (parts[2] if len(parts) > 3 else "")
        return f"{_rule_title(rule)} on {subject}: {label[:1].lower() + label[1:] if label[1:2].islower() else label}"
    return key


def shown(change: Change, side: Literal["before", "after"]) -> str | None:
    """The before or after of a change as people read it: values and derived quantities with their
    units at the precision of their uncertainties (:func:`fmt_measure`), the rest as :attr:`Change.before`."""
    entry = change.old if side == "before" else change.new
    text = change.before if side == "before" else change.after
    if change.kind in ("value", "derived") and isinstance(entry, dict):
        shown_text = _measure_text(entry, recorded=change.kind == "value")
        _, source = _subject_of_key(change.key)
        if change.kind == "value" and entry.get("source") and entry["source"] != source:
            shown_text += f" ({entry['source']})"
        return shown_text
    return text


@dataclass(frozen=True)
class Described:
    """A change as a page shows it: in words, before and after in units, and its raw key for reference."""

    change: Change
    words: str
    before: str | None
    after: str | None

    @property
    def key(self) -> str:
        return self.change.key

    @property
    def action(self) -> str:
        return self.change.action


def described(changes: list[Change], labels: dict[str, str] | None = None) -> list[tuple[str, str, list[Described]]]:
    """:func:`grouped`, each change :func:`describe`-d with its :func:`shown` before and after."""
    return [(sid, title, [Described(c, describe(c, labels), shown(c, "before"), shown(c, "after")) for c in found])
            for sid, title, found in grouped(changes)]


# ----------------------------------------------------------------------------
# The verdicts, before and after


@dataclass(frozen=True)
class VerdictRow:
    """One pair's verdict before and after: its status and its named probability on each side."""

    pair: str
    status_before: str | None
    status_after: str | None
    p_before: str | None
    p_after: str | None

    @property
    def status_changed(self) -> bool:
        return self.status_before != self.status_after

    @property
    def changed(self) -> bool:
        return self.status_changed or self.p_before != self.p_after

    def line(self) -> str:
        """'AD: optical → optical; P(chance alignment) = 0.999999990 → 0.9999999984 (status changed)'."""
        def side(status: str | None, p: str | None) -> str:
            return "—" if status is None else f"{status} ({p})"
        text = f"{self.pair}: {side(self.status_before, self.p_before)} → {side(self.status_after, self.p_after)}"
        return text + (" — status changed" if self.status_changed else "")


def _p_text(entry: dict[str, Any] | None) -> str | None:
    if entry is None:
        return None
    label = verdict_label(entry)
    if entry.get("probability") is None:
        return f"{label}: not computed"
    return p_statement(label, entry["probability"], entry.get("model_limit"))


def verdict_rows(before: dict[str, Any] | None, after: dict[str, Any] | None) -> list[VerdictRow]:
    """Every pair's verdict in ``before`` and ``after`` (pairs in the order of ``after``, then withdrawn ones)."""
    old = (before or {}).get("verdicts", {})
    new = (after or {}).get("verdicts", {})
    rows = []
    for pid in [*new, *(p for p in old if p not in new)]:
        o, n = old.get(pid), new.get(pid)
        rows.append(VerdictRow(pid, o and o["status"], n and n["status"], _p_text(o), _p_text(n)))
    return rows


def verdict_rows_of(changes: list[Change]) -> list[VerdictRow]:
    """The verdict rows of the pairs whose verdict changes, from the changes alone (``dossier diff``)."""
    return [VerdictRow(f"{c.system} {c.key}" if len({x.system for x in changes}) > 1 else c.key,
                       c.old and c.old["status"], c.new and c.new["status"], _p_text(c.old), _p_text(c.new))
            for c in changes if c.kind == "verdict"]


def verdict_summary(rows: list[VerdictRow]) -> str:
    """'No verdict changed.', or which statuses changed: 'The verdict on AD changed: optical → bound.'"""
    changed = [r for r in rows if r.status_changed]
    if not changed:
        return "No verdict changed."
    return " ".join(f"The verdict on {r.pair} changed: {r.status_before or '—'} → {r.status_after or '—'}."
                    for r in changed)


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


#: One change of each kind, in words ("1 source", not "1 sources").
KIND_SINGULAR: dict[str, str] = {
    "system": "system", "verdict": "verdict", "term": "term of a verdict", "grade": "companion-claim grade",
    "source": "source", "value": "measured value", "log": "observing log", "assessment": "assessment",
    "derived": "derived value",
}


def summary(changes: list[Change]) -> str:
    """'2 verdicts; 1 source; …': how many changes of each kind, in the order of :data:`KIND_TITLES`."""
    counts = Counter(c.kind for c in changes)
    return "; ".join(f"{counts[k]} {KIND_SINGULAR[k] if counts[k] == 1 else KIND_TITLES[k].lower()}"
                     for k in KIND_TITLES if counts[k])


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
    rows = verdict_rows_of(changes)
    lines += [verdict_summary(rows), ""]
    if rows:
        lines += [f"- {_md(r.line())}" for r in rows] + [""]
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
    rows = verdict_rows_of(changes)
    console.print(Text(verdict_summary(rows), style="bold"))
    for r in rows:
        console.print(Text(f"  {r.line()}", style="yellow" if r.status_changed else ""))
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
