"""Rows as SQLite stores them, and writing only the rows that changed.

A derived step that recomputes part of a table compares the rows it computed with the rows
stored under the same keys and writes the difference: rows whose values changed are replaced,
rows no longer computed are deleted, unchanged rows are left in place (their ``computed_at``
included). Values are compared as SQLite gives them back (NaN and missing as NULL, numpy and
pandas scalars as Python numbers), so a value that survives the round trip compares equal.
"""

from __future__ import annotations

import math
import sqlite3
from typing import Sequence

import numpy as np
import pandas as pd


def sql_value(value):
    """A numpy or pandas scalar as the Python value SQLite stores (NaN, NaT and NA as NULL)."""
    kind = type(value)
    if kind is str or kind is int:
        return value
    if kind is float:
        return value if math.isfinite(value) else None
    if value is None or value is pd.NA or value is pd.NaT:
        return None
    if hasattr(value, "item"):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def sql_column(column: pd.Series) -> list:
    """The values of ``column`` as SQL values (:func:`sql_value`), read column-wise."""
    plain = isinstance(column.dtype, np.dtype)  # an extension dtype (Int64, ...) may hold pd.NA
    if plain and column.dtype.kind == "f":
        values = column.to_numpy(np.float64)
        finite = np.isfinite(values)
        out = values.tolist()
        return out if finite.all() else [v if ok else None for v, ok in zip(out, finite.tolist())]
    if plain and column.dtype.kind in "iu":
        return column.tolist()
    return [sql_value(v) for v in column.tolist()]


def sql_rows(frame: pd.DataFrame, columns: Sequence[str], *extra) -> list[tuple]:
    """The rows of ``frame`` as tuples of SQL values of ``columns`` (None for a column it lacks),
    each followed by ``extra``."""
    cols = [sql_column(frame[c]) if c in frame.columns else [None] * len(frame) for c in columns]
    return [(*row, *extra) for row in zip(*cols)] if cols else [tuple(extra) for _ in range(len(frame))]


def changes(old: Sequence[tuple], new: Sequence[tuple], key_len: int) -> tuple[list[tuple], list[tuple]]:
    """What turns the stored rows ``old`` into ``new`` (both tuples of SQL values whose first
    ``key_len`` values are the key): the keys to delete (rows gone or changed) and the rows to
    insert (rows new or changed), each in the order given."""
    before = {r[:key_len]: r for r in old}
    after = {r[:key_len]: r for r in new}
    delete = [k for k, r in before.items() if after.get(k) != r]
    insert = [r for k, r in after.items() if before.get(k) != r]
    return delete, insert


def apply(conn: sqlite3.Connection, table: str, key_columns: Sequence[str], columns: Sequence[str],
          delete: Sequence[tuple], insert: Sequence[tuple]) -> None:
    """Delete the rows of ``table`` under the keys ``delete`` (values of ``key_columns``), then
    insert ``insert`` (tuples in ``columns`` order), inside the caller's transaction."""
    if delete:
        where = " AND ".join(f"{c} = ?" for c in key_columns)
        conn.executemany(f"DELETE FROM {table} WHERE {where}", delete)
    if insert:
        conn.executemany(f"INSERT INTO {table} ({', '.join(columns)}) VALUES ({', '.join('?' for _ in columns)})",
                         insert)


def group_filter(groups) -> tuple[str, list]:
    """A WHERE condition for the rows of the (cycle, chamber) ``groups``, and its parameters."""
    groups = sorted(groups)
    if not groups:
        return "0", []
    return "(" + " OR ".join("(cycle = ? AND chamber = ?)" for _ in groups) + ")", [v for g in groups for v in g]
