"""Parallax chart: every measured parallax of every component, and how they combine.

A forest plot, one band per component from top to bottom: each source is a
point with its 1-sigma error bar on its own line, named by its reference id
(and epoch) on the left. The combined value is a vertical line across the
component's band with a shaded 1-sigma band; when the error was inflated
for excess scatter, the inflated band is drawn lighter behind the formal
one, so both show. A source flagged as discordant gets an open red diamond
and the word "discordant" beside its name.
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
_FRAME_IN = 1.45
"""Height taken by title, x axis and key, inches."""
_MIN_HEIGHT_IN = 2.6
_MAX_HEIGHT_IN = 9.0


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


def parallax_chart(rows: list[ParallaxRow], *, title: str) -> str:
    """Draw the parallax chart of one system as SVG text.

    Parameters
    ----------
    rows : list of ParallaxRow
        One per component, drawn top to bottom.
    title : str
        Title over the chart and accessible name of the SVG.

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
    return common.to_svg(fig, title=title, description=_describe(rows))


def build_parallax_chart(rows: Sequence[ParallaxRow], *, title: str) -> Figure:
    """Build the parallax chart as a matplotlib Figure (see :func:`parallax_chart`).

    Each source is one errorbar container in ``ax.containers`` labelled
    ``"<component> <ref>"``; the combined lines are labelled
    ``"combined <component>"`` and the shaded bands ``"formal <component>"``
    and ``"inflated <component>"``, so that tests can read back the data.
    """
    _check(rows)
    slots = sum(1 + max(1, len(row.sources)) for row in rows)
    height = min(_MAX_HEIGHT_IN, max(_MIN_HEIGHT_IN, _FRAME_IN + _SLOT_IN * slots))

    with common.house_style():
        fig = common.new_figure(common.DEFAULT_SIZE_IN[0], height)
        ax = fig.add_subplot()
        ax.grid(True, axis="x")
        ticks: list[float] = []
        tick_labels: list[str] = []
        flagged: list[int] = []
        seen = _Seen()
        y = 0.0
        for index, row in enumerate(rows):
            heading = y
            first, last = y + 1.0, y + max(1, len(row.sources))
            if index % 2 == 1:
                ax.axhspan(heading - 0.5, last + 0.5, color=common.BAND_BACKGROUND, zorder=0, linewidth=0)
            _draw_combined(ax, row, first - 0.45, last + 0.45, seen)
            for offset, source in enumerate(row.sources):
                slot = first + offset
                discordant = source.ref == row.discordant_ref
                _draw_source(ax, row.component, source, slot, discordant, seen)
                ticks.append(slot)
                tick_labels.append(source_label(source, discordant=discordant))
                if discordant:
                    flagged.append(len(ticks) - 1)
            if not row.sources:
                ax.text(0.5, first, "no parallax measured", transform=ax.get_yaxis_transform(),
                        ha="center", va="center", fontsize=8.5, color=common.INK_MUTED, style="italic")
            name = ax.text(0.01, heading, row.component, transform=ax.get_yaxis_transform(), ha="left",
                           va="center_baseline", fontsize=9.5, fontweight="bold", color=common.INK)
            summary = _summary(row)
            if summary:
                ax.annotate(summary, xy=(1.0, 0.0), xycoords=name, xytext=(6, 0), textcoords="offset points",
                            ha="left", va="bottom", fontsize=9, color=common.INK)
            y = last + 1.0

        ax.set_ylim(y - 0.5, -0.6)  # first component at the top
        ax.set_yticks(ticks, tick_labels)
        ax.tick_params(axis="y", length=0)
        for position in flagged:
            ax.get_yticklabels()[position].set_color(common.DISCORDANT)
        _set_xlimits(ax, rows)
        ax.set_xlabel("Parallax (mas)")
        title_text = ax.set_title(title)
        legend = _legend(fig, seen)
        common.arrange(fig, ax, title=title_text, legend=legend, legend_side="below")
    return fig


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


def _set_xlimits(ax: Axes, rows: Sequence[ParallaxRow]) -> None:
    """Limits about every error bar and band, with a margin; a zero line if it falls inside."""
    low, high = math.inf, -math.inf
    for row in rows:
        for s in row.sources:
            low, high = min(low, s.parallax - s.error), max(high, s.parallax + s.error)
        if row.combined is not None:
            half = max(row.combined_error or 0.0, row.inflated_error or 0.0)
            low, high = min(low, row.combined - half), max(high, row.combined + half)
    if not math.isfinite(low):
        ax.set_xlim(0.0, 1.0)
        return
    margin = 0.08 * (high - low) if high > low else max(0.1, 0.1 * abs(high))
    ax.set_xlim(low - margin, high + margin)
    if low - margin < 0.0 < high + margin:
        ax.axvline(0.0, color=common.INK_MUTED, linewidth=0.8, zorder=0.5)


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
