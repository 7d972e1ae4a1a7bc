"""Two-party reduction: from candidate lines to each contest's party-a and party-b votes.

Per contest (vectorised with pandas over every contest at once):

* fusion: a named candidate's lines are summed and attributed to the candidate's major party
  (the larger major line when a candidate carries both); unnamed lines count for their own party;
* ``votes_a``, ``votes_b``, ``votes_other`` and ``total``;
* winners: the ``seats`` candidates with most votes; candidates tied at the last winning place
  share the remaining seats equally (so a two-way tie gives each party half a seat);
* ``status``: ``contested`` (both major parties present), ``uncontested`` (one major party
  absent, one candidate of the other), ``same_party`` (only one major party, two or more of its
  candidates), ``no_major`` (neither major party).

Then :func:`two_party_inputs` applies the uncontested policy for the measures:
``impute`` gives the winner's party ``winner_share`` of the contest's votes (default 0.75, the
fixed-share convention of the seats-votes literature, e.g. Gelman & King 1994, AJPS 38:514-554;
from memory, not checked against the text), ``exclude`` leaves such contests out, ``none`` keeps
the raw counts (a 100-0 district). Imputation changes results: the policy is stored with every
measure.

A placeholder contest (an unopposed candidate who was not on the ballot, loaded with a
placeholder count instead of a count: ``contests.placeholder``) is an uncontested win with no
real vote total. For the vote-weighted measures it is given one explicitly: the mean vote total
of its unit's other contests that enter the measures with real counts (1 when the unit has none:
with every district alike, any common total weighs them the same). This is a project choice,
not a convention from the literature: a district that reported no count is weighed like the
unit's typical district. Under ``impute`` and ``none`` it then splits as any uncontested
contest; under ``exclude`` it is left out like them.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from monitor import multi_member as M
from monitor.eligibility import ENTERS, contest_reasons

STATUSES = ("contested", "uncontested", "same_party", "no_major")


def candidate_results(votes: pd.DataFrame, contests: pd.DataFrame) -> pd.DataFrame:
    """One row per candidate of each contest (fusion lines summed): contest_id, key (the
    candidate), votes, code (a | b | other), seats (of the contest) and won (1 for a seat, 0
    for none, a share for a tie at the last winning place), sorted by contest then votes
    (highest first). ``votes`` and ``contests`` as in :func:`reduce_contests`."""
    contests = contests.reset_index() if "contest_id" not in contests.columns else contests
    seats = contests.set_index("contest_id")["seats"].astype(np.int64)
    v = votes[["contest_id", "party_code", "candidate", "votes"]].copy()
    v["votes"] = v["votes"].astype(np.int64)
    name = v["candidate"].fillna("").astype(str).str.casefold()
    unnamed = name.eq("")
    name = name.where(~unnamed, "\x00line:" + v.index.astype(str))
    v["key"] = name.to_numpy()

    # fusion attribution: the candidate's code is their largest major line, else 'other'
    by_line = v.groupby(["contest_id", "key", "party_code"], sort=False)["votes"].sum().reset_index()
    major = by_line[by_line["party_code"].isin(["a", "b"])]
    major = major.sort_values(["contest_id", "key", "votes", "party_code"], ascending=[True, True, False, True])
    code = major.drop_duplicates(["contest_id", "key"]).set_index(["contest_id", "key"])["party_code"]
    cand = v.groupby(["contest_id", "key"], sort=False)["votes"].sum().to_frame("votes")
    cand["code"] = code.reindex(cand.index).fillna("other").to_numpy()
    cand = cand.reset_index()

    # seat shares: above the last winning place = 1, tied at it = share of what is left
    cand["seats"] = seats.reindex(cand["contest_id"]).to_numpy()
    cand = cand.sort_values(["contest_id", "votes"], ascending=[True, False], kind="mergesort")
    cand["place"] = cand.groupby("contest_id").cumcount() + 1
    last = cand[cand["place"] == cand["seats"]].set_index("contest_id")["votes"]
    threshold = last.reindex(cand["contest_id"]).to_numpy()
    threshold = np.where(np.isnan(threshold.astype(float)), -1, threshold)  # fewer candidates than seats
    above = cand["votes"].to_numpy() > threshold
    equal = cand["votes"].to_numpy() == threshold
    n_above = pd.Series(above).groupby(cand["contest_id"].to_numpy()).transform("sum").to_numpy()
    n_equal = pd.Series(equal).groupby(cand["contest_id"].to_numpy()).transform("sum").to_numpy()
    remaining = cand["seats"].to_numpy() - n_above
    cand["won"] = np.where(above, 1.0, np.where(equal, remaining / np.maximum(n_equal, 1), 0.0))
    return cand


def reduce_contests(votes: pd.DataFrame, contests: pd.DataFrame) -> pd.DataFrame:
    """``votes``: columns contest_id, party_code, candidate, votes.
    ``contests``: contest_id (index or column), seats.
    Returns one row per contest_id with votes_a, votes_b, votes_other, total, status,
    seats_a, seats_b, seats_other, winner (a | b | other | split), candidates_a,
    candidates_b, candidates_other (how many candidates of each code stood) and won_votes_a,
    won_votes_b (the votes of the party's candidates who won, a tied candidate's counted by its
    share of the seat) and tie_across_parties (candidates of different codes tied at the last
    winning place).
    """
    contests = contests.reset_index() if "contest_id" not in contests.columns else contests
    seats = contests.set_index("contest_id")["seats"].astype(np.int64)
    cand = candidate_results(votes, contests)

    out = pd.DataFrame(index=seats.index)
    cand["won_votes"] = cand["votes"] * cand["won"]  # a tie within a party: equal votes, either counts
    for c in ("a", "b", "other"):
        part = cand[cand["code"] == c].groupby("contest_id")
        out[f"votes_{c}"] = part["votes"].sum().reindex(out.index).fillna(0).astype(np.int64)
        out[f"seats_{c}"] = part["won"].sum().reindex(out.index).fillna(0.0)
        out[f"n_{c}"] = part.size().reindex(out.index).fillna(0).astype(np.int64)
        if c != "other":  # the votes of the party's candidates who won (multi-member treatment)
            out[f"won_votes_{c}"] = part["won_votes"].sum().reindex(out.index).fillna(0.0)
    # a tie at the last winning place between candidates of different codes: no whole seat count
    tied = cand[(cand["won"] > 0) & (cand["won"] < 1)].groupby("contest_id")["code"].nunique()
    out["tie_across_parties"] = (tied.reindex(out.index).fillna(0) > 1).to_numpy()
    out["total"] = out[["votes_a", "votes_b", "votes_other"]].sum(axis=1)
    out["seats"] = seats
    has_a, has_b = out["n_a"] > 0, out["n_b"] > 0
    out["status"] = np.select(
        [has_a & has_b, (has_a ^ has_b) & ((out["n_a"] + out["n_b"]) == 1), has_a ^ has_b],
        ["contested", "uncontested", "same_party"], default="no_major",
    )
    full = out["seats"].astype(float)
    out["winner"] = np.select(
        [out["seats_a"] == full, out["seats_b"] == full, out["seats_other"] == full],
        ["a", "b", "other"], default="split",
    )
    out = out.rename(columns={"n_a": "candidates_a", "n_b": "candidates_b", "n_other": "candidates_other"})
    return out.reset_index()


def two_party_inputs(reduced: pd.DataFrame, policy: str, winner_share: float, treatment: str = M.LEAVE_OUT,
                     *, per_seat: bool = False) -> pd.DataFrame:
    """The contests that enter the district-share measures, with ``votes_a``/``votes_b`` after the
    uncontested policy and an ``uncontested`` flag. Left out: multi-member contests (unless the
    multi-member ``treatment`` takes them) and contests with no major party (no single two-party
    share per seat), and contests won by a minor party or an independent (a two-party share would
    hand a major party a seat it did not win); under ``exclude``, uncontested contests. The rules
    are :func:`monitor.eligibility.contest_reasons`.

    A multi-member contest that enters under ``pseudo_districts`` (:mod:`monitor.multi_member`)
    is one row with its pseudo-districts' votes added up (``uncontested`` when any of them is),
    or, with ``per_seat``, one row per pseudo-district (``seat`` 1..k; 0 for every other row)."""
    r = reduced[contest_reasons(reduced, policy, treatment) == ENTERS].copy()
    multi = r["seats"].astype(int).to_numpy() > 1 if len(r) else np.zeros(0, dtype=bool)
    single = _single_member_inputs(r[~multi], policy, winner_share).assign(seat=0)
    if not multi.any():
        return single
    pseudo = M.pseudo_districts(r[multi].reset_index(drop=True).assign(contest_id=np.flatnonzero(multi)),
                                policy, winner_share)
    if per_seat:
        rows = r.iloc[pseudo["contest_id"].to_numpy()].copy()
        rows["seat"] = pseudo["seat"].to_numpy()
    else:
        pseudo = pseudo.groupby("contest_id", sort=True).agg(votes_a=("votes_a", "sum"), votes_b=("votes_b", "sum"),
                                                             uncontested=("uncontested", "any"))
        rows = r.iloc[pseudo.index.to_numpy()].copy()
        rows["seat"] = 0
    rows["votes_a"] = pseudo["votes_a"].to_numpy(float)
    rows["votes_b"] = pseudo["votes_b"].to_numpy(float)
    rows["uncontested"] = pseudo["uncontested"].to_numpy(bool)
    where = pseudo["contest_id"].to_numpy() if per_seat else pseudo.index.to_numpy()  # positions in r
    order = np.argsort(np.r_[np.flatnonzero(~multi), where], kind="mergesort")
    return pd.concat([single, rows]).iloc[order]


def _single_member_inputs(r: pd.DataFrame, policy: str, winner_share: float) -> pd.DataFrame:
    """:func:`two_party_inputs` for contests electing one member (all of which enter)."""
    r = r.copy()
    lopsided = r["status"].isin(["uncontested", "same_party"])
    r["uncontested"] = lopsided
    va = r["votes_a"].astype(float)
    vb = r["votes_b"].astype(float)
    # the one major party that stood (in an uncontested contest)
    a_side = (r["candidates_a"] > 0).to_numpy() if len(r) else np.zeros(0, dtype=bool)
    total = assumed_totals(r)
    if "placeholder" in r.columns:  # no count: the winner has the assumed total (a 100-0 district)
        placeholder = r["placeholder"].astype(bool)
        va = va.where(~placeholder, np.where(a_side, total, 0.0))
        vb = vb.where(~placeholder, np.where(a_side, 0.0, total))
    if policy == "impute":
        # the one major party that stood gets the winner's share (even if it polled 0 votes)
        va = va.where(~lopsided, np.where(a_side, winner_share, 1 - winner_share) * total)
        vb = vb.where(~lopsided, np.where(a_side, 1 - winner_share, winner_share) * total)
    r["votes_a"] = va.to_numpy()
    r["votes_b"] = vb.to_numpy()
    return r


def assumed_totals(contests: pd.DataFrame) -> pd.Series:
    """Each contest's vote total for the vote-weighted measures: its own ``total``, or for a
    placeholder contest (``placeholder`` true: no real count) the mean total of the other
    contests of its unit (``unit_id``; one unit without that column) that have real counts, 1
    when there is none (see the module notes: a project choice)."""
    total = contests["total"].astype(float)
    if "placeholder" not in contests.columns or not len(contests):
        return total
    placeholder = contests["placeholder"].astype(bool)
    units = contests["unit_id"] if "unit_id" in contests.columns else pd.Series(0, index=contests.index)
    mean = total.where(~placeholder).groupby(units).transform("mean")
    return total.where(~placeholder, mean.fillna(1.0))


def describe_changes(old: pd.DataFrame, new: pd.DataFrame) -> list[str]:
    """Plain-words differences between two deliveries of a unit (a correction): seats of each
    party, districts added or dropped, winners, vote totals.

    ``old`` and ``new``: reduced contests (:func:`reduce_contests` columns) indexed by the
    contest key ``(district, special, runoff, position)`` (or a prefix of it), with an optional
    ``decides`` column (whether the contest decides its seat).
    """
    changes = []
    for code in ("a", "b"):
        before, after = float(old[f"seats_{code}"].sum()), float(new[f"seats_{code}"].sum())
        if before != after:
            changes.append(f"seats of party {code}: {before:g} -> {after:g}")
    both = "decides" in old.columns and "decides" in new.columns
    for key in sorted(set(old.index) | set(new.index)):
        district, special, runoff, position = (*key, False, False, "")[:4]
        kind = " ".join(k for k, on in (("special", special), ("runoff", runoff)) if on)
        label = f"district {district}" + (f" seat {position}" if position else "") + (f" ({kind})" if kind else "")
        if key not in new.index:
            changes.append(f"{label}: dropped")
        elif key not in old.index:
            changes.append(f"{label}: added")
        else:
            if old.at[key, "winner"] != new.at[key, "winner"]:
                changes.append(f"{label}: winner {old.at[key, 'winner']} -> {new.at[key, 'winner']}")
            if both and bool(old.at[key, "decides"]) != bool(new.at[key, "decides"]):
                changes.append(f"{label}: " + ("now decides its seat" if new.at[key, "decides"]
                                               else "no longer decides its seat"))
    for code in ("a", "b", "other"):
        before, after = int(old[f"votes_{code}"].sum()), int(new[f"votes_{code}"].sum())
        if before != after:
            changes.append(f"votes of {'party ' + code if code != 'other' else 'other parties'}: "
                           f"{before:,} -> {after:,} ({after - before:+,})")
    return changes
