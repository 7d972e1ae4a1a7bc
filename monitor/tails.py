"""National tails: each unit's stored measures against their nulls from the national pool, and the
flag decision.

For every (cycle, chamber) the current districts nationwide (their stored reductions, after the
uncontested policy) form the pool. Each unit's measures judged against a null (the registry's
flags with ``null``) are set against the same measures on simulated delegations of the unit's size
and statewide vote drawn from that pool (:mod:`monitor.pool`). The observed values, and whether
they are defined, are the stored ``measures`` rows: a measure stored as null is null in ``tails``
with the same reason, never flagged and left out of the cross-state context.
"""

from __future__ import annotations

import hashlib
import json

import numpy as np
import pandas as pd

from monitor import pool as P
from monitor.config import Config
from monitor.coverage import not_flagged_reason
from monitor.flag_scope import POOL_METHOD_VERSION, group_hash  # noqa: F401 (the pool's digest, named here too)
from monitor.inputs import UNIT_KEYS
from monitor.measures import registry

#: the measures the flags judge (the registry's ``flag`` declarations), by their flag name
JUDGED = registry.flag_by_name()
#: flag names judged against their national-pool null
NULL_FLAGGED = tuple(name for name, m in JUDGED.items() if m.flag.null)
#: flag name -> the stored measure whose p-value judges it
P_FLAGGED = {name: m.name for name, m in JUDGED.items() if m.flag.p_value}
#: the stored measure whose value is a unit's actual seats (what the expected seats compare with)
SEATS = "seats_a"


def stored_names() -> list[str]:
    """The stored measures the tails read: the null-judged ones, the measures whose undefined rules
    they borrow, and the actual seats."""
    names = {JUDGED[n].name for n in NULL_FLAGGED} | {SEATS}
    names |= {JUDGED[n].flag.also_undefined_where for n in NULL_FLAGGED if JUDGED[n].flag.also_undefined_where}
    return sorted(names)


def observed_values(measures: pd.DataFrame, units: pd.DataFrame) -> tuple[dict, dict, np.ndarray]:
    """From stored measure rows (cycle, state, chamber, measure, value, reason), for ``units`` (in
    their order): flag name -> values (NaN where null) and flag name -> reasons ("" where defined)
    of every null-judged measure, and the actual seats."""
    keys = pd.MultiIndex.from_frame(units[UNIT_KEYS])
    wide_value = measures.pivot(index=UNIT_KEYS, columns="measure", values="value").reindex(keys)
    wide_reason = measures.pivot(index=UNIT_KEYS, columns="measure", values="reason").reindex(keys)

    def column(frame, name, fill, kind):
        return frame[name].to_numpy(kind) if name in frame else np.full(len(units), fill, dtype=kind)

    values, reasons = {}, {}
    for name in NULL_FLAGGED:
        m = JUDGED[name]
        values[name] = column(wide_value, m.name, np.nan, float)
        reasons[name] = pd.Series(column(wide_reason, m.name, "", object)).fillna("").to_numpy(object)
        if m.flag.also_undefined_where:  # e.g. seats: judged like an asymmetry measure
            gate = pd.Series(column(wide_reason, m.flag.also_undefined_where, "", object)).fillna("").to_numpy(object)
            reasons[name] = np.where((reasons[name] == "") & (gate != ""), gate, reasons[name])
            values[name] = np.where(reasons[name] != "", np.nan, values[name])
    return values, reasons, column(wide_value, SEATS, np.nan, float)


def group_seed(seed: int, cycle: int, chamber: str) -> list[int]:
    digest = hashlib.sha256(f"{cycle}|{chamber}".encode()).digest()
    return [seed, int.from_bytes(digest[:8], "little")]


def state_key(state: str) -> int:
    """A stable non-negative integer per state: its simulation stream's key."""
    return int.from_bytes(hashlib.sha256(state.encode()).digest()[:4], "little")


def pool_group(arrays, members: np.ndarray, observed: dict, undefined: dict, actual_seats: np.ndarray,
               config: Config, cycle: int, chamber: str) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Expected seats and null percentiles for the units ``members`` (indexes into arrays.units),
    all of one cycle and chamber; ``observed``, ``undefined`` and ``actual_seats`` are the
    members' stored values (:func:`observed_values`). Pure: arrays in, frames out."""
    units = arrays.units.loc[members]
    rows = np.isin(arrays.unit, members)
    va, vb, st = arrays.votes_a[rows], arrays.votes_b[rows], arrays.state[rows]
    ok = (va + vb) > 0
    n = units["districts_eligible"].to_numpy()
    local = np.searchsorted(members, arrays.unit[rows])
    tot = np.bincount(local, va + vb, len(members))
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.bincount(local, va, len(members)) / tot
    live = (n >= 2) & np.isfinite(share)
    idx, seats, nulls = np.array([], dtype=int), None, {}
    if ok.sum() >= 2 and live.any():
        pool = P.national_pool(va[ok], vb[ok], st[ok])
        idx = np.flatnonzero(live)
        states = units["state"].to_numpy()[idx]
        seats, nulls = P.compare_with_pool(
            pool, states, n[idx], share[idx], actual_seats[idx], {k: v[idx] for k, v in observed.items()},
            rng=np.random.SeedSequence(group_seed(config["pool.seed"], cycle, chamber)),
            unit_key=np.array([state_key(s) for s in states], dtype=np.int64),
            tol=config["pool.tolerance"], accepted=config["pool.draws"],
            exclude_own=config["pool.exclude_own_state"], alpha=config["flags.tail"],
        )
    pos = {u: i for i, u in enumerate(idx)}
    seats_rows, tail_rows = [], []
    for j, u in enumerate(units[UNIT_KEYS].itertuples(index=False)):
        base = {"cycle": int(u.cycle), "state": u.state, "chamber": u.chamber}
        unit = {**base, "districts": int(n[j]), "vote_share": _f(share[j]), "seats_a": _f(actual_seats[j])}
        i = pos.get(j)
        if i is None or seats.n_accepted[i] == 0:
            reason = ("fewer than 2 districts" if n[j] < 2 else
                      "no simulated delegation reached the state's vote share" if i is not None else
                      "no two-party votes")
            seats_rows.append({**unit, "reason": reason})
            tail_rows += unit_tails(base, j, observed, undefined, None, reason)
            continue
        seats_rows.append({**unit, **_seat_columns(seats, i)})
        bands = {name: {"null_percentile": nulls[name].percentile[i], "null_low": nulls[name].null_low[i],
                        "null_high": nulls[name].null_high[i], "null_dropped": nulls[name].nan_fraction[i]}
                 for name in NULL_FLAGGED}
        tail_rows += unit_tails(base, j, observed, undefined, bands)
    return pd.DataFrame(seats_rows), pd.DataFrame(tail_rows)


def stored_group(seats: pd.DataFrame, bands: pd.DataFrame, units: pd.DataFrame, observed: dict,
                 undefined: dict) -> pd.DataFrame:
    """The tails rows of a group whose pool was not redrawn, as :func:`pool_group` gives them: the
    null bands its stored rows hold (``bands``: the stored tails rows; ``seats``: the stored
    pool rows, whose reason says why a unit has no draws), the observed values and reasons of the
    stored measures (``observed``, ``undefined``: of ``units``, in their order)."""
    band_of = {(int(c), s, ch, m): (p, lo, hi, d) for c, s, ch, m, p, lo, hi, d in zip(
        bands["cycle"], bands["state"], bands["chamber"], bands["measure"], bands["null_percentile"],
        bands["null_low"], bands["null_high"], bands["null_dropped"])}
    no_draws = {(int(c), s, ch): r for c, s, ch, r in zip(seats["cycle"], seats["state"], seats["chamber"],
                                                           seats["reason"]) if isinstance(r, str) and r}
    rows = []
    for j, u in enumerate(units[UNIT_KEYS].itertuples(index=False)):
        base = {"cycle": int(u.cycle), "state": u.state, "chamber": u.chamber}
        key = (base["cycle"], u.state, u.chamber)
        if key in no_draws:
            rows += unit_tails(base, j, observed, undefined, None, no_draws[key])
            continue
        found = {name: band_of.get((*key, name), (np.nan,) * 4) for name in NULL_FLAGGED}
        rows += unit_tails(base, j, observed, undefined, {name: dict(zip(
            ("null_percentile", "null_low", "null_high", "null_dropped"), found[name])) for name in NULL_FLAGGED})
    return pd.DataFrame(rows)


def _seat_columns(seats: P.SeatsResult, i: int) -> dict:
    return {"expected_seats": _f(seats.expected_seats[i]), "low": _f(seats.low[i]), "high": _f(seats.high[i]),
            "percentile": _f(seats.percentile[i]), "excess_seats": _f(seats.excess_seats[i]),
            "draws": int(seats.n_accepted[i]), "ess": _f(seats.ess[i]), "mc_se": _f(seats.mc_se[i]), "reason": None}


def unit_tails(base: dict, j: int, observed: dict, undefined: dict, bands: dict | None,
               reason: str | None = None) -> list[dict]:
    """One unit's tails rows (unit ``j`` of ``observed`` and ``undefined``): against its null
    ``bands`` (measure -> null_percentile, null_low, null_high, null_dropped), or, where the unit
    has no draws (``bands`` None), its values with ``reason`` where the measure has none."""
    if bands is None:
        return [{**base, "measure": name, "value": _f(observed[name][j]), "reason": undefined[name][j] or reason}
                for name in NULL_FLAGGED]
    return [{**base, "measure": name, **_tail_columns(bands[name], observed[name][j], undefined[name][j])}
            for name in NULL_FLAGGED]


def _tail_columns(band: dict, value: float, undefined: str) -> dict:
    """One unit's tails row of one measure: null where the stored measure is (with its reason)."""
    cols = {"null_low": _f(band["null_low"]), "null_high": _f(band["null_high"]),
            "null_dropped": _f(band["null_dropped"])}
    if undefined:
        return {"value": None, **cols, "reason": undefined}
    pct = float(band["null_percentile"])
    return {"value": _f(value), "null_percentile": _f(pct), **cols,
            "reason": None if np.isfinite(pct) else "undefined on every simulated delegation"}


def _f(x) -> float | None:
    if x is None:
        return None
    x = float(x)
    return x if np.isfinite(x) else None


def partial_reason(chamber: str) -> str:
    """Why a per-cycle unit of a staggered chamber is never flagged, in words."""
    from monitor.staggered import whole_code

    return (f"partial: one class of a staggered chamber (the seats elected this cycle, not the chamber): never "
            f"flagged; the whole chamber is judged as {whole_code(chamber)}")


def judge(tails: pd.DataFrame, pvals: pd.DataFrame, districts: pd.Series, config: Config,
          seat_coverage: pd.Series | None = None, partial: pd.Series | None = None) -> pd.DataFrame:
    """Add the flag decision to every tails row (and rows of the measures judged by their p-value
    alone, ``lopsided``).

    ``pvals``: cycle, state, chamber, measure, value, p_value, reason from the measures table.
    ``districts``: eligible districts per unit key (cycle, state, chamber).
    ``seat_coverage``: the share of each unit's seats in the measures (:mod:`monitor.coverage`);
    a unit below ``flags.min_coverage`` is never flagged and its rows say why (a unit without a
    coverage row is judged as before). ``partial``: true for the per-cycle units of staggered
    chambers (:mod:`monitor.staggered`), never flagged either, and saying so.
    """
    alpha, p_cut, minimum = config["flags.tail"], config["flags.p_threshold"], config["flags.min_districts"]
    t = tails.copy()
    for col in ("null_percentile", "p_value", "value"):
        if col not in t:
            t[col] = np.nan
    # a measure judged by its null and its p-value takes the p-value onto its tails row; one
    # judged by its p-value alone gets a row of its own
    both = [(name, stored) for name, stored in P_FLAGGED.items() if name in NULL_FLAGGED]
    alone = [(name, stored) for name, stored in P_FLAGGED.items() if name not in NULL_FLAGGED]
    p_rows = pd.concat([pvals[pvals["measure"] == stored].assign(measure=name) for name, stored in both]
                       or [pvals.iloc[0:0]], ignore_index=True)
    t = t.drop(columns=["p_value"]).merge(p_rows[[*UNIT_KEYS, "measure", "p_value"]], on=[*UNIT_KEYS, "measure"],
                                          how="left")
    own = [pvals[pvals["measure"] == stored].assign(measure=name) for name, stored in alone]
    t = pd.concat([t, *[o[[*UNIT_KEYS, "measure", "value", "p_value", "reason"]] for o in own]], ignore_index=True)
    n = districts.reindex(pd.MultiIndex.from_frame(t[UNIT_KEYS])).to_numpy()
    pct = t["null_percentile"].to_numpy(float)
    p = t["p_value"].to_numpy(float)
    v = t["value"].to_numpy(float)
    big = np.nan_to_num(n, nan=0) >= minimum
    share = (seat_coverage.reindex(pd.MultiIndex.from_frame(t[UNIT_KEYS])).to_numpy(float)
             if seat_coverage is not None else np.full(len(t), np.nan))
    thin = np.isfinite(share) & (share < config["flags.min_coverage"])
    half = (partial.reindex(pd.MultiIndex.from_frame(t[UNIT_KEYS])).fillna(False).to_numpy(bool)
            if partial is not None else np.zeros(len(t), dtype=bool))
    big &= ~thin & ~half
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
    # the reasons in words, written only for the rows that take them (every unit's rows are judged each run)
    thin_rows = thin & ~small & unexplained.to_numpy(bool)
    coverage_reason = np.array([not_flagged_reason(x, config["flags.min_coverage"]) if use else None
                                for x, use in zip(share, thin_rows)], dtype=object)
    t["reason"] = np.where(thin_rows, coverage_reason, t["reason"])
    half_rows = half & unexplained.to_numpy(bool)
    half_reason = np.array([partial_reason(c) if use else None for c, use in zip(t["chamber"].tolist(), half_rows)],
                           dtype=object)
    t["reason"] = np.where(half_rows, half_reason, t["reason"])
    return t


def context_stats(t: pd.DataFrame, others: pd.DataFrame | None = None) -> pd.DataFrame:
    """Cross-state percentile and robust z within each cycle and chamber, and across all cycles.

    ``others``: the stored rows (cycle, state, chamber, measure, value) of the other cycles of the
    chambers of ``t`` (when ``t`` holds some groups only): they enter the robust z across cycles
    (theirs: :func:`across_cycles`)."""
    t = t.copy()
    t["cross_percentile"] = np.nan
    t["robust_z"] = np.nan
    for measure, part in t.groupby("measure"):
        values = part["value"].to_numpy(float)
        group = (part["cycle"].astype(str) + "|" + part["chamber"]).to_numpy()
        t.loc[part.index, "cross_percentile"] = P.cross_state_percentile(values, group)
        t.loc[part.index, "robust_z"] = P.robust_z(values, group)
    t["robust_z_all"] = across_cycles(t, others)[: len(t)]
    return t


def across_cycles(t: pd.DataFrame, others: pd.DataFrame | None = None) -> np.ndarray:
    """The robust z of each row's value among every cycle of its chamber (per measure): of the
    rows of ``t``, then of ``others``."""
    frame = t[["chamber", "measure", "value"]]
    if others is not None and len(others):
        frame = pd.concat([frame, others[["chamber", "measure", "value"]]], ignore_index=True)
    else:
        frame = frame.reset_index(drop=True)
    out = np.full(len(frame), np.nan)
    for _, part in frame.groupby("measure"):
        out[part.index.to_numpy()] = P.robust_z(part["value"].to_numpy(float), part["chamber"].to_numpy())
    return out
