"""Recompute the measures of every unit whose inputs or method changed, and store them.

A unit's inputs hash covers its two-party district inputs (after the uncontested policy), the
policy and the measure settings; a stored measure is stale when that hash or the measure's method
version differs. ``full=True`` recomputes everything. The coverage of every unit
(:mod:`monitor.coverage`) is recomputed and stored in the same step.
"""

from __future__ import annotations

import datetime as dt
import json
import dataclasses
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import sqlite_utils

from monitor.config import Config
from monitor.coverage import compute_coverage, coverage_lines, write_coverage
from monitor.inputs import UNIT_KEYS, measure_inputs, measured_contests, stored_unit_id
from monitor.measures import MEASURE_VERSIONS, compute_measures
from monitor.progress import tell
from store import measures as store_measures
from store import write_from_snapshot



def settings_salt(config: Config) -> str:
    """What, besides a unit's districts, its measures depend on: the ``[measures]`` settings
    (seed included) and every measure's method version. Part of every inputs hash."""
    parts = dataclasses.asdict(config.measures)
    parts["versions"] = MEASURE_VERSIONS
    return json.dumps(parts, sort_keys=True, default=str)


@dataclass
class ComputeReport:
    units_total: int = 0
    units_computed: int = 0
    units_unchanged: int = 0
    rows_written: int = 0
    units_removed: int = 0
    computed: list[tuple] = field(default_factory=list)
    coverage: list[str] = field(default_factory=list)  # plain-words coverage lines

    def lines(self) -> list[str]:
        out = [f"measures: {self.units_computed} unit(s) computed, {self.units_unchanged} unchanged "
               f"(of {self.units_total}); {self.rows_written} rows written"]
        if self.units_removed:
            out.append(f"  {self.units_removed} unit(s) no longer in the store: their measures were removed")
        return out + self.coverage


def compute_frame(config: Config, contests: pd.DataFrame) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Pure step: measures (long frame with unit keys) for the given reduced contests."""
    arrays = measure_inputs(contests, config, settings_salt(config))
    units = arrays.units
    if units.empty:
        return units, pd.DataFrame(columns=[*UNIT_KEYS, "measure", "value", "low", "high", "p_value", "reason"])
    rng = np.random.default_rng(config["measures.seed"])
    long = compute_measures(arrays.unit, arrays.votes_a, arrays.votes_b, arrays.uncontested,
                            len(units), config.measures, rng)
    keys = units[[*UNIT_KEYS, "unit_id", "inputs_hash"]].reset_index(drop=True)
    long = long.join(keys, on="unit")
    return units, long


def compute(db: sqlite_utils.Database, config: Config, *, full: bool = False,
            now: dt.datetime | None = None, progress=None) -> ComputeReport:
    """Bring the ``measures`` table up to date (incrementally unless ``full``).

    Reads, computation and write are one consistent step (:func:`store.write_from_snapshot`): a
    load committed meanwhile makes the step run again, so stale measures never overwrite new ones.
    ``progress``: an optional callback (:mod:`monitor.progress`) told each stage."""
    stamp = (now or dt.datetime.now(dt.timezone.utc)).isoformat(timespec="seconds")
    report = write_from_snapshot(db, lambda: _compute_step(db, config, full, stamp, progress))
    tell(progress, "measures", 3, 3, f"{report.units_computed} unit(s) computed")
    return report


def _compute_step(db: sqlite_utils.Database, config: Config, full: bool, stamp: str, progress=None):
    """Read the store and compute the stale units' measures; return the writer."""
    tell(progress, "measures", 0, 3, "reading the store")
    report = ComputeReport()
    contests, whole = measured_contests(db, config)
    arrays = measure_inputs(contests, config, settings_salt(config))
    units = arrays.units
    report.units_total = len(units)
    stored = store_measures.stored_hashes(db)
    stale = units.index.to_numpy()
    if not full and not stored.empty:
        fresh = set()
        expected = set(MEASURE_VERSIONS.items())
        for key, group in stored.groupby(UNIT_KEYS, sort=False):
            if group["inputs_hash"].nunique() == 1 and set(zip(group["measure"], group["method_version"])) == expected:
                fresh.add((*key, group["inputs_hash"].iloc[0]))
        keep = [(c, s, ch, h) not in fresh for c, s, ch, h in
                zip(units["cycle"], units["state"], units["chamber"], units["inputs_hash"])]
        stale = units.index[np.array(keep, dtype=bool)].to_numpy()
    report.units_computed = len(stale)
    report.units_unchanged = len(units) - len(stale)
    current = set(zip(units["cycle"], units["state"], units["chamber"]))
    gone = {k for k in zip(stored["cycle"], stored["state"], stored["chamber"])} - current
    report.units_removed = len(gone)
    cover = compute_coverage(db, config, contests, whole)
    report.coverage = coverage_lines(cover.units, config["flags.min_coverage"])

    rows = []
    tell(progress, "measures", 1, 3, f"computing {len(stale)} unit(s)")
    if len(stale):
        sub = contests[contests["unit_id"].isin(units.loc[stale, "unit_id"])]
        _, long = compute_frame(config, sub)
        long = long.astype(object).where(long.notna(), None)
        rows = [
            (r.cycle, r.state, r.chamber, r.measure, r.value, r.low, r.high, r.p_value, r.reason,
             MEASURE_VERSIONS[r.measure], config.policy, r.inputs_hash, stored_unit_id(r.unit_id), stamp)
            for r in long.itertuples(index=False)
        ]
        report.computed = sorted({(r[0], r[1], r[2]) for r in rows})

    tell(progress, "measures", 2, 3, f"writing {len(rows)} row(s)")

    def write(conn) -> ComputeReport:
        store_measures.replace_units(conn, report.computed + sorted(gone), rows)
        report.rows_written = len(rows)
        write_coverage(conn, cover, config.policy, stamp)
        return report

    return write
