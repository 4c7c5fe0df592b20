"""The built site in headless Chromium (Debian's, through playwright): search, filters, sorting,
every link and asset, console errors, keyboard use, WCAG 2.1 AA checks with axe-core, and
screenshots at desktop and phone widths, saved under test-artifacts/ (marked slow; runs in CI)."""

from __future__ import annotations

import os
import shutil
from collections import deque
from pathlib import Path
from urllib.parse import unquote, urlsplit

import pytest

from dossier.site import build
from tests.conftest import DEMO, REPO

CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run", "--disable-background-networking",
        "--disable-component-update", "--disable-sync"]
ARTIFACTS = Path(os.environ.get("DOSSIER_ARTIFACTS", REPO / "test-artifacts")) / "screenshots"

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


@pytest.fixture(scope="module")
def site(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("browser") / "site"
    build(DEMO, out, pdf=True)  # PDFs too: the crawl follows every download link
    return out


@pytest.fixture
def page(browser):
    """A fresh page that records console errors, page errors and failed requests."""
    context = browser.new_context(viewport={"width": 1280, "height": 900})
    p = context.new_page()
    p.problems = []
    p.on("console", lambda m: p.problems.append(f"console {m.type}: {m.text}") if m.type in ("error", "warning")
         else None)
    p.on("pageerror", lambda e: p.problems.append(f"page error: {e}"))
    p.on("requestfailed", lambda r: p.problems.append(f"request failed: {r.url}"))
    yield p
    context.close()


def visible_ids(page) -> list[str]:
    return page.locator("#systems tbody tr:visible td:first-child").all_inner_texts()


def test_search_and_filters_narrow_the_table_as_typed(page, site):
    page.goto((site / "index.html").as_uri())
    assert page.locator("#filters").is_visible()
    assert page.locator("#filter-count").inner_text() == "3 of 3 systems"
    page.locator("#filter-text").press_sequentially("wr")  # as typed, key by key
    assert visible_ids(page) == ["wren-9"]
    page.fill("#filter-text", "giant")  # a word of two titles
    assert visible_ids(page) == ["alder-4", "heron-1"]
    page.fill("#filter-text", "photocentre")  # a word of heron-1's notes only
    assert visible_ids(page) == ["heron-1"]
    page.fill("#filter-text", "ba-bb")  # a pair id
    assert visible_ids(page) == ["heron-1"]
    page.fill("#filter-text", "giant nosuchword")
    assert visible_ids(page) == [] and page.locator("#filter-count").inner_text() == "0 of 3 systems"
    page.fill("#filter-text", "")
    page.select_option("#filter-status", "optical")
    assert visible_ids(page) == ["alder-4", "heron-1"]
    page.select_option("#filter-status", "")
    page.check("#filter-open")
    assert visible_ids(page) == ["heron-1"]  # C's claim is neither confirmed nor refuted
    assert page.problems == []


def test_sorting_by_column(page, site):
    page.goto((site / "index.html").as_uri())
    heading = page.locator("#systems thead th", has_text="Components")
    heading.locator("button").click()
    assert heading.get_attribute("aria-sort") == "ascending"
    assert visible_ids(page) == ["alder-4", "wren-9", "heron-1"]  # 2, 2 (in their former order), 8
    heading.locator("button").click()
    assert heading.get_attribute("aria-sort") == "descending"
    assert visible_ids(page)[0] == "heron-1"
    observed = page.locator("#systems thead th", has_text="Last observed")
    observed.locator("button").click()
    assert visible_ids(page) == ["heron-1", "alder-4", "wren-9"]  # 2023, 2025, never observed last
    observed.locator("button").click()
    assert visible_ids(page) == ["alder-4", "heron-1", "wren-9"]  # still last when descending
    assert page.locator("#systems thead th[aria-sort]").count() == 1
    assert page.problems == []


def _local_links(page) -> list[str]:
    return page.eval_on_selector_all(
        "a[href], link[href], script[src], img[src]",
        "els => els.map(e => e.href || e.src).filter(u => u.startsWith('file:'))")


def test_every_page_link_and_asset_resolves_without_console_errors(page, site):
    start = (site / "index.html").as_uri()
    queue, seen, pages = deque([start]), {start}, 0
    while queue:
        url = queue.popleft()
        path = Path(unquote(urlsplit(url).path))
        assert path.is_file(), f"broken link: {url}"
        assert site.resolve() in path.resolve().parents, f"link leaves the site: {url}"
        if path.suffix != ".html":
            continue
        page.goto(url)
        pages += 1
        for link in _local_links(page):
            link = link.split("#")[0]
            if link not in seen:
                seen.add(link)
                queue.append(link)
    built = {p for p in site.rglob("*.html")}
    assert pages == len(built)  # every page is reachable from the index
    assert page.problems == []


def test_keyboard_reaches_the_skip_link_search_and_sorting(page, site):
    page.goto((site / "index.html").as_uri())
    page.keyboard.press("Tab")
    assert page.evaluate("document.activeElement.className") == "skip-link"
    assert page.locator(".skip-link").is_visible()  # shown when focused
    reached = []
    for _ in range(12):
        page.keyboard.press("Tab")
        reached.append(page.evaluate("document.activeElement.id || document.activeElement.textContent"))
        if reached[-1] == "System":
            break
    assert "filter-text" in reached and "filter-status" in reached and reached[-1] == "System"
    page.keyboard.press("Enter")  # sorts by system id, descending (it starts ascending)
    assert visible_ids(page) == ["wren-9", "heron-1", "alder-4"]


WCAG_AA = {"runOnly": {"type": "tag", "values": ["wcag2a", "wcag2aa", "wcag21a", "wcag21aa"]},
           "resultTypes": ["violations"]}


@pytest.mark.parametrize("rel", ["index.html", "methods.html", "systems/heron-1/index.html",
                                 "systems/wren-9/index.html", "systems/heron-1/releases/2/index.html",
                                 "systems/heron-1/releases/2/changes.html"])
def test_pages_pass_axe_wcag_21_aa_checks(page, site, rel):
    from axe_playwright_python.sync_playwright import Axe

    page.goto((site / rel).as_uri())
    results = Axe().run(page, options=WCAG_AA)
    violations = [(v["id"], v["help"], [n["target"] for n in v["nodes"]][:3]) for v in results.response["violations"]]
    assert violations == []


@pytest.mark.parametrize("width,height,name", [(1280, 900, "desktop"), (390, 844, "phone"), (640, 450, "zoom-200")])
def test_layout_fits_the_screen_and_screenshots_are_saved(browser, site, width, height, name):
    """A phone, and a 1280 px window at 200 % zoom (640 CSS px): no sideways scrolling of the page."""
    context = browser.new_context(viewport={"width": width, "height": height})
    page = context.new_page()
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    for path in sorted(site.rglob("*.html")):
        page.goto(path.as_uri())
        overflow = page.evaluate("document.documentElement.scrollWidth - document.documentElement.clientWidth")
        assert overflow <= 1, f"{path.relative_to(site)} scrolls sideways by {overflow} px at {width} px"
    for rel, shot in (("index.html", "index"), ("systems/heron-1/index.html", "heron-1")):
        page.goto((site / rel).as_uri())
        page.screenshot(path=str(ARTIFACTS / f"{shot}-{name}.png"), full_page=(rel == "index.html"))
        assert (ARTIFACTS / f"{shot}-{name}.png").stat().st_size > 10_000
    context.close()


def test_system_page_renders_its_figures(page, site):
    page.goto((site / "systems/heron-1/index.html").as_uri())
    assert page.locator("#figures figure svg").count() == 2
    # relative path and θ, ρ for AB and Ba-Bb, and the ephemeris of Ba-Bb (the pair with an orbit)
    assert page.locator("#log figure svg").count() == 5
    box = page.locator("#figure-sky-chart svg").bounding_box()
    assert box is not None and box["width"] > 300 and box["height"] > 200
    assert page.locator(".verdict").count() == 5
    assert page.locator("#claims figure svg").count() == 3
