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

import hashlib

import numpy as np
import pandas as pd
import sqlite_utils

from monitor.curves import seats_votes_curves, seats_votes_series
from monitor.inputs import UNIT_KEYS, reduced_contests
from monitor.national import excess_by_drawer, national_summary, plans_of_units, share_histogram
from store import aggregates as stored
from store import bases as store_bases
from store import history, tables, write_from_snapshot
from store import measures as store_measures
from store import reductions as stored_reductions
from store.rows import changes, sql_rows

PLAN_COLUMNS = ["state", "chamber", "plan_id", "first_cycle", "last_cycle", "drawn_by", "inferred"]


#: the method version of the stored aggregates: bump it when what they hold changes
METHOD_VERSION = "aggregates-2"  # 2: the digests hash the input rows column-wise
#: the order of the marked points of the seats-votes curves (as :func:`seats_votes_curves` writes them)
POINTS = {"observed": 0, "flipped vote": 1, "even vote": 2}
TABLE_COLUMNS = stored.TABLES


def _inputs(db: sqlite_utils.Database) -> dict[str, pd.DataFrame]:
    """Everything the aggregates read besides the reductions: units, plans, measures, flags, pool."""
    units = history.current_units(db)
    plans = tables.read_table(db, "plans", PLAN_COLUMNS, "state, chamber, first_cycle")
    plans["inferred"] = plans["inferred"].fillna(0).astype(int)
    return {
        "units": units, "keys": stored_reductions.current_keys(db), "unit_plans": plans_of_units(units, plans),
        "measures": store_measures.read(db, [*UNIT_KEYS, "measure", "value"], ["competitive", "uncontested"]),
        "tails": tables.read_table(db, "tails", [*UNIT_KEYS, "flagged"], "cycle, state, chamber, measure"),
        "pool": tables.read_table(db, "pool_seats", [*UNIT_KEYS, "excess_seats"], "cycle, state, chamber"),
    }


def group_bases(inputs: dict[str, pd.DataFrame]) -> dict[str, str]:
    """``cycle|chamber`` -> what its aggregates are computed from: its units' content, policy and
    reduction method, their stored competitive and uncontested counts, flags, excess seats and
    plan eras (every row of the inputs, hashed column-wise: :func:`pandas.util.hash_pandas_object`)."""
    parts: dict[str, list] = {}
    for name in ("keys", "measures", "tails", "pool", "unit_plans"):
        frame = inputs[name]
        if frame.empty:
            continue
        cols = [c for c in frame.columns if c not in ("unit_id", "load_id")]
        frame = frame[cols].sort_values(["cycle", "chamber", *[c for c in cols if c not in ("cycle", "chamber")]],
                                        kind="mergesort").reset_index(drop=True)
        rows = pd.util.hash_pandas_object(frame.astype(object).where(frame.notna(), None), index=False).to_numpy()
        key = frame["cycle"].astype(int).astype(str) + "|" + frame["chamber"].astype(str)
        cut = np.flatnonzero(np.r_[True, key.to_numpy()[1:] != key.to_numpy()[:-1], True])
        for start, end in zip(cut[:-1], cut[1:]):
            parts.setdefault(key.iat[start], []).append(f"{name}:{end - start}:".encode() + rows[start:end].tobytes())
    live = _groups(inputs["keys"])
    return {key: hashlib.sha256(METHOD_VERSION.encode() + b"".join(chunks)).hexdigest()
            for key, chunks in parts.items() if key in live}


def _groups(units: pd.DataFrame) -> set[str]:
    return {f"{c}|{ch}" for c, ch in zip(units["cycle"], units["chamber"])}


def frames(db: sqlite_utils.Database, groups: set[str] | None = None,
           old: dict[str, pd.DataFrame] | None = None, inputs: dict[str, pd.DataFrame] | None = None
           ) -> dict[str, pd.DataFrame]:
    """Every table of :data:`store.aggregates.TABLES`, computed from what the store holds: of the
    (cycle, chamber) ``groups`` only (every group when None; then ``old`` is not needed), their
    rows merged with the ``old`` stored rows of the other groups in the order a whole recompute
    gives. ``inputs``: :func:`_inputs` when already read (in the same snapshot)."""
    inputs = _inputs(db) if inputs is None else inputs
    keys = inputs["keys"]
    if groups is None:
        contests = reduced_contests(db)
    else:
        parts = [reduced_contests(db, int(c), chamber=ch) for c, ch in (g.split("|", 1) for g in sorted(groups))]
        contests = pd.concat(parts, ignore_index=True) if parts else reduced_contests(db, unit_ids=[])
    unit_plans = inputs["unit_plans"]
    curves, points = seats_votes_curves(contests[_latest(contests, keys)])
    new = {
        "unit_plans": unit_plans,
        "national_summary": national_summary(contests, inputs["measures"], inputs["tails"], inputs["pool"],
                                             unit_plans),
        "national_histogram": share_histogram(contests),
        "national_drawers": excess_by_drawer(inputs["pool"], unit_plans),
        "swing_curves": curves,
        "swing_points": points,
        "seats_votes": seats_votes_series(contests),
    }
    if groups is None:
        return new
    return _merged(new, old, groups, keys)


def _latest(contests: pd.DataFrame, keys: pd.DataFrame) -> np.ndarray:
    """Which contests belong to their (state, chamber)'s latest current cycle."""
    if contests.empty:
        return np.zeros(0, bool)
    latest = keys.groupby(["state", "chamber"])["cycle"].max().rename("latest").reset_index()
    at = contests[["state", "chamber"]].merge(latest, on=["state", "chamber"], how="left")["latest"]
    return contests["cycle"].to_numpy() == at.to_numpy()


def _merged(new: dict, old: dict, groups: set[str], keys: pd.DataFrame) -> dict[str, pd.DataFrame]:
    """The recomputed groups' rows with the other groups' stored rows, in a whole recompute's order."""
    live = _groups(keys)
    latest = {pair: int(c) for pair, c in keys.groupby(["state", "chamber"])["cycle"].max().items()}
    redone_pairs = {(s, ch) for (s, ch), c in latest.items() if f"{c}|{ch}" in groups}
    out = {"unit_plans": new["unit_plans"], "national_drawers": new["national_drawers"]}
    for name, order in (("national_summary", ["cycle", "chamber"]),
                        ("national_histogram", ["cycle", "chamber", "bin_start", "kind", "side"]),
                        ("seats_votes", UNIT_KEYS)):
        frame = old[name]
        g = frame["cycle"].astype(int).astype(str) + "|" + frame["chamber"].astype(str)
        kept = frame[g.isin(live) & ~g.isin(groups)]
        out[name] = _stack(kept, new[name], order, TABLE_COLUMNS[name])
    for name in ("swing_curves", "swing_points"):
        kept = old[name]
        pair = list(zip(kept["state"], kept["chamber"]))
        current = [latest.get(p) == c and p not in redone_pairs for p, c in zip(pair, kept["cycle"].astype(int).tolist())]
        kept = kept[np.array(current, dtype=bool)]
        frame = pd.concat([kept[TABLE_COLUMNS[name]], new[name][TABLE_COLUMNS[name]]], ignore_index=True)
        if name == "swing_points":
            frame = frame.assign(_k=frame["point"].map(POINTS))
            frame = frame.sort_values(["_k", "cycle", "state", "chamber"], kind="mergesort").drop(columns="_k")
        else:
            frame = frame.sort_values(["cycle", "state", "chamber"], kind="mergesort")
        out[name] = frame.reset_index(drop=True)
    return out


def _stack(kept: pd.DataFrame, new: pd.DataFrame, order: list[str], columns: list[str]) -> pd.DataFrame:
    frame = pd.concat([kept[columns], new[columns]], ignore_index=True)
    frame["cycle"] = frame["cycle"].astype(int)
    return frame.sort_values(order, kind="mergesort").reset_index(drop=True)


def refresh(db: sqlite_utils.Database, *, full: bool = False) -> dict[str, int]:
    """Recompute and store the aggregates of the (cycle, chamber) groups whose inputs changed
    (:func:`group_bases`; every group when ``full`` or when none was recorded), reading only
    those groups' reductions (one consistent step), and write the rows that changed (none when no
    group changed); return the rows per table."""
    def prepare():
        inputs = _inputs(db)
        now = group_bases(inputs)
        known = {} if full else store_bases.read(db, "aggregates")
        todo = {g for g, b in now.items() if known.get(g) != b}
        gone = [g for g in known if g not in now]
        if known and not todo and not gone:
            return stored.counts
        old = {name: stored.read(db, name) for name in stored.TABLES}
        made = frames(db, inputs=inputs) if full or not known else frames(db, todo, old, inputs)
        changes = {name: _changes(name, old[name], frame) for name, frame in made.items()}

        def write(conn) -> dict[str, int]:
            stored.write_changes(conn, changes)
            store_bases.replace(conn, "aggregates", {g: now[g] for g in todo}, every=full or not known, drop=gone)
            return stored.counts(conn)

        return write

    return write_from_snapshot(db, prepare)


def _changes(name: str, old: pd.DataFrame, new: pd.DataFrame) -> tuple[list, list]:
    """The keys to delete and rows to insert that turn the stored rows of table ``name`` into
    ``new`` (keyed by their unit, or by their position in a whole recompute's order)."""
    columns = stored.TABLES[name]
    if name in stored.ORDERED:
        return changes(sql_rows(old, columns), sql_rows(new, columns), 3)
    return changes([(i, *r) for i, r in enumerate(sql_rows(old, columns))],
                   [(i, *r) for i, r in enumerate(sql_rows(new, columns))], 1)
