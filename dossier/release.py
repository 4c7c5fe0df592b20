"""Releases: numbered, immutable, sealed snapshots of one system's dossier.

``dossier release PROJECT SYSTEM --note TEXT`` freezes what the dossier of a
system says now as version N (numbered per system, from 1) in
``PROJECT/releases/<system>/<N>/``:

``evidence/``
    Byte copies of the inputs: ``dossier.toml``, ``references.yaml``,
    ``systems/<system>/evidence.yaml`` and ``log.csv`` when there is one. The
    folder is itself a project: ``dossier weigh releases/<system>/<N>/evidence``
    weighs it again.
``state.json``
    What the dossier said (:func:`dossier.diff.state_of`): values, sources,
    assessments, verdicts and grades, as weighed by the Dossier of the day.
``weigh.json``
    The full assessments, in the format of ``dossier weigh --json``.
``release.json``
    Number, date, note, content hash (SHA-256 over the evidence files),
    Dossier version, the reviews recorded in the evidence and those that
    approved this release, the seal of the previous release, the SHA-256 of
    every other file, and its own ``seal``: the SHA-256 of its canonical
    JSON without the seal.

A release folder is written into a temporary folder (``.<N>.<random>``
beside it), flushed to disk and renamed into place, so it is whole or
absent, even after a crash; an existing number is never overwritten; its
files are made read-only. :func:`verify_releases` recomputes every hash
and seal and the chain of ``previous`` links, so any edit is detected.

The date is ``SOURCE_DATE_EPOCH`` when set (reproducible builds convention,
https://reproducible-builds.org/specs/source-date-epoch/), else the clock;
it is stored, never recomputed.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import os
import shutil
import stat
import tempfile
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path
from typing import Any

from dossier import __version__
from dossier.errors import DossierError
from dossier.schema.loader import EVIDENCE_FILE, REFERENCES_FILE, SETTINGS_FILE, SYSTEMS_DIR

RELEASES_DIR = "releases"
RELEASE_FILE = "release.json"
STATE_FILE = "state.json"
WEIGH_FILE = "weigh.json"
EVIDENCE_DIR = "evidence"
FORMAT_VERSION = 1


def _sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def evidence_files(root: Path, system_id: str) -> dict[str, bytes]:
    """The input files a system's dossier depends on, by path relative to the project, as bytes."""
    from dossier.schema.log import LOG_FILE

    names = [SETTINGS_FILE, REFERENCES_FILE, f"{SYSTEMS_DIR}/{system_id}/{EVIDENCE_FILE}",
             f"{SYSTEMS_DIR}/{system_id}/{LOG_FILE}"]
    return {name: (root / name).read_bytes() for name in names if (root / name).is_file()}


def content_hash(files: dict[str, bytes]) -> str:
    """SHA-256 over the sorted lines ``<path> NUL <sha256 of the file>``: one hash for a set of files."""
    digest = hashlib.sha256()
    for name in sorted(files):
        digest.update(name.encode() + b"\0" + _sha256(files[name]).encode() + b"\n")
    return digest.hexdigest()


def seal_of(meta: dict[str, Any]) -> str:
    """SHA-256 of the canonical JSON of a release record, its ``seal`` left out."""
    body = {k: v for k, v in meta.items() if k != "seal"}
    return _sha256(json.dumps(body, sort_keys=True, ensure_ascii=False, separators=(",", ":")).encode())


def release_date(environ: dict[str, str] | None = None) -> str:
    """ISO 8601 UTC time of a release: ``SOURCE_DATE_EPOCH`` when set, else now."""
    environ = os.environ if environ is None else environ
    text = environ.get("SOURCE_DATE_EPOCH")
    if text is not None and text.strip():
        try:
            when = dt.datetime.fromtimestamp(int(text.strip()), dt.timezone.utc)
        except (ValueError, OverflowError, OSError):
            raise DossierError(f"SOURCE_DATE_EPOCH='{text}' is not a whole number of seconds since 1970-01-01 UTC. "
                               "Fix: set it to such a number (e.g. $(git log -1 --format=%ct)) or unset it.") from None
    else:
        when = dt.datetime.now(dt.timezone.utc)
    return when.replace(microsecond=0).isoformat().replace("+00:00", "Z")


@dataclass(frozen=True)
class Release:
    """One release of a system, as stored."""

    system: str
    number: int
    path: Path

    @cached_property
    def meta(self) -> dict[str, Any]:
        return json.loads((self.path / RELEASE_FILE).read_text(encoding="utf-8"))

    @cached_property
    def state(self) -> dict[str, Any]:
        return json.loads((self.path / STATE_FILE).read_text(encoding="utf-8"))

    @property
    def date(self) -> str:
        return self.meta["date"]

    @property
    def note(self) -> str:
        return self.meta["note"]

    @property
    def content_hash(self) -> str:
        return self.meta["content_hash"]

    def files(self) -> dict[str, bytes]:
        """Every file of the release folder by relative path (``release.json`` included).

        Hidden paths are left out: weighing the evidence folder again writes
        its cache into ``evidence/.dossier-cache/``, which is no part of the release.
        """
        out = {}
        for path in sorted(self.path.rglob("*")):
            rel = path.relative_to(self.path)
            if path.is_file() and not any(part.startswith(".") for part in rel.parts):
                out[rel.as_posix()] = path.read_bytes()
        return out


def releases_of(root: Path, system_id: str) -> list[Release]:
    """The releases of one system, by number (folders not named by a number are ignored)."""
    folder = Path(root) / RELEASES_DIR / system_id
    if not folder.is_dir():
        return []
    found = [Release(system_id, int(p.name), p) for p in folder.iterdir() if p.is_dir() and p.name.isdigit()]
    return sorted(found, key=lambda r: r.number)


def all_releases(root: Path) -> dict[str, list[Release]]:
    """Every system's releases, by system id (sorted)."""
    base = Path(root) / RELEASES_DIR
    if not base.is_dir():
        return {}
    out = {p.name: releases_of(root, p.name) for p in sorted(base.iterdir()) if p.is_dir()}
    return {sid: found for sid, found in out.items() if found}


def counted_approvals(reviews: list[dict[str, Any]], previous: Release | None
                      ) -> tuple[list[dict[str, Any]], list[dict[str, Any]]]:
    """The approving reviews a release counts, and the requests for changes still open.

    A review counts once: reviews already recorded by the previous release
    are not counted again. Of the new reviews, each reviewer's latest (by
    date, then order in the file) is their decision; a reviewer's comment
    neither approves nor blocks.
    """
    seen = previous.meta.get("reviews", []) if previous is not None else []
    new = [r for r in reviews if r not in seen]
    latest: dict[str, dict[str, Any]] = {}
    for review in sorted(new, key=lambda r: r["on"]):  # stable: file order within a day
        if review["decision"] != "comment":
            latest[review["by"]] = review
    approvals = [r for r in latest.values() if r["decision"] == "approve"]
    blocking = [r for r in latest.values() if r["decision"] == "request-changes"]
    return approvals, blocking


def _write_readonly(path: Path, data: bytes) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(data)
    path.chmod(stat.S_IRUSR | stat.S_IRGRP | stat.S_IROTH)


def freeze(project_dir: Path | str, system_id: str, note: str, environ: dict[str, str] | None = None,
           number: int | None = None) -> Release:
    """Release the current dossier of one system as its next version.

    Parameters
    ----------
    project_dir
        The project folder.
    system_id
        The system to release.
    note
        What this release is about (required, one line or more).
    environ
        Environment to read ``SOURCE_DATE_EPOCH`` from (default: ``os.environ``).
    number
        The version number to write; default the next one. An existing number
        is refused: releases are never overwritten.

    Raises
    ------
    ProblemsFound
        The project does not validate.
    DossierError
        No note, the number exists, nothing changed since the previous
        release, or fewer approving reviews than ``[release]
        required_approvals`` asks.
    """
    from dossier.diff import state_of
    from dossier.durable import fsync_path, fsync_tree
    from dossier.engine import weigh_project
    from dossier.report import to_json
    from dossier.schema.loader import load_project

    root = Path(project_dir)
    if not note or not note.strip():
        raise DossierError("a release needs a note saying what it is about. Fix: add --note \"...\".")
    project = load_project(root, only=system_id)
    existing = releases_of(root, system_id)
    previous = existing[-1] if existing else None
    number = (previous.number + 1 if previous else 1) if number is None else number
    target = root / RELEASES_DIR / system_id / str(number)
    if target.exists():
        raise DossierError(f"release {number} of {system_id} exists ({target}) and releases are immutable; "
                           "nothing was written. Fix: release as the next number (leave the number out).")

    result = weigh_project(project)[system_id]
    state = state_of(project, result)
    inputs = evidence_files(root, system_id)
    chash = content_hash(inputs)
    if previous is not None and previous.content_hash == chash and previous.state == json.loads(json.dumps(state)):
        raise DossierError(f"nothing changed in {system_id} since release {previous.number} (same evidence, same "
                           "assessments); nothing was written. Fix: release after the evidence or the verdicts change.")

    required = project.settings.release.required_approvals
    approvals, blocking = counted_approvals(state["reviews"], previous)
    if len(approvals) < required:
        since = f" since release {previous.number}" if previous else ""
        raise DossierError(
            f"{system_id} has {len(approvals)} approving review(s){since}; dossier.toml [release] "
            f"required_approvals = {required}"
            + (f"; changes requested by {', '.join(r['by'] for r in blocking)}" if blocking else "")
            + f". Nothing was written. Fix: record approving reviews under 'reviews:' in "
            f"{SYSTEMS_DIR}/{system_id}/{EVIDENCE_FILE}, then release again.")

    outputs = {f"{EVIDENCE_DIR}/{name}": data for name, data in inputs.items()}
    outputs[STATE_FILE] = (json.dumps(state, indent=2, ensure_ascii=False) + "\n").encode()  # dossier order
    outputs[WEIGH_FILE] = to_json(project.settings.project.title, {system_id: result}).encode()
    meta: dict[str, Any] = {
        "format": "dossier-release",
        "format_version": FORMAT_VERSION,
        "system": system_id,
        "title": result.system.title,
        "number": number,
        "date": release_date(environ),
        "note": note.strip(),
        "content_hash": chash,
        "dossier_version": __version__,
        "reviews": state["reviews"],
        "approvals": approvals,
        "required_approvals": required,
        "previous": {"number": previous.number, "seal": previous.meta["seal"]} if previous else None,
        "files": {name: _sha256(data) for name, data in sorted(outputs.items())},
    }
    meta["seal"] = seal_of(meta)
    outputs[RELEASE_FILE] = (json.dumps(meta, indent=2, sort_keys=True, ensure_ascii=False) + "\n").encode()

    target.parent.mkdir(parents=True, exist_ok=True)
    staging = Path(tempfile.mkdtemp(prefix=f".{number}.", dir=target.parent))
    staging.chmod(0o755)  # mkdtemp makes it private; a release is for everyone to read
    try:
        for name, data in sorted(outputs.items()):
            _write_readonly(staging / name, data)
        fsync_tree(staging)  # on disk before it gets its name: a power cut cannot leave a release of empty files
        try:
            staging.rename(target)  # atomic; fails when another writer took the number meanwhile
        except OSError:
            raise DossierError(f"release {number} of {system_id} appeared while this one was being written; "
                               "nothing was overwritten. Fix: run the release again.") from None
        fsync_path(target.parent, folder=True)
    finally:
        if staging.exists():
            _make_writable(staging)
            shutil.rmtree(staging)
    return Release(system_id, number, target)


def _make_writable(folder: Path) -> None:
    for path in folder.rglob("*"):
        if path.is_file():
            path.chmod(stat.S_IRUSR | stat.S_IWUSR)


def verify_release(release: Release, previous: Release | None) -> list[str]:
    """Every way a stored release differs from what was written (empty when intact)."""
    where = f"{RELEASES_DIR}/{release.system}/{release.number}"
    try:
        meta = release.meta
    except (OSError, ValueError) as exc:
        return [f"{where}/{RELEASE_FILE}: unreadable ({exc.__class__.__name__})"]
    problems = []
    if meta.get("seal") != seal_of(meta):
        problems.append(f"{where}/{RELEASE_FILE}: edited (its seal does not match its content)")
    if meta.get("number") != release.number or meta.get("system") != release.system:
        problems.append(f"{where}/{RELEASE_FILE}: names {meta.get('system')} release {meta.get('number')}")
    listed = meta.get("files", {})
    present = {name: data for name, data in release.files().items() if name != RELEASE_FILE}
    for name in sorted(listed):
        if name not in present:
            problems.append(f"{where}/{name}: missing")
        elif _sha256(present[name]) != listed[name]:
            problems.append(f"{where}/{name}: edited (SHA-256 differs from the release record)")
    problems += [f"{where}/{name}: not part of the release" for name in sorted(set(present) - set(listed))]
    evidence = {name[len(EVIDENCE_DIR) + 1:]: data for name, data in present.items()
                if name.startswith(EVIDENCE_DIR + "/")}
    if content_hash(evidence) != meta.get("content_hash"):
        problems.append(f"{where}/{EVIDENCE_DIR}: content hash differs from the release record")
    link = meta.get("previous")
    if previous is None and link is not None:
        problems.append(f"{where}: refers to release {link.get('number')}, which is missing")
    if previous is not None:
        if link is None or link.get("number") != previous.number:
            problems.append(f"{where}: does not follow release {previous.number}")
        elif link.get("seal") != previous.meta.get("seal"):
            problems.append(f"{where}: the seal of release {previous.number} differs from the one recorded here")
    return problems


def verify_releases(root: Path | str) -> list[str]:
    """Problems with every release of a project: edits, missing files, gaps and broken links."""
    problems = []
    for sid, found in all_releases(Path(root)).items():
        expected = list(range(1, len(found) + 1))
        numbers = [r.number for r in found]
        if numbers != expected:
            missing = sorted(set(range(1, max(numbers) + 1)) - set(numbers))
            problems.append(f"{RELEASES_DIR}/{sid}: release(s) {', '.join(map(str, missing))} missing")
        previous = None
        for release in found:
            problems += verify_release(release, previous)
            previous = release
    return problems


def version_label(releases: list[Release], current_hash: str) -> str:
    """How a dossier built now names its version: 'release N', 'draft after release N' or 'unreleased draft'."""
    if not releases:
        return "unreleased draft"
    last = releases[-1]
    return f"release {last.number}" if last.content_hash == current_hash else f"draft after release {last.number}"
