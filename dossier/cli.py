"""Command line: parse arguments, call the library, turn errors into messages and exit codes.

Heavy libraries (scipy, matplotlib, astropy) are imported inside the
commands that need them, so ``dossier --help`` and ``dossier check`` start
quickly. Tracebacks are shown only with ``--debug``.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import click

from dossier import __version__
from dossier.errors import DossierError, ProblemsFound


class _Group(click.Group):
    def invoke(self, ctx: click.Context):
        try:
            return super().invoke(ctx)
        except ProblemsFound as exc:
            fmt = ctx.meta.get("problem_format", "text")
            if fmt == "json":
                click.echo(json.dumps([p.to_dict() for p in exc.problems], indent=2, ensure_ascii=False))
            else:
                for problem in exc.problems:
                    click.echo(str(problem), err=True)
                click.echo(f"{len(exc.problems)} problem(s) found.", err=True)
            if ctx.meta.get("debug"):
                raise
            ctx.exit(exc.exit_code)
        except DossierError as exc:
            if ctx.meta.get("debug"):
                raise
            click.echo(f"error: {exc}", err=True)
            ctx.exit(exc.exit_code)


@click.group(cls=_Group, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="dossier")
@click.option("--debug", is_flag=True, help="Show tracebacks instead of plain messages.")
@click.pass_context
def cli(ctx: click.Context, debug: bool) -> None:
    """Weigh the evidence that the stars of a multiple system belong together."""
    ctx.meta["debug"] = debug


project_arg = click.argument("project", type=click.Path(file_okay=False, path_type=Path))


@cli.command()
@project_arg
@click.option("--format", "fmt", type=click.Choice(["text", "json"]), default="text", show_default=True,
              help="How to print the problems.")
@click.pass_context
def check(ctx: click.Context, project: Path, fmt: str) -> None:
    """Validate a whole project folder and print every problem at once."""
    from dossier.schema.loader import load_project

    ctx.meta["problem_format"] = fmt
    loaded = load_project(project)
    if fmt == "json":
        click.echo("[]")
    else:
        n = len(loaded.systems)
        click.echo(f"{project}: {n} system(s), {len(loaded.references)} source(s): no problems found.")


@cli.command()
@project_arg
@click.option("--system", "system_id", metavar="ID", help="Weigh only this system.")
@click.option("--json", "as_json", is_flag=True, help="Print stable JSON (see docs/weigh-json.md).")
def weigh(project: Path, system_id: str | None, as_json: bool) -> None:
    """Run every rule and print, per pair, the status, its probability and the assessments."""
    from dossier.engine import weigh_project
    from dossier.report import print_results, to_json
    from dossier.schema.loader import load_project

    loaded = load_project(project, only=system_id)
    results = weigh_project(loaded)
    if as_json:
        sys.stdout.write(to_json(loaded.settings.project.title, results))
    else:
        from rich.console import Console

        print_results(Console(), results)


@cli.command()
@project_arg
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False, path_type=Path),
              help="Folder to write the site into (created; its previous content is replaced).")
def build(project: Path, out_dir: Path) -> None:
    """Build the static dossier site of a project."""
    from dossier.site import build as build_site

    index = build_site(project, out_dir)
    click.echo(f"Built {index.parent} — open {index}")


@cli.command()
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path), default=Path("schemas"),
              show_default=True, help="Folder for the JSON Schema files.")
def schema(out_dir: Path) -> None:
    """Write the JSON Schemas of the evidence, references and settings files."""
    from dossier.schema.jsonschema import write_schemas

    for path in write_schemas(out_dir):
        click.echo(f"wrote {path}")


@cli.command()
@project_arg
@click.argument("system_id", metavar="SYSTEM-ID")
def new(project: Path, system_id: str) -> None:
    """Scaffold a new system's evidence file with commented examples."""
    from dossier.scaffold import new_system

    path = new_system(project, system_id)
    click.echo(f"created {path} — fill it in, then run: dossier check {project}")


def main() -> None:
    cli(prog_name="dossier")


if __name__ == "__main__":  # pragma: no cover
    main()
