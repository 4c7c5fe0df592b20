"""A cache of expensive derived results, keyed by everything they depend on.

Some derivations (a period search and a Keplerian fit) cost more to start
(importing astropy.timeseries and scipy.optimize) than all the other rules
together. Their results are stored as JSON under
``<project>/.dossier-cache/`` with a key that hashes the exact inputs, the
settings and the dossier version, so a stale entry can never be used: a
changed velocity, setting or program gives a different key. Deleting the
folder is always safe. Writes go to a temporary file, flushed to disk and
renamed into place.
"""

from __future__ import annotations

import functools
import hashlib
import json
import os
import tempfile
from pathlib import Path
from typing import Any, Callable

from dossier import __version__

CACHE_DIR = ".dossier-cache"


@functools.lru_cache(maxsize=1)
def code_hash() -> str:
    """SHA-256 of Dossier's own source: a cached result is reused only by the code that computed it.

    The version number alone is not enough: between two releases, a change to a
    sampler or a gate must not meet results of the code before it.
    """
    package = Path(__file__).resolve().parent
    digest = hashlib.sha256()
    for path in sorted(package.rglob("*.py")):
        digest.update(path.relative_to(package).as_posix().encode() + b"\0" + path.read_bytes())
    return digest.hexdigest()


class Cache:
    """JSON results by key, in one folder; ``Cache(None)`` caches nothing."""

    def __init__(self, root: Path | None):
        self.root = None if root is None else Path(root) / CACHE_DIR

    @staticmethod
    def key(kind: str, inputs: Any) -> str:
        text = json.dumps({"kind": kind, "version": __version__, "code": code_hash(), "inputs": inputs},
                          sort_keys=True, default=repr)
        return f"{kind}-{hashlib.sha256(text.encode()).hexdigest()[:32]}"

    def get_or_compute(self, kind: str, inputs: Any, compute: Callable[[], dict]) -> dict:
        """The cached result for these inputs, or ``compute()`` stored for next time."""
        if self.root is None:
            return compute()
        path = self.root / f"{self.key(kind, inputs)}.json"
        try:
            return json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            pass
        result = compute()
        self._store(path, json.dumps(result).encode())
        return result

    def get_json(self, kind: str, inputs: Any) -> Any | None:
        """The stored JSON value for these inputs, or ``None`` (nothing stored, unreadable, or no cache)."""
        if self.root is None:
            return None
        try:
            return json.loads((self.root / f"{self.key(kind, inputs)}.json").read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return None

    def put_json(self, kind: str, inputs: Any, value: Any) -> None:
        """Store a JSON value for these inputs (read back equal: floats round-trip, tuples become lists)."""
        if self.root is not None:
            self._store(self.root / f"{self.key(kind, inputs)}.json", json.dumps(value).encode())

    def get_bytes(self, kind: str, inputs: Any) -> bytes | None:
        """Stored bytes (a rendered PDF) for these inputs, or ``None``."""
        if self.root is None:
            return None
        try:
            return (self.root / f"{self.key(kind, inputs)}.bin").read_bytes()
        except OSError:
            return None

    def put_bytes(self, kind: str, inputs: Any, data: bytes) -> None:
        if self.root is not None:
            self._store(self.root / f"{self.key(kind, inputs)}.bin", data)

    def _store(self, path: Path, data: bytes) -> None:
        tmp = None
        try:
            path.parent.mkdir(exist_ok=True)
            fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=".tmp-")
            with os.fdopen(fd, "wb") as fh:
                fh.write(data)
                fh.flush()
                os.fsync(fh.fileno())  # a cached PDF is served as it is: never a truncated one after a power cut
            os.replace(tmp, path)
        except OSError:
            # a read-only project still weighs; it only loses the speed-up (and a full disk keeps no half file)
            if tmp is not None:
                try:
                    os.unlink(tmp)
                except OSError:
                    pass
