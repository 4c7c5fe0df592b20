"""The PDF of each system's dossier (WeasyPrint): content, page count, byte-identical rebuilds."""

from __future__ import annotations

import re
import subprocess
from pathlib import Path

import pytest

from dossier.site import build
from tests.conftest import DEMO
from tests.test_cli_end_to_end import EXPECTED

pytestmark = pytest.mark.slow
SYSTEMS = sorted({system for system, _ in EXPECTED})


@pytest.fixture(scope="module")
def sites(tmp_path_factory) -> tuple[Path, Path]:
    """The demo built twice, into two different folders."""
    first, second = tmp_path_factory.mktemp("one") / "public", tmp_path_factory.mktemp("two") / "site"
    build(DEMO, first, pdf=True)
    build(DEMO, second, pdf=True)
    return first, second


def _text(pdf: Path) -> str:
    return subprocess.run(["pdftotext", "-layout", str(pdf), "-"], check=True, capture_output=True, text=True).stdout


@pytest.mark.parametrize("system", SYSTEMS)
def test_pdf_holds_the_system_its_verdicts_and_provenance(sites, system):
    pdf = sites[0] / "systems" / system / "dossier.pdf"
    text = _text(pdf)
    assert system in text
    for (sid, pair), status in EXPECTED.items():
        if sid == system:
            assert re.search(rf"Pair {re.escape(pair)}\b.*?\b{re.escape(status)}\b", text, re.S), (pair, status)
    assert "Provenance" in text
    assert re.search(r"page 1 of \d+", text)


@pytest.mark.parametrize("system", SYSTEMS)
def test_pdf_has_several_pages(sites, system):
    info = subprocess.run(["pdfinfo", str(sites[0] / "systems" / system / "dossier.pdf")], check=True,
                          capture_output=True, text=True).stdout
    assert int(re.search(r"^Pages:\s+(\d+)", info, re.M).group(1)) >= 2


def test_two_builds_give_byte_identical_pdfs_that_carry_no_build_path(sites):
    for system in SYSTEMS:
        one, two = (site / "systems" / system / "dossier.pdf" for site in sites)
        assert one.read_bytes() == two.read_bytes(), system
        assert b"file:" not in one.read_bytes()


def test_system_page_links_its_pdf_and_the_manifest_lists_it(sites):
    site = sites[0]
    assert '<a href="dossier.pdf">' in (site / "systems/heron-1/index.html").read_text()
    assert "systems/heron-1/dossier.pdf" in (site / "manifest.json").read_text()
