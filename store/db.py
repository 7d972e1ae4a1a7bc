"""Opening the store: pragmas and transactions."""

from __future__ import annotations

import contextlib
import sqlite3
from pathlib import Path
from typing import Callable, Iterator, TypeVar

import sqlite_utils

BUSY_TIMEOUT_MS = 30_000
T = TypeVar("T")


class StaleRead(Exception):
    """Another connection committed after the snapshot a write was computed from."""


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


def _data_version(conn: sqlite3.Connection) -> int:
    return conn.execute("PRAGMA data_version").fetchone()[0]


@contextlib.contextmanager
def snapshot(db: sqlite_utils.Database) -> Iterator[int]:
    """A read transaction: every query inside sees one committed state of the store (WAL keeps
    it while other connections write). Yields that state's data version, which
    ``transaction(db, since=...)`` checks."""
    conn = db.conn
    conn.execute("BEGIN")
    try:
        conn.execute("SELECT 1 FROM sqlite_master LIMIT 1").fetchall()  # the snapshot starts here
        yield _data_version(conn)
    finally:
        conn.execute("COMMIT")


@contextlib.contextmanager
def transaction(db: sqlite_utils.Database, *, since: int | None = None) -> Iterator[sqlite3.Connection]:
    """One write transaction: ``BEGIN IMMEDIATE`` takes the writer lock up front, so two
    writers queue on the busy timeout instead of failing halfway; any exception rolls back.

    ``since``: the data version of the snapshot the write was computed from; if another
    connection has committed since, nothing is written and :class:`StaleRead` is raised."""
    conn = db.conn
    conn.execute("BEGIN IMMEDIATE")
    if since is not None and _data_version(conn) != since:
        conn.execute("ROLLBACK")
        raise StaleRead()
    try:
        yield conn
    except BaseException:
        conn.execute("ROLLBACK")
        raise
    else:
        conn.execute("COMMIT")


def write_from_snapshot(db: sqlite_utils.Database, prepare: Callable[[], Callable[[sqlite3.Connection], T]],
                        *, attempts: int = 4) -> T:
    """Read-compute-write without lost updates and without holding the writer lock while computing.

    ``prepare()`` reads what it needs (inside one snapshot) and returns ``write(conn)``, which is
    run in a write transaction only if nobody committed in between; otherwise the whole step runs
    again on the new state. The last attempt reads inside the write transaction, so it always
    completes (other writers wait on the busy timeout meanwhile).
    """
    for _ in range(attempts - 1):
        with snapshot(db) as version:
            write = prepare()
        try:
            with transaction(db, since=version) as conn:
                return write(conn)
        except StaleRead:
            continue
    with transaction(db) as conn:
        return prepare()(conn)
