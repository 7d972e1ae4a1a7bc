"""What a watcher leaves in its workspace: the lock (only one watcher runs per workspace) and the
state file where it records its jobs; ``levelfield status`` reads both (without importing the
watcher)."""

from __future__ import annotations

import fcntl
import json
import os
from pathlib import Path

from monitor.errors import UsageError

#: the watcher's state file, in the workspace's ``logs/``: its jobs' last and next runs, last error
STATE_FILE = "watcher-state.json"


def read_state(path: Path) -> dict | None:
    """The watcher's recorded state, None when there is none (or it cannot be read)."""
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None


class WorkspaceLock:
    """An exclusive, non-blocking ``flock`` on ``<workspace>/.watcher.lock`` holding the owner's
    pid. The kernel releases it when the process dies, even by SIGKILL: no stale locks."""

    def __init__(self, root: Path):
        self.path = root / ".watcher.lock"
        self._fh = None

    def acquire(self) -> "WorkspaceLock":
        fh = open(self.path, "a+")
        try:
            fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            fh.seek(0)
            owner = fh.read().strip() or "unknown"
            fh.close()
            raise UsageError(f"another watcher (pid {owner}) is already running on this workspace "
                             f"({self.path.parent}); stop it first, or use another --workspace") from None
        fh.seek(0)
        fh.truncate()
        fh.write(str(os.getpid()))
        fh.flush()
        self._fh = fh
        return self

    def release(self) -> None:
        if self._fh is not None:
            fcntl.flock(self._fh.fileno(), fcntl.LOCK_UN)
            self._fh.close()
            self._fh = None

    def __enter__(self):
        return self.acquire()

    def __exit__(self, *exc):
        self.release()


def lock_holder(root: Path) -> str | None:
    """The pid written in the workspace lock when a process holds the lock (a watcher runs),
    else None. The lock is tried for an instant (shared, non-blocking); the kernel drops the lock
    of a process that died, even by SIGKILL, so a killed watcher never shows as running."""
    try:
        fh = open(WorkspaceLock(root).path, "r", encoding="utf-8", errors="replace")
    except OSError:
        return None
    with fh:
        try:
            fcntl.flock(fh.fileno(), fcntl.LOCK_SH | fcntl.LOCK_NB)
        except BlockingIOError:
            return fh.read().strip() or "unknown"
        fcntl.flock(fh.fileno(), fcntl.LOCK_UN)
        return None
