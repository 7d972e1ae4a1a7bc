"""Applying the numbered schema migrations (their SQL: :mod:`store.schema`).

Each migration is applied once, in order, inside one transaction, and recorded in
``schema_version``. Never edit a migration that has shipped: add a new one.
"""

from __future__ import annotations

import datetime as _dt

import sqlite_utils

from store.schema import MIGRATIONS, REBUILDS
from store.tx import transaction

__all__ = ["MIGRATIONS", "REBUILDS", "SCHEMA_VERSION", "SchemaTooNew", "migrate", "schema_version"]

SCHEMA_VERSION = MIGRATIONS[-1][0]


class SchemaTooNew(RuntimeError):
    """The store was written by a newer levelfield (its schema version is above ours)."""


def schema_version(db: sqlite_utils.Database) -> int:
    """The highest migration applied, 0 for an empty database."""
    if "schema_version" not in db.table_names():
        return 0
    row = db.execute("SELECT MAX(version) FROM schema_version").fetchone()
    return row[0] or 0


def migrate(db: sqlite_utils.Database) -> list[int]:
    """Apply every migration newer than the database; return the versions applied."""
    db.execute(
        "CREATE TABLE IF NOT EXISTS schema_version ("
        "version INTEGER PRIMARY KEY, description TEXT NOT NULL, applied_at TEXT NOT NULL)"
    )
    current = schema_version(db)
    if current > SCHEMA_VERSION:
        raise SchemaTooNew(
            f"the store is at schema version {current}, newer than this levelfield "
            f"({SCHEMA_VERSION}); upgrade levelfield"
        )
    # every migration not recorded yet, in list order (not only those above the highest: a
    # migration numbered below one already applied, from a branch merged later, still runs)
    recorded = {row[0] for row in db.execute("SELECT version FROM schema_version")}
    applied = []
    for version, description, sql in MIGRATIONS:
        if version in recorded:
            continue
        keys_on = db.execute("PRAGMA foreign_keys").fetchone()[0]
        if version in REBUILDS:
            db.execute("PRAGMA foreign_keys = OFF")
        try:
            with transaction(db) as conn:
                # re-check inside the writer lock: another process may have migrated meanwhile
                done = conn.execute("SELECT 1 FROM schema_version WHERE version = ?", [version]).fetchone()
                if done:
                    continue
                for statement in _statements(sql):
                    conn.execute(statement)
                if version in REBUILDS:
                    broken = conn.execute("PRAGMA foreign_key_check").fetchall()
                    if broken:
                        raise RuntimeError(f"migration {version} would break {len(broken)} foreign key(s), "
                                           f"first {broken[0]}; nothing was changed")
                conn.execute(
                    "INSERT INTO schema_version(version, description, applied_at) VALUES (?, ?, ?)",
                    [version, description, _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")],
                )
        finally:
            if version in REBUILDS and keys_on:
                db.execute("PRAGMA foreign_keys = ON")
        applied.append(version)
    return applied


def _statements(sql: str) -> list[str]:
    """Split a migration into statements (no semicolons inside our literals)."""
    lines = [line for line in sql.splitlines() if not line.strip().startswith("--")]
    return [s.strip() for s in "\n".join(lines).split(";") if s.strip()]
