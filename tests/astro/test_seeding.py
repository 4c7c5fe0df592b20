"""Seeds from inputs: the same inputs give the same seed on every machine, different inputs different seeds."""

from __future__ import annotations

import hashlib
import struct

import numpy as np
import pytest

from dossier.astro.seeding import seed_from


def test_numbers_enter_by_their_ieee_bytes_not_their_spelling():
    # a Python float, a numpy float64 and an int of the same value are one number (IEEE 754 double bytes)
    assert seed_from(1.5, "x").entropy == seed_from(np.float64(1.5), "x").entropy
    assert seed_from(2, "x").entropy == seed_from(2.0, "x").entropy
    assert seed_from(1.5, "x").entropy != seed_from(1.5, "y").entropy
    assert seed_from(np.array([1.0, 2.0])).entropy != seed_from(np.array([2.0, 1.0])).entropy


def test_the_seed_is_sha256_of_the_documented_bytes():
    # reference: hashlib's SHA-256 of the bytes the module docstring promises (b"f" + little-endian double,
    # b"s" + UTF-8, each followed by b"|"), first 16 bytes little-endian
    h = hashlib.sha256(b"f" + struct.pack("<d", 0.25) + b"|" + b"s" + "ω".encode() + b"|")
    assert seed_from(0.25, "ω").entropy == int.from_bytes(h.digest()[:16], "little")


def test_mappings_by_key_and_value_and_unknown_types_refused():
    assert seed_from({"a": 1, "b": 2}).entropy == seed_from({"b": 2, "a": 1}).entropy
    assert seed_from({"a": 1}).entropy != seed_from({"a": 2}).entropy
    with pytest.raises(TypeError, match="Fix"):
        seed_from(object())


def test_draws_repeat():
    a = np.random.default_rng(seed_from("draw", np.arange(5.0))).normal(size=3)
    b = np.random.default_rng(seed_from("draw", np.arange(5.0))).normal(size=3)
    assert np.array_equal(a, b)
