"""Contest reductions: each contest's two-party reduction (``reductions``) and which content and
policy each unit's rows were made from (``reduced_units``).

Written by the reduction step (:mod:`monitor.reductions`), read by the measures, the national
pool, the national aggregates, the exports and the publisher.
"""

from __future__ import annotations

import sqlite3
from typing import Sequence

import pandas as pd
import sqlite_utils

#: the columns of a ``reductions`` row, in this order
COLUMNS = ["contest_id", "unit_id", "votes_a", "votes_b", "votes_other", "total", "status", "seats_a", "seats_b",
           "seats_other", "winner", "candidates_a", "candidates_b", "candidates_other", "share_a", "enters",
           "uncontested", "votes_a_used", "votes_b_used", "share_used", "imputed", "won_votes_a", "won_votes_b",
           "tie_across_parties"]
#: the columns of a current contest with its unit's keys, as :func:`current` returns them
CONTEST_COLUMNS = ["unit_id", "cycle", "state", "chamber", "certification", "load_id", "contest_id", "district",
                   "position", "seats", "special", "runoff", "decides", "left_out", "placeholder", *COLUMNS[2:]]


def stale_units(db: sqlite_utils.Database, policy: str, version: str, *,
                every: bool = False) -> list[tuple[int, str]]:
    """(unit id, content_sha256) of every unit (current or superseded) whose reductions are missing
    or were made from other content, under another policy or by another method ``version``
    (``every``: of every unit)."""
    stale = ("" if every else "WHERE r.unit_id IS NULL OR r.content_sha256 != u.content_sha256 OR r.policy != ? "
             "OR r.method_version != ? ")
    return [tuple(r) for r in db.execute(
        f"SELECT u.id, u.content_sha256 FROM units u LEFT JOIN reduced_units r ON r.unit_id = u.id {stale}"
        "ORDER BY u.id", [] if every else [policy, version])]


def current_keys(db: sqlite_utils.Database) -> pd.DataFrame:
    """Every current unit with what its reductions were made from: unit_id, cycle, state, chamber,
    load_id, content_sha256, policy and method_version (empty where the unit is not reduced yet),
    sorted by cycle, state, chamber."""
    return pd.read_sql_query(
        "SELECT u.id AS unit_id, u.cycle, u.state, u.chamber, u.load_id, u.content_sha256, "
        "COALESCE(r.policy, '') AS policy, COALESCE(r.method_version, '') AS method_version "
        "FROM units u LEFT JOIN reduced_units r ON r.unit_id = u.id WHERE u.superseded_by IS NULL "
        "ORDER BY u.cycle, u.state, u.chamber", db.conn)



def cycles_of(db: sqlite_utils.Database, chamber: str, *, upto: int, last: int) -> list[int]:
    """The cycles (ascending) that hold one of the ``last`` current units of ``chamber`` up to
    ``upto`` of some state."""
    return [r[0] for r in db.execute(
        "SELECT DISTINCT cycle FROM (SELECT cycle, ROW_NUMBER() OVER (PARTITION BY state ORDER BY cycle DESC) AS n "
        "FROM units WHERE superseded_by IS NULL AND chamber = ? AND cycle <= ?) WHERE n <= ? ORDER BY cycle",
        [chamber, upto, last])]

def unit_contests(db: sqlite_utils.Database, unit_ids: Sequence[int]) -> pd.DataFrame:
    """contest_id, unit_id, seats, special, decides and placeholder of every contest of the units
    (with or without vote lines)."""
    if not unit_ids:
        return pd.DataFrame(columns=["contest_id", "unit_id", "seats", "special", "decides", "placeholder"])
    marks = ",".join("?" for _ in unit_ids)
    return pd.read_sql_query(
        f"SELECT id AS contest_id, unit_id, seats, special, decides, placeholder FROM contests "
        f"WHERE unit_id IN ({marks}) ORDER BY id", db.conn, params=list(unit_ids))


def replace(conn: sqlite3.Connection, unit_ids: Sequence[int], rows: Sequence[tuple],
            units: Sequence[tuple]) -> None:
    """Replace the reductions of ``unit_ids`` by ``rows`` (COLUMNS order) and record ``units``:
    (unit_id, content_sha256, policy, method_version)."""
    conn.executemany("DELETE FROM reductions WHERE unit_id = ?", [(u,) for u in unit_ids])
    conn.executemany(f"INSERT INTO reductions ({', '.join(COLUMNS)}) VALUES ({', '.join('?' for _ in COLUMNS)})",
                     rows)
    conn.executemany("INSERT OR REPLACE INTO reduced_units (unit_id, content_sha256, policy, method_version) "
                     "VALUES (?, ?, ?, ?)", units)


_CURRENT = (
    "SELECT u.id AS unit_id, u.cycle, u.state, u.chamber, u.certification, u.load_id, c.id AS contest_id, "
    "c.district, c.position, c.seats, c.special, c.runoff, c.decides, c.left_out, c.placeholder, "
    + ", ".join(f"r.{c}" for c in COLUMNS[2:]) + " "
    "FROM contests c JOIN units u ON u.id = c.unit_id JOIN reductions r ON r.contest_id = c.id "
    "WHERE u.superseded_by IS NULL"
)


def current(db: sqlite_utils.Database, cycle: int | None = None, *, chamber: str | None = None,
            unit_ids: Sequence[int] | None = None) -> pd.DataFrame:
    """Every current contest (of ``cycle``, ``chamber`` and the units ``unit_ids`` only, when given)
    with its unit's keys and its reduction: CONTEST_COLUMNS, sorted by cycle, state, chamber,
    district, position, special, runoff."""
    where, params = "", []
    if cycle is not None:
        where, params = where + "AND u.cycle = ? ", [*params, cycle]
    if chamber is not None:
        where, params = where + "AND u.chamber = ? ", [*params, chamber]
    if unit_ids is not None:
        where += f"AND u.id IN ({', '.join('?' for _ in unit_ids) or 'NULL'}) "
        params = [*params, *[int(u) for u in unit_ids]]
    frame = pd.read_sql_query(f"{_CURRENT} {where}ORDER BY u.cycle, u.state, u.chamber, c.district, c.position, "
                              "c.special, c.runoff", db.conn, params=params)
    return _flags(frame)[CONTEST_COLUMNS]


#: the 0/1 columns, read back as booleans
FLAG_COLUMNS = ("enters", "uncontested", "imputed", "tie_across_parties")


def _flags(frame: pd.DataFrame) -> pd.DataFrame:
    return frame.astype({c: bool for c in FLAG_COLUMNS})


def of_units(db: sqlite_utils.Database, unit_ids: Sequence[int]) -> pd.DataFrame:
    """The reductions of the given units (current or superseded) with each contest's district,
    position, special, runoff and decides, and the reduction columns."""
    cols = ["unit_id", "contest_id", "district", "position", "special", "runoff", "decides", *COLUMNS[2:]]
    if not unit_ids:
        return pd.DataFrame(columns=cols)
    marks = ",".join("?" for _ in unit_ids)
    return pd.read_sql_query(
        f"SELECT r.unit_id, r.contest_id, c.district, c.position, c.special, c.runoff, c.decides, "
        f"{', '.join('r.' + c for c in COLUMNS[2:])} "
        f"FROM reductions r JOIN contests c ON c.id = r.contest_id WHERE r.unit_id IN ({marks}) "
        "ORDER BY r.unit_id, c.district, c.position, c.special, c.runoff", db.conn, params=list(unit_ids)).pipe(_flags)


def result_lines(db: sqlite_utils.Database, cycle: int | None = None) -> pd.DataFrame:
    """Every current vote line (of ``cycle`` only, when given: the ``district_results`` columns and
    the contest's stored status, ``runoff``, ``decides`` and ``position``) with its contest's
    reduction: votes_a, votes_b, winner, share_a."""
    where, params = ("AND u.cycle = ? ", [cycle]) if cycle is not None else ("", [])
    return pd.read_sql_query(
        "SELECT u.cycle, u.state, u.chamber, c.district, v.party, v.candidate, v.votes, "
        "u.certification, u.load_id, c.special, c.seats, c.status, r.votes_a, r.votes_b, r.share_a, r.winner, "
        "c.runoff, c.decides, c.position "
        "FROM votes v JOIN contests c ON c.id = v.contest_id JOIN units u ON u.id = c.unit_id "
        f"JOIN reductions r ON r.contest_id = c.id WHERE u.superseded_by IS NULL {where}"
        "ORDER BY u.cycle, u.state, u.chamber, c.district, c.position, c.special, c.runoff, v.id", db.conn,
        params=params)


def count_result_lines(db: sqlite_utils.Database) -> int:
    """How many current vote lines :func:`result_lines` gives."""
    return db.execute(
        "SELECT COUNT(*) FROM votes v JOIN contests c ON c.id = v.contest_id JOIN units u ON u.id = c.unit_id "
        "JOIN reductions r ON r.contest_id = c.id WHERE u.superseded_by IS NULL").fetchone()[0]
