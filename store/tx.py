"""Transactions: read snapshots, write transactions and the read-compute-write step.

Imported by :mod:`store.migrations` and :mod:`store.db` (never the other way round), so the
store's modules form no import circle: ``tx`` <- ``migrations`` <- ``db``.
"""

from __future__ import annotations

import contextlib
import sqlite3
from typing import Callable, Iterator, TypeVar

import sqlite_utils

T = TypeVar("T")


class StaleRead(Exception):
    """Another connection committed after the snapshot a write was computed from."""


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
