"""``dossier log``: add measures to a system's observing log, one at a time or from a spreadsheet.

Thin like :mod:`dossier.cli`: parse, call :mod:`dossier.logbook`, print.
Problems are raised as :class:`~dossier.errors.ProblemsFound` and printed by
the main group (one line each, exit 1, no traceback).
"""

from __future__ import annotations

import sys
import typing
from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import TypeVar

import click

from dossier.schema.log import Method

T = TypeVar("T")

#: Imports with more rows than this show a progress bar (on a terminal).
PROGRESS_ROWS = 200

_project = click.argument("project", type=click.Path(file_okay=False, path_type=Path))
_system = click.argument("system_id", metavar="SYSTEM")


@click.group()
def log() -> None:
    """Keep a system's observing log (systems/<id>/log.csv)."""


@log.command()
@_project
@_system
@click.argument("pair")
@click.option("--epoch", required=True, help="J2019.4123 (Julian year), B1950.512 (Besselian year) or an ISO "
              "date/time such as 2019-05-03T22:10 (UTC).")
@click.option("--theta", required=True, metavar="DEG", help="Position angle, north through east [deg].")
@click.option("--rho", required=True, metavar="ARCSEC", help="Separation [arcsec].")
@click.option("--method", required=True, type=click.Choice(typing.get_args(Method)), help="How it was measured.")
@click.option("--theta-error", metavar="DEG", help="1σ uncertainty of θ [deg].")
@click.option("--rho-error", metavar="ARCSEC", help="1σ uncertainty of ρ [arcsec].")
@click.option("--delta-mag", metavar="MAG", help="Magnitude difference [mag].")
@click.option("--band", help="Photometric band of --delta-mag.")
@click.option("--equinox", type=click.Choice(["J2000", "date"]),
              help="Equinox θ is referred to [default: 'date' for micrometer and eyepiece methods, else J2000].")
@click.option("--aperture-cm", metavar="CM", help="Telescope aperture [cm].")
@click.option("--observer", help="Who measured.")
@click.option("--site", help="Where.")
@click.option("--nights", metavar="N", help="Number of nights averaged in this measure.")
@click.option("--quality", help="Seeing or quality note, in the observer's words.")
@click.option("--notes", help="Anything else.")
@click.option("--ref", metavar="SOURCE-ID", help="Source id in references.yaml, when copied from the literature.")
def add(project: Path, system_id: str, pair: str, **values: str | None) -> None:
    """Add one measure of PAIR to the log of SYSTEM (validated first; exact duplicates refused)."""
    from dossier.logbook import add_measure, describe, shown_log

    appended = add_measure(project, system_id, {"pair": pair, **values})
    click.echo(f"added to {shown_log(system_id)}, line {appended.lines[0]}: {describe(appended.written[0])}")


@log.command("import")
@_project
@_system
@click.argument("file", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--map", "mapping", multiple=True, metavar="COLUMN=FIELD",
              help="Read the file's COLUMN as the log field FIELD (repeatable), e.g. --map PA=theta.")
@click.option("--epoch-format", type=click.Choice(["jyear", "byear"]),
              help="Read epochs written as bare numbers as Julian (jyear) or Besselian (byear) years.")
@click.option("--skip-bad", is_flag=True,
              help="Import the good rows; write the bad ones, with their problems, beside FILE as <name>.rejected.csv.")
def import_(project: Path, system_id: str, file: Path, mapping: tuple[str, ...], epoch_format: str | None,
            skip_bad: bool) -> None:
    """Import the rows of a CSV export into the log of SYSTEM, all or nothing (unless --skip-bad)."""
    from dossier.logbook import import_log, shown_log

    result = import_log(project, system_id, file, mapping=mapping, epoch_format=epoch_format,  # type: ignore[arg-type]
                        skip_bad=skip_bad, track=_track)
    log_file = shown_log(system_id)
    for duplicate in result.appended.duplicates:
        where = (f"the same measure is already in {log_file} at line {duplicate.log_line}"
                 if duplicate.log_line is not None else f"it repeats line {result.source_lines[duplicate.earlier]}")
        click.echo(f"skipped {file}:{result.source_lines[duplicate.index]}: {where}.")
    for rejected in result.rejected:
        for problem in rejected.problems:
            click.echo(str(problem), err=True)
    lines = result.appended.lines
    span = "" if not lines else f" (line {lines[0]})" if len(lines) == 1 else f" (lines {lines[0]}–{lines[-1]})"
    click.echo(f"imported {len(lines)} measure(s) into {log_file}{span}.")
    if result.rejected_file is not None:
        click.echo(f"rejected {len(result.rejected)} bad row(s); they are in {result.rejected_file} "
                   "with their problems in the last column.")


def _track(rows: Sequence[T], count: int) -> Iterable[T]:
    """A progress bar on stderr for long imports, when stderr is a terminal."""
    if count <= PROGRESS_ROWS or not sys.stderr.isatty():
        return rows
    from rich.console import Console
    from rich.progress import track

    return track(rows, total=count, description="checking rows", console=Console(stderr=True), transient=True)
