"""The what-changed page and ``dossier diff`` lead with the verdicts, and describe changes in words and units."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

from dossier.diff import compare, fmt_measure, split_unit, to_markdown, verdict_rows, verdict_summary
from dossier.site import build
from tests.conftest import DEMO


def _state(n: int) -> dict:
    return json.loads((DEMO / "releases/heron-1" / str(n) / "state.json").read_text())


# ----------------------------------------------------------------------------
# A value with its uncertainty


@pytest.mark.parametrize(("value", "uncertainty", "unit", "recorded", "expected"), [
    # common practice: the uncertainty to two significant figures, the value rounded to the same decimal place
    (201.3171123, 0.0000167, "deg", False, "201.317112° ± 0.000017°"),
    (7.311, 0.109, "mas", False, "7.31 ± 0.11 mas"),
    (724.6, 57.8, "pc", False, "725 ± 58 pc"),
    (12345.0, 1234.0, "yr", False, "12300 ± 1200 yr"),  # to the hundreds, as 1200 is
    (1.0, 0.0996, "mas", False, "1.00 ± 0.10 mas"),  # 0.0996 rounds to 0.10: two figures of the rounded number
    (-2.172, 0.0262, "mas/yr", False, "\u22122.172 ± 0.026 mas/yr"),  # a true minus sign
    # an angle in degrees with its uncertainty in mas: 0.06 mas = 1.7e-8 deg, finer than the 7 recorded decimals,
    # so the value keeps the digits it was written with, and each part carries its own unit
    (201.3171123, 0.06, "deg (uncertainty in mas)", True, "201.3171123° ± 0.060 mas"),
    # 60 mas = 0.0000167 deg: the value is rounded at that precision, the uncertainty stays in mas
    (201.3171123, 60.0, "deg (uncertainty in mas)", True, "201.317112° ± 60 mas"),
    (117.4, None, "pc", False, "117.4 pc"),
    (None, 0.1, "mas", False, "—"),
])
def test_value_with_uncertainty_at_the_precision_it_sets(value, uncertainty, unit, recorded, expected):
    assert fmt_measure(value, uncertainty, unit, recorded=recorded) == expected


def test_split_unit_names_each_part():
    assert split_unit("deg (uncertainty in mas)") == ("deg", "mas")
    assert split_unit("mas/yr") == ("mas/yr", "mas/yr")


# ----------------------------------------------------------------------------
# Verdicts before and after


def test_verdict_rows_of_the_demo_releases():
    rows = {r.pair: r for r in verdict_rows(_state(1), _state(2))}
    assert list(rows) == ["AB", "Aa-Ab", "Ba-Bb", "AC", "AD"]
    assert not any(r.status_changed for r in rows.values())
    # a state from before the pair model names no probability: it is named by its status
    assert rows["AD"].p_before == "P(chance alignment) = 0.999999990"
    assert rows["AD"].p_after == "P(chance alignment) = 0.9999999984" and rows["AD"].changed
    assert rows["AC"].p_after == "P(physical): not computed"
    assert verdict_summary(list(rows.values())) == "No verdict changed."


def test_a_changed_status_is_named():
    before = {"system": "s", "title": "t", "verdicts": {"AB": {"status": "undetermined", "probability": 0.6}}}
    after = {"system": "s", "title": "t", "verdicts": {"AB": {"status": "bound", "probability": 0.995,
                                                              "probability_of": "P(bound)"}}}
    [row] = verdict_rows(before, after)
    assert row.status_changed and row.line() == (
        "AB: undetermined (P(physical) = 0.60) → bound (P(bound) = 0.9950) — status changed")
    assert verdict_summary([row]) == "The verdict on AB changed: undetermined → bound."
    text = to_markdown(compare(before, after), "Heading")
    assert "The verdict on AB changed: undetermined → bound.\n\n- AB: undetermined (P(physical) = 0.60) → bound" in text
    assert "No verdict changed." in to_markdown(compare(_state(1), _state(2)), "Heading")


# ----------------------------------------------------------------------------
# The page


@pytest.fixture(scope="module")
def page(tmp_path_factory) -> str:
    out = tmp_path_factory.mktemp("site") / "public"
    build(DEMO, out, pdf=False)
    return (out / "systems/heron-1/releases/2/changes.html").read_text()


def test_what_changed_opens_with_the_verdicts(page):
    verdicts = page.index('id="verdicts"')
    assert verdicts < page.index('class="change-summary"')
    section = page[verdicts:page.index("</section>", verdicts)]
    assert "No verdict changed." in section
    for pair in ("AB", "Aa-Ab", "Ba-Bb", "AC", "AD"):
        assert f'<th scope="row">{pair}</th>' in section
    assert "optical → optical" in section
    assert "P(chance alignment) = 0.999999990 → P(chance alignment) = 0.9999999984" in section


def test_changes_in_words_with_raw_keys_only_in_details(page):
    assert "Right ascension of D from sky-survey-3" in page and "201.3171123° ± 0.060 mas" in page
    assert "uncertainty in mas" not in page
    assert "Parallax agreement on AD: parallax difference ϖ₁ − ϖ₂" in page  # the quantity's own label
    assert "7.14 ± 0.14 mas" in page and "7.31 ± 0.11 mas" in page
    outside = re.sub(r"<details.*?</details>", "", page, flags=re.S)
    keys = [c.key for c in compare(_state(1), _state(2)) if c.kind in ("value", "derived", "assessment", "term")]
    assert keys and all(f"<code>{k}</code>" in page for k in keys)
    for key in keys:
        assert key not in outside, key
