"""Numbered seats: a district whose members are elected to numbered positions, each position a
contest of its own (one member each).

Invented names and counts; the expectations are hand-computed from these tiny inputs (loader
plumbing, not a check of any measure).
"""

from __future__ import annotations

from conftest import csv_text, long_csv

HEADER_EXTRA = ("seats", "runoff", "position")

# QV state_lower 2022: district 4 elects two members to positions A and B; district 5 is single-member
ROWS = [
    [2022, "QV", "state_lower", "4", "Harbour", "Rhea Lund", 510, "", 0, "A"],
    [2022, "QV", "state_lower", "4", "Upland", "Tam Ivo", 490, "", 0, "A"],
    [2022, "QV", "state_lower", "4", "Harbour", "Sven Oak", 470, "", 0, "B"],
    [2022, "QV", "state_lower", "4", "Upland", "Uma Pell", 530, "", 0, "B"],
    [2022, "QV", "state_lower", "5", "Harbour", "Vic Dorn", 300, "", 0, ""],
    [2022, "QV", "state_lower", "5", "Upland", "Wes Hale", 200, "", 0, ""],
]


def test_each_position_is_a_contest_of_its_own(lf):
    out = lf("load", lf.write("seats.csv", long_csv(ROWS, HEADER_EXTRA)))
    assert "units: 1 new" in out.stdout
    assert lf.rows("SELECT district, position, seats, status, decides FROM contests ORDER BY district, position") == [
        ("4", "A", 1, "contested", 1), ("4", "B", 1, "contested", 1), ("5", "", 1, "contested", 1)]
    # the results export names each line's position (after the columns it had before)
    rows = lf.export_rows()
    assert [(r["district"], r["position"], r["candidate"], r["winner"]) for r in rows] == [
        ("4", "A", "Rhea Lund", "a"), ("4", "A", "Tam Ivo", "a"),
        ("4", "B", "Sven Oak", "b"), ("4", "B", "Uma Pell", "b"),
        ("5", "", "Vic Dorn", "a"), ("5", "", "Wes Hale", "a")]
    assert list(rows[0])[-1] == "position"
    # current_contests carries the position too
    assert lf.rows("SELECT district, position FROM current_contests ORDER BY district, position") == [
        ("4", "A"), ("4", "B"), ("5", "")]


def test_the_same_candidate_name_on_two_positions_is_two_contests(lf):
    rows = [r[:] for r in ROWS]
    rows[2][5] = "Rhea Lund"  # one name on the Harbour line of both positions: not "appears twice"
    lf("load", lf.write("seats.csv", long_csv(rows, HEADER_EXTRA)))
    assert lf.rows("SELECT COUNT(*) FROM votes WHERE candidate = 'Rhea Lund'") == [(2,)]


def test_a_runoff_decides_only_its_own_position(lf):
    rows = ROWS + [
        [2022, "QV", "state_lower", "4", "Harbour", "Sven Oak", 520, "", 1, "B"],
        [2022, "QV", "state_lower", "4", "Upland", "Uma Pell", 480, "", 1, "B"],
    ]
    out = lf("load", lf.write("seats.csv", long_csv(rows, HEADER_EXTRA)))
    assert lf.rows("SELECT position, runoff, decides FROM contests WHERE district = '4' "
                   "ORDER BY position, runoff") == [("A", 0, 1), ("B", 0, 0), ("B", 1, 1)]
    # the report names the position of the contest that does not decide its seat
    assert "district '4' seat 'B', QV state_lower 2022: the runoff contest decides this seat" in out.stdout


def test_a_numbered_seat_elects_one_member(lf):
    rows = [r[:] for r in ROWS]
    rows[0][7] = 2
    out = lf("load", lf.write("bad.csv", long_csv(rows, HEADER_EXTRA)), code=1)
    assert "bad.csv:2:seats: seats 2 with position 'A': a numbered seat elects one member" in out.output
    assert lf.rows("SELECT COUNT(*) FROM contests") == [(0,)]


def test_the_wide_format_takes_a_position_column(lf):
    text = csv_text(["cycle", "state", "chamber", "district", "position", "votes_Harbour", "votes_Upland"],
                    [[2022, "QV", "state_lower", "4", "A", 510, 490], [2022, "QV", "state_lower", "4", "B", 470, 530]])
    lf("load", lf.write("wide.csv", text))
    assert lf.rows("SELECT district, position, seats FROM contests ORDER BY position") == [
        ("4", "A", 1), ("4", "B", 1)]


def test_a_mapping_names_the_position_column(lf):
    text = csv_text(["yr", "st", "dist", "seat_no", "pty", "name", "n"],
                    [[2022, "QV", "4", "1", "Harbour", "Rhea Lund", 510], [2022, "QV", "4", "1", "Upland", "Tam Ivo", 490],
                     [2022, "QV", "4", "2", "Harbour", "Sven Oak", 470], [2022, "QV", "4", "2", "Upland", "Uma Pell", 530]])
    mapping = lf.write("map.toml", 'chamber = "state_lower"\n[columns]\ncycle = "yr"\nstate = "st"\n'
                                   'district = "dist"\nposition = "seat_no"\nparty = "pty"\ncandidate = "name"\n'
                                   'votes = "n"\n')
    lf("load", lf.write("theirs.csv", text), "--mapping", mapping)
    assert lf.rows("SELECT district, position FROM contests ORDER BY position") == [("4", "1"), ("4", "2")]


def test_a_correction_names_the_position_that_changed(lf):
    lf("load", lf.write("seats.csv", long_csv(ROWS, HEADER_EXTRA)))
    rows = [r[:] for r in ROWS]
    rows[3][6] = 460  # Uma Pell now loses position B
    out = lf("load", lf.write("fixed.csv", long_csv(rows, HEADER_EXTRA)))
    assert "district 4 seat B: winner b -> a" in out.stdout


def test_files_without_positions_keep_their_content_hash(lf):
    """A unit without numbered seats hashes as before the position existed (no recompute, no
    correction when the same results are loaded again by a newer levelfield)."""
    from monitor.ingest.records import content_hash

    line = ("1", False, 1, "Harbour", "a", "Maren Olvas", 1200, False, "certified", False, True, False)
    assert content_hash([line + ("",)]) != content_hash([line + ("A",)])
    # the text hashed for a line without a position is the one hashed before positions existed
    import hashlib
    before = "1\x1f0\x1f1\x1fHarbour\x1fa\x1fMaren Olvas\x1f1200\x1f0\x1fcertified"
    assert content_hash([line + ("",)]) == hashlib.sha256(before.encode()).hexdigest()


def test_coverage_counts_each_numbered_seat_and_names_a_left_out_one(lf):
    # district 4 position B won by a minor party: left out; district 4 is then not wholly in the
    # measures (one of its two seats), district 5 is. Hand-computed: 2 districts, 3 seats stored,
    # 2 seats and 1 district in the measures.
    rows = [r[:] for r in ROWS] + [[2022, "QV", "state_lower", "4", "Lantern", "Asa Fell", 600, "", 0, "B"]]
    lf("load", lf.write("seats.csv", long_csv(rows, HEADER_EXTRA)))
    lf("compute")
    import json
    unit = json.loads(lf("export", "coverage", "--format", "json").stdout)[0]
    assert (unit["districts_in_measures"], unit["seats_in_measures"]) == (1, 2)
    assert unit["seat_coverage"] == 2 / 3  # of the 3 seats stored (nothing expected in a first cycle)
    assert "left out: district 4 seat B (won by a minor party or an independent)" in unit["missing_or_left_out"]
    gaps = json.loads(lf("export", "coverage", "--districts", "--format", "json").stdout)
    assert [(g["district"], g["position"], g["gap"]) for g in gaps] == [("4", "B", "left out")]
