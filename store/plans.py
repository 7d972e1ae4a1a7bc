"""Plan eras: ``plans`` rows loaded from a plans file (``inferred = 0``) or inferred (``= 1``)."""

from __future__ import annotations

import sqlite3
from typing import Iterable, Sequence

import pandas as pd
import sqlite_utils

_INSERT = ("INSERT INTO plans (state, chamber, plan_id, first_cycle, last_cycle, drawn_by, note, source, inferred, "
           "districts, seats) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)")


def replace_loaded(conn: sqlite3.Connection, pairs: Iterable[tuple[str, str]], rows: Sequence[tuple]) -> None:
    """Delete the plans of every (state, chamber) in ``pairs``, then insert ``rows``:
    (state, chamber, plan_id, first_cycle, last_cycle, drawn_by, note, source, districts, seats)."""
    for state, chamber in pairs:
        conn.execute("DELETE FROM plans WHERE state = ? AND chamber = ?", [state, chamber])
    conn.executemany(_INSERT, [(*r[:8], 0, *r[8:]) for r in rows])


def loaded(db: sqlite_utils.Database) -> pd.DataFrame:
    """state, chamber, plan_id, first_cycle, last_cycle, drawn_by of every loaded plan."""
    return pd.read_sql_query(
        "SELECT state, chamber, plan_id, first_cycle, last_cycle, drawn_by FROM plans WHERE inferred = 0", db.conn)


def inferred(db: sqlite_utils.Database) -> set[tuple]:
    """(state, chamber, plan_id, first_cycle, last_cycle) of every inferred plan."""
    return {tuple(r) for r in db.execute(
        "SELECT state, chamber, plan_id, first_cycle, last_cycle FROM plans WHERE inferred = 1")}


def replace_inferred(conn: sqlite3.Connection, rows: Sequence[tuple], note: str) -> None:
    """Replace every inferred plan by ``rows`` (state, chamber, plan_id, first_cycle, last_cycle),
    drawn by ``other``. Loaded plans are never touched: only ``inferred = 1`` rows are deleted and
    the new rows are plain inserts (an id equal to a loaded plan's fails the UNIQUE constraint)."""
    conn.execute("DELETE FROM plans WHERE inferred = 1")
    conn.executemany(_INSERT, [(s, c, p, f, last, "other", note, None, 1, None, None) for s, c, p, f, last in rows])
