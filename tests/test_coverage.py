"""Coverage of every unit, the two named vote shares and the added export columns (issue 13 items
5, 8 and 9; issue 16 item 1), through the command line on small invented workspaces.

Every expected number here is hand-computed from the tiny invented inputs written next to it
(plumbing checks of what enters the measures and how it is counted, not checks of a published
method; the measures themselves are checked against outside references in tests/measures).
Parties: Harbour = a, Upland = b, anything else is other (tests/conftest.py).
"""

from __future__ import annotations

import csv
import io
import json

import pandas as pd
import pytest

from conftest import long_csv
from monitor import eligibility as E
from monitor.config import load_config
from monitor.exports import COVERAGE_FIELDS, EXPECTED_SEATS_FIELDS, GAP_FIELDS, KEYS, TAILS_FIELDS
from monitor.flags import judge
from monitor.publish.downloads import RESOURCES

SETTINGS = "[pool]\ndraws = 300\n[measures]\ninterval_draws = 10\n"
EXTRA = ("seats", "special")


def line(cycle, state, district, party, votes, *, seats=1, special=0, chamber="federal", who=None):
    return [cycle, state, chamber, str(district), party, who or f"{party[0]}{state}{cycle}{district}{special}", votes,
            seats, special]


def contested(cycle, state, district, a, b, **kw):
    return [line(cycle, state, district, "Harbour", a, **kw), line(cycle, state, district, "Upland", b, **kw)]


def load(lf, name, rows):
    lf("load", lf.write(name, long_csv(rows, EXTRA)))


def records(lf, *args) -> list[dict]:
    return json.loads(lf("export", *args, "--format", "json").stdout)


def unit(lf, cycle, state, chamber="federal") -> dict:
    rows = [r for r in records(lf, "coverage") if (r["cycle"], r["state"], r["chamber"]) == (cycle, state, chamber)]
    assert len(rows) == 1, rows
    return rows[0]


def gaps(lf, cycle, state) -> list[tuple]:
    return [(r["district"], r["seats"], r["gap"], r["reason"]) for r in records(lf, "coverage", "--districts")
            if (r["cycle"], r["state"]) == (cycle, state)]


# -- the one classifier --------------------------------------------------------------------------

def test_classify_gives_one_reason_per_contest_from_one_place():
    # hand-built reduced contests of one unit: each row exercises one rule
    history = "the general contest decides this seat (the default order: runoff, general, special runoff, special)"
    frame = pd.DataFrame([
        # district, decides, left_out, placeholder, seats, status, winner
        ("1", 1, None, 0, 1, "contested", "a"),      # enters
        ("2", 1, None, 0, 1, "uncontested", "b"),    # enters under impute and none, left out under exclude
        ("3", 1, None, 0, 2, "contested", "split"),  # multi-member
        ("4", 1, None, 0, 1, "no_major", "other"),   # no major party
        ("5", 1, None, 0, 1, "contested", "other"),  # a minor party won
        ("6", 1, None, 1, 1, "uncontested", "a"),    # a placeholder count: unopposed, not on the ballot
        ("1", 0, history, 0, 1, "contested", "b"),   # a special beside district 1's general: history
        ("7", 0, None, 0, 1, "contested", "a"),      # not deciding, no reason stored
    ], columns=["district", "decides", "left_out", "placeholder", "seats", "status", "winner"]).assign(
        cycle=2014, state="QV", chamber="federal", special=0)
    impute = E.classify(frame, "impute").tolist()
    assert impute == [E.ENTERS, E.ENTERS, "multi-member contest (2 seats)", E.NO_MAJOR, E.MINOR_WINNER,
                      E.ENTERS, history, E.NOT_DECIDING]
    exclude = E.classify(frame, "exclude").tolist()
    assert (exclude[1], exclude[5]) == (E.EXCLUDED_UNCONTESTED, E.EXCLUDED_PLACEHOLDER)
    assert E.classify(frame, "none").tolist()[1] == E.ENTERS
    with pytest.raises(ValueError, match="unknown uncontested policy"):
        E.classify(frame, "drop")


# -- coverage through the command line -------------------------------------------------------------

def test_a_district_missing_against_the_previous_cycle_is_listed_and_the_unit_incomplete(lf):
    lf.configure(SETTINGS)
    rows = [r for d, (a, b) in enumerate([(600, 400), (450, 550), (520, 480), (300, 700)], 1)
            for r in contested(2012, "QV", d, a, b)]
    rows += [r for d, (a, b) in enumerate([(610, 390), (440, 560), (530, 470)], 1) for r in contested(2014, "QV", d, a, b)]
    load(lf, "qv.csv", rows)
    out = lf("compute").stdout
    assert "coverage: 1 of 2 unit(s) incomplete" in out
    first, second = unit(lf, 2012, "QV"), unit(lf, 2014, "QV")
    # 2012: the first cycle of its (inferred, 2012-2020) plan: the number expected is unknown
    assert (first["districts_expected"], first["expected_from"], first["incomplete"]) == (None, "unknown", "no")
    assert first["seat_coverage"] == 1.0
    # 2014: 4 districts expected from 2012 (same plan), 3 stored and measured: 3 of 4 seats
    assert (second["districts_in_measures"], second["districts_expected"], second["seats_expected"]) == (3, 4, 4)
    assert second["expected_from"] == "the 2012 results of the same plan"
    assert second["seat_coverage"] == pytest.approx(0.75) and second["incomplete"] == "yes"
    assert second["missing_or_left_out"].startswith("missing: district 4 (in the 2012 results of the same plan")
    assert gaps(lf, 2014, "QV") == [("4", 1, "missing", "in the 2012 results of the same plan; no result stored "
                                                         "for this cycle")]
    # the same marks on every measures row of the unit, after the fixed columns
    measures = [r for r in records(lf, "measures") if r["cycle"] == 2014]
    assert {(r["incomplete"], r["districts_in_measures"], r["districts_expected"]) for r in measures} == {("yes", 3, 4)}
    status = lf("status").stdout
    assert "coverage: 1 of 2 unit(s) incomplete" in status and "1 cover less than 90% of their seats" in status
    assert ("QV federal 2014: missing: district 4 (in the 2012 results of the same plan; no result stored for this "
            "cycle): 3 of 4 districts in the measures (3 of 4 seats, 75%; 4 districts expected from the 2012 results "
            "of the same plan) [never flagged: below flags.min_coverage]") in status


def test_a_new_plan_starts_without_an_expectation_and_a_plans_file_count_applies(lf):
    lf.configure(SETTINGS)
    rows = [r for d in (1, 2, 3) for r in contested(2020, "QV", d, 500 + d, 500 - d)]
    rows += [r for d in (1, 2) for r in contested(2022, "QV", d, 500 + d, 500 - d)]
    load(lf, "qv.csv", rows)
    lf("compute")
    # 2022 is a new (inferred) decade plan: its districts are not expected to be 2020's
    assert (unit(lf, 2022, "QV")["expected_from"], unit(lf, 2022, "QV")["incomplete"]) == ("unknown", "no")
    plans = lf.write("plans.csv", "state,chamber,plan_id,first_cycle,last_cycle,drawn_by,note,source,districts,seats\n"
                                  "QV,federal,QV-2022,2022,,commission,,,3,\n")
    lf("plans", plans)
    lf("compute")
    u = unit(lf, 2022, "QV")
    assert (u["districts_expected"], u["seats_expected"], u["expected_from"]) == (3, 3, "plans file (plan QV-2022)")
    assert u["seat_coverage"] == pytest.approx(2 / 3) and u["incomplete"] == "yes"
    assert gaps(lf, 2022, "QV") == [("", 1, "missing", "1 more district expected (plans file (plan QV-2022)) than "
                                                       "stored; which is not known")]


def test_a_count_declared_in_levelfield_toml_is_used_when_nothing_else_says(lf):
    lf.configure(SETTINGS + "[coverage]\nexpected.federal.qv = { districts = 3, seats = 4 }\n")
    load(lf, "qv.csv", [r for d in (1, 2) for r in contested(2020, "QV", d, 520, 480)])
    lf("compute")
    u = unit(lf, 2020, "QV")
    assert (u["districts_expected"], u["seats_expected"], u["expected_from"]) == (3, 4, "levelfield.toml [coverage] expected")
    # 2 of the 4 declared seats are in the measures; 1 unknown district (2 seats) is missing
    assert u["seat_coverage"] == pytest.approx(0.5)
    assert gaps(lf, 2020, "QV")[0][:3] == ("", 2, "missing")


def test_multi_member_and_minor_party_districts_are_left_out_and_a_special_only_seat_counts(lf):
    lf.configure(SETTINGS)
    rows = [r for d in (1, 2, 3) for r in contested(2014, "QV", d, 600 - 50 * d, 400 + 50 * d)]
    rows += contested(2014, "QV", 1, 510, 490, special=1)               # a special beside district 1's general
    rows += contested(2014, "QV", 4, 530, 470, special=1)               # district 4: only a special election
    rows += [line(2014, "QV", 5, "Harbour", 900, seats=2, who="H5a"), line(2014, "QV", 5, "Harbour", 800, seats=2, who="H5b"),
             line(2014, "QV", 5, "Upland", 850, seats=2, who="U5a"), line(2014, "QV", 5, "Upland", 700, seats=2, who="U5b")]
    rows += [line(2014, "QV", 6, "Harbour", 300), line(2014, "QV", 6, "Upland", 250), line(2014, "QV", 6, "Lantern", 450)]
    load(lf, "qv.csv", rows)
    lf("compute")
    # district 4's special is the contest that decides its seat (no regular contest): it counts;
    # district 1's special beside its general is history, not a gap
    assert gaps(lf, 2014, "QV") == [
        ("5", 2, "left out", "multi-member contest (2 seats)"),
        ("6", 1, "left out", "won by a minor party or an independent"),
    ]
    u = unit(lf, 2014, "QV")
    # districts 1-6 stored (7 seats), 1-4 in the measures (4 seats): 4 of 7
    assert (u["districts_in_measures"], u["seats_in_measures"], u["seat_coverage"]) == (4, 4, pytest.approx(4 / 7))
    assert u["incomplete"] == "yes"
    assert u["missing_or_left_out"] == ("left out: district 5 (multi-member contest (2 seats)); district 6 (won by "
                                        "a minor party or an independent)")
    # the measures count the same districts (one classifier): 4 districts
    m = {r["measure"]: r["value"] for r in records(lf, "measures") if r["cycle"] == 2014}
    assert m["districts"] == 4
    # votes as cast: the deciding contests' raw votes (district 1's general, not its special)
    assert u["vote_share_as_cast"] == pytest.approx((550 + 500 + 450 + 530 + 1700 + 300) / (1000 * 4 + 3250 + 550))


def test_a_seat_no_contest_decides_is_left_out_with_the_loaders_reason(lf):
    # a mapping whose deciding order has no place for specials: district 2's only contest, a
    # special, decides nothing, and the coverage says so in the loader's words
    lf.configure(SETTINGS)
    mapping = lf.write("map.toml", "chamber = \"federal\"\n[columns]\ncycle = \"year\"\nstate = \"st\"\n"
                                   "district = \"dist\"\nparty = \"party\"\ncandidate = \"name\"\nvotes = \"votes\"\n"
                                   "special = \"special\"\n[deciding]\norder = [\"general\"]\n")
    rows = [[2014, "QV", d, party, f"{party}{d}", v, sp] for d, sp, (a, b) in
            ((1, 0, (600, 400)), (2, 1, (450, 550)), (3, 0, (520, 480))) for party, v in (("Harbour", a), ("Upland", b))]
    data = lf.write("archive.csv", "year,st,dist,party,name,votes,special\n" + "".join(
        ",".join(map(str, r)) + "\n" for r in rows))
    lf("load", data, "--mapping", mapping)
    lf("compute")
    (gap,) = gaps(lf, 2014, "QV")
    assert gap[:3] == ("2", 1, "left out")
    assert gap[3] == ("the mapping's [deciding] order (general) has no place for a special contest: no contest "
                      "decides this seat")
    assert unit(lf, 2014, "QV")["districts_in_measures"] == 2


def test_two_vote_shares_differ_under_impute_and_are_both_named(lf):
    lf.configure(SETTINGS)
    rows = contested(2014, "QV", 1, 600, 400) + [line(2014, "QV", 2, "Harbour", 800)]   # district 2 uncontested
    rows += contested(2014, "QF", 1, 300, 700)
    load(lf, "two.csv", rows)
    lf("compute")
    qv = unit(lf, 2014, "QV")
    # as cast: (600 + 800) / (600 + 400 + 800) = 1400 / 1800; after impute 0.75 district 2 is 600-200:
    # (600 + 600) / (1000 + 800) = 1200 / 1800
    assert qv["vote_share_as_cast"] == pytest.approx(1400 / 1800)
    assert qv["vote_share_after_policy"] == pytest.approx(1200 / 1800)
    # nationwide with QF's 300-700: as cast 1700 / 2800, after the policy 1500 / 2800
    assert qv["national_vote_share_as_cast"] == pytest.approx(1700 / 2800)
    assert qv["national_vote_share_after_policy"] == pytest.approx(1500 / 2800)
    # the share after the policy is the measures' own vote_share
    m = {r["measure"]: r for r in records(lf, "measures") if r["state"] == "QV"}
    assert m["vote_share"]["value"] == pytest.approx(qv["vote_share_after_policy"])
    assert m["vote_share"]["vote_share_as_cast"] == pytest.approx(1400 / 1800)
    # under exclude district 2 leaves the measures: 600 / 1000; the share as cast stays
    lf.configure(SETTINGS + "[uncontested]\npolicy = \"exclude\"\n")
    lf("compute")
    qv = unit(lf, 2014, "QV")
    assert (qv["vote_share_as_cast"], qv["vote_share_after_policy"]) == (pytest.approx(1400 / 1800), pytest.approx(0.6))
    assert "district 2 (uncontested, left out under the exclude policy)" in qv["missing_or_left_out"]
    # export national names the share as cast beside the share after the policy
    national = records(lf, "national")
    assert national[0]["vote_share_as_cast"] == pytest.approx(1700 / 2800)
    assert national[0]["vote_share"] == pytest.approx(900 / 2000)


def test_pages_name_both_shares_and_show_coverage(lf):
    lf.configure(SETTINGS)
    rows = contested(2014, "QV", 1, 600, 400) + [line(2014, "QV", 2, "Harbour", 800)]
    rows += [line(2014, "QV", 3, "Harbour", 300), line(2014, "QV", 3, "Upland", 250), line(2014, "QV", 3, "Lantern", 450)]
    rows += contested(2014, "QF", 1, 300, 700)
    load(lf, "two.csv", rows)
    lf("compute")
    lf("publish")
    page = (lf.root / "public" / "state" / "qv" / "federal.html").read_text(encoding="utf-8")
    text = " ".join(page.split())
    # as cast: (600 + 800 + 300) / (1000 + 800 + 550) = 1700 / 2350; after the policy district 3 (won by
    # Lantern) is out and district 2 is imputed 600-200: 1200 / 1800
    assert "Harbour Party 72.3% of the two-party vote as cast (the votes counted); 66.7% after the uncontested policy" in text
    assert "2 of 3 districts in the measures (2 of 3 seats, 67%" in text
    assert "district 3 (1 seat): left out, won by a minor party or an independent" in text
    assert "below the 90% of seats a unit needs to be flagged, so it is never flagged" in text
    cycle = " ".join((lf.root / "public" / "cycle" / "2014.html").read_text(encoding="utf-8").split())
    # nationwide with QF's 300-700: as cast 2000 / 3350 = 59.7%; after the policy over the districts
    # in the measures (1200 + 300) / (1800 + 1000) = 53.6%
    assert "two-party share, votes as cast" in cycle and "<td>59.7%</td><td>53.6%</td>" in cycle
    # the states list marks QV (incomplete) and not QF
    assert 'QV</a> <span class="badge badge-incomplete"' in cycle and 'QF</a> <span class="badge' not in cycle


# -- flags: never below min_coverage, incomplete shown as such ----------------------------------------

def lopsided_state(cycle, state, extra=()):
    """Eight districts where a's wins are far more lopsided than b's (a wins 86-92%, b wins 52-55%):
    the lopsided-margins test's p is tiny, so the unit is flagged by its p-value."""
    shares = [0.88, 0.90, 0.92, 0.86, 0.47, 0.46, 0.48, 0.45]
    rows = [r for d, x in enumerate(shares, 1) for r in contested(cycle, state, d, int(1000 * x), 1000 - int(1000 * x))]
    return rows + list(extra)


def minor_wins(cycle, state, districts):
    return [r for d in districts for r in (line(cycle, state, d, "Harbour", 200), line(cycle, state, d, "Upland", 200),
                                           line(cycle, state, d, "Lantern", 600))]


@pytest.mark.parametrize("minimum, flagged", [(0.9, False), (0.75, True)])
def test_a_unit_below_min_coverage_is_never_flagged_and_says_why(lf, minimum, flagged):
    lf.configure(SETTINGS + f"[flags]\nmin_coverage = {minimum}\n")
    # QV: 8 districts in the measures and 2 won by a minor party: 8 of 10 seats (0.8)
    rows = lopsided_state(2014, "QV", minor_wins(2014, "QV", (9, 10)))
    rows += [r for d, x in enumerate([0.4, 0.45, 0.55, 0.6, 0.52, 0.5], 1) for r in contested(2014, "QF", d, int(1000 * x), 1000 - int(1000 * x))]
    load(lf, "flags.csv", rows)
    lf("compute")
    assert unit(lf, 2014, "QV")["seat_coverage"] == pytest.approx(0.8)
    tails = [r for r in records(lf, "tails") if r["state"] == "QV"]
    lop = next(r for r in tails if r["measure"] == "lopsided")
    assert lop["flagged"] == int(flagged)
    assert {r["incomplete"] for r in tails} == {"yes"}
    shown = json.loads(lf("flags", "--format", "json").stdout)
    if flagged:  # the flag shows the unit as incomplete, with what is left out
        row = next(r for r in shown if r["state"] == "QV" and r["measure"] == "lopsided")
        assert row["incomplete"] == "yes" and row["seat_coverage"] == pytest.approx(0.8)
        assert "districts 10, 9 (won by a minor party or an independent)" in row["missing_or_left_out"]
    else:
        assert not any(r["state"] == "QV" for r in shown)
        assert {r["reason"] for r in tails if r["flagged"] == 0 and r["measure"] == "lopsided"} == {
            "the measures cover 80% of the seats, below flags.min_coverage (90%): not flagged"}
        assert not any(r["flagged"] for r in tails)


def test_judge_leaves_units_below_min_coverage_unflagged(tmp_path):
    path = tmp_path / "levelfield.toml"
    path.write_text("", encoding="utf-8")
    config = load_config(path)
    rows = pd.DataFrame([{"cycle": 2014, "state": s, "chamber": "federal", "measure": "efficiency_gap",
                          "value": 0.2, "null_percentile": 0.999, "p_value": float("nan"), "reason": None}
                         for s in ("QA", "QB", "QC")])
    keys = pd.MultiIndex.from_frame(rows[["cycle", "state", "chamber"]])
    districts = pd.Series(10, index=keys)
    share = pd.Series([0.95, 0.85, float("nan")], index=keys)  # QC: no coverage row (not recomputed yet)
    t = judge(rows, pd.DataFrame(columns=["cycle", "state", "chamber", "measure", "value", "p_value", "reason"]),
              districts, config, share).set_index("state")
    assert t["flagged"].to_dict() == {"QA": 1, "QB": 0, "QC": 1}
    assert t.loc["QB", "reason"] == "the measures cover 85% of the seats, below flags.min_coverage (90%): not flagged"


# -- export columns ----------------------------------------------------------------------------------

def test_exports_have_the_columns_of_the_site_downloads_in_order(lf):
    lf.configure(SETTINGS)
    load(lf, "qv.csv", lopsided_state(2014, "QV") + lopsided_state(2014, "QF") + contested(2014, "QG", 1, 600, 400))
    lf("compute")
    # export measures says why a value is undefined, in the column after the fixed ones
    rows = list(csv.reader(io.StringIO(lf("export", "measures").stdout)))
    assert rows[0][10] == "reason"
    eg = {(r[1], r[3]): r[10] for r in rows[1:]}
    assert eg[("QG", "efficiency_gap")] == "fewer than 2 districts" and eg[("QV", "efficiency_gap")] == ""
    fields = {spec["name"]: [f[0] for f in spec["fields"]] for spec in RESOURCES}
    for command, resource in (("expected-seats", "expected-seats"), ("tails", "flagged-units"),
                              ("coverage", "coverage")):
        header = next(csv.reader(io.StringIO(lf("export", command).stdout)))
        assert header == fields[resource], command
    header = next(csv.reader(io.StringIO(lf("export", "coverage", "--districts").stdout)))
    assert header == fields["coverage-gaps"] == [f[0] for f in GAP_FIELDS]
    assert fields["expected-seats"] == [f[0] for f in EXPECTED_SEATS_FIELDS]
    assert fields["flagged-units"] == [f[0] for f in TAILS_FIELDS]
    assert fields["coverage"] == [f[0] for f in [*KEYS, *COVERAGE_FIELDS]]
    seats = records(lf, "expected-seats")
    assert len(seats) == 3 and isinstance(seats[0]["draws"], int) and seats[0]["districts"] == 8
    # every command and option is in --help
    help_text = lf("export", "--help").stdout
    assert {"coverage", "expected-seats", "tails"} <= set(help_text.split())
    assert "--districts" in lf("export", "coverage", "--help").stdout


def test_a_store_from_before_coverage_exports_incomplete_as_unknown_until_recomputed(lf):
    lf.configure(SETTINGS)
    load(lf, "qv.csv", lopsided_state(2014, "QV"))
    lf("compute")
    with __import__("sqlite3").connect(lf.store_path) as conn:  # as a store migrated from schema 3 holds it
        conn.execute("DELETE FROM coverage")
    assert {r["incomplete"] for r in records(lf, "measures")} == {"unknown"}
    assert "coverage:" not in lf("status").stdout
    lf("compute")
    assert {r["incomplete"] for r in records(lf, "measures")} == {"no"}


def test_bad_declared_counts_and_min_coverage_are_configuration_errors(lf):
    lf.configure("[coverage]\nexpected.federal.QV = 0\n")
    result = lf("status", code=2)
    assert "coverage.expected has federal.QV = 0: must be a whole number of districts" in result.output
    lf.configure("[flags]\nmin_coverage = 1.5\n")
    assert "flags.min_coverage must be at most 1.0" in lf("status", code=2).output


def test_a_plans_file_with_bad_counts_is_refused_with_row_and_column(lf):
    bad = lf.write("plans.csv", "state,chamber,plan_id,first_cycle,last_cycle,drawn_by,districts,seats\n"
                                "QV,federal,P1,2012,,court,0,\n"
                                "QF,federal,P2,2012,,court,,4\n"
                                "QG,federal,P3,2012,,court,4,3\n")
    out = lf("plans", bad, code=1).output
    assert "plans.csv:2:districts: districts '0' is not a whole number of at least 1" in out
    assert "plans.csv:3:districts: seats is given without districts: give both" in out
    assert "plans.csv:4:seats: seats 3 is fewer than districts 4" in out


def test_a_flag_cleared_by_the_coverage_rule_says_why(lf):
    lf.configure(SETTINGS + "[flags]\nmin_coverage = 0.75\n")
    rows = lopsided_state(2014, "QV", minor_wins(2014, "QV", (9, 10)))
    rows += [r for d, x in enumerate([0.4, 0.45, 0.55, 0.6, 0.52, 0.5], 1) for r in contested(2014, "QF", d, int(1000 * x), 1000 - int(1000 * x))]
    load(lf, "flags.csv", rows)
    lf("compute")
    lf.configure(SETTINGS)  # back to the default 0.9: QV's 80% is below it
    lf("compute")
    changes = json.loads(lf("flags", "--changes", "--format", "json").stdout)
    cleared = [c for c in changes if c["state"] == "QV" and c["event"] == "cleared"]
    assert cleared and {c["why"] for c in cleared} == {
        "the measures cover 80% of the seats, below flags.min_coverage (90%): not flagged"}


def test_the_watch_list_names_its_incomplete_cycles():
    from monitor.flags import _incomplete_cycles

    watch = pd.DataFrame([{"state": "QV", "chamber": "federal", "cycles": "2012 2014 2016"},
                          {"state": "QF", "chamber": "federal", "cycles": "2012 2014"}])
    cover = pd.DataFrame([(2014, "QV", "federal", 1), (2016, "QV", "federal", 0), (2012, "QF", "federal", 0)],
                         columns=["cycle", "state", "chamber", "incomplete"])
    assert _incomplete_cycles(watch, cover)["incomplete_cycles"].tolist() == ["2014", ""]


# -- the sample history: consistency of the stored coverage with the measures and the national table --

def test_on_the_sample_history_coverage_agrees_with_the_measures_and_the_national_table(sample_workspace):
    import numpy as np

    from monitor.coverage import national_shares, stored_coverage
    from monitor.exports import export, measures_export

    db, config = sample_workspace.open_store(), sample_workspace.config()
    m = measures_export(db)
    share = m[m["measure"] == "vote_share"]
    np.testing.assert_allclose(share["value"], share["vote_share_after_policy"], rtol=0, atol=1e-12)
    # every seat in the measures is one district row of the measures (a numbered seat is one)
    districts = m[m["measure"] == "districts"]
    assert (districts["value"] == districts["seats_in_measures"]).all()
    # what is left out of the sample (README "States and seats"): the two-member districts (HH's
    # district 007, every district of EK and OD) under the default treatment; the staggered
    # senates' per-cycle units lack the class not up, which their whole-chamber units hold
    cover = stored_coverage(db)
    units = cover.units
    incomplete = units[(units["incomplete"] == 1) & (units["partial"] == 0)]
    assert set(zip(incomplete["state"], incomplete["chamber"])) == {
        ("HH", "state_lower"), ("EK", "state_lower"), ("OD", "state_lower")}
    left_out = cover.gaps[cover.gaps["gap"] == "left out"]
    assert set(left_out["reason"]) == {"multi-member contest (2 seats)"}
    hh = incomplete[incomplete["state"] == "HH"]
    assert (hh["seats_measured"] == 58).all() and (hh["seats_stored"] == 60).all()
    assert (incomplete[incomplete["state"] != "HH"]["seat_coverage"] == 0).all()
    # HY's numbered seats: 40 districts, 80 seats, all in the measures
    hy = units[(units["state"] == "HY") & (units["chamber"] == "state_lower")]
    assert len(hy) == 27 and (hy["districts_stored"] == 40).all() and (hy["seats_measured"] == 80).all()
    assert (hy["incomplete"] == 0).all()
    halves = units[units["partial"] == 1]
    assert set(halves["chamber"]) == {"state_upper"} and len(halves) == 7 * 27
    assert set(cover.gaps["gap"]) == {"left out", "not up"}
    # the national shares of export measures are the national table's (as cast and after the policy)
    national = export(db, "national").set_index(["cycle", "chamber"])
    shares = national_shares(cover.units).set_index(["cycle", "chamber"]).reindex(national.index)
    np.testing.assert_allclose(shares["national_vote_share_as_cast"], national["vote_share_as_cast"], atol=1e-12)
    np.testing.assert_allclose(shares["national_vote_share_after_policy"], national["vote_share"], atol=1e-12)


def test_init_writes_the_coverage_options_commented_and_they_load_once_uncommented(lf, tmp_path):
    from monitor.config import default_toml

    text = default_toml()
    assert "min_coverage = 0.9" in text
    assert "# expected.federal.QV = 12\n# expected.state_lower.QV = { districts = 40, seats = 60 }" in text
    path = tmp_path / "levelfield.toml"
    path.write_text(text.replace("# expected.", "expected."), encoding="utf-8")
    assert load_config(path)["coverage.expected"] == {"federal": {"QV": 12},
                                                      "state_lower": {"QV": {"districts": 40, "seats": 60}}}
