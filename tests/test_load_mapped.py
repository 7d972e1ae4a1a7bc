"""Loading a foreign candidate-level file through a mapping (the example of the mapping format,
with invented column names and labels)."""

from __future__ import annotations

from conftest import csv_text

MAPPING = """\
chamber = "federal"
candidate_lines = "sum"
[columns]
cycle = "election_year"
state = "st"
district = "dist_no"
party = "party_label"
candidate = "cand_name"
votes = "cand_votes"
[keep]
round = ["GENERAL"]
is_special = ["N", ""]
[parties]
a = ["LABEL ONE", "LABEL ONE-ALLIED"]
b = ["LABEL TWO"]
[exclude]
states = ["ZZ"]
[districts]
at_large = "0"
"""

FOREIGN_HEADER = ["election_year", "st", "dist_no", "round", "is_special", "party_label", "cand_name",
                  "cand_votes", "office_note"]
FOREIGN_ROWS = [
    # fusion: Ann on two lines of party a -> one line of 120 for a
    [2022, "QQ", "1", "GENERAL", "N", "LABEL ONE", "Ann Aro", "100", "x"],
    [2022, "QQ", "1", "GENERAL", "N", "LABEL ONE-ALLIED", "Ann Aro", "20", "x"],
    # an empty is_special cell is kept ("" is listed in [keep])
    [2022, "QQ", "1", "GENERAL", "", "LABEL TWO", "Bob Bex", "110", ""],
    # not the general round / a special: filtered out by [keep]
    [2022, "QQ", "1", "PRIMARY", "N", "LABEL TWO", "Bob Bex", "999", ""],
    [2022, "QQ", "1", "GENERAL", "Y", "LABEL TWO", "Bob Bex", "888", ""],
    # fusion across a minor line: Cy's votes go to Cy's major party (b)
    [2022, "QQ", "2", "GENERAL", "N", "LABEL TWO", "Cy Cole", "50", ""],
    [2022, "QQ", "2", "GENERAL", "N", "LABEL NINE", "Cy Cole", "7", ""],
    [2022, "QQ", "2", "GENERAL", "N", "LABEL NINE", "Dee Dunn", "40", ""],
    # their at-large code "0" becomes "AL"
    [2022, "RR", "0", "GENERAL", "N", "LABEL ONE", "Eve Ekk", "1,070", ""],
    [2022, "RR", "0", "GENERAL", "N", "LABEL TWO", "Fox Fen", "60", ""],
    # an excluded state (a non-voting delegate, say)
    [2022, "ZZ", "0", "GENERAL", "N", "LABEL ONE", "Gus Gale", "10", ""],
]


def write_example(lf, mapping: str = MAPPING, rows=FOREIGN_ROWS, name: str = "office.csv"):
    return lf.write(name, csv_text(FOREIGN_HEADER, rows)), lf.write("map.toml", mapping)


def test_the_mapping_example_loads_the_foreign_file(lf):
    data, mapping = write_example(lf)
    result = lf("load", data, "--mapping", mapping)
    out = result.stdout
    assert "office.csv: loaded (load #1)" in out
    assert "format mapped; rows read 11, accepted 8, rejected 0, filtered out 3" in out
    assert "units: 2 new" in out
    # LABEL NINE is not in [parties]: it becomes "other" and the report counts its lines
    assert "party labels counted as 'other': 'LABEL NINE' (2)" in out
    assert lf.results() == [
        (2022, "QQ", "federal", "1", "LABEL ONE", "Ann Aro", 120, "certified"),
        (2022, "QQ", "federal", "1", "LABEL TWO", "Bob Bex", 110, "certified"),
        (2022, "QQ", "federal", "2", "LABEL NINE", "Dee Dunn", 40, "certified"),
        (2022, "QQ", "federal", "2", "LABEL TWO", "Cy Cole", 57, "certified"),
        (2022, "RR", "federal", "AL", "LABEL ONE", "Eve Ekk", 1070, "certified"),
        (2022, "RR", "federal", "AL", "LABEL TWO", "Fox Fen", 60, "certified"),
    ]
    assert lf.rows("SELECT candidate, party_code FROM votes ORDER BY candidate") == [
        ("Ann Aro", "a"), ("Bob Bex", "b"), ("Cy Cole", "b"), ("Dee Dunn", "other"), ("Eve Ekk", "a"),
        ("Fox Fen", "b")]
    assert lf.rows("SELECT code FROM states ORDER BY code") == [("QQ",), ("RR",)]  # no ZZ
    assert lf.rows("SELECT code FROM chambers") == [("federal",)]
    assert lf.rows("SELECT format, mapping_sha256 IS NOT NULL FROM loads") == [("mapped", 1)]


def test_separate_candidate_lines_keep_both_lines_but_reduce_to_one_candidate(lf):
    data, mapping = write_example(lf, MAPPING.replace('candidate_lines = "sum"', 'candidate_lines = "separate"'))
    lf("load", data, "--mapping", mapping)
    assert lf.rows("SELECT party, votes FROM district_results WHERE candidate = 'Ann Aro' ORDER BY party") == [
        ("LABEL ONE", 100), ("LABEL ONE-ALLIED", 20)]
    by_candidate = {r["candidate"]: r for r in lf.export_rows()}
    ann, cy = by_candidate["Ann Aro"], by_candidate["Cy Cole"]
    assert (ann["votes_a"], ann["votes_b"], ann["contest_status"], ann["winner"]) == ("120", "110", "contested", "a")
    assert (cy["votes_a"], cy["votes_b"], cy["contest_status"]) == ("0", "57", "uncontested")


def test_labels_listed_as_other_are_not_reported_as_unknown(lf):
    data, mapping = write_example(lf, MAPPING.replace('b = ["LABEL TWO"]', 'b = ["LABEL TWO"]\nother = ["LABEL NINE"]'))
    result = lf("load", data, "--mapping", mapping)
    assert "counted as 'other'" not in result.stdout
    assert lf.rows("SELECT party_code FROM votes WHERE candidate = 'Dee Dunn'") == [("other",)]


def test_without_parties_the_workspace_labels_apply(lf):
    rows = [[2022, "QQ", "1", "GENERAL", "N", "Harbour", "Ann Aro", "5", ""],
            [2022, "QQ", "1", "GENERAL", "N", "Upland", "Bob Bex", "4", ""]]
    mapping = MAPPING.split("[parties]")[0] + "[exclude]\nstates = []\n"
    data, mapping = write_example(lf, mapping, rows)
    lf("load", data, "--mapping", mapping)
    assert lf.rows("SELECT candidate, party_code FROM votes ORDER BY candidate") == [("Ann Aro", "a"), ("Bob Bex", "b")]


def test_mapping_delimiter_and_chamber_column(lf):
    mapping = """\
delimiter = ";"
[columns]
cycle = "Year"
state = "State"
chamber = "Body"
district = "Seat"
party = "Party"
votes = "Votes"
"""
    text = "Year;State;Body;Seat;Party;Votes\n2022;QQ;state_lower;4;Harbour;12\n2022;QQ;state_lower;4;Upland;13\n"
    lf("load", lf.write("semi.csv", text), "--mapping", lf.write("semi.toml", mapping))
    assert lf.results() == [(2022, "QQ", "state_lower", "4", "Harbour", "", 12, "certified"),
                            (2022, "QQ", "state_lower", "4", "Upland", "", 13, "certified")]


def test_the_same_bytes_through_another_mapping_are_a_new_load(lf):
    data, mapping = write_example(lf)
    lf("load", data, "--mapping", mapping)
    again = lf("load", data, "--mapping", mapping)
    assert "already loaded" in again.stdout
    # a fixed mapping (here: the at-large code was wrong) must not be refused as "already loaded"
    fixed = lf.write("map2.toml", MAPPING.replace('at_large = "0"', 'at_large = "00"'))
    result = lf("load", data, "--mapping", fixed)
    assert "already loaded" not in result.stdout
    assert "correction 2022 RR federal:" in result.stdout
    assert lf.rows("SELECT DISTINCT district FROM district_results WHERE state = 'RR'") == [("0",)]


def test_a_column_named_in_the_mapping_but_absent_from_the_file_is_a_mapping_error(lf):
    # the mapping is what needs fixing, not the file: a usage error (exit 2) with the close names
    data, mapping = write_example(lf, MAPPING.replace('votes = "cand_votes"', 'votes = "cand_vote"')
                                  .replace('round = ["GENERAL"]', 'rnd = ["GENERAL"]'))
    result = lf("load", data, "--mapping", mapping, code=2)
    assert "the mapping names 2 column(s) that office.csv does not have; nothing was loaded" in result.stderr
    assert ("office.csv:1:cand_vote: the mapping's [columns] votes = 'cand_vote' names a column the file does "
            "not have (did you mean 'cand_votes' or 'cand_name'?)") in result.stderr
    assert "office.csv:1:rnd: the mapping's [keep] 'rnd' names a column the file does not have (did you mean " \
           "'round'?)" in result.stderr
    # nothing is close: the header is listed
    data, mapping = write_example(lf, MAPPING.replace('votes = "cand_votes"', 'votes = "zzzz"'))
    result = lf("load", data, "--mapping", mapping, code=2)
    assert "(the header has 'election_year', 'st', 'dist_no', 'round', 'is_special', " in result.stderr
    # nothing loaded, and no load recorded: the file was never read through a valid mapping
    assert lf.rows("SELECT COUNT(*) FROM votes") == [(0,)]
    assert lf.rows("SELECT COUNT(*) FROM loads") == [(0,)]


def test_errors_in_mapped_files_name_their_own_column(lf):
    rows = [r[:] for r in FOREIGN_ROWS]
    rows[0][7] = "1OO"  # letter O for zero
    data, mapping = write_example(lf, rows=rows)
    result = lf("load", data, "--mapping", mapping, code=1)
    assert "office.csv:2:cand_votes: votes '1OO' is not a number" in result.stderr


def test_filtered_rows_are_not_validated(lf):
    rows = FOREIGN_ROWS + [[2022, "QQ", "1", "RUNOFF", "N", "LABEL TWO", "Bob Bex", "n/a", ""]]
    data, mapping = write_example(lf, rows=rows)
    result = lf("load", data, "--mapping", mapping)
    assert "filtered out 4" in result.stdout


def test_duplicated_or_blank_columns_the_mapping_does_not_use_are_ignored(lf):
    header = FOREIGN_HEADER + ["office_note", "", "  "]
    rows = [r + ["y", "", ""] for r in FOREIGN_ROWS]
    data = lf.write("office.csv", csv_text(header, rows))
    result = lf("load", data, "--mapping", lf.write("map.toml", MAPPING))
    assert "office.csv: loaded (load #1)" in result.stdout
    assert len(lf.results()) == 6


def test_a_duplicated_column_the_mapping_uses_is_refused_with_its_place(lf):
    header = FOREIGN_HEADER + ["cand_votes"]
    rows = [r + ["1"] for r in FOREIGN_ROWS]
    data = lf.write("office.csv", csv_text(header, rows))
    result = lf("load", data, "--mapping", lf.write("map.toml", MAPPING), code=1)
    assert "office.csv:1:cand_votes: duplicated column, used by the mapping (columns #8, #10)" in result.stderr
    assert lf.rows("SELECT COUNT(*) FROM votes") == [(0,)]


def test_keep_and_exclude_match_whatever_the_case_and_surrounding_spaces(lf):
    mapping = MAPPING.replace('round = ["GENERAL"]', 'round = [" general "]').replace('states = ["ZZ"]', 'states = ["zz "]')
    rows = [r[:] for r in FOREIGN_ROWS]
    rows[0][3] = "General"      # kept: the same text in another case
    rows[2][3] = " GENERAL  "   # kept: surrounding spaces
    rows[10][1] = " zz"         # excluded
    data, mapping = write_example(lf, mapping, rows)
    result = lf("load", data, "--mapping", mapping)
    assert "rows read 11, accepted 8, rejected 0, filtered out 3" in result.stdout
    assert lf.rows("SELECT code FROM states ORDER BY code") == [("QQ",), ("RR",)]


def test_state_codes_and_chamber_names_are_normalised(lf):
    mapping = MAPPING.replace('chamber = "federal"', 'chamber = "Federal"')
    rows = [r[:] for r in FOREIGN_ROWS]
    for r in rows:
        if r[1] == "RR":
            r[1] = "rr"
    data, mapping = write_example(lf, mapping, rows)
    lf("load", data, "--mapping", mapping)
    assert lf.rows("SELECT code FROM states ORDER BY code") == [("QQ",), ("RR",)]
    assert lf.rows("SELECT DISTINCT chamber FROM district_results") == [("federal",)]


def test_skip_bad_rows_in_a_mapped_file_skips_the_whole_contest(lf):
    rows = [r[:] for r in FOREIGN_ROWS]
    rows[2][7] = "-110"  # Bob Bex, party b of QQ district 1
    data, mapping = write_example(lf, rows=rows)
    result = lf("load", data, "--mapping", mapping, "--skip-bad-rows")
    assert "office.csv:4:cand_votes: votes '-110' is negative" in result.stdout
    for row in (2, 3):
        assert f"office.csv:{row}:dist_no: skipped with the rest of its contest (district '1', QQ federal 2022)" \
            in result.stdout
    assert lf.rows("SELECT DISTINCT state, district FROM district_results ORDER BY 1, 2") == [("QQ", "2"), ("RR", "AL")]
