"""Sky chart: where the components sit about the primary and where they move.

Offsets are in arcseconds about the primary, east to the left and north up,
as the sky looks to an observer on the ground (common practice for finding
charts and double-star drawings). Marker size grows with brightness. Each
pair is a line whose colour and dash give its status; the key lists every
pair with its separation and position angle, and the line carries the same
label where it fits clear of everything else on the chart (otherwise the
separation and angle alone, the pair id alone, or nothing: the star ids at
its ends still name it).

Proper motion is drawn as an arrow per star. On a linear chart the arrow is
the true displacement over a stated number of years, chosen as a round
number that makes the longest arrow about a quarter of the chart. When the
offsets span more than :data:`SYMLOG_RATIO` in ratio (a close companion and
a wide one in the same system), both axes switch to a symmetric logarithmic
scale, linear near the primary and logarithmic beyond, and the axis labels
say so. A displacement over a fixed time would then look huge near the
primary and vanish far out, so on such charts each arrow is the
proper-motion vector drawn at one common scale on the page, and the key
gives the longest proper motion instead of a time span.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from dossier.figures import common

if TYPE_CHECKING:  # pragma: no cover - typing only
    from matplotlib.axes import Axes
    from matplotlib.backend_bases import RendererBase
    from matplotlib.figure import Figure
    from matplotlib.legend import Legend
    from matplotlib.text import Annotation
    from matplotlib.transforms import Bbox

STATUSES = ("bound", "co-moving", "optical", "undetermined")
"""Pair statuses a verdict can give."""

STATUS_STYLE: dict[str, dict[str, object]] = {
    "bound": {"color": common.BOUND, "linestyle": "-", "linewidth": 1.6},
    "co-moving": {"color": common.CO_MOVING, "linestyle": (0, (5.0, 2.5)), "linewidth": 1.5},
    "optical": {"color": common.OPTICAL, "linestyle": (0, (1.0, 2.0)), "linewidth": 1.7},
    "undetermined": {"color": common.UNDETERMINED, "linestyle": (0, (6.0, 2.0, 1.2, 2.0)), "linewidth": 1.4},
}
"""Line colour and dash per pair status: both differ, so print in grey works."""

SYMLOG_RATIO = 30.0
"""Largest over smallest nonzero offset above which the axes go symlog."""

SYMLOG_LINSCALE = 1.0
"""Width of the linear part of a symlog axis, in decades of the log part."""

ARROW_FRACTION = 0.25
"""Longest proper-motion arrow, as a fraction of the span of the stars."""

MAS_PER_ARCSEC = 1000.0

_BRIGHTEST_MARKER_PT = 15.0
_MARKER_STEP_PT = 1.6  # diameter lost per magnitude fainter
_FAINTEST_MARKER_PT = 5.0
_UNKNOWN_MARKER_PT = 8.0
_MAX_TICKS = 7


@dataclass(frozen=True)
class ChartStar:
    """A component on the chart.

    Attributes
    ----------
    id : str
        Component id, for example ``"A"``.
    east_arcsec, north_arcsec : float
        Offset from the primary, arcsec; east and north positive.
    pm_ra, pm_dec : float or None
        Proper motion, mas/yr; the RA component already multiplied by
        cos(dec). ``None`` when unknown (then no arrow is drawn).
    magnitude : float or None
        Apparent magnitude in one band, to size the marker; ``None`` draws
        an open marker of middle size.
    """

    id: str
    east_arcsec: float
    north_arcsec: float
    pm_ra: float | None
    pm_dec: float | None
    magnitude: float | None


@dataclass(frozen=True)
class ChartPair:
    """A pair drawn as a line between two stars.

    Attributes
    ----------
    id : str
        Pair id, for example ``"AB"``.
    first, second : str
        Ids of the two stars.
    rho_arcsec : float
        Separation, arcsec.
    theta_deg : float
        Position angle, degrees north through east.
    status : str
        One of :data:`STATUSES`.
    """

    id: str
    first: str
    second: str
    rho_arcsec: float
    theta_deg: float
    status: str


def pair_label(pair: ChartPair) -> str:
    """Return the separation and position angle of a pair as text.

    Parameters
    ----------
    pair : ChartPair
        The pair.

    Returns
    -------
    str
        For example ``"ρ = 12.3″, θ = 45.6°"`` (separation to three
        significant figures, at least one decimal; angle to 0.1°).
    """
    return f"ρ = {common.format_number(pair.rho_arcsec)}″, θ = {pair.theta_deg:.1f}°"


def sky_chart(
    stars: list[ChartStar],
    pairs: list[ChartPair],
    *,
    title: str,
    arrow_years: float | None = None,
    alt: str | None = None,
) -> str:
    """Draw the sky chart of one system as SVG text.

    Parameters
    ----------
    stars : list of ChartStar
        Components; the first is the primary, at (0, 0).
    pairs : list of ChartPair
        Pairs to draw; their members must be among ``stars``.
    title : str
        Title over the chart and accessible name of the SVG.
    arrow_years : float, optional
        Time span of the proper-motion arrows on a linear chart, years. When
        ``None``, a round number (1, 2 or 5 times a power of ten) is chosen
        so that the longest arrow is about a quarter of the chart span. Not
        used on a symlog chart, where arrows are proper-motion vectors at one
        common scale (see the module notes).
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
        When there are no stars, a pair names an unknown star or an unknown
        status, or ``arrow_years`` is not positive.
    """
    fig = build_sky_chart(stars, pairs, title=title, arrow_years=arrow_years)
    return common.to_svg(fig, title=title, description=_describe(stars, pairs), alt=alt)


def build_sky_chart(
    stars: Sequence[ChartStar],
    pairs: Sequence[ChartPair],
    *,
    title: str,
    arrow_years: float | None = None,
) -> Figure:
    """Build the sky chart as a matplotlib Figure (see :func:`sky_chart`).

    The figure has one axes. Artists carry labels so that tests can read
    back what the chart shows: proper-motion arrows are annotations
    labelled ``"motion of <id>"`` (``xy`` is the tip, ``xyann`` the tail),
    star markers are lines labelled ``"star <id>"``, pair lines
    ``"pair <id>"`` and the labels on them (where there is room)
    ``"label of <id>"``.
    """
    _check(stars, pairs, arrow_years)
    east = np.array([s.east_arcsec for s in stars], dtype=float)
    north = np.array([s.north_arcsec for s in stars], dtype=float)

    linthresh = _symlog_threshold(stars, pairs)
    forward, inverse = _scale_functions(linthresh)
    span = _span(forward(east), forward(north))  # of the stars, as displayed
    tips, motion_key = _arrow_tips(stars, linthresh, arrow_years, span, forward, inverse)

    with common.house_style():
        fig = common.new_figure(*common.DEFAULT_SIZE_IN)
        ax = fig.add_subplot()
        if linthresh is not None:
            ax.set_xscale("symlog", linthresh=linthresh, linscale=SYMLOG_LINSCALE)
            ax.set_yscale("symlog", linthresh=linthresh, linscale=SYMLOG_LINSCALE)
        ax.grid(True, which="major")
        _set_limits(ax, east, north, tips, forward, inverse)
        if linthresh is not None:
            _decade_ticks(ax, linthresh)
        ax.set_aspect("equal", adjustable="box")

        brightest = _brightest(stars)
        position = {s.id: (s.east_arcsec, s.north_arcsec) for s in stars}
        for pair in pairs:
            _draw_pair(ax, pair, position)
        for s in stars:
            if s.id in tips:
                _draw_arrow(ax, s, tips[s.id])
        star_labels = []
        for index, s in enumerate(stars):
            _draw_star(ax, s, primary=index == 0, brightest=brightest)
            star_labels.append(_label_star(ax, s, stars, pairs, tips, forward, brightest))

        scale_note = "" if linthresh is None else f", log scale beyond ±{common.format_number(linthresh, 1, 0)}″"
        ax.set_xlabel(f"Offset east (arcsec{scale_note}); east is left")
        ax.set_ylabel(f"Offset north (arcsec{scale_note})")
        title_text = ax.set_title(title)
        legend = _legend(fig, stars, pairs, motion_key)
        compass = common.compass(ax, east, north, tips)
        common.arrange(fig, ax, title=title_text, legend=legend, legend_side="right", square=True)
        # Where a pair's label fits is known once the axes are placed.
        renderer = common.text_renderer(fig)
        keep_clear = [_extent_box(t.get_window_extent(renderer)) for t in star_labels]
        keep_clear.append(_extent_box(compass.transformed(ax.transAxes)))
        _place_pair_labels(ax, pairs, stars, tips, brightest, renderer, keep_clear)
    return fig


# --- checks, scales and arrows -------------------------------------------------


def _check(stars: Sequence[ChartStar], pairs: Sequence[ChartPair], arrow_years: float | None) -> None:
    if not stars:
        raise ValueError("sky_chart needs at least one star. Fix: pass the primary as the first star.")
    ids = [s.id for s in stars]
    for pair in pairs:
        for member in (pair.first, pair.second):
            if member not in ids:
                raise ValueError(
                    f"pair {pair.id!r} names star {member!r}, which is not on the chart. "
                    f"Did you mean one of: {', '.join(ids)}?"
                )
        if pair.status not in STATUSES:
            raise ValueError(
                f"pair {pair.id!r} has status {pair.status!r}. Fix: use one of: {', '.join(STATUSES)}."
            )
    if arrow_years is not None and not (arrow_years > 0 and math.isfinite(arrow_years)):
        raise ValueError(f"arrow_years is {arrow_years!r}. Fix: give a positive number of years, or None.")


def _symlog_threshold(stars: Sequence[ChartStar], pairs: Sequence[ChartPair]) -> float | None:
    """Return the linear threshold of a symlog scale, or None for linear axes.

    The offsets that matter are the distances of the components from the
    primary and the separations of the pairs. When the largest over the
    smallest exceeds :data:`SYMLOG_RATIO`, a linear chart would hide the
    close ones under the primary's marker; the threshold is then the power
    of ten at or below the smallest offset, so that the closest companion
    sits where the logarithmic part begins.
    """
    distances = [math.hypot(s.east_arcsec, s.north_arcsec) for s in stars[1:]]
    distances += [p.rho_arcsec for p in pairs]
    nonzero = [d for d in distances if d > 0 and math.isfinite(d)]
    if len(nonzero) < 2 or max(nonzero) / min(nonzero) <= SYMLOG_RATIO:
        return None
    return 10.0 ** math.floor(math.log10(min(nonzero)))


Transform = Callable[[np.ndarray], np.ndarray]


def _scale_functions(linthresh: float | None) -> tuple[Transform, Transform]:
    """Return the forward and inverse transforms of the axis scale (data to displayed units)."""
    if linthresh is None:
        return (lambda v: np.asarray(v, dtype=float)), (lambda v: np.asarray(v, dtype=float))
    from matplotlib.scale import SymmetricalLogTransform

    transform = SymmetricalLogTransform(base=10.0, linthresh=linthresh, linscale=SYMLOG_LINSCALE)
    inverted = transform.inverted()
    return (
        lambda v: transform.transform_non_affine(np.asarray(v, dtype=float)),
        lambda v: inverted.transform_non_affine(np.asarray(v, dtype=float)),
    )


def _span(x: np.ndarray, y: np.ndarray) -> float:
    """Larger of the x and y extents, in displayed units; 1 if degenerate."""
    span = max(float(np.ptp(x)), float(np.ptp(y)))
    return span if span > 0 else 1.0


def _nice_years(years: float) -> float:
    """Round a time span to 1, 2 or 5 times a power of ten (nearest in log)."""
    exponent = math.floor(math.log10(years))
    candidates = [m * 10.0**e for e in (exponent - 1, exponent, exponent + 1) for m in (1.0, 2.0, 5.0)]
    return min(candidates, key=lambda c: abs(math.log10(c / years)))


def _format_years(years: float) -> str:
    if years >= 1 and float(years).is_integer():
        return f"{int(years):,}".replace(",", " ")  # digits grouped by spaces, SI style: 10 000
    return f"{years:g}"


def _arrow_tips(
    stars: Sequence[ChartStar],
    linthresh: float | None,
    arrow_years: float | None,
    span: float,
    forward: Transform,
    inverse: Transform,
) -> tuple[dict[str, tuple[float, float]], str | None]:
    """Return the tip of each star's arrow (data coordinates) and the key text."""
    moving = [s for s in stars if s.pm_ra is not None and s.pm_dec is not None and (s.pm_ra or s.pm_dec)]
    fastest = max((math.hypot(s.pm_ra, s.pm_dec) for s in moving), default=0.0)  # type: ignore[arg-type]
    if not moving:
        return {}, None
    tips: dict[str, tuple[float, float]] = {}
    if linthresh is None:
        # The true displacement over arrow_years.
        years = arrow_years if arrow_years is not None else _nice_years(ARROW_FRACTION * span * MAS_PER_ARCSEC / fastest)
        for s in moving:
            tips[s.id] = (
                s.east_arcsec + s.pm_ra * years / MAS_PER_ARCSEC,  # type: ignore[operator]
                s.north_arcsec + s.pm_dec * years / MAS_PER_ARCSEC,  # type: ignore[operator]
            )
        return tips, f"motion in {_format_years(years)} yr"
    # The proper-motion vector at one scale in displayed units, where the
    # axes have equal aspect: directions and relative lengths stay true.
    gain = ARROW_FRACTION * span / fastest
    for s in moving:
        tx = forward(np.array([s.east_arcsec]))[0] + gain * s.pm_ra  # type: ignore[operator]
        ty = forward(np.array([s.north_arcsec]))[0] + gain * s.pm_dec  # type: ignore[operator]
        tips[s.id] = (float(inverse(np.array([tx]))[0]), float(inverse(np.array([ty]))[0]))
    return tips, f"proper motion\n(longest {common.format_number(fastest)} mas/yr)"


def _set_limits(
    ax: Axes,
    east: np.ndarray,
    north: np.ndarray,
    tips: dict[str, tuple[float, float]],
    forward: Transform,
    inverse: Transform,
) -> None:
    """Square limits (in displayed units) about the stars and arrow tips."""
    xs = np.concatenate([east, [t[0] for t in tips.values()]])
    ys = np.concatenate([north, [t[1] for t in tips.values()]])
    fx, fy = forward(xs), forward(ys)
    half = 0.5 * _span(fx, fy) * 1.3  # margin for the labels
    cx = 0.5 * (fx.min() + fx.max())
    cy = 0.5 * (fy.min() + fy.max())
    east_edge, west_edge = inverse(np.array([cx + half, cx - half]))
    bottom, top = inverse(np.array([cy - half, cy + half]))
    # East to the left: the larger east offset at the left edge, so the x
    # axis is inverted (common practice for charts of the sky as seen).
    ax.set_xlim(float(east_edge), float(west_edge))
    ax.set_ylim(float(bottom), float(top))


def _decade_ticks(ax: Axes, linthresh: float) -> None:
    """Ticks at 0 and at decades from the threshold out, plain numbers, at most a handful."""
    from matplotlib.ticker import FixedLocator, FuncFormatter, NullLocator

    def plain(value: float, _position: int) -> str:
        return "0" if value == 0 else f"{value:g}".replace("-", "−")

    for axis, limits in ((ax.xaxis, ax.get_xlim()), (ax.yaxis, ax.get_ylim())):
        low, high = min(limits), max(limits)
        exponents = range(0, 40)
        step = 1
        while True:
            ticks = [0.0]
            for k in exponents[::step]:
                value = linthresh * 10.0**k
                if value > max(abs(low), abs(high)):
                    break
                ticks += [v for v in (value, -value) if low <= v <= high]
            if len(ticks) <= _MAX_TICKS or step > 10:
                break
            step += 1
        axis.set_major_locator(FixedLocator(sorted(ticks)))
        axis.set_major_formatter(FuncFormatter(plain))
        axis.set_minor_locator(NullLocator())


# --- artists -----------------------------------------------------------------


def _brightest(stars: Sequence[ChartStar]) -> float | None:
    known = [s.magnitude for s in stars if s.magnitude is not None]
    return min(known) if known else None


def _marker_size(magnitude: float | None, brightest: float | None) -> float:
    """Marker diameter, points: brighter stars get bigger markers."""
    if magnitude is None or brightest is None:
        return _UNKNOWN_MARKER_PT
    return max(_FAINTEST_MARKER_PT, _BRIGHTEST_MARKER_PT - _MARKER_STEP_PT * (magnitude - brightest))


def _draw_star(ax: Axes, star: ChartStar, *, primary: bool, brightest: float | None) -> None:
    colour = common.PRIMARY if primary else common.COMPANION
    known = star.magnitude is not None
    ax.plot(
        [star.east_arcsec],
        [star.north_arcsec],
        linestyle="none",
        marker="o",
        markersize=_marker_size(star.magnitude, brightest),
        markerfacecolor=colour if known else common.BACKGROUND,
        markeredgecolor=common.BACKGROUND if known else colour,
        markeredgewidth=0.9 if known else 1.5,
        zorder=4,
        label=f"star {star.id}",
    )


def _draw_arrow(ax: Axes, star: ChartStar, tip: tuple[float, float]) -> None:
    annotation = ax.annotate(
        "",
        xy=tip,
        xytext=(star.east_arcsec, star.north_arcsec),
        arrowprops={
            "arrowstyle": "-|>,head_length=0.55,head_width=0.28",
            "color": common.MOTION,
            "linewidth": 1.3,
            "shrinkA": 0.0,
            "shrinkB": 0.0,
        },
        zorder=3,
        annotation_clip=False,
    )
    annotation.set_label(f"motion of {star.id}")


def _draw_pair(ax: Axes, pair: ChartPair, position: dict[str, tuple[float, float]]) -> None:
    """Draw a pair's line, styled by its status."""
    (x1, y1), (x2, y2) = position[pair.first], position[pair.second]
    ax.plot([x1, x2], [y1, y2], zorder=2, label=f"pair {pair.id}", **STATUS_STYLE[pair.status])


# --- placing the pair labels ----------------------------------------------------
#
# A label lies along its line, just above or below it, somewhere between the
# two markers. Candidates are tried in order (longest text first, middle of
# the line first) and the first that overlaps nothing already on the chart
# (markers, arrows, other lines, star ids, the compass, other labels) wins;
# if none does, the pair id goes at the middle. Geometry is in display pixels,
# where every label is a rectangle turned by its angle, and two rectangles
# overlap unless one of their four edge directions separates them
# (separating axis theorem).

Box = tuple[np.ndarray, np.ndarray, np.ndarray]
"""An oriented rectangle: centre, unit axis u, half sizes (along u, along the normal)."""

_PAIR_LABEL_PT = 8.5
_FRACTIONS = (0.5, 0.4, 0.6, 0.3, 0.7, 0.22, 0.78)
"""Where along its line a label may sit, in order of preference."""
_GAP_PX = 2.5
_PAD_PX = 1.5


def _box(centre: np.ndarray, direction: np.ndarray, half_length: float, half_width: float) -> Box:
    norm = float(np.hypot(*direction))
    u = direction / norm if norm > 0 else np.array([1.0, 0.0])
    return np.asarray(centre, dtype=float), u, np.array([half_length, half_width])


def _segment_box(start: np.ndarray, end: np.ndarray, half_width: float) -> Box:
    return _box(0.5 * (start + end), end - start, 0.5 * float(np.hypot(*(end - start))), half_width)


def _overlap(a: Box, b: Box) -> bool:
    """Whether two oriented rectangles overlap (separating axis theorem)."""
    (ca, ua, ha), (cb, ub, hb) = a, b
    axes_a = (ua, np.array([-ua[1], ua[0]]))
    axes_b = (ub, np.array([-ub[1], ub[0]]))
    d = cb - ca
    for axis in (*axes_a, *axes_b):
        reach_a = ha[0] * abs(axis @ axes_a[0]) + ha[1] * abs(axis @ axes_a[1])
        reach_b = hb[0] * abs(axis @ axes_b[0]) + hb[1] * abs(axis @ axes_b[1])
        if abs(d @ axis) > reach_a + reach_b:
            return False
    return True


def _place_pair_labels(
    ax: Axes,
    pairs: Sequence[ChartPair],
    stars: Sequence[ChartStar],
    tips: dict[str, tuple[float, float]],
    brightest: float | None,
    renderer: RendererBase,
    keep_clear: list[Box],
) -> None:
    """Write each pair's label where it fits and overlaps nothing (see above)."""
    to_px = ax.transData.transform
    px_per_pt = ax.figure.dpi / 72.0
    at = {s.id: to_px((s.east_arcsec, s.north_arcsec)) for s in stars}
    radius = {s.id: 0.5 * px_per_pt * _marker_size(s.magnitude, brightest) for s in stars}
    frame = ax.get_window_extent(renderer)

    obstacles = list(keep_clear)
    for s in stars:
        obstacles.append(_box(at[s.id], np.array([1.0, 0.0]), radius[s.id] + 1, radius[s.id] + 1))
        if s.id in tips:
            obstacles.append(_segment_box(at[s.id], to_px(tips[s.id]), 2.0))
    lines = {p.id: _segment_box(at[p.first], at[p.second], 1.5) for p in pairs}

    for pair in pairs:
        start, end = at[pair.first], at[pair.second]
        length = float(np.hypot(*(end - start)))
        u = (end - start) / length if length > 0 else np.array([1.0, 0.0])
        if u[0] < 0 or (u[0] == 0 and u[1] < 0):  # keep the text upright
            u, start, end = -u, end, start
        first, last = (pair.first, pair.second) if np.allclose(start, at[pair.first]) else (pair.second, pair.first)
        normal = np.array([-u[1], u[0]])
        angle = math.degrees(math.atan2(u[1], u[0]))
        others = obstacles + [box for pid, box in lines.items() if pid != pair.id]
        choice = None
        for text in (f"{pair.id}  {pair_label(pair)}", pair_label(pair), pair.id):
            width, height = _text_size(ax, text, renderer)
            for fraction in _FRACTIONS:
                along = fraction * length
                if along - width / 2 < radius[first] + 2 or along + width / 2 > length - radius[last] - 2:
                    continue
                for side in (1.0, -1.0):
                    centre = start + along * u + side * (_GAP_PX + height / 2) * normal
                    box = _box(centre, u, width / 2 + _PAD_PX, height / 2 + _PAD_PX)
                    corners = [centre + sx * (width / 2) * u + sy * (height / 2) * normal
                               for sx in (-1, 1) for sy in (-1, 1)]
                    inside = all(frame.x0 <= c[0] <= frame.x1 and frame.y0 <= c[1] <= frame.y1 for c in corners)
                    if inside and not any(_overlap(box, other) for other in others):
                        choice = (text, start + along * u, side, box)
                        break
                if choice:
                    break
            if choice:
                break
        if choice is None:  # nowhere clear: the star ids at its ends name the line
            continue
        text, anchor, side, box = choice
        obstacles.append(box)
        offset_pt = side * _GAP_PX / px_per_pt * normal
        label = ax.annotate(
            text,
            xy=tuple(ax.transData.inverted().transform(anchor)),
            xytext=(float(offset_pt[0]), float(offset_pt[1])),
            textcoords="offset points",
            rotation=angle,
            rotation_mode="anchor",
            ha="center",
            va="bottom" if side > 0 else "top",
            fontsize=_PAIR_LABEL_PT,
            color=common.INK,
            bbox={"boxstyle": "square,pad=0.1", "facecolor": common.BACKGROUND, "edgecolor": "none", "alpha": 0.85},
            zorder=5,
        )
        label.set_label(f"label of {pair.id}")
        label.set_in_layout(False)


def _text_size(ax: Axes, text: str, renderer: RendererBase) -> tuple[float, float]:
    """Width and height of a pair label, pixels, unrotated."""
    probe = ax.text(0, 0, text, fontsize=_PAIR_LABEL_PT)
    extent = probe.get_window_extent(renderer)
    probe.remove()
    return extent.width, extent.height


_LABEL_DIRECTIONS = (45.0, 135.0, 315.0, 225.0, 90.0, 0.0, 180.0, 270.0)
"""Candidate directions of a star's label, degrees anticlockwise from screen right, by preference."""


def _label_star(
    ax: Axes,
    star: ChartStar,
    stars: Sequence[ChartStar],
    pairs: Sequence[ChartPair],
    tips: dict[str, tuple[float, float]],
    forward: Transform,
    brightest: float | None,
) -> Annotation:
    """Write the star's id on the side least crowded by its arrow and lines."""
    fx, fy = forward(np.array([star.east_arcsec, star.north_arcsec]))

    def screen_angle(target: tuple[float, float]) -> float | None:
        tx, ty = forward(np.array(target, dtype=float))
        if (tx, ty) == (fx, fy):
            return None
        return math.degrees(math.atan2(ty - fy, -(tx - fx)))  # east is to the left

    targets = [tips[star.id]] if star.id in tips else []
    by_id = {s.id: s for s in stars}
    for pair in pairs:
        other = {pair.first: pair.second, pair.second: pair.first}.get(star.id)
        if other is not None:
            targets.append((by_id[other].east_arcsec, by_id[other].north_arcsec))
    busy = [a for a in (screen_angle(t) for t in targets) if a is not None]

    def clearance(direction: float) -> float:
        if not busy:
            return 180.0
        return min(abs((direction - b + 180.0) % 360.0 - 180.0) for b in busy)

    best = max(_LABEL_DIRECTIONS, key=lambda d: (round(clearance(d), 6), -_LABEL_DIRECTIONS.index(d)))
    radius = 0.5 * _marker_size(star.magnitude, brightest) + 3.5
    dx, dy = radius * math.cos(math.radians(best)), radius * math.sin(math.radians(best))
    label = ax.annotate(
        star.id,
        xy=(star.east_arcsec, star.north_arcsec),
        xytext=(dx, dy),
        textcoords="offset points",
        ha="left" if dx > 1 else "right" if dx < -1 else "center",
        va="bottom" if dy > 1 else "top" if dy < -1 else "center",
        fontsize=10,
        fontweight="bold",
        color=common.INK,
        zorder=6,
    )
    label.set_in_layout(False)
    return label


def _legend(fig: Figure, stars: Sequence[ChartStar], pairs: Sequence[ChartPair], motion_key: str | None) -> Legend:
    """The key: stars, marker-size rule, one entry per pair, the arrows."""
    from matplotlib.legend_handler import HandlerTuple
    from matplotlib.lines import Line2D

    def dot(size: float, face: str, edge: str = common.BACKGROUND, width: float = 0.9) -> Line2D:
        return Line2D([], [], linestyle="none", marker="o", markersize=size, markerfacecolor=face,
                      markeredgecolor=edge, markeredgewidth=width)

    handles: list[object] = [dot(9, common.PRIMARY)]
    texts = [f"primary ({stars[0].id})"]
    if len(stars) > 1:
        handles.append(dot(7, common.COMPANION))
        texts.append("companion")
    if any(s.magnitude is None for s in stars):
        handles.append(dot(7, common.BACKGROUND, common.COMPANION, 1.5))
        texts.append("magnitude unknown")
    if any(s.magnitude is not None for s in stars):
        handles.append((dot(4, common.INK_MUTED), dot(7, common.INK_MUTED), dot(10, common.INK_MUTED)))
        texts.append("brighter is larger")
    for pair in pairs:
        handles.append(Line2D([], [], **STATUS_STYLE[pair.status]))
        texts.append(f"{pair.id}: {pair.status}\n{pair_label(pair)}")
    if motion_key is not None:
        handles.append(Line2D([], [], color=common.MOTION, linewidth=1.3, marker=">", markevery=[-1], markersize=5))
        texts.append(motion_key)
    legend = fig.legend(
        handles,
        texts,
        loc="upper left",
        title="Key",
        alignment="left",
        handler_map={tuple: HandlerTuple(ndivide=None, pad=0.1)},
        labelspacing=0.7,
    )
    legend.get_title().set_fontweight("bold")
    return legend




def _extent_box(extent: Bbox) -> Box:
    """An axis-aligned extent (pixels) as an oriented rectangle."""
    return _box(np.array([0.5 * (extent.x0 + extent.x1), 0.5 * (extent.y0 + extent.y1)]),
                np.array([1.0, 0.0]), 0.5 * extent.width, 0.5 * extent.height)


def _describe(stars: Sequence[ChartStar], pairs: Sequence[ChartPair]) -> str:
    """Short text alternative of the chart, for screen readers."""
    parts = [f"Offsets of {len(stars)} star(s) about {stars[0].id}, east to the left, north up."]
    for pair in pairs:
        parts.append(f"Pair {pair.id} ({pair.first}–{pair.second}), {pair.status}: {pair_label(pair)}.")
    return " ".join(parts)
