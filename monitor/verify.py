"""Full verification: recompute every measure from scratch and compare with the store."""

from __future__ import annotations

import numpy as np
import pandas as pd
import sqlite_utils

from monitor.compute import compute_frame
from monitor.config import Config
from monitor.inputs import UNIT_KEYS, reduced_contests
from monitor.measures import MEASURE_VERSIONS

TOLERANCE = 1e-9


def verify_store(db: sqlite_utils.Database, config: Config) -> list[str]:
    """Differences between stored measures and a from-scratch recompute, in plain words."""
    _, fresh = compute_frame(config, reduced_contests(db))
    stored = pd.read_sql_query(
        "SELECT cycle, state, chamber, measure, value, low, high, p_value, method_version FROM measures", db.conn)
    key = [*UNIT_KEYS, "measure"]
    merged = fresh.merge(stored, on=key, how="outer", suffixes=("", "_stored"), indicator=True)
    out = []
    for r in merged.itertuples(index=False):
        where = f"{r.cycle} {r.state} {r.chamber} {r.measure}"
        if r._asdict()["_merge"] == "left_only":
            out.append(f"{where}: not stored")
            continue
        if r._asdict()["_merge"] == "right_only":
            out.append(f"{where}: stored but no longer computed")
            continue
        if r.method_version != MEASURE_VERSIONS.get(r.measure):
            out.append(f"{where}: stored with method version {r.method_version}, current is "
                       f"{MEASURE_VERSIONS.get(r.measure)}")
            continue
        for col in ("value", "low", "high", "p_value"):
            a, b = getattr(r, col), getattr(r, f"{col}_stored")
            a = np.nan if a is None else float(a)
            b = np.nan if b is None else float(b)
            if np.isnan(a) != np.isnan(b) or (not np.isnan(a) and abs(a - b) > TOLERANCE * max(1, abs(a))):
                out.append(f"{where}: {col} stored {b!r}, recomputed {a!r}")
    return out
