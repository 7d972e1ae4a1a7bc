"""An awkward, archive-shaped file (tests/data/constituency_archive.csv, invented and made by
tests/data/make_constituency_archive.py) loads in one attempt through the mapping README shows,
loses no contest without a line in the report, and stores the two-party shares a hand
computation gives on its clean contests.

The expected shares are computed here from the invented file with plain arithmetic (loader
plumbing checked against a hand computation, not a measure check)."""

from __future__ import annotations

import csv
import re
from collections import defaultdict
from pathlib import Path

import pytest

from archive_helpers import archive_mapping, measured

ARCHIVE = Path(__file__).resolve().parent / "data" / "constituency_archive.csv"
MAJOR = {"HEARTHSIDE": "a", "HEARTHSIDE-CRAFT": "a", "MERIDIAN": "b"}
NOT_CANDIDATES = {"BLANK VOTE", "VOID", "SCATTERING", "OVER VOTES", "UNDER VOTES"}


def raw_rows() -> list[dict]:
    with ARCHIVE.open(newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def raw_contests() -> dict[tuple, list[dict]]:
    """The general-stage contests of the file, read with the csv module alone: (year, state,
    district, special, runoff) -> candidate rows (non-candidate lines and the excluded
    delegate left out, as the mapping says)."""
    out = defaultdict(list)
    for r in raw_rows():
        if r["stage"] != "GEN" or r["state_po"] == "XD" or r["candidate"] in NOT_CANDIDATES:
            continue
        district = "AL" if r["district"] == "0" else r["district"]
        key = (int(r["year"]), r["state_po"], district, int(r["special"] == "TRUE"), int(r["runoff"] == "TRUE"))
        out[key].append(r)
    return dict(out)


def clean(rows: list[dict]) -> bool:
    """One TOTAL line per candidate, real counts, both major parties, no fusion or write-in."""
    names = [r["candidate"] for r in rows]
    return (len(names) == len(set(names)) and all(r["mode"] == "TOTAL" and int(r["candidatevotes"]) > 1
                                                   and r["writein"] == "FALSE" and r["fusion_ticket"] == "FALSE"
                                                   for r in rows)
            and {MAJOR.get(r["party"]) for r in rows} >= {"a", "b"})


@pytest.fixture
def archive(lf):
    assert ARCHIVE.stat().st_size < 20_000
    mapping = lf.write("archive.toml", archive_mapping())
    result = lf("load", ARCHIVE, "--mapping", mapping)  # one attempt, the file as it is
    return lf, result.stdout


def test_the_archive_loads_in_one_attempt_and_the_report_says_what_it_did(archive):
    lf, out = archive
    assert "constituency_archive.csv: loaded (load #1)" in out
    # 105 rows: 10 filtered (4 primary rows, 6 of the delegate), 5 not candidates, 90 accepted
    assert "format mapped; rows read 105, accepted 90, rejected 0, filtered out 10, not candidates 5" in out
    assert "units: 12 new, 0 corrected, 0 unchanged" in out
    # OV 2018's three WRITEIN lines (2 added), BQ 2020's three modes of three candidates (6 added)
    assert "repeated lines combined: 8 line(s)" in out
    assert ("not candidates, kept out of the vote totals: 'BLANK VOTE' (1), 'OVER VOTES' (1), 'SCATTERING' (1), "
            "'UNDER VOTES' (1), 'VOID' (1)") in out
    assert "placeholder counts: 3 contest(s) loaded as uncontested wins" in out
    for where in ("district '2', TM federal 2016: Esme Hart (MERIDIAN) unopposed, placeholder count '-1'",
                  "district '3', TM federal 2018: Floy Amsel (HEARTHSIDE) unopposed, placeholder count '1'",
                  "district '1', TM federal 2020: Cato Rell (HEARTHSIDE) unopposed, placeholder count '0'"):
        assert where in out
    assert "contests that do not decide their seat: 3" in out
    for where in ("district '3' (special), OV federal 2020: the general contest decides this seat",
                  "district '2', QN federal 2020: the runoff contest decides this seat",
                  "district '3', QN federal 2020: the runoff contest decides this seat"):
        assert where in out
    # counted per line as delivered: LANTERN's six lines include BQ 2020's three modes
    assert "party labels counted as 'other': 'LANTERN' (6), (no party) (3), 'SALTMARSH' (2)" in out
    assert lf.rows("SELECT cycle, certification FROM units WHERE state = 'TM' ORDER BY cycle") == [
        (2016, "certified"), (2018, "unofficial"), (2020, "certified")]
    assert lf.rows("SELECT MIN(votes) FROM votes") == [(0,)]


def test_no_contest_is_lost_without_a_line_in_the_report(archive):
    lf, out = archive
    raw = raw_contests()
    stored = {(c, s, d, sp, ro): (decides, left_out) for c, s, d, sp, ro, decides, left_out in lf.rows(
        "SELECT cycle, state, district, special, runoff, decides, left_out FROM current_contests")}
    assert set(stored) == set(raw)  # every contest of the file is stored, history included
    seats = defaultdict(list)
    for (cycle, state, district, special, runoff), (decides, left_out) in stored.items():
        seats[(cycle, state, district)].append(decides)
        if not decides:  # left out of the measures: named in the report with its reason
            kind = " ".join(k for k, on in (("special", special), ("runoff", runoff)) if on)
            name = f"district '{district}'" + (f" ({kind})" if kind else "") + f", {state} federal {cycle}: "
            assert name + left_out in out
    assert all(flags.count(1) == 1 for flags in seats.values())  # every seat decided exactly once
    assert len(seats) == 35  # OV 4 x 3 cycles, KR 4 x 2, TM 3 x 3, BQ 1 x 3, QN 3
    # and every seat enters the measures of its unit
    entered = {(cycle, state, d) for (cycle, state, _), rows in measured(lf).items() for d, *_ in rows}
    assert entered == set(seats)


def test_the_clean_contests_store_the_shares_a_hand_computation_gives(archive):
    lf, _ = archive
    exported = {}
    for r in lf.export_rows():
        if r["decides"] == "1":
            exported[(int(r["cycle"]), r["state"], r["district"], int(r["special"]))] = r
    checked = 0
    for (cycle, state, district, special, runoff), rows in raw_contests().items():
        if not clean(rows) or (cycle, state, district) == (2020, "OV", "3") or (state == "QN" and district != "1"):
            continue  # quirks are checked elsewhere; here only the plain contests that decide
        a = sum(int(r["candidatevotes"]) for r in rows if MAJOR.get(r["party"]) == "a")
        b = sum(int(r["candidatevotes"]) for r in rows if MAJOR.get(r["party"]) == "b")
        got = exported[(cycle, state, district, special)]
        assert (int(got["votes_a"]), int(got["votes_b"])) == (a, b)
        assert float(got["share_a"]) == pytest.approx(a / (a + b), rel=1e-12, abs=0)
        checked += 1
    assert checked == 26  # of 35 seats: 9 have a quirk (fusion, write-ins, modes, placeholders, specials, runoffs)
    # a few by hand: OV 2016 district 1, 61,234 / (61,234 + 48,000); KR 2018 district 3 (a special
    # that replaced the general), 30,300 / 61,200; QN 2020 district 2, the runoff 33,800 / 65,700
    assert float(exported[(2016, "OV", "1", 0)]["share_a"]) == pytest.approx(61234 / 109234, rel=1e-12)
    assert float(exported[(2018, "KR", "3", 1)]["share_a"]) == pytest.approx(30300 / 61200, rel=1e-12)
    assert float(exported[(2020, "QN", "2", 0)]["share_a"]) == pytest.approx(33800 / 65700, rel=1e-12)
    # the quirky ones: fusion (30,000 + 4,500 for a), write-ins summed as one other line, modes summed
    assert (exported[(2016, "OV", "4", 0)]["votes_a"], exported[(2016, "OV", "4", 0)]["votes_b"]) == ("34500", "31000")
    assert (exported[(2018, "OV", "2", 0)]["votes_a"], exported[(2018, "OV", "2", 0)]["votes_b"]) == ("39900", "41000")
    assert (exported[(2020, "BQ", "AL", 0)]["votes_a"], exported[(2020, "BQ", "AL", 0)]["votes_b"]) == ("104700", "104800")


def test_the_archive_goes_through_compute(archive):
    lf, _ = archive
    out = lf("compute").stdout
    assert "measures" in out
    # every unit has its measures; KR 2018 counts its four districts (two of them specials)
    assert lf.rows("SELECT COUNT(DISTINCT cycle || state) FROM measures") == [(12,)]
    assert lf.rows("SELECT value FROM measures WHERE cycle = 2018 AND state = 'KR' AND measure = 'districts'") \
        in ([(4.0,)], [(4,)])


def test_a_placeholder_count_is_visible_on_its_state_page(archive):
    """Issue 13, item 3: a contest whose count was a placeholder (unopposed, not on the ballot)
    says so in the state page's district results (TM federal 2020, district 1: a lone 0)."""
    lf, _ = archive
    lf("compute")
    lf("flags")
    lf("publish")
    public = lf.root / "public"
    pages = [public / "state" / "tm" / "federal.html"]
    text = " ".join(re.sub(r"<[^>]+>", " ", p.read_text(encoding="utf-8")) for p in pages)
    assert "placeholder count: unopposed, not on the ballot" in text
    # the other districts of that cycle are not marked
    assert text.count("placeholder count") == 1
