"""What the store holds: the answer behind ``levelfield status``."""

from __future__ import annotations

from dataclasses import dataclass, field

import sqlite_utils

import store
from monitor.coverage import coverage_lines, stored_coverage
from monitor.ingest.fields import shown
from monitor.lock import STATE_FILE, lock_holder, read_state
from monitor.workspace import Workspace
from store import status as store_status_counts


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
    staggered: dict[str, str] = field(default_factory=dict)  # chamber -> how it is staggered, in words

    def lines(self) -> list[str]:
        out = [f"schema version {self.schema_version}"]
        if not self.cycles_by_chamber:
            out.append("no results stored yet")
        for chamber, cycles in sorted(self.cycles_by_chamber.items()):
            out.append(f"chamber {chamber}: {len(cycles)} cycle(s), {_spans(cycles)}"
                       + (f" ({self.staggered[chamber]})" if chamber in self.staggered else ""))
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


def store_status(ws: Workspace, db: sqlite_utils.Database | None = None, last: int = 5) -> StoreStatus:
    """What the store holds (``db``, else the workspace's store), the inbox, and the watcher."""
    db = db or ws.open_store()
    held = store_status_counts.summary(db, last)
    pending = sorted(p.name for p in ws.inbox.iterdir() if p.is_file() and not p.name.startswith("."))
    rejected = sorted(p.name for p in ws.folder("rejected").iterdir()
                      if p.is_file() and not p.name.endswith(".error.txt"))
    result = StoreStatus(store.schema_version(db), held["cycles_by_chamber"], held["states"], held["contests"],
                         held["vote_lines"], held["loads"], pending, rejected, held["measures"])
    config = ws.config()
    result.coverage = coverage_lines(stored_coverage(db).units, config["flags.min_coverage"], detail=10)
    result.staggered = staggered_chambers(config, held["cycles_by_chamber"])
    result.extra.update(_watcher_state(ws))
    return result


def staggered_chambers(config, chambers) -> dict[str, str]:
    """Each stored chamber that ``[staggered] classes`` declares staggered somewhere, in words."""
    from monitor.staggered import whole_code

    declared = config["staggered.classes"] or {}
    out = {}
    for chamber in chambers:
        value = next((v for k, v in declared.items() if k.lower() == chamber), None)
        if value is None or (not isinstance(value, dict) and int(value) < 2):
            continue
        how = (f"staggered, {value} classes" if not isinstance(value, dict) else
               "staggered in " + ", ".join(f"{k} ({v} classes)" for k, v in sorted(value.items()) if int(v) > 1))
        out[chamber] = (f"{how}: each cycle's unit is partial and never flagged; the whole chamber is measured as "
                        f"{whole_code(chamber)}")
    return out


def _watcher_state(ws: Workspace) -> dict[str, str]:
    """Whether a watcher runs, the last (and, while it runs, next) run of each job and the last
    error, from logs/watcher-state.json and the workspace lock."""
    state = read_state(ws.folder("logs") / STATE_FILE)
    holder = lock_holder(ws.root)
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
