"""Structured logging: one JSON object per line in ``logs/levelfield.log``, plus a readable
console line (quiet when the console is not a terminal and ``echo`` is off)."""

from __future__ import annotations

import datetime as dt
import json
import os
import sys
import threading
from pathlib import Path

_LOCK = threading.Lock()


class EventLog:
    def __init__(self, path: Path, *, echo: bool = True):
        self.path = path
        self.echo = echo
        path.parent.mkdir(parents=True, exist_ok=True)

    def __call__(self, event: str, level: str = "info", message: str = "", **fields) -> dict:
        record = {"at": dt.datetime.now(dt.timezone.utc).isoformat(timespec="milliseconds"),
                  "level": level, "event": event, "pid": os.getpid(), "message": message, **fields}
        line = json.dumps(record, default=str, ensure_ascii=False)
        with _LOCK:
            with self.path.open("a", encoding="utf-8") as fh:
                fh.write(line + "\n")
            if self.echo:
                stamp = record["at"][11:19]
                print(f"{stamp} {level:5} {event}: {message}", file=sys.stderr if level == "error" else sys.stdout,
                      flush=True)
        return record


def read_events(path: Path, limit: int | None = None) -> list[dict]:
    """The JSON records of a log file (unparseable lines, such as tracebacks, are skipped)."""
    if not path.exists():
        return []
    out = []
    for line in path.read_text(encoding="utf-8", errors="replace").splitlines():
        if line.startswith("{"):
            try:
                out.append(json.loads(line))
            except json.JSONDecodeError:
                continue
    return out[-limit:] if limit else out
