"""The monitoring service: poll the inbox, load what arrived, recompute, republish.

Built on APScheduler 3.x (a BackgroundScheduler with an in-memory job store; the SQLite
results store is the source of truth, so jobs are recreated at every start):

* ``poll`` (interval, ``schedule.poll_seconds``): a file is taken once it has stopped changing
  (same size and mtime over two polls). Loaded files move to ``archive/<date>/<sha256>-<name>``
  (the full 64 hex digits of the file's sha256: the name alone identifies the bytes, as the
  ``loads`` table does); refused ones to ``rejected/`` with ``<name>.error.txt`` beside them (no
  result of theirs is stored). After any successful load the chain measures -> flags -> site runs
  (incrementally).
* ``verify`` (cron, ``schedule.nightly``): recomputes everything from scratch on a scratch copy of
  the store (:mod:`monitor.verify`) and logs every difference from what is stored, as a changed
  method version or as a bug; then brings the store up to date with a full recompute.

Both jobs: one instance at a time, missed runs coalesced. A workspace lock keeps a second
watcher out; manual ``levelfield load`` meanwhile is safe (the store serialises writers).
SIGTERM and SIGINT stop the scheduler after the job in progress: every load and every
recompute is one transaction, so nothing is half-written.

``logs/watcher-state.json`` keeps what ``levelfield status`` shows: each job's last run, runs and
next run, when the watcher was last seen, and the last error (marked resolved by the next
successful run of the same job).
"""

from __future__ import annotations

import datetime as dt
import itertools
import json
import os
import re
import shlex
import shutil
import signal
import threading
import time
import traceback
import unicodedata
from dataclasses import dataclass, field
from pathlib import Path

from monitor.errors import DataError, LevelfieldError, UsageError
from monitor.lock import STATE_FILE, WorkspaceLock, read_state
from monitor.logbook import EventLog
from monitor.progress import Progress, tell
from monitor.workspace import Workspace

#: how often the running watcher records that it is alive (``seen_at``) when nothing else changes
HEARTBEAT_SECONDS = 10


def _now() -> str:
    return dt.datetime.now(dt.timezone.utc).isoformat(timespec="seconds")


def safe_name(name: str) -> str:
    """A file name that stays inside its folder: no separators, no dot-dot, plain characters."""
    text = unicodedata.normalize("NFKC", name)
    text = re.sub(r"[^A-Za-z0-9._-]+", "_", text).strip("._")
    return (text or "file")[:120]


@dataclass
class Inbox:
    """Remembers (size, mtime) of each inbox file between looks to tell settled files.

    ``looks`` counts the looks; ``since[name]`` is the look that first saw the file's present size
    and mtime, so a file taken at look ``n`` has been unchanged since look ``since[name]``."""

    folder: Path
    seen: dict[str, tuple[int, int]] = field(default_factory=dict)
    since: dict[str, int] = field(default_factory=dict)
    looks: int = 0
    waiting: int = 0  # files present but still changing at the last look

    def settled(self) -> list[Path]:
        self.looks += 1
        now: dict[str, tuple[int, int]] = {}
        since: dict[str, int] = {}
        ready = []
        for path in sorted(self.folder.iterdir()):
            if not path.is_file() or path.name.startswith("."):
                continue
            try:
                st = path.stat()
            except FileNotFoundError:
                continue
            sig = (st.st_size, st.st_mtime_ns)
            now[path.name] = sig
            if self.seen.get(path.name) == sig:
                ready.append(path)
                since[path.name] = self.since.get(path.name, self.looks - 1)
            else:
                since[path.name] = self.looks
        self.seen, self.since = now, since
        self.waiting = len(now) - len(ready)
        return ready


@dataclass
class PollSummary:
    """What one poll did (``levelfield watch --once`` prints it and sets its exit code from it)."""

    loaded: int = 0
    unchanged: int = 0  # the same bytes were loaded before: archived, nothing changed
    rejected: list[str] = field(default_factory=list)  # error reports, relative to the workspace
    waiting: int = 0  # still changing: left for the next poll
    error: str | None = None  # the poll itself failed (logged with its traceback)

    def line(self) -> str:
        parts = [f"{self.loaded} file(s) loaded"]
        if self.unchanged:
            parts.append(f"{self.unchanged} already loaded (archived, nothing changed)")
        if self.rejected:
            shown = ", ".join(self.rejected[:5]) + (", ..." if len(self.rejected) > 5 else "")
            parts.append(f"{len(self.rejected)} rejected (see {shown})")
        if self.waiting:
            parts.append(f"{self.waiting} still changing (left for the next run)")
        return "processed the inbox: " + ", ".join(parts)

    @property
    def ok(self) -> bool:
        return not self.rejected and self.error is None


class Service:
    def __init__(self, ws: Workspace, *, inbox: Path | None = None, echo: bool = True, publish: bool = True,
                 progress: Progress | None = None):
        self.ws = ws
        ws.ensure()
        self.inbox = Inbox(Path(inbox) if inbox else ws.inbox)
        self.events = EventLog(ws.folder("logs") / "levelfield.log", echo=echo)
        self.publish = publish
        #: told of loads, recompute and publish (the CLI passes a terminal line, or nothing)
        self.progress = progress
        self.stopping = threading.Event()
        self.state_path = ws.folder("logs") / STATE_FILE
        self._state = self._read_state()
        self._state_lock = threading.RLock()  # the main loop and the scheduler's jobs both write it
        self.last_poll = PollSummary()

    def log(self, event: str, level: str = "info", message: str = "", **fields) -> dict:
        """A log record (JSON line, and the console line when echoing); the progress line, if
        any, is erased first so the two never share a terminal line."""
        self._progress_done()
        return self.events(event, level=level, message=message, **fields)

    def _progress_done(self) -> None:
        clear = getattr(self.progress, "clear", None)
        if clear is not None:
            clear()

    # -- state shown by `levelfield status` -------------------------------------------------
    def _read_state(self) -> dict:
        return read_state(self.state_path) or {"jobs": {}}

    def _write_state(self, **updates) -> None:
        with self._state_lock:
            self._state.update(updates)
            self._state["seen_at"] = _now()
            tmp = self.state_path.with_suffix(".tmp")
            tmp.write_text(json.dumps(self._state, indent=1, default=str), encoding="utf-8")
            tmp.replace(self.state_path)

    def _job_done(self, job: str, started: dt.datetime, ok: bool, **fields) -> None:
        """Record a run of ``job``; a successful one resolves the last error if ``job`` caused it."""
        with self._state_lock:
            info = self._state.setdefault("jobs", {}).setdefault(job, {})
            info.update(fields, last_run=started.isoformat(timespec="seconds"), runs=info.get("runs", 0) + 1)
            if ok:
                info["last_ok"] = _now()
                error = self._state.get("last_error")
                if error and error.get("job") == job and not error.get("resolved_at"):
                    error["resolved_at"] = _now()
            self._write_state()

    def _error(self, job: str, message: str) -> None:
        self._write_state(last_error={"at": _now(), "job": job, "message": message})

    # -- the work -------------------------------------------------------------------------------
    def take(self, path: Path) -> bool:
        """Load one settled inbox file and move it; True when it loaded."""
        from monitor.ingest import load_file

        first_seen = self.inbox.since.get(path.name)
        db = self.ws.open_store()
        try:
            report = load_file(db, path, self.ws.config(), report_dir=self.ws.folder("logs") / "loads")
        except DataError as exc:
            self._reject(path, [str(p) for p in exc.problems], exc.summary)
            return False
        except LevelfieldError as exc:
            self._reject(path, [], str(exc))
            return False
        day = dt.date.today().isoformat()
        target = self.ws.folder("archive") / day / f"{report.sha256}-{safe_name(path.name)}"
        target.parent.mkdir(parents=True, exist_ok=True)
        shutil.move(str(path), target)
        self.log("load", message=f"{path.name}: {report.outcome}" + (f" as load #{report.load_id}" if report.load_id else ""),
                 file=path.name, sha256=report.sha256, load_id=report.load_id, outcome=report.outcome,
                 archived=str(target.relative_to(self.ws.root)), report=report.report_file,
                 units_new=report.count("new"), units_corrected=report.count("corrected"),
                 look=self.inbox.looks, first_seen_look=first_seen)
        if report.outcome != "loaded":
            self.last_poll.unchanged += 1
        return report.outcome == "loaded"

    def _reject(self, path: Path, problems: list[str], summary: str) -> None:
        """Move a refused file to rejected/ with its report beside it; the loader's summary
        offers ``--skip-bad-rows``, which the watcher does not take: the report says instead how
        to load the file's good rows by hand."""
        by_hand = "--skip-bad-rows" in summary
        summary = re.sub(r"\s*\([^()]*--skip-bad-rows[^()]*\)", "", summary)
        messages = [*problems, summary]
        folder = self.ws.folder("rejected")
        name = safe_name(path.name)
        target = folder / name
        stamp = dt.datetime.now().strftime('%Y%m%dT%H%M%S')
        for n in itertools.count(1):  # never overwrite an earlier rejected file or its report
            if not target.exists() and not (folder / f"{target.name}.error.txt").exists():
                break
            target = folder / (f"{stamp}-{name}" if n == 1 else f"{stamp}-{n}-{name}")
        shutil.move(str(path), target)
        report = folder / f"{target.name}.error.txt"
        advice = ["", "The watcher loads a file whole or not at all: nothing of this file was loaded.",
                  "Fix it and put it in the inbox again"]
        if by_hand:
            advice[-1] += (", or load its good rows by hand (every skipped row is listed):\n"
                           f"  levelfield -w {shlex.quote(str(self.ws.root))} load --skip-bad-rows "
                           f"{shlex.quote(str(target))}")
        else:
            advice[-1] += "."
        report.write_text("\n".join(messages + advice) + "\n", encoding="utf-8")
        self.log("reject", level="error", message=f"{path.name}: refused ({summary})", file=path.name,
                 moved_to=str(target.relative_to(self.ws.root)), report=str(report.relative_to(self.ws.root)),
                 problems=problems[:50])
        self.last_poll.rejected.append(str(report.relative_to(self.ws.root)))
        self._error("poll", f"{path.name}: {summary}")

    def poll(self) -> int:
        """One poll: take every settled file, then refresh once if anything loaded; the number
        of files loaded (the whole summary is in ``last_poll``).

        ``refresh_pending`` in the state file is set before a load can commit and cleared only
        after the refresh: a refresh that a crash (or an error) cut short runs at the next poll.
        """
        started = dt.datetime.now(dt.timezone.utc)
        self.last_poll = summary = PollSummary()
        try:
            carried = bool(self._state.get("refresh_pending"))
            ready = self.inbox.settled()
            summary.waiting = self.inbox.waiting
            for number, path in enumerate(ready):
                if self.stopping.is_set():
                    summary.waiting += len(ready) - number
                    break
                tell(self.progress, "load", number, len(ready), path.name)
                self._write_state(refresh_pending=True)
                summary.loaded += self.take(path)
                if not (summary.loaded or carried):
                    self._write_state(refresh_pending=False)
            if ready:
                tell(self.progress, "load", len(ready), len(ready))
            if (summary.loaded or carried) and not self.stopping.is_set():
                self.refresh()
                self._write_state(refresh_pending=False)
        except Exception as exc:  # logged, kept in state, the scheduler goes on
            summary.error = f"{type(exc).__name__}: {exc}"
            self._fail("poll", exc)
        finally:
            self._progress_done()
        self._job_done("poll", started, summary.ok)
        return summary.loaded

    def refresh(self, full: bool = False) -> None:
        from monitor.pipeline import refresh

        result = refresh(self.ws, full=full, publish=self.publish, progress=self.progress)
        for line in result.lines:
            self.log("refresh", message=line.strip())

    def verify(self) -> list:
        """Recompute everything from scratch (on a scratch copy) and log every difference from
        the store, each as a changed method version or as a bug; then recompute the store fully."""
        from monitor.pipeline import prepare
        from monitor.verify import summary, verify_store

        started = dt.datetime.now(dt.timezone.utc)
        ok = False
        try:
            db, config = self.ws.open_store(), self.ws.config()
            prepare(db, config, self.ws.notify)
            differences = verify_store(db, config, progress=self.progress)
            self._progress_done()
            if differences:
                for diff in differences[:200]:
                    self.log("verify", level="error", message=str(diff), table=diff.table, kind=diff.kind,
                             cause="changed method version" if diff.explained else "bug")
                if len(differences) > 200:
                    self.log("verify", level="error", message=f"... and {len(differences) - 200} more")
                text = summary(differences)
                self.log("verify", level="error", message=f"{text}; recomputing everything",
                         differences=len(differences), method_version=sum(d.explained for d in differences),
                         bug=sum(not d.explained for d in differences))
                self._error("verify", text)
                self.refresh(full=True)
            else:
                ok = True
                self.log("verify", message="the stored measures, national pool, flags and watch list equal "
                         "a from-scratch recompute")
        except Exception as exc:
            self._fail("verify", exc)
            differences = [f"verification failed: {exc}"]
        finally:
            self._progress_done()
        self._job_done("verify", started, ok, differences=len(differences))
        return differences

    def _fail(self, job: str, exc: Exception) -> None:
        self.log(job, level="error", message=f"{type(exc).__name__}: {exc}", traceback=traceback.format_exc())
        self._error(job, f"{type(exc).__name__}: {exc}")

    # -- running ----------------------------------------------------------------------------------
    def _lock(self) -> WorkspaceLock:
        """The workspace lock. ``levelfield status`` tries it for an instant to tell whether a
        watcher runs: a few short retries keep that instant from refusing a starting watcher."""
        for attempt in range(5):
            try:
                return WorkspaceLock(self.ws.root).acquire()
            except UsageError:
                if attempt == 4:
                    raise
                time.sleep(0.1)
        raise AssertionError("unreachable")

    def run_once(self, settle: float | None = None) -> PollSummary:
        """Process the inbox once: two looks ``settle`` seconds apart (default
        ``schedule.poll_seconds``, the service's interval) decide which files are settled."""
        if settle is None:
            settle = self.ws.config()["schedule.poll_seconds"]
        lock = self._lock()
        try:
            self._write_state(pid=None, mode="once")
            self.inbox.settled()
            if self.inbox.waiting:  # nothing in the inbox: nothing to wait for
                self._pause(settle)
            self.poll()
            return self.last_poll
        finally:
            lock.release()

    def _pause(self, seconds: float) -> None:
        """The wait between the two looks of :meth:`run_once`."""
        self.stopping.wait(seconds)

    def run_forever(self, every: int | None = None) -> None:
        from apscheduler.schedulers.background import BackgroundScheduler
        from apscheduler.triggers.cron import CronTrigger
        from apscheduler.triggers.interval import IntervalTrigger

        import logging

        # coalesced or skipped runs are the design, not news: keep APScheduler's notices out
        logging.getLogger("apscheduler").setLevel(logging.ERROR)
        config = self.ws.config()
        every = every or config["schedule.poll_seconds"]
        hour, minute = (int(x) for x in config["schedule.nightly"].split(":"))
        lock = self._lock()
        previous: dict = {}
        scheduler = BackgroundScheduler(job_defaults={"coalesce": True, "max_instances": 1,
                                                      "misfire_grace_time": max(every, 60)})
        try:
            scheduler.add_job(self.poll, IntervalTrigger(seconds=every), id="poll", replace_existing=True,
                              next_run_time=dt.datetime.now(dt.timezone.utc))
            scheduler.add_job(self.verify, CronTrigger(hour=hour, minute=minute), id="verify", replace_existing=True)
            previous = {sig: signal.signal(sig, lambda *_: self.stopping.set()) for sig in (signal.SIGTERM, signal.SIGINT)}
            self._write_state(pid=os.getpid(), mode="service", every=every, started_at=_now(), stopped_at=None)
            scheduler.start()
            self.log("start", message=f"watching {self.inbox.folder} every {every}s; nightly verification at "
                     f"{config['schedule.nightly']}", inbox=str(self.inbox.folder), every=every)
            written, beat = None, 0.0
            while not self.stopping.wait(0.5):
                nexts = {job.id: job.next_run_time.isoformat(timespec="seconds") if job.next_run_time else None
                         for job in scheduler.get_jobs()}
                if nexts != written or time.monotonic() - beat >= HEARTBEAT_SECONDS:
                    with self._state_lock:  # read-modify-write: a job may record its last run meanwhile
                        jobs = self._state.setdefault("jobs", {})
                        for job_id, next_run in nexts.items():
                            jobs.setdefault(job_id, {})["next_run"] = next_run
                        self._write_state(pid=os.getpid())
                    written, beat = nexts, time.monotonic()
        finally:
            self.log("stop", message="stopping after the job in progress")
            if scheduler.running:
                scheduler.shutdown(wait=True)
            for sig, handler in previous.items():
                signal.signal(sig, handler)
            with self._state_lock:
                for info in self._state.get("jobs", {}).values():
                    info.pop("next_run", None)
                self._write_state(pid=None, stopped_at=_now())
            lock.release()
            self.log("stop", message="stopped cleanly")
