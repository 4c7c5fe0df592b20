"""Reliability diagram: predicted probability against how often it came true.

Two panels share the x axis (predicted probability, 0 to 1). The upper one
holds the diagonal of perfect calibration (dashed) and, for each bin of
predicted probability that holds pairs, a point at the bin's mean predicted
probability and its observed frequency, with the 68 % binomial interval of
that frequency as a vertical error bar (the interval the report states; see
:func:`dossier.reliability.reliability_bins`). A point above the diagonal
means the event happened more often than predicted; below, less often. The
lower panel is a histogram of the number of pairs in each bin, on a
logarithmic scale when the counts span more than :data:`LOG_COUNTS_ABOVE`
(a screened population piles up near 0 and 1, so a linear scale would hide
the middle bins).

The chart draws what the report holds and computes nothing new; its text
alternative (:func:`reliability_alt`) is written from the same numbers.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

from dossier.figures import common
from dossier.figures.alt import plain
from dossier.fmt import fmt_number

if TYPE_CHECKING:  # pragma: no cover - typing only
    from matplotlib.figure import Figure

LOG_COUNTS_ABOVE = 30.0
"""Largest to smallest non-empty bin count beyond which the histogram uses a logarithmic scale."""
WIDTH_IN = 5.2
"""Width of the figure, inches (the diagram is nearly square)."""
_UNIT_IN = 0.9
"""Height of one unit of panel weight, inches."""
_WEIGHTS = (4.0, 1.2)
"""Heights of the diagram and of the histogram, in units."""
_GAP_IN = 0.1
"""Space between the two panels, inches (besides what the tick labels take)."""
_MARGIN = 0.02
"""Room around [0, 1] on both axes of the diagram."""
HISTOGRAM = "#b9cde3"
"""Fill of the count bars: a light tint of the companion blue, so the points stay in front."""


@dataclass(frozen=True)
class ReliabilityPoints:
    """The bins of one reliability diagram, as the report lists them.

    Attributes
    ----------
    edges : sequence of float
        Bin edges on [0, 1], one more than the bins.
    count : sequence of int
        Pairs in each bin.
    mean_predicted : sequence of float or None
        Mean predicted probability in each bin (None for an empty bin).
    observed : sequence of float or None
        Fraction of the bin's pairs for which the event is true (None when empty).
    low, high : sequence of float or None
        The 68 % binomial interval of ``observed`` (None when empty).
    """

    edges: Sequence[float]
    count: Sequence[int]
    mean_predicted: Sequence[float | None]
    observed: Sequence[float | None]
    low: Sequence[float | None]
    high: Sequence[float | None]

    def __post_init__(self) -> None:
        n = len(self.count)
        if len(self.edges) != n + 1 or any(len(s) != n for s in (self.mean_predicted, self.observed,
                                                                   self.low, self.high)):
            raise ValueError(f"reliability bins of unequal lengths ({len(self.edges)} edges, {n} counts). "
                             "Fix: pass one edge more than bins and one value per bin in every list.")

    @classmethod
    def from_report(cls, bins: dict) -> ReliabilityPoints:
        """The points from a ``bins`` block of the calibration report (:func:`dossier.reliability.report`)."""
        return cls(bins["edges"], bins["count"], bins["mean_predicted"], bins["observed_frequency"],
                   bins["interval_low"], bins["interval_high"])

    def occupied(self) -> list[int]:
        """Indices of the bins that hold pairs."""
        return [i for i, n in enumerate(self.count) if n > 0 and self.mean_predicted[i] is not None
                and self.observed[i] is not None]


def reliability_chart(points: ReliabilityPoints, *, title: str, alt: str | None = None) -> str:
    """Draw a reliability diagram as SVG text.

    Parameters
    ----------
    points : ReliabilityPoints
        The bins to draw.
    title : str
        Title over the chart, and accessible name of the SVG when ``alt`` is not given.
    alt : str, optional
        Short text alternative (see :func:`reliability_alt`), written as the
        SVG's ``aria-label`` and ``<title>``.

    Returns
    -------
    str
        Deterministic SVG, ready to inline in HTML or to save as a file.
    """
    fig = build_reliability_chart(points, title=title)
    return common.to_svg(fig, title=title, alt=alt)


def build_reliability_chart(points: ReliabilityPoints, *, title: str) -> Figure:
    """Build the reliability diagram as a matplotlib Figure (see :func:`reliability_chart`).

    ``fig.axes[0]`` is the diagram: the diagonal is the line labelled
    ``"diagonal"`` and the bins the errorbar container labelled
    ``"observed"`` (x the mean predicted probabilities, y the observed
    frequencies of the occupied bins, in bin order). ``fig.axes[1]`` is the
    histogram, whose bar container is labelled ``"count"`` (one bar per bin,
    empty ones of height zero), so that tests can read back the data.
    """
    import numpy as np

    used = points.occupied()
    x = np.array([points.mean_predicted[i] for i in used], dtype=float)
    y = np.array([points.observed[i] for i in used], dtype=float)
    low = np.array([_or(points.low[i], points.observed[i]) for i in used], dtype=float)
    high = np.array([_or(points.high[i], points.observed[i]) for i in used], dtype=float)
    edges = np.asarray(points.edges, dtype=float)
    counts = np.asarray(points.count, dtype=float)

    with common.house_style():
        fig = common.new_figure(WIDTH_IN, sum(_WEIGHTS) * _UNIT_IN)
        ax = fig.add_subplot(label="diagram")
        hist = fig.add_subplot(label="counts", sharex=ax)

        ax.grid(True)
        ax.plot([0.0, 1.0], [0.0, 1.0], color=common.INK_MUTED, linestyle=(0, (4, 3)), linewidth=1.0,
                label="diagonal", zorder=1)
        yerr = np.clip(np.vstack([y - low, high - y]), 0.0, None) if used else None
        container = ax.errorbar(x, y, yerr=yerr, fmt="o",
                                color=common.MEASUREMENT, markersize=4.5, markeredgewidth=0.0, elinewidth=1.1,
                                capsize=2.5, capthick=1.0, label="observed", zorder=3)
        container.set_label("observed")
        ax.set_xlim(-_MARGIN, 1.0 + _MARGIN)
        ax.set_ylim(-_MARGIN, 1.0 + _MARGIN)
        ax.set_ylabel("Observed frequency")
        ax.tick_params(axis="x", labelbottom=False)
        if not used:
            ax.text(0.5, 0.5, "no pairs", transform=ax.transAxes, ha="center", va="center",
                    color=common.INK_MUTED, style="italic")

        bars = hist.bar(edges[:-1], counts, width=np.diff(edges), align="edge", color=HISTOGRAM,
                        edgecolor=common.COMPANION, linewidth=0.6, label="count")
        bars.set_label("count")
        nonzero = counts[counts > 0]
        if nonzero.size and nonzero.max() / nonzero.min() > LOG_COUNTS_ABOVE:
            from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

            hist.set_yscale("log")
            hist.set_ylim(0.5, nonzero.max() * 2.0)
            # Plain numbers, not the default mathtext labels (the house style parses no math).
            hist.yaxis.set_major_locator(LogLocator(base=10.0, numticks=4))
            hist.yaxis.set_major_formatter(FuncFormatter(lambda v, _: _count_label(v)))
            hist.yaxis.set_minor_formatter(NullFormatter())
            hist.set_ylabel("Pairs (log)")
        else:
            hist.set_ylim(0.0, max(1.0, float(nonzero.max()) if nonzero.size else 1.0) * 1.1)
            hist.set_ylabel("Pairs")
        hist.grid(True, axis="y")
        hist.set_xlabel("Predicted probability")

        title_text = ax.set_title(title)
        legend = fig.legend(handles=[ax.lines[0], container],
                            labels=["perfect calibration", "bins: observed frequency, 68 % interval"],
                            ncols=2)
        common.arrange_column(fig, [ax, hist], weights=list(_WEIGHTS), gaps_in=[_GAP_IN], title=title_text,
                              legend=legend, unit_in=_UNIT_IN)
    return fig


def _count_label(value: float) -> str:
    """A power of ten as the histogram labels it: 1, 10, 100, 1000, 10⁴, 10⁵ ..."""
    if value <= 0:
        return ""
    exponent = round(math.log10(value))
    if exponent < 4:
        return f"{value:.0f}"
    return "10" + str(exponent).translate(str.maketrans("0123456789-", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻"))


def _or(value: float | None, fallback: float | None) -> float:
    return float(fallback if value is None else value)


def reliability_alt(points: ReliabilityPoints, *, subject: str, ece: float | None = None,
                    ece_error: float | None = None) -> str:
    """Text alternative of a reliability diagram, written from its bins.

    Says how many pairs and bins it shows, in how many occupied bins the
    diagonal lies within the 68 % interval, where the largest departure is
    and in which direction (in words: "more often" or "less often than
    predicted"), where most pairs lie, and the ECE when given.

    Parameters
    ----------
    points : ReliabilityPoints
        The bins drawn.
    subject : str
        What the probability is, for example ``"P(physical)"``.
    ece, ece_error : float, optional
        The expected calibration error and its bootstrap standard error.

    Returns
    -------
    str
        One line of plain text.
    """
    used = points.occupied()
    total = int(sum(points.count))
    head = (f"Reliability diagram of {subject}: observed frequency against predicted probability for "
            f"{total} pair{'' if total == 1 else 's'} in {len(points.count)} equal bins")
    if not used:
        return plain(head + "; no bin holds a pair.")
    inside = [i for i in used if _within(points, i)]
    text = (f"{head}, {len(used)} of them occupied. The diagonal of perfect calibration lies within the 68 % "
            f"interval in {len(inside)} of the {len(used)} occupied bins.")
    worst = max(used, key=lambda i: (abs(points.observed[i] - points.mean_predicted[i]), -i))
    gap = points.observed[worst] - points.mean_predicted[worst]
    if gap != 0.0:
        word = "more" if gap > 0 else "less"
        text += (f" The largest departure is in the bin from {_edge(points.edges[worst])} to "
                 f"{_edge(points.edges[worst + 1])} ({points.count[worst]} pairs): the event came true "
                 f"{word} often than predicted, {fmt_number(points.observed[worst], 2)} against "
                 f"{fmt_number(points.mean_predicted[worst], 2)}.")
    crowded = sorted(used, key=lambda i: (-points.count[i], i))[:2]
    share = sum(points.count[i] for i in crowded) / total
    if len(used) > 2 and share >= 0.5:
        ranges = " and ".join(f"{_edge(points.edges[i])}–{_edge(points.edges[i + 1])}" for i in sorted(crowded))
        text += f" {round(100 * share)} % of the pairs fall in the bins {ranges}."
    if ece is not None and math.isfinite(ece):
        text += f" Expected calibration error {fmt_number(ece, 2)}"
        text += f" ± {fmt_number(ece_error, 1)}." if ece_error is not None and math.isfinite(ece_error) else "."
    return plain(text)


def _within(points: ReliabilityPoints, i: int) -> bool:
    low = _or(points.low[i], points.observed[i])
    high = _or(points.high[i], points.observed[i])
    return low <= points.mean_predicted[i] <= high


def _edge(value: float) -> str:
    return f"{value:.2f}".rstrip("0").rstrip(".") if value not in (0.0, 1.0) else f"{value:.0f}"
