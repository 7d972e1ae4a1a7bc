"""Queries over the store. Plain SQL with bound parameters only; no politics here."""

from __future__ import annotations

import sqlite3
from typing import Iterable, Sequence

import pandas as pd
import sqlite_utils

UnitKey = tuple[int, str, str]


def load_by_sha256(db: sqlite_utils.Database, sha256: str, mapping_sha256: str | None = None) -> dict | None:
    """The first successful load of these bytes read through this mapping (``None``: read
    natively); refused loads do not count."""
    row = db.execute(
        "SELECT id, file_name, loaded_at, outcome FROM loads WHERE sha256 = ? AND mapping_sha256 IS ? "
        "AND outcome = 'loaded' ORDER BY id LIMIT 1", [sha256, mapping_sha256]
    ).fetchone()
    return None if row is None else dict(zip(("id", "file_name", "loaded_at", "outcome"), row))


def current_units(conn: sqlite3.Connection, keys: Iterable[UnitKey]) -> dict[UnitKey, dict]:
    """The current (not superseded) unit rows for ``keys``."""
    out = {}
    for cycle, state, chamber in keys:
        row = conn.execute(
            "SELECT id, load_id, certification, content_sha256 FROM units "
            "WHERE cycle = ? AND state = ? AND chamber = ? AND superseded_by IS NULL",
            [cycle, state, chamber],
        ).fetchone()
        if row:
            out[(cycle, state, chamber)] = dict(zip(("id", "load_id", "certification", "content_sha256"), row))
    return out


def insert_load(conn: sqlite3.Connection, values: dict) -> int:
    names = list(values)
    cur = conn.execute(
        f"INSERT INTO loads ({', '.join(names)}) VALUES ({', '.join('?' for _ in names)})",
        [values[n] for n in names],
    )
    return cur.lastrowid


def update_load(conn: sqlite3.Connection, load_id: int, values: dict) -> None:
    sets = ", ".join(f"{n} = ?" for n in values)
    conn.execute(f"UPDATE loads SET {sets} WHERE id = ?", [*values.values(), load_id])


def ensure_keys(conn: sqlite3.Connection, table: str, column: str, values: Iterable) -> None:
    assert (table, column) in {("states", "code"), ("chambers", "code"), ("cycles", "year")}
    conn.executemany(f"INSERT OR IGNORE INTO {table} ({column}) VALUES (?)", [(v,) for v in values])


def insert_unit(
    conn: sqlite3.Connection, key: UnitKey, load_id: int, certification: str, content_sha256: str,
    previous_id: int | None,
) -> int:
    """Insert a unit as current; a previous current unit becomes superseded by it."""
    new_id = conn.execute("SELECT COALESCE(MAX(id), 0) + 1 FROM units").fetchone()[0]
    if previous_id is not None:
        conn.execute("UPDATE units SET superseded_by = ? WHERE id = ?", [new_id, previous_id])
    conn.execute(
        "INSERT INTO units (id, cycle, state, chamber, load_id, certification, content_sha256, supersedes) "
        "VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
        [new_id, *key, load_id, certification, content_sha256, previous_id],
    )
    return new_id


CONTEST_COLUMNS = ("id", "unit_id", "district", "seats", "special", "runoff", "status", "decides", "left_out",
                   "placeholder", "position")


def insert_contests(conn: sqlite3.Connection, rows: Sequence[tuple]) -> None:
    """rows: (id, unit_id, district, seats, special, runoff, status, decides, left_out, placeholder,
    position)."""
    conn.executemany(
        f"INSERT INTO contests ({', '.join(CONTEST_COLUMNS)}) VALUES ({', '.join('?' for _ in CONTEST_COLUMNS)})", rows
    )


def next_id(conn: sqlite3.Connection, table: str) -> int:
    assert table in {"contests", "votes", "units", "loads"}
    return conn.execute(f"SELECT COALESCE(MAX(id), 0) + 1 FROM {table}").fetchone()[0]


def insert_votes(conn: sqlite3.Connection, rows: Sequence[tuple]) -> None:
    """rows: (contest_id, party, party_code, candidate, votes, writein, source_row)."""
    conn.executemany(
        "INSERT INTO votes (contest_id, party, party_code, candidate, votes, writein, source_row) "
        "VALUES (?, ?, ?, ?, ?, ?, ?)",
        rows,
    )


def unit_votes(conn: sqlite3.Connection | sqlite_utils.Database, unit_ids: Sequence[int]) -> pd.DataFrame:
    """Vote lines of the given units: unit_id, contest_id, district, seats, special, runoff, decides,
    party, party_code, candidate, votes, position."""
    conn = getattr(conn, "conn", conn)
    if not unit_ids:
        return pd.DataFrame(columns=["unit_id", "contest_id", "district", "seats", "special", "runoff", "decides",
                                     "party", "party_code", "candidate", "votes", "position"])
    marks = ",".join("?" for _ in unit_ids)
    return pd.read_sql_query(
        "SELECT c.unit_id, v.contest_id, c.district, c.seats, c.special, c.runoff, c.decides, v.party, v.party_code, "
        f"v.candidate, v.votes, c.position FROM votes v JOIN contests c ON c.id = v.contest_id "
        f"WHERE c.unit_id IN ({marks}) ORDER BY c.unit_id, v.contest_id, v.id",
        conn, params=list(unit_ids),
    )


def current_votes(db: sqlite_utils.Database, where: str = "", params: Sequence = ()) -> pd.DataFrame:
    """Vote lines of every current unit, with the unit's keys (optionally filtered by ``where``
    over the aliases u, c, v)."""
    clause = f"AND ({where})" if where else ""
    return pd.read_sql_query(
        "SELECT u.id AS unit_id, u.cycle, u.state, u.chamber, u.certification, u.load_id, "
        "c.id AS contest_id, c.district, c.position, c.seats, c.special, c.runoff, c.decides, c.left_out, "
        "c.placeholder, c.status, v.party, v.party_code, v.candidate, v.votes "
        "FROM votes v JOIN contests c ON c.id = v.contest_id JOIN units u ON u.id = c.unit_id "
        f"WHERE u.superseded_by IS NULL {clause} "
        "ORDER BY u.cycle, u.state, u.chamber, c.district, c.position, c.special, c.runoff, v.id",
        db.conn, params=list(params),
    )


# party codes that follow the configuration -------------------------------------------------------

def party_labels(db) -> dict[str, str]:
    """The stored ``label -> code`` basis of the config-derived party codes (empty: none stored)."""
    conn = getattr(db, "conn", db)
    return dict(conn.execute("SELECT label, code FROM party_labels").fetchall())


def replace_party_labels(conn: sqlite3.Connection, labels: dict[str, str]) -> None:
    conn.execute("DELETE FROM party_labels")
    conn.executemany("INSERT INTO party_labels (label, code) VALUES (?, ?)", sorted(labels.items()))


def has_votes_coded_from(db, origin: str) -> bool:
    """Whether any vote line was loaded by a load whose party codes came from ``origin``."""
    conn = getattr(db, "conn", db)
    return conn.execute(
        "SELECT 1 FROM votes v JOIN contests c ON c.id = v.contest_id JOIN units u ON u.id = c.unit_id "
        "JOIN loads l ON l.id = u.load_id WHERE l.party_codes_from = ? LIMIT 1", [origin]
    ).fetchone() is not None


def votes_coded_from(conn: sqlite3.Connection, origin: str) -> pd.DataFrame:
    """Vote lines (current and superseded) of loads whose party codes came from ``origin``:
    id, contest_id, unit_id, party, party_code."""
    return pd.read_sql_query(
        "SELECT v.id, v.contest_id, c.unit_id, v.party, v.party_code FROM votes v "
        "JOIN contests c ON c.id = v.contest_id JOIN units u ON u.id = c.unit_id "
        "JOIN loads l ON l.id = u.load_id WHERE l.party_codes_from = ? ORDER BY v.id",
        conn, params=[origin],
    )


def set_party_codes(conn: sqlite3.Connection, rows: Sequence[tuple[str, int]]) -> None:
    """rows: (party_code, vote id)."""
    conn.executemany("UPDATE votes SET party_code = ? WHERE id = ?", rows)


def set_contest_status(conn: sqlite3.Connection, rows: Sequence[tuple[str, int]]) -> None:
    """rows: (status, contest id)."""
    conn.executemany("UPDATE contests SET status = ? WHERE id = ?", rows)


def set_unit_digest(conn: sqlite3.Connection, rows: Sequence[tuple[str, int]]) -> None:
    """rows: (content_sha256, unit id)."""
    conn.executemany("UPDATE units SET content_sha256 = ? WHERE id = ?", rows)


def unit_lines(conn: sqlite3.Connection, unit_ids: Sequence[int]) -> pd.DataFrame:
    """Every stored field of the units' vote lines: unit_id, district, special, seats, party,
    party_code, candidate, votes, writein, certification, runoff, decides, placeholder, position."""
    if not unit_ids:
        return pd.DataFrame(columns=["unit_id", "district", "special", "seats", "party", "party_code",
                                     "candidate", "votes", "writein", "certification", "runoff", "decides",
                                     "placeholder", "position"])
    marks = ",".join("?" for _ in unit_ids)
    return pd.read_sql_query(
        "SELECT c.unit_id, c.district, c.special, c.seats, v.party, v.party_code, v.candidate, v.votes, "
        "v.writein, u.certification, c.runoff, c.decides, c.placeholder, c.position FROM votes v "
        "JOIN contests c ON c.id = v.contest_id "
        f"JOIN units u ON u.id = c.unit_id WHERE c.unit_id IN ({marks}) ORDER BY c.unit_id, v.id",
        conn, params=list(unit_ids),
    )

