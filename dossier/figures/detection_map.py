"""Detection map: separation against contrast for the companion claims of one system.

The horizontal axis is the separation from the primary, ρ (arcsec), on a
logarithmic scale (high-resolution searches reach from a few hundredths of an
arcsecond to several arcseconds); the vertical axis is the magnitude
difference Δm (mag), increasing downward, so that fainter companions sit lower
(common practice for contrast curves of high-contrast imaging and speckle
surveys).

Each search that found nothing is drawn as its sensitivity: a shaded box from
Δm = 0 down to its contrast limit, between its smallest and largest
separation (anything brighter than the limit in that range would have been
seen), labelled ``"method epoch (ref): Δm < limit"``. The limit is drawn as a
box, not as the curve a survey publishes: a single contrast over the range
is what :class:`SearchLimit` holds.

Each detection is a marker, one shape per method, labelled with the
companion's id and the epoch. A detection that lies inside a search's box
(ρ within its range, Δm no fainter than its limit) is one that search should
have seen: it gets a red ring and a red label, and the key says why. The
chart does not judge the conflict (orbital motion between the epochs, a
variable companion, a spurious detection); it shows it. Magnitude differences
in different bands are not converted: when every box and detection shares
one band the axis names it, otherwise each label carries its own band.

A detection without a magnitude difference is drawn as an open downward
triangle on the top edge ("Δm unknown"): its separation is known, not its
brightness, so it is never marked as inside a box.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

from dossier.figures import common
from dossier.figures.rv_chart import log_ticks  # one style of log axis for every chart

if TYPE_CHECKING:  # pragma: no cover - typing only
    from matplotlib.axes import Axes
    from matplotlib.backend_bases import RendererBase
    from matplotlib.figure import Figure
    from matplotlib.legend import Legend
    from matplotlib.text import Annotation
    from matplotlib.transforms import Bbox

METHOD_MARKERS = ("o", "s", "D", "^", "P", "X")
"""Marker of each detection method, in order of first appearance (then repeated)."""
LIMIT_FILL = common.UNCERTAINTY_BAND
"""Shade of a search's sensitivity box (light teal; overlapping boxes shade deeper)."""
LIMIT_EDGE = common.CO_MOVING
"""Outline of a search's box, and its label."""
DETECTION = common.MEASUREMENT
"""A detection's marker."""
SHOULD_HAVE_BEEN_SEEN = common.DISCORDANT
"""Ring and label of a detection inside a search's box."""
UNKNOWN_LABEL = "Δm unknown (on the top edge)"
"""Key entry of detections without a magnitude difference."""
INSIDE_LABEL = "should have been seen (inside a search's limit)"
"""Key entry of detections inside a search's box."""
LIMIT_KEY_LABEL = "searched, none found (shade: would have been seen)"
"""Key entry of the shaded boxes."""

_SIZE_IN = (6.5, 4.0)
_LIMIT_ALPHA = 0.45
_RHO_FACTOR = 1.35
"""Room beyond the outermost separations on the log axis, as a factor."""
_DM_MIN_SPAN = 3.0
"""Least span of Δm shown, mag (a lone bright detection, or only unknown Δm, still reads as a contrast scale)."""
_DM_MARGIN = 0.07
"""Room beyond the extreme magnitude differences, as a fraction of their span..."""
_DM_MIN_MARGIN = 0.4
"""... but at least this many magnitudes."""
_MARKER_PT = 6.0
_UNKNOWN_PT = 7.5
_RING_PT = 12.0
_LABEL_GAP_PT = 4.0
_LABEL_SIZE_PT = 8.0
_LABEL_BOX = {"boxstyle": "square,pad=0.15", "facecolor": common.BACKGROUND, "alpha": 0.75, "edgecolor": "none"}
"""A pale backing, so that a box's outline crossing a label does not cut through its letters."""


@dataclass(frozen=True)
class Detection:
    """One claimed detection of a companion.

    Attributes
    ----------
    companion : str
        Component id of the companion, for example ``"B"``.
    method : str
        How it was seen, for example ``"speckle"``.
    epoch : str
        Epoch of the observation, as published (for example ``"2019.62"``).
    rho : float
        Separation from the primary, arcsec, positive.
    delta_mag : float or None
        Magnitude difference, companion minus primary, mag; ``None`` when
        not measured.
    band : str or None
        Photometric band of ``delta_mag``.
    ref : str
        Source id of the claim.
    """

    companion: str
    method: str
    epoch: str
    rho: float
    delta_mag: float | None
    band: str | None
    ref: str


@dataclass(frozen=True)
class SearchLimit:
    """The sensitivity of a search that found no companion.

    Attributes
    ----------
    method : str
        How the search was made, for example ``"adaptive optics"``.
    epoch : str
        Epoch of the search, as published.
    rho_min, rho_max : float
        Range of separations searched, arcsec, ``0 < rho_min < rho_max``.
    contrast : float
        Faintest magnitude difference that would have been detected over that
        range, mag, positive.
    band : str or None
        Photometric band of ``contrast``.
    ref : str
        Source id of the search.
    """

    method: str
    epoch: str
    rho_min: float
    rho_max: float
    contrast: float
    band: str | None
    ref: str


def limits_containing(detection: Detection, limits: Sequence[SearchLimit]) -> list[int]:
    """Indices of the searches whose box holds a detection: the searches that should have seen it.

    Parameters
    ----------
    detection : Detection
        The detection.
    limits : sequence of SearchLimit
        The searches that found nothing.

    Returns
    -------
    list of int
        Indices into ``limits`` with ``rho_min <= rho <= rho_max`` and
        ``delta_mag <= contrast`` (a companion brighter than the primary in
        that band, Δm < 0, would have been seen all the more); empty when
        ``delta_mag`` is unknown.
    """
    if detection.delta_mag is None:
        return []
    return [i for i, limit in enumerate(limits)
            if limit.rho_min <= detection.rho <= limit.rho_max and detection.delta_mag <= limit.contrast]


def shared_band(detections: Sequence[Detection], limits: Sequence[SearchLimit]) -> str | None:
    """The band every drawn magnitude difference is in, or ``None`` when they differ or one is not given."""
    bands = {d.band for d in detections if d.delta_mag is not None} | {limit.band for limit in limits}
    if len(bands) == 1:
        (band,) = bands
        return band
    return None


def limit_label(limit: SearchLimit, *, with_band: bool = False) -> str:
    """Label of a search's box: ``"method epoch (ref): Δm < 6.0"``, with ``" (K)"`` when asked and known."""
    text = f"{limit.method} {limit.epoch} ({limit.ref}): Δm < {_mag(limit.contrast)}"
    return f"{text} ({limit.band})" if with_band and limit.band else text


def detection_label(detection: Detection, *, with_band: bool = False) -> str:
    """Label of a detection: ``"B 2019.62"``; ``" (K)"`` when asked and known, ``" (Δm unknown)"`` without Δm."""
    text = f"{detection.companion} {detection.epoch}"
    if detection.delta_mag is None:
        return f"{text} (Δm unknown)"
    return f"{text} ({detection.band})" if with_band and detection.band else text


def detection_map(detections: Sequence[Detection], limits: Sequence[SearchLimit], *, title: str,
                  alt: str | None = None) -> str:
    """Draw separation against contrast for the companion claims of one system, as SVG text.

    Parameters
    ----------
    detections : sequence of Detection
        Claimed detections of companions (may be empty).
    limits : sequence of SearchLimit
        Searches that found nothing, with their sensitivity (may be empty).
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
        When there is nothing to draw or a separation, range or contrast is
        not a finite positive number.
    """
    fig = build_detection_map(detections, limits, title=title)
    return common.to_svg(fig, title=title, description=_describe(detections, limits), alt=alt)


def build_detection_map(detections: Sequence[Detection], limits: Sequence[SearchLimit], *, title: str) -> Figure:
    """Build the detection map as a matplotlib Figure (see :func:`detection_map`).

    Artists carry labels so that tests can read back what the chart shows:
    the box of ``limits[i]`` is a rectangle labelled ``"limit <i>"`` and its
    text ``"limit label <i>"``; the detections of one method with a Δm are
    a line of markers labelled ``"detections <method>"`` (input order), those
    inside a box a line of rings ``"should have been seen"``, those without
    Δm a line ``"delta mag unknown"`` on the top edge; the label of
    ``detections[j]`` is a text labelled ``"detection label <j>"``.
    """
    from matplotlib.patches import Rectangle
    from matplotlib.transforms import ScaledTranslation

    _check(detections, limits)
    band = shared_band(detections, limits)
    with_band = band is None
    methods = list(dict.fromkeys(d.method for d in detections if d.delta_mag is not None))
    inside = [bool(limits_containing(d, limits)) for d in detections]
    known = [d for d in detections if d.delta_mag is not None]
    unknown = [d for d in detections if d.delta_mag is None]

    with common.house_style():
        fig = common.new_figure(*_SIZE_IN)
        ax = fig.add_subplot()
        ax.grid(True, which="major")
        ax.set_xscale("log")
        (rho_low, rho_high), (dm_top, dm_bottom) = _limits(detections, limits)
        ax.set_xlim(rho_low, rho_high)
        ax.set_ylim(dm_bottom, dm_top)  # fainter (larger Δm) at the bottom: the axis is inverted
        log_ticks(ax.xaxis, rho_low, rho_high)

        for index, limit in enumerate(limits):
            ax.add_patch(Rectangle((limit.rho_min, 0.0), limit.rho_max - limit.rho_min, limit.contrast,
                                   facecolor=LIMIT_FILL, alpha=_LIMIT_ALPHA, edgecolor="none", zorder=1,
                                   label=f"limit {index}"))
            # The outline at full strength, apart from the fill's transparency.
            ax.add_patch(Rectangle((limit.rho_min, 0.0), limit.rho_max - limit.rho_min, limit.contrast,
                                   facecolor="none", edgecolor=LIMIT_EDGE, linewidth=1.0, zorder=1.5,
                                   label=f"limit outline {index}"))
        for method_index, method in enumerate(methods):
            mine = [d for d in known if d.method == method]
            ax.plot([d.rho for d in mine], [d.delta_mag for d in mine], linestyle="none",
                    marker=METHOD_MARKERS[method_index % len(METHOD_MARKERS)], markersize=_MARKER_PT,
                    color=DETECTION, markeredgecolor=common.BACKGROUND, markeredgewidth=0.6, zorder=5,
                    label=f"detections {method}")
        flagged = [d for d, flag in zip(detections, inside) if flag]
        if flagged:
            ax.plot([d.rho for d in flagged], [d.delta_mag for d in flagged], linestyle="none", marker="o",
                    markersize=_RING_PT, markerfacecolor="none", markeredgecolor=SHOULD_HAVE_BEEN_SEEN,
                    markeredgewidth=1.5, zorder=4.5, label="should have been seen")
        if unknown:
            # On the top edge, pointing down into the chart ("somewhere below"), moved down by half its
            # height so that it hangs from the edge inside the axes rather than into the title.
            hang = ScaledTranslation(0.0, -0.5 * _UNKNOWN_PT / 72.0, fig.dpi_scale_trans)
            ax.plot([d.rho for d in unknown], [dm_top] * len(unknown), linestyle="none", marker="v",
                    markersize=_UNKNOWN_PT, markerfacecolor=common.BACKGROUND, markeredgecolor=DETECTION,
                    markeredgewidth=1.3, clip_on=False, zorder=5, transform=ax.transData + hang,
                    label="delta mag unknown")

        ax.set_xlabel("separation ρ (″)")
        ax.set_ylabel(f"Δm (mag, {band} band), fainter down" if band else "Δm (mag), fainter down")
        title_text = ax.set_title(title)
        legend = _legend(fig, methods, bool(flagged), bool(unknown), bool(limits))
        common.arrange(fig, ax, title=title_text, legend=legend, legend_side="below")
        _place_labels(fig, ax, detections, limits, inside, with_band, dm_top)
    return fig


# --- checks and limits ---------------------------------------------------------


def _check(detections: Sequence[Detection], limits: Sequence[SearchLimit]) -> None:
    if not detections and not limits:
        raise ValueError("detection_map needs at least one detection or search limit. "
                         "Fix: pass the system's companion claims.")
    for index, d in enumerate(detections):
        if not (math.isfinite(d.rho) and d.rho > 0):
            raise ValueError(f"detection {index} ({d.companion} {d.epoch}) has separation {d.rho}. "
                             "Fix: give the separation in arcsec, > 0.")
        if d.delta_mag is not None and not math.isfinite(d.delta_mag):
            raise ValueError(f"detection {index} ({d.companion} {d.epoch}) has Δm {d.delta_mag}. "
                             "Fix: give the magnitude difference, or None if it was not measured.")
    for index, limit in enumerate(limits):
        name = f"search limit {index} ({limit.method} {limit.epoch})"
        if not (math.isfinite(limit.rho_min) and math.isfinite(limit.rho_max) and 0 < limit.rho_min < limit.rho_max):
            raise ValueError(f"{name} covers {limit.rho_min} to {limit.rho_max} arcsec. "
                             "Fix: give 0 < rho_min < rho_max, arcsec.")
        if not (math.isfinite(limit.contrast) and limit.contrast > 0):
            raise ValueError(f"{name} has contrast {limit.contrast}. "
                             "Fix: give the faintest Δm it would have detected, mag, > 0.")


def _limits(detections: Sequence[Detection], limits: Sequence[SearchLimit]) -> tuple[tuple[float, float],
                                                                                      tuple[float, float]]:
    """``(rho low, rho high)``, arcsec, and ``(Δm top, Δm bottom)``, mag, of the axes."""
    rhos = [d.rho for d in detections] + [x for limit in limits for x in (limit.rho_min, limit.rho_max)]
    low, high = min(rhos), max(rhos)
    if high / low < 2.0:  # a lone detection: half a decade or so around it
        centre = math.sqrt(low * high)
        low, high = centre / math.sqrt(2.0), centre * math.sqrt(2.0)
    mags = [0.0] + [d.delta_mag for d in detections if d.delta_mag is not None] + [limit.contrast for limit in limits]
    top, bottom = min(mags), max(mags)
    if bottom - top < _DM_MIN_SPAN:
        bottom = top + _DM_MIN_SPAN
    pad = max(_DM_MIN_MARGIN, _DM_MARGIN * (bottom - top))
    return (low / _RHO_FACTOR, high * _RHO_FACTOR), (top - pad, bottom + pad)


def _mag(value: float) -> str:
    """A magnitude with one decimal, two when the second is not zero: 6.0, 3.25."""
    text = f"{value:.2f}"
    return text[:-1] if text.endswith("0") else text


# --- labels -----------------------------------------------------------------------


def _place_labels(
    fig: Figure,
    ax: Axes,
    detections: Sequence[Detection],
    limits: Sequence[SearchLimit],
    inside: Sequence[bool],
    with_band: bool,
    dm_top: float,
) -> None:
    """Write every label where it overlaps no marker and no other label, inside the axes.

    Detections first, each beside its marker (right, left, above, below, by
    preference); then each box's label inside the box along its lower edge
    (left end, right end), stepping upward, and as a last resort just under
    the box. When no place is free, the first is taken.
    """
    renderer = common.text_renderer(fig)
    frame = ax.get_window_extent(renderer)
    points_px = fig.dpi / 72.0
    taken: list[Bbox] = []
    for d in detections:  # every marker is an obstacle for every label
        y = dm_top if d.delta_mag is None else d.delta_mag
        x_px, y_px = ax.transData.transform((d.rho, y))
        if d.delta_mag is None:  # hangs from the top edge (see build_detection_map)
            y_px -= 0.5 * _UNKNOWN_PT * points_px
        half = 0.5 * _RING_PT * points_px
        taken.append(_box(x_px - half, y_px - half, x_px + half, y_px + half))

    gap = _LABEL_GAP_PT + 0.5 * _RING_PT
    beside = [(gap, 0.0, "left", "center"), (-gap, 0.0, "right", "center"), (0.0, gap, "center", "bottom"),
              (0.0, -gap, "center", "top"), (gap, gap, "left", "bottom"), (gap, -gap, "left", "top"),
              (-gap, gap, "right", "bottom"), (-gap, -gap, "right", "top")]
    under_edge = [(gap, -gap, "left", "top"), (-gap, -gap, "right", "top"), (0.0, -gap - 4.0, "center", "top")]
    for index, d in enumerate(detections):
        colour = SHOULD_HAVE_BEEN_SEEN if inside[index] else common.INK
        text = ax.annotate(detection_label(d, with_band=with_band),
                           xy=(d.rho, dm_top if d.delta_mag is None else d.delta_mag),
                           xytext=(0.0, 0.0), textcoords="offset points", fontsize=_LABEL_SIZE_PT,
                           color=colour, zorder=6, bbox=_LABEL_BOX, label=f"detection label {index}")
        _settle(text, under_edge if d.delta_mag is None else beside, taken, frame, renderer)

    for index, limit in enumerate(limits):
        text = ax.annotate(limit_label(limit, with_band=with_band), xy=(limit.rho_min, limit.contrast),
                           xytext=(0.0, 0.0), textcoords="offset points", fontsize=_LABEL_SIZE_PT,
                           color=LIMIT_EDGE, zorder=6, bbox=_LABEL_BOX, label=f"limit label {index}")
        line_pt = text.get_window_extent(renderer).height / points_px + 2.0
        candidates = []
        for step in range(6):  # along the lower edge, then a line higher each time
            dy = 3.0 + step * line_pt
            candidates.append(((limit.rho_min, limit.contrast), (4.0, dy, "left", "bottom")))
            candidates.append(((limit.rho_max, limit.contrast), (-4.0, dy, "right", "bottom")))
        candidates.append(((limit.rho_min, limit.contrast), (4.0, -3.0, "left", "top")))
        _settle(text, candidates, taken, frame, renderer)


def _settle(
    text: Annotation,
    candidates: Sequence[object],
    taken: list[Bbox],
    frame: Bbox,
    renderer: RendererBase,
) -> None:
    """Move a label to its first free candidate place (or the first, if none is free) and take it.

    A candidate is ``(dx, dy, ha, va)`` in points from the label's anchor, or
    ``(anchor, (dx, dy, ha, va))`` with its own anchor in data coordinates.
    """
    text.set_in_layout(False)
    first = None
    for candidate in candidates:
        if len(candidate) == 2:
            anchor, (dx, dy, ha, va) = candidate
            text.xy = anchor
        else:
            dx, dy, ha, va = candidate
        text.set_position((dx, dy))
        text.set_horizontalalignment(ha)
        text.set_verticalalignment(va)
        extent = text.get_window_extent(renderer)
        first = first or (text.xy, (dx, dy), ha, va, extent)
        inside = (extent.x0 >= frame.x0 + 1 and extent.x1 <= frame.x1 - 1
                  and extent.y0 >= frame.y0 + 1 and extent.y1 <= frame.y1 - 1)
        if inside and not any(extent.overlaps(other) for other in taken):
            taken.append(extent)
            return
    anchor, offset, ha, va, extent = first
    text.xy = anchor
    text.set_position(offset)
    text.set_horizontalalignment(ha)
    text.set_verticalalignment(va)
    taken.append(extent)


def _box(x0: float, y0: float, x1: float, y1: float) -> Bbox:
    from matplotlib.transforms import Bbox

    return Bbox([[x0, y0], [x1, y1]])


# --- key ----------------------------------------------------------------------------


def _legend(fig: Figure, methods: Sequence[str], any_inside: bool, any_unknown: bool, any_limit: bool) -> Legend:
    from matplotlib.legend_handler import HandlerTuple
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    handles: list[object] = []
    texts: list[str] = []
    for index, method in enumerate(methods):
        handles.append(Line2D([], [], linestyle="none", marker=METHOD_MARKERS[index % len(METHOD_MARKERS)],
                              markersize=_MARKER_PT, color=DETECTION, markeredgecolor=common.BACKGROUND,
                              markeredgewidth=0.6))
        texts.append(f"detected: {method}")
    if any_inside:
        ring = Line2D([], [], linestyle="none", marker="o", markersize=_RING_PT, markerfacecolor="none",
                      markeredgecolor=SHOULD_HAVE_BEEN_SEEN, markeredgewidth=1.5)
        dot = Line2D([], [], linestyle="none", marker="o", markersize=_MARKER_PT, color=DETECTION,
                     markeredgecolor=common.BACKGROUND, markeredgewidth=0.6)
        handles.append((ring, dot))
        texts.append(INSIDE_LABEL)
    if any_unknown:
        handles.append(Line2D([], [], linestyle="none", marker="v", markersize=_UNKNOWN_PT,
                              markerfacecolor=common.BACKGROUND, markeredgecolor=DETECTION, markeredgewidth=1.3))
        texts.append(UNKNOWN_LABEL)
    if any_limit:
        handles.append(Patch(facecolor=LIMIT_FILL, alpha=_LIMIT_ALPHA, edgecolor=LIMIT_EDGE))
        texts.append(LIMIT_KEY_LABEL)
    ncols = 2 if len(handles) > 2 else len(handles)
    legend = fig.legend(handles, texts, loc="upper center", ncols=max(1, ncols), handlelength=2.0,
                        handletextpad=0.6, columnspacing=1.4, handler_map={tuple: HandlerTuple(ndivide=1)})
    room = fig.bbox.width - 2 * common.PAD_IN * fig.dpi
    if ncols > 1 and legend.get_window_extent(common.text_renderer(fig)).width > room:
        legend.remove()
        legend = fig.legend(handles, texts, loc="upper center", ncols=1, handlelength=2.0, handletextpad=0.6,
                            handler_map={tuple: HandlerTuple(ndivide=1)})
    return legend


def _describe(detections: Sequence[Detection], limits: Sequence[SearchLimit]) -> str:
    """Short text alternative of the chart, for screen readers."""
    parts = ["Separation (arcsec, log scale) against magnitude difference (fainter down)."]
    for d in detections:
        if d.delta_mag is None:
            dm = "Δm unknown"
        else:
            dm = f"Δm {_mag(d.delta_mag)}" + (f" in {d.band}" if d.band else "")
        seen_by = [limits[i] for i in limits_containing(d, limits)]
        note = ("; inside the limit of " + ", ".join(f"{s.method} {s.epoch} ({s.ref})" for s in seen_by)
                if seen_by else "")
        parts.append(f"Detection of {d.companion} by {d.method} at {d.epoch} ({d.ref}): ρ {d.rho:g}″, {dm}{note}.")
    for limit in limits:
        band = f" in {limit.band}" if limit.band else ""
        parts.append(f"No detection by {limit.method} at {limit.epoch} ({limit.ref}) between {limit.rho_min:g}″ "
                     f"and {limit.rho_max:g}″ down to Δm {_mag(limit.contrast)}{band}.")
    return " ".join(parts)
