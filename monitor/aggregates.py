"""The aggregates step: from stored numbers, what the site and ``levelfield export national`` show
beyond the per-unit tables, computed once upstream and stored (:mod:`store.aggregates`):

* each current unit's plan era (the plans joined to the units by cycle);
* the national aggregates per cycle and chamber (:mod:`monitor.national`): summary, share
  histogram, excess seats by who drew the plan;
* the uniform-swing seats-votes curve of each (state, chamber)'s latest cycle and every unit's
  vote and seat share as the measures count them (:mod:`monitor.curves`).

It reads the stored reductions, measures, tails, expected seats and plans, and runs after the flags
(the summary counts flagged units and sums excess seats). The publisher only reads what it stores.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import sqlite_utils

from monitor.curves import seats_votes_curves, seats_votes_series
from monitor.inputs import UNIT_KEYS, reduced_contests
from monitor.national import excess_by_drawer, national_summary, plans_of_units, share_histogram
from store import aggregates as stored
from store import history, tables, write_from_snapshot
from store import measures as store_measures

PLAN_COLUMNS = ["state", "chamber", "plan_id", "first_cycle", "last_cycle", "drawn_by", "inferred"]


def frames(db: sqlite_utils.Database) -> dict[str, pd.DataFrame]:
    """Every table of :data:`store.aggregates.TABLES`, computed from what the store holds."""
    contests = reduced_contests(db)
    units = history.current_units(db)
    plans = tables.read_table(db, "plans", PLAN_COLUMNS, "state, chamber, first_cycle")
    plans["inferred"] = plans["inferred"].fillna(0).astype(int)
    unit_plans = plans_of_units(units, plans)
    measures = store_measures.read(db, [*UNIT_KEYS, "measure", "value"], ["competitive", "uncontested"])
    tails = tables.read_table(db, "tails", [*UNIT_KEYS, "flagged"], "cycle, state, chamber, measure")
    pool = tables.read_table(db, "pool_seats", [*UNIT_KEYS, "excess_seats"], "cycle, state, chamber")
    curves, points = seats_votes_curves(contests)
    return {
        "unit_plans": unit_plans,
        "national_summary": national_summary(contests, measures, tails, pool, unit_plans),
        "national_histogram": share_histogram(contests),
        "national_drawers": excess_by_drawer(pool, unit_plans),
        "swing_curves": curves,
        "swing_points": points,
        "seats_votes": seats_votes_series(contests),
    }


def refresh(db: sqlite_utils.Database) -> dict[str, int]:
    """Recompute and store every aggregate (one consistent step); return the rows per table."""
    def prepare():
        rows = {name: [tuple(_plain(v) for v in r) for r in frame[stored.TABLES[name]].itertuples(index=False)]
                for name, frame in frames(db).items()}

        def write(conn) -> dict[str, int]:
            stored.replace_all(conn, rows)
            return {name: len(r) for name, r in rows.items()}

        return write

    return write_from_snapshot(db, prepare)


def _plain(value):
    """A numpy or pandas scalar as the Python value SQLite stores (NaN and None as NULL)."""
    if value is None or value is pd.NA:
        return None
    if hasattr(value, "item"):
        value = value.item()
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value
