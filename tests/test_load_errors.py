"""Bad files: every validation error with its file:row:column message and exit code 1, the store
unchanged after each, --skip-bad-rows, and usage errors with exit code 2."""

from __future__ import annotations

import gzip
import random

import pytest

from conftest import LONG_HEADER, long_csv, run_subprocess

H = ",".join(LONG_HEADER)


def only_the_refusal_was_recorded(lf, before: list[str], file_name: str) -> None:
    """A refused load writes none of its rows: the store holds what it held before plus one
    provenance row in ``loads`` (outcome refused, nothing accepted)."""
    after = lf.dump()
    assert [line for line in before if line not in after] == []
    added = [line for line in after if line not in before]
    assert len(added) == 1 and added[0].startswith('INSERT INTO "loads"'), added
    assert lf.rows("SELECT file_name, outcome, rows_accepted FROM loads ORDER BY id DESC LIMIT 1") == [
        (file_name, "refused", 0)]
OK = "2024,QV,federal,1,Harbour,Maren Olvas,10\n2024,QV,federal,1,Upland,Tobin Resk,9\n"

# (case, file text, the message expected on stderr)
DATA_ERRORS = [
    ("missing column", "cycle,state,chamber,district,party,votes\n2024,QV,federal,1,Harbour,10\n",
     "bad.csv:1:candidate: missing column (the native-long header needs "
     "cycle,state,chamber,district,party,candidate,votes)"),
    ("duplicated column", H + ",votes\n" + "2024,QV,federal,1,Harbour,Maren Olvas,10,10\n",
     "bad.csv:1:votes: duplicated column (also column 7)"),
    ("unknown column", H + ",vote_count\n2024,QV,federal,1,Harbour,Maren Olvas,10,10\n",
     "bad.csv:1:vote_count: unknown column"),
    ("non-integer votes", H + "\n" + OK + "2024,QV,federal,2,Harbour,Ilse Varro,12.5\n",
     "bad.csv:4:votes: votes '12.5' is not a whole number"),
    ("votes not a number", H + "\n" + OK + "2024,QV,federal,2,Harbour,Ilse Varro,twelve\n",
     "bad.csv:4:votes: votes 'twelve' is not a number"),
    ("negative votes", H + "\n" + OK + "2024,QV,federal,2,Harbour,Ilse Varro,-12\n",
     "bad.csv:4:votes: votes '-12' is negative"),
    ("votes above the bound", H + "\n" + OK + "2024,QV,federal,2,Harbour,Ilse Varro,50000001\n",
     "bad.csv:4:votes: votes 50,000,001 is above the sane bound of 50,000,000 (load.max_votes_per_row)"),
    ("empty votes", H + "\n" + OK + "2024,QV,federal,2,Harbour,Ilse Varro,\n",
     "bad.csv:4:votes: votes is empty"),
    ("cycle not a year", H + "\n" + OK + "24,QV,federal,2,Harbour,Ilse Varro,12\n",
     "bad.csv:4:cycle: cycle '24' is not a year (1789-2200)"),
    ("empty district", H + "\n" + OK + "2024,QV,federal,,Harbour,Ilse Varro,12\n",
     "bad.csv:4:district: district is empty"),
    ("same candidate twice on the same line", H + "\n" + OK + "2024,QV,federal,1,Harbour,Maren Olvas,3\n",
     "bad.csv:4:candidate: candidate 'Maren Olvas' appears twice on the 'Harbour' line of district '1', QV "
     "federal 2024 (first at row 2)"),
    ("contest with no votes", H + "\n" + OK + "2024,QV,federal,2,Harbour,Ilse Varro,0\n"
     "2024,QV,federal,2,Upland,Piet Amsel,0\n",
     "bad.csv:4:votes: district '2', QV federal 2024 has no votes at all"),
    ("unit mixing certified and unofficial", H + ",status\n2024,QV,federal,1,Harbour,Maren Olvas,10,certified\n"
     "2024,QV,federal,2,Upland,Piet Amsel,9,unofficial\n",
     "bad.csv:3:status: QV federal 2024 mixes certified and unofficial rows (row 2 is certified, "
     "this row is unofficial)"),
    ("unknown status", H + ",status\n2024,QV,federal,1,Harbour,Maren Olvas,10,final\n",
     "bad.csv:2:status: status 'final' is neither 'certified' nor 'unofficial'"),
    ("seats not a number", H + ",seats\n2024,QV,federal,1,Harbour,Maren Olvas,10,two\n",
     "bad.csv:2:seats: seats 'two' is not a whole number of seats (1 or more)"),
    ("seats disagree inside a contest", H + ",seats\n2024,QV,federal,1,Harbour,Maren Olvas,10,2\n"
     "2024,QV,federal,1,Upland,Tobin Resk,9,3\n",
     "bad.csv:3:seats: seats 3 disagrees with 2 at row 2 for district '1'"),
    ("wrong delimiter", H.replace(",", ";") + "\n2024;QV;federal;1;Harbour;Maren Olvas;10\n",
     "bad.csv:1: the header is one column: is the file separated by something other than commas?"),
    ("unquoted thousands separator", H + "\n2024,QV,federal,1,Harbour,Maren Olvas,12,345\n",
     "bad.csv:2:#8: has 8 cells but the header has 7 columns: cell #8 onwards fall under no column"),
    ("a cell missing", H + "\n2024,QV,federal,1,Harbour,Maren Olvas\n",
     "bad.csv:2:#7: has 6 cells but the header has 7 columns: column #7 (votes) onwards missing"),
    ("header only", H + "\n", "bad.csv: no result rows to load"),
    ("empty file", "", "bad.csv:1: the file is empty: no header row"),
    ("wide file with a votes_ column naming no party", "cycle,state,chamber,district,votes_,votes_Upland\n"
     "2024,QV,federal,1,5,6\n", "bad.csv:1:votes_: a votes_ column names no party"),
    ("NUL bytes", H + "\n2024,QV,federal,1,Harbour,Maren\x00Olvas,10\n",
     "bad.csv:2: contains NUL bytes: this is not a text CSV file"),
]


@pytest.mark.parametrize("text,message", [c[1:] for c in DATA_ERRORS], ids=[c[0] for c in DATA_ERRORS])
def test_each_validation_error_names_its_place_and_leaves_the_store_as_it_was(loaded, text, message):
    before = loaded.dump()
    result = loaded("load", loaded.write("bad.csv", text), code=1)
    assert message in result.stderr
    assert "nothing was loaded" in result.stderr
    assert result.stdout == ""
    only_the_refusal_was_recorded(loaded, before, "bad.csv")


def test_every_problem_of_a_file_is_reported_at_once(loaded):
    text = (H + "\n" + "2024,QV,federal,1,Harbour,Maren Olvas,-1\n" + "2024,QV,federal,,Upland,Tobin Resk,9\n"
            + "year,QV,federal,2,Upland,Piet Amsel,9\n")
    result = loaded("load", loaded.write("bad.csv", text), code=1)
    errors = [line for line in result.stderr.splitlines() if line.startswith("error: bad.csv:")]
    assert [e.split(": ")[1] for e in errors] == ["bad.csv:2:votes", "bad.csv:3:district", "bad.csv:4:cycle"]
    assert "3 problem(s) in bad.csv; nothing was loaded" in result.stderr


def test_a_non_utf8_file_needs_an_explicit_encoding(loaded):
    text = H + "\n2024,QV,federal,1,Harbour,Jérôme Vask,10\n2024,QV,federal,1,Upland,Tobin Resk,9\n"
    path = loaded.write("latin.csv", text, encoding="cp1252")
    before = loaded.dump()
    result = loaded("load", path, code=1)
    # the bad byte's place: row 2, field #6 (the candidate column)
    assert ("latin.csv:2:#6: byte 0xe9 (in column 'candidate') is not valid utf-8; if the file is in another "
            "encoding, pass --encoding") in result.stderr
    only_the_refusal_was_recorded(loaded, before, "latin.csv")
    loaded("load", path, "--encoding", "cp1252")
    assert loaded.rows("SELECT candidate FROM district_results WHERE cycle = 2024 AND party = 'Harbour'") == [
        ("Jérôme Vask",)]


def test_an_unknown_encoding_is_a_usage_error(loaded):
    result = loaded("load", loaded.write("ok.csv", H + "\n" + OK), "--encoding", "no-such-codec", code=2)
    assert "unknown encoding 'no-such-codec'" in result.stderr


def test_gzip_over_the_decompressed_cap_is_refused(loaded):
    loaded.configure("[load]\nmax_decompressed_mb = 1\n")
    rng = random.Random(7)
    rows = [[2024, "QV", "state_lower", str(i), "Harbour", f"Cand {i}", rng.randrange(10**6)] for i in range(40_000)]
    text = long_csv(rows)
    assert len(text.encode()) > 2**20
    before = loaded.dump()
    result = loaded("load", loaded.write_gz("big.csv.gz", text), code=1)
    assert "big.csv.gz: gzip content is larger than the 1 MB cap (load.max_decompressed_mb); refused" in result.stderr
    only_the_refusal_was_recorded(loaded, before, "big.csv.gz")
    # the same content under the cap loads
    loaded("load", loaded.write_gz("small.csv.gz", long_csv(rows[:1000])))
    assert loaded.rows("SELECT COUNT(*) FROM district_results WHERE chamber = 'state_lower'") == [(1000,)]


def test_a_truncated_gzip_is_a_data_error(loaded):
    data = gzip.compress((H + "\n" + OK).encode())
    before = loaded.dump()
    result = loaded("load", loaded.write("cut.csv.gz", data[: len(data) // 2]), code=1)
    assert "cut.csv.gz: gzip file is truncated" in result.stderr
    only_the_refusal_was_recorded(loaded, before, "cut.csv.gz")


def test_a_bad_file_does_not_stop_the_next_one(loaded):
    bad = loaded.write("bad.csv", H + "\n2024,QV,federal,1,Harbour,Maren Olvas,-1\n")
    good = loaded.write("good.csv", H + "\n" + OK)
    result = loaded("load", bad, good, code=1)
    assert "good.csv: loaded (load #3)" in result.stdout  # load #2 is the refusal of bad.csv
    assert loaded.rows("SELECT id, file_name, outcome FROM loads WHERE id > 1 ORDER BY id") == [
        (2, "bad.csv", "refused"), (3, "good.csv", "loaded")]
    assert loaded.rows("SELECT COUNT(*) FROM district_results WHERE cycle = 2024") == [(2,)]


# --skip-bad-rows --------------------------------------------------------------------------------

def test_skip_bad_rows_loads_the_rest_and_reports_each_skipped_row(loaded):
    text = (H + ",status\n"
            "2024,QV,federal,1,Harbour,Maren Olvas,10,\n"
            "2024,QV,federal,1,Upland,Tobin Resk,9,\n"
            "2024,QV,federal,2,Harbour,Ilse Varro,-5,\n"        # bad votes: the whole contest goes
            "2024,QV,federal,2,Upland,Piet Amsel,7,\n"
            # a unit mixing statuses: every row of the unit goes, and each is listed
            "2024,RX,federal,1,Harbour,Wil Tay,3,certified\n"
            "2024,RX,federal,2,Harbour,Yul Moss,4,certified\n"
            "2024,RX,federal,3,Upland,Zed Orr,5,unofficial\n")
    result = loaded("load", loaded.write("mixed.csv", text), "--skip-bad-rows")
    out = result.stdout
    assert "rows read 7, accepted 2, rejected 5" in out
    assert "skipped 5 row(s):" in out
    assert "mixed.csv:4:votes: votes '-5' is negative" in out
    assert ("mixed.csv:5:district: skipped with the rest of its contest (district '2', QV federal 2024): "
            "row 4 has a problem") in out
    assert "mixed.csv:8:status: RX federal 2024 mixes certified and unofficial rows" in out
    for row in (6, 7):
        assert (f"mixed.csv:{row}:state: skipped with the rest of its unit (RX federal 2024): "
                "row 8 has a problem") in out
    assert loaded.rows("SELECT state, district, candidate FROM district_results WHERE cycle = 2024 "
                       "ORDER BY district, candidate") == [("QV", "1", "Maren Olvas"), ("QV", "1", "Tobin Resk")]
    assert loaded.rows("SELECT rows_read, rows_accepted, rows_rejected FROM loads WHERE id = 2") == [(7, 2, 5)]


def test_skip_bad_rows_never_stores_half_a_long_contest(lf):
    """A bad party-b row must not leave its district as an uncontested party-a win (which the
    measures would then impute)."""
    text = (H + "\n"
            "2024,QV,federal,1,Harbour,Maren Olvas,10\n"
            "2024,QV,federal,1,Upland,Tobin Resk,-9\n"          # party b's row is bad
            "2024,QV,federal,1,Lantern,Asa Fell,2\n"
            "2024,QV,federal,2,Harbour,Ilse Varro,5\n"
            "2024,QV,federal,2,Upland,Piet Amsel,7\n"
            "2024,QV,federal,3,Harbour,Ode Brask,6\n"
            "2024,QV,federal,3,Upland,Nils Hame,6,extra\n"      # a cell too many: its contest goes
            "2024,QV,federal,3,Lantern,Ola Pim,1\n"
            "2024,QV,federal,4,Harbour,Rhea Lund,8\n"
            "20x4,QV,federal,4,Upland,Sven Oak,3\n"             # cycle unreadable: district 4 goes too
            "2024,QV,federal,5,Harbour,Tam Ivo,4\n"
            "2024,QV,federal,5,Upland,Uma Pell,3\n")
    result = lf("load", lf.write("half.csv", text), "--skip-bad-rows")
    out = result.stdout
    assert "rows read 12, accepted 4, rejected 8" in out
    assert "half.csv:3:votes: votes '-9' is negative" in out
    for row in (2, 4):
        assert f"half.csv:{row}:district: skipped with the rest of its contest (district '1', " in out
    assert "half.csv:8:#8: has 8 cells but the header has 7 columns" in out
    for row in (7, 9):
        assert f"half.csv:{row}:district: skipped with the rest of its contest (district '3', " in out
    assert "half.csv:11:cycle: cycle '20x4' is not a year" in out
    assert "half.csv:10:district: skipped with the rest of its contest (district '4', " in out
    assert lf.rows("SELECT DISTINCT district FROM district_results ORDER BY district") == [("2",), ("5",)]
    assert {r["contest_status"] for r in lf.export_rows()} == {"contested"}


def test_skip_bad_rows_never_loads_half_a_wide_row(lf):
    text = ("cycle,state,chamber,district,votes_Harbour,votes_Upland\n"
            "2024,QV,federal,1,100,12x\n"
            "2024,QV,federal,2,100,90\n")
    result = lf("load", lf.write("wide.csv", text), "--skip-bad-rows")
    assert "wide.csv:2:votes_Upland: votes '12x' is not a number" in result.stdout
    # district 1 must not be stored as a Harbour walkover
    assert lf.rows("SELECT DISTINCT district FROM district_results") == [("2",)]


def test_skip_bad_rows_with_nothing_left_is_still_an_error(loaded):
    before = loaded.dump()
    result = loaded("load", loaded.write("bad.csv", H + "\n2024,QV,federal,1,Harbour,Maren Olvas,-1\n"),
                    "--skip-bad-rows", code=1)
    assert "bad.csv:2:votes: votes '-1' is negative" in result.stderr
    assert "no rows left to load" in result.stderr
    only_the_refusal_was_recorded(loaded, before, "bad.csv")


def test_skip_bad_rows_does_not_skip_a_bad_header(loaded):
    result = loaded("load", loaded.write("bad.csv", "cycle,state\n2024,QV\n"), "--skip-bad-rows", code=1)
    assert "bad.csv:1:chamber: missing column" in result.stderr


# usage errors: exit code 2 ----------------------------------------------------------------------

def test_a_missing_file_is_a_usage_error(loaded):
    before = loaded.dump()
    result = loaded("load", loaded.files / "nowhere.csv", code=2)
    assert "nowhere.csv: no such file" in result.stderr
    assert loaded.dump() == before


def test_a_folder_is_not_a_file(loaded):
    result = loaded("load", loaded.files, code=2)
    assert "is a folder, not a file" in result.stderr


BAD_MAPPINGS = [
    ("not TOML", "[columns\ncycle = 'y'", "not a valid TOML mapping file"),
    ("required columns missing", "chamber = 'federal'\n[columns]\ncycle = 'y'\n", "[columns] needs 'state'"),
    ("no chamber", "[columns]\ncycle='y'\nstate='s'\ndistrict='d'\nparty='p'\nvotes='v'\n",
     'give a fixed chamber = "..." or a [columns] chamber'),
    ("keep is not a table", "keep = 'GENERAL'\n", "keep must be a table"),
    ("exclude is a list", "exclude = ['ZZ']\n", "exclude must be a table"),
    ("parties is a number", "parties = 3\n", "parties must be a table"),
    ("districts is text", "districts = '0'\n", "districts must be a table"),
    ("encoding is a number", "encoding = 1252\n", "encoding must be a non-empty text"),
    ("unknown key", "chambr = 'federal'\n", "unknown key 'chambr'"),
    ("our field misspelt", "[columns]\nvots = 'v'\n", "[columns] 'vots' is not one of our fields"),
    ("unknown party code", "[parties]\nc = ['X']\n", "[parties] 'c': our party codes are a, b"),
    ("label under two codes", "[parties]\na = ['X']\nb = ['x']\n", "label 'x' is listed under two codes"),
    ("at_large unquoted", "[districts]\nat_large = 0\n", "[districts] at_large must be text"),
    ("bad candidate_lines", "candidate_lines = 'add'\n", 'candidate_lines must be "sum" or "separate"'),
]


@pytest.mark.parametrize("toml,message", [c[1:] for c in BAD_MAPPINGS], ids=[c[0] for c in BAD_MAPPINGS])
def test_a_bad_mapping_is_a_usage_error(loaded, toml, message):
    before = loaded.dump()
    result = loaded("load", loaded.write("ok.csv", H + "\n" + OK), "--mapping", loaded.write("m.toml", toml), code=2)
    assert "m.toml: " in result.stderr and message in result.stderr
    assert loaded.dump() == before


def test_a_missing_mapping_file_is_a_usage_error(loaded):
    result = loaded("load", loaded.write("ok.csv", H + "\n" + OK), "--mapping", loaded.files / "none.toml", code=2)
    assert "cannot read the mapping file" in result.stderr


BAD_CONFIGS = [
    ("not TOML", "[parties.a\n", "not valid TOML"),
    ("section declared twice", "[load]\nmax_votes_per_row = 5\n[load]\nmax_decompressed_mb = 1\n", "not valid TOML"),
    ("unknown option", "[uncontested]\npolicyy = 'impute'\n", "unknown option 'uncontested.policyy' "
                                                              "(did you mean 'uncontested.policy'?)"),
    ("bad policy", "[uncontested]\npolicy = 'drop'\n", "uncontested.policy must be one of"),
    ("share out of range", "[uncontested]\nwinner_share = 1.5\n", "uncontested.winner_share must be at most 1.0"),
    ("cap not an integer", "[load]\nmax_decompressed_mb = 'big'\n", "load.max_decompressed_mb must be int"),
]


@pytest.mark.parametrize("toml,message", [c[1:] for c in BAD_CONFIGS], ids=[c[0] for c in BAD_CONFIGS])
def test_a_bad_config_is_a_usage_error(loaded, toml, message):
    loaded.configure(toml)
    before = loaded.dump()
    result = loaded("load", loaded.write("ok.csv", H + "\n" + OK), code=2)
    assert "levelfield.toml: " in result.stderr and message in result.stderr
    assert loaded.dump() == before


def test_labels_claimed_by_both_parties_are_a_config_error(loaded):
    (loaded.root / "levelfield.toml").write_text(
        '[parties.a]\nlabels = ["Harbour"]\n[parties.b]\nlabels = ["harbour"]\n', encoding="utf-8")
    result = loaded("load", loaded.write("ok.csv", H + "\n" + OK), code=2)
    assert "listed for both parties.a and parties.b" in result.stderr


def test_load_without_files_is_a_usage_error(loaded):
    result = loaded("load", code=2)
    assert "Missing argument" in result.output


# real processes: real exit codes, no traceback ---------------------------------------------------

def test_exit_codes_and_messages_in_a_real_process(loaded):
    good = loaded.write("good.csv", H + "\n" + OK)
    bad = loaded.write("bad.csv", H + "\n2024,QV,federal,1,Harbour,Maren Olvas,-1\n")
    done = run_subprocess(loaded.root, "load", str(good))
    assert (done.returncode, done.stderr) == (0, "")
    assert "good.csv: loaded" in done.stdout
    data = run_subprocess(loaded.root, "load", str(bad))
    assert data.returncode == 1
    assert "error: bad.csv:2:votes: votes '-1' is negative" in data.stderr
    usage = run_subprocess(loaded.root, "load", str(loaded.files / "missing.csv"))
    assert usage.returncode == 2
    assert "missing.csv: no such file" in usage.stderr
    for proc in (done, data, usage):
        assert "Traceback" not in proc.stdout + proc.stderr


# a refused load is kept as provenance --------------------------------------------------------------

def test_a_refused_load_is_recorded_shown_by_status_and_refused_again_until_fixed(loaded):
    bad_text = H + "\n" + OK + "2024,QV,federal,2,Harbour,Ilse Varro,-12\n"
    path = loaded.write("late.csv", bad_text)
    before = loaded.dump()
    loaded("load", path, code=1)
    only_the_refusal_was_recorded(loaded, before, "late.csv")
    assert loaded.rows("SELECT id, outcome, rows_read, rows_accepted, rows_rejected, error FROM loads "
                       "WHERE id = 2") == [(2, "refused", 3, 0, 1, "late.csv:4:votes: votes '-12' is negative")]
    status = loaded("status").stdout
    line = next(s for s in status.splitlines() if s.strip().startswith("#2 "))
    assert "refused: late.csv" in line and "3 rows read, 1 rejected; nothing loaded" in line
    assert "late.csv:4:votes: votes '-12' is negative" in line

    # the same bytes again: refused again (a refusal is not "already loaded")
    again = loaded("load", path, code=1)
    assert "already loaded" not in again.output
    assert "late.csv:4:votes: votes '-12' is negative" in again.stderr
    assert loaded.rows("SELECT id, outcome FROM loads WHERE id > 1 ORDER BY id") == [(2, "refused"), (3, "refused")]
    # fixed: it loads
    path.write_text(bad_text.replace("-12", "12"), encoding="utf-8")
    assert "late.csv: loaded (load #4)" in loaded("load", path).stdout
    assert loaded.rows("SELECT COUNT(*) FROM district_results WHERE cycle = 2024") == [(3,)]


def test_a_refused_dry_run_records_nothing(loaded):
    before = loaded.dump()
    loaded("load", "--dry-run", loaded.write("bad.csv", H + "\n2024,QV,federal,1,Harbour,Maren Olvas,-1\n"), code=1)
    assert loaded.dump() == before


# the report --------------------------------------------------------------------------------------

def test_other_label_counts_leave_out_skipped_rows(lf):
    text = (H + "\n"
            "2024,QV,federal,1,Harbour,Maren Olvas,10\n"
            "2024,QV,federal,1,Lantern,Asa Fell,3\n"
            "2024,QV,federal,2,Harbour,Ilse Varro,x\n"           # bad: district 2 is skipped whole ...
            "2024,QV,federal,2,Lantern,Bo Fell,4\n"              # ... with its Lantern and Quay lines
            "2024,QV,federal,2,Quay Group,Cai Moor,5\n"
            "2024,QV,federal,3,Upland,Ode Brask,6\n"
            "2024,QV,federal,3,Lantern,Tam Ivo,bad\n")          # a bad Lantern line: not counted either
    out = lf("load", lf.write("other.csv", text), "--skip-bad-rows").stdout
    assert "  party labels counted as 'other': 'Lantern' (1)" in out.splitlines()


def test_a_file_where_no_line_is_party_a_or_b_warns_and_still_loads(lf):
    rows = [[2024, "QV", "federal", "1", "Harbour Party", "Maren Olvas", 10],
            [2024, "QV", "federal", "1", "Upland League", "Tobin Resk", 9],
            [2024, "QV", "federal", "2", "Harbour Party", "Ilse Varro", 8]]
    result = lf("load", lf.write("names.csv", long_csv(rows)))
    assert ("warning: no line matched party a or party b; labels seen: 'Harbour Party' (2), 'Upland League' (1)"
            in result.stdout)
    assert "check the labels under [parties.a] and [parties.b] in levelfield.toml" in result.stdout
    assert lf.rows("SELECT DISTINCT party_code FROM votes") == [("other",)]
    # a file with a party a or b line does not warn
    ok = lf("load", lf.write("ok.csv", H + "\n" + OK))
    assert "warning" not in ok.stdout
