"""The current results as loaded, with the two-party reduction per contest."""

from __future__ import annotations

import numpy as np
import pandas as pd
import sqlite_utils

from monitor.reduce import reduce_contests
from store import queries

RESULT_COLUMNS = ["cycle", "state", "chamber", "district", "party", "candidate", "votes", "status", "load_id"]
REDUCTION_COLUMNS = ["special", "seats", "contest_status", "votes_a", "votes_b", "share_a", "winner", "runoff",
                     "decides", "position"]


def current_lines(db: sqlite_utils.Database) -> pd.DataFrame:
    """Every current vote line with its contest's reduction."""
    lines = queries.current_votes(db)
    if lines.empty:
        return lines
    contests = lines.drop_duplicates("contest_id")[["contest_id", "seats"]]
    reduced = reduce_contests(lines, contests).set_index("contest_id")
    lines = lines.join(reduced[["votes_a", "votes_b", "winner"]], on="contest_id")
    two = (lines["votes_a"] + lines["votes_b"]).astype(float)
    lines["share_a"] = np.where(two > 0, lines["votes_a"] / two.where(two > 0, 1), np.nan)
    return lines


def results_export(db: sqlite_utils.Database) -> pd.DataFrame:
    """The ``district_results`` columns (a fixed contract) followed by the reduction columns."""
    lines = current_lines(db)
    if lines.empty:
        return pd.DataFrame(columns=RESULT_COLUMNS + REDUCTION_COLUMNS)
    out = lines.rename(columns={"certification": "status_", "status": "contest_status"})
    out = out.rename(columns={"status_": "status"})
    for flag in ("special", "runoff", "decides"):
        out[flag] = out[flag].astype(int)
    return out[RESULT_COLUMNS + REDUCTION_COLUMNS].reset_index(drop=True)
