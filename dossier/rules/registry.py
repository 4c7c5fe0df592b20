"""The one place where rules are registered, in the order they run and are shown."""

from __future__ import annotations

import difflib
from typing import Any

from pydantic import ValidationError

from dossier.rules import (
    chance_alignment,
    closest_approach,
    coevality,
    common_motion,
    companion_claims,
    distance,
    luminosity,
    neighbours,
    orbit_consistency,
    orbit_fit,
    pair_model,
    parallax_agreement,
    proper_motion_orbit,
    radial_velocity,
    relative_motion,
    separation_period,
    space_velocity,
    spectroscopic_orbit,
    triple_stability,
)
from dossier.rules.base import Rule, RuleSettings

RULES: tuple[Rule, ...] = (
    distance.RULE,
    pair_model.RULE,
    parallax_agreement.RULE,
    common_motion.RULE,
    chance_alignment.RULE,
    proper_motion_orbit.RULE,
    radial_velocity.RULE,
    relative_motion.RULE,
    orbit_consistency.RULE,
    orbit_fit.RULE,
    spectroscopic_orbit.RULE,
    companion_claims.RULE,
    separation_period.RULE,
    triple_stability.RULE,
    luminosity.RULE,
    coevality.RULE,
    space_velocity.RULE,
    neighbours.RULE,
    closest_approach.RULE,
)

BY_ID: dict[str, Rule] = {rule.id: rule for rule in RULES}


def rule_settings(tables: dict[str, dict[str, Any]], rule: Rule) -> RuleSettings:
    """The validated settings of one rule (defaults where dossier.toml is silent)."""
    return rule.settings.model_validate(tables.get(rule.id, {}))


def validate_rule_settings(tables: dict[str, dict[str, Any]]) -> list[tuple[str, tuple[Any, ...], str, str]]:
    """Problems in the ``[rules.*]`` tables as (rule id, field path, what, fix)."""
    from dossier.schema.loader import _message

    problems = []
    for rule_id, table in tables.items():
        rule = BY_ID.get(rule_id)
        if rule is None:
            close = difflib.get_close_matches(rule_id, list(BY_ID), n=1, cutoff=0.5)
            fix = f"did you mean '{close[0]}'?" if close else f"use one of: {', '.join(BY_ID)}."
            problems.append((rule_id, (), f"there is no rule '{rule_id}'.", fix))
            continue
        try:
            rule.settings.model_validate(table)
        except ValidationError as exc:
            for err in exc.errors(include_url=False):
                what, fix = _message(err, rule.settings, tuple(err["loc"]))
                problems.append((rule_id, tuple(err["loc"]), what, fix))
    return problems
