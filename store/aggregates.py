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

from store.rows import apply
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
#: the tables keyed by unit (cycle, state, chamber); the others by ``position``
ORDERED = {"unit_plans": "cycle, state, chamber", "seats_votes": "cycle, state, chamber"}


def write_changes(conn: sqlite3.Connection, changes: Mapping[str, tuple[list, list]]) -> None:
    """Per table of TABLES, delete the rows under the keys and insert the rows of ``changes[table]``
    (:func:`store.rows.changes`: keyed by (cycle, state, chamber) for the tables in ORDERED, else
    by position, which leads each tuple); the rows of a table it does not name stay as stored."""
    for table, (delete, insert) in changes.items():
        ordered = table in ORDERED
        apply(conn, table, ["cycle", "state", "chamber"] if ordered else ["position"],
              TABLES[table] if ordered else ["position", *TABLES[table]], delete, insert)


def counts(conn) -> dict[str, int]:
    """The rows of every table of TABLES."""
    return {table: conn.execute(f"SELECT COUNT(*) FROM {table}").fetchone()[0] for table in TABLES}


def read(db: sqlite_utils.Database, table: str) -> pd.DataFrame:
    """A table of TABLES in the order it was written (empty, with its columns, on an older store)."""
    return read_table(db, table, TABLES[table], ORDERED.get(table, "position"))
