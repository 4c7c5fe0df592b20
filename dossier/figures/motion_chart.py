"""Motion chart: position angle and separation of one pair against time.

Four panels share the time axis, top to bottom: θ (degrees) with its error
bars and the model curves; the θ residuals, observed minus computed (O−C),
against one chosen model; ρ (arcsec) likewise; the ρ residuals. The model is
interpolated linearly at the measure times (its samples should be dense
enough for that to be exact to well within the errors), and a residual is
left out where a measure falls outside the model's time span rather than
extrapolated. θ residuals are wrapped into (−180°, 180°], so that 359° − 1°
is −2°, not 358°. Without a chosen model, only the θ and ρ panels are drawn.

Position angles wrap at 360°. So that neither the points nor a curve jump
across the panel when θ passes through north, θ is unwrapped along time:
the measures start at the first (earliest) kept measure's value and each
later kept one goes on the branch nearest its predecessor, or, when there is
a chosen model, nearest the model at its time (the model is steadier than
noisy measures a decade apart); a flagged measure goes on the branch nearest
the kept ones at its time, so that one wild angle cannot move every later
measure by a turn; each curve is unwrapped along itself and moved by whole
turns to lie with the measures.

The θ axis keeps the unwrapped values and labels each tick with its angle
modulo 360°. So that the labels still read in order, the ticks are
multiples of a step that divides 360° (…, 1, 2, 2.5, 5, 10, 15, 20, 30, 45,
60, 90, 180 or 360°, the smallest giving at most six ticks), never 25°, 50°
or 100°: every multiple of 360° is then a tick, labelled 0, and the labels
repeat cleanly each turn. A panel crossing north reads 300, 330, 0, 30; one
spanning more than a turn reads 90, 180, 270, 0, 90, where the position of a
label, not its text, says which turn it is on. (With steps of 100° the same
panel read 100, 200, 300, 40, 140.)

Measures flagged as outliers stay on the chart, drawn open with a red cross,
as on the orbit chart; the key says "flagged (see log table)".
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from dossier.figures import common
from dossier.figures.orbit_chart import CURVE_COLOURS, CURVE_KINDS, FLAGGED_LABEL, KIND_STYLE

if TYPE_CHECKING:  # pragma: no cover - typing only
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure
    from matplotlib.legend import Legend

_PANEL_IN = 1.75
"""Height of a θ or ρ panel, inches."""
_RESIDUAL_IN = 0.8
"""Height of a residual panel, inches."""
_TIGHT_GAP_IN = 0.04
"""Space between a panel and its residual panel, inches (besides what the tick labels take)."""
_GROUP_GAP_IN = 0.18
"""Space between the θ group and the ρ group, inches (besides what the tick labels take)."""
_MARGIN = 0.08
"""Space around the data inside a panel, as a fraction of the span."""
_ERROR_KW = {"elinewidth": 1.0, "capsize": 2.0, "capthick": 1.0}


@dataclass(frozen=True)
class MotionSeries:
    """The measures of one pair, as columns.

    Attributes
    ----------
    t : sequence of float
        Epochs, Julian years (any order).
    theta, rho : sequence of float
        Position angle, degrees north through east, and separation, arcsec.
    theta_err, rho_err : sequence of float
        Their 1-sigma uncertainties, same units; NaN draws no error bar.
    flagged : sequence of bool
        Whether each measure was flagged as an outlier.
    """

    t: Sequence[float]
    theta: Sequence[float]
    rho: Sequence[float]
    theta_err: Sequence[float]
    rho_err: Sequence[float]
    flagged: Sequence[bool]


@dataclass(frozen=True)
class ModelCurve:
    """A model's θ and ρ, sampled densely in time.

    Attributes
    ----------
    label : str
        Name in the key; :func:`motion_chart` picks the residual model by it.
    t : sequence of float
        Epochs, Julian years.
    theta, rho : sequence of float
        Position angle (degrees, any branch) and separation (arcsec).
    kind : str
        One of ``"orbit"``, ``"linear"``, ``"quadratic"`` (drawn solid,
        dashed, dotted, as on the orbit chart).
    """

    label: str
    t: Sequence[float]
    theta: Sequence[float]
    rho: Sequence[float]
    kind: str


def wrap_residual(degrees: np.ndarray | float) -> np.ndarray:
    """Wrap angle differences into (−180, 180].

    Parameters
    ----------
    degrees : array_like
        Differences of position angle, degrees.

    Returns
    -------
    numpy.ndarray
        The same differences, degrees, as the nearest value in (−180, 180].
    """
    return 180.0 - np.mod(180.0 - np.asarray(degrees, dtype=float), 360.0)


def observed_minus_computed(
    t: Sequence[float], theta: Sequence[float], rho: Sequence[float], model: ModelCurve
) -> tuple[np.ndarray, np.ndarray]:
    """Residuals of measures against a model, interpolated at the measure times.

    Parameters
    ----------
    t : sequence of float
        Epochs of the measures, Julian years.
    theta, rho : sequence of float
        Measured position angles (degrees) and separations (arcsec).
    model : ModelCurve
        The model; its θ is unwrapped before interpolating, so a model
        passing through 360° is interpolated across it, not through 180°.

    Returns
    -------
    tuple of numpy.ndarray
        θ O−C (degrees, wrapped into (−180, 180]) and ρ O−C (arcsec), in the
        order of ``t``; NaN where ``t`` lies outside the model's time span.
    """
    mt, mtheta, mrho = _sorted_model(model)
    tt = np.asarray(t, dtype=float)
    inside = (tt >= mt[0]) & (tt <= mt[-1])
    d_theta = wrap_residual(np.asarray(theta, dtype=float) - np.interp(tt, mt, mtheta))
    d_rho = np.asarray(rho, dtype=float) - np.interp(tt, mt, mrho)
    return np.where(inside, d_theta, np.nan), np.where(inside, d_rho, np.nan)


def motion_chart(
    series: MotionSeries,
    curves: Sequence[ModelCurve],
    *,
    title: str,
    residual_model: str | None,
    alt: str | None = None,
) -> str:
    """Draw θ and ρ of one pair against time, with residual panels, as SVG text.

    Parameters
    ----------
    series : MotionSeries
        The measures.
    curves : sequence of ModelCurve
        Models to draw over the measures (may be empty).
    title : str
        Title over the chart and accessible name of the SVG.
    residual_model : str or None
        Label of the curve to compute residuals against; ``None`` draws no
        residual panels.
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
        When there are no measures, the columns differ in length, a curve is
        malformed, or ``residual_model`` names no curve.
    """
    fig = build_motion_chart(series, curves, title=title, residual_model=residual_model)
    return common.to_svg(fig, title=title, description=_describe(series, curves, residual_model), alt=alt)


def build_motion_chart(
    series: MotionSeries,
    curves: Sequence[ModelCurve],
    *,
    title: str,
    residual_model: str | None,
) -> Figure:
    """Build the motion chart as a matplotlib Figure (see :func:`motion_chart`).

    The axes are, in order, θ, θ O−C, ρ, ρ O−C (only θ and ρ without a
    residual model), each with a label naming its panel (``"theta"``,
    ``"theta residual"``, ``"rho"``, ``"rho residual"``). In each panel the
    measures are an errorbar container labelled ``"measures"`` and the
    flagged ones ``"flagged"``, in time order, with the values as plotted
    (θ unwrapped); curves are lines labelled ``"curve <label>"`` (θ
    unwrapped), and the zero line of a residual panel ``"zero"``.
    """
    _check(series, curves, residual_model)
    order = np.argsort(np.asarray(series.t, dtype=float), kind="stable")
    t = np.asarray(series.t, dtype=float)[order]
    theta = np.asarray(series.theta, dtype=float)[order]
    rho = np.asarray(series.rho, dtype=float)[order]
    theta_err = np.asarray(series.theta_err, dtype=float)[order]
    rho_err = np.asarray(series.rho_err, dtype=float)[order]
    flagged = np.asarray(series.flagged, dtype=bool)[order]

    model = next((c for c in curves if c.label == residual_model), None)
    theta_shown, curve_theta = _unwrap_for_display(t, theta, curves, model, flagged)
    residual_theta = residual_rho = None
    if model is not None:
        residual_theta, residual_rho = observed_minus_computed(t, theta, rho, model)

    t_low, t_high = _time_limits(t)
    with common.house_style():
        fig = common.new_figure(common.DEFAULT_SIZE_IN[0], common.DEFAULT_SIZE_IN[1])
        names = ["theta", "theta residual", "rho", "rho residual"] if model is not None else ["theta", "rho"]
        axes: dict[str, Axes] = {}
        for name in names:
            ax = fig.add_subplot(sharex=axes.get("theta"), label=name)
            ax.grid(True, which="major")
            axes[name] = ax
        axes["theta"].set_xlim(t_low, t_high)

        styles = {c.label: {"color": CURVE_COLOURS[i % len(CURVE_COLOURS)], **KIND_STYLE[c.kind]}
                  for i, c in enumerate(curves)}
        for curve, shown in zip(curves, curve_theta):
            ct = np.asarray(curve.t, dtype=float)
            axes["theta"].plot(ct, shown, zorder=2, label=f"curve {curve.label}", **styles[curve.label])
            axes["rho"].plot(ct, np.asarray(curve.rho, dtype=float), zorder=2, label=f"curve {curve.label}",
                             **styles[curve.label])
        _measures(axes["theta"], t, theta_shown, theta_err, flagged)
        _measures(axes["rho"], t, rho, rho_err, flagged)
        _value_limits(axes["theta"], theta_shown, theta_err, curves, curve_theta, (t_low, t_high))
        _value_limits(axes["rho"], rho, rho_err, curves, [c.rho for c in curves], (t_low, t_high))
        _angle_ticks(axes["theta"])
        if model is not None:
            for name, values, errors in (("theta residual", residual_theta, theta_err),
                                         ("rho residual", residual_rho, rho_err)):
                ax = axes[name]
                ax.axhline(0.0, zorder=2, label="zero", **styles[model.label])
                _measures(ax, t, values, errors, flagged)
                _residual_limits(ax, values, errors, flagged)

        axes["theta"].set_ylabel("θ (°)")
        axes["rho"].set_ylabel("ρ (″)")
        if model is not None:
            axes["theta residual"].set_ylabel("O−C (°)")
            axes["rho residual"].set_ylabel("O−C (″)")
        for name in names[:-1]:
            axes[name].tick_params(labelbottom=False)
        axes[names[-1]].set_xlabel("epoch (yr)")
        title_text = axes["theta"].set_title(title)
        legend = _legend(fig, curves, styles, model, bool(flagged.any()), bool((~flagged).any()))
        residual_panels = model is not None
        common.arrange_column(
            fig,
            [axes[n] for n in names],
            weights=[_PANEL_IN, _RESIDUAL_IN, _PANEL_IN, _RESIDUAL_IN] if residual_panels else [_PANEL_IN, _PANEL_IN],
            gaps_in=[_TIGHT_GAP_IN, _GROUP_GAP_IN, _TIGHT_GAP_IN] if residual_panels else [_GROUP_GAP_IN],
            title=title_text,
            legend=legend,
            unit_in=1.0,  # weights in inches: the figure's height follows from the panels
        )
        # After the layout, which the widest tick labels set anyway: aligned
        # labels make every measurement of one panel consult all the others.
        fig.align_ylabels(list(axes.values()))
    return fig


# --- checks ----------------------------------------------------------------------------


def _check(series: MotionSeries, curves: Sequence[ModelCurve], residual_model: str | None) -> None:
    columns = {name: len(getattr(series, name)) for name in ("t", "theta", "rho", "theta_err", "rho_err", "flagged")}
    if columns["t"] == 0:
        raise ValueError("motion_chart needs at least one measure. Fix: pass the pair's measures.")
    if len(set(columns.values())) != 1:
        detail = ", ".join(f"{name} {count}" for name, count in columns.items())
        raise ValueError(f"the measure columns differ in length ({detail}). Fix: give one value per measure "
                         "in every column (NaN for an unknown error).")
    for name in ("t", "theta", "rho"):
        if not np.all(np.isfinite(np.asarray(getattr(series, name), dtype=float))):
            raise ValueError(f"column {name!r} has a value that is not finite. Fix: leave out incomplete measures.")
    labels = [c.label for c in curves]
    for curve in curves:
        if curve.kind not in CURVE_KINDS:
            raise ValueError(f"curve {curve.label!r} has kind {curve.kind!r}. "
                             f"Did you mean one of: {', '.join(CURVE_KINDS)}?")
        if not len(curve.t) == len(curve.theta) == len(curve.rho):
            raise ValueError(f"curve {curve.label!r} has {len(curve.t)} epochs, {len(curve.theta)} angles and "
                             f"{len(curve.rho)} separations. Fix: give one of each per sample.")
        if len(curve.t) < 2:
            raise ValueError(f"curve {curve.label!r} has fewer than two samples. Fix: sample it densely in time.")
        if labels.count(curve.label) > 1:
            raise ValueError(f"two curves are labelled {curve.label!r}. Fix: give each curve its own label.")
    if residual_model is not None and residual_model not in labels:
        raise ValueError(f"residual_model {residual_model!r} names no curve. "
                         f"Did you mean one of: {', '.join(labels) or '(no curves)'}?")


# --- angles ------------------------------------------------------------------------------


def _sorted_model(model: ModelCurve) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A model's epochs in increasing order, its θ unwrapped along them (degrees), its ρ."""
    mt = np.asarray(model.t, dtype=float)
    order = np.argsort(mt, kind="stable")
    mtheta = np.unwrap(np.asarray(model.theta, dtype=float)[order], period=360.0)
    return mt[order], mtheta, np.asarray(model.rho, dtype=float)[order]


def _unwrap_for_display(
    t: np.ndarray,
    theta: np.ndarray,
    curves: Sequence[ModelCurve],
    model: ModelCurve | None,
    flagged: np.ndarray | None = None,
) -> tuple[np.ndarray, list[np.ndarray]]:
    """θ of the measures and of each curve on continuous branches (see the module notes).

    Returns the measures' θ in the order of ``t`` (sorted) and each curve's
    θ in its own sample order.
    """
    kept = ~np.asarray(flagged, dtype=bool) if flagged is not None else np.ones(t.size, dtype=bool)
    if kept.all() or not kept.any():
        shown = np.unwrap(theta, period=360.0)  # the first value is kept as it is
    else:
        # The kept measures alone set the branches: a flagged quadrant slip
        # (θ off by ~180°) would otherwise move every later measure by a turn.
        path = np.unwrap(theta[kept], period=360.0)
        at = np.interp(t, t[kept], path)
        shown = at + wrap_residual(theta - at)
        shown[kept] = path
    unwrapped = [_unwrap_curve(c) for c in curves]
    if model is not None:
        index = next(i for i, c in enumerate(curves) if c is model)
        ct, ctheta = unwrapped[index]
        ctheta = ctheta + _turns_to(ct, ctheta, t, shown)
        order = np.argsort(ct, kind="stable")
        at = np.interp(t, ct[order], ctheta[order])
        shown = at + wrap_residual(theta - at)  # each measure on the branch nearest the model at its time
        turn = 360.0 * math.floor(shown[0] / 360.0)  # the first measure back in [0, 360)
        shown, unwrapped[index] = shown - turn, (ct, ctheta - turn)
    curve_theta = []
    for curve, (ct, ctheta) in zip(curves, unwrapped):
        curve_theta.append(ctheta if curve is model else ctheta + _turns_to(ct, ctheta, t, shown))
    return shown, curve_theta


def _unwrap_curve(curve: ModelCurve) -> tuple[np.ndarray, np.ndarray]:
    """A curve's epochs and its θ unwrapped along time, both in the curve's own sample order."""
    ct = np.asarray(curve.t, dtype=float)
    order = np.argsort(ct, kind="stable")
    unwrapped = np.empty(len(ct))
    unwrapped[order] = np.unwrap(np.asarray(curve.theta, dtype=float)[order], period=360.0)
    return ct, unwrapped


def _turns_to(ct: np.ndarray, ctheta: np.ndarray, t: np.ndarray, shown: np.ndarray) -> float:
    """Whole turns (degrees) that put a curve nearest the measures.

    Judged on the measures inside the curve's time span, or on the one
    nearest to it in time when none is inside (the median resists outliers).
    """
    order = np.argsort(ct, kind="stable")
    distance = np.maximum(0.0, np.maximum(ct.min() - t, t - ct.max()))
    pick = distance == distance.min()
    offset = shown[pick] - np.interp(t[pick], ct[order], ctheta[order])
    return 360.0 * round(float(np.median(offset)) / 360.0)


_FINE_STEPS = (1.0, 2.0, 2.5, 5.0)
"""Tick steps of a θ axis below 10°, times a power of ten (≤ 1): each divides 360°."""
_COARSE_STEPS = (10.0, 15.0, 20.0, 30.0, 45.0, 60.0, 90.0, 180.0, 360.0)
"""Tick steps of a θ axis from 10° up: the round numbers that divide 360° (not 25, 50, 100)."""
_MAX_ANGLE_TICKS = 6


def angle_step(low: float, high: float) -> float:
    """The step of the θ ticks between two (unwrapped) angles.

    Parameters
    ----------
    low, high : float
        The axis limits, degrees, any branch.

    Returns
    -------
    float
        Degrees: the smallest step that divides 360° (see the module notes)
        and puts at most six ticks between the limits.
    """
    low, high = min(low, high), max(low, high)

    def count(step: float) -> int:
        return math.floor(high / step + 1e-9) - math.ceil(low / step - 1e-9) + 1

    decade = 10.0 ** min(0, math.floor(math.log10(max(high - low, 1e-9) / _MAX_ANGLE_TICKS)))
    for step in [m * decade * 10.0**k for k in (0, 1, 2) for m in _FINE_STEPS if m * decade * 10.0**k < 10.0] + [
        *_COARSE_STEPS
    ]:
        if count(step) <= _MAX_ANGLE_TICKS:
            return step
    return 360.0 * math.ceil((high - low) / (360.0 * (_MAX_ANGLE_TICKS - 1)))  # many turns: whole turns


def angle_label(value: float) -> str:
    """The text of a θ tick: the angle modulo 360°, so an unwrapped 390 reads 30 and 360 reads 0."""
    return f"{round(value % 360.0, 6) % 360.0:g}"


def _angle_ticks(ax: Axes) -> None:
    """θ ticks at multiples of :func:`angle_step`, labelled by :func:`angle_label` (see the module notes).

    The ticks follow the limits at drawing time, so the limits may be set after this call.
    """
    from matplotlib.ticker import FuncFormatter, Locator

    class AngleLocator(Locator):
        def __call__(self) -> list[float]:
            return self.tick_values(*self.axis.get_view_interval())

        def tick_values(self, vmin: float, vmax: float) -> list[float]:
            low, high = min(vmin, vmax), max(vmin, vmax)
            step = angle_step(low, high)
            first, last = math.ceil(low / step - 1e-9), math.floor(high / step + 1e-9)
            return [k * step for k in range(first, last + 1)]

    ax.yaxis.set_major_locator(AngleLocator())
    ax.yaxis.set_major_formatter(FuncFormatter(lambda value, _: angle_label(value)))


# --- artists and limits -----------------------------------------------------------------


def _measures(ax: Axes, t: np.ndarray, values: np.ndarray, errors: np.ndarray, flagged: np.ndarray) -> None:
    """Kept measures filled; flagged ones open with a red cross, a lighter error bar."""
    kept = ~flagged
    if kept.any():
        ax.errorbar(t[kept], values[kept], yerr=_bar(errors[kept]), fmt="o", markersize=4.2,
                    color=common.MEASUREMENT, markeredgecolor=common.BACKGROUND, markeredgewidth=0.5,
                    ecolor=common.MEASUREMENT, zorder=4, label="measures", **_ERROR_KW)
    if flagged.any():
        ax.errorbar(t[flagged], values[flagged], yerr=_bar(errors[flagged]), fmt="o", markersize=5.5,
                    color=common.MEASUREMENT, markerfacecolor=common.BACKGROUND, markeredgewidth=1.2,
                    ecolor=common.INK_MUTED, zorder=4.5, label="flagged", **_ERROR_KW)
        ax.plot(t[flagged], values[flagged], linestyle="none", marker="x", markersize=3.4, markeredgewidth=1.1,
                color=common.DISCORDANT, zorder=5, label="flagged crosses")


def _bar(errors: np.ndarray) -> np.ndarray:
    """Error bars to draw: NaN (unknown) draws none."""
    return np.where(np.isfinite(errors), errors, 0.0)


def _time_limits(t: np.ndarray) -> tuple[float, float]:
    """The measures' time span with a margin; curves beyond it are cut off, not followed."""
    low, high = float(t.min()), float(t.max())
    pad = max(1.0, 0.04 * (high - low))
    return low - pad, high + pad


def _value_limits(
    ax: Axes,
    values: np.ndarray,
    errors: np.ndarray,
    curves: Sequence[ModelCurve],
    curve_values: Sequence[Sequence[float]],
    window: tuple[float, float],
) -> None:
    """Limits about the error bars and the parts of the curves inside the time window."""
    e = _bar(errors)
    low, high = [float(np.min(values - e))], [float(np.max(values + e))]
    for curve, cv in zip(curves, curve_values):
        ct, cv = np.asarray(curve.t, dtype=float), np.asarray(cv, dtype=float)
        inside = (ct >= window[0]) & (ct <= window[1]) & np.isfinite(cv)
        if inside.any():
            low.append(float(cv[inside].min()))
            high.append(float(cv[inside].max()))
    lo, hi = min(low), max(high)
    span = hi - lo if hi > lo else max(1e-3, 0.05 * abs(hi))
    ax.set_ylim(lo - _MARGIN * span, hi + _MARGIN * span)


def _residual_limits(ax: Axes, values: np.ndarray, errors: np.ndarray, flagged: np.ndarray) -> None:
    """Symmetric limits about zero, so that the sign of a residual reads at a glance.

    The limits follow the measures that were kept: a flagged measure far off the model
    (a quadrant slip of 180°, say) would otherwise flatten every other residual; its
    residual is in the log table.
    """
    from matplotlib.ticker import MaxNLocator

    reach = np.abs(values) + _bar(errors)
    kept = ~np.asarray(flagged, dtype=bool)
    if kept.any():
        reach = reach[kept]
    reach = reach[np.isfinite(reach)]
    half = float(reach.max()) * (1.0 + 2 * _MARGIN) if reach.size and reach.max() > 0 else 1.0
    ax.set_ylim(-half, half)
    ax.yaxis.set_major_locator(MaxNLocator(nbins=4, symmetric=True, steps=[1, 2, 2.5, 5, 10]))


def _legend(
    fig: Figure,
    curves: Sequence[ModelCurve],
    styles: dict[str, dict[str, object]],
    model: ModelCurve | None,
    any_flagged: bool,
    any_kept: bool,
) -> Legend | None:
    from matplotlib.legend_handler import HandlerTuple
    from matplotlib.lines import Line2D

    handles: list[object] = []
    texts: list[str] = []
    if any_kept:
        handles.append(Line2D([], [], color=common.MEASUREMENT, marker="o", markersize=4.5,
                              markeredgecolor=common.BACKGROUND, linewidth=1.0))
        texts.append("measured ± 1σ")
    if any_flagged:
        ring = Line2D([], [], color=common.INK_MUTED, marker="o", markersize=5.5, markerfacecolor=common.BACKGROUND,
                      markeredgecolor=common.MEASUREMENT, markeredgewidth=1.2, linewidth=1.0)
        cross = Line2D([], [], linestyle="none", marker="x", markersize=3.4, markeredgewidth=1.1,
                       color=common.DISCORDANT)
        handles.append((ring, cross))
        texts.append(FLAGGED_LABEL)
    for curve in curves:
        handles.append(Line2D([], [], **styles[curve.label]))
        texts.append(f"{curve.label} · O−C against this" if curve is model else curve.label)
    if not handles:  # pragma: no cover - there is always at least one measure
        return None
    renderer = common.text_renderer(fig)
    room = fig.bbox.width - 2 * common.PAD_IN * fig.dpi

    def make(ncols: int) -> Legend:
        return fig.legend(handles, texts, loc="upper center", ncols=ncols, handlelength=2.4, handletextpad=0.5,
                          columnspacing=1.2, handler_map={tuple: HandlerTuple(ndivide=1)})

    for ncols in range(len(handles), 0, -1):  # one row if it fits, else as few rows as fit, evenly filled
        legend = make(ncols)
        fits = ncols == 1 or legend.get_window_extent(renderer).width <= room
        balanced = math.ceil(len(handles) / math.ceil(len(handles) / ncols))  # 2 + 2, not 3 + 1
        if fits and balanced == ncols:
            return legend
        legend.remove()
        if fits:
            return make(balanced)
    return None  # pragma: no cover - the loop always returns


def _describe(series: MotionSeries, curves: Sequence[ModelCurve], residual_model: str | None) -> str:
    """Short text alternative of the chart, for screen readers."""
    t = np.asarray(series.t, dtype=float)
    flagged = int(np.count_nonzero(np.asarray(series.flagged, dtype=bool)))
    parts = [f"Position angle and separation of {len(t)} measure(s) from {t.min():.1f} to {t.max():.1f}"
             + (f", {flagged} flagged." if flagged else ".")]
    for curve in curves:
        parts.append(f"Curve: {curve.label} ({curve.kind}).")
    if residual_model is not None:
        parts.append(f"Residuals, observed minus computed, against {residual_model}.")
    return " ".join(parts)
