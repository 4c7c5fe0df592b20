"""Markdown notes to HTML with markdown-it-py, raw HTML off.

Raw HTML in a note is shown as text, never passed through: notes come from
many hands and the site must stay static and safe. Images are off too (their
text is kept): a remote image would load from elsewhere on every visit and
break the site offline.
"""

from __future__ import annotations

from functools import lru_cache


@lru_cache(maxsize=1)
def _parser():
    from markdown_it import MarkdownIt

    return MarkdownIt("commonmark", {"html": False, "linkify": False, "typographer": False}).enable("table").disable("image")


def render_markdown(text: str) -> str:
    """HTML of a Markdown note (CommonMark plus tables; raw HTML escaped)."""
    return _parser().render(text or "")
