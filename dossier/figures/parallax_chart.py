"""Parallax chart: every measured parallax of every component, and how they combine.

A forest plot with one panel per component, stacked from top to bottom:
each source is a point with its 1-sigma error bar on its own line, named by
its reference id (and epoch) on the left. The combined value is a vertical
line across the panel with a shaded 1-sigma band; when the error was
inflated for excess scatter, the inflated band is drawn lighter behind the
formal one, so both show. A source flagged as discordant gets an open red
diamond and the word "discordant" beside its name.

Each panel's x range is fitted to its own error bars and bands, so that a
background star far off in parallax does not squash the scatter between the
sources of the others. Components whose padded ranges overlap (the two stars
of a physical pair, say) are put in one group that shares a single x range,
so that their agreement, or not, shows at a glance: the group's range covers
every error bar and band of its members, padded on each side by
:data:`PAD_FRACTION` of its span, or by :data:`PAD_SIGMAS` times the smallest
error drawn if that is more (so that a lone measurement does not fill its
panel from edge to edge). Consecutive panels of one group sit close together
and only the lowest shows the tick labels; a new group starts after a gap,
with its own tick labels.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

from dossier.figures import common

if TYPE_CHECKING:  # pragma: no cover - typing only
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure
    from matplotlib.legend import Legend

_SLOT_IN = 0.26
"""Height of one line of the chart (a source or a component heading), inches."""
_JOIN_IN = 0.07
"""Space between two panels of one group (x range shared, no tick labels between), inches."""
_BREAK_IN = 0.16
"""Space between two groups, over the tick labels of the upper one, inches."""
_MIN_HEIGHT_IN = 2.6
_MAX_HEIGHT_IN = 9.0
PAD_FRACTION = 0.1
"""Padding of an x range on each side, as a fraction of its span..."""
PAD_SIGMAS = 0.5
"""... but at least this many times the smallest 1-sigma error drawn in it."""
_HEADING_ROOM = 0.6
"""Room over the heading line (y = 0) of a panel, in lines."""
_FOOT_ROOM = 0.5
"""Room under the last source of a panel, in lines."""


@dataclass(frozen=True)
class ParallaxSource:
    """One published parallax of one component.

    Attributes
    ----------
    ref : str
        Source id, as in ``references.yaml`` (for example ``"survey-2"``).
    parallax, error : float
        Parallax and its 1-sigma uncertainty, mas.
    epoch : str or None
        Reference epoch as written in the evidence (``"J2016.0"``), if any.
    """

    ref: str
    parallax: float
    error: float
    epoch: str | None


@dataclass(frozen=True)
class ParallaxRow:
    """All parallaxes of one component and their combination.

    Attributes
    ----------
    component : str
        Component id.
    sources : list of ParallaxSource
        Measurements, in the order to draw them (top to bottom).
    combined, combined_error : float or None
        Combined (weighted mean) parallax and its formal 1-sigma error, mas.
    inflated_error : float or None
        The error after inflation for excess scatter, mas; ``None`` or equal
        to ``combined_error`` when not inflated.
    discordant_ref : str or None
        Ref of the source flagged as discordant, if any.
    """

    component: str
    sources: list[ParallaxSource]
    combined: float | None
    combined_error: float | None
    inflated_error: float | None
    discordant_ref: str | None


def source_label(source: ParallaxSource, *, discordant: bool = False) -> str:
    """Return the text naming a source on the chart.

    Parameters
    ----------
    source : ParallaxSource
        The measurement.
    discordant : bool
        Whether it is the discordant one.

    Returns
    -------
    str
        For example ``"survey-1 (J1991.25) · discordant"``.
    """
    text = source.ref if source.epoch is None else f"{source.ref} ({source.epoch})"
    return f"{text} · discordant" if discordant else text


def parallax_chart(rows: list[ParallaxRow], *, title: str, alt: str | None = None) -> str:
    """Draw the parallax chart of one system as SVG text.

    Parameters
    ----------
    rows : list of ParallaxRow
        One per component, drawn top to bottom.
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
        When there are no rows, or a ``discordant_ref`` names no source of
        its row.
    """
    fig = build_parallax_chart(rows, title=title)
    return common.to_svg(fig, title=title, description=_describe(rows), alt=alt)


def build_parallax_chart(rows: Sequence[ParallaxRow], *, title: str) -> Figure:
    """Build the parallax chart as a matplotlib Figure (see :func:`parallax_chart`).

    ``fig.axes[i]`` is the panel of ``rows[i]``, labelled with the component
    id. In it each source is one errorbar container in ``ax.containers``
    labelled ``"<component> <ref>"``; the combined line is labelled
    ``"combined <component>"`` and the shaded bands ``"formal <component>"``
    and ``"inflated <component>"``, so that tests can read back the data.
    Panels of one group share their x axis (``ax.get_shared_x_axes()``).
    """
    _check(rows)
    groups = _x_groups(rows)
    joins = [groups[i] == groups[i + 1] for i in range(len(rows) - 1)]
    weights = [_HEADING_ROOM + max(1, len(row.sources)) + _FOOT_ROOM for row in rows]
    spans = _group_spans(rows, groups)

    with common.house_style():
        fig = common.new_figure(*common.DEFAULT_SIZE_IN)  # arrange_column sets the height
        seen = _Seen()
        axes: list[Axes] = []
        first_of_group: dict[int, Axes] = {}
        for index, row in enumerate(rows):
            ax = fig.add_subplot(label=row.component)
            axes.append(ax)
            group = groups[index]
            if group in first_of_group:
                ax.sharex(first_of_group[group])
            else:
                first_of_group[group] = ax
            _draw_panel(ax, row, seen)
            low, high = _padded(spans[group])
            ax.set_xlim(low, high)
            if low < 0.0 < high:
                ax.axvline(0.0, color=common.INK_MUTED, linewidth=0.8, zorder=0.5)
            if spans[group] is None:  # nothing to draw: an x scale would mean nothing
                ax.tick_params(axis="x", bottom=False, labelbottom=False)
            # No offset text ("+2.5e1"): the ticks carry the full parallax.
            ax.ticklabel_format(axis="x", useOffset=False)
            if index < len(joins) and joins[index]:
                # The panel below shares this x range and shows the tick labels.
                ax.tick_params(axis="x", bottom=False, labelbottom=False)

        axes[-1].set_xlabel("Parallax (mas)")
        title_text = axes[0].set_title(title)
        legend = _legend(fig, seen)
        common.arrange_column(fig, axes, weights=weights, title=title_text, legend=legend,
                              gaps_in=[_JOIN_IN if join else _BREAK_IN for join in joins],
                              unit_in=_SLOT_IN, min_height_in=_MIN_HEIGHT_IN, max_height_in=_MAX_HEIGHT_IN)
    return fig


def _x_groups(rows: Sequence[ParallaxRow]) -> list[int]:
    """Group the components whose padded x ranges overlap, to share one x range.

    Overlap is transitive here (if A overlaps B and B overlaps C, all three
    share one range). A component with nothing to draw joins the group of
    the panel above it (or below, for the first), so that it costs no room
    of its own.

    Parameters
    ----------
    rows : sequence of ParallaxRow
        The components, top to bottom.

    Returns
    -------
    list of int
        Group number of each row.
    """
    padded = {i: _padded(span) for i, row in enumerate(rows) if (span := _span(row)) is not None}
    found: dict[int, int] = {}
    reach, count = -math.inf, -1
    for i in sorted(padded, key=lambda i: padded[i][0]):  # sweep along x: a gap starts a new group
        low, high = padded[i]
        if low > reach:
            count += 1
        found[i] = count
        reach = max(reach, high)
    groups: list[int | None] = []
    for i in range(len(rows)):
        groups.append(found.get(i, groups[-1] if groups else None))
    first = next((g for g in groups if g is not None), 0)
    return [first if g is None else g for g in groups]


_NO_DATA = (0.0, 1.0)
"""x range of a group with nothing to draw."""


@dataclass(frozen=True)
class _Span:
    """The x extent of some error bars and bands, and the smallest error among them, mas."""

    low: float
    high: float
    sigma: float

    def union(self, other: _Span | None) -> _Span:
        if other is None:
            return self
        return _Span(min(self.low, other.low), max(self.high, other.high), min(self.sigma, other.sigma))


def _span(row: ParallaxRow) -> _Span | None:
    """The x extent of a row's error bars and bands; ``None`` if it has none."""
    drawn = [(s.parallax, s.error) for s in row.sources]
    if row.combined is not None:
        drawn += [(row.combined, e) for e in (row.combined_error, row.inflated_error) if e is not None]
        if row.combined_error is None and row.inflated_error is None:
            drawn.append((row.combined, 0.0))
    if not drawn:
        return None
    return _Span(min(v - e for v, e in drawn), max(v + e for v, e in drawn), min(e for _, e in drawn))


def _padded(span: _Span | None) -> tuple[float, float]:
    """An x range about a span, padded on each side, mas.

    The margin is :data:`PAD_FRACTION` of the span or :data:`PAD_SIGMAS`
    times its smallest error, whichever is more; a range of zero width (a
    single value without an error) gets 10% of the value, and at least
    0.1 mas, on each side.
    """
    if span is None:
        return _NO_DATA
    low, high = span.low, span.high
    margin = max(PAD_FRACTION * (high - low), PAD_SIGMAS * span.sigma)
    if margin <= 0.0:
        margin = max(0.1, 0.1 * abs(high))
    return low - margin, high + margin


def _group_spans(rows: Sequence[ParallaxRow], groups: Sequence[int]) -> dict[int, _Span | None]:
    """The union of the spans of each group's members."""
    spans: dict[int, _Span | None] = {}
    for row, group in zip(rows, groups):
        span, known = _span(row), spans.get(group)
        spans[group] = span.union(known) if span is not None else known
    return spans


def _draw_panel(ax: Axes, row: ParallaxRow, seen: _Seen) -> None:
    """One component: its heading (y = 0), its sources (y = 1, 2, ...), its combined value."""
    ax.grid(True, axis="x")
    last = max(1, len(row.sources))
    _draw_combined(ax, row, 1.0 - 0.45, last + 0.45, seen)
    ticks: list[float] = []
    labels: list[str] = []
    flagged: list[int] = []
    for offset, source in enumerate(row.sources):
        discordant = source.ref == row.discordant_ref
        _draw_source(ax, row.component, source, 1.0 + offset, discordant, seen)
        ticks.append(1.0 + offset)
        labels.append(source_label(source, discordant=discordant))
        if discordant:
            flagged.append(offset)
    if not row.sources:
        ax.text(0.5, 1.0, "no parallax measured", transform=ax.get_yaxis_transform(),
                ha="center", va="center", fontsize=8.5, color=common.INK_MUTED, style="italic")
    name = ax.text(0.01, 0.0, row.component, transform=ax.get_yaxis_transform(), ha="left",
                   va="center_baseline", fontsize=9.5, fontweight="bold", color=common.INK)
    summary = _summary(row)
    if summary:
        ax.annotate(summary, xy=(1.0, 0.0), xycoords=name, xytext=(6, 0), textcoords="offset points",
                    ha="left", va="bottom", fontsize=9, color=common.INK)
    ax.set_ylim(last + _FOOT_ROOM, -_HEADING_ROOM)  # heading at the top
    ax.set_yticks(ticks, labels)
    ax.tick_params(axis="y", length=0)
    for position in flagged:
        ax.get_yticklabels()[position].set_color(common.DISCORDANT)


class _Seen:
    """Which kinds of mark the chart holds, for the key."""

    def __init__(self) -> None:
        self.measurement = False
        self.discordant = False
        self.combined = False
        self.formal = False
        self.inflated = False


def _check(rows: Sequence[ParallaxRow]) -> None:
    if not rows:
        raise ValueError("parallax_chart needs at least one component. Fix: pass one ParallaxRow per component.")
    for row in rows:
        refs = [s.ref for s in row.sources]
        if row.discordant_ref is not None and row.discordant_ref not in refs:
            raise ValueError(
                f"component {row.component!r}: discordant_ref {row.discordant_ref!r} is not one of its sources. "
                f"Did you mean one of: {', '.join(refs) or '(no sources)'}?"
            )


def _summary(row: ParallaxRow) -> str:
    """The combined value of a component, as written beside its id ('' if none)."""
    if row.combined is None:
        return ""
    if row.combined_error is None:
        return f"combined {common.format_number(row.combined)} mas"
    value, error = common.format_with_error(row.combined, row.combined_error)
    text = f"combined {value} ± {error} mas"
    if _inflated(row) and row.inflated_error is not None:
        _, inflated = common.format_with_error(row.combined, row.inflated_error)
        text += f", inflated ± {inflated} mas"
    return text


def _inflated(row: ParallaxRow) -> bool:
    """Whether the row has an inflated error that differs from the formal one."""
    if row.inflated_error is None:
        return False
    return row.combined_error is None or not math.isclose(row.inflated_error, row.combined_error, rel_tol=1e-9)


def _draw_combined(ax: Axes, row: ParallaxRow, top: float, bottom: float, seen: _Seen) -> None:
    if row.combined is None:
        return
    c = row.combined
    if _inflated(row):
        inflated = row.inflated_error
        band = ax.fill_betweenx([top, bottom], c - inflated, c + inflated,  # type: ignore[operator]
                                color=common.INFLATED_BAND, linewidth=0, zorder=1)
        band.set_label(f"inflated {row.component}")
        seen.inflated = True
    if row.combined_error is not None:
        band = ax.fill_betweenx([top, bottom], c - row.combined_error, c + row.combined_error,
                                color=common.UNCERTAINTY_BAND, linewidth=0, zorder=1.1)
        band.set_label(f"formal {row.component}")
        seen.formal = True
    line = ax.vlines(c, top, bottom, colors=common.COMBINED, linewidth=1.6, zorder=2)
    line.set_label(f"combined {row.component}")
    seen.combined = True


def _draw_source(ax: Axes, component: str, source: ParallaxSource, slot: float, discordant: bool, seen: _Seen) -> None:
    if discordant:
        style = {"fmt": "D", "markersize": 6.5, "markerfacecolor": common.BACKGROUND,
                 "markeredgecolor": common.DISCORDANT, "markeredgewidth": 1.5, "ecolor": common.DISCORDANT,
                 "color": common.DISCORDANT}
        seen.discordant = True
    else:
        style = {"fmt": "o", "markersize": 5.5, "markerfacecolor": common.MEASUREMENT,
                 "markeredgecolor": common.BACKGROUND, "markeredgewidth": 0.8, "ecolor": common.MEASUREMENT,
                 "color": common.MEASUREMENT}
        seen.measurement = True
    ax.errorbar([source.parallax], [slot], xerr=[source.error], elinewidth=1.3, capsize=2.5, capthick=1.3,
                zorder=3, label=f"{component} {source.ref}", **style)


def _legend(fig: Figure, seen: _Seen) -> Legend | None:
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    handles: list[object] = []
    texts: list[str] = []
    if seen.measurement:
        handles.append(Line2D([], [], color=common.MEASUREMENT, marker="o", markersize=5.5,
                              markeredgecolor=common.BACKGROUND, linewidth=1.3))
        texts.append("measured ± 1σ")
    if seen.discordant:
        handles.append(Line2D([], [], color=common.DISCORDANT, marker="D", markersize=6,
                              markerfacecolor=common.BACKGROUND, markeredgewidth=1.5, linewidth=1.3))
        texts.append("discordant")
    if seen.combined:
        handles.append(Line2D([], [], color=common.COMBINED, linewidth=1.6))
        texts.append("combined")
    if seen.formal:
        handles.append(Patch(color=common.UNCERTAINTY_BAND, linewidth=0))
        texts.append("formal ± 1σ")
    if seen.inflated:
        handles.append(Patch(color=common.INFLATED_BAND, linewidth=0))
        texts.append("inflated ± 1σ")
    if not handles:
        return None
    # One row if it fits the width of the figure, else as few rows as fit.
    renderer = common.text_renderer(fig)
    room = fig.bbox.width - 2 * common.PAD_IN * fig.dpi
    for ncols in range(len(handles), 0, -1):
        legend = fig.legend(handles, texts, loc="upper center", ncols=ncols, handlelength=1.8, handletextpad=0.5,
                            columnspacing=1.1)
        if ncols == 1 or legend.get_window_extent(renderer).width <= room:
            return legend
        legend.remove()
    return None  # pragma: no cover - the loop always returns


def _describe(rows: Sequence[ParallaxRow]) -> str:
    """Short text alternative of the chart, for screen readers."""
    parts = []
    for row in rows:
        measured = "; ".join(
            f"{source_label(s, discordant=s.ref == row.discordant_ref)}: "
            f"{' ± '.join(common.format_with_error(s.parallax, s.error))} mas"
            for s in row.sources
        )
        summary = _summary(row)
        parts.append(f"{row.component}{': ' + summary if summary else ''}. {measured or 'No parallax measured'}.")
    return " ".join(parts)
