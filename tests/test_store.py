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
    # increasing, each number used once, none missing (a number held for another branch's
    # migration is filled once that branch lands)
    assert versions == list(range(1, len(versions) + 1))
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
    queries.insert_contests(conn, [(contest_id, unit_id, "1", 1, 0, 0, "uncontested", 1, None, 0, "")])
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


def _schema_3_store(path, monkeypatch):
    """A store as levelfield wrote it before migration 4: one unit with a regular contest, a
    special beside a regular one (district 2) and a special alone (district 3), each with votes."""
    from store import migrations

    monkeypatch.setattr(migrations, "MIGRATIONS", MIGRATIONS[:3])
    monkeypatch.setattr(migrations, "SCHEMA_VERSION", 3)
    old = store.connect(path)
    assert store.schema_version(old) == 3
    with store.transaction(old) as conn:
        load_id = _load(conn, sha="e" * 64)
        for table, column, value in (("cycles", "year", 2024), ("states", "code", "QV"), ("chambers", "code", "federal")):
            queries.ensure_keys(conn, table, column, [value])
        unit_id = queries.insert_unit(conn, (2024, "QV", "federal"), load_id, "certified", "h", None)
        conn.executemany("INSERT INTO contests (id, unit_id, district, seats, special, status) VALUES (?, ?, ?, 1, ?, ?)",
                         [(7, unit_id, "1", 0, "contested"), (8, unit_id, "2", 0, "contested"),
                          (9, unit_id, "2", 1, "uncontested"), (11, unit_id, "3", 1, "contested")])
        conn.executemany("INSERT INTO votes (contest_id, party, party_code, candidate, votes, writein, source_row) "
                         "VALUES (?, ?, ?, ?, ?, 0, ?)",
                         [(7, "Harbour", "a", "A1", 10, 2), (7, "Upland", "b", "B1", 8, 3),
                          (8, "Harbour", "a", "A2", 5, 4), (8, "Upland", "b", "B2", 9, 5),
                          (9, "Harbour", "a", "A3", 4, 6),
                          (11, "Harbour", "a", "A4", 6, 7), (11, "Upland", "b", "B4", 7, 8)])
        conn.execute("INSERT INTO measures (cycle, state, chamber, measure, value, method_version, policy, "
                     "inputs_hash, unit_id, computed_at) VALUES (2024, 'QV', 'federal', 'efficiency_gap', 0.1, "
                     "'1', 'impute:0.75', 'x', ?, 'now')", [unit_id])
    old.close()
    monkeypatch.undo()
    return unit_id


def test_migration_4_rebuilds_contests_keeping_every_row_and_marks_the_deciding_contests(tmp_path, monkeypatch):
    path = tmp_path / "old.sqlite"
    _schema_3_store(path, monkeypatch)
    before = sqlite3.connect(path)
    tables = ["loads", "units", "contests", "votes", "measures", "states", "chambers", "cycles"]
    kept = {t: before.execute(f"SELECT * FROM {t} ORDER BY 1").fetchall() for t in tables}
    before.close()

    new = store.connect(path)
    assert store.schema_version(new) == store.SCHEMA_VERSION
    # every row kept, ids unchanged (votes still point at their contests)
    for table in tables:
        rows = new.execute(f"SELECT * FROM {table} ORDER BY 1").fetchall()
        if table == "contests":
            rows = [r[:5] + (r[6],) for r in rows]  # the columns a schema-3 contest had
        assert rows == kept[table], table
    # the default rule: a regular contest decides; a special decides only a seat without one
    assert new.execute("SELECT id, district, special, runoff, decides, left_out IS NOT NULL, placeholder "
                       "FROM contests ORDER BY id").fetchall() == [
        (7, "1", 0, 0, 1, 0, 0), (8, "2", 0, 0, 1, 0, 0), (9, "2", 1, 0, 0, 1, 0), (11, "3", 1, 0, 1, 0, 0)]
    assert new.execute("SELECT left_out FROM contests WHERE id = 9").fetchone()[0].startswith(
        "the general contest decides this seat")
    # foreign keys are on again and hold; the round is part of the contest's key now
    assert new.execute("PRAGMA foreign_keys").fetchone()[0] == 1
    assert new.execute("PRAGMA foreign_key_check").fetchall() == []
    with pytest.raises(sqlite3.IntegrityError):
        new.execute("INSERT INTO votes (contest_id, party, party_code, candidate, votes) VALUES (999, 'x', 'a', 'y', 1)")
    with pytest.raises(sqlite3.IntegrityError):
        new.execute("INSERT INTO contests (unit_id, district, special, runoff, status) VALUES (1, '1', 0, 0, 'x')")
    new.execute("INSERT INTO contests (unit_id, district, special, runoff, status) VALUES (1, '1', 0, 1, 'x')")
    # district_results: the fixed columns, one contest per seat (the special beside district 2's
    # regular contest is history); current_contests: every contest with its round and standing
    assert [c.name for c in new["district_results"].columns] == RESULT_VIEW_COLUMNS
    assert new.execute("SELECT district, candidate FROM district_results ORDER BY candidate").fetchall() == [
        ("1", "A1"), ("2", "A2"), ("3", "A4"), ("1", "B1"), ("2", "B2"), ("3", "B4")]
    assert new.execute("SELECT contest_id, special, runoff, decides, total_votes FROM current_contests "
                       "WHERE contest_id <= 11 ORDER BY contest_id").fetchall() == [
        (7, 0, 0, 1, 18), (8, 0, 0, 1, 14), (9, 1, 0, 0, 4), (11, 1, 0, 1, 13)]
    new.close()


def test_migration_4_changes_nothing_when_a_foreign_key_would_break(tmp_path, monkeypatch):
    """The rebuild runs with foreign keys off; a store whose votes already point nowhere is
    refused by the check before the commit, and stays at schema 3."""
    path = tmp_path / "old.sqlite"
    _schema_3_store(path, monkeypatch)
    conn = sqlite3.connect(path)
    conn.execute("INSERT INTO votes (contest_id, party, party_code, candidate, votes) VALUES (999, 'x', 'a', 'y', 1)")
    conn.commit()
    conn.close()
    with pytest.raises(RuntimeError, match="migration 4 would break 1 foreign key"):
        store.connect(path)
    again = store.connect(path, migrate=False)
    assert store.schema_version(again) == 3
    assert again.execute("SELECT COUNT(*) FROM contests").fetchone()[0] == 4
    assert again.execute("PRAGMA foreign_keys").fetchone()[0] == 1
    again.close()


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
