"""The flags find what the sample history's answer key says was built into it.

Reads sample_history/answer_key.csv (keeps no copy of the answers). Columns used: state,
chamber, plan_id, expected (the intent the generator built in: favours_a | favours_b | neutral),
measured (what the measures should show where that differs from the intent), break_cycle (a cycle
where a wave breaks the plan's flag). The key's ``watch`` column is not used: it was recorded from
levelfield's own watch list, so checking the watch list against it could not fail. What a plan's
watch entry must be comes from the intent instead, and for the plans whose measured asymmetry
differs from the intent (the clustered-city plans) from the district results themselves, read
here without levelfield (the sign of the median minus the mean district share, and Welch's
t-test of the winners' shares with ``scipy.stats.ttest_ind``; see :func:`raw_direction`).
"""

from __future__ import annotations

import csv
import statistics

import pandas as pd
import pytest
from scipy import stats

from monitor.flags import flag_table
from monitor.staggered import base_chamber, is_whole
from tests.conftest import SAMPLE


def answer_key() -> list[dict]:
    with (SAMPLE / "answer_key.csv").open(encoding="utf-8", newline="") as fh:
        return list(csv.DictReader(fh))


@pytest.fixture(scope="module")
def watch_rows(sample_workspace):
    db = sample_workspace.open_store()
    return flag_table(db, "watch")


@pytest.fixture(scope="module")
def watch(watch_rows):
    """The watch list keyed by the chamber as loaded: a staggered senate is judged as a whole
    chamber (``state_upper_whole``) and keyed here, as in the answer key, by ``state_upper``."""
    return {(r.state, base_chamber(r.chamber), r.plan_id): r.favours for r in watch_rows.itertuples()}


def test_a_staggered_senate_is_on_watch_only_as_a_whole_chamber(watch_rows, sample_workspace):
    """The per-cycle units of the staggered senates (half the seats each) are never flagged; the
    senates' watch entries come from their whole-chamber units."""
    senates = watch_rows[watch_rows["chamber"].map(base_chamber) == "state_upper"]
    assert len(senates) >= 2 and senates["chamber"].map(is_whole).all()
    db = sample_workspace.open_store()
    halves = pd.read_sql_query("SELECT flagged, reason FROM tails WHERE chamber = 'state_upper'", db.conn)
    assert len(halves) > 0 and (halves["flagged"] == 0).all()
    assert halves["reason"].str.startswith("partial: one class of a staggered chamber").mean() > 0.9


def test_the_answer_key_covers_every_kind_of_situation():
    key = answer_key()
    expected = {r["expected"] for r in key}
    assert expected == {"favours_a", "favours_b", "neutral"}
    assert sum(r["expected"] == "favours_a" for r in key) >= 3
    assert sum(r["expected"] == "favours_b" for r in key) >= 3
    assert any(r["break_cycle"] for r in key)


def raw_two_party_shares(state: str, chamber: str, cycle: int) -> list[tuple[float, bool]]:
    """Party a's two-party share of every contested district of one unit, and whether a won it,
    straight from the sample history's results file (plain csv; the labels of its levelfield.toml:
    "Harbour Party" and its fusion line "Hearth Alliance" for a, "Upland Party" for b)."""
    votes: dict[str, dict[str, int]] = {}
    with (SAMPLE / "results" / f"{cycle}.csv").open(encoding="utf-8", newline="") as fh:
        for r in csv.DictReader(fh):
            if r["state"] == state and r["chamber"] == chamber and r.get("special", "0") in ("", "0"):
                side = {"Harbour Party": "a", "Hearth Alliance": "a", "Upland Party": "b"}.get(r["party"])
                if side:
                    d = votes.setdefault(r["district"], {"a": 0, "b": 0})
                    d[side] += int(r["votes"])
    return [(d["a"] / (d["a"] + d["b"]), d["a"] > d["b"]) for d in votes.values() if d["a"] and d["b"]]


def raw_direction(state: str, chamber: str, cycles) -> str | None:
    """The party the district results of ``cycles`` favour, when two reads of them agree: the median
    minus the mean of a's district shares (McDonald & Best 2015, ELJ 14; negative: a's median
    district is weaker than its average one, a's voters are packed) has one sign in every cycle, and
    Welch's t-test of the winners' shares pooled over the cycles (a's where a won against b's where b
    won; Wang 2016; ``scipy.stats.ttest_ind``) has the matching sign. None otherwise."""
    signs, wins_a, wins_b = set(), [], []
    for cycle in cycles:
        shares = raw_two_party_shares(state, chamber, cycle)
        xs = [x for x, _ in shares]
        signs.add(statistics.median(xs) > statistics.fmean(xs))
        wins_a += [x for x, won in shares if won]
        wins_b += [1 - x for x, won in shares if not won]
    if len(signs) != 1 or len(wins_a) < 2 or len(wins_b) < 2:
        return None
    by_median = "a" if signs == {True} else "b"
    t, _ = stats.ttest_ind(wins_a, wins_b, equal_var=False)
    by_wins = "b" if t > 0 else "a"
    return by_median if by_median == by_wins else None


def plan_cycles(row) -> list[int]:
    with (SAMPLE / "plans.csv").open(encoding="utf-8", newline="") as fh:
        plan = next(p for p in csv.DictReader(fh) if p["plan_id"] == row["plan_id"])
    cycles = sorted(int(p.stem) for p in (SAMPLE / "results").glob("*.csv"))
    return [c for c in cycles if int(plan["first_cycle"]) <= c <= int(plan["last_cycle"] or 9999)]


@pytest.mark.parametrize("row", answer_key(), ids=lambda r: r["plan_id"])
def test_each_answer_key_plan_is_on_watch_as_its_design_says(watch, row):
    got = watch.get((row["state"], row["chamber"], row["plan_id"]))
    if row["expected"] in ("favours_a", "favours_b"):
        assert got == row["expected"][-1], (row["note"], got)  # an engineered gerrymander, its direction
    elif not row["measured"]:
        assert got is None, (row["note"], got)  # neutral by design and by measure: never on watch
    else:
        # neutral by intent, asymmetric by geography: on watch or not, never against what the
        # district results themselves show
        assert got in (None, row["measured"][-1]), (row["note"], got)


def test_the_clustered_city_plans_are_packed_in_the_district_results_themselves(watch):
    """Where the key says the measures differ from the intent, the raw results agree with the key:
    for the clustered-city plans, Harbour's (a's) wins are the lopsided ones, which favours Upland
    (b); and those plans are on watch for Upland (the sample history's point: a measure of outcomes
    cannot tell intent from geography)."""
    clustered = [r for r in answer_key() if r["measured"] and "concentrated in the cities" in r["note"]]
    assert len(clustered) >= 5
    for row in clustered:
        assert raw_direction(row["state"], row["chamber"], plan_cycles(row)) == row["measured"][-1], row["plan_id"]
    on_watch = [r for r in clustered if watch.get((r["state"], r["chamber"], r["plan_id"])) == r["measured"][-1]]
    assert len(on_watch) >= len(clustered) - 1


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
