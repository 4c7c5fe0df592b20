"""Seeds for the random draws of the samplers, made from the draws' own inputs.

A dossier rebuilds byte for byte: every Monte Carlo draw, posterior sampler
and simulated population takes its seed from a SHA-256 hash of exactly what
it is computed from. Numbers enter the hash by their IEEE 754 double bytes
(little-endian), text by its UTF-8 bytes and sequences element by element,
never through ``repr``, whose spelling of a number changes between numpy
versions: the same inputs give the same draws on every machine, and
different inputs different draws.
"""

from __future__ import annotations

import hashlib
import struct
from collections.abc import Iterable, Mapping

import numpy as np

__all__ = ["seed_from"]


def _feed(h, value: object) -> None:
    if isinstance(value, np.ndarray):
        h.update(b"a%d:" % value.size)
        h.update(np.ascontiguousarray(value, dtype="<f8").tobytes())
    elif isinstance(value, (bool, np.bool_)):
        h.update(b"b1" if value else b"b0")
    elif isinstance(value, (int, float, np.integer, np.floating)):
        h.update(b"f" + struct.pack("<d", float(value)))
    elif isinstance(value, str):
        h.update(b"s" + value.encode("utf-8"))
    elif value is None:
        h.update(b"n")
    elif isinstance(value, Mapping):
        h.update(b"{")
        for key in sorted(value, key=str):
            _feed(h, str(key))
            _feed(h, value[key])
        h.update(b"}")
    elif isinstance(value, Iterable):
        h.update(b"(")
        for item in value:
            _feed(h, item)
        h.update(b")")
    else:
        raise TypeError(f"cannot seed from a {type(value).__name__}. Fix: pass numbers, text, arrays or sequences.")
    h.update(b"|")


def seed_from(*parts: object) -> np.random.SeedSequence:
    """A :class:`numpy.random.SeedSequence` from a SHA-256 hash of ``parts`` (see the module docstring).

    Pass it to :func:`numpy.random.default_rng`, spawn children from it, or
    read ``.entropy`` (a 128-bit integer) where an integer seed is needed.
    """
    h = hashlib.sha256()
    for part in parts:
        _feed(h, part)
    return np.random.SeedSequence(int.from_bytes(h.digest()[:16], "little"))
