"""Failures lose nothing: builds killed at any moment, concurrent and killed log writers, releases, crash reports.

The site's invariant: whatever instant a build dies at, the output folder
holds a whole site, byte for byte the previous one or the new one, which
``verify_site`` finds clean; never a mix, never nothing. The log's: every
measure added lands exactly once, and a writer that dies leaves the log as
it was. Releases are whole or absent and any later edit is found. A bug
prints a short note and writes a crash report instead of a traceback.
"""

from __future__ import annotations

import hashlib
import os
import random
import shutil
import signal
import stat
import subprocess
import sys
import time
from pathlib import Path

import pytest
from click.testing import CliRunner

from dossier.cli import EX_IOERR, EX_SOFTWARE, cli
from dossier.errors import DossierError
from dossier.logbook import append_measures, read_log, write_log
from dossier.schema.log import LogMeasure
from dossier.site import MANIFEST, MARKER, build, verify_site, write_site
from tests.conftest import DEMO, REPO, edit


def _env(**extra: str) -> dict[str, str]:
    return {**os.environ, "PYTHONPATH": os.pathsep.join([str(REPO), os.environ.get("PYTHONPATH", "")]), **extra}


def digest(root: Path) -> dict[str, str]:
    """SHA-256 of every file of a folder, by relative path."""
    return {p.relative_to(root).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(root.rglob("*")) if p.is_file()}


def staging_folders(out: Path) -> list[Path]:
    return sorted(out.parent.glob(f".{out.name}.staging-*"))


def wait_for(condition, process: subprocess.Popen, timeout: float = 600, step: float = 0.001):
    """Poll ``condition()`` until it is truthy; fail if the process ends first or time runs out."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        found = condition()
        if found:
            return found
        if process.poll() is not None:
            out, err = process.communicate()
            pytest.fail(f"the process ended (code {process.returncode}) before the moment to kill it: {out}{err}")
        time.sleep(step)
    process.kill()
    pytest.fail("timed out waiting for the moment to kill the process")


def kill(process: subprocess.Popen) -> None:
    process.send_signal(signal.SIGKILL)
    process.wait(timeout=60)
    assert process.returncode == -signal.SIGKILL


def differences(state: dict[str, str], site: dict[str, str]) -> list[str]:
    return sorted(name for name in state.keys() | site.keys() if state.get(name) != site.get(name))


def assert_whole(out: Path, *allowed: dict[str, str]) -> dict[str, str]:
    """``out`` is exactly one of the allowed sites and its manifest agrees."""
    assert out.is_dir() and not out.is_symlink(), f"{out} is missing"
    state = digest(out)
    assert state in allowed, f"{out} is none of the expected sites; it differs from them in " + "; ".join(
        ", ".join(differences(state, site)[:5]) for site in allowed)
    assert verify_site(out) == []
    return state


# ----------------------------------------------------------------------------
# the site: a small one written directly with write_site, so that many moments are cheap to test

#: A subprocess that writes a site of N pages whose text starts with LABEL, optionally stalling at a moment.
WRITER = """
import sys, time
from pathlib import Path
import dossier.site as site

out, label, n, stall = Path(sys.argv[1]), sys.argv[2], int(sys.argv[3]), sys.argv[4]
flag = out.with_name("ready-to-kill")

def stalling(real, after):
    def wrapper(*args):
        if not after:
            flag.write_text("before")
            time.sleep(600)
        result = real(*args)
        flag.write_text("after")
        time.sleep(600)
        return result
    return wrapper

if stall == "before-swap":
    site._swap_in = stalling(site._swap_in, after=False)
elif stall == "after-swap":
    site._swap_in = stalling(site._swap_in, after=True)
pages = {"index.html": "".join(f'<a href="p/{i}.html">{i}</a>' for i in range(n))}
pages.update({f"p/{i}.html": f"<p>{label} {i}</p>" + "x" * 20000 for i in range(n)})
site.write_site(out, pages)
"""


def small_pages(label: str, n: int) -> dict[str, str]:
    pages = {"index.html": "".join(f'<a href="p/{i}.html">{i}</a>' for i in range(n))}
    pages.update({f"p/{i}.html": f"<p>{label} {i}</p>" + "x" * 20000 for i in range(n)})
    return pages


def start_writer(out: Path, label: str, n: int, stall: str = "none") -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-c", WRITER, str(out), label, str(n), stall], cwd=REPO, env=_env(),
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


@pytest.fixture
def small_sites(tmp_path):
    """(out, old, new): ``out`` holds the old site; ``new`` is what a complete rewrite gives."""
    n = 300
    reference = tmp_path / "reference" / "site"
    write_site(reference, small_pages("new", n))
    new = digest(reference)
    out = tmp_path / "work" / "site"
    write_site(out, small_pages("old", n))
    old = digest(out)
    assert old != new
    return out, old, new, n


def test_a_writer_killed_at_many_moments_leaves_the_old_site_or_the_new_one(small_sites):
    out, old, new, n = small_sites
    flag = out.with_name("ready-to-kill")
    # as soon as its staging folder appears, while it writes the pages: a whole site (the old one, unless the
    # machine was slow to look)
    writer = start_writer(out, "new", n)
    wait_for(lambda: staging_folders(out), writer)
    kill(writer)
    assert_whole(out, old, new)
    # after the last byte but before the swap: the old site, whole
    writer = start_writer(out, "new", n, stall="before-swap")
    wait_for(lambda: flag.is_file(), writer)
    assert any((s / MANIFEST).is_file() for s in staging_folders(out))  # the new site was complete, not swapped in
    kill(writer)
    assert_whole(out, old)
    # after the swap, before the previous site is removed: the new site, whole
    flag.unlink()
    started = time.monotonic()
    writer = start_writer(out, "new", n, stall="after-swap")
    wait_for(lambda: flag.is_file(), writer)
    duration = time.monotonic() - started
    kill(writer)
    assert_whole(out, new)
    assert len(staging_folders(out)) == 3  # the killed writers' leftovers (the last one: the previous site)
    # after random delays around the time a whole write takes: one site or the other, whole
    rng = random.Random(20261202)  # seeded: a failure can be replayed
    for label in ("old", "new"):  # each run changes the site
        writer = start_writer(out, label, n)
        time.sleep(rng.uniform(0.3, 1.1) * duration)
        if writer.poll() is None:
            kill(writer)
        assert_whole(out, old, new)
    write_site(out, small_pages("new", n))  # a whole write removes every leftover
    assert_whole(out, new)
    assert staging_folders(out) == []


def test_a_failure_between_writing_and_swapping_leaves_the_old_site(tmp_path, monkeypatch):
    out = tmp_path / "site"
    write_site(out, small_pages("old", 5))
    old = digest(out)

    def broken(staging, out_dir):
        assert (staging / MANIFEST).is_file()  # everything was written ...
        raise RuntimeError("the disk went away")  # ... and then the swap failed

    monkeypatch.setattr("dossier.site._swap_in", broken)
    with pytest.raises(RuntimeError, match="the disk went away"):
        write_site(out, small_pages("new", 5))
    assert digest(out) == old and verify_site(out) == []
    assert sorted(p.name for p in tmp_path.iterdir()) == ["site"]  # the staging folder was removed


def test_a_failure_while_writing_leaves_the_old_site(tmp_path, monkeypatch):
    out = tmp_path / "site"
    write_site(out, small_pages("old", 5))
    old = digest(out)
    monkeypatch.setattr("dossier.site.manifest_text", lambda *a: (_ for _ in ()).throw(OSError(28, "No space left")))
    with pytest.raises(OSError):
        write_site(out, small_pages("new", 5))
    assert digest(out) == old
    assert sorted(p.name for p in tmp_path.iterdir()) == ["site"]


def test_the_swap_is_one_atomic_exchange_here(tmp_path, monkeypatch):
    from dossier.durable import exchange

    a, b = tmp_path / "a", tmp_path / "b"
    a.mkdir(), b.mkdir()
    (a / "one").write_text("1")
    (b / "two").write_text("2")
    if not exchange(a, b):
        pytest.skip("this system or file system cannot exchange two folders atomically (renameat2)")
    assert [p.name for p in a.iterdir()] == ["two"] and [p.name for p in b.iterdir()] == ["one"]
    # and write_site uses it: no rename ever leaves the site's name empty
    out = tmp_path / "site"
    write_site(out, small_pages("old", 2))
    real = os.rename

    def rename(src, dst):
        assert Path(src) != out and Path(dst) != out, "the site was renamed, not exchanged"
        return real(src, dst)

    monkeypatch.setattr(os, "rename", rename)
    write_site(out, small_pages("new", 2))
    assert "new 0" in (out / "p/0.html").read_text() and verify_site(out) == []


def test_without_an_atomic_exchange_two_renames_still_replace_the_site(tmp_path, monkeypatch):
    out = tmp_path / "site"
    write_site(out, small_pages("old", 5))
    monkeypatch.setattr("dossier.durable.exchange", lambda a, b: False)
    write_site(out, small_pages("new", 5))
    assert "new 0" in (out / "p/0.html").read_text() and verify_site(out) == []
    assert sorted(p.name for p in tmp_path.iterdir()) == ["site"]


def test_without_an_atomic_exchange_a_failed_second_rename_puts_the_old_site_back(tmp_path, monkeypatch):
    out = tmp_path / "site"
    write_site(out, small_pages("old", 5))
    old = digest(out)
    monkeypatch.setattr("dossier.durable.exchange", lambda a, b: False)
    real = os.rename
    onto_out = []

    def rename(src, dst):
        if Path(dst) == out:
            onto_out.append(src)
            if len(onto_out) == 1:  # the new site's rename fails; the old one's, back into place, works
                raise OSError(5, "Input/output error", str(src))
        return real(src, dst)

    monkeypatch.setattr(os, "rename", rename)
    with pytest.raises(OSError, match="Input/output error"):
        write_site(out, small_pages("new", 5))
    assert digest(out) == old
    assert sorted(p.name for p in tmp_path.iterdir()) == ["site"]


def test_what_may_be_replaced(tmp_path):
    # nothing there: created (with the umask's permissions, readable by a web server)
    previous = os.umask(0o022)
    try:
        write_site(tmp_path / "new", small_pages("x", 1))
    finally:
        os.umask(previous)
    assert stat.S_IMODE((tmp_path / "new").stat().st_mode) == 0o755
    # an empty folder: used
    (tmp_path / "empty").mkdir()
    write_site(tmp_path / "empty", small_pages("x", 1))
    assert (tmp_path / "empty" / MARKER).is_file()
    # a site of an older Dossier that has its manifest but no marker: replaced
    legacy = tmp_path / "legacy"
    legacy.mkdir()
    (legacy / MANIFEST).write_text('{"format": "dossier-manifest", "outputs": {}}')
    (legacy / "old.html").write_text("old")
    write_site(legacy, small_pages("x", 1))
    assert not (legacy / "old.html").exists()
    # a folder of someone else's, even with a manifest.json of another kind: refused, untouched
    other = tmp_path / "other"
    other.mkdir()
    (other / MANIFEST).write_text('{"name": "a web app"}')
    with pytest.raises(DossierError, match="not empty and was not built by dossier"):
        write_site(other, small_pages("x", 1))
    assert [p.name for p in other.iterdir()] == [MANIFEST]
    # a file: refused, untouched
    (tmp_path / "file").write_text("mine")
    with pytest.raises(DossierError, match="is a file, not a folder"):
        write_site(tmp_path / "file", small_pages("x", 1))
    assert (tmp_path / "file").read_text() == "mine"
    assert not [p for p in tmp_path.iterdir() if ".staging-" in p.name]


def test_a_symlink_the_user_made_to_the_output_folder_is_followed_and_kept(tmp_path):
    real = tmp_path / "www" / "site"
    write_site(real, small_pages("old", 2))
    link = tmp_path / "public"
    link.symlink_to(real)
    write_site(link, small_pages("new", 2))
    assert link.is_symlink() and link.resolve() == real and not real.is_symlink()
    assert "new 0" in (link / "p/0.html").read_text()
    result = CliRunner().invoke(cli, ["verify", str(link)])
    assert result.exit_code == 0 and "every file matches its manifest" in result.output
    assert staging_folders(real) == [] and staging_folders(link) == []


def test_a_running_builds_staging_folder_is_never_taken_for_an_abandoned_one(tmp_path):
    import fcntl

    out = tmp_path / "site"
    write_site(out, small_pages("old", 2))
    abandoned = tmp_path / ".site.staging-1-00000000"
    running = tmp_path / ".site.staging-2-00000000"
    for folder in (abandoned, running):
        folder.mkdir()
        (folder / "index.html").write_text("half")
    fd = os.open(running, os.O_RDONLY)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX)  # as write_site holds its own while it writes
        write_site(out, small_pages("new", 2))
        assert not abandoned.exists()
        assert (running / "index.html").read_text() == "half"
    finally:
        os.close(fd)
    write_site(out, small_pages("new", 2))
    assert not running.exists()


# ----------------------------------------------------------------------------
# the site: the demo, built by `dossier build` in a process killed at several moments

BUILD_STALLING = """
import sys, time
from pathlib import Path
import dossier.site as site

flag, stall = Path(sys.argv[1]), sys.argv[2]
real = site._swap_in

def stalling(staging, out_dir):
    if stall == "before-swap":
        flag.write_text(str(staging))
        time.sleep(600)
    result = real(staging, out_dir)
    flag.write_text(str(staging))
    time.sleep(600)
    return result

site._swap_in = stalling
sys.argv = ["dossier", *sys.argv[3:]]
from dossier.cli import main
main()
"""


@pytest.fixture(scope="module")
def demo_sites(tmp_path_factory):
    """(project, out, old): out holds the demo's site (digest ``old``); the project has changed since."""
    root = tmp_path_factory.mktemp("killed-builds")
    project = root / "project"
    shutil.copytree(DEMO, project, ignore=shutil.ignore_patterns(".dossier-cache"))
    out = root / "out"
    build(project, out, pdf=False)
    old = digest(out)
    edit(project / "systems/alder-4/evidence.yaml", "parallax: [0.62, 0.03]", "parallax: [0.64, 0.03]")
    return project, out, old


def dossier_build(project: Path, out: Path, stall: str | None = None, flag: Path | None = None) -> subprocess.Popen:
    args = ["build", str(project), "--out", str(out), "--no-pdf"]
    command = [sys.executable, "-m", "dossier", *args] if stall is None else \
        [sys.executable, "-c", BUILD_STALLING, str(flag), stall, *args]
    return subprocess.Popen(command, cwd=REPO, env=_env(), stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


@pytest.mark.slow
def test_dossier_build_killed_at_several_moments_leaves_the_old_site_or_the_new_one(demo_sites):
    project, out, old = demo_sites
    flag = out.with_name("ready-to-kill")
    seen: list[tuple[str, dict[str, str]]] = []  # (moment, the site found after the kill), checked against the new
    # site at the end; each one is checked on the spot to be a whole site its manifest agrees with

    def after_kill(moment: str) -> None:
        assert out.is_dir(), f"killed {moment}: {out} is missing"
        assert verify_site(out) == [], f"killed {moment}"
        seen.append((moment, digest(out)))

    # as soon as its staging folder appears, while it writes the pages
    started = time.monotonic()
    process = dossier_build(project, out)
    wait_for(lambda: staging_folders(out), process)
    kill(process)
    duration = time.monotonic() - started
    after_kill("while writing")
    # every page written, not yet swapped in: the old site
    process = dossier_build(project, out, "before-swap", flag)
    wait_for(lambda: flag.is_file(), process)
    kill(process)
    assert_whole(out, old)
    # swapped in, the previous site not yet removed: the new site (checked below)
    flag.unlink()
    process = dossier_build(project, out, "after-swap", flag)
    wait_for(lambda: flag.is_file(), process)
    kill(process)
    after_kill("after the swap")
    assert seen[-1][1] != old
    # after random delays around the time a build takes
    rng = random.Random(9)  # seeded: a failure can be replayed
    for _ in range(2):
        process = dossier_build(project, out)
        time.sleep(rng.uniform(0.5, 1.1) * duration)
        if process.poll() is None:
            kill(process)
        after_kill("after a random delay")
    # a build that runs to the end: the new site, and the killed builds' leftovers are gone
    process = dossier_build(project, out)
    output, errors = process.communicate(timeout=600)
    assert process.returncode == 0, errors
    new = digest(out)
    assert new != old and verify_site(out) == []
    assert staging_folders(out) == []
    for moment, state in seen:
        assert state in (old, new), f"killed {moment}: the site is neither the old one nor the new one: a mix"
    assert seen[1][1] == new  # after the swap: the new site, whole
    result = CliRunner().invoke(cli, ["verify", str(out)])
    assert result.exit_code == 0 and "every file matches its manifest" in result.output


# ----------------------------------------------------------------------------
# the observing log: concurrent writers, and writers that die

APPENDER = """
import sys, time
from pathlib import Path
from dossier.logbook import append_measures
from dossier.schema.log import LogMeasure

path, writer, count, go = Path(sys.argv[1]), int(sys.argv[2]), int(sys.argv[3]), Path(sys.argv[4])
while not go.exists():  # every writer starts at once, after its imports
    time.sleep(0.001)
for i in range(count):
    m = LogMeasure(pair="AB", epoch=f"J2024.{writer}{i:03d}", theta=float(writer), rho=1.0 + i, method="imaging")
    append_measures(path, [m], "log.csv")
"""

def one_row_log(path: Path) -> None:
    write_log(path, [LogMeasure(pair="AB", epoch="J2020.5", theta=10.0, rho=1.0, method="imaging")])


def test_eight_concurrent_writers_all_land_once(tmp_path):
    path = tmp_path / "log.csv"
    go = tmp_path / "go"
    writers, count = 8, 20
    processes = [subprocess.Popen([sys.executable, "-c", APPENDER, str(path), str(k), str(count), str(go)],
                                  cwd=REPO, env=_env()) for k in range(1, writers + 1)]
    time.sleep(0.5)
    go.touch()
    assert [p.wait(timeout=600) for p in processes] == [0] * writers
    measures, problems = read_log(path, "log.csv")
    assert problems == []
    epochs = [m.epoch for m in measures]
    expected = {f"J2024.{k}{i:03d}" for k in range(1, writers + 1) for i in range(count)}
    assert len(epochs) == len(expected) and set(epochs) == expected  # none lost, none twice
    for k in range(1, writers + 1):  # each writer's rows in the order it wrote them
        own = [m.rho for m in measures if m.theta == float(k)]
        assert own == sorted(own)
    assert path.read_text().count("\n") == 1 + writers * count  # the header and whole rows, nothing torn
    assert sorted(p.name for p in tmp_path.iterdir()) == ["go", "log.csv", "log.csv.lock"]  # no temporary left


def test_a_writer_that_fails_after_writing_its_temporary_file_leaves_the_log_as_it_was(tmp_path, monkeypatch):
    path = tmp_path / "log.csv"
    one_row_log(path)
    before = path.read_bytes()
    real = os.replace
    written = []

    def failing(src, dst):
        if Path(dst) == path:
            written.append(Path(src).read_text())  # the whole new log was in the temporary file ...
            raise OSError(5, "Input/output error")  # ... when the rename failed
        return real(src, dst)

    monkeypatch.setattr(os, "replace", failing)
    measure = LogMeasure(pair="AB", epoch="J2024.5", theta=20.0, rho=1.5, method="speckle")
    with pytest.raises(OSError, match="Input/output error"):
        append_measures(path, [measure], "log.csv")
    assert "J2024.5" in written[0]
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["log.csv", "log.csv.lock"]  # temporary removed
    monkeypatch.setattr(os, "replace", real)
    append_measures(path, [measure], "log.csv")  # the lock was released
    assert [m.epoch for m in read_log(path, "log.csv")[0]] == ["J2020.5", "J2024.5"]


KILLED_APPENDER = """
import os, sys, time
from pathlib import Path
from dossier.logbook import append_measures
from dossier.schema.log import LogMeasure

path, flag = Path(sys.argv[1]), Path(sys.argv[2])
def stall(src, dst):
    flag.write_text(str(src))
    time.sleep(600)
os.replace = stall  # the temporary file is written and flushed; the process dies before the rename
append_measures(path, [LogMeasure(pair="AB", epoch="J2024.7", theta=5.0, rho=2.0, method="imaging")], "log.csv")
"""


def test_a_writer_killed_mid_write_leaves_the_old_log_and_the_lock_free(tmp_path):
    path = tmp_path / "log.csv"
    one_row_log(path)
    before = path.read_bytes()
    flag = tmp_path / "flag"
    process = subprocess.Popen([sys.executable, "-c", KILLED_APPENDER, str(path), str(flag)], cwd=REPO, env=_env(),
                               stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    wait_for(flag.is_file, process)
    temporary = Path(flag.read_text())
    assert "J2024.7" in temporary.read_text()
    kill(process)
    assert path.read_bytes() == before
    # the next writer gets the lock at once, lands, and clears the dead writer's temporary file
    append_measures(path, [LogMeasure(pair="AB", epoch="J2024.8", theta=5.0, rho=2.0, method="imaging")], "log.csv")
    assert [m.epoch for m in read_log(path, "log.csv")[0]] == ["J2020.5", "J2024.8"]
    assert not temporary.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["flag", "log.csv", "log.csv.lock"]


# ----------------------------------------------------------------------------
# releases: whole or absent, and never altered silently


@pytest.fixture
def releasable(tmp_path) -> Path:
    project = tmp_path / "project"
    shutil.copytree(DEMO, project, ignore=shutil.ignore_patterns(".dossier-cache"))
    edit(project / "dossier.toml", "required_approvals = 1", "required_approvals = 0")
    edit(project / "systems/alder-4/evidence.yaml", "parallax: [0.62, 0.03]", "parallax: [0.64, 0.03]")
    return project


def test_a_release_that_fails_half_way_leaves_nothing(releasable, monkeypatch):
    from dossier import release
    from dossier.release import freeze, releases_of, verify_releases

    before = [r.number for r in releases_of(releasable, "alder-4")]
    folder = releasable / "releases" / "alder-4"
    names = sorted(p.name for p in folder.iterdir())
    real = release._write_readonly
    calls = []

    def failing(path, data):
        calls.append(path)
        if len(calls) == 3:
            raise OSError(28, "No space left on device")
        real(path, data)

    monkeypatch.setattr(release, "_write_readonly", failing)
    with pytest.raises(OSError, match="No space left"):
        freeze(releasable, "alder-4", "half", environ={"SOURCE_DATE_EPOCH": "0"})
    assert [r.number for r in releases_of(releasable, "alder-4")] == before
    assert sorted(p.name for p in folder.iterdir()) == names  # no new number, no staging folder
    assert verify_releases(releasable) == []
    monkeypatch.setattr(release, "_write_readonly", real)
    made = freeze(releasable, "alder-4", "whole", environ={"SOURCE_DATE_EPOCH": "0"})
    assert made.number == before[-1] + 1 and verify_releases(releasable) == []


def test_an_altered_release_is_found_by_dossier_verify(tmp_path):
    project = tmp_path / "project"
    shutil.copytree(DEMO, project, ignore=shutil.ignore_patterns(".dossier-cache"))
    runner = CliRunner()
    assert runner.invoke(cli, ["verify", str(project)]).exit_code == 0
    path = project / "releases/heron-1/1/weigh.json"
    # released files are written read-only (tests/test_release.py), but git does not keep that in a clone
    path.chmod(stat.S_IRUSR | stat.S_IWUSR)  # someone insists
    data = path.read_bytes()
    path.write_bytes(data.replace(b'"bound"', b'"optical"', 1))
    assert path.read_bytes() != data
    result = runner.invoke(cli, ["verify", str(project)])
    assert result.exit_code == 1
    assert f"{project}: releases/heron-1/1/weigh.json: edited (SHA-256 differs from the release record)" in result.output


# ----------------------------------------------------------------------------
# crash reports


@pytest.fixture
def crash_dir(tmp_path, monkeypatch) -> Path:
    """Crash reports go to the temporary folder: a private one for the test."""
    import tempfile

    folder = tmp_path / "tmp"
    folder.mkdir()
    monkeypatch.setattr(tempfile, "tempdir", str(folder))
    return folder


def _boom(*args, **kwargs):
    raise RuntimeError("an invariant broke")


def test_a_bug_prints_a_short_note_and_writes_a_crash_report(crash_dir, monkeypatch):
    monkeypatch.setattr("dossier.schema.loader.load_project", _boom)
    monkeypatch.setattr(sys, "argv", ["dossier", "check", str(DEMO)])
    result = CliRunner().invoke(cli, ["check", str(DEMO)])
    assert result.exit_code == EX_SOFTWARE == 70
    [report] = list(crash_dir.iterdir())
    assert result.stderr.splitlines() == [
        "Dossier 0.1.0 hit an internal error (this is a bug, not a problem with your files): "
        "RuntimeError: an invariant broke",
        f"Please send {report} to the maintainers with the command you ran.",
    ]
    assert "Traceback" not in result.output
    text = report.read_text()
    import platform

    assert text.startswith("Dossier crash report\ndossier: 0.1.0\n")
    assert f"python: {sys.version.splitlines()[0]}" in text and f"platform: {platform.platform()}" in text
    assert f"command line: dossier check {DEMO}" in text
    assert "Traceback (most recent call last):" in text and "in _boom" in text
    assert text.rstrip().endswith("RuntimeError: an invariant broke")
    assert stat.S_IMODE(report.stat().st_mode) == 0o600  # it names paths: the owner's only


def test_a_bug_in_a_subcommand_of_a_group_is_reported_too(crash_dir, monkeypatch):
    monkeypatch.setattr("dossier.logbook.add_measure", _boom)
    result = CliRunner().invoke(cli, ["log", "add", str(DEMO), "wren-9", "AB", "--epoch", "J2024.5", "--theta", "1",
                                      "--rho", "1", "--method", "imaging"])
    assert result.exit_code == EX_SOFTWARE and "hit an internal error" in result.stderr
    assert len(list(crash_dir.iterdir())) == 1


def test_debug_shows_the_traceback_and_writes_no_report(crash_dir, monkeypatch):
    monkeypatch.setattr("dossier.schema.loader.load_project", _boom)
    result = CliRunner().invoke(cli, ["--debug", "check", str(DEMO)])
    assert isinstance(result.exception, RuntimeError)
    assert list(crash_dir.iterdir()) == []


def test_the_users_mistakes_and_the_systems_refusals_are_not_called_bugs(crash_dir, monkeypatch):
    from dossier.schema import loader

    def refused(*args, **kwargs):
        raise PermissionError(13, "Permission denied", "/srv/site")

    real = loader.load_project
    monkeypatch.setattr(loader, "load_project", refused)
    result = CliRunner().invoke(cli, ["check", str(DEMO)])
    assert result.exit_code == EX_IOERR == 74
    assert result.stderr.startswith("error: Permission denied: '/srv/site'. Fix: check that the path exists")
    monkeypatch.setattr(loader, "load_project", real)
    result = CliRunner().invoke(cli, ["check", str(crash_dir / "no-such-project")])
    assert result.exit_code in (1, 2) and "internal error" not in result.output
    assert list(crash_dir.iterdir()) == []


def test_when_no_report_can_be_written_it_is_printed(tmp_path, monkeypatch):
    import tempfile

    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path / "no-such-folder"))
    monkeypatch.setattr("dossier.schema.loader.load_project", _boom)
    result = CliRunner().invoke(cli, ["check", str(DEMO)])
    assert result.exit_code == EX_SOFTWARE
    assert "Dossier crash report" in result.stderr and "RuntimeError: an invariant broke" in result.stderr
    assert "Please send the report above to the maintainers" in result.stderr


CRASHING = """
import sys
import dossier.schema.loader as loader

def broken(*args, **kwargs):
    raise RuntimeError("an invariant broke")

loader.load_project = broken
sys.argv = ["dossier", *sys.argv[1:]]
from dossier.cli import main
main()
"""


def test_a_bug_in_a_real_process_exits_70_without_a_traceback(tmp_path):
    process = subprocess.run([sys.executable, "-c", CRASHING, "check", str(DEMO)], cwd=REPO,
                             env=_env(TMPDIR=str(tmp_path)), capture_output=True, text=True, timeout=300)
    assert process.returncode == 70
    assert "Traceback" not in process.stderr and "hit an internal error" in process.stderr
    [report] = list(tmp_path.glob("dossier-crash-*.txt"))
    assert str(report) in process.stderr and "RuntimeError: an invariant broke" in report.read_text()
