"""Hertzsprung–Russell diagram: the components of a system against the main sequence and lines of equal age.

The horizontal axis is the effective temperature (K) on a logarithmic scale,
hotter to the left, and the vertical axis the luminosity (L☉), also
logarithmic (common practice since Hertzsprung and Russell: temperature, or
colour, decreasing to the right, so that the main sequence runs from the
upper left to the lower right). Both axes cover every star with its error
bars and every line, with a margin for the labels.

Each star is a marker with its error bars: symmetric in temperature,
asymmetric in luminosity (the ends of its interval are given, not
symmetric errors, because a luminosity derived from a magnitude and a
parallax has a skewed uncertainty). Its id, and any extra note, is written
beside it where it overlaps nothing else on the chart.

Lines are drawn in the order given. The zero-age main sequence (kind
``"zams"``) is solid; a line of equal main-sequence lifetime (kind
``"isochrone"``, for example "100 Myr") is dashed. Each line carries its label
at one of its ends (its last point first, then its first) where it fits clear
of the stars, the other lines and the other labels; the key names the kinds.
The diagram draws the lines it is given and computes none: which models they
come from is for their labels and the page's text to say.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from dossier.figures import common
from dossier.figures.rv_chart import log_ticks  # one style of log axis for every chart

if TYPE_CHECKING:  # pragma: no cover - typing only
    from matplotlib.axes import Axes
    from matplotlib.backend_bases import RendererBase
    from matplotlib.container import ErrorbarContainer
    from matplotlib.figure import Figure
    from matplotlib.legend import Legend
    from matplotlib.path import Path
    from matplotlib.text import Annotation
    from matplotlib.transforms import Bbox

LINE_KINDS = ("zams", "isochrone")
"""Kinds of line the diagram draws."""

KIND_STYLE: dict[str, dict[str, object]] = {
    "zams": {"color": common.INK_MUTED, "linestyle": "-", "linewidth": 1.5},
    "isochrone": {"color": common.CO_MOVING, "linestyle": (0, (5.0, 2.5)), "linewidth": 1.3},
}
"""Colour and dash of each kind of line: both differ, so print in grey works."""

KIND_KEY = {"zams": "zero-age main sequence", "isochrone": "equal main-sequence lifetime"}
"""Key entry of each kind of line."""

STAR_COLOUR = common.MEASUREMENT
"""A star's marker and error bars."""
STAR_KEY = "star ± 1σ"
"""Key entry of the stars."""

_SIZE_IN = (6.5, 5.2)
_MARKER_PT = 6.5
_LABEL_PT = 8.5
_LINE_LABEL_PT = 8.0
_LABEL_GAP_PT = 3.0
"""Space between a marker's edge, or a line's end, and its label, points."""
_LOG_MARGIN = 0.06
"""Room beyond the outermost data on each log axis, as a fraction of its span in decades."""
_MIN_TEFF_DEX = 0.25
"""Least span of the temperature axis, decades (a lone star still shows a readable range)."""
_MIN_LUM_DEX = 1.5
"""Least span of the luminosity axis, decades."""
_ERROR_KW = {"elinewidth": 1.0, "capsize": 2.0, "capthick": 1.0}
_LABEL_BOX = {"boxstyle": "square,pad=0.12", "facecolor": common.BACKGROUND, "alpha": 0.8, "edgecolor": "none"}
"""A pale backing, so that a line passing behind a label does not cut through its letters."""

_TEFF_SUBS = (
    (1.0, 1.5, 2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0),
    (1.0, 1.5, 2.0, 3.0, 4.0, 5.0, 6.0, 8.0),
    (1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 8.0),
    (1.0, 2.0, 3.0, 5.0),
    (1.0, 2.0, 5.0),
    (1.0,),
)
"""Labelled temperatures per decade, finest first: the finest whose labels do not touch is used."""


@dataclass(frozen=True)
class HRStar:
    """A star on the diagram.

    Attributes
    ----------
    id : str
        Component id, for example ``"Aa"``.
    teff : float
        Effective temperature, K.
    teff_err : float
        Its 1-sigma uncertainty, K; NaN (or None, or 0) draws no error bar.
    luminosity : float
        Luminosity, L☉ (solar luminosities).
    lum_low, lum_high : float
        Lower and upper ends of its 1-sigma interval, L☉ (not the errors:
        ``lum_low <= luminosity <= lum_high``); both NaN (or None) draw no
        error bar.
    label_extra : str or None
        A note written after the id, for example a spectral type.
    """

    id: str
    teff: float
    teff_err: float
    luminosity: float
    lum_low: float
    lum_high: float
    label_extra: str | None


@dataclass(frozen=True)
class HRLine:
    """A line on the diagram, sampled along its length.

    Attributes
    ----------
    label : str
        Written at one of its ends, for example ``"ZAMS"`` or ``"100 Myr"``.
    teff : sequence of float
        Effective temperatures of the samples, K, in order along the line.
    luminosity : sequence of float
        Luminosities of the samples, L☉.
    kind : str
        One of :data:`LINE_KINDS`: ``"zams"`` (solid) or ``"isochrone"``
        (dashed; a line of equal main-sequence lifetime).
    """

    label: str
    teff: Sequence[float]
    luminosity: Sequence[float]
    kind: str


def star_label(star: HRStar) -> str:
    """Text written beside a star: its id, then its note in parentheses if it has one."""
    return f"{star.id} ({star.label_extra})" if star.label_extra else star.id


def hr_diagram(stars: Sequence[HRStar], lines: Sequence[HRLine], *, title: str, alt: str | None = None) -> str:
    """Draw the Hertzsprung–Russell diagram of one system as SVG text.

    Parameters
    ----------
    stars : sequence of HRStar
        Components with a temperature and a luminosity (at least one).
    lines : sequence of HRLine
        The zero-age main sequence and lines of equal main-sequence lifetime
        (may be empty).
    title : str
        Title over the chart and accessible name of the SVG.
    alt : str, optional
        Short text alternative (see :mod:`dossier.figures.alt`), written as
        the SVG's ``aria-label`` and ``<title>``; without it the title names
        the SVG.

    Returns
    -------
    str
        Deterministic SVG, ready to inline in HTML.

    Raises
    ------
    ValueError
        When there is no star, two stars share an id or two lines a label, a
        temperature or luminosity is not a finite positive number, an
        interval does not contain its luminosity, or a line has an unknown
        kind or fewer than two samples.
    """
    stars = _unknown_as_nan(stars)
    fig = build_hr_diagram(stars, lines, title=title)
    return common.to_svg(fig, title=title, description=_describe(stars, lines), alt=alt)


def build_hr_diagram(stars: Sequence[HRStar], lines: Sequence[HRLine], *, title: str) -> Figure:
    """Build the Hertzsprung–Russell diagram as a matplotlib Figure (see :func:`hr_diagram`).

    The figure has one axes. Artists carry labels so that tests can read back
    what the chart shows: the stars are one errorbar container labelled
    ``"stars"`` (input order), their labels texts ``"label of <id>"``; each
    line is a line labelled ``"line <label>"`` and its end label a text
    ``"end label of <label>"`` (``xy`` is the end it names).
    """
    stars = _unknown_as_nan(stars)
    _check(stars, lines)
    teff = np.array([s.teff for s in stars], dtype=float)
    lum = np.array([s.luminosity for s in stars], dtype=float)
    teff_err = _bar(np.array([s.teff_err for s in stars], dtype=float))
    low = np.array([s.lum_low for s in stars], dtype=float)
    high = np.array([s.lum_high for s in stars], dtype=float)
    lum_below = _bar(lum - low)
    lum_above = _bar(high - lum)

    with common.house_style():
        fig = common.new_figure(*_SIZE_IN)
        ax = fig.add_subplot()
        ax.grid(True, which="major")
        ax.set_xscale("log")
        ax.set_yscale("log")
        (t_cool, t_hot), (l_low, l_high) = _limits(teff, teff_err, lum, lum_below, lum_above, lines)
        # Hotter to the left: the larger temperature at the left edge, so the
        # x axis is inverted (common practice for HR diagrams, see the module notes).
        ax.set_xlim(t_hot, t_cool)
        ax.set_ylim(l_low, l_high)
        log_ticks(ax.yaxis, l_low, l_high)
        if math.log10(l_high / l_low) > 3.0:  # powers of ten read better than 0.0001 and 100000
            from matplotlib.ticker import FuncFormatter

            ax.yaxis.set_major_formatter(FuncFormatter(lambda value, _: _power_of_ten(value)))
        _temperature_ticks(ax, t_cool, t_hot, _TEFF_SUBS[0])

        kinds = list(dict.fromkeys(line.kind for line in lines))
        for line in lines:
            ax.plot(np.asarray(line.teff, dtype=float), np.asarray(line.luminosity, dtype=float), zorder=2,
                    label=f"line {line.label}", **KIND_STYLE[line.kind])
        stars_drawn = ax.errorbar(teff, lum, xerr=teff_err, yerr=np.vstack([lum_below, lum_above]), fmt="o",
                                  markersize=_MARKER_PT, color=STAR_COLOUR, markeredgecolor=common.BACKGROUND,
                                  markeredgewidth=0.7, ecolor=STAR_COLOUR, zorder=4, label="stars", **_ERROR_KW)

        ax.set_xlabel("effective temperature (K), hotter to the left")
        ax.set_ylabel("luminosity (L☉)")
        title_text = ax.set_title(title)
        legend = _legend(fig, stars_drawn, kinds)
        common.arrange(fig, ax, title=title_text, legend=legend, legend_side="below")
        renderer = common.text_renderer(fig)
        if _thin_temperature_ticks(ax, t_cool, t_hot, renderer):
            common.arrange(fig, ax, title=title_text, legend=legend, legend_side="below")
        _place_labels(fig, ax, stars, lines, stars_drawn, renderer)
    return fig


# --- checks and limits -----------------------------------------------------------


def _unknown_as_nan(stars: Sequence[HRStar]) -> list[HRStar]:
    """The stars with an unknown (None) error or interval end written as NaN, which draws no bar."""
    from dataclasses import replace

    nan = math.nan
    return [replace(s, teff_err=nan if s.teff_err is None else s.teff_err,
                    lum_low=nan if s.lum_low is None else s.lum_low,
                    lum_high=nan if s.lum_high is None else s.lum_high) for s in stars]


def _check(stars: Sequence[HRStar], lines: Sequence[HRLine]) -> None:
    if not stars:
        raise ValueError("hr_diagram needs at least one star. "
                         "Fix: pass the components that have a temperature and a luminosity.")
    ids = [s.id for s in stars]
    for index, s in enumerate(stars):
        name = f"star {index} ({s.id})"
        if ids.count(s.id) > 1:
            raise ValueError(f"two stars have the id {s.id!r}. Fix: give each star its own id.")
        if not (math.isfinite(s.teff) and s.teff > 0):
            raise ValueError(f"{name} has temperature {s.teff}. Fix: give the effective temperature in K, > 0.")
        if not (math.isnan(s.teff_err) or (math.isfinite(s.teff_err) and s.teff_err >= 0)):
            raise ValueError(f"{name} has temperature error {s.teff_err}. "
                             "Fix: give the 1-sigma error in K, >= 0, or NaN if it is not known.")
        if not (math.isfinite(s.luminosity) and s.luminosity > 0):
            raise ValueError(f"{name} has luminosity {s.luminosity}. Fix: give the luminosity in L☉, > 0.")
        if math.isnan(s.lum_low) and math.isnan(s.lum_high):  # not known: no bar
            continue
        if not (math.isfinite(s.lum_low) and math.isfinite(s.lum_high) and 0 < s.lum_low <= s.luminosity <= s.lum_high):
            raise ValueError(f"{name} has luminosity {s.luminosity} with interval {s.lum_low} to {s.lum_high}. "
                             "Fix: give the ends of the 1-sigma interval in L☉ (0 < lum_low <= luminosity <= "
                             "lum_high), not the errors; or NaN for both if it is not known.")
    labels = [line.label for line in lines]
    for line in lines:
        if line.kind not in LINE_KINDS:
            raise ValueError(f"line {line.label!r} has kind {line.kind!r}. "
                             f"Did you mean one of: {', '.join(LINE_KINDS)}?")
        if labels.count(line.label) > 1:
            raise ValueError(f"two lines are labelled {line.label!r}. Fix: give each line its own label.")
        if len(line.teff) != len(line.luminosity):
            raise ValueError(f"line {line.label!r} has {len(line.teff)} temperatures and {len(line.luminosity)} "
                             "luminosities. Fix: give one of each per sample.")
        if len(line.teff) < 2:
            raise ValueError(f"line {line.label!r} has fewer than two samples. Fix: sample it along its length.")
        values = np.concatenate([np.asarray(line.teff, dtype=float), np.asarray(line.luminosity, dtype=float)])
        if not (np.all(np.isfinite(values)) and np.all(values > 0)):
            raise ValueError(f"line {line.label!r} has a temperature or luminosity that is not a finite positive "
                             "number. Fix: give temperatures in K and luminosities in L☉, > 0.")


def _bar(errors: np.ndarray) -> np.ndarray:
    """Error bars to draw: NaN (unknown) draws none."""
    return np.where(np.isfinite(errors), errors, 0.0)


def _limits(
    teff: np.ndarray,
    teff_err: np.ndarray,
    lum: np.ndarray,
    lum_below: np.ndarray,
    lum_above: np.ndarray,
    lines: Sequence[HRLine],
) -> tuple[tuple[float, float], tuple[float, float]]:
    """``(coolest, hottest)`` temperature, K, and ``(lowest, highest)`` luminosity, L☉, of the axes.

    Every star with its error bars and every line, with a margin in decades;
    a bar reaching to zero or below (a temperature error as large as the
    temperature) is cut at a tenth of the value.
    """
    t = [np.maximum(teff - teff_err, 0.1 * teff), teff + teff_err]
    lum_values = [np.maximum(lum - lum_below, 0.1 * lum), lum + lum_above]
    for line in lines:
        t.append(np.asarray(line.teff, dtype=float))
        lum_values.append(np.asarray(line.luminosity, dtype=float))
    return (_log_span(np.concatenate(t), _MIN_TEFF_DEX), _log_span(np.concatenate(lum_values), _MIN_LUM_DEX))


def _log_span(values: np.ndarray, least_dex: float) -> tuple[float, float]:
    """Limits of a log axis about ``values``: at least ``least_dex`` decades, plus a margin."""
    low, high = math.log10(float(values.min())), math.log10(float(values.max()))
    if high - low < least_dex:
        centre = 0.5 * (low + high)
        low, high = centre - least_dex / 2, centre + least_dex / 2
    pad = _LOG_MARGIN * (high - low)
    return 10.0 ** (low - pad), 10.0 ** (high + pad)


# --- ticks ------------------------------------------------------------------------


_SUPERSCRIPT = str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹")


def _power_of_ten(value: float) -> str:
    """A tick of a log axis as a power of ten, ``10⁻³`` (blank between the powers, where no tick is labelled)."""
    exponent = round(math.log10(value)) if value > 0 else 0
    if value <= 0 or not math.isclose(value, 10.0**exponent, rel_tol=1e-6):
        return ""
    return "10" + str(exponent).translate(_SUPERSCRIPT)


def _kelvin(value: float) -> str:
    """A temperature tick: whole kelvin, digits grouped by a space from 10 000 on (SI style)."""
    return f"{value:,.0f}".replace(",", " ") if value >= 10_000 else f"{value:.0f}"


def _temperature_ticks(ax: Axes, cool: float, hot: float, subs: Sequence[float]) -> None:
    """Label the temperatures at ``subs`` times each power of ten; unlabelled minor ticks at every integer multiple."""
    from matplotlib.ticker import FixedLocator, FuncFormatter, LogLocator, NullFormatter

    ticks = [m * 10.0**e for e in range(math.floor(math.log10(cool)), math.ceil(math.log10(hot)) + 1) for m in subs]
    ax.xaxis.set_major_locator(FixedLocator([t for t in ticks if cool <= t <= hot]))
    ax.xaxis.set_major_formatter(FuncFormatter(lambda value, _: _kelvin(value)))
    ax.xaxis.set_minor_locator(LogLocator(base=10.0, subs=tuple(float(k) for k in range(1, 10))))
    ax.xaxis.set_minor_formatter(NullFormatter())


def _thin_temperature_ticks(ax: Axes, cool: float, hot: float, renderer: RendererBase) -> bool:
    """Use the finest set of labelled temperatures whose labels stand half an em apart; True if it changed."""
    font = ax.xaxis.get_major_ticks()[0].label1.get_fontproperties()
    room = 0.5 * font.get_size_in_points() * ax.figure.dpi / 72.0
    for index, subs in enumerate(_TEFF_SUBS):
        _temperature_ticks(ax, cool, hot, subs)
        locs = sorted(ax.xaxis.get_major_locator()())
        spans = []
        for value in locs:
            centre = ax.transData.transform((value, 1.0))[0]
            half = renderer.get_text_width_height_descent(_kelvin(value), font, ismath=False)[0] / 2
            spans.append((centre - half, centre + half))
        spans.sort()
        if len(locs) <= 2 or all(b[0] - a[1] >= room for a, b in zip(spans, spans[1:])):
            return index > 0
    return True  # pragma: no cover - a single tick per decade always fits


# --- labels -------------------------------------------------------------------------


def place_text(
    text: Annotation,
    candidates: Sequence[tuple[tuple[float, float] | None, float, float, str, str]],
    hard: list[Bbox],
    soft: Sequence[Bbox | Path],
    frame: Bbox,
    renderer: RendererBase,
    *,
    required: bool = True,
) -> Bbox | None:
    """Move a label to the best of its candidate places and return the room it takes.

    A candidate is ``(anchor, dx, dy, ha, va)``: the anchor in data
    coordinates (``None`` keeps the label's own) and the offset in points.
    The first candidate inside ``frame`` that overlaps none of the ``hard``
    boxes (other labels, markers) and crosses none of the ``soft`` obstacles
    (lines and outlines, as boxes or display-space paths) wins; failing that,
    the first inside the frame that overlaps no hard box, crossing the fewest
    soft ones. Failing that too, a ``required`` label takes the first
    candidate inside the frame that overlaps the fewest hard boxes (or the
    first candidate), and any other label is removed and None returned.
    Shared with the neighbours chart.
    """
    from matplotlib.path import Path

    text.set_in_layout(False)
    scored = []
    for index, (anchor, dx, dy, ha, va) in enumerate(candidates):
        if anchor is not None:
            text.xy = anchor
        text.set_position((dx, dy))
        text.set_horizontalalignment(ha)
        text.set_verticalalignment(va)
        extent = text.get_window_extent(renderer)
        padded = extent.padded(1.0)
        inside = (extent.x0 >= frame.x0 + 1 and extent.x1 <= frame.x1 - 1
                  and extent.y0 >= frame.y0 + 1 and extent.y1 <= frame.y1 - 1)
        hits = sum(padded.overlaps(box) for box in hard)
        crossings = sum(obstacle.intersects_bbox(padded, filled=False) if isinstance(obstacle, Path)
                        else padded.overlaps(obstacle) for obstacle in soft)
        if inside and hits == 0 and crossings == 0:
            hard.append(extent)
            return extent
        scored.append(((not inside, hits, crossings, index), (text.xy, (dx, dy), ha, va)))
    clear = [entry for entry in scored if not entry[0][0] and entry[0][1] == 0]
    if clear:
        choice = min(clear, key=lambda entry: (entry[0][2], entry[0][3]))[1]
    elif required:
        choice = min(scored, key=lambda entry: entry[0][:2] + (entry[0][3],))[1]
    else:
        text.remove()
        return None
    text.xy, offset, ha, va = choice
    text.set_position(offset)
    text.set_horizontalalignment(ha)
    text.set_verticalalignment(va)
    extent = text.get_window_extent(renderer)
    hard.append(extent)
    return extent


def around(gap_pt: float, *, rings: int = 3) -> list[tuple[None, float, float, str, str]]:
    """Candidate places of a label beside a marker, ``gap_pt`` points from its centre, by preference.

    The diagonals first: they stay clear of the marker's own horizontal and
    vertical error bars. Then the sides; then the same, farther out (1.6 and
    2.4 times as far), up to ``rings`` distances in all. Shared with the
    neighbours chart.
    """
    places = []
    for reach in (gap_pt, 1.6 * gap_pt, 2.4 * gap_pt)[:rings]:
        d = reach * 0.75
        places += [(None, d, d, "left", "bottom"), (None, -d, d, "right", "bottom"),
                   (None, d, -d, "left", "top"), (None, -d, -d, "right", "top"),
                   (None, reach, 0.0, "left", "center"), (None, -reach, 0.0, "right", "center"),
                   (None, 0.0, reach, "center", "bottom"), (None, 0.0, -reach, "center", "top")]
    return places


def display_path(ax: Axes, x: Sequence[float], y: Sequence[float]) -> Path:
    """A polyline in data coordinates as a path in display pixels (axis scales included)."""
    from matplotlib.path import Path

    return Path(ax.transData.transform(np.column_stack([np.asarray(x, dtype=float), np.asarray(y, dtype=float)])))


def _place_labels(
    fig: Figure,
    ax: Axes,
    stars: Sequence[HRStar],
    lines: Sequence[HRLine],
    stars_drawn: ErrorbarContainer,
    renderer: RendererBase,
) -> None:
    """Write the stars' labels, then the lines' end labels, where they overlap nothing (see the module notes)."""
    from matplotlib.transforms import Bbox

    frame = ax.get_window_extent(renderer)
    px = fig.dpi / 72.0
    hard: list[Bbox] = []
    for s in stars:  # every marker is in the way of every label
        x, y = ax.transData.transform((s.teff, s.luminosity))
        half = 0.5 * _MARKER_PT * px + 1.0
        hard.append(Bbox([[x - half, y - half], [x + half, y + half]]))
    line_paths = [display_path(ax, line.teff, line.luminosity) for line in lines]
    bars = [display_path(ax, seg[:, 0], seg[:, 1])  # one segment per star and direction
            for collection in stars_drawn.lines[2] for seg in collection.get_segments()]

    for s in stars:
        text = ax.annotate(star_label(s), xy=(s.teff, s.luminosity), xytext=(0.0, 0.0), textcoords="offset points",
                           fontsize=_LABEL_PT, color=common.INK, zorder=6, bbox=_LABEL_BOX, label=f"label of {s.id}")
        place_text(text, around(0.5 * _MARKER_PT + _LABEL_GAP_PT + 1.0), hard, line_paths + bars, frame, renderer)

    for index, line in enumerate(lines):
        style = KIND_STYLE[line.kind]
        text = ax.annotate(line.label, xy=(line.teff[-1], line.luminosity[-1]), xytext=(0.0, 0.0),
                           textcoords="offset points", fontsize=_LINE_LABEL_PT, color=style["color"], zorder=5,
                           bbox=_LABEL_BOX, label=f"end label of {line.label}")
        candidates = []
        for end, before in ((-1, -2), (0, 1)):  # the last end first, then the first
            candidates += _end_candidates(ax, line, end, before)
        others = line_paths[:index] + line_paths[index + 1:]  # not its own line, which it continues
        place_text(text, candidates, hard, others + bars, frame, renderer)


def _end_candidates(ax: Axes, line: HRLine, end: int, before: int) -> list[tuple[tuple[float, float], float, float,
                                                                                   str, str]]:
    """Places for a line's label at one end: beyond the end, along the line, then on each side of the end."""
    anchor = (float(line.teff[end]), float(line.luminosity[end]))
    tip = ax.transData.transform(anchor)
    back = ax.transData.transform((line.teff[before], line.luminosity[before]))
    direction = tip - back
    norm = float(np.hypot(*direction))
    ux, uy = (direction / norm) if norm > 0 else (1.0, 0.0)
    gap = _LABEL_GAP_PT

    def aligned(dx: float, dy: float) -> tuple[str, str]:
        ha = "left" if dx > 0.35 * gap else "right" if dx < -0.35 * gap else "center"
        va = "bottom" if dy > 0.35 * gap else "top" if dy < -0.35 * gap else "center"
        return ha, va

    places = []
    for dx, dy in ((gap * ux, gap * uy), (0.0, gap), (0.0, -gap), (gap, 0.0), (-gap, 0.0),
                   (gap, gap), (-gap, gap), (gap, -gap), (-gap, -gap)):
        places.append((anchor, dx, dy, *aligned(dx, dy)))
    return places


# --- key and description ---------------------------------------------------------------


def _legend(fig: Figure, stars_drawn: ErrorbarContainer, kinds: Sequence[str]) -> Legend:
    """The key under the axes: the stars (marker and error bars), then one entry per kind of line."""
    from matplotlib.lines import Line2D

    handles: list[object] = [stars_drawn]
    texts = [STAR_KEY]
    for kind in kinds:
        handles.append(Line2D([], [], **KIND_STYLE[kind]))
        texts.append(KIND_KEY[kind])
    return fig.legend(handles, texts, loc="upper center", ncols=len(handles), handlelength=2.4, handletextpad=0.5,
                      columnspacing=1.6)


def _describe(stars: Sequence[HRStar], lines: Sequence[HRLine]) -> str:
    """Short text alternative of the chart, for screen readers."""
    parts = ["Hertzsprung–Russell diagram: effective temperature (K, log scale, hotter to the left) against "
             "luminosity (L☉, log scale)."]
    for s in stars:
        teff = (" ± ".join(common.format_with_error(s.teff, s.teff_err))
                if math.isfinite(s.teff_err) and s.teff_err > 0 else f"{s.teff:.0f}")
        interval = ("" if math.isnan(s.lum_low) else
                    f" (1σ {common.format_number(s.lum_low)} to {common.format_number(s.lum_high)})")
        parts.append(f"Star {star_label(s)}: {teff} K, {common.format_number(s.luminosity)} L☉{interval}.")
    for line in lines:
        t = np.asarray(line.teff, dtype=float)
        parts.append(f"{KIND_KEY[line.kind].capitalize()}, {line.label}: {_kelvin(float(t.min()))} to "
                     f"{_kelvin(float(t.max()))} K.")
    return " ".join(parts)
