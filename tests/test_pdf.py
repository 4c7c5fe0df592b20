"""The PDF of each system's dossier (WeasyPrint): content, page count, byte-identical rebuilds."""

from __future__ import annotations

import re
import shutil
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
    build(DEMO, first, pdf=True, use_cache=False)  # both rendered, not one taken from the cache
    build(DEMO, second, pdf=True, use_cache=False)
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
    # the verdicts as computed: named probabilities, the limit of the model, the terms as used
    assert "Terms of the verdict" in text and "moved it most" in text
    assert re.search(r"P\(chance\s+alignment\)\s+>\s+0\.999999\s+\(limit\s+of\s+the\s+model\)|"
                     r"P\(physical\)\s+>\s+0\.999999\s+\(limit\s+of\s+the\s+model\)", text)
    assert "e-99" not in text


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


def test_two_full_builds_are_identical_file_for_file(sites):
    """Pages, figures, PDFs, exports, releases and manifest: every byte, in two different folders."""
    def files(site: Path) -> dict[str, bytes]:
        return {p.relative_to(site).as_posix(): p.read_bytes() for p in sorted(site.rglob("*")) if p.is_file()}

    one, two = files(sites[0]), files(sites[1])
    assert one.keys() == two.keys()
    assert [name for name in one if one[name] != two[name]] == []


def test_running_header_names_the_version(sites):
    text = _text(sites[0] / "systems/heron-1/dossier.pdf")
    assert "heron-1 (release 2)" in text
    assert "wren-9 (unreleased draft)" in _text(sites[0] / "systems/wren-9/dossier.pdf")


def test_an_unchanged_dossier_takes_its_pdf_from_the_cache(demo_copy, tmp_path, sites):
    shutil.rmtree(demo_copy / ".dossier-cache", ignore_errors=True)  # what the working copy's builds left there
    build(demo_copy, tmp_path / "first", pdf=True)
    cached = sorted((demo_copy / ".dossier-cache").glob("pdf-*.bin"))
    assert len(cached) == len(SYSTEMS)
    for path in cached:  # a cache entry is used as it is: mark each, and see the marks come back
        path.write_bytes(path.read_bytes() + b"%cached\n")
    build(demo_copy, tmp_path / "second", pdf=True)
    for system in SYSTEMS:
        data = (tmp_path / "second" / "systems" / system / "dossier.pdf").read_bytes()
        assert data.endswith(b"%cached\n")
        assert data[: -len(b"%cached\n")] == (sites[0] / "systems" / system / "dossier.pdf").read_bytes()
