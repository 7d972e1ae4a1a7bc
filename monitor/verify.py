"""Full verification: recompute everything from scratch and compare with what is stored.

The store is copied (SQLite's online backup: one consistent snapshot, even while a load commits)
into a scratch database in a temporary folder. On that copy every derived step runs again with
``full=True`` (nothing is taken over from earlier runs, :func:`monitor.pipeline.recompute`): the
contest reductions, the measures and the coverage of every unit, the national pool, tails, flags and watch list of
every cycle and chamber, and the aggregates (national summary, histogram, excess seats by who
drew the plan, seats-votes curves, each unit's plan era). The tables as they were in the
snapshot are then compared with the recomputed ones. The workspace's store is only read.

A difference is either a changed method version (the stored row was computed by an earlier
version of a measure or of the pool) or a bug (the incremental chain stored something a
from-scratch run does not give); :class:`Difference` says which.
"""

from __future__ import annotations

import sqlite3
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import sqlite_utils

import store
from store import tables
from store.aggregates import TABLES as AGGREGATES
from store.reductions import COLUMNS as REDUCTION_COLUMNS
from monitor.config import Config
from monitor.progress import Progress, tell

TOLERANCE = 1e-9

METHOD_VERSION = "method version"
VALUE = "value"
MISSING = "not stored"
EXTRA = "no longer computed"
#: a value that differs where a method version changed: the new method gives it, no bug
FOLLOWS = "follows a changed method version"


@dataclass(frozen=True)
class Difference:
    table: str
    key: tuple
    kind: str  # METHOD_VERSION, VALUE, MISSING or EXTRA
    column: str = ""
    stored: object = None
    recomputed: object = None

    def __str__(self) -> str:
        where = f"{self.table} {' '.join(map(str, self.key))}"
        if self.kind == MISSING:
            return f"{where}: not stored (a full recompute gives it)"
        if self.kind == EXTRA:
            return f"{where}: stored but no longer computed"
        if self.kind == METHOD_VERSION:
            return (f"{where}: stored with method version {self.stored}, current is {self.recomputed} "
                    "(a changed method version)")
        text = f"{where}: {self.column} stored {self.stored!r}, recomputed {self.recomputed!r}"
        return text + (" (after a changed method version)" if self.kind == FOLLOWS else "")

    @property
    def explained(self) -> bool:
        """True for a changed method version and what follows from it; every other difference
        points at a bug."""
        return self.kind in (METHOD_VERSION, FOLLOWS)


#: table -> (key columns, compared columns, method version column or None)
TABLES: dict[str, tuple[list[str], list[str], str | None]] = {
    "measures": (["cycle", "state", "chamber", "measure"],
                 ["value", "low", "high", "p_value", "reason", "policy"], "method_version"),
    "pool_seats": (["cycle", "state", "chamber"],
                   ["districts", "vote_share", "seats_a", "expected_seats", "low", "high", "percentile",
                    "excess_seats", "draws", "ess", "mc_se", "reason"], "method_version"),
    "tails": (["cycle", "state", "chamber", "measure"],
              ["flagged", "direction", "basis", "value", "null_percentile", "null_low", "null_high",
               "null_dropped", "p_value", "cross_percentile", "robust_z", "robust_z_all", "plan_id", "reason"], None),
    "coverage": (["cycle", "state", "chamber"],
                 ["districts_stored", "seats_stored", "districts_measured", "seats_measured", "districts_expected",
                  "seats_expected", "expected_from", "seat_coverage", "incomplete", "note", "votes_a_cast",
                  "votes_b_cast", "votes_a_measured", "votes_b_measured", "policy"], None),
    "coverage_gaps": (["cycle", "state", "chamber", "gap", "district"], ["seats", "reason"], None),
    "watch": (["state", "chamber", "plan_id"],
              ["favours", "severity", "seats_at_stake", "concurring", "cycles", "measures", "since",
               "drawn_by", "inferred"], None),
    "reductions": (["contest_id"], [c for c in REDUCTION_COLUMNS if c != "contest_id"], None),
    **{name: (["position"], columns, None) for name, columns in AGGREGATES.items()
       if name not in ("unit_plans", "seats_votes", "national_summary")},
    "national_summary": (["cycle", "chamber"], AGGREGATES["national_summary"][2:], None),
    "unit_plans": (["cycle", "state", "chamber"], AGGREGATES["unit_plans"][3:], None),
    "seats_votes": (["cycle", "state", "chamber"], AGGREGATES["seats_votes"][3:], None),
}


def verify_store(db: sqlite_utils.Database, config: Config, *,
                 progress: Progress | None = None) -> list[Difference]:
    """Differences between what ``db`` stores and a from-scratch recompute (empty: none)."""
    from monitor.pipeline import recompute

    with tempfile.TemporaryDirectory(prefix="levelfield-verify-") as tmp:
        path = Path(tmp) / "scratch.sqlite"
        tell(progress, "verify", 0, None, "copying the store")
        target = sqlite3.connect(path)
        try:
            db.conn.backup(target)
        finally:
            target.close()
        scratch = store.connect(path)
        try:
            stored = {name: _read(scratch, name) for name in TABLES}
            recompute(scratch, config, full=True, progress=progress)
            fresh = {name: _read(scratch, name) for name in TABLES}
        finally:
            scratch.conn.close()
    out: list[Difference] = []
    for name, (key, columns, version) in TABLES.items():
        out += compare(name, stored[name], fresh[name], key, columns, version)
    return _explain(out)


def _explain(differences: list[Difference]) -> list[Difference]:
    """Mark the value differences that a changed method version accounts for: the tails and
    pool rows of a unit whose measures changed version, every row of a cycle/chamber group whose
    pool changed version, and the watch list when any version changed."""
    units, groups = set(), set()
    for d in differences:
        if d.kind == METHOD_VERSION:
            cycle, state, chamber = d.key[:3]
            units.add((cycle, state, chamber))
            if d.table == "pool_seats":
                groups.add((cycle, chamber))
    if not units:
        return differences
    out = []
    for d in differences:
        if d.kind == VALUE:
            unit = d.key[:3]
            if d.table == "watch" or unit in units or (unit[0], unit[2]) in groups:
                d = Difference(d.table, d.key, FOLLOWS, d.column, d.stored, d.recomputed)
        out.append(d)
    return out


def _read(db: sqlite_utils.Database, table: str) -> pd.DataFrame:
    key, columns, version = TABLES[table]
    return tables.read_table(db, table, [*key, *columns, *([version] if version else [])])


def compare(table: str, stored: pd.DataFrame, fresh: pd.DataFrame, key: list[str], columns: list[str],
            version: str | None = None) -> list[Difference]:
    """Row-by-row differences of two frames of one table, matched on ``key``."""
    merged = fresh.merge(stored, on=key, how="outer", suffixes=("", "_stored"), indicator="_merge_side")
    out = []
    for r in merged.to_dict("records"):
        where = tuple(_plain(r[k]) for k in key)
        if r["_merge_side"] == "left_only":
            out.append(Difference(table, where, MISSING))
            continue
        if r["_merge_side"] == "right_only":
            out.append(Difference(table, where, EXTRA))
            continue
        if version and r[version] != r[f"{version}_stored"]:
            out.append(Difference(table, where, METHOD_VERSION, version, r[f"{version}_stored"], r[version]))
            continue
        for col in columns:
            new, old = r[col], r[f"{col}_stored"]
            if not _same(old, new):
                out.append(Difference(table, where, VALUE, col, _plain(old), _plain(new)))
    return out


def _missing(x) -> bool:
    return x is None or (isinstance(x, float) and np.isnan(x)) or x is pd.NA


def _same(a, b) -> bool:
    if _missing(a) or _missing(b):
        return _missing(a) and _missing(b)
    if isinstance(a, (int, float, np.number)) and isinstance(b, (int, float, np.number)):
        a, b = float(a), float(b)
        return abs(a - b) <= TOLERANCE * max(1.0, abs(a))
    return a == b


def _plain(x):
    if _missing(x):
        return None
    return x.item() if hasattr(x, "item") else x


def summary(differences: list[Difference]) -> str:
    """One line: how many differences, and what they mean."""
    versions = sum(d.explained for d in differences)
    other = len(differences) - versions
    parts = []
    if versions:
        parts.append(f"{versions} from a changed method version")
    if other:
        parts.append(f"{other} that a from-scratch recompute does not reproduce (a bug)")
    return f"{len(differences)} difference(s) between the stored and the recomputed results: " + ", ".join(parts)
