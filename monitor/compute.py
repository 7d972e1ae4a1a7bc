"""Recompute the measures of every unit whose inputs or method changed, and store them.

A unit's inputs hash covers its two-party district inputs (after the uncontested policy), the
policy and the measure settings; a stored measure is stale when that hash or the measure's method
version differs. ``full=True`` recomputes everything. The coverage of every unit
(:mod:`monitor.coverage`) is recomputed and stored in the same step. The whole-chamber units of
staggered chambers (:mod:`monitor.staggered`) are recomputed with their chamber: when one of its
units, its plans, its classes or the settings changed.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import hashlib
import json
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import sqlite_utils

from monitor.config import Config
from monitor.coverage import coverage_lines
from monitor.coverage_step import chamber_batches, refresh_coverage, write_coverage
from monitor.inputs import UNIT_KEYS, measure_inputs, measured_contests, reduced_contests, stored_unit_id
from monitor.measures import MEASURE_VERSIONS, compute_measures
from monitor.progress import tell
from store import bases as store_bases
from store import measures as store_measures
from store import reductions as stored_reductions
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


def measure_bases(units: pd.DataFrame, config: Config) -> list[str]:
    """What each current unit's measures are computed from, as one digest per unit (``units``:
    :func:`store.reductions.current_keys`): its content, the policy and the reduction method its
    stored reductions were made with, and the measure settings and method versions
    (:func:`settings_salt`). The unit's measures are recomputed when it differs from the stored one."""
    salt = settings_salt(config)
    return [hashlib.sha256(f"{salt}|{c}|{p}|{v}".encode()).hexdigest()
            for c, p, v in zip(units["content_sha256"], units["policy"], units["method_version"])]


def compute(db: sqlite_utils.Database, config: Config, *, full: bool = False,
            now: dt.datetime | None = None, progress=None) -> ComputeReport:
    """Bring the ``measures`` table up to date (incrementally unless ``full``).

    Only the units whose content, policy, reduction method, measure settings or method versions
    changed are read and recomputed (:func:`measure_bases`, kept in ``bases``); the coverage of
    the state chambers they belong to (or whose plans or expected counts changed) likewise
    (:func:`monitor.coverage_step.coverage_bases`). Reads, computation and write are one consistent
    step (:func:`store.write_from_snapshot`): a load committed meanwhile makes the step run again,
    so stale measures never overwrite new ones. ``progress``: an optional callback
    (:mod:`monitor.progress`) told each stage."""
    stamp = (now or dt.datetime.now(dt.timezone.utc)).isoformat(timespec="seconds")
    report = write_from_snapshot(db, lambda: _compute_step(db, config, full, stamp, progress))
    tell(progress, "measures", 3, 3, f"{report.units_computed} unit(s) computed")
    return report


def _compute_step(db: sqlite_utils.Database, config: Config, full: bool, stamp: str, progress=None):
    """Read what changed and compute the stale units' measures; return the writer."""
    tell(progress, "measures", 0, 3, "reading the store")
    report = ComputeReport()
    units = stored_reductions.current_keys(db)
    units["basis"] = measure_bases(units, config)
    report.units_total = len(units)
    known = store_bases.read(db, "measures")
    held = set(store_measures.unit_keys(db))  # a unit without stored rows is computed whatever its basis
    for u, c, s, ch in zip(units["unit_id"], units["cycle"], units["state"], units["chamber"]):
        if (c, s, ch) not in held:
            known.pop(str(u), None)
    stale = units if full else units[[known.get(str(u)) != b for u, b in zip(units["unit_id"], units["basis"])]]
    report.units_computed = len(stale)
    report.units_unchanged = len(units) - len(stale)
    cover = refresh_coverage(db, config, units, stale, full)

    rows: list[tuple] = []
    tell(progress, "measures", 1, 3, f"computing {len(stale)} unit(s)")
    for part in _batches(stale):
        rows += _rows(config, reduced_contests(db, unit_ids=part["unit_id"].tolist()), stamp)
    whole = _whole_chambers(db, config, units, cover.all_bases, held, full)
    for part in whole.batches:
        rows += _rows(config, measured_contests(db, config, unit_ids=part)[0].pipe(lambda c: c[c["unit_id"] < 0]),
                      stamp)
    computed_whole = {(r[0], r[1], r[2]) for r in rows if r[12] is None}
    current = set(zip(units["cycle"], units["state"], units["chamber"])) | whole.kept | computed_whole
    gone = sorted(held - current)
    report.units_removed = len(gone)
    report.units_total += len(whole.kept | computed_whole)
    report.units_computed += len(computed_whole)
    report.units_unchanged += len(whole.kept)
    report.computed = sorted({*zip(stale["cycle"], stale["state"], stale["chamber"]), *computed_whole})
    report.coverage = coverage_lines(cover.whole, config["flags.min_coverage"])
    bases = {str(u): b for u, b in zip(stale["unit_id"], stale["basis"])}
    tell(progress, "measures", 2, 3, f"writing {len(rows)} row(s)")

    def write(conn) -> ComputeReport:
        store_measures.replace_units(conn, sorted({*report.computed, *gone, *whole.replaced}), rows)
        report.rows_written = len(rows)
        write_coverage(conn, cover, config.policy, stamp)
        store_bases.replace(conn, "measures", bases, every=full)
        store_bases.replace(conn, "whole", whole.bases, drop=whole.dropped, every=full)
        return report

    return write


def _rows(config: Config, contests: pd.DataFrame, stamp: str) -> list[tuple]:
    """The ``measures`` rows of the units of ``contests`` (a whole-chamber unit's without unit id)."""
    _, long = compute_frame(config, contests)
    long = long.astype(object).where(long.notna(), None)
    return [(r.cycle, r.state, r.chamber, r.measure, r.value, r.low, r.high, r.p_value, r.reason,
             MEASURE_VERSIONS[r.measure], config.policy, r.inputs_hash, stored_unit_id(r.unit_id), stamp)
            for r in long.itertuples(index=False)]


@dataclass
class WholeWork:
    """The whole-chamber units to recompute: ``batches`` of stored unit ids (whole state chambers),
    the stored keys they replace, the keys kept as stored, and the bases to record or drop."""

    batches: list[list[int]]
    replaced: set
    kept: set
    bases: dict
    dropped: list


def _whole_chambers(db, config: Config, units: pd.DataFrame, chamber_bases: dict, held: set,
                    full: bool) -> WholeWork:
    """Which staggered state chambers' whole-chamber units are recomputed: those whose basis (the
    chamber's coverage basis: its units, plans and classes; and :func:`settings_salt`) changed, or
    that have no stored whole-chamber rows. A whole-chamber unit combines its chamber's cycles, so
    a chamber's whole-chamber units are recomputed together."""
    from monitor.staggered import Classes, base_chamber, is_whole

    classes = Classes.from_config(config)
    salt = settings_salt(config)
    staggered = {k: hashlib.sha256(f"{b}|{salt}".encode()).hexdigest() for k, b in chamber_bases.items()
                 if classes.of(*k.split("|", 1)) > 1}
    held_whole = {k for k in held if is_whole(k[2])}
    series_held = {f"{s}|{base_chamber(ch)}" for _, s, ch in held_whole}
    known = {} if full else store_bases.read(db, "whole")
    todo = [k for k, b in staggered.items() if known.get(k) != b or k not in series_held]
    replaced = {k for k in held_whole if f"{k[1]}|{base_chamber(k[2])}" in set(todo)}
    kept = {k for k in held_whole if f"{k[1]}|{base_chamber(k[2])}" in staggered} - replaced
    return WholeWork(chamber_batches(units, todo, BATCH_UNITS), replaced, kept, {k: staggered[k] for k in todo},
                     sorted(k for k in known if k not in staggered))


#: units computed at once: bounds the memory of a full recompute on a national history
BATCH_UNITS = 600


def _batches(units: pd.DataFrame):
    """Consecutive slices of at most :data:`BATCH_UNITS` units (whole units: a unit's measures
    never depend on the others')."""
    for start in range(0, len(units), BATCH_UNITS):
        yield units.iloc[start:start + BATCH_UNITS]
