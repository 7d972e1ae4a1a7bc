"""National aggregates per cycle and chamber: what the whole country's districts look like.

Pure functions over frames (no I/O). The aggregates step (:mod:`monitor.aggregates`) runs them on
the stored reductions, measures, flags and expected seats and stores what they return; the site,
the ``national`` download and ``levelfield export national`` read those stored rows, so they give
the same numbers.

Per (cycle, chamber):

* :func:`share_histogram`: counts of district two-party shares of party a after the uncontested
  policy (the shares the measures use), in bins of :data:`HISTOGRAM_BIN`;
* :func:`national_summary`: states, districts, seats and votes of each party, the districts that
  enter the measures and party a's two-party share over them, the uncontested and competitive
  districts (sums of the measures engine's stored ``uncontested`` and ``competitive`` values, not
  a second comparison), flagged units and excess seats by who drew the plan;
* :func:`excess_by_drawer`: the sum of excess seats (actual minus expected from the national
  pool) by who drew the plan in force.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from monitor.inputs import deciding_contests

UNIT_KEYS = ["cycle", "state", "chamber"]
GROUP = ["cycle", "chamber"]

#: Width of the bins of the national histogram of district shares.
HISTOGRAM_BIN = 0.025

#: Histogram kinds: contested districts by their winner, and uncontested ones shown at the share
#: the uncontested policy gives them.
KIND_A, KIND_B, KIND_TIED, KIND_IMPUTED = "won by a", "won by b", "tied", "uncontested (imputed share)"

#: Who drew the plan, as the excess-by-drawer columns name it: the ``drawn_by`` codes of a plans
#: file, then ``inferred`` (an era assumed without a plans file: who drew it is not recorded) and
#: ``no_plan`` (no era covers the unit).
DRAWER_KEYS = ("party_a", "party_b", "split", "commission", "court", "other", "inferred", "no_plan")

#: The columns of :func:`national_summary`: (name, Table Schema type, meaning).
SUMMARY_FIELDS: list[tuple[str, str, str]] = [
    ("cycle", "integer", "election year"),
    ("chamber", "string", "chamber code as loaded (federal, state_lower, ...)"),
    ("states", "integer", "states with results in this cycle and chamber"),
    ("districts", "integer", "districts with results (one contest per seat: the one that decides it)"),
    ("seats", "number", "seats filled in those districts"),
    ("seats_a", "number", "seats won by party a (a tie counts half a seat to each)"),
    ("seats_b", "number", "seats won by party b"),
    ("seats_other", "number", "seats won by other parties and independents"),
    ("votes_a", "integer", "votes of party a as loaded (fusion lines attributed)"),
    ("votes_b", "integer", "votes of party b as loaded"),
    ("votes_other", "integer", "votes of other parties and write-ins"),
    ("measured_districts", "integer",
     "districts that enter the measures and the histogram: single-member contests won by a major party "
     "(under the exclude policy, uncontested ones are left out too)"),
    ("vote_share", "number",
     "party a's share of the two-party vote over the measured districts after the uncontested policy "
     "(the measures' vote_share, nationwide)"),
    ("uncontested", "number", "measured districts where one major party was absent (sum of the stored "
                              "uncontested measure)"),
    ("competitive", "number", "competitive districts (sum of the stored competitive measure)"),
    ("measured_units", "integer", "states with a stored competitive value: the two sums above cover these"),
    ("flagged_units", "integer", "states flagged on at least one measure"),
    ("pool_units", "integer", "states with expected seats from the national pool"),
    ("excess_seats", "number", "sum of excess seats (actual minus expected; positive favours party a)"),
    *[(f"excess_{key}", "number", f"sum of excess seats of the states {where}") for key, where in (
        ("party_a", "whose plan party a drew"), ("party_b", "whose plan party b drew"),
        ("split", "whose plan was drawn under split control"), ("commission", "whose plan a commission drew"),
        ("court", "whose plan a court drew"), ("other", "whose plan someone else drew"),
        ("inferred", "under inferred plan eras (who drew them is not recorded)"),
        ("no_plan", "that no plan era covers"))],
    ("vote_share_as_cast", "number",
     "party a's share of the two-party vote as cast, votes_a / (votes_a + votes_b): the raw votes of the "
     "contests that decide the seats, what is usually quoted (vote_share is the share after the policy)"),
]
SUMMARY_COLUMNS = [f[0] for f in SUMMARY_FIELDS]

HISTOGRAM_FIELDS: list[tuple[str, str, str]] = [
    ("cycle", "integer", "election year"),
    ("chamber", "string", "chamber code as loaded"),
    ("bin_start", "number", "party a's two-party share after the uncontested policy, bin from (inclusive)"),
    ("bin_end", "number", "bin to (exclusive; the last bin includes 1)"),
    ("kind", "string", f"{KIND_A} | {KIND_B} | {KIND_TIED} | {KIND_IMPUTED}"),
    ("side", "string", "a | b | tied: the side of 50% the share lies on"),
    ("districts", "integer", "districts in the bin"),
]
HISTOGRAM_COLUMNS = [f[0] for f in HISTOGRAM_FIELDS]

DRAWER_COLUMNS = ["cycle", "chamber", "drawer", "excess_seats", "units"]


def measured(contests: pd.DataFrame) -> pd.DataFrame:
    """The contests that enter the measures (a finite share after the policy): stored reductions
    (:func:`monitor.inputs.reduced_contests`) with ``share_used``."""
    return contests[np.isfinite(contests["share_used"].to_numpy(float))]


def plans_of_units(units: pd.DataFrame, plans: pd.DataFrame) -> pd.DataFrame:
    """The plan era in force for each unit (cycle, state, chamber): plan_id, drawn_by, inferred;
    None where no era covers the unit."""
    keys = units[UNIT_KEYS]
    if keys.empty or plans.empty:
        return keys.assign(plan_id=None, drawn_by=None, inferred=0)
    merged = keys.merge(plans[["state", "chamber", "plan_id", "first_cycle", "last_cycle", "drawn_by", "inferred"]],
                        on=["state", "chamber"], how="left")
    last = merged["last_cycle"].astype(float).fillna(np.inf)
    inside = (merged["first_cycle"].astype(float) <= merged["cycle"]) & (merged["cycle"] <= last)
    merged = merged[inside].drop_duplicates(UNIT_KEYS)
    out = keys.merge(merged[[*UNIT_KEYS, "plan_id", "drawn_by", "inferred"]], on=UNIT_KEYS, how="left")
    out["inferred"] = out["inferred"].fillna(0).astype(int)
    return out


def share_histogram(contests: pd.DataFrame, bin_width: float = HISTOGRAM_BIN) -> pd.DataFrame:
    """Counts of district shares of party a (after the uncontested policy) per cycle and chamber.

    ``contests``: stored reductions (:func:`monitor.inputs.reduced_contests`). One row per (cycle, chamber, bin, kind,
    side): ``kind`` is the winner of a contested district (by its share: above 50% a, below b,
    exactly 50% tied) or ``uncontested (imputed share)``; ``side`` is where the share lies
    (a | b | tied), so that uncontested districts can be counted by the party that won them. A
    share of exactly 1 falls in the last bin."""
    rows = measured(contests)
    if rows.empty:
        return pd.DataFrame(columns=HISTOGRAM_COLUMNS)
    edges = np.round(np.arange(0, 1 + bin_width / 2, bin_width), 6)
    share = rows["share_used"].to_numpy(float)
    # rounded before the floor: 0.30 / 0.025 is 11.999999999999998 in binary floating point, and a
    # share on a bin edge belongs to the bin that starts there
    k = np.clip(np.floor(np.round(share / bin_width, 9)).astype(int), 0, len(edges) - 2)
    side = np.where(share > 0.5, "a", np.where(share < 0.5, "b", "tied"))
    won = np.where(side == "a", KIND_A, np.where(side == "b", KIND_B, KIND_TIED))
    frame = pd.DataFrame({"cycle": rows["cycle"].to_numpy(), "chamber": rows["chamber"].to_numpy(), "k": k,
                          "kind": np.where(rows["imputed"].to_numpy(bool), KIND_IMPUTED, won), "side": side})
    counts = frame.groupby(["cycle", "chamber", "k", "kind", "side"]).size().rename("districts").reset_index()
    counts["bin_start"] = edges[counts["k"]]
    counts["bin_end"] = edges[counts["k"] + 1]
    return counts[HISTOGRAM_COLUMNS].sort_values(["cycle", "chamber", "bin_start", "kind", "side"]).reset_index(drop=True)


def drawer_key(drawn_by, inferred) -> str:
    """The excess-by-drawer group of a unit: its plan's ``drawn_by``, ``inferred`` or ``no_plan``."""
    if inferred is not None and not (isinstance(inferred, float) and np.isnan(inferred)) and int(inferred):
        return "inferred"
    if drawn_by is None or (isinstance(drawn_by, float) and np.isnan(drawn_by)) or drawn_by == "":
        return "no_plan"
    return str(drawn_by)


def excess_by_drawer(pool: pd.DataFrame, unit_plans: pd.DataFrame) -> pd.DataFrame:
    """Sum of excess seats per (cycle, chamber, drawer) over the units with an expectation;
    ``units`` counts them. Sorted by cycle, chamber, then excess seats (largest first)."""
    if pool.empty:
        return pd.DataFrame(columns=DRAWER_COLUMNS)
    p = pool[[*UNIT_KEYS, "excess_seats"]].copy()
    p["excess_seats"] = pd.to_numeric(p["excess_seats"], errors="coerce").astype(float)
    p = p.dropna(subset=["excess_seats"])
    if p.empty:
        return pd.DataFrame(columns=DRAWER_COLUMNS)
    p = p.merge(unit_plans[[*UNIT_KEYS, "drawn_by", "inferred"]], on=UNIT_KEYS, how="left")
    p["drawer"] = [drawer_key(d, i) for d, i in zip(p["drawn_by"], p["inferred"])]
    out = (p.groupby([*GROUP, "drawer"]).agg(excess_seats=("excess_seats", "sum"), units=("state", "count"))
           .reset_index())
    out = out.sort_values([*GROUP, "excess_seats", "drawer"], ascending=[True, True, False, True])
    return out[DRAWER_COLUMNS].reset_index(drop=True)


def national_summary(contests: pd.DataFrame, measures: pd.DataFrame, tails: pd.DataFrame, pool: pd.DataFrame,
                     unit_plans: pd.DataFrame) -> pd.DataFrame:
    """One row per (cycle, chamber) with results: the columns of :data:`SUMMARY_FIELDS`.

    ``contests``: stored reductions; ``measures``: stored measures (cycle, state, chamber,
    measure, value); ``tails``: the flags (cycle, state, chamber, flagged); ``pool``: expected
    seats (cycle, state, chamber, excess_seats); ``unit_plans``: :func:`plans_of_units`."""
    if contests.empty:
        return pd.DataFrame(columns=SUMMARY_COLUMNS)
    g = deciding_contests(contests).groupby(GROUP)
    out = pd.DataFrame({
        "states": g["state"].nunique(),
        "districts": g.size(),
        "seats": g["seats"].sum().astype(float),
        "seats_a": g["seats_a"].sum().astype(float),
        "seats_b": g["seats_b"].sum().astype(float),
        "seats_other": g["seats_other"].sum().astype(float),
        "votes_a": g["votes_a"].sum(),
        "votes_b": g["votes_b"].sum(),
        "votes_other": g["votes_other"].sum(),
    })
    rows = measured(contests)
    mg = rows.groupby(GROUP)
    va, vb = mg["votes_a_used"].sum(), mg["votes_b_used"].sum()
    out["measured_districts"] = mg.size().reindex(out.index).fillna(0).astype(int)
    out["vote_share"] = (va / (va + vb).where(lambda s: s > 0)).reindex(out.index)
    out["vote_share_as_cast"] = out["votes_a"] / (out["votes_a"] + out["votes_b"]).where(lambda s: s > 0)

    m = measures[measures["measure"].isin(["uncontested", "competitive"])]
    m = m.assign(value=pd.to_numeric(m["value"], errors="coerce").astype(float))
    for name in ("uncontested", "competitive"):
        part = m[m["measure"] == name].groupby(GROUP)["value"]
        out[name] = part.sum(min_count=1).reindex(out.index)
        if name == "competitive":
            out["measured_units"] = part.count().reindex(out.index).fillna(0).astype(int)

    flagged = tails[pd.to_numeric(tails["flagged"], errors="coerce").fillna(0).astype(int) == 1]
    out["flagged_units"] = flagged.groupby(GROUP)["state"].nunique().reindex(out.index).fillna(0).astype(int)

    p = pool[[*UNIT_KEYS, "excess_seats"]].copy()
    p["excess_seats"] = pd.to_numeric(p["excess_seats"], errors="coerce").astype(float)
    p = p.dropna(subset=["excess_seats"])
    out["pool_units"] = p.groupby(GROUP).size().reindex(out.index).fillna(0).astype(int)
    out["excess_seats"] = p.groupby(GROUP)["excess_seats"].sum(min_count=1).reindex(out.index)
    by = excess_by_drawer(pool, unit_plans)
    wide = by.pivot_table(index=GROUP, columns="drawer", values="excess_seats", aggfunc="sum") if len(by) else None
    for key in DRAWER_KEYS:
        col = f"excess_{key}"
        if wide is not None and key in wide.columns:
            # a drawer with no unit in a group that has expectations sums to 0, not to "unknown"
            out[col] = wide[key].reindex(out.index)
            out.loc[out[col].isna() & (out["pool_units"] > 0), col] = 0.0
        else:
            out[col] = np.where(out["pool_units"] > 0, 0.0, np.nan)
    out = out.reset_index()
    out["cycle"] = out["cycle"].astype(int)
    return out[SUMMARY_COLUMNS].sort_values(GROUP, kind="mergesort").reset_index(drop=True)
