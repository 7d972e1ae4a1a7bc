"""The ``bases`` table: what each stored piece of a derived step was computed from.

A derived step (measures, coverage, aggregates) keys its pieces (a unit, a state's chamber, a
cycle's chamber) and stores beside each a digest of the inputs it was computed from. The next
run recomputes only the pieces whose digest differs: the work follows the change. What goes
into a digest is the step's business (``monitor``); this module only keeps them.
"""

from __future__ import annotations

import sqlite3
from typing import Iterable, Mapping

import sqlite_utils


def read(db: sqlite_utils.Database, step: str) -> dict[str, str]:
    """key -> basis of every stored piece of ``step``."""
    return dict(db.execute("SELECT key, basis FROM bases WHERE step = ?", [step]).fetchall())


def replace(conn: sqlite3.Connection, step: str, pieces: Mapping[str, str], *, drop: Iterable[str] = (),
            every: bool = False) -> None:
    """Record ``pieces`` (key -> basis) of ``step``; forget the keys in ``drop`` (``every``: every
    other key of the step too)."""
    if every:
        conn.execute("DELETE FROM bases WHERE step = ?", [step])
    conn.executemany("DELETE FROM bases WHERE step = ? AND key = ?", [(step, k) for k in drop])
    conn.executemany("INSERT OR REPLACE INTO bases (step, key, basis) VALUES (?, ?, ?)",
                     [(step, k, b) for k, b in pieces.items()])
