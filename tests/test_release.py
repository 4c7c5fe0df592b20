"""Releases (numbered, sealed, immutable), their verification, and diffs of evidence changes."""

from __future__ import annotations

import hashlib
import json
import re
import shutil
import stat
import subprocess
from pathlib import Path

import pytest
from click.testing import CliRunner

from dossier.cli import cli
from dossier.diff import Change, compare, to_markdown
from dossier.errors import DossierError
from dossier.release import (
    content_hash,
    counted_approvals,
    evidence_files,
    freeze,
    release_date,
    releases_of,
    verify_releases,
)
from dossier.site import build
from tests.conftest import DEMO, edit
from tests.test_cli_end_to_end import JOINT_RULES

# 2026-01-01T00:00:00Z as seconds since the Unix epoch (common practice: date -u -d 2026-01-01 +%s).
NEW_YEAR_2026 = "1767225600"


@pytest.fixture
def project(demo_copy: Path) -> Path:
    """A demo copy without its releases, that asks for no approvals."""
    shutil.rmtree(demo_copy / "releases")
    edit(demo_copy / "dossier.toml", "required_approvals = 1", "required_approvals = 0")
    return demo_copy


def _writable(path: Path) -> None:
    path.chmod(stat.S_IRUSR | stat.S_IWUSR)


# ----------------------------------------------------------------------------
# Dates and hashes


def test_release_date_follows_source_date_epoch():
    # The reproducible-builds SOURCE_DATE_EPOCH specification: seconds since 1970-01-01T00:00:00Z.
    assert release_date({"SOURCE_DATE_EPOCH": "0"}) == "1970-01-01T00:00:00Z"
    assert release_date({"SOURCE_DATE_EPOCH": NEW_YEAR_2026}) == "2026-01-01T00:00:00Z"
    with pytest.raises(DossierError, match="SOURCE_DATE_EPOCH='soon' is not a whole number"):
        release_date({"SOURCE_DATE_EPOCH": "soon"})


def test_content_hash_is_sha256_over_named_file_hashes():
    files = {"b.txt": b"two", "a.txt": b"one"}
    # hashlib (standard library) is the reference: the hash of the sorted "name NUL sha256" lines.
    lines = b"".join(name.encode() + b"\0" + hashlib.sha256(data).hexdigest().encode() + b"\n"
                     for name, data in sorted(files.items()))
    assert content_hash(files) == hashlib.sha256(lines).hexdigest()
    assert content_hash({"a.txt": b"one", "b.txt": b"two!"}) != content_hash(files)
    assert content_hash({"c.txt": b"one", "b.txt": b"two"}) != content_hash(files)  # names count too


# ----------------------------------------------------------------------------
# Freezing


def test_release_freezes_evidence_state_and_record(project):
    made = freeze(project, "alder-4", "First look", environ={"SOURCE_DATE_EPOCH": NEW_YEAR_2026})
    assert made.number == 1 and made.path == project / "releases/alder-4/1"
    meta = made.meta
    assert meta["date"] == "2026-01-01T00:00:00Z" and meta["note"] == "First look"
    assert meta["previous"] is None and meta["system"] == "alder-4"
    assert meta["content_hash"] == content_hash(evidence_files(project, "alder-4"))
    assert (made.path / "evidence/systems/alder-4/evidence.yaml").read_bytes() == \
        (project / "systems/alder-4/evidence.yaml").read_bytes()
    assert meta["reviews"] == [{"by": "reviewer-2", "on": "2026-11-21", "decision": "approve", "comment": ""}]
    assert made.state["verdicts"]["AB"]["status"] == "optical"
    # the evidence folder of a release is a project of its own
    result = CliRunner().invoke(cli, ["weigh", str(made.path / "evidence"), "--json"])
    assert result.exit_code == 0 and '"status": "optical"' in result.output
    # every file is read-only
    assert all(not (made.path / name).stat().st_mode & stat.S_IWUSR for name in made.files())
    assert verify_releases(project) == []  # the cache the weighing wrote is no part of the release


def test_second_release_links_the_first_and_counts_from_it(project):
    first = freeze(project, "alder-4", "one", environ={"SOURCE_DATE_EPOCH": "0"})
    edit(project / "systems/alder-4/evidence.yaml", "parallax: [0.62, 0.03]", "parallax: [0.64, 0.03]")
    second = freeze(project, "alder-4", "two", environ={"SOURCE_DATE_EPOCH": "60"})
    assert second.number == 2
    assert second.meta["previous"] == {"number": 1, "seal": first.meta["seal"]}
    assert [r.number for r in releases_of(project, "alder-4")] == [1, 2]
    assert verify_releases(project) == []


def test_nothing_changed_is_refused(project):
    freeze(project, "wren-9", "one", environ={"SOURCE_DATE_EPOCH": "0"})
    with pytest.raises(DossierError, match="nothing changed in wren-9 since release 1"):
        freeze(project, "wren-9", "again", environ={"SOURCE_DATE_EPOCH": "0"})
    assert [r.number for r in releases_of(project, "wren-9")] == [1]


def test_an_existing_release_is_never_overwritten(project):
    made = freeze(project, "alder-4", "one", environ={"SOURCE_DATE_EPOCH": "0"})
    before = made.files()
    edit(project / "systems/alder-4/evidence.yaml", "parallax: [0.62, 0.03]", "parallax: [0.64, 0.03]")
    with pytest.raises(DossierError, match="release 1 of alder-4 exists .* immutable; nothing was written"):
        freeze(project, "alder-4", "overwrite", environ={"SOURCE_DATE_EPOCH": "0"}, number=1)
    assert releases_of(project, "alder-4")[0].files() == before
    assert sorted(p.name for p in (project / "releases/alder-4").iterdir()) == ["1"]  # no staging left behind


def test_a_note_is_required(project):
    result = CliRunner().invoke(cli, ["release", str(project), "alder-4", "--note", "  "])
    assert result.exit_code == 2 and "a release needs a note" in result.output
    assert not (project / "releases").exists()


# ----------------------------------------------------------------------------
# Approvals


def review(by: str, on: str, decision: str) -> dict:
    return {"by": by, "on": on, "decision": decision, "comment": ""}


def test_each_reviewers_latest_decision_counts_once():
    reviews = [review("r1", "2026-01-02", "request-changes"), review("r1", "2026-01-05", "approve"),
               review("r2", "2026-01-03", "approve"), review("r2", "2026-01-04", "request-changes"),
               review("r3", "2026-01-06", "comment")]
    approvals, blocking = counted_approvals(reviews, None)
    assert approvals == [reviews[1]] and blocking == [reviews[3]]


def test_required_approvals_are_enforced_and_not_counted_twice(project):
    edit(project / "dossier.toml", "required_approvals = 0", "required_approvals = 2")
    evidence = project / "systems/alder-4/evidence.yaml"
    with pytest.raises(DossierError, match=r"alder-4 has 1 approving review\(s\); .*required_approvals = 2"):
        freeze(project, "alder-4", "one", environ={"SOURCE_DATE_EPOCH": "0"})
    assert not (project / "releases").exists()
    edit(evidence, "  - {by: reviewer-2, on: 2026-11-21, decision: approve}",
         "  - {by: reviewer-2, on: 2026-11-21, decision: approve}\n"
         "  - {by: reviewer-4, on: 2026-11-22, decision: approve}")
    assert freeze(project, "alder-4", "one", environ={"SOURCE_DATE_EPOCH": "0"}).number == 1
    # the next release needs two new approvals: the old ones were spent on release 1
    edit(evidence, "parallax: [0.62, 0.03]", "parallax: [0.64, 0.03]")
    with pytest.raises(DossierError, match=r"0 approving review\(s\) since release 1"):
        freeze(project, "alder-4", "two", environ={"SOURCE_DATE_EPOCH": "0"})


# ----------------------------------------------------------------------------
# Verification: any edit is detected


@pytest.fixture
def released(project) -> Path:
    freeze(project, "alder-4", "one", environ={"SOURCE_DATE_EPOCH": "0"})
    edit(project / "systems/alder-4/evidence.yaml", "parallax: [0.62, 0.03]", "parallax: [0.64, 0.03]")
    freeze(project, "alder-4", "two", environ={"SOURCE_DATE_EPOCH": "60"})
    return project


def test_demo_releases_are_intact():
    assert verify_releases(DEMO) == []
    assert [r.number for r in releases_of(DEMO, "heron-1")] == [1, 2]


def test_an_edited_evidence_file_is_detected(released):
    path = released / "releases/alder-4/1/evidence/systems/alder-4/evidence.yaml"
    _writable(path)
    path.write_text(path.read_text().replace("0.62", "0.61"))
    problems = verify_releases(released)
    assert problems == [
        "releases/alder-4/1/evidence/systems/alder-4/evidence.yaml: edited (SHA-256 differs from the release record)",
        "releases/alder-4/1/evidence: content hash differs from the release record",
    ]


def test_an_edited_release_record_is_detected(released):
    path = released / "releases/alder-4/2/release.json"
    _writable(path)
    meta = json.loads(path.read_text())
    meta["note"] = "something else"
    path.write_text(json.dumps(meta))
    assert verify_releases(released) == ["releases/alder-4/2/release.json: edited (its seal does not match its content)"]


def test_a_resealed_earlier_release_breaks_the_chain(released):
    from dossier.release import seal_of

    path = released / "releases/alder-4/1/release.json"
    _writable(path)
    meta = json.loads(path.read_text())
    meta["note"] = "rewritten history"
    meta["seal"] = seal_of(meta)  # a careful forger reseals release 1 ...
    path.write_text(json.dumps(meta))
    # ... but release 2 recorded the old seal
    assert verify_releases(released) == ["releases/alder-4/2: the seal of release 1 differs from the one recorded here"]


def test_a_deleted_release_and_an_added_file_are_detected(released):
    extra = released / "releases/alder-4/2/notes.txt"
    extra.write_text("added later")
    release_one = released / "releases/alder-4/1"
    for p in release_one.rglob("*"):
        if p.is_file():
            _writable(p)
    shutil.rmtree(release_one)
    assert verify_releases(released) == [
        "releases/alder-4: release(s) 1 missing",
        "releases/alder-4/2/notes.txt: not part of the release",
        "releases/alder-4/2: refers to release 1, which is missing",
    ]


def test_verify_command_on_a_project_and_build_refuses_altered_releases(released, tmp_path):
    result = CliRunner().invoke(cli, ["verify", str(released)])
    assert result.exit_code == 0 and "2 release(s), every one intact" in result.output
    out = tmp_path / "site"
    build(released, out, pdf=False)
    before = (out / "index.html").read_bytes()
    path = released / "releases/alder-4/2/state.json"
    _writable(path)
    path.write_text(path.read_text().replace('"optical"', '"bound"'))
    result = CliRunner().invoke(cli, ["verify", str(released)])
    assert result.exit_code == 1 and "releases/alder-4/2/state.json: edited" in result.output
    result = CliRunner().invoke(cli, ["build", str(released), "--out", str(out), "--no-pdf"])
    assert result.exit_code == 2 and "releases were altered" in result.output
    assert (out / "index.html").read_bytes() == before  # the previous site is untouched


# ----------------------------------------------------------------------------
# Diffs


def test_compare_reports_exactly_the_crafted_changes():
    before = {"system": "s", "title": "t",
              "values": {"components.A.parallax": {"subject": "A", "value": 8.0, "uncertainty": 0.1, "unit": "mas",
                                                   "source": "old"},
                         "components.B.parallax": {"subject": "B", "value": 7.9, "uncertainty": 0.2, "unit": "mas",
                                                   "source": "old"}},
              "sources": {"old": "Old paper"},
              "verdicts": {"AB": {"status": "undetermined", "probability": 0.6, "summary": ""}},
              "grades": {"C": {"grade": "candidate", "reasons": []}}}
    after = {"system": "s", "title": "t",
             "values": {"components.A.parallax": {"subject": "A", "value": 8.2, "uncertainty": 0.1, "unit": "mas",
                                                  "source": "new"}},
             "sources": {"new": "New paper"},
             "verdicts": {"AB": {"status": "bound", "probability": 0.995, "summary": ""}},
             "grades": {"C": {"grade": "doubtful", "reasons": ["Not seen."]}}}
    assert compare(before, after) == [
        # a state from before the pair model names no probability: it is named by its status
        Change("s", "verdict", "AB", "undetermined (P(physical) = 0.60)", "bound (P(bound) = 0.9950)"),
        Change("s", "grade", "C", "candidate", "doubtful (Not seen.)"),
        Change("s", "source", "new", None, "New paper"),
        Change("s", "source", "old", "Old paper", None),
        Change("s", "value", "components.A.parallax", "8 ± 0.1 mas [old]", "8.2 ± 0.1 mas [new]"),
        Change("s", "value", "components.B.parallax", "7.9 ± 0.2 mas [old]", None),
    ]
    assert compare(before, before) == []
    assert [c.action for c in compare(before, after)] == ["changed", "changed", "added", "withdrawn", "changed",
                                                          "withdrawn"]


def test_diff_of_a_folder_reports_the_evidence_change_and_its_consequences(project, tmp_path):
    changed = tmp_path / "changed"
    shutil.copytree(project, changed)
    # B becomes a twin of A in distance and motion: the optical pair turns physical
    edit(changed / "systems/alder-4/evidence.yaml",
         "        parallax: [0.62, 0.03]\n        pmra: [-2.11, 0.04]\n        pmdec: [-3.82, 0.03]",
         "        parallax: [14.20, 0.03]\n        pmra: [85.30, 0.04]\n        pmdec: [-40.10, 0.03]")
    result = CliRunner().invoke(cli, ["diff", str(changed), "alder-4", "--against", str(project), "--format", "json"])
    assert result.exit_code == 0, result.output
    changes = json.loads(result.output)["changes"]
    values = [(c["key"], c["before"], c["after"]) for c in changes if c["kind"] == "value"]
    assert values == [
        ("components.B.astrometry[sky-survey-3].parallax", "0.62 ± 0.03 mas [sky-survey-3]",
         "14.2 ± 0.03 mas [sky-survey-3]"),
        ("components.B.astrometry[sky-survey-3].pmra", "-2.11 ± 0.04 mas/yr [sky-survey-3]",
         "85.3 ± 0.04 mas/yr [sky-survey-3]"),
        ("components.B.astrometry[sky-survey-3].pmdec", "-3.82 ± 0.03 mas/yr [sky-survey-3]",
         "-40.1 ± 0.03 mas/yr [sky-survey-3]"),
    ]
    verdicts = [c for c in changes if c["kind"] == "verdict"]
    assert len(verdicts) == 1 and verdicts[0]["before"].startswith("optical (P(chance alignment) ")
    assert not verdicts[0]["after"].startswith("optical")
    assert re.match(r"(bound|co-moving|undetermined) \(P\((bound|co-moving|physical)\) ", verdicts[0]["after"])
    assert {c["kind"] for c in changes} <= {"value", "verdict", "term", "assessment", "derived"}
    assert {"parallax-agreement · AB", "common-motion · AB"} <= {c["key"] for c in changes if c["kind"] == "assessment"}
    # the diagnostics of the pair model show no log10 of their own; the terms show the values as used
    for c in changes:
        if c["kind"] == "assessment" and c["key"].split(" · ")[0] in JOINT_RULES:
            assert "weighed in the pair model" in c["after"] and "log10" not in c["after"]
    terms = {c["key"]: c for c in changes if c["kind"] == "term"}
    assert "AB · Parallaxes" in terms and "in log10 odds physical : chance alignment" in terms["AB · Parallaxes"]["after"]


def test_diff_against_a_git_revision_in_markdown(project, tmp_path):
    def git(*args: str) -> None:
        subprocess.run(["git", "-C", str(project), *args], check=True, capture_output=True)

    git("init", "-q")
    git("-c", "user.name=test", "-c", "user.email=test@example.org", "add", ".")
    git("-c", "user.name=test", "-c", "user.email=test@example.org", "commit", "-qm", "evidence")
    edit(project / "systems/heron-1/evidence.yaml",
         "non_detections:\n  - {around: A, method: adaptive-optics, epoch: 2019.61, rho_range: [0.05, 2.0], "
         "contrast: 6.0, band: H, ref: ao-2019}\n", "")
    result = CliRunner().invoke(cli, ["diff", str(project), "heron-1", "--against", "HEAD", "--format", "markdown"])
    assert result.exit_code == 0, result.output
    text = result.output
    assert text.startswith(f"## Changes from HEAD to {project} (heron-1)")
    assert "| `ao-2019` | withdrawn | Invented Adaptive Optics Survey 2020" in text
    assert "| `C` | changed | doubtful (" in text and "| candidate (" in text
    bad = CliRunner().invoke(cli, ["diff", str(project), "--against", "no-such-rev"])
    assert bad.exit_code == 2 and "neither a folder nor a git revision" in bad.output


def test_markdown_escapes_table_cells():
    text = to_markdown([Change("s", "value", "a|b", None, "x <script> | y")], "Heading")
    assert "| `a\\|b` | added | — | x &lt;script> \\| y |" in text


# ----------------------------------------------------------------------------
# The site


@pytest.fixture(scope="module")
def site(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("site") / "public"
    build(DEMO, out, pdf=False)
    return out


def test_every_release_has_a_stable_page_and_its_files(site):
    for system, numbers in (("heron-1", (1, 2)), ("alder-4", (1,))):
        for n in numbers:
            folder = site / "systems" / system / "releases" / str(n)
            page = (folder / "index.html").read_text()
            assert f"release {n}" in page and "It never changes" in page
            record = json.loads((folder / "release.json").read_text())
            assert record["number"] == n and record["content_hash"] in page
            assert (folder / "release.json").read_bytes() == (DEMO / "releases" / system / str(n) / "release.json").read_bytes()


def test_what_changed_page_between_consecutive_releases(site):
    page = (site / "systems/heron-1/releases/2/changes.html").read_text()
    assert "From release 1 (2025-11-20T12:00:00Z) to release 2 (2026-11-24T12:00:00Z)" in page
    # the demo's story: a new search makes the claim of C doubtful; its source is added
    # each change in words, its raw key kept in a details element
    assert ('<tr class="change-changed"><td>Grade of the claimed companion C<details class="raw-key"><summary>key'
            '</summary><code>C</code></details></td><td>changed</td><td>candidate') in page
    assert ('<tr class="change-added"><td>Source ao-2019<details class="raw-key"><summary>key</summary>'
            '<code>ao-2019</code></details></td><td>added</td>') in page
    assert not (site / "systems/heron-1/releases/1/changes.html").exists()  # a first release has nothing before it


def test_system_pages_name_their_version_and_history(site):
    heron = (site / "systems/heron-1/index.html").read_text()
    assert "<title>heron-1 (release 2)" in heron  # also the PDF's running header
    assert '<a href="releases/2/changes.html">' in heron and '<a href="releases/1/index.html">release 1</a>' in heron
    assert "<title>wren-9 (unreleased draft)" in (site / "systems/wren-9/index.html").read_text()
    index = (site / "index.html").read_text()
    assert '<a href="systems/heron-1/releases/2/index.html">release 2</a>' in index


def test_unreleased_changes_get_their_own_page(project, tmp_path):
    freeze(project, "alder-4", "one", environ={"SOURCE_DATE_EPOCH": "0"})
    edit(project / "systems/alder-4/evidence.yaml", "parallax: [0.62, 0.03]", "parallax: [0.64, 0.03]")
    out = tmp_path / "site"
    build(project, out, pdf=False)
    page = (out / "systems/alder-4/index.html").read_text()
    assert "<title>alder-4 (draft after release 1)" in page and 'href="unreleased.html"' in page
    changes = (out / "systems/alder-4/unreleased.html").read_text()
    assert "<code>components.B.astrometry[sky-survey-3].parallax</code>" in changes
