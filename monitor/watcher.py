"""The monitoring service: poll the inbox, load what arrived, recompute, republish.

Built on APScheduler 3.x (a BackgroundScheduler with an in-memory job store; the SQLite
results store is the source of truth, so jobs are recreated at every start):

* ``poll`` (interval, ``schedule.poll_seconds``): a file is taken once it has stopped changing
  (same size and mtime over two polls). Loaded files move to ``archive/<date>/<sha256>-<name>``;
  refused ones to ``rejected/`` with ``<name>.error.txt`` beside them (the store is unchanged).
  After any successful load the chain measures -> flags -> site runs (incrementally).
* ``verify`` (cron, ``schedule.nightly``): recomputes every measure from scratch and reports any
  difference from what is stored (a bug or a changed method version), then brings the store up
  to date.

Both jobs: one instance at a time, missed runs coalesced. A workspace lock keeps a second
watcher out; manual ``levelfield load`` meanwhile is safe (the store serialises writers).
SIGTERM and SIGINT stop the scheduler after the job in progress: every load and every
recompute is one transaction, so nothing is half-written.
"""

from __future__ import annotations

import datetime as dt
import itertools
import json
import re
import shutil
import signal
import threading
import time
import traceback
import unicodedata
from dataclasses import dataclass, field
from pathlib import Path

from monitor.errors import DataError, LevelfieldError
from monitor.lock import WorkspaceLock
from monitor.logbook import EventLog
from monitor.workspace import Workspace

STATE_FILE = "watcher-state.json"


def safe_name(name: str) -> str:
    """A file name that stays inside its folder: no separators, no dot-dot, plain characters."""
    text = unicodedata.normalize("NFKC", name)
    text = re.sub(r"[^A-Za-z0-9._-]+", "_", text).strip("._")
    return (text or "file")[:120]


@dataclass
class Inbox:
    """Remembers (size, mtime) of each inbox file between polls to tell settled files."""

    folder: Path
    seen: dict[str, tuple[int, int]] = field(default_factory=dict)

    def settled(self) -> list[Path]:
        now: dict[str, tuple[int, int]] = {}
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
        self.seen = now
        return ready


class Service:
    def __init__(self, ws: Workspace, *, inbox: Path | None = None, echo: bool = True, publish: bool = True):
        self.ws = ws
        ws.ensure()
        self.inbox = Inbox(Path(inbox) if inbox else ws.inbox)
        self.log = EventLog(ws.folder("logs") / "levelfield.log", echo=echo)
        self.publish = publish
        self.stopping = threading.Event()
        self.state_path = ws.folder("logs") / STATE_FILE
        self._state = self._read_state()
        self._state_lock = threading.RLock()  # the main loop and the scheduler's jobs both write it

    # -- state shown by `levelfield status` -------------------------------------------------
    def _read_state(self) -> dict:
        try:
            return json.loads(self.state_path.read_text(encoding="utf-8"))
        except (OSError, json.JSONDecodeError):
            return {"jobs": {}}

    def _write_state(self, **updates) -> None:
        with self._state_lock:
            self._state.update(updates)
            tmp = self.state_path.with_suffix(".tmp")
            tmp.write_text(json.dumps(self._state, indent=1, default=str), encoding="utf-8")
            tmp.replace(self.state_path)

    def _job_state(self, job: str, **fields) -> None:
        with self._state_lock:
            jobs = self._state.setdefault("jobs", {})
            jobs.setdefault(job, {}).update(fields)
            self._write_state()

    # -- the work -------------------------------------------------------------------------------
    def take(self, path: Path) -> bool:
        """Load one settled inbox file and move it; True when it loaded."""
        from monitor.ingest import load_file

        db = self.ws.open_store()
        try:
            report = load_file(db, path, self.ws.config())
        except DataError as exc:
            self._reject(path, [str(p) for p in exc.problems] + [exc.summary])
            return False
        except LevelfieldError as exc:
            self._reject(path, [str(exc)])
            return False
        day = dt.date.today().isoformat()
        target = self.ws.folder("archive") / day / f"{report.sha256[:16]}-{safe_name(path.name)}"
        target.parent.mkdir(parents=True, exist_ok=True)
        shutil.move(str(path), target)
        self.log("load", message=f"{path.name}: {report.outcome}" + (f" as load #{report.load_id}" if report.load_id else ""),
                 file=path.name, sha256=report.sha256, load_id=report.load_id, outcome=report.outcome,
                 archived=str(target.relative_to(self.ws.root)),
                 units_new=report.count("new"), units_corrected=report.count("corrected"))
        return report.outcome == "loaded"

    def _reject(self, path: Path, messages: list[str]) -> None:
        folder = self.ws.folder("rejected")
        name = safe_name(path.name)
        target = folder / name
        stamp = dt.datetime.now().strftime('%Y%m%dT%H%M%S')
        for n in itertools.count(1):  # never overwrite an earlier rejected file or its report
            if not target.exists() and not (folder / f"{target.name}.error.txt").exists():
                break
            target = folder / (f"{stamp}-{name}" if n == 1 else f"{stamp}-{n}-{name}")
        shutil.move(str(path), target)
        (folder / f"{target.name}.error.txt").write_text("\n".join(messages) + "\n", encoding="utf-8")
        self.log("reject", level="error", message=f"{path.name}: refused ({messages[-1]})", file=path.name,
                 moved_to=str(target.relative_to(self.ws.root)), problems=messages[:50])
        self._write_state(last_error={"at": dt.datetime.now(dt.timezone.utc).isoformat(timespec="seconds"),
                                      "message": f"{path.name}: {messages[-1]}"})

    def poll(self) -> int:
        """One poll: take every settled file, then refresh once if anything loaded.

        ``refresh_pending`` in the state file is set before a load can commit and cleared only
        after the refresh: a refresh that a crash (or an error) cut short runs at the next poll.
        """
        started = dt.datetime.now(dt.timezone.utc)
        loaded = 0
        try:
            carried = bool(self._state.get("refresh_pending"))
            for path in self.inbox.settled():
                if self.stopping.is_set():
                    break
                self._write_state(refresh_pending=True)
                loaded += self.take(path)
                if not (loaded or carried):
                    self._write_state(refresh_pending=False)
            if (loaded or carried) and not self.stopping.is_set():
                self.refresh()
                self._write_state(refresh_pending=False)
        except Exception as exc:  # logged, kept in state, the scheduler goes on
            self._fail("poll", exc)
        self._job_state("poll", last_run=started.isoformat(timespec="seconds"))
        return loaded

    def refresh(self, full: bool = False) -> None:
        from monitor.pipeline import refresh

        result = refresh(self.ws, full=full, publish=self.publish)
        for line in result.lines:
            self.log("refresh", message=line.strip())

    def verify(self) -> list[str]:
        """Recompute everything from scratch in memory and report differences from the store."""
        from monitor.verify import verify_store

        started = dt.datetime.now(dt.timezone.utc)
        try:
            differences = verify_store(self.ws.open_store(), self.ws.config())
            if differences:
                for diff in differences[:200]:
                    self.log("verify", level="error", message=diff)
                self.log("verify", level="error", message=f"{len(differences)} difference(s) between stored "
                         "and recomputed results: a bug or a changed method version; recomputing")
                self.refresh(full=True)
            else:
                self.log("verify", message="stored measures equal a full recompute")
        except Exception as exc:
            self._fail("verify", exc)
            differences = [f"verification failed: {exc}"]
        self._job_state("verify", last_run=started.isoformat(timespec="seconds"), differences=len(differences))
        return differences

    def _fail(self, job: str, exc: Exception) -> None:
        self.log(job, level="error", message=f"{type(exc).__name__}: {exc}", traceback=traceback.format_exc())
        self._write_state(last_error={"at": dt.datetime.now(dt.timezone.utc).isoformat(timespec="seconds"),
                                      "message": f"{job}: {type(exc).__name__}: {exc}"})

    # -- running ----------------------------------------------------------------------------------
    def run_once(self, settle: float = 1.0) -> int:
        """Process the inbox and return: two looks ``settle`` seconds apart decide what is settled."""
        with WorkspaceLock(self.ws.root):
            self.inbox.settled()
            time.sleep(settle)
            return self.poll()

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
        with WorkspaceLock(self.ws.root):
            scheduler = BackgroundScheduler(job_defaults={"coalesce": True, "max_instances": 1,
                                                          "misfire_grace_time": max(every, 60)})
            scheduler.add_job(self.poll, IntervalTrigger(seconds=every), id="poll", replace_existing=True,
                              next_run_time=dt.datetime.now(dt.timezone.utc))
            scheduler.add_job(self.verify, CronTrigger(hour=hour, minute=minute), id="verify", replace_existing=True)
            previous = {sig: signal.signal(sig, lambda *_: self.stopping.set()) for sig in (signal.SIGTERM, signal.SIGINT)}
            scheduler.start()
            self.log("start", message=f"watching {self.inbox.folder} every {every}s; nightly verification at "
                     f"{config['schedule.nightly']}", inbox=str(self.inbox.folder), every=every)
            try:
                while not self.stopping.wait(0.5):
                    with self._state_lock:  # read-modify-write: a job may record its last run meanwhile
                        self._write_state(pid=__import__("os").getpid(), jobs={
                            job.id: {**self._state.get("jobs", {}).get(job.id, {}),
                                     "next_run": job.next_run_time.isoformat(timespec="seconds") if job.next_run_time else None}
                            for job in scheduler.get_jobs()})
            finally:
                self.log("stop", message="stopping after the job in progress")
                scheduler.shutdown(wait=True)
                for sig, handler in previous.items():
                    signal.signal(sig, handler)
                self._write_state(pid=None, stopped_at=dt.datetime.now(dt.timezone.utc).isoformat(timespec="seconds"))
                self.log("stop", message="stopped cleanly")
