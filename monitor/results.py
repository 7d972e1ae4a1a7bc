"""The current results as loaded, with each contest's stored two-party reduction."""

from __future__ import annotations

import pandas as pd
import sqlite_utils

from store import reductions

RESULT_COLUMNS = ["cycle", "state", "chamber", "district", "party", "candidate", "votes", "status", "load_id"]
REDUCTION_COLUMNS = ["special", "seats", "contest_status", "votes_a", "votes_b", "share_a", "winner", "runoff",
                     "decides", "position"]


def results_export(db: sqlite_utils.Database, cycle: int | None = None) -> pd.DataFrame:
    """The ``district_results`` columns (a fixed contract) followed by the reduction columns (of
    ``cycle`` only, when given)."""
    lines = reductions.result_lines(db, cycle)
    if lines.empty:
        return pd.DataFrame(columns=RESULT_COLUMNS + REDUCTION_COLUMNS)
    out = lines.rename(columns={"status": "contest_status", "certification": "status"})
    for flag in ("special", "runoff", "decides"):
        out[flag] = out[flag].astype(int)
    return out[RESULT_COLUMNS + REDUCTION_COLUMNS].reset_index(drop=True)
