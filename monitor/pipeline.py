"""The pipeline, one direction: files -> ingest -> store -> reductions -> measures -> national pool
and flags -> aggregates -> site. Each step reads what the steps before it stored and writes its own
tables; nothing downstream calls back up.

* :func:`prepare` brings the stored inputs up to date with ``levelfield.toml`` (party labels
  re-coded, stale units reduced): every command that reads the store calls it first, since opening
  the store never writes;
* :func:`recompute` runs the derived steps (measures, national pool and flags, aggregates);
* :func:`refresh` is the whole chain after new results, the site included: the scheduler and the
  command line (``levelfield compute``) call it.

Each step is incremental and idempotent, so running the chain twice changes nothing the second time.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import sqlite_utils

from monitor import reductions
from monitor.config import Config
from monitor.ingest.labels import recode_message, sync_party_codes
from monitor.progress import Progress, tell
from monitor.workspace import Workspace


@dataclass
class RefreshReport:
    lines: list[str] = field(default_factory=list)
    measures_computed: int = 0
    groups_computed: int = 0
    flag_changes: int = 0
    pages_written: int | None = None


def prepare(db: sqlite_utils.Database, config: Config, notify: Callable[[str], None] | None = None) -> None:
    """Make the stored inputs follow ``config``: when the ``[parties]`` labels changed since the stored
    party codes were derived, re-derive them (one transaction; ``notify`` is told how many lines
    changed); then reduce every unit whose content or uncontested policy changed."""
    recoded = sync_party_codes(db, config)
    if recoded is not None and notify is not None:
        notify(recode_message(recoded))
    reductions.refresh(db, config)


def recompute(db: sqlite_utils.Database, config: Config, *, full: bool = False,
              progress: Progress | None = None) -> RefreshReport:
    """Measures, then the national pool and flags, then the aggregates, from the stored reductions
    (``full``: everything again, the reductions included)."""
    from monitor import aggregates  # the derived steps bring the measures engine and the pool
    from monitor.compute import compute
    from monitor.flags import run_flags

    out = RefreshReport()
    if full:
        reductions.refresh(db, config, full=True)
    measures = compute(db, config, full=full, progress=progress)
    out.measures_computed = measures.units_computed
    out.lines += measures.lines()
    flags = run_flags(db, config, full=full, progress=progress)
    out.groups_computed = flags.groups_computed
    out.flag_changes = len(flags.events)
    out.lines += flags.lines()
    aggregates.refresh(db, full=full)
    return out


def refresh(ws: Workspace, *, full: bool = False, publish: bool = True,
            db: sqlite_utils.Database | None = None, config: Config | None = None,
            progress: Progress | None = None) -> RefreshReport:
    """:func:`prepare`, :func:`recompute`, then (``publish``) the site.

    ``progress``: an optional callback (:mod:`monitor.progress`) told every stage; the site build
    reports its start and its end (its page count), not each page."""
    db = db or ws.open_store()
    config = config or ws.config()
    prepare(db, config, ws.notify)
    out = recompute(db, config, full=full, progress=progress)
    if publish:
        from monitor.publish import build_site

        tell(progress, "publish", 0, None, "building the site")
        site = build_site(ws, db=db, config=config)
        out.pages_written = len(site.written)
        tell(progress, "publish", site.pages, site.pages,
             f"{len(site.written)} file(s) written, {len(site.unchanged)} unchanged")
        out.lines += site.lines()
    return out
