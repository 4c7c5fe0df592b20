"""Neighbours chart: the proper motions, and optionally the space velocities, of a system and the stars near it.

The left panel is the proper-motion plane (a vector-point diagram): μα*
(the proper motion in right ascension times cos δ) to the right, μδ up, both
in mas/yr, with equal scales so that a distance on the page is a difference
of motion whatever its direction (common practice for vector-point diagrams
in studies of clusters and moving groups). Each star is a marker at its
proper motion inside a circle of radius its 1-sigma error: two stars share
a motion, within the errors, when their circles meet (a circle is the error
of a motion known equally well in both components; an unknown error draws
none).

The system's components are drawn large, in navy, and always named. The
neighbours are coloured and shaped by whether they share the system's motion
(a judgement made elsewhere, by the common-motion rule): yes (teal square),
no (grey triangle), not judged (ochre diamond); marker and colour both
change, so the chart survives print in grey. A neighbour's id is written
where it fits clear of the markers and the other ids (a crowded neighbour
goes unnamed on the chart; the text alternative lists every star).

The optional right panel shows the Galactic velocities U against V (km/s),
with their 1-sigma error bars and the same markers, for the stars that have
them, again with equal scales. Both panels are square and of one size; the
key is under them.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from dossier.figures import common
from dossier.figures.hr_diagram import around, display_path, place_text  # one way to place labels

if TYPE_CHECKING:  # pragma: no cover - typing only
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure
    from matplotlib.legend import Legend
    from matplotlib.text import Text

CATEGORIES = ("system", "shares", "does not share", "not judged")
"""Kinds of star on the chart, in the order of the key."""

CATEGORY_STYLE: dict[str, dict[str, object]] = {
    "system": {"color": common.PRIMARY, "marker": "o", "markersize": 8.0},
    "shares": {"color": common.CO_MOVING, "marker": "s", "markersize": 6.0},
    "does not share": {"color": common.OPTICAL, "marker": "^", "markersize": 6.5},
    "not judged": {"color": common.UNDETERMINED, "marker": "D", "markersize": 5.5},
}
"""Colour, marker and its size (points) of each kind of star."""

CATEGORY_KEY = {
    "system": "component of the system",
    "shares": "neighbour sharing the motion",
    "does not share": "neighbour not sharing it",
    "not judged": "neighbour, not judged",
}
"""Key entry of each kind of star."""

ERROR_KEY = "1σ error (circle, bars)"
"""Key entry of the error circles and bars."""

_SINGLE_SIZE_IN = (6.5, 5.0)
"""Figure without the velocity panel; its height follows from the square axes."""
_DOUBLE_WIDTH_IN = 6.5
_PANEL_GAP_IN = 0.35
"""Space between the left panel (with its tick labels) and the right one's y axis, inches."""
_MARGIN = 0.12
"""Room beyond the outermost circle or bar, as a fraction of the span."""
_CIRCLE_ALPHA = 0.10
_LABEL_PT = 8.5
_LABEL_GAP_PT = 2.5
_LABEL_BOX = {"boxstyle": "square,pad=0.12", "facecolor": common.BACKGROUND, "alpha": 0.8, "edgecolor": "none"}
_ERROR_KW = {"elinewidth": 1.0, "capsize": 2.0, "capthick": 1.0}


@dataclass(frozen=True)
class MotionPoint:
    """A star's proper motion.

    Attributes
    ----------
    id : str
        Component id (for the system) or the neighbour's id.
    pmra : float
        Proper motion in right ascension, already multiplied by cos δ (μα*), mas/yr.
    pmdec : float
        Proper motion in declination (μδ), mas/yr.
    pm_err : float
        1-sigma error of the proper motion, mas/yr, the radius of its circle;
        NaN (or None, or 0) draws none.
    is_system : bool
        Whether the star is a component of the system.
    shares_motion : bool or None
        For a neighbour, whether it shares the system's motion; ``None`` when
        not judged. Not used for the system's components.
    """

    id: str
    pmra: float
    pmdec: float
    pm_err: float
    is_system: bool
    shares_motion: bool | None


VelocityPoint = tuple[str, float, float, float, float]
"""``(id, U, V, sigma_U, sigma_V)``: a star's Galactic velocities and their 1-sigma errors, km/s (an unknown
error NaN or None: no bar)."""


def category(point: MotionPoint) -> str:
    """The kind of star a point is: one of :data:`CATEGORIES`."""
    if point.is_system:
        return "system"
    return {True: "shares", False: "does not share", None: "not judged"}[point.shares_motion]


def neighbours_chart(
    points: Sequence[MotionPoint],
    *,
    title: str,
    velocity_points: Sequence[VelocityPoint] | None = None,
    alt: str | None = None,
) -> str:
    """Draw the proper motions (and velocities) of a system and its neighbours as SVG text.

    Parameters
    ----------
    points : sequence of MotionPoint
        The system's components (at least one) and its neighbours.
    title : str
        Title over the chart and accessible name of the SVG.
    velocity_points : sequence of (str, float, float, float, float), optional
        ``(id, U, V, sigma_U, sigma_V)`` in km/s for the stars that have
        space velocities; each id must be among ``points``. When given (and
        not empty), a second panel shows U against V.
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
        When there is no component of the system, two points share an id, a
        motion or velocity is not finite, an error is negative, or a
        velocity names a star that is not among the points.
    """
    points, velocities = _unknown_as_nan(points, velocity_points)
    fig = build_neighbours_chart(points, title=title, velocity_points=velocities)
    return common.to_svg(fig, title=title, description=_describe(points, velocities), alt=alt)


def build_neighbours_chart(
    points: Sequence[MotionPoint],
    *,
    title: str,
    velocity_points: Sequence[VelocityPoint] | None = None,
) -> Figure:
    """Build the neighbours chart as a matplotlib Figure (see :func:`neighbours_chart`).

    The axes are labelled ``"proper motion"`` and, with velocities,
    ``"velocity"``. In the first, the markers of each kind of star are a line
    labelled ``"motion <category>"`` (input order), each error circle a patch
    ``"error circle <id>"``; in the second, each star is an errorbar
    container labelled ``"velocity <id>"``. Ids are texts ``"label of <id>"``
    in each panel.
    """
    from matplotlib.patches import Circle

    points, velocities = _unknown_as_nan(points, velocity_points)
    _check(points, velocities)
    kinds = {p.id: category(p) for p in points}
    present = [c for c in CATEGORIES if c in kinds.values()]

    with common.house_style():
        double = bool(velocities)
        fig = common.new_figure(_DOUBLE_WIDTH_IN if double else _SINGLE_SIZE_IN[0], _SINGLE_SIZE_IN[1])
        ax = fig.add_subplot(label="proper motion")
        ax.grid(True, which="major")
        for p in points:
            if math.isfinite(p.pm_err) and p.pm_err > 0:
                colour = CATEGORY_STYLE[kinds[p.id]]["color"]
                ax.add_patch(Circle((p.pmra, p.pmdec), p.pm_err, facecolor=colour, alpha=_CIRCLE_ALPHA,
                                    edgecolor="none", zorder=1, label=f"error fill {p.id}"))
                ax.add_patch(Circle((p.pmra, p.pmdec), p.pm_err, facecolor="none", edgecolor=colour,
                                    linewidth=0.9, zorder=1.5, label=f"error circle {p.id}"))
        for kind in reversed(present):  # the system's components on top
            mine = [p for p in points if kinds[p.id] == kind]
            ax.plot([p.pmra for p in mine], [p.pmdec for p in mine], linestyle="none",
                    markeredgecolor=common.BACKGROUND, markeredgewidth=0.7, zorder=4 if kind == "system" else 3,
                    label=f"motion {kind}", **CATEGORY_STYLE[kind])
        _square_limits(ax, [p.pmra for p in points], [p.pmdec for p in points],
                       [_bar(p.pm_err) for p in points], [_bar(p.pm_err) for p in points])
        ax.set_xlabel("μα* (mas/yr)")
        ax.set_ylabel("μδ (mas/yr)")
        title_text = ax.set_title(title)

        axes = [ax]
        if double:
            vax = fig.add_subplot(label="velocity")
            vax.grid(True, which="major")
            for star_id, u, v, su, sv in velocities:
                style = CATEGORY_STYLE[kinds[star_id]]
                vax.errorbar([u], [v], xerr=[_bar(su)], yerr=[_bar(sv)], fmt=style["marker"],
                             markersize=style["markersize"], color=style["color"], ecolor=style["color"],
                             markeredgecolor=common.BACKGROUND, markeredgewidth=0.7,
                             zorder=4 if kinds[star_id] == "system" else 3, label=f"velocity {star_id}", **_ERROR_KW)
            _square_limits(vax, [v[1] for v in velocities], [v[2] for v in velocities],
                           [_bar(v[3]) for v in velocities], [_bar(v[4]) for v in velocities])
            vax.set_xlabel("U (km/s)")
            vax.set_ylabel("V (km/s)")
            axes.append(vax)
        from matplotlib.ticker import MaxNLocator

        for a in axes:
            a.set_aspect("equal", adjustable="box")
            for axis in (a.xaxis, a.yaxis):  # a few round ticks: small spans have long labels (40.02)
                axis.set_major_locator(MaxNLocator(nbins=5, steps=[1, 2, 2.5, 5, 10]))

        any_error = any(_bar(p.pm_err) > 0 for p in points) or any(_bar(v[3]) > 0 or _bar(v[4]) > 0
                                                                   for v in velocities)
        if double:
            legend = _legend(fig, present, any_error, ncols_max=3)
            _arrange_row(fig, axes, title=title_text, legend=legend)
        else:
            legend = _legend(fig, present, any_error, ncols_max=1)
            common.arrange(fig, ax, title=title_text, legend=legend, legend_side="right", square=True)
        _place_labels(fig, ax, [(p.id, p.pmra, p.pmdec, kinds[p.id]) for p in points])
        if double:
            _place_labels(fig, axes[1], [(v[0], v[1], v[2], kinds[v[0]]) for v in velocities])
    return fig


# --- checks and limits ---------------------------------------------------------------


def _unknown_as_nan(
    points: Sequence[MotionPoint], velocity_points: Sequence[VelocityPoint] | None
) -> tuple[list[MotionPoint], list[VelocityPoint]]:
    """The points and velocities with an unknown (None) error written as NaN, which draws no circle or bar."""
    from dataclasses import replace

    points = [replace(p, pm_err=math.nan) if p.pm_err is None else p for p in points]
    velocities = [tuple(math.nan if k >= 3 and value is None else value for k, value in enumerate(entry))
                  for entry in (velocity_points or [])]
    return points, velocities


def _check(points: Sequence[MotionPoint], velocities: Sequence[VelocityPoint]) -> None:
    if not any(p.is_system for p in points):
        raise ValueError("neighbours_chart needs at least one component of the system. "
                         "Fix: pass the system's components with is_system=True.")
    ids = [p.id for p in points]
    for p in points:
        if ids.count(p.id) > 1:
            raise ValueError(f"two points have the id {p.id!r}. Fix: give each star its own id.")
        if not (math.isfinite(p.pmra) and math.isfinite(p.pmdec)):
            raise ValueError(f"point {p.id!r} has proper motion ({p.pmra}, {p.pmdec}). "
                             "Fix: leave out stars without a measured proper motion.")
        if not (math.isnan(p.pm_err) or (math.isfinite(p.pm_err) and p.pm_err >= 0)):
            raise ValueError(f"point {p.id!r} has proper-motion error {p.pm_err}. "
                             "Fix: give the 1-sigma error in mas/yr, >= 0, or NaN if it is not known.")
    seen: list[str] = []
    for entry in velocities:
        if len(entry) != 5:
            raise ValueError(f"velocity entry {entry!r} has {len(entry)} fields. "
                             "Fix: give (id, U, V, sigma_U, sigma_V), km/s.")
        star_id, u, v, su, sv = entry
        if star_id not in ids:
            raise ValueError(f"velocity of {star_id!r} names a star that is not on the chart. "
                             f"Did you mean one of: {', '.join(ids)}?")
        if star_id in seen:
            raise ValueError(f"two velocities are given for {star_id!r}. Fix: give one velocity per star.")
        seen.append(star_id)
        if not (math.isfinite(u) and math.isfinite(v)):
            raise ValueError(f"velocity of {star_id!r} is ({u}, {v}). Fix: leave out stars without U and V.")
        for name, sigma in (("sigma_U", su), ("sigma_V", sv)):
            if not (math.isnan(sigma) or (math.isfinite(sigma) and sigma >= 0)):
                raise ValueError(f"velocity of {star_id!r} has {name} {sigma}. "
                                 "Fix: give the 1-sigma error in km/s, >= 0, or NaN if it is not known.")


def _bar(error: float) -> float:
    """An error to draw: NaN (unknown) draws none."""
    return float(error) if math.isfinite(error) else 0.0


def _square_limits(ax: Axes, x: Sequence[float], y: Sequence[float], x_err: Sequence[float],
                   y_err: Sequence[float]) -> None:
    """Limits of one span on both axes (equal scales), about every marker with its circle or bars, plus a margin."""
    x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    xe, ye = np.asarray(x_err, dtype=float), np.asarray(y_err, dtype=float)
    x_low, x_high = float(np.min(x - xe)), float(np.max(x + xe))
    y_low, y_high = float(np.min(y - ye)), float(np.max(y + ye))
    span = max(x_high - x_low, y_high - y_low)
    if span <= 0:  # a lone star without errors: a unit either side
        span = 2.0
    half = 0.5 * span * (1.0 + 2.0 * _MARGIN)
    cx, cy = 0.5 * (x_low + x_high), 0.5 * (y_low + y_high)
    ax.set_xlim(cx - half, cx + half)
    ax.set_ylim(cy - half, cy + half)


# --- layout ---------------------------------------------------------------------------


def _arrange_row(fig: Figure, axes: Sequence[Axes], *, title: Text, legend: Legend) -> None:
    """Lay out square axes side by side, of one size, tightly around their text, the key centred under them.

    The row counterpart of :func:`common.arrange` (measure the text with a
    renderer, place the boxes by hand, draw once); the figure's height
    follows from the squares.
    """
    import matplotlib

    renderer = common.text_renderer(fig)
    dpi = fig.dpi
    width_in = float(fig.get_size_inches()[0])
    legend_h = legend.get_window_extent(renderer).height / dpi
    for _ in range(2):  # tick labels can change with the size of the axes: measure twice
        lefts, bottoms, tops, overhang = [], [], [], 0.0
        for ax in axes:
            box = ax.get_window_extent(renderer)
            yaxis = ax.yaxis.get_tightbbox(renderer)
            xaxis = ax.xaxis.get_tightbbox(renderer)
            lefts.append(max((box.x0 - a.x0) / dpi for a in (yaxis, xaxis, box) if a is not None))
            bottoms.append((box.y0 - xaxis.y0) / dpi if xaxis is not None else 0.0)
            tops.append(max(0.0, (yaxis.y1 - box.y1) / dpi) if yaxis is not None else 0.0)
            overhang = max(0.0, (xaxis.x1 - box.x1) / dpi) if xaxis is not None else 0.0  # of the last
        pad = matplotlib.rcParams["axes.titlepad"] / 72.0
        top = max(*tops, title.get_window_extent(renderer).height / dpi + pad)
        bottom = max(bottoms)
        room = width_in - 2 * common.PAD_IN - sum(lefts) - overhang - _PANEL_GAP_IN * (len(axes) - 1)
        side = room / len(axes)
        height_in = common.PAD_IN + legend_h + common.GAP_IN / 2 + bottom + side + top + common.PAD_IN
        fig.set_size_inches(width_in, height_in)
        y0 = height_in - common.PAD_IN - top - side
        x = common.PAD_IN
        for ax, left in zip(axes, lefts):
            x += left
            ax.set_position([x / width_in, y0 / height_in, side / width_in, side / height_in])
            x += side + _PANEL_GAP_IN
    x0 = common.PAD_IN + lefts[0]
    centre = 0.5 * (x0 + x - _PANEL_GAP_IN)
    legend.set_bbox_to_anchor((centre / width_in, (y0 - bottom - common.GAP_IN / 2) / height_in),
                              transform=fig.transFigure)
    legend.set_loc("upper center")


# --- labels ---------------------------------------------------------------------------


def _place_labels(fig: Figure, ax: Axes, stars: Sequence[tuple[str, float, float, str]]) -> None:
    """Name the stars in one panel: the system's components always, a neighbour where it fits (see the notes).

    Markers and other labels are in the way; error circles and bars are
    avoided where possible.
    """
    from matplotlib.transforms import Bbox

    renderer = common.text_renderer(fig)
    frame = ax.get_window_extent(renderer)
    px = fig.dpi / 72.0
    hard: list[Bbox] = []
    for _, x, y, kind in stars:
        cx, cy = ax.transData.transform((x, y))
        half = 0.5 * float(CATEGORY_STYLE[kind]["markersize"]) * px + 1.0
        hard.append(Bbox([[cx - half, cy - half], [cx + half, cy + half]]))
    soft: list[object] = []
    for patch in ax.patches:
        if patch.get_label().startswith("error circle"):
            soft.append(patch.get_path().transformed(patch.get_transform()))
    for container in ax.containers:
        soft += [display_path(ax, seg[:, 0], seg[:, 1]) for collection in container.lines[2]
                 for seg in collection.get_segments()]
    # The system's components first, so that they get the best places.
    for star_id, x, y, kind in sorted(stars, key=lambda s: s[3] != "system"):
        size = float(CATEGORY_STYLE[kind]["markersize"])
        text = ax.annotate(star_id, xy=(x, y), xytext=(0.0, 0.0), textcoords="offset points", fontsize=_LABEL_PT,
                           fontweight="bold" if kind == "system" else "normal", color=common.INK, zorder=6,
                           bbox=_LABEL_BOX, label=f"label of {star_id}")
        system = kind == "system"
        # A neighbour's id stays near its marker: far off, it would seem to name another star.
        place_text(text, around(0.5 * size + _LABEL_GAP_PT + 1.0, rings=3 if system else 2), hard, soft, frame,
                   renderer, required=system)


# --- key and description -----------------------------------------------------------------


def _legend(fig: Figure, present: Sequence[str], any_error: bool, *, ncols_max: int) -> Legend:
    """The key: one entry per kind of star on the chart, then the error circle."""
    from matplotlib.legend_handler import HandlerPatch
    from matplotlib.lines import Line2D
    from matplotlib.patches import Circle

    handles: list[object] = []
    texts: list[str] = []
    for kind in present:
        handles.append(Line2D([], [], linestyle="none", markeredgecolor=common.BACKGROUND, markeredgewidth=0.7,
                              **CATEGORY_STYLE[kind]))
        texts.append(CATEGORY_KEY[kind])
    handler_map = {}
    if any_error:
        ring = Circle((0.0, 0.0), 1.0, facecolor="none", edgecolor=common.INK_MUTED, linewidth=0.9)
        handles.append(ring)
        texts.append(ERROR_KEY)

        def draw_ring(legend, orig_handle, xdescent, ydescent, width, height, fontsize):  # noqa: ANN001, ANN202
            radius = 0.5 * min(width, height) + 1.0
            return Circle((0.5 * width - xdescent, 0.5 * height - ydescent), radius)

        handler_map[ring] = HandlerPatch(patch_func=draw_ring)
    ncols = min(ncols_max, len(handles))
    if ncols > 1:
        ncols = math.ceil(len(handles) / math.ceil(len(handles) / ncols))  # 2 + 2, not 3 + 1
    loc = "upper center" if ncols_max > 1 else "upper left"
    legend = fig.legend(handles, texts, loc=loc, ncols=ncols, handlelength=1.6, handletextpad=0.6,
                        columnspacing=1.4, labelspacing=0.7, handler_map=handler_map,
                        title=None if ncols_max > 1 else "Key", alignment="left")
    if legend.get_title().get_text():
        legend.get_title().set_fontweight("bold")
    return legend


def _describe(points: Sequence[MotionPoint], velocity_points: Sequence[VelocityPoint] | None) -> str:
    """Short text alternative of the chart, for screen readers."""
    parts = ["Proper motions in mas/yr, μα* to the right and μδ up, with 1-sigma error circles."]
    for p in points:
        if math.isfinite(p.pm_err) and p.pm_err > 0:
            (pmra, error), (pmdec, _) = common.format_with_error(p.pmra, p.pm_err), common.format_with_error(
                p.pmdec, p.pm_err)
            motion = f"({pmra}, {pmdec}) ± {error}"
        else:
            motion = f"({p.pmra:g}, {p.pmdec:g}), error unknown"
        parts.append(f"{p.id} ({CATEGORY_KEY[category(p)]}): {motion}.")
    if velocity_points:
        parts.append("Galactic velocities U against V, km/s, with 1-sigma error bars.")
        for star_id, u, v, su, sv in velocity_points:
            parts.append(f"{star_id}: U {_with_error(u, su)}, V {_with_error(v, sv)}.")
    return " ".join(parts)


def _with_error(value: float, error: float) -> str:
    if math.isfinite(error) and error > 0:
        return " ± ".join(common.format_with_error(value, error))
    return f"{value:g} (error unknown)"
