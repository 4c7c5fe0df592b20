"""Run the rules over a project and combine them into verdicts.

One rule's failure becomes an ``error`` assessment with the reason; it never
stops the weighing of the other rules or systems.
"""

from __future__ import annotations

from dataclasses import dataclass

from dossier.rules import verdict as verdict_mod
from dossier.rules.base import Assessment, Rule, Verdict
from dossier.rules.facts import SystemFacts
from dossier.rules.registry import RULES, rule_settings
from dossier.schema.loader import Project
from dossier.schema.models import System
from dossier.schema.settings import Settings


@dataclass(frozen=True)
class SystemResult:
    """Everything weighed for one system."""

    system: System
    facts: SystemFacts
    assessments: tuple[Assessment, ...]
    verdicts: dict[str, Verdict]

    def for_subject(self, subject: str) -> list[Assessment]:
        return [a for a in self.assessments if a.subject == subject]


def enabled_rules(settings: Settings) -> list[Rule]:
    return [r for r in RULES if rule_settings(settings.rules, r).enabled]


def _run(rule: Rule, facts: SystemFacts, subject: str, settings: Settings) -> Assessment:
    try:
        return rule.weigh(facts, subject, rule_settings(settings.rules, rule))
    except Exception as exc:  # noqa: BLE001 - a failing rule must not stop the others
        return rule.assessment(subject, "error", f"The rule failed: {type(exc).__name__}: {exc}.")


def weigh_system(system: System, settings: Settings, log: tuple = (), cache=None) -> SystemResult:
    from dossier.rules import distance

    length_scale = rule_settings(settings.rules, distance.RULE).length_scale_kpc  # type: ignore[attr-defined]
    facts = SystemFacts(system, settings, length_scale_kpc=length_scale, log=log, cache=cache)
    rules = enabled_rules(settings)
    assessments: list[Assessment] = []
    for rule in rules:
        subjects = list(system.components) if rule.subject == "component" else [p.id for p in system.pairs]
        if rule.applies is not None:
            subjects = [s for s in subjects if rule.applies(facts, s)]
        assessments += [_run(rule, facts, s, settings) for s in subjects]
    verdicts = {
        p.id: verdict_mod.combine(p.id, [a for a in assessments if a.subject == p.id and a.subject_kind == "pair"],
                                  settings.verdict, settings.pair_model.model_limit)
        for p in system.pairs
    }
    return SystemResult(system, facts, tuple(assessments), verdicts)


def weigh_project(project: Project, use_cache: bool = True) -> dict[str, SystemResult]:
    """Weigh every system; expensive fits are cached under the project (see :mod:`dossier.cache`)."""
    from dossier.cache import Cache

    cache = Cache(project.root if use_cache else None)
    return {sid: weigh_system(system, project.settings, project.logs.get(sid, ()), cache)
            for sid, system in project.systems.items()}
