"""Build the static dossier site: the one readable ``build()``.

Stages, in order: load and validate the project, weigh every system, draw
the figures, render the pages, write them atomically, check the links.
Same inputs give byte-identical output: nothing here reads the clock or
iterates in an unordered way.
"""

from __future__ import annotations

import functools
import json
import re
import shutil
import tempfile
from dataclasses import dataclass
from html.parser import HTMLParser
from pathlib import Path

from dossier import __version__
from dossier.draw import (
    Figure,
    draw_detections,
    draw_log,
    draw_neighbours,
    draw_spectroscopic,
    draw_stars,
    draw_system,
)
from dossier.engine import SystemResult, weigh_project
from dossier.provenance import cited_sources, prov_json, provenance_rows
from dossier.errors import DossierError
from dossier.render.html import render_page, templates_dir
from dossier.render.catalogue import search_index_js, system_row
from dossier.render.markdown import render_markdown
from dossier.report import system_dict, to_json
from dossier.rules.registry import BY_ID, RULES, rule_settings
from dossier.rules.verdict import strongest
from dossier.schema.loader import Project, load_project

MARKER = ".dossier-site"
MANIFEST = "manifest.json"


@dataclass(frozen=True)
class RuleSection:
    """One line of evidence on a system page."""

    id: str
    title: str
    citation: str
    summary: str
    sections: list[tuple[str, str]]
    assessments: list
    figures: list = ()


#: Which figures show each line of evidence, by the start of their slugs.
RULE_FIGURES: dict[str, tuple[str, ...]] = {
    "distance": ("parallaxes",),
    "parallax-agreement": ("parallaxes",),
    "common-motion": ("sky-chart",),
    "chance-alignment": ("sky-chart",),
    "proper-motion-orbit": ("sky-chart",),
    "relative-motion": ("orbit-", "motion-"),
    "orbit-consistency": ("orbit-", "motion-"),
    "orbit-fit": ("orbit-", "motion-"),
    "spectroscopic-orbit": ("rv-", "periodogram-"),
    "companion-claims": ("detection-map",),
    "luminosity": ("hr-diagram",),
    "coevality": ("hr-diagram",),
    "space-velocity": ("neighbours",),
    "neighbours": ("neighbours",),
}


def doc_sections(doc: str) -> tuple[str, list[tuple[str, str]]]:
    """Split a rule's module docstring into its summary and (heading, text) sections."""
    lines = doc.strip("\n").splitlines()
    summary_lines, sections = [], []
    heading, body = None, []
    for line in lines:
        if line and not line.startswith(" "):
            if heading is None and not sections and not body and summary_lines == []:
                summary_lines.append(line)
                continue
            if heading is not None:
                sections.append((heading, _para(body)))
            heading, body = line.strip(), []
        else:
            body.append(line.strip())
    if heading is not None:
        sections.append((heading, _para(body)))
    return " ".join(summary_lines), sections


def _para(lines: list[str]) -> str:
    return re.sub(r"\s+", " ", " ".join(lines)).replace("``", "").strip()


def _rule_sections(result: SystemResult, figures: list[Figure] = ()) -> list[RuleSection]:
    """One section per rule that weighed something, with links to the figures on the page that show it."""
    out = []
    for rule in RULES:
        found = [a for a in result.assessments if a.rule == rule.id]
        if not found:
            continue
        summary, sections = doc_sections(rule.doc)
        shown = [f for f in figures if f.slug.startswith(RULE_FIGURES.get(rule.id, ()))]
        out.append(RuleSection(rule.id, rule.title, rule.citation, summary, sections, found, shown))
    return out


def _assumptions(project: Project) -> list[tuple[str, str, str]]:
    """(where, setting, value) for every setting the verdicts depend on."""
    rows = []
    for name, field in type(project.settings.verdict).model_fields.items():
        rows.append(("verdict", name, str(getattr(project.settings.verdict, name))))
    for rule in RULES:
        values = rule_settings(project.settings.rules, rule)
        for name in type(values).model_fields:
            rows.append((rule.id, name, str(getattr(values, name))))
    return rows


@dataclass(frozen=True)
class LogSection:
    """One pair's observing log on a system page."""

    pair: str
    log: object
    figures: list[Figure]


def _release_pages(project: Project, sid: str, result: SystemResult, history: list, common: dict
                   ) -> tuple[dict[str, str | bytes], dict]:
    """The pages of a system's releases, its "what changed" pages, and what its own page says of them."""
    from dossier.diff import compare, grouped, state_of, summary
    from dossier.release import content_hash, evidence_files, version_label

    pages: dict[str, str | bytes] = {}
    label = version_label(history, content_hash(evidence_files(project.root, sid)))
    rows = []
    for i, rel in enumerate(history):
        n, base = rel.number, f"systems/{sid}/releases/{rel.number}/"
        previous = history[i - 1] if i else None
        following = history[i + 1].number if i + 1 < len(history) else None
        pages[base + "index.html"] = render_page(
            "release.html", root="../../../../", sid=sid, meta=rel.meta, state=rel.state,
            previous=previous.number if previous else None, following=following, **common)
        for name, data in rel.files().items():
            pages[base + name] = data
        changes = compare(previous.state, rel.state) if previous else []
        if previous:
            pages[base + "changes.html"] = render_page(
                "changes.html", root="../../../../", sid=sid, system_link="../../index.html",
                heading=f"what changed in release {n}", groups=grouped(changes), summary=summary(changes),
                before_label=f"release {previous.number} ({previous.date})", after_label=f"release {n} ({rel.date})",
                **common)
        rows.append({"number": n, "date": rel.date, "note": rel.note, "approvals": len(rel.meta["approvals"]),
                     "changes": summary(changes) if previous else None})
    unreleased = None
    if label.startswith("draft after"):
        last = history[-1]
        changes = compare(last.state, json.loads(json.dumps(state_of(project, result))))
        unreleased = summary(changes) or "no change in values, sources, assessments, verdicts or grades"
        pages[f"systems/{sid}/unreleased.html"] = render_page(
            "changes.html", root="../../", sid=sid, system_link="index.html",
            heading=f"changes since release {last.number}", groups=grouped(changes), summary=summary(changes),
            before_label=f"release {last.number} ({last.date})", after_label="the current evidence (not released)",
            **common)
    return pages, {"label": label, "releases": rows, "unreleased": unreleased}


def render_site(project: Project, results: dict[str, SystemResult], figures: dict[str, list[Figure]],
                logs: dict[str, list[LogSection]] | None = None,
                claim_figures: dict[str, list[Figure]] | None = None,
                star_figures: dict[str, list[Figure]] | None = None, pdf: bool = False,
                releases: dict[str, list] | None = None, use_cache: bool = True) -> dict[str, str | bytes]:
    """Relative path -> page text (bytes for PDFs and the files of releases).

    ``releases`` maps a system id to its releases (:func:`dossier.release.all_releases`);
    each gets a frozen page, its files and a "what changed" page from the one before.
    """
    info = project.settings.project
    common = {"project": info, "version": __version__, "verdict_settings": project.settings.verdict}
    pages: dict[str, str | bytes] = {}
    summaries = []
    for sid, result in results.items():
        release_pages, history = _release_pages(project, sid, result, (releases or {}).get(sid, []), common)
        pages.update(release_pages)
        summaries.append(system_row(result, history))
        log_file = project.root / "systems" / sid / "log.csv"
        if log_file.is_file():  # the observing log as recorded, for download
            pages[f"systems/{sid}/log.csv"] = log_file.read_bytes()
        pages[f"systems/{sid}/index.html"] = render_page(
            "system.html",
            root="../../",
            system=result.system,
            result=result,
            facts=result.facts,
            figures=figures[sid],
            rules=_rule_sections(result, figures[sid] + (claim_figures or {}).get(sid, [])
                                 + [f for log in (logs or {}).get(sid, []) for f in log.figures]
                                 + (star_figures or {}).get(sid, [])),
            notes_html=render_markdown(result.system.notes),
            note_html=lambda text: render_markdown(text or ""),
            references=cited_sources(project, result),
            provenance=provenance_rows(project, result),
            logs=(logs or {}).get(sid, []),
            claim_figures=(claim_figures or {}).get(sid, []),
            star_figures=(star_figures or {}).get(sid, []),
            star_assessments=[a for a in result.assessments
                              if a.rule in ("luminosity", "coevality", "space-velocity", "neighbours", "closest-approach")
                              and a.outcome != "insufficient"],
            grades=[a for a in result.assessments if a.grade is not None],
            assumptions=_assumptions(project),
            history=history,
            strongest={p.id: strongest([a for a in result.for_subject(p.id) if a.subject_kind == "pair"],
                                       result.verdicts[p.id].status) for p in result.system.pairs},
            with_pdf=pdf,
            with_log=log_file.is_file(),
            **common,
        )
        pages[f"systems/{sid}/weigh.json"] = to_json(info.title, {sid: result})
        pages[f"systems/{sid}/provenance.json"] = json.dumps(prov_json(project, result), indent=2, sort_keys=True,
                                                             ensure_ascii=False) + "\n"
    if pdf:
        from dossier.cache import Cache

        pages.update(render_pdfs({f"systems/{sid}/index.html": pages[f"systems/{sid}/index.html"] for sid in results},
                                 Cache(project.root if use_cache else None)))
    pages["index.html"] = render_page("index.html", root="", systems=summaries,
                                      description_html=render_markdown(info.description), **common)
    pages["search-index.js"] = search_index_js(summaries)
    pages["methods.html"] = render_page("methods.html", root="", rules=[
        (r, *doc_sections(r.doc)) for r in RULES], verdict_doc=doc_sections(_verdict_doc()), **common)
    pages["weigh.json"] = to_json(info.title, results)
    from dossier.exports import catalogue_ecsv, catalogue_votable

    pages["catalogue.ecsv"] = catalogue_ecsv(results)
    pages["catalogue.vot"] = catalogue_votable(results)
    return pages


def _pdf_job(item: tuple[str, str]) -> tuple[str, bytes]:
    from dossier.render.pdf import render_pdf

    rel, html = item
    # The page's own path in templates/: its ../../assets/ links resolve to the stylesheets write_site copies.
    return rel.replace("index.html", "dossier.pdf"), render_pdf(html, templates_dir() / rel)


def render_pdfs(html_pages: dict[str, str], cache=None) -> dict[str, bytes]:
    """A PDF beside each given page (``…/index.html`` → ``…/dossier.pdf``), over the CPU cores.

    WeasyPrint spends seconds laying out each long page; the pages are
    independent, so they are rendered in a process pool (results in order of
    submission, so they do not depend on scheduling). With a
    :class:`dossier.cache.Cache`, a PDF whose page, stylesheets and WeasyPrint
    version are unchanged is taken from the cache: the same inputs give the
    same bytes.
    """
    import hashlib
    import os
    from importlib.metadata import version

    styles = {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted((templates_dir() / "assets").glob("*.css"))}

    def key(html: str) -> dict:
        return {"html": hashlib.sha256(html.encode()).hexdigest(), "css": styles, "weasyprint": version("weasyprint")}

    out: dict[str, bytes] = {}
    todo = []
    for rel, html in sorted(html_pages.items()):
        found = cache.get_bytes("pdf", key(html)) if cache is not None else None
        if found is not None:
            out[rel.replace("index.html", "dossier.pdf")] = found
        else:
            todo.append((rel, html))
    workers = min(len(todo), os.cpu_count() or 1)
    if workers <= 1:
        made = list(map(_pdf_job, todo))
    else:
        from concurrent.futures import ProcessPoolExecutor
        from multiprocessing import get_context

        with ProcessPoolExecutor(max_workers=workers, mp_context=get_context("spawn")) as pool:
            made = list(pool.map(_pdf_job, todo))
    for (rel, html), (name, data) in zip(todo, made):
        out[name] = data
        if cache is not None:
            cache.put_bytes("pdf", key(html), data)
    return dict(sorted(out.items()))


def _verdict_doc() -> str:
    from dossier.rules import verdict

    return verdict.__doc__ or ""


class _Links(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.links: list[str] = []

    def handle_starttag(self, tag, attrs):
        for name, value in attrs:
            if name in ("href", "src") and value and not re.match(r"^[a-z]+:|^#|^//", value):
                self.links.append(value.split("#")[0])


def check_links(root: Path, pages: dict[str, str | bytes]) -> list[str]:
    """Relative links in the pages that point at no file of the site."""
    broken = []
    for rel, text in pages.items():
        if not rel.endswith(".html"):
            continue
        parser = _Links()
        parser.feed(text)
        for link in parser.links:
            target = (root / rel).parent / link
            if link.endswith("/"):
                target = target / "index.html"
            if not target.exists():
                broken.append(f"{rel}: {link}")
    return broken


def _sha256(path: Path) -> str:
    import hashlib

    return hashlib.sha256(path.read_bytes()).hexdigest()


def input_files(root: Path) -> list[Path]:
    """The files a build reads: settings, references, evidence, logs and releases (hidden paths left out)."""
    from dossier.release import RELEASES_DIR

    root = Path(root)
    files = [root / "dossier.toml", root / "references.yaml"]
    files += sorted((root / "systems").glob("*/evidence.yaml")) + sorted((root / "systems").glob("*/log.csv"))
    files += sorted((root / RELEASES_DIR).rglob("*"))
    return [p for p in files if not any(part.startswith(".") for part in p.relative_to(root).parts)]


def input_hashes(project: Project) -> dict[str, str]:
    """SHA-256 of every input file of the project (releases included), by path relative to it."""
    return {p.relative_to(project.root).as_posix(): _sha256(p) for p in input_files(project.root) if p.is_file()}


def manifest_text(site: Path, inputs: dict[str, str]) -> str:
    """manifest.json: the SHA-256 of every input and every output (sorted; no clock time)."""
    import json

    outputs = {str(p.relative_to(site)): _sha256(p) for p in sorted(site.rglob("*"))
               if p.is_file() and p.name != MANIFEST}
    doc = {"format": "dossier-manifest", "format_version": 1, "dossier_version": __version__,
           "inputs": dict(sorted(inputs.items())), "outputs": outputs}
    return json.dumps(doc, indent=2, sort_keys=True) + "\n"


def verify_site(site: Path) -> list[str]:
    """Differences between a built site and its manifest: changed, missing and unlisted files."""
    import json

    site = Path(site)
    path = site / MANIFEST
    if not path.is_file():
        raise DossierError(f"{site} has no {MANIFEST}. Fix: give the folder that 'dossier build' wrote.")
    listed = json.loads(path.read_text(encoding="utf-8"))["outputs"]
    present = {str(p.relative_to(site)) for p in site.rglob("*") if p.is_file() and p.name != MANIFEST}
    problems = [f"changed: {name}" for name in sorted(listed) if name in present and _sha256(site / name) != listed[name]]
    problems += [f"missing: {name}" for name in sorted(set(listed) - present)]
    problems += [f"not in the manifest: {name}" for name in sorted(present - set(listed))]
    return problems


def write_site(out_dir: Path, pages: dict[str, str | bytes], inputs: dict[str, str] | None = None) -> None:
    """Write the site into a fresh folder, then swap it in: never a half-written site."""
    out_dir = out_dir.resolve()
    if out_dir.exists() and any(out_dir.iterdir()) and not (out_dir / MARKER).exists():
        raise DossierError(f"{out_dir} is not empty and was not built by dossier; nothing was written. "
                           "Fix: choose a new or empty folder.")
    out_dir.parent.mkdir(parents=True, exist_ok=True)
    staging = Path(tempfile.mkdtemp(prefix=f".{out_dir.name}.", dir=out_dir.parent))
    try:
        for rel, text in sorted(pages.items()):
            path = staging / rel
            path.parent.mkdir(parents=True, exist_ok=True)
            if isinstance(text, bytes):
                path.write_bytes(text)
            else:
                path.write_text(text, encoding="utf-8")
        shutil.copytree(templates_dir() / "assets", staging / "assets")
        (staging / MARKER).write_text("built by dossier; this folder is replaced on every build\n", encoding="utf-8")
        (staging / MANIFEST).write_text(manifest_text(staging, inputs or {}), encoding="utf-8")
        broken = check_links(staging, pages)
        if broken:
            raise DossierError("broken links in the built site: " + "; ".join(broken))
        if out_dir.exists():
            old = out_dir.with_name(f".{out_dir.name}.old")
            if old.exists():
                shutil.rmtree(old)
            out_dir.rename(old)
            staging.rename(out_dir)
            shutil.rmtree(old)
        else:
            staging.rename(out_dir)
    finally:
        if staging.exists():
            shutil.rmtree(staging)


@functools.lru_cache(maxsize=1)
def _code_hash() -> str:
    """SHA-256 of Dossier's own source: a cached figure is reused only by the code that drew it."""
    import hashlib

    package = Path(__file__).resolve().parent
    digest = hashlib.sha256()
    for path in sorted(package.rglob("*.py")):
        digest.update(path.relative_to(package).as_posix().encode() + b"\0" + path.read_bytes())
    return digest.hexdigest()


def draw_figures(project: Project, result: SystemResult, cache=None) -> dict:
    """Every figure of one system's page: ``system``, ``claims``, ``stars`` (lists) and ``logs`` (by pair).

    Drawing is most of a build's time, so with a :class:`dossier.cache.Cache`
    the figures are kept under a key made of the system's evidence content
    hash (its evidence, log, references and settings) and the hash of
    Dossier's source: an unchanged system is not drawn again.
    """
    from dataclasses import asdict

    from dossier.release import content_hash, evidence_files

    def compute() -> dict:
        return {
            "system": [asdict(f) for f in draw_system(result)],
            "claims": [asdict(f) for f in draw_detections(result) + [
                f for pid in result.facts.rv_orbits for f in draw_spectroscopic(result, pid)]],
            "logs": {pid: [asdict(f) for f in draw_log(result, pid)] for pid in result.facts.logs},
            "stars": [asdict(f) for f in draw_stars(result) + draw_neighbours(result)],
        }

    sid = result.system.id
    if cache is None:
        data = compute()
    else:
        key = {"evidence": content_hash(evidence_files(project.root, sid)), "code": _code_hash()}
        data = cache.get_or_compute(f"figures-{sid}", key, compute)
    as_figures = lambda items: [Figure(**item) for item in items]  # noqa: E731
    return {"system": as_figures(data["system"]), "claims": as_figures(data["claims"]),
            "stars": as_figures(data["stars"]), "logs": {pid: as_figures(v) for pid, v in data["logs"].items()}}


def build(project_dir: Path | str, out_dir: Path | str, pdf: bool = True, use_cache: bool = True) -> Path:
    """Build the site of a project into ``out_dir``; return its index page.

    Every system gets its page, a PDF of it (unless ``pdf`` is false, for
    quick previews), its frozen releases and their "what changed" pages.
    ``use_cache=False`` computes everything afresh (fits and PDFs), ignoring
    ``<project>/.dossier-cache/``.
    A release that fails :func:`dossier.release.verify_releases` stops the
    build before anything is written.
    """
    from dossier.release import all_releases, verify_releases

    project = load_project(Path(project_dir))
    altered = verify_releases(project.root)
    if altered:
        raise DossierError("the project's releases were altered, and releases are immutable: " + "; ".join(altered)
                           + ". Nothing was written. Fix: restore them (e.g. git checkout -- releases/).")
    releases = {sid: found for sid, found in all_releases(project.root).items() if sid in project.systems}
    results = weigh_project(project, use_cache=use_cache)
    from dossier.cache import Cache

    cache = Cache(project.root) if use_cache else None
    drawn = {sid: draw_figures(project, result, cache) for sid, result in results.items()}
    figures = {sid: d["system"] for sid, d in drawn.items()}
    claim_figures = {sid: d["claims"] for sid, d in drawn.items()}
    logs = {sid: [LogSection(pid, log, drawn[sid]["logs"][pid]) for pid, log in result.facts.logs.items()]
            for sid, result in results.items()}
    star_figures = {sid: d["stars"] for sid, d in drawn.items()}
    pages = render_site(project, results, figures, logs, claim_figures, star_figures, pdf=pdf, releases=releases,
                        use_cache=use_cache)
    write_site(Path(out_dir), pages, input_hashes(project))
    return Path(out_dir).resolve() / "index.html"


__all__ = ["build", "render_site", "write_site", "check_links", "doc_sections", "BY_ID", "system_dict"]
