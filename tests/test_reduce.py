"""The two-party reduction on hand-built contests, and the uncontested policies.

The contests are invented and small enough to check by hand; the expected numbers follow from
the rules in monitor/reduce.py, not from an outside source.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from monitor.reduce import reduce_contests, two_party_inputs


def reduce(lines: list[tuple], seats: dict[int, int] | None = None) -> pd.DataFrame:
    """lines: (contest_id, party_code, candidate, votes). Returns the reduction indexed by contest."""
    votes = pd.DataFrame(lines, columns=["contest_id", "party_code", "candidate", "votes"])
    ids = list(dict.fromkeys(votes["contest_id"]))
    seats = seats or {}
    contests = pd.DataFrame({"contest_id": ids, "seats": [seats.get(i, 1) for i in ids]})
    return reduce_contests(votes, contests).set_index("contest_id")


def row(reduced: pd.DataFrame, cid: int) -> dict:
    keys = ["votes_a", "votes_b", "votes_other", "total", "seats_a", "seats_b", "seats_other", "status", "winner"]
    r = reduced.loc[cid]
    return {k: (r[k].item() if hasattr(r[k], "item") else r[k]) for k in keys}


def test_contested():
    r = reduce([(1, "a", "Ann", 60), (1, "b", "Bob", 40), (1, "other", "Cai", 5)])
    assert row(r, 1) == dict(votes_a=60, votes_b=40, votes_other=5, total=105, seats_a=1.0, seats_b=0.0,
                             seats_other=0.0, status="contested", winner="a")


def test_uncontested_one_major_party_absent():
    r = reduce([(1, "b", "Bob", 70)])
    assert row(r, 1) == dict(votes_a=0, votes_b=70, votes_other=0, total=70, seats_a=0.0, seats_b=1.0,
                             seats_other=0.0, status="uncontested", winner="b")
    # a minor-party opponent does not make the two-party contest contested
    r = reduce([(2, "a", "Ann", 70), (2, "other", "Cai", 30)])
    assert (r.loc[2, "status"], r.loc[2, "winner"]) == ("uncontested", "a")


def test_same_party_general():
    r = reduce([(1, "a", "Ann", 55), (1, "a", "Abe", 45)])
    assert row(r, 1) == dict(votes_a=100, votes_b=0, votes_other=0, total=100, seats_a=1.0, seats_b=0.0,
                             seats_other=0.0, status="same_party", winner="a")


def test_no_major_party():
    r = reduce([(1, "other", "Cai", 30), (1, "other", "Dov", 20)])
    assert row(r, 1) == dict(votes_a=0, votes_b=0, votes_other=50, total=50, seats_a=0.0, seats_b=0.0,
                             seats_other=1.0, status="no_major", winner="other")


def test_fusion_lines_are_summed_for_the_candidates_major_party():
    # Hal: 40 on a's line + 15 on a minor line = 55 for a, beating Ivy's 50
    r = reduce([(1, "a", "Hal Orm", 40), (1, "other", "Hal Orm", 15), (1, "b", "Ivy Pax", 50)])
    assert row(r, 1) == dict(votes_a=55, votes_b=50, votes_other=0, total=105, seats_a=1.0, seats_b=0.0,
                             seats_other=0.0, status="contested", winner="a")
    # names match whatever the case; a candidate on both major lines counts for the larger line
    r = reduce([(2, "a", "Jo Rand", 10), (2, "b", "JO RAND", 30), (2, "other", "Kit Lo", 35)])
    assert row(r, 2)["votes_b"] == 40 and row(r, 2)["votes_a"] == 0
    assert (row(r, 2)["winner"], row(r, 2)["status"]) == ("b", "uncontested")


def test_unnamed_lines_are_never_merged():
    r = reduce([(1, "a", "", 30), (1, "other", "", 40), (1, "b", "", 20)])
    assert row(r, 1)["votes_a"] == 30 and row(r, 1)["votes_other"] == 40 and row(r, 1)["winner"] == "other"


def test_exact_tie_splits_the_seat_in_halves():
    r = reduce([(1, "a", "Ann", 500), (1, "b", "Bob", 500)])
    assert (r.loc[1, "seats_a"], r.loc[1, "seats_b"], r.loc[1, "winner"]) == (0.5, 0.5, "split")


def test_multi_member_district_top_k_winners():
    lines = [(1, "a", "L1", 300), (1, "b", "M1", 250), (1, "a", "L2", 200), (1, "b", "M2", 100), (1, "other", "O1", 150)]
    r = reduce(lines, seats={1: 3})
    assert (r.loc[1, "seats_a"], r.loc[1, "seats_b"], r.loc[1, "seats_other"]) == (2.0, 1.0, 0.0)
    assert r.loc[1, "winner"] == "split" and r.loc[1, "seats"] == 3
    # a tie at the last winning place shares the seat that is left
    r = reduce([(2, "a", "L1", 300), (2, "b", "M1", 200), (2, "a", "L2", 200), (2, "b", "M2", 100)], seats={2: 2})
    assert (r.loc[2, "seats_a"], r.loc[2, "seats_b"]) == (1.5, 0.5)
    # fewer candidates than seats: each candidate wins one
    r = reduce([(3, "a", "L1", 10), (3, "b", "M1", 5)], seats={3: 4})
    assert (r.loc[3, "seats_a"], r.loc[3, "seats_b"]) == (1.0, 1.0)


def test_many_contests_at_once_do_not_leak_into_each_other():
    lines = [(7, "a", "Ann", 10), (3, "b", "Bob", 10), (3, "a", "Ann", 9), (5, "other", "Ann", 4)]
    r = reduce(lines)
    assert r.loc[7, "status"] == "uncontested" and r.loc[7, "winner"] == "a"
    assert r.loc[3, "status"] == "contested" and r.loc[3, "winner"] == "b"
    assert r.loc[5, "status"] == "no_major"


# the uncontested policy ---------------------------------------------------------------------

# Fixed-share imputation of uncontested seats (winner 0.75, loser 0.25) is the convention of the
# seats-votes literature, e.g. Gelman & King (1994), "A unified method of evaluating electoral
# systems and redistricting plans", American Journal of Political Science 38(2):514-554 (from
# memory, not checked against the text). The share is a setting; 0.75 is its default.
SHARE = 0.75

UNIT = [
    (1, "a", "Ann", 60), (1, "b", "Bob", 40),            # contested
    (2, "a", "Cy", 80), (2, "other", "Dee", 20),         # uncontested, a stood (100 votes)
    (3, "b", "Di", 30), (3, "b", "Ed", 10),              # same-party general for b (40 votes)
    (4, "other", "Fi", 10),                              # no major party: never a two-party input
    (5, "a", "Gil", 40), (5, "b", "Hana", 30),           # multi-member: never a two-party input
    (5, "a", "Ian", 20),
]


def inputs(policy: str, lines=UNIT, share=SHARE) -> dict[int, tuple[float, float, bool]]:
    two = two_party_inputs(reduce(lines, seats={5: 2}).reset_index(), policy, share)
    return {int(c): (a, b, bool(u)) for c, a, b, u in two[["contest_id", "votes_a", "votes_b", "uncontested"]].itertuples(index=False)}


def test_impute_gives_the_winner_share_of_the_contests_votes():
    assert inputs("impute") == {
        1: (60.0, 40.0, False),
        2: (75.0, 25.0, True),    # 0.75 / 0.25 of the contest's 100 votes
        3: (10.0, 30.0, True),    # b's same-party general: b gets 0.75 of 40
    }


def test_impute_uses_the_configured_share():
    assert inputs("impute", share=0.6)[2] == pytest.approx((60.0, 40.0, True))


def test_exclude_leaves_uncontested_contests_out():
    assert inputs("exclude") == {1: (60.0, 40.0, False)}


def test_none_keeps_the_raw_counts():
    assert inputs("none") == {1: (60.0, 40.0, False), 2: (80.0, 0.0, True), 3: (0.0, 40.0, True)}


def test_a_fully_contested_unit_gives_identical_inputs_under_every_policy():
    contested = [(1, "a", "Ann", 60), (1, "b", "Bob", 40), (2, "a", "Cy", 45), (2, "b", "Dee", 55),
                 (2, "other", "Eli", 3), (3, "a", "Fay", 50), (3, "b", "Gus", 50)]
    results = [inputs(policy, contested) for policy in ("impute", "exclude", "none")]
    assert results[0] == results[1] == results[2]
    assert len(results[0]) == 3 and not any(u for _, _, u in results[0].values())


def test_a_contest_won_by_an_independent_stays_out_of_the_measures():
    # a's only candidate polled 0 and an independent won: no two-party share may hand a (or b)
    # a seat neither won, under every policy
    lines = [(1, "a", "Ann", 0), (1, "other", "Ind", 20), (2, "a", "Cy", 30), (2, "b", "Dee", 10)]
    for policy in ("impute", "exclude", "none"):
        assert inputs(policy, lines) == {2: (30.0, 10.0, False)}


def test_an_unknown_policy_is_refused():
    with pytest.raises(ValueError, match="unknown uncontested policy"):
        inputs("halve")


# properties over random contests -------------------------------------------------------------

contest_lines = st.lists(
    st.tuples(st.integers(0, 4), st.sampled_from(["a", "b", "other"]), st.sampled_from(["", "P", "Q", "R", "S"]),
              st.integers(0, 1000)),
    min_size=1, max_size=25,
)


@settings(max_examples=30, deadline=None)
@given(contest_lines, st.integers(1, 3), st.randoms(use_true_random=False))
def test_seats_and_votes_add_up_and_order_does_not_matter(lines, seats, rnd):
    seats_by = {cid: seats for cid, *_ in lines}
    r = reduce(lines, seats_by)
    won = r[["seats_a", "seats_b", "seats_other"]].sum(axis=1)
    candidates = pd.DataFrame(lines, columns=["cid", "code", "name", "v"])
    distinct = candidates.assign(key=np.where(candidates["name"] == "", candidates.index.astype(str),
                                              candidates["name"])).groupby("cid")["key"].nunique()
    assert np.allclose(won, np.minimum(seats, distinct.reindex(r.index)))
    assert (r["votes_a"] + r["votes_b"] + r["votes_other"] == r["total"]).all()
    assert (r["total"] == candidates.groupby("cid")["v"].sum().reindex(r.index)).all()
    shuffled = lines[:]
    rnd.shuffle(shuffled)
    again = reduce(shuffled, seats_by).loc[r.index]
    cols = ["votes_a", "votes_b", "votes_other", "seats_a", "seats_b", "seats_other", "status"]
    assert again[cols].equals(r[cols])
