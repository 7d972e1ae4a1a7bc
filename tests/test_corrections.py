"""Reloads and corrections: the same bytes change nothing, a re-delivered unit supersedes the
stored one (which stays in history), and --dry-run writes nothing."""

from __future__ import annotations

from conftest import BASE_ROWS, csv_text, long_csv

RESULT_VIEW_COLUMNS = ["cycle", "state", "chamber", "district", "party", "candidate", "votes", "status", "load_id"]


def corrected_rows():
    """BASE_ROWS with district 1 flipped (a recount), district 3 now contested, district 2 unchanged."""
    rows = [r[:] for r in BASE_ROWS]
    rows[0][6] = 900                                              # Harbour 1,200 -> 900: Upland wins 1
    rows.append([2022, "QV", "federal", "3", "Harbour", "Nils Hame", 100])
    return rows


def test_the_same_bytes_twice_change_nothing_and_say_so(loaded):
    before = loaded.dump()
    result = loaded("load", loaded.files / "base.csv")
    assert "base.csv: already loaded (load #1)" in result.stdout
    assert "were loaded as load #1 on" in result.stdout and "nothing changed" in result.stdout
    assert loaded.dump() == before


def test_the_same_content_in_other_bytes_leaves_the_units_alone(loaded):
    units = loaded.rows("SELECT * FROM units")
    votes = loaded.rows("SELECT * FROM votes")
    result = loaded("load", loaded.write("reordered.csv", long_csv(list(reversed(BASE_ROWS)))))
    assert "units: 0 new, 0 corrected, 1 unchanged" in result.stdout
    assert loaded.rows("SELECT * FROM units") == units
    assert loaded.rows("SELECT * FROM votes") == votes
    assert loaded.rows("SELECT id, units_unchanged, supersedes FROM loads ORDER BY id") == [(1, 0, None), (2, 1, None)]


def test_a_correction_supersedes_keeps_history_and_reports_what_changed(loaded):
    result = loaded("load", loaded.write("recount.csv", long_csv(corrected_rows())))
    out = result.stdout
    assert "recount.csv: loaded (load #2)" in out
    assert "units: 0 new, 1 corrected, 0 unchanged" in out
    assert "correction 2022 QV federal:" in out
    # before: a won 1, b won 2 and 3; after: b wins all three
    for line in ("seats of party a: 1 -> 0", "seats of party b: 2 -> 3", "district 1: winner a -> b",
                 "votes of party a: 1,900 -> 1,700 (-200)"):
        assert line in out
    assert "votes of party b" not in out  # b's total did not move
    assert "district 2" not in out and "district 3" not in out  # their winners did not change

    # the old unit stays in history, superseded by the new one
    assert loaded.rows("SELECT unit_id, load_id, supersedes, superseded_by, standing FROM unit_history "
                       "ORDER BY unit_id") == [(1, 1, None, 2, "superseded"), (2, 2, 1, None, "current")]
    assert loaded.rows("SELECT supersedes, units_corrected FROM loads WHERE id = 2") == [("[1]", 1)]
    assert loaded.rows("SELECT COUNT(*) FROM votes") == [(len(BASE_ROWS) + len(corrected_rows()),)]
    assert loaded.rows("SELECT votes FROM votes v JOIN contests c ON c.id = v.contest_id "
                       "WHERE c.unit_id = 1 AND v.candidate = 'Maren Olvas'") == [(1200,)]

    # district_results: current rows only, exactly the contract's columns
    conn_columns = [r[1] for r in loaded.rows("PRAGMA table_info(district_results)")]
    assert conn_columns == RESULT_VIEW_COLUMNS
    current = loaded.rows("SELECT * FROM district_results ORDER BY district, party")
    assert {r[-1] for r in current} == {2}
    assert len(current) == len(corrected_rows())
    assert (2022, "QV", "federal", "1", "Harbour", "Maren Olvas", 900, "certified", 2) in current


def test_a_correction_of_the_status_only_says_so(lf):
    rows = [r + ["unofficial"] for r in BASE_ROWS]
    lf("load", lf.write("early.csv", long_csv(rows, ("status",))))
    result = lf("load", lf.write("final.csv", long_csv([r[:-1] + ["certified"] for r in rows], ("status",))))
    assert "correction 2022 QV federal:" in result.stdout
    assert "status: unofficial -> certified" in result.stdout
    assert {r[7] for r in lf.results()} == {"certified"}


def test_a_correction_that_adds_and_drops_districts(loaded):
    rows = [r for r in BASE_ROWS if r[3] != "3"] + [[2022, "QV", "federal", "4", "Harbour", "Ola Pim", 50]]
    result = loaded("load", loaded.write("redrawn.csv", long_csv(rows)))
    assert "district 3: dropped" in result.stdout
    assert "district 4: added" in result.stdout
    assert loaded.rows("SELECT DISTINCT district FROM district_results ORDER BY district") == [("1",), ("2",), ("4",)]


def test_a_correction_touches_only_the_units_it_delivers(loaded):
    other = [[2022, "RX", "federal", "AL", "Upland", "Wil Tay", 70]]
    loaded("load", loaded.write("rx.csv", long_csv(other)))
    loaded("load", loaded.write("recount.csv", long_csv(corrected_rows())))
    assert loaded.rows("SELECT state, load_id FROM district_results WHERE state = 'RX'") == [("RX", 2)]


def test_reloading_an_older_file_after_a_correction_is_refused_as_already_loaded(loaded):
    loaded("load", loaded.write("recount.csv", long_csv(corrected_rows())))
    result = loaded("load", loaded.files / "base.csv")
    assert "already loaded (load #1)" in result.stdout
    assert {r[-1] for r in loaded.rows("SELECT * FROM district_results")} == {2}


def test_dry_run_of_a_correction_writes_nothing_but_reports_it(loaded):
    path = loaded.write("recount.csv", long_csv(corrected_rows()))
    before = loaded.dump()
    result = loaded("load", "--dry-run", path)
    assert "recount.csv: dry run" in result.stdout
    assert "(load #" not in result.stdout
    assert "district 1: winner a -> b" in result.stdout
    assert loaded.dump() == before
    # a later real load is unaffected by the dry run
    result = loaded("load", path)
    assert "recount.csv: loaded (load #2)" in result.stdout


def test_dry_run_on_an_empty_store_writes_nothing(lf):
    before = lf.dump()
    result = lf("load", "--dry-run", lf.write("base.csv", long_csv(BASE_ROWS)))
    assert "units: 1 new" in result.stdout
    assert lf.dump() == before


def test_dry_run_of_a_bad_file_is_a_data_error(loaded):
    before = loaded.dump()
    result = loaded("load", "--dry-run", loaded.write("bad.csv", long_csv([[2022, "QV", "federal", "1",
                                                                            "Harbour", "X", "-3"]])), code=1)
    assert "bad.csv:2:votes: votes '-3' is negative" in result.stderr
    assert loaded.dump() == before


# party codes follow the [parties] labels of levelfield.toml --------------------------------------

LANTERN_ROWS = [
    [2022, "RX", "federal", "1", "Harbour", "Wil Tay", 10],
    [2022, "RX", "federal", "1", "Upland", "Yul Moss", 9],
    [2022, "RX", "federal", "2", "Lantern", "Zed Orr", 8],   # 'other' under the first labels
    [2022, "RX", "federal", "2", "Upland", "Asa Fell", 7],
]


def relabel(lf, a_labels: list[str]) -> None:
    """levelfield.toml with other labels for party a (party b keeps 'Upland')."""
    labels = ", ".join(f'"{label}"' for label in a_labels)
    (lf.root / "levelfield.toml").write_text(
        f'[parties.a]\nname = "Harbour Party"\nlabels = [{labels}]\ncolour = "#1b7f79"\n'
        '[parties.b]\nname = "Upland League"\nlabels = ["Upland"]\ncolour = "#c9861a"\n', encoding="utf-8")


def test_edited_party_labels_recode_the_stored_lines_before_anything_reads_them(lf):
    path = lf.write("rx.csv", long_csv(LANTERN_ROWS))
    lf("load", path)
    assert lf.rows("SELECT district, status FROM contests ORDER BY district") == [("1", "contested"), ("2", "uncontested")]
    digest = lf.rows("SELECT content_sha256 FROM units")

    relabel(lf, ["Harbour", "Lantern"])
    result = lf("export", "results")
    assert "party labels changed in levelfield.toml: 1 vote line re-coded" in result.stderr
    assert "party labels changed" not in result.stdout  # the exported CSV stays clean
    d2 = [r for r in lf.export_rows() if r["district"] == "2"]
    assert {(r["contest_status"], r["votes_a"], r["votes_b"], r["winner"]) for r in d2} == {("contested", "8", "7", "a")}
    # the stored codes, the stored contest status and the unit's content hash all followed
    assert lf.rows("SELECT party, party_code FROM votes WHERE party = 'Lantern'") == [("Lantern", "a")]
    assert lf.rows("SELECT district, status FROM contests ORDER BY district") == [("1", "contested"), ("2", "contested")]
    assert lf.rows("SELECT content_sha256 FROM units") != digest
    assert lf.rows("SELECT label, code FROM party_labels ORDER BY label") == [
        ("harbour", "a"), ("lantern", "a"), ("upland", "b")]
    # once done, it is not done again; the same bytes are still "already loaded", and the same
    # content in other bytes is an unchanged unit (its hash follows the new codes)
    again = lf("status")
    assert "party labels changed" not in again.output
    assert "already loaded" in lf("load", path).stdout
    reordered = lf("load", lf.write("rx2.csv", long_csv(list(reversed(LANTERN_ROWS)))))
    assert "units: 0 new, 0 corrected, 1 unchanged" in reordered.stdout

    # and back: the labels of the first load give the first codes again
    relabel(lf, ["Harbour", "Harbour-Lantern"])
    back = lf("status")
    assert "party labels changed in levelfield.toml: 1 vote line re-coded" in back.stderr
    assert lf.rows("SELECT district, status FROM contests WHERE unit_id = 1 ORDER BY district") == [
        ("1", "contested"), ("2", "uncontested")]
    assert lf.rows("SELECT content_sha256 FROM units WHERE id = 1") == digest


def test_the_measures_read_the_recoded_lines(lf):
    """compute, flags and publish read the stored reductions (``reduced_contests``); opening the
    store writes nothing, and the step every command runs first (``pipeline.prepare``) re-codes the
    lines and reduces their contests again before that read."""
    from monitor.inputs import reduced_contests
    from monitor.pipeline import prepare
    from monitor.workspace import Workspace

    lf("load", lf.write("rx.csv", long_csv(LANTERN_ROWS)))
    relabel(lf, ["Harbour", "Lantern"])
    notices: list[str] = []
    ws = Workspace(lf.root, notices.append)
    before = lf.dump()
    db = ws.open_store()
    assert lf.dump() == before and notices == []  # opening wrote nothing
    assert reduced_contests(db).sort_values("district")["status"].tolist() == ["contested", "uncontested"]
    prepare(db, ws.config(), ws.notify)
    contests = reduced_contests(db).sort_values("district")
    assert contests[["district", "status", "votes_a", "votes_b"]].values.tolist() == [
        ["1", "contested", 10, 9], ["2", "contested", 8, 7]]
    assert notices == ["party labels changed in levelfield.toml: 1 vote line re-coded"]
    db.close()


def test_mapped_lines_keep_the_mapping_grouping(lf):
    """A mapping's own [parties] grouping is kept; a mapping without [parties] used the
    workspace labels, and follows them like a native file."""
    header = ["yr", "st", "seat", "label", "name", "n"]
    rows = [[2022, "QQ", "1", "Lantern", "Ann Aro", 5], [2022, "QQ", "1", "Upland", "Bob Bex", 4]]
    own = ('chamber = "federal"\n[columns]\ncycle = "yr"\nstate = "st"\ndistrict = "seat"\nparty = "label"\n'
           'candidate = "name"\nvotes = "n"\n')
    lf("load", lf.write("own.csv", csv_text(header, rows)), "--mapping",
       lf.write("own.toml", own + '[parties]\na = ["Upland"]\nb = ["Lantern"]\n'))
    lf("load", lf.write("ws.csv", csv_text(header, [[2024] + r[1:] for r in rows])), "--mapping",
       lf.write("ws.toml", own))
    assert lf.rows("SELECT party_codes_from FROM loads ORDER BY id") == [("mapping",), ("config",)]
    relabel(lf, ["Harbour", "Lantern"])
    assert "1 vote line re-coded" in lf("status").stderr
    assert lf.rows("SELECT u.cycle, v.party, v.party_code FROM votes v JOIN contests c ON c.id = v.contest_id "
                   "JOIN units u ON u.id = c.unit_id ORDER BY u.cycle, v.party") == [
        (2022, "Lantern", "b"), (2022, "Upland", "a"),      # the mapping's grouping, as loaded
        (2024, "Lantern", "a"), (2024, "Upland", "b")]      # the workspace labels, now with Lantern


def test_a_dry_run_after_a_label_change_writes_nothing_and_says_what_would_change(loaded):
    loaded("load", loaded.write("rx.csv", long_csv(LANTERN_ROWS)))
    relabel(loaded, ["Harbour", "Lantern"])
    before = loaded.dump()
    rows = [[2024] + r[1:] for r in BASE_ROWS]
    result = loaded("load", "--dry-run", loaded.write("next.csv", long_csv(rows)))
    assert "warning: party labels changed in levelfield.toml: 1 vote line would be re-coded" in result.stdout
    assert loaded.dump() == before


def test_a_label_change_that_touches_no_stored_line_changes_nothing(lf):
    # also the path of a store made before the label basis was kept: the basis differs, no line
    # needs a new code
    lf("load", lf.write("rx.csv", long_csv(LANTERN_ROWS)))
    before = lf.dump()
    relabel(lf, ["Harbour", "Harbour-Lantern", "Tideline"])  # 'Tideline' is on no stored line
    result = lf("status")
    assert "party labels changed in levelfield.toml: 0 vote lines re-coded" in result.stderr
    assert lf.rows("SELECT label FROM party_labels ORDER BY label") == [
        ("harbour",), ("harbour-lantern",), ("tideline",), ("upland",)]
    assert [line for line in lf.dump() if "party_labels" not in line] == \
        [line for line in before if "party_labels" not in line]
