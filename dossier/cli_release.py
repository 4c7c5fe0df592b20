"""Commands ``dossier release`` and ``dossier diff``: freeze a dossier, and review a proposed change."""

from __future__ import annotations

import sys
from pathlib import Path

import click

from dossier.errors import DossierError


@click.command()
@click.argument("project", type=click.Path(file_okay=False, path_type=Path))
@click.argument("system_id", metavar="SYSTEM")
@click.option("--note", required=True, help="What this release is about (shown on its page).")
def release(project: Path, system_id: str, note: str) -> None:
    """Freeze SYSTEM's dossier as its next numbered, immutable release.

    The date is SOURCE_DATE_EPOCH when set, else now. dossier.toml may ask
    for approving reviews first ([release] required_approvals).
    """
    from dossier.release import freeze

    made = freeze(project, system_id, note)
    meta = made.meta
    click.echo(f"released {system_id} as release {made.number} on {meta['date']}: {made.path}")
    click.echo(f"  content SHA-256 {meta['content_hash']}")
    click.echo(f"  {len(meta['approvals'])} approving review(s) counted; seal {meta['seal'][:16]}…")


def _git_snapshot(project: Path, rev: str, into: Path) -> Path:
    """Extract the project folder as it was at git revision ``rev`` into ``into``; return its path there."""
    import io
    import subprocess
    import tarfile

    project = project.resolve()

    def git(*args: str) -> bytes:
        return subprocess.run(["git", "-C", str(project), *args], check=True, capture_output=True).stdout

    try:
        top = Path(git("rev-parse", "--show-toplevel").decode().strip())
        git("rev-parse", "--verify", "--quiet", f"{rev}^{{commit}}")
        rel = project.relative_to(top).as_posix()
        data = git("archive", "--format=tar", rev, "--", rel if rel != "." else ".")
    except FileNotFoundError:
        raise DossierError(f"--against '{rev}' is not a folder, and git is not installed to read it as a revision. "
                           "Fix: give a folder holding the other copy of the project.") from None
    except subprocess.CalledProcessError as exc:
        said = exc.stderr.decode(errors="replace").strip().splitlines()
        raise DossierError(f"--against '{rev}' is neither a folder nor a git revision of the repository holding "
                           f"{project}{(' (git: ' + said[-1] + ')') if said else ''}. Fix: give a folder, a commit, "
                           "a branch or a tag.") from None
    with tarfile.open(fileobj=io.BytesIO(data)) as tar:
        tar.extractall(into, filter="data")
    return into / rel if rel != "." else into


def project_states(project_dir: Path, only: str | None) -> dict[str, dict]:
    """The state of every system of a project (or of one), weighed now."""
    from dossier.diff import state_of
    from dossier.engine import weigh_project
    from dossier.schema.loader import load_project

    loaded = load_project(project_dir, only=only)
    results = weigh_project(loaded, use_cache=False)
    return {sid: state_of(loaded, result) for sid, result in results.items()}


@click.command()
@click.argument("project", type=click.Path(file_okay=False, path_type=Path))
@click.argument("system_id", metavar="[SYSTEM]", required=False)
@click.option("--against", "against", required=True, metavar="REV|PATH",
              help="The other version: a git revision of the repository holding PROJECT, or a folder.")
@click.option("--format", "fmt", type=click.Choice(["text", "markdown", "json"]), default="text", show_default=True,
              help="Terminal tables, Markdown to paste into a review, or JSON.")
def diff(project: Path, system_id: str | None, against: str, fmt: str) -> None:
    """What changes from REV|PATH to PROJECT: values, sources, assessments, verdicts and grades."""
    import json
    import tempfile

    from dossier.diff import compare_projects, print_changes, to_markdown

    with tempfile.TemporaryDirectory(prefix="dossier-diff-") as tmp:
        other = Path(against)
        if not other.is_dir():
            other = _git_snapshot(project, against, Path(tmp))
            if not other.is_dir():
                raise DossierError(f"{project} did not exist at revision '{against}'. Fix: choose a later revision.")
        after = project_states(project, system_id)
        before = project_states(other, system_id) if system_id is None or (
            other / "systems" / system_id).is_dir() else {}
    changes = compare_projects(before, after)
    heading = f"Changes from {against} to {project}" + (f" ({system_id})" if system_id else "")
    if fmt == "markdown":
        sys.stdout.write(to_markdown(changes, heading))
    elif fmt == "json":
        sys.stdout.write(json.dumps({"format": "dossier-diff", "format_version": 1, "against": against,
                                     "changes": [c.to_dict() for c in changes]}, indent=2, ensure_ascii=False) + "\n")
    else:
        from rich.console import Console

        print_changes(Console(), changes, heading)
