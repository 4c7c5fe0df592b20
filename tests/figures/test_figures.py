"""Tests of the figure package, through the data each figure shows.

All stars, pairs and references here are invented.
"""

from __future__ import annotations

import math
import re
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

from tests.figures.svg_helpers import SVG_NS, by_label, svg_texts
from dossier.figures import common
from dossier.figures.parallax_chart import (
    ParallaxRow,
    ParallaxSource,
    build_parallax_chart,
    parallax_chart,
    source_label,
)
from dossier.figures.sky_chart import (
    STATUS_STYLE,
    ChartPair,
    ChartStar,
    build_sky_chart,
    pair_label,
    sky_chart,
)

REPO = Path(__file__).resolve().parents[2]

# A compact system: offsets within ~16 arcsec, so a linear chart.
STARS = [
    ChartStar("A", 0.0, 0.0, -11.2, 23.4, 5.9),
    ChartStar("B", 8.7, 8.9, -10.8, 22.9, 8.1),
    ChartStar("C", -15.0, -6.0, 3.0, -1.5, 11.4),
    ChartStar("D", -4.0, 12.0, None, None, None),
]
PAIRS = [
    ChartPair("AB", "A", "B", 12.45, 44.3, "bound"),
    ChartPair("AC", "A", "C", 16.16, 248.2, "optical"),
    ChartPair("AD", "A", "D", 12.65, 341.6, "undetermined"),
    ChartPair("BC", "B", "C", 27.6, 238.7, "co-moving"),
]

# A hierarchical system: a 0.139" companion and a 300" one.
WIDE_STARS = [
    ChartStar("Aa", 0.0, 0.0, 40.0, -25.0, 4.2),
    ChartStar("Ab", 0.07, -0.12, 38.0, -22.0, 6.3),
    ChartStar("B", -180.0, 240.0, 41.0, -24.5, 9.0),
]
WIDE_PAIRS = [
    ChartPair("Aa-Ab", "Aa", "Ab", 0.139, 149.7, "bound"),
    ChartPair("AB", "Aa", "B", 300.0, 323.1, "co-moving"),
]

ROWS = [
    ParallaxRow(
        "A",
        [
            ParallaxSource("survey-2", 4.10, 0.09, "J2016.0"),
            ParallaxSource("survey-3", 4.02, 0.05, "J2017.5"),
            ParallaxSource("survey-1", 3.62, 0.35, "J1991.25"),
        ],
        4.04,
        0.043,
        0.06,
        None,
    ),
    ParallaxRow(
        "B",
        [
            ParallaxSource("survey-2", 4.31, 0.08, "J2016.0"),
            ParallaxSource("paper-4", 5.40, 0.30, None),
        ],
        4.35,
        0.077,
        0.077,
        "paper-4",
    ),
    ParallaxRow("C", [ParallaxSource("survey-3", 1.21, 0.12, "J2017.5")], None, None, None, None),
]

# The parallaxes of the demo system heron-1 (demo_project/systems/heron-1/
# evidence.yaml), with the combination the engine derives from them: A and B
# of a physical pair near 8.5 mas, and a background star D at 1.2 mas.
HERON = [
    ParallaxRow(
        "A",
        [
            ParallaxSource("sky-survey-1", 7.95, 0.62, "J1991.25"),
            ParallaxSource("sky-survey-2", 8.71, 0.06, "J2015.5"),
            ParallaxSource("sky-survey-3", 8.44, 0.04, "J2016.0"),
        ],
        8.5214,
        0.0332,
        0.0906,
        "sky-survey-2",
    ),
    ParallaxRow(
        "B",
        [ParallaxSource("sky-survey-3", 8.47, 0.04, "J2016.0"), ParallaxSource("sky-survey-2", 8.52, 0.07, "J2015.5")],
        8.4823,
        0.0347,
        0.0347,
        None,
    ),
    ParallaxRow("D", [ParallaxSource("sky-survey-3", 1.21, 0.06, "J2016.0")], 1.21, 0.06, 0.06, None),
]


# --- determinism and inlining ------------------------------------------------------


def test_sky_chart_is_byte_identical_across_calls():
    # matplotlib docs (matplotlibrc, svg.hashsalt; Figure.savefig metadata):
    # without a fixed salt the clip-path ids are random, without Date=None
    # the file carries a timestamp.
    assert sky_chart(STARS, PAIRS, title="t") == sky_chart(STARS, PAIRS, title="t")
    assert sky_chart(WIDE_STARS, WIDE_PAIRS, title="t") == sky_chart(WIDE_STARS, WIDE_PAIRS, title="t")


def test_parallax_chart_is_byte_identical_across_calls():
    # matplotlib docs, as above.
    assert parallax_chart(ROWS, title="t") == parallax_chart(ROWS, title="t")


def test_svg_is_byte_identical_across_processes():
    script = (
        "import sys; from tests.figures.test_figures import STARS, PAIRS; "
        "from dossier.figures.sky_chart import sky_chart; "
        "sys.stdout.buffer.write(sky_chart(STARS, PAIRS, title='t').encode('utf-8'))"
    )
    other = subprocess.run(
        [sys.executable, "-c", script], cwd=REPO, capture_output=True, check=True, env={"PYTHONPATH": str(REPO)}
    ).stdout.decode("utf-8")
    assert other == sky_chart(STARS, PAIRS, title="t")


def test_svg_can_be_inlined_in_html():
    svg = sky_chart(STARS, PAIRS, title="Sky chart of test-1")
    assert svg.startswith("<svg")
    assert "<?xml" not in svg and "<!DOCTYPE" not in svg
    root = ET.fromstring(svg)  # well-formed XML
    assert root.get("role") == "img"
    assert root.find(f"{SVG_NS}title").text == "Sky chart of test-1"
    # Every id carries the figure's own prefix, so two figures on one page
    # never share one, and every reference points at an id of this figure.
    root_id = root.get("id")
    ids = re.findall(r'\bid="([^"]+)"', svg)
    assert all(i == root_id or i.startswith(root_id + "-") for i in ids)
    assert len(ids) == len(set(ids))
    references = re.findall(r'href="#([^"]+)"|url\(#([^)]+)\)', svg)
    assert references and all((a or b) in ids for a, b in references)
    other = parallax_chart(ROWS, title="t")
    assert not set(ids) & set(re.findall(r'\bid="([^"]+)"', other))
    # matplotlib's "*{...}" stylesheet is scoped to this figure.
    assert f"#{root_id} *{{" in svg


def test_figures_leave_rcparams_alone():
    import matplotlib

    before = dict(matplotlib.rcParams)
    sky_chart(STARS, PAIRS, title="t")
    parallax_chart(ROWS, title="t")
    assert dict(matplotlib.rcParams) == before


def test_importing_the_figure_modules_does_not_import_matplotlib():
    # DESIGN.md, set-up facts: matplotlib costs ~0.7 s; the CLI must not pay it at start-up.
    script = (
        "import sys, dossier.figures.sky_chart, dossier.figures.parallax_chart, dossier.figures.common; "
        "print('matplotlib' in sys.modules)"
    )
    out = subprocess.run(
        [sys.executable, "-c", script], cwd=REPO, capture_output=True, check=True, env={"PYTHONPATH": str(REPO)}
    ).stdout
    assert out.strip() == b"False"


# --- sky chart ---------------------------------------------------------------------


def test_sky_chart_shows_every_star_and_pair_label():
    texts = svg_texts(sky_chart(STARS, PAIRS, title="t"))
    for star in STARS:
        assert star.id in texts
    for pair in PAIRS:
        assert pair_label(pair) in texts
    assert "N" in texts and "E" in texts  # the compass


def test_pair_label_format():
    # Separation to three significant figures, angle to 0.1 degree, the
    # double prime for arcseconds (common practice in double-star work).
    assert pair_label(ChartPair("AB", "A", "B", 12.345, 45.64, "bound")) == "ρ = 12.3″, θ = 45.6°"
    assert pair_label(ChartPair("AB", "A", "B", 0.139, 3.0, "bound")) == "ρ = 0.139″, θ = 3.0°"
    assert pair_label(ChartPair("AB", "A", "B", 312.54, 300.0, "bound")) == "ρ = 312.5″, θ = 300.0°"


def test_east_is_to_the_left_and_north_up():
    # Common practice: charts of the sky as seen from the ground put east
    # on the left, north at the top.
    ax = build_sky_chart(STARS, PAIRS, title="t").axes[0]
    assert ax.xaxis_inverted()
    assert not ax.yaxis_inverted()
    left, right = ax.get_xlim()
    assert left > max(s.east_arcsec for s in STARS) and right < min(s.east_arcsec for s in STARS)
    # B lies to the north-east: it is drawn up and to the left of A.
    a, b = ax.transData.transform([(0.0, 0.0), (STARS[1].east_arcsec, STARS[1].north_arcsec)])
    assert b[0] < a[0] and b[1] > a[1]
    assert ax.get_aspect() == 1.0


def test_arrows_are_position_plus_motion_over_the_stated_years():
    years = 500.0
    ax = build_sky_chart(STARS, PAIRS, title="t", arrow_years=years).axes[0]
    for star in STARS:
        if star.pm_ra is None:
            assert not [t for t in ax.texts if t.get_label() == f"motion of {star.id}"]
            continue
        arrow = by_label(ax.texts, f"motion of {star.id}")
        # 1 arcsec = 1000 mas (definition); pm_ra already includes cos(dec).
        assert arrow.xyann == pytest.approx((star.east_arcsec, star.north_arcsec), abs=1e-12)
        assert arrow.xy == pytest.approx(
            (star.east_arcsec + star.pm_ra * years / 1000.0, star.north_arcsec + star.pm_dec * years / 1000.0),
            abs=1e-12,
        )
    assert "motion in 500 yr" in [t.get_text() for t in ax.figure.legends[0].get_texts()]


def test_arrow_years_chosen_so_the_longest_arrow_is_a_quarter_of_the_span():
    stars = [ChartStar("A", 0.0, 0.0, 0.0, 25.0, 6.0), ChartStar("B", 10.0, 0.0, 0.0, 20.0, 7.0)]
    pairs = [ChartPair("AB", "A", "B", 10.0, 90.0, "bound")]
    ax = build_sky_chart(stars, pairs, title="t").axes[0]
    # Span 10", fastest 25 mas/yr: a quarter of the span is 2.5" = 2500 mas,
    # reached in 100 yr, already a round number.
    assert "motion in 100 yr" in [t.get_text() for t in ax.figure.legends[0].get_texts()]
    arrow = by_label(ax.texts, "motion of A")
    assert arrow.xy == pytest.approx((0.0, 2.5), abs=1e-12)


def test_symlog_is_chosen_for_a_system_spanning_orders_of_magnitude():
    ax = build_sky_chart(WIDE_STARS, WIDE_PAIRS, title="t").axes[0]
    assert ax.get_xscale() == "symlog" and ax.get_yscale() == "symlog"
    # Linear up to the power of ten at or below the closest offset (0.139").
    assert ax.xaxis.get_transform().linthresh == pytest.approx(0.1)
    assert "log scale" in ax.get_xlabel() and "log scale" in ax.get_ylabel()
    assert ax.xaxis_inverted()
    linear = build_sky_chart(STARS, PAIRS, title="t").axes[0]
    assert linear.get_xscale() == "linear" and "log" not in linear.get_xlabel()


def test_symlog_arrows_keep_the_direction_and_ratio_of_the_proper_motions():
    ax = build_sky_chart(WIDE_STARS, WIDE_PAIRS, title="t").axes[0]
    transform = ax.xaxis.get_transform()  # same scale on both axes
    vectors = {}
    for star in WIDE_STARS:
        arrow = by_label(ax.texts, f"motion of {star.id}")
        tail = transform.transform(np.array(arrow.xyann))
        tip = transform.transform(np.array(arrow.xy))
        vectors[star.id] = tip - tail
    for star in WIDE_STARS:
        v = vectors[star.id]
        assert math.atan2(v[1], v[0]) == pytest.approx(math.atan2(star.pm_dec, star.pm_ra), abs=1e-9)
    ratio = np.hypot(*vectors["Ab"]) / np.hypot(*vectors["Aa"])
    assert ratio == pytest.approx(math.hypot(38.0, -22.0) / math.hypot(40.0, -25.0), rel=1e-9)


def test_pair_lines_join_their_stars_and_differ_by_status():
    ax = build_sky_chart(STARS, PAIRS, title="t").axes[0]
    position = {s.id: (s.east_arcsec, s.north_arcsec) for s in STARS}
    looks = set()
    for pair in PAIRS:
        line = by_label(ax.lines, f"pair {pair.id}")
        assert list(zip(line.get_xdata(), line.get_ydata())) == [position[pair.first], position[pair.second]]
        assert line.get_color() == STATUS_STYLE[pair.status]["color"]
        looks.add((line.get_color(), str(line.get_linestyle())))
    assert len(looks) == len(PAIRS)  # four statuses, four looks


def test_brighter_stars_get_bigger_markers():
    ax = build_sky_chart(STARS, PAIRS, title="t").axes[0]
    sizes = {s.id: by_label(ax.lines, f"star {s.id}").get_markersize() for s in STARS}
    assert sizes["A"] > sizes["B"] > sizes["C"]  # magnitudes 5.9 < 8.1 < 11.4


def test_sky_chart_reports_unknown_members_with_the_fix():
    with pytest.raises(ValueError, match=r"names star 'Q'.*Did you mean one of: A, B, C, D\?$"):
        sky_chart(STARS, [ChartPair("AQ", "A", "Q", 1.0, 0.0, "bound")], title="t")
    with pytest.raises(ValueError, match=r"status 'maybe'\. Fix: use one of: bound, co-moving, optical, undetermined\.$"):
        sky_chart(STARS, [ChartPair("AB", "A", "B", 1.0, 0.0, "maybe")], title="t")


def test_pair_labels_overlap_neither_each_other_nor_the_edges():
    from dossier.figures.sky_chart import _box, _overlap

    for stars, pairs in ((STARS, PAIRS), (WIDE_STARS, WIDE_PAIRS)):
        fig = build_sky_chart(stars, pairs, title="t")
        ax = fig.axes[0]
        renderer = common.text_renderer(fig)
        boxes = []
        by_id = {p.id: p for p in pairs}
        for label in [t for t in ax.texts if t.get_label().startswith("label of ")]:
            pair = by_id[label.get_label().removeprefix("label of ")]
            assert label.get_text() in (f"{pair.id}  {pair_label(pair)}", pair_label(pair), pair.id)
            extent = label.get_window_extent(renderer)
            frame = ax.get_window_extent(renderer)
            assert frame.x0 <= extent.x0 and extent.x1 <= frame.x1 and frame.y0 <= extent.y0 and extent.y1 <= frame.y1
            rotation = math.radians(label.get_rotation())
            label.set_rotation(0)
            flat = label.get_window_extent(renderer)
            label.set_rotation(math.degrees(rotation))
            centre = np.array([0.5 * (extent.x0 + extent.x1), 0.5 * (extent.y0 + extent.y1)])
            boxes.append(_box(centre, np.array([math.cos(rotation), math.sin(rotation)]), flat.width / 2, flat.height / 2))
        assert boxes  # at least one line is long enough for a label
        for i, a in enumerate(boxes):
            assert not any(_overlap(a, b) for b in boxes[i + 1 :])


def test_rectangle_overlap_test():
    from dossier.figures.sky_chart import _box, _overlap

    # Separating axis theorem (a fact of plane geometry): two thin
    # rectangles turned 45 degrees, side by side, whose axis-aligned
    # bounding boxes overlap but which do not touch.
    diagonal = np.array([1.0, 1.0])
    a = _box(np.array([0.0, 0.0]), diagonal, 10.0, 1.0)
    b = _box(np.array([3.0, -3.0]), diagonal, 10.0, 1.0)
    assert not _overlap(a, b)
    assert _overlap(a, _box(np.array([1.0, -1.0]), diagonal, 10.0, 1.0))
    assert _overlap(a, _box(np.array([0.0, 0.0]), np.array([1.0, -1.0]), 10.0, 1.0))  # a cross


@pytest.mark.parametrize(
    "build",
    [
        lambda: build_sky_chart(STARS, PAIRS, title="A title of some length for the sky chart"),
        lambda: build_sky_chart(WIDE_STARS, WIDE_PAIRS, title="t"),
        lambda: build_parallax_chart(ROWS, title="A title of some length for the parallax chart"),
        lambda: build_parallax_chart(HERON, title="heron-1: parallaxes"),
    ],
    ids=["sky", "sky-symlog", "parallax", "parallax-heron"],
)
def test_no_text_is_cut_off_by_the_edge_of_the_figure(build):
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    fig = build()
    with common.house_style():
        canvas = FigureCanvasAgg(fig)
        canvas.draw()
        renderer = canvas.get_renderer()
        extents = {"key": fig.legends[0].get_window_extent(renderer)}
        for ax in fig.axes:  # every panel of the parallax chart
            name = ax.get_label()
            extents.update({
                f"x axis {name}": ax.xaxis.get_tightbbox(renderer),
                f"y axis {name}": ax.yaxis.get_tightbbox(renderer),
                f"title {name}": ax.title.get_window_extent(renderer) if ax.title.get_text() else None,
                f"left title {name}": ax._left_title.get_window_extent(renderer),  # noqa: SLF001 - titles sit left
            })
            extents.update({f"text {t.get_text()!r}": t.get_window_extent(renderer) for t in ax.texts if t.get_text()})
    for name, extent in extents.items():
        if extent is None:
            continue
        assert fig.bbox.x0 - 0.5 <= extent.x0 and extent.x1 <= fig.bbox.x1 + 0.5, name
        assert fig.bbox.y0 - 0.5 <= extent.y0 and extent.y1 <= fig.bbox.y1 + 0.5, name


def test_single_star_chart_draws():
    svg = sky_chart([ChartStar("A", 0.0, 0.0, None, None, None)], [], title="t")
    assert "A" in svg_texts(svg)


# --- parallax chart ------------------------------------------------------------------


def test_parallax_chart_shows_every_source_and_component():
    texts = svg_texts(parallax_chart(ROWS, title="t"))
    for row in ROWS:
        assert row.component in texts
        for source in row.sources:
            assert source_label(source, discordant=source.ref == row.discordant_ref) in texts
    assert "paper-4 · discordant" in texts


def panel(fig, component):
    """The axes of one component in a parallax chart."""
    return by_label(fig.axes, component)


def test_parallax_chart_has_one_panel_per_component_top_to_bottom():
    fig = build_parallax_chart(ROWS, title="t")
    assert [ax.get_label() for ax in fig.axes] == [row.component for row in ROWS]
    boxes = [ax.get_position() for ax in fig.axes]
    for upper, lower in zip(boxes, boxes[1:]):
        assert lower.y1 < upper.y0  # stacked, without overlap
        assert (lower.x0, lower.x1) == pytest.approx((upper.x0, upper.x1))  # one column: x axes line up
    # Every line of the chart is as tall in every panel: heights follow the
    # number of sources (plus 1.1 lines of room for the heading and foot).
    per_line = [box.height / (len(row.sources) + 1.1) for box, row in zip(boxes, ROWS)]
    assert per_line == pytest.approx([per_line[0]] * len(ROWS), rel=1e-9)
    assert fig.axes[-1].get_xlabel() == "Parallax (mas)"
    assert [ax.get_xlabel() for ax in fig.axes[:-1]] == ["", ""]


def test_parallax_chart_plots_each_measurement_with_its_error():
    fig = build_parallax_chart(ROWS, title="t")
    for row in ROWS:
        ax = panel(fig, row.component)
        assert len(ax.containers) == len(row.sources)
        slots = []
        for source in row.sources:
            container = by_label(ax.containers, f"{row.component} {source.ref}")
            data_line, _caps, (bars,) = container.lines
            assert list(data_line.get_xdata()) == [source.parallax]
            ((x0, y0), (x1, y1)) = bars.get_segments()[0]
            assert (x0, x1) == pytest.approx((source.parallax - source.error, source.parallax + source.error))
            assert y0 == y1 == data_line.get_ydata()[0]
            slots.append(y0)
        # Sources run from top to bottom, in the order given.
        assert ax.yaxis_inverted()
        assert slots == sorted(slots)
        assert [t.get_text() for t in ax.get_yticklabels()] == [
            source_label(s, discordant=s.ref == row.discordant_ref) for s in row.sources
        ]


def test_each_panel_fits_its_group_and_overlapping_components_share_one_range():
    # The padding rule of dossier/figures/parallax_chart.py (module
    # docstring): a group's range covers every error bar and band of its
    # members, padded on each side by 10% of its span or half its smallest
    # 1-sigma error, whichever is more. By hand from ROWS:
    #   A: 3.62 - 0.35 = 3.27 to 4.10 + 0.09 = 4.19; padded 3.178 to 4.282;
    #   B: 4.31 - 0.08 = 4.23 to 5.40 + 0.30 = 5.70; padded 4.083 to 5.847;
    #   A and B overlap: one group, 3.27 to 5.70, padded by 0.243;
    #   C: 1.21 -+ 0.12 = 1.09 to 1.33, padded by max(0.024, 0.06) = 0.06.
    fig = build_parallax_chart(ROWS, title="t")
    a, b, c = (panel(fig, k) for k in "ABC")
    assert a.get_xlim() == pytest.approx((3.27 - 0.243, 5.70 + 0.243), abs=1e-12)
    assert b.get_xlim() == pytest.approx(a.get_xlim(), abs=1e-12)
    assert c.get_xlim() == pytest.approx((1.09 - 0.06, 1.33 + 0.06), abs=1e-12)
    assert a.get_shared_x_axes().joined(a, b)
    assert not a.get_shared_x_axes().joined(a, c)
    # A's panel sits right on top of B's, which shows the tick labels for both.
    assert not any(t.get_visible() for t in a.get_xticklabels())
    assert all(t.get_visible() for t in b.get_xticklabels())
    assert all(t.get_visible() for t in c.get_xticklabels())


def test_a_background_star_no_longer_hides_the_scatter_of_the_others():
    # heron-1, the case that asked for panels: A and B near 8.5 mas, D at
    # 1.2 mas. Same padding rule as above: A and B span 7.33 (7.95 - 0.62)
    # to 8.77 (8.71 + 0.06), padded by 0.144; D spans 1.15 to 1.27, padded
    # by max(0.012, 0.06 / 2) = 0.03.
    fig = build_parallax_chart(HERON, title="t")
    a, b, d = (panel(fig, k) for k in "ABD")
    assert a.get_xlim() == b.get_xlim() == pytest.approx((7.186, 8.914), abs=1e-12)
    assert d.get_xlim() == pytest.approx((1.12, 1.30), abs=1e-12)
    # A's two precise sources (8.44 and 8.71 mas) now lie 15% of the panel
    # apart; on the one shared axis (about 0.5 to 9.4 mas) it was 3%.
    left, right = a.get_xlim()
    assert (8.71 - 8.44) / (right - left) > 0.15
    # Everything the panels show lies inside them.
    for row, ax in zip(HERON, fig.axes):
        low, high = ax.get_xlim()
        for source in row.sources:
            assert low < source.parallax - source.error and source.parallax + source.error < high
        half = max(row.combined_error, row.inflated_error)
        assert low < row.combined - half and row.combined + half < high


def test_components_share_a_range_even_when_not_neighbours():
    a, d, b = HERON[0], HERON[2], HERON[1]
    fig = build_parallax_chart([a, d, b], title="t")
    top, middle, bottom = fig.axes
    assert top.get_xlim() == bottom.get_xlim() != middle.get_xlim()
    assert top.get_shared_x_axes().joined(top, bottom)
    # Not next to each other: each panel shows its own tick labels.
    assert all(t.get_visible() for ax in fig.axes for t in ax.get_xticklabels())


def test_overlap_is_transitive_and_a_component_without_data_joins_its_neighbour():
    def row(component, value):
        return ParallaxRow(component, [ParallaxSource("s", value, 0.1, None)], None, None, None, None)

    # The padding rule of dossier/figures/parallax_chart.py (module
    # docstring), by hand: each row spans its value -+ 0.1, padded by
    # max(10% of 0.2, 0.1 / 2) = 0.05 for the overlap test: A 1.00-1.30,
    # B 1.20-1.50, C 1.40-1.70, F 3.00-3.30. A meets B, B meets C, A does
    # not meet C. The group spans 1.05 to 1.65, padded by 10% of 0.6; F
    # spans 3.05 to 3.25, padded by 0.05.
    rows = [row("A", 1.15), row("B", 1.35), row("C", 1.55), ParallaxRow("E", [], None, None, None, None),
            row("F", 3.15)]
    fig = build_parallax_chart(rows, title="t")
    a, b, c, e, f = fig.axes
    assert a.get_xlim() == b.get_xlim() == c.get_xlim() == pytest.approx((0.99, 1.71), abs=1e-12)
    assert e.get_xlim() == c.get_xlim()
    assert f.get_xlim() == pytest.approx((3.00, 3.30), abs=1e-12)
    assert "no parallax measured" in [t.get_text() for t in e.texts]


def test_parallax_chart_shades_formal_and_inflated_errors():
    fig = build_parallax_chart(ROWS, title="t")

    def x_extent(component, label):
        band = by_label(panel(fig, component).collections, label)
        xs = np.concatenate([path.vertices[:, 0] for path in band.get_paths()])
        return xs.min(), xs.max()

    assert x_extent("A", "formal A") == pytest.approx((4.04 - 0.043, 4.04 + 0.043))
    assert x_extent("A", "inflated A") == pytest.approx((4.04 - 0.06, 4.04 + 0.06))
    # B's inflated error equals its formal one: one band only.
    assert x_extent("B", "formal B") == pytest.approx((4.35 - 0.077, 4.35 + 0.077))
    assert not [c for c in panel(fig, "B").collections if c.get_label() == "inflated B"]
    (segment,) = by_label(panel(fig, "A").collections, "combined A").get_segments()
    assert segment[0][0] == segment[1][0] == pytest.approx(4.04)
    # The line spans the component's three sources (lines 1 to 3), not its heading (line 0).
    assert sorted([segment[0][1], segment[1][1]]) == pytest.approx([1 - 0.45, 3 + 0.45])
    # C has a single measurement and no combined value.
    assert not [c for c in panel(fig, "C").collections if c.get_label().endswith(" C")]


def test_parallax_chart_marks_the_discordant_source():
    ax = panel(build_parallax_chart(ROWS, title="t"), "B")
    odd = by_label(ax.containers, "B paper-4").lines[0]
    usual = by_label(ax.containers, "B survey-2").lines[0]
    assert odd.get_marker() != usual.get_marker()
    assert odd.get_markeredgecolor() == common.DISCORDANT
    (label,) = [t for t in ax.get_yticklabels() if "discordant" in t.get_text()]
    assert label.get_text() == "paper-4 · discordant" and label.get_color() == common.DISCORDANT


def test_parallax_chart_key_names_every_kind_of_mark():
    fig = build_parallax_chart(HERON, title="t")
    assert [t.get_text() for t in fig.legends[0].get_texts()] == [
        "measured ± 1σ", "discordant", "combined", "formal ± 1σ", "inflated ± 1σ",
    ]


def test_panels_and_their_tick_labels_do_not_collide():
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    # A narrow axes (a long source name) and long tick numbers (a precise
    # parallax): matplotlib's default ticks would run into each other.
    tight = [ParallaxRow("A", [ParallaxSource("a-source-with-a-long-name-indeed", 1000.0123, 0.0021, "J2016.0")],
                         None, None, None, None)]
    for rows in (ROWS, HERON, tight):
        fig = build_parallax_chart(rows, title="t")
        with common.house_style():
            canvas = FigureCanvasAgg(fig)
            canvas.draw()
            renderer = canvas.get_renderer()
        frames = [ax.get_window_extent(renderer) for ax in fig.axes]
        for i, ax in enumerate(fig.axes):
            low, high = ax.get_xlim()
            labels = sorted((t.get_window_extent(renderer) for t, x in zip(ax.get_xticklabels(), ax.get_xticks())
                             if t.get_visible() and t.get_text() and low <= x <= high), key=lambda e: e.x0)
            assert all(left.x1 < right.x0 for left, right in zip(labels, labels[1:])), ax.get_label()
            below = frames[i + 1] if i + 1 < len(frames) else None
            assert below is None or all(label.y0 > below.y1 for label in labels), ax.get_label()


def test_parallax_chart_reports_an_unknown_discordant_ref_with_the_fix():
    rows = [ParallaxRow("A", [ParallaxSource("survey-2", 4.1, 0.1, None)], 4.1, 0.1, None, "survey-9")]
    with pytest.raises(ValueError, match=r"Did you mean one of: survey-2\?$"):
        parallax_chart(rows, title="t")


# --- formatting ----------------------------------------------------------------------


def test_value_and_error_formatting():
    # Two significant figures of the uncertainty, the value to the same
    # decimal place (common practice for quoting uncertainties).
    assert common.format_with_error(4.0404, 0.043) == ("4.040", "0.043")
    assert common.format_with_error(4.1, 0.11) == ("4.10", "0.11")
    assert common.format_with_error(123.4, 2.5) == ("123.4", "2.5")
