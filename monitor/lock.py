"""A workspace lock so that only one watcher runs per workspace."""

from __future__ import annotations

import fcntl
import os
from pathlib import Path

from monitor.errors import UsageError


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
