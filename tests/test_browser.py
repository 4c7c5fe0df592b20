"""The built site in headless Chromium: the catalogue filter works offline (marked slow; runs in CI)."""

from __future__ import annotations

import shutil

import pytest

from dossier.site import build
from tests.conftest import DEMO

CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run", "--disable-background-networking",
        "--disable-component-update", "--disable-sync"]

pytestmark = pytest.mark.slow


@pytest.fixture(scope="module")
def browser():
    playwright = pytest.importorskip("playwright.sync_api")
    if not shutil.which("chromium"):
        pytest.fail("Debian's chromium is needed for the browser tests: apt-get install chromium (see .ci/run)")
    with playwright.sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=ARGS, headless=True)
        yield b
        b.close()


def test_catalogue_filter_by_text_and_status(browser, tmp_path):
    index = build(DEMO, tmp_path / "site", pdf=False)
    page = browser.new_page()
    failed = []
    page.on("requestfailed", lambda r: failed.append(r.url))
    page.goto(index.as_uri())
    rows = page.locator("#systems tbody tr")
    assert rows.count() == 3
    assert page.locator("#filters").is_visible()
    assert page.locator("#filter-count").inner_text() == "3 of 3 systems"
    page.fill("#filter-text", "wren")
    assert page.locator("#systems tbody tr:visible").count() == 1
    assert page.locator("#filter-count").inner_text() == "1 of 3 systems"
    page.fill("#filter-text", "")
    page.select_option("#filter-status", "optical")
    visible = page.locator("#systems tbody tr:visible td:first-child").all_inner_texts()
    assert visible == ["alder-4", "heron-1"]
    page.select_option("#filter-status", "co-moving")
    assert page.locator("#systems tbody tr:visible td:first-child").all_inner_texts() == ["wren-9"]
    assert failed == []  # offline: no request leaves the site


def test_system_page_renders_its_figures(browser, tmp_path):
    index = build(DEMO, tmp_path / "site", pdf=False)
    page = browser.new_page(viewport={"width": 1200, "height": 900})
    page.goto((index.parent / "systems/heron-1/index.html").as_uri())
    assert page.locator("#figures figure svg").count() == 2
    assert page.locator("#log figure svg").count() == 4  # relative path and θ, ρ for AB and Ba-Bb
    box = page.locator("#figure-sky-chart svg").bounding_box()
    assert box is not None and box["width"] > 300 and box["height"] > 200
    assert page.locator(".verdict").count() == 5
    assert page.locator("#claims figure svg").count() == 3
