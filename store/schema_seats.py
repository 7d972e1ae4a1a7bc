"""Migration 7, the seats of state legislatures as they are (numbered seats, multi-member contests,
staggered chambers): its SQL, kept apart from :mod:`store.schema` so that neither module grows
past a readable size. Never edit it once shipped: add a new migration."""

from __future__ import annotations

SEATS_MIGRATION: tuple[int, str, str] = (
    7,
    "numbered seats, multi-member treatment, staggered chambers: a contest's position, what the "
    "pseudo-districts need, coverage of partial and whole-chamber units",
    """
    DROP VIEW district_results;
    DROP VIEW current_contests;
    -- a district's numbered seats (positions) are contests of their own, each electing one
    -- member; '' = no position (the district's one contest, single- or multi-member). The
    -- UNIQUE key gains the position, which SQLite cannot alter: the table is rebuilt with the
    -- same ids, so votes and reductions keep pointing at them (see REBUILDS)
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
    -- what the multi-member treatment's pseudo-districts are made of: the votes of each major
    -- party's winning candidates, and whether candidates of different parties tie for the last
    -- seat; every unit is reduced again (its reduced_units row removed) to fill them
    ALTER TABLE reductions ADD COLUMN won_votes_a REAL;
    ALTER TABLE reductions ADD COLUMN won_votes_b REAL;
    ALTER TABLE reductions ADD COLUMN tie_across_parties INTEGER NOT NULL DEFAULT 0;
    DELETE FROM reduced_units;
    -- coverage: per-cycle units of staggered chambers (partial), the cycles a whole-chamber
    -- unit combines, the districts and seats that entered under the multi-member treatment,
    -- and the numbered seat of each listed district
    ALTER TABLE coverage ADD COLUMN partial INTEGER NOT NULL DEFAULT 0;
    ALTER TABLE coverage ADD COLUMN combines TEXT;
    ALTER TABLE coverage ADD COLUMN districts_treated INTEGER NOT NULL DEFAULT 0;
    ALTER TABLE coverage ADD COLUMN seats_treated INTEGER NOT NULL DEFAULT 0;
    ALTER TABLE coverage_gaps ADD COLUMN position TEXT NOT NULL DEFAULT '';
    """,
)
