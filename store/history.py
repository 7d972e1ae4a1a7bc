"""Unit history: the corrections, i.e. every unit a later load superseded."""

from __future__ import annotations

import pandas as pd
import sqlite_utils

CORRECTION_COLUMNS = ["load_id", "file_name", "sha256", "loaded_at", "report", "cycle", "state", "chamber",
                      "unit_id", "certification", "old_unit_id", "old_load_id", "old_certification"]


def corrections(db: sqlite_utils.Database) -> pd.DataFrame:
    """One row per superseded unit and the unit (and successful load) that replaced it, oldest load
    first: CORRECTION_COLUMNS (``report`` is the replacing load's stored JSON report)."""
    if "units" not in db.table_names():
        return pd.DataFrame(columns=CORRECTION_COLUMNS)
    return pd.read_sql_query(
        "SELECT l.id AS load_id, l.file_name, l.sha256, l.loaded_at, l.report, n.cycle, n.state, n.chamber, "
        "n.id AS unit_id, n.certification, o.id AS old_unit_id, o.load_id AS old_load_id, "
        "o.certification AS old_certification "
        "FROM units n JOIN units o ON o.id = n.supersedes JOIN loads l ON l.id = n.load_id "
        "WHERE l.outcome = 'loaded' ORDER BY l.id, n.cycle, n.state, n.chamber", db.conn)


def state_names(db: sqlite_utils.Database) -> dict[str, str]:
    """state code -> name, for the states that have a name."""
    if "states" not in db.table_names():
        return {}
    return {code: name for code, name in db.execute("SELECT code, name FROM states ORDER BY code") if name}


def current_units(db: sqlite_utils.Database) -> pd.DataFrame:
    """unit_id, cycle, state, chamber, certification, load_id of every current unit."""
    return pd.read_sql_query(
        "SELECT id AS unit_id, cycle, state, chamber, certification, load_id FROM units "
        "WHERE superseded_by IS NULL ORDER BY cycle, state, chamber", db.conn)
