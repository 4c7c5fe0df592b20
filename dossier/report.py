"""What ``dossier weigh`` prints: stable JSON, or rich tables for people.

The JSON format is documented in ``docs/weigh-json.md``; its
``format_version`` is bumped whenever a key changes meaning or goes away.
"""

from __future__ import annotations

import json
import math
from typing import Any

from dossier import __version__
from dossier.engine import SystemResult
from dossier.fmt import MODEL_LIMIT, fmt_log10, fmt_number
from dossier.rules.registry import RULES

FORMAT_VERSION = 1


def _clean(value: Any) -> Any:
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    return value


def system_dict(result: SystemResult) -> dict[str, Any]:
    """One system of the JSON: its verdicts, and every assessment with how its pair's verdict used it
    (``in_verdict``, see ``docs/weigh-json.md``)."""
    from dossier.render.terms import uses

    system = result.system
    used = uses(result)
    return {
        "id": system.id,
        "title": system.title,
        "components": list(system.components),
        "pairs": [{"id": p.id, "members": list(p.members), "parent": p.parent} for p in system.pairs],
        "verdicts": [result.verdicts[p.id].to_dict() for p in system.pairs],
        "assessments": [{**a.to_dict(), "in_verdict": used[(a.rule, a.subject_kind, a.subject)].in_verdict}
                        for a in result.assessments],
    }


def to_json(title: str, results: dict[str, SystemResult]) -> str:
    return systems_json(title, [system_dict(r) for r in results.values()])


def systems_json(title: str, systems: list[dict[str, Any]]) -> str:
    """The JSON of ``dossier weigh --json`` from :func:`system_dict` of each system (cached ones included)."""
    doc = {
        "format": "dossier-weigh",
        "format_version": FORMAT_VERSION,
        "dossier_version": __version__,
        "project": title,
        "systems": systems,
    }
    return json.dumps(_clean(doc), indent=2, ensure_ascii=False) + "\n"


def system_json_item(system: dict[str, Any]) -> str:
    """One system's entry of :func:`systems_json`'s list as text, for :func:`join_systems_json`."""
    text = json.dumps(_clean(system), indent=2, ensure_ascii=False)
    return "\n".join("    " + line for line in text.split("\n"))  # JSON text has no line break inside a string


def join_systems_json(title: str, items: list[str]) -> str:
    """:func:`systems_json` from :func:`system_json_item` of each system: the same bytes, without
    serialising again the systems whose entry is cached."""
    empty = systems_json(title, [])
    if not items:
        return empty
    tail = '"systems": []\n}\n'
    return empty[: -len(tail)] + '"systems": [\n' + ",\n".join(items) + "\n  ]\n}\n"


STATUS_STYLE = {"bound": "bold green", "co-moving": "bold cyan", "optical": "bold red", "undetermined": "bold yellow"}
SHORT_OUTCOME = {"supports": "supports", "against": "against", "neutral": "neutral", "insufficient": "no data",
                 "error": "ERROR"}
OUTCOME_STYLE = {"supports": "green", "against": "red", "neutral": "white", "insufficient": "dim", "error": "bold magenta"}


def _statistic(a) -> str:
    if a.statistic is None or a.statistic.value is None:
        return ""
    s = a.statistic
    return f"{s.label} = {s.value:.3g}{(' ' + s.unit) if s.unit else ''}"


def _used_text(use) -> str:
    """The log10 column of the terminal table: the value the verdict used, never a diagnostic's own."""
    if use.role == "diagnostic":
        return "in the pair model"
    if use.role == "term" and use.differs:
        return f"{fmt_log10(use.log10)} (alone {fmt_log10(use.alone)})"
    if use.role == "standalone":
        return f"{fmt_log10(use.log10)} (not used)"
    return "" if use.log10 is None else fmt_log10(use.log10)


def print_results(console, results: dict[str, SystemResult], model_limit: float | None = None) -> None:
    """Rich tables: per system, the verdict of each pair, the terms of its odds and the assessments behind it.

    ``model_limit``: the project's ``[pair_model] model_limit`` (probabilities beyond it read as the limit
    of the model); the default limit when not given.
    """
    from rich.table import Table
    from rich.text import Text

    from dossier.render.terms import ODDS, labelled, uses

    for result in results.values():
        system = result.system
        console.rule(Text(f"{system.id} — {system.title}", style="bold"))
        distances = [a for a in result.assessments if a.rule == "distance"]
        if distances:
            table = Table(title="Components", title_justify="left", show_lines=False, expand=True)
            for col in ("Component", "Parallax (mas)", "Distance (pc, 16–84 %)", "Note"):
                table.add_column(col)
            for a in distances:
                plx, dist = a.quantity("parallax"), a.quantity("distance")
                if plx is None or dist is None:
                    table.add_row(a.subject, "—", "—", Text(a.explanation, style="dim"))
                    continue
                note = a.explanation.split(". ", 1)[1] if ". " in a.explanation else ""
                table.add_row(a.subject, f"{plx.value:.3f} ± {plx.uncertainty:.3f}",
                              f"{fmt_number(dist.value)} ({fmt_number(dist.low)}–{fmt_number(dist.high)})", note)
            console.print(table)
        grades = [a for a in result.assessments if a.grade is not None]
        if grades:
            table = Table(title="Companion claims", title_justify="left", expand=True, show_lines=True)
            table.add_column("Companion", no_wrap=True)
            table.add_column("Grade", no_wrap=True)
            table.add_column("Reasons", ratio=1)
            for a in grades:
                style = {"confirmed": "green", "probable": "green", "candidate": "yellow"}.get(a.grade, "red")
                table.add_row(a.subject, Text(a.grade, style=style), "\n".join(a.reasons))
            console.print(table)
        limit = model_limit if model_limit is not None else MODEL_LIMIT
        used = uses(result)
        for pair in system.pairs:
            v = result.verdicts[pair.id]
            head = Text()
            head.append(f"Pair {pair.id} ({' + '.join(pair.members)}): ")
            head.append(v.status.upper(), style=STATUS_STYLE[v.status])
            head.append(f"  {labelled(v.probability, v.probability_of, limit)}")
            if v.status == "undetermined" and v.p_bound_given_physical is not None:  # why: physical, binding open?
                head.append(f", {labelled(v.p_bound_given_physical, 'P(bound | physical)', limit)}")
            console.print(head)
            if v.probability is not None:
                console.print(Text(", ".join(labelled(p, label, limit) for p, label in (
                    (v.p_bound, "P(bound)"), (v.p_comoving, "P(co-moving)"), (v.p_chance, "P(chance alignment)"),
                    (v.p_physical, "P(physical)"), (v.p_bound_given_physical, "P(bound | physical)"))), style="dim"))
            console.print(Text(v.summary, style="italic"))
            if v.contributions:
                terms = Table(title="Terms of the verdict (log10 odds, as used)", title_justify="left", expand=False)
                terms.add_column("Line of evidence")
                terms.add_column("Odds it moves")
                terms.add_column("log10 used", justify="right", no_wrap=True)
                alone = [fmt_log10(c.alone) if c.alone is not None and fmt_log10(c.alone) != fmt_log10(c.log10)
                         else "" for c in v.contributions]
                if any(alone):
                    terms.add_column("alone", justify="right", no_wrap=True)
                for c, own in zip(v.contributions, alone):
                    line = Text(c.line)
                    if c.line == v.moved_most:
                        line.append("  (moved it most)", style="bold")
                    terms.add_row(line, ODDS.get(c.question, c.question), fmt_log10(c.log10), *([own] if any(alone) else []))
                console.print(terms)
            table = Table(expand=True, show_lines=True)
            table.add_column("Rule", min_width=max(len(r.id) for r in RULES), no_wrap=True)
            table.add_column("Outcome", max_width=9)
            table.add_column("log10 in the verdict", justify="right", max_width=17)
            table.add_column("Explanation", ratio=1, min_width=30)
            for a in result.for_subject(pair.id):
                table.add_row(
                    a.rule,
                    Text(SHORT_OUTCOME[a.outcome], style=OUTCOME_STYLE[a.outcome]),
                    _used_text(used[(a.rule, a.subject_kind, a.subject)]),
                    a.explanation,
                )
            console.print(table)
        console.print()
    console.print(Text("Verdicts are statistical statements about the evidence at hand, under the assumptions and "
                       "priors listed in each dossier.", style="dim"))
