"""The settings table of a system page: labels, values with units and defaults, changes flagged."""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import pytest

from dossier.render.settings_table import fmt_setting, label_of, settings_sections, unit_of
from dossier.rules.registry import RULES, rule_settings
from dossier.schema.loader import load_settings
from dossier.site import build
from tests.conftest import DEMO, edit

#: The change the tests make to the demo's dossier.toml: a rule setting in km/s (default 25).
CHANGED = ("rules.common-motion", "field_dispersion_kms")


def _changed_copy(target: Path) -> Path:
    shutil.copytree(DEMO, target)
    edit(target / "dossier.toml", "[rules.distance]\n",
         "[rules.common-motion]\nfield_dispersion_kms = 30.0\n\n[rules.distance]\n")
    return target


def _expected_keys(settings) -> list[tuple[str, str]]:
    """(table, key) of every setting the verdicts depend on, from the models themselves."""
    keys = [(table, key) for table, values in (("verdict", settings.verdict), ("pair_model", settings.pair_model),
                                               ("log", settings.log))
            for key in type(values).model_fields]
    for rule in RULES:
        keys += [(f"rules.{rule.id}", key) for key in type(rule_settings(settings.rules, rule)).model_fields]
    return keys


@pytest.fixture(scope="module")
def changed_settings(tmp_path_factory):
    settings, problems = load_settings(_changed_copy(tmp_path_factory.mktemp("settings") / "project"))
    assert not problems
    return settings


@pytest.fixture(scope="module")
def settings_html(tmp_path_factory) -> str:
    """The settings section of heron-1's page, built from the demo with one setting changed."""
    root = tmp_path_factory.mktemp("settings-site")
    project = _changed_copy(root / "project")
    build(project, root / "out", pdf=False)
    page = (root / "out/systems/heron-1/index.html").read_text(encoding="utf-8")
    start = page.index('<section id="assumptions">')
    return page[start:page.index("</section>", start)]


def test_every_setting_appears_exactly_once(changed_settings):
    rows = [(s.table, r.key) for s in settings_sections(changed_settings) for r in s.rows]
    assert sorted(rows) == sorted(_expected_keys(changed_settings))
    assert len(rows) == len(set(rows))


def test_a_changed_setting_is_flagged_with_its_unit_and_default(changed_settings):
    sections = {s.table: s for s in settings_sections(changed_settings)}
    row = next(r for r in sections[CHANGED[0]].rows if r.key == CHANGED[1])
    assert (row.changed, row.value, row.default) == (True, "30 km/s", "25 km/s")
    assert row.label == "Per-axis velocity dispersion of field stars"
    assert sections[CHANGED[0]].changed == 1
    # the demo's own [verdict] and [rules.distance] repeat the defaults: not changes
    assert [(s.table, r.key) for s in sections.values() for r in s.rows if r.changed] == [CHANGED]


@pytest.mark.parametrize("key, description, unit", [
    ("rv_floor_kms", None, "km/s"), ("bound_break_au", None, "au"), ("group_window_days", None, "d"),
    ("astrometric_baseline_yr", None, "yr"), ("theta_deg", None, "°"), ("close_separation_arcsec", None, "″"),
    ("pm_floor_masyr", None, "mas/yr"), ("inner_log10_period_days", None, ""), ("decisive", None, ""),
    ("colour_model_sigma", "Uncertainty (mag) of the blackbody conversion.", "mag"),
])
def test_units_come_from_the_key_or_the_description(key, description, unit):
    assert unit_of(key, description) == unit


@pytest.mark.parametrize("value, unit, text", [
    (True, "", "yes"), (False, "", "no"), (None, "", "none"), (0.99, "", "0.99"), (13800.0, "Myr", "13800 Myr"),
    (1.0e-6, "", "1 × 10⁻⁶"), (-0.6, "", "−0.6"), (4.0, "″", "4″"), (20261202, "", "20261202"),
    ((11.1, 12.24, 7.25), "km/s", "11.1, 12.24, 7.25 km/s"), ({}, "", "none"), ("thermal", "", "thermal"),
])
def test_values_read_as_people_write_them(value, unit, text):
    assert fmt_setting(value, unit) == text


def test_labels_are_the_first_clause_of_the_description_else_the_key_in_words():
    from dossier.schema.settings import PairModelSettings, VerdictSettings

    fields = PairModelSettings.model_fields
    assert label_of("bound_min_au", fields["bound_min_au"]) == "Below this semimajor axis the rate tapers as (a/min)^4"
    assert label_of("field_components", fields["field_components"]) == "Velocity ellipsoids of the field"
    assert label_of("physical_threshold", VerdictSettings.model_fields["physical_threshold"]) == "Physical threshold"


def test_page_lists_each_setting_once_in_folded_sections(settings_html, changed_settings):
    sections = re.findall(r'<details class="settings-section[^"]*"[^>]*>\s*<summary>.*?<code>\[([^\]]+)\]</code>(.*?)</details>',
                          settings_html, flags=re.S)
    shown = [(table, key) for table, body in sections
             for key in re.findall(r"<tr[^>]*><th scope=\"row\">.*?</th><td><code>([^<]+)</code></td>", body)]
    assert sorted(shown) == sorted(_expected_keys(changed_settings))


def test_page_flags_the_change_in_words_and_counts_it(settings_html):
    assert 'has-changes" open>' in settings_html  # a section holding a change opens by itself
    row = re.search(r'<tr class="setting-changed">(.*?)</tr>', settings_html, flags=re.S)
    assert row is not None and "<code>field_dispersion_kms</code></td><td>30 km/s" in row.group(1)
    assert '<span class="changed-mark">changed</span>' in row.group(1)
    assert '<td class="setting-default">25 km/s</td>' in row.group(1)
    assert settings_html.count('class="setting-changed"') == 1
    assert "<code>[rules.common-motion]</code>" in settings_html and "<strong>1 changed</strong>" in settings_html


def test_page_shows_no_python_literals(settings_html):
    assert not re.search(r"\b(True|False|None)\b", settings_html)
    assert "<code>enabled</code></td><td>yes" in settings_html
    assert "e-0" not in settings_html and "e+0" not in settings_html
