"""House style and deterministic SVG output shared by every figure.

Each figure module builds a :class:`matplotlib.figure.Figure` with the object
API inside :func:`house_style` (so no rcParams leak into the caller) and hands
it to :func:`to_svg`. matplotlib is imported inside the functions, never at
module import, so that the command line does not pay for it at start-up.

The SVG is made byte-identical across runs by two settings that both matter
(matplotlib docs, ``svg.hashsalt`` in the default matplotlibrc and
``Figure.savefig`` ``metadata``): a fixed ``svg.hashsalt``, which seeds the ids
of clip paths and markers, and ``metadata={'Date': None}``, which drops the
timestamp. ``svg.fonttype = 'none'`` keeps text as ``<text>`` so that labels
stay searchable and the page's fonts apply.
"""

from __future__ import annotations

import contextlib
import hashlib
import io
import re
from collections.abc import Iterator, Sequence
from typing import TYPE_CHECKING
from xml.sax.saxutils import escape, quoteattr

if TYPE_CHECKING:  # pragma: no cover - typing only
    from matplotlib.axes import Axes
    from matplotlib.backend_bases import RendererBase
    from matplotlib.figure import Figure
    from matplotlib.legend import Legend
    from matplotlib.text import Text

# --- Palette -----------------------------------------------------------------
# Our own restrained palette, named by role. Hues are spaced so that the
# status colours stay apart for the common colour-vision deficiencies, and
# every status also has its own line style, so the charts survive greyscale
# print.

INK = "#1f2328"
"""Text, titles and labels."""
INK_MUTED = "#5b6470"
"""Axis spines, ticks and secondary text."""
GRID = "#e4e7eb"
"""Faint grid lines."""
BAND_BACKGROUND = "#f4f6f8"
"""Alternate background of rows (one per component)."""
BACKGROUND = "#ffffff"
"""Figure and axes background: the white of the page."""

PRIMARY = "#1d3f6e"
"""The primary star (deep navy)."""
COMPANION = "#5b8fc7"
"""Every other component (mid blue)."""
MOTION = "#6a4c93"
"""Proper-motion arrows (violet: apart from the rust of optical pairs)."""

# The status colours are the pages' (templates/assets/style.css), darkened where a line on white needs
# 3:1 contrast (co-moving), so a status reads the same in a badge and in a chart.
BOUND = "#1d4f91"
"""Pair status ``bound`` (blue, solid line)."""
CO_MOVING = "#3a7fbf"
"""Pair status ``co-moving`` (mid blue, dashed line)."""
OPTICAL = "#9a3412"
"""Pair status ``optical`` (rust, dotted line)."""
UNDETERMINED = "#5f6b7a"
"""Pair status ``undetermined`` (grey, dash-dot line)."""

MEASUREMENT = "#1d3f6e"
"""A single measurement with its error bar."""
COMBINED = "#2a8a7a"
"""A combined (weighted mean) value."""
UNCERTAINTY_BAND = "#9fd0c6"
"""Shaded 1-sigma band of a combined value (formal error)."""
INFLATED_BAND = "#d9eeea"
"""Shaded 1-sigma band after inflating the error for excess scatter."""
DISCORDANT = "#b3261e"
"""A measurement flagged as discordant (brick red)."""

CYCLE = (PRIMARY, MOTION, CO_MOVING, UNDETERMINED, COMPANION, OPTICAL)
"""Colour cycle for any figure that plots unnamed series."""

FONT_FAMILY = "DejaVu Sans"
HASH_SALT = "dossier"
"""Fixed ``svg.hashsalt``: same figure, same ids, same bytes."""

DEFAULT_SIZE_IN = (6.5, 5.0)
"""Width and height of a full-width figure, inches."""


def rc_params() -> dict[str, object]:
    """Return the rcParams of the house style.

    Returns
    -------
    dict
        Settings for :func:`matplotlib.rc_context`; built on each call so the
        caller may change its copy.
    """
    from cycler import cycler

    return {
        # names from the evidence (instruments, bands) may hold '$': never read them as formulas (none are used)
        "text.parse_math": False,
        "font.family": [FONT_FAMILY],
        "font.size": 9.0,
        "axes.titlesize": 10.5,
        "axes.titleweight": "bold",
        "axes.titlelocation": "left",
        "axes.titlepad": 8.0,
        "axes.labelsize": 9.0,
        "axes.labelcolor": INK,
        "axes.edgecolor": INK_MUTED,
        "axes.linewidth": 0.8,
        "axes.facecolor": BACKGROUND,
        "axes.prop_cycle": cycler(color=list(CYCLE)),
        "axes.axisbelow": True,
        "axes.grid": False,
        "axes.unicode_minus": True,
        "figure.facecolor": BACKGROUND,
        "figure.edgecolor": BACKGROUND,
        "figure.titlesize": 10.5,
        "figure.titleweight": "bold",
        "figure.dpi": 100.0,
        "grid.color": GRID,
        "grid.linewidth": 0.6,
        "grid.linestyle": "-",
        "legend.fontsize": 8.5,
        "legend.title_fontsize": 9.0,
        "legend.frameon": False,
        "legend.handlelength": 2.6,
        "lines.linewidth": 1.3,
        "lines.solid_capstyle": "round",
        "patch.linewidth": 0.8,
        "text.color": INK,
        "xtick.color": INK_MUTED,
        "ytick.color": INK_MUTED,
        "xtick.labelcolor": INK,
        "ytick.labelcolor": INK,
        "xtick.labelsize": 8.5,
        "ytick.labelsize": 8.5,
        "xtick.direction": "out",
        "ytick.direction": "out",
        "xtick.major.size": 3.5,
        "ytick.major.size": 3.5,
        "xtick.minor.size": 2.0,
        "ytick.minor.size": 2.0,
        "savefig.facecolor": BACKGROUND,
        "savefig.edgecolor": BACKGROUND,
        "savefig.bbox": None,
        "svg.fonttype": "none",
        "svg.hashsalt": HASH_SALT,
        "svg.id": None,
    }


@contextlib.contextmanager
def house_style() -> Iterator[None]:
    """Apply the house style for the duration of a ``with`` block.

    Artists read most rcParams when they are created, so a figure function
    builds its whole figure inside this block. Nothing leaks: the previous
    rcParams come back on exit (:func:`matplotlib.rc_context`).
    """
    import matplotlib

    with matplotlib.rc_context(rc_params()):
        yield


def new_figure(width_in: float = DEFAULT_SIZE_IN[0], height_in: float = DEFAULT_SIZE_IN[1]) -> Figure:
    """Create an empty figure in the house style.

    Call it inside :func:`house_style` and add the axes there too, so that
    they pick up the style as well; then place them with :func:`arrange`.

    Parameters
    ----------
    width_in, height_in : float
        Size of the figure, inches.

    Returns
    -------
    matplotlib.figure.Figure
        A figure attached to an SVG canvas (no pyplot, no global figure
        list) and without a layout engine: :func:`arrange` lays it out once.
    """
    from matplotlib.backends.backend_svg import FigureCanvasSVG
    from matplotlib.figure import Figure

    with house_style():
        fig = Figure(figsize=(width_in, height_in), layout=None)
        FigureCanvasSVG(fig)
    return fig


PAD_IN = 0.1
"""Margin between the outermost text and the edge of the figure, inches."""
GAP_IN = 0.2
"""Space between the axes (with their labels) and a legend beside or below them, inches."""


def arrange(
    fig: Figure,
    ax: Axes,
    *,
    title: Text | None = None,
    legend: Legend | None = None,
    legend_side: str = "right",
    square: bool = False,
) -> None:
    """Lay out a one-axes figure tightly around its text, in one measured pass.

    matplotlib's constrained layout reaches the same result but needs three
    full draws to settle around an equal-aspect axes (about 0.15 s each on
    these machines); here the text is measured with a renderer and the axes
    placed by hand, so the figure is drawn only once, when it is saved.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        The figure, with its axes, labels, title and legend already made.
    ax : matplotlib.axes.Axes
        Its only axes.
    title : matplotlib.text.Text, optional
        The axes title (as returned by ``ax.set_title``), to leave room for.
    legend : matplotlib.legend.Legend, optional
        A figure legend to place ``"right"`` of the axes (top-aligned) or
        ``"below"`` them (centred).
    legend_side : {"right", "below"}
        Where the legend goes.
    square : bool
        Make the axes box square (for equal-aspect charts); the figure's
        height then shrinks or grows to fit its content.
    """
    import matplotlib

    if legend_side not in ("right", "below"):
        raise ValueError(f"legend_side is {legend_side!r}. Fix: use 'right' or 'below'.")
    renderer = text_renderer(fig)
    dpi = fig.dpi
    width_in, height_in = (float(v) for v in fig.get_size_inches())
    legend_w = legend_h = 0.0
    if legend is not None:
        extent = legend.get_window_extent(renderer)
        legend_w, legend_h = extent.width / dpi, extent.height / dpi
    for _ in range(2):  # tick labels can change with the size of the axes: measure twice
        box = ax.get_window_extent(renderer)
        yaxis = ax.yaxis.get_tightbbox(renderer)
        xaxis = ax.xaxis.get_tightbbox(renderer)
        left = max((box.x0 - a.x0) / dpi for a in (yaxis, xaxis, box) if a is not None)
        bottom = (box.y0 - xaxis.y0) / dpi if xaxis is not None else 0.0
        overhang = max(0.0, (xaxis.x1 - box.x1) / dpi) if xaxis is not None else 0.0
        top = max(0.0, (yaxis.y1 - box.y1) / dpi) if yaxis is not None else 0.0
        if title is not None and title.get_text():
            pad = matplotlib.rcParams["axes.titlepad"] / 72.0
            top = max(top, title.get_window_extent(renderer).height / dpi + pad)

        x0 = PAD_IN + left
        x1 = width_in - PAD_IN - overhang
        if legend is not None and legend_side == "right":
            x1 -= legend_w + GAP_IN
        if square:
            side = x1 - x0
            x1 = x0 + side
            height_in = max(PAD_IN + bottom + side + top + PAD_IN, legend_h + 2 * PAD_IN)
            fig.set_size_inches(width_in, height_in)
            y1 = height_in - PAD_IN - top
            y0 = y1 - side
        else:
            y0 = PAD_IN + bottom
            if legend is not None and legend_side == "below":
                y0 += legend_h + GAP_IN / 2
            y1 = height_in - PAD_IN - top
        ax.set_position([x0 / width_in, y0 / height_in, (x1 - x0) / width_in, (y1 - y0) / height_in])

    if legend is not None:
        _place_legend(fig, legend, legend_side, (x0, y0, x1, y1), bottom=bottom, overhang=overhang)


def arrange_column(
    fig: Figure,
    axes: Sequence[Axes],
    *,
    weights: Sequence[float],
    gaps_in: Sequence[float],
    title: Text | None = None,
    legend: Legend | None = None,
    unit_in: float | None = None,
    min_height_in: float = 0.0,
    max_height_in: float = float("inf"),
) -> None:
    """Lay out a column of axes, top to bottom, tightly around their text, in one measured pass.

    The column counterpart of :func:`arrange`: all axes share one left and
    one right edge (so that their x axes line up), the title sits over the
    first, the legend goes below the last, and the boxes get heights in
    proportion to ``weights`` once the text is measured. Where the x tick
    labels of an axes would touch (a narrow axes, long numbers), it gets
    fewer ticks.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        The figure, with its axes, labels, title and legend already made.
    axes : sequence of matplotlib.axes.Axes
        The axes, top to bottom.
    weights : sequence of float
        Relative heights of the axes boxes, one per axes.
    gaps_in : sequence of float
        Space between each axes and the next, inches, one fewer than the
        axes; added to the room taken by the upper one's x axis (its tick
        labels, if shown) and by whatever the lower one's y axis shows above
        its box.
    title : matplotlib.text.Text, optional
        The title of the first axes, to leave room for.
    legend : matplotlib.legend.Legend, optional
        A figure legend, centred below the column.
    unit_in : float, optional
        Height of one unit of weight, inches. When given, the figure's height
        is set to fit the column and its text exactly (within
        ``min_height_in`` and ``max_height_in``, the boxes stretching or
        shrinking to suit); otherwise the figure keeps its height.
    min_height_in, max_height_in : float
        Bounds on the figure's height when ``unit_in`` is given, inches.
    """
    import matplotlib

    if len(weights) != len(axes) or len(gaps_in) != len(axes) - 1 or not axes:
        raise ValueError(
            f"arrange_column got {len(axes)} axes, {len(weights)} weights and {len(gaps_in)} gaps. "
            "Fix: pass one weight per axes and one gap fewer."
        )
    renderer = text_renderer(fig)
    dpi = fig.dpi
    width_in, height_in = (float(v) for v in fig.get_size_inches())
    legend_h = legend.get_window_extent(renderer).height / dpi if legend is not None else 0.0
    for _ in range(2):  # tick labels can change with the size of the axes: measure twice
        left = overhang = 0.0
        below: list[float] = []  # room under each box taken by its x axis, inches
        above: list[float] = []  # room over each box taken by its y axis, inches
        for ax in axes:
            box = ax.get_window_extent(renderer)
            yaxis = ax.yaxis.get_tightbbox(renderer)
            xaxis = ax.xaxis.get_tightbbox(renderer)
            left = max(left, *((box.x0 - a.x0) / dpi for a in (yaxis, xaxis, box) if a is not None))
            overhang = max(overhang, (xaxis.x1 - box.x1) / dpi if xaxis is not None else 0.0)
            below.append(max(0.0, (box.y0 - xaxis.y0) / dpi) if xaxis is not None else 0.0)
            above.append(max(0.0, (yaxis.y1 - box.y1) / dpi) if yaxis is not None else 0.0)
        top = above[0]
        if title is not None and title.get_text():
            pad = matplotlib.rcParams["axes.titlepad"] / 72.0
            top = max(top, title.get_window_extent(renderer).height / dpi + pad)
        bottom = below[-1]
        gaps = [below[i] + above[i + 1] + gaps_in[i] for i in range(len(axes) - 1)]

        x0 = PAD_IN + left
        x1 = width_in - PAD_IN - overhang
        y_bottom = PAD_IN + bottom + (legend_h + GAP_IN / 2 if legend is not None else 0.0)
        if unit_in is not None:
            wanted = y_bottom + sum(gaps) + unit_in * sum(weights) + top + PAD_IN
            height_in = min(max_height_in, max(min_height_in, wanted))
            fig.set_size_inches(width_in, height_in)
        y_top = height_in - PAD_IN - top
        unit = max(0.0, y_top - y_bottom - sum(gaps)) / sum(weights)
        y1 = y_top
        for i, ax in enumerate(axes):
            y0 = y1 - unit * weights[i]
            ax.set_position([x0 / width_in, y0 / height_in, (x1 - x0) / width_in, (y1 - y0) / height_in])
            y1 = y0 - (gaps[i] if i < len(gaps) else 0.0)
            _thin_x_ticks(ax, renderer)

    if legend is not None:
        _place_legend(fig, legend, "below", (x0, y_bottom, x1, y_top), bottom=bottom, overhang=overhang)


def _thin_x_ticks(ax: Axes, renderer: RendererBase) -> None:
    """Give an axes fewer x ticks until no two of its tick labels are closer than half an em."""
    from matplotlib.ticker import MaxNLocator

    tick = ax.xaxis.get_major_ticks()[0]
    if not tick.label1.get_visible():
        return
    font = tick.label1.get_fontproperties()
    room = 0.5 * font.get_size_in_points() * ax.figure.dpi / 72.0
    low, high = sorted(ax.get_xlim())
    for _ in range(10):
        locs = [x for x in ax.xaxis.get_major_locator()() if low <= x <= high]
        texts = ax.xaxis.get_major_formatter().format_ticks(locs)
        centres = ax.transData.transform([(x, 0.0) for x in locs])[:, 0]
        halves = [renderer.get_text_width_height_descent(t, font, ismath=False)[0] / 2 for t in texts]
        if len(locs) <= 2 or all(
            centres[k + 1] - halves[k + 1] - (centres[k] + halves[k]) >= room for k in range(len(locs) - 1)
        ):
            return
        ax.xaxis.set_major_locator(MaxNLocator(nbins=len(locs) - 2, steps=[1, 2, 2.5, 5, 10]))


def _place_legend(
    fig: Figure, legend: Legend, side: str, box: tuple[float, float, float, float], *, bottom: float, overhang: float
) -> None:
    """Anchor a figure legend right of (top-aligned) or below (centred) the box ``(x0, y0, x1, y1)``, inches.

    ``bottom`` is the room the x axis takes under the box, ``overhang`` how
    far its tick labels reach past its right edge, inches.
    """
    width_in, height_in = (float(v) for v in fig.get_size_inches())
    legend_w = legend.get_window_extent(text_renderer(fig)).width / fig.dpi
    x0, y0, x1, y1 = box
    if side == "right":
        anchor, loc = ((x1 + overhang + GAP_IN) / width_in, y1 / height_in), "upper left"
    else:
        # Centred on the axes, but never past the edges of the figure.
        centre = min(max(0.5 * (x0 + x1), PAD_IN + legend_w / 2), width_in - PAD_IN - legend_w / 2)
        anchor, loc = (centre / width_in, (y0 - bottom - GAP_IN / 2) / height_in), "upper center"
    legend.set_bbox_to_anchor(anchor, transform=fig.transFigure)
    legend.set_loc(loc)


def text_renderer(fig: Figure) -> RendererBase:
    """Return a renderer that can measure the figure's text without drawing it.

    Agg and SVG measure text with the same FreeType metrics of the same font
    files, so what fits in Agg fits in the SVG.
    """
    from matplotlib.backends.backend_agg import RendererAgg

    return RendererAgg(max(1, int(fig.bbox.width)), max(1, int(fig.bbox.height)), fig.dpi)


_PROLOG = re.compile(r"\A.*?(?=<svg[\s>])", re.DOTALL)
_ID = re.compile(r'\bid="([^"]+)"')
_HREF = re.compile(r'(xlink:href|href)="#([^"]+)"')
_URL = re.compile(r"url\(#([^)]+)\)")
_FONT = re.compile(r"font-family: 'DejaVu Sans'(?=[;\"])")
_XML_INVALID = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")
"""Characters XML 1.0 does not allow in text: never written into a label."""
_QUOTES = {'"': "&quot;"}


def to_svg(fig: Figure, *, title: str | None = None, description: str | None = None, alt: str | None = None) -> str:
    """Serialise a figure to SVG text that is byte-identical across runs.

    The text is ready to inline in HTML: no XML prolog or DOCTYPE; every id
    carries a prefix derived from the figure's own content, so that several
    figures on one page never share an id; the stylesheet matplotlib writes
    is scoped to this figure; the root element has ``role="img"`` and, when
    given, a ``<title>`` and ``<desc>`` for screen readers. With ``alt`` the
    text alternative travels with the file: the root carries
    ``aria-label="<alt>"`` and the ``<title>`` holds the alt text (the chart
    title is drawn on the figure anyway), so every reader of the SVG, inlined
    or standalone, gets the same name.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        The figure to write.
    title : str, optional
        Accessible name of the figure (``<title>``).
    description : str, optional
        Longer text alternative (``<desc>``).
    alt : str, optional
        Short text alternative (see :mod:`dossier.figures.alt`): the
        accessible name, as ``aria-label`` and ``<title>``; replaces ``title``
        as the name. Escaped here; control characters and runs of white
        space become one space.

    Returns
    -------
    str
        The SVG document, starting with ``<svg``.
    """
    buffer = io.StringIO()
    with house_style():
        # Re-attach an SVG canvas: a caller may have drawn the figure on Agg.
        from matplotlib.backends.backend_svg import FigureCanvasSVG

        FigureCanvasSVG(fig)
        fig.savefig(buffer, format="svg", metadata={"Date": None})
    body = _PROLOG.sub("", buffer.getvalue(), count=1)

    digest = hashlib.sha256(body.encode("utf-8")).hexdigest()[:10]
    root_id = f"fig-{digest}"
    prefix = f"{root_id}-"
    body = _ID.sub(lambda m: f'id="{prefix}{m.group(1)}"', body)
    body = _HREF.sub(lambda m: f'{m.group(1)}="#{prefix}{m.group(2)}"', body)
    body = _URL.sub(lambda m: f"url(#{prefix}{m.group(1)})", body)
    # matplotlib's stylesheet is "*{...}"; inlined in HTML it would reach
    # every element of the page, so scope it to this figure.
    body = body.replace("<style type=\"text/css\">*{", f'<style type="text/css">#{root_id} *{{', 1)
    # The page may not have DejaVu Sans: fall back to its own sans-serif.
    body = _FONT.sub("font-family: 'DejaVu Sans', sans-serif", body)

    attributes = f' id="{root_id}" role="img"'
    children = ""
    if alt:
        # aria-label comes first in the accessible-name computation (the
        # <title> would only be used without it); both hold the same text.
        alt = " ".join(_XML_INVALID.sub(" ", alt).split())
        attributes += f' aria-label="{escape(alt, _QUOTES)}"'
        children += f'\n <title id="{prefix}title">{escape(alt)}</title>'
    elif title:
        attributes += f' aria-labelledby="{prefix}title"'
        children += f'\n <title id="{prefix}title">{escape(title)}</title>'
    if description:
        if not title and not alt:
            attributes += f" aria-label={quoteattr(description)}"
        children += f'\n <desc id="{prefix}desc">{escape(description)}</desc>'
        if title or alt:
            attributes += f' aria-describedby="{prefix}desc"'
    end_of_tag = body.index(">", body.index("<svg")) + 1
    body = body[: end_of_tag - 1] + attributes + ">" + children + body[end_of_tag:]
    return body


def format_number(value: float, significant: int = 3, min_decimals: int = 1, max_decimals: int = 4) -> str:
    """Format a positive quantity with about ``significant`` figures.

    Parameters
    ----------
    value : float
        The number.
    significant : int
        Significant figures wanted.
    min_decimals, max_decimals : int
        Bounds on the number of decimals written.

    Returns
    -------
    str
        For example ``312.5``, ``12.3``, ``1.23``, ``0.140``.
    """
    import math

    if value == 0 or not math.isfinite(value):
        return f"{value:.{min_decimals}f}"
    decimals = significant - 1 - math.floor(math.log10(abs(value)))
    decimals = min(max_decimals, max(min_decimals, decimals))
    return f"{value:.{decimals}f}"


def format_with_error(value: float, error: float) -> tuple[str, str]:
    """Format a value and its error with the decimals the error deserves.

    Two significant figures of the error, the value to the same decimal
    place (common practice for quoting uncertainties).

    Parameters
    ----------
    value, error : float
        The value and its 1-sigma uncertainty, same unit.

    Returns
    -------
    tuple of str
        ``(value, error)`` as text.
    """
    import math

    if error <= 0 or not math.isfinite(error):
        return format_number(value), format_number(error)
    decimals = max(0, min(6, 1 - math.floor(math.log10(error))))
    return f"{value:.{decimals}f}", f"{error:.{decimals}f}"


def compass(ax: Axes, east: Sequence[float], north: Sequence[float], tips: dict[str, tuple[float, float]]):
    """Draw N (up) and E (left) arrows in the emptiest corner; return the area it covers (a Bbox, axes fraction).

    Shared by every chart of the sky (the sky chart, the relative orbit).
    """
    import numpy as np
    from matplotlib.transforms import Bbox

    xs = np.concatenate([east, [t[0] for t in tips.values()]])
    ys = np.concatenate([north, [t[1] for t in tips.values()]])
    # transData includes the axis scale, so this also holds on symlog charts.
    points = (ax.transData + ax.transAxes.inverted()).transform(np.column_stack([xs, ys]))
    length = 0.09
    elbows = {  # where the N and E arrows meet, in axes fraction
        "lower right": (0.95, 0.05),
        "upper right": (0.95, 0.93 - length),
        "lower left": (0.07 + length, 0.05),
        "upper left": (0.07 + length, 0.93 - length),
    }

    def room(elbow: tuple[float, float]) -> float:
        centre = (elbow[0] - length / 2, elbow[1] + length / 2)
        return float(np.min(np.hypot(points[:, 0] - centre[0], points[:, 1] - centre[1])))

    x0, y0 = elbows[max(elbows, key=lambda name: round(room(elbows[name]), 6))]
    arrow = {"arrowstyle": "-|>,head_length=0.4,head_width=0.2", "color": INK_MUTED,
             "linewidth": 1.0, "shrinkA": 0, "shrinkB": 0}
    for dx, dy, text, ha, va, offset in (
        (0.0, length, "N", "center", "bottom", (0, 1)),
        (-length, 0.0, "E", "right", "center", (-2, 0)),
    ):
        ax.annotate("", xy=(x0 + dx, y0 + dy), xytext=(x0, y0), xycoords="axes fraction",
                    textcoords="axes fraction", arrowprops=arrow, zorder=7)
        ax.annotate(text, xy=(x0 + dx, y0 + dy), xycoords="axes fraction", xytext=offset,
                    textcoords="offset points", ha=ha, va=va, fontsize=8.5, fontweight="bold",
                    color=INK_MUTED, zorder=7)
    return Bbox.from_extents(x0 - length - 0.04, y0 - 0.02, x0 + 0.02, y0 + length + 0.05)
