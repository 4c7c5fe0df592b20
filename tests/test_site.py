"""The static site: pages per system with their verdicts, byte-identical rebuilds, safe notes."""

from __future__ import annotations

import hashlib
import re
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from dossier.cli import cli
from dossier.errors import DossierError
from dossier.site import build, write_site
from tests.conftest import DEMO, edit
from tests.test_cli_end_to_end import EXPECTED, PROBABILITY_OF


@pytest.fixture(scope="module")
def site(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("site") / "public"
    result = CliRunner().invoke(cli, ["build", str(DEMO), "--out", str(out), "--no-pdf"])
    assert result.exit_code == 0, result.output
    assert result.output.strip().endswith(str(out.resolve() / "index.html"))
    return out


def test_every_system_page_shows_each_pairs_verdict(site):
    for (system, pair), status in EXPECTED.items():
        page = (site / "systems" / system / "index.html").read_text()
        block = page[page.index(f'id="pair-{pair}"'):]
        block = block[: block.index("</article>")]
        assert f'<span class="status status-{status}">{status}</span>' in block
        assert f'<span class="prob">{PROBABILITY_OF[status]}' in block  # named: of what it is the probability


def test_index_lists_every_system_with_its_statuses(site):
    index = (site / "index.html").read_text()
    for system in ("alder-4", "heron-1", "wren-9"):
        assert f'href="systems/{system}/index.html"' in index
    assert 'data-status="bound optical undetermined"' in index


def test_pages_carry_figures_sources_and_assumptions(site):
    page = (site / "systems/heron-1/index.html").read_text()
    # sky chart, parallaxes, two figures for each of the two logged pairs and the ephemeris of Ba-Bb (the
    # one with an orbit), the detection map, the RV curve, the periodogram, the HR diagram and the
    # neighbours' motions
    assert page.count("<svg") == 12
    assert "heron-1: sky chart" in page and "heron-1: parallaxes" in page
    assert "https://doi.org/10.99999/demo.survey.2" in page
    assert "<code>length_scale_kpc</code></td><td>1.35" in page
    assert "Against this verdict" in page


def test_markdown_notes_render_and_raw_html_is_escaped(demo_copy, tmp_path):
    path = demo_copy / "systems/wren-9/evidence.yaml"
    edit(path, "  stars. The motions agree", "  stars. <script>alert(1)</script> The **motions** agree")
    out = tmp_path / "out"
    build(demo_copy, out, pdf=False)
    page = (out / "systems/wren-9/index.html").read_text()
    assert "<script>alert(1)</script>" not in page
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in page
    assert "<strong>motions</strong>" in page


def test_rebuild_is_byte_identical(tmp_path):
    def digest(root: Path) -> dict[str, str]:
        return {str(p.relative_to(root)): hashlib.sha256(p.read_bytes()).hexdigest()
                for p in sorted(root.rglob("*")) if p.is_file()}

    build(DEMO, tmp_path / "one", pdf=False)
    build(DEMO, tmp_path / "two", pdf=False)
    assert digest(tmp_path / "one") == digest(tmp_path / "two")


def test_links_inside_the_site_resolve(site):
    for page in site.rglob("*.html"):
        for link in re.findall(r'(?:href|src)="([^"#:]+)"', page.read_text()):
            target = page.parent / link
            assert target.exists(), f"{page}: {link}"


def test_a_foreign_folder_is_never_overwritten(tmp_path):
    out = tmp_path / "mine"
    out.mkdir()
    (out / "thesis.tex").write_text("precious")
    with pytest.raises(DossierError, match="not empty and was not built by dossier"):
        write_site(out, {"index.html": "x"})
    assert (out / "thesis.tex").read_text() == "precious"


def test_a_failed_build_leaves_the_previous_site_in_place(demo_copy, tmp_path):
    out = tmp_path / "out"
    build(demo_copy, out, pdf=False)
    before = (out / "index.html").read_text()
    edit(demo_copy / "systems/wren-9/evidence.yaml", "id: wren-9", "id: wren-8")
    result = CliRunner().invoke(cli, ["build", str(demo_copy), "--out", str(out)])
    assert result.exit_code == 1
    assert (out / "index.html").read_text() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out", "project"]


def test_observing_log_section_shows_figures_measures_and_flags(site):
    page = (site / "systems/heron-1/index.html").read_text()
    section = page[page.index('id="log-Ba-Bb"'):]
    section = section[: section.index("</section>")]
    assert 'id="figure-orbit-Ba-Bb"' in section and 'id="figure-motion-Ba-Bb"' in section
    log_table = section[section.index('class="log-table"'):]
    assert log_table.count("<tr") - 1 == 42  # every measure of the log, flagged ones included
    # the ephemeris of its published orbit: a figure, and a row every 5 years for 30 years
    assert 'id="figure-ephemeris-Ba-Bb"' in section
    ephemeris = section[section.index('class="ephemeris-table"'):section.index('class="log-table"')]
    assert ephemeris.count("<tr") - 1 == 7
    assert section.count('class="flagged"') == 1
    assert "from the published orbit" in section
    # the optical pair's page shows its straight-line motion
    alder = (site / "systems/alder-4/index.html").read_text()
    assert 'id="log-AB"' in alder and "straight line (as an optical pair moves)" in alder


def test_companion_claims_section_shows_grades_and_figures(site):
    page = (site / "systems/heron-1/index.html").read_text()
    section = page[page.index('<section id="claims">'):]
    section = section[: section.index("</section>")]
    assert '<span class="grade-word grade-word-doubtful">doubtful</span>' in section
    assert '<span class="grade-word grade-word-confirmed">confirmed</span>' in section
    assert 'id="figure-detection-map"' in section and 'id="figure-rv-Aa-Ab"' in section
    assert "Not seen by adaptive-optics" in section
    # the pair's verdict card points to the grade of its claimed companion
    card = page[page.index('id="pair-AC"'):]
    assert "graded <a href=\"#grade-C\"><strong>doubtful</strong></a>" in card[: card.index("</article>")]


def test_stars_section_shows_hr_diagram_coevality_neighbours_and_closest_approach(site):
    page = (site / "systems/heron-1/index.html").read_text()
    section = page[page.index('<section id="stars">'):]
    section = section[: section.index("</section>")]
    assert 'id="figure-hr-diagram"' in section and 'id="figure-neighbours"' in section
    assert "Co-evality of the members (AB)" in section
    assert "Closest approach to the Sun (A)" in section
    assert "field-1" in section and "shares the motion" in section


def test_catalogue_exports_read_back_with_astropy(site):
    # astropy (reference library) reads back exactly what was written, in both formats
    from astropy.table import Table

    from dossier.engine import weigh_project
    from dossier.exports import catalogue_table
    from dossier.schema.loader import load_project

    written = catalogue_table(weigh_project(load_project(DEMO)))
    for name, fmt in (("catalogue.ecsv", "ascii.ecsv"), ("catalogue.vot", "votable")):
        back = Table.read(site / name, format=fmt)
        assert back.colnames == written.colnames
        assert [str(x) for x in back["status"]] == [str(x) for x in written["status"]]
        assert [str(x) for x in back["probability_of"]] == [str(x) for x in written["probability_of"]]
        assert [bool(x) for x in back["limited_by_model"]] == [bool(x) for x in written["limited_by_model"]]
        for col in ("probability", "p_bound", "p_comoving", "p_chance", "log10_odds_physical", "rho", "distance"):
            # NaN where a verdict has none (heron-1 AC): equal as written, NaN included
            np.testing.assert_array_equal(np.asarray(back[col], dtype=float), np.asarray(written[col], dtype=float))
        assert str(back["rho"].unit) == "arcsec"
    statuses = {(str(r["system"]), str(r["pair"])): str(r["status"]) for r in written}
    assert statuses == EXPECTED
    for r in written:
        assert str(r["probability_of"]) == PROBABILITY_OF[str(r["status"])]
        if np.isfinite(r["p_bound"]):  # the three hypotheses' probabilities sum to 1
            assert abs(r["p_bound"] + r["p_comoving"] + r["p_chance"] - 1) < 1e-12
    ac = next(r for r in written if (str(r["system"]), str(r["pair"])) == ("heron-1", "AC"))
    assert np.isnan(ac["probability"]) and np.isnan(ac["log10_odds_physical"])  # nothing could be weighed


def test_manifest_lists_inputs_and_outputs_and_verify_finds_edits(tmp_path):
    import json

    out = tmp_path / "site"
    build(DEMO, out, pdf=False)
    manifest = json.loads((out / "manifest.json").read_text())
    assert "systems/heron-1/evidence.yaml" in manifest["inputs"]
    assert "systems/heron-1/log.csv" in manifest["inputs"]
    assert "systems/heron-1/index.html" in manifest["outputs"]
    runner = CliRunner()
    assert runner.invoke(cli, ["verify", str(out)]).exit_code == 0
    (out / "systems/wren-9/index.html").write_text("edited")
    (out / "extra.txt").write_text("x")
    (out / "catalogue.vot").unlink()
    result = runner.invoke(cli, ["verify", str(out)])
    assert result.exit_code == 1
    assert result.output.splitlines() == [
        f"{out}: changed: systems/wren-9/index.html",
        f"{out}: missing: catalogue.vot",
        f"{out}: not in the manifest: extra.txt",
    ]


def test_every_page_has_its_provenance_table_and_prov_json(site):
    import json

    page = (site / "systems/heron-1/index.html").read_text()
    section = page[page.index('<section id="provenance">'):]
    section = section[: section.index("</section>")]
    # a measured value as recorded, with its source's citation and DOI
    assert "8.71 ± 0.06 mas" in section and "doi:10.99999/demo.survey.2" in section
    # a derived value with its rule and the inputs it came from
    from dossier.rules import distance

    assert f"rule <code>distance</code> v{distance.RULE.version}" in section
    assert "sky-survey-1, sky-survey-2, sky-survey-3" in section
    doc = json.loads((site / "systems/heron-1/provenance.json").read_text())
    assert {"entity", "activity", "agent", "wasGeneratedBy", "used", "wasDerivedFrom"} <= set(doc)


def test_unchanged_systems_take_their_figures_from_the_cache(demo_copy, tmp_path):
    import json
    import shutil

    shutil.rmtree(demo_copy / ".dossier-cache", ignore_errors=True)
    build(demo_copy, tmp_path / "one", pdf=False)
    entries = {p.name.rsplit("-", 1)[0]: p for p in (demo_copy / ".dossier-cache").glob("figures-*.json")}
    assert sorted(entries) == ["figures-alder-4", "figures-heron-1", "figures-wren-9"]  # figures-<system>-<key>.json
    for path in entries.values():  # mark every cached figure: a marked figure on a page came from the cache
        data = json.loads(path.read_text())
        for f in data["system"]:
            f["caption"] += " [from the cache]"
        path.write_text(json.dumps(data))
    for path in (demo_copy / ".dossier-cache").glob("site-*"):  # the pages are rendered again, from the figures
        path.unlink()
    edit(demo_copy / "systems/wren-9/evidence.yaml", "title: Two dwarfs", "title: Two K and M dwarfs")
    build(demo_copy, tmp_path / "two", pdf=False)
    assert "[from the cache]" in (tmp_path / "two/systems/heron-1/index.html").read_text()
    assert "[from the cache]" in (tmp_path / "two/systems/alder-4/index.html").read_text()
    assert "[from the cache]" not in (tmp_path / "two/systems/wren-9/index.html").read_text()  # its evidence changed


# ----------------------------------------------------------------------------
# The verdict as it was computed (the pair model and the terms of its odds)


@pytest.fixture(scope="module")
def weighed_demo():
    from dossier.engine import weigh_project
    from dossier.schema.loader import load_project

    return weigh_project(load_project(DEMO))


def _text(html: str) -> str:
    import html as html_lib

    return re.sub(r"\s+", " ", html_lib.unescape(re.sub(r"<[^>]+>", " ", html))).strip()


def _rows(table_html: str) -> list[list[str]]:
    """The cells of a table's body, as text."""
    body = table_html[table_html.index("<tbody>"):]
    return [[_text(cell) for cell in re.findall(r"<t[dh][^>]*>(.*?)</t[dh]>", row, re.S)]
            for row in re.findall(r"<tr[^>]*>(.*?)</tr>", body, re.S)]


def test_the_terms_shown_are_the_terms_the_verdict_used(site, weighed_demo):
    from dossier.fmt import fmt_log10
    from dossier.render.terms import ODDS

    for sid, result in weighed_demo.items():
        page = (site / "systems" / sid / "index.html").read_text()
        for pid, v in result.verdicts.items():
            if not v.contributions:
                assert f'id="terms-{pid}"' not in page
                continue
            table = page[page.index(f'id="terms-{pid}"'):]
            table = table[: table.index("</table>")]
            shown = [(row[0].replace(" moved it most", ""), row[1], row[2]) for row in _rows(table)]
            assert shown == [(c.line, ODDS[c.question], fmt_log10(c.log10, "−")) for c in v.contributions]
            # the term that moved it most is marked, and the summary names it with its value as used
            marked = [row[0] for row in _rows(table) if row[0].endswith(" moved it most")]
            assert marked == [f"{v.moved_most} moved it most"]


def test_no_page_shows_a_diagnostics_standalone_strength_as_a_term(site, weighed_demo):
    from dossier.rules.verdict import JOINT_RULES, strongest

    for sid, result in weighed_demo.items():
        page = (site / "systems" / sid / "index.html").read_text()
        for rule in JOINT_RULES:
            section = page[page.index(f'id="rule-{rule}"'):]
            section = section[: section.index("</section>")]
            found = {a.subject: a for a in result.assessments if a.rule == rule}
            for row in _rows(section):  # in place of its own strength, which the verdict does not use
                assert row[2] == ("" if found[row[0]].strength is None else "weighed in the pair model"), (sid, rule, row)
        # the summary names, for and against, only terms of the verdict, with their values as used
        summary = page[page.index('class="verdict-summary"'):]
        summary = summary[: summary.index("</table>")]
        for row, pair in zip(_rows(summary), result.system.pairs):
            v = result.verdicts[pair.id]
            for cell, term in zip(row[3:], strongest(v.contributions, v.status)):
                if term is None:
                    assert cell == "none"
                else:
                    assert cell.startswith(f"{term.line} (") and "as used" in cell
                    assert (term.log10 > 0) == ("(+" in cell)


def test_every_verdict_probability_carries_its_label(site):
    label = r"P\((bound|co-moving|chance alignment|physical)\)"
    pages = [site / "index.html", *sorted(site.glob("systems/*/index.html")),
             *sorted(site.glob("systems/*/releases/*/index.html"))]
    seen = 0
    for path in pages:
        text = path.read_text()
        for cell in re.findall(r'class="prob">(.*?)</(?:span|td)>', text, re.S):
            assert re.match(label + r"( = 0\.\d+| [<>] 0\.999999 \(limit of the model\)| [<>] 0\.000001 "
                                    r"\(limit of the model\)|: not computed)", _text(cell)), (path, cell)
            seen += 1
        assert '<span class="prob">probability' not in text, path  # the old unnamed "probability 0.9999"
    assert seen >= 2 * 7 + 7  # the catalogue's rows, each pair's summary row and card, the releases' tables


def test_probabilities_beyond_the_model_limit_read_as_the_limit(site, weighed_demo):
    limited = 0
    for sid, result in weighed_demo.items():
        html = (site / "systems" / sid / "index.html").read_text()
        page = _text(html)
        # no probability written as 1e-99 or 2.7e-07, in the verdicts, the rules' quantities or the provenance
        assert not re.search(r"P\([^)]*\)[^:]*: [\d.]+e-(0[7-9]|[1-9]\d)", page)
        assert "e-99" not in page
        for pid, v in result.verdicts.items():
            card = html[html.index(f'id="pair-{pid}"'):]
            card = card[: card.index("</article>")]
            if v.probability is None:
                assert 'class="probabilities"' not in card
                continue
            table = card[card.index('class="probabilities"'):]
            table = table[: table.index("</table>")]
            heads = [_text(h) for h in re.findall(r"<th[^>]*>(.*?)</th>", table, re.S)]
            shown = dict(zip(heads, _rows(table)[0]))
            for name, value in (("P(bound)", v.p_bound), ("P(co-moving)", v.p_comoving),
                                ("P(chance alignment)", v.p_chance), ("P(physical)", v.p_physical),
                                ("P(bound | physical)", v.p_bound_given_physical)):
                if value >= 1 - 1e-6:
                    assert shown[name] == "> 0.999999 (limit of the model)", (sid, pid, name)
                    limited += 1
                elif value <= 1e-6:
                    assert shown[name] == "< 0.000001 (limit of the model)", (sid, pid, name)
                else:
                    assert re.fullmatch(r"0\.\d+", shown[name]), (sid, pid, name, shown[name])
            head = _text(card[: card.index("</header>")])
            if v.limited_by_model:
                assert f"{v.status} {v.probability_of} > 0.999999 (limit of the model)" in head, head
    assert limited >= 4  # heron-1 Ba-Bb and AD, alder-4 AB, wren-9 AB in the demo


def test_the_methods_page_links_how_verdicts_are_computed(site):
    methods = (site / "methods.html").read_text()
    assert '<a href="verdicts.html">How verdicts are computed</a>' in methods
    page = (site / "verdicts.html").read_text()
    assert "<h1>How verdicts are computed</h1>" in page
    assert "<table>" in page  # the Markdown tables of priors and statuses are rendered
    system = (site / "systems/heron-1/index.html").read_text()
    assert 'href="../../verdicts.html"' in system
