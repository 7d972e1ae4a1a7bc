"""What keeps the cycle and home pages light (issue 15, weight budget: every page <= 300 KB at the
bench's x1 history) without losing what they answer.

* :func:`measure_table`: one sortable table per chamber of every state's value of every measure
  shown in the section's charts, in place of one data table per chart (the six ranked charts of
  a chamber repeated each state's name and flag six times; a reader sorts the one table by any
  measure to get its ranking).
* :func:`events_summary`: the flag changes of a cycle counted by chamber, change and load, in
  place of the full list (one row per flag: 234 rows, 86 KB, in the synthetic 1996), which the
  state pages (each state's flag history) and the ``flags`` download already hold.
"""

from __future__ import annotations

import pandas as pd

from monitor.publish import formats as F
from monitor.publish.chartkit import Chart, fmt_measure


def measure_table(table_id: str, title: str, charts: list[Chart], frames: list[pd.DataFrame],
                  measures: list[str], labels: list[str], party, min_districts: int | None) -> dict:
    """A table with a row per state and a column per measure (value, and the party a flag favours),
    and each chart pointed at it instead of carrying a table of its own.

    ``frames``: state_label, value, flagged, direction (and districts), one per measure, as the
    charts were drawn from. ``party``: code -> party name."""
    cells: dict[str, dict[str, str]] = {}
    few: set[str] = set()
    for k, frame in enumerate(frames):
        for r in frame.itertuples():
            row = cells.setdefault(r.state_label, {})
            value = fmt_measure(measures[k], r.value)
            flagged = not F.missing(r.flagged) and int(r.flagged) == 1 and r.direction in ("a", "b")
            row[measures[k]] = f"{value} (flagged: {party(r.direction)})" if flagged else value
            districts = getattr(r, "districts", None)
            if min_districts is not None and not F.missing(districts) and int(districts) < min_districts:
                few.add(r.state_label)
    rows = [[state + (" (too few districts to flag)" if state in few else ""),
             *[cells[state].get(m, F.DASH) for m in measures]] for state in sorted(cells, key=str.casefold)]
    for chart in charts:
        chart.columns, chart.rows = [], []
        chart.table_ref, chart.table_title = table_id, title
    return {"id": table_id, "title": title, "columns": ["state", *labels], "rows": rows}


def events_summary(events: pd.DataFrame, chamber_short) -> dict:
    """The flag changes of one cycle counted by chamber, change and the load that caused them."""
    if events.empty:
        return {"total": 0, "rows": []}
    e = events.assign(load=events["load_id"].map(lambda v: "" if F.missing(v) else f"#{int(v)}"),
                      chamber=events["chamber"].fillna(""))
    rows = []  # cells: chamber, change, changes, states, load
    for (chamber, event, load), g in e.groupby(["chamber", "event", "load"], sort=True):
        rows.append([chamber_short(chamber) if chamber else F.DASH, event, F.count(len(g)),
                     F.count(g["state"].nunique()), load or F.DASH])
    return {"total": len(e), "rows": rows}
