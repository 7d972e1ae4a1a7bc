"""Plan eras through the command line: `levelfield plans FILE`, its validation errors, the eras
inferred without a plans file, and loaded eras surviving every recompute.

All data is invented (states QE, QF; parties Harbour = a, Upland = b from tests/conftest.py).
"""

from __future__ import annotations

import pytest

from conftest import long_csv

HEADER = "state,chamber,plan_id,first_cycle,last_cycle,drawn_by,note,source\n"
SETTINGS = "[pool]\ndraws = 200\n[measures]\ninterval_draws = 10\n"


def results(cycles, states=("QE", "QF")) -> str:
    """Three contested districts per state and cycle, shares varying a little by cycle."""
    rows = []
    for cycle in cycles:
        for s, state in enumerate(states):
            for d, base in enumerate((0.40, 0.52, 0.61), 1):
                x = base + 0.01 * ((cycle // 2 + s + d) % 3 - 1)
                rows.append([cycle, state, "federal", str(d), "Harbour", f"H{state}{d}", int(1000 * x)])
                rows.append([cycle, state, "federal", str(d), "Upland", f"U{state}{d}", int(1000 * (1 - x))])
    return long_csv(rows)


def plans_rows(lf):
    return lf.rows("SELECT state, chamber, plan_id, first_cycle, last_cycle, drawn_by, inferred FROM plans "
                   "WHERE state = 'QE' ORDER BY first_cycle, plan_id")


def test_a_loaded_era_that_does_not_cover_its_decade_survives_every_compute(lf):
    # QE's loaded plan QE-federal-2012 covers 2012-2016 only; 2018 and 2020 fall outside it and
    # get an inferred plan of the same decade, which must not take (and replace) the loaded id.
    lf.configure(SETTINGS)
    lf("load", lf.write("results.csv", results((2012, 2014, 2016, 2018, 2020))))
    plans = lf.write("plans.csv", HEADER + "QE,federal,QE-federal-2012,2012,2016,party_b,a note,invented\n")
    out = lf("plans", plans)
    assert "plans.csv: 1 plan(s) loaded for 1 state chamber(s)" in out.stdout
    loaded = ("QE", "federal", "QE-federal-2012", 2012, 2016, "party_b", 0)
    inferred = ("QE", "federal", "QE-federal-2012-inferred", 2018, 2020, "other", 1)
    for _ in range(2):
        lf("compute")
        assert plans_rows(lf) == [loaded, inferred]
    assert lf.rows("SELECT note, source FROM plans WHERE plan_id = 'QE-federal-2012'") == [("a note", "invented")]
    assert lf("compute", "--full") and plans_rows(lf) == [loaded, inferred]
    tails = dict(lf.rows("SELECT DISTINCT cycle, plan_id FROM tails WHERE state = 'QE'"))
    assert tails == {2012: "QE-federal-2012", 2014: "QE-federal-2012", 2016: "QE-federal-2012",
                     2018: "QE-federal-2012-inferred", 2020: "QE-federal-2012-inferred"}
    # QF has no loaded era: its inferred plan keeps the plain decade name
    assert lf.rows("SELECT plan_id, first_cycle, last_cycle, inferred FROM plans WHERE state = 'QF'") == [
        ("QF-federal-2012", 2012, 2020, 1)]


def test_without_a_plans_file_a_plan_per_decade_is_inferred_and_marked(lf):
    lf.configure(SETTINGS)
    lf("load", lf.write("results.csv", results((2010, 2012, 2014, 2020, 2022))))
    lf("compute")
    assert plans_rows(lf) == [
        ("QE", "federal", "QE-federal-2002", 2010, 2010, "other", 1),
        ("QE", "federal", "QE-federal-2012", 2012, 2020, "other", 1),
        ("QE", "federal", "QE-federal-2022", 2022, 2022, "other", 1),
    ]
    notes = {n for (n,) in lf.rows("SELECT note FROM plans")}
    assert notes == {"inferred: a new plan assumed from each cycle ending in 2"}
    # loading an era for QE replaces its inferred plans at the next compute; QF stays inferred
    lf("plans", lf.write("plans.csv", HEADER + "QE,federal,QE-map-A,2010,,commission,,\n"))
    lf("compute")
    assert plans_rows(lf) == [("QE", "federal", "QE-map-A", 2010, None, "commission", 0)]
    assert {r[0] for r in lf.rows("SELECT inferred FROM plans WHERE state = 'QF'")} == {1}


BAD = [
    ("bad drawn_by", "QE,federal,P1,2012,2020,mapmaker,,\n",
     "plans.csv:2:drawn_by: drawn_by 'mapmaker' is not one of party_a, party_b, split, commission, court, other"),
    ("last before first", "QE,federal,P1,2012,2010,party_a,,\n",
     "plans.csv:2:last_cycle: last_cycle 2010 is before first_cycle 2012"),
    ("overlapping eras", "QE,federal,P1,2012,2020,party_a,,\nQE,federal,P2,2016,2024,court,,\n",
     "plans.csv:3:first_cycle: plan 'P2' starts in 2016 while plan 'P1' (row 2) is still in force"),
    ("open era then another", "QE,federal,P1,2002,,party_a,,\nQE,federal,P2,2012,,court,,\n",
     "plans.csv:3:first_cycle: plan 'P2' starts in 2012 while plan 'P1' (row 2) is still in force"),
    ("same plan twice", "QE,federal,P1,2002,2010,party_a,,\nQE,federal,P1,2012,2020,court,,\n",
     "plans.csv:3:plan_id: plan 'P1' is listed twice for QE federal"),
    ("not a year", "QE,federal,P1,20x2,2020,party_a,,\n",
     "plans.csv:2:first_cycle: first_cycle '20x2' is not a year"),
    ("empty state", ",federal,P1,2012,2020,party_a,,\n", "plans.csv:2:state: state is empty"),
    ("short row", "QE,federal,P1,2012,2020\n", "plans.csv:2: has 5 cells but the header has 8 columns"),
]


@pytest.mark.parametrize("case, body, message", BAD, ids=[b[0] for b in BAD])
def test_plans_file_errors_name_file_row_and_column_and_load_nothing(lf, case, body, message):
    lf("plans", lf.write("good.csv", HEADER + "QE,federal,QE-old,1992,2000,court,kept,\n"))
    before = lf.rows("SELECT * FROM plans ORDER BY id")
    out = lf("plans", lf.write("plans.csv", HEADER + body), code=1)
    assert f"error: {message}" in out.output, out.output
    assert "no plan was loaded" in out.output
    assert lf.rows("SELECT * FROM plans ORDER BY id") == before


def test_missing_columns_and_every_row_problem_are_reported_at_once(lf):
    out = lf("plans", lf.write("plans.csv", "state,chamber,plan_id,first_cycle,last_cycle\nQE,federal,P1,2012,\n"),
             code=1)
    assert "error: plans.csv:1:drawn_by: missing column" in out.output
    out = lf("plans", lf.write("plans.csv", HEADER + "QE,federal,P1,2012,2010,mapmaker,,\n"
                                                     "QF,federal,P2,1700,,court,,\n"), code=1)
    for message in ("plans.csv:2:last_cycle:", "plans.csv:2:drawn_by:", "plans.csv:3:first_cycle:"):
        assert message in out.output, out.output
    assert "3 problem(s) in plans.csv" in out.output
    assert lf.rows("SELECT COUNT(*) FROM plans") == [(0,)]


def test_a_missing_plans_file_is_a_usage_error(lf):
    out = lf("plans", lf.files / "nowhere.csv", code=2)
    assert "nowhere.csv" in out.output


def test_plan_codes_follow_the_results_case_rules(lf):
    # results store state codes upper case and chambers lower case; a plans file written
    # `qe,Federal` must name the same state chamber, not a new one that matches no result
    lf.configure(SETTINGS)
    lf("load", lf.write("results.csv", results((2012, 2014))))
    lf("plans", lf.write("plans.csv", HEADER + "qe,Federal,QE-2012,2012,,commission,,invented\n"))
    lf("compute")
    assert lf.rows("SELECT state, chamber, plan_id, inferred FROM plans WHERE plan_id = 'QE-2012'") == [
        ("QE", "federal", "QE-2012", 0)]
    assert dict(lf.rows("SELECT DISTINCT cycle, plan_id FROM tails WHERE state = 'QE'")) == {
        2012: "QE-2012", 2014: "QE-2012"}
