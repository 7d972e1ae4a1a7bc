"""Opening the store: pragmas and transactions."""

from __future__ import annotations

import contextlib
import sqlite3
from pathlib import Path
from typing import Iterator

import sqlite_utils

BUSY_TIMEOUT_MS = 30_000


def connect(path: str | Path, *, migrate: bool = True) -> sqlite_utils.Database:
    """Open (creating if needed) the store at ``path`` with WAL, busy timeout and foreign keys.

    ``migrate`` brings the schema up to date (see :mod:`store.migrations`).
    """
    conn = sqlite3.connect(str(path), timeout=BUSY_TIMEOUT_MS / 1000, isolation_level=None)
    conn.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
    conn.execute("PRAGMA journal_mode = WAL")
    conn.execute("PRAGMA foreign_keys = ON")
    conn.execute("PRAGMA synchronous = NORMAL")
    db = sqlite_utils.Database(conn)
    if migrate:
        from store.migrations import migrate as _migrate

        _migrate(db)
    return db


@contextlib.contextmanager
def transaction(db: sqlite_utils.Database) -> Iterator[sqlite3.Connection]:
    """One write transaction: ``BEGIN IMMEDIATE`` takes the writer lock up front, so two
    writers queue on the busy timeout instead of failing halfway; any exception rolls back."""
    conn = db.conn
    conn.execute("BEGIN IMMEDIATE")
    try:
        yield conn
    except BaseException:
        conn.execute("ROLLBACK")
        raise
    else:
        conn.execute("COMMIT")
