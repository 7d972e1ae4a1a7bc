"""Multi-member districts (block voting): how a contest that elects k > 1 members can enter the
district-share measures, which are defined on one two-party share per seat.

``[multi_member] treatment`` in levelfield.toml:

* ``leave_out`` (the default): a multi-member contest is left out of the district-share measures,
  and the coverage of its unit says so (its seats are not in the measures);
* ``pseudo_districts``: each of the k seats becomes a pseudo-district. **Project choice, no
  verified source**: no published treatment of the efficiency gap or the seats-votes curve in
  multi-member districts was found. The rule:

  - a pseudo-district the party **won** gets, as that party's votes, the mean vote of the
    party's candidates who won a seat in the district; as the other party's votes, the mean
    vote of the other party's candidates who lost (0 when it ran none who lost: that seat was
    not contested by it, an *uncontested* pseudo-district, to which the uncontested policy
    applies);
  - so each party wins exactly the pseudo-districts it won seats (every winner out-polled every
    loser, so a winners' mean is above any losers' mean): a district whose seats split between
    the parties gives each party its seats;
  - when one party takes every seat and each party ran k candidates, every pseudo-district
    carries each party's mean candidate vote (the party's total over its number of candidates),
    and over the k pseudo-districts each party's votes add up to its total;
  - the minor parties' votes are shared equally among the k pseudo-districts (they weigh the
    turnout only).

  Left out even so, with the reason: a contest with a seat won by a minor party or an
  independent, with no major-party candidate, with a tie for the last seat, or with fewer
  candidates than seats; under the ``exclude`` policy a contest in which a party ran fewer
  candidates than the seats it did not win (an uncontested pseudo-district).

The treatment is stored with every number (it is part of the policy text, see
:func:`policy_suffix`), enters every inputs hash, and the coverage says which districts entered
under it. Pure functions over reduced contests (:func:`monitor.reduce.reduce_contests` columns).

Examples
--------
A two-seat district where the parties split the seats (a: 600 and 500 votes, b: 550 and 400;
the winners are a's 600 and b's 550): a's pseudo-district is 600 against b's losing 400, b's
is 550 against a's losing 500.

>>> import pandas as pd
>>> r = pd.DataFrame({"contest_id": [7], "seats": [2], "votes_a": [1100], "votes_b": [950], "votes_other": [0],
...                   "seats_a": [1.0], "seats_b": [1.0], "seats_other": [0.0], "candidates_a": [2],
...                   "candidates_b": [2], "won_votes_a": [600], "won_votes_b": [550], "status": ["contested"]})
>>> pseudo_districts(r, "impute", 0.75)[["contest_id", "seat", "winner", "votes_a", "votes_b"]].values.tolist()
[[7, 1, 'a', 600.0, 400.0], [7, 2, 'b', 500.0, 550.0]]
"""

from __future__ import annotations

import numpy as np
import pandas as pd

LEAVE_OUT = "leave_out"
PSEUDO_DISTRICTS = "pseudo_districts"
TREATMENTS = (LEAVE_OUT, PSEUDO_DISTRICTS)

TIE = "multi-member contest with a tie for the last seat (no whole seat count per party)"
UNFILLED = "multi-member contest with fewer candidates than seats"
EXCLUDED_UNCONTESTED_SEAT = ("multi-member contest where a party ran fewer candidates than the seats it did not win "
                             "(an uncontested pseudo-district), left out under the exclude policy")
MINOR_SEAT = "a seat won by a minor party or an independent"
NO_MAJOR = "no major-party candidate"  # as monitor.eligibility says it

COLUMNS = ["contest_id", "seat", "winner", "votes_a", "votes_b", "total", "uncontested"]


def policy_suffix(treatment: str) -> str:
    """What the treatment adds to the stored policy text: nothing for the default (so results
    stored before the treatment existed keep their policy), ``+multi_member:pseudo_districts``."""
    return "" if treatment == LEAVE_OUT else f"+multi_member:{treatment}"


def described(treatment: str) -> str:
    """The treatment in words, for pages and notes."""
    if treatment == LEAVE_OUT:
        return "multi-member contests are left out of the district-share measures"
    return ("each seat of a multi-member contest is a pseudo-district (the mean vote of each party's winning "
            "and losing candidates; seats as actually won): project choice, no verified source")


def _losers(reduced: pd.DataFrame, code: str) -> np.ndarray:
    return reduced[f"candidates_{code}"].to_numpy(float) - reduced[f"seats_{code}"].to_numpy(float)


def uncontested_seats(reduced: pd.DataFrame) -> np.ndarray:
    """True where a pseudo-district would have one major party absent: a party that won seats
    faces no losing candidate of the other party, or the other way round."""
    sa, sb = reduced["seats_a"].to_numpy(float), reduced["seats_b"].to_numpy(float)
    return ((sa > 0) & (_losers(reduced, "b") <= 0)) | ((sb > 0) & (_losers(reduced, "a") <= 0))


def reasons(reduced: pd.DataFrame, policy: str) -> np.ndarray:
    """Why each multi-member contest of ``reduced`` is left out under ``pseudo_districts``
    ("" when it enters), lowest priority first as in :func:`monitor.eligibility.contest_reasons`."""
    n = len(reduced)
    out = np.full(n, "", dtype=object)
    if n == 0:
        return out
    seats = reduced["seats"].to_numpy(float)
    sa, sb, so = (reduced[f"seats_{c}"].to_numpy(float) for c in ("a", "b", "other"))
    if policy == "exclude":
        out[uncontested_seats(reduced)] = EXCLUDED_UNCONTESTED_SEAT
    out[so > 0] = MINOR_SEAT
    out[reduced["status"].to_numpy(object) == "no_major"] = NO_MAJOR
    out[sa + sb + so < seats - 1e-9] = UNFILLED
    tie = (sa != np.round(sa)) | (sb != np.round(sb))
    if "tie_across_parties" in reduced.columns:
        tie |= reduced["tie_across_parties"].to_numpy(bool)
    out[tie] = TIE
    return out


def pseudo_districts(reduced: pd.DataFrame, policy: str, winner_share: float) -> pd.DataFrame:
    """The pseudo-districts of the multi-member contests in ``reduced`` (which must all enter:
    :func:`reasons` empty), ``COLUMNS``: one row per seat, ``seat`` 1..k with party a's won seats
    first, ``winner`` a or b, two-party votes after the uncontested policy, ``total`` (the two
    parties' votes before the policy plus the contest's minor votes over k) and ``uncontested``."""
    if reduced.empty:
        return pd.DataFrame(columns=COLUMNS)
    k = reduced["seats"].to_numpy(np.int64)
    sa = np.rint(reduced["seats_a"].to_numpy(float)).astype(np.int64)
    va, vb = reduced["votes_a"].to_numpy(float), reduced["votes_b"].to_numpy(float)
    wa, wb = reduced["won_votes_a"].to_numpy(float), reduced["won_votes_b"].to_numpy(float)
    sb = k - sa
    la, lb = _losers(reduced, "a"), _losers(reduced, "b")
    with np.errstate(invalid="ignore", divide="ignore"):
        mean_won_a = np.where(sa > 0, wa / np.maximum(sa, 1), 0.0)
        mean_won_b = np.where(sb > 0, wb / np.maximum(sb, 1), 0.0)
        mean_lost_a = np.where(la > 0, (va - wa) / np.maximum(la, 1), 0.0)
        mean_lost_b = np.where(lb > 0, (vb - wb) / np.maximum(lb, 1), 0.0)
    row = np.repeat(np.arange(len(reduced)), k)
    seat = np.concatenate([np.arange(1, n + 1) for n in k])
    a_won = seat <= sa[row]
    votes_a = np.where(a_won, mean_won_a[row], mean_lost_a[row])
    votes_b = np.where(a_won, mean_lost_b[row], mean_won_b[row])
    uncontested = np.where(a_won, lb[row] <= 0, la[row] <= 0)
    total = votes_a + votes_b + reduced["votes_other"].to_numpy(float)[row] / k[row]
    if policy == "impute":
        share_a = np.where(a_won, winner_share, 1.0 - winner_share)
        votes_a = np.where(uncontested, share_a * total, votes_a)
        votes_b = np.where(uncontested, (1.0 - share_a) * total, votes_b)
    return pd.DataFrame({"contest_id": reduced["contest_id"].to_numpy()[row], "seat": seat,
                         "winner": np.where(a_won, "a", "b"), "votes_a": votes_a, "votes_b": votes_b,
                         "total": total, "uncontested": uncontested})
