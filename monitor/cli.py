"""The ``levelfield`` command line: a thin layer over the library functions.

Exit codes: 0 done, 1 data error (a file is wrong; nothing of it was stored), 2 usage error
(wrong option, missing file, bad configuration). No traceback reaches the user: an unexpected
failure prints one line and writes the traceback to ``logs/levelfield.log``.
"""

from __future__ import annotations

import functools
import os
import sys
import traceback
from pathlib import Path

import click

from monitor.errors import DataError, LevelfieldError, UsageError
from monitor.workspace import ENV_VAR, Workspace

WORKSPACE_HELP = f"Workspace folder (default ./workspace, or ${ENV_VAR})."


def _notice(message: str) -> None:
    """A notice for the user (on stderr, so that exported data on stdout stays clean)."""
    click.echo(message, err=True)


def _workspace_here(ctx: click.Context, param: click.Parameter, value: str | None) -> None:
    if value is not None:  # given after the command name: it wins over one given before it
        ctx.obj = Workspace.locate(value, notify=_notice)


# every command takes --workspace/-w too, after its name (`levelfield status -w DIR`); the
# environment variable is read once, by the main group
workspace_option = click.option("--workspace", "-w", type=click.Path(file_okay=False), expose_value=False,
                                callback=_workspace_here, help=WORKSPACE_HELP)


def _clear(progress) -> None:
    """Erase the terminal progress line (if any) before printing results."""
    if progress is not None:
        progress.clear()


def _store(ws: Workspace):
    """The workspace's store with its inputs brought up to date with levelfield.toml (re-coded party
    labels, reduced contests): what every command that reads the store uses."""
    from monitor.pipeline import prepare

    db = ws.open_store()
    prepare(db, ws.config(), ws.notify)
    return db


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
        except BrokenPipeError:  # output piped into `head` and the like: stop quietly
            try:
                sys.stdout = open(os.devnull, "w")
            except OSError:
                pass
            sys.exit(0)
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
    ctx.obj = Workspace.locate(workspace, notify=_notice)


@main.command()
@workspace_option
@click.pass_obj
@guarded
def init(ws: Workspace) -> None:
    """Create the workspace with a commented default levelfield.toml."""
    made = ws.ensure()
    _store(ws)
    if made:
        for path in made:
            click.echo(f"created {path}")
    else:
        click.echo(f"workspace {ws.root} already exists; nothing changed")


@main.command()
@workspace_option
@click.argument("files", nargs=-1, required=True, type=click.Path(path_type=Path))
@click.option("--mapping", "mapping_path", type=click.Path(path_type=Path, dir_okay=False),
              help="TOML mapping that makes a foreign candidate-level CSV loadable.")
@click.option("--source", help="Where the file came from (stored with the load's provenance).")
@click.option("--dry-run", is_flag=True, help="Check and report; write nothing to the store (the report file still goes to logs/loads/).")
@click.option("--skip-bad-rows", is_flag=True, help="Load the good rows and report every skipped one.")
@click.option("--encoding", help="Text encoding of the files (default UTF-8, with or without BOM).")
@click.pass_obj
@guarded
def load(ws: Workspace, files, mapping_path, source, dry_run, skip_bad_rows, encoding) -> None:
    """Load result FILES (native CSV, wide CSV, gzipped, or foreign with --mapping).

    Each file loads whole or not at all. The same file twice changes nothing; a file that
    re-delivers a stored (cycle, state, chamber) is a correction and the report says what changed.
    The printed report keeps long lists short; the full report of each load is written to
    logs/loads/ in the workspace. Exit 1: a file is wrong (nothing of it stored); exit 2: a
    usage or mapping error (such as a column the file does not have).
    """
    from monitor.ingest import load_file
    from monitor.ingest.mapping import load_mapping
    from monitor.pipeline import prepare
    from monitor.progress import for_terminal, tell

    config = ws.config()
    mapping = load_mapping(mapping_path) if mapping_path else None
    # a dry run writes nothing (it reports any re-coding); a load is followed by its reduction
    db = ws.open_store() if dry_run else _store(ws)
    worst = 0
    progress = for_terminal()  # one line on a terminal's stderr, redrawn per file; else None
    for number, path in enumerate(files, 1):
        tell(progress, "load", number - 1, len(files), str(path))
        try:
            report = load_file(db, path, config, mapping=mapping, source=source, dry_run=dry_run,
                               skip_bad_rows=skip_bad_rows, encoding=encoding,
                               report_dir=ws.folder("logs") / "loads")
            _clear(progress)
        except DataError as exc:
            _clear(progress)
            for problem in exc.problems:
                click.echo(f"error: {problem}", err=True)
            click.echo(f"error: {exc.summary}", err=True)
            worst = max(worst, 1)
            continue
        except UsageError as exc:
            _clear(progress)
            click.echo(f"error: {exc}", err=True)
            worst = 2
            continue
        for line in report.lines():
            click.echo(line)
    if not dry_run:
        prepare(db, config, ws.notify)
    if worst:
        sys.exit(worst)


@main.command()
@workspace_option
@click.pass_obj
@guarded
def status(ws: Workspace) -> None:
    """What the store holds, recent loads, pending inbox files, schema version."""
    from monitor.status import store_status

    click.echo(f"workspace {ws.root}")
    for line in store_status(ws, _store(ws)).lines():
        click.echo(line)


@main.command()
@workspace_option
@click.option("--full", is_flag=True, help="Recompute every unit, not only those whose inputs or method changed.")
@click.pass_obj
@guarded
def compute(ws: Workspace, full: bool) -> None:
    """Recompute the measures of units whose inputs or method changed, then the national
    pool, the flags and the watch list of the cycles and chambers they touch."""
    from monitor.pipeline import refresh
    from monitor.progress import for_terminal

    progress = for_terminal()  # measures stages, then each cycle/chamber group of the flags
    try:
        report = refresh(ws, full=full, publish=False, progress=progress)
    finally:
        _clear(progress)
    for line in report.lines:
        click.echo(line)


@main.command()
@workspace_option
@click.option("--cycle", type=int, help="Only this cycle.")
@click.option("--chamber", help="Only this chamber.")
@click.option("--watch", "watch_list", is_flag=True, help="The plans on watch.")
@click.option("--changes", is_flag=True, help="The history of raised and cleared flags.")
@click.option("--format", "fmt", type=click.Choice(["table", "csv", "json"]), default="table", show_default=True)
@click.pass_obj
@guarded
def flags(ws: Workspace, cycle, chamber, watch_list, changes, fmt) -> None:
    """Show the flagged units (default), the watch list (--watch) or the flag history (--changes).

    Flags are computed by `levelfield compute`. A flag is an indicator that a unit sits in the
    tail of the national distribution, not a legal finding. Inferred plans (no loaded era) are
    marked in the `inferred` column. Flagged units show their coverage (`incomplete`,
    `seat_coverage`, `missing_or_left_out`: which districts the measures lack, and why); the watch
    list names its `incomplete_cycles`. A unit whose measures cover less than flags.min_coverage
    of its seats is never flagged (`levelfield export tails` says why).
    """
    from monitor.flags import flag_table
    from monitor.output import to_text, write

    if watch_list and changes:
        raise UsageError("--watch and --changes show different tables: give one of them, not both")
    show = "watch" if watch_list else "changes" if changes else "flags"
    write(to_text(flag_table(_store(ws), show, cycle=cycle, chamber=chamber), fmt), None)


@main.command()
@workspace_option
@click.argument("file", type=click.Path(path_type=Path, dir_okay=False))
@click.pass_obj
@guarded
def plans(ws: Workspace, file: Path) -> None:
    """Load plan eras (who drew each map) from FILE.

    Columns: state,chamber,plan_id,first_cycle,last_cycle,drawn_by,note,source, and optionally
    districts,seats (how many the plan has; seats default to the districts), which each unit's
    coverage is measured against; drawn_by is one of party_a, party_b, split, commission, court, other. The file replaces the plans of every
    state and chamber it names. Units outside every era get an inferred plan (a new plan from each
    cycle ending in 2), marked inferred wherever it shows.
    """
    from monitor.plans import load_plans

    done = load_plans(_store(ws), file)
    click.echo(f"{file.name}: {done['plans']} plan(s) loaded for {done['state_chambers']} state chamber(s)")


@main.command()
@workspace_option
@click.option("--inbox", type=click.Path(path_type=Path, file_okay=False), help="Folder to watch (default the workspace's inbox/).")
@click.option("--every", type=click.IntRange(1, 86_400), help="Seconds between polls (default schedule.poll_seconds, 60).")
@click.option("--once", is_flag=True, help="Process the inbox once and exit (for cron or CI).")
@click.option("--no-publish", is_flag=True, help="Load and recompute, but do not republish the site.")
@click.pass_obj
@guarded
def watch(ws: Workspace, inbox, every, once, no_publish) -> None:
    """Watch the inbox: load settled files, recompute, republish; verify nightly.

    A file is taken once it has not changed between two looks --every seconds apart. Loaded
    files move to archive/<date>/<sha256>-<name>, refused ones to rejected/ with an error report
    beside them. Stop with Ctrl-C or SIGTERM: the job in progress finishes first.

    With --once: look at the inbox twice, --every seconds apart (default schedule.poll_seconds),
    process what settled and exit: 0 when nothing was rejected, 1 when a file was rejected or the
    recompute failed (see logs/levelfield.log).
    """
    from monitor.progress import for_terminal
    from monitor.watcher import Service

    service = Service(ws, inbox=inbox, publish=not no_publish, progress=for_terminal())
    if once:
        done = service.run_once(every)
        click.echo(done.line())
        if done.error:
            click.echo(f"error: the run failed: {done.error} (details in {ws.folder('logs') / 'levelfield.log'})",
                       err=True)
        if not done.ok:
            sys.exit(1)
    else:
        service.run_forever(every)


@main.command()
@workspace_option
@click.pass_obj
@guarded
def verify(ws: Workspace) -> None:
    """Recompute everything from scratch and compare it with what is stored.

    Contest reductions, measures, coverage, national pool, tails, flags, watch list and the
    aggregates the site shows are recomputed on a scratch copy of the store (in a temporary
    folder; the results in the workspace are only read) and every difference is printed,
    as a changed method version or as a bug. Exit 0 when there is none, 1 when there are
    differences (`levelfield compute --full` then brings the store up to date).
    """
    from monitor.progress import for_terminal
    from monitor.verify import summary, verify_store

    progress = for_terminal()
    try:
        differences = verify_store(_store(ws), ws.config(), progress=progress)
    finally:
        _clear(progress)
    for diff in differences:
        click.echo(str(diff))
    if differences:
        click.echo(f"{summary(differences)}; `levelfield compute --full` recomputes the store", err=True)
        sys.exit(1)
    click.echo("no difference: the stored reductions, measures, coverage, national pool, flags, watch list and "
               "aggregates equal a from-scratch recompute")


class _Exports(click.Group):
    """The ``export`` group: one subcommand per row of :data:`monitor.exports.EXPORTS`, made when
    the group is used (so that ``levelfield --help`` does not import the tables behind them)."""

    def _made(self) -> None:
        if not self.commands:
            _add_exports()

    def list_commands(self, ctx: click.Context) -> list[str]:
        self._made()
        return super().list_commands(ctx)

    def get_command(self, ctx: click.Context, name: str) -> click.Command | None:
        self._made()
        return super().get_command(ctx, name)


@main.group(cls=_Exports)
@workspace_option
def export() -> None:
    """Export stored data as CSV or JSON."""


FORMAT = click.option("--format", "fmt", type=click.Choice(["csv", "json"]), default="csv", show_default=True)
OUT = click.option("--out", type=click.Path(path_type=Path, dir_okay=False), help="Write to this file (default stdout).")


def _export_command(item) -> click.Command:
    """``levelfield export NAME``: the stored rows of one export (:data:`monitor.exports.EXPORTS`),
    as CSV or JSON, with the export's flags as options."""

    @workspace_option
    @FORMAT
    @OUT
    @click.pass_obj
    @guarded
    def command(ws: Workspace, fmt: str, out: Path | None, **flags: bool) -> None:
        from monitor.output import to_text, write

        write(to_text(item.frame(_store(ws), **flags), fmt), out)

    for flag, text in item.flags.items():
        command = click.option(f"--{flag}", is_flag=True, help=text)(command)
    command.__doc__ = item.help
    return export.command(item.name)(command)


def _add_exports() -> None:
    from monitor.exports import EXPORTS

    for item in EXPORTS:
        _export_command(item)



@main.command()
@workspace_option
@click.option("--out", type=click.Path(path_type=Path, file_okay=False),
              help="Folder to publish into (default the workspace's public/). It is replaced "
                   "entirely, so it must be new, empty or an earlier levelfield site.")
@click.option("--full", is_flag=True, help="Render every page and download, not only those whose inputs changed.")
@click.option("--workers", type=click.IntRange(1, 64), default=None,
              help="Processes rendering the state pages (default 2 when two CPUs or more are available "
                   "and a second one is idle, else 1). The site is the same whatever the number.")
@click.pass_obj
@guarded
def publish(ws: Workspace, out: Path | None, full: bool, workers: int | None) -> None:
    """Build the static site from the store: pages, charts, downloads and feed.

    The site is built beside the output folder and swapped in at once: a failed build leaves
    the previous site whole. Only the pages and downloads whose inputs changed since the last
    build are rendered (--full: all of them); files whose content did not change are not
    rewritten. A folder holding other files (or the store) is refused rather than emptied.
    """
    from monitor.progress import for_terminal, tell
    from monitor.publish import build_site

    progress = for_terminal()  # the build reports no pages as it goes: the line shows its elapsed time
    db = _store(ws)
    tell(progress, "publish", 0, None, "building the site")
    try:
        report = build_site(ws, db=db, out=out, full=full, workers=workers)
    finally:
        _clear(progress)
    for line in report.lines():
        click.echo(line)


@main.command()
@workspace_option
@click.option("--port", type=click.IntRange(0, 65_535), default=8000, show_default=True, help="Port on 127.0.0.1.")
@click.option("--dir", "directory", type=click.Path(path_type=Path, file_okay=False),
              help="Folder to serve (default the workspace's public/).")
@click.pass_obj
@guarded
def serve(ws: Workspace, port: int, directory: Path | None) -> None:
    """Preview the published site on http://127.0.0.1:PORT/ (this machine only)."""
    from monitor.publish.serve import make_server

    directory = directory or ws.folder("public")
    if not (directory / "index.html").is_file():
        raise UsageError(f"{directory} holds no site yet; run `levelfield publish` first")
    try:
        server = make_server(directory, port)
    except OSError as exc:
        raise UsageError(f"cannot listen on 127.0.0.1:{port}: {exc.strerror or exc}") from None
    click.echo(f"serving {directory} at http://127.0.0.1:{server.server_address[1]}/ (Ctrl-C to stop)")
    with server:
        try:
            server.serve_forever()
        except KeyboardInterrupt:
            click.echo("stopped")
