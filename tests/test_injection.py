"""Hostile text in the evidence never becomes markup, script or a live link in the built site.

Every free-text field of the evidence files, the references, the observing
logs and the project settings is filled with payloads (script tags, attribute
break-outs, ``javascript:``/``vbscript:``/``data:`` links in Markdown and in
URL fields, ``</title>``, ``</script>``, U+2028/U+2029); the free-text fields
are found from the pydantic models themselves, so a field added later is
covered without changing this file. The site is built and every page, script
and figure is parsed: no element, attribute or link may come from the
payloads, the search index must stay one JavaScript string literal, and the
PDF renderer gets the very same escaped HTML. The browser test at the end
(marked ``slow``, like ``tests/test_browser.py``) opens every page of this site
in Debian's Chromium and fails on any dialog or console error.

Known XSS vectors: the OWASP XSS Filter Evasion Cheat Sheet (common practice).
"""

from __future__ import annotations

import csv
import io
import json
import re
import shutil
import subprocess
import types
import typing
from html.parser import HTMLParser
from pathlib import Path

import pytest
from pydantic import BaseModel

from tests.conftest import DEMO

#: What is planted in every free-text field, after the field's own value and a marker naming the field.
PAYLOAD = (
    "<script>alert(1)</script> \"><img src=x onerror=alert(2)> '><svg onload=alert(3)> "
    "[x](javascript:alert(4)) [y](  JaVaScRiPt:alert(5)) <javascript:alert(6)> [z](vbscript:msgbox(7)) "
    "[d](data:text/html;base64,PHNjcmlwdD5hbGVydCg4KTwvc2NyaXB0Pg==) ![i](javascript:alert(9)) "
    "</title><script>alert(10)</script> </textarea></style></script><script>alert(11)</script> "
    "<!-- \u2028\u2029 --> {{ 7*7 }} ${7*7} &lt;b&gt;"
)
#: Values for URL-like fields: links the page must never make live.
BAD_URLS = (
    "javascript:alert(20)",
    "  JavaScript:alert(21)",
    "java\tscript:alert(22)",
    "vbscript:msgbox(23)",
    "data:text/html;base64,PHNjcmlwdD5hbGVydCgyNCk8L3NjcmlwdD4=",
    "\"><script>alert(25)</script>",
    "https://example.org/\"><script>alert(26)</script>",
)
#: DOIs must match ``10.NNNN/<no white space>``: the payload that fits.
BAD_DOI = "10.99999/\"><script>alert(30)</script><img/src=x/onerror=alert(31)>"
#: Free-text columns of the observing log (LogMeasure's plain ``str`` fields).
SCRIPT_SRC = {"search-index.js", "assets/catalogue.js"}


def marker(field: str) -> str:
    return f"INJ-{field}"


def planted(original: str | None, field: str) -> str:
    return f"{original or ''} {marker(field)} {PAYLOAD}".strip()


# --- which fields are free text -------------------------------------------------------


def _unwrap(annotation: typing.Any) -> list[typing.Any]:
    """The non-None members of an Optional/Union annotation."""
    if typing.get_origin(annotation) in (typing.Union, types.UnionType):
        return [a for a in typing.get_args(annotation) if a is not type(None)]
    return [annotation]


def _validated_fields(model: type[BaseModel]) -> set[str]:
    names: set[str] = set()
    for deco in model.__pydantic_decorators__.field_validators.values():
        names |= set(deco.info.fields)
    return names


def is_free_text(model: type[BaseModel], name: str) -> bool:
    """A plain ``str`` field: no pattern, no validator, no Literal (so not an id, an epoch or an enum)."""
    info = model.model_fields[name]
    return (_unwrap(info.annotation) == [str] and not info.metadata and name not in _validated_fields(model))


def free_text_fields(model: type[BaseModel]) -> list[str]:
    return [name for name in model.model_fields if is_free_text(model, name)]


def _models_in(annotation: typing.Any) -> list[type[BaseModel]]:
    """The models an annotation holds directly or in a list, tuple or dict value."""
    found = []
    for a in _unwrap(annotation):
        origin = typing.get_origin(a)
        if isinstance(a, type) and issubclass(a, BaseModel):
            found.append(a)
        elif origin in (list, tuple):
            found += [m for arg in typing.get_args(a) for m in _models_in(arg)]
        elif origin is dict:
            found += _models_in(typing.get_args(a)[1])
    return found


def inject(node: typing.Any, model: type[BaseModel], planted_fields: set[str], *, fill_absent: bool = True) -> None:
    """Plant the payload in every free-text field of ``node`` (a YAML mapping of ``model``), recursively.

    Absent free-text fields are added too, so that every field the model has
    is exercised, not only those the demo happens to use. Ids, epochs, enums
    and numbers are left alone, so the file stays valid.
    """
    if not isinstance(node, dict):
        return
    for name in free_text_fields(model):
        if name in node or fill_absent:
            node[name] = planted(node.get(name), f"{model.__name__}.{name}")
            planted_fields.add(f"{model.__name__}.{name}")
    for name, info in model.model_fields.items():
        if name not in node:
            continue
        for sub in _models_in(info.annotation):
            value = node[name]
            origin = [typing.get_origin(a) for a in _unwrap(info.annotation)]
            if dict in origin:
                items = value.values() if isinstance(value, dict) else []
            elif list in origin or tuple in origin:
                items = value if isinstance(value, list) else []
            else:
                items = [value]
            for item in items:
                inject(item, sub, planted_fields, fill_absent=fill_absent)


# --- the injected project -------------------------------------------------------------


def _yaml():
    from ruamel.yaml import YAML

    yaml = YAML(typ="safe", pure=True)
    yaml.default_flow_style = False
    yaml.allow_unicode = False  # U+2028 written as an escape: the file stays one line per value
    return yaml


def injected_project(target: Path) -> tuple[Path, set[str]]:
    """A copy of the demo with payloads in every free-text field; returns it and the fields planted."""
    from dossier.schema.log import LogMeasure
    from dossier.schema.models import Reference, System
    from dossier.schema.settings import ProjectInfo

    shutil.copytree(DEMO, target, ignore=shutil.ignore_patterns(".dossier-cache"))
    yaml = _yaml()
    planted_fields: set[str] = set()

    for path in sorted((target / "systems").glob("*/evidence.yaml")):
        tree = yaml.load(path.read_text(encoding="utf-8"))
        inject(tree, System, planted_fields)
        buffer = io.StringIO()
        yaml.dump(tree, buffer)
        path.write_text(buffer.getvalue(), encoding="utf-8")

    refs_path = target / "references.yaml"
    refs = yaml.load(refs_path.read_text(encoding="utf-8"))
    for i, (ref_id, ref) in enumerate(sorted(refs.items())):
        inject(ref, Reference, planted_fields)
        # URL-like fields: a DOI that fits its pattern but tries to break out, and bad URLs where there is no DOI
        # (the page links the DOI when there is one, the URL otherwise).
        if ref.get("doi"):
            ref["doi"] = BAD_DOI
            planted_fields.add("Reference.doi")
        ref["url"] = BAD_URLS[i % len(BAD_URLS)]
    buffer = io.StringIO()
    yaml.dump(refs, buffer)
    refs_path.write_text(buffer.getvalue(), encoding="utf-8")

    free_log = free_text_fields(LogMeasure)
    for path in sorted((target / "systems").glob("*/log.csv")):
        rows = list(csv.DictReader(path.read_text(encoding="utf-8").splitlines()))
        header = list(rows[0])
        for row in rows:
            for name in free_log:
                row[name] = planted(row.get(name), f"LogMeasure.{name}").replace("\u2028", " ").replace("\u2029", " ")
                planted_fields.add(f"LogMeasure.{name}")
        out = io.StringIO()
        writer = csv.DictWriter(out, fieldnames=header, lineterminator="\n")
        writer.writeheader()
        writer.writerows(rows)
        path.write_text(out.getvalue(), encoding="utf-8")

    # dossier.toml: the project's title, description and authors (TOML basic strings accept JSON's escapes).
    settings = target / "dossier.toml"
    text = settings.read_text(encoding="utf-8")
    for name in free_text_fields(ProjectInfo):
        if name == "base_url":
            continue  # not shown on the pages; provenance ids only
        text, n = re.subn(rf'(?m)^{name} = "(.*)"$',
                          lambda m, name=name: f"{name} = {json.dumps(planted(m.group(1), f'ProjectInfo.{name}'))}",
                          text)
        assert n == 1, name
        planted_fields.add(f"ProjectInfo.{name}")
    text, n = re.subn(r'(?m)^authors = \[(.*)\]$',
                      lambda m: f"authors = [{m.group(1)}, {json.dumps(planted('', 'ProjectInfo.authors'))}]", text)
    assert n == 1
    planted_fields.add("ProjectInfo.authors")
    settings.write_text(text, encoding="utf-8")
    return target, planted_fields


@pytest.fixture(scope="module")
def injected(tmp_path_factory) -> tuple[Path, set[str]]:
    return injected_project(tmp_path_factory.mktemp("injection") / "project")


@pytest.fixture(scope="module")
def injected_site(injected, tmp_path_factory) -> Path:
    from dossier.site import build

    project, _ = injected
    out = tmp_path_factory.mktemp("injection-site") / "site"
    build(project, out, pdf=False)
    return out


# --- checks ----------------------------------------------------------------------------


_BAD_SCHEME = re.compile(r"^(javascript|vbscript|data):", re.IGNORECASE)
_URL_ATTRIBUTES = {"href", "src", "xlink:href", "action", "formaction", "srcset", "poster", "background"}


_RASTER = re.compile(r"^data:image/(png|jpeg|gif|webp);", re.IGNORECASE)


def bad_url(value: str) -> bool:
    """A URL a browser would run or render as a document: scheme after stripping what browsers strip.

    A raster image inlined as ``data:image/png`` (matplotlib writes colour bars so) runs nothing.
    """
    cleaned = re.sub(r"[\x00-\x20]", "", value)
    return bool(_BAD_SCHEME.match(cleaned)) and not _RASTER.match(cleaned)


class _Elements(HTMLParser):
    """Every element with its attributes, and the text inside <script> and <style>."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.elements: list[tuple[str, list[tuple[str, str | None]]]] = []
        self.raw: dict[str, list[str]] = {"script": [], "style": []}
        self._open: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.elements.append((tag, attrs))
        if tag in self.raw:
            self._open.append(tag)
            self.raw[tag].append("")

    def handle_startendtag(self, tag, attrs):
        self.elements.append((tag, attrs))

    def handle_endtag(self, tag):
        if self._open and self._open[-1] == tag:
            self._open.pop()

    def handle_data(self, data):
        if self._open:
            self.raw[self._open[-1]][-1] += data


def markup_problems(rel: str, text: str) -> list[str]:
    """Elements, attributes and links in a page that only a payload could have made."""
    problems = []
    for needle in ("<script>alert", "onerror=alert(", "onload=alert(", 'href="javascript:', "<img src=x",
                   "<svg onload", "</title><script"):
        # In escaped text these read '&lt;script&gt;alert', 'onerror=alert(2)&gt;': the tags never open.
        for m in re.finditer(re.escape(needle), text, re.IGNORECASE):
            before = text[max(0, m.start() - 40):m.start()]
            if needle.startswith("on") and not re.search(r"<(img|svg)\s[^<>]*$", before, re.IGNORECASE):
                continue  # the words of an escaped payload, outside any tag
            problems.append(f"{rel}: {needle!r} at {m.start()}: …{text[max(0, m.start() - 60):m.end() + 20]!r}")
    parser = _Elements()
    parser.feed(text)
    parser.close()
    for tag, attrs in parser.elements:
        for name, value in attrs:
            if name.startswith("on"):
                problems.append(f"{rel}: <{tag} {name}=…> event handler")
            if name in _URL_ATTRIBUTES and value and bad_url(value):
                problems.append(f"{rel}: <{tag} {name}={value!r}>")
            if name == "style" and value and re.search(r"url\s*\(\s*['\"]?\s*(javascript|data)", value, re.IGNORECASE):
                problems.append(f"{rel}: <{tag} style={value!r}>")
        if tag == "script":
            src = dict(attrs).get("src")
            if src is None or not any(src.endswith(s) for s in SCRIPT_SRC):
                problems.append(f"{rel}: <script> not of our own: {attrs}")
        if tag in ("img", "iframe", "object", "embed", "form", "input", "textarea", "base", "meta", "link"):
            if tag == "meta" and {"charset", "name", "content"} >= set(dict(attrs)):
                continue
            found = dict(attrs)
            if tag == "link" and found.get("rel") == "stylesheet" and (found.get("href") or "").endswith(".css"):
                continue
            if tag == "input" and dict(attrs).get("id", "").startswith("filter-"):
                continue
            if tag == "form" and dict(attrs).get("id") == "filters":
                continue
            problems.append(f"{rel}: unexpected <{tag} {attrs}>")
    for body in parser.raw["script"]:
        if body.strip():
            problems.append(f"{rel}: inline script {body[:80]!r}")
    return problems


def built_files(site: Path, *suffixes: str) -> list[Path]:
    return sorted(p for p in site.rglob("*") if p.is_file() and p.suffix in suffixes)


def test_the_injection_reaches_every_free_text_field_of_the_models(injected):
    """The walker finds the models' free-text fields (and no id, epoch or enum), and the project still loads."""
    from dossier.schema.loader import load_project
    from dossier.schema.models import Component, PairMeasure, Reference, Review, System

    assert free_text_fields(System) == ["title", "notes"]
    assert free_text_fields(Component) == ["spectral_type", "note"]
    assert "id" not in free_text_fields(System) and "epoch" not in free_text_fields(PairMeasure)
    assert set(free_text_fields(Review)) == {"by", "comment"}  # 'decision' is an enum, 'on' a date
    assert {"citation", "url", "note"} <= set(free_text_fields(Reference))
    project, fields = injected
    assert {"System.title", "System.notes", "Component.note", "Component.spectral_type", "Pair.note",
            "Review.comment", "Review.by", "RadialVelocityEpoch.instrument", "Claim.band", "NonDetection.band",
            "Reference.citation", "Reference.doi", "Reference.url", "LogMeasure.observer", "LogMeasure.notes",
            "ProjectInfo.title", "ProjectInfo.description", "ProjectInfo.authors"} <= fields
    loaded = load_project(project)  # still valid against the schema
    assert PAYLOAD in loaded.systems["heron-1"].title


def test_no_payload_becomes_markup_script_or_live_link(injected_site):
    problems = []
    files = built_files(injected_site, ".html", ".svg", ".js")
    assert len(files) > 10
    for path in files:
        text = path.read_text(encoding="utf-8")
        rel = path.relative_to(injected_site).as_posix()
        if path.suffix == ".js":
            for needle in ("<script", "alert(", "javascript:"):
                if needle in text.lower():
                    problems.append(f"{rel}: {needle!r}")
            continue
        problems += markup_problems(rel, text)
    assert problems == []


def test_the_payloads_arrive_as_visible_text(injected_site, injected):
    """The fields are shown, escaped (so the check above is not passing on empty pages)."""
    _, fields = injected
    pages = {p: p.read_text(encoding="utf-8") for p in built_files(injected_site, ".html")}
    everything = "\n".join(pages.values())
    system = pages[injected_site / "systems/heron-1/index.html"]
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in system
    assert "&lt;/title&gt;&lt;script&gt;alert(10)&lt;/script&gt;" in system
    assert "&amp;lt;b&amp;gt;" in system  # text that looks escaped is escaped once more, never unescaped
    assert "{{ 7*7 }}" in system  # evidence text is data, never a template
    # Markdown links with script URLs stay text (markdown-it-py's validateLink).
    notes = system[system.index('<section id="notes">'):]
    notes = notes[:notes.index("</section>")]
    assert "[x](javascript:alert(4))" in notes and "<a " not in notes
    # Every free-text field the pages show reaches them (fields kept for the record only are listed here).
    not_shown = {"Reference.note", "Reference.url", "PairMeasure.method", "FieldDensity.band", "LogMeasure.band"}
    missing = sorted(f for f in fields - not_shown - {"Reference.doi"} if marker(f) not in everything)
    assert missing == []
    assert 'href="https://doi.org/10.99999/&#34;&gt;&lt;script&gt;alert(30)&lt;/script&gt;' in system


def test_bad_urls_of_references_are_shown_as_text_not_links(injected_site):
    page = (injected_site / "systems/heron-1/index.html").read_text(encoding="utf-8")
    sources = page[page.index('<section id="sources">'):]
    sources = sources[:sources.index("</section>")]
    assert "javascript:alert(2" in sources or "vbscript:" in sources or "data:text/html" in sources
    parser = _Elements()
    parser.feed(sources)
    hrefs = [dict(attrs).get("href") for tag, attrs in parser.elements if tag == "a"]
    assert hrefs and all(h.startswith("https://") for h in hrefs), hrefs


def test_only_web_addresses_become_links():
    from dossier.render.html import is_web_url

    assert is_web_url("https://example.org/a?b=c#d") and is_web_url("HTTP://example.org")
    for url in (*BAD_URLS[:5], "//example.org/x", "/etc/passwd", "file:///etc/passwd", "mailto:a@example.org",
                "https://example.org/a b", "https://example.org/\n", "ftp://example.org", "", None, 3):
        assert not is_web_url(url), url


def test_search_index_is_one_javascript_value_that_cannot_end_its_script(injected_site):
    text = (injected_site / "search-index.js").read_text(encoding="utf-8")
    assert text.isascii()  # U+2028/U+2029 and everything else beyond ASCII as \u escapes
    assert "</" not in text and "<!--" not in text and "<script" not in text.lower()
    body = text[text.index("window.DOSSIER_SEARCH = ") + len("window.DOSSIER_SEARCH = "):].rstrip()
    assert body.endswith(";")
    doc = json.loads(body[:-1])
    assert set(doc) == {"systems", "words"}
    assert doc["systems"] == ["alder-4", "heron-1", "wren-9"]
    node = shutil.which("node")
    if node:  # evaluate it as a browser would, and find the planted words
        script = text + "\nconsole.log(JSON.stringify(Object.keys(window.DOSSIER_SEARCH.words).length));\n"
        done = subprocess.run([node, "-e", "var window = {};\n" + script], capture_output=True, text=True,
                              timeout=30, check=False)
        assert done.returncode == 0, done.stderr
        assert int(done.stdout) == len(doc["words"])
    assert "alert" in doc["words"] and "inj-system.title" in doc["words"]  # the planted titles are indexed


def test_search_index_escapes_script_ends_and_line_separators():
    """Directly: a title carrying '</script>' and U+2028 cannot end the script or the string literal."""
    from types import SimpleNamespace

    from dossier.render.catalogue import search_index_js

    system = SimpleNamespace(id="kite-1", title="a</script><script>alert(1)</script>\u2028\u2029<!--",
                             notes="</SCRIPT>", components={}, pairs=[], claims=[])
    text = search_index_js([{"id": "kite-1", "result": SimpleNamespace(system=system)}])
    assert text.isascii() and "</" not in text and "<!--" not in text


def test_figures_escape_their_text_alternatives():
    """The alt text of a figure built from evidence strings is escaped in the SVG (aria-label and <title>)."""
    from dossier.figures import common

    with common.house_style():
        fig = common.new_figure()
        ax = fig.add_subplot()
        ax.set_title("</text><script>alert(1)</script>")
        ax.plot([0, 1], [0, 1], label="\"><img src=x onerror=alert(2)>")
        ax.legend()
    svg = common.to_svg(fig, alt="\"><script>alert(3)</script></title>\u2028", description="</desc><script>")
    assert markup_problems("figure.svg", svg) == []
    assert "&lt;script&gt;alert(3)&lt;/script&gt;" in svg and 'aria-label="&quot;&gt;&lt;script&gt;' in svg
    import xml.etree.ElementTree as ET

    ET.fromstring(svg)  # still well-formed XML: the escaping did not break the document


def test_markdown_renders_no_raw_html_and_no_script_links():
    from dossier.render.markdown import render_markdown

    html = render_markdown(PAYLOAD + "\n\n<div onclick=alert(1)>block</div>\n\n[ok](https://example.org/a)")
    assert markup_problems("note", html) == []
    assert "<a href=\"https://example.org/a\">ok</a>" in html
    assert "&lt;div onclick=alert(1)&gt;" in html


def test_the_pdf_is_made_from_the_same_escaped_html(injected, injected_site, tmp_path, monkeypatch):
    """WeasyPrint gets each page exactly as the site writes it, and shows the payloads as text."""
    from dossier import site

    given: dict[str, str] = {}

    def capture(html_pages, cache=None):  # in place of the PDF stage: keep what it is given
        given.update(html_pages)
        return {rel.replace("index.html", "dossier.pdf"): b"%PDF-1.7\n" for rel in html_pages}

    monkeypatch.setattr(site, "render_pdfs", capture)
    out = tmp_path / "site"
    site.build(injected[0], out, pdf=True)  # figures and fits from the cache the site's build filled
    assert sorted(given) == [f"systems/{sid}/index.html" for sid in ("alder-4", "heron-1", "wren-9")]
    for rel, html in given.items():
        assert html == (out / rel).read_text(encoding="utf-8"), rel
        assert markup_problems(f"{rel} for the PDF", html) == []
    from weasyprint import HTML

    # As render_pdf lays a page out (once here: with the payloads in every field wren-9 runs to some 20 pages).
    html = given["systems/wren-9/index.html"]
    document = HTML(string=html, base_url=str(site.templates_dir() / "systems/wren-9/index.html")).render()
    links = [target for page in document.pages for _, target, *_ in page.links]
    assert links and not [t for t in links if bad_url(t)], links
    pdf = document.write_pdf()
    if shutil.which("pdftotext"):
        text = subprocess.run(["pdftotext", "-", "-"], input=pdf, capture_output=True, check=True).stdout.decode()
        assert "<script>alert(1)</script>" in text.replace("\n", " ")  # shown as text, as on the page


def test_dollar_signs_in_evidence_text_stay_text_in_figures():
    from dossier.figures.detection_map import Detection, SearchLimit, detection_map
    from dossier.figures.rv_chart import RVPoint, rv_chart

    points = [RVPoint(55000.0 + 40 * i, float(i % 3), 0.2, r"echelle $\foo{$ 2", "ref-1") for i in range(6)]
    svg = rv_chart(points, None, title="kite-1 A: radial velocities", alt="x")
    assert r"$\foo{$" in svg.replace("&#36;", "$")
    svg = detection_map([Detection("C", "speckle-interferometry", "J2001.0", 0.2, 2.5, r"$x^2$", "ref-1")],
                        [SearchLimit("adaptive-optics", "J2010.0", 0.1, 2.0, 6.0, r"$x^2$", "ref-2")],
                        title="kite-1: detections and searches", alt="x")
    assert "$x^2$" in svg


@pytest.mark.slow
def test_no_page_of_the_injected_site_runs_a_payload_in_the_browser(injected_site):
    """Every page in headless Chromium: no dialog (alert, confirm, prompt), no console error, no page error."""
    playwright = pytest.importorskip("playwright.sync_api")
    from tests.test_browser import ARGS, CHROMIUM

    if not shutil.which("chromium"):
        pytest.fail("Debian's chromium is needed for the browser tests: apt-get install chromium (see .ci/run)")
    pages = built_files(injected_site, ".html")
    problems: list[str] = []
    with playwright.sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=ARGS, headless=True)
        try:
            context = browser.new_context(viewport={"width": 1280, "height": 900})
            page = context.new_page()
            page.on("dialog", lambda d: (problems.append(f"dialog {d.type}: {d.message}"), d.dismiss()))
            page.on("console", lambda m: problems.append(f"console {m.type}: {m.text}")
                    if m.type in ("error", "warning") else None)
            page.on("pageerror", lambda e: problems.append(f"page error: {e}"))
            page.on("requestfailed", lambda r: problems.append(f"request failed: {r.url}"))
            for path in pages:
                page.goto(path.as_uri())
                page.wait_for_load_state("load")
                # A payload could only run as a script of its own: the page has none but ours.
                scripts = page.eval_on_selector_all("script", "els => els.map(e => e.src)")
                assert all(s.endswith(("search-index.js", "assets/catalogue.js")) for s in scripts), (path, scripts)
                assert page.evaluate("document.querySelectorAll('img, iframe, object, embed').length") == 0, path
            # Typed into the search box, the payload filters the table and runs nothing.
            page.goto((injected_site / "index.html").as_uri())
            page.fill("#filter-text", PAYLOAD)
            page.fill("#filter-text", "alert")
            assert page.locator("#filter-count").inner_text() == "3 of 3 systems"
            page.wait_for_timeout(200)
            context.close()
        finally:
            browser.close()
    assert len(pages) > 10
    assert problems == []
