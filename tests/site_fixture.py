"""A small invented store for the site tests.

Results go through the real loader (``monitor.ingest.load_file``) from invented CSV files; the
derived tables (plans, measures, pool_seats, tails, flag_events, watch) are filled with plain SQL
and invented numbers. These numbers only exercise the rendering: they are not check values of any
measure (the measures engine has its own tests against outside references).

Everything here is invented: the states, parties, candidates and votes.
"""

from __future__ import annotations

import datetime as dt
import hashlib
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import sqlite_utils

import store
from monitor.config import Config, load_config
from monitor import aggregates, reductions
from monitor.ingest import load_file

# Markup as a state code. Upper case because the loader stores state codes in upper case (so the
# code stays the same through the load); HTML tag names are case-insensitive, so it would still be
# a script element if any page let it through.
XSS = "<SCRIPT>ALERT(1)</SCRIPT>"
STATES = ("KA", "LU", "MO", XSS)
STATE_NAMES = {"KA": "Karrowen", "LU": "Lunmere", "MO": "Mossvale"}
SEATS = {"KA": 8, "LU": 7, "MO": 6, XSS: 6}
CYCLES = (2016, 2018, 2020, 2022)
LOWER = ("KA", 10)  # KA also has a state legislature lower chamber of 10 districts
UNOFFICIAL = (2022, "MO", "federal")
INJECTION_CANDIDATE = '=HYPERLINK("http://example.invalid","x")'
PARTY_A = ("Lantern Party", "#2a6f97")
PARTY_B = ("Meadow Party", "#b5651d")

CONFIG = f"""
[parties.a]
name = "{PARTY_A[0]}"
labels = ["{PARTY_A[0]}"]
colour = "{PARTY_A[1]}"

[parties.b]
name = "{PARTY_B[0]}"
labels = ["{PARTY_B[0]}"]
colour = "{PARTY_B[1]}"
"""

T0 = dt.datetime(2023, 1, 10, 12, 0, tzinfo=dt.timezone.utc)


@dataclass
class SiteFixture:
    root: Path
    db: sqlite_utils.Database
    config: Config

    def close(self) -> None:
        self.db.conn.close()


def _rows_for(rng, cycle: int, state: str, chamber: str, seats: int, lean: float, bump: float = 0.0):
    status = "unofficial" if (cycle, state, chamber) == UNOFFICIAL else "certified"
    rows = []
    shares = np.clip(rng.normal(0.5 + lean + bump, 0.1, seats), 0.2, 0.8)
    totals = rng.integers(80_000, 160_000, seats)
    for i, (x, n) in enumerate(zip(shares, totals), start=1):
        district = f"{i:02d}"
        if i == seats and cycle in (2018, 2022):  # one uncontested seat in some cycles
            rows.append((district, PARTY_A[0], f"Ael {state[:2]} {cycle} {i}", int(n)))
            continue
        a = int(round(n * x * 0.96))
        b = int(n * 0.96) - a
        rows.append((district, PARTY_A[0], f"Ael {state[:2]} {cycle} {i}", a))
        rows.append((district, PARTY_B[0], f"Bryn {state[:2]} {cycle} {i}", b))
        if i == 1:  # a minor line whose candidate and label begin with formula characters
            rows.append((district, "@Minor Circle", INJECTION_CANDIDATE if state == "KA" else f"Cor {cycle}",
                         int(n * 0.04)))
    return [(cycle, state, chamber, d, p, c, v, status) for d, p, c, v in rows]


def _csv(rows) -> str:
    def cell(value):
        text = str(value)
        return '"' + text.replace('"', '""') + '"' if any(ch in text for ch in ',"\n') else text

    lines = ["cycle,state,chamber,district,party,candidate,votes,status"]
    lines += [",".join(cell(v) for v in row) for row in rows]
    return "\n".join(lines) + "\n"


def cycle_rows(cycle: int, bump: dict[str, float] | None = None):
    bump = bump or {}
    rng = np.random.default_rng(cycle)
    rows = []
    leans = {"KA": 0.04, "LU": -0.03, "MO": 0.0, XSS: -0.05}
    for state in STATES:
        rows += _rows_for(rng, cycle, state, "federal", SEATS[state], leans[state], bump.get(state, 0.0))
    rows += _rows_for(rng, cycle, LOWER[0], "state_lower", LOWER[1], 0.02)
    return rows


def build(root: Path, *, derived: bool = True) -> SiteFixture:
    """Write the invented files under ``root``, load them through the real loader and (when
    ``derived``) fill the derived tables."""
    root.mkdir(parents=True, exist_ok=True)
    (root / "levelfield.toml").write_text(CONFIG, encoding="utf-8")
    config = load_config(root / "levelfield.toml")
    db = store.connect(root / "history.sqlite")
    files = root / "files"
    files.mkdir(exist_ok=True)
    for i, cycle in enumerate(CYCLES):
        path = files / f"{cycle}.csv"
        path.write_text(_csv(cycle_rows(cycle)), encoding="utf-8")
        load_file(db, path, config, source="invented fixture", now=T0 + dt.timedelta(days=i))
    reductions.refresh(db, config)  # the step after every load: the contests' stored reductions
    with store.transaction(db) as conn:
        for code, name in STATE_NAMES.items():
            conn.execute("UPDATE states SET name = ? WHERE code = ?", [name, code])
    if derived:
        fill_derived(db)
    return SiteFixture(root, db, config)


def _rng_for(*key) -> np.random.Generator:
    return np.random.default_rng(int.from_bytes(hashlib.sha256("|".join(map(str, key)).encode()).digest()[:8], "little"))


def _units(db, where: str = "", params=()) -> list[tuple]:
    return db.execute(
        "SELECT u.cycle, u.state, u.chamber, COUNT(c.id) FROM units u JOIN contests c ON c.unit_id = u.id "
        f"WHERE u.superseded_by IS NULL {where} GROUP BY u.id ORDER BY u.cycle, u.state, u.chamber",
        list(params)).fetchall()


def fill_derived(db: sqlite_utils.Database, where: str = "", params=(), stamp: dt.datetime | None = None,
                 salt: str = "") -> None:
    """Invented measures, pool seats and tails for the units selected by ``where`` (all by
    default), replacing what those units had."""
    stamp = (stamp or T0 + dt.timedelta(days=10)).isoformat(timespec="seconds")
    measures, pool, tails = [], [], []
    for cycle, state, chamber, n in _units(db, where, params):
        g = _rng_for(cycle, state, chamber, salt)
        lean = 0.06 if state == "KA" and chamber == "federal" and cycle in (2018, 2020) else (
            -0.06 if state == XSS and cycle in (2020, 2022) else 0.0)
        eg = lean + g.normal(0, 0.02)
        values = {
            "vote_share": (0.5 + g.normal(0, 0.03), None, None, None),
            "seat_share": (0.5 + g.normal(0, 0.1), None, None, None),
            "seats_a": (float(round(n / 2 + lean * 20)), None, None, None),
            "districts": (float(n), None, None, None),
            "uncontested": (float(cycle in (2018, 2022)), None, None, None),  # the fixture's one uncontested seat
            "competitive": (float(g.integers(0, n // 2 + 1)), None, None, None),
            "efficiency_gap": (eg, eg - 0.04, eg + 0.04, None),
            "efficiency_gap_seats": (eg * n, None, None, None),
            "mean_median": (lean / 2 + g.normal(0, 0.01), None, None, 0.2 if lean == 0 else 0.01),
            "lopsided_t": (lean * 30 + g.normal(0, 0.5), None, None, 0.5 if lean == 0 else 0.02),
            "declination": (None, None, None, None) if (cycle, state) == (2016, "MO")
            else (lean * 2 + g.normal(0, 0.05), lean * 2 - 0.1, lean * 2 + 0.1, None),
            "partisan_bias": (lean + g.normal(0, 0.03), lean - 0.08, lean + 0.08, None),
        }
        for name, (value, low, high, p) in values.items():
            reason = "a party won no seat" if value is None else None
            measures.append((cycle, state, chamber, name, value, low, high, p, reason, "1", "impute:0.75",
                             f"h{cycle}{state}{chamber}{salt}", stamp))
        expected = n / 2
        excess = lean * 20
        pool.append((cycle, state, chamber, n, 0.5, expected + excess, expected, expected - 1.5, expected + 1.5,
                     0.99 if lean > 0 else 0.01 if lean < 0 else 0.5, excess, 10000, 9500.0, 0.01, None,
                     "poolhash", "pool-1", stamp))
        for name in ("efficiency_gap", "mean_median", "declination", "partisan_bias", "seats"):
            pct = 0.995 if lean > 0 else 0.005 if lean < 0 else float(g.uniform(0.2, 0.8))
            flagged = int(lean != 0 and name in ("efficiency_gap", "mean_median", "seats"))
            direction = ("a" if lean > 0 else "b") if flagged else None
            value = values.get(name, (excess,))[0]
            tails.append((cycle, state, chamber, name, value, pct, -0.05, 0.05, 0.0, None, pct, 0.0, 0.0,
                          flagged, direction, "null tail" if flagged else None,
                          _plan_id(state, chamber, cycle), None, stamp))
    with store.transaction(db) as conn:
        keys = [(c, s, ch) for c, s, ch, _ in _units(db, where, params)]
        for table in ("measures", "pool_seats", "tails"):
            conn.executemany(f"DELETE FROM {table} WHERE cycle = ? AND state = ? AND chamber = ?", keys)
        conn.executemany("INSERT INTO measures (cycle, state, chamber, measure, value, low, high, p_value, reason, "
                         "method_version, policy, inputs_hash, computed_at) VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?)",
                         measures)
        conn.executemany("INSERT INTO pool_seats (cycle, state, chamber, districts, vote_share, seats_a, "
                         "expected_seats, low, high, percentile, excess_seats, draws, ess, mc_se, reason, "
                         "inputs_hash, method_version, computed_at) VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)",
                         pool)
        conn.executemany("INSERT INTO tails (cycle, state, chamber, measure, value, null_percentile, null_low, "
                         "null_high, null_dropped, p_value, cross_percentile, robust_z, robust_z_all, flagged, "
                         "direction, basis, plan_id, reason, computed_at) "
                         "VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)", tails)
        if not where:
            _plans_watch_events(conn, stamp)
    aggregates.refresh(db)  # what the site reads besides: national aggregates, curves, unit plans (real code)


def _plan_id(state: str, chamber: str, cycle: int) -> str:
    return f"{state}-{chamber}-{2012 if cycle < 2022 else 2022}"


def _plans_watch_events(conn, stamp: str) -> None:
    drawn = {"KA": ("party_a", "party_a"), "LU": ("commission", "commission"), "MO": ("court", "split"),
             XSS: ("party_b", "party_b")}
    plans = []
    for state in STATES:
        for (first, last), by in zip(((2012, 2020), (2022, None)), drawn[state]):
            plans.append((state, "federal", _plan_id(state, "federal", first), first, last, by,
                          f"invented plan of {STATE_NAMES.get(state, 'an invented state')}", "invented fixture", 0))
    plans.append(("KA", "state_lower", "KA-state_lower-2012", 2012, 2021, "other",
                  "inferred: a new plan assumed from each cycle ending in 2", None, 1))
    plans.append(("KA", "state_lower", "KA-state_lower-2022", 2022, 2022, "other",
                  "inferred: a new plan assumed from each cycle ending in 2", None, 1))
    conn.execute("DELETE FROM plans")
    conn.executemany("INSERT INTO plans (state, chamber, plan_id, first_cycle, last_cycle, drawn_by, note, "
                     "source, inferred) VALUES (?,?,?,?,?,?,?,?,?)", plans)
    conn.execute("DELETE FROM watch")
    conn.executemany(
        "INSERT INTO watch (state, chamber, plan_id, drawn_by, inferred, favours, severity, seats_at_stake, "
        "concurring, cycles, measures, since, computed_at) VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?)",
        [("KA", "federal", "KA-federal-2012", "party_a", 0, "a", 1.2, 1.2, 3, "2018 2020",
          "efficiency_gap mean_median seats", 2018, stamp),
         (XSS, "federal", f"{XSS}-federal-2022", "party_b", 0, "b", 1.2, -1.2, 3, "2020 2022",
          "efficiency_gap mean_median seats", 2020, stamp),
         ("MO", "federal", "MO-federal-2022", "split", 0, "a", 0.4, 0.4, 2, "2022", "efficiency_gap seats", 2022,
          stamp)])  # KA's 2012 plan is a past plan (2022 replaced it); XSS's and MO's are in force
    conn.execute("DELETE FROM flag_events")
    events = []
    for cycle, state, direction in ((2018, "KA", "a"), (2020, "KA", "a"), (2020, XSS, "b"), (2022, XSS, "b")):
        for measure in ("efficiency_gap", "mean_median", "seats"):
            events.append(("unit", cycle, state, "federal", _plan_id(state, "federal", cycle), measure, "raised",
                           direction, f"{measure} at percentile 0.995 of its national-pool null", stamp, None))
    for measure in ("efficiency_gap", "mean_median", "seats"):
        events.append(("unit", 2022, "KA", "federal", "KA-federal-2022", measure, "cleared", "a",
                       f"{measure} now inside its null", stamp, None))
    events.append(("plan", None, "KA", "federal", "KA-federal-2012", None, "on watch", "a",
                   "cycles 2018 2020 each flagged by at least two measures favouring a", stamp, None))
    events.append(("plan", None, XSS, "federal", f"{XSS}-federal-2022", None, "on watch", "b",
                   "cycles 2020 2022 each flagged by at least two measures favouring b", stamp, None))
    conn.executemany("INSERT INTO flag_events (scope, cycle, state, chamber, plan_id, measure, event, direction, "
                     "why, at, load_id) VALUES (?,?,?,?,?,?,?,?,?,?,?)", events)


def correct_state(fx: SiteFixture, state: str = "LU", cycle: int = 2022) -> None:
    """A correction of one state's federal results for one cycle, loaded through the real loader,
    with its derived rows recomputed (invented) and one flag event."""
    rows = [r for r in cycle_rows(cycle, bump={state: 0.03}) if r[1] == state and r[2] == "federal"]
    path = fx.root / "files" / f"{cycle}_{state}_correction.csv"
    path.write_text(_csv(rows), encoding="utf-8")
    load_file(fx.db, path, fx.config, source="invented correction", now=T0 + dt.timedelta(days=30))
    reductions.refresh(fx.db, fx.config)
    fill_derived(fx.db, "AND u.state = ? AND u.chamber = 'federal' AND u.cycle = ?", (state, cycle),
                 stamp=T0 + dt.timedelta(days=31), salt="corrected")
    with store.transaction(fx.db) as conn:
        conn.execute("INSERT INTO flag_events (scope, cycle, state, chamber, plan_id, measure, event, direction, "
                     "why, at, load_id) VALUES ('unit', ?, ?, 'federal', ?, 'partisan_bias', 'raised', 'a', "
                     "'a correction moved partisan_bias into the tail', ?, NULL)",
                     [cycle, state, _plan_id(state, "federal", cycle),
                      (T0 + dt.timedelta(days=31)).isoformat(timespec="seconds")])


def add_cycle(fx: SiteFixture, cycle: int, chambers: tuple[str, ...] = ("federal",)) -> None:
    """A later cycle of only some chambers (a partial cycle, as when the federal results arrive
    first), loaded through the real loader, with its derived rows (invented)."""
    rows = [r for r in cycle_rows(cycle) if r[2] in chambers]
    path = fx.root / "files" / f"{cycle}_{'_'.join(chambers)}.csv"
    path.write_text(_csv(rows), encoding="utf-8")
    load_file(fx.db, path, fx.config, source="invented partial cycle", now=T0 + dt.timedelta(days=40))
    reductions.refresh(fx.db, fx.config)
    fill_derived(fx.db, "AND u.cycle = ?", (cycle,), stamp=T0 + dt.timedelta(days=41))
