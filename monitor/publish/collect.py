"""Collect: read everything the site shows from the store into plain frames (a :class:`SiteData`).

This is the first stage of the build (collect -> render -> write). It reads stored numbers only
and never writes; it tolerates a fresh store: every frame then is empty with its columns, and the
site says that nothing is loaded yet. The national aggregates (histogram, summary, excess seats by
who drew the plan), the seats-votes curves and each unit's plan era are computed upstream by the
aggregates step (:mod:`monitor.aggregates`) and read here from its tables; what remains here is
words, not numbers: which flags changed since each unit's previous cycle and what each correction
changed (from the load report, or by comparing the stored reductions of the two deliveries).
"""

from __future__ import annotations

import datetime as dt
import json
import os
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import sqlite_utils

from monitor.config import OPTIONS, Config, Party
from monitor.coverage import stored_coverage, with_shares
from monitor.exports import coverage_columns, with_unit_coverage
from monitor.inputs import reduced_contests
from monitor.measures import registry
from monitor.reduce import describe_changes
from monitor.results import results_export
from monitor.publish.paths import unique_slugs
from store import aggregates, history, tables
from store import reductions as stored_reductions

#: Chamber codes of the sample contract, in display order, with their labels.
CHAMBER_LABELS = {"federal": "Federal lower chamber", "state_lower": "State legislature, lower chamber",
                  "state_upper": "State legislature, upper chamber"}
CHAMBER_SHORT = {"federal": "federal", "state_lower": "state lower", "state_upper": "state upper"}
#: a staggered chamber's whole-chamber unit (:mod:`monitor.staggered`): the latest election of every seat
WHOLE = "_whole"

#: Measures charted over time and across states, in this order (when the store has them).
HEADLINE_MEASURES = tuple(m.name for m in registry.measures() if m.headline)

EPOCH = dt.datetime(1970, 1, 1, tzinfo=dt.timezone.utc)

_COLUMNS = {
    "loads": ["id", "file_name", "sha256", "bytes", "format", "source", "rows_accepted", "units_new",
              "units_corrected", "units_unchanged", "loaded_at", "outcome"],
    "units": ["unit_id", "cycle", "state", "chamber", "certification", "load_id"],
    "measures": ["cycle", "state", "chamber", "measure", "value", "low", "high", "p_value", "reason",
                 "method_version", "policy"],
    "pool_seats": ["cycle", "state", "chamber", "districts", "vote_share", "seats_a", "expected_seats",
                   "low", "high", "percentile", "excess_seats", "draws", "ess", "mc_se", "reason",
                   "method_version"],
    "tails": ["cycle", "state", "chamber", "measure", "value", "null_percentile", "null_low", "null_high",
              "null_dropped", "p_value", "cross_percentile", "robust_z", "flagged", "direction", "basis",
              "plan_id", "reason"],
    "flag_events": ["id", "scope", "cycle", "state", "chamber", "plan_id", "measure", "event", "direction",
                    "why", "at", "load_id"],
    "watch": ["state", "chamber", "plan_id", "drawn_by", "inferred", "favours", "severity", "seats_at_stake",
              "concurring", "cycles", "measures", "since"],
    "plans": ["state", "chamber", "plan_id", "first_cycle", "last_cycle", "drawn_by", "note", "source",
              "inferred"],
}
_ORDER = {
    "loads": "id", "units": "cycle, state, chamber", "measures": "cycle, state, chamber, measure",
    "pool_seats": "cycle, state, chamber", "tails": "cycle, state, chamber, measure", "flag_events": "id",
    "watch": "severity DESC, concurring DESC, state, chamber, plan_id", "plans": "state, chamber, first_cycle",
}


@dataclass
class SiteData:
    """Everything the pages show, as frames sorted by (cycle, state, chamber)."""

    parties: dict[str, Party]
    policy: str
    settings: list[dict]
    measure_docs: list
    thresholds: list[dict]
    loads: pd.DataFrame
    units: pd.DataFrame
    measures: pd.DataFrame
    pool: pd.DataFrame
    tails: pd.DataFrame
    events: pd.DataFrame
    watch: pd.DataFrame
    plans: pd.DataFrame
    unit_plans: pd.DataFrame
    state_names: dict[str, str]
    curves: pd.DataFrame
    curve_points: pd.DataFrame
    histogram: pd.DataFrame
    site_time: dt.datetime
    national: pd.DataFrame = field(default_factory=pd.DataFrame)
    #: per unit: the stored coverage with the two vote shares (monitor.coverage); its gaps
    coverage: pd.DataFrame = field(default_factory=pd.DataFrame)
    coverage_gaps: pd.DataFrame = field(default_factory=pd.DataFrame)
    coverage_export: pd.DataFrame = field(default_factory=pd.DataFrame)  # the coverage download's rows
    min_coverage: float = 0.9
    drawers: pd.DataFrame = field(default_factory=pd.DataFrame)
    seats_votes: pd.DataFrame = field(default_factory=pd.DataFrame)
    corrections: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=CORRECTION_COLUMNS))
    base_url: str = ""
    state_slugs: dict[str, str] = field(default_factory=dict)
    chamber_slugs: dict[str, str] = field(default_factory=dict)
    _headline: list[str] | None = field(default=None, repr=False)
    #: the store the heavy frames are read from when asked (contests and vote lines are read per
    #: state chamber or per cycle, so a build never holds every contest and vote line at once)
    db: object = field(default=None, repr=False)
    _contests: pd.DataFrame | None = field(default=None, repr=False)
    _results: pd.DataFrame | None = field(default=None, repr=False)
    _read_ahead: tuple | None = field(default=None, repr=False)

    @property
    def contests(self) -> pd.DataFrame:
        """Every current contest with its reduction (read once, when first asked)."""
        if self._contests is None:
            self._contests = reduced_contests(self.db)
        return self._contests

    def contests_of(self, state: str, chamber: str, cycles=None) -> pd.DataFrame:
        """The current contests of one state chamber (of ``cycles`` only, when given), read from the
        store: a state page's results."""
        if self._contests is not None:
            c = self._contests
            keep = (c["state"] == state) & (c["chamber"] == chamber)
            return c[keep & c["cycle"].isin(cycles)] if cycles is not None else c[keep]
        u = self.units
        keep = (u["state"] == state) & (u["chamber"] == chamber)
        if cycles is not None:
            keep &= u["cycle"].isin(cycles)
        ids = [int(i) for i in u.loc[keep, "unit_id"]]
        read = self._read_ahead
        if read is not None and ids and read[1].keys() >= set(ids):
            return read[0].take(sorted(row for i in set(ids) for row in read[1][i]))  # the rows in their read order
        return reduced_contests(self.db, unit_ids=ids)

    def read_ahead(self, units: list[tuple[int, str, str]]) -> None:
        """Read the current contests of these (cycle, state, chamber) units in one query, for
        :meth:`contests_of` to answer from (the state pages' results of a new cycle: one query
        instead of one per page)."""
        u = self.units
        wanted = set(units)
        keep = [k in wanted for k in zip(u["cycle"].astype(int), u["state"], u["chamber"])]
        ids = [int(i) for i in u.loc[keep, "unit_id"]]
        if not ids:
            self._read_ahead = None
            return
        read = reduced_contests(self.db, unit_ids=ids)
        rows: dict[int, list[int]] = {i: [] for i in ids}  # each unit's rows, found once for every page
        for row, unit in enumerate(read["unit_id"].tolist()):
            rows.setdefault(unit, []).append(row)
        self._read_ahead = (read, rows)

    @property
    def results(self) -> pd.DataFrame:
        """Every current vote line with its contest's reduction (the results download; read once)."""
        if self._results is None:
            self._results = results_export(self.db)
        return self._results

    def results_of(self, cycle: int) -> pd.DataFrame:
        """The current vote lines of one cycle (the results download, one cycle at a time)."""
        if self._results is not None:
            return self._results[self._results["cycle"] == cycle]
        return results_export(self.db, cycle)

    @property
    def empty(self) -> bool:
        return self.units.empty

    @property
    def cycles(self) -> list[int]:
        return sorted(int(c) for c in self.units["cycle"].unique())

    @property
    def chambers(self) -> list[str]:
        return chamber_order(self.units["chamber"].unique())

    @property
    def latest_cycle(self) -> int | None:
        return self.cycles[-1] if self.cycles else None

    @property
    def previous_cycle(self) -> int | None:
        return self.cycles[-2] if len(self.cycles) > 1 else None

    def chamber_cycles(self, chamber: str) -> list[int]:
        """The cycles with results in ``chamber``, oldest first."""
        return sorted(int(c) for c in self.units.loc[self.units["chamber"] == chamber, "cycle"].unique())

    def chamber_latest(self) -> dict[str, int]:
        """Each chamber's own latest cycle (a partial cycle of one chamber leaves the others' as they were)."""
        return {ch: cycles[-1] for ch in self.chambers if (cycles := self.chamber_cycles(ch))}

    def pairs(self) -> list[tuple[str, str]]:
        """Every (state, chamber) with results, sorted by state then chamber order."""
        pairs = self.units[["state", "chamber"]].drop_duplicates()
        order = {c: i for i, c in enumerate(self.chambers)}
        return sorted(((s, c) for s, c in pairs.itertuples(index=False)), key=lambda p: (p[0], order[p[1]]))

    def state_name(self, state: str) -> str:
        return self.state_names.get(state) or state

    def chamber_label(self, chamber: str) -> str:
        """The chamber in words: a known one's name, a staggered chamber's whole-chamber unit as
        such, any other code with spaces for underscores."""
        if chamber.endswith(WHOLE) and chamber != WHOLE:
            return f"{self.chamber_label(chamber[:-len(WHOLE)])}, whole chamber"
        label = CHAMBER_LABELS.get(chamber) or chamber.replace("_", " ")
        return label[:1].upper() + label[1:]

    def chamber_short(self, chamber: str) -> str:
        """The chamber in a table cell."""
        if chamber.endswith(WHOLE) and chamber != WHOLE:
            return f"{self.chamber_short(chamber[:-len(WHOLE)])} (whole)"
        return CHAMBER_SHORT.get(chamber) or chamber.replace("_", " ")

    def headline(self) -> list[str]:
        if self._headline is None:
            present = set(self.measures["measure"].unique().tolist())
            self._headline = [m for m in HEADLINE_MEASURES if m in present]
        return self._headline

    def doc(self, measure: str):
        return next((d for d in self.measure_docs if d.name == measure), None)

    def label(self, measure: str) -> str:
        doc = self.doc(measure)
        judged = registry.flag_by_name().get(measure)
        label = doc.label if doc is not None else judged.flag.label if judged is not None else None
        if label:
            return label.replace("(a)", f"({self.parties['a'].name})").replace("(b)", f"({self.parties['b'].name})")
        return measure.replace("_", " ")


def chamber_order(chambers) -> list[str]:
    known = [c for c in CHAMBER_LABELS if c in set(chambers)]
    return known + sorted(set(chambers) - set(known))


def measure_docs() -> list:
    """The measures' documentation: their declarations in the registry."""
    return registry.measures()


def proposed_thresholds() -> list[dict]:
    """Reference lines proposed in the legal literature (declared with their measures)."""
    return [dict(t) for m in registry.measures() for t in m.thresholds]


def source_date_epoch() -> dt.datetime | None:
    """``$SOURCE_DATE_EPOCH`` as a UTC datetime, None when unset (reproducible-builds.org)."""
    raw = os.environ.get("SOURCE_DATE_EPOCH", "").strip()
    if not raw:
        return None
    try:
        return dt.datetime.fromtimestamp(int(raw), dt.timezone.utc)
    except (ValueError, OverflowError, OSError):
        raise ValueError(f"SOURCE_DATE_EPOCH must be whole seconds since 1970, got {raw!r}") from None


def parse_time(text) -> dt.datetime | None:
    if text is None or (isinstance(text, float) and np.isnan(text)) or text == "":
        return None
    stamp = dt.datetime.fromisoformat(str(text).replace("Z", "+00:00"))
    return stamp if stamp.tzinfo else stamp.replace(tzinfo=dt.timezone.utc)


def latest_time(stamps) -> dt.datetime | None:
    times = [t for t in (parse_time(s) for s in stamps) if t is not None]
    return max(times) if times else None


def collect(db: sqlite_utils.Database, config: Config) -> SiteData:
    """Read the store into a :class:`SiteData` (no writes, no computation of numbers: the national
    aggregates, curves and each unit's plan come from the aggregates step's tables, the coverage
    from the measures step's)."""
    frames = {name: _table(db, name) for name in _COLUMNS}
    units = frames.pop("units")
    plans = frames["plans"]
    plans["inferred"] = plans["inferred"].fillna(0).astype(int)
    derived = {name: aggregates.read(db, name) for name in aggregates.TABLES}
    derived["unit_plans"]["inferred"] = derived["unit_plans"]["inferred"].fillna(0).astype(int)
    loaded = frames["loads"][frames["loads"]["outcome"] == "loaded"]
    # coverage and vote shares as the last recompute stored them, on every tails row
    stored = stored_coverage(db)
    cover = coverage_columns(stored.units)
    frames["tails"] = with_unit_coverage(frames["tails"], cover, ["incomplete"])
    data = SiteData(
        parties={code: config.party(code) for code in ("a", "b")},
        policy=config.policy,
        settings=_settings(config),
        measure_docs=measure_docs(),
        thresholds=proposed_thresholds(),
        loads=frames["loads"],
        units=units,
        measures=frames["measures"],
        pool=frames["pool_seats"],
        tails=frames["tails"],
        events=frames["flag_events"],
        watch=frames["watch"],
        plans=plans,
        unit_plans=derived["unit_plans"],
        state_names={**history.state_names(db), **config.state_names()},
        curves=derived["swing_curves"],
        curve_points=derived["swing_points"],
        histogram=derived["national_histogram"],
        db=db,
        site_time=source_date_epoch() or latest_time(loaded["loaded_at"]) or EPOCH,
        national=derived["national_summary"],
        drawers=derived["national_drawers"],
        seats_votes=derived["seats_votes"],
        corrections=corrections(db),
        base_url=config["site.base_url"],
        coverage=with_shares(stored.units),
        coverage_export=cover,
        coverage_gaps=stored.gaps,
        min_coverage=config["flags.min_coverage"],
    )
    data.state_slugs = unique_slugs(units["state"])
    data.chamber_slugs = unique_slugs(units["chamber"])
    return data


def _table(db: sqlite_utils.Database, name: str) -> pd.DataFrame:
    """A table (or the current units) with its known columns, empty when absent."""
    if name == "units":
        return history.current_units(db)[_COLUMNS["units"]]
    return tables.read_table(db, name, _COLUMNS[name], _ORDER[name])


def _settings(config: Config) -> list[dict]:
    """The options in force that shape the numbers (not the party names, load or schedule)."""
    skip = ("parties.", "load.", "schedule.", "site.", "states")
    return [{"name": opt.name, "value": config[opt.name], "default": opt.default, "help": opt.help}
            for opt in OPTIONS if not opt.name.startswith(skip)]


def flag_changes(data: SiteData, chamber: str | None = None) -> pd.DataFrame:
    """Unit flags of each (state, chamber) unit's latest cycle against that unit's previous cycle,
    per measure: ``raised`` (flagged now, not before), ``cleared`` or ``reversed`` (direction
    changed).

    Only units present in the latest cycle of their chamber take part, each against its own
    previous cycle: after a partial cycle (one chamber, or some states, loaded) the units it does
    not cover keep their standing instead of having every flag "cleared". A unit with no earlier
    cycle lists its flags as raised. ``cycle_before`` / ``cycle_now`` say which cycles each row
    compares."""
    cols = ["state", "chamber", "measure", "change", "before", "now", "cycle_before", "cycle_now"]
    t = data.tails
    if data.units.empty or t.empty:
        return pd.DataFrame(columns=cols)
    latest = data.chamber_latest()
    units = data.units[["cycle", "state", "chamber"]].astype({"cycle": int})
    now_units = units[units["cycle"] == units["chamber"].map(latest)]
    earlier = units[units["cycle"] < units["chamber"].map(latest)]
    previous = earlier.groupby(["state", "chamber"])["cycle"].max()
    t = t.assign(flagged=t["flagged"].fillna(0).astype(int), cycle=t["cycle"].astype(int))
    flags = t[t["flagged"] == 1].set_index(["cycle", "state", "chamber", "measure"])["direction"].to_dict()
    by_unit: dict[tuple, dict[str, str]] = {}
    for (cycle, state, ch, measure), direction in flags.items():
        by_unit.setdefault((cycle, state, ch), {})[measure] = direction
    rows = []
    for u in now_units.sort_values(["state", "chamber"]).itertuples(index=False):
        if chamber is not None and u.chamber != chamber:
            continue
        prev = previous.get((u.state, u.chamber))
        now = by_unit.get((u.cycle, u.state, u.chamber), {})
        before = by_unit.get((int(prev), u.state, u.chamber), {}) if prev is not None else {}
        for measure in sorted(set(now) | set(before)):
            b, n = before.get(measure), now.get(measure)
            change = "raised" if b is None else "cleared" if n is None else "reversed" if b != n else None
            if change is not None:
                rows.append((u.state, u.chamber, measure, change, b, n, None if prev is None else int(prev), int(u.cycle)))
    return pd.DataFrame(rows, columns=cols)


# --- corrections ------------------------------------------------------------------------------------
CORRECTION_COLUMNS = ["load_id", "file_name", "sha256", "loaded_at", "cycle", "state", "chamber", "unit_id",
                      "old_unit_id", "old_load_id", "changes", "basis"]


def corrections(db: sqlite_utils.Database) -> pd.DataFrame:
    """Every unit a load superseded (a correction), oldest first, with what changed: from the
    load's stored report when it has this unit's entry (``basis`` = ``load report``), otherwise by
    comparing the superseded unit with its successor (``basis`` = ``compared``)."""
    frame = history.corrections(db)
    if frame.empty:
        return pd.DataFrame(columns=CORRECTION_COLUMNS)
    reports: dict[int, dict | None] = {}
    for load_id, text in frame[["load_id", "report"]].drop_duplicates("load_id").itertuples(index=False):
        reports[int(load_id)] = _report_changes(text)
    changes, basis, missing = [], [], []
    for r in frame.itertuples(index=False):
        report = reports[int(r.load_id)]
        listed = None if report is None else report.get((int(r.cycle), r.state, r.chamber))
        if listed is not None:
            changes.append(listed)
            basis.append("load report")
        else:
            changes.append(None)
            basis.append("compared" if report is not None else "compared (the stored load report is not readable)")
            missing.append(r)
    if missing:
        compared = _compare_units(db, missing)
        it = iter(compared)
        changes = [c if c is not None else next(it) for c in changes]
    frame["changes"] = changes
    frame["basis"] = basis
    return frame[CORRECTION_COLUMNS].reset_index(drop=True)


def _report_changes(text) -> dict[tuple, list[str]] | None:
    """(cycle, state, chamber) -> the change texts of the corrected units in a stored load report
    (empty when there is no report; None when the stored report cannot be read, which the
    correction's ``basis`` then says)."""
    if text is None or (isinstance(text, float) and np.isnan(text)) or text == "":
        return {}
    try:
        report = json.loads(text)
    except json.JSONDecodeError:
        return None
    if not isinstance(report, dict):
        return None
    out = {}
    for u in report.get("units") or []:
        if u.get("action") == "corrected":
            out[(int(u["cycle"]), str(u["state"]), str(u["chamber"]))] = [str(c) for c in u.get("changes") or []]
    return out


def _compare_units(db: sqlite_utils.Database, rows) -> list[list[str]]:
    """What changed between each superseded unit and its successor, in the words of a load
    report: seats of each party, districts added or dropped, winners, vote totals, status."""
    ids = sorted({int(r.old_unit_id) for r in rows} | {int(r.unit_id) for r in rows})
    reduced = {}
    for unit_id, red in stored_reductions.of_units(db, ids).groupby("unit_id"):
        red = red.assign(key=list(zip(red["district"], red["special"].astype(int).astype(bool),
                                      red["runoff"].astype(int).astype(bool))))
        reduced[int(unit_id)] = red.set_index("key")
    empty = pd.DataFrame(columns=["seats_a", "seats_b", "votes_a", "votes_b", "votes_other", "winner"])
    out = []
    for r in rows:
        old, new = reduced.get(int(r.old_unit_id), empty), reduced.get(int(r.unit_id), empty)
        changes = []
        if r.old_certification != r.certification:
            changes.append(f"status: {r.old_certification} -> {r.certification}")
        changes += describe_changes(old, new)
        out.append(changes)
    return out
