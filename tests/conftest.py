"""Shared fixtures: the demo project, and copies of it to break on purpose."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent
DEMO = REPO / "demo_project"


@pytest.fixture
def demo_copy(tmp_path: Path) -> Path:
    """A private copy of the demo project that a test may edit."""
    target = tmp_path / "project"
    shutil.copytree(DEMO, target)
    return target


def edit(path: Path, old: str, new: str) -> None:
    """Replace exactly one occurrence of ``old`` in a file (fails loudly otherwise)."""
    text = path.read_text(encoding="utf-8")
    assert text.count(old) == 1, f"{old!r} occurs {text.count(old)} times in {path}"
    path.write_text(text.replace(old, new), encoding="utf-8")
