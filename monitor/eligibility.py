"""Which stored contests enter the measures, and why the others are left out: the one place.

Every part of levelfield that needs to know whether a contest counts (the measures' inputs, the
national aggregates, the coverage of each unit) asks :func:`classify` or its two halves:

* :func:`deciding`: the contest that decides its seat. Today that is the regular general election;
  a special election is stored as history but not counted;
* :func:`contest_reasons`: the contest-level rules, in this order: a multi-member contest, no
  major-party candidate, a seat won by a minor party or an independent (a two-party share would
  hand a major party a seat it did not win), and, under the ``exclude`` uncontested policy, a
  contest with one major party absent.

Reasons are plain words a reader can quote; the empty string means "enters the measures".
Pure functions over reduced contests (:func:`monitor.reduce.reduce_contests` columns plus
``special``); no I/O.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

ENTERS = ""

SPECIAL = "special election (not counted: the regular general decides the seat)"
SPECIAL_ONLY = "special election only (special elections are not counted)"
NO_MAJOR = "no major-party candidate"
MINOR_WINNER = "won by a minor party or an independent"
EXCLUDED_UNCONTESTED = "uncontested, left out under the exclude policy"


def multi_member(seats: int) -> str:
    return f"multi-member contest ({int(seats)} seats)"


def deciding(contests: pd.DataFrame) -> np.ndarray:
    """True for each contest that decides its seat (the regular general; special elections are
    stored but not counted)."""
    if contests.empty:
        return np.zeros(0, dtype=bool)
    return contests["special"].astype(int).to_numpy() == 0


def contest_reasons(reduced: pd.DataFrame, policy: str) -> np.ndarray:
    """Why each contest is left out of the district-share measures (``ENTERS`` when it enters),
    from its own reduction alone: seats, status, winner and the uncontested policy."""
    if policy not in ("impute", "exclude", "none"):
        raise ValueError(f"unknown uncontested policy {policy!r}")
    n = len(reduced)
    if n == 0:
        return np.zeros(0, dtype=object)
    seats = reduced["seats"].astype(int).to_numpy()
    status = reduced["status"].to_numpy(object)
    winner = reduced["winner"].to_numpy(object)
    lopsided = np.isin(status, ["uncontested", "same_party"])
    excluded = lopsided if policy == "exclude" else np.zeros(n, dtype=bool)
    out = np.full(n, ENTERS, dtype=object)
    # lowest priority first: a later rule overwrites an earlier one's reason
    out[excluded] = EXCLUDED_UNCONTESTED
    out[winner == "other"] = MINOR_WINNER
    out[status == "no_major"] = NO_MAJOR
    multi = seats != 1
    out[multi] = [multi_member(s) for s in seats[multi]]
    return out


def classify(contests: pd.DataFrame, policy: str) -> pd.Series:
    """One reason per stored contest (aligned on ``contests.index``): ``ENTERS`` when the contest
    enters the measures, else why not. ``contests``: reduced contests with ``cycle, state,
    chamber, district, special``."""
    if contests.empty:
        return pd.Series([], index=contests.index, dtype=object)
    decides = deciding(contests)
    # a special election in a district whose regular contest is stored is history; a district
    # whose only contest is a special election is left out as such
    keys = [contests[k].to_numpy() for k in ("cycle", "state", "chamber", "district")]
    has_regular = pd.Series(decides).groupby(keys).transform("any").to_numpy(bool)
    special = np.where(has_regular, SPECIAL, SPECIAL_ONLY)
    reasons = np.where(decides, contest_reasons(contests, policy), special)
    return pd.Series(reasons, index=contests.index, dtype=object)
