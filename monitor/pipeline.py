"""The recompute chain after new results: measures -> national pool and flags -> site.

Each stage is incremental and idempotent, so running the chain twice changes nothing the
second time; the scheduler and the CLI both call :func:`refresh`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import sqlite_utils

from monitor.compute import compute
from monitor.config import Config
from monitor.flags import run_flags
from monitor.progress import Progress, tell
from monitor.workspace import Workspace


@dataclass
class RefreshReport:
    lines: list[str] = field(default_factory=list)
    measures_computed: int = 0
    groups_computed: int = 0
    flag_changes: int = 0
    pages_written: int | None = None


def refresh(ws: Workspace, *, full: bool = False, publish: bool = True,
            db: sqlite_utils.Database | None = None, config: Config | None = None,
            progress: Progress | None = None) -> RefreshReport:
    """Measures, then the national pool and flags, then (``publish``) the site.

    ``progress``: an optional callback (:mod:`monitor.progress`) told every stage; the site build
    reports its start and its end (its page count), not each page."""
    db = db or ws.open_store()
    config = config or ws.config()
    out = RefreshReport()
    measures = compute(db, config, full=full, progress=progress)
    out.measures_computed = measures.units_computed
    out.lines += measures.lines()
    flags = run_flags(db, config, full=full, progress=progress)
    out.groups_computed = flags.groups_computed
    out.flag_changes = len(flags.events)
    out.lines += flags.lines()
    if publish:
        from monitor.publish import build_site

        tell(progress, "publish", 0, None, "building the site")
        site = build_site(ws, db=db, config=config)
        out.pages_written = len(site.written)
        tell(progress, "publish", site.pages, site.pages,
             f"{len(site.written)} file(s) written, {len(site.unchanged)} unchanged")
        out.lines += site.lines()
    return out
