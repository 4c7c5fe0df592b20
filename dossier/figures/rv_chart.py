"""Radial-velocity charts: one star's velocities against time and orbital phase, and a periodogram.

The velocity chart stacks its panels top to bottom. The first shows the
radial velocities (km/s) against time with their 1-sigma error bars, one
marker and colour per source (an instrument, a reference, or both), and the
model curve. Under it, the residuals, observed minus computed (O−C), against
the same time axis. When the model has a period, two more panels follow: the
same velocities folded on that period, phase 0 at the model's time ``T`` (the
periastron passage of a spectroscopic orbit, common practice for plots of
spectroscopic orbits), with the model over one cycle, and their residuals
against phase. Without a model there is only the time panel.

The model is interpolated linearly at the measure times, as on the motion
chart (its samples should be dense enough for that to be exact to well within
the errors, closest near periastron, where an eccentric orbit turns fastest),
and a residual is left out where a measure falls outside the model's time span
rather than extrapolated. The folded model is the whole model folded on its
period: for a strictly periodic model every cycle lies on the same curve.

Times are days, on whatever scale ``time_label`` names (JD − 2400000 by
default); the period is in the same days. The two velocity panels share one
velocity scale and the two residual panels another, so that a point reads the
same in both.

The periodogram draws power against trial period on a logarithmic period axis
(periods spanning decades read evenly, common practice for period searches),
the best period marked by a dashed line and labelled with its value and its
false-alarm probability.
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
    from matplotlib.container import ErrorbarContainer
    from matplotlib.figure import Figure
    from matplotlib.legend import Legend

SOURCE_MARKERS = ("o", "s", "^", "D", "v", "P")
"""Marker of each source of velocities, in order of first appearance (then repeated)."""
SOURCE_COLOURS = (common.PRIMARY, common.MOTION, common.CO_MOVING, common.UNDETERMINED, common.COMPANION,
                  common.OPTICAL)
"""Colour of each source, in the same order: marker and colour both change, so sources part in greyscale."""
MODEL_COLOUR = common.INK
"""The model curve, and the zero line of a residual panel."""
NO_SOURCE = "source not given"
"""Key entry of velocities with neither an instrument nor a reference."""

_PANEL_IN = 1.7
"""Height of a velocity panel, inches."""
_RESIDUAL_IN = 0.75
"""Height of a residual panel, inches."""
_TIGHT_GAP_IN = 0.04
"""Space between a panel and its residual panel, inches (besides what the tick labels take)."""
_GROUP_GAP_IN = 0.22
"""Space between the time group and the phase group, inches (besides what the tick labels take)."""
_PERIODOGRAM_SIZE_IN = (6.5, 3.0)
_MARGIN = 0.08
"""Space around the data inside a panel, as a fraction of the span."""
_PHASE_MARGIN = 0.02
"""Space either side of phases 0 and 1, in phase."""
_HEADROOM = 0.22
"""Room above the highest peak of a periodogram for the best period's label, as a fraction of the peak."""
_FINE_DECADES = 3.0
"""Widest span of a log axis, in decades, that still gets ticks at 1, 2 and 5 times each power of ten."""
_ERROR_KW = {"elinewidth": 1.0, "capsize": 2.0, "capthick": 1.0}


@dataclass(frozen=True)
class RVPoint:
    """One radial velocity of the star.

    Attributes
    ----------
    t : float
        Time of the observation, days, on the scale of the chart's ``time_label``.
    v : float
        Radial velocity, km/s.
    sigma : float
        Its 1-sigma uncertainty, km/s; NaN draws no error bar.
    instrument : str or None
        Spectrograph (or survey) that measured it.
    ref : str or None
        Source id of the publication or data set.
    """

    t: float
    v: float
    sigma: float
    instrument: str | None
    ref: str | None


@dataclass(frozen=True)
class RVModel:
    """A model of the velocity, sampled densely in time.

    Attributes
    ----------
    t : sequence of float
        Times, days, same scale as the points (any order).
    v : sequence of float
        Model velocity at those times, km/s.
    label : str
        Name in the key, for example ``"orbit fit"``.
    period : float or None
        Period, days; with ``T``, the chart adds the phase-folded panels.
    T : float or None
        Time of phase 0, days (for an orbit, the periastron passage).
    """

    t: Sequence[float]
    v: Sequence[float]
    label: str
    period: float | None
    T: float | None


def source_label(point: RVPoint) -> str:
    """Name of a point's source in the key: ``"instrument (ref)"``, either alone, or :data:`NO_SOURCE`."""
    if point.instrument and point.ref:
        return f"{point.instrument} ({point.ref})"
    return point.instrument or point.ref or NO_SOURCE


def phase_of(t: Sequence[float] | np.ndarray, period: float, T: float) -> np.ndarray:
    """Orbital phase of each time: the fraction of a period since the last time of phase 0.

    Parameters
    ----------
    t : array_like
        Times, days.
    period : float
        Period, days, positive.
    T : float
        A time of phase 0, days.

    Returns
    -------
    numpy.ndarray
        Phases in [0, 1). (``numpy.mod`` of a tiny negative number can round
        to exactly 1.0; such a phase is 0.)
    """
    phase = np.mod((np.asarray(t, dtype=float) - T) / period, 1.0)
    return np.where(phase >= 1.0, 0.0, phase)


def observed_minus_computed(t: Sequence[float], v: Sequence[float], model: RVModel) -> np.ndarray:
    """Velocity residuals against a model, interpolated linearly at the measure times.

    Parameters
    ----------
    t, v : sequence of float
        Times (days) and velocities (km/s) of the measures.
    model : RVModel
        The model.

    Returns
    -------
    numpy.ndarray
        O−C, km/s, in the order of ``t``; NaN where ``t`` lies outside the
        model's time span.
    """
    mt, mv = _sorted_model(model)
    tt = np.asarray(t, dtype=float)
    inside = (tt >= mt[0]) & (tt <= mt[-1])
    return np.where(inside, np.asarray(v, dtype=float) - np.interp(tt, mt, mv), np.nan)


# --- velocity chart -----------------------------------------------------------------------


def rv_chart(
    points: Sequence[RVPoint],
    model: RVModel | None,
    *,
    title: str,
    time_label: str = "JD − 2400000",
    alt: str | None = None,
) -> str:
    """Draw the radial velocities of one star against time (and phase), with residuals, as SVG text.

    Parameters
    ----------
    points : sequence of RVPoint
        The velocities, any order.
    model : RVModel or None
        The model to draw and to compute residuals against; ``None`` draws
        the time panel only.
    title : str
        Title over the chart and accessible name of the SVG.
    time_label : str
        Label of the time axis, naming the scale of the times (days).
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
        When there are no points, a value is not finite, an error is
        negative, or the model is malformed.
    """
    fig = build_rv_chart(points, model, title=title, time_label=time_label)
    return common.to_svg(fig, title=title, description=_describe(points, model), alt=alt)


def build_rv_chart(
    points: Sequence[RVPoint],
    model: RVModel | None,
    *,
    title: str,
    time_label: str = "JD − 2400000",
) -> Figure:
    """Build the velocity chart as a matplotlib Figure (see :func:`rv_chart`).

    The axes are, in order, ``"velocity"``, ``"velocity residual"``,
    ``"phase"``, ``"phase residual"`` (the last two only when the model has
    a period, the residual panels only with a model). In each panel the
    points of one source are an errorbar container labelled
    ``"points <source>"`` (see :func:`source_label`), in time order; the
    model is a line labelled ``"model"`` (folded and sorted by phase in the
    phase panel, with one sample either side carried across the edges), and
    the zero line of a residual panel ``"zero"``.
    """
    _check(points, model)
    order = np.argsort([p.t for p in points], kind="stable")
    ordered = [points[i] for i in order]
    t = np.array([p.t for p in ordered], dtype=float)
    v = np.array([p.v for p in ordered], dtype=float)
    sigma = np.array([p.sigma for p in ordered], dtype=float)
    sources = list(dict.fromkeys(source_label(p) for p in points))  # first appearance in the input
    of_source = np.array([sources.index(source_label(p)) for p in ordered])

    folded = model is not None and model.period is not None
    residual = observed_minus_computed(t, v, model) if model is not None else None
    phase = phase_of(t, model.period, model.T) if folded else None
    t_low, t_high = _time_limits(t)

    with common.house_style():
        fig = common.new_figure(common.DEFAULT_SIZE_IN[0], common.DEFAULT_SIZE_IN[1])
        names = ["velocity"]
        if model is not None:
            names.append("velocity residual")
        if folded:
            names += ["phase", "phase residual"]
        axes: dict[str, Axes] = {}
        shares = {"velocity residual": ("velocity", None), "phase": (None, "velocity"),
                  "phase residual": ("phase", "velocity residual")}
        for name in names:
            sharex, sharey = shares.get(name, (None, None))
            ax = fig.add_subplot(sharex=axes.get(sharex), sharey=axes.get(sharey), label=name)
            ax.grid(True, which="major")
            axes[name] = ax
        axes["velocity"].set_xlim(t_low, t_high)

        containers: list[ErrorbarContainer] = []
        for index, source in enumerate(sources):
            mine = of_source == index
            containers.append(_points(axes["velocity"], t[mine], v[mine], sigma[mine], index, source))
        if model is not None:
            mt, mv = _sorted_model(model)
            axes["velocity"].plot(mt, mv, color=MODEL_COLOUR, zorder=2, label="model")
            ax = axes["velocity residual"]
            ax.axhline(0.0, color=MODEL_COLOUR, zorder=2, linewidth=1.0, label="zero")
            for index, source in enumerate(sources):
                mine = of_source == index
                _points(ax, t[mine], residual[mine], sigma[mine], index, source)
        if folded:
            ax = axes["phase"]
            ax.set_xlim(-_PHASE_MARGIN, 1.0 + _PHASE_MARGIN)
            ax.xaxis.set_major_locator(_phase_locator())
            ax.plot(*_folded_model(model), color=MODEL_COLOUR, zorder=2, label="model")
            for index, source in enumerate(sources):
                mine = of_source == index
                _points(ax, phase[mine], v[mine], sigma[mine], index, source)
            ax = axes["phase residual"]
            ax.axhline(0.0, color=MODEL_COLOUR, zorder=2, linewidth=1.0, label="zero")
            for index, source in enumerate(sources):
                mine = of_source == index
                _points(ax, phase[mine], residual[mine], sigma[mine], index, source)

        _velocity_limits(axes["velocity"], v, sigma, model, (t_low, t_high), folded)
        if model is not None:
            _residual_limits(axes["velocity residual"], residual, sigma)

        axes["velocity"].set_ylabel("v (km/s)")
        axes["velocity"].set_xlabel(time_label)
        if model is not None:
            axes["velocity residual"].set_ylabel("O−C (km/s)")
            axes["velocity"].tick_params(labelbottom=False)
            axes["velocity"].set_xlabel("")
            axes["velocity residual"].set_xlabel(time_label)
        if folded:
            axes["phase"].set_ylabel("v (km/s)")
            axes["phase residual"].set_ylabel("O−C (km/s)")
            axes["phase"].tick_params(labelbottom=False)
            axes["phase residual"].set_xlabel(_phase_label(model))
        title_text = axes["velocity"].set_title(title)
        legend = _legend(fig, containers, sources, model)
        weights = {"velocity": _PANEL_IN, "velocity residual": _RESIDUAL_IN, "phase": _PANEL_IN,
                   "phase residual": _RESIDUAL_IN}
        gaps = {"velocity residual": _TIGHT_GAP_IN, "phase": _GROUP_GAP_IN, "phase residual": _TIGHT_GAP_IN}
        common.arrange_column(
            fig,
            [axes[n] for n in names],
            weights=[weights[n] for n in names],
            gaps_in=[gaps[n] for n in names[1:]],
            title=title_text,
            legend=legend,
            unit_in=1.0,  # weights in inches: the figure's height follows from the panels
        )
        fig.align_ylabels(list(axes.values()))
    return fig


def _check(points: Sequence[RVPoint], model: RVModel | None) -> None:
    if not points:
        raise ValueError("rv_chart needs at least one radial velocity. Fix: pass the star's velocities.")
    for index, p in enumerate(points):
        if not (math.isfinite(p.t) and math.isfinite(p.v)):
            raise ValueError(f"velocity {index} (t = {p.t}, v = {p.v}) has a value that is not finite. "
                             "Fix: leave out incomplete velocities.")
        if p.sigma < 0:
            raise ValueError(f"velocity {index} (t = {p.t}) has a negative error {p.sigma}. "
                             "Fix: give the 1-sigma uncertainty, km/s (NaN if unknown).")
    if model is None:
        return
    if len(model.t) != len(model.v):
        raise ValueError(f"model {model.label!r} has {len(model.t)} times and {len(model.v)} velocities. "
                         "Fix: give one velocity per time.")
    if len(model.t) < 2:
        raise ValueError(f"model {model.label!r} has fewer than two samples. Fix: sample it densely in time.")
    if not (np.all(np.isfinite(np.asarray(model.t, dtype=float)))
            and np.all(np.isfinite(np.asarray(model.v, dtype=float)))):
        raise ValueError(f"model {model.label!r} has a value that is not finite. Fix: sample it where it is defined.")
    if (model.period is None) != (model.T is None):
        raise ValueError(f"model {model.label!r} has a period but no T, or a T but no period. "
                         "Fix: give both to fold the velocities on the period (T = time of phase 0), or neither.")
    if model.period is not None and not (math.isfinite(model.period) and model.period > 0):
        raise ValueError(f"model {model.label!r} has period {model.period}. Fix: give the period in days, positive.")
    if model.T is not None and not math.isfinite(model.T):
        raise ValueError(f"model {model.label!r} has T = {model.T}. Fix: give the time of phase 0, days.")


def _sorted_model(model: RVModel) -> tuple[np.ndarray, np.ndarray]:
    """A model's times in increasing order (days) and its velocities along them (km/s)."""
    mt = np.asarray(model.t, dtype=float)
    order = np.argsort(mt, kind="stable")
    return mt[order], np.asarray(model.v, dtype=float)[order]


def _folded_model(model: RVModel) -> tuple[np.ndarray, np.ndarray]:
    """The model's phases (sorted) and velocities, with the last sample before phase 0 and the
    first after phase 1 carried across, so that the curve reaches both edges of the panel."""
    mt, mv = _sorted_model(model)
    phase = phase_of(mt, model.period, model.T)
    order = np.argsort(phase, kind="stable")
    phase, mv = phase[order], mv[order]
    return (np.concatenate([[phase[-1] - 1.0], phase, [phase[0] + 1.0]]),
            np.concatenate([[mv[-1]], mv, [mv[0]]]))


def _phase_label(model: RVModel) -> str:
    """Label of the phase axis: T to 0.01 d, the period to six significant figures (a fitted value's
    last digits say nothing on a chart; the fit's table gives them with their errors)."""
    return f"phase (0 at T = {model.T:.2f}; P = {model.period:.6g} d)"


def _phase_locator() -> object:
    from matplotlib.ticker import MultipleLocator

    return MultipleLocator(0.2)


def _points(ax: Axes, x: np.ndarray, y: np.ndarray, sigma: np.ndarray, index: int, source: str) -> ErrorbarContainer:
    """The points of one source with their error bars; NaN error draws none."""
    bar = np.where(np.isfinite(sigma), sigma, 0.0)
    colour = SOURCE_COLOURS[index % len(SOURCE_COLOURS)]
    return ax.errorbar(x, y, yerr=bar, fmt=SOURCE_MARKERS[index % len(SOURCE_MARKERS)], markersize=4.6,
                       color=colour, markeredgecolor=common.BACKGROUND, markeredgewidth=0.5, ecolor=colour,
                       zorder=4, label=f"points {source}", **_ERROR_KW)


def _time_limits(t: np.ndarray) -> tuple[float, float]:
    """The measures' time span with a margin, days; the model beyond it is cut off, not followed."""
    low, high = float(t.min()), float(t.max())
    pad = max(1.0, 0.04 * (high - low))
    return low - pad, high + pad


def _velocity_limits(
    ax: Axes, v: np.ndarray, sigma: np.ndarray, model: RVModel | None, window: tuple[float, float], folded: bool
) -> None:
    """Limits about the error bars and the model: its part inside the time window, or all of it when
    folded (the phase panel shows every cycle, and shares this scale)."""
    bar = np.where(np.isfinite(sigma), sigma, 0.0)
    values = [v - bar, v + bar]
    if model is not None:
        mt, mv = _sorted_model(model)
        values.append(mv if folded else mv[(mt >= window[0]) & (mt <= window[1])])
    everything = np.concatenate(values)
    low, high = float(everything.min()), float(everything.max())
    span = high - low if high > low else max(1.0, 0.05 * abs(high))
    ax.set_ylim(low - _MARGIN * span, high + _MARGIN * span)


def _residual_limits(ax: Axes, values: np.ndarray, sigma: np.ndarray) -> None:
    """Symmetric limits about zero, so that the sign of a residual reads at a glance."""
    from matplotlib.ticker import MaxNLocator

    reach = np.abs(values) + np.where(np.isfinite(sigma), sigma, 0.0)
    reach = reach[np.isfinite(reach)]
    half = float(reach.max()) * (1.0 + 2 * _MARGIN) if reach.size and reach.max() > 0 else 1.0
    ax.set_ylim(-half, half)
    ax.yaxis.set_major_locator(MaxNLocator(nbins=4, symmetric=True, steps=[1, 2, 2.5, 5, 10]))


def _legend(fig: Figure, containers: Sequence[object], sources: Sequence[str], model: RVModel | None) -> Legend:
    """The key under the column: one entry per source (marker and error bar), then the model.

    On one row if it fits the width of the figure, else on as few rows as fit, evenly filled.
    """
    from matplotlib.lines import Line2D

    handles: list[object] = list(containers)
    texts = [f"{source} ± 1σ" for source in sources]
    if model is not None:
        handles.append(Line2D([], [], color=MODEL_COLOUR))
        texts.append(model.label)
    renderer = common.text_renderer(fig)
    room = fig.bbox.width - 2 * common.PAD_IN * fig.dpi

    def make(ncols: int) -> Legend:
        return fig.legend(handles, texts, loc="upper center", ncols=ncols, handlelength=2.2, handletextpad=0.5,
                          columnspacing=1.4)

    for ncols in range(len(handles), 0, -1):
        legend = make(ncols)
        fits = ncols == 1 or legend.get_window_extent(renderer).width <= room
        balanced = math.ceil(len(handles) / math.ceil(len(handles) / ncols))  # 2 + 2, not 3 + 1
        if fits and balanced == ncols:
            return legend
        legend.remove()
        if fits:
            return make(balanced)
    return make(1)  # pragma: no cover - the loop always returns


def _describe(points: Sequence[RVPoint], model: RVModel | None) -> str:
    """Short text alternative of the chart, for screen readers."""
    t = [p.t for p in points]
    sources = list(dict.fromkeys(source_label(p) for p in points))
    parts = [f"{len(points)} radial velocities (km/s, error bars 1 sigma) from {min(t):.1f} to {max(t):.1f}, "
             f"from {len(sources)} source(s): {', '.join(sources)}."]
    if model is not None:
        parts.append(f"Model: {model.label}; residuals, observed minus computed, against it.")
        if model.period is not None:
            parts.append(f"Also folded on the period {model.period:g} d, phase 0 at {model.T:g}.")
    return " ".join(parts)


# --- periodogram ----------------------------------------------------------------------------


def format_fap(fap: float) -> str:
    """Write a false-alarm probability for a label.

    Parameters
    ----------
    fap : float
        The probability, in [0, 1].

    Returns
    -------
    str
        A percentage with two significant figures down to 0.1 % (``"0.23%"``),
        below that a power of ten (``"2.3 × 10⁻⁶"``); ``"≈ 0"`` for zero.
    """
    if fap == 0:
        return "≈ 0"
    if fap >= 1e-3:
        return f"{100.0 * fap:.2g}%"
    exponent = math.floor(math.log10(fap))
    mantissa = fap / 10.0**exponent
    if round(mantissa, 1) >= 10.0:  # 9.96e-5 → 1.0 × 10⁻⁴
        mantissa, exponent = mantissa / 10.0, exponent + 1
    superscript = str(exponent).translate(str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹"))
    return f"{mantissa:.1f} × 10{superscript}"


def periodogram_chart(
    period: Sequence[float],
    power: Sequence[float],
    *,
    best_period: float | None,
    fap: float | None,
    title: str,
    alt: str | None = None,
) -> str:
    """Draw a periodogram, power against trial period, as SVG text.

    Parameters
    ----------
    period : sequence of float
        Trial periods, days, positive (any order: a grid even in frequency is
        fine).
    power : sequence of float
        Power at each period (as the periodogram defines it; unitless).
    best_period : float or None
        The period to mark, days.
    fap : float or None
        False-alarm probability of the best period, in [0, 1]; needs
        ``best_period``.
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
        When the columns differ in length or have fewer than two samples, a
        value is not finite, a period is not positive, or the false-alarm
        probability is out of range or comes without a best period.
    """
    fig = build_periodogram_chart(period, power, best_period=best_period, fap=fap, title=title)
    description = f"Periodogram: power against trial period from {min(period):g} to {max(period):g} d, log scale."
    if best_period is not None:
        description += f" Best period {best_period:g} d" + (f", false-alarm probability {fap:g}." if fap is not None
                                                           else ".")
    return common.to_svg(fig, title=title, description=description, alt=alt)


def build_periodogram_chart(
    period: Sequence[float],
    power: Sequence[float],
    *,
    best_period: float | None,
    fap: float | None,
    title: str,
) -> Figure:
    """Build the periodogram as a matplotlib Figure (see :func:`periodogram_chart`).

    The one axes holds a line labelled ``"periodogram"`` (periods sorted
    increasing), and with a best period a vertical line ``"best period"``, a
    marker ``"best peak"`` over the power there, and a text labelled
    ``"best period label"``.
    """
    _check_periodogram(period, power, best_period, fap)
    p = np.asarray(period, dtype=float)
    order = np.argsort(p, kind="stable")
    p, w = p[order], np.asarray(power, dtype=float)[order]

    with common.house_style():
        fig = common.new_figure(*_PERIODOGRAM_SIZE_IN)
        ax = fig.add_subplot()
        ax.grid(True, which="major")
        ax.set_xscale("log")
        ax.set_xlim(float(p[0]), float(p[-1]))
        log_ticks(ax.xaxis, float(p[0]), float(p[-1]))
        ax.plot(p, w, color=common.PRIMARY, linewidth=1.0, zorder=3, label="periodogram")
        low = min(0.0, float(w.min()))
        peak = float(w.max())
        ax.set_ylim(low, peak + _HEADROOM * (peak - low if peak > low else 1.0))
        ax.set_xlabel("period (d)")
        ax.set_ylabel("power")
        label = None
        if best_period is not None:
            ax.axvline(best_period, color=common.MOTION, linestyle=(0, (4.0, 2.5)), linewidth=1.1, zorder=2,
                       label="best period")
            at = float(np.interp(math.log(best_period), np.log(p), w))
            ax.plot([best_period], [at], linestyle="none", marker="v", markersize=6, color=common.MOTION,
                    markeredgecolor=common.BACKGROUND, markeredgewidth=0.6, zorder=5, label="best peak")
            text = f"P = {best_period:.5g} d"
            if fap is not None:
                text += f" · FAP {format_fap(fap)}" if fap == 0 else f" · FAP = {format_fap(fap)}"
            label = ax.annotate(text, xy=(best_period, 1.0), xycoords=("data", "axes fraction"), xytext=(5, -5),
                                textcoords="offset points", ha="left", va="top", color=common.INK, zorder=6,
                                label="best period label")
            label.set_in_layout(False)
        title_text = ax.set_title(title)
        common.arrange(fig, ax, title=title_text)
        if label is not None:
            _keep_inside(fig, ax, label)
    return fig


def _check_periodogram(period: Sequence[float], power: Sequence[float], best_period: float | None,
                       fap: float | None) -> None:
    if len(period) != len(power):
        raise ValueError(f"the periodogram has {len(period)} periods and {len(power)} powers. "
                         "Fix: give one power per period.")
    if len(period) < 2:
        raise ValueError("the periodogram has fewer than two periods. Fix: pass the whole grid of trial periods.")
    p, w = np.asarray(period, dtype=float), np.asarray(power, dtype=float)
    if not (np.all(np.isfinite(p)) and np.all(np.isfinite(w))):
        raise ValueError("the periodogram has a value that is not finite. Fix: leave out periods without a power.")
    if np.any(p <= 0):
        raise ValueError("the periodogram has a period that is not positive. Fix: give periods in days, > 0.")
    if best_period is not None and not (math.isfinite(best_period) and best_period > 0):
        raise ValueError(f"best_period is {best_period}. Fix: give the period in days, > 0.")
    if fap is not None:
        if best_period is None:
            raise ValueError("fap is given without best_period. Fix: give the period it belongs to.")
        if not (0.0 <= fap <= 1.0):
            raise ValueError(f"fap is {fap}. Fix: give the false-alarm probability as a fraction in [0, 1].")


def log_ticks(axis: object, low: float, high: float) -> None:
    """Ticks of a logarithmic axis written as plain numbers (``0.05``, ``1``, ``200``), not powers of ten.

    Major ticks at 1, 2 and 5 times each power of ten over up to
    :data:`_FINE_DECADES` decades, at the powers of ten alone over more; minor
    ticks at every integer multiple, unlabelled. Shared with the detection map.

    Parameters
    ----------
    axis : matplotlib.axis.Axis
        The axis, already on a log scale.
    low, high : float
        Its limits, positive.
    """
    from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

    subs = (1.0, 2.0, 5.0) if math.log10(high / low) <= _FINE_DECADES else (1.0,)
    axis.set_major_locator(LogLocator(base=10.0, subs=subs))
    axis.set_major_formatter(FuncFormatter(lambda value, _: f"{value:g}"))
    axis.set_minor_locator(LogLocator(base=10.0, subs=tuple(float(k) for k in range(1, 10))))
    axis.set_minor_formatter(NullFormatter())


def _keep_inside(fig: Figure, ax: Axes, label: object) -> None:
    """Put the best period's label left of its line when it would run past the right of the axes."""
    renderer = common.text_renderer(fig)
    if label.get_window_extent(renderer).x1 > ax.get_window_extent(renderer).x1 - 2:
        label.set_horizontalalignment("right")
        label.set_position((-5, -5))
