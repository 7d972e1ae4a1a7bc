"""Whole tables with known columns: what the publisher, the verification and the exports read.

A table (or a column) that a store does not have yet reads as empty (or as nulls), so readers
work on a fresh store and on a store migrated from an earlier version alike.
"""

from __future__ import annotations

from typing import Sequence

import pandas as pd
import sqlite_utils


def has_table(db: sqlite_utils.Database, name: str) -> bool:
    return name in db.table_names()


def read_table(db: sqlite_utils.Database, name: str, columns: Sequence[str], order_by: str | None = None,
               where: str = "", params: Sequence = ()) -> pd.DataFrame:
    """``SELECT columns FROM name [WHERE where] [ORDER BY order_by]`` as a frame with exactly
    ``columns`` (in that order); a missing table gives an empty frame, a missing column nulls."""
    columns = list(columns)
    if not has_table(db, name):
        return pd.DataFrame(columns=columns)
    present = set(db[name].columns_dict)
    cols = [c for c in columns if c in present]
    sql = f"SELECT {', '.join(cols) if cols else '1 AS _none'} FROM {name}"
    if where:
        sql += f" WHERE {where}"
    if order_by:
        sql += f" ORDER BY {order_by}"
    frame = pd.read_sql_query(sql, db.conn, params=list(params))
    for col in columns:
        if col not in frame:
            frame[col] = None
    return frame[columns]
