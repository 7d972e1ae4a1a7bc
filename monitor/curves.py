"""Seats-votes curves under uniform swing, and each unit's vote and seat share as the measures count
them: what the state pages chart, computed from the stored reductions (pure functions over frames).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from monitor.measures.swing import seat_share_at
from monitor.national import measured

UNIT_KEYS = ["cycle", "state", "chamber"]


def _measure_rows(contests: pd.DataFrame) -> pd.DataFrame:
    rows = measured(contests)
    return rows[[*UNIT_KEYS, "district", "votes_a_used", "votes_b_used", "share_used", "imputed"]]


def seats_votes_curves(contests: pd.DataFrame) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The seats-votes curve under uniform swing of the latest cycle of every (state, chamber)
    with at least two districts.

    Shifting every district share by the same amount ``d`` moves the statewide vote-weighted
    share from ``V`` to ``V + d``; district ``i`` changes hands at ``v_i = V + 1/2 - x_i``. The
    curve is the step function through those points: just above ``v_i`` the seat share counts
    every district whose flip point lies at or below it. Returned as step vertices (state,
    chamber, cycle, vote, seat_share) over ``v`` in [0, 1], plus the marked points (observed
    result, statewide vote flipped to ``1 - V``, and 50 %), each evaluated with the measures
    engine's :func:`~monitor.measures.swing.seat_share_at` so they agree with ``partisan_bias``
    and ``seats_at_flipped_vote``.
    """
    cols = ["state", "chamber", "cycle", "vote", "seat_share"]
    pcols = ["state", "chamber", "cycle", "point", "vote", "seat_share", "seats", "districts"]
    rows = _measure_rows(contests)
    if rows.empty:
        return pd.DataFrame(columns=cols), pd.DataFrame(columns=pcols)
    latest = rows.groupby(["state", "chamber"])["cycle"].transform("max")
    rows = rows[rows["cycle"] == latest]
    # like the engine's uniform-swing measures, a curve needs at least two districts
    rows = rows[rows.groupby(UNIT_KEYS)["district"].transform("size") >= 2]
    if rows.empty:
        return pd.DataFrame(columns=cols), pd.DataFrame(columns=pcols)
    rows = rows.sort_values([*UNIT_KEYS, "district"], kind="mergesort")
    units = rows[UNIT_KEYS].drop_duplicates().reset_index(drop=True)
    unit = rows.groupby(UNIT_KEYS, sort=False).ngroup().to_numpy(np.int64)
    va, vb = rows["votes_a_used"].to_numpy(float), rows["votes_b_used"].to_numpy(float)
    n_units = len(units)
    count = np.bincount(unit, minlength=n_units)
    V = np.bincount(unit, va, n_units) / np.bincount(unit, va + vb, n_units)
    flip = V[unit] + 0.5 - va / (va + vb)
    order = np.lexsort((flip, unit))
    flip, u_sorted = flip[order], unit[order]
    starts = np.concatenate([[0], np.cumsum(count)[:-1]])
    rank = np.arange(flip.size) - starts[u_sorted] + 1
    inside = (flip > 0) & (flip < 1)
    # seat share at the ends of [0, 1] from the engine, then one vertex per flip point inside
    s0 = seat_share_at(unit, va, vb, n_units, np.zeros(n_units))
    s1 = seat_share_at(unit, va, vb, n_units, np.ones(n_units))
    vertex = pd.DataFrame({"u": u_sorted[inside], "vote": flip[inside], "seat_share": rank[inside] / count[u_sorted[inside]]})
    ends = pd.DataFrame({"u": np.concatenate([np.arange(n_units)] * 2),
                         "vote": np.concatenate([np.zeros(n_units), np.ones(n_units)]),
                         "seat_share": np.concatenate([s0, s1])})
    curve = pd.concat([ends.iloc[:n_units], vertex, ends.iloc[n_units:]], ignore_index=True)
    curve = curve.sort_values(["u", "vote"], kind="mergesort")
    # several districts flipping at the same point: keep the last (highest) step
    curve = curve.drop_duplicates(["u", "vote"], keep="last")
    curve = units.reset_index().rename(columns={"index": "u"}).merge(curve, on="u")[cols]

    points = []
    for name, at in (("observed", V), ("flipped vote", 1.0 - V), ("even vote", np.full(n_units, 0.5))):
        share = seat_share_at(unit, va, vb, n_units, at)
        points.append(units.assign(point=name, vote=at, seat_share=share, seats=share * count, districts=count))
    return curve.reset_index(drop=True), pd.concat(points, ignore_index=True)[pcols]


def seats_votes_series(contests: pd.DataFrame) -> pd.DataFrame:
    """Party a's vote share and seat share of every unit as the measures define them: the districts
    that enter the measures, votes after the uncontested policy (the measures table's vote_share and
    seat_share, the seats-votes curve's observed point). Columns cycle, state, chamber, vote_share,
    seat_share."""
    rows = measured(contests)
    cols = [*UNIT_KEYS, "vote_share", "seat_share"]
    if rows.empty:
        return pd.DataFrame(columns=cols)
    g = rows.groupby(["state", "chamber", "cycle"], sort=True).agg(
        va=("votes_a_used", "sum"), vb=("votes_b_used", "sum"), sa=("seats_a", "sum"),
        n=("district", "size")).reset_index()
    out = pd.DataFrame({"cycle": g["cycle"].astype(int), "state": g["state"], "chamber": g["chamber"],
                        "vote_share": g["va"] / (g["va"] + g["vb"]).where(lambda s: s > 0),
                        "seat_share": g["sa"] / g["n"]})
    return out.sort_values(UNIT_KEYS, kind="mergesort").reset_index(drop=True)[cols]
