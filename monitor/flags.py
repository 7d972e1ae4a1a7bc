"""National tails, flags with history, and the watch list.

For every (cycle, chamber) the current districts nationwide form the pool. Each unit's signed
measures are set against their *null*: the same measures on simulated delegations of the unit's
size and statewide vote drawn from that pool (``monitor.pool``). A unit is flagged on a measure
when the measure lies in the outer tails of its null (``flags.tail`` each side, default 2.5%),
or, for the lopsided-margins t-test and the mean-median z-test, when their own p is below
``flags.p_threshold`` (default 0.05); and only when the state has at least
``flags.min_districts`` districts. Nothing is ranked or cut at a fixed share: in a federation
with no gerrymander few units are flagged, in one with many all of them can be.

A plan is **on watch** when at least ``flags.watch_cycles`` (2) of its cycles are each flagged by
at least ``flags.watch_measures`` (2) measures agreeing in direction. Severity is the seats at
stake: the mean of the excess seats over the plan's agreeing cycles (absolute, in seats);
``concurring`` is the largest number of measures agreeing in one cycle.

Every raise and clear of a unit flag or of a watch entry is written to ``flag_events`` with
what, when, why and the load that caused it: the newest load among the units of the (cycle,
chamber) group whose pool the null is drawn from (over the plan's cycles, for a watch entry), since
a correction in one state moves every other state's null in that group.

Observed values and their undefined cases are the measures engine's (:func:`engine_values`): a
measure stored as null in ``measures`` is null in ``tails`` with the same reason, never flagged and
left out of the cross-state context.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd
import sqlite_utils

from monitor import measures as M
from monitor import pool as P
from monitor.compute import measure_settings, settings_salt
from monitor.config import Config
from monitor.coverage import not_flagged_reason, stored_coverage
from monitor.inputs import UNIT_KEYS, measure_inputs, reduced_contests
from monitor.plans import assign_plans, write_inferred
from store import write_from_snapshot

POOL_METHOD_VERSION = "pool-2"  # pool-2: observed values and null rules taken from the engine
#: measures judged against their national-pool null, by the name they carry in ``tails``
NULL_FLAGGED = ("efficiency_gap", "mean_median", "declination", "partisan_bias", "seats")
#: measures judged by their own p-value (stored in ``measures.p_value``)
P_FLAGGED = {"lopsided": "lopsided_t", "mean_median": "mean_median"}
FLAG_MEASURES = ("efficiency_gap", "mean_median", "declination", "partisan_bias", "seats", "lopsided")

#: Thresholds proposed in the legal literature, drawn as reference lines: proposals, not law.
PROPOSED_THRESHOLDS = [
    {"measure": "efficiency_gap_seats", "value": 2.0, "unit": "seats", "applies_to": "congressional plans",
     "source": "Stephanopoulos & McGhee (2015), 82 U. Chi. L. Rev. 831, as reported in press summaries of "
               "the paper (not checked against the paper's text)"},
    {"measure": "efficiency_gap", "value": 0.08, "unit": "share", "applies_to": "state-house plans",
     "source": "Stephanopoulos & McGhee (2015), as reported in press summaries of the paper"},
    {"measure": "efficiency_gap", "value": 0.07, "unit": "share", "applies_to": "state-house plans",
     "source": "threshold argued by the plaintiffs in Whitford v. Gill (2016), as reported in the press"},
]


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


def _group_seed(seed: int, cycle: int, chamber: str) -> list[int]:
    digest = hashlib.sha256(f"{cycle}|{chamber}".encode()).digest()
    return [seed, int.from_bytes(digest[:8], "little")]


def _state_key(state: str) -> int:
    """A stable non-negative integer per state: its simulation stream's key."""
    return int.from_bytes(hashlib.sha256(state.encode()).digest()[:4], "little")


def _group_hash(units: pd.DataFrame, config: Config) -> str:
    h = hashlib.sha256(POOL_METHOD_VERSION.encode())
    h.update(json.dumps({k: config[k] for k in (
        "pool.tolerance", "pool.draws", "pool.exclude_own_state", "pool.seed", "flags.min_districts",
        "flags.tail")}, sort_keys=True).encode())
    for key, value in sorted(zip(units["state"], units["inputs_hash"])):
        h.update(f"{key}\x1f{value}\n".encode())
    return h.hexdigest()


#: the engine measure whose stored value (and null reason) each tails measure takes
ENGINE_NAME = {"efficiency_gap": "efficiency_gap", "mean_median": "mean_median", "declination": "declination",
               "partisan_bias": "partisan_bias", "seats": "seats_a"}
#: ``seats`` is judged as an asymmetry measure: besides the engine's own rule for seats_a it is
#: null wherever the engine's rule for the asymmetry measures makes the seat-form efficiency gap null
#: (fewer than 2 districts, every district uncontested, ...)
SEATS_GATE = "efficiency_gap_seats"


def engine_values(arrays, members: np.ndarray, config: Config) -> tuple[dict, dict]:
    """The observed value and null reason of every tails measure for the units ``members``, as the
    measures engine stores them (same inputs, same settings, same undefined rules): name ->
    array of values (NaN where null) and name -> array of reasons ("" where defined)."""
    rows = np.isin(arrays.unit, members)
    local = np.searchsorted(members, arrays.unit[rows])
    settings = replace(measure_settings(config), interval_draws=0)
    long = M.compute_measures(local, arrays.votes_a[rows], arrays.votes_b[rows], arrays.uncontested[rows],
                              len(members), settings, None)
    wide_value = long.pivot(index="unit", columns="measure", values="value").reindex(np.arange(len(members)))
    wide_reason = long.pivot(index="unit", columns="measure", values="reason").reindex(np.arange(len(members)))
    values, reasons = {}, {}
    for name, engine in ENGINE_NAME.items():
        values[name] = wide_value[engine].to_numpy(float)
        reasons[name] = wide_reason[engine].fillna("").to_numpy(object)
    gate = wide_reason[SEATS_GATE].fillna("").to_numpy(object)
    take = (reasons["seats"] == "") & (gate != "")
    reasons["seats"] = np.where(take, gate, reasons["seats"])
    values["seats"] = np.where(reasons["seats"] != "", np.nan, values["seats"])
    return values, reasons


def pool_group(arrays, members: np.ndarray, config: Config, cycle: int, chamber: str) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Expected seats and null percentiles for the units ``members`` (indexes into arrays.units),
    all of one cycle and chamber. Pure: arrays in, frames out.

    The observed values follow the measures engine exactly (:func:`engine_values`): a measure the
    engine stores as null is null here too, with the engine's reason, has no null percentile (so
    it is never flagged) and stays out of the cross-state context. The null distributions are
    the measures on the simulated delegations (``monitor.pool``)."""
    units = arrays.units.loc[members]
    rows = np.isin(arrays.unit, members)
    va, vb, st = arrays.votes_a[rows], arrays.votes_b[rows], arrays.state[rows]
    ok = (va + vb) > 0
    seats_rows, tail_rows = [], []
    n = units["districts_eligible"].to_numpy()
    local = np.searchsorted(members, arrays.unit[rows])
    observed, undefined = engine_values(arrays, members, config)
    actual_seats = M.seats_a(local, va, vb, len(members))  # the expectation compares every unit's seats
    tot = np.bincount(local, va + vb, len(members))
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.bincount(local, va, len(members)) / tot
    live = (n >= 2) & np.isfinite(share)
    if ok.sum() >= 2 and live.any():
        pool = P.national_pool(va[ok], vb[ok], st[ok])
        idx = np.flatnonzero(live)
        states = units["state"].to_numpy()[idx]
        seats, nulls = P.compare_with_pool(
            pool, states, n[idx], share[idx], actual_seats[idx], {k: v[idx] for k, v in observed.items()},
            rng=np.random.SeedSequence(_group_seed(config["pool.seed"], cycle, chamber)),
            unit_key=np.array([_state_key(s) for s in states], dtype=np.int64),
            tol=config["pool.tolerance"], accepted=config["pool.draws"],
            exclude_own=config["pool.exclude_own_state"], alpha=config["flags.tail"],
        )
    else:
        idx = np.array([], dtype=int)
    pos = {u: i for i, u in enumerate(idx)}
    for j, (_, u) in enumerate(units.iterrows()):
        base = {"cycle": int(u["cycle"]), "state": u["state"], "chamber": u["chamber"]}
        i = pos.get(j)
        if i is None or seats.n_accepted[i] == 0:
            reason = ("fewer than 2 districts" if n[j] < 2 else
                      "no simulated delegation reached the state's vote share" if i is not None else
                      "no two-party votes")
            seats_rows.append({**base, "districts": int(n[j]), "vote_share": _f(share[j]),
                               "seats_a": _f(actual_seats[j]), "reason": reason})
            for name in NULL_FLAGGED:
                tail_rows.append({**base, "measure": name, "value": _f(observed[name][j]),
                                  "reason": undefined[name][j] or reason})
            continue
        seats_rows.append({**base, "districts": int(n[j]), "vote_share": _f(share[j]),
                           "seats_a": _f(actual_seats[j]), "expected_seats": _f(seats.expected_seats[i]),
                           "low": _f(seats.low[i]), "high": _f(seats.high[i]), "percentile": _f(seats.percentile[i]),
                           "excess_seats": _f(seats.excess_seats[i]), "draws": int(seats.n_accepted[i]),
                           "ess": _f(seats.ess[i]), "mc_se": _f(seats.mc_se[i]), "reason": None})
        for name in NULL_FLAGGED:
            r = nulls[name]
            value = observed[name][j]
            if undefined[name][j]:  # null in the measures table: null here, with the engine's reason
                tail_rows.append({**base, "measure": name, "value": None, "null_low": _f(r.null_low[i]),
                                  "null_high": _f(r.null_high[i]), "null_dropped": _f(r.nan_fraction[i]),
                                  "reason": undefined[name][j]})
                continue
            tail_rows.append({**base, "measure": name, "value": _f(value), "null_percentile": _f(r.percentile[i]),
                              "null_low": _f(r.null_low[i]), "null_high": _f(r.null_high[i]),
                              "null_dropped": _f(r.nan_fraction[i]),
                              "reason": None if np.isfinite(r.percentile[i])
                              else "undefined on every simulated delegation"})
    return pd.DataFrame(seats_rows), pd.DataFrame(tail_rows)


def _f(x) -> float | None:
    x = float(x)
    return x if np.isfinite(x) else None


def judge(tails: pd.DataFrame, pvals: pd.DataFrame, districts: pd.Series, config: Config,
          seat_coverage: pd.Series | None = None) -> pd.DataFrame:
    """Add the flag decision to every tails row (and the p-value-based ``lopsided`` rows).

    ``pvals``: cycle, state, chamber, measure, value, p_value from the measures table.
    ``districts``: eligible districts per unit key (cycle, state, chamber).
    ``seat_coverage``: the share of each unit's seats in the measures (:mod:`monitor.coverage`);
    a unit below ``flags.min_coverage`` is never flagged and its rows say why (a unit without a
    coverage row is judged as before).
    """
    alpha, p_cut, minimum = config["flags.tail"], config["flags.p_threshold"], config["flags.min_districts"]
    t = tails.copy()
    for col in ("null_percentile", "p_value", "value"):
        if col not in t:
            t[col] = np.nan
    lop = pvals[pvals["measure"] == P_FLAGGED["lopsided"]].assign(measure="lopsided")
    mm = pvals[pvals["measure"] == P_FLAGGED["mean_median"]][[*UNIT_KEYS, "p_value"]]
    t = t.drop(columns=["p_value"]).merge(
        mm.assign(measure="mean_median"), on=[*UNIT_KEYS, "measure"], how="left")
    t = pd.concat([t, lop[[*UNIT_KEYS, "measure", "value", "p_value", "reason"]]], ignore_index=True)
    n = districts.reindex(pd.MultiIndex.from_frame(t[UNIT_KEYS])).to_numpy()
    pct = t["null_percentile"].to_numpy(float)
    p = t["p_value"].to_numpy(float)
    v = t["value"].to_numpy(float)
    big = np.nan_to_num(n, nan=0) >= minimum
    share = (seat_coverage.reindex(pd.MultiIndex.from_frame(t[UNIT_KEYS])).to_numpy(float)
             if seat_coverage is not None else np.full(len(t), np.nan))
    thin = np.isfinite(share) & (share < config["flags.min_coverage"])
    big &= ~thin
    by_null = big & ((pct > 1 - alpha) | (pct < alpha))
    by_p = big & (p < p_cut) & np.isfinite(v) & (v != 0)
    direction_null = np.where(pct > 0.5, "a", "b")
    direction_p = np.where(v > 0, "a", "b")
    t["flagged"] = (by_null | by_p).astype(int)
    t["direction"] = np.where(by_null, direction_null, np.where(by_p, direction_p, None))
    t["basis"] = np.where(by_null & by_p, "null tail and p-value",
                          np.where(by_null, "null tail", np.where(by_p, "p-value", None)))
    small = np.nan_to_num(n, nan=0) < minimum
    # no reason yet: null, or the engine's "" for a defined value (the lopsided rows come from measures)
    unexplained = t["reason"].isna() | (t["reason"] == "")
    t["reason"] = np.where(small & unexplained, f"fewer than {minimum} districts: not flagged", t["reason"])
    coverage_reason = [not_flagged_reason(x, config["flags.min_coverage"]) for x in share]
    t["reason"] = np.where(thin & ~small & unexplained, coverage_reason, t["reason"])
    return t


def context_stats(t: pd.DataFrame) -> pd.DataFrame:
    """Cross-state percentile and robust z within each cycle and chamber, and across all cycles."""
    t = t.copy()
    t["cross_percentile"] = np.nan
    t["robust_z"] = np.nan
    t["robust_z_all"] = np.nan
    for measure, part in t.groupby("measure"):
        values = part["value"].to_numpy(float)
        group = (part["cycle"].astype(str) + "|" + part["chamber"]).to_numpy()
        t.loc[part.index, "cross_percentile"] = P.cross_state_percentile(values, group)
        t.loc[part.index, "robust_z"] = P.robust_z(values, group)
        t.loc[part.index, "robust_z_all"] = P.robust_z(values, part["chamber"].to_numpy())
    return t


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
    rows = []
    for (state, chamber, plan_id), group in per.groupby(["state", "chamber", "plan_id"], sort=True):
        counts = group.groupby("direction")["cycle"].nunique()
        if counts.max() < need_cycles:
            continue
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


def _flag_step(db: sqlite_utils.Database, config: Config, full: bool, stamp: str, progress=None):
    """Read the store, compute tails, flags, watch list and events; return the writer."""
    report = FlagsReport()
    contests = reduced_contests(db)
    arrays = measure_inputs(contests, config, settings_salt(config))
    units = arrays.units
    loads = contests.drop_duplicates("unit_id").set_index("unit_id")["load_id"]
    plans, inferred = assign_plans(db, units)
    stored_hash = dict(db.execute(
        "SELECT cycle || '|' || chamber, MIN(inputs_hash) FROM pool_seats GROUP BY cycle, chamber").fetchall())
    old_seats = pd.read_sql_query("SELECT * FROM pool_seats", db.conn)
    old_tails = pd.read_sql_query("SELECT * FROM tails", db.conn)
    old_watch = pd.read_sql_query("SELECT * FROM watch", db.conn)
    pvals = pd.read_sql_query(
        "SELECT cycle, state, chamber, measure, value, p_value, reason FROM measures WHERE measure IN (?, ?)",
        db.conn, params=[P_FLAGGED["lopsided"], P_FLAGGED["mean_median"]])
    cover = stored_coverage(db).units
    coverage_share = pd.to_numeric(cover.set_index(UNIT_KEYS)["seat_coverage"], errors="coerce").astype(float)
    seat_frames, tail_frames = [], []
    groups = units.groupby(["cycle", "chamber"], sort=True)
    for done, ((cycle, chamber), part) in enumerate(groups):
        if progress is not None:
            progress("flags", done, groups.ngroups, f"{cycle} {chamber}")
        report.groups_total += 1
        group_hash = _group_hash(part, config)
        key = f"{cycle}|{chamber}"
        if not full and stored_hash.get(key) == group_hash:
            keep = (old_seats["cycle"] == cycle) & (old_seats["chamber"] == chamber)
            seat_frames.append(old_seats[keep].drop(columns=["method_version", "computed_at"]))
            keep = (old_tails["cycle"] == cycle) & (old_tails["chamber"] == chamber) & old_tails["measure"].isin(NULL_FLAGGED)
            tail_frames.append(old_tails[keep][[*UNIT_KEYS, "measure", "value", "null_percentile", "null_low",
                                                 "null_high", "null_dropped", "reason"]])
            continue
        report.groups_computed += 1
        report.units_pooled += len(part)
        seats, tails = pool_group(arrays, part.index.to_numpy(), config, int(cycle), chamber)
        seats["inputs_hash"] = group_hash
        seat_frames.append(seats.assign(_fresh=True))
        tail_frames.append(tails)
    seats = pd.concat(seat_frames, ignore_index=True) if seat_frames else pd.DataFrame(columns=[*UNIT_KEYS, "excess_seats"])
    tails = pd.concat(tail_frames, ignore_index=True) if tail_frames else pd.DataFrame(columns=[*UNIT_KEYS, "measure", "value"])
    districts = units.set_index(UNIT_KEYS)["districts_eligible"]
    judged = context_stats(judge(tails, pvals, districts, config, coverage_share))
    judged = judged.merge(plans[[*UNIT_KEYS, "plan_id"]], on=UNIT_KEYS, how="left")
    watch = watch_list(judged, plans, seats, config)
    report.flags = int(judged["flagged"].sum())
    report.on_watch = len(watch)

    group_load = _group_loads(units, loads)
    events = _unit_events(old_tails, judged, group_load, stamp)
    events += _watch_events(old_watch, watch, _plan_cycles(plans), group_load, stamp)
    report.events = [e["text"] for e in events]

    def write(conn) -> None:
        write_inferred(conn, inferred)
        conn.execute("DELETE FROM pool_seats")
        seat_cols = ["cycle", "state", "chamber", "districts", "vote_share", "seats_a", "expected_seats", "low",
                     "high", "percentile", "excess_seats", "draws", "ess", "mc_se", "reason", "inputs_hash"]
        conn.executemany(
            f"INSERT INTO pool_seats ({', '.join(seat_cols)}, method_version, computed_at) "
            f"VALUES ({', '.join('?' for _ in seat_cols)}, ?, ?)",
            [(*[_sql(r.get(c)) for c in seat_cols], POOL_METHOD_VERSION, stamp) for r in seats.to_dict("records")],
        )
        conn.execute("DELETE FROM tails")
        tail_cols = ["cycle", "state", "chamber", "measure", "value", "null_percentile", "null_low", "null_high",
                     "null_dropped", "p_value", "cross_percentile", "robust_z", "robust_z_all", "flagged",
                     "direction", "basis", "plan_id", "reason"]
        conn.executemany(
            f"INSERT INTO tails ({', '.join(tail_cols)}, computed_at) VALUES ({', '.join('?' for _ in tail_cols)}, ?)",
            [(*[_sql(r.get(c)) for c in tail_cols], stamp) for r in judged.to_dict("records")],
        )
        conn.execute("DELETE FROM watch")
        watch_cols = list(watch.columns)
        conn.executemany(
            f"INSERT INTO watch ({', '.join(watch_cols)}, computed_at) VALUES ({', '.join('?' for _ in watch_cols)}, ?)",
            [(*[_sql(r[c]) for c in watch_cols], stamp) for r in watch.to_dict("records")],
        )
        conn.executemany(
            "INSERT INTO flag_events (scope, cycle, state, chamber, plan_id, measure, event, direction, why, at, load_id) "
            "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
            [(e["scope"], e["cycle"], e["state"], e["chamber"], e["plan_id"], e["measure"], e["event"],
              e["direction"], e["why"], stamp, e["load_id"]) for e in events],
        )
        return report

    return write


def _sql(value):
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


def _why(r) -> str:
    if r.get("basis") == "p-value":
        return f"{_measure_text(r['measure'], r['value'])} with p = {r['p_value']:.3g} below the threshold"
    pct = r.get("null_percentile")
    text = f"{_measure_text(r['measure'], r['value'])} at percentile {pct:.3f} of its national-pool null"
    if r.get("basis") == "null tail and p-value":
        text += f" (and p = {r['p_value']:.3g})"
    return text


def _group_loads(units: pd.DataFrame, loads: pd.Series) -> dict[tuple, int]:
    """The newest load among the current units of each (cycle, chamber) group.

    A unit's null is drawn from its whole group's districts, so a load of any state in the group
    (a new cycle, a correction) can raise or clear another state's flag: that load is the one a
    change is credited to."""
    load = pd.to_numeric(units["unit_id"].map(loads), errors="coerce")
    frame = pd.DataFrame({"cycle": units["cycle"].astype(int), "chamber": units["chamber"], "load": load})
    newest = frame.dropna(subset=["load"]).groupby(["cycle", "chamber"])["load"].max()
    return {(int(c), ch): int(v) for (c, ch), v in newest.items()}


def _plan_cycles(plans: pd.DataFrame) -> dict[tuple, set]:
    """(state, chamber, plan_id) -> the cycles of the plan's current units."""
    out: dict[tuple, set] = {}
    for r in plans[["cycle", "state", "chamber", "plan_id"]].itertuples(index=False):
        out.setdefault((r.state, r.chamber, r.plan_id), set()).add(int(r.cycle))
    return out


def _unit_events(old: pd.DataFrame, new: pd.DataFrame, group_load: dict[tuple, int], stamp) -> list[dict]:
    """Raised and cleared unit flags, each credited to the newest load of its (cycle, chamber)
    group (:func:`_group_loads`)."""
    key = [*UNIT_KEYS, "measure"]
    before = {tuple(r[k] for k in key): r for r in old[old["flagged"] == 1].to_dict("records")} if not old.empty else {}
    after = {tuple(r[k] for k in key): r for r in new[new["flagged"] == 1].to_dict("records")}
    current = {tuple(r[k] for k in key): r for r in new.to_dict("records")}
    events = []
    for k in sorted(set(before) | set(after), key=lambda k: (k[0], k[1], k[2], k[3])):
        b, a = before.get(k), after.get(k)
        load = group_load.get((int(k[0]), k[2]))
        if a is not None and (b is None or b["direction"] != a["direction"]):
            event, direction, why = "raised", a["direction"], _why(a)
        elif b is not None and a is None:
            now = current.get(k)
            event, direction = "cleared", b["direction"]
            if now is None:
                why = "the unit is no longer in the store"
            elif str(now.get("reason") or "").endswith("not flagged"):  # too few districts or seats covered
                why = now["reason"]
            elif now.get("value") is None or not np.isfinite(now.get("value") or np.nan):
                why = f"{k[3]} is now undefined ({now.get('reason') or 'no value'})"
            elif now.get("null_percentile") is not None and np.isfinite(now.get("null_percentile") or np.nan):
                why = f"{_measure_text(k[3], now['value'])} now, at percentile {now['null_percentile']:.3f} of its null"
            else:
                why = f"{_measure_text(k[3], now['value'])} now" + (f" with p = {now['p_value']:.3g}" if now.get('p_value') is not None and np.isfinite(now['p_value']) else "")
        else:
            continue
        events.append({"scope": "unit", "cycle": int(k[0]), "state": k[1], "chamber": k[2],
                       "plan_id": (a or b).get("plan_id"), "measure": k[3], "event": event,
                       "direction": direction, "why": why, "load_id": load,
                       "text": f"{event} {k[1]} {k[2]} {k[0]} {k[3]} (favours {direction}): {why}"})
    return events


def _watch_events(old: pd.DataFrame, new: pd.DataFrame, plan_cycles: dict[tuple, set],
                  group_load: dict[tuple, int], stamp) -> list[dict]:
    """Plans put on or taken off the watch list, each credited to the newest load among the
    (cycle, chamber) groups of the plan's cycles (:func:`_group_loads`)."""
    key = ["state", "chamber", "plan_id"]
    before = {tuple(r[k] for k in key): r for r in old.to_dict("records")}
    after = {tuple(r[k] for k in key): r for r in new.to_dict("records")}
    events = []
    for k in sorted(set(before) | set(after)):
        b, a = before.get(k), after.get(k)
        if a is not None and (b is None or b["favours"] != a["favours"]):
            event, direction = "on watch", a["favours"]
            why = (f"cycles {a['cycles']} each flagged by at least two measures favouring {a['favours']} "
                   f"({a['measures']}); {_stake_text(a['seats_at_stake'])}")
        elif b is not None and a is None:
            event, direction = "off watch", b["favours"]
            why = "fewer than two cycles of the plan are now flagged by two agreeing measures"
        else:
            continue
        cycles = set(plan_cycles.get(k, ()))
        for entry in (a, b):
            if entry is not None:
                cycles |= {int(c) for c in str(entry["cycles"]).split()}
        credited = [group_load[(c, k[1])] for c in cycles if (c, k[1]) in group_load]
        inferred = bool((a or b).get("inferred"))
        plan = f"{k[2]} (inferred)" if inferred else k[2]
        events.append({"scope": "plan", "cycle": None, "state": k[0], "chamber": k[1], "plan_id": k[2],
                       "measure": None, "event": event, "direction": direction, "why": why,
                       "load_id": max(credited) if credited else None,
                       "text": f"{event}: {k[0]} {k[1]} plan {plan} (favours {direction}): {why}"})
    return events


def _measure_text(measure: str, value: float) -> str:
    """A measure's value as change texts write it: seats as a count of seats, signed measures with
    their sign (positive favours a)."""
    if measure == "seats":
        return f"seats won by a {_seats(value)}"
    return f"{measure} {value:+.3f}"


def _seats(value: float) -> str:
    """A seat count: whole seats without decimals, a tie's half seat as .5."""
    return f"{value:.0f}" if float(value).is_integer() else f"{value:.1f}"


def _stake_text(stake) -> str:
    if stake is None or (isinstance(stake, float) and not np.isfinite(stake)):
        return "seats at stake unknown"
    return f"seats at stake {stake:+.1f} (positive favours a)"


WATCH_CSV_COLUMNS = ["state", "chamber", "plan_id", "favours", "severity", "cycles", "measures",
                     "drawn_by", "inferred", "seats_at_stake", "concurring", "since"]


def flag_table(db: sqlite_utils.Database, show: str, *, cycle: int | None = None,
               chamber: str | None = None) -> pd.DataFrame:
    """What ``levelfield flags`` prints: flagged units, the watch list or the flag history.

    Every view says whether the plan is inferred (``inferred`` = 1: no loaded era covers it, a
    plan per decade was assumed). Cycles are integers (empty for plan-level events). Flagged units
    say whether the unit is incomplete (districts missing or left out of its measures: which, and
    why); the watch list names the plan's flagged cycles that are incomplete."""
    if show not in ("flags", "watch", "changes"):
        raise ValueError(f"show must be flags, watch or changes, got {show!r}")
    where, params = [], []
    if chamber is not None:
        where.append("x.chamber = ?")
        params.append(chamber)
    if show == "watch":
        if cycle is not None:
            where.append("(' ' || x.cycles || ' ') LIKE ?")
            params.append(f"% {cycle} %")
        clause = f"WHERE {' AND '.join(where)}" if where else ""
        watch = pd.read_sql_query(
            f"SELECT {', '.join('x.' + c for c in WATCH_CSV_COLUMNS)} FROM watch x {clause} "
            "ORDER BY x.severity DESC, x.concurring DESC, x.state, x.chamber, x.plan_id", db.conn, params=params)
        return _incomplete_cycles(watch, stored_coverage(db).units)
    if cycle is not None:
        where.append("x.cycle = ?")
        params.append(cycle)
    plan = ("LEFT JOIN plans p ON p.state = x.state AND p.chamber = x.chamber AND p.plan_id = x.plan_id")
    if show == "changes":
        clause = f"WHERE {' AND '.join(where)}" if where else ""
        frame = pd.read_sql_query(
            "SELECT x.id, x.at, x.scope, x.event, x.cycle, x.state, x.chamber, x.plan_id, p.inferred, x.measure, "
            f"x.direction AS favours, x.why, x.load_id FROM flag_events x {plan} {clause} ORDER BY x.id",
            db.conn, params=params)
        for col in ("cycle", "load_id", "inferred"):
            frame[col] = frame[col].astype("Int64")
        return frame
    where.append("x.flagged = 1")
    frame = pd.read_sql_query(
        "SELECT x.cycle, x.state, x.chamber, x.plan_id, p.inferred, x.measure, x.direction AS favours, x.basis, "
        f"x.value, x.null_percentile, x.p_value FROM tails x {plan} WHERE {' AND '.join(where)} "
        "ORDER BY x.cycle, x.state, x.chamber, x.measure", db.conn, params=params)
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
