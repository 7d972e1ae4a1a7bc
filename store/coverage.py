"""The ``coverage`` and ``coverage_gaps`` tables: written whole by each recompute, read by the
exports, the flags, ``status`` and the site. Plain SQL; what the numbers mean is in
``monitor.coverage``."""

from __future__ import annotations

import sqlite3
from typing import Sequence

import pandas as pd

UNIT_COLUMNS = ["cycle", "state", "chamber", "unit_id", "districts_stored", "seats_stored", "districts_measured",
                "seats_measured", "districts_expected", "seats_expected", "expected_from", "seat_coverage",
                "incomplete", "note", "votes_a_cast", "votes_b_cast", "votes_a_measured", "votes_b_measured",
                "policy", "computed_at", "partial", "combines", "districts_treated", "seats_treated"]
GAP_COLUMNS = ["cycle", "state", "chamber", "district", "seats", "gap", "reason", "position"]


def replace_coverage(conn: sqlite3.Connection, units: Sequence[tuple], gaps: Sequence[tuple]) -> None:
    """Replace both tables (inside the caller's transaction). ``units``: tuples in
    :data:`UNIT_COLUMNS` order; ``gaps``: tuples in :data:`GAP_COLUMNS` order."""
    conn.execute("DELETE FROM coverage")
    conn.execute("DELETE FROM coverage_gaps")
    conn.executemany(f"INSERT INTO coverage ({', '.join(UNIT_COLUMNS)}) "
                     f"VALUES ({', '.join('?' for _ in UNIT_COLUMNS)})", units)
    conn.executemany(f"INSERT INTO coverage_gaps ({', '.join(GAP_COLUMNS)}) "
                     f"VALUES ({', '.join('?' for _ in GAP_COLUMNS)})", gaps)


def replace_series(conn: sqlite3.Connection, series: Sequence[tuple[str, str]], units: Sequence[tuple],
                   gaps: Sequence[tuple]) -> None:
    """Replace the rows of the (state, chamber) ``series`` only (inside the caller's transaction)."""
    for table in ("coverage", "coverage_gaps"):
        conn.executemany(f"DELETE FROM {table} WHERE state = ? AND chamber = ?", [tuple(k) for k in series])
    conn.executemany(f"INSERT INTO coverage ({', '.join(UNIT_COLUMNS)}) "
                     f"VALUES ({', '.join('?' for _ in UNIT_COLUMNS)})", units)
    conn.executemany(f"INSERT INTO coverage_gaps ({', '.join(GAP_COLUMNS)}) "
                     f"VALUES ({', '.join('?' for _ in GAP_COLUMNS)})", gaps)


def read_coverage(db) -> pd.DataFrame:
    """Every stored coverage row, sorted by cycle, state, chamber (empty with its columns when the
    store predates the table)."""
    conn = getattr(db, "conn", db)
    if not _has(conn, "coverage"):
        return pd.DataFrame(columns=UNIT_COLUMNS)
    return pd.read_sql_query(f"SELECT {', '.join(UNIT_COLUMNS)} FROM coverage ORDER BY cycle, state, chamber", conn)


def read_gaps(db) -> pd.DataFrame:
    """Every stored gap, sorted by unit, kind (missing, not up, left out, then the treated
    districts) and district."""
    conn = getattr(db, "conn", db)
    if not _has(conn, "coverage_gaps"):
        return pd.DataFrame(columns=GAP_COLUMNS)
    return pd.read_sql_query(
        f"SELECT {', '.join(GAP_COLUMNS)} FROM coverage_gaps ORDER BY cycle, state, chamber, "
        "CASE gap WHEN 'missing' THEN 0 WHEN 'not up' THEN 1 WHEN 'left out' THEN 2 ELSE 3 END, district, position",
        conn)


def plan_counts_and_eras(db) -> pd.DataFrame:
    """Every loaded (not inferred) plan era with its counts: state, chamber, plan_id, first_cycle,
    last_cycle, districts, seats."""
    conn = getattr(db, "conn", db)
    return pd.read_sql_query(
        "SELECT state, chamber, plan_id, first_cycle, last_cycle, districts, seats FROM plans WHERE inferred = 0", conn)


def plan_counts(db) -> pd.DataFrame:
    """The districts and seats the loaded (not inferred) plan eras declare: state, chamber,
    plan_id, districts, seats (null where the plans file left them out)."""
    conn = getattr(db, "conn", db)
    return pd.read_sql_query(
        "SELECT state, chamber, plan_id, districts, seats FROM plans WHERE inferred = 0", conn)


def _has(conn: sqlite3.Connection, table: str) -> bool:
    return conn.execute("SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = ?", [table]).fetchone() is not None
