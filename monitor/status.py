"""What the store holds: the answer behind ``levelfield status``."""

from __future__ import annotations

from dataclasses import dataclass, field

import store
from monitor.coverage import coverage_lines, stored_coverage
from monitor.ingest.fields import shown
from monitor.workspace import Workspace


@dataclass
class StoreStatus:
    schema_version: int
    cycles_by_chamber: dict[str, list[int]]
    states: int
    contests: int
    vote_lines: int
    loads: list[dict]
    pending: list[str]
    rejected: list[str]
    measures: int = 0
    extra: dict[str, str] = field(default_factory=dict)
    coverage: list[str] = field(default_factory=list)  # incomplete units, what is missing and why

    def lines(self) -> list[str]:
        out = [f"schema version {self.schema_version}"]
        if not self.cycles_by_chamber:
            out.append("no results stored yet")
        for chamber, cycles in sorted(self.cycles_by_chamber.items()):
            out.append(f"chamber {chamber}: {len(cycles)} cycle(s), {_spans(cycles)}")
        out.append(f"states {self.states}, current contests {self.contests}, vote lines {self.vote_lines}, "
                   f"measures {self.measures}")
        out.extend(self.coverage)
        out.append(f"last loads ({len(self.loads)} shown):")
        for load in self.loads:
            if load["outcome"] == "refused":
                out.append(f"  #{load['id']} {load['loaded_at']} refused: {shown(load['file_name'])} "
                           f"(sha256 {load['sha256'][:12]}, {load['rows_read']} rows read, "
                           f"{load['rows_rejected']} rejected; nothing loaded): {shown(load['error'] or '')}")
                continue
            out.append(f"  #{load['id']} {load['loaded_at']} {load['outcome']}: {shown(load['file_name'])} "
                       f"(sha256 {load['sha256'][:12]}, {load['rows_accepted']} rows, "
                       f"{load['units_new']} new / {load['units_corrected']} corrected units)")
        out.append(f"inbox: {len(self.pending)} pending file(s)" + (": " + ", ".join(self.pending[:10]) if self.pending else ""))
        out.append(f"rejected: {len(self.rejected)} file(s)" + (": " + ", ".join(self.rejected[:10]) if self.rejected else ""))
        for key, value in self.extra.items():
            out.append(f"{key}: {value}")
        return out


def _spans(cycles: list[int]) -> str:
    if not cycles:
        return ""
    return f"{cycles[0]}-{cycles[-1]}" if len(cycles) > 1 else str(cycles[0])


def store_status(ws: Workspace, last: int = 5) -> StoreStatus:
    db = ws.open_store()
    by_chamber: dict[str, list[int]] = {}
    for chamber, cycle in db.execute(
        "SELECT DISTINCT chamber, cycle FROM units WHERE superseded_by IS NULL ORDER BY chamber, cycle"
    ):
        by_chamber.setdefault(chamber, []).append(cycle)
    states = db.execute("SELECT COUNT(DISTINCT state) FROM units WHERE superseded_by IS NULL").fetchone()[0]
    contests = db.execute("SELECT COUNT(*) FROM current_contests").fetchone()[0]
    lines = db.execute("SELECT COUNT(*) FROM district_results").fetchone()[0]
    measures = db.execute("SELECT COUNT(*) FROM measures").fetchone()[0]
    cols = ["id", "file_name", "sha256", "loaded_at", "outcome", "rows_read", "rows_accepted", "rows_rejected",
            "units_new", "units_corrected", "error"]
    loads = [dict(zip(cols, row)) for row in db.execute(
        f"SELECT {', '.join(cols)} FROM loads ORDER BY id DESC LIMIT ?", [last])]
    pending = sorted(p.name for p in ws.inbox.iterdir() if p.is_file() and not p.name.startswith("."))
    rejected = sorted(p.name for p in ws.folder("rejected").iterdir()
                      if p.is_file() and not p.name.endswith(".error.txt"))
    result = StoreStatus(store.schema_version(db), by_chamber, states, contests, lines, loads, pending,
                         rejected, measures)
    result.coverage = coverage_lines(stored_coverage(db).units, ws.config()["flags.min_coverage"], detail=10)
    result.extra.update(_watcher_state(ws))
    return result


def _watcher_state(ws: Workspace) -> dict[str, str]:
    """Whether a watcher runs, the last (and, while it runs, next) run of each job and the last
    error, from logs/watcher-state.json and the workspace lock."""
    import json

    from monitor.watcher import STATE_FILE

    path = ws.folder("logs") / STATE_FILE
    try:
        state = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        state = None
    holder = lock_holder(ws)
    if state is None and holder is None:
        return {"watcher": "has not run in this workspace"}
    state = state or {}
    seen = state.get("seen_at") or state.get("stopped_at") or "unknown"
    if holder is not None:
        how = f"every {state['every']}s" if state.get("mode") == "service" and state.get("every") else (
            "processing the inbox once" if state.get("mode") == "once" else "")
        out = {"watcher": f"running (pid {holder}" + (f", {how})" if how else ")")}
    else:
        out = {"watcher": f"not running (last seen {seen}"
               + ("; it did not stop cleanly)" if state.get("pid") else ")")}
    for job, info in sorted(state.get("jobs", {}).items()):
        text = f"last run {info.get('last_run') or 'never'}"
        if info.get("runs"):
            text += f" ({info['runs']} run(s))"
        if holder is not None:
            text += f", next run {info.get('next_run') or 'not scheduled'}"
        out[f"job {job}"] = text
    error = state.get("last_error")
    if not error:
        out["last error"] = "none"
    elif error.get("resolved_at"):
        out["last error"] = (f"none since {error['resolved_at']} (the last one, {error['at']}: {error['message']}, "
                             f"was followed by a successful {error.get('job', '')} job run)")
    else:
        job = f" ({error['job']} job)" if error.get("job") else ""
        out["last error"] = f"{error['at']}{job}: {error['message']}"
    return out


def lock_holder(ws: Workspace) -> str | None:
    """The pid written in the workspace lock when a process holds the lock (a watcher runs),
    else None. The lock is tried for an instant (shared, non-blocking); the kernel drops the lock
    of a process that died, even by SIGKILL, so a killed watcher never shows as running."""
    import fcntl

    from monitor.lock import WorkspaceLock

    try:
        fh = open(WorkspaceLock(ws.root).path, "r", encoding="utf-8", errors="replace")
    except OSError:
        return None
    with fh:
        try:
            fcntl.flock(fh.fileno(), fcntl.LOCK_SH | fcntl.LOCK_NB)
        except BlockingIOError:
            return fh.read().strip() or "unknown"
        fcntl.flock(fh.fileno(), fcntl.LOCK_UN)
        return None
