"""The settings a system's verdicts depend on, as a table people read.

One section per table of ``dossier.toml`` that the verdicts use (``[verdict]``,
``[pair_model]``, ``[log]`` and each ``[rules.<id>]``, titled by its rule).
Each row gives a readable label (the first clause of the field's description,
else the key in words), the value and the published default formatted with
their unit (booleans as "yes"/"no", numbers without Python's exponent or
trailing zeros), whether the value differs from the default, and the raw key,
so that a reader can find it in ``dossier.toml``.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import Any

from pydantic import BaseModel
from pydantic.fields import FieldInfo

from dossier.fmt import fmt_number

#: Units read from the end of a key, longest first (``_masyr`` before ``_yr``). Angles take no space before
#: their symbol (SI brochure, 9th ed., 5.4.3); the others do.
KEY_UNITS: tuple[tuple[str, str], ...] = (
    ("_per_deg2", "per deg²"),
    ("_masyr", "mas/yr"),
    ("_arcsec", "″"),
    ("_days", "d"),
    ("_kms", "km/s"),
    ("_kpc", "kpc"),
    ("_myr", "Myr"),
    ("_mas", "mas"),
    ("_deg", "°"),
    ("_dex", "dex"),
    ("_au", "au"),
    ("_yr", "yr"),
    ("_um", "µm"),
    ("_mb", "MB"),
)

#: Units a description states in parentheses, "(km/s)" or "(mag) of", mapped to their symbols.
DESCRIPTION_UNITS = {"km/s": "km/s", "au": "au", "days": "d", "d": "d", "years": "yr", "yr": "yr", "kpc": "kpc",
                     "Myr": "Myr", "mas": "mas", "mas/yr": "mas/yr", "dex": "dex", "mag": "mag", "µm": "µm"}

_NO_SPACE = ("°", "″", "′")
_DESCRIPTION_UNIT = re.compile(r"\((" + "|".join(re.escape(u) for u in sorted(DESCRIPTION_UNITS, key=len,
                                                                               reverse=True)) + r")[;,)]")
# the end of a description's first clause: a sentence end (not "et al. criterion"), a colon or a semicolon
_CLAUSE_END = re.compile(r"\.\s+(?=[A-Z0-9])|\.$|[:;]\s")
# an aside in parentheses, "(km/s)" or "(Bensby et al. 2003, Table 1)", but not notation: P(bound), (a/min)^4
_UNIT_ASIDE = re.compile(r"\s*\((?:" + "|".join(re.escape(u) for u in DESCRIPTION_UNITS) + r")\)")
_ASIDE = re.compile(r"\s+\([^()]*\)(?=[\s.,;:]|$)")
_SUPERSCRIPT = str.maketrans("0123456789-+", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻⁺")
MINUS = "\u2212"


@dataclass(frozen=True)
class SettingRow:
    """One setting: ``key`` as in dossier.toml, ``label`` for people, ``note`` the full description (or '')."""

    key: str
    label: str
    note: str
    value: str
    default: str
    changed: bool


@dataclass(frozen=True)
class SettingSection:
    """The settings of one table of dossier.toml (``table``: its name there, e.g. ``rules.distance``)."""

    title: str
    table: str
    rows: tuple[SettingRow, ...]

    @property
    def changed(self) -> int:
        """How many of the section's settings differ from their defaults."""
        return sum(row.changed for row in self.rows)


def settings_sections(settings) -> list[SettingSection]:
    """The sections of the settings table of a system page, from the effective :class:`Settings`.

    Verdict, pair model and log first, then one section per rule in the registry's order, with the
    rule's settings as validated (defaults where ``dossier.toml`` is silent).
    """
    from dossier.rules.registry import RULES, rule_settings

    sections = [
        section("Verdict", "verdict", settings.verdict),
        section("Pair model", "pair_model", settings.pair_model),
        section("Observing log", "log", settings.log),
    ]
    for rule in RULES:
        sections.append(section(rule.title, f"rules.{rule.id}", rule_settings(settings.rules, rule)))
    return sections


def section(title: str, table: str, values: BaseModel) -> SettingSection:
    """One section: every field of the model ``values``, in the model's order."""
    rows = []
    for key, field in type(values).model_fields.items():
        value = getattr(values, key)
        default = field.get_default(call_default_factory=True)
        unit = unit_of(key, field.description)
        rows.append(SettingRow(
            key=key, label=label_of(key, field), note=_note(key, field),
            value=fmt_setting(value, unit), default=fmt_setting(default, unit),
            changed=_plain(value) != _plain(default)))
    return SettingSection(title, table, tuple(rows))


def label_of(key: str, field: FieldInfo | None = None) -> str:
    """A setting's name for people: the first clause of its description, else its key in words.

    >>> label_of("decisive")
    'Decisive'
    """
    description = (field.description or "").strip() if field is not None else ""
    if description and not description.startswith(("'", '"')):  # "'thermal' (...), 'uniform', or ..." lists values
        # units and citations are asides: the unit column and the note keep them
        clause = _CLAUSE_END.split(_ASIDE.sub("", description), maxsplit=1)[0].strip().rstrip(".")
        if len(clause.split()) >= 2:
            return clause
    words = key.replace("_", " ")
    return words[:1].upper() + words[1:]


def _note(key: str, field: FieldInfo) -> str:
    """The full description when it says more than the label and the unit."""
    description = (field.description or "").strip()
    return description if _UNIT_ASIDE.sub("", description).rstrip(".") != label_of(key, field) else ""


def unit_of(key: str, description: str | None = None) -> str:
    """The unit a setting's key or description states ('' for none).

    The key decides ("``rv_floor_kms``" is in km/s); a key of a logarithm (``inner_log10_period_days``) has
    no unit of its own. Else a unit the description gives in parentheses, "(mag)" or "(km/s; ...)".

    >>> unit_of("field_dispersion_kms"), unit_of("colour_model_sigma", "Uncertainty (mag) of the conversion.")
    ('km/s', 'mag')
    """
    lowered = key.lower()
    if "log10" in lowered or "log_" in lowered:
        return ""
    for suffix, unit in KEY_UNITS:
        if lowered.endswith(suffix):
            return unit
    found = _DESCRIPTION_UNIT.search(description or "")
    return DESCRIPTION_UNITS[found.group(1)] if found else ""


def fmt_setting(value: Any, unit: str = "") -> str:
    """A setting's value as people read it, with its unit.

    Booleans "yes"/"no"; numbers to six significant figures without trailing zeros, a power of ten
    beyond everyday magnitudes and a true minus sign; integers exactly (a seed is an identifier);
    lists joined with commas; a table (a model or a mapping) as its fields; "none" for no value.

    >>> fmt_setting(True), fmt_setting(1e-6), fmt_setting((11.1, 12.24), "km/s"), fmt_setting(4.0, "″")
    ('yes', '1 × 10⁻⁶', '11.1, 12.24 km/s', '4″')
    """
    if value is None:
        return "none"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, (int, float)):
        return _with_unit(_number(value), unit)
    if isinstance(value, BaseModel):
        return _model_text(value)
    if isinstance(value, dict):
        if not value:
            return "none"
        return "; ".join(f"{k}: {fmt_setting(v, unit_of(str(k)) or unit)}" for k, v in value.items())
    if isinstance(value, (list, tuple)):
        if not value:
            return "none"
        if all(isinstance(v, BaseModel) for v in value):
            return "; ".join(_model_text(v) for v in value)
        if all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in value):
            return _with_unit(", ".join(_number(v) for v in value), unit)
        return ", ".join(fmt_setting(v, unit) for v in value)
    return str(value)


def _model_text(model: BaseModel) -> str:
    """A nested table ("thin disc: fraction 0.94, sigma u 35 km/s, ...") with each field's unit."""
    data = {k: getattr(model, k) for k in type(model).model_fields}
    name = data.pop("name", None)
    parts = [f"{k.replace('_', ' ').removesuffix(' kms').removesuffix(' deg').removesuffix(' arcsec')} "
             f"{fmt_setting(v, unit_of(k, type(model).model_fields[k].description))}" for k, v in data.items()]
    return (f"{name}: " if name is not None else "") + ", ".join(parts)


def _number(value: int | float) -> str:
    """An integer exactly; a float to six significant figures, trailing zeros dropped; a true minus sign."""
    if isinstance(value, int):
        text = str(value)
    elif not math.isfinite(value):
        text = fmt_number(value)
    else:
        text = fmt_number(value, digits=6)
        mantissa, _, exponent = text.partition("e")
        if "." in mantissa:
            mantissa = mantissa.rstrip("0").rstrip(".")
        text = f"{mantissa} × 10{str(int(exponent)).translate(_SUPERSCRIPT)}" if exponent else mantissa
    return MINUS + text[1:] if text.startswith("-") else text


def _with_unit(text: str, unit: str) -> str:
    if not unit:
        return text
    return f"{text}{unit}" if unit in _NO_SPACE else f"{text} {unit}"


def _plain(value: Any) -> Any:
    """A value with models as dicts and tuples as lists, so that a default and a read value compare."""
    if isinstance(value, BaseModel):
        value = value.model_dump()
    if isinstance(value, dict):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    return value
