"""Plan eras: which redistricting plan was in force for each unit, and who drew it.

``levelfield plans FILE`` loads eras from a CSV with the columns
``state,chamber,plan_id,first_cycle,last_cycle,drawn_by,note,source`` (``last_cycle`` may be
empty for a plan still in force), and optionally ``districts`` and ``seats``: how many districts
and seats the plan has (seats default to the districts), which the coverage of every unit of the
era is measured against. Units not covered by a loaded era get an *inferred* plan: a new
plan from each cycle ending in 2 (the first cycle after a decennial census), drawn by ``other``,
marked ``inferred`` everywhere it shows, with the id ``{state}-{chamber}-{start}`` unless a loaded
plan of that state and chamber has that id (then ``...-inferred``): loaded plans are never replaced.
"""

from __future__ import annotations

from collections import defaultdict
from pathlib import Path

import pandas as pd
import sqlite_utils

from monitor.errors import DataError, Problem, UsageError
from monitor.ingest.fields import parse_cycle
from monitor.ingest.native import header_problems
from monitor.ingest.reader import csv_rows, decode, read_raw
from monitor.ingest.records import normalise_chamber, normalise_state
from store import plans as store_plans
from store import transaction

DRAWN_BY = ("party_a", "party_b", "split", "commission", "court", "other")
COLUMNS = ("state", "chamber", "plan_id", "first_cycle", "last_cycle", "drawn_by", "note", "source",
           "districts", "seats")
REQUIRED = COLUMNS[:6]
INFERRED_NOTE = "inferred: a new plan assumed from each cycle ending in 2"
#: optional counts of the plan's districts and seats (seats default to the districts: one seat each)
COUNTS = ("districts", "seats")


def read_plans(path: Path) -> pd.DataFrame:
    """Parse and validate a plans file; raise DataError with every problem."""
    try:
        raw = read_raw(path)
    except OSError as exc:
        raise UsageError(f"{path}: cannot read ({exc.strerror or exc})") from None
    rows = csv_rows(raw.name, decode(raw.name, raw.data, None))
    header = next(rows, None)
    if header is None:
        raise DataError([Problem(raw.name, 1, None, "the file is empty: no header row")])
    names = [h.strip().casefold() for h in header[1]]
    problems = header_problems(raw.name, header[1])
    problems += [Problem(raw.name, 1, c, "missing column") for c in REQUIRED if c not in names]
    problems += [Problem(raw.name, 1, c, "unknown column") for c in names if c and c not in COLUMNS]
    if problems:
        raise DataError(problems)
    out = []
    for row, cells in rows:
        if not cells or (len(cells) == 1 and not cells[0].strip()):
            continue
        if len(cells) != len(names):
            problems.append(Problem(raw.name, row, None, f"has {len(cells)} cells but the header has {len(names)} columns"))
            continue
        rec = {c: " ".join(v.split()) for c, v in zip(names, cells)}
        # the same case rules as results files, so `qv` here matches results stored as `QV`
        rec["state"], rec["chamber"] = normalise_state(rec["state"]), normalise_chamber(rec["chamber"])
        for col in ("state", "chamber", "plan_id"):
            if not rec[col]:
                problems.append(Problem(raw.name, row, col, f"{col} is empty"))
        first, why = parse_cycle(rec["first_cycle"])
        if why:
            problems.append(Problem(raw.name, row, "first_cycle", why.replace("cycle", "first_cycle", 1)))
        last = None
        if rec["last_cycle"]:
            last, why = parse_cycle(rec["last_cycle"])
            if why:
                problems.append(Problem(raw.name, row, "last_cycle", why.replace("cycle", "last_cycle", 1)))
            elif first is not None and last < first:
                problems.append(Problem(raw.name, row, "last_cycle", f"last_cycle {last} is before first_cycle {first}"))
        if rec["drawn_by"] not in DRAWN_BY:
            problems.append(Problem(raw.name, row, "drawn_by",
                                    f"drawn_by {rec['drawn_by']!r} is not one of {', '.join(DRAWN_BY)}"))
        counts = {}
        for col in COUNTS:
            counts[col], why = _count(rec.get(col, ""), col)
            if why:
                problems.append(Problem(raw.name, row, col, why))
        if counts["seats"] is not None and counts["districts"] is None:
            problems.append(Problem(raw.name, row, "districts", "seats is given without districts: give both"))
        elif counts["districts"] is not None and counts["seats"] is None:
            counts["seats"] = counts["districts"]
        elif None not in counts.values() and counts["seats"] < counts["districts"]:
            problems.append(Problem(raw.name, row, "seats",
                                    f"seats {counts['seats']} is fewer than districts {counts['districts']}"))
        out.append({**rec, "first_cycle": first, "last_cycle": last, "row": row,
                    "note": rec.get("note", ""), "source": rec.get("source", ""), **counts})
    frame = pd.DataFrame(out, columns=[*COLUMNS, "row"])
    if not problems:
        problems += _overlaps(raw.name, frame)
    if problems:
        raise DataError(problems, f"{len(problems)} problem(s) in {raw.name}; no plan was loaded")
    return frame


def _count(text: str, column: str) -> tuple[int | None, str | None]:
    """An optional whole count of at least 1 (empty: not given)."""
    if not text:
        return None, None
    if not text.isdigit() or int(text) < 1:
        return None, f"{column} {text!r} is not a whole number of at least 1"
    return int(text), None


def _overlaps(name: str, frame: pd.DataFrame) -> list[Problem]:
    problems = []
    seen: dict[tuple, str] = {}
    for (state, chamber), group in frame.groupby(["state", "chamber"], sort=False):
        group = group.sort_values("first_cycle")
        previous = None
        for rec in group.itertuples():
            key = (state, chamber, rec.plan_id)
            if key in seen:
                problems.append(Problem(name, rec.row, "plan_id", f"plan {rec.plan_id!r} is listed twice for {state} {chamber}"))
            seen[key] = rec.plan_id
            if previous is not None and (previous.last_cycle is None or previous.last_cycle >= rec.first_cycle):
                problems.append(Problem(name, rec.row, "first_cycle",
                                        f"plan {rec.plan_id!r} starts in {rec.first_cycle} while plan "
                                        f"{previous.plan_id!r} (row {previous.row}) is still in force"))
            previous = rec
    return problems


def load_plans(db: sqlite_utils.Database, path: Path) -> dict:
    """Replace the plans of every (state, chamber) named in the file, in one transaction."""
    frame = read_plans(path)
    pairs = sorted(set(zip(frame["state"], frame["chamber"])))
    with transaction(db) as conn:
        store_plans.replace_loaded(conn, pairs, [
            (r.state, r.chamber, r.plan_id, int(r.first_cycle), None if pd.isna(r.last_cycle) else int(r.last_cycle),
             r.drawn_by, r.note, r.source, None if pd.isna(r.districts) else int(r.districts),
             None if pd.isna(r.seats) else int(r.seats)) for r in frame.itertuples()])
    return {"plans": len(frame), "state_chambers": len(pairs)}


def census_start(cycle: int) -> int:
    """The first cycle of the decade's plan: the latest year ending in 2 at or before ``cycle``."""
    return cycle - ((cycle - 2) % 10)


def assign_plans(db: sqlite_utils.Database, units: pd.DataFrame) -> tuple[pd.DataFrame, list[tuple]]:
    """For units (cycle, state, chamber): plan_id, drawn_by, inferred. Units outside every loaded
    era get an inferred decade plan; those plans are returned as rows for :func:`write_inferred`.
    A whole-chamber unit (``state_upper_whole``, :mod:`monitor.staggered`) has its chamber's plan."""
    from monitor.staggered import base_chamber

    plans = store_plans.loaded(db)
    eras = defaultdict(list)
    for p in plans.itertuples():
        eras[(p.state, p.chamber)].append(p)
    loaded_ids = {key: {p.plan_id for p in ps} for key, ps in eras.items()}
    out = []
    inferred: dict[tuple, tuple] = {}
    for u in units[["cycle", "state", "chamber"]].itertuples(index=False):
        chamber = base_chamber(u.chamber)
        match = next((p for p in eras.get((u.state, chamber), ())
                      if p.first_cycle <= u.cycle and (pd.isna(p.last_cycle) or u.cycle <= p.last_cycle)), None)
        if match is not None:
            out.append((match.plan_id, match.drawn_by, 0))
            continue
        start = census_start(int(u.cycle))
        plan_id = inferred_plan_id(u.state, chamber, start, loaded_ids.get((u.state, chamber), set()))
        key = (u.state, chamber, plan_id)
        first, last = inferred.get(key, (u.cycle, u.cycle))
        inferred[key] = (min(first, u.cycle), max(last, u.cycle))
        out.append((plan_id, "other", 1))
    result = units[["cycle", "state", "chamber"]].copy()
    result[["plan_id", "drawn_by", "inferred"]] = pd.DataFrame(out, index=result.index,
                                                               columns=["plan_id", "drawn_by", "inferred"])
    return result, [(s, c, p, int(f), int(l)) for (s, c, p), (f, l) in inferred.items()]


def inferred_plan_id(state: str, chamber: str, start: int, loaded: set[str]) -> str:
    """The id of the inferred plan starting in ``start``: ``{state}-{chamber}-{start}``, or, when a
    loaded plan of the same state and chamber already has that id (a loaded era that does not
    cover every cycle of its decade), ``{state}-{chamber}-{start}-inferred`` (then ``-inferred-2``,
    ...): an inferred plan never takes a loaded plan's id."""
    plan_id = f"{state}-{chamber}-{start}"
    if plan_id not in loaded:
        return plan_id
    plan_id, k = f"{plan_id}-inferred", 2
    while plan_id in loaded:
        plan_id = f"{state}-{chamber}-{start}-inferred-{k}"
        k += 1
    return plan_id


def write_inferred(conn, inferred: list[tuple]) -> None:
    """Replace the inferred plans (rows from :func:`assign_plans`), inside the caller's transaction.

    Loaded plans are never touched: only ``inferred = 1`` rows are deleted, and the new rows are
    plain inserts (their ids never equal a loaded plan's, see :func:`inferred_plan_id`; were one
    to, the insert fails and the whole transaction rolls back rather than replace a loaded era)."""
    store_plans.replace_inferred(conn, inferred, INFERRED_NOTE)
