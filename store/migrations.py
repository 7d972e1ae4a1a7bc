"""Numbered schema migrations.

Each migration is a block of SQL applied once, in order, inside one transaction, and recorded
in ``schema_version``. Never edit a migration that has shipped: add a new one.
"""

from __future__ import annotations

import datetime as _dt

import sqlite_utils

from store.db import transaction

MIGRATIONS: list[tuple[int, str, str]] = [
    (
        1,
        "results store with provenance",
        """
        CREATE TABLE states (
            code TEXT PRIMARY KEY,
            name TEXT
        );
        CREATE TABLE chambers (
            code TEXT PRIMARY KEY,
            name TEXT
        );
        CREATE TABLE cycles (
            year INTEGER PRIMARY KEY
        );
        CREATE TABLE loads (
            id INTEGER PRIMARY KEY,
            file_name TEXT NOT NULL,
            sha256 TEXT NOT NULL,
            bytes INTEGER NOT NULL,
            format TEXT NOT NULL,
            mapping_sha256 TEXT,
            source TEXT,
            rows_read INTEGER NOT NULL,
            rows_accepted INTEGER NOT NULL,
            rows_rejected INTEGER NOT NULL,
            units_new INTEGER NOT NULL DEFAULT 0,
            units_corrected INTEGER NOT NULL DEFAULT 0,
            units_unchanged INTEGER NOT NULL DEFAULT 0,
            loaded_at TEXT NOT NULL,
            outcome TEXT NOT NULL,
            supersedes TEXT,
            report TEXT
        );
        CREATE INDEX loads_sha256 ON loads(sha256);
        CREATE TABLE units (
            id INTEGER PRIMARY KEY,
            cycle INTEGER NOT NULL REFERENCES cycles(year),
            state TEXT NOT NULL REFERENCES states(code),
            chamber TEXT NOT NULL REFERENCES chambers(code),
            load_id INTEGER NOT NULL REFERENCES loads(id),
            certification TEXT NOT NULL,
            content_sha256 TEXT NOT NULL,
            superseded_by INTEGER REFERENCES units(id) DEFERRABLE INITIALLY DEFERRED,
            supersedes INTEGER REFERENCES units(id)
        );
        CREATE UNIQUE INDEX units_current ON units(cycle, state, chamber) WHERE superseded_by IS NULL;
        CREATE INDEX units_load ON units(load_id);
        CREATE TABLE contests (
            id INTEGER PRIMARY KEY,
            unit_id INTEGER NOT NULL REFERENCES units(id),
            district TEXT NOT NULL,
            seats INTEGER NOT NULL DEFAULT 1,
            special INTEGER NOT NULL DEFAULT 0,
            status TEXT NOT NULL,
            UNIQUE (unit_id, district, special)
        );
        CREATE TABLE votes (
            id INTEGER PRIMARY KEY,
            contest_id INTEGER NOT NULL REFERENCES contests(id),
            party TEXT NOT NULL,
            party_code TEXT NOT NULL,
            candidate TEXT NOT NULL,
            votes INTEGER NOT NULL,
            writein INTEGER NOT NULL DEFAULT 0,
            source_row INTEGER
        );
        CREATE INDEX votes_contest ON votes(contest_id);
        CREATE TABLE plans (
            id INTEGER PRIMARY KEY,
            state TEXT NOT NULL,
            chamber TEXT NOT NULL,
            plan_id TEXT NOT NULL,
            first_cycle INTEGER NOT NULL,
            last_cycle INTEGER,
            drawn_by TEXT NOT NULL,
            note TEXT,
            source TEXT,
            inferred INTEGER NOT NULL DEFAULT 0,
            UNIQUE (state, chamber, plan_id)
        );
        CREATE TABLE measures (
            cycle INTEGER NOT NULL,
            state TEXT NOT NULL,
            chamber TEXT NOT NULL,
            measure TEXT NOT NULL,
            value REAL,
            low REAL,
            high REAL,
            p_value REAL,
            reason TEXT,
            method_version TEXT NOT NULL,
            policy TEXT NOT NULL,
            inputs_hash TEXT NOT NULL,
            unit_id INTEGER REFERENCES units(id),
            computed_at TEXT NOT NULL,
            PRIMARY KEY (cycle, state, chamber, measure)
        );
        CREATE TABLE flags (
            id INTEGER PRIMARY KEY,
            cycle INTEGER NOT NULL,
            state TEXT NOT NULL,
            chamber TEXT NOT NULL,
            measure TEXT NOT NULL,
            direction TEXT,
            detail TEXT,
            raised_at TEXT NOT NULL,
            cleared_at TEXT,
            load_id INTEGER REFERENCES loads(id)
        );

        -- Browsing views: plain SQL, readable with any SQLite tool.
        -- district_results is a fixed contract read by other tools: keep its columns.
        CREATE VIEW district_results AS
            SELECT u.cycle AS cycle, u.state AS state, u.chamber AS chamber,
                   c.district AS district, v.party AS party, v.candidate AS candidate,
                   v.votes AS votes, u.certification AS status, u.load_id AS load_id
            FROM votes v
            JOIN contests c ON c.id = v.contest_id
            JOIN units u ON u.id = c.unit_id
            WHERE u.superseded_by IS NULL;
        CREATE VIEW current_contests AS
            SELECT c.id AS contest_id, u.cycle, u.state, u.chamber, c.district, c.seats,
                   c.special, c.status, u.certification, u.load_id,
                   (SELECT COALESCE(SUM(v.votes), 0) FROM votes v WHERE v.contest_id = c.id) AS total_votes
            FROM contests c JOIN units u ON u.id = c.unit_id
            WHERE u.superseded_by IS NULL;
        CREATE VIEW unit_history AS
            SELECT u.id AS unit_id, u.cycle, u.state, u.chamber, u.certification,
                   u.load_id, l.file_name, l.sha256, l.loaded_at,
                   u.supersedes, u.superseded_by,
                   CASE WHEN u.superseded_by IS NULL THEN 'current' ELSE 'superseded' END AS standing
            FROM units u JOIN loads l ON l.id = u.load_id;
        """,
    ),
    (
        2,
        "national pool, tails, flags with history, watch list",
        """
        DROP TABLE flags;
        CREATE TABLE pool_seats (
            cycle INTEGER NOT NULL,
            state TEXT NOT NULL,
            chamber TEXT NOT NULL,
            districts INTEGER NOT NULL,
            vote_share REAL,
            seats_a REAL,
            expected_seats REAL,
            low REAL,
            high REAL,
            percentile REAL,
            excess_seats REAL,
            draws INTEGER,
            ess REAL,
            mc_se REAL,
            reason TEXT,
            inputs_hash TEXT NOT NULL,
            method_version TEXT NOT NULL,
            computed_at TEXT NOT NULL,
            PRIMARY KEY (cycle, state, chamber)
        );
        CREATE TABLE tails (
            cycle INTEGER NOT NULL,
            state TEXT NOT NULL,
            chamber TEXT NOT NULL,
            measure TEXT NOT NULL,
            value REAL,
            null_percentile REAL,
            null_low REAL,
            null_high REAL,
            null_dropped REAL,
            p_value REAL,
            cross_percentile REAL,
            robust_z REAL,
            robust_z_all REAL,
            flagged INTEGER NOT NULL DEFAULT 0,
            direction TEXT,
            basis TEXT,
            plan_id TEXT,
            reason TEXT,
            computed_at TEXT NOT NULL,
            PRIMARY KEY (cycle, state, chamber, measure)
        );
        CREATE TABLE flag_events (
            id INTEGER PRIMARY KEY,
            scope TEXT NOT NULL,
            cycle INTEGER,
            state TEXT NOT NULL,
            chamber TEXT NOT NULL,
            plan_id TEXT,
            measure TEXT,
            event TEXT NOT NULL,
            direction TEXT,
            why TEXT NOT NULL,
            at TEXT NOT NULL,
            load_id INTEGER REFERENCES loads(id)
        );
        CREATE INDEX flag_events_unit ON flag_events(state, chamber, cycle);
        CREATE TABLE watch (
            state TEXT NOT NULL,
            chamber TEXT NOT NULL,
            plan_id TEXT NOT NULL,
            drawn_by TEXT,
            inferred INTEGER NOT NULL DEFAULT 0,
            favours TEXT NOT NULL,
            severity REAL NOT NULL,
            seats_at_stake REAL,
            concurring INTEGER NOT NULL,
            cycles TEXT NOT NULL,
            measures TEXT NOT NULL,
            since INTEGER,
            computed_at TEXT NOT NULL,
            PRIMARY KEY (state, chamber, plan_id)
        );
        """,
    ),
    (
        3,
        "where stored party codes come from, the labels they follow, refused loads",
        """
        -- config: the codes follow the [parties] labels of levelfield.toml (re-derived when they
        -- change); mapping: the mapping file's [parties] grouping (kept as loaded)
        ALTER TABLE loads ADD COLUMN party_codes_from TEXT;
        UPDATE loads SET party_codes_from = CASE WHEN mapping_sha256 IS NULL THEN 'config' ELSE 'mapping' END;
        -- the first problem of a refused load (outcome 'refused')
        ALTER TABLE loads ADD COLUMN error TEXT;
        -- the labels (normalised) the stored config-derived party codes were derived from
        CREATE TABLE party_labels (
            label TEXT PRIMARY KEY,
            code TEXT NOT NULL
        );
        """,
    ),
    (
        4,
        "contests: runoff round, which contest decides the seat, placeholder counts",
        """
        -- the views read contests: dropped here, made again below (a rename checks every view)
        DROP VIEW district_results;
        DROP VIEW current_contests;
        -- contests gain the round (runoff), whether the contest decides its seat (decides; else
        -- left_out says why) and whether its count is a placeholder (an unopposed candidate who
        -- was not on the ballot: no real vote count). The UNIQUE key gains the round, which
        -- SQLite cannot alter: the table is rebuilt with the same ids (votes keep pointing at
        -- them), following SQLite's procedure for other ALTER TABLE changes (foreign keys off
        -- while it runs, checked before the commit: see REBUILDS)
        CREATE TABLE contests_rebuilt (
            id INTEGER PRIMARY KEY,
            unit_id INTEGER NOT NULL REFERENCES units(id),
            district TEXT NOT NULL,
            seats INTEGER NOT NULL DEFAULT 1,
            special INTEGER NOT NULL DEFAULT 0,
            runoff INTEGER NOT NULL DEFAULT 0,
            status TEXT NOT NULL,
            decides INTEGER NOT NULL DEFAULT 1,
            left_out TEXT,
            placeholder INTEGER NOT NULL DEFAULT 0,
            UNIQUE (unit_id, district, special, runoff)
        );
        -- stored contests had no runoff and no placeholder; the default rule decides their seat:
        -- a regular contest, else (no regular contest for the seat) the special one
        INSERT INTO contests_rebuilt (id, unit_id, district, seats, special, runoff, status, decides, left_out, placeholder)
            SELECT c.id, c.unit_id, c.district, c.seats, c.special, 0, c.status,
                   CASE WHEN c.special = 0 OR NOT EXISTS (
                       SELECT 1 FROM contests r WHERE r.unit_id = c.unit_id AND r.district = c.district
                       AND r.special = 0) THEN 1 ELSE 0 END,
                   CASE WHEN c.special = 0 OR NOT EXISTS (
                       SELECT 1 FROM contests r WHERE r.unit_id = c.unit_id AND r.district = c.district
                       AND r.special = 0) THEN NULL
                       ELSE 'the general contest decides this seat (the default order: runoff, general, special runoff, special)' END,
                   0
            FROM contests c;
        DROP TABLE contests;
        ALTER TABLE contests_rebuilt RENAME TO contests;

        -- district_results is a fixed contract read by other tools: keep its columns. It shows
        -- the contest that decides each seat (one contest per seat); every contest, deciding or
        -- not, is in current_contests.
        CREATE VIEW district_results AS
            SELECT u.cycle AS cycle, u.state AS state, u.chamber AS chamber,
                   c.district AS district, v.party AS party, v.candidate AS candidate,
                   v.votes AS votes, u.certification AS status, u.load_id AS load_id
            FROM votes v
            JOIN contests c ON c.id = v.contest_id
            JOIN units u ON u.id = c.unit_id
            WHERE u.superseded_by IS NULL AND c.decides = 1;
        CREATE VIEW current_contests AS
            SELECT c.id AS contest_id, u.cycle, u.state, u.chamber, c.district, c.seats,
                   c.special, c.status, u.certification, u.load_id,
                   (SELECT COALESCE(SUM(v.votes), 0) FROM votes v WHERE v.contest_id = c.id) AS total_votes,
                   c.runoff, c.decides, c.left_out, c.placeholder
            FROM contests c JOIN units u ON u.id = c.unit_id
            WHERE u.superseded_by IS NULL;
        """,
    ),
    (
        5,
        "coverage of every unit: districts and seats expected, in the measures, missing or left out",
        """
        -- optional districts and seats of a plan era, from the plans file
        ALTER TABLE plans ADD COLUMN districts INTEGER;
        ALTER TABLE plans ADD COLUMN seats INTEGER;
        -- one row per current unit, written with the measures (levelfield compute)
        CREATE TABLE coverage (
            cycle INTEGER NOT NULL,
            state TEXT NOT NULL,
            chamber TEXT NOT NULL,
            unit_id INTEGER REFERENCES units(id),
            districts_stored INTEGER NOT NULL,
            seats_stored INTEGER NOT NULL,
            districts_measured INTEGER NOT NULL,
            seats_measured INTEGER NOT NULL,
            districts_expected INTEGER,
            seats_expected INTEGER,
            expected_from TEXT NOT NULL,
            seat_coverage REAL,
            incomplete INTEGER NOT NULL,
            note TEXT,
            votes_a_cast INTEGER NOT NULL,
            votes_b_cast INTEGER NOT NULL,
            votes_a_measured REAL NOT NULL,
            votes_b_measured REAL NOT NULL,
            policy TEXT NOT NULL,
            computed_at TEXT NOT NULL,
            PRIMARY KEY (cycle, state, chamber)
        );
        -- the districts of a unit that are missing or left out of its measures, with why
        CREATE TABLE coverage_gaps (
            cycle INTEGER NOT NULL,
            state TEXT NOT NULL,
            chamber TEXT NOT NULL,
            district TEXT NOT NULL,
            seats INTEGER,
            gap TEXT NOT NULL,
            reason TEXT NOT NULL
        );
        CREATE INDEX coverage_gaps_unit ON coverage_gaps(cycle, state, chamber);
        """,
    ),
    # 6 is held by the stored reduction step (branch issue-14)
    (
        7,
        "numbered seats: a contest's position within its district",
        """
        DROP VIEW district_results;
        DROP VIEW current_contests;
        -- a district's numbered seats (positions) are contests of their own, each electing one
        -- member; '' = no position (the district's one contest, single- or multi-member). The
        -- UNIQUE key gains the position, which SQLite cannot alter: the table is rebuilt with the
        -- same ids (see REBUILDS)
        CREATE TABLE contests_rebuilt (
            id INTEGER PRIMARY KEY,
            unit_id INTEGER NOT NULL REFERENCES units(id),
            district TEXT NOT NULL,
            seats INTEGER NOT NULL DEFAULT 1,
            special INTEGER NOT NULL DEFAULT 0,
            runoff INTEGER NOT NULL DEFAULT 0,
            status TEXT NOT NULL,
            decides INTEGER NOT NULL DEFAULT 1,
            left_out TEXT,
            placeholder INTEGER NOT NULL DEFAULT 0,
            position TEXT NOT NULL DEFAULT '',
            UNIQUE (unit_id, district, position, special, runoff)
        );
        INSERT INTO contests_rebuilt (id, unit_id, district, seats, special, runoff, status, decides, left_out,
                                      placeholder, position)
            SELECT id, unit_id, district, seats, special, runoff, status, decides, left_out, placeholder, ''
            FROM contests;
        DROP TABLE contests;
        ALTER TABLE contests_rebuilt RENAME TO contests;
        -- district_results is a fixed contract read by other tools (some by column position):
        -- its columns stay exactly as they are; a numbered seat's lines show under its district,
        -- and current_contests (below) and the results export carry the position
        CREATE VIEW district_results AS
            SELECT u.cycle AS cycle, u.state AS state, u.chamber AS chamber,
                   c.district AS district, v.party AS party, v.candidate AS candidate,
                   v.votes AS votes, u.certification AS status, u.load_id AS load_id
            FROM votes v
            JOIN contests c ON c.id = v.contest_id
            JOIN units u ON u.id = c.unit_id
            WHERE u.superseded_by IS NULL AND c.decides = 1;
        CREATE VIEW current_contests AS
            SELECT c.id AS contest_id, u.cycle, u.state, u.chamber, c.district, c.seats,
                   c.special, c.status, u.certification, u.load_id,
                   (SELECT COALESCE(SUM(v.votes), 0) FROM votes v WHERE v.contest_id = c.id) AS total_votes,
                   c.runoff, c.decides, c.left_out, c.placeholder, c.position
            FROM contests c JOIN units u ON u.id = c.unit_id
            WHERE u.superseded_by IS NULL;
        -- coverage: per-cycle units of staggered chambers (partial), the cycles a whole-chamber
        -- unit combines, the districts and seats that entered under the multi-member treatment
        ALTER TABLE coverage ADD COLUMN partial INTEGER NOT NULL DEFAULT 0;
        ALTER TABLE coverage ADD COLUMN combines TEXT;
        ALTER TABLE coverage ADD COLUMN districts_treated INTEGER NOT NULL DEFAULT 0;
        ALTER TABLE coverage ADD COLUMN seats_treated INTEGER NOT NULL DEFAULT 0;
        ALTER TABLE coverage_gaps ADD COLUMN position TEXT NOT NULL DEFAULT '';
        """,
    ),
]

SCHEMA_VERSION = max(version for version, _, _ in MIGRATIONS)

# migrations that rebuild a table another one references: run with foreign keys off (a pragma
# that only takes effect outside a transaction), then checked with ``PRAGMA foreign_key_check``
# before the commit, as SQLite's documentation of ALTER TABLE prescribes
REBUILDS = {4, 7}


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
