"""Load a project folder into validated models, collecting every problem.

YAML is read with ruamel.yaml's round-trip loader, which keeps the line and
column of every key and item, so that a pydantic validation error can be
reported as ``file:line:column: field: message Fix: ...``. Nothing is
computed here: the loader parses, validates and cross-checks identifiers.

Hostile input is refused with a problem, never a traceback: files larger
than the ``[limits]`` of ``dossier.toml`` are not read at all; text must be
UTF-8 (a byte-order mark is accepted and dropped; an invalid byte is named
with its offset, line and column); YAML nested too deeply, or whose aliases
form a loop or expand without end, is refused before it is walked; system
folders must be plain ids (no look-alike letters, spaces or control
characters, no link out of the project, no two differing only in case).
"""

from __future__ import annotations

import codecs
import difflib
import math
import re
import tomllib
import types
import typing
import unicodedata
from collections.abc import Collection
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from pydantic import BaseModel, ValidationError

from dossier.errors import Problem, ProblemsFound
from dossier.schema.models import ID_PATTERN, MAX_SYSTEM_ID_LENGTH, Measured, Reference, System, is_identifier
from dossier.schema.settings import LimitSettings, Settings

SETTINGS_FILE = "dossier.toml"
REFERENCES_FILE = "references.yaml"
SYSTEMS_DIR = "systems"
EVIDENCE_FILE = "evidence.yaml"
#: dossier.toml cannot set its own limit.
MAX_SETTINGS_MB = 1.0
#: Deepest nesting of YAML collections (an evidence file needs about 7).
MAX_YAML_DEPTH = 64
#: Most YAML values a file may expand to through aliases (``*name``).
MAX_YAML_NODES = 1_000_000


@dataclass
class Project:
    """A loaded, validated project folder."""

    root: Path
    settings: Settings
    references: dict[str, Reference]
    systems: dict[str, System] = field(default_factory=dict)
    logs: dict[str, tuple] = field(default_factory=dict)

    def evidence_path(self, system_id: str) -> Path:
        return self.root / SYSTEMS_DIR / system_id / EVIDENCE_FILE


# ----------------------------------------------------------------------------
# Text files: size limit and encoding


def read_text(path: Path, shown: str, limit_mb: float | None = None, setting: str = "") -> tuple[str | None, list[Problem]]:
    """The text of a UTF-8 file, or ``None`` and the problem.

    A file larger than ``limit_mb`` is not read (``setting`` names the
    ``dossier.toml`` key that raises the limit). A UTF-8 byte-order mark
    is dropped. An invalid byte is reported with its 0-based byte offset, and
    the line and column where it sits.
    """
    try:
        size = path.stat().st_size
        if limit_mb is not None and size > limit_mb * 1e6:
            raise _TooLarge(size)
        data = path.read_bytes()
    except _TooLarge:
        fix = f"raise [limits] {setting} in {SETTINGS_FILE} if the file really is meant to be this large, " if setting else ""
        return None, [Problem(shown, 0, 0, "", f"the file is {size / 1e6:.1f} MB, larger than the limit of {limit_mb:g} MB, "
                              "so it was not read.", f"{fix}or check that this is the right file (split it, or remove "
                              "what does not belong in it).")]
    except OSError as exc:
        return None, [Problem(shown, 0, 0, "", f"cannot be read ({exc.strerror or exc}).",
                              "check that it is a readable file (permissions, and not a folder).")]
    bom = codecs.BOM_UTF8 if data.startswith(codecs.BOM_UTF8) else b""
    try:
        return data[len(bom):].decode("utf-8"), []
    except UnicodeDecodeError as exc:
        return None, [_encoding_problem(data, len(bom) + exc.start, exc.reason, shown)]


class _TooLarge(Exception):
    pass


def _encoding_problem(data: bytes, offset: int, reason: str, shown: str) -> Problem:
    line = data.count(b"\n", 0, offset) + 1
    start = data.rfind(b"\n", 0, offset) + 1
    column = len(data[start:offset].decode("utf-8", errors="replace").lstrip("\ufeff")) + 1
    byte = data[offset]
    guess = ""
    try:
        text = data[start:data.find(b"\n", offset) if b"\n" in data[offset:] else len(data)].decode("cp1252")
        char = text[column - 1] if len(text) >= column else ""
        if char and not char.isspace():
            guess = f"; in Latin-1/Windows-1252 it would be {char!r}"
    except (UnicodeDecodeError, IndexError):
        pass
    return Problem(shown, line, column, "", f"is not UTF-8 text: byte 0x{byte:02X} at byte offset {offset} "
                   f"({reason}{guess}).", "save the file as UTF-8 (in a spreadsheet, \"CSV UTF-8\"; in an editor, "
                   "\"Save with encoding\", UTF-8).")


def printable(name: str) -> str:
    """A name as it can be shown: control characters escaped, so that a message cannot hide or forge text."""
    return "".join(c if c.isprintable() else ascii(c)[1:-1] for c in name)


def system_id_problem(name: str) -> tuple[str, str] | None:
    """(what, fix) when ``name`` cannot be a system id (it names a folder and the files built from it)."""
    shown = printable(name)
    if not name:
        return "the system id is empty.", "give an id such as 'kestrel-3'."
    if len(name) > MAX_SYSTEM_ID_LENGTH:
        return (f"the system id is {len(name)} characters long, more than {MAX_SYSTEM_ID_LENGTH}.",
                "choose a shorter id: it names a folder and the files of the site.")
    if not is_identifier(name):
        odd = next((c for c in name if not re.fullmatch(r"[A-Za-z0-9_.+-]", c)), None)
        if odd is None or name[0] in "_.+-":
            why = f"it starts with {name[0]!r}"
        elif ord(odd) > 127:
            why = f"it contains {odd!r}, U+{ord(odd):04X} {unicodedata.name(odd, 'an unnamed character')}"
        else:
            why = f"it contains {ascii(odd)}"
        folded = unicodedata.normalize("NFKD", name).encode("ascii", "ignore").decode()
        safe = re.sub(r"[^A-Za-z0-9_.+-]+", "-", folded).strip("-_.+")[:MAX_SYSTEM_ID_LENGTH]
        kept = sum(c.isalnum() for c in folded) == sum(c.isalnum() for c in name)  # no letter lost in folding
        example = f" (for example '{safe}')" if safe and kept and safe != name else ""
        return (f"'{shown}' is not a valid system id: {why}.",
                f"use only ASCII letters, digits, '-', '_', '.' or '+', starting with a letter or digit{example}.")
    if name.split(".")[0].upper() in _RESERVED:
        return (f"'{shown}' is not a valid system id: Windows reserves the file name {name.split('.')[0]!r}.",
                "choose another id (a project may be checked out on Windows).")
    return None


#: Device names no folder may have on Windows, whatever the extension.
_RESERVED = frozenset({"CON", "PRN", "AUX", "NUL", *(f"COM{i}" for i in range(1, 10)), *(f"LPT{i}" for i in range(1, 10))})


# ----------------------------------------------------------------------------
# YAML with positions


def _yaml(positions: bool = True):
    """A YAML reader: round-trip (keeps line and column of every node) or, for speed, the C safe loader."""
    from ruamel.yaml import YAML

    yaml = YAML(typ="rt") if positions else YAML(typ="safe", pure=False)
    yaml.allow_duplicate_keys = False
    return yaml


def read_yaml(path: Path, shown: str, positions: bool = True, limit_mb: float | None = None,
              setting: str = "") -> tuple[Any, list[Problem]]:
    """Parse one YAML file; a syntax error becomes a problem with its position.

    ``positions=False`` parses with the fast C loader and keeps no positions:
    callers use it first and parse again with positions only when there is
    something to report. ``limit_mb``: see :func:`read_text`.
    """
    text, problems = read_text(path, shown, limit_mb, setting)
    if text is None:
        return None, problems
    return parse_yaml(text, shown, positions)


def parse_yaml(text: str, shown: str, positions: bool = True) -> tuple[Any, list[Problem]]:
    """Parse YAML text (see :func:`read_yaml`); the tree is checked for depth and alias loops."""
    from ruamel.yaml.error import MarkedYAMLError, YAMLError

    try:
        tree = _yaml(positions).load(text)
    except RecursionError:
        return None, [_too_deep(shown)]
    except MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        line, col = (mark.line + 1, mark.column + 1) if mark else (0, 0)
        raw = (exc.problem or exc.context or "invalid YAML").strip()
        what = printable(raw)
        duplicate = re.match(r'found duplicate key (".*?") with value', what)
        if duplicate:  # ruamel quotes both values in full: name the key and where its mapping starts
            what = f"duplicate key {duplicate.group(1)}: the same mapping already has it"
            if exc.context_mark is not None:
                what += f" (the mapping starts at line {exc.context_mark.line + 1})"
        elif exc.context and exc.problem and exc.context_mark is not None and exc.context_mark is not mark:
            what += f" ({exc.context.strip()} at line {exc.context_mark.line + 1})"
        return None, [Problem(shown, line, col, "", f"YAML syntax error: {shown_text(what, 300)}.", _yaml_fix(raw))]
    except YAMLError as exc:  # pragma: no cover - ruamel raises marked errors for text input
        return None, [Problem(shown, 0, 0, "", f"YAML error: {shown_text(printable(str(exc)), 300)}.",
                              "correct the YAML syntax.")]
    except Exception as exc:  # a scalar the constructor cannot build: 2019-02-30, !!float abc
        line, col = _bad_scalar(text)
        return None, [Problem(shown, line, col, "", f"this value cannot be read ({shown_text(printable(str(exc)), 200)}).",
                              "write a valid date (YYYY-MM-DD) or number, or put the text in quotes.")]
    problem = _tree_problem(tree, shown)
    return (None, [problem]) if problem else (tree, [])


def _bad_scalar(text: str) -> tuple[int, int]:
    """1-based line and column of the first scalar that YAML cannot construct, or (0, 0)."""
    from ruamel.yaml import YAML
    from ruamel.yaml.nodes import MappingNode, ScalarNode, SequenceNode

    try:
        yaml = YAML(typ="safe", pure=True)
        stack = [yaml.compose(text)]
        while stack:
            node = stack.pop()
            if isinstance(node, ScalarNode):
                try:
                    yaml.constructor.construct_object(node, deep=True)
                except Exception:
                    return node.start_mark.line + 1, node.start_mark.column + 1
            elif isinstance(node, MappingNode):
                stack += [part for pair in reversed(node.value) for part in reversed(pair)]
            elif isinstance(node, SequenceNode):
                stack += list(reversed(node.value))
    except Exception:  # noqa: BLE001 - only a position is sought; without one the problem names the file
        pass
    return 0, 0


def shown_text(text: str, limit: int) -> str:
    return text if len(text) <= limit else text[: limit - 1] + "…"


def _too_deep(shown: str) -> Problem:
    return Problem(shown, 0, 0, "", f"the YAML is nested more than {MAX_YAML_DEPTH} levels deep.",
                   "look for unclosed or repeated brackets '[' or '{'; an evidence file needs a few levels only.")


_ALIAS_LOOP = "a YAML alias ('*name') refers to a node that contains it."


def _scalar_problem(node: Any, shown: str, line: int, col: int) -> Problem | None:
    """YAML tags (``!name``, ``!!set``) have no place in Dossier's files; nor have lone surrogates."""
    from collections.abc import Set

    from ruamel.yaml.comments import TaggedScalar

    if isinstance(node, (TaggedScalar, Set)):
        tag = getattr(getattr(node, "tag", None), "value", None) or ("!!set" if isinstance(node, Set) else "")
        return Problem(shown, line, col, "", f"a YAML tag {printable(str(tag))!r} is used: Dossier's files use plain "
                       "values.", "remove the tag (the word that starts with '!').")
    if isinstance(node, str) and re.search("[\ud800-\udfff]", node):
        return Problem(shown, line, col, "", f"a text holds an invalid Unicode character (a lone surrogate): "
                       f"{ascii(node)[:60]}.", "remove the \\u escape of the surrogate, or write the character itself.")
    return None


def _tree_problem(tree: Any, shown: str) -> Problem | None:
    """A problem when the tree is too deep, refers to itself, expands (through aliases) beyond reason, or holds a tag.

    YAML aliases (``*name``) repeat a node by reference: a loop would make
    the conversion to plain data recurse without end, and nested repetition
    ("billion laughs") would make it exponential. Walked before anything else.
    """
    count = 0

    def where(node: Any, key: Any, is_key: bool) -> tuple[int, int]:
        lc = getattr(node, "lc", None)  # the round-trip loader keeps positions; the fast one does not
        try:
            if isinstance(node, dict):
                line, col = lc.key(key) if is_key else lc.value(key)
            else:
                line, col = lc.item(key)
            return line + 1, col + 1
        except Exception:  # noqa: BLE001 - no position kept
            return 0, 0

    def walk(node: Any, depth: int, ancestors: set[int], line: int, col: int) -> Problem | None:
        nonlocal count
        count += 1
        if count > MAX_YAML_NODES:
            return Problem(shown, 0, 0, "", f"the YAML expands to more than {MAX_YAML_NODES:,} values (through "
                           "aliases '*name' that repeat anchors '&name').", "write the values out, without aliases.")
        if not isinstance(node, (dict, list)):
            return _scalar_problem(node, shown, line, col)
        if depth > MAX_YAML_DEPTH:
            return _too_deep(shown)
        if id(node) in ancestors:
            return Problem(shown, line, col, "", _ALIAS_LOOP, "remove the alias, or write the values out.")
        inner = ancestors | {id(node)}
        if isinstance(node, dict):
            items = [(k, (k, True)) for k in node] + [(v, (k, False)) for k, v in node.items()]
        else:
            items = [(v, (i, False)) for i, v in enumerate(node)]
        for item, (key, is_key) in items:
            found = walk(item, depth + 1, inner, *where(node, key, is_key))
            if found:
                return found
        return None

    return walk(tree, 0, set(), 0, 0)


def _yaml_fix(what: str) -> str:
    if "duplicate key" in what:
        return "keep one of the two entries with this key."
    if "tab" in what or "'\\t'" in what or "'\t'" in what:  # ruamel writes the tab as a backslash and a t
        return "indent with spaces, not tabs."
    return "correct the YAML syntax at this position (indentation, a missing ':' or an unclosed bracket)."


def _plain(node: Any) -> Any:
    """Round-trip YAML nodes to plain Python containers for pydantic."""
    if isinstance(node, dict):
        return {str(k) if not isinstance(k, str) else k: _plain(v) for k, v in node.items()}
    if isinstance(node, list):
        return [_plain(v) for v in node]
    if isinstance(node, str):
        return str(node)
    return node


def _position(tree: Any, loc: tuple[Any, ...], at_key: bool) -> tuple[int, int, list[Any]]:
    """Follow ``loc`` into the YAML tree; return the 1-based position and the matched path.

    Elements of ``loc`` that are not in the tree (pydantic's union tags, a
    missing key) are skipped; the position is that of the deepest node found.
    """
    node = tree
    line, col = (getattr(getattr(tree, "lc", None), "line", 0) or 0), 0
    path: list[Any] = []
    for i, part in enumerate(loc):
        last = i == len(loc) - 1
        if isinstance(node, dict) and part in node:
            lc = node.lc.key(part) if (last and at_key) else node.lc.value(part)
            line, col = lc
            node = node[part]
            path.append(part)
        elif isinstance(node, list) and isinstance(part, int) and 0 <= part < len(node):
            line, col = node.lc.item(part)
            node = node[part]
            path.append(part)
        elif last:
            path.append(part)
        else:
            continue
    return line + 1, col + 1, path


def _dotted(path: list[Any]) -> str:
    out = ""
    for part in path:
        if isinstance(part, int):
            out += f"[{part}]"
        else:
            out += ("." if out else "") + str(part)
    return out


# ----------------------------------------------------------------------------
# pydantic errors -> problems


def _unwrap(annotation: Any) -> Any:
    """Strip Annotated/Optional to the type that owns the next key."""
    origin = typing.get_origin(annotation)
    if origin is typing.Annotated:
        return _unwrap(typing.get_args(annotation)[0])
    if origin in (typing.Union, types.UnionType):
        args = [a for a in typing.get_args(annotation) if a is not type(None)]
        return _unwrap(args[0]) if len(args) == 1 else annotation
    return annotation


def _model_at(model: type[BaseModel], loc: tuple[Any, ...]) -> Any:
    """The type found at ``loc`` inside ``model`` (for 'did you mean' suggestions)."""
    current: Any = model
    for part in loc:
        current = _unwrap(current)
        origin = typing.get_origin(current)
        if isinstance(current, type) and issubclass(current, BaseModel):
            if part not in current.model_fields:
                continue
            current = current.model_fields[part].annotation
        elif origin in (list, tuple):
            args = typing.get_args(current)
            current = args[0] if args else Any
        elif origin is dict:
            current = typing.get_args(current)[1]
        else:
            return None
    return _unwrap(current)


def _field_info(model: type[BaseModel], loc: tuple[Any, ...]):
    parent = _model_at(model, loc[:-1])
    if isinstance(parent, type) and issubclass(parent, BaseModel) and loc and loc[-1] in parent.model_fields:
        return parent.model_fields[loc[-1]]
    return None


def _unit_of(model: type[BaseModel], loc: tuple[Any, ...]) -> str:
    # a number inside a measured value: look at the field that holds the Measured
    probe = loc
    while probe:
        info = _field_info(model, probe)
        if info is not None and isinstance(info.json_schema_extra, dict) and info.json_schema_extra.get("unit"):
            return str(info.json_schema_extra["unit"])
        probe = probe[:-1]
    return ""


def shown_value(value: Any, limit: int = 60) -> str:
    """``repr`` of a value for a message, shortened: a hostile file may hold a megabyte in one value."""
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 5] + "…" + text[-4:]


def _message(err: dict[str, Any], model: type[BaseModel], loc: tuple[Any, ...]) -> tuple[str, str]:
    kind = err["type"]
    value = _Shown(err.get("input"))
    ctx = err.get("ctx") or {}
    name = str(loc[-1]) if loc else "value"
    if kind == "missing":
        info = _field_info(model, loc)
        hint = f" ({info.description})" if info is not None and info.description else ""
        return f"required field '{name}' is missing.", f"add '{name}:'{hint}."
    if kind == "extra_forbidden":
        parent = _model_at(model, loc[:-1])
        allowed = sorted(parent.model_fields) if isinstance(parent, type) and issubclass(parent, BaseModel) else []
        close = difflib.get_close_matches(str(name), allowed, n=1, cutoff=0.6)
        if close:
            return f"unknown key '{name}'.", f"did you mean '{close[0]}'?"
        return f"unknown key '{name}'.", f"remove it, or use one of: {', '.join(allowed)}."
    if kind in {"float_parsing", "float_type", "int_parsing", "int_type", "int_from_float", "finite_number"}:
        unit = _unit_of(model, loc)
        unit_text = f" in {unit}" if unit and "uncertainty" not in str(unit) else ""
        if kind == "finite_number":
            return (f"{value!r} is not a finite number.",
                    f"write a number{unit_text} (not NaN or infinity; leave out a value that is not known).")
        if isinstance(value.value, str) and _WITH_UNIT.match(value.value):
            return (f"{value!r} is not a number: units are not written in the file.",
                    f"write the number alone{unit_text} (convert it first if it is in another unit).")
        return f"{value!r} is not a number.", f"write a number{unit_text}."
    if kind in {"string_type"}:
        return f"{value!r} is not text.", "write it as text (quote it if needed)."
    if kind == "literal_error":
        return f"{value!r} is not allowed here.", f"use one of: {ctx.get('expected', '')}."
    if kind == "string_pattern_mismatch":
        if ctx.get("pattern") == ID_PATTERN:
            return f"{value!r} is not a valid id.", "use letters, digits, '-', '_', '.' or '+', starting with a letter or digit."
        return f"{value!r} is not in the expected form.", f"match the pattern {ctx.get('pattern')}."
    if kind == "greater_than" and name in {"uncertainty", "theta_error", "rho_error"} and ctx.get("gt") == 0:
        return (f"the uncertainty {value!r} is not positive.",
                "give the 1-sigma uncertainty, a number greater than 0 (a value known exactly is not a measurement).")
    if kind in {"greater_than", "greater_than_equal", "less_than", "less_than_equal"}:
        bound = {"greater_than": ("gt", "greater than"), "greater_than_equal": ("ge", "at least"),
                 "less_than": ("lt", "less than"), "less_than_equal": ("le", "at most")}[kind]
        return f"{value!r} is out of range.", f"give a value {bound[1]} {ctx.get(bound[0])}."
    if kind in {"dict_type", "model_type", "model_attributes_type"}:
        return f"expected a mapping of keys here, got {value!r}.", "write 'key: value' lines indented under this field."
    if kind in {"list_type", "tuple_type"}:
        return f"expected a list here, got {value!r}.", "write a list such as [a, b] or '- item' lines."
    if kind in {"too_short", "too_long"}:
        expected = ctx.get("min_length") if kind == "too_short" else ctx.get("max_length")
        return f"has {ctx.get('actual_length')} item(s), expected {expected}.", "give the right number of items."
    if kind in {"date_from_datetime_parsing", "date_parsing", "date_type"}:
        return f"{value!r} is not a date.", "write a date as YYYY-MM-DD."
    if kind == "value_error":
        text = str(ctx.get("error", err["msg"]))
        if " Fix: " in text:
            what, fix = text.split(" Fix: ", 1)
        elif ". Fix: " in text:
            what, fix = text.split(". Fix: ", 1)
        else:
            what, fix = text, "correct the value."
        what = what.rstrip(".") + "."
        return what, fix.rstrip(".") + "."
    return err["msg"].rstrip(".") + ".", "see schemas/evidence.schema.json for the expected form."


#: A number followed by a unit (``14.2 mas``, ``3"``, ``12 deg``): units are never written in the files.
_WITH_UNIT = re.compile(r"^\s*[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?\s*[A-Za-z°\"'/]+")


class _Shown:
    """A value whose ``repr`` is shortened (see :func:`shown_value`)."""

    def __init__(self, value: Any):
        self.value = value

    def __repr__(self) -> str:
        return shown_value(self.value)

    def __str__(self) -> str:
        return shown_value(self.value)


def validation_problems(
    exc: ValidationError, model: type[BaseModel], tree: Any, shown: str, prefix: tuple[Any, ...] = ()
) -> list[Problem]:
    """Turn a pydantic ValidationError into problems positioned in the YAML tree."""
    problems = []
    for err in exc.errors(include_url=False):
        loc = tuple(err["loc"])
        at_key = err["type"] == "extra_forbidden"
        line, col, path = _position(tree, prefix + loc, at_key)
        what, fix = _message(err, model, loc)
        problems.append(Problem(shown, line, col, _dotted(path[len(prefix):]), what, fix))
    return problems


# ----------------------------------------------------------------------------
# dossier.toml


def _toml_position(text: str, loc: tuple[Any, ...]) -> int:
    """Best line for a key path in a TOML file (tomllib keeps no positions)."""
    lines = text.splitlines()
    section: list[str] = []
    best = 0
    keys = [str(p) for p in loc if not isinstance(p, int)]
    for number, raw in enumerate(lines, start=1):
        line = raw.strip()
        header = re.match(r"^\[\[?\s*([^\]]+?)\s*\]\]?", line)
        if header:
            section = [s.strip().strip('"') for s in header.group(1).split(".")]
            if section == keys[: len(section)]:
                best = number  # the table that holds the key, when the key itself is not written
            continue
        assign = re.match(r'^("?[^=\s"]+"?)\s*=', line)
        if assign and section + [assign.group(1).strip('"')] == keys[: len(section) + 1]:
            return number
    return best


def load_settings(root: Path) -> tuple[Settings | None, list[Problem]]:
    path = root / SETTINGS_FILE
    if not path.is_file():
        return None, [Problem(SETTINGS_FILE, 0, 0, "", f"{SETTINGS_FILE} is missing from {root}.",
                              "create it with at least [project] title = \"...\" (see demo_project/dossier.toml).")]
    text, problems = read_text(path, SETTINGS_FILE, MAX_SETTINGS_MB)
    if text is None:
        return None, problems
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        match = re.search(r"at line (\d+), column (\d+)", str(exc))
        line, col = (int(match.group(1)), int(match.group(2))) if match else (0, 0)
        what = re.sub(r"\s*\(at line.*\)$", "", str(exc))
        return None, [Problem(SETTINGS_FILE, line, col, "", f"TOML syntax error: {what}.",
                              "correct the TOML syntax (strings need quotes; tables are [name]).")]
    problems = [_toml_problem(text, loc, f"{shown_value(value)} is not a finite number.",
                              "write a number (nan and inf are not allowed here).")
                for loc, value in _non_finite(data, ())]
    if problems:
        return None, problems
    try:
        settings = Settings.model_validate(data)
    except ValidationError as exc:
        problems = []
        for err in exc.errors(include_url=False):
            loc = tuple(err["loc"])
            what, fix = _message(err, Settings, loc)
            if err["type"] == "missing":
                fix = _toml_missing_fix(loc)
            problems.append(_toml_problem(text, loc if err["type"] != "missing" else loc[:-1], what, fix, loc))
        return None, problems
    from dossier.rules.registry import validate_rule_settings

    problems = []
    for rule_id, loc, what, fix in validate_rule_settings(settings.rules):
        line = _toml_position(text, ("rules", rule_id) + tuple(loc))
        problems.append(Problem(SETTINGS_FILE, line, 1 if line else 0, _dotted(["rules", rule_id, *loc]), what, fix))
    for i, entry in enumerate(settings.field_density):
        if entry.per_square_degree.ref is None and entry.ref is None:
            line = _toml_position(text, ("field_density",))
            problems.append(Problem(SETTINGS_FILE, line, 1 if line else 0, f"field_density[{i}]",
                                    "the field-star density has no source.", "add ref = \"source-id\"."))
    return settings, problems


def _toml_problem(text: str, at: tuple[Any, ...], what: str, fix: str, loc: tuple[Any, ...] | None = None) -> Problem:
    line = _toml_position(text, at)
    return Problem(SETTINGS_FILE, line, 1 if line else 0, _dotted(list(at if loc is None else loc)), what, fix)


def _non_finite(node: Any, loc: tuple[Any, ...]):
    """(loc, value) of every NaN or infinite float in parsed TOML (TOML allows nan and inf)."""
    if isinstance(node, float) and not math.isfinite(node):
        yield loc, node
    elif isinstance(node, dict):
        for key, value in node.items():
            yield from _non_finite(value, loc + (key,))
    elif isinstance(node, list):
        for i, value in enumerate(node):
            yield from _non_finite(value, loc + (i,))


def _toml_missing_fix(loc: tuple[Any, ...]) -> str:
    """How to add a missing key in TOML words: a [table], or key = value under its table."""
    name = str(loc[-1])
    info = _field_info(Settings, loc)
    kind = _unwrap(info.annotation) if info is not None else None
    hint = f" ({info.description.rstrip('.')})" if info is not None and info.description else ""
    tables = [str(p) for p in loc[:-1] if not isinstance(p, int)]
    if isinstance(kind, type) and issubclass(kind, BaseModel):
        required = [k for k, f in kind.model_fields.items() if f.is_required()]
        inside = f" with {', '.join(f'{k} = ...' for k in required)}" if required else ""
        return f"add a table [{'.'.join(tables + [name])}]{inside}{hint}."
    where = f" under [{'.'.join(tables)}]" if tables else " at the top of the file"
    return f"add {name} = ...{where}{hint}."


# ----------------------------------------------------------------------------
# references.yaml and evidence files


def load_references(root: Path, limits: LimitSettings | None = None) -> tuple[dict[str, Reference], list[Problem]]:
    refs, problems = _read_references(root, limits or LimitSettings())
    return refs or {}, problems


def _read_references(root: Path, limits: LimitSettings) -> tuple[_References | None, list[Problem]]:
    """The references, or ``None`` when the file cannot be read at all (then no source id can be checked)."""
    path = root / REFERENCES_FILE
    if not path.is_file():
        return _References({}, set()), [Problem(REFERENCES_FILE, 0, 0, "", f"{REFERENCES_FILE} is missing.",
                                                "create it: one entry per source id with its citation.")]
    tree, problems = read_yaml(path, REFERENCES_FILE, limit_mb=limits.max_yaml_mb, setting="max_yaml_mb")
    if problems:
        return None, problems
    if tree is None:
        return _References({}, set()), []
    if not isinstance(tree, dict):
        return None, [Problem(REFERENCES_FILE, 1, 1, "", "expected a mapping of source ids to references.",
                              "write 'source-id:' lines, each with citation: ...")]
    refs: dict[str, Reference] = {}
    invalid: set[str] = set()
    for key, value in tree.items():
        line, col = tree.lc.key(key)
        if not is_identifier(key):
            problems.append(Problem(REFERENCES_FILE, line + 1, col + 1, printable(str(key))[:60],
                                    f"{shown_value(key)} is not a valid source id.",
                                    "use letters, digits, '-', '_', '.' or '+', starting with a letter or digit."))
            continue
        try:
            refs[str(key)] = Reference.model_validate(_plain(value))
        except ValidationError as exc:
            invalid.add(str(key))
            problems += [
                Problem(p.file, p.line, p.column, f"{key}.{p.field}" if p.field else str(key), p.message, p.fix)
                for p in validation_problems(exc, Reference, tree, REFERENCES_FILE, prefix=(key,))
            ]
    return _References(refs, invalid), problems


class _References(dict):
    """The valid references, and the ids of entries that are written but invalid (already reported).

    A citation of an invalid entry is not reported again as an unknown source.
    """

    def __init__(self, valid: dict[str, Reference], invalid: set[str]):
        super().__init__(valid)
        self.ids = set(valid) | invalid


def _refs_in(value: Any, loc: tuple[Any, ...], inherited: str | None):
    """Yield (loc, ref, is_measured) for every source id the evidence names."""
    if isinstance(value, Measured):
        yield loc, value.ref or inherited, True
        return
    if isinstance(value, BaseModel):
        own = getattr(value, "ref", None) if "ref" in type(value).model_fields else None
        if own is not None:
            yield loc + ("ref",), own, False
        for name in type(value).model_fields:
            if name == "ref":
                continue
            yield from _refs_in(getattr(value, name), loc + (name,), own or inherited)
    elif isinstance(value, dict):
        for key, item in value.items():
            yield from _refs_in(item, loc + (key,), inherited)
    elif isinstance(value, (list, tuple)):
        for i, item in enumerate(value):
            yield from _refs_in(item, loc + (i,), inherited)


def _tree_refs(node: Any, loc: tuple[Any, ...]):
    """Yield (loc, ref) for every source id written in a raw YAML tree."""
    if isinstance(node, dict):
        for key, value in node.items():
            if key == "ref" and isinstance(value, str):
                yield loc + (key,), value
            else:
                yield from _tree_refs(value, loc + (key,))
    elif isinstance(node, list):
        for i, item in enumerate(node):
            yield from _tree_refs(item, loc + (i,))


def _ids(node: Any, key: str) -> list[tuple[int, Any]]:
    items = node.get(key) if isinstance(node, dict) else None
    return list(enumerate(items)) if isinstance(items, list) else []


def cross_check(tree: Any, system: System | None, folder: str, refs: Collection[str] | None, shown: str) -> list[Problem]:
    """Identifiers that must resolve: sources, pair members, claimed companions; a hierarchy without cycles.

    Runs on the raw YAML tree, so that it reports even when other fields of
    the file failed validation; the check that every measured value has a
    source needs the validated model and runs only when there is one.
    ``refs`` is ``None`` when references.yaml could not be read: source ids
    are not checked then (its own problem says why).
    """
    problems: list[Problem] = []

    def add(loc: tuple[Any, ...], what: str, fix: str) -> None:
        line, col, path = _position(tree, loc, False)
        problems.append(Problem(shown, line, col, _dotted(path), what, fix))

    sid = tree.get("id")
    if isinstance(sid, str) and sid != folder:
        add(("id",), f"the system id '{printable(sid)[:80]}' differs from its folder name '{printable(folder)}'.",
            f"write id: {folder}, or rename the folder.")
    known_refs = getattr(refs, "ids", refs)
    for loc, ref in (_tree_refs(tree, ()) if known_refs is not None else ()):
        if ref not in known_refs:
            close = difflib.get_close_matches(ref, sorted(known_refs), n=1, cutoff=0.6)
            hint = f"did you mean '{close[0]}'?" if close else f"add '{ref}' to {REFERENCES_FILE}."
            add(loc, f"source '{ref}' is not in {REFERENCES_FILE}.", hint)
    if system is not None:
        for loc, ref, is_measured in _refs_in(system, (), None):
            if ref is None and is_measured:
                add(loc, "this measured value has no source.",
                    "add {ref: source-id} to the value, or ref: to the record it belongs to.")

    comps = tree.get("components")
    components = {str(k) for k in comps} if isinstance(comps, dict) else set()
    pair_ids: dict[str, int] = {}
    for i, pair in _ids(tree, "pairs"):
        pid = pair.get("id") if isinstance(pair, dict) else None
        if not isinstance(pid, str):
            continue
        if pid in pair_ids or pid in components:
            add(("pairs", i, "id"), f"the id '{pid}' is already used.", "give each pair and component its own id.")
        pair_ids.setdefault(pid, i)
    known = components | set(pair_ids)
    for i, pair in _ids(tree, "pairs"):
        if not isinstance(pair, dict):
            continue
        members = pair.get("members")
        if isinstance(members, list) and len(members) == 2 and members[0] == members[1]:
            add(("pairs", i, "members"), f"a pair needs two different members, got '{members[0]}' twice.",
                "name two different components.")
        for j, member in enumerate(members if isinstance(members, list) else []):
            if not isinstance(member, str):
                continue
            if member == pair.get("id"):
                add(("pairs", i, "members", j), f"pair '{member}' cannot contain itself.", "name its two members.")
            elif member not in known:
                add(("pairs", i, "members", j), f"'{member}' is neither a component nor a pair of this system.",
                    _suggest(member, known, "declare it under 'components'"))
        parent = pair.get("parent")
        if isinstance(parent, str) and parent not in known:
            add(("pairs", i, "parent"), f"parent '{parent}' is neither a component nor a pair of this system.",
                _suggest(parent, known, "declare it under 'components'"))
    for cycle, loc in _hierarchy_cycles(tree, known):
        add(loc, f"the hierarchy has a cycle: {' → '.join(cycle)}; a pair cannot contain itself through its members "
            "and parents.", "correct 'members' or 'parent' so that each pair resolves a smaller part of the system.")
    seen_neighbours: dict[str, int] = {}
    for i, item in _ids(tree, "neighbours"):
        nid = item.get("id") if isinstance(item, dict) else None
        if isinstance(nid, str):
            if nid in seen_neighbours:
                add(("neighbours", i, "id"),
                    f"the neighbour id '{nid}' is already used by neighbours[{seen_neighbours[nid]}].",
                    "give each neighbour its own id, or merge the two entries.")
            seen_neighbours.setdefault(nid, i)
    for section, key, where in (("claims", "companion", components), ("claims", "around", components),
                                ("non_detections", "around", components), ("orbits", "pair", set(pair_ids))):
        for i, item in _ids(tree, section):
            name = item.get(key) if isinstance(item, dict) else None
            if isinstance(name, str) and name not in where:
                kind = "pair" if key == "pair" else "component"
                add((section, i, key), f"'{name}' is not a {kind} of this system.",
                    _suggest(name, where, f"declare it under '{kind}s' (it may have no data of its own)"))
    if system is not None:
        for i, nd in enumerate(system.non_detections):
            if nd.rho_range[0] >= nd.rho_range[1]:
                add(("non_detections", i, "rho_range"), "the separation range is empty.",
                    "write [smallest, largest] in arcsec.")
    return problems


def _hierarchy_cycles(tree: Any, known: set[str]) -> list[tuple[list[str], tuple[Any, ...]]]:
    """Cycles of containment: a pair contains its members, a component or pair contains the pairs that resolve it.

    Each cycle once, as the ids along it (first id repeated at the end) and
    the location of the entry that closes it. A pair naming itself as a
    member is reported on its own by :func:`cross_check`.
    """
    edges: dict[str, list[tuple[str, tuple[Any, ...]]]] = {}
    for i, pair in _ids(tree, "pairs"):
        pid = pair.get("id") if isinstance(pair, dict) else None
        if not isinstance(pid, str):
            continue
        members = pair.get("members")
        for j, member in enumerate(members if isinstance(members, list) else []):
            if isinstance(member, str) and member in known and member != pid:
                edges.setdefault(pid, []).append((member, ("pairs", i, "members", j)))
        parent = pair.get("parent")
        if isinstance(parent, str) and parent in known:
            edges.setdefault(parent, []).append((pid, ("pairs", i, "parent")))
    found: list[tuple[list[str], tuple[Any, ...]]] = []
    reported: set[frozenset[str]] = set()
    state: dict[str, int] = {}  # 1 on the current path, 2 done
    path: list[str] = []

    for root in sorted(edges):  # depth first, iteratively: a hostile file may chain thousands of pairs
        if root in state:
            continue
        state[root] = 1
        path.append(root)
        stack = [iter(edges.get(root, []))]
        while stack:
            step = next(stack[-1], None)
            if step is None:
                stack.pop()
                state[path.pop()] = 2
                continue
            target, loc = step
            if state.get(target) == 1:
                cycle = path[path.index(target):] + [target]
                if frozenset(cycle) not in reported:
                    reported.add(frozenset(cycle))
                    found.append((cycle, loc))
            elif target not in state:
                state[target] = 1
                path.append(target)
                stack.append(iter(edges.get(target, [])))
    return found


def _suggest(name: str, known: set[str], otherwise: str) -> str:
    close = difflib.get_close_matches(name, sorted(known), n=1, cutoff=0.5)
    return f"did you mean '{close[0]}'?" if close else f"{otherwise}."


def load_system(root: Path, folder: str, refs: Collection[str] | None,
                limits: LimitSettings | None = None) -> tuple[System | None, list[Problem]]:
    limits = limits or LimitSettings()
    path = root / SYSTEMS_DIR / folder / EVIDENCE_FILE
    shown = f"{SYSTEMS_DIR}/{folder}/{EVIDENCE_FILE}"
    if not path.is_file():
        return None, [Problem(shown, 0, 0, "", "the evidence file is missing.",
                              f"run 'dossier new {root} {folder}' or remove the folder.")]
    read = dict(limit_mb=limits.max_yaml_mb, setting="max_yaml_mb")
    # fast path: the C loader and no positions; when anything is wrong, read again with positions
    tree, fast_problems = read_yaml(path, shown, positions=False, **read)
    if not fast_problems and isinstance(tree, dict):
        try:
            system = System.model_validate(_plain(tree))
        except ValidationError:
            system = None
        if system is not None and not _cross_check_fails(tree, system, folder, refs):
            return system, []
    tree, problems = read_yaml(path, shown, **read)
    loops = [p for p in fast_problems if p.message == _ALIAS_LOOP]
    if problems or loops:
        # the round-trip loader turns an alias inside its own anchor into null, silently: the fast loader's
        # problem stands then
        return None, problems or loops
    if tree is None:
        return None, [Problem(shown, 0, 0, "", "the evidence file is empty.",
                              f"fill it in (run 'dossier new {root} NEW-ID' to see a template), or remove the folder.")]
    if not isinstance(tree, dict):
        return None, [Problem(shown, 1, 1, "", f"the evidence file must be a mapping of keys (id:, title:, ...), "
                              f"not {type(tree).__name__ if not isinstance(tree, list) else 'a list'}.",
                              f"write 'key: value' lines (run 'dossier new {root} NEW-ID' to see a template).")]
    try:
        system = System.model_validate(_plain(tree))
    except ValidationError as exc:
        system, problems = None, validation_problems(exc, System, tree, shown)
    return system, problems + cross_check(tree, system, folder, refs, shown)


def _cross_check_fails(tree: Any, system: System, folder: str, refs: Collection[str] | None) -> bool:
    """Whether cross_check would report anything (on a tree without positions)."""
    try:
        return bool(cross_check(tree, system, folder, refs, ""))
    except AttributeError:  # a problem was found and needed a position the fast tree does not keep
        return True


def system_folders(root: Path) -> tuple[list[str], list[Problem]]:
    """The folders under ``systems/`` that hold a system, and a problem for each that cannot.

    A folder's name is its system's id and names the files built from it,
    so it must be a valid id (:func:`system_id_problem`); it may not be a
    link to a folder outside the project; two names may not differ only in
    case (they would be one folder on macOS and Windows). Hidden folders
    (``.name``, as editors and version control make) and plain files are
    not systems and are passed over.
    """
    base = root / SYSTEMS_DIR
    if not base.is_dir():
        return [], []
    inside = root.resolve()
    folders: list[str] = []
    problems: list[Problem] = []
    for entry in sorted(base.iterdir(), key=lambda p: p.name):
        name = entry.name
        if name.startswith(".") or not entry.is_dir():
            continue
        shown = f"{SYSTEMS_DIR}/{printable(name)}"
        bad = system_id_problem(name)
        if bad is not None:
            what, fix = bad
            problems.append(Problem(shown, 0, 0, "", f"the folder name {what[0].lower() + what[1:]}",
                                    "rename the folder: " + fix))
            continue
        if entry.is_symlink() and not entry.resolve().is_relative_to(inside):
            problems.append(Problem(shown, 0, 0, "", f"the folder is a link to {entry.resolve()}, outside the project.",
                                    "keep every system's files inside the project folder (copy them in, or move the "
                                    "project)."))
            continue
        folders.append(name)
    by_case: dict[str, str] = {}
    for name in list(folders):
        first = by_case.setdefault(name.casefold(), name)
        if first != name:
            problems.append(Problem(f"{SYSTEMS_DIR}/{name}", 0, 0, "", f"the folder names '{first}' and '{name}' differ "
                                    "only in case, so they would be one folder on macOS and Windows.",
                                    "rename one of them, or merge them."))
            folders.remove(name)
    return folders, problems


def load_project(root: Path | str, only: str | None = None) -> Project:
    """Load and validate a whole project; raise :class:`ProblemsFound` with every problem."""
    root = Path(root)
    if not root.is_dir():
        raise ProblemsFound([Problem(printable(str(root)), 0, 0, "", "is not a project folder.",
                                     "give the folder that holds dossier.toml.")])
    settings, problems = load_settings(root)
    limits = settings.limits if settings is not None else LimitSettings()
    refs, ref_problems = _read_references(root, limits)
    problems += ref_problems
    systems: dict[str, System] = {}
    folders, folder_problems = system_folders(root)
    if only is not None:
        if only not in folders:
            raise ProblemsFound([Problem(f"{SYSTEMS_DIR}/{printable(only)[:80]}", 0, 0, "",
                                         f"there is no system '{printable(only)[:80]}'.",
                                         _suggest(only, set(folders), f"choose one of: {', '.join(folders)}"))])
        folders = [only]
    else:
        problems += folder_problems
    logs: dict[str, tuple] = {}
    from dossier.logbook import read_log
    from dossier.schema.log import LOG_FILE

    for folder in folders:
        system, system_problems = load_system(root, folder, refs, limits)
        problems += system_problems
        if system is not None:
            systems[folder] = system
        # the log is checked even when the evidence is not valid, so that every problem comes at once
        measures, log_problems = read_log(root / SYSTEMS_DIR / folder / LOG_FILE, f"{SYSTEMS_DIR}/{folder}/{LOG_FILE}",
                                          pairs={p.id for p in system.pairs} if system is not None else None,
                                          refs=getattr(refs, "ids", None) if refs is not None else None,
                                          max_mb=limits.max_log_mb)
        problems += log_problems
        logs[folder] = tuple(measures)
    if settings is not None and refs is not None:
        text = read_text(root / SETTINGS_FILE, SETTINGS_FILE)[0] or ""
        for i, entry in enumerate(settings.field_density):
            ref = entry.per_square_degree.ref or entry.ref
            if ref is not None and ref not in refs.ids:
                problems.append(Problem(SETTINGS_FILE, _toml_position(text, ("field_density",)), 1,
                                        f"field_density[{i}]", f"source '{ref}' is not in {REFERENCES_FILE}.",
                                        f"add '{ref}' to {REFERENCES_FILE}."))
    if problems:
        raise ProblemsFound(problems)
    assert settings is not None and refs is not None
    return Project(root=root, settings=settings, references=dict(refs), systems=systems, logs=logs)
