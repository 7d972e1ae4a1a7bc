"""Migration 8, work follows the change: the reduction's method version and the ``bases`` table of
what each derived piece was computed from. Kept apart from :mod:`store.schema` so that neither
module grows past a readable size. Never edit it once shipped: add a new migration."""

from __future__ import annotations

BASES_MIGRATION: tuple[int, str, str] = (
    8,
    "work follows the change: the reduction's method version, and what each derived piece was "
    "computed from",
    """
    -- a unit's reductions are stale when its content, the policy or the reduction method changed
    ALTER TABLE reduced_units ADD COLUMN method_version TEXT NOT NULL DEFAULT '';
    -- what each stored piece of a derived step was computed from (a digest of its inputs):
    -- step 'measures' keyed by unit id, 'coverage' by state and chamber, 'aggregates' by cycle
    -- and chamber; a piece is recomputed only when the digest of its inputs differs
    CREATE TABLE bases (
        step TEXT NOT NULL,
        key TEXT NOT NULL,
        basis TEXT NOT NULL,
        PRIMARY KEY (step, key)
    );
    """,
)
