"""What the aggregates step derives from stored numbers for the publisher: each unit's plan era,
the national aggregates per cycle and chamber, and the seats-votes curves.

Rows are read back in the order they were written (``position``), so the site lays them out as
they were computed.
"""

from __future__ import annotations

import sqlite3
from typing import Mapping

import pandas as pd
import sqlite_utils

from store.tables import read_table

#: table -> its columns (besides ``position``), in this order
TABLES: dict[str, list[str]] = {
    "unit_plans": ["cycle", "state", "chamber", "plan_id", "drawn_by", "inferred"],
    "national_summary": ["cycle", "chamber", "states", "districts", "seats", "seats_a", "seats_b", "seats_other",
                         "votes_a", "votes_b", "votes_other", "measured_districts", "vote_share", "uncontested",
                         "competitive", "measured_units", "flagged_units", "pool_units", "excess_seats",
                         "excess_party_a", "excess_party_b", "excess_split", "excess_commission", "excess_court",
                         "excess_other", "excess_inferred", "excess_no_plan", "vote_share_as_cast"],
    "national_histogram": ["cycle", "chamber", "bin_start", "bin_end", "kind", "side", "districts"],
    "national_drawers": ["cycle", "chamber", "drawer", "excess_seats", "units"],
    "swing_curves": ["state", "chamber", "cycle", "vote", "seat_share"],
    "swing_points": ["state", "chamber", "cycle", "point", "vote", "seat_share", "seats", "districts"],
    "seats_votes": ["cycle", "state", "chamber", "vote_share", "seat_share"],
}
_ORDERED = {"unit_plans": "cycle, state, chamber", "seats_votes": "cycle, state, chamber"}


def replace_all(conn: sqlite3.Connection, rows: Mapping[str, list[tuple]]) -> None:
    """Replace every table of TABLES by ``rows[table]`` (tuples in its column order; the tables with
    a ``position`` get it from the tuples' order)."""
    for table, columns in TABLES.items():
        conn.execute(f"DELETE FROM {table}")
        ordered = table in _ORDERED
        cols = columns if ordered else ["position", *columns]
        values = rows[table] if ordered else [(i, *r) for i, r in enumerate(rows[table])]
        conn.executemany(f"INSERT INTO {table} ({', '.join(cols)}) VALUES ({', '.join('?' for _ in cols)})", values)


def read(db: sqlite_utils.Database, table: str) -> pd.DataFrame:
    """A table of TABLES in the order it was written (empty, with its columns, on an older store)."""
    return read_table(db, table, TABLES[table], _ORDERED.get(table, "position"))
