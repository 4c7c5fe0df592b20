"""Helpers shared by the figure tests: reading SVG text and finding artists by label."""

from __future__ import annotations

import xml.etree.ElementTree as ET

SVG_NS = "{http://www.w3.org/2000/svg}"


def svg_texts(svg: str) -> list[str]:
    """The visible text of an SVG: every line of every <text> element."""
    root = ET.fromstring(svg)
    return ["".join(node.itertext()).strip() for node in root.iter(f"{SVG_NS}text")]


def by_label(artists, label):
    found = [a for a in artists if a.get_label() == label]
    assert len(found) == 1, f"expected one artist labelled {label!r}, found {len(found)}"
    return found[0]
