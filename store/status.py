"""The counts behind ``levelfield status``: what the store holds and the latest loads."""

from __future__ import annotations

import sqlite_utils

LOAD_COLUMNS = ["id", "file_name", "sha256", "loaded_at", "outcome", "rows_read", "rows_accepted", "rows_rejected",
                "units_new", "units_corrected", "error"]


def summary(db: sqlite_utils.Database, last: int = 5) -> dict:
    """cycles_by_chamber (chamber -> sorted cycles), states, contests, vote_lines and measures of
    the current results, and the ``last`` loads (newest first, LOAD_COLUMNS each)."""
    by_chamber: dict[str, list[int]] = {}
    for chamber, cycle in db.execute(
        "SELECT DISTINCT chamber, cycle FROM units WHERE superseded_by IS NULL ORDER BY chamber, cycle"
    ):
        by_chamber.setdefault(chamber, []).append(cycle)
    one = lambda sql: db.execute(sql).fetchone()[0]  # noqa: E731
    loads = [dict(zip(LOAD_COLUMNS, row)) for row in db.execute(
        f"SELECT {', '.join(LOAD_COLUMNS)} FROM loads ORDER BY id DESC LIMIT ?", [last])]
    return {
        "cycles_by_chamber": by_chamber,
        "states": one("SELECT COUNT(DISTINCT state) FROM units WHERE superseded_by IS NULL"),
        "contests": one("SELECT COUNT(*) FROM current_contests"),
        "vote_lines": one("SELECT COUNT(*) FROM district_results"),
        "measures": one("SELECT COUNT(*) FROM measures"),
        "loads": loads,
    }
