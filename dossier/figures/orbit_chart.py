"""Orbit chart: the apparent relative orbit of one pair, as seen on the sky.

The primary sits at the origin; each measure of the secondary is a point at
its offset, x north = ρ cos θ and y east = ρ sin θ (arcsec), coloured by its
epoch on a sequential colour scale with a colour bar. East is to the left and
north up, with equal scales on both axes, as the sky looks to an observer on
the ground (common practice for drawings of double-star orbits, for example
the apparent-orbit plots of the visual-orbit literature). A small compass
repeats the orientation.

Measures flagged as outliers stay on the chart, drawn open with a red cross
and listed in the key as "flagged (see log table)": the chart never hides a
measure, and the log table says why each was flagged. Model curves are drawn
by kind: an orbit (an ephemeris or a fit) solid, the straight line of an
optical pair dashed, a quadratic (curved) fit dotted; the dash carries the
kind, so the chart survives greyscale print, and the colour tells curves of
the same kind apart.

The frame always holds the primary, so a wide pair that has moved little
(25″ away, 0.1″ of motion in a century) would show its whole path as one
dot. When the measures span less than a tenth of the frame, an inset
zooms on them: a square, east-left, north-up view of the measures and the
curves about them, in the free part of the chart farthest from every point,
with a scale bar of a round length (1, 2 or 5 × 10ⁿ arcsec) for its scale
and a box round the zoomed area on the main chart, joined to the inset.
The main chart, its key and its text alternative are unchanged; the inset
draws the measures as the main chart does, on the same colour scale.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from dossier.figures import common

if TYPE_CHECKING:  # pragma: no cover - typing only
    from matplotlib.axes import Axes
    from matplotlib.colorbar import Colorbar
    from matplotlib.colors import Colormap, Normalize
    from matplotlib.figure import Figure
    from matplotlib.legend import Legend

CURVE_KINDS = ("orbit", "linear", "quadratic")
"""Kinds of model curve: an orbit (ephemeris or fit), an optical pair's straight line, a quadratic fit."""

KIND_STYLE: dict[str, dict[str, object]] = {
    "orbit": {"linestyle": "-", "linewidth": 1.4},
    "linear": {"linestyle": (0, (5.0, 2.5)), "linewidth": 1.4},
    "quadratic": {"linestyle": (0, (1.0, 1.8)), "linewidth": 1.8},
}
"""Dash per kind of curve (solid, dashed, dotted); shared with the motion chart."""

CURVE_COLOURS = (common.INK, common.MOTION, common.UNDETERMINED, common.INK_MUTED)
"""Colours of the curves, in order: warm and neutral, apart from the cool epoch scale."""

EPOCH_COLOURS = ("#9ccfb8", "#4fa3a5", "#2d6e9e", "#1f2f6b")
"""Stops of the epoch colour scale, earliest to latest: mint, teal, blue, indigo.

Lightness falls steadily from the first stop to the last (a sequential
scale), so earlier and later stay in order in greyscale and for the common
colour-vision deficiencies; the palest stop is still dark enough to see on
white. The hues are cool, apart from the warm curves and the red flags.
"""

FLAGGED_LABEL = "flagged (see log table)"
"""Key entry of the flagged measures."""

_POINT_SIZE_PT2 = 30.0
_FLAGGED_SIZE_PT2 = 42.0
_COLORBAR_HEIGHT_IN = 0.12
_MARGIN = 0.08
"""Space around the data inside the axes, as a fraction of the span."""
_ZOOM_BELOW = 0.1
"""An inset zooms on the measures when they span less than this fraction of the frame."""
_INSET_SIZE = 0.4
"""Side of the inset, as a fraction of the chart's side."""
_INSET_MARGIN = 0.1
"""Space around the measures inside the inset, as a fraction of their span."""


@dataclass(frozen=True)
class ChartMeasure:
    """One measure of the secondary's offset from the primary.

    Attributes
    ----------
    t : float
        Epoch, Julian years.
    x_north, y_east : float
        Offset of the secondary from the primary, arcsec: ρ cos θ and ρ sin θ.
    flagged : bool
        Whether the measure was flagged as an outlier.
    reason : str or None
        Why it was flagged, as in the log table; not drawn on the chart.
    """

    t: float
    x_north: float
    y_east: float
    flagged: bool
    reason: str | None


@dataclass(frozen=True)
class ChartCurve:
    """A model of the secondary's path, sampled densely enough to draw.

    Attributes
    ----------
    label : str
        Name in the key, for example ``"orbit fit"``.
    x_north, y_east : sequence of float
        Offsets along the curve, arcsec, in time order.
    kind : str
        One of :data:`CURVE_KINDS`.
    """

    label: str
    x_north: Sequence[float]
    y_east: Sequence[float]
    kind: str


def epoch_colormap() -> Colormap:
    """Return the sequential colour scale of the epochs (see :data:`EPOCH_COLOURS`)."""
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list("dossier-epoch", list(EPOCH_COLOURS), N=256)


def orbit_chart(
    measures: Sequence[ChartMeasure],
    curves: Sequence[ChartCurve],
    *,
    title: str,
    primary: str,
    secondary: str,
    alt: str | None = None,
) -> str:
    """Draw the apparent relative orbit of one pair as SVG text.

    Parameters
    ----------
    measures : sequence of ChartMeasure
        Measures of the secondary relative to the primary, any order.
    curves : sequence of ChartCurve
        Model curves to draw (may be empty).
    title : str
        Title over the chart and accessible name of the SVG.
    primary, secondary : str
        Component ids, for the key (for example ``"A"`` and ``"B"``).
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
        When there is nothing to draw, a curve has an unknown kind, its
        coordinates differ in length, or a value is not finite.
    """
    fig = build_orbit_chart(measures, curves, title=title, primary=primary, secondary=secondary)
    return common.to_svg(fig, title=title, description=_describe(measures, curves, primary, secondary), alt=alt)


def build_orbit_chart(
    measures: Sequence[ChartMeasure],
    curves: Sequence[ChartCurve],
    *,
    title: str,
    primary: str,
    secondary: str,
) -> Figure:
    """Build the orbit chart as a matplotlib Figure (see :func:`orbit_chart`).

    The first axes is the chart; the second, the colour bar. Artists carry
    labels so that tests can read back what the chart shows: the primary is
    a line labelled ``"primary"``; the measures a scatter labelled
    ``"measures"`` and the flagged ones a scatter labelled ``"flagged"``
    (offsets are (y east, x north); the colour array is the epochs, Julian
    years), with a line of red crosses ``"flagged crosses"`` over them; each
    curve a line labelled ``"curve <label>"``.
    """
    _check(measures, curves)
    t = np.array([m.t for m in measures], dtype=float)
    north = np.array([m.x_north for m in measures], dtype=float)
    east = np.array([m.y_east for m in measures], dtype=float)
    flagged = np.array([m.flagged for m in measures], dtype=bool)
    kept = ~flagged

    with common.house_style():
        fig = common.new_figure(*common.DEFAULT_SIZE_IN)
        ax = fig.add_subplot()
        ax.grid(True, which="major")
        _set_limits(ax, east, north, curves)
        ax.set_aspect("equal", adjustable="box")

        cmap, norm = epoch_colormap(), _epoch_norm(t)
        for index, curve in enumerate(curves):
            ax.plot(np.asarray(curve.y_east, dtype=float), np.asarray(curve.x_north, dtype=float),
                    color=CURVE_COLOURS[index % len(CURVE_COLOURS)], zorder=2, label=f"curve {curve.label}",
                    **KIND_STYLE[curve.kind])
        points = None
        if kept.any():
            points = ax.scatter(east[kept], north[kept], c=t[kept], cmap=cmap, norm=norm, s=_POINT_SIZE_PT2,
                                marker="o", edgecolors=common.BACKGROUND, linewidths=0.6, zorder=4,
                                label="measures")
        if flagged.any():
            # Open ring in the colour of its epoch, a red cross inside: still
            # placed in time, and plainly set apart from the kept measures.
            ring = ax.scatter(east[flagged], north[flagged], c=t[flagged], cmap=cmap, norm=norm,
                              s=_FLAGGED_SIZE_PT2, marker="o", linewidths=1.4, zorder=4.5, label="flagged")
            ring.set_facecolor("none")
            ring.set_edgecolor(None)  # None with an open face: matplotlib maps the epochs to the edges
            points = points if points is not None else ring
            ax.plot(east[flagged], north[flagged], linestyle="none", marker="x", markersize=4.2,
                    markeredgewidth=1.2, color=common.DISCORDANT, zorder=5, label="flagged crosses")
        ax.plot([0.0], [0.0], linestyle="none", marker="*", markersize=13, markerfacecolor=common.INK,
                markeredgecolor=common.BACKGROUND, markeredgewidth=0.8, zorder=6, label="primary")

        ax.set_xlabel("Δα cos δ (″), east left")
        ax.set_ylabel("Δδ (″)")
        title_text = ax.set_title(title)
        legend = _legend(fig, curves, primary, secondary, kept.any(), flagged.any(), cmap)
        xs, ys = _all_points(east, north, curves)
        compass_box = common.compass(ax, xs, ys, {})  # in the corner farthest from every point
        zoom = _zoom_limits(ax, east, north)
        if zoom is not None:
            _add_inset(ax, zoom, _inset_place(ax, xs, ys, compass_box), t, east, north, flagged, curves,
                       cmap, norm)
        common.arrange(fig, ax, title=title_text, legend=legend, legend_side="right", square=True)
        if points is not None:
            _add_colorbar(fig, ax, legend, points)
    return fig


# --- checks and limits ---------------------------------------------------------


def _check(measures: Sequence[ChartMeasure], curves: Sequence[ChartCurve]) -> None:
    if not measures and not curves:
        raise ValueError("orbit_chart needs at least one measure or curve. Fix: pass the pair's measures.")
    for index, m in enumerate(measures):
        if not all(math.isfinite(v) for v in (m.t, m.x_north, m.y_east)):
            raise ValueError(f"measure {index} (t = {m.t}) has a value that is not finite. "
                             "Fix: leave out measures without a position.")
    for curve in curves:
        if curve.kind not in CURVE_KINDS:
            raise ValueError(f"curve {curve.label!r} has kind {curve.kind!r}. "
                             f"Did you mean one of: {', '.join(CURVE_KINDS)}?")
        if len(curve.x_north) != len(curve.y_east):
            raise ValueError(f"curve {curve.label!r} has {len(curve.x_north)} north offsets but "
                             f"{len(curve.y_east)} east offsets. Fix: give one of each per point.")


def _set_limits(ax: Axes, east: np.ndarray, north: np.ndarray, curves: Sequence[ChartCurve]) -> None:
    """Equal spans about the measures, the curves and the origin; east to the left."""
    xs, ys = _all_points(east, north, curves)
    span = max(float(np.ptp(xs)), float(np.ptp(ys)))
    if span <= 0:  # only the origin, or every point on it
        span = 1.0
    half = 0.5 * span * (1.0 + 2.0 * _MARGIN)
    cx, cy = 0.5 * (xs.min() + xs.max()), 0.5 * (ys.min() + ys.max())
    # East to the left: the larger east offset at the left edge, so the x
    # axis is inverted (common practice, as on the sky chart).
    ax.set_xlim(cx + half, cx - half)
    ax.set_ylim(cy - half, cy + half)


def _zoom_limits(ax: Axes, east: np.ndarray, north: np.ndarray) -> tuple[float, float, float] | None:
    """Centre (east, north) and half side of the inset, arcsec; ``None`` when the chart shows the path well.

    The inset is drawn when the measures span (in their larger dimension)
    less than :data:`_ZOOM_BELOW` of the frame, and span something: one
    position alone is no path to zoom on.
    """
    if east.size < 2:
        return None
    extent = max(float(np.ptp(east)), float(np.ptp(north)))
    frame = abs(float(np.diff(ax.get_xlim())[0]))
    if extent <= 0 or extent >= _ZOOM_BELOW * frame:
        return None
    half = 0.5 * extent * (1.0 + 2.0 * _INSET_MARGIN)
    return 0.5 * (east.min() + east.max()), 0.5 * (north.min() + north.max()), half


def _inset_place(ax: Axes, xs: np.ndarray, ys: np.ndarray, compass_box: object) -> tuple[float, float]:
    """Lower-left corner of the inset (axes fraction): the free place farthest from every point.

    Nine places on a 3 × 3 grid are weighed by the distance from the nearest
    point (measure, curve or primary) to the inset's edge; places that
    would cover the compass are passed over. Ties go to the first place,
    so the choice is deterministic.
    """
    points = ax.transLimits.transform(np.column_stack([xs, ys]))
    size, edge = _INSET_SIZE, 0.04
    spots = [edge, 0.5 - size / 2, 1.0 - edge - size]
    places = [(x0, y0) for y0 in reversed(spots) for x0 in spots]

    def room(place: tuple[float, float]) -> float:
        x0, y0 = place
        dx = np.maximum.reduce([x0 - points[:, 0], np.zeros(len(points)), points[:, 0] - (x0 + size)])
        dy = np.maximum.reduce([y0 - points[:, 1], np.zeros(len(points)), points[:, 1] - (y0 + size)])
        return round(float(np.min(np.hypot(dx, dy))), 6)

    def clear(place: tuple[float, float]) -> bool:
        x0, y0 = place
        return not (x0 < compass_box.x1 and compass_box.x0 < x0 + size
                    and y0 < compass_box.y1 and compass_box.y0 < y0 + size)

    free = [p for p in places if clear(p)] or places
    return max(free, key=room)


def _scale_length(span: float) -> float:
    """A round length (1, 2 or 5 × 10ⁿ arcsec) of at most a quarter of ``span``."""
    target = 0.25 * span
    power = 10.0 ** math.floor(math.log10(target))
    return max(m * power for m in (1.0, 2.0, 5.0) if m * power <= target)


def _add_inset(
    ax: Axes,
    zoom: tuple[float, float, float],
    place: tuple[float, float],
    t: np.ndarray,
    east: np.ndarray,
    north: np.ndarray,
    flagged: np.ndarray,
    curves: Sequence[ChartCurve],
    cmap: Colormap,
    norm: Normalize,
) -> Axes:
    """The zoomed view of the measures (see the module notes), labelled ``"zoom"``."""
    cx, cy, half = zoom
    inset = ax.inset_axes((place[0], place[1], _INSET_SIZE, _INSET_SIZE), label="zoom", zorder=8)
    inset.set_xlim(cx + half, cx - half)  # east to the left, as on the main chart
    inset.set_ylim(cy - half, cy + half)
    inset.set_aspect("equal", adjustable="box")
    inset.set_xticks([])
    inset.set_yticks([])
    inset.set_facecolor(common.BACKGROUND)
    for spine in inset.spines.values():
        spine.set_edgecolor(common.INK_MUTED)
    for index, curve in enumerate(curves):
        inset.plot(np.asarray(curve.y_east, dtype=float), np.asarray(curve.x_north, dtype=float),
                   color=CURVE_COLOURS[index % len(CURVE_COLOURS)], zorder=2, label=f"curve {curve.label}",
                   **KIND_STYLE[curve.kind])
    kept = ~flagged
    if kept.any():
        inset.scatter(east[kept], north[kept], c=t[kept], cmap=cmap, norm=norm, s=_POINT_SIZE_PT2, marker="o",
                      edgecolors=common.BACKGROUND, linewidths=0.6, zorder=4, label="measures")
    if flagged.any():
        ring = inset.scatter(east[flagged], north[flagged], c=t[flagged], cmap=cmap, norm=norm,
                             s=_FLAGGED_SIZE_PT2, marker="o", linewidths=1.4, zorder=4.5, label="flagged")
        ring.set_facecolor("none")
        ring.set_edgecolor(None)
        inset.plot(east[flagged], north[flagged], linestyle="none", marker="x", markersize=4.2,
                   markeredgewidth=1.2, color=common.DISCORDANT, zorder=5, label="flagged crosses")
    _scale_bar(inset, east, north, 2.0 * half)
    ax.indicate_inset_zoom(inset, edgecolor=common.INK_MUTED, alpha=0.9)
    return inset


def _scale_bar(inset: Axes, east: np.ndarray, north: np.ndarray, span: float) -> None:
    """A bar of round length, labelled in arcsec, in the inset's corner farthest from the measures."""
    length = _scale_length(span)
    points = inset.transLimits.transform(np.column_stack([east, north]))
    bar = length / span  # axes fraction
    corners = {  # left end of the bar, axes fraction; the label sits above it
        "lower right": (0.95 - bar, 0.06), "lower left": (0.05, 0.06),
        "upper right": (0.95 - bar, 0.86), "upper left": (0.05, 0.86),
    }

    def room(corner: tuple[float, float]) -> float:
        centre = (corner[0] + bar / 2, corner[1] + 0.04)
        return round(float(np.min(np.hypot(points[:, 0] - centre[0], points[:, 1] - centre[1]))), 6)

    x0, y0 = corners[max(corners, key=lambda name: room(corners[name]))]
    inset.plot([x0, x0 + bar], [y0, y0], transform=inset.transAxes, color=common.INK, linewidth=1.6,
               solid_capstyle="butt", zorder=6, label="scale bar")
    inset.text(x0 + bar / 2, y0 + 0.025, f"{common.format_number(length, 1, 0)}″", transform=inset.transAxes,
               ha="center", va="bottom", fontsize=7.5, color=common.INK, zorder=6, label="scale")


def _all_points(east: np.ndarray, north: np.ndarray, curves: Sequence[ChartCurve]) -> tuple[np.ndarray, np.ndarray]:
    """East and north offsets of every measure, every finite curve point and the origin."""
    xs = np.concatenate([east, [0.0], *[np.asarray(c.y_east, dtype=float) for c in curves]])
    ys = np.concatenate([north, [0.0], *[np.asarray(c.x_north, dtype=float) for c in curves]])
    finite = np.isfinite(xs) & np.isfinite(ys)
    return xs[finite], ys[finite]


def _epoch_norm(t: np.ndarray) -> Normalize:
    """Map the epochs onto the colour scale; a single epoch gets a one-year range."""
    from matplotlib.colors import Normalize

    if t.size == 0:
        return Normalize(0.0, 1.0)
    low, high = float(t.min()), float(t.max())
    if high - low < 1e-9:
        low, high = low - 0.5, high + 0.5
    return Normalize(low, high)


# --- key and colour bar ----------------------------------------------------------


def _legend(
    fig: Figure,
    curves: Sequence[ChartCurve],
    primary: str,
    secondary: str,
    any_kept: bool,
    any_flagged: bool,
    cmap: Colormap,
) -> Legend:
    from matplotlib.legend_handler import HandlerTuple
    from matplotlib.lines import Line2D

    handles: list[object] = [Line2D([], [], linestyle="none", marker="*", markersize=11,
                                    markerfacecolor=common.INK, markeredgecolor=common.BACKGROUND)]
    texts = [f"{primary} (primary)"]
    middle = cmap(0.6)
    if any_kept:
        handles.append(Line2D([], [], linestyle="none", marker="o", markersize=6, markerfacecolor=middle,
                              markeredgecolor=common.BACKGROUND, markeredgewidth=0.6))
        texts.append(f"{secondary}, measured")
    if any_flagged:
        ring = Line2D([], [], linestyle="none", marker="o", markersize=7, markerfacecolor="none",
                      markeredgecolor=middle, markeredgewidth=1.4)
        cross = Line2D([], [], linestyle="none", marker="x", markersize=4.2, markeredgewidth=1.2,
                       color=common.DISCORDANT)
        handles.append((ring, cross))
        texts.append(FLAGGED_LABEL)
    for index, curve in enumerate(curves):
        handles.append(Line2D([], [], color=CURVE_COLOURS[index % len(CURVE_COLOURS)], **KIND_STYLE[curve.kind]))
        texts.append(curve.label)
    legend = fig.legend(handles, texts, loc="upper left", title="Key", alignment="left", labelspacing=0.7,
                        handler_map={tuple: HandlerTuple(ndivide=1)})
    legend.get_title().set_fontweight("bold")
    return legend


def _add_colorbar(fig: Figure, ax: Axes, legend: Legend, points: object) -> Colorbar:
    """A horizontal colour bar of the epochs under the key, its label on top.

    The figure grows downwards if the key leaves no room for it.
    """
    from matplotlib.ticker import FuncFormatter, MaxNLocator

    renderer = common.text_renderer(fig)
    dpi = fig.dpi
    width_in, height_in = (float(v) for v in fig.get_size_inches())
    key = legend.get_window_extent(renderer)
    x0 = key.x0 / dpi + 0.08
    x1 = min(key.x1 / dpi, width_in - common.PAD_IN) - 0.15  # room for the last tick label
    x1 = max(x1, x0 + 1.0)
    cax = fig.add_axes((x0 / width_in, 0.0, (x1 - x0) / width_in, _COLORBAR_HEIGHT_IN / height_in))
    bar = fig.colorbar(points, cax=cax, orientation="horizontal")
    bar.set_label("epoch (yr)", labelpad=3)
    cax.xaxis.set_label_position("top")
    bar.locator = MaxNLocator(nbins=4, steps=[1, 2, 2.5, 5, 10])
    bar.formatter = FuncFormatter(lambda value, _: f"{value:.0f}" if float(value).is_integer() else f"{value:g}")
    bar.update_ticks()
    bar.outline.set_linewidth(0.6)
    bar.outline.set_edgecolor(common.INK_MUTED)

    box = cax.get_window_extent(renderer)
    tight = cax.get_tightbbox(renderer)
    above, below = (tight.y1 - box.y1) / dpi, (box.y0 - tight.y0) / dpi
    top = key.y0 / dpi - common.GAP_IN - above  # top of the bar, inches from the bottom of the figure
    bottom = top - _COLORBAR_HEIGHT_IN
    shortfall = common.PAD_IN - (bottom - below)
    if shortfall > 0:
        # Grow the figure at the bottom; everything else keeps its place from the top.
        new_height = height_in + shortfall
        pos = ax.get_position()
        ax.set_position([pos.x0, (pos.y0 * height_in + shortfall) / new_height,
                         pos.width, pos.height * height_in / new_height])
        anchor = legend.get_bbox_to_anchor().transformed(fig.transFigure.inverted())
        fig.set_size_inches(width_in, new_height)
        legend.set_bbox_to_anchor((anchor.x0, (anchor.y0 * height_in + shortfall) / new_height),
                                  transform=fig.transFigure)
        bottom += shortfall
        height_in = new_height
    cax.set_position((x0 / width_in, bottom / height_in, (x1 - x0) / width_in, _COLORBAR_HEIGHT_IN / height_in))
    return bar


def _describe(
    measures: Sequence[ChartMeasure], curves: Sequence[ChartCurve], primary: str, secondary: str
) -> str:
    """Short text alternative of the chart, for screen readers."""
    parts = [f"Offsets of {secondary} from {primary}, east to the left, north up."]
    if measures:
        first, last = min(m.t for m in measures), max(m.t for m in measures)
        count = sum(not m.flagged for m in measures)
        parts.append(f"{count} measure(s) from {first:.1f} to {last:.1f}, coloured by epoch.")
        flagged = [m for m in measures if m.flagged]
        if flagged:
            parts.append(f"{len(flagged)} flagged: " + "; ".join(
                f"{m.t:.1f} ({m.reason})" if m.reason else f"{m.t:.1f}" for m in flagged) + ".")
    for curve in curves:
        parts.append(f"Curve: {curve.label} ({curve.kind}).")
    return " ".join(parts)
