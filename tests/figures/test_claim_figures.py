"""Tests of the figures of companion claims: the radial-velocity chart, the periodogram and the detection map.

Tested through the data each figure shows, not its pixels (STYLE.md, Tests).
Everything here is invented: an eccentric spectroscopic orbit (P = 41.3 d,
e = 0.55) observed 15 times by two instruments, a periodogram with one clear
peak, and a system with a speckle detection at 0.21″ (Δm 3.2) that an
adaptive-optics search covering 0.05–2.0″ down to Δm 6.0 did not see.
"""

from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from tests.figures.svg_helpers import by_label, svg_texts
from dossier.astro.binary import solve_kepler
from dossier.figures import common
from dossier.figures.detection_map import (
    INSIDE_LABEL,
    LIMIT_KEY_LABEL,
    UNKNOWN_LABEL,
    Detection,
    SearchLimit,
    build_detection_map,
    detection_map,
    limits_containing,
)
from dossier.figures.rv_chart import (
    NO_SOURCE,
    RVModel,
    RVPoint,
    build_periodogram_chart,
    build_rv_chart,
    format_fap,
    observed_minus_computed,
    periodogram_chart,
    phase_of,
    rv_chart,
    source_label,
)

REPO = Path(__file__).resolve().parents[2]

# --- the invented spectroscopic orbit ------------------------------------------------

P, E, OMEGA, K, GAMMA, T0 = 41.3, 0.55, math.radians(110.0), 18.0, -12.0, 58010.2


def orbit_velocity(t: np.ndarray) -> np.ndarray:
    """Radial velocity of a Keplerian orbit, km/s: γ + K [cos(ν + ω) + e cos ω], the textbook formula of a
    spectroscopic orbit (only used here to invent the data; ν from E by the half-angle relation)."""
    mean_anomaly = 2.0 * np.pi * (np.asarray(t, dtype=float) - T0) / P
    ecc_anomaly = solve_kepler(mean_anomaly, E)
    nu = 2.0 * np.arctan2(np.sqrt(1.0 + E) * np.sin(ecc_anomaly / 2.0), np.sqrt(1.0 - E) * np.cos(ecc_anomaly / 2.0))
    return GAMMA + K * (np.cos(nu + OMEGA) + E * np.cos(OMEGA))


_rng = np.random.default_rng(20240612)
T_ECHO = np.round(_rng.uniform(58000.0, 58700.0, 9), 3)
T_LYRA = np.round(_rng.uniform(58900.0, 59300.0, 6), 3)
SIGMA_ECHO, SIGMA_LYRA = 0.4, 1.2
V_ECHO = np.round(orbit_velocity(T_ECHO) + _rng.normal(0.0, SIGMA_ECHO, T_ECHO.size), 2)
V_LYRA = np.round(orbit_velocity(T_LYRA) + _rng.normal(0.0, SIGMA_LYRA, T_LYRA.size), 2)
# Interleaved and out of time order, as a caller might pass them.
POINTS = [RVPoint(float(t), float(v), SIGMA_LYRA, "LYRA", "ref-2021b") for t, v in zip(T_LYRA, V_LYRA)]
POINTS[3:3] = [RVPoint(float(t), float(v), SIGMA_ECHO, "ECHO", "ref-2018a") for t, v in zip(T_ECHO, V_ECHO)]
MODEL_T = np.linspace(57990.0, 59320.0, 6000)  # ~0.22 d apart: ~190 samples per cycle
MODEL = RVModel(list(MODEL_T), list(orbit_velocity(MODEL_T)), "orbit fit", P, T0)
TREND = RVModel([57990.0, 59320.0], [-12.0, -11.0], "linear trend", None, None)
ECHO, LYRA = "ECHO (ref-2018a)", "LYRA (ref-2021b)"

# --- the invented periodogram ----------------------------------------------------------

PERIOD = 1.0 / np.linspace(1.0 / 2000.0, 1.0 / 1.5, 4000)  # even in frequency: decreasing periods
POWER = 0.08 + 0.05 * np.sin(PERIOD) ** 2 + 0.6 * np.exp(-0.5 * ((PERIOD - 41.3) / 0.2) ** 2)
BEST = float(PERIOD[np.argmax(POWER)])

# --- the invented companion claims ------------------------------------------------------

SPECKLE = Detection("B", "speckle", "2019.62", 0.21, 3.2, "I", "ref-2020c")
AO = SearchLimit("adaptive optics", "2021.30", 0.05, 2.0, 6.0, "I", "ref-2022d")
BUSY_DETECTIONS = [
    SPECKLE,
    Detection("B", "speckle", "2016.40", 0.19, 3.4, "I", "ref-2017e"),
    Detection("C", "astrometry", "2016.0", 1.3, None, None, "ref-2022f"),
    Detection("D", "imaging", "2010.5", 4.2, 7.1, "K", "ref-2011g"),
]
BUSY_LIMITS = [
    AO,
    SearchLimit("speckle", "2014.80", 0.03, 1.2, 4.5, "I", "ref-2015h"),
    SearchLimit("lucky imaging", "2012.10", 0.3, 6.0, 5.0, "K", "ref-2013i"),
]


def panel(fig, name):
    return by_label(fig.axes, name)


def errorbars(ax, label):
    """x, y and the half-lengths of the error bars of an errorbar container, as drawn.

    matplotlib docs, ``Axes.errorbar``: the container holds ``(data_line,
    caplines, barlinecols)``; each bar is a segment from (x, y − err) to
    (x, y + err).
    """
    container = by_label(ax.containers, label)
    line = container.lines[0]
    x = np.asarray(line.get_xdata(), dtype=float)
    y = np.asarray(line.get_ydata(), dtype=float)
    segments = np.asarray(container.lines[2][0].get_segments(), dtype=float)
    np.testing.assert_allclose(segments[:, 0, 0], x)
    np.testing.assert_allclose(segments[:, 1, 0], x)
    np.testing.assert_allclose(0.5 * (segments[:, 0, 1] + segments[:, 1, 1]), y)
    return x, y, 0.5 * (segments[:, 1, 1] - segments[:, 0, 1])


def rv_svg(model=MODEL):
    return rv_chart(POINTS, model, title="test-12 Aa: radial velocities")


def claim_svgs():
    return (rv_svg() + rv_svg(None) + periodogram_chart(PERIOD, POWER, best_period=BEST, fap=2.3e-5, title="t")
            + detection_map(BUSY_DETECTIONS, BUSY_LIMITS, title="t"))


# --- determinism ------------------------------------------------------------------------


def test_claim_figures_are_byte_identical_across_calls():
    # matplotlib docs (matplotlibrc, svg.hashsalt; Figure.savefig metadata):
    # common.to_svg fixes the salt of the ids and drops the timestamp.
    assert rv_svg() == rv_svg()
    assert rv_svg(None) == rv_svg(None)
    assert rv_svg(TREND) == rv_svg(TREND)
    assert periodogram_chart(PERIOD, POWER, best_period=BEST, fap=2.3e-5, title="t") == periodogram_chart(
        PERIOD, POWER, best_period=BEST, fap=2.3e-5, title="t")
    assert detection_map([SPECKLE], [AO], title="t") == detection_map([SPECKLE], [AO], title="t")
    assert detection_map(BUSY_DETECTIONS, BUSY_LIMITS, title="t") == detection_map(BUSY_DETECTIONS, BUSY_LIMITS,
                                                                                   title="t")


def test_claim_figures_are_byte_identical_across_processes():
    script = ("import sys; from tests.figures.test_claim_figures import claim_svgs; "
              "sys.stdout.buffer.write(claim_svgs().encode('utf-8'))")
    other = subprocess.run(
        [sys.executable, "-c", script], cwd=REPO, capture_output=True, check=True, env={"PYTHONPATH": str(REPO)}
    ).stdout.decode("utf-8")
    assert other == claim_svgs()


def test_claim_figures_leave_rcparams_alone_and_import_lazily():
    import matplotlib

    before = dict(matplotlib.rcParams)
    claim_svgs()
    assert dict(matplotlib.rcParams) == before
    # DESIGN.md, set-up facts: matplotlib costs ~0.7 s; the CLI must not pay it at start-up.
    script = "import sys, dossier.figures.rv_chart, dossier.figures.detection_map; print('matplotlib' in sys.modules)"
    out = subprocess.run(
        [sys.executable, "-c", script], cwd=REPO, capture_output=True, check=True, env={"PYTHONPATH": str(REPO)}
    ).stdout
    assert out.strip() == b"False"


@pytest.mark.parametrize(
    "build",
    [
        lambda: build_rv_chart(POINTS, MODEL, title="A title of some length for the radial-velocity chart"),
        lambda: build_rv_chart(POINTS, None, title="t", time_label="BJD − 2450000"),
        lambda: build_periodogram_chart(PERIOD, POWER, best_period=BEST, fap=2.3e-5, title="t"),
        lambda: build_periodogram_chart(PERIOD, POWER, best_period=1900.0, fap=0.5, title="t"),  # label flips left
        lambda: build_detection_map([SPECKLE], [AO], title="A title of some length for the detection map"),
        lambda: build_detection_map(BUSY_DETECTIONS, BUSY_LIMITS, title="t"),
    ],
    ids=["rv", "rv-no-model", "periodogram", "periodogram-right-edge", "detections", "detections-busy"],
)
def test_no_text_is_cut_off_by_the_edge_of_the_figure(build):
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    fig = build()
    with common.house_style():
        canvas = FigureCanvasAgg(fig)
        canvas.draw()
        renderer = canvas.get_renderer()
        extents = {f"key {i}": legend.get_window_extent(renderer) for i, legend in enumerate(fig.legends)}
        for ax in fig.axes:
            name = ax.get_label()
            extents.update({
                f"x axis {name}": ax.xaxis.get_tightbbox(renderer),
                f"y axis {name}": ax.yaxis.get_tightbbox(renderer),
                f"left title {name}": ax._left_title.get_window_extent(renderer),  # noqa: SLF001 - titles sit left
            })
            extents.update({f"text {t.get_text()!r}": t.get_window_extent(renderer) for t in ax.texts})
    for name, extent in extents.items():
        if extent is None:
            continue
        assert fig.bbox.x0 - 0.5 <= extent.x0 and extent.x1 <= fig.bbox.x1 + 0.5, name
        assert fig.bbox.y0 - 0.5 <= extent.y0 and extent.y1 <= fig.bbox.y1 + 0.5, name


# --- radial-velocity chart -------------------------------------------------------------------


def test_rv_chart_panels_follow_the_model():
    fig = build_rv_chart(POINTS, MODEL, title="t")
    assert [ax.get_label() for ax in fig.axes] == ["velocity", "velocity residual", "phase", "phase residual"]
    tops = [ax.get_position().y1 for ax in fig.axes]
    assert tops == sorted(tops, reverse=True)  # stacked top to bottom
    velocity, velocity_residual, phase, phase_residual = fig.axes
    assert velocity.get_shared_x_axes().joined(velocity, velocity_residual)
    assert phase.get_shared_x_axes().joined(phase, phase_residual)
    assert not velocity.get_shared_x_axes().joined(velocity, phase)  # time and phase are different axes
    # One velocity scale for time and phase, one residual scale for both residual panels.
    assert velocity.get_ylim() == phase.get_ylim()
    assert velocity_residual.get_ylim() == phase_residual.get_ylim()
    # A model without a period: no phase panels. No model: the time panel alone.
    assert [ax.get_label() for ax in build_rv_chart(POINTS, TREND, title="t").axes] == ["velocity",
                                                                                         "velocity residual"]
    assert [ax.get_label() for ax in build_rv_chart(POINTS, None, title="t").axes] == ["velocity"]


@pytest.mark.parametrize("model", [MODEL, None], ids=["model", "no-model"])
def test_rv_chart_plots_each_velocity_with_its_error_bar_by_source(model):
    fig = build_rv_chart(POINTS, model, title="t")
    ax = panel(fig, "velocity")
    for label, t, v, sigma in ((ECHO, T_ECHO, V_ECHO, SIGMA_ECHO), (LYRA, T_LYRA, V_LYRA, SIGMA_LYRA)):
        order = np.argsort(t)
        x, y, half = errorbars(ax, f"points {label}")
        np.testing.assert_array_equal(x, t[order])  # in time order
        np.testing.assert_array_equal(y, v[order])
        np.testing.assert_allclose(half, sigma, rtol=1e-12)
    # Each source its own marker and colour.
    echo = by_label(ax.containers, f"points {ECHO}").lines[0]
    lyra = by_label(ax.containers, f"points {LYRA}").lines[0]
    assert echo.get_marker() != lyra.get_marker()
    assert echo.get_color() != lyra.get_color()
    # The time axis covers every velocity.
    low, high = ax.get_xlim()
    assert low < min(T_ECHO) and high > max(T_LYRA)


def test_phase_folding_agrees_with_numpy():
    # Phase = fractional part of (t − T) / P, counted from the time of phase 0
    # (common practice for phase diagrams of spectroscopic orbits). Computed
    # here with numpy.floor, independently of the chart's numpy.mod.
    t_all = np.concatenate([T_ECHO, T_LYRA])
    cycles = (t_all - T0) / P
    expected = cycles - np.floor(cycles)
    np.testing.assert_allclose(phase_of(t_all, P, T0), expected, atol=1e-12)
    # Worked by hand: T = 100 d, P = 10 d.
    np.testing.assert_allclose(phase_of([95.0, 100.0, 123.0, 100.0 - 10.0 * 7.25], 10.0, 100.0),
                               [0.5, 0.0, 0.3, 0.75], atol=1e-12)
    # numpy.mod(-1e-17, 1.0) is exactly 1.0 in floating point; a phase is always in [0, 1).
    assert np.mod(-1e-17, 1.0) == 1.0
    assert phase_of([-1e-17], 1.0, 0.0)[0] == 0.0

    fig = build_rv_chart(POINTS, MODEL, title="t")
    ax = panel(fig, "phase")
    for label, t, v, sigma in ((ECHO, T_ECHO, V_ECHO, SIGMA_ECHO), (LYRA, T_LYRA, V_LYRA, SIGMA_LYRA)):
        order = np.argsort(t)
        cycles = (t[order] - T0) / P
        x, y, half = errorbars(ax, f"points {label}")
        np.testing.assert_allclose(x, cycles - np.floor(cycles), atol=1e-12)
        np.testing.assert_array_equal(y, v[order])
        np.testing.assert_allclose(half, sigma, rtol=1e-12)
    assert ax.get_xlim()[0] < 0.0 and ax.get_xlim()[1] > 1.0


def test_folded_model_is_one_cycle_reaching_both_edges():
    fig = build_rv_chart(POINTS, MODEL, title="t")
    line = by_label(panel(fig, "phase").lines, "model")
    x = np.asarray(line.get_xdata(), dtype=float)
    y = np.asarray(line.get_ydata(), dtype=float)
    assert np.all(np.diff(x) >= 0)  # sorted by phase: drawn as one cycle, not zigzagging between cycles
    assert x[0] < 0.0 and x[-1] > 1.0  # carried across both edges
    # The folded curve is the orbit at those phases (the model is strictly periodic).
    np.testing.assert_allclose(y, orbit_velocity(T0 + P * x), atol=1e-9)
    # Continuous across the edges: the velocity at phase 0 and at phase 1 agree.
    assert abs(np.interp(0.0, x, y) - np.interp(1.0, x, y)) < 0.5


def test_residuals_are_observed_minus_model_at_the_velocity_times():
    fig = build_rv_chart(POINTS, MODEL, title="t")
    for label, t, v in ((ECHO, T_ECHO, V_ECHO), (LYRA, T_LYRA, V_LYRA)):
        order = np.argsort(t)
        # numpy.interp of the model (numpy docs); the model is dense enough that this is the orbit
        # itself to well within the errors.
        expected = v[order] - np.interp(t[order], MODEL_T, MODEL.v)
        np.testing.assert_allclose(expected, v[order] - orbit_velocity(t[order]), atol=0.05)
        x, y, _ = errorbars(panel(fig, "velocity residual"), f"points {label}")
        np.testing.assert_array_equal(x, t[order])
        np.testing.assert_allclose(y, expected, atol=1e-9)
        cycles = (t[order] - T0) / P
        x, y, _ = errorbars(panel(fig, "phase residual"), f"points {label}")
        np.testing.assert_allclose(x, cycles - np.floor(cycles), atol=1e-12)
        np.testing.assert_allclose(y, expected, atol=1e-9)
    # Symmetric about zero, so the sign of a residual reads at a glance.
    low, high = panel(fig, "velocity residual").get_ylim()
    assert math.isclose(low, -high)
    # Outside the model's span a residual is left out, not extrapolated.
    short = RVModel([58000.0, 58100.0], [0.0, 10.0], "short", None, None)
    np.testing.assert_allclose(observed_minus_computed([57990.0, 58050.0, 58200.0], [1.0, 6.0, 1.0], short),
                               [np.nan, 1.0, np.nan])


def test_an_unknown_error_draws_no_bar():
    points = [RVPoint(100.0, 5.0, float("nan"), "ECHO", None), RVPoint(110.0, 6.0, 0.5, "ECHO", None)]
    fig = build_rv_chart(points, None, title="t")
    _, _, half = errorbars(panel(fig, "velocity"), "points ECHO")
    np.testing.assert_allclose(half, [0.0, 0.5])


def test_source_labels():
    assert source_label(POINTS[0]) == LYRA
    assert source_label(RVPoint(0.0, 0.0, 1.0, "ECHO", None)) == "ECHO"
    assert source_label(RVPoint(0.0, 0.0, 1.0, None, "ref-1")) == "ref-1"
    assert source_label(RVPoint(0.0, 0.0, 1.0, None, None)) == NO_SOURCE


def test_rv_chart_labels():
    texts = svg_texts(rv_svg())
    for text in ("test-12 Aa: radial velocities", "v (km/s)", "O−C (km/s)", "JD − 2400000",
                 "phase (0 at T = 58010.20; P = 41.3 d)", f"{ECHO} ± 1σ", f"{LYRA} ± 1σ", "orbit fit"):
        assert text in texts, text
    assert "BJD − 2450000" in svg_texts(rv_chart(POINTS, None, title="t", time_label="BJD − 2450000"))
    assert "orbit fit" not in svg_texts(rv_svg(None))


def test_rv_chart_refuses_bad_input():
    with pytest.raises(ValueError) as error:
        rv_chart(POINTS, RVModel(MODEL.t, MODEL.v, "orbit fit", P, None), title="t")
    assert str(error.value) == ("model 'orbit fit' has a period but no T, or a T but no period. Fix: give both to "
                                "fold the velocities on the period (T = time of phase 0), or neither.")
    with pytest.raises(ValueError) as error:
        rv_chart([RVPoint(1.0, 2.0, -0.5, "ECHO", None)], None, title="t")
    assert str(error.value) == ("velocity 0 (t = 1.0) has a negative error -0.5. "
                                "Fix: give the 1-sigma uncertainty, km/s (NaN if unknown).")
    with pytest.raises(ValueError) as error:
        rv_chart([], None, title="t")
    assert str(error.value) == "rv_chart needs at least one radial velocity. Fix: pass the star's velocities."


# --- periodogram ----------------------------------------------------------------------------


def test_periodogram_shows_power_against_period_on_a_log_axis():
    # A log period axis: common practice for period searches spanning decades.
    fig = build_periodogram_chart(PERIOD, POWER, best_period=BEST, fap=2.3e-5, title="t")
    ax = fig.axes[0]
    assert ax.get_xscale() == "log"
    line = by_label(ax.lines, "periodogram")
    order = np.argsort(PERIOD)
    np.testing.assert_array_equal(line.get_xdata(), PERIOD[order])
    np.testing.assert_array_equal(line.get_ydata(), POWER[order])
    assert ax.get_xlim() == (PERIOD.min(), PERIOD.max())
    # The best period is marked at its value and over its peak.
    marker = by_label(ax.lines, "best period")
    assert list(marker.get_xdata()) == [BEST, BEST]
    peak = by_label(ax.lines, "best peak")
    assert list(peak.get_xdata()) == [BEST] and math.isclose(peak.get_ydata()[0], POWER.max())
    assert ax.get_ylim()[1] > POWER.max()  # headroom for the label
    # Plain numbers on the period axis, not powers of ten.
    fig.canvas.draw()
    labels = [t.get_text() for t in ax.get_xticklabels() if t.get_text()]
    assert labels and all(text.replace(".", "").isdigit() for text in labels)


def test_periodogram_labels_the_best_period_with_its_false_alarm_probability():
    texts = svg_texts(periodogram_chart(PERIOD, POWER, best_period=BEST, fap=2.3e-5, title="test-12 Aa: periodogram"))
    for text in ("test-12 Aa: periodogram", "period (d)", "power", f"P = {BEST:.5g} d · FAP = 2.3 × 10⁻⁵"):
        assert text in texts, text
    no_fap = build_periodogram_chart(PERIOD, POWER, best_period=BEST, fap=None, title="t")
    assert by_label(no_fap.axes[0].texts, "best period label").get_text() == f"P = {BEST:.5g} d"
    unmarked = build_periodogram_chart(PERIOD, POWER, best_period=None, fap=None, title="t")
    assert not unmarked.axes[0].texts and len(unmarked.axes[0].lines) == 1


def test_false_alarm_probability_format():
    assert format_fap(0.05) == "5%"
    assert format_fap(0.0023) == "0.23%"
    assert format_fap(2.3e-5) == "2.3 × 10⁻⁵"
    assert format_fap(9.96e-5) == "1.0 × 10⁻⁴"  # rounds up to the next power, not "10.0 × 10⁻⁵"
    assert format_fap(0.0) == "≈ 0"


def test_periodogram_refuses_bad_input():
    with pytest.raises(ValueError) as error:
        periodogram_chart(PERIOD, POWER, best_period=None, fap=0.01, title="t")
    assert str(error.value) == "fap is given without best_period. Fix: give the period it belongs to."
    with pytest.raises(ValueError) as error:
        periodogram_chart(PERIOD, POWER, best_period=BEST, fap=1.5, title="t")
    assert str(error.value) == "fap is 1.5. Fix: give the false-alarm probability as a fraction in [0, 1]."
    with pytest.raises(ValueError) as error:
        periodogram_chart([1.0, 2.0], [0.1], best_period=None, fap=None, title="t")
    assert str(error.value) == "the periodogram has 2 periods and 1 powers. Fix: give one power per period."


# --- detection map -------------------------------------------------------------------------


def test_detection_map_axes_are_log_separation_and_contrast_fainter_down():
    # Δm increasing downward, separation on a log axis: common practice for
    # contrast curves of high-contrast imaging and speckle surveys.
    fig = build_detection_map([SPECKLE], [AO], title="t")
    ax = fig.axes[0]
    assert ax.get_xscale() == "log"
    assert ax.yaxis_inverted()
    bottom, top = ax.get_ylim()
    assert top <= 0.0 and bottom > AO.contrast  # Δm 0 near the top, the limit inside
    left, right = ax.get_xlim()
    assert left < AO.rho_min and right > AO.rho_max
    # The fainter detection is drawn lower on the page.
    y_top = ax.transData.transform((0.21, 1.0))[1]
    y_low = ax.transData.transform((0.21, 5.0))[1]
    assert y_low < y_top


def test_shaded_regions_span_the_search_limits():
    fig = build_detection_map(BUSY_DETECTIONS, BUSY_LIMITS, title="t")
    ax = fig.axes[0]
    for index, limit in enumerate(BUSY_LIMITS):
        box = by_label(ax.patches, f"limit {index}")
        assert box.get_facecolor()[3] > 0  # shaded
        assert (box.get_x(), box.get_x() + box.get_width()) == pytest.approx((limit.rho_min, limit.rho_max))
        assert (box.get_y(), box.get_y() + box.get_height()) == pytest.approx((0.0, limit.contrast))
        # As drawn, through the log axis: the corners land on the limits.
        drawn = box.get_window_extent()
        (x0, y0), (x1, y1) = ax.transData.inverted().transform([(drawn.x0, drawn.y0), (drawn.x1, drawn.y1)])
        assert (x0, x1) == pytest.approx((limit.rho_min, limit.rho_max), rel=1e-6)
        assert sorted((y0, y1)) == pytest.approx([0.0, limit.contrast], abs=1e-6)
        assert by_label(ax.texts, f"limit label {index}").get_text().startswith(
            f"{limit.method} {limit.epoch} ({limit.ref}): Δm < ")


def test_detections_are_drawn_where_measured_and_flagged_inside_a_limit():
    fig = build_detection_map([SPECKLE], [AO], title="t")
    ax = fig.axes[0]
    points = by_label(ax.lines, "detections speckle")
    assert list(points.get_xdata()) == [0.21] and list(points.get_ydata()) == [3.2]
    # 0.21″ lies in 0.05–2.0″ and Δm 3.2 is brighter than 6.0: the AO search should have seen it.
    ring = by_label(ax.lines, "should have been seen")
    assert list(ring.get_xdata()) == [0.21] and list(ring.get_ydata()) == [3.2]
    assert ring.get_markeredgecolor() == common.DISCORDANT
    label = by_label(ax.texts, "detection label 0")
    assert label.get_text() == "B 2019.62" and label.get_color() == common.DISCORDANT
    assert tuple(label.xy) == (0.21, 3.2)

    # Too faint, or beyond the searched separations: not flagged.
    faint = Detection("B", "speckle", "2019.62", 0.21, 6.5, "I", "ref-2020c")
    wide = Detection("B", "speckle", "2019.62", 2.5, 3.2, "I", "ref-2020c")
    fig = build_detection_map([faint, wide], [AO], title="t")
    assert not [line for line in fig.axes[0].lines if line.get_label() == "should have been seen"]


def test_limits_containing_includes_the_edges():
    assert limits_containing(SPECKLE, [AO]) == [0]
    edge = Detection("B", "speckle", "2019.62", AO.rho_max, AO.contrast, "I", "ref")
    assert limits_containing(edge, BUSY_LIMITS) == [0]
    brighter_than_primary = Detection("B", "speckle", "2019.62", 0.21, -0.3, "I", "ref")
    assert limits_containing(brighter_than_primary, [AO]) == [0]
    assert limits_containing(BUSY_DETECTIONS[2], BUSY_LIMITS) == []  # Δm unknown
    assert limits_containing(BUSY_DETECTIONS[1], BUSY_LIMITS) == [0, 1]


def test_a_detection_without_delta_mag_sits_on_the_top_edge():
    fig = build_detection_map(BUSY_DETECTIONS, BUSY_LIMITS, title="t")
    ax = fig.axes[0]
    unknown = by_label(ax.lines, "delta mag unknown")
    assert list(unknown.get_xdata()) == [1.3]
    assert list(unknown.get_ydata()) == [ax.get_ylim()[1]]  # the top of the inverted axis
    assert unknown.get_marker() == "v"
    assert by_label(ax.texts, "detection label 2").get_text() == "C 2016.0 (Δm unknown)"
    # Drawn hanging inside the axes, not into the title.
    fig.canvas.draw()
    marker_top = unknown.get_transform().transform((1.3, ax.get_ylim()[1]))[1]
    assert marker_top < ax.get_window_extent().y1


def test_detection_map_labels():
    texts = svg_texts(detection_map([SPECKLE], [AO], title="test-12: companion claims"))
    for text in ("test-12: companion claims", "separation ρ (″)", "Δm (mag, I band), fainter down",
                 "adaptive optics 2021.30 (ref-2022d): Δm < 6.0", "B 2019.62", "detected: speckle", INSIDE_LABEL,
                 LIMIT_KEY_LABEL, "0.05", "0.1", "2"):
        assert text in texts, text
    # Mixed bands: the axis names none, every label its own.
    texts = svg_texts(detection_map(BUSY_DETECTIONS, BUSY_LIMITS, title="t"))
    for text in ("Δm (mag), fainter down", "adaptive optics 2021.30 (ref-2022d): Δm < 6.0 (I)",
                 "lucky imaging 2012.10 (ref-2013i): Δm < 5.0 (K)", "B 2016.40 (I)", "D 2010.5 (K)",
                 "C 2016.0 (Δm unknown)", UNKNOWN_LABEL, "detected: imaging"):
        assert text in texts, text


# Two companions side by side: the first's label, on its right, would cover the second's marker.
CROWDED = [Detection("B", "speckle", "2019.62", 0.2, 2.0, "I", "ref-2020c"),
           Detection("E", "speckle", "2019.62", 0.3, 2.0, "I", "ref-2020c")]


@pytest.mark.parametrize("detections, limits, count", [(BUSY_DETECTIONS, BUSY_LIMITS, 3 + 2 + 1), (CROWDED, [AO], 4)],
                         ids=["busy", "crowded"])
def test_detection_map_labels_overlap_neither_each_other_nor_the_markers(detections, limits, count):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.transforms import Bbox

    fig = build_detection_map(detections, limits, title="t")
    ax = fig.axes[0]
    with common.house_style():
        canvas = FigureCanvasAgg(fig)
        canvas.draw()
        renderer = canvas.get_renderer()
        boxes = {t.get_label(): t.get_window_extent(renderer) for t in ax.texts}
        frame = ax.get_window_extent(renderer)
    assert len(boxes) == len(detections) + len(limits)
    # Every marker drawn (detections, rings, the Δm-unknown triangle), as a square of its size, where it is drawn.
    markers = []
    for line in ax.lines:
        half = 0.5 * line.get_markersize() * fig.dpi / 72.0
        for x, y in line.get_transform().transform(np.column_stack([line.get_xdata(), line.get_ydata()])):
            markers.append((line.get_label(), Bbox([[x - half, y - half], [x + half, y + half]])))
    assert len(markers) == count  # busy: three with Δm, two rings, one unknown; crowded: two and their rings
    names = sorted(boxes)
    for i, a in enumerate(names):
        assert frame.x0 <= boxes[a].x0 and boxes[a].x1 <= frame.x1, a
        assert frame.y0 <= boxes[a].y0 and boxes[a].y1 <= frame.y1, a
        for b in names[i + 1:]:
            assert not boxes[a].overlaps(boxes[b]), (a, b)
        for marker, box in markers:
            assert not boxes[a].overlaps(box), (a, marker)


def test_detection_map_refuses_bad_input():
    with pytest.raises(ValueError) as error:
        detection_map([], [], title="t")
    assert str(error.value) == ("detection_map needs at least one detection or search limit. "
                                "Fix: pass the system's companion claims.")
    with pytest.raises(ValueError) as error:
        detection_map([], [SearchLimit("adaptive optics", "2021.30", 2.0, 0.05, 6.0, None, "ref")], title="t")
    assert str(error.value) == ("search limit 0 (adaptive optics 2021.30) covers 2.0 to 0.05 arcsec. "
                                "Fix: give 0 < rho_min < rho_max, arcsec.")
