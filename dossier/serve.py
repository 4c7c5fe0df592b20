"""Preview a project's site over HTTP and rebuild it whenever the evidence changes.

``dossier serve`` builds the site into a temporary folder, serves that folder
with the standard library's :mod:`http.server` and polls the project's input
files (their modification times and sizes, every half second). A change
rebuilds the site into the same folder; :func:`dossier.site.write_site`
builds into a staging folder and swaps it in, so a visitor never sees half a
site. A rebuild that fails on a mistake in the evidence prints the problems
(as ``dossier check`` does) and the previous site stays up.

Only the standard library is used here: no file-system notification
package, no web framework.
"""

from __future__ import annotations

import functools
import os
import socket
import sys
import tempfile
import threading
import time
import traceback
from http.server import SimpleHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path
from typing import Callable

from dossier.errors import DossierError, ProblemsFound

POLL_SECONDS = 0.5

Snapshot = dict[str, tuple[int, int]]
Echo = Callable[..., None]


def _echo(message: str, err: bool = False) -> None:
    stream = sys.stderr if err else sys.stdout
    print(message, file=stream, flush=True)


def snapshot(project: Path) -> Snapshot:
    """``{path relative to the project: (mtime_ns, size)}`` of every input file that exists now.

    Hidden paths (``.dossier-cache/``, editors' swap files, lock files) are
    left out, so the cache a build writes does not trigger another build.
    """
    root = Path(project)
    found: Snapshot = {}
    from dossier.site import input_files

    for path in input_files(root):
        try:
            st = path.stat()
        except OSError:  # vanished between listing and stat (an editor's save, a deletion)
            continue
        if path.is_file():
            found[path.relative_to(root).as_posix()] = (st.st_mtime_ns, st.st_size)
    return found


def changed_paths(before: Snapshot, after: Snapshot) -> list[str]:
    """Paths added, removed or modified between two snapshots, sorted."""
    return sorted(p for p in before.keys() | after.keys() if before.get(p) != after.get(p))


def problem_lines(exc: DossierError) -> list[str]:
    """What ``dossier check`` prints for an error: one line per problem, or ``error: …``."""
    if isinstance(exc, ProblemsFound):
        return [str(problem) for problem in exc.problems] + [f"{len(exc.problems)} problem(s) found."]
    return [f"error: {exc}"]


class Watcher:
    """Rebuilds ``out_dir`` from ``project`` when the project's input files change.

    :meth:`rebuild_if_changed` does one poll (tests call it directly);
    :meth:`start` polls in a background thread until :meth:`stop`. A failed
    rebuild is reported through ``echo`` and leaves the previous site in
    place; the failing inputs are not retried until they change again.
    """

    def __init__(self, project: Path | str, out_dir: Path | str, pdf: bool = False, use_cache: bool = True,
                 echo: Echo = _echo, interval: float = POLL_SECONDS):
        self.project = Path(project)
        self.out_dir = Path(out_dir)
        self.pdf = pdf
        self.use_cache = use_cache
        self.echo = echo
        self.interval = interval
        self.seen: Snapshot = snapshot(self.project)
        self.builds = 0  # successful builds
        self.last_problems: list[str] = []  # lines reported by the last failed rebuild; empty after a success
        self._lock = threading.RLock()
        self._building = False
        self._stop = threading.Event()
        self._thread: threading.Thread | None = None

    def build(self) -> None:
        """Build the site now (raises :class:`DossierError` on the user's mistakes)."""
        from dossier.site import build

        with self._lock:
            self.seen = snapshot(self.project)  # taken before reading: a change during the build is seen next poll
            self._building = True
            try:
                build(self.project, self.out_dir, pdf=self.pdf, use_cache=self.use_cache)
            finally:
                self._building = False
            self.builds += 1
            self.last_problems = []

    def rebuild_if_changed(self) -> bool:
        """Rebuild if an input file changed since the last build; True when a new site was swapped in.

        Never raises for a failed build: the problems are reported and the
        previous site keeps being served.
        """
        with self._lock:  # one poll at a time: the background thread and a direct call never build twice
            now = snapshot(self.project)
            if now == self.seen:
                return False
            changed = changed_paths(self.seen, now)
            shown = ", ".join(changed[:3]) + (f" and {len(changed) - 3} more" if len(changed) > 3 else "")
            self.echo(f"changed: {shown}; rebuilding…")
            start = time.perf_counter()
            try:
                self.build()
            except DossierError as exc:
                self.last_problems = problem_lines(exc)
            except Exception:  # a bug must not take the preview down; show it and keep serving
                self.last_problems = ["error: the rebuild failed unexpectedly:", traceback.format_exc().rstrip()]
            else:
                self.echo(f"rebuilt in {time.perf_counter() - start:.1f} s.")
                return True
        if self._stop.is_set():  # interrupted by stop(): not the user's mistake
            return False
        for line in self.last_problems:
            self.echo(line, err=True)
        self.echo("Still serving the previous site; save a fix to rebuild.", err=True)
        return False

    def _run(self) -> None:
        while not self._stop.wait(self.interval):
            try:
                self.rebuild_if_changed()
            except Exception:  # e.g. the project folder vanished: report, keep polling
                self.echo("error: watching the project failed:\n" + traceback.format_exc().rstrip(), err=True)

    def start(self) -> None:
        """Poll in a background thread every ``interval`` seconds."""
        if self._thread is None:
            self._stop.clear()
            self._thread = threading.Thread(target=self._run, name="dossier-serve-watch", daemon=True)
            self._thread.start()

    def stop(self) -> None:
        """Stop polling; waits for a rebuild in progress to finish."""
        self._stop.set()
        if self._thread is not None:
            if self._building:
                self.echo("Waiting for the rebuild in progress to finish…")
            self._thread.join()
            self._thread = None


class _Handler(SimpleHTTPRequestHandler):
    """Serves the built site; quiet but for errors, and tells browsers to revalidate every page."""

    def send_head(self):
        # Where write_site cannot exchange the two folders in one step (not Linux, or a file system without
        # renameat2's RENAME_EXCHANGE) it swaps them with two renames: for an instant the folder is absent. Wait
        # that out rather than answer 404.
        deadline = time.monotonic() + 1.0
        while not os.path.isdir(self.directory) and time.monotonic() < deadline:
            time.sleep(0.01)
        return super().send_head()

    def end_headers(self) -> None:
        self.send_header("Cache-Control", "no-cache")
        super().end_headers()

    def log_message(self, format: str, *args) -> None:  # noqa: A002 (the base class's name)
        pass

    def log_error(self, format: str, *args) -> None:  # noqa: A002
        if getattr(self, "path", "").split("?")[0] == "/favicon.ico":  # browsers ask for it; the site has none
            return
        request = getattr(self, "requestline", "")
        sys.stderr.write(f"{self.address_string()} {request!r}: {format % args}\n")


class _IPv6Server(ThreadingHTTPServer):
    address_family = socket.AF_INET6


class Server:
    """Serve a project's site from a temporary folder, rebuilt when the evidence changes.

    ``start()`` binds ``host:port`` (``port=0`` picks a free port), builds the
    site (raising :class:`DossierError` if it cannot) and serves it in
    background threads; ``url`` is then the site's address. ``stop()``
    closes the port and removes the temporary folder.
    """

    def __init__(self, project: Path | str, host: str = "127.0.0.1", port: int = 8000, pdf: bool = False,
                 use_cache: bool = True, echo: Echo = _echo, interval: float = POLL_SECONDS, watch: bool = True):
        self.project = Path(project)
        self.host = host
        self.port = port
        self.watch = watch
        self._tmp = tempfile.TemporaryDirectory(prefix="dossier-serve-")
        self.out_dir = Path(self._tmp.name) / "site"
        self.watcher = Watcher(self.project, self.out_dir, pdf=pdf, use_cache=use_cache, echo=echo, interval=interval)
        self._httpd: ThreadingHTTPServer | None = None
        self._thread: threading.Thread | None = None
        self._stopped = threading.Event()

    def _bind(self) -> ThreadingHTTPServer:
        handler = functools.partial(_Handler, directory=str(self.out_dir))
        cls = _IPv6Server if ":" in self.host else ThreadingHTTPServer
        try:
            return cls((self.host, self.port), handler)
        except OSError as exc:
            raise DossierError(f"cannot listen on {self.host} port {self.port}: {exc.strerror or exc}. Fix: choose "
                               "another --port (--port 0 picks a free one) or a --host of this machine.") from None

    def start(self) -> "Server":
        """Bind, build the site, then serve it and watch the project; returns self."""
        try:
            self._httpd = self._bind()  # first, so a busy port fails before a long build
            self.watcher.build()
        except BaseException:
            self.stop()
            raise
        self._thread = threading.Thread(target=self._httpd.serve_forever, kwargs={"poll_interval": 0.1},
                                        name="dossier-serve-http", daemon=True)
        self._thread.start()
        if self.watch:
            self.watcher.start()
        return self

    @property
    def url(self) -> str:
        """The address of the site's index page (with the port actually bound)."""
        if self._httpd is None:
            raise RuntimeError("the server is not started")
        port = self._httpd.server_address[1]
        host = f"[{self.host}]" if ":" in self.host else self.host
        return f"http://{host}:{port}/"

    def rebuild_if_changed(self) -> bool:
        """One poll of the watcher (see :meth:`Watcher.rebuild_if_changed`)."""
        return self.watcher.rebuild_if_changed()

    def wait(self) -> None:
        """Block until :meth:`stop` (or Ctrl-C, which raises KeyboardInterrupt here)."""
        while not self._stopped.wait(0.5):
            pass

    def stop(self) -> None:
        """Stop serving and watching, close the port and remove the temporary folder. Safe to call twice."""
        self.watcher.stop()
        if self._httpd is not None:
            if self._thread is not None:
                self._httpd.shutdown()
                self._thread.join()
                self._thread = None
            self._httpd.server_close()
        self._tmp.cleanup()
        self._stopped.set()

    def __enter__(self) -> "Server":
        return self.start()

    def __exit__(self, *exc) -> None:
        self.stop()


__all__ = ["Server", "Watcher", "snapshot", "changed_paths", "problem_lines", "POLL_SECONDS"]
