"""PDF of a system's dossier page, with WeasyPrint and ``templates/assets/print.css``.

The page's own ``<link media="print">`` brings in the print stylesheet (A4,
running header, "page N of M", no navigation). WeasyPrint output is
byte-identical for identical HTML and fonts as long as the HTML carries no
date metadata and no PDF/X variant is asked for (PDF/X-4 adds a random UUID);
see the set-up facts in DESIGN.md. ``weasyprint`` is imported here, inside the
function, because importing it costs about 0.9 s.
"""

from __future__ import annotations

import posixpath
from pathlib import Path
from urllib.parse import unquote, urlsplit


def render_pdf(html: str, base_url: Path) -> bytes:
    """Render one HTML page to PDF bytes.

    Parameters
    ----------
    html : str
        The page, as rendered by :func:`dossier.render.html.render_page`.
    base_url : Path
        Path of the page itself (it need not exist): its relative stylesheet
        links, e.g. ``../../assets/print.css``, must resolve from there.

    Returns
    -------
    bytes
        The PDF. Links to other files of the site are written relative to the
        page, so the PDF carries no path of the machine that built it.
    """
    from weasyprint import HTML

    base_url = Path(base_url).resolve()
    document = HTML(string=html, base_url=str(base_url)).render()
    here = base_url.parent
    for page in document.pages:
        page.links[:] = [_relative(link, here) for link in page.links]
    return document.write_pdf()


def _relative(link: tuple, here: Path) -> tuple:
    """A ``file:`` link of the page made relative to the page's folder again."""
    link_type, target, *rest = link
    if link_type != "external" or not target.startswith("file:"):
        return link
    parts = urlsplit(target)
    rel = posixpath.relpath(unquote(parts.path), here.as_posix())
    if parts.fragment:
        rel += f"#{parts.fragment}"
    return (link_type, rel, *rest)
