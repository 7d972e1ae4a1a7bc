"""The ``measures`` table: one row per unit (cycle, state, chamber) and measure."""

from __future__ import annotations

import sqlite3
from typing import Iterable, Sequence

import pandas as pd
import sqlite_utils

from store.rows import group_filter

UnitKey = tuple[int, str, str]

#: The columns a measure row is written with, in this order.
ROW_COLUMNS = ["cycle", "state", "chamber", "measure", "value", "low", "high", "p_value", "reason",
               "method_version", "policy", "inputs_hash", "unit_id", "computed_at"]


def stored_hashes(db: sqlite_utils.Database) -> pd.DataFrame:
    """cycle, state, chamber, measure, inputs_hash, method_version of every stored row."""
    return pd.read_sql_query(
        "SELECT cycle, state, chamber, measure, inputs_hash, method_version FROM measures", db.conn)


def unit_keys(db: sqlite_utils.Database) -> list[UnitKey]:
    """(cycle, state, chamber) of every unit with stored measures."""
    return [tuple(r) for r in db.execute("SELECT DISTINCT cycle, state, chamber FROM measures")]


def replace_units(conn: sqlite3.Connection, keys: Iterable[UnitKey], rows: Sequence[tuple]) -> None:
    """Delete every row of the units ``keys``, then insert ``rows`` (tuples in ROW_COLUMNS order)."""
    for key in keys:
        conn.execute("DELETE FROM measures WHERE cycle = ? AND state = ? AND chamber = ?", list(key))
    conn.executemany(
        f"INSERT INTO measures ({', '.join(ROW_COLUMNS)}) VALUES ({', '.join('?' for _ in ROW_COLUMNS)})", rows)


def read(db: sqlite_utils.Database, columns: Sequence[str], measures: Sequence[str] | None = None,
         groups=None) -> pd.DataFrame:
    """``columns`` of the stored rows (of ``measures`` only, when given; of the (cycle, chamber)
    ``groups`` only, when given), sorted by unit and measure."""
    clauses, params = [], []
    if measures is not None:
        clauses.append(f"measure IN ({', '.join('?' for _ in measures)})")
        params += list(measures)
    if groups is not None:
        where, more = group_filter(groups)
        clauses.append(where)
        params += more
    where = f"WHERE {' AND '.join(clauses)} " if clauses else ""
    return pd.read_sql_query(
        f"SELECT {', '.join(columns)} FROM measures {where}ORDER BY cycle, state, chamber, measure",
        db.conn, params=params)


def count(db: sqlite_utils.Database) -> int:
    return db.execute("SELECT COUNT(*) FROM measures").fetchone()[0]
