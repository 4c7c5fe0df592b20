"""The README's table of bad input names a test for every row: each named test must exist."""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def test_every_test_the_readme_names_exists():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    named = set(re.findall(r"`(tests/[\w/]+\.py)(?:::(\w+))?`", text))
    assert len(named) >= 20
    missing = []
    for path, name in named:
        source = ROOT / path
        if not source.is_file() or (name and not re.search(rf"^def {name}\(", source.read_text(encoding="utf-8"),
                                                            re.MULTILINE)):
            missing.append(f"{path}::{name}")
    assert not missing, f"the README names tests that do not exist: {missing}"
