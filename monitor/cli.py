"""The ``levelfield`` command line: a thin layer over the library functions.

Exit codes: 0 done, 1 data error (a file is wrong; nothing of it was stored), 2 usage error
(wrong option, missing file, bad configuration). No traceback reaches the user: an unexpected
failure prints one line and writes the traceback to ``logs/levelfield.log``.
"""

from __future__ import annotations

import functools
import sys
import traceback
from pathlib import Path

import click

from monitor.errors import DataError, LevelfieldError, UsageError
from monitor.workspace import ENV_VAR, Workspace

WORKSPACE_HELP = f"Workspace folder (default ./workspace, or ${ENV_VAR})."


def _fail(message: str, code: int) -> None:
    click.echo(message, err=True)
    sys.exit(code)


def guarded(func):
    """Turn domain errors into messages and exit codes; log anything unexpected."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        try:
            return func(*args, **kwargs)
        except DataError as exc:
            for problem in exc.problems:
                click.echo(f"error: {problem}", err=True)
            _fail(f"error: {exc.summary}", exc.exit_code)
        except LevelfieldError as exc:
            _fail(f"error: {exc}", exc.exit_code)
        except (click.exceptions.Exit, click.ClickException, SystemExit, KeyboardInterrupt):
            raise
        except Exception as exc:  # unexpected: one line for the user, the traceback to the log
            ctx = click.get_current_context(silent=True)
            ws = ctx.obj if ctx and isinstance(ctx.obj, Workspace) else None
            where = _log_traceback(ws)
            _fail(f"internal error: {type(exc).__name__}: {exc}" + (f" (traceback in {where})" if where else ""), 1)

    return wrapper


def _log_traceback(ws: Workspace | None) -> Path | None:
    if ws is None:
        return None
    try:
        logs = ws.folder("logs")
        logs.mkdir(parents=True, exist_ok=True)
        path = logs / "levelfield.log"
        with path.open("a", encoding="utf-8") as fh:
            fh.write(traceback.format_exc())
        return path
    except OSError:
        return None


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.option("--workspace", "-w", type=click.Path(file_okay=False), envvar=ENV_VAR, help=WORKSPACE_HELP)
@click.version_option(package_name="levelfield")
@click.pass_context
def main(ctx: click.Context, workspace: str | None) -> None:
    """levelfield: watch district election results for partisan asymmetry, cycle after cycle.

    Load certified district results, compute the published asymmetry measures, flag the states
    at the tails of the national distribution and publish a static site. The measures are
    indicators, not legal findings; results are unofficial until certified.
    """
    ctx.obj = Workspace.locate(workspace)


@main.command()
@click.pass_obj
@guarded
def init(ws: Workspace) -> None:
    """Create the workspace with a commented default levelfield.toml."""
    made = ws.ensure()
    ws.open_store()
    if made:
        for path in made:
            click.echo(f"created {path}")
    else:
        click.echo(f"workspace {ws.root} already exists; nothing changed")


@main.command()
@click.argument("files", nargs=-1, required=True, type=click.Path(path_type=Path))
@click.option("--mapping", "mapping_path", type=click.Path(path_type=Path, dir_okay=False),
              help="TOML mapping that makes a foreign candidate-level CSV loadable.")
@click.option("--source", help="Where the file came from (stored with the load's provenance).")
@click.option("--dry-run", is_flag=True, help="Check and report, write nothing.")
@click.option("--skip-bad-rows", is_flag=True, help="Load the good rows and report every skipped one.")
@click.option("--encoding", help="Text encoding of the files (default UTF-8, with or without BOM).")
@click.pass_obj
@guarded
def load(ws: Workspace, files, mapping_path, source, dry_run, skip_bad_rows, encoding) -> None:
    """Load result FILES (native CSV, wide CSV, gzipped, or foreign with --mapping).

    Each file loads whole or not at all. The same file twice changes nothing; a file that
    re-delivers a stored (cycle, state, chamber) is a correction and the report says what changed.
    """
    from monitor.ingest import load_file
    from monitor.ingest.mapping import load_mapping

    config = ws.config()
    mapping = load_mapping(mapping_path) if mapping_path else None
    db = ws.open_store()
    worst = 0
    for path in files:
        try:
            report = load_file(db, path, config, mapping=mapping, source=source, dry_run=dry_run,
                               skip_bad_rows=skip_bad_rows, encoding=encoding)
        except DataError as exc:
            for problem in exc.problems:
                click.echo(f"error: {problem}", err=True)
            click.echo(f"error: {exc.summary}", err=True)
            worst = max(worst, 1)
            continue
        except UsageError as exc:
            click.echo(f"error: {exc}", err=True)
            worst = 2
            continue
        for line in report.lines():
            click.echo(line)
    if worst:
        sys.exit(worst)


@main.command()
@click.pass_obj
@guarded
def status(ws: Workspace) -> None:
    """What the store holds, recent loads, pending inbox files, schema version."""
    from monitor.status import store_status

    click.echo(f"workspace {ws.root}")
    for line in store_status(ws).lines():
        click.echo(line)


@main.group()
def export() -> None:
    """Export stored data as CSV or JSON."""


FORMAT = click.option("--format", "fmt", type=click.Choice(["csv", "json"]), default="csv", show_default=True)
OUT = click.option("--out", type=click.Path(path_type=Path, dir_okay=False), help="Write to this file (default stdout).")


@export.command("results")
@FORMAT
@OUT
@click.pass_obj
@guarded
def export_results(ws: Workspace, fmt: str, out: Path | None) -> None:
    """Current results (the district_results columns) with each contest's two-party reduction."""
    from monitor.output import to_text, write
    from monitor.results import results_export

    write(to_text(results_export(ws.open_store()), fmt), out)
