"""Load a project folder into validated models, collecting every problem.

YAML is read with ruamel.yaml's round-trip loader, which keeps the line and
column of every key and item, so that a pydantic validation error can be
reported as ``file:line:column: field: message Fix: ...``. Nothing is
computed here: the loader parses, validates and cross-checks identifiers.
"""

from __future__ import annotations

import difflib
import re
import tomllib
import types
import typing
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from pydantic import BaseModel, ValidationError

from dossier.errors import Problem, ProblemsFound
from dossier.schema.models import ID_PATTERN, Measured, Reference, System
from dossier.schema.settings import Settings

SETTINGS_FILE = "dossier.toml"
REFERENCES_FILE = "references.yaml"
SYSTEMS_DIR = "systems"
EVIDENCE_FILE = "evidence.yaml"


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
# YAML with positions


def _yaml(positions: bool = True):
    """A YAML reader: round-trip (keeps line and column of every node) or, for speed, the C safe loader."""
    from ruamel.yaml import YAML

    yaml = YAML(typ="rt") if positions else YAML(typ="safe", pure=False)
    yaml.allow_duplicate_keys = False
    return yaml


def read_yaml(path: Path, shown: str, positions: bool = True) -> tuple[Any, list[Problem]]:
    """Parse one YAML file; a syntax error becomes a problem with its position.

    ``positions=False`` parses with the fast C loader and keeps no positions:
    callers use it first and parse again with positions only when there is
    something to report.
    """
    from ruamel.yaml.error import MarkedYAMLError, YAMLError

    try:
        text = path.read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        return None, [Problem(shown, 0, 0, "", f"is not UTF-8 text ({exc.reason}).", "save the file as UTF-8.")]
    try:
        return _yaml(positions).load(text), []
    except MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        line, col = (mark.line + 1, mark.column + 1) if mark else (0, 0)
        what = (exc.problem or exc.context or "invalid YAML").strip()
        if exc.context and exc.problem and exc.context_mark is not None and exc.context_mark is not mark:
            what += f" ({exc.context.strip()} at line {exc.context_mark.line + 1})"
        return None, [Problem(shown, line, col, "", f"YAML syntax error: {what}.", _yaml_fix(what))]
    except YAMLError as exc:  # pragma: no cover - ruamel raises marked errors for text input
        return None, [Problem(shown, 0, 0, "", f"YAML error: {exc}.", "correct the YAML syntax.")]


def _yaml_fix(what: str) -> str:
    if "duplicate key" in what:
        return "keep one of the two entries with this key."
    if "tab" in what:
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


def _message(err: dict[str, Any], model: type[BaseModel], loc: tuple[Any, ...]) -> tuple[str, str]:
    kind = err["type"]
    value = err.get("input")
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
    if kind in {"float_parsing", "float_type", "int_parsing", "int_type", "int_from_float"}:
        unit = _unit_of(model, loc)
        unit_text = f" in {unit}" if unit and "uncertainty" not in str(unit) else ""
        return f"{value!r} is not a number.", f"write a number{unit_text}."
    if kind in {"string_type"}:
        return f"{value!r} is not text.", "write it as text (quote it if needed)."
    if kind == "literal_error":
        return f"{value!r} is not allowed here.", f"use one of: {ctx.get('expected', '')}."
    if kind == "string_pattern_mismatch":
        if ctx.get("pattern") == ID_PATTERN:
            return f"{value!r} is not a valid id.", "use letters, digits, '-', '_', '.' or '+', starting with a letter or digit."
        return f"{value!r} is not in the expected form.", f"match the pattern {ctx.get('pattern')}."
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
    text = path.read_text(encoding="utf-8")
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        match = re.search(r"at line (\d+), column (\d+)", str(exc))
        line, col = (int(match.group(1)), int(match.group(2))) if match else (0, 0)
        what = re.sub(r"\s*\(at line.*\)$", "", str(exc))
        return None, [Problem(SETTINGS_FILE, line, col, "", f"TOML syntax error: {what}.",
                              "correct the TOML syntax (strings need quotes; tables are [name]).")]
    try:
        settings = Settings.model_validate(data)
    except ValidationError as exc:
        problems = []
        for err in exc.errors(include_url=False):
            loc = tuple(err["loc"])
            what, fix = _message(err, Settings, loc)
            line = _toml_position(text, loc if err["type"] != "missing" else loc[:-1])
            problems.append(Problem(SETTINGS_FILE, line, 1 if line else 0, _dotted(list(loc)), what, fix))
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


# ----------------------------------------------------------------------------
# references.yaml and evidence files


def load_references(root: Path) -> tuple[dict[str, Reference], list[Problem]]:
    path = root / REFERENCES_FILE
    if not path.is_file():
        return {}, [Problem(REFERENCES_FILE, 0, 0, "", f"{REFERENCES_FILE} is missing.",
                            "create it: one entry per source id with its citation.")]
    tree, problems = read_yaml(path, REFERENCES_FILE)
    if problems:
        return {}, problems
    if tree is None:
        return {}, []
    if not isinstance(tree, dict):
        return {}, [Problem(REFERENCES_FILE, 1, 1, "", "expected a mapping of source ids to references.",
                            "write 'source-id:' lines, each with citation: ...")]
    refs: dict[str, Reference] = {}
    for key, value in tree.items():
        line, col = tree.lc.key(key)
        if not re.match(ID_PATTERN, str(key)):
            problems.append(Problem(REFERENCES_FILE, line + 1, col + 1, str(key), f"{key!r} is not a valid source id.",
                                    "use letters, digits, '-', '_', '.' or '+'."))
            continue
        try:
            refs[str(key)] = Reference.model_validate(_plain(value))
        except ValidationError as exc:
            problems += [
                Problem(p.file, p.line, p.column, f"{key}.{p.field}" if p.field else str(key), p.message, p.fix)
                for p in validation_problems(exc, Reference, tree, REFERENCES_FILE, prefix=(key,))
            ]
    return refs, problems


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


def cross_check(tree: Any, system: System | None, folder: str, refs: dict[str, Reference], shown: str) -> list[Problem]:
    """Identifiers that must resolve: sources, pair members, claimed companions.

    Runs on the raw YAML tree, so that it reports even when other fields of
    the file failed validation; the check that every measured value has a
    source needs the validated model and runs only when there is one.
    """
    problems: list[Problem] = []

    def add(loc: tuple[Any, ...], what: str, fix: str) -> None:
        line, col, path = _position(tree, loc, False)
        problems.append(Problem(shown, line, col, _dotted(path), what, fix))

    sid = tree.get("id")
    if isinstance(sid, str) and sid != folder:
        add(("id",), f"the system id '{sid}' differs from its folder name '{folder}'.",
            f"write id: {folder}, or rename the folder.")
    for loc, ref in _tree_refs(tree, ()):
        if ref not in refs:
            close = difflib.get_close_matches(ref, list(refs), n=1, cutoff=0.6)
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


def _suggest(name: str, known: set[str], otherwise: str) -> str:
    close = difflib.get_close_matches(name, sorted(known), n=1, cutoff=0.5)
    return f"did you mean '{close[0]}'?" if close else f"{otherwise}."


def load_system(root: Path, folder: str, refs: dict[str, Reference]) -> tuple[System | None, list[Problem]]:
    path = root / SYSTEMS_DIR / folder / EVIDENCE_FILE
    shown = f"{SYSTEMS_DIR}/{folder}/{EVIDENCE_FILE}"
    if not path.is_file():
        return None, [Problem(shown, 0, 0, "", "the evidence file is missing.",
                              f"run 'dossier new {root} {folder}' or remove the folder.")]
    # fast path: the C loader and no positions; when anything is wrong, read again with positions
    tree, problems = read_yaml(path, shown, positions=False)
    if not problems and isinstance(tree, dict):
        try:
            system = System.model_validate(_plain(tree))
        except ValidationError:
            system = None
        if system is not None and not _cross_check_fails(tree, system, folder, refs):
            return system, []
    tree, problems = read_yaml(path, shown)
    if problems:
        return None, problems
    if not isinstance(tree, dict):
        return None, [Problem(shown, 1, 1, "", "the evidence file must be a mapping of keys (id:, title:, ...).",
                              "run 'dossier new' for a template.")]
    try:
        system = System.model_validate(_plain(tree))
    except ValidationError as exc:
        system, problems = None, validation_problems(exc, System, tree, shown)
    return system, problems + cross_check(tree, system, folder, refs, shown)


def _cross_check_fails(tree: Any, system: System, folder: str, refs: dict[str, Reference]) -> bool:
    """Whether cross_check would report anything (on a tree without positions)."""
    try:
        return bool(cross_check(tree, system, folder, refs, ""))
    except AttributeError:  # a problem was found and needed a position the fast tree does not keep
        return True


def load_project(root: Path | str, only: str | None = None) -> Project:
    """Load and validate a whole project; raise :class:`ProblemsFound` with every problem."""
    root = Path(root)
    if not root.is_dir():
        raise ProblemsFound([Problem(str(root), 0, 0, "", "is not a project folder.",
                                     "give the folder that holds dossier.toml.")])
    settings, problems = load_settings(root)
    refs, ref_problems = load_references(root)
    problems += ref_problems
    systems: dict[str, System] = {}
    folders = sorted(p.name for p in (root / SYSTEMS_DIR).iterdir() if p.is_dir()) if (root / SYSTEMS_DIR).is_dir() else []
    if only is not None:
        if only not in folders:
            raise ProblemsFound([Problem(f"{SYSTEMS_DIR}/{only}", 0, 0, "", f"there is no system '{only}'.",
                                         _suggest(only, set(folders), f"choose one of: {', '.join(folders)}"))])
        folders = [only]
    logs: dict[str, tuple] = {}
    for folder in folders:
        system, system_problems = load_system(root, folder, refs)
        problems += system_problems
        if system is not None:
            systems[folder] = system
            from dossier.logbook import read_log
            from dossier.schema.log import LOG_FILE

            measures, log_problems = read_log(root / SYSTEMS_DIR / folder / LOG_FILE, f"{SYSTEMS_DIR}/{folder}/{LOG_FILE}",
                                              pairs={p.id for p in system.pairs}, refs=set(refs))
            problems += log_problems
            logs[folder] = tuple(measures)
    if settings is not None:
        for i, entry in enumerate(settings.field_density):
            ref = entry.per_square_degree.ref or entry.ref
            if ref is not None and ref not in refs:
                problems.append(Problem(SETTINGS_FILE, _toml_position((root / SETTINGS_FILE).read_text(), ("field_density",)), 1,
                                        f"field_density[{i}]", f"source '{ref}' is not in {REFERENCES_FILE}.",
                                        f"add '{ref}' to {REFERENCES_FILE}."))
    if problems:
        raise ProblemsFound(problems)
    assert settings is not None
    return Project(root=root, settings=settings, references=refs, systems=systems, logs=logs)
