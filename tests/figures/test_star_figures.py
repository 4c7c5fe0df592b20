"""Tests of the figures of the stars themselves: the Hertzsprung–Russell diagram and the neighbours chart.

Tested through the data each figure shows, not its pixels (STYLE.md, Tests).
Everything here is invented: a K giant (4800 K, 60 L☉), a G dwarf (5800 K,
1.2 L☉) and a cool dwarf (4300 K, 0.2 L☉) against a power-law stand-in for the
zero-age main sequence from 3000 to 30 000 K and three made-up lines of equal
main-sequence lifetime; a system of two components with five neighbours and
four space velocities.
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
from dossier.figures.hr_diagram import (
    KIND_KEY,
    STAR_KEY,
    HRLine,
    HRStar,
    build_hr_diagram,
    hr_diagram,
    star_label,
)
from dossier.figures.neighbours_chart import (
    CATEGORY_KEY,
    CATEGORY_STYLE,
    ERROR_KEY,
    MotionPoint,
    build_neighbours_chart,
    category,
    neighbours_chart,
)

REPO = Path(__file__).resolve().parents[2]

# --- the invented stars and lines ------------------------------------------------------------


def zams() -> HRLine:
    """A stand-in for the ZAMS: L = 0.7 (T / 5800 K)^6.4 L☉ (invented, only roughly the shape of the real one)."""
    t = np.geomspace(3000.0, 30000.0, 25)
    return HRLine("ZAMS", tuple(t), tuple(0.7 * (t / 5800.0) ** 6.4), "zams")


def lifetime_line(label: str, gyr: float) -> HRLine:
    """A made-up line of equal main-sequence lifetime: along the main sequence up to a turn-off mass
    M ∝ t^−0.4 (from t ∝ M^−2.5), then across to the giants (invented shape)."""
    m_to = (gyr / 10.0) ** -0.4
    m = np.linspace(0.45 * m_to, m_to, 12)
    t = 5800.0 * m**0.55
    lum = 0.7 * m**3.5 * (1.0 + 0.6 * (m / m_to) ** 4)
    giant_t = np.array([0.8 * t[-1] + 0.2 * 5000.0, 5000.0, 4600.0, 4200.0])
    giant_l = lum[-1] * np.array([1.3, 1.8, 6.0, 25.0])
    return HRLine(label, tuple(np.concatenate([t, giant_t])), tuple(np.concatenate([lum, giant_l])), "isochrone")


GIANT = HRStar("A", 4800.0, 120.0, 60.0, 48.0, 78.0, "K giant")
DWARF = HRStar("B", 5800.0, 90.0, 1.2, 1.05, 1.4, "G dwarf")
COOL = HRStar("C", 4300.0, 150.0, 0.2, 0.16, 0.26, None)
STARS = [GIANT, DWARF, COOL]
LINES = [zams(), lifetime_line("100 Myr", 0.1), lifetime_line("1 Gyr", 1.0), lifetime_line("10 Gyr", 10.0)]

POINTS = [
    MotionPoint("A", -12.3, 25.1, 0.4, True, None),
    MotionPoint("B", -12.9, 24.6, 0.6, True, None),
    MotionPoint("N1", -11.8, 23.9, 0.8, False, True),
    MotionPoint("N2", -13.6, 26.2, 1.2, False, True),
    MotionPoint("N3", 5.2, -3.1, 0.5, False, False),
    MotionPoint("N4", -30.0, 10.4, 2.0, False, False),
    MotionPoint("N5", -8.1, 19.7, 3.0, False, None),
]
VELOCITIES = [("A", -22.1, -14.3, 0.8, 0.6), ("B", -21.5, -14.9, 1.1, 0.9), ("N1", -20.9, -13.1, 1.5, 1.2),
              ("N3", 12.0, -30.5, 2.0, 1.8)]


# --- helpers ---------------------------------------------------------------------------------


def errorbars(ax, label):
    """x, y and the error bars of an errorbar container, as drawn: ``(x, y, left, right, below, above)``.

    matplotlib docs, ``Axes.errorbar``: the container holds ``(data_line,
    caplines, barlinecols)``; each x bar is a segment from (x − left, y) to
    (x + right, y), each y bar from (x, y − below) to (x, y + above). Told
    apart by their direction, not their order.
    """
    container = by_label(ax.containers, label)
    line = container.lines[0]
    x = np.asarray(line.get_xdata(), dtype=float)
    y = np.asarray(line.get_ydata(), dtype=float)
    bars = {}
    for collection in container.lines[2]:
        segments = np.asarray(collection.get_segments(), dtype=float)
        horizontal = np.allclose(segments[:, 0, 1], segments[:, 1, 1])
        bars["x" if horizontal else "y"] = segments
    xs, ys = bars["x"], bars["y"]
    np.testing.assert_allclose(xs[:, 0, 1], y)
    np.testing.assert_allclose(ys[:, 0, 0], x)
    return x, y, x - xs[:, 0, 0], xs[:, 1, 0] - x, y - ys[:, 0, 1], ys[:, 1, 1] - y


def star_svgs() -> str:
    return (hr_diagram(STARS, LINES, title="test-7: HR diagram") + hr_diagram([DWARF], [], title="t")
            + neighbours_chart(POINTS, title="test-7: neighbours", velocity_points=VELOCITIES)
            + neighbours_chart(POINTS, title="t"))


# --- determinism and house rules ---------------------------------------------------------------------


def test_star_figures_are_byte_identical_across_calls():
    # matplotlib docs (matplotlibrc, svg.hashsalt; Figure.savefig metadata):
    # common.to_svg fixes the salt of the ids and drops the timestamp.
    assert hr_diagram(STARS, LINES, title="t") == hr_diagram(STARS, LINES, title="t")
    assert hr_diagram([COOL], [], title="t") == hr_diagram([COOL], [], title="t")
    assert neighbours_chart(POINTS, title="t") == neighbours_chart(POINTS, title="t")
    assert (neighbours_chart(POINTS, title="t", velocity_points=VELOCITIES)
            == neighbours_chart(POINTS, title="t", velocity_points=VELOCITIES))


def test_star_figures_are_byte_identical_across_processes():
    script = ("import sys; from tests.figures.test_star_figures import star_svgs; "
              "sys.stdout.buffer.write(star_svgs().encode('utf-8'))")
    other = subprocess.run(
        [sys.executable, "-c", script], cwd=REPO, capture_output=True, check=True, env={"PYTHONPATH": str(REPO)}
    ).stdout.decode("utf-8")
    assert other == star_svgs()


def test_star_figures_leave_rcparams_alone_and_import_lazily():
    import matplotlib

    before = dict(matplotlib.rcParams)
    star_svgs()
    assert dict(matplotlib.rcParams) == before
    # DESIGN.md, set-up facts: matplotlib costs ~0.7 s; the CLI must not pay it at start-up.
    script = ("import sys, dossier.figures.hr_diagram, dossier.figures.neighbours_chart; "
              "print('matplotlib' in sys.modules)")
    out = subprocess.run(
        [sys.executable, "-c", script], cwd=REPO, capture_output=True, check=True, env={"PYTHONPATH": str(REPO)}
    ).stdout
    assert out.strip() == b"False"


@pytest.mark.parametrize(
    "build",
    [
        lambda: build_hr_diagram(STARS, LINES, title="A title of some length for the Hertzsprung–Russell diagram"),
        lambda: build_hr_diagram([DWARF, GIANT], [], title="t"),
        lambda: build_hr_diagram([COOL], [LINES[0]], title="t"),
        lambda: build_neighbours_chart(POINTS, title="A title of some length for the neighbours chart",
                                       velocity_points=VELOCITIES),
        lambda: build_neighbours_chart(POINTS, title="t"),
        lambda: build_neighbours_chart(POINTS[:1], title="t"),
    ],
    ids=["hr", "hr-no-lines", "hr-one-star", "neighbours-velocities", "neighbours", "neighbours-lone"],
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


def label_boxes_and_markers(fig, ax):
    """Window extents of the labels of an axes, and every data marker drawn there as a square of its size."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.transforms import Bbox

    with common.house_style():
        canvas = FigureCanvasAgg(fig)
        canvas.draw()
        renderer = canvas.get_renderer()
        boxes = {t.get_label(): t.get_window_extent(renderer) for t in ax.texts}
        frame = ax.get_window_extent(renderer)
    markers = []
    for line in ax.lines:  # the data markers; not the lines, nor the caps of error bars (labelled "_nolegend_")
        if line.get_label().startswith("_") or line.get_linestyle() not in ("None", "none", ""):
            continue
        half = 0.5 * line.get_markersize() * fig.dpi / 72.0
        for x, y in line.get_transform().transform(np.column_stack([line.get_xdata(), line.get_ydata()])):
            markers.append((line.get_label(), Bbox([[x - half, y - half], [x + half, y + half]])))
    for container in ax.containers:  # matplotlib docs, Axes.errorbar: the markers are the container's first line
        line = container.lines[0]
        half = 0.5 * line.get_markersize() * fig.dpi / 72.0
        for x, y in line.get_transform().transform(np.column_stack([line.get_xdata(), line.get_ydata()])):
            markers.append((container.get_label(), Bbox([[x - half, y - half], [x + half, y + half]])))
    return boxes, markers, frame


def assert_clear(boxes, markers, frame):
    names = sorted(boxes)
    for i, a in enumerate(names):
        assert frame.x0 <= boxes[a].x0 and boxes[a].x1 <= frame.x1, a
        assert frame.y0 <= boxes[a].y0 and boxes[a].y1 <= frame.y1, a
        for b in names[i + 1:]:
            assert not boxes[a].overlaps(boxes[b]), (a, b)
        for marker, box in markers:
            assert not boxes[a].overlaps(box), (a, marker)


# --- Hertzsprung–Russell diagram ----------------------------------------------------------------------


def test_temperature_axis_is_logarithmic_and_decreases_to_the_right():
    fig = build_hr_diagram(STARS, LINES, title="t")
    ax = fig.axes[0]
    # Common practice since Hertzsprung and Russell: hotter to the left, on log scales.
    assert ax.get_xscale() == "log"
    assert ax.get_yscale() == "log"
    assert ax.xaxis_inverted()
    left, right = ax.get_xlim()
    assert left > right
    x_hot = ax.transData.transform((30000.0, 1.0))[0]
    x_cool = ax.transData.transform((3000.0, 1.0))[0]
    assert x_hot < x_cool
    # Log scale: equal ratios are equal distances on the page (5000 → 10000 as far as 10000 → 20000).
    xs = [ax.transData.transform((t, 1.0))[0] for t in (5000.0, 10000.0, 20000.0)]
    assert xs[0] - xs[1] == pytest.approx(xs[1] - xs[2], rel=1e-9)
    assert not ax.yaxis_inverted()


def test_stars_are_drawn_at_their_values_with_asymmetric_luminosity_bars():
    ax = build_hr_diagram(STARS, LINES, title="t").axes[0]
    x, y, left, right, below, above = errorbars(ax, "stars")
    # The bars are the inputs themselves: ± teff_err in temperature, from lum_low to lum_high in luminosity.
    np.testing.assert_allclose(x, [4800.0, 5800.0, 4300.0])
    np.testing.assert_allclose(y, [60.0, 1.2, 0.2])
    np.testing.assert_allclose(left, [120.0, 90.0, 150.0])
    np.testing.assert_allclose(right, [120.0, 90.0, 150.0])
    np.testing.assert_allclose(below, [12.0, 0.15, 0.04], rtol=1e-12)
    np.testing.assert_allclose(above, [18.0, 0.2, 0.06], rtol=1e-12)


@pytest.mark.parametrize("unknown", [math.nan, None], ids=["nan", "none"])
def test_unknown_errors_draw_no_bar(unknown):
    star = HRStar("D", 6100.0, unknown, 2.0, unknown, unknown, None)
    _, _, left, right, below, above = errorbars(build_hr_diagram([star, COOL], [], title="t").axes[0], "stars")
    np.testing.assert_allclose([left[0], right[0], below[0], above[0]], 0.0)
    np.testing.assert_allclose([left[1], below[1], above[1]], [150.0, 0.04, 0.06])
    assert "Star D: 6100 K, 2.00 L☉." in ET.fromstring(hr_diagram([star], [], title="t")).find(f"{SVG_NS}desc").text


def test_limits_cover_every_star_with_its_bars_and_every_line():
    ax = build_hr_diagram(STARS, LINES, title="t").axes[0]
    hot, cool = ax.get_xlim()
    low, high = ax.get_ylim()
    for s in STARS:
        assert cool < s.teff - s.teff_err and s.teff + s.teff_err < hot
        assert low < s.lum_low and s.lum_high < high
    for line in LINES:
        assert cool < min(line.teff) and max(line.teff) < hot
        assert low < min(line.luminosity) and max(line.luminosity) < high
    # Only the stars: the axes close in on them (within a decade of temperature around 4300–5800 K).
    ax = build_hr_diagram(STARS, [], title="t").axes[0]
    hot, cool = ax.get_xlim()
    assert 5950.0 < hot < 8000.0 and 3000.0 < cool < 4150.0


def test_zams_is_solid_and_lifetime_lines_dashed_each_labelled_at_an_end():
    ax = build_hr_diagram(STARS, LINES, title="t").axes[0]
    for line in LINES:
        drawn = by_label(ax.lines, f"line {line.label}")
        np.testing.assert_allclose(drawn.get_xdata(), line.teff)
        np.testing.assert_allclose(drawn.get_ydata(), line.luminosity)
        # The brief: the ZAMS solid, lines of equal main-sequence lifetime dashed.
        assert drawn.get_linestyle() == ("-" if line.kind == "zams" else "--")
        label = by_label(ax.texts, f"end label of {line.label}")
        assert label.get_text() == line.label
        ends = [(line.teff[0], line.luminosity[0]), (line.teff[-1], line.luminosity[-1])]
        assert any(np.allclose(label.xy, end) for end in ends), (line.label, label.xy)


def test_hr_diagram_labels_in_the_svg():
    texts = svg_texts(hr_diagram(STARS, LINES, title="test-7: Hertzsprung–Russell diagram"))
    for text in ("test-7: Hertzsprung–Russell diagram", "A (K giant)", "B (G dwarf)", "C", "ZAMS", "100 Myr",
                 "1 Gyr", "10 Gyr", "effective temperature (K), hotter to the left", "luminosity (L☉)", STAR_KEY,
                 KIND_KEY["zams"], KIND_KEY["isochrone"], "30 000", "10 000", "5000", "3000", "10⁴", "10⁻²"):
        assert text in texts, text
    assert star_label(COOL) == "C" and star_label(GIANT) == "A (K giant)"


def test_hr_diagram_labels_overlap_neither_each_other_nor_the_markers():
    fig = build_hr_diagram(STARS, LINES, title="t")
    boxes, markers, frame = label_boxes_and_markers(fig, fig.axes[0])
    assert len(boxes) == len(STARS) + len(LINES)
    assert len(markers) == len(STARS)
    assert_clear(boxes, markers, frame)


def test_hr_diagram_describes_itself():
    svg = hr_diagram(STARS, LINES, title="t")
    desc = ET.fromstring(svg).find(f"{SVG_NS}desc").text
    assert "Star A (K giant): 4800 ± 120 K, 60.0 L☉ (1σ 48.0 to 78.0)." in desc
    assert "Zero-age main sequence, ZAMS: 3000 to 30 000 K." in desc


@pytest.mark.parametrize(
    "stars, lines, message",
    [
        ([], LINES, "hr_diagram needs at least one star. "
                    "Fix: pass the components that have a temperature and a luminosity."),
        ([GIANT, HRStar("A", 5000.0, 50.0, 1.0, 0.9, 1.1, None)], [],
         "two stars have the id 'A'. Fix: give each star its own id."),
        ([HRStar("A", -4800.0, 120.0, 60.0, 48.0, 78.0, None)], [],
         "star 0 (A) has temperature -4800.0. Fix: give the effective temperature in K, > 0."),
        ([HRStar("A", 4800.0, -1.0, 60.0, 48.0, 78.0, None)], [],
         "star 0 (A) has temperature error -1.0. Fix: give the 1-sigma error in K, >= 0, or NaN if it is not known."),
        ([HRStar("A", 4800.0, 120.0, 0.0, 48.0, 78.0, None)], [],
         "star 0 (A) has luminosity 0.0. Fix: give the luminosity in L☉, > 0."),
        ([HRStar("A", 4800.0, 120.0, 60.0, 12.0, 18.0, None)], [],  # the errors, not the ends of the interval
         "star 0 (A) has luminosity 60.0 with interval 12.0 to 18.0. Fix: give the ends of the 1-sigma interval "
         "in L☉ (0 < lum_low <= luminosity <= lum_high), not the errors; or NaN for both if it is not known."),
        ([GIANT], [HRLine("ZAMS", (3000.0, 30000.0), (0.01, 1e4), "main sequence")],
         "line 'ZAMS' has kind 'main sequence'. Did you mean one of: zams, isochrone?"),
        ([GIANT], [LINES[0], LINES[0]], "two lines are labelled 'ZAMS'. Fix: give each line its own label."),
        ([GIANT], [HRLine("ZAMS", (3000.0, 30000.0), (0.01,), "zams")],
         "line 'ZAMS' has 2 temperatures and 1 luminosities. Fix: give one of each per sample."),
        ([GIANT], [HRLine("ZAMS", (3000.0,), (0.01,), "zams")],
         "line 'ZAMS' has fewer than two samples. Fix: sample it along its length."),
        ([GIANT], [HRLine("ZAMS", (3000.0, 30000.0), (0.0, 1e4), "zams")],
         "line 'ZAMS' has a temperature or luminosity that is not a finite positive number. "
         "Fix: give temperatures in K and luminosities in L☉, > 0."),
    ],
    ids=["no-star", "same-id", "temperature", "temperature-error", "luminosity", "interval", "kind", "same-label",
         "lengths", "one-sample", "line-value"],
)
def test_hr_diagram_refuses_bad_input(stars, lines, message):
    with pytest.raises(ValueError) as error:
        hr_diagram(stars, lines, title="t")
    assert str(error.value) == message


# --- neighbours chart ----------------------------------------------------------------------------------


def test_category_of_a_point():
    assert [category(p) for p in POINTS] == ["system", "system", "shares", "shares", "does not share",
                                             "does not share", "not judged"]
    assert category(MotionPoint("A", 0.0, 0.0, 0.1, True, False)) == "system"  # sharing is about neighbours


def test_proper_motions_are_drawn_where_measured_by_kind():
    fig = build_neighbours_chart(POINTS, title="t", velocity_points=VELOCITIES)
    ax = by_label(fig.axes, "proper motion")
    for kind in ("system", "shares", "does not share", "not judged"):
        mine = [p for p in POINTS if category(p) == kind]
        line = by_label(ax.lines, f"motion {kind}")
        np.testing.assert_allclose(line.get_xdata(), [p.pmra for p in mine])  # μα* to the right
        np.testing.assert_allclose(line.get_ydata(), [p.pmdec for p in mine])  # μδ up
        assert line.get_color() == CATEGORY_STYLE[kind]["color"]
        assert line.get_marker() == CATEGORY_STYLE[kind]["marker"]
    assert not ax.xaxis_inverted() and not ax.yaxis_inverted()
    # Colour and marker both differ between kinds, so that print in grey still tells them apart.
    assert len({s["color"] for s in CATEGORY_STYLE.values()}) == 4
    assert len({s["marker"] for s in CATEGORY_STYLE.values()}) == 4


def test_error_circles_have_the_proper_motion_error_as_radius_and_equal_scales():
    points = POINTS + [MotionPoint("N6", -2.0, 4.0, math.nan, False, None)]
    fig = build_neighbours_chart(points, title="t")
    ax = fig.axes[0]
    for p in POINTS:
        circle = by_label(ax.patches, f"error circle {p.id}")
        assert circle.center == pytest.approx((p.pmra, p.pmdec))
        assert circle.radius == pytest.approx(p.pm_err)
        low_x, high_x = ax.get_xlim()
        low_y, high_y = ax.get_ylim()
        assert low_x < p.pmra - p.pm_err and p.pmra + p.pm_err < high_x
        assert low_y < p.pmdec - p.pm_err and p.pmdec + p.pm_err < high_y
    assert not [a for a in ax.patches if a.get_label() == "error circle N6"]  # an unknown error draws none
    # Equal scales (common practice for vector-point diagrams): a circle is round on the page.
    assert ax.get_aspect() == 1.0
    assert np.diff(ax.get_xlim())[0] == pytest.approx(np.diff(ax.get_ylim())[0])
    box = ax.get_position()
    width_in, height_in = fig.get_size_inches()
    assert box.width * width_in == pytest.approx(box.height * height_in)


@pytest.mark.parametrize("unknown", [math.nan, None], ids=["nan", "none"])
def test_unknown_errors_draw_no_circle_and_no_bar(unknown):
    points = [MotionPoint("A", 1.0, 2.0, unknown, True, None), MotionPoint("N1", 3.0, -1.0, 0.5, False, True)]
    fig = build_neighbours_chart(points, title="t", velocity_points=[("A", -5.0, 3.0, unknown, 0.7)])
    pm, vax = fig.axes
    assert [a.get_label() for a in pm.patches if a.get_label().startswith("error circle")] == ["error circle N1"]
    _, _, left, right, below, above = errorbars(vax, "velocity A")
    np.testing.assert_allclose([left[0], right[0], below[0], above[0]], [0.0, 0.0, 0.7, 0.7])
    svg = neighbours_chart(points, title="t", velocity_points=[("A", -5.0, 3.0, unknown, 0.7)])
    assert "A: U -5 (error unknown), V 3.00 ± 0.70." in ET.fromstring(svg).find(f"{SVG_NS}desc").text


def test_velocity_panel_shows_u_against_v_with_error_bars():
    fig = build_neighbours_chart(POINTS, title="t", velocity_points=VELOCITIES)
    assert [ax.get_label() for ax in fig.axes] == ["proper motion", "velocity"]
    pm, vax = fig.axes
    kinds = {p.id: category(p) for p in POINTS}
    for star_id, u, v, su, sv in VELOCITIES:
        x, y, left, right, below, above = errorbars(vax, f"velocity {star_id}")
        np.testing.assert_allclose([x[0], y[0]], [u, v])
        np.testing.assert_allclose([left[0], right[0], below[0], above[0]], [su, su, sv, sv])
        container = by_label(vax.containers, f"velocity {star_id}")
        assert container.lines[0].get_color() == CATEGORY_STYLE[kinds[star_id]]["color"]
    assert vax.get_xlabel() == "U (km/s)" and vax.get_ylabel() == "V (km/s)"
    assert vax.get_aspect() == 1.0
    # Two squares of one size, side by side.
    a, b = pm.get_position(), vax.get_position()
    assert a.width == pytest.approx(b.width) and a.height == pytest.approx(b.height)
    assert a.y0 == pytest.approx(b.y0) and a.x1 < b.x0
    # No velocities, no second panel.
    assert len(build_neighbours_chart(POINTS, title="t", velocity_points=[]).axes) == 1
    assert len(build_neighbours_chart(POINTS, title="t").axes) == 1


def test_neighbours_chart_labels_in_the_svg():
    texts = svg_texts(neighbours_chart(POINTS, title="test-7: neighbours", velocity_points=VELOCITIES))
    for text in ("test-7: neighbours", "μα* (mas/yr)", "μδ (mas/yr)", "U (km/s)", "V (km/s)", ERROR_KEY,
                 *CATEGORY_KEY.values()):
        assert text in texts, text
    # The system's components are always named, in both panels.
    assert texts.count("A") == 2 and texts.count("B") == 2
    # Only the kinds on the chart are in the key.
    texts = svg_texts(neighbours_chart(POINTS[:3], title="t"))
    assert CATEGORY_KEY["shares"] in texts and CATEGORY_KEY["not judged"] not in texts


def test_neighbours_chart_labels_overlap_neither_each_other_nor_the_markers():
    fig = build_neighbours_chart(POINTS, title="t", velocity_points=VELOCITIES)
    for ax in fig.axes:
        boxes, markers, frame = label_boxes_and_markers(fig, ax)
        assert {"label of A", "label of B"} <= set(boxes)
        assert_clear(boxes, markers, frame)
    # Here every neighbour has room for its id as well.
    pm_boxes = label_boxes_and_markers(fig, fig.axes[0])[0]
    assert set(pm_boxes) == {f"label of {p.id}" for p in POINTS}


def test_neighbours_chart_describes_itself():
    desc = ET.fromstring(neighbours_chart(POINTS, title="t", velocity_points=VELOCITIES)).find(f"{SVG_NS}desc").text
    # Each value to the decimals its error deserves (common.format_with_error: two significant figures of the error).
    assert "N3 (neighbour not sharing it): (5.20, -3.10) ± 0.50." in desc
    assert "N4 (neighbour not sharing it): (-30.0, 10.4) ± 2.0." in desc
    assert "N1: U -20.9 ± 1.5, V -13.1 ± 1.2." in desc
    assert "N3: U 12.0 ± 2.0, V -30.5 ± 1.8." in desc


@pytest.mark.parametrize(
    "points, velocities, message",
    [
        (POINTS[2:], None, "neighbours_chart needs at least one component of the system. "
                           "Fix: pass the system's components with is_system=True."),
        (POINTS + [MotionPoint("A", 0.0, 0.0, 1.0, False, None)], None,
         "two points have the id 'A'. Fix: give each star its own id."),
        ([MotionPoint("A", math.nan, 1.0, 1.0, True, None)], None,
         "point 'A' has proper motion (nan, 1.0). Fix: leave out stars without a measured proper motion."),
        ([MotionPoint("A", 1.0, 1.0, -1.0, True, None)], None,
         "point 'A' has proper-motion error -1.0. Fix: give the 1-sigma error in mas/yr, >= 0, or NaN if it is not "
         "known."),
        (POINTS[:2], [("C", 1.0, 2.0, 0.1, 0.1)],
         "velocity of 'C' names a star that is not on the chart. Did you mean one of: A, B?"),
        (POINTS[:2], [("A", 1.0, 2.0, 0.1)], "velocity entry ('A', 1.0, 2.0, 0.1) has 4 fields. "
                                              "Fix: give (id, U, V, sigma_U, sigma_V), km/s."),
        (POINTS[:2], [("A", 1.0, 2.0, 0.1, 0.1), ("A", 1.0, 2.0, 0.1, 0.1)],
         "two velocities are given for 'A'. Fix: give one velocity per star."),
        (POINTS[:2], [("A", 1.0, math.inf, 0.1, 0.1)],
         "velocity of 'A' is (1.0, inf). Fix: leave out stars without U and V."),
        (POINTS[:2], [("A", 1.0, 2.0, 0.1, -0.1)],
         "velocity of 'A' has sigma_V -0.1. Fix: give the 1-sigma error in km/s, >= 0, or NaN if it is not known."),
    ],
    ids=["no-system", "same-id", "motion", "motion-error", "velocity-id", "velocity-fields", "velocity-twice",
         "velocity", "velocity-error"],
)
def test_neighbours_chart_refuses_bad_input(points, velocities, message):
    with pytest.raises(ValueError) as error:
        neighbours_chart(points, title="t", velocity_points=velocities)
    assert str(error.value) == message
