"""What ``levelfield export NAME`` writes: one table of (name, help, query, columns).

Each export reads stored rows only; its columns are a fixed contract other tools read (columns may
be added, never renamed or dropped). The command line makes one ``export`` subcommand per row.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import pandas as pd
import sqlite_utils

from monitor.national import SUMMARY_COLUMNS
from monitor.results import REDUCTION_COLUMNS, RESULT_COLUMNS, results_export
from store import aggregates
from store import measures as store_measures


@dataclass(frozen=True)
class Export:
    name: str
    help: str
    query: Callable[[sqlite_utils.Database], pd.DataFrame]
    columns: list[str]

    def frame(self, db: sqlite_utils.Database) -> pd.DataFrame:
        return self.query(db)[self.columns]


EXPORTS: list[Export] = [
    Export("results", "Current results (the district_results columns) with each contest's two-party reduction.",
           results_export, RESULT_COLUMNS + REDUCTION_COLUMNS),
    Export("measures", "Stored measures: " + ",".join(store_measures.EXPORT_COLUMNS) + ".",
           lambda db: store_measures.read(db, store_measures.EXPORT_COLUMNS), store_measures.EXPORT_COLUMNS),
    Export("national", "National aggregates per cycle and chamber: districts, seats and votes of each party, "
                       "uncontested and competitive districts, flagged states, excess seats by who drew the plan.",
           lambda db: aggregates.read(db, "national_summary"), SUMMARY_COLUMNS),
]


def export(db: sqlite_utils.Database, name: str) -> pd.DataFrame:
    """The rows ``levelfield export NAME`` writes."""
    return next(e for e in EXPORTS if e.name == name).frame(db)
