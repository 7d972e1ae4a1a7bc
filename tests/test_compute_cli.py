"""`levelfield compute`, `export measures` and `levelfield flags` through the command line, on
small invented workspaces (parties Harbour = a, Upland = b from tests/conftest.py).

These are contract tests of the commands (what they recompute, report and print); the measures
themselves are checked against outside references in tests/measures.
"""

from __future__ import annotations

import csv
import io
import json
import re

import pytest
from click.testing import CliRunner

from conftest import CONFIG, long_csv
from monitor.cli import main
from monitor.measures import MEASURE_NAMES, MEASURE_VERSIONS
from monitor.workspace import ENV_VAR, Workspace

SETTINGS = "[pool]\ndraws = 300\n[measures]\ninterval_draws = 10\n"
EXPORT_COLUMNS = ["cycle", "state", "chamber", "measure", "value", "low", "high", "p_value", "method_version",
                  "policy"]
# added after the fixed columns (issue 13): why a value is undefined, then the unit's coverage and shares
ADDED_COLUMNS = ["reason", "districts_in_measures", "districts_expected", "seats_in_measures", "seats_expected",
                 "seat_coverage", "incomplete", "expected_from", "missing_or_left_out", "vote_share_as_cast",
                 "vote_share_after_policy", "national_vote_share_as_cast", "national_vote_share_after_policy",
                 # then (issue 16) staggered chambers and the multi-member treatment
                 "partial", "combines", "districts_treated", "seats_treated"]
WATCH_LEADING = ["state", "chamber", "plan_id", "favours", "severity", "cycles", "measures"]


def unit_rows(cycle, state, shares, chamber="federal"):
    rows = []
    for d, x in enumerate(shares, 1):
        rows.append([cycle, state, chamber, str(d), "Harbour", f"H{state}{d}", int(round(1000 * x))])
        rows.append([cycle, state, chamber, str(d), "Upland", f"U{state}{d}", int(round(1000 * (1 - x)))])
    return rows


SHARES = {"QE": [0.38, 0.47, 0.55, 0.63], "QF": [0.42, 0.51, 0.58, 0.66], "QG": [0.35, 0.49, 0.52, 0.6]}


def small_history() -> str:
    """Three states of four districts in 2012 and 2014: six units."""
    return long_csv([r for cycle in (2012, 2014) for s, x in SHARES.items() for r in unit_rows(cycle, s, x)])


def report_counts(stdout: str) -> tuple[int, int, int]:
    m = re.search(r"measures: (\d+) unit\(s\) computed, (\d+) unchanged \(of (\d+)\)", stdout)
    assert m, stdout
    return tuple(int(g) for g in m.groups())


# -- compute ------------------------------------------------------------------------------------

def test_compute_recomputes_only_changed_units_and_says_so(lf):
    lf.configure(SETTINGS)
    lf("load", lf.write("history.csv", small_history()))
    first = lf("compute").stdout
    assert report_counts(first) == (6, 0, 6)
    assert "national pool: 2 of 2 cycle/chamber group(s) recomputed" in first
    again = lf("compute").stdout
    assert report_counts(again) == (0, 6, 6)
    assert "0 rows written" in again
    assert "national pool: 0 of 2 cycle/chamber group(s) recomputed" in again
    before = dict(lf.rows("SELECT state || cycle, value FROM measures WHERE measure = 'mean_median'"))
    # a correction of one unit (QF 2014): only that unit's measures and its cycle's pool are redone
    lf("load", lf.write("fix.csv", long_csv(unit_rows(2014, "QF", [0.30, 0.51, 0.58, 0.66]))))
    fixed = lf("compute").stdout
    assert report_counts(fixed) == (1, 5, 6)
    assert f"{len(MEASURE_NAMES)} rows written" in fixed
    assert "national pool: 1 of 2 cycle/chamber group(s) recomputed" in fixed
    after = dict(lf.rows("SELECT state || cycle, value FROM measures WHERE measure = 'mean_median'"))
    assert after["QF2014"] != before["QF2014"]
    assert {k: v for k, v in after.items() if k != "QF2014"} == {k: v for k, v in before.items() if k != "QF2014"}


def test_compute_full_recomputes_every_unit(lf):
    lf.configure(SETTINGS)
    lf("load", lf.write("history.csv", small_history()))
    lf("compute")
    full = lf("compute", "--full").stdout
    assert report_counts(full) == (6, 0, 6)
    assert f"{6 * len(MEASURE_NAMES)} rows written" in full
    assert "national pool: 2 of 2 cycle/chamber group(s) recomputed" in full


def test_a_method_version_bump_recomputes_that_measures_units(lf, monkeypatch):
    lf.configure(SETTINGS)
    lf("load", lf.write("history.csv", small_history()))
    lf("compute")
    assert lf.rows("SELECT DISTINCT method_version FROM measures WHERE measure = 'declination'") == [("1",)]
    monkeypatch.setitem(MEASURE_VERSIONS, "declination", "1-test")
    bumped = lf("compute").stdout
    assert report_counts(bumped) == (6, 0, 6)
    assert lf.rows("SELECT DISTINCT method_version FROM measures WHERE measure = 'declination'") == [("1-test",)]
    assert report_counts(lf("compute").stdout) == (0, 6, 6)


def test_export_measures_keeps_the_contract_columns_first_in_order_then_the_added_ones(lf):
    lf.configure(SETTINGS)
    lf("load", lf.write("history.csv", small_history()))
    lf("compute")
    text = lf("export", "measures").stdout
    reader = csv.reader(io.StringIO(text))
    assert next(reader) == EXPORT_COLUMNS + ADDED_COLUMNS
    assert len(list(reader)) == 6 * len(MEASURE_NAMES)
    records = json.loads(lf("export", "measures", "--format", "json").stdout)
    assert len(records) == 6 * len(MEASURE_NAMES)
    assert all(list(r) == EXPORT_COLUMNS + ADDED_COLUMNS for r in records)
    # every unit here has its four districts in the measures, none expected from a plan yet in 2012
    assert {(r["cycle"], r["districts_in_measures"], r["incomplete"], r["seat_coverage"]) for r in records} == {
        (2012, 4, "no", 1.0), (2014, 4, "no", 1.0)}
    assert {r["districts_expected"] for r in records if r["cycle"] == 2014} == {4}  # from 2012, same plan
    assert {r["reason"] for r in records if r["measure"] == "efficiency_gap"} == {None}
    assert {r["policy"] for r in records} == {"impute:0.75"}
    out = lf.files / "measures.csv"
    lf("export", "measures", "--out", out)
    assert out.read_text(encoding="utf-8") == text


# -- flags --------------------------------------------------------------------------------------

#: QY: a wins five districts narrowly, loses one badly; QX: 30-70% spread. Against each other's
#: districts both are in the tails (QY favouring a, QX b) in 2012 and 2014: both plans on watch.
QY = [0.53] * 5 + [0.35]
QX = [0.30, 0.40, 0.45, 0.55, 0.60, 0.70]


@pytest.fixture(scope="module")
def flagged(tmp_path_factory):
    """A workspace with flags, a watch list and a flag history (two loads), built via the CLI."""
    root = tmp_path_factory.mktemp("flags") / "ws"
    runner = CliRunner(env={ENV_VAR: None})

    def run(*args, code=0):
        result = runner.invoke(main, ["--workspace", str(root), *map(str, args)])
        assert "Traceback" not in result.output and "internal error" not in result.output, result.output
        assert result.exit_code == code, result.output
        return result

    Workspace(root).ensure()
    (root / "levelfield.toml").write_text(CONFIG + "\n" + SETTINGS, encoding="utf-8")
    rows = [r for c in (2012, 2014) for r in unit_rows(c, "QY", QY) + unit_rows(c, "QX", QX)]
    rows += unit_rows(2012, "QY", [0.4, 0.6, 0.45, 0.55, 0.52, 0.48], chamber="state_lower")
    files = root.parent / "files"
    files.mkdir()
    (files / "first.csv").write_text(long_csv(rows), encoding="utf-8")
    run("load", files / "first.csv")
    run("compute")
    # a correction of QX in both cycles (load #2) moves QY's null: flags clear, plans leave watch
    fix = [r for c in (2012, 2014) for r in unit_rows(c, "QX", [0.55] * 5 + [0.25])]
    (files / "fix.csv").write_text(long_csv(fix), encoding="utf-8")
    run("load", files / "fix.csv")
    run("compute")
    (files / "undo.csv").write_text(long_csv([r for c in (2012, 2014) for r in unit_rows(c, "QX", QX)]),
                                    encoding="utf-8")
    run("load", files / "undo.csv")
    run("compute")
    return run


def parse_csv(text):
    return list(csv.DictReader(io.StringIO(text)))


def test_flags_default_table_csv_and_json(flagged):
    table = flagged("flags").stdout
    assert table.splitlines()[0].split()[:5] == ["cycle", "state", "chamber", "plan_id", "inferred"]
    rows = parse_csv(flagged("flags", "--format", "csv").stdout)
    assert rows and {r["state"] for r in rows} == {"QX", "QY"}
    assert {r["inferred"] for r in rows} == {"1"}  # no plans file: every plan is inferred and says so
    assert {r["cycle"] for r in rows} == {"2012", "2014"}
    records = json.loads(flagged("flags", "--format", "json").stdout)
    assert len(records) == len(rows) and all(isinstance(r["cycle"], int) for r in records)
    assert all(r["inferred"] == 1 for r in records)


def test_flags_cycle_and_chamber_filters(flagged):
    only = parse_csv(flagged("flags", "--cycle", "2014", "--format", "csv").stdout)
    assert only and {r["cycle"] for r in only} == {"2014"}
    assert parse_csv(flagged("flags", "--chamber", "state_lower", "--format", "csv").stdout) == []
    assert flagged("flags", "--chamber", "state_lower").stdout == "(none)\n"
    watch = parse_csv(flagged("flags", "--watch", "--chamber", "federal", "--format", "csv").stdout)
    assert {r["chamber"] for r in watch} == {"federal"}
    assert parse_csv(flagged("flags", "--watch", "--cycle", "1990", "--format", "csv").stdout) == []
    changes = parse_csv(flagged("flags", "--changes", "--cycle", "2012", "--format", "csv").stdout)
    assert changes and {r["cycle"] for r in changes} == {"2012"}


def test_flags_watch_csv_keeps_its_leading_columns(flagged):
    text = flagged("flags", "--watch", "--format", "csv").stdout
    header = text.splitlines()[0].split(",")
    assert header[:7] == WATCH_LEADING  # a fixed contract: other tools read these columns
    rows = parse_csv(text)
    assert {(r["state"], r["favours"]) for r in rows} == {("QY", "a"), ("QX", "b")}
    assert {r["inferred"] for r in rows} == {"1"}
    assert all(r["cycles"] == "2012 2014" for r in rows)
    records = json.loads(flagged("flags", "--watch", "--format", "json").stdout)
    assert [list(r)[:7] for r in records] == [WATCH_LEADING] * len(records)
    assert "favours" in flagged("flags", "--watch").stdout


def test_flags_changes_cycles_are_integers_and_plans_marked(flagged):
    text = flagged("flags", "--changes", "--format", "csv").stdout
    assert ".0," not in text
    rows = parse_csv(text)
    assert {r["cycle"] for r in rows if r["scope"] == "unit"} == {"2012", "2014"}
    assert {r["cycle"] for r in rows if r["scope"] == "plan"} == {""}
    assert {r["inferred"] for r in rows} == {"1"}
    assert {r["load_id"] for r in rows} == {"1", "2", "3"}
    records = json.loads(flagged("flags", "--changes", "--format", "json").stdout)
    assert {type(r["cycle"]) for r in records} == {int, type(None)}
    assert all(isinstance(r["load_id"], int) for r in records)
    assert "inferred" in flagged("flags", "--changes").stdout.splitlines()[0]


def test_flags_changes_write_seats_as_seats(flagged):
    rows = parse_csv(flagged("flags", "--changes", "--format", "csv").stdout)
    seats = [r["why"] for r in rows if r["measure"] == "seats"]
    assert seats and all(re.search(r"seats won by a \d+(\.5)? ", why) for why in seats), seats
    plans = [r["why"] for r in rows if r["scope"] == "plan" and r["event"] == "on watch"]
    assert plans and all(re.search(r"seats at stake [+-]\d+\.\d \(positive favours a\)", w) for w in plans), plans
    for why in (r["why"] for r in rows):
        assert not re.search(r"seats [+-]\d+\.\d{3}", why), why


def test_flags_watch_and_changes_together_is_a_usage_error(flagged):
    result = flagged("flags", "--watch", "--changes", code=2)
    assert "--watch and --changes" in result.output and "not both" in result.output


def test_compute_and_flags_run_when_no_line_is_party_a_or_b(lf):
    # labels the config does not know (a first load before [parties] is set up): every line is
    # 'other', no unit has two-party votes, and compute must say so rather than fail
    lf.configure(SETTINGS)
    lf("load", lf.write("other.csv", long_csv([[2022, "QV", "federal", "1", "Foo", "X", 10],
                                                [2022, "QV", "federal", "2", "Bar", "Y", 10]])))
    out = lf("compute")
    assert "0 plan(s) on watch" in out.output
    assert lf("flags", "--watch", "--format", "csv").output.splitlines()[0].split(",")[:7] == WATCH_LEADING
