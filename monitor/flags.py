"""Flags with history, and the watch list.

A unit is flagged on a measure when the measure lies in the outer tails of its national-pool null
(``flags.tail`` each side, default 2.5%; :mod:`monitor.tails`), or, for the measures judged by their
own p-value (the lopsided-margins t-test and the mean-median z-test), when that p is below
``flags.p_threshold`` (default 0.05); and only when the state has at least ``flags.min_districts``
districts. Nothing is ranked or cut at a fixed share: in a federation with no gerrymander few units
are flagged, in one with many all of them can be.

A plan is **on watch** when at least ``flags.watch_cycles`` (2) of its cycles are each flagged by
at least ``flags.watch_measures`` (2) measures agreeing in direction. Severity is the seats at
stake: the mean of the excess seats over the plan's agreeing cycles (absolute, in seats);
``concurring`` is the largest number of measures agreeing in one cycle.

Every raise and clear of a unit flag or of a watch entry is written to ``flag_events``
(:mod:`monitor.events`). The step reads only stored numbers: the reductions (the pool's
districts), the measures (observed values, their undefined reasons and p-values) and what the
previous run stored.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import sqlite_utils

from monitor.config import Config
from monitor.coverage import stored_coverage
from monitor.inputs import UNIT_KEYS
from monitor.staggered import Classes, base_chamber, is_whole
from monitor.staggered import partial as staggered_partial
from store import bases as store_bases
from store import flags as store_flags
from store import measures as store_measures
from store import plans as store_plans
from store import write_from_snapshot
from store.rows import changes as row_changes
from store.rows import sql_rows, sql_value

# The national pool and the measures' registry (monitor.tails, monitor.events) are imported by the
# steps that compute: `levelfield flags` only reads stored rows (flag_table) and starts without them.

__all__ = ["FLAG_MEASURES", "FlagsReport", "flag_table", "judge", "run_flags", "watch_list"]


def __getattr__(name: str):
    if name == "FLAG_MEASURES":  # every flag name
        from monitor.tails import JUDGED

        return tuple(JUDGED)
    if name == "judge":
        from monitor.tails import judge

        return judge
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


@dataclass
class FlagsReport:
    groups_total: int = 0
    groups_computed: int = 0
    units_pooled: int = 0
    flags: int = 0
    on_watch: int = 0
    events: list[str] = field(default_factory=list)

    def lines(self) -> list[str]:
        out = [f"national pool: {self.groups_computed} of {self.groups_total} cycle/chamber group(s) "
               f"recomputed ({self.units_pooled} units); {self.flags} unit flag(s); {self.on_watch} plan(s) on watch"]
        if self.events:
            out.append(f"  {len(self.events)} flag change(s):")
            out.extend(f"    {e}" for e in self.events[:50])
            if len(self.events) > 50:
                out.append(f"    ... and {len(self.events) - 50} more (levelfield flags --changes)")
        return out


def watch_list(t: pd.DataFrame, plans: pd.DataFrame, seats: pd.DataFrame, config: Config) -> pd.DataFrame:
    """Plans on watch, from the judged tails rows and the unit -> plan assignment."""
    need_cycles, need_measures = config["flags.watch_cycles"], config["flags.watch_measures"]
    flagged = t[t["flagged"] == 1]
    per: dict[tuple, set] = {}  # (cycle, state, chamber, direction) -> the measures flagging that way
    for key in zip(flagged["cycle"].astype(int).tolist(), flagged["state"].tolist(), flagged["chamber"].tolist(),
                   flagged["direction"].tolist(), flagged["measure"].tolist()):
        per.setdefault(key[:4], set()).add(key[4])
    plan_of = {(int(c), s, ch): (p, d, i) for c, s, ch, p, d, i in zip(
        plans["cycle"], plans["state"], plans["chamber"], plans["plan_id"], plans["drawn_by"], plans["inferred"])}
    # no unit of the pool may have an expected seat count (no two-party votes anywhere): no column
    excess = ({} if seats.empty or "excess_seats" not in seats.columns else
              {(int(c), s, ch): x for c, s, ch, x in zip(seats["cycle"], seats["state"], seats["chamber"],
                                                         seats["excess_seats"].to_numpy(float))})
    by_plan: dict[tuple, dict[str, list]] = {}
    for (cycle, state, chamber, direction), measures in per.items():
        plan = plan_of.get((cycle, state, chamber))
        if len(measures) < need_measures or plan is None or not isinstance(plan[0], str):
            continue
        by_plan.setdefault((state, chamber, plan[0]), {}).setdefault(direction, []).append(
            (cycle, sorted(measures), plan[1], plan[2], excess.get((cycle, state, chamber), np.nan)))
    rows = [row for key in sorted(by_plan) if (row := _watch_entry(key, by_plan[key], need_cycles)) is not None]
    cols = ["state", "chamber", "plan_id", "drawn_by", "inferred", "favours", "severity", "seats_at_stake",
            "concurring", "cycles", "measures", "since"]
    out = pd.DataFrame(rows, columns=cols)
    return out.sort_values(["severity", "concurring", "state"], ascending=[False, False, True]).reset_index(drop=True)


def _watch_entry(plan: tuple, ways: dict[str, list], need_cycles: int) -> dict | None:
    """The watch entry of ``plan`` (state, chamber, plan_id) from its cycles flagged by enough
    measures each way (``ways``: direction -> (cycle, measures, drawn_by, inferred, excess seats)),
    or None when fewer than ``need_cycles`` cycles agree, or as many cycles go each way."""
    counts = {d: len({e[0] for e in entries}) for d, entries in ways.items()}
    most = max(counts.values())
    best = [d for d, n in counts.items() if n == most]
    if most < need_cycles or len(best) > 1:  # too few cycles, or as many each way: no agreement
        return None
    favours = best[0]
    agree = sorted(ways[favours], key=lambda e: e[0])
    excess = np.array([e[4] for e in agree], dtype=float)
    stake = float(np.nanmean(excess)) if np.isfinite(excess).any() else None
    state, chamber, plan_id = plan
    return {
        "state": state, "chamber": chamber, "plan_id": plan_id,
        "drawn_by": agree[0][2], "inferred": int(agree[0][3]), "favours": favours,
        "severity": round(abs(stake), 2) if stake is not None else 0.0,
        "seats_at_stake": None if stake is None else round(stake, 2),  # as severity: one rounding
        "concurring": max(len(e[1]) for e in agree),
        "cycles": " ".join(str(e[0]) for e in agree),
        "measures": " ".join(sorted({m for e in agree for m in e[1]})), "since": agree[0][0],
    }


def run_flags(db: sqlite_utils.Database, config: Config, *, full: bool = False,
              now: dt.datetime | None = None, progress=None) -> FlagsReport:
    """Redo the cycle/chamber groups whose inputs changed (every one when ``full``): redraw their
    national tails where their pool changed, judge their units, update the robust z across cycles
    of their chambers and the watch entries of their state chambers, write the rows that changed,
    and record every flag that was raised or cleared.

    Reads, computation and the write are one consistent step (:func:`store.write_from_snapshot`):
    when another process commits meanwhile (a load, or a second recompute), the step runs again on
    the new state, so no event is recorded twice and no newer result is overwritten.
    ``progress``: an optional callback (:mod:`monitor.progress`) told each cycle/chamber group."""
    stamp = (now or dt.datetime.now(dt.timezone.utc)).isoformat(timespec="seconds")
    report = write_from_snapshot(db, lambda: _flag_step(db, config, full, stamp, progress))
    if progress is not None:
        progress("flags", report.groups_total, report.groups_total, f"{report.groups_computed} group(s) recomputed")
    return report


def flag_units(db: sqlite_utils.Database) -> pd.DataFrame:
    """The units the flags judge, from what the measures step stored (no vote line or reduction
    is read): every current unit with stored measures and every whole-chamber unit of a staggered
    chamber, sorted by cycle, state, chamber (index 0..n-1), with its unit_id (a whole-chamber
    unit's virtual, negative), load_id (a whole-chamber unit's: its cycle's unit's), the inputs
    hash its measures were computed from and its districts in the measures (the stored
    ``districts`` measure)."""
    from store import reductions as stored_reductions

    keys = stored_reductions.current_keys(db)[["unit_id", *UNIT_KEYS, "load_id"]]
    measured = store_measures.read(db, [*UNIT_KEYS, "value", "inputs_hash"], ["districts"])
    units = measured.merge(keys, on=UNIT_KEYS, how="left").rename(columns={"value": "districts_eligible"})
    whole = units["chamber"].map(is_whole).to_numpy(bool)
    if whole.any():
        loads = keys.set_index(UNIT_KEYS)["load_id"]
        at = pd.MultiIndex.from_arrays([units.loc[whole, "cycle"], units.loc[whole, "state"],
                                        units.loc[whole, "chamber"].map(base_chamber)])
        units.loc[whole, "load_id"] = loads.reindex(at).to_numpy()
        units.loc[whole, "unit_id"] = -np.arange(1, int(whole.sum()) + 1)
    units = units[units["unit_id"].notna()].copy()
    units["unit_id"] = units["unit_id"].astype(np.int64)
    units["districts_eligible"] = units["districts_eligible"].fillna(0).astype(np.int64)
    return units.sort_values(UNIT_KEYS).reset_index(drop=True)[[*UNIT_KEYS, "unit_id", "load_id", "inputs_hash",
                                                                "districts_eligible"]]


def partial_units(units: pd.DataFrame, config: Config) -> np.ndarray:
    """True for each unit that is one class of a staggered chamber (never flagged)."""
    return staggered_partial(units, Classes.from_config(config))


def _flag_step(db: sqlite_utils.Database, config: Config, full: bool, stamp: str, progress=None):
    """Read the store, redo the groups whose inputs changed (:mod:`monitor.flag_scope`): their
    tails, flags, the robust z of their chambers and the watch list of their state chambers, and
    the events; return the writer of what changed (nothing when no group changed)."""
    from monitor import flag_scope
    from monitor.plans import assign_plans, write_inferred

    report = FlagsReport()
    units = flag_units(db)
    plans, inferred = assign_plans(db, units)
    cover = stored_coverage(db).units
    coverage_share = pd.to_numeric(cover.set_index(UNIT_KEYS)["seat_coverage"], errors="coerce").astype(float)
    partial = partial_units(units, config)
    scope, pool = flag_scope.scope(units, plans, coverage_share, partial, config,
                                   store_bases.read(db, flag_scope.STEP), store_flags.group_hashes(db), full)
    report.groups_total = len(scope.groups)
    inferred_changed = set(inferred) != store_plans.inferred(db)
    if not scope.todo and not inferred_changed:
        return lambda conn: _counted(conn, report)
    changes = _redo(db, config, scope, pool, units, plans, (coverage_share, partial), stamp, report, progress)

    def write(conn) -> FlagsReport:
        if inferred_changed:
            write_inferred(conn, inferred)
        store_flags.write_changes(conn, changes)
        store_bases.replace(conn, flag_scope.STEP, {g: scope.bases[g] for g in scope.todo if g in scope.bases},
                            drop=[g for g in scope.todo if g not in scope.bases], every=full)
        return _counted(conn, report)

    return write


def _counted(conn, report: FlagsReport) -> FlagsReport:
    report.flags, report.on_watch = store_flags.counts(conn)
    return report


def _redo(db, config: Config, scope, pool: dict, units: pd.DataFrame, plans: pd.DataFrame, judged_by: tuple,
          stamp: str, report: FlagsReport, progress) -> store_flags.FlagChanges:
    """The changes of the groups ``scope.todo``: their pool rows (redrawn or as stored), tails
    (judged, in context), the robust z across cycles of their chambers' other rows, the watch
    entries of their state chambers, and the events."""
    from monitor import events as E
    from monitor.tails import P_FLAGGED, POOL_METHOD_VERSION, context_stats, judge, observed_values, stored_names

    coverage_share, partial = judged_by
    todo = scope.todo_groups
    mine = units[_in_groups(units, todo)].reset_index(drop=True)
    stored = store_measures.read(db, [*UNIT_KEYS, "measure", "value", "reason"], stored_names(), groups=todo)
    observed = observed_values(stored, mine)
    old_seats = store_flags.read_groups(db, "pool_seats", todo)
    old_tails = store_flags.read_groups(db, "tails", todo)
    seats, tails = _pool_groups(db, mine, observed, (old_seats, old_tails), pool, scope, config, report, progress)
    pvals = store_measures.read(db, [*UNIT_KEYS, "measure", "value", "p_value", "reason"],
                                sorted(P_FLAGGED.values()), groups=todo)
    keys = pd.MultiIndex.from_frame(units[UNIT_KEYS])
    districts = pd.Series(units["districts_eligible"].to_numpy(), index=keys)
    judged = judge(tails, pvals, districts, config, coverage_share, pd.Series(partial, index=keys))
    chambers = sorted({ch for _, ch in todo})
    others = store_flags.read_chambers(db, "tails", [*UNIT_KEYS, "measure", "value", "robust_z_all"], chambers)
    others = others[~_in_groups(others, todo)].reset_index(drop=True)
    judged = context_stats(judged, others)
    z = _moved_z(judged, others, stamp)
    judged = judged.merge(plans[[*UNIT_KEYS, "plan_id"]], on=UNIT_KEYS, how="left")

    pairs = set(zip(mine["state"], mine["chamber"])) | set(zip(old_tails["state"], old_tails["chamber"]))
    watch, old_watch = _watch_of(db, pairs, chambers, todo, judged, seats, plans, config)
    group_load = E.group_loads(units, units.set_index("unit_id")["load_id"])
    events = E.unit_events(old_tails, judged, group_load, stamp)
    events += E.watch_events(old_watch, watch, E.cycles_of_plans(plans), group_load, stamp)
    report.events = [e["text"] for e in events]
    return store_flags.FlagChanges(
        seats=_changed(old_seats, seats, [*store_flags.SEAT_COLUMNS, "method_version"], 3, stamp,
                       method_version=POOL_METHOD_VERSION),
        tails=_changed(old_tails, judged, store_flags.TAIL_COLUMNS, 4, stamp),
        watch_columns=list(watch.columns),
        watch=_changed(old_watch, watch, list(watch.columns), 3, stamp),
        robust_z_all=z,
        events=[(e["scope"], e["cycle"], e["state"], e["chamber"], e["plan_id"], e["measure"], e["event"],
                 e["direction"], e["why"], stamp, e["load_id"]) for e in events],
    )


def _moved_z(judged: pd.DataFrame, others: pd.DataFrame, stamp: str) -> list[tuple]:
    """(robust_z_all, stamp, key...) of the stored tails rows of other groups whose robust z across
    cycles moved (``others`` holds the new ones after :func:`monitor.tails.context_stats`)."""
    if others.empty:
        return []
    from monitor.tails import across_cycles

    new = across_cycles(judged, others)[len(judged):]
    old = others["robust_z_all"].to_numpy(float)
    moved = ~((new == old) | (np.isnan(new) & np.isnan(old)))
    rows = others[moved]
    return [(sql_value(v), stamp, int(c), s, ch, m) for v, c, s, ch, m in zip(
        new[moved], rows["cycle"], rows["state"], rows["chamber"], rows["measure"])]


def _in_groups(frame: pd.DataFrame, groups) -> np.ndarray:
    groups = set(groups)
    return np.array([(int(c), ch) in groups for c, ch in zip(frame["cycle"], frame["chamber"])], dtype=bool)


def _watch_of(db, pairs: set, chambers: list, todo, judged: pd.DataFrame, seats: pd.DataFrame,
              plans: pd.DataFrame, config: Config) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The watch entries of the state chambers ``pairs`` (from the new rows of the groups ``todo``
    and the stored rows of their other cycles), and those stored before."""
    cols = [*UNIT_KEYS, "measure", "direction", "flagged"]
    flagged = store_flags.read_chambers(db, "tails", cols, chambers, "flagged = 1")
    flagged = pd.concat([flagged[~_in_groups(flagged, todo)], judged.loc[judged["flagged"] == 1, cols]],
                        ignore_index=True)
    excess = store_flags.read_chambers(db, "pool_seats", [*UNIT_KEYS, "excess_seats"], chambers)
    excess = pd.concat([excess[~_in_groups(excess, todo)], seats.reindex(columns=[*UNIT_KEYS, "excess_seats"])],
                       ignore_index=True)

    def of_pairs(frame):
        return frame[np.array([(s, ch) in pairs for s, ch in zip(frame["state"], frame["chamber"])], dtype=bool)]

    watch = watch_list(of_pairs(flagged), of_pairs(plans), of_pairs(excess), config)
    return watch, of_pairs(store_flags.read_all(db, "watch"))


def _changed(old: pd.DataFrame, new: pd.DataFrame, columns: list[str], key_len: int, stamp: str,
             **constant) -> tuple[list, list]:
    """The keys to delete and rows to insert (each followed by ``stamp``) that turn the stored rows
    ``old`` into ``new`` (``constant``: columns ``new`` lacks, with their one value)."""
    new = new.assign(**constant) if constant else new
    delete, insert = row_changes(sql_rows(old, columns), sql_rows(new, columns), key_len)
    return delete, [(*r, stamp) for r in insert]


def _pool_groups(db: sqlite_utils.Database, units: pd.DataFrame, stored: tuple, old: tuple, pool: dict, scope,
                 config: Config, report: FlagsReport, progress) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Expected seats and tails of the groups of ``units``: redrawn where the group's pool digest
    changed (``scope.redraw``), reading that group's stored reductions only; else the stored pool
    rows and null bands (``old``: the stored pool_seats and tails rows of the groups)."""
    from monitor.flag_scope import group_key
    from monitor.inputs import measure_inputs, measured_contests, reduced_contests
    from monitor.tails import pool_group, stored_group

    observed, undefined, actual_seats = stored
    old_seats, old_tails = old
    seat_frames, tail_frames = [], []
    groups = units.groupby(["cycle", "chamber"], sort=True)
    for done, ((cycle, chamber), part) in enumerate(groups):
        if progress is not None:
            progress("flags", done, groups.ngroups, f"{cycle} {chamber}")
        rows = part.index.to_numpy()
        key = group_key(cycle, chamber)
        if key not in scope.redraw:
            mine = (old_seats["cycle"] == cycle) & (old_seats["chamber"] == chamber)
            seat_frames.append(old_seats[mine].drop(columns=["method_version", "computed_at"]))
            bands = old_tails[(old_tails["cycle"] == cycle) & (old_tails["chamber"] == chamber)]
            tail_frames.append(stored_group(old_seats[mine], bands, part, {k: v[rows] for k, v in observed.items()},
                                            {k: v[rows] for k, v in undefined.items()}))
            continue
        report.groups_computed += 1
        report.units_pooled += len(part)
        contests = (measured_contests(db, config, cycle=int(cycle), chamber=chamber)[0] if is_whole(chamber)
                    else reduced_contests(db, int(cycle), chamber=chamber))
        arrays = measure_inputs(contests, config, hashes=False)
        order = pd.MultiIndex.from_frame(arrays.units[UNIT_KEYS]).get_indexer(pd.MultiIndex.from_frame(part[UNIT_KEYS]))
        if (order < 0).any():
            raise RuntimeError(f"the stored measures of {cycle} {chamber} name units without stored reductions: "
                               "run levelfield compute --full")
        members = np.sort(order)
        pick = rows[np.argsort(order)]  # the stored values of the members, in the members' order
        seats, tails = pool_group(arrays, members, {k: v[pick] for k, v in observed.items()},
                                  {k: v[pick] for k, v in undefined.items()}, actual_seats[pick],
                                  config, int(cycle), chamber)
        seats["inputs_hash"] = pool[key]
        seat_frames.append(seats)
        tail_frames.append(tails)
    seats = pd.concat(seat_frames, ignore_index=True) if seat_frames else pd.DataFrame(columns=[*UNIT_KEYS, "excess_seats"])
    tails = pd.concat(tail_frames, ignore_index=True) if tail_frames else pd.DataFrame(columns=[*UNIT_KEYS, "measure", "value"])
    return seats, tails




def flag_table(db: sqlite_utils.Database, show: str, *, cycle: int | None = None,
               chamber: str | None = None) -> pd.DataFrame:
    """What ``levelfield flags`` prints: flagged units, the watch list or the flag history.

    Every view says whether the plan is inferred (``inferred`` = 1: no loaded era covers it, a
    plan per decade was assumed). Cycles are integers (empty for plan-level events). Flagged units
    say whether the unit is incomplete (districts missing or left out of its measures: which, and
    why); the watch list names the plan's flagged cycles that are incomplete."""
    if show not in ("flags", "watch", "changes"):
        raise ValueError(f"show must be flags, watch or changes, got {show!r}")
    if show == "watch":
        return _incomplete_cycles(store_flags.watch_view(db, cycle, chamber), stored_coverage(db).units)
    if show == "changes":
        frame = store_flags.changes_view(db, cycle, chamber)
        for col in ("cycle", "load_id", "inferred"):
            frame[col] = frame[col].astype("Int64")
        return frame
    frame = store_flags.flagged_view(db, cycle, chamber)
    frame["inferred"] = frame["inferred"].astype("Int64")
    return _with_coverage(frame, stored_coverage(db).units)


def _with_coverage(flagged: pd.DataFrame, cover: pd.DataFrame) -> pd.DataFrame:
    """Flagged rows with their unit's coverage: ``incomplete`` (yes | no), ``seat_coverage`` and
    ``missing_or_left_out`` (what is missing or left out of the measures, and why)."""
    cover = cover[[*UNIT_KEYS, "incomplete", "seat_coverage", "note"]].rename(columns={"note": "missing_or_left_out"})
    out = flagged.merge(cover, on=UNIT_KEYS, how="left")
    out["incomplete"] = np.where(out["incomplete"].isna(), "unknown",
                                 np.where(out["incomplete"].fillna(0).astype(int) == 1, "yes", "no"))
    return out


def _incomplete_cycles(watch: pd.DataFrame, cover: pd.DataFrame) -> pd.DataFrame:
    """The watch list with ``incomplete_cycles``: those of each plan's flagged cycles whose unit
    is incomplete (space separated; empty when none)."""
    bad = {(int(c), s, ch) for c, s, ch, i in zip(cover["cycle"], cover["state"], cover["chamber"],
                                                    cover["incomplete"]) if int(i) == 1}
    watch = watch.copy()
    watch["incomplete_cycles"] = [" ".join(c for c in str(cycles).split() if (int(c), st, ch) in bad)
                                  for st, ch, cycles in zip(watch["state"], watch["chamber"], watch["cycles"])]
    return watch
