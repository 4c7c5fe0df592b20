"""What ``dossier build`` tells as it goes: a bar per stage on a terminal, and one last line with counts and time.

The last line's counts are those of the files the build wrote; its time is
in the terminal's text only, never in a file of the site.
"""

from __future__ import annotations

import contextlib
import io
import re
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner
from rich.console import Console

from dossier.cli import BuildStages, build_summary, cli
from dossier.site import STAGES, BuildCounts, BuildReport, build
from tests.conftest import DEMO, REPO

LINE = re.compile(r"^Built (?P<site>\S+)(?P<unchanged> \(unchanged, nothing written\))?: (?P<systems>\d+) systems?"
                  r"(?: \((?P<cached>\d+) from the cache\))?, (?P<pages>\d+) pages?, (?P<pdfs>\d+) PDFs?, "
                  r"(?P<figures>\d+) figures? in (?P<seconds>\d+\.\d) s — open (?P<index>\S+)$")


def on_disk(site: Path) -> dict[str, int]:
    """What a built site holds, counted from its files."""
    html = [p for p in site.rglob("*.html")]
    return {"systems": len(list(site.glob("systems/*/index.html"))), "pages": len(html),
            "pdfs": len(list(site.rglob("*.pdf"))),
            "figures": sum(p.read_text(encoding="utf-8").count('<figure id="figure-') for p in html)}


@pytest.fixture(scope="module")
def built(tmp_path_factory) -> tuple[Path, object]:
    """The demo built with its PDFs by the command, as in CI: standard output and error are no terminal."""
    out = tmp_path_factory.mktemp("progress") / "public"
    result = CliRunner().invoke(cli, ["build", str(DEMO), "--out", str(out)])
    assert result.exit_code == 0, result.output
    return out, result


@pytest.mark.slow
def test_the_last_line_counts_what_the_build_wrote(built):
    out, result = built
    lines = result.stdout.strip().splitlines()
    assert len(lines) == 1, result.stdout
    found = LINE.match(lines[0])
    assert found, lines[0]
    assert Path(found["site"]) == out.resolve() and Path(found["index"]) == out.resolve() / "index.html"
    assert found["unchanged"] is None
    counts = {k: int(found[k]) for k in ("systems", "pages", "pdfs", "figures")}
    assert counts == on_disk(out)
    assert counts["systems"] == 3 and counts["pdfs"] == 3 and counts["figures"] > 0
    assert result.stderr == ""  # no terminal: no bar


@pytest.mark.slow
def test_a_build_that_finds_its_site_current_says_so_with_the_same_counts(built):
    out, result = built
    again = CliRunner().invoke(cli, ["build", str(DEMO), "--out", str(out)])
    assert again.exit_code == 0, again.output
    first, second = LINE.match(result.stdout.strip()), LINE.match(again.stdout.strip())
    assert second and second["unchanged"], again.stdout
    assert [second[k] for k in ("systems", "pages", "pdfs", "figures")] == \
           [first[k] for k in ("systems", "pages", "pdfs", "figures")]


@pytest.mark.slow
def test_no_file_of_the_site_holds_the_time_or_the_summary(built):
    out, result = built
    line = result.stdout.strip()
    timed = f"in {LINE.match(line)['seconds']} s"
    for path in out.rglob("*"):
        if path.is_file() and path.suffix in (".html", ".json", ".js", ".ecsv", ".vot"):
            text = path.read_text(encoding="utf-8")
            assert line not in text and f"figures {timed}" not in text and "— open " not in text, path


class Recorder(BuildReport):
    def __init__(self) -> None:
        self.calls: list[tuple[str, int, int]] = []
        self.counts: BuildCounts | None = None

    def stage(self, name: str, done: int, total: int) -> None:
        self.calls.append((name, done, total))

    def finished(self, counts: BuildCounts) -> None:
        self.counts = counts


def test_build_tells_each_stage_in_order_from_zero_to_its_total(tmp_path):
    sys.path.insert(0, str(REPO / "benchmarks"))
    from synthetic import make_project

    project = make_project(2, tmp_path / "project", seed=3)
    told = Recorder()
    build(project, tmp_path / "site", pdf=False, workers=1, report=told)
    order = list(dict.fromkeys(name for name, _, _ in told.calls))
    assert order == [s for s in STAGES if s != "rendering PDFs"]  # no PDFs asked for
    for name in order:
        steps = [(done, total) for n, done, total in told.calls if n == name]
        total = steps[0][1]
        assert steps[0][0] == 0 and steps[-1] == (total, total), (name, steps)
        assert [d for d, _ in steps] == sorted(d for d, _ in steps) and {t for _, t in steps} == {total}
    assert ("weighing systems", 2, 2) in told.calls and ("rendering pages", 2, 2) in told.calls
    assert told.counts == BuildCounts(**on_disk(tmp_path / "site"), computed=2)
    # unchanged: no stage, the counts recorded by the build that wrote the site
    again = Recorder()
    build(project, tmp_path / "site", pdf=False, workers=1, report=again)
    assert again.calls == []
    assert again.counts == BuildCounts(**on_disk(tmp_path / "site"), computed=0, written=False)


def test_each_stage_gets_a_bar_with_its_count():
    text = io.StringIO()
    with contextlib.ExitStack() as stack:
        stages = BuildStages(stack, True, console=Console(file=text, width=100, force_terminal=False))
        for done in range(4):
            stages.stage("weighing systems", done, 3)
        for done in range(3):
            stages.stage("rendering PDFs", done, 3)  # cut short: the bar stays at 2/3
    shown = text.getvalue()
    assert re.search(r"weighing systems .* 3/3", shown), shown
    assert re.search(r"rendering PDFs .* 2/3", shown), shown


def test_no_bar_unless_shown():
    text = io.StringIO()
    with contextlib.ExitStack() as stack:
        stages = BuildStages(stack, False, console=Console(file=text, width=100))
        stages.stage("weighing systems", 0, 3)
        stages.finished(BuildCounts(systems=3, pages=10, pdfs=3, figures=20))
    assert text.getvalue() == "" and stages.bars is None and stages.counts.pdfs == 3


@pytest.mark.parametrize("counts, expected", [
    (BuildCounts(systems=3, pages=10, pdfs=3, figures=20, computed=3),
     "Built /s: 3 systems, 10 pages, 3 PDFs, 20 figures in 41.2 s — open /s/index.html"),
    (BuildCounts(systems=1, pages=1, pdfs=0, figures=1, computed=0),
     "Built /s: 1 system (1 from the cache), 1 page, 0 PDFs, 1 figure in 41.2 s — open /s/index.html"),
    (BuildCounts(systems=3, pages=10, pdfs=3, figures=20, written=False),
     "Built /s (unchanged, nothing written): 3 systems, 10 pages, 3 PDFs, 20 figures in 41.2 s — open /s/index.html"),
    (None, "Built /s in 41.2 s — open /s/index.html"),
])
def test_the_last_line(counts, expected):
    line = build_summary(Path("/s/index.html"), counts, 41.23)
    assert line == expected
    assert line.startswith("Built /s") and line.endswith("— open /s/index.html")
