"""What ``levelfield export NAME`` writes: one table of (name, help, query, columns), :data:`EXPORTS`,
from which the command line makes one ``export`` subcommand per row; and the columns the site's
downloads of the same tables share with them. Every export reads stored rows only; its columns are
a contract other tools read (columns may be added, never renamed or dropped).

Column lists are ``(name, Table Schema type, meaning)`` tuples, as in :mod:`monitor.national`:
the command line writes the names in this order and the site's downloads describe their files
with the same tuples (``monitor.publish.downloads``), so the two never drift apart.

``export measures`` keeps its fixed columns first, in their order (a contract other tools read:
:data:`MEASURE_COLUMNS`), then ``reason`` and the unit's coverage and vote shares
(:data:`COVERAGE_FIELDS`), repeated on each of the unit's rows.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from dataclasses import dataclass, field
from typing import Callable

import sqlite_utils

from monitor.coverage import national_shares, stored_coverage, with_shares
from monitor.national import SUMMARY_COLUMNS
from monitor.results import REDUCTION_COLUMNS, RESULT_COLUMNS, results_export
from store import aggregates
from store.tables import read_table

UNIT_KEYS = ["cycle", "state", "chamber"]
KEYS = [("cycle", "integer", "election year"), ("state", "string", "state code as loaded"),
        ("chamber", "string", "chamber code as loaded (federal, state_lower, ...)")]

#: The fixed columns of ``export measures``, in order (a contract: never reorder or rename).
MEASURE_COLUMNS = ["cycle", "state", "chamber", "measure", "value", "low", "high", "p_value", "method_version",
                   "policy"]
REASON_FIELD = ("reason", "string", "why the value is undefined (empty when it is defined)")

#: Columns added after the fixed ones (and after reason): the unit's coverage and vote shares.
COVERAGE_FIELDS: list[tuple[str, str, str]] = [
    ("districts_in_measures", "integer", "districts of the unit that enter the measures"),
    ("districts_expected", "integer",
     "districts the unit should have (from the plans file, the previous cycle of the same plan or "
     "levelfield.toml; empty: unknown, see expected_from)"),
    ("seats_in_measures", "integer", "seats of the districts that enter the measures"),
    ("seats_expected", "integer", "seats the unit should have (empty: unknown)"),
    ("seat_coverage", "number",
     "share (0-1) of the unit's seats that enter the measures: of the expected seats, or of the stored "
     "and missing seats when they are more or nothing is expected"),
    ("incomplete", "string", "yes when a district is missing or left out of the measures, else no"),
    ("expected_from", "string", "where the expected counts come from, or unknown"),
    ("missing_or_left_out", "string", "the districts missing or left out of the measures, and why"),
    ("vote_share_as_cast", "number",
     "party a's share of the two-party vote as cast: the raw votes of the contests that decide the "
     "seats (what is usually quoted)"),
    ("vote_share_after_policy", "number",
     "party a's two-party share over the districts in the measures after the uncontested policy "
     "(imputed votes included): what the measures use"),
    ("national_vote_share_as_cast", "number",
     "the same share as cast, nationwide for the cycle and chamber"),
    ("national_vote_share_after_policy", "number",
     "the share after the uncontested policy, nationwide for the cycle and chamber"),
    ("partial", "string",
     "yes for a per-cycle unit of a staggered chamber (one class of its seats): never flagged, never measured as "
     "the whole chamber; its whole-chamber unit is <chamber>_whole"),
    ("combines", "string", "the cycles a whole-chamber unit combines (2022+2024); empty for any other unit"),
    ("districts_treated", "integer",
     "multi-member districts that entered the measures under [multi_member] treatment = pseudo_districts"),
    ("seats_treated", "integer", "their seats (each a pseudo-district)"),
]

GAP_FIELDS: list[tuple[str, str, str]] = [
    *KEYS, ("district", "string", "district code (empty: more districts expected than stored, codes not known)"),
    ("seats", "integer", "seats of the district (or of the unknown districts)"),
    ("gap", "string", "missing | not up (a staggered chamber's other class) | left out | treated (entered under the "
                      "multi-member treatment: not a gap)"),
    ("reason", "string", "why it is missing, not up or left out (or how it entered)"),
    ("position", "string", "the numbered seat of the district (empty for none)"),
]

EXPECTED_SEATS_FIELDS: list[tuple[str, str, str]] = [
    *KEYS, ("districts", "integer", "districts of the unit"), ("vote_share", "number", "party a's statewide two-party share"),
    ("seats_a", "number", "seats won by party a"), ("expected_seats", "number", "expected seats of party a"),
    ("low", "number", "95% interval of the expected seats, low end"), ("high", "number", "high end"),
    ("percentile", "number", "percentile (0-1) of the actual seats among the simulated delegations"),
    ("excess_seats", "number", "actual minus expected seats"), ("draws", "integer", "accepted simulated delegations"),
    ("ess", "number", "effective sample size"), ("mc_se", "number", "Monte Carlo standard error of the expected seats"),
    ("reason", "string", "why no expectation could be computed"), ("method_version", "string", "method version"),
]

TAILS_FIELDS: list[tuple[str, str, str]] = [
    *KEYS, ("measure", "string", "measure judged"), ("value", "number", "the unit's value"),
    ("null_percentile", "number", "percentile within its national-pool null"),
    ("null_low", "number", "lower tail bound of the null"), ("null_high", "number", "upper tail bound of the null"),
    ("p_value", "number", "the measure's own p-value where it is judged by one"),
    ("cross_percentile", "number", "percentile among the states of the cycle and chamber"),
    ("robust_z", "number", "robust z (median and MAD) within the cycle and chamber"),
    ("flagged", "boolean", "flagged at the tails"), ("favours", "string", "a | b when flagged"),
    ("basis", "string", "null tail | p-value"), ("plan_id", "string", "plan in force"),
    ("reason", "string", "why the unit was not judged or not flagged"),
    ("incomplete", "string", "yes when the unit has districts missing or left out of its measures"),
]


def names(fields) -> list[str]:
    return [f[0] for f in fields]


def typed(frame: pd.DataFrame, fields) -> pd.DataFrame:
    """Integer fields as integers (a column with a null is read back as floats: 2000.0)."""
    out = frame.copy()
    for name, kind, _ in fields:
        if kind == "integer" and name in out:
            out[name] = pd.to_numeric(out[name], errors="coerce").round().astype("Int64")
    return out


MEASURES_EXPORT_COLUMNS = [*MEASURE_COLUMNS, REASON_FIELD[0], *names(COVERAGE_FIELDS)]


def coverage_columns(units: pd.DataFrame) -> pd.DataFrame:
    """Per unit: the :data:`COVERAGE_FIELDS` columns of the stored coverage rows ``units``."""
    if units.empty:
        return pd.DataFrame(columns=[*UNIT_KEYS, *names(COVERAGE_FIELDS)])
    out = with_shares(units).merge(national_shares(units), on=["cycle", "chamber"], how="left")
    out = out.rename(columns={"districts_measured": "districts_in_measures", "seats_measured": "seats_in_measures",
                              "note": "missing_or_left_out"})
    out["incomplete"] = np.where(out["incomplete"].astype(int) == 1, "yes", "no")
    out["partial"] = np.where(out["partial"].fillna(0).astype(int) == 1, "yes", "no")
    return typed(out[[*UNIT_KEYS, *names(COVERAGE_FIELDS)]], [*KEYS, *COVERAGE_FIELDS])


def with_unit_coverage(frame: pd.DataFrame, coverage: pd.DataFrame, columns: list[str]) -> pd.DataFrame:
    """``frame`` (rows keyed by unit) with the named coverage columns of its unit; ``incomplete``
    is ``unknown`` for a unit without a stored coverage row (not recomputed since an upgrade)."""
    out = frame.merge(coverage[[*UNIT_KEYS, *columns]], on=UNIT_KEYS, how="left")
    if "incomplete" in columns:
        out["incomplete"] = out["incomplete"].fillna("unknown")
    return out


def measures_export(db) -> pd.DataFrame:
    """``levelfield export measures``: the fixed columns, ``reason``, then the coverage and vote
    shares of each row's unit."""
    m = read_table(db, "measures", [*MEASURE_COLUMNS, "reason"], "cycle, state, chamber, measure")
    m["reason"] = m["reason"].where(m["reason"].astype(str).str.len() > 0, None)  # stored "" for a defined value
    out = with_unit_coverage(m, coverage_columns(stored_coverage(db).units), names(COVERAGE_FIELDS))
    return out[MEASURES_EXPORT_COLUMNS]


def coverage_export(db, districts: bool = False) -> pd.DataFrame:
    """``levelfield export coverage``: one row per unit (``[*KEYS, *COVERAGE_FIELDS]``), or with
    ``districts`` one row per missing or left-out district (:data:`GAP_FIELDS`)."""
    stored = stored_coverage(db)
    if districts:
        return typed(stored.gaps[names(GAP_FIELDS)], GAP_FIELDS)
    return coverage_columns(stored.units)


def expected_seats_export(db) -> pd.DataFrame:
    """``levelfield export expected-seats``: the national pool's expected seats per unit (the
    columns of the site's expected-seats download)."""
    return typed(read_table(db, "pool_seats", names(EXPECTED_SEATS_FIELDS), "cycle, state, chamber"),
                 EXPECTED_SEATS_FIELDS)


def tails_export(db) -> pd.DataFrame:
    """``levelfield export tails``: every unit and measure against its national-pool null, flagged
    or not and why (the columns of the site's flagged-units download)."""
    stored = [n for n in names(TAILS_FIELDS) if n not in ("favours", "incomplete")] + ["direction"]
    t = read_table(db, "tails", stored, "cycle, state, chamber, measure").rename(columns={"direction": "favours"})
    t = with_unit_coverage(t, coverage_columns(stored_coverage(db).units), ["incomplete"])
    return typed(t[names(TAILS_FIELDS)], TAILS_FIELDS)


@dataclass(frozen=True)
class Export:
    """One ``levelfield export NAME``: ``query(db, **flags)`` gives its rows, ``columns`` their
    names in order (of the default rows; a flag may select other rows, e.g. ``coverage
    --districts``); ``flags``: boolean options, name -> help."""

    name: str
    help: str
    query: Callable[..., pd.DataFrame]
    columns: list[str]
    flags: dict[str, str] = field(default_factory=dict)

    def frame(self, db: sqlite_utils.Database, **flags: bool) -> pd.DataFrame:
        out = self.query(db, **flags)
        return out if any(flags.values()) else out[self.columns]


EXPORTS: list[Export] = [
    Export("results", "Current results (the district_results columns) with each contest's two-party reduction.",
           results_export, RESULT_COLUMNS + REDUCTION_COLUMNS),
    Export("measures",
           "Stored measures: cycle,state,chamber,measure,value,low,high,p_value,method_version,policy (fixed, in "
           "this order), then reason (why a value is undefined) and the unit's coverage and vote shares: "
           + ",".join(names(COVERAGE_FIELDS)) + ".", measures_export, MEASURES_EXPORT_COLUMNS),
    Export("coverage",
           "What the measures cover, one row per unit (the site's coverage download): "
           + ",".join([*UNIT_KEYS, *names(COVERAGE_FIELDS)]) + ". Computed by `levelfield compute`.",
           coverage_export, [*UNIT_KEYS, *names(COVERAGE_FIELDS)],
           flags={"districts": "One row per district missing or left out of the measures (" + ",".join(names(GAP_FIELDS))
                               + ") instead of one row per unit."}),
    Export("expected-seats",
           "Expected seats from the national pool, per unit (the site's expected-seats download): "
           + ",".join(names(EXPECTED_SEATS_FIELDS)) + ". excess_seats = seats_a - expected_seats (positive favours a).",
           expected_seats_export, names(EXPECTED_SEATS_FIELDS)),
    Export("tails",
           "Every unit and measure against its national-pool null, flagged or not and why (the site's flagged-units "
           "download): " + ",".join(names(TAILS_FIELDS)) + ". Percentiles are fractions 0-1; flagged is 1 or 0.",
           tails_export, names(TAILS_FIELDS)),
    Export("national", "National aggregates per cycle and chamber: districts, seats and votes of each party, "
                       "uncontested and competitive districts, flagged states, excess seats by who drew the plan.",
           lambda db: aggregates.read(db, "national_summary"), SUMMARY_COLUMNS),
]


def export(db: sqlite_utils.Database, name: str, **flags: bool) -> pd.DataFrame:
    """The rows ``levelfield export NAME`` writes."""
    return next(e for e in EXPORTS if e.name == name).frame(db, **flags)
