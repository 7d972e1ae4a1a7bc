"""National aggregates per cycle and chamber (monitor.national, stored by monitor.aggregates) on a
small hand-built store.

The results are invented and go through the real loader and reduction step; the measures (among
them the stored ``competitive`` and ``uncontested`` counts) come from the real engine
(``monitor.compute``); the expected seats, flags and plan eras are inserted by hand, then the real
aggregates step runs. Every expected number below was counted
by hand from the rows in ``RESULTS`` (the arithmetic is in the comments); none is a check value
from outside the project. Definitions used: the uncontested policy ``impute`` gives the party that
stood 0.75 of the contest's votes (the project's default); a district is competitive when its
two-party share is within 0.05 of 50% (the default window: common practice).
"""

from __future__ import annotations

import csv
import io
import json

import numpy as np
import pandas as pd
import pytest

import store
from conftest import csv_text
from monitor import aggregates
from monitor.compute import compute
from monitor.national import DRAWER_KEYS, SUMMARY_COLUMNS, excess_by_drawer, share_histogram
from monitor.exports import export
from monitor.inputs import reduced_contests
from store import aggregates as stored_aggregates


def national_export(db, config=None):
    """What ``levelfield export national`` writes: the stored summary of the aggregates step."""
    return export(db, "national")

HEADER = ["cycle", "state", "chamber", "district", "party", "candidate", "votes", "seats"]
F, L = "federal", "state_lower"
RESULTS = [
    # 2020 federal, state AA
    [2020, "AA", F, "1", "Harbour", "Ada Quell", 520, 1], [2020, "AA", F, "1", "Upland", "Bo Rinn", 480, 1],   # a, 0.52
    [2020, "AA", F, "2", "Harbour", "Cy Dorn", 300, 1], [2020, "AA", F, "2", "Upland", "Di Vale", 700, 1],     # b, 0.30
    [2020, "AA", F, "3", "Harbour", "Ed Morr", 600, 1],                                                       # a, uncontested
    [2020, "AA", F, "4", "Harbour", "Fa Lint", 460, 1], [2020, "AA", F, "4", "Upland", "Gil Orr", 540, 1],     # b, 0.46
    [2020, "AA", F, "4", "Cinder", "Hal Witt", 100, 1],
    # 2020 federal, state BB
    [2020, "BB", F, "1", "Harbour", "Ira Kell", 200, 1], [2020, "BB", F, "1", "Upland", "Jo Penn", 800, 1],    # b, 0.20
    [2020, "BB", F, "2", "Upland", "Kai Moss", 500, 1],                                                       # b, uncontested
    [2020, "BB", F, "3", "Harbour", "Lu Varn", 510, 1], [2020, "BB", F, "3", "Upland", "Mo Tesk", 490, 1],     # a, 0.51
    [2020, "BB", F, "4", "Cinder", "Ned Awl", 900, 1], [2020, "BB", F, "4", "Harbour", "Oda Fenn", 50, 1],     # minor wins
    [2020, "BB", F, "4", "Upland", "Pim Groat", 50, 1],
    # 2020 state lower chamber, state AA (district 3 elects two members)
    [2020, "AA", L, "1", "Harbour", "Quin Ash", 700, 1], [2020, "AA", L, "1", "Upland", "Rae Holt", 300, 1],   # a, 0.70
    [2020, "AA", L, "2", "Harbour", "Sol Prye", 480, 1], [2020, "AA", L, "2", "Upland", "Tam Reed", 520, 1],   # b, 0.48
    [2020, "AA", L, "3", "Harbour", "Uma Cole", 400, 2], [2020, "AA", L, "3", "Harbour", "Vic Dane", 350, 2],
    [2020, "AA", L, "3", "Upland", "Wyn Ford", 300, 2], [2020, "AA", L, "3", "Upland", "Xan Gale", 200, 2],    # a wins both
    # 2022 federal, state AA only
    [2022, "AA", F, "1", "Harbour", "Yul Hart", 560, 1], [2022, "AA", F, "1", "Upland", "Zed Ivey", 440, 1],   # a, 0.56
    [2022, "AA", F, "2", "Harbour", "Abe Jory", 400, 1], [2022, "AA", F, "2", "Upland", "Bea Kemp", 600, 1],   # b, 0.40
]
STAMP = "2023-01-01T00:00:00+00:00"


@pytest.fixture
def national_store(lf):
    lf("load", lf.write("national.csv", csv_text(HEADER, RESULTS)))
    db = store.connect(lf.store_path)
    from monitor.config import load_config

    config = load_config(lf.root / "levelfield.toml")
    compute(db, config)  # the engine stores competitive and uncontested per unit
    with store.transaction(db) as conn:
        conn.executemany(
            "INSERT INTO pool_seats (cycle, state, chamber, districts, excess_seats, inputs_hash, method_version, "
            "computed_at) VALUES (?,?,?,?,?,'h','1',?)",
            [(2020, "AA", F, 4, 0.6, STAMP), (2020, "BB", F, 3, -0.25, STAMP), (2020, "AA", L, 2, 0.1, STAMP),
             (2022, "AA", F, 2, None, STAMP)])
        conn.executemany(
            "INSERT INTO tails (cycle, state, chamber, measure, flagged, direction, computed_at) VALUES (?,?,?,?,?,?,?)",
            [(2020, "AA", F, "efficiency_gap", 1, "a", STAMP), (2020, "AA", F, "mean_median", 1, "a", STAMP),
             (2020, "BB", F, "efficiency_gap", 0, None, STAMP), (2022, "AA", F, "efficiency_gap", 1, "b", STAMP)])
        conn.executemany(
            "INSERT INTO plans (state, chamber, plan_id, first_cycle, last_cycle, drawn_by, inferred) VALUES (?,?,?,?,?,?,?)",
            [("AA", F, "AA-1", 2012, 2020, "party_a", 0), ("AA", F, "AA-2", 2022, None, "court", 0),
             ("AA", L, "AA-L", 2012, 2021, "other", 1)])  # BB federal: no plan era
    aggregates.refresh(db)
    yield lf, db, config
    db.conn.close()


def _row(frame: pd.DataFrame, cycle: int, chamber: str) -> dict:
    rows = frame[(frame["cycle"] == cycle) & (frame["chamber"] == chamber)]
    assert len(rows) == 1, rows
    return rows.iloc[0].to_dict()


def test_national_summary_against_hand_counts(national_store):
    _, db, config = national_store
    out = national_export(db, config)
    assert list(out.columns) == SUMMARY_COLUMNS
    assert [(int(c), ch) for c, ch in zip(out["cycle"], out["chamber"])] == [(2020, F), (2020, L), (2022, F)]

    r = _row(out, 2020, F)
    assert (r["states"], r["districts"], r["seats"]) == (2, 8, 8)
    # seats: a wins AA1, AA3, BB3; b wins AA2, AA4, BB1, BB2; a minor party wins BB4
    assert (r["seats_a"], r["seats_b"], r["seats_other"]) == (3, 4, 1)
    assert r["votes_a"] == 520 + 300 + 600 + 460 + 200 + 510 + 50
    assert r["votes_b"] == 480 + 700 + 540 + 800 + 500 + 490 + 50
    assert r["votes_other"] == 100 + 900
    # BB4 (won by a minor party) does not enter the measures
    assert r["measured_districts"] == 7
    # after the policy AA3 counts 450 a / 150 b, BB2 125 a / 375 b
    va = 520 + 300 + 450 + 460 + 200 + 125 + 510
    vb = 480 + 700 + 150 + 540 + 800 + 375 + 490
    assert r["vote_share"] == pytest.approx(va / (va + vb))
    assert r["uncontested"] == 2                       # AA3, BB2
    assert r["competitive"] == 3                       # 0.52, 0.46, 0.51 (0.30, 0.75, 0.20, 0.25 are not)
    assert r["measured_units"] == 2
    assert r["flagged_units"] == 1                     # AA (two measures), BB not flagged
    assert r["pool_units"] == 2
    assert r["excess_seats"] == pytest.approx(0.6 - 0.25)
    assert r["excess_party_a"] == pytest.approx(0.6) and r["excess_no_plan"] == pytest.approx(-0.25)
    assert all(r[f"excess_{k}"] == 0 for k in DRAWER_KEYS if k not in ("party_a", "no_plan"))

    r = _row(out, 2020, L)
    # three districts, four seats; the two-member district (both to a) stays out of the measures
    assert (r["states"], r["districts"], r["seats"], r["seats_a"], r["seats_b"]) == (1, 3, 4, 3, 1)
    assert r["measured_districts"] == 2
    assert r["vote_share"] == pytest.approx((700 + 480) / 2000)
    assert (r["uncontested"], r["competitive"], r["flagged_units"]) == (0, 1, 0)
    assert r["excess_inferred"] == pytest.approx(0.1) and r["excess_other"] == 0

    r = _row(out, 2022, F)
    assert (r["states"], r["districts"], r["seats_a"], r["seats_b"], r["flagged_units"]) == (1, 2, 1, 1, 1)
    assert r["competitive"] == 0                       # 0.56 and 0.40 lie outside the window
    assert r["pool_units"] == 0 and np.isnan(r["excess_seats"]) and np.isnan(r["excess_court"])


def test_competitive_is_the_sum_of_the_stored_measure(national_store):
    """The count follows the engine's stored values, not a second comparison of the shares."""
    _, db, config = national_store
    stored = dict(db.execute("SELECT state, value FROM measures WHERE cycle = 2020 AND chamber = 'federal' "
                             "AND measure = 'competitive'").fetchall())
    assert stored == {"AA": 2, "BB": 1}
    with store.transaction(db) as conn:
        conn.execute("UPDATE measures SET value = 5 WHERE cycle = 2020 AND state = 'BB' AND chamber = 'federal' "
                     "AND measure = 'competitive'")
    assert _row(national_export(db, config), 2020, F)["competitive"] == 2 + 1  # stored: as of the last step
    aggregates.refresh(db)
    assert _row(national_export(db, config), 2020, F)["competitive"] == 2 + 5


def test_share_histogram_against_hand_counts(national_store):
    _, db, config = national_store
    hist = share_histogram(reduced_contests(db))
    assert hist.equals(stored_aggregates.read(db, "national_histogram"))  # what the step stored
    h = hist[(hist["cycle"] == 2020) & (hist["chamber"] == F)]
    got = sorted((round(float(b), 3), kind, side, int(n)) for b, kind, side, n in
                 zip(h["bin_start"], h["kind"], h["side"], h["districts"]))
    assert got == [
        (0.2, "won by b", "b", 1),                     # BB1 0.20
        (0.25, "uncontested (imputed share)", "b", 1),  # BB2 at 0.25
        (0.3, "won by b", "b", 1),                     # AA2 0.30: on a bin edge, in the bin that starts there
        (0.45, "won by b", "b", 1),                    # AA4 0.46
        (0.5, "won by a", "a", 2),                     # AA1 0.52, BB3 0.51
        (0.75, "uncontested (imputed share)", "a", 1),  # AA3 at 0.75
    ]
    assert int(h["districts"].sum()) == 7
    assert (h["bin_end"] - h["bin_start"]).round(6).eq(0.025).all()


def test_excess_by_drawer_groups_inferred_and_unplanned_units(national_store):
    _, db, config = national_store
    from monitor.national import plans_of_units

    pool = pd.read_sql_query("SELECT cycle, state, chamber, excess_seats FROM pool_seats", db.conn)
    plans = pd.read_sql_query("SELECT * FROM plans", db.conn)
    units = pool[["cycle", "state", "chamber"]]
    by = excess_by_drawer(pool, plans_of_units(units, plans))
    got = {(int(c), ch, d): (round(x, 6), int(n)) for c, ch, d, x, n in by.itertuples(index=False)}
    assert got == {(2020, F, "party_a"): (0.6, 1), (2020, F, "no_plan"): (-0.25, 1), (2020, L, "inferred"): (0.1, 1)}


def test_cli_export_national(national_store):
    lf, db, config = national_store
    expected = national_export(db, config)
    rows = list(csv.DictReader(io.StringIO(lf("export", "national").stdout)))
    assert list(rows[0]) == SUMMARY_COLUMNS and len(rows) == len(expected)
    assert float(rows[0]["competitive"]) == 3 and int(rows[0]["districts"]) == 8
    records = json.loads(lf("export", "national", "--format", "json").stdout)
    assert [(r["cycle"], r["chamber"], r["seats_a"]) for r in records] == [(2020, F, 3), (2020, L, 3), (2022, F, 1)]
    out = lf.root / "national.json"
    lf("export", "national", "--format", "json", "--out", out)
    assert json.loads(out.read_text(encoding="utf-8")) == records


def test_empty_store_gives_an_empty_table_with_its_columns(lf):
    db = store.connect(lf.store_path)
    from monitor.config import load_config

    try:
        aggregates.refresh(db)
        out = national_export(db, load_config(lf.root / "levelfield.toml"))
        assert out.empty and list(out.columns) == SUMMARY_COLUMNS
    finally:
        db.conn.close()
