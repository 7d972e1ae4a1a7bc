"""Loading the native formats: long, wide, gzipped, with a BOM, with thousands separators."""

from __future__ import annotations

import hashlib

from conftest import BASE_ROWS, csv_text, long_csv


def test_long_file_is_stored_line_by_line_with_provenance(lf):
    path = lf.write("2022.csv", long_csv(BASE_ROWS))
    result = lf("load", path, "--source", "canvass of the invented federation")
    assert "2022.csv: loaded (load #1)" in result.stdout
    assert "rows read 5, accepted 5, rejected 0" in result.stdout
    assert "units: 1 new, 0 corrected, 0 unchanged" in result.stdout
    assert lf.results() == [
        (2022, "QV", "federal", "1", "Harbour", "Maren Olvas", 1200, "certified"),
        (2022, "QV", "federal", "1", "Upland", "Tobin Resk", 1000, "certified"),
        (2022, "QV", "federal", "2", "Harbour", "Ilse Varro", 700, "certified"),
        (2022, "QV", "federal", "2", "Upland", "Piet Amsel", 900, "certified"),
        (2022, "QV", "federal", "3", "Upland", "Ode Brask", 800, "certified"),
    ]
    data = path.read_bytes()
    assert lf.rows("SELECT file_name, sha256, bytes, format, source, rows_read, rows_accepted, "
                   "rows_rejected, units_new, outcome FROM loads") == [
        ("2022.csv", hashlib.sha256(data).hexdigest(), len(data), "native-long",
         "canvass of the invented federation", 5, 5, 0, 1, "loaded")]
    # the party line keeps its label; the code comes from levelfield.toml
    assert lf.rows("SELECT DISTINCT party, party_code FROM votes ORDER BY party") == [
        ("Harbour", "a"), ("Upland", "b")]
    assert lf.rows("SELECT district, seats, special, status FROM contests ORDER BY district") == [
        ("1", 1, 0, "contested"), ("2", 1, 0, "contested"), ("3", 1, 0, "uncontested")]


def test_thousands_separators_are_read_as_whole_numbers(lf):
    rows = [[2022, "QV", "federal", "1", "Harbour", "Maren Olvas", "1,234,567"],
            [2022, "QV", "federal", "1", "Upland", "Tobin Resk", "12,345"],
            [2022, "QV", "federal", "1", "Lantern", "Asa Fell", "999"]]
    lf("load", lf.write("sep.csv", long_csv(rows)))
    assert [r[6] for r in lf.results()] == [1234567, 999, 12345]


def test_optional_columns_seats_special_writein_status(lf):
    rows = [
        [2022, "QV", "state_lower", "7", "Harbour", "Rhea Lund", 500, 2, 0, 0, "unofficial"],
        [2022, "QV", "state_lower", "7", "Harbour", "Sven Oak", 450, 2, 0, 0, "unofficial"],
        [2022, "QV", "state_lower", "7", "Upland", "Tam Ivo", 480, 2, 0, 0, "unofficial"],
        [2022, "QV", "state_lower", "7", "Lantern", "Write Ins", 12, 2, 0, 1, "unofficial"],
        [2022, "QV", "state_lower", "8", "Upland", "Uma Pell", 300, 1, 1, 0, "unofficial"],
        [2022, "QV", "state_lower", "8", "Harbour", "Vic Dorn", 200, 1, 1, 0, "unofficial"],
    ]
    lf("load", lf.write("opt.csv", long_csv(rows, ("seats", "special", "writein", "status"))))
    assert lf.rows("SELECT district, seats, special FROM contests ORDER BY district") == [("7", 2, 0), ("8", 1, 1)]
    assert lf.rows("SELECT candidate FROM votes WHERE writein = 1") == [("Write Ins",)]
    assert {r[7] for r in lf.results()} == {"unofficial"}


def test_party_labels_match_whatever_the_case_and_spacing(lf):
    rows = [[2022, "QV", "federal", "1", "HARBOUR", "Maren Olvas", 10],
            [2022, "QV", "federal", "1", " upland ", "Tobin Resk", 9],
            [2022, "QV", "federal", "1", "Harbour-Lantern", "Ilse Varro", 8]]
    result = lf("load", lf.write("case.csv", long_csv(rows)))
    assert lf.rows("SELECT candidate, party_code FROM votes ORDER BY candidate") == [
        ("Ilse Varro", "a"), ("Maren Olvas", "a"), ("Tobin Resk", "b")]
    assert "counted as 'other'" not in result.stdout


def test_unknown_labels_are_other_and_counted_in_the_report(lf):
    rows = [[2022, "QV", "federal", "1", "Harbour", "Maren Olvas", 10],
            [2022, "QV", "federal", "1", "Lantern", "Asa Fell", 3],
            [2022, "QV", "federal", "2", "Lantern", "Bo Fell", 4],
            [2022, "QV", "federal", "2", "Quay Group", "Cai Moor", 5]]
    result = lf("load", lf.write("other.csv", long_csv(rows)))
    assert "party labels counted as 'other': 'Lantern' (2), 'Quay Group' (1)" in result.stdout
    assert lf.rows("SELECT COUNT(*) FROM votes WHERE party_code = 'other'") == [(3,)]


def test_wide_file_one_column_per_party_and_empty_means_not_on_the_ballot(lf):
    text = csv_text(["cycle", "state", "chamber", "district", "votes_Harbour", "votes_Upland", "votes_Lantern"],
                    [[2022, "QV", "state_lower", "14", 8120, 7702, ""],
                     [2022, "QV", "state_lower", "15", "", "6,001", 300]])
    result = lf("load", lf.write("wide.csv", text))
    assert "format native-wide; rows read 2, accepted 2, rejected 0" in result.stdout
    assert lf.results() == [
        (2022, "QV", "state_lower", "14", "Harbour", "", 8120, "certified"),
        (2022, "QV", "state_lower", "14", "Upland", "", 7702, "certified"),
        (2022, "QV", "state_lower", "15", "Lantern", "", 300, "certified"),
        (2022, "QV", "state_lower", "15", "Upland", "", 6001, "certified"),
    ]
    assert lf.rows("SELECT district, status FROM contests ORDER BY district") == [
        ("14", "contested"), ("15", "uncontested")]
    assert lf.rows("SELECT format FROM loads") == [("native-wide",)]


def test_gzipped_file_loads_the_same_rows_as_the_plain_one(lf, tmp_path):
    text = long_csv(BASE_ROWS)
    gz = lf.write_gz("2022.csv.gz", text)
    result = lf("load", gz)
    assert "2022.csv.gz: loaded (load #1)" in result.stdout
    gz_results = lf.results()
    assert len(gz_results) == len(BASE_ROWS)
    # the provenance is the delivered (compressed) file
    assert lf.rows("SELECT sha256, bytes FROM loads") == [(hashlib.sha256(gz.read_bytes()).hexdigest(),
                                                           gz.stat().st_size)]
    # the plain file has other bytes but the same content: nothing to change
    result = lf("load", lf.write("2022.csv", text))
    assert "units: 0 new, 0 corrected, 1 unchanged" in result.stdout
    assert lf.results() == gz_results


def test_utf8_bom_is_accepted_with_or_without_an_explicit_encoding(lf):
    rows = [[2022, "QV", "federal", "1", "Harbour", "Åsa Øberg", 10],
            [2022, "QV", "federal", "1", "Upland", "Tobin Resk", 9]]
    lf("load", lf.write("bom.csv", "\ufeff" + long_csv(rows)))
    assert lf.rows("SELECT candidate FROM votes ORDER BY id") == [("Åsa Øberg",), ("Tobin Resk",)]
    rows[0][6] = 11  # another unit content, same BOM, now with --encoding utf-8
    rows = [[2024] + r[1:] for r in rows]
    lf("load", lf.write("bom2.csv", "\ufeff" + long_csv(rows)), "--encoding", "utf-8")
    assert lf.rows("SELECT COUNT(*) FROM district_results WHERE cycle = 2024") == [(2,)]


def test_crlf_line_endings_and_blank_lines(lf):
    text = long_csv(BASE_ROWS).replace("\n", "\r\n") + "\r\n\r\n"
    result = lf("load", lf.write("crlf.csv", text))
    assert "rows read 5, accepted 5" in result.stdout
    assert len(lf.results()) == 5


def test_several_files_in_one_command(lf):
    a = lf.write("a.csv", long_csv(BASE_ROWS))
    b = lf.write("b.csv", long_csv([[2024, "QV", "federal", "1", "Upland", "Tobin Resk", 5]]))
    result = lf("load", a, b)
    assert "a.csv: loaded (load #1)" in result.stdout and "b.csv: loaded (load #2)" in result.stdout
    assert lf.rows("SELECT DISTINCT cycle FROM district_results ORDER BY cycle") == [(2022,), (2024,)]


def test_a_file_with_several_units_stores_each(lf):
    rows = BASE_ROWS + [[2022, "RX", "federal", "AL", "Harbour", "Wil Tay", 50],
                        [2022, "QV", "state_lower", "1", "Upland", "Xan Pole", 40]]
    result = lf("load", lf.write("multi.csv", long_csv(rows)))
    assert "units: 3 new" in result.stdout
    assert lf.rows("SELECT cycle, state, chamber FROM units ORDER BY state, chamber") == [
        (2022, "QV", "federal"), (2022, "QV", "state_lower"), (2022, "RX", "federal")]
    assert lf.rows("SELECT code FROM states ORDER BY code") == [("QV",), ("RX",)]


def test_a_candidate_on_two_party_lines_is_fusion_not_an_error(lf):
    rows = [[2022, "QV", "federal", "2", "Harbour", "Ilse Varro", "67,020"],
            [2022, "QV", "federal", "2", "Lantern", "Ilse Varro", "5,113"],
            [2022, "QV", "federal", "2", "Upland", "Piet Amsel", "70,344"]]
    lf("load", lf.write("fusion.csv", long_csv(rows)))
    # both lines are stored as delivered ...
    assert [r[4:7] for r in lf.results()] == [("Harbour", "Ilse Varro", 67020), ("Lantern", "Ilse Varro", 5113),
                                               ("Upland", "Piet Amsel", 70344)]
    # ... and the reduction counts the candidate once, for her major party: 72,133 beats 70,344
    assert lf.rows("SELECT status FROM contests") == [("contested",)]
    assert {(r["votes_a"], r["votes_b"], r["winner"]) for r in lf.export_rows()} == {("72133", "70344", "a")}


def test_space_and_no_break_space_thousands_separators(lf):
    rows = [[2022, "QV", "federal", "1", "Harbour", "Maren Olvas", "1 234"],
            [2022, "QV", "federal", "1", "Upland", "Tobin Resk", "12\u00a0345\u00a0678"],
            [2022, "QV", "federal", "1", "Lantern", "Asa Fell", "9\u202f999"]]
    lf("load", lf.write("sep.csv", long_csv(rows)))
    assert lf.rows("SELECT candidate, votes FROM votes ORDER BY candidate") == [
        ("Asa Fell", 9999), ("Maren Olvas", 1234), ("Tobin Resk", 12345678)]


def test_a_separator_that_does_not_group_thousands_is_refused(lf):
    rows = [[2022, "QV", "federal", "1", "Harbour", "Maren Olvas", "12 34"]]
    result = lf("load", lf.write("sep.csv", long_csv(rows)), code=1)
    assert "sep.csv:2:votes: votes '12 34' is not a number" in result.stderr


def test_state_codes_are_upper_case_and_chamber_names_lower_case(lf):
    lf("load", lf.write("a.csv", long_csv(BASE_ROWS)))
    rows = [[2022, "qv", "Federal", "4", "Harbour", "Ola Pim", 50],
            [2024, " Qv ", "FEDERAL", "1", "Upland", "Tobin Resk", 5]]
    result = lf("load", lf.write("b.csv", long_csv(rows)))
    # "qv"/"Federal" is the stored QV federal unit, re-delivered (a correction), not a second unit
    assert "correction 2022 QV federal:" in result.stdout
    assert lf.rows("SELECT code FROM states") == [("QV",)]
    assert lf.rows("SELECT code FROM chambers") == [("federal",)]
    assert lf.rows("SELECT DISTINCT cycle, state, chamber FROM district_results ORDER BY cycle") == [
        (2022, "QV", "federal"), (2024, "QV", "federal")]
