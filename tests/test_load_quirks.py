"""One small invented file per quirk of real result files, each loaded through README's archive
mapping (or a variant of it): the stored contests, the load report and what enters the measures.

Expected values are hand-computed from the invented inputs written here (loader plumbing, not
measure checks)."""

from __future__ import annotations

import re

import pytest

from archive_helpers import H, M, archive_csv, archive_mapping, contests, line, load_archive, measured


def other_district(year, st, district="1", a=600, b=400):
    """A plain contested district (so that a unit has a real vote total besides a quirk)."""
    return [line(year, st, district, f"Ana {st}{district}", H, a), line(year, st, district, f"Bo {st}{district}", M, b)]


# --- repeated lines -------------------------------------------------------------------------------

def test_scattered_write_in_lines_are_summed_and_counted(lf):
    rows = [line(2018, "OV", "2", "Jory Wend", H, 39900), line(2018, "OV", "2", "Dace Orrin", M, 41000),
            line(2018, "OV", "2", "WRITEIN", "", 210), line(2018, "OV", "2", "WRITEIN", "", 95),
            line(2018, "OV", "2", "WRITEIN", "", 12)]
    out = load_archive(lf, rows).stdout
    assert "rows read 5, accepted 5, rejected 0" in out
    assert "repeated lines combined: 2 line(s) added into an earlier line" in out
    assert lf.rows("SELECT candidate, party, votes, writein, source_row FROM votes ORDER BY source_row") == [
        ("Jory Wend", "HEARTHSIDE", 39900, 0, 2), ("Dace Orrin", "MERIDIAN", 41000, 0, 3), ("WRITEIN", "", 317, 1, 4)]
    exported = {r["candidate"]: r for r in lf.export_rows()}
    assert (exported["WRITEIN"]["votes_a"], exported["WRITEIN"]["votes_b"]) == ("39900", "41000")
    assert measured(lf)[(2018, "OV", "federal")] == [("2", 39900.0, 41000.0, False)]


def test_repeated_lines_can_be_refused_as_native_files_do(lf):
    rows = [line(2018, "OV", "2", "Jory Wend", H, 39900), line(2018, "OV", "2", "Dace Orrin", M, 41000),
            line(2018, "OV", "2", "WRITEIN", "", 210), line(2018, "OV", "2", "WRITEIN", "", 95)]
    mapping = archive_mapping().replace('repeated_lines = "sum"', 'repeated_lines = "refuse"')
    err = load_archive(lf, rows, mapping=mapping, code=1).stderr
    assert ("returns.csv:5:candidate: candidate 'WRITEIN' appears twice on the '(no party)' line of district "
            "'2', OV federal 2018 (first at row 4)") in err
    assert lf.rows("SELECT COUNT(*) FROM votes") == [(0,)]


def test_counting_modes_on_separate_rows_are_summed(lf):
    rows = []
    for name, party, votes in (("Kael Dorran", H, (60100, 30200, 14400)), ("Nia Sorrel", M, (58800, 33100, 12900)),
                               ("Moss Tully", "LANTERN", (2100, 900, 400))):
        for mode, v in zip(("ELECTION DAY", "EARLY", "ABSENTEE"), votes):
            rows.append(line(2020, "BQ", "0", name, party, v, mode=mode))
    out = load_archive(lf, rows).stdout
    assert "repeated lines combined: 6 line(s)" in out
    assert lf.results() == [
        (2020, "BQ", "federal", "AL", "HEARTHSIDE", "Kael Dorran", 104700, "certified"),
        (2020, "BQ", "federal", "AL", "LANTERN", "Moss Tully", 3400, "certified"),
        (2020, "BQ", "federal", "AL", "MERIDIAN", "Nia Sorrel", 104800, "certified")]
    assert measured(lf)[(2020, "BQ", "federal")] == [("AL", 104700.0, 104800.0, False)]


# --- placeholder counts ---------------------------------------------------------------------------

PLACEHOLDER_ROWS = (other_district(2016, "TM", "1", 600, 400) + other_district(2016, "TM", "3", 300, 700)
                    + [line(2016, "TM", "2", "Esme Hart", M, -1)])


def test_a_minus_one_placeholder_loads_as_an_uncontested_win_with_no_count(lf):
    out = load_archive(lf, PLACEHOLDER_ROWS).stdout
    assert "placeholder counts: 1 contest(s) loaded as uncontested wins with no vote count" in out
    assert ("returns.csv:6: district '2', TM federal 2016: Esme Hart (MERIDIAN) unopposed, placeholder count '-1': "
            "an uncontested win with no vote count") in out
    assert lf.rows("SELECT district, placeholder, status FROM contests ORDER BY district") == [
        ("1", 0, "contested"), ("2", 1, "uncontested"), ("3", 0, "contested")]
    assert lf.rows("SELECT MIN(votes) FROM votes") == [(0,)]  # never a negative count
    assert lf.rows("SELECT votes FROM district_results WHERE candidate = 'Esme Hart'") == [(0,)]
    # impute (the default, 0.75): the placeholder district weighs the mean of the unit's real
    # totals, (1000 + 1000) / 2 = 1000, and splits 250/750 for the winner's party b
    assert measured(lf)[(2016, "TM", "federal")] == [
        ("1", 600.0, 400.0, False), ("2", 250.0, 750.0, True), ("3", 300.0, 700.0, False)]


def test_placeholder_contests_follow_the_uncontested_policy(lf):
    load_archive(lf, PLACEHOLDER_ROWS)
    assert measured(lf, "exclude")[(2016, "TM", "federal")] == [("1", 600.0, 400.0, False), ("3", 300.0, 700.0, False)]
    assert measured(lf, "none")[(2016, "TM", "federal")] == [
        ("1", 600.0, 400.0, False), ("2", 0.0, 1000.0, True), ("3", 300.0, 700.0, False)]


@pytest.mark.parametrize("count", [0, 1])
def test_a_lone_candidate_with_a_lone_count_is_a_placeholder(lf, count):
    rows = other_district(2018, "TM", "1", 500, 300) + [line(2018, "TM", "3", "Floy Amsel", H, count)]
    out = load_archive(lf, rows).stdout
    assert f"district '3', TM federal 2018: Floy Amsel (HEARTHSIDE) unopposed, placeholder count '{count}'" in out
    assert lf.rows("SELECT votes FROM district_results WHERE district = '3'") == [(0,)]
    # mean real total 800: 0.75 * 800 = 600 for party a
    assert measured(lf)[(2018, "TM", "federal")] == [("1", 500.0, 300.0, False), ("3", 600.0, 200.0, True)]


def test_a_lone_candidate_with_real_votes_is_no_placeholder(lf):
    rows = other_district(2018, "TM", "1", 500, 300) + [line(2018, "TM", "3", "Floy Amsel", H, 2)]
    out = load_archive(lf, rows).stdout
    assert "placeholder" not in out
    assert lf.rows("SELECT placeholder FROM contests WHERE district = '3'") == [(0,)]


def test_placeholder_counts_need_the_mapping_and_one_candidate(lf):
    rows = other_district(2016, "TM", "1") + [line(2016, "TM", "2", "Esme Hart", M, -1)]
    no_placeholders = re.sub(r"\[placeholders\].*?\n\[", "[", archive_mapping(), flags=re.S)
    assert "counts = [-1]" not in no_placeholders
    err = load_archive(lf, rows, mapping=no_placeholders, code=1).stderr
    assert "returns.csv:4:candidatevotes: votes '-1' is negative" in err
    beside = rows + [line(2016, "TM", "2", "Hugo Brand", H, 300)]
    err = load_archive(lf, beside, code=1, name="beside.csv").stderr
    assert ("beside.csv:4:candidatevotes: placeholder count '-1' (an unopposed candidate not on the ballot) in "
            "district '2', TM federal 2016, which has 2 candidates") in err
    assert lf.rows("SELECT COUNT(*) FROM votes") == [(0,)]


# --- value translation ----------------------------------------------------------------------------

def test_true_false_status_is_translated(lf):
    rows = ([line(2018, "TM", d, f"A{d}", H, 500, unofficial="TRUE") for d in "12"]
            + [line(2018, "TM", d, f"B{d}", M, 400, unofficial=" true ") for d in "12"]
            + [line(2020, "TM", "1", "C", H, 5, unofficial="FALSE"), line(2020, "TM", "1", "D", M, 6, unofficial="False")])
    load_archive(lf, rows)
    assert lf.rows("SELECT cycle, certification FROM units ORDER BY cycle") == [(2018, "unofficial"), (2020, "certified")]


def test_a_value_without_translation_is_an_error_naming_its_place_and_the_known_values(lf):
    rows = other_district(2018, "TM", "1") + [line(2018, "TM", "2", "E", H, 5, unofficial="MAYBE"),
                                              line(2018, "TM", "2", "F", M, 4)]
    err = load_archive(lf, rows, code=1).stderr
    assert ("returns.csv:4:unofficial: status 'MAYBE' has no translation in the mapping's [translate.status] "
            "(it knows 'FALSE', 'TRUE'; case and surrounding spaces are ignored)") in err
    assert lf.rows("SELECT COUNT(*) FROM votes") == [(0,)]
    # --skip-bad-rows skips the whole contest of the untranslatable row, never half of it
    out = load_archive(lf, rows, "--skip-bad-rows").stdout
    assert "returns.csv:5:district: skipped with the rest of its contest (district '2', TM federal 2018)" in out
    assert lf.rows("SELECT DISTINCT district FROM district_results") == [("1",)]


# --- which contest decides the seat ---------------------------------------------------------------

def test_a_special_that_replaced_the_general_decides_its_districts(lf):
    rows = (other_district(2018, "KR", "1", 440, 388) + other_district(2018, "KR", "2", 299, 456)
            + [line(2018, "KR", "3", "Ulla Frane", H, 303, special="TRUE"),
               line(2018, "KR", "3", "Vann Coil", M, 309, special="TRUE"),
               line(2018, "KR", "4", "Wes Oduya", H, 417, special="TRUE"),
               line(2018, "KR", "4", "Xio Barr", M, 221, special="TRUE")])
    out = load_archive(lf, rows).stdout
    assert "do not decide their seat" not in out
    assert contests(lf) == [(2018, "KR", d, s, 0, 1, 0, "contested") for d, s in (("1", 0), ("2", 0), ("3", 1), ("4", 1))]
    assert lf.rows("SELECT COUNT(DISTINCT district) FROM district_results") == [(4,)]
    # every district enters the measures, the specials included (they replaced the general)
    assert [d for d, *_ in measured(lf)[(2018, "KR", "federal")]] == ["1", "2", "3", "4"]


def test_a_special_for_an_unexpired_term_beside_the_regular_general_stays_history(lf):
    rows = (other_district(2020, "OV", "1")
            + [line(2020, "OV", "3", "Kira Lune", H, 410), line(2020, "OV", "3", "Nils Harth", M, 602),
               line(2020, "OV", "3", "Oona Pell", H, 398, special="TRUE"),
               line(2020, "OV", "3", "Edda Voss", M, 619, special="TRUE")])
    out = load_archive(lf, rows).stdout
    assert "contests that do not decide their seat: 1 (stored as history, left out of the measures):" in out
    assert ("returns.csv:6: district '3' (special), OV federal 2020: the general contest decides this seat "
            "(the default order: runoff, general, special runoff, special)") in out
    assert contests(lf) == [(2020, "OV", "1", 0, 0, 1, 0, "contested"), (2020, "OV", "3", 0, 0, 1, 0, "contested"),
                            (2020, "OV", "3", 1, 0, 0, 0, "contested")]
    assert lf.rows("SELECT candidate FROM district_results WHERE district = '3' ORDER BY candidate") == [
        ("Kira Lune",), ("Nils Harth",)]
    assert measured(lf)[(2020, "OV", "federal")][1] == ("3", 410.0, 602.0, False)


RUNOFF_ROWS = (other_district(2020, "QN", "1")
               + [line(2020, "QN", "2", "Rook Hallam", H, 210, runoff="FALSE"),
                  line(2020, "QN", "2", "Sela Brook", H, 98, runoff="FALSE"),
                  line(2020, "QN", "2", "Tam Ives", M, 273, runoff="FALSE"),
                  line(2020, "QN", "2", "Rook Hallam", H, 338, runoff="TRUE"),
                  line(2020, "QN", "2", "Tam Ives", M, 319, runoff="TRUE")])


def test_a_runoff_decides_its_seat_and_the_first_round_stays_history(lf):
    out = load_archive(lf, RUNOFF_ROWS).stdout
    assert ("returns.csv:4: district '2', QN federal 2020: the runoff contest decides this seat (the default "
            "order: runoff, general, special runoff, special)") in out
    assert contests(lf) == [(2020, "QN", "1", 0, 0, 1, 0, "contested"), (2020, "QN", "2", 0, 0, 0, 0, "contested"),
                            (2020, "QN", "2", 0, 1, 1, 0, "contested")]
    assert lf.rows("SELECT candidate, votes FROM district_results WHERE district = '2' ORDER BY candidate") == [
        ("Rook Hallam", 338), ("Tam Ives", 319)]
    assert measured(lf)[(2020, "QN", "federal")] == [("1", 600.0, 400.0, False), ("2", 338.0, 319.0, False)]
    # the export keeps both contests, told apart by runoff and decides
    rows = {(r["candidate"], r["runoff"]): r for r in lf.export_rows() if r["district"] == "2"}
    assert rows[("Tam Ives", "1")]["decides"] == "1" and rows[("Tam Ives", "0")]["decides"] == "0"


def test_the_mapping_can_order_the_contests_for_a_state(lf):
    rows = (other_district(2018, "KR", "1")
            + [line(2018, "KR", "3", "Ulla Frane", H, 100), line(2018, "KR", "3", "Vann Coil", M, 90),
               line(2018, "KR", "3", "Ulla Frane", H, 303, special="TRUE"),
               line(2018, "KR", "3", "Vann Coil", M, 309, special="TRUE")])
    load_archive(lf, rows)  # the default order: the general decides district 3
    assert measured(lf)[(2018, "KR", "federal")][1] == ("3", 100.0, 90.0, False)
    # KR's specials replaced its generals: the same file through a mapping that says so
    mapping = archive_mapping() + '\n[deciding.states]\nkr = ["special", "general"]\n'
    out = load_archive(lf, rows, mapping=mapping).stdout
    assert "correction 2018 KR federal:" in out
    assert "    district 3: no longer decides its seat" in out
    assert "    district 3 (special): now decides its seat" in out
    assert ("district '3', KR federal 2018: the special contest decides this seat (the mapping's "
            "[deciding.states] order for KR: special, general)") in out
    assert measured(lf)[(2018, "KR", "federal")][1] == ("3", 303.0, 309.0, False)
    # a kind the order leaves out never decides: district 1 (a general) then has no deciding contest
    only_specials = archive_mapping() + '\n[deciding]\norder = ["special"]\n'
    out = load_archive(lf, rows, mapping=only_specials).stdout
    assert "    district 1: no longer decides its seat" in out
    assert ("district '1', KR federal 2018: the mapping's [deciding] order (special) has no place for a general "
            "contest: no contest decides this seat") in out
    assert [d for d, *_ in measured(lf)[(2018, "KR", "federal")]] == ["3"]


def test_a_seat_whose_deciding_contest_is_skipped_gets_none(lf):
    rows = [r[:] for r in RUNOFF_ROWS]
    rows[-1][11] = "3l9"  # the runoff's party-b line is unreadable
    out = load_archive(lf, rows, "--skip-bad-rows").stdout
    assert "returns.csv:8:candidatevotes: votes '3l9' is not a number" in out
    assert "returns.csv:7:district: skipped with the rest of its contest (district '2' (runoff), QN federal 2020)" in out
    # the first round is stored as history, not promoted to the seat's result
    assert ("district '2', QN federal 2020: the runoff contest would decide this seat but was skipped (row 8 has a "
            "problem): no contest decides this seat") in out
    assert contests(lf) == [(2020, "QN", "1", 0, 0, 1, 0, "contested"), (2020, "QN", "2", 0, 0, 0, 0, "contested")]
    assert [d for d, *_ in measured(lf)[(2020, "QN", "federal")]] == ["1"]


def test_native_files_take_a_runoff_column(lf):
    text = ("cycle,state,chamber,district,party,candidate,votes,runoff\n"
            "2020,QN,federal,2,Harbour,Rook Hallam,210,0\n2020,QN,federal,2,Upland,Tam Ives,273,0\n"
            "2020,QN,federal,2,Lantern,Uri Gast,90,0\n"
            "2020,QN,federal,2,Harbour,Rook Hallam,338,1\n2020,QN,federal,2,Upland,Tam Ives,319,1\n")
    out = lf("load", lf.write("native.csv", text)).stdout
    assert "native.csv:2: district '2', QN federal 2020: the runoff contest decides this seat" in out
    assert measured(lf)[(2020, "QN", "federal")] == [("2", 338.0, 319.0, False)]


# --- lines that are not candidates ----------------------------------------------------------------

def test_blank_void_and_scattering_lines_stay_out_of_the_totals(lf):
    rows = [line(2018, "BQ", "0", "Kael Dorran", H, 1010), line(2018, "BQ", "0", "Nia Sorrel", M, 990),
            line(2018, "BQ", "0", "BLANK VOTE", "", 13), line(2018, "BQ", "0", "over votes", "", 4),
            line(2018, "BQ", "0", " UNDER VOTES ", "", 29), line(2018, "BQ", "0", "Scattering", "", 7),
            line(2018, "BQ", "0", "VOID", "", 3), line(2018, "BQ", "0", "VOID", "", 2)]
    out = load_archive(lf, rows).stdout
    assert "rows read 8, accepted 2, rejected 0, not candidates 6" in out
    assert ("not candidates, kept out of the vote totals: 'VOID' (2), 'BLANK VOTE' (1), 'Scattering' (1), "
            "'UNDER VOTES' (1), 'over votes' (1)") in out
    assert lf.rows("SELECT candidate FROM votes ORDER BY candidate") == [("Kael Dorran",), ("Nia Sorrel",)]
    assert lf.rows("SELECT total_votes FROM current_contests") == [(2000,)]


# --- encodings, mapping errors --------------------------------------------------------------------

def test_a_mid_file_encoding_problem_names_its_row_and_column(lf):
    text = archive_csv(other_district(2016, "OV", "1") + [line(2016, "OV", "2", "Zoe Quill", H, 5),
                                                          line(2016, "OV", "2", "Ren Soto", M, 6)])
    data = text.encode("utf-8").replace(b"Ren Soto", b"R\xe9n Soto")  # one cp1252 byte in a UTF-8 file
    path = lf.write("mixed.csv", data)
    toml = lf.write("archive.toml", archive_mapping())
    err = lf("load", path, "--mapping", toml, code=1).stderr
    assert ("mixed.csv:5:#8: byte 0xe9 (in column 'candidate') is not valid utf-8; if the file is in another "
            "encoding, pass --encoding") in err
    assert lf.rows("SELECT COUNT(*) FROM votes") == [(0,)]


@pytest.mark.parametrize("change,message", [
    (("repeated_lines = \"sum\"", "repeted_lines = \"sum\""), "unknown key 'repeted_lines' (did you mean 'repeated_lines'?)"),
    (("[translate.status]", "[translate.stauts]"), "[translate.stauts]: 'stauts' is not one of our fields (did you mean 'status'?)"),
    (("repeated_lines = \"sum\"", "repeated_lines = \"add\""), "repeated_lines must be \"sum\" or \"refuse\", got 'add'"),
    (("lone_counts = [0, 1]", "lone_count = [0, 1]"), "[placeholders] 'lone_count' is not a key (counts, lone_counts) (did you mean 'lone_counts'?)"),
    (("counts = [-1]", "counts = [\"-1\"]"), "[placeholders] counts must be a list of whole numbers"),
    (("[translate.runoff]", "[deciding]\norder = [\"runof\", \"general\"]\n[translate.runoff]"),
     "[deciding] order: 'runof' is not a contest kind ('runoff', 'general', 'special runoff', 'special'); did you mean 'runoff'?"),
])
def test_mapping_mistakes_are_usage_errors_with_a_hint(lf, change, message):
    mapping = archive_mapping().replace(*change)
    assert mapping != archive_mapping()
    err = load_archive(lf, other_district(2016, "OV"), mapping=mapping, code=2).stderr
    assert message in err
    assert lf.rows("SELECT COUNT(*) FROM loads") == [(0,)]


# --- the report -----------------------------------------------------------------------------------

def test_the_printed_report_shows_the_ten_largest_other_labels_and_writes_the_rest_to_a_file(lf):
    rows = []
    for i in range(14):  # 14 minor labels; label k has k + 1 lines (one per district)
        for d in range(i + 1):
            rows.append(line(2016, "OV", str(d + 1), f"Minor {i} {d}", f"MINOR {i:02d}", 10))
    for d in range(14):
        rows += [line(2016, "OV", str(d + 1), f"A{d}", H, 500), line(2016, "OV", str(d + 1), f"B{d}", M, 400)]
    out = load_archive(lf, rows).stdout
    (listing,) = [ln for ln in out.splitlines() if "counted as 'other'" in ln]
    assert listing.startswith("  party labels counted as 'other' (14 labels; the 10 largest): 'MINOR 13' (14), "
                              "'MINOR 12' (13)")
    assert "'MINOR 04' (5); and 4 more label(s) on 10 line(s) (listed in " in listing
    assert len(listing) < 400
    report_file = lf.root / "logs" / "loads" / "load-1-returns.csv.txt"
    assert f"  full report: {report_file}" in out
    full = report_file.read_text(encoding="utf-8")
    assert "'MINOR 00' (1)" in full and "'MINOR 03' (4)" in full and "full report" not in full


def test_a_dry_run_writes_its_report_file_and_nothing_else(lf):
    before = lf.dump()
    out = load_archive(lf, RUNOFF_ROWS, "--dry-run").stdout
    assert "returns.csv: dry run" in out
    (path,) = (lf.root / "logs" / "loads").glob("dry-run-*-returns.csv.txt")
    assert "the runoff contest decides this seat" in path.read_text(encoding="utf-8")
    assert lf.dump() == before


def test_contest_messages_name_cycle_state_chamber_and_district(lf):
    wide = "cycle,state,chamber,district,votes_Harbour,votes_Upland\n2024,qv,Federal,4,,\n2024,QV,federal,5,3,4\n"
    err = lf("load", lf.write("wide.csv", wide), code=1).stderr
    assert "wide.csv:2: no votes_ column has a count: district '4', QV federal 2024 with no votes at all" in err
    seats = ("cycle,state,chamber,district,party,candidate,votes,seats,special\n"
             "2024,QV,federal,6,Harbour,Ann,5,1,1\n2024,QV,federal,6,Upland,Bo,4,2,1\n")
    err = lf("load", lf.write("seats.csv", seats), code=1).stderr
    assert "seats.csv:3:seats: seats 2 disagrees with 1 at row 2 for district '6' (special), QV federal 2024" in err


def test_a_bad_row_takes_its_contest_with_it_when_the_key_is_translated(lf):
    # their state names translate into our codes: a row too short to read, and a row whose state
    # has no translation, still take their whole contest with them (never half a contest)
    mapping = archive_mapping() + '\n[translate.state]\n"STATE OV" = "OV"\n'
    mapping = mapping.replace('state = "state_po"', 'state = "state"')
    rows = (other_district(2016, "OV", "1") + other_district(2016, "OV", "2")
            + [line(2016, "OV", "3", "Cyra Holt", H, 355), line(2016, "OV", "3", "Edda Voss", M, 552)])
    rows[1] = rows[1][:10]  # district 1's party-b row is cut short
    rows[3][1] = "OVX"       # district 2's party-b row names a state the mapping cannot translate
    out = load_archive(lf, rows, "--skip-bad-rows", mapping=mapping).stdout
    assert "returns.csv:5:state: state 'OVX' has no translation in the mapping's [translate.state]" in out
    assert "returns.csv:2:district: skipped with the rest of its contest (district '1', OV federal 2016)" in out
    assert "returns.csv:4:district: skipped with the rest of its contest (district '2', OV federal 2016)" in out
    assert lf.rows("SELECT DISTINCT district FROM district_results") == [("3",)]


def test_the_state_page_counts_each_seat_once_and_names_the_runoff(lf):
    load_archive(lf, RUNOFF_ROWS)
    lf("compute")
    lf("publish")
    page = (lf.root / "public" / "state" / "qn" / "federal.html").read_text(encoding="utf-8")
    text = re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", page))
    # two seats, both won by party a (the first round of district 2 is history, not a third seat)
    assert "2020: Harbour Party 2, Upland League 0" in text
    assert re.search(r"<td[^>]*>\s*2 \(runoff\)\s*</td>", page)
