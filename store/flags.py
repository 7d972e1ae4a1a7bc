"""The national-pool and flag tables: ``pool_seats``, ``tails``, ``watch`` and ``flag_events``.

Written together, in one transaction, by the flags step; read by the flags step itself (what
was stored before), by ``levelfield flags`` and by the publisher.
"""

from __future__ import annotations

import sqlite3
from dataclasses import dataclass, field
from typing import Sequence

import pandas as pd
import sqlite_utils

from store.rows import apply, group_filter

SEAT_COLUMNS = ["cycle", "state", "chamber", "districts", "vote_share", "seats_a", "expected_seats", "low",
                "high", "percentile", "excess_seats", "draws", "ess", "mc_se", "reason", "inputs_hash"]
TAIL_COLUMNS = ["cycle", "state", "chamber", "measure", "value", "null_percentile", "null_low", "null_high",
                "null_dropped", "p_value", "cross_percentile", "robust_z", "robust_z_all", "flagged",
                "direction", "basis", "plan_id", "reason"]
EVENT_COLUMNS = ["scope", "cycle", "state", "chamber", "plan_id", "measure", "event", "direction", "why", "at",
                 "load_id"]
#: what ``levelfield flags --watch`` shows, in this order (a fixed output contract)
WATCH_VIEW_COLUMNS = ["state", "chamber", "plan_id", "favours", "severity", "cycles", "measures",
                      "drawn_by", "inferred", "seats_at_stake", "concurring", "since"]


def group_hashes(db: sqlite_utils.Database) -> dict[str, str]:
    """``"cycle|chamber"`` -> the inputs hash its stored pool rows were computed from."""
    return dict(db.execute(
        "SELECT cycle || '|' || chamber, MIN(inputs_hash) FROM pool_seats GROUP BY cycle, chamber").fetchall())


def read_all(db: sqlite_utils.Database, table: str) -> pd.DataFrame:
    """Every row and column of ``pool_seats``, ``tails`` or ``watch``."""
    assert table in ("pool_seats", "tails", "watch"), table
    return pd.read_sql_query(f"SELECT * FROM {table}", db.conn)


def read_groups(db: sqlite_utils.Database, table: str, groups, columns: Sequence[str] | None = None) -> pd.DataFrame:
    """``columns`` (every one when None) of the ``pool_seats`` or ``tails`` rows of the (cycle,
    chamber) ``groups``."""
    assert table in ("pool_seats", "tails"), table
    where, params = group_filter(groups)
    return pd.read_sql_query(f"SELECT {', '.join(columns) if columns else '*'} FROM {table} WHERE {where}",
                             db.conn, params=params)


def read_chambers(db: sqlite_utils.Database, table: str, columns: Sequence[str], chambers,
                  where: str = "") -> pd.DataFrame:
    """``columns`` of the rows of ``table`` (``pool_seats``, ``tails`` or ``watch``) of the ``chambers``
    (and ``where``)."""
    assert table in ("pool_seats", "tails", "watch"), table
    chambers = sorted(chambers)
    marks = ", ".join("?" for _ in chambers)
    return pd.read_sql_query(f"SELECT {', '.join(columns)} FROM {table} WHERE chamber IN ({marks})"
                             + (f" AND {where}" if where else ""), db.conn, params=chambers)


def counts(conn) -> tuple[int, int]:
    """The flagged tails rows and the plans on watch."""
    flagged = conn.execute("SELECT COUNT(*) FROM tails WHERE flagged = 1").fetchone()[0]
    return flagged, conn.execute("SELECT COUNT(*) FROM watch").fetchone()[0]


def _insert(conn: sqlite3.Connection, table: str, columns: Sequence[str], rows: Sequence[tuple]) -> None:
    conn.executemany(f"INSERT INTO {table} ({', '.join(columns)}) VALUES ({', '.join('?' for _ in columns)})",
                     rows)


@dataclass
class FlagChanges:
    """What a flags run writes: per table the keys to delete and the rows to insert
    (:func:`store.rows.changes`; ``pool_seats`` rows in SEAT_COLUMNS order + method_version,
    computed_at; ``tails`` in TAIL_COLUMNS + computed_at; ``watch`` in ``watch_columns`` +
    computed_at), the new ``robust_z_all`` of tails rows otherwise unchanged (value, computed_at
    and the key), and the ``events`` to append (EVENT_COLUMNS)."""

    seats: tuple[list, list] = field(default_factory=lambda: ([], []))
    tails: tuple[list, list] = field(default_factory=lambda: ([], []))
    watch_columns: Sequence[str] = ()
    watch: tuple[list, list] = field(default_factory=lambda: ([], []))
    robust_z_all: list[tuple] = field(default_factory=list)
    events: list[tuple] = field(default_factory=list)


def write_changes(conn: sqlite3.Connection, changes: FlagChanges) -> None:
    """Write a flags run's changes (inside the caller's transaction): unchanged rows stay as stored."""
    apply(conn, "pool_seats", ["cycle", "state", "chamber"], [*SEAT_COLUMNS, "method_version", "computed_at"],
          *changes.seats)
    apply(conn, "tails", ["cycle", "state", "chamber", "measure"], [*TAIL_COLUMNS, "computed_at"], *changes.tails)
    conn.executemany("UPDATE tails SET robust_z_all = ?, computed_at = ? "
                     "WHERE cycle = ? AND state = ? AND chamber = ? AND measure = ?", changes.robust_z_all)
    apply(conn, "watch", ["state", "chamber", "plan_id"], [*changes.watch_columns, "computed_at"], *changes.watch)
    _insert(conn, "flag_events", EVENT_COLUMNS, changes.events)


# levelfield flags: the three views --------------------------------------------------------------

def _where(clauses: list[str]) -> str:
    return f"WHERE {' AND '.join(clauses)}" if clauses else ""


_PLAN = "LEFT JOIN plans p ON p.state = x.state AND p.chamber = x.chamber AND p.plan_id = x.plan_id"


def _unit_filter(cycle, chamber, *, among_cycles: bool = False) -> tuple[list[str], list]:
    """WHERE clauses and parameters for one chamber and one cycle (``among_cycles``: a cycle among a
    watch entry's space-separated cycles)."""
    where, params = [], []
    if chamber is not None:
        where.append("x.chamber = ?")
        params.append(chamber)
    if cycle is not None:
        where.append("(' ' || x.cycles || ' ') LIKE ?" if among_cycles else "x.cycle = ?")
        params.append(f"% {cycle} %" if among_cycles else cycle)
    return where, params


def watch_view(db: sqlite_utils.Database, cycle: int | None = None, chamber: str | None = None) -> pd.DataFrame:
    """The watch list, most severe first (plans whose cycles include ``cycle``, when given)."""
    where, params = _unit_filter(cycle, chamber, among_cycles=True)
    return pd.read_sql_query(
        f"SELECT {', '.join('x.' + c for c in WATCH_VIEW_COLUMNS)} FROM watch x {_where(where)} "
        "ORDER BY x.severity DESC, x.concurring DESC, x.state, x.chamber, x.plan_id", db.conn, params=params)



def changes_view(db: sqlite_utils.Database, cycle: int | None = None, chamber: str | None = None) -> pd.DataFrame:
    """The flag history, oldest first, with whether the plan is inferred."""
    where, params = _unit_filter(cycle, chamber)
    return pd.read_sql_query(
        "SELECT x.id, x.at, x.scope, x.event, x.cycle, x.state, x.chamber, x.plan_id, p.inferred, x.measure, "
        f"x.direction AS favours, x.why, x.load_id FROM flag_events x {_PLAN} {_where(where)} ORDER BY x.id",
        db.conn, params=params)


def flagged_view(db: sqlite_utils.Database, cycle: int | None = None, chamber: str | None = None) -> pd.DataFrame:
    """Every flagged unit and measure, with whether the plan is inferred."""
    where, params = _unit_filter(cycle, chamber)
    where.append("x.flagged = 1")
    return pd.read_sql_query(
        "SELECT x.cycle, x.state, x.chamber, x.plan_id, p.inferred, x.measure, x.direction AS favours, x.basis, "
        f"x.value, x.null_percentile, x.p_value FROM tails x {_PLAN} {_where(where)} "
        "ORDER BY x.cycle, x.state, x.chamber, x.measure", db.conn, params=params)

