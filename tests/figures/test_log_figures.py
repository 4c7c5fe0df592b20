"""Tests of the figures drawn from the observing log: the orbit chart and the motion chart.

Tested through the data each figure shows, not its pixels (STYLE.md, Tests).
All pairs and measures here are invented: a pair moving along a slightly
curved arc over 60 years that passes through north (θ crosses 360° → 0°),
and an optical pair moving in a straight line.
"""

from __future__ import annotations

import math
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

from tests.figures.svg_helpers import SVG_NS, by_label, svg_texts
from dossier.figures import common
from dossier.figures.motion_chart import (
    ModelCurve,
    MotionSeries,
    build_motion_chart,
    motion_chart,
    observed_minus_computed,
    wrap_residual,
)
from dossier.figures.orbit_chart import (
    EPOCH_COLOURS,
    FLAGGED_LABEL,
    ChartCurve,
    ChartMeasure,
    build_orbit_chart,
    orbit_chart,
)

REPO = Path(__file__).resolve().parents[2]

# --- the invented pairs -------------------------------------------------------------


def arc(t: np.ndarray, bend: float = 6.0) -> tuple[np.ndarray, np.ndarray]:
    """θ (degrees, in [0, 360)) and ρ (arcsec) of the curved pair: θ runs 340° → 33° over 1960-2020."""
    u = (np.asarray(t, dtype=float) - 1960.0) / 60.0
    return (340.0 + 45.0 * u + bend * u**2) % 360.0, 3.2 - 0.5 * u - 0.15 * u**2


def to_offsets(theta: np.ndarray, rho: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """x north = ρ cos θ, y east = ρ sin θ (the convention of the brief and of the visual-orbit literature)."""
    return rho * np.cos(np.radians(theta)), rho * np.sin(np.radians(theta))


_rng = np.random.default_rng(20240611)
T = np.round(_rng.uniform(1962.0, 2022.0, 20), 3)  # deliberately not in time order
THETA_ERR = np.round(_rng.uniform(0.4, 1.5, T.size), 2)
RHO_ERR = np.round(_rng.uniform(0.02, 0.06, T.size), 3)
_theta_true, _rho_true = arc(T)
THETA = (_theta_true + np.round(_rng.normal(0.0, 1.0, T.size) * THETA_ERR, 2)) % 360.0
RHO = _rho_true + np.round(_rng.normal(0.0, 1.0, T.size) * RHO_ERR, 3)
FLAGGED = np.zeros(T.size, dtype=bool)
FLAGGED[[2, 9, 15]] = True
THETA[FLAGGED] = (THETA[FLAGGED] + 7.0) % 360.0
RHO[FLAGGED] += 0.25
THETA_ERR[4] = np.nan  # an unknown error: no bar

SERIES = MotionSeries(list(T), list(THETA), list(RHO), list(THETA_ERR), list(RHO_ERR), list(FLAGGED))
MODEL_T = np.linspace(1950.0, 2035.0, 341)
MODEL_THETA, MODEL_RHO = arc(MODEL_T)
MODEL = ModelCurve("orbit fit", list(MODEL_T), list(MODEL_THETA), list(MODEL_RHO), "orbit")
QUAD_THETA, QUAD_RHO = arc(MODEL_T, bend=12.0)
QUADRATIC = ModelCurve("quadratic fit", list(MODEL_T), list(QUAD_THETA), list(QUAD_RHO), "quadratic")
CURVES = [MODEL, QUADRATIC]
# The same orbit sampled every 5 years: a measure falls between the samples
# on either side of north (1985 and 1990), where interpolating the raw
# angles (355° … 4°) would pass through 180°.
COARSE_T = np.arange(1950.0, 2040.0, 5.0)
COARSE_THETA, COARSE_RHO = arc(COARSE_T)
COARSE = ModelCurve("coarse fit", list(COARSE_T), list(COARSE_THETA), list(COARSE_RHO), "orbit")

_x, _y = to_offsets(THETA, RHO)
MEASURES = [
    ChartMeasure(float(t), float(x), float(y), bool(f), "eyepiece estimate" if f else None)
    for t, x, y, f in zip(T, _x, _y, FLAGGED)
]
ORBIT_CURVES = [
    ChartCurve("orbit fit", *to_offsets(MODEL_THETA, MODEL_RHO), "orbit"),
    ChartCurve("quadratic fit", *to_offsets(QUAD_THETA, QUAD_RHO), "quadratic"),
]

# The optical pair: a straight line on the sky, well away from the primary.
OPTICAL_T = np.array([1955.2, 1961.7, 1970.4, 1978.9, 1986.3, 1993.0, 2001.6, 2009.8, 2016.0, 2022.4])
OPTICAL_MEASURES = [
    ChartMeasure(float(t), 8.0 - 0.05 * (t - 1955.0), -3.0 + 0.08 * (t - 1955.0), t == 1986.3,
                 "wrong quadrant" if t == 1986.3 else None)
    for t in OPTICAL_T
]
OPTICAL_LINE = ChartCurve("straight-line fit", [8.25, 4.25], [-3.4, 3.0], "linear")


def panel(fig, name):
    return by_label(fig.axes, name)


def plotted(ax, label):
    """x and y data of an errorbar container, as plotted."""
    container = by_label(ax.containers, label)
    line = container.lines[0]
    return np.asarray(line.get_xdata(), dtype=float), np.asarray(line.get_ydata(), dtype=float)


# --- determinism ------------------------------------------------------------------------


def test_log_figures_are_byte_identical_across_calls():
    # matplotlib docs (matplotlibrc, svg.hashsalt; Figure.savefig metadata):
    # without a fixed salt the clip-path ids are random, without Date=None
    # the file carries a timestamp. common.to_svg sets both.
    assert orbit_chart(MEASURES, ORBIT_CURVES, title="t", primary="A", secondary="B") == orbit_chart(
        MEASURES, ORBIT_CURVES, title="t", primary="A", secondary="B"
    )
    assert motion_chart(SERIES, CURVES, title="t", residual_model="orbit fit") == motion_chart(
        SERIES, CURVES, title="t", residual_model="orbit fit"
    )


def test_log_figures_are_byte_identical_across_processes():
    script = (
        "import sys; from tests.figures.test_log_figures import MEASURES, ORBIT_CURVES, SERIES, CURVES; "
        "from dossier.figures.orbit_chart import orbit_chart; from dossier.figures.motion_chart import motion_chart; "
        "sys.stdout.buffer.write((orbit_chart(MEASURES, ORBIT_CURVES, title='t', primary='A', secondary='B') "
        "+ motion_chart(SERIES, CURVES, title='t', residual_model='orbit fit')).encode('utf-8'))"
    )
    other = subprocess.run(
        [sys.executable, "-c", script], cwd=REPO, capture_output=True, check=True, env={"PYTHONPATH": str(REPO)}
    ).stdout.decode("utf-8")
    here = orbit_chart(MEASURES, ORBIT_CURVES, title="t", primary="A", secondary="B") + motion_chart(
        SERIES, CURVES, title="t", residual_model="orbit fit"
    )
    assert other == here


def test_log_figures_leave_rcparams_alone_and_import_lazily():
    import matplotlib

    before = dict(matplotlib.rcParams)
    orbit_chart(MEASURES, ORBIT_CURVES, title="t", primary="A", secondary="B")
    motion_chart(SERIES, CURVES, title="t", residual_model=None)
    assert dict(matplotlib.rcParams) == before
    # DESIGN.md, set-up facts: matplotlib costs ~0.7 s; the CLI must not pay it at start-up.
    script = "import sys, dossier.figures.orbit_chart, dossier.figures.motion_chart; print('matplotlib' in sys.modules)"
    out = subprocess.run(
        [sys.executable, "-c", script], cwd=REPO, capture_output=True, check=True, env={"PYTHONPATH": str(REPO)}
    ).stdout
    assert out.strip() == b"False"


# --- orbit chart ---------------------------------------------------------------------------


def test_orbit_chart_puts_east_left_and_north_up_about_the_origin():
    # Common practice for drawings of apparent orbits, as on the sky chart:
    # east to the left, north up, equal scales.
    fig = build_orbit_chart(MEASURES, ORBIT_CURVES, title="t", primary="A", secondary="B")
    ax = fig.axes[0]
    assert ax.xaxis_inverted()
    assert not ax.yaxis_inverted()
    assert ax.get_aspect() == 1.0
    left, right = ax.get_xlim()
    bottom, top = ax.get_ylim()
    assert math.isclose(left - right, top - bottom)  # equal spans on a square axes
    east = [m.y_east for m in MEASURES] + [0.0]
    north = [m.x_north for m in MEASURES] + [0.0]
    assert left > max(east) and right < min(east)
    assert bottom < min(north) and top > max(north)
    primary = by_label(ax.lines, "primary")
    assert list(primary.get_xdata()) == [0.0] and list(primary.get_ydata()) == [0.0]
    # The horizontal axis is y east, the vertical x north.
    fit = by_label(ax.lines, "curve orbit fit")
    np.testing.assert_array_equal(fit.get_xdata(), ORBIT_CURVES[0].y_east)
    np.testing.assert_array_equal(fit.get_ydata(), ORBIT_CURVES[0].x_north)


def test_orbit_chart_colours_the_measures_by_epoch():
    fig = build_orbit_chart(MEASURES, ORBIT_CURVES, title="t", primary="A", secondary="B")
    ax = fig.axes[0]
    kept = [m for m in MEASURES if not m.flagged]
    flagged = [m for m in MEASURES if m.flagged]
    points = by_label(ax.collections, "measures")
    np.testing.assert_array_equal(points.get_array(), [m.t for m in kept])
    np.testing.assert_array_equal(points.get_offsets(), [(m.y_east, m.x_north) for m in kept])
    rings = by_label(ax.collections, "flagged")
    np.testing.assert_array_equal(rings.get_array(), [m.t for m in flagged])
    # One scale for both: the earliest and latest epochs of all measures.
    for collection in (points, rings):
        assert collection.norm.vmin == min(T) and collection.norm.vmax == max(T)
    # The colour bar shows that scale, labelled.
    assert points.colorbar is not None
    assert points.colorbar.ax.get_xlabel() == "epoch (yr)"
    # Drawn, the faces of the kept points are the colour scale at their epochs.
    fig.canvas.draw()
    expected = points.cmap(points.norm(np.array([m.t for m in kept])))
    np.testing.assert_allclose(points.get_facecolors(), expected)


def test_flagged_measures_are_drawn_open_with_a_cross():
    fig = build_orbit_chart(MEASURES, ORBIT_CURVES, title="t", primary="A", secondary="B")
    ax = fig.axes[0]
    fig.canvas.draw()
    rings = by_label(ax.collections, "flagged")
    assert len(rings.get_facecolors()) == 0  # open
    # The ring keeps the colour of its epoch.
    expected = rings.cmap(rings.norm(np.array([m.t for m in MEASURES if m.flagged])))
    np.testing.assert_allclose(rings.get_edgecolors(), expected)
    crosses = by_label(ax.lines, "flagged crosses")
    assert crosses.get_marker() == "x" and crosses.get_color() == common.DISCORDANT


def test_epoch_scale_is_sequential():
    # A sequential colour scale should change monotonically in lightness
    # (matplotlib docs, "Choosing Colormaps"). Relative luminance from the
    # sRGB formula of WCAG 2.1 (definition of "relative luminance").
    def luminance(hex_colour: str) -> float:
        channels = [int(hex_colour[i : i + 2], 16) / 255.0 for i in (1, 3, 5)]
        linear = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in channels]
        return 0.2126 * linear[0] + 0.7152 * linear[1] + 0.0722 * linear[2]

    values = [luminance(c) for c in EPOCH_COLOURS]
    assert all(a > b for a, b in zip(values, values[1:]))
    # The palest stop still stands out from the white page: WCAG 2.1 asks
    # 3:1 of graphical objects; the filled markers also carry a white rim,
    # so we ask at least 1.5:1 of the palest fill.
    assert (1.05) / (values[0] + 0.05) >= 1.5


def test_curves_are_drawn_by_kind():
    fig = build_orbit_chart(OPTICAL_MEASURES, [*ORBIT_CURVES, OPTICAL_LINE], title="t", primary="A",
                            secondary="C")
    ax = fig.axes[0]
    solid = by_label(ax.lines, "curve orbit fit")
    dotted = by_label(ax.lines, "curve quadratic fit")
    dashed = by_label(ax.lines, "curve straight-line fit")
    assert solid.get_linestyle() == "-"
    # matplotlib reports any dash pattern as "--"; the pattern itself tells
    # a dash (on longer than off) from a dot (on shorter than off).
    _, dash = dashed._unscaled_dash_pattern
    _, dot = dotted._unscaled_dash_pattern
    assert dash[0] > dash[1] and dot[0] < dot[1]


def test_orbit_chart_labels():
    svg = orbit_chart(MEASURES, ORBIT_CURVES, title="Relative orbit of test-7 AB", primary="A", secondary="B")
    texts = svg_texts(svg)
    for text in ("Δα cos δ (″), east left", "Δδ (″)", "epoch (yr)", FLAGGED_LABEL, "A (primary)",
                 "B, measured", "orbit fit", "quadratic fit", "Key", "N", "E", "Relative orbit of test-7 AB"):
        assert text in texts, text
    assert "flagged: " in ET.fromstring(svg).find(f"{SVG_NS}desc").text


def test_orbit_chart_of_an_optical_pair_with_one_epoch_or_none():
    svg = orbit_chart(OPTICAL_MEASURES, [OPTICAL_LINE], title="t", primary="A", secondary="C")
    assert "straight-line fit" in svg_texts(svg)
    single = build_orbit_chart(OPTICAL_MEASURES[:1], [], title="t", primary="A", secondary="C")
    points = by_label(single.axes[0].collections, "measures")
    assert points.norm.vmin < OPTICAL_T[0] < points.norm.vmax  # a one-year range, not a zero division
    only_curve = build_orbit_chart([], [OPTICAL_LINE], title="t", primary="A", secondary="C")
    assert len(only_curve.axes) == 1  # nothing to colour: no colour bar


def test_orbit_chart_refuses_bad_input():
    with pytest.raises(ValueError) as error:
        orbit_chart(MEASURES, [ChartCurve("fit", [0.0], [0.0], "spline")], title="t", primary="A", secondary="B")
    assert str(error.value) == "curve 'fit' has kind 'spline'. Did you mean one of: orbit, linear, quadratic?"
    with pytest.raises(ValueError) as error:
        orbit_chart([], [], title="t", primary="A", secondary="B")
    assert str(error.value) == "orbit_chart needs at least one measure or curve. Fix: pass the pair's measures."


# --- motion chart ---------------------------------------------------------------------------


def test_motion_chart_has_four_panels_sharing_time():
    fig = build_motion_chart(SERIES, CURVES, title="t", residual_model="orbit fit")
    names = [ax.get_label() for ax in fig.axes]
    assert names == ["theta", "theta residual", "rho", "rho residual"]
    # Stacked top to bottom, one time axis.
    tops = [ax.get_position().y1 for ax in fig.axes]
    assert tops == sorted(tops, reverse=True)
    for ax in fig.axes[1:]:
        assert ax.get_shared_x_axes().joined(ax, fig.axes[0])
    assert fig.axes[0].get_xlim()[0] < min(T) and fig.axes[0].get_xlim()[1] > max(T)
    without = build_motion_chart(SERIES, CURVES, title="t", residual_model=None)
    assert [ax.get_label() for ax in without.axes] == ["theta", "rho"]


@pytest.mark.parametrize("model", [MODEL, COARSE], ids=lambda m: m.label)
def test_residuals_are_observed_minus_model_at_the_measure_times(model):
    # Independent computation with numpy alone: the model's θ unwrapped in
    # radians (numpy docs, numpy.unwrap), interpolated linearly
    # (numpy.interp), and the difference wrapped by the complex argument,
    # whose range is (−π, π] (numpy docs, numpy.angle).
    order = np.argsort(T)
    t = T[order]
    model_t = np.asarray(model.t)
    model_theta = np.degrees(np.unwrap(np.radians(model.theta)))
    d_theta = np.degrees(np.angle(np.exp(1j * np.radians(THETA[order] - np.interp(t, model_t, model_theta)))))
    d_rho = RHO[order] - np.interp(t, model_t, model.rho)
    kept, flagged = ~FLAGGED[order], FLAGGED[order]
    if model is COARSE:  # the test bites: some measure lies in the interval across north
        assert np.any((t > 1985.0) & (t < 1990.0))

    fig = build_motion_chart(SERIES, [model, QUADRATIC], title="t", residual_model=model.label)
    for name, expected in (("theta residual", d_theta), ("rho residual", d_rho)):
        ax = panel(fig, name)
        x, y = plotted(ax, "measures")
        np.testing.assert_allclose(x, t[kept])
        np.testing.assert_allclose(y, expected[kept], atol=1e-9)
        x, y = plotted(ax, "flagged")
        np.testing.assert_allclose(x, t[flagged])
        np.testing.assert_allclose(y, expected[flagged], atol=1e-9)
    # The model crosses north inside the span: interpolating the raw angles
    # (through 180°) would be wrong by up to ~180°, and these residuals are small.
    assert np.nanmax(np.abs(d_theta[kept])) < 5.0

    # The public helper agrees, in the caller's order.
    theta_oc, rho_oc = observed_minus_computed(T, THETA, RHO, model)
    np.testing.assert_allclose(theta_oc[order], d_theta, atol=1e-9)
    np.testing.assert_allclose(rho_oc[order], d_rho, atol=1e-12)


def test_residual_of_a_model_crossing_north_between_samples():
    # Worked by hand: the model goes 350° → 10° (through north, 20° in 10
    # years), so at mid-time it is at 0°; a measure of 359° there is 1° short.
    across = ModelCurve("across", [1980.0, 1990.0], [350.0, 10.0], [3.0, 2.0], "linear")
    theta_oc, rho_oc = observed_minus_computed([1985.0], [359.0], [2.6], across)
    assert math.isclose(theta_oc[0], -1.0, abs_tol=1e-9)
    assert math.isclose(rho_oc[0], 0.1, abs_tol=1e-9)


def test_residuals_outside_the_model_span_are_left_out():
    short = ModelCurve("short fit", [1980.0, 2000.0], [0.0, 20.0], [3.0, 2.8], "linear")
    theta_oc, rho_oc = observed_minus_computed([1970.0, 1990.0, 2010.0], [350.0, 10.0, 30.0], [3.1, 2.9, 2.7], short)
    assert np.isnan(theta_oc[[0, 2]]).all() and np.isnan(rho_oc[[0, 2]]).all()
    assert math.isclose(theta_oc[1], 0.0, abs_tol=1e-12) and math.isclose(rho_oc[1], 0.0, abs_tol=1e-12)


def test_wrap_residual_range_is_half_open():
    # (−180, 180]: the convention of numpy.angle's range (numpy docs).
    np.testing.assert_array_equal(wrap_residual(np.array([180.0, -180.0, 540.0, 358.0, -358.0, 0.0])),
                                  [180.0, 180.0, 180.0, -2.0, 2.0, 0.0])
    values = np.linspace(-1000.0, 1000.0, 4001) + 0.3  # off the boundaries, where rounding decides
    np.testing.assert_allclose(wrap_residual(values), np.degrees(np.angle(np.exp(1j * np.radians(values)))),
                               atol=1e-9)


@pytest.mark.parametrize("residual_model", ["orbit fit", None])
def test_theta_crossing_north_plots_continuously(residual_model):
    fig = build_motion_chart(SERIES, CURVES, title="t", residual_model=residual_model)
    ax = panel(fig, "theta")
    order = np.argsort(T)
    kept, flagged = ~FLAGGED[order], FLAGGED[order]
    t_kept, y_kept = plotted(ax, "measures")
    t_flag, y_flag = plotted(ax, "flagged")
    t_all = np.concatenate([t_kept, t_flag])
    y_all = np.concatenate([y_kept, y_flag])[np.argsort(t_all)]
    # The input crosses 360 → 0 (the demo pair runs 340° → 33°)...
    assert THETA.max() > 340.0 and THETA.min() < 20.0
    # ...but on the chart neighbouring measures never jump by more than the
    # pair moves plus the noise (~10°), and each is the measured angle modulo 360.
    assert np.max(np.abs(np.diff(y_all))) < 20.0
    np.testing.assert_allclose(np.mod(y_kept, 360.0), THETA[order][kept], atol=1e-9)
    np.testing.assert_allclose(np.mod(y_flag, 360.0), THETA[order][flagged], atol=1e-9)
    for curve in CURVES:
        line = by_label(ax.lines, f"curve {curve.label}")
        y = np.asarray(line.get_ydata(), dtype=float)
        assert np.max(np.abs(np.diff(y))) < 2.0  # samples 0.25 yr apart
        np.testing.assert_allclose(np.mod(y, 360.0), np.mod(curve.theta, 360.0), atol=1e-9)
        # On the same branch as the measures, not a turn away.
        at = np.interp(t_kept, np.asarray(curve.t), y)
        assert np.max(np.abs(at - y_kept)) < 20.0
    # The tick labels are angles modulo 360.
    fig.canvas.draw()
    labels = [tick.get_text() for tick in ax.get_yticklabels() if tick.get_text()]
    assert labels and all(0.0 <= float(text) < 360.0 for text in labels)
    assert any(float(text) >= 300.0 for text in labels) and "0" in labels  # e.g. 350, 0, 10


def test_theta_of_the_first_measure_is_kept_without_a_model():
    # Unwrapping starts at the first measure in time (numpy.unwrap keeps the first value).
    series = MotionSeries([2000.0, 2001.0, 2002.0], [355.0, 359.0, 3.0], [1.0, 1.0, 1.0], [0.5] * 3, [0.01] * 3,
                          [False] * 3)
    fig = build_motion_chart(series, [], title="t", residual_model=None)
    _, y = plotted(panel(fig, "theta"), "measures")
    np.testing.assert_allclose(y, [355.0, 359.0, 363.0])


def test_flagged_measures_are_open_in_the_motion_chart():
    fig = build_motion_chart(SERIES, CURVES, title="t", residual_model="orbit fit")
    for name in ("theta", "theta residual", "rho", "rho residual"):
        ax = panel(fig, name)
        kept = by_label(ax.containers, "measures").lines[0]
        flagged = by_label(ax.containers, "flagged").lines[0]
        assert kept.get_markerfacecolor() == common.MEASUREMENT
        assert flagged.get_markerfacecolor() == common.BACKGROUND
        assert by_label(ax.lines, "flagged crosses").get_color() == common.DISCORDANT


def test_motion_chart_labels():
    texts = svg_texts(motion_chart(SERIES, CURVES, title="Motion of test-7 AB", residual_model="orbit fit"))
    for text in ("θ (°)", "ρ (″)", "O−C (°)", "O−C (″)", "epoch (yr)", FLAGGED_LABEL, "measured ± 1σ",
                 "orbit fit · O−C against this", "quadratic fit", "Motion of test-7 AB"):
        assert text in texts, text


def test_motion_chart_refuses_bad_input():
    with pytest.raises(ValueError) as error:
        motion_chart(SERIES, CURVES, title="t", residual_model="orbit")
    assert str(error.value) == "residual_model 'orbit' names no curve. Did you mean one of: orbit fit, quadratic fit?"
    short = MotionSeries([2000.0, 2001.0], [1.0], [1.0, 1.0], [0.1, 0.1], [0.1, 0.1], [False, False])
    with pytest.raises(ValueError) as error:
        motion_chart(short, [], title="t", residual_model=None)
    assert str(error.value) == (
        "the measure columns differ in length (t 2, theta 1, rho 2, theta_err 2, rho_err 2, flagged 2). "
        "Fix: give one value per measure in every column (NaN for an unknown error)."
    )


def test_residual_panels_scale_to_the_kept_measures():
    # a flagged quadrant slip (θ off by 180°) must not flatten the other residuals; its residual is in
    # the log table (common practice: plot limits follow the data that were used)
    theta = list(SERIES.theta)
    flagged = [False] * len(theta)
    theta[2] = (theta[2] + 180.0) % 360.0
    flagged[2] = True
    series = MotionSeries(SERIES.t, tuple(theta), SERIES.rho, SERIES.theta_err, SERIES.rho_err, tuple(flagged))
    fig = build_motion_chart(series, CURVES, title="t", residual_model="orbit fit")
    low, high = panel(fig, "theta residual").get_ylim()
    assert high < 90 and low > -90


# --- wide pairs and long paths (issue: a θ axis reading 100, 200, 300, 40, 140; a path drawn as a dot) -------


def test_theta_ticks_divide_the_turn_on_a_path_through_north():
    # Like heron-1 Ba-Bb (demo_project/systems/heron-1/log.csv): θ runs 240° → 360° → 140° over a century,
    # 260° of unwrapped angle. Steps of 100° labelled 100, 200, 300, 40, 140; a step that divides 360°
    # puts a tick on north, and every label is its position modulo 360.
    t = np.linspace(1900.0, 2000.0, 21)
    theta = (240.0 + 260.0 * (t - 1900.0) / 100.0) % 360.0
    series = MotionSeries(list(t), list(theta), [0.3] * t.size, [1.0] * t.size, [0.01] * t.size, [False] * t.size)
    fig = build_motion_chart(series, [], title="t", residual_model=None)
    ax = panel(fig, "theta")
    fig.canvas.draw()
    low, high = ax.get_ylim()
    ticks = [(tick.get_loc(), tick.label1.get_text()) for tick in ax.yaxis.get_major_ticks()
             if low <= tick.get_loc() <= high]
    positions = np.array([p for p, _ in ticks])
    step = float(np.diff(positions)[0])
    np.testing.assert_allclose(np.diff(positions), step)
    assert math.isclose(360.0 % step, 0.0, abs_tol=1e-9) and step >= 10.0
    for position, text in ticks:
        assert math.isclose(position % step, 0.0, abs_tol=1e-9) or math.isclose(position % step, step)
        assert math.isclose(float(text), position % 360.0, abs_tol=1e-9), (position, text)
        assert math.isclose(float(text) % step, 0.0, abs_tol=1e-9) or math.isclose(float(text) % step, step)
    assert any(math.isclose(p, 360.0) for p in positions) and "0" in [text for _, text in ticks]
    assert low < 240.0 and high > 500.0  # unwrapped: one continuous path


@pytest.mark.parametrize("low,high,step", [(225.0, 512.0, 60.0), (-20.0, 20.0, 10.0), (129.5, 131.5, 0.5),
                                           (0.0, 1000.0, 180.0), (240.0, 300.0, 15.0)])
def test_angle_step_divides_360(low, high, step):
    from dossier.figures.motion_chart import angle_step

    assert angle_step(low, high) == step
    assert math.isclose(360.0 / step, round(360.0 / step))


def test_a_flagged_angle_does_not_move_later_measures_by_a_turn():
    # heron-1 Ba-Bb has a flagged 86.56° among measures near 265° (a quadrant slip): without a model,
    # unwrapping through it put every later measure a turn below the earlier ones.
    series = MotionSeries([1900.0, 1904.0, 1906.0, 1910.0], [262.0, 86.0, 269.0, 273.0], [0.3] * 4, [1.0] * 4,
                          [0.01] * 4, [False, True, False, False])
    fig = build_motion_chart(series, [], title="t", residual_model=None)
    ax = panel(fig, "theta")
    _, kept = plotted(ax, "measures")
    _, flagged = plotted(ax, "flagged")
    np.testing.assert_allclose(kept, [262.0, 269.0, 273.0])
    assert math.isclose(flagged[0] % 360.0, 86.0) and abs(flagged[0] - 266.0) <= 180.0


def _wide_pair() -> list[ChartMeasure]:
    """Like heron-1 AB: 25″ from the primary at θ ≈ 130°, moving about 0.1″ in 124 years."""
    t = np.linspace(1899.8, 2023.9, 12)
    theta = 130.8 - 0.004 * (t - 1899.8)
    rho = 25.0 + 0.0008 * (t - 1899.8)
    north, east = to_offsets(theta, rho)
    return [ChartMeasure(float(a), float(n), float(e), i == 3, "poor" if i == 3 else None)
            for i, (a, n, e) in enumerate(zip(t, north, east))]


def test_a_tiny_path_far_from_the_primary_gets_a_zoomed_inset():
    measures = _wide_pair()
    east = np.array([m.y_east for m in measures])
    north = np.array([m.x_north for m in measures])
    extent = max(np.ptp(east), np.ptp(north))
    assert extent < 0.05 * math.hypot(east.mean(), north.mean())
    line = ChartCurve("straight-line fit", [north[0], north[-1]], [east[0], east[-1]], "linear")
    fig = build_orbit_chart(measures, [line], title="t", primary="A", secondary="B")
    ax = fig.axes[0]
    # The main chart is as before: the primary, every measure, the key.
    assert ax.get_xlim()[1] < 0.0 < ax.get_xlim()[0] and ax.get_ylim()[0] < 0.0 < ax.get_ylim()[1]
    assert by_label(ax.collections, "measures").get_offsets().shape[0] == 11
    zoom = by_label(ax.child_axes, "zoom")
    left, right = zoom.get_xlim()
    bottom, top = zoom.get_ylim()
    assert left > right  # east to the left here too
    assert right < east.min() and east.max() < left and bottom < north.min() and north.max() < top
    # The path spans most of the zoomed view.
    assert extent > 0.75 * (left - right) and math.isclose(left - right, top - bottom)
    np.testing.assert_array_equal(by_label(zoom.collections, "measures").get_offsets(),
                                  [(m.y_east, m.x_north) for m in measures if not m.flagged])
    assert by_label(zoom.collections, "flagged").get_offsets().shape[0] == 1
    by_label(zoom.lines, "curve straight-line fit")
    # Its scale: a bar of round length, labelled in arcsec, at most a quarter of the view.
    bar = by_label(zoom.lines, "scale bar")
    length = float(np.ptp(bar.get_xdata())) * (left - right)
    assert math.isclose(length, float(by_label(zoom.texts, "scale").get_text().rstrip("″")))
    assert length <= 0.25 * (left - right)
    # The inset covers neither the measures nor the primary on the main chart.
    x0, y0, x1, y1 = zoom.get_position().extents  # figure fraction, after the layout
    for x, y in [(0.0, 0.0), *zip(east, north)]:
        fx, fy = fig.transFigure.inverted().transform(ax.transData.transform((x, y)))
        assert not (x0 <= fx <= x1 and y0 <= fy <= y1)
    # Deterministic, with the text alternative of before.
    svg = orbit_chart(measures, [line], title="t", primary="A", secondary="B")
    assert svg == orbit_chart(measures, [line], title="t", primary="A", secondary="B")
    assert by_label(zoom.texts, "scale").get_text() in svg_texts(svg)


def test_a_path_that_fills_the_chart_gets_no_inset():
    for measures in (MEASURES, OPTICAL_MEASURES, OPTICAL_MEASURES[:1]):
        fig = build_orbit_chart(measures, [], title="t", primary="A", secondary="B")
        assert not fig.axes[0].child_axes
