"""Build the static dossier site: the one readable ``build()``.

Stages, in order: load and validate the project, weigh every system, draw
the figures, render the pages, write them atomically, check the links.
Same inputs give byte-identical output: nothing here reads the clock or
iterates in an unordered way. Builds are incremental (see :func:`build`):
what a system contributes to the site is cached as one unit, so only
changed systems go through the stages, over the CPU cores when they are many.
"""

from __future__ import annotations

import functools
import json
import re
import shutil
from dataclasses import dataclass
from html.parser import HTMLParser
from pathlib import Path
from typing import TYPE_CHECKING

from dossier import __version__
from dossier.cache import code_hash
from dossier.errors import DossierError
from dossier.render.html import render_page, templates_dir
from dossier.render.catalogue import search_index_js, system_row
from dossier.render.markdown import render_markdown
from dossier.schema.loader import Project, load_project

if TYPE_CHECKING:
    from dossier.draw import Figure
    from dossier.engine import SystemResult
    from dossier.report import system_dict
    from dossier.rules.registry import BY_ID

# Weighing and drawing (scipy, astropy, matplotlib behind them) are imported where they are used, so that a
# build with nothing to do starts in a fraction of a second; the names others import from here come on demand.
_LAZY = {"Figure": "dossier.draw", "SystemResult": "dossier.engine", "BY_ID": "dossier.rules.registry",
         "RULES": "dossier.rules.registry", "system_dict": "dossier.report"}


def __getattr__(name: str):
    if name in _LAZY:
        import importlib

        return getattr(importlib.import_module(_LAZY[name]), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")

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
    from dossier.rules.registry import RULES

    out = []
    for rule in RULES:
        found = [a for a in result.assessments if a.rule == rule.id]
        if not found:
            continue
        summary, sections = doc_sections(rule.doc)
        shown = [f for f in figures if f.slug.startswith(RULE_FIGURES.get(rule.id, ()))]
        out.append(RuleSection(rule.id, rule.title, rule.citation, summary, sections, found, shown))
    return out


@dataclass(frozen=True)
class LogSection:
    """One pair's observing log on a system page."""

    pair: str
    log: object
    figures: list[Figure]
    ephemeris: list | None = None
    outlook: object | None = None
    ephemeris_source: str | None = None


def _release_pages(project: Project, sid: str, result: SystemResult, history: list, common: dict
                   ) -> tuple[dict[str, str], dict]:
    """The pages of a system's releases, its "what changed" pages, and what its own page says of them.

    The files of each release are copied into the site as they are, by :func:`site_pages`.
    """
    from dossier.diff import compare, described, quantity_labels, state_of, summary, verdict_label, verdict_rows, \
        verdict_summary
    from dossier.release import content_hash, evidence_files, version_label
    from dossier.render.terms import ODDS

    pages: dict[str, str] = {}
    label = version_label(history, content_hash(evidence_files(project.root, sid)))
    labels = quantity_labels(result)  # names the quantities of releases whose states do not record them
    rows = []
    for i, rel in enumerate(history):
        n, base = rel.number, f"systems/{sid}/releases/{rel.number}/"
        previous = history[i - 1] if i else None
        following = history[i + 1].number if i + 1 < len(history) else None
        pages[base + "index.html"] = render_page(
            "release.html", root="../../../../", sid=sid, meta=rel.meta, state=rel.state, verdict_label=verdict_label,
            odds=ODDS,
            previous=previous.number if previous else None, following=following, **common)
        changes = compare(previous.state, rel.state) if previous else []
        if previous:
            pages[base + "changes.html"] = render_page(
                "changes.html", root="../../../../", sid=sid, system_link="../../index.html",
                heading=f"what changed in release {n}", groups=described(changes, labels), summary=summary(changes),
                verdicts=verdict_rows(previous.state, rel.state),
                verdict_summary=verdict_summary(verdict_rows(previous.state, rel.state)),
                before_label=f"release {previous.number} ({previous.date})", after_label=f"release {n} ({rel.date})",
                **common)
        rows.append({"number": n, "date": rel.date, "note": rel.note, "approvals": len(rel.meta["approvals"]),
                     "changes": summary(changes) if previous else None})
    unreleased = None
    if label.startswith("draft after"):
        last = history[-1]
        current = json.loads(json.dumps(state_of(project, result)))
        changes = compare(last.state, current)
        unreleased = summary(changes) or "no change in values, sources, assessments, verdicts or grades"
        pages[f"systems/{sid}/unreleased.html"] = render_page(
            "changes.html", root="../../", sid=sid, system_link="index.html",
            heading=f"changes since release {last.number}", groups=described(changes, labels), summary=summary(changes),
            verdicts=verdict_rows(last.state, current), verdict_summary=verdict_summary(verdict_rows(last.state, current)),
            before_label=f"release {last.number} ({last.date})", after_label="the current evidence (not released)",
            **common)
    return pages, {"label": label, "releases": rows, "unreleased": unreleased}


def _common(settings) -> dict:
    """What every page's template takes from the settings (``model_limit``: for the filters ``probability``
    and ``labelled``, so that a probability beyond it reads as the limit of the model)."""
    limit = settings.pair_model.model_limit
    return {"project": settings.project, "version": __version__, "verdict_settings": settings.verdict,
            "model_limit": limit, "model_limit_text": f"{limit:.15f}".rstrip("0")}


def _log_section(result: SystemResult, pid: str, log, figures: list[Figure]) -> LogSection:
    """A pair's log section, with its ephemeris table where the pair has an orbit posterior."""
    from dossier.draw import EPHEMERIS_YEARS, ephemeris_span
    from dossier.ephemerides import describe, table

    posterior = result.facts.ephemeris_posterior(pid)
    if posterior is None:
        return LogSection(pid, log, figures)
    rows, look = table(posterior, ephemeris_span(result, pid)[0], EPHEMERIS_YEARS)
    return LogSection(pid, log, figures, rows, look, describe(posterior))


def system_unit(project: Project, result: SystemResult, drawn: dict, releases: list, pdf: bool) -> dict:
    """Everything the site shows of one system, as JSON data that the cache keeps between builds.

    ``pages``: the text of its own pages (its dossier, ``weigh.json``,
    ``provenance.json``, its releases' pages and "what changed" pages);
    ``row``, ``search``, ``weigh`` (its entry of ``weigh.json``, as text) and
    ``catalogue``: what the catalogue's index, search index, ``weigh.json``
    and ECSV/VOTable take from it. The files copied as they are (the log,
    the files of releases) are read at assembly (:func:`site_pages`).
    ``drawn`` is :func:`draw_figures`'s.
    """
    from dossier.exports import pair_rows
    from dossier.provenance import cited_sources, prov_json, provenance_rows
    from dossier.render.catalogue import search_text
    from dossier.render.settings_table import settings_sections
    from dossier.render.terms import ODDS, uses
    from dossier.report import join_systems_json, system_dict, system_json_item
    from dossier.rules.verdict import strongest

    sid = result.system.id
    common = _common(project.settings)
    pages, history = _release_pages(project, sid, result, releases, common)
    figures, claim_figures, star_figures = drawn["system"], drawn["claims"], drawn["stars"]
    logs = [_log_section(result, pid, log, drawn["logs"][pid]) for pid, log in result.facts.logs.items()]
    log_file = project.root / "systems" / sid / "log.csv"
    pages[f"systems/{sid}/index.html"] = render_page(
        "system.html",
        root="../../",
        system=result.system,
        result=result,
        facts=result.facts,
        figures=figures,
        rules=_rule_sections(result, figures + claim_figures + [f for log in logs for f in log.figures] + star_figures),
        notes_html=render_markdown(result.system.notes),
        note_html=lambda text: render_markdown(text or ""),
        references=cited_sources(project, result),
        provenance=provenance_rows(project, result),
        logs=logs,
        claim_figures=claim_figures,
        star_figures=star_figures,
        star_assessments=[a for a in result.assessments
                          if a.rule in ("luminosity", "coevality", "space-velocity", "neighbours", "closest-approach")
                          and a.outcome != "insufficient"],
        grades=[a for a in result.assessments if a.grade is not None],
        settings_sections=settings_sections(project.settings),
        history=history,
        strongest={p.id: strongest(result.verdicts[p.id].contributions, result.verdicts[p.id].status)
                   for p in result.system.pairs},
        uses=uses(result),
        odds=ODDS,
        with_pdf=pdf,
        with_log=log_file.is_file(),
        **common,
    )
    weigh = system_json_item(system_dict(result))
    pages[f"systems/{sid}/weigh.json"] = join_systems_json(project.settings.project.title, [weigh])
    pages[f"systems/{sid}/provenance.json"] = json.dumps(prov_json(project, result), indent=2, sort_keys=True,
                                                         ensure_ascii=False) + "\n"
    row = {k: v for k, v in system_row(result, history).items() if k != "result"}
    verdicts = [result.verdicts[p.id] for p in result.system.pairs]
    row["pairs"] = [[p.id, v.status, v.probability, v.probability_of, v.p_bound_given_physical]
                    for p, v in zip(result.system.pairs, verdicts)]
    summary = {"row": row, "search": search_text(result), "weigh": weigh, "catalogue": pair_rows(sid, result)}
    # what a later build reads back from the cache, exactly: one path to the bytes, cached or not
    return {"pages": pages, **json.loads(json.dumps(summary))}


@dataclass(frozen=True)
class _Listed:
    """What the catalogue page reads of a system's result (``s.result.system.pairs``, ``s.result.verdicts``),
    rebuilt from a unit's ``row`` so that an unchanged system needs no weighing."""

    system: object
    verdicts: dict


def _catalogue_row(unit: dict) -> dict:
    from types import SimpleNamespace

    row = dict(unit["row"])
    pairs = [SimpleNamespace(id=pid) for pid, *_ in row["pairs"]]
    verdicts = {pid: SimpleNamespace(status=status, probability=p, probability_of=label, p_bound_given_physical=bg)
                for pid, status, p, label, bg in row.pop("pairs")}
    row["result"] = _Listed(SimpleNamespace(pairs=pairs), verdicts)
    row["search_text"] = unit["search"]
    return row


def site_pages(settings, root: Path, units: dict[str, dict], releases: dict[str, list], pdf: bool = False,
               use_cache: bool = True, report: BuildReport | None = None) -> dict[str, str | bytes]:
    """Relative path -> page text (bytes for PDFs, logs and the files of releases), from every system's unit.

    ``units`` maps each system id, in catalogue order, to its
    :func:`system_unit`; ``releases`` maps a system id to its releases
    (:func:`dossier.release.all_releases`), whose files are copied as they are.
    ``report`` (a :class:`BuildReport`) is told of the PDFs and the catalogue's pages as they are made.
    """
    from dossier.exports import ecsv_text, rows_table, votable_text
    from dossier.report import join_systems_json
    from dossier.rules.registry import RULES

    info = settings.project
    common = _common(settings)
    pages: dict[str, str | bytes] = {}
    summaries = []
    for sid, unit in units.items():
        pages.update(unit["pages"])
        for rel in releases.get(sid, []):
            for name, data in rel.files().items():
                pages[f"systems/{sid}/releases/{rel.number}/{name}"] = data
        log_file = root / "systems" / sid / "log.csv"
        if log_file.is_file():  # the observing log as recorded, for download
            pages[f"systems/{sid}/log.csv"] = log_file.read_bytes()
        summaries.append(_catalogue_row(unit))
    if pdf:
        from dossier.cache import Cache

        # render_pdfs is told of a report only when there is one: a stand-in for it may take two arguments
        tell = {} if report is None else {"progress": lambda done, total: report.stage(STAGE_PDFS, done, total)}
        pages.update(render_pdfs({f"systems/{sid}/index.html": pages[f"systems/{sid}/index.html"] for sid in units},
                                 Cache(root if use_cache else None), **tell))
    if report is not None:
        report.stage(STAGE_CATALOGUE, 0, 1)
    pages["index.html"] = render_page("index.html", root="", systems=summaries,
                                      description_html=render_markdown(info.description), **common)
    pages["search-index.js"] = search_index_js(summaries)
    pages["methods.html"] = render_page("methods.html", root="", rules=[
        (r, *doc_sections(r.doc)) for r in RULES], verdict_doc=doc_sections(_verdict_doc()), **common)
    pages[VERDICTS_PAGE] = verdicts_page(common)
    pages["weigh.json"] = join_systems_json(info.title, [unit["weigh"] for unit in units.values()])
    table = rows_table([row for unit in units.values() for row in unit["catalogue"]])
    pages["catalogue.ecsv"] = ecsv_text(table)
    pages["catalogue.vot"] = votable_text(table)
    if report is not None:
        report.stage(STAGE_CATALOGUE, 1, 1)
    return pages


def _pdf_job(item: tuple[str, str]) -> tuple[str, bytes]:
    from dossier.render.pdf import render_pdf

    rel, html = item
    # The page's own path in templates/: its ../../assets/ links resolve to the stylesheets write_site copies.
    return rel.replace("index.html", "dossier.pdf"), render_pdf(html, templates_dir() / rel)


def render_pdfs(html_pages: dict[str, str], cache=None, progress=None) -> dict[str, bytes]:
    """A PDF beside each given page (``…/index.html`` → ``…/dossier.pdf``), over the CPU cores.

    WeasyPrint spends seconds laying out each long page; the pages are
    independent, so they are rendered in a process pool (results in order of
    submission, so they do not depend on scheduling). With a
    :class:`dossier.cache.Cache`, a PDF whose page, stylesheets and WeasyPrint
    version are unchanged is taken from the cache: the same inputs give the
    same bytes. ``progress(done, total)`` is called as the PDFs are had, from
    ``(0, total)`` on (PDFs from the cache count at once).
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
    total = len(html_pages)
    tell = progress if progress is not None and total else (lambda done, total: None)
    tell(len(out), total)

    def counted(results) -> list[tuple[str, bytes]]:  # in order of submission, counted as each is had
        made = []
        for item in results:
            made.append(item)
            tell(len(out) + len(made), total)
        return made

    workers = min(len(todo), os.cpu_count() or 1)
    if workers <= 1:
        made = counted(map(_pdf_job, todo))
    else:
        from concurrent.futures import ProcessPoolExecutor
        from multiprocessing import get_context

        with ProcessPoolExecutor(max_workers=workers, mp_context=get_context("spawn")) as pool:
            made = counted(pool.map(_pdf_job, todo))
    for (rel, html), (name, data) in zip(todo, made):
        out[name] = data
        if cache is not None:
            cache.put_bytes("pdf", key(html), data)
    return dict(sorted(out.items()))


#: The site's page "How verdicts are computed", rendered from ``templates/verdicts.md``.
VERDICTS_PAGE = "verdicts.html"


def verdicts_page(common: dict) -> str:
    """The page "How verdicts are computed": ``templates/verdicts.md`` through the notes' Markdown renderer."""
    path = templates_dir() / "verdicts.md"
    try:
        text = path.read_text(encoding="utf-8")
    except OSError as exc:
        raise DossierError(f"{path}: cannot be read ({exc.strerror}). Fix: reinstall dossier, or restore "
                           "templates/verdicts.md in a source checkout.") from exc
    first = next((line for line in text.splitlines() if line.startswith("# ")), "# How verdicts are computed")
    return render_page("verdicts.html", root="", title=first[2:].strip(), body_html=render_markdown(text), **common)


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


#: In the names of the folders a build writes beside its site: ``.<site folder's name>.staging-<pid>-<random>``.
STAGING_INFIX = ".staging-"


def _staging_prefix(out_dir: Path) -> str:
    return f".{out_dir.name}{STAGING_INFIX}"


def _is_dossier_site(folder: Path) -> bool:
    """Whether a folder holds a site Dossier wrote: its marker file, or a manifest in Dossier's format."""
    if (folder / MARKER).is_file():
        return True
    try:
        return json.loads((folder / MANIFEST).read_text(encoding="utf-8")).get("format") == "dossier-manifest"
    except (OSError, ValueError, AttributeError):
        return False


def _check_replaceable(out_dir: Path) -> None:
    """Refuse to replace anything but nothing, an empty folder or a site Dossier wrote."""
    if not out_dir.exists():
        return
    if not out_dir.is_dir():
        raise DossierError(f"{out_dir} is a file, not a folder; nothing was written. Fix: choose a new or empty folder.")
    if any(out_dir.iterdir()) and not _is_dossier_site(out_dir):
        raise DossierError(f"{out_dir} is not empty and was not built by dossier (it has neither {MARKER} nor a "
                           f"Dossier {MANIFEST}); nothing was written. Fix: choose a new or empty folder.")


def _hold(folder: Path) -> int | None:
    """Hold an exclusive lock on a new folder for as long as this process lives or until closed.

    It tells a build in progress from one that was killed: :func:`_remove_abandoned`
    deletes only staging folders nobody holds. ``None`` where there is no ``flock``.
    """
    import os

    try:
        import fcntl

        fd = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    except (ImportError, OSError):
        return None
    try:
        fcntl.flock(fd, fcntl.LOCK_EX)
    except OSError:  # a file system without locks
        os.close(fd)
        return None
    return fd


def _remove_abandoned(out_dir: Path) -> None:
    """Delete the staging folders beside ``out_dir`` that no running build holds (left by killed builds)."""
    import os

    try:
        import fcntl
    except ImportError:  # no way to tell a running build's folder from an abandoned one: leave them
        return
    prefix = _staging_prefix(out_dir)
    for path in sorted(out_dir.parent.iterdir()):
        if not path.name.startswith(prefix) or path.is_symlink() or not path.is_dir():
            continue
        try:
            fd = os.open(path, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
        except OSError:
            continue
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:  # held: a build is writing it
            os.close(fd)
            continue
        try:
            shutil.rmtree(path, ignore_errors=True)
        finally:
            os.close(fd)


def _swap_in(staging: Path, out_dir: Path) -> Path | None:
    """Put the finished ``staging`` folder at ``out_dir``; return where the previous site now is (or ``None``)."""
    import os
    import secrets

    from dossier.durable import swap_in

    return swap_in(staging, out_dir, out_dir.with_name(f"{_staging_prefix(out_dir)}{os.getpid()}-{secrets.token_hex(4)}"))


def write_site(out_dir: Path, pages: dict[str, str | bytes], inputs: dict[str, str] | None = None,
               report: BuildReport | None = None) -> None:
    """Write the site into a new folder beside ``out_dir``, then swap it in at once: never a half-written site.

    The pages, the stylesheets, the marker and ``manifest.json`` go into
    ``.<name>.staging-<pid>-<random>/`` beside ``out_dir`` and are flushed to
    disk; then the two folders trade places in one atomic step (Linux's
    ``renameat2`` with ``RENAME_EXCHANGE``), so ``out_dir`` holds a whole
    site, the old one or the new one, whenever the process is killed or the
    power fails. Where that call is unavailable (another system, a file
    system without it) the old site is renamed aside and the new one renamed
    in, and for that instant ``out_dir`` is absent. The previous site is
    then deleted, and so are staging folders that killed builds left
    behind (each build locks its own, so a running build's is never taken
    for one). ``out_dir`` stays a real folder: copying, syncing or
    committing it works as before.

    Nothing is written when ``out_dir`` is a file, or a folder that is not
    empty and holds neither Dossier's marker nor a Dossier manifest.
    ``report`` (a :class:`BuildReport`) is told of the files as they are written, then of the links' check.
    """
    import os
    import secrets

    from dossier.durable import fsync_path, fsync_tree

    out_dir = Path(out_dir).resolve()
    if out_dir.parent == out_dir:
        raise DossierError(f"{out_dir} is the root of the file system. Fix: choose a new or empty folder.")
    _check_replaceable(out_dir)
    out_dir.parent.mkdir(parents=True, exist_ok=True)
    staging = out_dir.with_name(f"{_staging_prefix(out_dir)}{os.getpid()}-{secrets.token_hex(4)}")
    staging.mkdir()  # with the umask's permissions: a site is for everyone to read
    lock = _hold(staging)
    previous = None
    tell = report.stage if report is not None else (lambda stage, done, total: None)
    try:
        tell(STAGE_WRITE, 0, len(pages))
        for done, (rel, text) in enumerate(sorted(pages.items()), 1):
            path = staging / rel
            path.parent.mkdir(parents=True, exist_ok=True)
            if isinstance(text, bytes):
                path.write_bytes(text)
            else:
                path.write_text(text, encoding="utf-8")
            tell(STAGE_WRITE, done, len(pages))
        shutil.copytree(templates_dir() / "assets", staging / "assets")
        (staging / MARKER).write_text("built by dossier; this folder is replaced on every build\n", encoding="utf-8")
        (staging / MANIFEST).write_text(manifest_text(staging, inputs or {}), encoding="utf-8")
        tell(STAGE_LINKS, 0, 1)
        broken = check_links(staging, pages)
        tell(STAGE_LINKS, 1, 1)
        if broken:
            raise DossierError("broken links in the built site: " + "; ".join(broken))
        fsync_tree(staging)  # so that a power cut after the swap finds whole files
        _check_replaceable(out_dir)  # again, just before: the folder may have changed while the pages were written
        previous = _swap_in(staging, out_dir)
        fsync_path(out_dir.parent, folder=True)
    finally:
        if lock is not None:
            os.close(lock)
        for leftover in (staging, previous):  # a half-written build, or the previous site
            if leftover is not None and os.path.lexists(leftover):
                shutil.rmtree(leftover, ignore_errors=True)
    _remove_abandoned(out_dir)


def draw_figures(project: Project, result: SystemResult, cache=None) -> dict:
    """Every figure of one system's page: ``system``, ``claims``, ``stars`` (lists) and ``logs`` (by pair).

    Drawing is most of a build's time, so with a :class:`dossier.cache.Cache`
    the figures are kept under a key made of the system's evidence content
    hash (its evidence, log, references and settings) and the hash of
    Dossier's source: an unchanged system is not drawn again.
    """
    from dataclasses import asdict

    from dossier.draw import (
        Figure,
        draw_detections,
        draw_ephemeris,
        draw_log,
        draw_neighbours,
        draw_spectroscopic,
        draw_stars,
        draw_system,
    )
    from dossier.release import content_hash, evidence_files

    def compute() -> dict:
        return {
            "system": [asdict(f) for f in draw_system(result)],
            "claims": [asdict(f) for f in draw_detections(result) + [
                f for pid in result.facts.rv_orbits for f in draw_spectroscopic(result, pid)]],
            "logs": {pid: [asdict(f) for f in draw_log(result, pid) + draw_ephemeris(result, pid)]
                     for pid in result.facts.logs},
            "stars": [asdict(f) for f in draw_stars(result) + draw_neighbours(result)],
        }

    sid = result.system.id
    if cache is None:
        data = compute()
    else:
        key = {"evidence": content_hash(evidence_files(project.root, sid)), "code": code_hash()}
        data = cache.get_or_compute(f"figures-{sid}", key, compute)
    as_figures = lambda items: [Figure(**item) for item in items]  # noqa: E731
    return {"system": as_figures(data["system"]), "claims": as_figures(data["claims"]),
            "stars": as_figures(data["stars"]), "logs": {pid: as_figures(v) for pid, v in data["logs"].items()}}


#: A site built from cached units must equal one built afresh; bump when :func:`system_unit` changes shape.
UNIT_FORMAT = 2
#: Libraries whose versions can change a page, a figure or a number: part of every cache key of a build.
OUTPUT_PACKAGES = ("numpy", "scipy", "astropy", "pyerfa", "matplotlib", "jinja2", "markdown-it-py", "pydantic",
                   "emcee")
#: Below this many systems to weigh, draw and render, a build stays in one process (a worker takes seconds to start).
PARALLEL_MIN = 8


@functools.lru_cache(maxsize=1)
def _output_code_hash() -> str:
    """SHA-256 of everything besides the inputs that shapes a built page: Dossier's source, its templates
    and stylesheets, and the versions of the libraries that compute, draw and write."""
    import hashlib
    from importlib.metadata import PackageNotFoundError, version

    digest = hashlib.sha256(code_hash().encode())
    base = templates_dir()
    for path in sorted(p for p in base.rglob("*") if p.is_file()):
        digest.update(path.relative_to(base).as_posix().encode() + b"\0" + hashlib.sha256(path.read_bytes()).digest())
    for name in OUTPUT_PACKAGES:
        try:
            found = version(name)
        except PackageNotFoundError:
            found = "-"
        digest.update(f"{name} {found}\n".encode())
    return digest.hexdigest()


def _digest(path: Path) -> str | None:
    return _sha256(path) if path.is_file() else None


def _unit_keys(root: Path, folders: list[str], releases: dict[str, list], pdf: bool) -> dict[str, dict]:
    """The cache key of each system's unit: everything its pages depend on.

    Its evidence and log, the settings and references (every page shows
    them), the seals of its releases (each seal covers the release's files),
    whether pages link a PDF, and :func:`_output_code_hash`. No other system
    enters a system's pages: they link only to their own files and the
    catalogue's.
    """
    from dossier.schema.loader import REFERENCES_FILE, SETTINGS_FILE

    shared = [_digest(root / SETTINGS_FILE), _digest(root / REFERENCES_FILE)]
    code = _output_code_hash()
    keys = {}
    for sid in folders:
        folder = root / "systems" / sid
        seals = []
        for rel in releases.get(sid, []):
            try:
                seals.append([rel.number, rel.meta.get("seal")])
            except (OSError, ValueError, AttributeError):
                seals.append([rel.number, None])
        keys[sid] = {"format": UNIT_FORMAT, "code": code, "pdf": pdf, "shared": shared,
                     "evidence": _digest(folder / "evidence.yaml"), "log": _digest(folder / "log.csv"),
                     "releases": seals}
    return keys


def _compute_unit(project: Project, sid: str, releases: list, pdf: bool, cache, key: dict | None,
                  step=None) -> dict:
    """Weigh, draw and render one system (:func:`system_unit`); keep it in the cache under ``key``.

    It is kept only if the system's files still have the hashes of ``key``:
    a file edited while the build ran must not be cached under its old content.
    ``step(stage)`` is called as each of the three stages is done.
    """
    from dossier.engine import weigh_system

    step = step if step is not None else (lambda stage: None)
    result = weigh_system(project.systems[sid], project.settings, project.logs.get(sid, ()), cache)
    step(STAGE_WEIGH)
    drawn = draw_figures(project, result, cache)
    step(STAGE_DRAW)
    unit = system_unit(project, result, drawn, releases, pdf)
    step(STAGE_RENDER)
    if cache is not None and key is not None:
        folder = project.root / "systems" / sid
        if (_digest(folder / "evidence.yaml"), _digest(folder / "log.csv")) == (key["evidence"], key["log"]):
            _store_unit(cache, sid, key, unit)
    return unit


def _store_unit(cache, sid: str, key: dict, unit: dict) -> None:
    """The pages as UTF-8 one after the other behind a line of JSON that names them and their sizes (reading
    hundreds of megabytes of pages back is then a copy, not a JSON parse), the rest as JSON."""
    names = sorted(unit["pages"])
    data = [unit["pages"][name].encode("utf-8") for name in names]
    head = json.dumps({"names": names, "sizes": [len(d) for d in data]}).encode() + b"\n"
    cache.put_bytes(f"site-pages-{sid}", key, head + b"".join(data))
    cache.put_json(f"site-unit-{sid}", key, {k: v for k, v in unit.items() if k != "pages"})


def _cached_unit(cache, sid: str, key: dict) -> dict | None:
    unit = cache.get_json(f"site-unit-{sid}", key)
    packed = cache.get_bytes(f"site-pages-{sid}", key) if unit is not None else None
    if packed is None:
        return None
    try:
        end = packed.index(b"\n")
        head = json.loads(packed[:end])
        pages, at = {}, end + 1
        for name, size in zip(head["names"], head["sizes"]):
            pages[name] = packed[at:at + size].decode("utf-8")
            at += size
    except (ValueError, KeyError, TypeError):
        return None
    if at != len(packed):
        return None
    return {**unit, "pages": pages}


_WORKER: dict = {}


def _start_unit_worker(base: Project, pdf: bool, use_cache: bool) -> None:
    from dossier.cache import Cache

    _WORKER.update(base=base, pdf=pdf, cache=Cache(base.root) if use_cache else None)


def _unit_job(sid: str, system, logs: tuple, releases: list, key: dict) -> dict:
    import dataclasses

    base = _WORKER["base"]
    project = dataclasses.replace(base, systems={sid: system}, logs={sid: logs})
    return _compute_unit(project, sid, releases, _WORKER["pdf"], _WORKER["cache"], key)


def _compute_units(project: Project, todo: list[str], releases: dict[str, list], keys: dict[str, dict], pdf: bool,
                   cache, workers: int | None, progress, report: BuildReport | None = None) -> dict[str, dict]:
    """The units of the systems in ``todo``, in that order: in this process, or over the CPU cores.

    A process pool (spawned, like :func:`render_pdfs`) pays off only for
    many systems, so ``workers=None`` uses one when there are at least
    :data:`PARALLEL_MIN`; each worker weighs, draws and renders whole
    systems, and the result is the same bytes whichever process made it.
    ``progress(done, total)`` is called after each system; ``report`` (a
    :class:`BuildReport`) is told of each stage of each system in this process,
    and of all three at once as a worker finishes a system.
    """
    import os

    total = len(todo)
    if workers is None:
        workers = (os.cpu_count() or 1) if total >= PARALLEL_MIN else 1
    workers = min(workers, total)
    done: dict[str, dict] = {}
    report = report if report is not None else BuildReport()
    for stage in SYSTEM_STAGES:
        if total:
            report.stage(stage, 0, total)
    if workers <= 1:
        for sid in todo:
            step = functools.partial(lambda n, stage: report.stage(stage, n, total), len(done) + 1)
            done[sid] = _compute_unit(project, sid, releases.get(sid, []), pdf, cache, keys.get(sid), step)
            if progress is not None:
                progress(len(done), total)
        return done
    import dataclasses
    from concurrent.futures import ProcessPoolExecutor, as_completed
    from multiprocessing import get_context

    base = dataclasses.replace(project, systems={}, logs={})
    with ProcessPoolExecutor(max_workers=workers, mp_context=get_context("spawn"), initializer=_start_unit_worker,
                             initargs=(base, pdf, cache is not None)) as pool:
        futures = {pool.submit(_unit_job, sid, project.systems[sid], project.logs.get(sid, ()),
                               releases.get(sid, []), keys.get(sid)): sid for sid in todo}
        for future in as_completed(futures):
            done[futures[future]] = future.result()
            for stage in SYSTEM_STAGES:
                report.stage(stage, len(done), total)
            if progress is not None:
                progress(len(done), total)
    return {sid: done[sid] for sid in todo}


def _input_hashes(root: Path) -> dict[str, str]:
    """:func:`input_hashes` of a project folder not loaded."""
    return {p.relative_to(root).as_posix(): _sha256(p) for p in input_files(root) if p.is_file()}


def _files_of(folder: Path) -> dict[str, list[int]]:
    """Size and modification time (ns) of every file under a folder, by relative path."""
    import os

    out = {}
    for parent, dirs, files in os.walk(folder):
        dirs.sort()
        for name in sorted(files):
            path = os.path.join(parent, name)
            st = os.stat(path)
            out[os.path.relpath(path, folder).replace(os.sep, "/")] = [st.st_size, st.st_mtime_ns]
    return out


def _site_state(out: Path, inputs: dict[str, str], pdf: bool) -> tuple[dict, str]:
    """(cache key of the record of the last site built into ``out``, what this build would make of it)."""
    import hashlib
    from importlib.metadata import PackageNotFoundError, version

    try:
        engine = version("weasyprint") if pdf else None  # the PDFs' cache key names it too
    except PackageNotFoundError:
        engine = None
    text = json.dumps({"inputs": inputs, "pdf": pdf, "pdf_engine": engine, "code": _output_code_hash(),
                       "version": __version__}, sort_keys=True)
    return {"out": str(out.resolve())}, hashlib.sha256(text.encode()).hexdigest()


def _site_is_current(cache, out: Path, inputs: dict[str, str], pdf: bool) -> bool:
    """Whether ``out`` holds, untouched, the site this build would write.

    After each build the cache records the hash of its inputs, options and
    code, and the size and modification time of every file it wrote; when
    all of them are the same, so is the site, and nothing needs doing.
    """
    where, made_of = _site_state(out, inputs, pdf)
    record = cache.get_json("site-state", where)
    if not record or record.get("made_of") != made_of or not (out / MANIFEST).is_file():
        return False
    return _files_of(out) == record.get("files")


def _record_site(cache, out: Path, inputs: dict[str, str], pdf: bool, counts: BuildCounts | None = None) -> None:
    where, made_of = _site_state(out, inputs, pdf)
    record = {"made_of": made_of, "files": _files_of(out)}
    if counts is not None:  # for the summary of a later build that finds the site current
        from dataclasses import asdict

        record["counts"] = {k: v for k, v in asdict(counts).items() if k not in ("computed", "written")}
    cache.put_json("site-state", where, record)


def _recorded_counts(cache, out: Path, inputs: dict[str, str], pdf: bool) -> BuildCounts | None:
    """What the site that :func:`_site_is_current` found current holds, as its build recorded it."""
    where, _ = _site_state(out, inputs, pdf)
    try:
        return BuildCounts(**(cache.get_json("site-state", where) or {})["counts"], computed=0, written=False)
    except (KeyError, TypeError):
        return None


#: The stages of a build, in order, as :class:`BuildReport` names them. The first three go system by system.
STAGE_WEIGH, STAGE_DRAW, STAGE_RENDER = "weighing systems", "drawing figures", "rendering pages"
STAGE_PDFS, STAGE_CATALOGUE = "rendering PDFs", "rendering the catalogue"
STAGE_WRITE, STAGE_LINKS = "writing files", "checking links"
SYSTEM_STAGES = (STAGE_WEIGH, STAGE_DRAW, STAGE_RENDER)
STAGES = (*SYSTEM_STAGES, STAGE_PDFS, STAGE_CATALOGUE, STAGE_WRITE, STAGE_LINKS)


@dataclass(frozen=True)
class BuildCounts:
    """What a built site holds: its systems (``computed`` of them by this build, the others from the cache),
    HTML pages, PDFs and figures; ``written`` is false when the site was current and nothing was written."""

    systems: int
    pages: int
    pdfs: int
    figures: int
    computed: int = 0
    written: bool = True

    @classmethod
    def of(cls, systems: int, computed: int, pages: dict[str, str | bytes]) -> BuildCounts:
        html = [text for rel, text in pages.items() if rel.endswith(".html")]
        return cls(systems=systems, pages=len(html), pdfs=sum(rel.endswith(".pdf") for rel in pages),
                   figures=sum(text.count('<figure id="figure-') for text in html), computed=computed)


class BuildReport:
    """What :func:`build` tells as it goes; this one listens to nothing (the command line's draws a bar per stage).

    ``stage(name, done, total)``: a stage of :data:`STAGES` has ``done`` of
    its ``total`` steps done; each stage that runs is first told with
    ``done=0`` and last with ``done == total``. Stages with nothing to do are
    not told of, and a build that finds its site current tells of none.
    ``finished(counts)``: the site is built (:class:`BuildCounts`), or was current.
    """

    def stage(self, name: str, done: int, total: int) -> None:
        pass

    def finished(self, counts: BuildCounts) -> None:
        pass


def _load_systems(root: Path, folders: list[str], todo: list[str], folder_problems: list) -> Project:
    """The project with the systems of ``todo`` loaded and validated (all of them when many are needed).

    The others were valid when their units were cached, under the same
    settings and references. Any problem makes the whole project load
    again, so that every problem is reported at once, as ``dossier check`` does.
    """
    from dossier.errors import ProblemsFound
    from dossier.schema.loader import load_settings

    if folder_problems or not folders or 3 * len(todo) > len(folders):
        return load_project(root)
    if not todo:
        settings, problems = load_settings(root)
        if problems or settings is None:
            return load_project(root)  # raises with every problem
        return Project(root=root, settings=settings, references={})
    try:
        loaded = [load_project(root, only=sid) for sid in todo]
    except ProblemsFound:
        load_project(root)  # every problem of the project at once
        raise
    project = loaded[0]
    for one in loaded[1:]:
        project.systems.update(one.systems)
        project.logs.update(one.logs)
    return project


def build(project_dir: Path | str, out_dir: Path | str, pdf: bool = True, use_cache: bool = True,
          workers: int | None = None, progress=None, report: BuildReport | None = None) -> Path:
    """Build the site of a project into ``out_dir``; return its index page.

    Every system gets its page, a PDF of it (unless ``pdf`` is false, for
    quick previews), its frozen releases and their "what changed" pages.
    ``use_cache=False`` computes everything afresh (fits, figures, pages and
    PDFs), ignoring ``<project>/.dossier-cache/``.
    A release that fails :func:`dossier.release.verify_releases` stops the
    build before anything is written.

    Incremental: each system's pages and what the catalogue takes from it
    are cached as one unit (:func:`system_unit`) under the hashes of its
    files, the settings, the references and the code (:func:`_unit_keys`),
    so an unchanged system is neither loaded, weighed, drawn nor rendered
    again; when nothing at all changed and ``out_dir`` still holds the last
    build, nothing is written. Systems to compute are spread over
    ``workers`` processes (default: the CPU cores, when there are many
    systems); ``progress(done, total)`` is called as each is finished. The
    site is byte-identical whichever way it was made.

    ``report`` (a :class:`BuildReport`) is told of each stage as it goes
    (:data:`STAGES`), and at the end of what the site holds. Nothing here
    reads the clock: the command line times the build.
    """
    from dossier.cache import Cache
    from dossier.release import all_releases, verify_releases
    from dossier.schema.loader import system_folders

    root, out = Path(project_dir), Path(out_dir)
    if not root.is_dir():
        load_project(root)  # raises: not a project folder
    cache = Cache(root) if use_cache else None
    inputs = _input_hashes(root)
    if cache is not None and _site_is_current(cache, out, inputs, pdf):
        counts = _recorded_counts(cache, out, inputs, pdf)
        if report is not None and counts is not None:
            report.finished(counts)
        return out.resolve() / "index.html"
    folders, folder_problems = system_folders(root)
    releases = {sid: found for sid, found in all_releases(root).items() if sid in folders}
    keys = _unit_keys(root, folders, releases, pdf)
    units = {sid: _cached_unit(cache, sid, keys[sid]) for sid in folders} if cache is not None else {}
    todo = [sid for sid in folders if units.get(sid) is None]
    project = _load_systems(root, folders, todo, folder_problems)
    altered = verify_releases(root)
    if altered:
        raise DossierError("the project's releases were altered, and releases are immutable: " + "; ".join(altered)
                           + ". Nothing was written. Fix: restore them (e.g. git checkout -- releases/).")
    units.update(_compute_units(project, todo, releases, keys, pdf, cache, workers, progress, report))
    pages = site_pages(project.settings, root, {sid: units[sid] for sid in folders}, releases, pdf=pdf,
                       use_cache=use_cache, report=report)
    counts = BuildCounts.of(len(folders), len(todo), pages)
    write_site(out, pages, inputs, report)
    if cache is not None:
        _record_site(cache, out, inputs, pdf, counts)
    if report is not None:
        report.finished(counts)
    return out.resolve() / "index.html"


__all__ = ["build", "site_pages", "system_unit", "write_site", "check_links", "doc_sections", "BY_ID", "system_dict"]
