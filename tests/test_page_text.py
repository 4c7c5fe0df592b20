"""The text a reader sees on a system page reads as text: no e-notation, no 'None' or 'nan', no '(s)'
plurals and a true minus sign (U+2212) before a negative number, never a hyphen.

Built once per module from ``demo_project/`` (the pattern of ``tests/test_site.py``). Only the current page
of each system is read: a release page shows the words of its release, frozen (``demo_project/releases/``).
"""

from __future__ import annotations

import html
import re
from pathlib import Path

import pytest
from click.testing import CliRunner

from dossier.cli import cli
from dossier.fmt import fmt_sig, fmt_signed, plural, superscript
from tests.conftest import DEMO

SYSTEMS = ("alder-4", "heron-1", "wren-9")

#: What must not appear in visible text. The minus check looks only at a hyphen after a space or '(' and
#: before a digit ('(-0.3', ' -12.5'): ranges use an en dash, and ids ('heron-1'), dates ('2019-01-10')
#: and names ('B1881') have no space or bracket before the hyphen.
FORBIDDEN = {
    "e-notation": re.compile(r"\d\.?\d*e[+-]\d"),
    "None": re.compile(r"\bNone\b"),
    "nan": re.compile(r"\bnan\b", re.IGNORECASE),
    "'(s)' plural": re.compile(r"\w\((?:s|es)\)"),
    "hyphen as minus": re.compile(r"(?:^|[\s(])-\d"),
}


@pytest.fixture(scope="module")
def site(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("site") / "public"
    result = CliRunner().invoke(cli, ["build", str(DEMO), "--out", str(out), "--no-pdf"])
    assert result.exit_code == 0, result.output
    return out


def visible_text(page: str) -> str:
    """The words of an HTML page a reader sees: no tags, and no <svg>, <code>, <script> or <style> content."""
    page = re.sub(r"<(svg|code|script|style)\b.*?</\1>", " ", page, flags=re.S | re.I)
    page = re.sub(r"<[^>]+>", " ", page)
    return html.unescape(page)


def explanations(page: str) -> list[str]:
    """The rules' explanations (the last cell of each row of an assessments table) and the verdicts' summaries."""
    texts = []
    for table in re.findall(r'<table class="assessments">.*?</table>', page, flags=re.S):
        texts += re.findall(r"<td>((?:(?!<td>).)*?)</td>\s*</tr>", table, flags=re.S)
    texts += re.findall(r'<p class="summary">(.*?)</p>', page, flags=re.S)
    return [visible_text(t) for t in texts]


def offences(text: str) -> list[str]:
    found = []
    for name, pattern in FORBIDDEN.items():
        for m in pattern.finditer(text):
            found.append(f"{name}: ...{text[max(0, m.start() - 50):m.end() + 30]}...".replace("\n", " "))
    return found


def test_helpers_write_what_people_read():
    assert fmt_sig(13800.0, 3) == "13800"
    assert fmt_sig(1.216e7, 4) == "12160000"
    assert fmt_sig(-0.0031, 2) == "\u22120.0031"
    assert fmt_sig(3.2e-8, 2) == "3.2 × 10⁻⁸"
    assert fmt_sig(float("nan")) == "—"
    assert fmt_signed(-0.456) == "\u22120.46" and fmt_signed(0.66) == "+0.66"
    assert superscript(3.8) == "³·⁸"
    assert plural(1, "detection") == "1 detection"
    assert plural(2, "search", "searches") == "2 searches"
    assert plural(0, "source") == "0 sources"


@pytest.mark.parametrize("system", SYSTEMS)
def test_explanations_read_as_text(site, system):
    page = (site / "systems" / system / "index.html").read_text()
    texts = explanations(page)
    assert len(texts) > 5  # the extraction found the explanations
    problems = [o for t in texts for o in offences(t)]
    assert not problems, "\n".join(problems)


@pytest.mark.parametrize("system", SYSTEMS)
def test_whole_page_reads_as_text(site, system):
    text = visible_text((site / "systems" / system / "index.html").read_text())
    problems = offences(text)
    assert not problems, f"{len(problems)} offences, e.g.\n" + "\n".join(problems[:20])


def test_measured_values_keep_their_digits_and_their_units():
    # the source's digits as written; a position in degrees keeps its uncertainty in mas, each with its unit
    import types

    from dossier.render.html import fmt_measured_row

    row = lambda v, u, unit: types.SimpleNamespace(value=v, uncertainty=u, unit=unit)  # noqa: E731
    assert fmt_measured_row(row(201.3171123, 0.06, "deg (uncertainty in mas)")) == "201.3171123° ± 0.06 mas"
    assert fmt_measured_row(row(-39.6, 0.7, "mas/yr")) == "\u221239.6 ± 0.7 mas/yr"
    assert fmt_measured_row(row(1e-05, 2e-06, "")) == "0.00001 ± 0.000002"
