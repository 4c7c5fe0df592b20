"""dossier serve: build into a temporary folder, serve it over HTTP, rebuild when the evidence changes."""

from __future__ import annotations

import shutil
import socket
import time
import urllib.error
import urllib.request
from pathlib import Path

import pytest
from click.testing import CliRunner

from dossier.cli import cli
from dossier.errors import DossierError, ProblemsFound
from dossier.schema.loader import load_project
from dossier.serve import Server, Watcher, changed_paths, snapshot
from tests.conftest import DEMO, edit

WREN = "systems/wren-9/evidence.yaml"
TITLE = "Two dwarfs sharing a motion, bound only if one hides a companion"


class Recorder:
    """Collects what the server reports, as ``echo`` would print it."""

    def __init__(self) -> None:
        self.lines: list[tuple[str, bool]] = []

    def __call__(self, message: str, err: bool = False) -> None:
        self.lines.append((message, err))

    @property
    def errors(self) -> list[str]:
        return [m for m, err in self.lines if err]


def fetch(url: str) -> tuple[int, str]:
    with urllib.request.urlopen(url, timeout=5) as response:
        return response.status, response.read().decode("utf-8")


def wait_for(condition, timeout: float = 5.0) -> bool:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        try:
            if condition():
                return True
        except OSError:  # e.g. a page fetched at the instant of a swap
            pass
        time.sleep(0.02)
    return condition()


def fake_build(project_dir, out_dir, pdf=True, use_cache=True):
    """A one-page stand-in for site.build (written with the real write_site), for tests of the plumbing."""
    from dossier.schema.loader import load_project
    from dossier.site import write_site

    project = load_project(Path(project_dir))
    titles = "".join(f"<li>{s.title}</li>" for s in project.systems.values())
    write_site(Path(out_dir), {"index.html": f"<ul>{titles}</ul>"})
    return Path(out_dir).resolve() / "index.html"


@pytest.fixture(scope="module")
def served(tmp_path_factory):
    """The real demo site, built once without PDFs, served on a free port; the tests poll by hand."""
    project = tmp_path_factory.mktemp("serve") / "project"
    shutil.copytree(DEMO, project)
    recorder = Recorder()
    server = Server(project, port=0, pdf=False, echo=recorder, watch=False).start()
    server.recorder = recorder
    yield server
    server.stop()


def test_snapshot_covers_the_inputs_and_ignores_hidden_paths(demo_copy):
    (demo_copy / ".dossier-cache").mkdir(exist_ok=True)
    (demo_copy / ".dossier-cache" / "fit.json").write_text("{}")
    (demo_copy / "systems" / "wren-9" / ".evidence.yaml.swp").write_text("swap")
    (demo_copy / "systems" / ".trash").mkdir()
    (demo_copy / "systems" / ".trash" / "evidence.yaml").write_text("id: x\n")
    (demo_copy / "releases" / "alder-4" / ".lock").write_text("")
    found = snapshot(demo_copy)
    assert {"dossier.toml", "references.yaml", WREN, "systems/heron-1/log.csv",
            "releases/alder-4/1/release.json"} <= set(found)
    assert not [p for p in found if any(part.startswith(".") for part in p.split("/"))]
    assert all(isinstance(m, int) and isinstance(s, int) for m, s in found.values())

    (demo_copy / ".dossier-cache" / "fit.json").write_text('{"more": 1}')  # a build writing its cache
    assert snapshot(demo_copy) == found
    edit(demo_copy / WREN, TITLE, TITLE + " at all")
    (demo_copy / "systems" / "heron-1" / "log.csv").unlink()
    assert changed_paths(found, snapshot(demo_copy)) == ["systems/heron-1/log.csv", WREN]


def test_serves_the_index_and_the_system_pages(served, capsys):
    assert served.url.startswith("http://127.0.0.1:") and not served.url.endswith(":0/")
    status, index = fetch(served.url)
    assert status == 200 and "systems/wren-9/index.html" in index
    status, page = fetch(served.url + "systems/wren-9/index.html")
    assert status == 200 and "wren-9" in page and "<html" in page
    assert fetch(served.url + "systems/wren-9/")[0] == 200
    assert capsys.readouterr() == ("", "")  # no line per request
    with pytest.raises(urllib.error.HTTPError) as missing:
        fetch(served.url + "no-such-page.html")
    assert missing.value.code == 404
    assert "no-such-page.html" in capsys.readouterr().err  # but errors are shown


def test_a_change_of_the_evidence_is_served_after_the_rebuild(served):
    project = served.project
    served.rebuild_if_changed()  # start from a site of the current evidence (a no-op unless a test left a change)
    text = (project / WREN).read_text(encoding="utf-8")
    new_title = "Two dwarfs sharing a motion, edited while being served"
    (project / WREN).write_text(text.replace(TITLE, new_title), encoding="utf-8")
    builds = served.watcher.builds
    assert served.rebuild_if_changed() is True
    assert served.watcher.builds == builds + 1 and served.watcher.last_problems == []
    assert new_title in fetch(served.url + "systems/wren-9/index.html")[1]
    assert new_title in fetch(served.url + "index.html")[1]
    assert served.rebuild_if_changed() is False
    assert any(m.startswith("changed: " + WREN) for m, _ in served.recorder.lines)


def test_broken_evidence_is_reported_and_the_previous_site_stays(served):
    project = served.project
    served.rebuild_if_changed()  # start from a site of the current evidence
    before = fetch(served.url + "systems/wren-9/index.html")[1]
    original = (project / WREN).read_text(encoding="utf-8")
    broken = original.replace("\ntitle: ", "\ntitle: [", 1)
    assert broken != original
    (project / WREN).write_text(broken, encoding="utf-8")
    try:
        with pytest.raises(ProblemsFound) as found:
            load_project(project)
        expected = [str(p) for p in found.value.problems]  # what 'dossier check' prints
        assert served.rebuild_if_changed() is False
        assert served.watcher.last_problems == expected + [f"{len(expected)} problem(s) found."]
        assert expected[0].startswith(WREN + ":") and all(line in served.recorder.errors for line in expected)
        assert fetch(served.url + "systems/wren-9/index.html") == (200, before)
        assert served.rebuild_if_changed() is False  # the same mistake is not rebuilt (nor reported) again
    finally:
        (project / WREN).write_text(original, encoding="utf-8")


def test_the_watcher_thread_reports_a_mistake_and_keeps_polling(demo_copy, tmp_path):
    recorder = Recorder()
    watcher = Watcher(demo_copy, tmp_path / "site", echo=recorder, interval=0.02)
    watcher.start()
    try:
        edit(demo_copy / WREN, f"title: {TITLE}", f"title: [{TITLE}")
        assert wait_for(lambda: watcher.last_problems, timeout=5)
        assert "YAML syntax error" in watcher.last_problems[0]
        assert watcher._thread.is_alive()
    finally:
        watcher.stop()
    assert watcher._thread is None and not (tmp_path / "site").exists()


def test_an_unexpected_failure_does_not_stop_the_server(demo_copy, monkeypatch):
    monkeypatch.setattr("dossier.site.build", fake_build)
    recorder = Recorder()
    with Server(demo_copy, port=0, echo=recorder, interval=0.02) as server:
        assert TITLE in fetch(server.url)[1]

        def broken_build(*args, **kwargs):
            raise RuntimeError("a bug in a rule")

        monkeypatch.setattr("dossier.site.build", broken_build)
        edit(demo_copy / WREN, TITLE, "Renamed pair")
        assert wait_for(lambda: server.watcher.last_problems, timeout=5)
        assert "RuntimeError: a bug in a rule" in server.watcher.last_problems[-1]
        assert TITLE in fetch(server.url)[1]  # the previous site

        monkeypatch.setattr("dossier.site.build", fake_build)
        edit(demo_copy / WREN, "Renamed pair", "Renamed again")
        assert wait_for(lambda: "Renamed again" in fetch(server.url)[1], timeout=5)  # the watcher rebuilt


def test_stop_closes_the_port_and_removes_the_folder(demo_copy, monkeypatch):
    monkeypatch.setattr("dossier.site.build", fake_build)
    server = Server(demo_copy, port=0, echo=Recorder()).start()
    port, folder = int(server.url.rsplit(":", 1)[1].strip("/")), server.out_dir.parent
    assert fetch(server.url)[0] == 200 and folder.is_dir()
    server.stop()
    with pytest.raises(OSError):
        socket.create_connection(("127.0.0.1", port), timeout=2).close()
    assert not folder.exists() and server.watcher._thread is None
    server.stop()  # twice is harmless


def test_a_busy_port_is_a_message_not_a_traceback(demo_copy, monkeypatch):
    monkeypatch.setattr("dossier.site.build", fake_build)
    with socket.socket() as taken:
        taken.bind(("127.0.0.1", 0))
        taken.listen()
        server = Server(demo_copy, port=taken.getsockname()[1], echo=Recorder())
        with pytest.raises(DossierError, match="Fix: choose another --port"):
            server.start()
    assert not server.out_dir.parent.exists()


def test_the_command_serves_until_interrupted(demo_copy, monkeypatch):
    monkeypatch.setattr("dossier.site.build", fake_build)
    seen = {}

    def interrupt(self):
        seen["index"] = fetch(self.url)
        raise KeyboardInterrupt

    monkeypatch.setattr(Server, "wait", interrupt)
    result = CliRunner().invoke(cli, ["serve", str(demo_copy), "--port", "0"])
    assert result.exit_code == 0, result.output
    assert "Serving" in result.output and "http://127.0.0.1:" in result.output and "Stopping." in result.output
    assert seen["index"][0] == 200 and TITLE in seen["index"][1]


def test_the_command_reports_the_problems_of_the_first_build(demo_copy):
    edit(demo_copy / WREN, f"title: {TITLE}", f"title: [{TITLE}")
    result = CliRunner().invoke(cli, ["serve", str(demo_copy), "--port", "0"])
    assert result.exit_code == 1
    assert "YAML syntax error" in result.output and "Traceback" not in result.output


def test_a_request_during_the_swap_waits_for_the_new_site(demo_copy, monkeypatch):
    import threading

    monkeypatch.setattr("dossier.site.build", fake_build)
    with Server(demo_copy, port=0, echo=Recorder(), watch=False) as server:
        aside = server.out_dir.with_name("aside")
        server.out_dir.rename(aside)  # the instant between write_site's two renames, stretched
        timer = threading.Timer(0.2, aside.rename, args=(server.out_dir,))
        timer.start()
        try:
            status, page = fetch(server.url)  # sent while the folder is away: answered once it is back
            assert status == 200 and TITLE in page
        finally:
            timer.join()
