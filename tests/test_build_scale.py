"""Building large catalogues: the synthetic project, incremental builds, parallel rendering.

Correctness checks only (timings are in ``benchmarks/build.py``): a site built
from the cache, or by several processes, is byte for byte the site built
afresh in one process; changing one system's evidence changes that system's
files and the catalogue's, and nothing else; an unchanged project writes
nothing.
"""

from __future__ import annotations

import hashlib
import re
import shutil
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from dossier.cli import cli
from dossier.errors import ProblemsFound
from dossier.schema.loader import load_project
from dossier.site import build
from tests.conftest import REPO

sys.path.insert(0, str(REPO / "benchmarks"))
from synthetic import make_project

#: The files of the whole catalogue, rewritten whenever any system changes.
CATALOGUE_FILES = {"index.html", "search-index.js", "weigh.json", "catalogue.ecsv", "catalogue.vot", "manifest.json"}


def digest(root: Path) -> dict[str, str]:
    return {p.relative_to(root).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(root.rglob("*")) if p.is_file()}


def changed_files(before: dict[str, str], after: dict[str, str]) -> set[str]:
    return {name for name in before.keys() | after.keys() if before.get(name) != after.get(name)}


@pytest.fixture(scope="module")
def synthetic(tmp_path_factory) -> Path:
    """Five invented systems, their site built afresh in one process (``fresh``) and with the cache (``cold``).

    The project keeps its cache: tests copy it with the cache, so that only
    what they change is computed again.
    """
    root = tmp_path_factory.mktemp("synthetic")
    project = make_project(5, root / "project", seed=7)
    build(project, root / "fresh", pdf=False, use_cache=False, workers=1)
    calls = []
    build(project, root / "cold", pdf=False, progress=lambda done, total: calls.append((done, total)))
    assert calls[-1] == (5, 5)
    return project


def copy_of(project: Path, target: Path) -> Path:
    """A copy of the project with its cache."""
    shutil.copytree(project, target)
    return target


def test_the_generator_writes_a_valid_varied_project_and_repeats_itself(tmp_path):
    one = make_project(12, tmp_path / "one", seed=3)
    two = make_project(12, tmp_path / "two", seed=3)
    other = make_project(12, tmp_path / "other", seed=4)
    assert digest(one) == digest(two)
    assert digest(one) != digest(other)
    result = CliRunner().invoke(cli, ["check", str(one)])
    assert result.exit_code == 0, result.output
    assert "12 system(s)" in result.output
    project = load_project(one)
    assert sorted(project.systems) == [f"synth-{k:04d}" for k in range(1, 13)]
    sizes = {len([c for c in s.components if c in "ABCD"]) for s in project.systems.values()}
    assert sizes <= {2, 3, 4} and len(sizes) >= 2
    assert any(project.logs[sid] for sid in project.systems)
    assert any(not project.logs[sid] for sid in project.systems)
    sources = {len(c.astrometry) for s in project.systems.values() for c in s.components.values() if c.astrometry}
    assert sources == {1, 2, 3}
    assert any(c.radial_velocity for s in project.systems.values() for c in s.components.values())


def test_a_site_from_the_cache_is_the_site_built_afresh(synthetic, tmp_path):
    fresh = digest(synthetic.parent / "fresh")
    assert digest(synthetic.parent / "cold") == fresh
    project = copy_of(synthetic, tmp_path / "project")
    calls = []
    build(project, tmp_path / "warm", pdf=False, progress=lambda done, total: calls.append((done, total)))
    assert calls == []  # every system came from the cache
    assert digest(tmp_path / "warm") == fresh


def test_the_demo_from_the_cache_is_the_demo_built_afresh(demo_copy, tmp_path):
    build(demo_copy, tmp_path / "fresh", pdf=False, use_cache=False)
    build(demo_copy, tmp_path / "cold", pdf=False)
    build(demo_copy, tmp_path / "warm", pdf=False)
    fresh = digest(tmp_path / "fresh")
    assert digest(tmp_path / "cold") == fresh
    assert digest(tmp_path / "warm") == fresh
    # the catalogue's files, joined from the cached parts, are what weigh and the exports make of the whole project
    from dossier.engine import weigh_project
    from dossier.exports import catalogue_ecsv, catalogue_votable
    from dossier.report import to_json

    project = load_project(demo_copy)
    results = weigh_project(project, use_cache=False)
    assert (tmp_path / "warm/weigh.json").read_text(encoding="utf-8") == to_json(project.settings.project.title, results)
    assert (tmp_path / "warm/systems/wren-9/weigh.json").read_text(encoding="utf-8") == to_json(
        project.settings.project.title, {"wren-9": results["wren-9"]})
    assert (tmp_path / "warm/catalogue.ecsv").read_text(encoding="utf-8") == catalogue_ecsv(results)
    assert (tmp_path / "warm/catalogue.vot").read_text(encoding="utf-8") == catalogue_votable(results)


def test_several_processes_build_the_same_bytes_as_one(synthetic, tmp_path):
    build(synthetic, tmp_path / "parallel", pdf=False, use_cache=False, workers=2)
    assert digest(tmp_path / "parallel") == digest(synthetic.parent / "fresh")


def test_changing_one_system_rebuilds_it_and_the_catalogue_only(synthetic, tmp_path):
    project = copy_of(synthetic, tmp_path / "project")
    out = tmp_path / "site"
    build(project, out, pdf=False)
    before = digest(out)
    evidence = project / "systems/synth-0002/evidence.yaml"
    text = evidence.read_text(encoding="utf-8")
    match = re.search(r"parallax: \[([0-9.]+),", text)
    evidence.write_text(text[:match.start(1)] + f"{float(match.group(1)) + 0.4:.3f}" + text[match.end(1):],
                        encoding="utf-8")
    calls = []
    build(project, out, pdf=False, progress=lambda done, total: calls.append((done, total)))
    assert calls == [(1, 1)]  # one system weighed, drawn and rendered; four from the cache
    after = digest(out)
    changed = changed_files(before, after)
    assert {"systems/synth-0002/index.html", "systems/synth-0002/weigh.json", "manifest.json"} <= changed
    assert all(name.startswith("systems/synth-0002/") or name in CATALOGUE_FILES for name in changed), changed
    # and it is what a build makes of the changed project when no system's pages are cached
    for entry in (project / ".dossier-cache").glob("site-*"):
        entry.unlink()
    calls.clear()
    build(project, tmp_path / "again", pdf=False, workers=1, progress=lambda done, total: calls.append((done, total)))
    assert calls[-1] == (5, 5)
    assert after == digest(tmp_path / "again")


def test_an_unchanged_project_writes_nothing_and_a_touched_site_is_rebuilt(synthetic, tmp_path):
    project = copy_of(synthetic, tmp_path / "project")
    out = tmp_path / "site"
    build(project, out, pdf=False)
    page = out / "systems/synth-0001/index.html"
    stamp = page.stat().st_mtime_ns
    calls = []
    build(project, out, pdf=False, progress=lambda done, total: calls.append((done, total)))
    assert calls == [] and page.stat().st_mtime_ns == stamp
    expected = digest(out)
    page.write_text("edited by hand", encoding="utf-8")
    build(project, out, pdf=False)
    assert digest(out) == expected


def test_a_broken_changed_system_reports_every_problem_of_the_project(synthetic, tmp_path):
    project = copy_of(synthetic, tmp_path / "project")
    evidence = project / "systems/synth-0003/evidence.yaml"
    evidence.write_text(evidence.read_text(encoding="utf-8").replace("spectral_type:", "spectral_typ:", 1),
                        encoding="utf-8")
    with pytest.raises(ProblemsFound) as built:
        build(project, tmp_path / "site", pdf=False)
    with pytest.raises(ProblemsFound) as loaded:
        load_project(project)
    assert [str(p) for p in built.value.problems] == [str(p) for p in loaded.value.problems]
    assert any("spectral_typ" in str(p) for p in built.value.problems)


def test_build_command_keeps_standard_output_for_its_result(synthetic, tmp_path):
    project = copy_of(synthetic, tmp_path / "project")
    evidence = project / "systems/synth-0004/evidence.yaml"
    evidence.write_text(evidence.read_text(encoding="utf-8") + "  One more line of notes.\n", encoding="utf-8")
    result = CliRunner().invoke(cli, ["build", str(project), "--out", str(tmp_path / "site"), "--no-pdf",
                                      "--progress", "--jobs", "1"])
    assert result.exit_code == 0, result.output
    assert result.stdout.strip().startswith("Built ")
    assert len(result.stdout.strip().splitlines()) == 1
