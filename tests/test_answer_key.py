"""The flags find what the sample history's answer key says was built into it.

Reads sample_history/answer_key.csv (keeps no copy of the answers). Columns used: state,
chamber, plan_id, expected (the intent: favours_a | favours_b | neutral), watch (what the watch
list must show for the plan: a, b or empty = not on watch), break_cycle (a cycle where a wave
breaks the plan's flag).
"""

from __future__ import annotations

import csv

import pandas as pd
import pytest

from monitor.flags import flag_table
from tests.conftest import SAMPLE


def answer_key() -> list[dict]:
    with (SAMPLE / "answer_key.csv").open(encoding="utf-8", newline="") as fh:
        return list(csv.DictReader(fh))


@pytest.fixture(scope="module")
def watch(sample_workspace):
    db = sample_workspace.open_store()
    return {(r.state, r.chamber, r.plan_id): r.favours for r in flag_table(db, "watch").itertuples()}


def test_the_answer_key_covers_every_kind_of_situation():
    key = answer_key()
    expected = {r["expected"] for r in key}
    assert expected == {"favours_a", "favours_b", "neutral"}
    assert sum(r["expected"] == "favours_a" for r in key) >= 3
    assert sum(r["expected"] == "favours_b" for r in key) >= 3
    assert any(r["break_cycle"] for r in key)


@pytest.mark.parametrize("row", answer_key(), ids=lambda r: r["plan_id"])
def test_each_answer_key_plan_is_on_watch_exactly_as_the_key_says(watch, row):
    got = watch.get((row["state"], row["chamber"], row["plan_id"]))
    assert (got or "") == row["watch"], (row["note"], got)


def test_every_engineered_gerrymander_is_on_watch_in_its_direction(watch):
    for row in answer_key():
        if row["expected"] in ("favours_a", "favours_b"):
            assert watch.get((row["state"], row["chamber"], row["plan_id"])) == row["expected"][-1], row


def test_no_commission_plan_is_on_watch(watch, sample_workspace):
    db = sample_workspace.open_store()
    commissions = pd.read_sql_query("SELECT state, chamber, plan_id FROM plans WHERE drawn_by = 'commission'", db.conn)
    assert len(commissions) >= 5
    on = [tuple(r) for r in commissions.itertuples(index=False) if tuple(r) in watch]
    assert on == []


def test_every_plan_on_watch_is_explained_by_the_answer_key(watch):
    keyed = {(r["state"], r["chamber"], r["plan_id"]) for r in answer_key()}
    assert sorted(set(watch) - keyed) == []


def test_the_wave_breaks_the_thin_gerrymander_for_that_cycle(sample_workspace):
    db = sample_workspace.open_store()
    for row in answer_key():
        if not row["break_cycle"]:
            continue
        direction = row["expected"][-1]
        flagged = pd.read_sql_query(
            "SELECT cycle, COUNT(*) AS n FROM tails WHERE state = ? AND chamber = ? AND plan_id = ? "
            "AND flagged = 1 AND direction = ? GROUP BY cycle", db.conn,
            params=[row["state"], row["chamber"], row["plan_id"], direction]).set_index("cycle")["n"]
        broken = int(row["break_cycle"])
        assert flagged.get(broken, 0) < 2, (row["plan_id"], flagged.to_dict())
        assert (flagged.drop(broken, errors="ignore") >= 2).sum() >= 2, (row["plan_id"], flagged.to_dict())


def test_the_court_remedy_clears_the_earlier_watch(watch):
    key = answer_key()
    court = [r for r in key if "court" in r["note"].lower() and r["expected"] == "neutral"]
    assert court, "the answer key names the court's remedial plan"
    for remedy in court:
        earlier = [r for r in key if r["state"] == remedy["state"] and r["chamber"] == remedy["chamber"]
                   and r["expected"] != "neutral" and r["plan_id"] < remedy["plan_id"]]
        assert earlier
        assert watch.get((earlier[-1]["state"], earlier[-1]["chamber"], earlier[-1]["plan_id"])) == earlier[-1]["expected"][-1]
        assert (remedy["state"], remedy["chamber"], remedy["plan_id"]) not in watch
