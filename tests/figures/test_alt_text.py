"""Text alternatives of the figures (WCAG 2.1 success criterion 1.1.1), on the demo project.

Every number a test expects is read from the weighed demo (the facts, the
assessments, the evidence) and written with the formatting helpers the
figures use, never typed in; the demo itself is invented
(demo_project/systems/*/evidence.yaml).
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from xml.sax.saxutils import escape

import numpy as np
import pytest

from tests.conftest import DEMO, edit
from tests.figures.svg_helpers import SVG_NS
from dossier import draw
from dossier.engine import weigh_project, weigh_system
from dossier.figures import alt, common
from dossier.fmt import fmt_number, fmt_probability, p_statement
from dossier.schema.loader import load_project
from tests.figures.test_figures import PAIRS, STARS

KINDS = {"sky-chart", "parallaxes", "orbit", "motion", "detection-map", "rv", "periodogram", "hr-diagram",
         "neighbours"}
HOSTILE = '<script>&"'


def every_figure(result) -> list[draw.Figure]:
    """Every figure the site draws for one system, through every draw_* function."""
    return (draw.draw_system(result)
            + [f for pid in result.facts.logs for f in draw.draw_log(result, pid)]
            + draw.draw_detections(result)
            + [f for pid in result.facts.rv_orbits for f in draw.draw_spectroscopic(result, pid)]
            + draw.draw_stars(result) + draw.draw_neighbours(result))


@pytest.fixture(scope="module")
def weighed():
    return weigh_project(load_project(DEMO), use_cache=False)


@pytest.fixture(scope="module")
def heron(weighed):
    return weighed["heron-1"]


@pytest.fixture(scope="module")
def figures(weighed) -> dict[tuple[str, str], draw.Figure]:
    return {(sid, fig.slug): fig for sid, result in weighed.items() for fig in every_figure(result)}


def alt_of(figures, slug: str, sid: str = "heron-1") -> str:
    return figures[(sid, slug)].alt


def sentences(text: str) -> list[str]:
    return re.split(r"(?<=\.) (?=[A-Zθ])", text)


# --- every figure -----------------------------------------------------------------------


def test_every_kind_of_figure_is_covered(figures):
    assert {slug.split("-")[0] if slug.startswith(("orbit-", "motion-", "rv-", "periodogram-")) else slug
            for _, slug in figures} == KINDS


def test_every_figure_has_a_short_plain_alt_naming_its_system(figures):
    for (sid, slug), fig in figures.items():
        assert fig.alt, slug
        assert sid in fig.alt, (slug, fig.alt)
        assert len(fig.alt) <= alt.MAX_CHARS, (slug, len(fig.alt))
        assert fig.alt == " ".join(fig.alt.split()), slug  # one line, no stray white space
        assert 1 <= len(sentences(fig.alt)) <= 3, (slug, fig.alt)
        assert fig.alt.endswith("."), slug


def test_figures_of_a_pair_name_the_pair(figures):
    for (_, slug), fig in figures.items():
        for prefix in ("orbit-", "motion-", "rv-", "periodogram-"):
            if slug.startswith(prefix):
                assert slug.removeprefix(prefix) in fig.alt, (slug, fig.alt)


def test_the_svg_root_carries_the_alt_as_its_name(figures):
    for (_, slug), fig in figures.items():
        root = ET.fromstring(fig.svg)
        assert root.get("role") == "img", slug
        assert root.get("aria-label") == fig.alt, slug
        assert root.get("aria-labelledby") is None, slug  # it would win over aria-label
        title = root.find(f"{SVG_NS}title")
        assert title is not None and title.text == fig.alt, slug
        assert list(root).index(title) == 0, slug  # the first child, as SVG wants its <title>
        assert root.find(f"{SVG_NS}desc").get("id") == root.get("aria-describedby"), slug
        opening = fig.svg[: fig.svg.index(">") + 1]
        assert f'aria-label="{escape(fig.alt, {chr(34): "&quot;"})}"' in opening, slug


def test_alt_text_and_svg_are_the_same_on_every_draw(heron, figures):
    again = {fig.slug: fig for fig in every_figure(heron)}
    for slug, fig in again.items():
        assert fig == figures[("heron-1", slug)], slug


# --- what each alt says, against the weighed demo ----------------------------------------------


def test_sky_chart_alt_gives_each_pair_separation_angle_and_status(heron, figures):
    text = alt_of(figures, "sky-chart")
    assert text.startswith("Sky chart of heron-1, centred on A:")
    placed = {sid for sid, star in heron.facts.stars.items() if star.position is not None}
    drawn = 0
    for pid, pf in heron.facts.pairs.items():
        if pf.rho_arcsec is None or not {pf.first, pf.second} <= placed:  # not on the chart
            assert f"pair {pid}," not in text
            continue
        drawn += 1
        assert f"{pf.second} {common.format_number(pf.rho_arcsec)}″ from {pf.first} " in text, pid
        assert f"{pf.theta_deg:.1f}° (pair {pid}, {heron.verdicts[pid].status})" in text, pid
    assert drawn >= 2
    assert "position angle" in text and "proper motions" in text


def test_parallax_alt_gives_each_combined_parallax_and_the_source_that_deviates(heron, figures):
    text = alt_of(figures, "parallaxes")
    deviating = []
    for sid, star in heron.facts.stars.items():
        plx = star.parallax
        if plx is None:
            continue
        value, error = common.format_with_error(plx.mean, plx.error)
        n = len(plx.sources)
        assert f"{sid} {value} ± {error} mas from {n} source{'s' if n != 1 else ''}" in text, sid
        if plx.dof >= 1 and plx.birge_ratio > 1:
            odd = next(s for s in plx.sources if s.ref == plx.discordant)
            odd_value, odd_error = common.format_with_error(odd.value, odd.error)
            _, widened = common.format_with_error(plx.mean, plx.error_inflated)
            assert (f"(error widened to ± {widened} mas because {odd.ref}, at {odd_value} ± {odd_error} mas, "
                    "deviates)") in text, sid
            deviating.append(sid)
    assert deviating == ["A"]  # the demo's one discordant source
    assert text.count("deviates") == 1


@pytest.mark.parametrize("pair", ["AB", "Ba-Bb"])
def test_log_alts_give_count_span_ranges_and_curvature(heron, figures, pair):
    log = heron.facts.logs[pair]
    first, second = heron.facts.pair_ids[pair].members
    path, motion = alt_of(figures, f"orbit-{pair}"), alt_of(figures, f"motion-{pair}")
    assert path.startswith(f"Path of {second} relative to {first} in heron-1 (pair {pair}):")
    assert motion.startswith(f"θ and ρ against time for heron-1 pair {pair}:")
    flagged = int(np.count_nonzero(log.flagged))
    facts = (f"{len(log.t)} measures from {log.t.min():.1f} to {log.t.max():.1f}"
             + (f" ({flagged} flagged)" if flagged else "")
             + "; θ from ")
    rho = f"ρ from {fmt_number(float(log.rho.min()), 3)}″ to {fmt_number(float(log.rho.max()), 3)}″"
    p = log.curvature.p_value
    for text in (path, motion):
        assert facts in text and rho in text
        if p < heron.facts.settings.log.curvature_p:
            assert f"The path curves: a straight path is ruled out ({p_statement('p', p)})." in text
        else:
            assert f"No significant curvature (p = {fmt_probability(p)})" in text


def test_log_alt_position_angles_of_a_short_arc_and_of_an_orbit_through_north(heron, figures):
    theta = heron.facts.logs["AB"].theta
    assert f"θ from {theta.min():.1f}° to {theta.max():.1f}°" in alt_of(figures, "orbit-AB")
    # Ba-Bb's measures surround north (θ near 0° and 360°): the range goes through 0°
    theta = np.sort(heron.facts.logs["Ba-Bb"].theta % 360)
    gaps = np.diff(np.append(theta, theta[0] + 360))
    k = int(np.argmax(gaps))
    expected = f"θ from {theta[k + 1]:.0f}° through 0° to {theta[k]:.0f}°"
    assert expected in alt_of(figures, "orbit-Ba-Bb") and expected in alt_of(figures, "motion-Ba-Bb")


def test_log_alts_name_the_models_drawn(heron, figures):
    ref = heron.facts.visual_orbit("Ba-Bb").ref
    assert f"the published orbit ({ref})" in alt_of(figures, "orbit-Ba-Bb")
    assert f"Residuals against the published orbit ({ref})." in alt_of(figures, "motion-Ba-Bb")
    assert "Drawn over the measures: a straight line." in alt_of(figures, "orbit-AB")


def test_rv_alt_gives_count_period_and_semi_amplitude(heron, figures):
    orbit = heron.facts.rv_orbits["Aa-Ab"]
    text = alt_of(figures, "rv-Aa-Ab")
    assert text.startswith(f"Radial-velocity chart of {orbit.star} in heron-1 (pair Aa-Ab): {len(orbit.v)} velocities")
    period, period_error = common.format_with_error(orbit.fit.P, orbit.fit.sigma_P)
    k, k_error = common.format_with_error(orbit.fit.K, orbit.fit.sigma_K)
    assert f"period {period} ± {period_error} d" in text
    assert f"semi-amplitude {k} ± {k_error} km/s" in text
    years = 2000.0 + (orbit.jd - 2451545.0) / 365.25
    assert f"between {years.min():.1f} and {years.max():.1f}" in text
    # the chart moves every instrument's zero point onto the reference instrument's (its fitted offsets)
    v = orbit.v - orbit.offsets()
    assert f"from {fmt_number(float(v.min()), 3)} to {fmt_number(float(v.max()), 3)} km/s" in text


def test_periodogram_alt_gives_best_period_and_false_alarm_probability(heron, figures):
    orbit = heron.facts.rv_orbits["Aa-Ab"]
    _, _, best, fap = orbit.periodogram
    text = alt_of(figures, "periodogram-Aa-Ab")
    assert f"radial velocities of {orbit.star} in heron-1 (pair Aa-Ab)" in text
    assert f"the highest peak is at {fmt_number(best)} d, {p_statement('false-alarm probability', fap)}." in text


def test_detection_alt_gives_each_claim_and_each_search(heron, figures):
    text = alt_of(figures, "detection-map")
    claims = [c for c in heron.system.claims if c.rho is not None]
    searches = heron.system.non_detections
    assert claims and searches
    assert f"{len(claims)} claimed detection" in text and f"{len(searches)} search" in text
    for c in claims:
        assert (f"{c.companion} claimed at {c.rho.value:g}″, magnitude difference {c.delta_mag.value:.1f} in "
                f"{c.band} ({c.method}, {c.epoch})") in text
        for n in searches:
            seen = n.rho_range[0] <= c.rho.value <= n.rho_range[1] and c.delta_mag.value <= n.contrast
            assert (f"inside the reach of the {n.method} search of {n.epoch}" in text) == seen
    for n in searches:
        assert (f"{n.method} search of {n.epoch} saw nothing from {n.rho_range[0]:g}″ to {n.rho_range[1]:g}″ "
                f"down to magnitude difference {n.contrast:.1f} in {n.band}") in text


def test_hr_alt_gives_each_star_temperature_and_luminosity(heron, figures):
    text = alt_of(figures, "hr-diagram")
    placed = 0
    for a in heron.assessments:
        if a.rule != "luminosity":
            continue
        q = a.quantity("L_radius") or a.quantity("L_magnitude")
        phys = heron.system.components[a.subject].physical
        if q is None or q.value is None or phys is None or phys.teff is None:
            continue
        placed += 1
        assert (f"{a.subject} at {phys.teff.value:.0f} K and {fmt_number(q.value, 3)} solar luminosities "
                f"({phys.stage})") in text, a.subject
    assert placed == 3
    assert "zero-age main sequence" in text


def test_neighbours_alt_says_which_neighbours_share_the_motion(heron, figures):
    a = next(x for x in heron.assessments if x.rule == "neighbours" and x.outcome != "insufficient")
    share = [n.id for n in heron.system.neighbours if a.quantity(f"shares_{n.id}").value == 1.0]
    apart = [n.id for n in heron.system.neighbours if a.quantity(f"shares_{n.id}").value == 0.0]
    assert len(share) == 2 and len(apart) == 2  # the demo: two neighbours move with the system, two do not
    text = alt_of(figures, "neighbours")
    assert f"{share[0]} and {share[1]} share its space motion; {apart[0]} and {apart[1]} do not." in text
    motion = heron.facts.stars[a.subject].motion
    assert f"{a.subject} moves {fmt_number(abs(motion.pmra), 3)} mas/yr {'east' if motion.pmra >= 0 else 'west'}" \
        in text
    assert f"{fmt_number(abs(motion.pmdec), 3)} mas/yr {'north' if motion.pmdec >= 0 else 'south'}" in text


# --- escaping and length ----------------------------------------------------------------------


def test_a_hostile_title_and_alt_are_escaped_in_the_svg():
    text = f"Sky chart of {HOSTILE} it's\n\tnew"
    svg = common_sky(text)
    assert "<script" not in svg
    root = ET.fromstring(svg)
    assert root.get("aria-label") == f"Sky chart of {HOSTILE} it's new"
    assert root.find(f"{SVG_NS}title").text == f"Sky chart of {HOSTILE} it's new"
    assert 'aria-label="Sky chart of &lt;script&gt;&amp;&quot; it\'s new"' in svg


def common_sky(text: str) -> str:
    from dossier.figures.sky_chart import sky_chart

    return sky_chart(STARS, PAIRS, title=HOSTILE, alt=text)


def test_hostile_evidence_text_is_escaped_from_draw_to_svg(demo_copy):
    edit(demo_copy / "systems/heron-1/evidence.yaml", "band: V, ref: speckle-1986",
         "band: '" + HOSTILE + "', ref: speckle-1986")
    project = load_project(demo_copy)
    result = weigh_system(project.systems["heron-1"], project.settings, project.logs.get("heron-1", ()))
    (fig,) = draw.draw_detections(result)
    assert f"in {HOSTILE} (speckle-interferometry" in fig.alt
    assert "<script" not in fig.svg
    root = ET.fromstring(fig.svg)
    assert root.get("aria-label") == fig.alt and root.find(f"{SVG_NS}title").text == fig.alt


def test_long_lists_give_way_to_a_count():
    from dossier.figures.neighbours_chart import MotionPoint
    from dossier.figures.sky_chart import ChartPair, ChartStar

    stars = [ChartStar(f"S{i}", float(i), float(i), None, None, None) for i in range(40)]
    pairs = [ChartPair(f"P{i}", "S0", f"S{i}", 1.0 + i, 10.0 * i % 360, "optical") for i in range(1, 40)]
    text = alt.sky_chart("test-1", stars, pairs)
    assert len(text) <= alt.MAX_CHARS + 20
    kept = len(re.findall(r"\(pair P\d+,", text))
    assert 2 <= kept < 39 and text.endswith(f"and {39 - kept} more pairs.")
    points = [MotionPoint("A", 1.0, -2.0, 0.1, True, None)] + [
        MotionPoint(f"N{i}", 1.0, -2.0, 0.1, False, i % 2 == 0) for i in range(20)]
    text = alt.neighbours_chart("test-1", points)
    assert "A moves 1.00 mas/yr east and 2.00 mas/yr south" in text
    assert "N0, N2, N4, N6, N8 and 5 more share its space motion; N1, N3, N5, N7, N9 and 5 more do not." in text
    assert len(text) <= alt.MAX_CHARS


def test_figures_without_a_model_say_so():
    from dossier.figures.motion_chart import MotionSeries
    from dossier.figures.rv_chart import RVPoint

    points = [RVPoint(58000.0 + 100 * i, 5.0 + i, 0.3, "spectrograph-1", "paper-1") for i in range(4)]
    text = alt.rv_chart("test-1", "AB", "A", points, period=None, semi_amplitude=None)
    assert text.startswith("Radial-velocity chart of A in test-1 (pair AB): 4 velocities from 1 source")
    assert text.endswith("ranging from 5.00 to 8.00 km/s; no orbit is drawn.")
    text = alt.periodogram("test-1", "AB", "A", [2.0, 50.0, 900.0], best_period=None, fap=None)
    assert text.endswith("trial periods from 2.00 to 900 d: no peak is marked.")
    series = MotionSeries((2001.0, 2003.0), (355.0, 5.0), (1.2, 1.3), (0.5, 0.5), (0.01, 0.01), (False, False))
    text = alt.motion("test-1", "AB", series, p_curvature=None, curved=False, residual_model=None)
    assert text == ("θ and ρ against time for test-1 pair AB: 2 measures from 2001.0 to 2003.0; θ from 355° through 0° "
                    "to 5°, ρ from 1.20″ to 1.30″. Too few nights to test whether the path curves.")
