"""The store: migrations, pragmas, transactions, supersession and the browsing views."""

from __future__ import annotations

import sqlite3

import pytest

import store
from store import queries
from store.migrations import MIGRATIONS

RESULT_VIEW_COLUMNS = ["cycle", "state", "chamber", "district", "party", "candidate", "votes", "status", "load_id"]


@pytest.fixture
def db(tmp_path):
    database = store.connect(tmp_path / "history.sqlite")
    yield database
    database.close()


def test_migrations_are_numbered_and_recorded(db):
    versions = [v for v, _, _ in MIGRATIONS]
    # increasing and unique; a number may be held for a migration that lands from another branch
    assert versions == sorted(set(versions)) and versions[0] == 1
    assert store.schema_version(db) == store.SCHEMA_VERSION == versions[-1]
    assert [r[0] for r in db.execute("SELECT version FROM schema_version ORDER BY version")] == versions


def test_a_migration_numbered_below_the_highest_applied_still_runs(tmp_path, monkeypatch):
    # two branches merged: a store already has 1 and 3 when the code gains 2; 2 runs once, 1 and 3 not again
    bare = store.connect(tmp_path / "bare.sqlite", migrate=False)
    first = [(1, "one", "CREATE TABLE one (x INTEGER)"), (3, "three", "CREATE TABLE three (x INTEGER)")]
    monkeypatch.setattr("store.migrations.MIGRATIONS", first)
    assert store.migrate(bare) == [1, 3]
    monkeypatch.setattr("store.migrations.MIGRATIONS", sorted([*first, (2, "two", "CREATE TABLE two (x INTEGER)")]))
    assert store.migrate(bare) == [2]
    assert store.migrate(bare) == []
    assert {"one", "two", "three"} <= set(bare.table_names())


def test_migrating_again_changes_nothing(db):
    assert store.migrate(db) == []
    assert store.schema_version(db) == store.SCHEMA_VERSION


def test_an_empty_database_is_at_version_zero(tmp_path):
    bare = store.connect(tmp_path / "bare.sqlite", migrate=False)
    assert store.schema_version(bare) == 0
    assert store.migrate(bare) == [v for v, _, _ in MIGRATIONS]


def test_a_store_newer_than_the_code_is_refused(db):
    db.execute("INSERT INTO schema_version VALUES (?, 'from the future', 'now')", [store.SCHEMA_VERSION + 1])
    with pytest.raises(store.SchemaTooNew, match="newer than this levelfield"):
        store.migrate(db)


def test_pragmas_wal_busy_timeout_foreign_keys(db):
    assert db.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    assert db.execute("PRAGMA foreign_keys").fetchone()[0] == 1
    assert db.execute("PRAGMA busy_timeout").fetchone()[0] >= 1000


def test_required_tables_and_views_exist(db):
    tables = set(db.table_names())
    assert {"states", "chambers", "cycles", "plans", "loads", "units", "contests", "votes", "measures"} <= tables
    assert {"district_results", "current_contests", "unit_history"} <= set(db.view_names())


def test_district_results_has_exactly_the_contract_columns(db):
    assert [c.name for c in db["district_results"].columns] == RESULT_VIEW_COLUMNS


def test_foreign_keys_are_enforced(db):
    with pytest.raises(sqlite3.IntegrityError):
        db.execute("INSERT INTO contests (unit_id, district, status) VALUES (999, '1', 'contested')")


def test_a_transaction_rolls_back_on_error(db):
    with pytest.raises(ZeroDivisionError):
        with store.transaction(db) as conn:
            queries.ensure_keys(conn, "states", "code", ["QV"])
            1 / 0
    assert db.execute("SELECT COUNT(*) FROM states").fetchone()[0] == 0
    with store.transaction(db) as conn:
        queries.ensure_keys(conn, "states", "code", ["QV", "QV", "RX"])
    assert [r[0] for r in db.execute("SELECT code FROM states ORDER BY code")] == ["QV", "RX"]


def _load(conn, name="f.csv", sha="0" * 64) -> int:
    return queries.insert_load(conn, {"file_name": name, "sha256": sha, "bytes": 1, "format": "native-long",
                                      "rows_read": 1, "rows_accepted": 1, "rows_rejected": 0,
                                      "loaded_at": "2024-01-01T00:00:00+00:00", "outcome": "loaded"})


def _unit(conn, load_id, previous=None, votes=10) -> int:
    key = (2024, "QV", "federal")
    for table, column, value in (("cycles", "year", 2024), ("states", "code", "QV"), ("chambers", "code", "federal")):
        queries.ensure_keys(conn, table, column, [value])
    unit_id = queries.insert_unit(conn, key, load_id, "certified", f"hash{votes}", previous)
    contest_id = queries.next_id(conn, "contests")
    queries.insert_contests(conn, [(contest_id, unit_id, "1", 1, 0, "uncontested")])
    queries.insert_votes(conn, [(contest_id, "Harbour", "a", "Maren Olvas", votes, 0, 2)])
    return unit_id


def test_a_new_unit_supersedes_the_current_one_and_both_stay(db):
    with store.transaction(db) as conn:
        first = _unit(conn, _load(conn, sha="1" * 64))
    with store.transaction(db) as conn:
        second = _unit(conn, _load(conn, sha="2" * 64), previous=first, votes=12)
    assert db.execute("SELECT id, superseded_by, supersedes FROM units ORDER BY id").fetchall() == [
        (first, second, None), (second, None, first)]
    assert db.execute("SELECT votes, load_id FROM district_results").fetchall() == [(12, 2)]
    assert db.execute("SELECT COUNT(*) FROM votes").fetchone()[0] == 2
    assert queries.current_units(db.conn, [(2024, "QV", "federal")])[(2024, "QV", "federal")]["id"] == second
    assert db.execute("SELECT contest_id, total_votes FROM current_contests").fetchall() == [(2, 12)]


def test_two_current_units_for_one_key_are_impossible(db):
    with store.transaction(db) as conn:
        _unit(conn, _load(conn))
    with pytest.raises(sqlite3.IntegrityError):
        with store.transaction(db) as conn:
            _unit(conn, _load(conn, sha="3" * 64))  # no previous: would be a second current unit
    assert db.execute("SELECT COUNT(*) FROM units").fetchone()[0] == 1


def test_load_by_sha256_tells_native_and_mapped_loads_apart(db):
    with store.transaction(db) as conn:
        _load(conn, sha="a" * 64)
        conn.execute("UPDATE loads SET mapping_sha256 = ? WHERE id = 1", ["m" * 64])
    assert queries.load_by_sha256(db, "a" * 64) is None
    assert queries.load_by_sha256(db, "a" * 64, "m" * 64)["id"] == 1
    assert queries.load_by_sha256(db, "a" * 64, "n" * 64) is None


def test_load_by_sha256_ignores_refused_loads(db):
    with store.transaction(db) as conn:
        refused = _load(conn, sha="b" * 64)
        conn.execute("UPDATE loads SET outcome = 'refused' WHERE id = ?", [refused])
    assert queries.load_by_sha256(db, "b" * 64) is None
    with store.transaction(db) as conn:
        loaded = _load(conn, sha="b" * 64)
    assert queries.load_by_sha256(db, "b" * 64)["id"] == loaded


def test_migration_3_records_where_the_party_codes_of_earlier_loads_came_from(tmp_path, monkeypatch):
    from store import migrations

    path = tmp_path / "old.sqlite"
    monkeypatch.setattr(migrations, "MIGRATIONS", MIGRATIONS[:2])
    monkeypatch.setattr(migrations, "SCHEMA_VERSION", 2)
    old = store.connect(path)
    assert store.schema_version(old) == 2
    with store.transaction(old) as conn:
        _load(conn, sha="c" * 64)
        mapped = _load(conn, sha="d" * 64)
        conn.execute("UPDATE loads SET mapping_sha256 = 'm' WHERE id = ?", [mapped])
    old.close()
    monkeypatch.undo()
    new = store.connect(path)
    assert store.schema_version(new) == store.SCHEMA_VERSION
    assert new.execute("SELECT id, party_codes_from, error FROM loads ORDER BY id").fetchall() == [
        (1, "config", None), (2, "mapping", None)]
    assert new.execute("SELECT COUNT(*) FROM party_labels").fetchone() == (0,)
    new.close()


def test_two_connections_see_each_others_commits(tmp_path):
    one = store.connect(tmp_path / "shared.sqlite")
    two = store.connect(tmp_path / "shared.sqlite")
    with store.transaction(one) as conn:
        queries.ensure_keys(conn, "states", "code", ["QV"])
    assert two.execute("SELECT code FROM states").fetchall() == [("QV",)]
    one.close()
    two.close()


def _counter_step(db, other, seen):
    """A read-compute-write step (increment a counter) that lets ``other`` commit once in between."""
    value = db.execute("SELECT n FROM counter").fetchone()[0]
    seen.append(value)
    if other is not None and len(seen) == 1:
        other.execute("UPDATE counter SET n = n + 100")  # another process commits after our read
    return lambda conn: conn.execute("UPDATE counter SET n = ?", [value + 1])


def test_write_from_snapshot_reruns_after_another_commit_and_loses_no_update(tmp_path):
    path = tmp_path / "history.sqlite"
    db = store.connect(path, migrate=False)
    db.execute("CREATE TABLE counter (n INTEGER)")
    db.execute("INSERT INTO counter VALUES (0)")
    other = sqlite3.connect(str(path), isolation_level=None)
    seen = []
    store.write_from_snapshot(db, lambda: _counter_step(db, other, seen))
    # the first attempt read 0 and was discarded when the other write landed; the rerun read 100
    assert seen == [0, 100]
    assert db.execute("SELECT n FROM counter").fetchone()[0] == 101
    other.close()
    db.close()


def test_write_from_snapshot_last_attempt_holds_the_writer_lock(tmp_path):
    path = tmp_path / "history.sqlite"
    db = store.connect(path, migrate=False)
    db.execute("CREATE TABLE counter (n INTEGER)")
    db.execute("INSERT INTO counter VALUES (0)")
    other = sqlite3.connect(str(path), isolation_level=None, timeout=0.1)
    seen = []

    def step():  # another writer commits after every optimistic read; the last attempt shuts it out
        value = db.execute("SELECT n FROM counter").fetchone()[0]
        seen.append(value)
        try:
            other.execute("UPDATE counter SET n = n + 100")
        except sqlite3.OperationalError:
            seen.append("locked out")
        return lambda conn: conn.execute("UPDATE counter SET n = ?", [value + 1])

    store.write_from_snapshot(db, step, attempts=3)
    assert seen == [0, 100, 200, "locked out"]
    assert db.execute("SELECT n FROM counter").fetchone()[0] == 201
    other.close()
    db.close()
