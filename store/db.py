"""Opening the store: pragmas, then the migrations (:mod:`store.migrations`)."""

from __future__ import annotations

import sqlite3
from pathlib import Path

import sqlite_utils

from store.migrations import migrate as _migrate
from store.tx import StaleRead, snapshot, transaction, write_from_snapshot

BUSY_TIMEOUT_MS = 30_000

__all__ = ["BUSY_TIMEOUT_MS", "StaleRead", "connect", "path_of", "snapshot", "transaction", "write_from_snapshot"]


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
        _migrate(db)
    return db


def path_of(db: sqlite_utils.Database) -> Path | None:
    """The file of the store's main database (None for an in-memory one)."""
    row = db.execute("PRAGMA database_list").fetchone()
    return Path(row[2]).absolute() if row and row[2] else None
