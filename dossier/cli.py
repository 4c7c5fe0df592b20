"""Command line: parse arguments, call the library, turn errors into messages and exit codes.

Heavy libraries (scipy, matplotlib, astropy) are imported inside the
commands that need them, so ``dossier --help`` and ``dossier check`` start
quickly. Tracebacks are shown only with ``--debug``.

Exit codes: 0 success; 1 problems found (or a failed check); 2 an error the
user can act on (:class:`~dossier.errors.DossierError`) or a usage error;
74 (``EX_IOERR`` of sysexits.h) the system refused a read or a write (no
such file, permission denied, disk full); 70 (``EX_SOFTWARE``) a bug in
Dossier: the full traceback goes into a crash report file (see
:func:`write_crash_report`) and the user is asked to send it.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import click

from dossier import __version__
from dossier.errors import DossierError, ProblemsFound


#: sysexits.h: an internal software error (a bug), and an input/output error of the system.
EX_SOFTWARE = 70
EX_IOERR = 74
#: Key packages whose versions a crash report names (read from their metadata, never imported).
REPORTED_PACKAGES = ("click", "pydantic", "jinja2", "ruamel.yaml", "numpy", "scipy", "astropy", "matplotlib",
                     "weasyprint", "markdown-it-py", "rich", "pyarrow")


def crash_report_text(exc: BaseException) -> str:
    """A crash report: Dossier's and Python's versions, the platform, the command line and the full traceback."""
    import datetime as dt
    import os
    import platform
    import shlex
    import traceback
    from importlib.metadata import PackageNotFoundError, version

    def installed(name: str) -> str:
        try:
            return version(name)
        except PackageNotFoundError:
            return "not installed"

    lines = [
        "Dossier crash report",
        f"dossier: {__version__}",
        f"python: {sys.version.replace(chr(10), ' ')} ({sys.executable})",
        f"platform: {platform.platform()}",
        f"command line: {shlex.join(sys.argv)}",
        f"working folder: {os.getcwd()}",
        f"time: {dt.datetime.now(dt.timezone.utc).replace(microsecond=0).isoformat()}",
        "packages: " + ", ".join(f"{name} {installed(name)}" for name in REPORTED_PACKAGES),
        "",
        *traceback.format_exception(exc),
    ]
    return "\n".join(line.rstrip("\n") for line in lines) + "\n"


def write_crash_report(exc: BaseException) -> Path:
    """Write :func:`crash_report_text` to a new file in the system's temporary folder; return its path.

    The temporary folder (``$TMPDIR``, else ``/tmp``), not the project: a
    crash may happen before a project is known, or in a project that cannot
    be written. The file is readable by its owner only (it holds paths).
    """
    import datetime as dt
    import os
    import tempfile

    stamp = dt.datetime.now(dt.timezone.utc).strftime("%Y%m%dT%H%M%SZ")
    fd, name = tempfile.mkstemp(prefix=f"dossier-crash-{stamp}-", suffix=".txt")
    with os.fdopen(fd, "w", encoding="utf-8") as handle:
        handle.write(crash_report_text(exc))
    return Path(name)


def _os_error_text(exc: OSError) -> str:
    """``Permission denied: '/some/path'``: what the system said, and about which file(s)."""
    said = exc.strerror or str(exc)
    if exc.filename is not None and exc.filename2 is not None:
        return f"{said}: {exc.filename!r} -> {exc.filename2!r}"
    if exc.filename is not None:
        return f"{said}: {exc.filename!r}"
    return said


class _Group(click.Group):
    def invoke(self, ctx: click.Context):
        try:
            return super().invoke(ctx)
        except ProblemsFound as exc:
            fmt = ctx.meta.get("problem_format", "text")
            if fmt == "json":
                click.echo(json.dumps([p.to_dict() for p in exc.problems], indent=2, ensure_ascii=False))
            else:
                for problem in exc.problems:
                    click.echo(str(problem), err=True)
                click.echo(f"{len(exc.problems)} problem(s) found.", err=True)
            if ctx.meta.get("debug"):
                raise
            ctx.exit(exc.exit_code)
        except DossierError as exc:
            if ctx.meta.get("debug"):
                raise
            click.echo(f"error: {exc}", err=True)
            ctx.exit(exc.exit_code)
        except (click.exceptions.Exit, click.exceptions.Abort, click.ClickException):
            raise  # click's own ways out (Exit and Abort are RuntimeErrors): it prints and exits
        except OSError as exc:
            import errno

            if ctx.meta.get("debug") or exc.errno == errno.EPIPE:  # a closed pipe (| head): click ends quietly
                raise
            click.echo(f"error: {_os_error_text(exc)}. Fix: check that the path exists, that you may read and write "
                       "it, and that its disk has room (--debug shows where it happened).", err=True)
            ctx.exit(EX_IOERR)
        except Exception as exc:  # a bug: a short note and a crash report, not a traceback
            if ctx.meta.get("debug"):
                raise
            click.echo(f"Dossier {__version__} hit an internal error (this is a bug, not a problem with your files): "
                       f"{type(exc).__name__}: {exc}", err=True)
            try:
                report = write_crash_report(exc)
            except OSError:  # nowhere to write it: show it here instead
                click.echo(crash_report_text(exc), err=True, nl=False)
                click.echo("Please send the report above to the maintainers with the command you ran.", err=True)
            else:
                click.echo(f"Please send {report} to the maintainers with the command you ran.", err=True)
            ctx.exit(EX_SOFTWARE)


@click.group(cls=_Group, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="dossier")
@click.option("--debug", is_flag=True, help="Show tracebacks instead of plain messages.")
@click.pass_context
def cli(ctx: click.Context, debug: bool) -> None:
    """Weigh the evidence that the stars of a multiple system belong together."""
    ctx.meta["debug"] = debug


project_arg = click.argument("project", type=click.Path(file_okay=False, path_type=Path))


@cli.command()
@project_arg
@click.option("--format", "fmt", type=click.Choice(["text", "json"]), default="text", show_default=True,
              help="How to print the problems.")
@click.pass_context
def check(ctx: click.Context, project: Path, fmt: str) -> None:
    """Validate a whole project folder and print every problem at once."""
    from dossier.schema.loader import load_project

    ctx.meta["problem_format"] = fmt
    loaded = load_project(project)
    if fmt == "json":
        click.echo("[]")
    else:
        n = len(loaded.systems)
        click.echo(f"{project}: {n} system(s), {len(loaded.references)} source(s): no problems found.")


@cli.command()
@project_arg
@click.option("--system", "system_id", metavar="ID", help="Weigh only this system.")
@click.option("--json", "as_json", is_flag=True, help="Print stable JSON (see docs/weigh-json.md).")
def weigh(project: Path, system_id: str | None, as_json: bool) -> None:
    """Run every rule and print, per pair, the status, its probability and the assessments."""
    from dossier.engine import weigh_project
    from dossier.report import print_results, to_json
    from dossier.schema.loader import load_project

    loaded = load_project(project, only=system_id)
    results = weigh_project(loaded)
    if as_json:
        sys.stdout.write(to_json(loaded.settings.project.title, results))
    else:
        from rich.console import Console

        print_results(Console(), results, loaded.settings.pair_model.model_limit)


class BuildStages:
    """What the build command shows of a build's stages (a :class:`dossier.site.BuildReport`).

    With ``show``, a bar per stage on standard error (or on ``console``), made
    at the first stage told of: a build that finds its site current shows none.
    The bars stay, each with its count and time, above the line that ends the
    build; they go to the terminal only, never into a file of the site.
    """

    def __init__(self, stack, show: bool, console=None) -> None:
        self.stack, self.show, self.console = stack, show, console
        self.bars = None
        self.tasks: dict[str, int] = {}
        self.counts = None  # dossier.site.BuildCounts, when the build is finished

    def stage(self, name: str, done: int, total: int) -> None:
        if not self.show:
            return
        if self.bars is None:
            from rich.console import Console
            from rich.progress import BarColumn, MofNCompleteColumn, Progress, TimeElapsedColumn

            self.bars = self.stack.enter_context(Progress(
                "[progress.description]{task.description}", BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
                console=self.console if self.console is not None else Console(stderr=True)))
        if name not in self.tasks:
            self.tasks[name] = self.bars.add_task(name, total=total)
        self.bars.update(self.tasks[name], completed=done, total=total)

    def finished(self, counts) -> None:
        self.counts = counts


def build_summary(index: Path, counts, seconds: float) -> str:
    """The line that ends a build: where the site is, what it holds (``counts``, a
    :class:`dossier.site.BuildCounts`, or None when unknown) and how long the build took."""

    def n(k: int, word: str) -> str:
        return f"{k} {word}" + ("" if k == 1 else "s")

    took = f"in {seconds:.1f} s"
    if counts is None:
        return f"Built {index.parent} {took} — open {index}"
    systems = n(counts.systems, "system")
    if counts.written and counts.computed < counts.systems:
        systems += f" ({counts.systems - counts.computed} from the cache)"
    held = f"{systems}, {n(counts.pages, 'page')}, {n(counts.pdfs, 'PDF')}, {n(counts.figures, 'figure')}"
    where = f"{index.parent}" if counts.written else f"{index.parent} (unchanged, nothing written)"
    return f"Built {where}: {held} {took} — open {index}"


@cli.command()
@project_arg
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False, path_type=Path),
              help="Folder to write the site into (created; its previous content is replaced).")
@click.option("--pdf/--no-pdf", default=True, show_default=True,
              help="Write a PDF of each dossier (--no-pdf for a quicker preview).")
@click.option("--progress/--no-progress", default=None,
              help="Show a progress bar per stage on standard error: systems weighed, figures drawn, pages "
                   "rendered, PDFs, files written, links checked (default: when standard error is a terminal).")
@click.option("--jobs", type=click.IntRange(min=1), metavar="N",
              help="Processes that weigh, draw and render changed systems (default: one per CPU core when "
                   "there are many, else one).")
def build(project: Path, out_dir: Path, pdf: bool, progress: bool | None, jobs: int | None) -> None:
    """Build the static dossier site of a project, its releases and a PDF of each dossier.

    Unchanged systems come from the project's cache (.dossier-cache/); when
    nothing changed since the last build into the same folder, nothing is written.
    The last line says what the site holds and how long the build took.
    """
    import contextlib
    import time

    started = time.perf_counter()
    from dossier.site import build as build_site

    show = sys.stderr.isatty() if progress is None else progress
    with contextlib.ExitStack() as stack:
        stages = BuildStages(stack, show)
        index = build_site(project, out_dir, pdf=pdf, workers=jobs, report=stages)
    click.echo(build_summary(index, stages.counts, time.perf_counter() - started))


@cli.command()
@project_arg
@click.option("--port", type=click.IntRange(0, 65535), default=8000, show_default=True,
              help="Port to listen on (0 picks a free one).")
@click.option("--host", default="127.0.0.1", show_default=True,
              help="Address to listen on, and only this one.")
@click.option("--pdf/--no-pdf", default=False, show_default=True,
              help="Also write a PDF of each dossier (slower rebuilds).")
def serve(project: Path, port: int, host: str, pdf: bool) -> None:
    """Preview the site: build it into a temporary folder, serve it, rebuild it when the evidence changes.

    The project's input files are checked twice a second; a rebuild that
    fails prints the problems and keeps serving the previous site. Ctrl-C
    stops the server and removes the temporary folder.
    """
    import signal

    from dossier.serve import Server

    server = Server(project, host=host, port=port, pdf=pdf, echo=click.echo)
    previous = signal.signal(signal.SIGTERM, signal.default_int_handler)  # 'kill' stops as cleanly as Ctrl-C
    try:
        click.echo(f"Building {project}…")
        server.start()
        click.echo(f"Serving {project} at {server.url} — rebuilt when the evidence changes; Ctrl-C to stop.")
        server.wait()
    except KeyboardInterrupt:
        click.echo("Stopping.")
    finally:
        server.stop()
        signal.signal(signal.SIGTERM, previous)


@cli.command()
@click.argument("path", type=click.Path(file_okay=False, path_type=Path))
def verify(path: Path) -> None:
    """Check a built site against its manifest.json, or a project's releases against their records.

    PATH is a folder written by 'dossier build' (every file's SHA-256 against
    manifest.json) or a project folder (every release's files, content hash,
    seal and link to the release before it).
    """
    from dossier.site import MANIFEST, verify_site

    if (path / MANIFEST).is_file():
        problems, what = verify_site(path), "every file matches its manifest"
    elif (path / "dossier.toml").is_file():
        from dossier.release import all_releases, verify_releases

        problems = verify_releases(path)
        count = sum(len(found) for found in all_releases(path).values())
        what = f"{count} release(s), every one intact"
    else:
        raise DossierError(f"{path} holds neither manifest.json nor dossier.toml. Fix: give a built site or a "
                           "project folder.")
    for line in problems:
        click.echo(f"{path}: {line}", err=True)
    if problems:
        raise SystemExit(1)
    click.echo(f"{path}: {what}.")


@cli.command()
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path), default=Path("schemas"),
              show_default=True, help="Folder for the JSON Schema files.")
def schema(out_dir: Path) -> None:
    """Write the JSON Schemas of the evidence, references and settings files."""
    from dossier.schema.jsonschema import write_schemas

    for path in write_schemas(out_dir):
        click.echo(f"wrote {path}")


@cli.command()
@project_arg
@click.argument("system_id", metavar="SYSTEM-ID")
def new(project: Path, system_id: str) -> None:
    """Scaffold a new system's evidence file with commented examples."""
    from dossier.scaffold import new_system

    path = new_system(project, system_id)
    click.echo(f"created {path} — fill it in, then run: dossier check {project}")


from dossier.cli_log import log as _log; cli.add_command(_log)
from dossier.cli_release import diff as _diff, release as _release; cli.add_command(_release); cli.add_command(_diff)


@cli.command()
@click.argument("pairs", type=click.Path(path_type=Path))
@click.option("--out", "out_path", required=True, type=click.Path(path_type=Path),
              help="Result: a .csv or .parquet file; with --engine dask, a folder of Parquet parts (written only "
                   "when every pair was screened).")
@click.option("--map", "mapping", multiple=True, metavar="COLUMN=FIELD", help="Read COLUMN as FIELD (repeatable).")
@click.option("--settings", "settings_path", type=click.Path(dir_okay=False, path_type=Path),
              help="A dossier.toml whose verdict thresholds, rule settings and field-star densities to use.")
@click.option("--chunk", "chunk_rows", type=click.IntRange(min=1000), default=250_000, show_default=True,
              help="Pairs per chunk: memory grows with it. With --engine dask, also the size of a partition.")
@click.option("--engine", type=click.Choice(["local", "dask"]), default="local", show_default=True,
              help="local: stream the table in this process; dask: screen the partitions of a Parquet file or "
                   "of a folder of Parquet (or CSV) files in parallel on a dask cluster.")
@click.option("--scheduler", metavar="ADDRESS",
              help="With --engine dask: a running dask scheduler, like tcp://host:8786 (its workers must see PAIRS "
                   "and RESULT at the same paths). Default: a local cluster on this machine's cores.")
@click.option("--workers", type=click.IntRange(min=1),
              help="With --engine dask and no --scheduler: worker processes of the local cluster (default: one "
                   "per core).")
def screen(pairs: Path, out_path: Path, mapping: tuple[str, ...], settings_path: Path | None, chunk_rows: int,
           engine: str, scheduler: str | None, workers: int | None) -> None:
    """Screen a table of candidate pairs (CSV or Parquet) with the pair rules and the verdict.

    With --engine dask, PAIRS may be a folder of Parquet files (a partitioned dataset) and RESULT is a
    folder of Parquet parts, one per partition, in the order of the input.
    """
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TimeElapsedColumn

    from dossier.screen import parse_map, screen as run_screen, screen_dask

    if engine == "local" and (scheduler or workers):
        raise DossierError(f"{'--scheduler' if scheduler else '--workers'} applies to the dask engine only. "
                           "Fix: add --engine dask.")
    if scheduler and workers:
        raise DossierError("--workers sizes the local cluster; a scheduler given with --scheduler has its own "
                           "workers. Fix: leave out one of them.")
    settings = None
    if settings_path is not None:
        settings, problems = load_settings_file(settings_path)
        if problems:
            raise ProblemsFound(problems)
    names = parse_map(mapping)
    with Progress("[progress.description]{task.description}", BarColumn(), MofNCompleteColumn(),
                  TimeElapsedColumn(), transient=True) as bar:
        task = bar.add_task("screening pairs", total=None)
        advance = lambda k: bar.advance(task, k)  # noqa: E731
        if engine == "dask":
            n = screen_dask(pairs, out_path, names, settings, chunk_rows, scheduler=scheduler, workers=workers,
                            progress=advance)
        else:
            n = run_screen(pairs, out_path, names, settings, chunk_rows, progress=advance)
    click.echo(f"screened {n} pair(s) into {out_path}")


@cli.command()
@click.option("--out", "out_path", required=True, type=click.Path(file_okay=False, path_type=Path),
              help="Folder of the report: index.html, reliability.json and figures (replaced as a whole).")
@click.option("--stars", "n_primaries", type=click.IntRange(min=100), default=20_000, show_default=True,
              help="Primary stars of the synthetic sky; each brings its companions and chance neighbours.")
@click.option("--seed", type=int, default=1, show_default=True, help="Seed of the population: same seed, same report.")
@click.option("--settings", "settings_path", type=click.Path(dir_okay=False, path_type=Path),
              help="A dossier.toml whose [pair_model] priors and [verdict] thresholds to check.")
@click.option("--length-scale", "length_scale_kpc", type=click.FloatRange(min=0.01, max=10.0), default=0.25,
              show_default=True, help="Length scale (kpc) of the distance prior of the population and the model.")
def calibrate(out_path: Path, n_primaries: int, seed: int, settings_path: Path | None, length_scale_kpc: float) -> None:
    """Check the verdicts' probabilities on a synthetic population of known truth.

    Draws pairs from the pair model's priors with a generator written apart from it (orbits, field
    kinematics, unresolved companions, magnitude-dependent errors), screens them, and writes reliability
    diagrams, expected calibration errors and a confusion table with abstentions beside a cut-based
    classifier's.
    """
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TimeElapsedColumn

    from dossier.calibrate import calibrate as run_calibration
    from dossier.screen import _default_settings

    settings = _default_settings()
    if settings_path is not None:
        settings, problems = load_settings_file(settings_path)
        if problems:
            raise ProblemsFound(problems)
    with Progress("[progress.description]{task.description}", BarColumn(), MofNCompleteColumn(),
                  TimeElapsedColumn(), transient=True) as bar:
        task = bar.add_task("screening the synthetic pairs", total=None)
        report = run_calibration(out_path, n_primaries, seed, settings, length_scale_kpc,
                                 progress=lambda k: bar.advance(task, k))
    for line in summary_lines(report):
        click.echo(line)
    click.echo(f"report: {out_path / 'index.html'}")


def summary_lines(report: dict) -> list[str]:
    """The targets of a calibration report, one line each, with whether each was met."""
    lines = []
    for target in report.get("targets", []):
        mark = "met" if target.get("met") else "NOT met"
        lines.append(f"{target.get('name')}: {target.get('value')} (target {target.get('target')}) — {mark}")
    return lines


def load_settings_file(path: Path):
    """Settings from a dossier.toml anywhere (its folder is treated as the project)."""
    from dossier.schema.loader import SETTINGS_FILE, load_settings

    if path.name != SETTINGS_FILE:
        raise DossierError(f"--settings {path}: expected a file named {SETTINGS_FILE}. Fix: give a project's "
                           f"{SETTINGS_FILE}.")
    return load_settings(path.parent)


@cli.command(name="plan")
@project_arg
@click.option("--site", "site_text", required=True, metavar="LAT,LON,HEIGHT",
              help="Observing site: degrees north, degrees east, metres.")
@click.option("--date", "date_text", metavar="YYYY-MM-DD", help="Night starting on this date (default: today, UTC).")
@click.option("--min-altitude", type=float, default=30.0, show_default=True, help="Lowest useful altitude (deg).")
@click.option("--limit", type=int, default=20, show_default=True, help="How many pairs to list.")
def plan_command(project: Path, site_text: str, date_text: str | None, min_altitude: float, limit: int) -> None:
    """List the pairs most in need of a measure, with their observable window that night."""
    import datetime as dt

    from rich.console import Console
    from rich.table import Table

    from dossier.engine import weigh_project
    from dossier.errors import DossierError
    from dossier.plan import Site, plan
    from dossier.schema.loader import load_project

    site = Site.parse(site_text)
    try:
        date = dt.date.fromisoformat(date_text) if date_text else dt.datetime.now(dt.timezone.utc).date()
    except ValueError:
        raise DossierError(f"--date '{date_text}' is not a date. Fix: write YYYY-MM-DD.") from None
    targets = plan(weigh_project(load_project(project)), site, date, min_altitude_deg=min_altitude, limit=limit)
    console = Console()
    table = Table(title=f"Night of {date.isoformat()} at {site.latitude_deg:+.3f}°, {site.longitude_deg:+.3f}°, "
                  f"{site.height_m:.0f} m (times UTC)", expand=True)
    for col in ("System", "Pair", "ρ (″)", "Why now", "Window (altitude > %g°, Sun < −12°)" % min_altitude):
        table.add_column(col)
    for t in targets:
        w = t.window
        if w is not None and w.observable:
            window = f"{w.start:%H:%M}–{w.end:%H:%M}, highest {w.max_altitude_deg:.0f}°"
        else:
            window = "not observable in a dark sky tonight"
        table.add_row(t.system, t.pair, "—" if t.rho_arcsec is None else f"{t.rho_arcsec:.2f}", t.reason, window)
    console.print(table)
    console.print("Only targets in a dark sky, far from the Sun, are proposed: looking at the Sun through any "
                  "optical aid blinds.", style="dim")


def main() -> None:
    cli(prog_name="dossier")


if __name__ == "__main__":  # pragma: no cover
    main()
