"""Collect: read everything the site shows from the store into plain frames (a :class:`SiteData`).

This is the first stage of the build (collect -> render -> write). It reads, never writes, and
tolerates a fresh store: every frame then is empty with its columns, and the site says that
nothing is loaded yet. Derived numbers the pages show (the seats-votes curve under uniform swing,
the national histogram, what changed since the previous cycle) are computed here, in Python, so
that templates only lay out what they are given.
"""

from __future__ import annotations

import datetime as dt
import os
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import sqlite_utils

from monitor.config import OPTIONS, Config, Party
from monitor.inputs import UNIT_KEYS, reduced_contests
from monitor.measures.swing import seat_share_at
from monitor.reduce import two_party_inputs
from monitor.results import results_export
from monitor.publish.paths import unique_slugs

#: Chamber codes of the sample contract, in display order, with their labels.
CHAMBER_LABELS = {"federal": "Federal lower chamber", "state_lower": "State legislature, lower chamber"}
CHAMBER_SHORT = {"federal": "federal", "state_lower": "state lower"}

#: Measures charted over time and across states, in this order (when the store has them).
HEADLINE_MEASURES = ("efficiency_gap", "efficiency_gap_seats", "mean_median", "lopsided_t",
                     "declination", "partisan_bias")

#: Width of the bins of the national histogram of district shares.
HISTOGRAM_BIN = 0.025

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
    contests: pd.DataFrame
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
    results: pd.DataFrame
    site_time: dt.datetime
    state_slugs: dict[str, str] = field(default_factory=dict)
    chamber_slugs: dict[str, str] = field(default_factory=dict)
    _headline: list[str] | None = field(default=None, repr=False)

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

    def pairs(self) -> list[tuple[str, str]]:
        """Every (state, chamber) with results, sorted by state then chamber order."""
        pairs = self.units[["state", "chamber"]].drop_duplicates()
        order = {c: i for i, c in enumerate(self.chambers)}
        return sorted(((s, c) for s, c in pairs.itertuples(index=False)), key=lambda p: (p[0], order[p[1]]))

    def state_name(self, state: str) -> str:
        return self.state_names.get(state) or state

    def chamber_label(self, chamber: str) -> str:
        return CHAMBER_LABELS.get(chamber, chamber)

    def chamber_short(self, chamber: str) -> str:
        """The chamber in a table cell."""
        return CHAMBER_SHORT.get(chamber, chamber)

    def headline(self) -> list[str]:
        if self._headline is None:
            present = set(self.measures["measure"])
            self._headline = [m for m in HEADLINE_MEASURES if m in present]
        return self._headline

    def doc(self, measure: str):
        return next((d for d in self.measure_docs if d.name == measure), None)

    def label(self, measure: str) -> str:
        doc = self.doc(measure)
        if doc is not None:
            return doc.label.replace("(a)", f"({self.parties['a'].name})").replace("(b)", f"({self.parties['b'].name})")
        return {"seats": f"Seats ({self.parties['a'].name}) against the national pool",
                "lopsided": "Lopsided outcomes (t-test p)"}.get(
            measure, measure.replace("_", " "))


def chamber_order(chambers) -> list[str]:
    known = [c for c in CHAMBER_LABELS if c in set(chambers)]
    return known + sorted(set(chambers) - set(known))


def measure_docs() -> list:
    """The measures' documentation from the measures engine (``monitor.measures.MEASURES``)."""
    from monitor.measures import MEASURES

    return list(MEASURES)


def proposed_thresholds() -> list[dict]:
    """Reference lines proposed in the legal literature (owned by the flags module)."""
    try:
        from monitor.flags import PROPOSED_THRESHOLDS
    except ImportError:
        return []
    return [dict(t) for t in PROPOSED_THRESHOLDS]


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
    """Read the store into a :class:`SiteData` (no writes)."""
    tables = {name: _table(db, name) for name in _COLUMNS}
    units = tables.pop("units")
    contests = _contests(db, config)
    plans = tables["plans"]
    for col in ("inferred",):
        plans[col] = plans[col].fillna(0).astype(int)
    states = _states(db)
    loaded = tables["loads"][tables["loads"]["outcome"] == "loaded"]
    site_time = source_date_epoch() or latest_time(loaded["loaded_at"]) or EPOCH
    curves, points = seats_votes_curves(contests)
    data = SiteData(
        parties={code: config.party(code) for code in ("a", "b")},
        policy=config.policy,
        settings=_settings(config),
        measure_docs=measure_docs(),
        thresholds=proposed_thresholds(),
        loads=tables["loads"],
        units=units,
        contests=contests,
        measures=tables["measures"],
        pool=tables["pool_seats"],
        tails=tables["tails"],
        events=tables["flag_events"],
        watch=tables["watch"],
        plans=plans,
        unit_plans=plans_of_units(units, plans),
        state_names=states,
        curves=curves,
        curve_points=points,
        histogram=share_histogram(contests),
        results=results_export(db),
        site_time=site_time,
    )
    data.state_slugs = unique_slugs(units["state"])
    data.chamber_slugs = unique_slugs(units["chamber"])
    return data


def _table(db: sqlite_utils.Database, name: str) -> pd.DataFrame:
    """A table (or the current units) with its known columns, empty when absent."""
    columns = _COLUMNS[name]
    if name == "units":
        sql = ("SELECT id AS unit_id, cycle, state, chamber, certification, load_id FROM units "
               "WHERE superseded_by IS NULL ORDER BY cycle, state, chamber")
    else:
        if name not in db.table_names():
            return pd.DataFrame(columns=columns)
        present = set(db[name].columns_dict)
        cols = [c for c in columns if c in present]
        sql = f"SELECT {', '.join(cols)} FROM {name} ORDER BY {_ORDER[name]}"
    frame = pd.read_sql_query(sql, db.conn)
    for col in columns:
        if col not in frame:
            frame[col] = None
    return frame[columns]


def _states(db: sqlite_utils.Database) -> dict[str, str]:
    if "states" not in db.table_names():
        return {}
    return {code: name for code, name in db.execute("SELECT code, name FROM states ORDER BY code") if name}


def _settings(config: Config) -> list[dict]:
    """The options in force that shape the numbers (not the party names, load or schedule)."""
    skip = ("parties.", "load.", "schedule.")
    return [{"name": opt.name, "value": config[opt.name], "default": opt.default, "help": opt.help}
            for opt in OPTIONS if not opt.name.startswith(skip)]


def _contests(db: sqlite_utils.Database, config: Config) -> pd.DataFrame:
    """Every current contest with its reduction, raw two-party share and the share that enters
    the measures after the uncontested policy (NaN when the contest does not enter them)."""
    contests = reduced_contests(db)
    if contests.empty:
        for col in ("share_a", "share_used", "votes_a_used", "votes_b_used", "imputed"):
            contests[col] = pd.Series(dtype=float if col != "imputed" else bool)
        return contests
    contests = contests.sort_values([*UNIT_KEYS, "district", "special"], kind="mergesort").reset_index(drop=True)
    two = (contests["votes_a"] + contests["votes_b"]).astype(float)
    contests["share_a"] = np.where(two > 0, contests["votes_a"] / two.where(two > 0, 1.0), np.nan)
    regular = contests[contests["special"].astype(int) == 0]
    used = two_party_inputs(regular, config["uncontested.policy"], config["uncontested.winner_share"])
    used = used.set_index("contest_id")
    va = used["votes_a"].reindex(contests["contest_id"]).to_numpy(float)
    vb = used["votes_b"].reindex(contests["contest_id"]).to_numpy(float)
    contests["votes_a_used"], contests["votes_b_used"] = va, vb
    with np.errstate(invalid="ignore", divide="ignore"):
        contests["share_used"] = np.where(va + vb > 0, va / (va + vb), np.nan)
    unc = used["uncontested"].reindex(contests["contest_id"])
    contests["imputed"] = unc.fillna(False).astype(bool).to_numpy() & (config["uncontested.policy"] == "impute")
    return contests


def plans_of_units(units: pd.DataFrame, plans: pd.DataFrame) -> pd.DataFrame:
    """The plan era in force for each unit (cycle, state, chamber): plan_id, drawn_by, inferred;
    NaN where no era covers the unit."""
    keys = units[UNIT_KEYS]
    if keys.empty or plans.empty:
        return keys.assign(plan_id=None, drawn_by=None, inferred=0)
    merged = keys.merge(plans[["state", "chamber", "plan_id", "first_cycle", "last_cycle", "drawn_by", "inferred"]],
                        on=["state", "chamber"], how="left")
    last = merged["last_cycle"].astype(float).fillna(np.inf)
    inside = (merged["first_cycle"].astype(float) <= merged["cycle"]) & (merged["cycle"] <= last)
    merged = merged[inside].drop_duplicates(UNIT_KEYS)
    out = keys.merge(merged[[*UNIT_KEYS, "plan_id", "drawn_by", "inferred"]], on=UNIT_KEYS, how="left")
    out["inferred"] = out["inferred"].fillna(0).astype(int)
    return out


def _measure_rows(contests: pd.DataFrame) -> pd.DataFrame:
    rows = contests[np.isfinite(contests["share_used"].to_numpy(float))]
    return rows[[*UNIT_KEYS, "district", "votes_a_used", "votes_b_used", "share_used", "imputed"]]


def seats_votes_curves(contests: pd.DataFrame) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The seats-votes curve under uniform swing of the latest cycle of every (state, chamber)
    with at least two districts.

    Shifting every district share by the same amount ``d`` moves the statewide vote-weighted
    share from ``V`` to ``V + d``; district ``i`` changes hands at ``v_i = V + 1/2 - x_i``. The
    curve is the step function through those points: just above ``v_i`` the seat share counts
    every district whose flip point lies at or below it. Returned as step vertices (state,
    chamber, cycle, vote, seat_share) over ``v`` in [0, 1], plus the marked points (observed
    result, statewide vote flipped to ``1 - V``, and 50 %), each evaluated with the measures
    engine's :func:`~monitor.measures.swing.seat_share_at` so they agree with ``partisan_bias``
    and ``seats_at_flipped_vote``.
    """
    cols = ["state", "chamber", "cycle", "vote", "seat_share"]
    pcols = ["state", "chamber", "cycle", "point", "vote", "seat_share", "seats", "districts"]
    rows = _measure_rows(contests)
    if rows.empty:
        return pd.DataFrame(columns=cols), pd.DataFrame(columns=pcols)
    latest = rows.groupby(["state", "chamber"])["cycle"].transform("max")
    rows = rows[rows["cycle"] == latest]
    # like the engine's uniform-swing measures, a curve needs at least two districts
    rows = rows[rows.groupby(UNIT_KEYS)["district"].transform("size") >= 2]
    if rows.empty:
        return pd.DataFrame(columns=cols), pd.DataFrame(columns=pcols)
    rows = rows.sort_values([*UNIT_KEYS, "district"], kind="mergesort")
    units = rows[UNIT_KEYS].drop_duplicates().reset_index(drop=True)
    unit = rows.groupby(UNIT_KEYS, sort=False).ngroup().to_numpy(np.int64)
    va, vb = rows["votes_a_used"].to_numpy(float), rows["votes_b_used"].to_numpy(float)
    n_units = len(units)
    count = np.bincount(unit, minlength=n_units)
    V = np.bincount(unit, va, n_units) / np.bincount(unit, va + vb, n_units)
    flip = V[unit] + 0.5 - va / (va + vb)
    order = np.lexsort((flip, unit))
    flip, u_sorted = flip[order], unit[order]
    starts = np.concatenate([[0], np.cumsum(count)[:-1]])
    rank = np.arange(flip.size) - starts[u_sorted] + 1
    inside = (flip > 0) & (flip < 1)
    # seat share at the ends of [0, 1] from the engine, then one vertex per flip point inside
    s0 = seat_share_at(unit, va, vb, n_units, np.zeros(n_units))
    s1 = seat_share_at(unit, va, vb, n_units, np.ones(n_units))
    vertex = pd.DataFrame({"u": u_sorted[inside], "vote": flip[inside], "seat_share": rank[inside] / count[u_sorted[inside]]})
    ends = pd.DataFrame({"u": np.concatenate([np.arange(n_units)] * 2),
                         "vote": np.concatenate([np.zeros(n_units), np.ones(n_units)]),
                         "seat_share": np.concatenate([s0, s1])})
    curve = pd.concat([ends.iloc[:n_units], vertex, ends.iloc[n_units:]], ignore_index=True)
    curve = curve.sort_values(["u", "vote"], kind="mergesort")
    # several districts flipping at the same point: keep the last (highest) step
    curve = curve.drop_duplicates(["u", "vote"], keep="last")
    curve = units.reset_index().rename(columns={"index": "u"}).merge(curve, on="u")[cols]

    points = []
    for name, at in (("observed", V), ("flipped vote", 1.0 - V), ("even vote", np.full(n_units, 0.5))):
        share = seat_share_at(unit, va, vb, n_units, at)
        points.append(units.assign(point=name, vote=at, seat_share=share, seats=share * count, districts=count))
    return curve.reset_index(drop=True), pd.concat(points, ignore_index=True)[pcols]


def share_histogram(contests: pd.DataFrame) -> pd.DataFrame:
    """Counts of district shares (after the uncontested policy) per cycle and chamber, in bins of
    :data:`HISTOGRAM_BIN`, split into contested districts and imputed ones."""
    cols = ["cycle", "chamber", "bin_start", "bin_end", "kind", "districts"]
    rows = _measure_rows(contests)
    if rows.empty:
        return pd.DataFrame(columns=cols)
    edges = np.round(np.arange(0, 1 + HISTOGRAM_BIN / 2, HISTOGRAM_BIN), 6)
    k = np.clip(np.floor(rows["share_used"].to_numpy(float) / HISTOGRAM_BIN).astype(int), 0, len(edges) - 2)
    share = rows["share_used"].to_numpy(float)
    won = np.where(share > 0.5, "won by a", np.where(share < 0.5, "won by b", "tied"))
    frame = pd.DataFrame({"cycle": rows["cycle"].to_numpy(), "chamber": rows["chamber"].to_numpy(), "k": k,
                          "kind": np.where(rows["imputed"].to_numpy(bool), "uncontested (imputed share)", won)})
    counts = frame.groupby(["cycle", "chamber", "k", "kind"]).size().rename("districts").reset_index()
    counts["bin_start"] = edges[counts["k"]]
    counts["bin_end"] = edges[counts["k"] + 1]
    return counts[cols].sort_values(["cycle", "chamber", "bin_start", "kind"]).reset_index(drop=True)


def flag_changes(data: SiteData, chamber: str | None = None) -> pd.DataFrame:
    """Unit flags of the latest cycle against the previous one, per (state, chamber, measure):
    ``raised`` (flagged now, not before), ``cleared`` or ``reversed`` (direction changed)."""
    cols = ["state", "chamber", "measure", "change", "before", "now"]
    latest, previous = data.latest_cycle, data.previous_cycle
    t = data.tails
    if latest is None or t.empty:
        return pd.DataFrame(columns=cols)
    t = t.assign(flagged=t["flagged"].fillna(0).astype(int))
    now = t[(t["cycle"] == latest) & (t["flagged"] == 1)].set_index(["state", "chamber", "measure"])["direction"]
    before = (t[(t["cycle"] == previous) & (t["flagged"] == 1)].set_index(["state", "chamber", "measure"])["direction"]
              if previous is not None else pd.Series(dtype=object))
    rows = []
    for key in sorted(set(now.index) | set(before.index)):
        b, n = before.get(key), now.get(key)
        change = "raised" if b is None else "cleared" if n is None else "reversed" if b != n else None
        if change is not None:
            rows.append((*key, change, b, n))
    out = pd.DataFrame(rows, columns=cols)
    return out if chamber is None else out[out["chamber"] == chamber]
