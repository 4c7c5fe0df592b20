"""Read a system's observing log and add to it safely.

The log is ``systems/<id>/log.csv`` (columns and rules of a row in
:mod:`dossier.schema.log`). Reading reports every bad row as a
:class:`~dossier.errors.Problem` with its line in the file (the header is
line 1; a quoted cell with line breaks makes a row span several lines, and
the row's first line is the one named). An empty cell means "not given";
cells are stripped of surrounding blanks. A byte-order mark is accepted;
text that is not UTF-8, a quote that is never closed, a row with cells
beyond the header or too few cells to reach a required column, a value
that is NaN or infinite and an epoch later than today are problems. An
empty file is an empty log.

Every change happens under an exclusive ``fcntl.flock`` on the sibling file
``log.csv.lock``: inside the lock the current log is read again, exact
duplicates (:meth:`LogMeasure.key`) are refused or skipped, and the whole
new text is written to a temporary file in the same folder, fsynced, renamed
over the log, and the folder fsynced. So two simultaneous adds both land,
and a crash leaves the old log or the new one, never half of one.

Existing rows are kept byte for byte and new rows are appended in the order
of :data:`~dossier.schema.log.COLUMNS`, so a review sees only the added
lines. A log whose header is in another order is rewritten once in the
standard order (its cells kept verbatim). Floats are written with ``repr``,
the shortest text that reads back as the same float, and integers with
``str``; ``None`` is an empty cell.
"""

from __future__ import annotations

import contextlib
import csv
import difflib
import io
import math
import os
import re
import secrets
import stat
import typing
from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal, TypeVar

from pydantic import ValidationError

from dossier.errors import Problem, ProblemsFound
from dossier.schema.loader import REFERENCES_FILE, SYSTEMS_DIR, _message, _suggest, load_project, read_text, shown_value
from dossier.schema.log import COLUMNS, LOG_FILE, LogMeasure
from dossier.schema.models import future_epoch_error

LOCK_SUFFIX = ".lock"
REJECTED_SUFFIX = ".rejected.csv"
#: The ``file`` of problems with values typed on the command line.
COMMAND_LINE = "command line"
#: Columns a row cannot do without.
REQUIRED: tuple[str, ...] = tuple(name for name in COLUMNS if LogMeasure.model_fields[name].is_required())

EpochFormat = Literal["jyear", "byear"]
_EPOCH_PREFIX = {"jyear": "J", "byear": "B"}
_BARE_YEAR = re.compile(r"^\d{3,4}(\.\d+)?$")
_FLOATS = tuple(name for name in COLUMNS if LogMeasure.model_fields[name].annotation in (float, float | None))

T = TypeVar("T")
#: Wraps the rows of an import (rows, count) for a progress display.
Track = Callable[[Sequence[T], int], Iterable[T]]


# ----------------------------------------------------------------------------
# CSV text -> rows


@dataclass(frozen=True)
class _Row:
    line: int  # 1-based line where the row starts
    cells: list[str]


@dataclass(frozen=True)
class _Table:
    header: list[str]
    header_line: int
    rows: list[_Row]
    text: str


def _read_table(path: Path, shown: str, max_mb: float | None = None) -> tuple[_Table | None, list[Problem]]:
    """Split a CSV file into header and rows, keeping each row's first line number.

    Blank rows (no cell with text) are skipped. ``None`` when the file has
    no header at all (empty) or cannot be read as CSV. A file larger than
    ``max_mb`` is not read (see :func:`dossier.schema.loader.read_text`).
    """
    text, problems = read_text(path, shown, max_mb, "max_log_mb")  # spreadsheets write a byte-order mark: dropped
    if text is None:
        return None, problems
    if "\0" in text:  # the csv module reads NUL as text, which no export (XML, HTML) could carry
        line = text.count("\n", 0, text.index("\0")) + 1
        return None, [_csv_problem("NUL", line, line, shown)]
    # strict: a quote left open, or text after a closing quote, is an error rather than a silently merged row
    reader = csv.reader(io.StringIO(text, newline=""), strict=True)
    header: tuple[list[str], int] | None = None
    rows: list[_Row] = []
    start = 1
    while True:
        try:
            cells = next(reader)
        except StopIteration:
            break
        except csv.Error as exc:
            return None, [_csv_problem(str(exc), start, reader.line_num, shown)]
        line, start = start, reader.line_num + 1
        if not any(cell.strip() for cell in cells):
            continue
        if header is None:
            header = ([cell.strip() for cell in cells], line)
        else:
            rows.append(_Row(line, cells))
    if header is None:
        return None, []
    return _Table(header[0], header[1], rows, text), []


def _csv_problem(error: str, start: int, line: int, shown: str) -> Problem:
    """A CSV syntax error in words: ``start`` is the row's first line, ``line`` where the reader stopped."""
    quote_fix = "close the quote, or remove it (a quote inside a quoted cell is written twice: \"\")."
    if "unexpected end of data" in error:
        return Problem(shown, start, 0, "", f"a quote opened in the row on line {start} is never closed: the rest of "
                       "the file would be read as one cell.", quote_fix)
    if "field larger than field limit" in error:
        return Problem(shown, start, 0, "", f"a cell of the row on line {start} runs past {csv.field_size_limit():,} "
                       "characters: most likely a quote that is never closed.", quote_fix)
    if "NUL" in error:
        return Problem(shown, line, 0, "", "the line contains a NUL byte: this is not a text file, or it is damaged.",
                       "save the log as CSV text (UTF-8), or restore it from version control.")
    where = f" (the row starts on line {start}: a quote opened there may not be closed)" if start != line else ""
    if "expected after" in error:
        return Problem(shown, line, 0, "", f"a quoted cell is followed by more text before the next comma{where}.",
                       "put the whole cell in quotes, or none of it (a quote inside a quoted cell is written twice: \"\").")
    return Problem(shown, line, 0, "", f"CSV syntax error: {error}{where}.",
                   "check the quotes on this line (a quote inside a cell is written twice: \"\").")


def _fields(table: _Table, shown: str, mapping: dict[str, str] | None) -> tuple[list[str | None], list[Problem]]:
    """The LogMeasure field of each column (``None``: ignored), and the header's problems.

    ``mapping`` (column -> field) is given for imports, which may rename
    columns; ``None`` for the log itself, whose columns are the field names.
    """
    importing = mapping is not None
    mapping = mapping or {}
    fields: list[str | None] = []
    given: dict[str, str] = {}
    problems: list[Problem] = []
    line = table.header_line
    for name in table.header:
        target = mapping.get(name, name)
        if not name:
            fields.append(None)  # an unnamed column may only hold empty cells (checked per row)
        elif target not in COLUMNS:
            fields.append(None)
            problems.append(Problem(shown, line, 0, name, f"unknown column '{name}'.", _unknown_column_fix(name, importing)))
        elif target in given:
            fields.append(None)
            problems.append(Problem(shown, line, 0, name, f"column '{name}' gives '{target}' again (column '{given[target]}' "
                                    "already does).", "keep one of the two columns."))
        else:
            given[target] = name
            fields.append(target)
    for name in REQUIRED:
        if name not in given:
            description = LogMeasure.model_fields[name].description
            fix = f"add the column '{name}'" + (f" ({description.rstrip('.')})" if description else "")
            if importing:
                fix += f", or name the column that holds it with --map 'COLUMN={name}'"
            problems.append(Problem(shown, line, 0, name, f"required column '{name}' is missing.", fix + "."))
    return fields, problems


def _unknown_column_fix(name: str, importing: bool) -> str:
    close = difflib.get_close_matches(name, COLUMNS, n=1, cutoff=0.6)
    if importing:
        if close:
            return f"did you mean '{close[0]}'? Rename the column or give --map '{name}={close[0]}'."
        return f"give --map '{name}=FIELD', FIELD one of: {', '.join(COLUMNS)}."
    if close:
        return f"did you mean '{close[0]}'?"
    return f"remove it, or use one of: {', '.join(COLUMNS)}."


def _row_data(row: _Row, table: _Table, fields: list[str | None], shown: str) -> tuple[dict[str, str], list[Problem]]:
    """The non-empty cells of a row by field, and problems with cells outside the named columns."""
    problems = []
    extra = [cell for cell in row.cells[len(fields):] if cell.strip()]
    if extra:
        problems.append(Problem(shown, row.line, 0, "", f"the row has {len(row.cells)} cells, the header names "
                                f"{len(fields)} columns.", "remove the extra cells, or name their columns in the header."))
    beyond = [table.header[i] for i in range(len(row.cells), len(fields)) if fields[i] in REQUIRED]
    if beyond:
        # trailing empty cells may be left out, but not so many that a required column is never reached
        problems.append(Problem(shown, row.line, 0, beyond[0], f"the row has {len(row.cells)} cells, the header names "
                                f"{len(fields)} columns: it ends before the required column '{beyond[0]}'.",
                                "add the missing cells (an empty cell is nothing between two commas), or check for a "
                                "missing comma or an unclosed quote."))
    data: dict[str, str] = {}
    for i, (field, cell) in enumerate(zip(fields, row.cells)):
        value = cell.strip()
        if not value:
            continue
        if field is not None:
            data[field] = value
        elif not table.header[i]:
            problems.append(Problem(shown, row.line, 0, "", f"column {i + 1} has a value ({value!r}) but no name.",
                                    "name the column in the header, or empty it."))
    return data, problems


# ----------------------------------------------------------------------------
# values -> measures


def _measure(data: dict[str, str], names: dict[str, str], shown: str, line: int) -> tuple[LogMeasure | None, list[Problem]]:
    """Validate one row; ``names`` maps a field to what the user calls it (column or option).

    A required field with no entry in ``names`` is not reported: its
    missing column was reported once, with the header.
    """
    try:
        measure = LogMeasure.model_validate(data)
    except ValidationError as exc:
        problems = []
        for err in exc.errors(include_url=False):
            loc = tuple(err["loc"])
            field = str(loc[0]) if loc else ""
            if err["type"] == "missing":
                if field not in names:
                    continue
                description = (LogMeasure.model_fields[field].description or "").rstrip(".")
                what, fix = _EMPTY, f"fill it in ({description})." if description else "fill it in."
            else:
                what, fix = _message(err, LogMeasure, loc)
                what = what.replace("?.", "?")  # the epoch validator's message ends with a question
                if err["type"] == "literal_error":
                    close = difflib.get_close_matches(str(err.get("input")), _choices(field), n=1, cutoff=0.6)
                    fix = f"did you mean '{close[0]}'?" if close else fix
            problems.append(Problem(shown, line, 0, names.get(field, field), what, fix))
        return None, problems
    problems = []
    for field in _FLOATS:
        value = getattr(measure, field)
        if value is not None and not math.isfinite(value):
            unit = (LogMeasure.model_fields[field].json_schema_extra or {}).get("unit", "")
            problems.append(Problem(shown, line, 0, names.get(field, field), f"{shown_value(data[field])} is not a finite number.",
                                    f"write a number{f' in {unit}' if unit else ''}."))
    future = future_epoch_error(measure.epoch)
    if future is not None:  # a measure dated later than today is always a mistake: refused, not warned about
        what, fix = future.split(" Fix: ", 1)
        problems.append(Problem(shown, line, 0, names.get("epoch", "epoch"), what.rstrip(".") + ".", fix.rstrip(".") + "."))
    return (None, problems) if problems else (measure, [])


_EMPTY = "a required value is empty."


def _choices(field: str) -> list[str]:
    annotation = LogMeasure.model_fields[field].annotation
    args = [a for a in typing.get_args(annotation) if a is not type(None)]
    if args and typing.get_origin(args[0]) is Literal:
        args = list(typing.get_args(args[0]))
    return [str(a) for a in args]


def _check_names(data: dict[str, str], reported: list[Problem], line: int, names: dict[str, str], shown: str,
                 system_id: str, pairs: list[str], references: set[str]) -> list[Problem]:
    """The pair must be one of the system's pairs, a source one of references.yaml.

    Checked on the text even when other values of the row are bad, so that
    all of a row's problems come at once; not for a field already reported.
    """
    problems = []
    done = {p.field for p in reported}
    pair, ref = data.get("pair"), data.get("ref")
    if pair is not None and names.get("pair", "pair") not in done and pair not in pairs:
        problems.append(Problem(shown, line, 0, names.get("pair", "pair"), f"'{pair}' is not a pair of system '{system_id}'.",
                                _suggest(pair, set(pairs), f"use one of: {', '.join(pairs) or '(none declared)'}")))
    if ref is not None and names.get("ref", "ref") not in done and ref not in references:
        close = difflib.get_close_matches(ref, sorted(references), n=1, cutoff=0.6)
        problems.append(Problem(shown, line, 0, names.get("ref", "ref"), f"source '{ref}' is not in {REFERENCES_FILE}.",
                                f"did you mean '{close[0]}'?" if close else f"add '{ref}' to {REFERENCES_FILE}."))
    return problems


# ----------------------------------------------------------------------------
# reading


def read_log(
    path: Path, shown: str, *, pairs: set[str] | None = None, refs: set[str] | None = None,
    max_mb: float | None = None,
) -> tuple[list[LogMeasure], list[Problem]]:
    """Read an observing log.

    Parameters
    ----------
    path
        The ``log.csv`` file; a missing file is an empty log.
    shown
        The path as the user should see it in problems
        (``systems/<id>/log.csv``).
    pairs, refs
        When given, a row naming a pair or a source id not in these sets is
        a problem (and its measure is left out).
    max_mb
        A larger file is not read: one problem says so (``[limits]
        max_log_mb`` in dossier.toml).

    Returns
    -------
    The valid measures in file order, and a problem for every bad row or
    header column (line of the row, column 0, field = the column name).
    """
    import difflib

    _, entries, problems = _log_entries(path, shown, max_mb)
    measures = []
    for line, measure in entries:
        bad = False
        if pairs is not None and measure.pair not in pairs:
            close = difflib.get_close_matches(measure.pair, sorted(pairs), n=1, cutoff=0.5)
            fix = f"did you mean '{close[0]}'?" if close else "declare the pair under 'pairs' in evidence.yaml."
            problems.append(Problem(shown, line, 0, "pair", f"'{measure.pair}' is not a pair of this system.", fix))
            bad = True
        if refs is not None and measure.ref is not None and measure.ref not in refs:
            close = difflib.get_close_matches(measure.ref, sorted(refs), n=1, cutoff=0.6)
            fix = f"did you mean '{close[0]}'?" if close else f"add '{measure.ref}' to references.yaml."
            problems.append(Problem(shown, line, 0, "ref", f"source '{measure.ref}' is not in references.yaml.", fix))
            bad = True
        if not bad:
            measures.append(measure)
    return measures, problems


def _log_entries(path: Path, shown: str,
                 max_mb: float | None = None) -> tuple[_Table | None, list[tuple[int, LogMeasure]], list[Problem]]:
    if not path.is_file():
        return None, [], []
    table, problems = _read_table(path, shown, max_mb)
    if table is None:
        return None, [], problems
    fields, problems = _fields(table, shown, None)
    names = {field: field for field in fields if field is not None}
    entries = []
    for row in table.rows:
        data, row_problems = _row_data(row, table, fields, shown)
        measure, value_problems = _measure(data, names, shown, row.line)
        if len(row.cells) < len(fields):  # the cells past a short row's end are reported once, with the row
            past_end = set(fields[len(row.cells):])
            value_problems = [p for p in value_problems if not (p.message == _EMPTY and p.field in past_end)]
        problems += row_problems + value_problems
        if measure is not None and not row_problems:
            entries.append((row.line, measure))
    return table, entries, problems


# ----------------------------------------------------------------------------
# writing


def _cell(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return repr(value)  # shortest text that reads back as the same float
    return str(value)


def _csv_text(rows: Iterable[Sequence[str]]) -> str:
    buffer = io.StringIO()
    csv.writer(buffer, lineterminator="\n").writerows(rows)
    return buffer.getvalue()


def log_row(measure: LogMeasure) -> list[str]:
    """The cells of a measure, in :data:`COLUMNS` order."""
    return [_cell(getattr(measure, name)) for name in COLUMNS]


def describe(measure: LogMeasure) -> str:
    """``pair=AB epoch=J2024.5 theta=12.3 ...``: the fields that have a value, in column order."""
    parts = []
    for name, cell in zip(COLUMNS, log_row(measure)):
        if cell:
            parts.append(f"{name}={cell!r}" if re.search(r"\s|'|\"", cell) else f"{name}={cell}")
    return " ".join(parts)


@contextlib.contextmanager
def _locked(path: Path) -> Iterator[None]:
    """Hold an exclusive lock on ``<path>.lock`` (kept on disk: removing it would race).

    Once the lock is held, temporary files of ``path`` left by a writer that
    was killed half-way are removed: every writer of the log holds the lock
    while its temporary file exists, so none of them belongs to a live one.
    """
    import fcntl  # POSIX; imported here so that reading a log works everywhere

    with open(path.with_name(path.name + LOCK_SUFFIX), "a", encoding="utf-8") as handle:
        fcntl.flock(handle.fileno(), fcntl.LOCK_EX)
        try:
            _remove_abandoned_temporaries(path)
            yield
        finally:
            fcntl.flock(handle.fileno(), fcntl.LOCK_UN)


def _temporary_name(path: Path) -> str:
    return f".{path.name}.{os.getpid()}.{secrets.token_hex(4)}.tmp"


def _remove_abandoned_temporaries(path: Path) -> None:
    """Delete ``.<name>.<pid>.<hex>.tmp`` beside ``path`` (only call this holding the log's lock)."""
    pattern = re.compile(rf"\.{re.escape(path.name)}\.\d+\.[0-9a-f]{{8}}\.tmp")
    try:
        names = os.listdir(path.parent)
    except OSError:
        return
    for name in names:
        if pattern.fullmatch(name):
            with contextlib.suppress(OSError):
                os.unlink(path.parent / name)


def _replace_atomically(path: Path, text: str) -> None:
    """Write ``text`` to a temporary file beside ``path``, fsync it, rename it over ``path``, fsync the folder."""
    folder = path.parent
    temporary = folder / _temporary_name(path)
    # os.open applies the umask to 0o666, so a new log gets the permissions of any new file
    fd = os.open(temporary, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(text.encode("utf-8"))
            handle.flush()
            os.fsync(handle.fileno())
        if path.exists():
            os.chmod(temporary, stat.S_IMODE(path.stat().st_mode))
        os.replace(temporary, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(temporary)
        raise
    directory = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    try:
        os.fsync(directory)
    finally:
        os.close(directory)


@dataclass(frozen=True)
class Duplicate:
    """A measure that was not written because the same measure exists."""

    index: int  #: position in the measures given
    log_line: int | None  #: line of the same measure already in the log, or
    earlier: int | None  #: position of the same measure earlier among those given


@dataclass(frozen=True)
class Appended:
    """What :func:`append_measures` wrote."""

    path: Path
    written: list[LogMeasure]
    lines: list[int]  #: line in the log where each written measure starts
    duplicates: list[Duplicate]


def append_measures(path: Path, measures: Sequence[LogMeasure], shown: str, *,
                    duplicates: Literal["refuse", "skip"] = "refuse") -> Appended:
    """Append measures to a log in one atomic write, under the log's lock.

    Parameters
    ----------
    path
        The ``log.csv`` file (created with its header when missing; its
        folder must exist).
    measures
        Validated measures, written in this order.
    shown
        The log's path as the user should see it in problems.
    duplicates
        ``"refuse"``: if any measure is already in the log (or given twice),
        write nothing and raise. ``"skip"``: write the others and list the
        duplicates in the result.

    Raises
    ------
    ProblemsFound
        The current log has problems (nothing is written over a log that
        cannot be read back), or a duplicate is refused.
    """
    with _locked(path):
        table, entries, problems = _log_entries(path, shown)
        if problems:
            raise ProblemsFound(problems + [Problem(shown, 0, 0, "", "the log has problems, so nothing was written.",
                                                    "correct the rows named here, then try again.")])
        seen: dict[tuple, tuple[int | None, int | None]] = {m.key(): (line, None) for line, m in entries}
        fresh: list[LogMeasure] = []
        found: list[Duplicate] = []
        for i, measure in enumerate(measures):
            key = measure.key()
            if key in seen:
                found.append(Duplicate(i, *seen[key]))
            else:
                seen[key] = (None, i)
                fresh.append(measure)
        if found and duplicates == "refuse":
            raise ProblemsFound([_duplicate_problem(d, shown) for d in found])
        if not fresh:
            return Appended(path, [], [], found)
        text, lines = _text_with(table, fresh)
        _replace_atomically(path, text)
        return Appended(path, fresh, lines, found)


def write_log(path: Path, measures: Sequence[LogMeasure]) -> None:
    """Replace a whole log with ``measures`` (header first), atomically and under the lock."""
    with _locked(path):
        _replace_atomically(path, _csv_text([COLUMNS, *(log_row(m) for m in measures)]))


def _duplicate_problem(duplicate: Duplicate, shown: str) -> Problem:
    if duplicate.log_line is not None:
        return Problem(shown, duplicate.log_line, 0, "", "the same measure is already in the log, so it was not added again.",
                       "nothing to do; a new measure differs from it in at least one value.")
    return Problem(shown, 0, 0, "", f"measure {duplicate.index + 1} repeats measure {duplicate.earlier + 1} exactly.",
                   "give each measure once.")


def _text_with(table: _Table | None, fresh: Sequence[LogMeasure]) -> tuple[str, list[int]]:
    """The log's text with ``fresh`` appended, and the first line of each new row."""
    if table is not None and table.header == list(COLUMNS):
        text = table.text if table.text.endswith("\n") else table.text + "\n"
    else:
        old = [] if table is None else table.rows
        header = [] if table is None else table.header
        text = _csv_text([COLUMNS, *([dict(zip(header, row.cells)).get(c, "") for c in COLUMNS] for row in old)])
    lines = []
    line = text.count("\n") + 1
    for measure in fresh:
        row = _csv_text([log_row(measure)])
        lines.append(line)
        line += row.count("\n")
        text += row
    return text, lines


# ----------------------------------------------------------------------------
# the commands: add one measure, import a file


def log_path(root: Path, system_id: str) -> Path:
    return Path(root) / SYSTEMS_DIR / system_id / LOG_FILE


def shown_log(system_id: str) -> str:
    return f"{SYSTEMS_DIR}/{system_id}/{LOG_FILE}"


def _system(root: Path, system_id: str) -> tuple[list[str], set[str]]:
    """The pair ids of a system and the project's source ids; the project must load without problems."""
    project = load_project(root, only=system_id)
    return [pair.id for pair in project.systems[system_id].pairs], set(project.references)


def option_name(field: str) -> str:
    """How ``log add`` names a field: ``PAIR`` (argument) or ``--theta-error``."""
    return "PAIR" if field == "pair" else "--" + field.replace("_", "-")


def add_measure(root: Path, system_id: str, values: dict[str, str | None]) -> Appended:
    """Validate one measure typed on the command line and append it.

    Parameters
    ----------
    root, system_id
        The project folder and the system whose log receives the measure.
    values
        Field name -> text as typed (``None`` or blank: not given).

    Raises
    ------
    ProblemsFound
        With every problem (project, values, pair, source, exact duplicate);
        nothing is written then.
    """
    pairs, references = _system(Path(root), system_id)
    data = {name: value.strip() for name, value in values.items() if value is not None and value.strip()}
    names = {name: option_name(name) for name in COLUMNS}
    measure, problems = _measure(data, names, COMMAND_LINE, 0)
    problems += _check_names(data, problems, 0, names, COMMAND_LINE, system_id, pairs, references)
    if problems:
        raise ProblemsFound(problems)
    assert measure is not None
    return append_measures(log_path(root, system_id), [measure], shown_log(system_id))


@dataclass(frozen=True)
class Rejected:
    """A row of an imported file that was not imported."""

    line: int
    cells: list[str]
    problems: list[Problem]


@dataclass(frozen=True)
class Imported:
    """The outcome of :func:`import_log`."""

    appended: Appended
    source_lines: list[int]  #: line in the imported file of each measure offered to the log
    rejected: list[Rejected]
    rejected_file: Path | None


def _parse_mapping(mapping: Sequence[str], header: list[str], shown: str) -> tuple[dict[str, str], list[Problem]]:
    """``["PA=theta", ...]`` -> {column: field}, with a problem for each bad entry."""
    result: dict[str, str] = {}
    problems = []
    for entry in mapping:
        column, sep, field = (part.strip() for part in entry.partition("="))
        if not sep or not column or not field:
            problems.append(Problem(COMMAND_LINE, 0, 0, "--map", f"'{entry}' is not of the form COLUMN=FIELD.",
                                    "write for example --map 'PA=theta'."))
            continue
        if column not in header:
            problems.append(Problem(COMMAND_LINE, 0, 0, "--map", f"{shown} has no column '{column}'.",
                                    _suggest(column, set(header), f"use one of: {', '.join(h for h in header if h)}")))
        if field not in COLUMNS:
            problems.append(Problem(COMMAND_LINE, 0, 0, "--map", f"'{field}' is not a field of the log.",
                                    _suggest(field, set(COLUMNS), f"use one of: {', '.join(COLUMNS)}")))
        if column in result:
            problems.append(Problem(COMMAND_LINE, 0, 0, "--map", f"column '{column}' is mapped twice.", "map it once."))
        result[column] = field
    return result, problems


def import_log(root: Path, system_id: str, source: Path, *, mapping: Sequence[str] = (),
               epoch_format: EpochFormat | None = None, skip_bad: bool = False,
               track: Track | None = None) -> Imported:
    """Import the rows of a CSV file (a spreadsheet export) into a system's log.

    Parameters
    ----------
    root, system_id
        The project folder and the system whose log receives the rows.
    source
        The CSV file; shown in problems as given.
    mapping
        ``COLUMN=FIELD`` entries renaming the file's columns to log fields.
    epoch_format
        How to read epochs written as bare numbers: ``"jyear"`` (Julian
        years, stored as ``J2019.5``) or ``"byear"`` (Besselian, ``B1950.5``).
        Without it a bare number is a bad row.
    skip_bad
        Import the good rows and write the bad ones, with their problems in
        a last column ``problem``, to ``<source stem>.rejected.csv`` beside
        the source. Without it any bad row stops the import.
    track
        ``track(rows, count)`` wraps the rows while they are checked (a
        progress bar); called with every row.

    Returns
    -------
    What was written, where each offered measure was in ``source``, the
    rejected rows and the side file. Rows equal to a measure already in the
    log, or to an earlier row, are skipped and listed in
    ``appended.duplicates``.

    Raises
    ------
    ProblemsFound
        Problems with the project, the file, its header or ``--map``; or bad
        rows without ``skip_bad``. Nothing is written then.
    """
    shown = str(source)
    pairs, references = _system(Path(root), system_id)
    if not source.is_file():
        raise ProblemsFound([Problem(shown, 0, 0, "", "there is no such file.", "give the path of the CSV file to import.")])
    table, problems = _read_table(source, shown)
    if table is None and not problems:
        problems = [Problem(shown, 0, 0, "", "the file is empty.", "export the rows with a header row naming the columns.")]
    if table is None:
        raise ProblemsFound(problems)
    columns, problems = _parse_mapping(mapping, table.header, shown)
    if problems:
        raise ProblemsFound(problems)
    fields, problems = _fields(table, shown, columns)
    if problems:
        raise ProblemsFound(problems)
    names = {field: column for field, column in zip(fields, table.header) if field is not None}
    good: list[tuple[int, LogMeasure]] = []
    rejected: list[Rejected] = []
    rows = table.rows if track is None else track(table.rows, len(table.rows))
    for row in rows:
        data, row_problems = _row_data(row, table, fields, shown)
        epoch = data.get("epoch", "")
        if epoch_format is not None and _BARE_YEAR.match(epoch):
            data["epoch"] = _EPOCH_PREFIX[epoch_format] + epoch
        measure, value_problems = _measure(data, names, shown, row.line)
        row_problems += value_problems
        row_problems += _check_names(data, row_problems, row.line, names, shown, system_id, pairs, references)
        if row_problems:
            if epoch_format is None and _BARE_YEAR.match(epoch):
                row_problems = [_with_epoch_format_hint(p) if p.field == names["epoch"] else p for p in row_problems]
            rejected.append(Rejected(row.line, row.cells, row_problems))
        else:
            assert measure is not None
            good.append((row.line, measure))
    if rejected and not skip_bad:
        raise ProblemsFound([p for r in rejected for p in r.problems] + [
            Problem(shown, 0, 0, "", f"{len(rejected)} of {len(table.rows)} row(s) are bad, so nothing was imported.",
                    "correct them, or give --skip-bad to import the others and set the bad ones aside.")])
    appended = append_measures(log_path(root, system_id), [m for _, m in good], shown_log(system_id), duplicates="skip")
    side = None
    if rejected:
        side = source.with_name(source.stem + REJECTED_SUFFIX)
        _replace_atomically(side, _rejected_text(table.header, rejected))
    return Imported(appended, [line for line, _ in good], rejected, side)


def _with_epoch_format_hint(problem: Problem) -> Problem:
    return Problem(problem.file, problem.line, problem.column, problem.field, problem.message,
                   problem.fix.rstrip(".") + ", or give --epoch-format jyear (or byear) to read every bare number so.")


def _rejected_text(header: list[str], rejected: list[Rejected]) -> str:
    """The rejected rows with their original cells and a last column naming their problems."""
    name = "problem"
    while name in header:
        name += "_"
    width = max([len(header), *(len(r.cells) for r in rejected)])  # a row may have more cells than the header
    rows = [[*r.cells, *[""] * (width - len(r.cells)), "; ".join(str(p) for p in r.problems)] for r in rejected]
    return _csv_text([[*header, *[""] * (width - len(header)), name], *rows])
