"""The schema, as numbered migrations: each a block of SQL applied once, in order, by
:mod:`store.migrations`. Never edit a migration that has shipped: add a new one at the end
(numbers increase and are used once; a number may be held for a branch not merged yet).
"""

from __future__ import annotations

from store.schema_bases import BASES_MIGRATION
from store.schema_seats import SEATS_MIGRATION

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
    (
        6,
        "what is derived upstream and stored: contest reductions, each unit's plan, national aggregates, "
        "seats-votes curves",
        """
        -- the two-party reduction of every contest (current and superseded units), with the shares
        -- the measures use after the uncontested policy (policy, per unit, in reduced_units)
        CREATE TABLE reductions (
            contest_id INTEGER PRIMARY KEY REFERENCES contests(id),
            unit_id INTEGER NOT NULL REFERENCES units(id),
            votes_a INTEGER NOT NULL,
            votes_b INTEGER NOT NULL,
            votes_other INTEGER NOT NULL,
            total INTEGER NOT NULL,
            status TEXT NOT NULL,
            seats_a REAL NOT NULL,
            seats_b REAL NOT NULL,
            seats_other REAL NOT NULL,
            winner TEXT NOT NULL,
            candidates_a INTEGER NOT NULL,
            candidates_b INTEGER NOT NULL,
            candidates_other INTEGER NOT NULL,
            share_a REAL,
            enters INTEGER NOT NULL,
            uncontested INTEGER NOT NULL,
            votes_a_used REAL,
            votes_b_used REAL,
            share_used REAL,
            imputed INTEGER NOT NULL
        );
        CREATE INDEX reductions_unit ON reductions(unit_id);
        -- which content and policy each unit's reductions were made from (stale when either differs)
        CREATE TABLE reduced_units (
            unit_id INTEGER PRIMARY KEY REFERENCES units(id),
            content_sha256 TEXT NOT NULL,
            policy TEXT NOT NULL
        );
        -- the plan era in force for each current unit (plans joined to units by cycle)
        CREATE TABLE unit_plans (
            cycle INTEGER NOT NULL,
            state TEXT NOT NULL,
            chamber TEXT NOT NULL,
            plan_id TEXT,
            drawn_by TEXT,
            inferred INTEGER NOT NULL DEFAULT 0,
            PRIMARY KEY (cycle, state, chamber)
        );
        -- national aggregates per cycle and chamber (columns: monitor.national.SUMMARY_FIELDS)
        CREATE TABLE national_summary (
            position INTEGER NOT NULL,
            cycle INTEGER NOT NULL,
            chamber TEXT NOT NULL,
            states INTEGER,
            districts INTEGER,
            seats REAL,
            seats_a REAL,
            seats_b REAL,
            seats_other REAL,
            votes_a INTEGER,
            votes_b INTEGER,
            votes_other INTEGER,
            measured_districts INTEGER,
            vote_share REAL,
            uncontested REAL,
            competitive REAL,
            measured_units INTEGER,
            flagged_units INTEGER,
            pool_units INTEGER,
            excess_seats REAL,
            excess_party_a REAL,
            excess_party_b REAL,
            excess_split REAL,
            excess_commission REAL,
            excess_court REAL,
            excess_other REAL,
            excess_inferred REAL,
            excess_no_plan REAL,
            vote_share_as_cast REAL,
            PRIMARY KEY (cycle, chamber)
        );
        CREATE TABLE national_histogram (
            position INTEGER PRIMARY KEY,
            cycle INTEGER NOT NULL,
            chamber TEXT NOT NULL,
            bin_start REAL NOT NULL,
            bin_end REAL NOT NULL,
            kind TEXT NOT NULL,
            side TEXT NOT NULL,
            districts INTEGER NOT NULL
        );
        CREATE TABLE national_drawers (
            position INTEGER PRIMARY KEY,
            cycle INTEGER NOT NULL,
            chamber TEXT NOT NULL,
            drawer TEXT NOT NULL,
            excess_seats REAL,
            units INTEGER NOT NULL
        );
        -- uniform-swing seats-votes curve of each (state, chamber)'s latest cycle: step vertices
        -- and marked points; and party a's vote and seat share per unit as the measures count them
        CREATE TABLE swing_curves (
            position INTEGER PRIMARY KEY,
            state TEXT NOT NULL,
            chamber TEXT NOT NULL,
            cycle INTEGER NOT NULL,
            vote REAL NOT NULL,
            seat_share REAL
        );
        CREATE TABLE swing_points (
            position INTEGER PRIMARY KEY,
            state TEXT NOT NULL,
            chamber TEXT NOT NULL,
            cycle INTEGER NOT NULL,
            point TEXT NOT NULL,
            vote REAL,
            seat_share REAL,
            seats REAL,
            districts INTEGER
        );
        CREATE TABLE seats_votes (
            cycle INTEGER NOT NULL,
            state TEXT NOT NULL,
            chamber TEXT NOT NULL,
            vote_share REAL,
            seat_share REAL,
            PRIMARY KEY (cycle, state, chamber)
        );
        """,
    ),
    SEATS_MIGRATION,
    BASES_MIGRATION,
]

# migrations that rebuild a table another one references: run with foreign keys off (a pragma
# that only takes effect outside a transaction), then checked with ``PRAGMA foreign_key_check``
# before the commit, as SQLite's documentation of ALTER TABLE prescribes
REBUILDS = {4, 7}
