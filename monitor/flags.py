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
import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import sqlite_utils

from monitor.config import Config
from monitor.coverage import stored_coverage
from monitor.inputs import UNIT_KEYS
from monitor.staggered import Classes, base_chamber, is_whole
from monitor.staggered import partial as staggered_partial
from store import flags as store_flags
from store import measures as store_measures
from store import write_from_snapshot

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
    per = (flagged.groupby([*UNIT_KEYS, "direction"])["measure"]
           .agg(lambda m: sorted(set(m))).reset_index())
    per = per[per["measure"].map(len) >= need_measures]
    per = per.merge(plans, on=UNIT_KEYS, how="left")
    # no unit of the pool may have an expected seat count (no two-party votes anywhere): no column
    has_excess = not seats.empty and "excess_seats" in seats.columns
    per = per.merge(seats[[*UNIT_KEYS, "excess_seats"]], on=UNIT_KEYS, how="left") if has_excess else per.assign(excess_seats=np.nan)
    # the plans with enough flagged cycles one way, found at once (most plans have none)
    most = per.groupby(["state", "chamber", "plan_id", "direction"])["cycle"].nunique() if len(per) else pd.Series()
    enough = {key[:3] for key, n in most.items() if n >= need_cycles}
    rows = []
    for (state, chamber, plan_id), group in per.groupby(["state", "chamber", "plan_id"], sort=True):
        if (state, chamber, plan_id) not in enough:
            continue
        counts = group.groupby("direction")["cycle"].nunique()  # one direction has need_cycles (enough)
        best = counts[counts == counts.max()]
        if len(best) > 1:  # as many cycles each way: no agreement, not on watch
            continue
        favours = best.index[0]
        agree = group[group["direction"] == favours].sort_values("cycle")
        excess = agree["excess_seats"].to_numpy(float)
        stake = float(np.nanmean(excess)) if np.isfinite(excess).any() else None
        measures = sorted({m for ms in agree["measure"] for m in ms})
        first = agree.iloc[0]
        rows.append({
            "state": state, "chamber": chamber, "plan_id": plan_id,
            "drawn_by": first["drawn_by"], "inferred": int(first["inferred"]), "favours": favours,
            "severity": round(abs(stake), 2) if stake is not None else 0.0,
            "seats_at_stake": None if stake is None else round(stake, 2),  # as severity: one rounding
            "concurring": int(agree["measure"].map(len).max()),
            "cycles": " ".join(str(c) for c in agree["cycle"]),
            "measures": " ".join(measures), "since": int(agree["cycle"].min()),
        })
    cols = ["state", "chamber", "plan_id", "drawn_by", "inferred", "favours", "severity", "seats_at_stake",
            "concurring", "cycles", "measures", "since"]
    out = pd.DataFrame(rows, columns=cols)
    return out.sort_values(["severity", "concurring", "state"], ascending=[False, False, True]).reset_index(drop=True)


def run_flags(db: sqlite_utils.Database, config: Config, *, full: bool = False,
              now: dt.datetime | None = None, progress=None) -> FlagsReport:
    """Recompute the national tails of changed cycle/chamber groups, judge every unit, rebuild
    the watch list, and record every flag that was raised or cleared.

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
    """Read the store, compute tails, flags, watch list and events; return the writer."""
    from monitor import events as E
    from monitor.plans import assign_plans, write_inferred
    from monitor.tails import P_FLAGGED, POOL_METHOD_VERSION, context_stats, judge, observed_values, stored_names

    report = FlagsReport()
    units = flag_units(db)
    stored = store_measures.read(db, [*UNIT_KEYS, "measure", "value", "reason"], stored_names())
    observed, undefined, actual_seats = observed_values(stored, units)
    loads = units.set_index("unit_id")["load_id"]
    plans, inferred = assign_plans(db, units)
    old = {name: store_flags.read_all(db, name) for name in ("pool_seats", "tails", "watch")}
    pvals = store_measures.read(db, [*UNIT_KEYS, "measure", "value", "p_value", "reason"], sorted(P_FLAGGED.values()))
    seats, tails = _pool_groups(db, units, (observed, undefined, actual_seats), old, store_flags.group_hashes(db),
                                config, full, report, progress)
    districts = units.set_index(UNIT_KEYS)["districts_eligible"]
    cover = stored_coverage(db).units
    coverage_share = pd.to_numeric(cover.set_index(UNIT_KEYS)["seat_coverage"], errors="coerce").astype(float)
    partial = pd.Series(partial_units(units, config), index=pd.MultiIndex.from_frame(units[UNIT_KEYS]))
    judged = context_stats(judge(tails, pvals, districts, config, coverage_share, partial))
    judged = judged.merge(plans[[*UNIT_KEYS, "plan_id"]], on=UNIT_KEYS, how="left")
    watch = watch_list(judged, plans, seats, config)
    report.flags = int(judged["flagged"].sum())
    report.on_watch = len(watch)

    group_load = E.group_loads(units, loads)
    events = E.unit_events(old["tails"], judged, group_load, stamp)
    events += E.watch_events(old["watch"], watch, E.cycles_of_plans(plans), group_load, stamp)
    report.events = [e["text"] for e in events]

    def write(conn) -> FlagsReport:
        write_inferred(conn, inferred)
        store_flags.replace_all(
            conn,
            seats=_sql_rows(seats, store_flags.SEAT_COLUMNS, POOL_METHOD_VERSION, stamp),
            tails=_sql_rows(judged, store_flags.TAIL_COLUMNS, stamp),
            watch_columns=list(watch.columns),
            watch=_sql_rows(watch, list(watch.columns), stamp),
            events=[(e["scope"], e["cycle"], e["state"], e["chamber"], e["plan_id"], e["measure"], e["event"],
                     e["direction"], e["why"], stamp, e["load_id"]) for e in events],
        )
        return report

    return write


def _pool_groups(db: sqlite_utils.Database, units: pd.DataFrame, stored: tuple, old: dict, stored_hash: dict,
                 config: Config, full: bool, report: FlagsReport, progress) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Expected seats and tails of every (cycle, chamber) group: recomputed where the group's inputs
    changed (or ``full``), reading that group's stored reductions only; else taken over from what
    the previous run stored."""
    from monitor.inputs import measure_inputs, measured_contests, reduced_contests
    from monitor.tails import NULL_FLAGGED, group_hash, pool_group

    observed, undefined, actual_seats = stored
    old_seats, old_tails = old["pool_seats"], old["tails"]
    seat_frames, tail_frames = [], []
    groups = units.groupby(["cycle", "chamber"], sort=True)
    for done, ((cycle, chamber), part) in enumerate(groups):
        if progress is not None:
            progress("flags", done, groups.ngroups, f"{cycle} {chamber}")
        report.groups_total += 1
        digest = group_hash(part, config)
        if not full and stored_hash.get(f"{cycle}|{chamber}") == digest:
            keep = (old_seats["cycle"] == cycle) & (old_seats["chamber"] == chamber)
            seat_frames.append(old_seats[keep].drop(columns=["method_version", "computed_at"]))
            keep = (old_tails["cycle"] == cycle) & (old_tails["chamber"] == chamber) & old_tails["measure"].isin(NULL_FLAGGED)
            tail_frames.append(old_tails[keep][[*UNIT_KEYS, "measure", "value", "null_percentile", "null_low",
                                                 "null_high", "null_dropped", "reason"]])
            continue
        report.groups_computed += 1
        report.units_pooled += len(part)
        rows = part.index.to_numpy()
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
        seats["inputs_hash"] = digest
        seat_frames.append(seats.assign(_fresh=True))
        tail_frames.append(tails)
    seats = pd.concat(seat_frames, ignore_index=True) if seat_frames else pd.DataFrame(columns=[*UNIT_KEYS, "excess_seats"])
    tails = pd.concat(tail_frames, ignore_index=True) if tail_frames else pd.DataFrame(columns=[*UNIT_KEYS, "measure", "value"])
    return seats, tails


def _sql_rows(frame: pd.DataFrame, columns, *extra) -> list[tuple]:
    """The rows of ``frame`` as SQL values of ``columns`` (None for a column it lacks), each
    followed by ``extra``; read column by column (every row of the tails is written each run)."""
    cols = [[_sql(v) for v in frame[c].tolist()] if c in frame.columns else [None] * len(frame) for c in columns]
    return [(*row, *extra) for row in zip(*cols)]


def _sql(value):
    kind = type(value)
    if kind is str or kind is int:
        return value
    if kind is float:
        return value if math.isfinite(value) else None
    if value is None:
        return None
    if isinstance(value, float) and not np.isfinite(value):
        return None
    if hasattr(value, "item"):
        value = value.item()
        if isinstance(value, float) and not np.isfinite(value):
            return None
    if value is pd.NA or value is pd.NaT:
        return None
    return value




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
