"""Which stored contests enter the measures, and why the others are left out: the one place.

Every part of levelfield that needs to know whether a contest counts (the measures' inputs, the
national aggregates, the coverage of each unit) asks :func:`classify` or its two halves:

* :func:`deciding`: the contest that decides its seat, one per seat, as the loader marked it
  (``contests.decides``; :mod:`monitor.ingest.deciding`: the regular contest, its runoff when
  there is one, or a special that replaced the regular election). Any other contest is history,
  with the loader's reason (``contests.left_out``);
* :func:`contest_reasons`: the contest-level rules for a deciding contest, in this order: a
  multi-member contest (unless ``[multi_member] treatment = "pseudo_districts"`` takes it, whose
  own rules then apply: :func:`monitor.multi_member.reasons`), no major-party candidate, a seat
  won by a minor party or an independent (a two-party share would hand a major party a seat it
  did not win), and, under the ``exclude`` uncontested policy, a contest with one major party
  absent (a placeholder count, an unopposed candidate who was not on the ballot, says so).

Reasons are plain words a reader can quote; the empty string means "enters the measures".
Pure functions over reduced contests (:func:`monitor.reduce.reduce_contests` columns plus
``decides``, and optionally ``left_out`` and ``placeholder``); no I/O.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from monitor import multi_member as M

ENTERS = ""

NOT_DECIDING = "does not decide its seat"
NO_MAJOR = M.NO_MAJOR
MINOR_WINNER = "won by a minor party or an independent"
EXCLUDED_UNCONTESTED = "uncontested, left out under the exclude policy"
EXCLUDED_PLACEHOLDER = "unopposed and not on the ballot (a placeholder count), left out under the exclude policy"


def multi_member(seats: int) -> str:
    return f"multi-member contest ({int(seats)} seats)"


def deciding(contests: pd.DataFrame) -> np.ndarray:
    """True for each contest that decides its seat (the loader's ``decides`` mark)."""
    if contests.empty:
        return np.zeros(0, dtype=bool)
    return contests["decides"].astype(int).to_numpy() == 1


def contest_reasons(reduced: pd.DataFrame, policy: str, treatment: str = M.LEAVE_OUT) -> np.ndarray:
    """Why each contest is left out of the district-share measures (``ENTERS`` when it enters),
    from its own reduction alone: seats, status, winner, the uncontested policy and the
    multi-member ``treatment``."""
    if policy not in ("impute", "exclude", "none"):
        raise ValueError(f"unknown uncontested policy {policy!r}")
    if treatment not in M.TREATMENTS:
        raise ValueError(f"unknown multi-member treatment {treatment!r}")
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
    if "placeholder" in reduced.columns:
        out[excluded & reduced["placeholder"].astype(bool).to_numpy()] = EXCLUDED_PLACEHOLDER
    out[winner == "other"] = MINOR_WINNER
    out[status == "no_major"] = NO_MAJOR
    multi = seats != 1
    if treatment == M.PSEUDO_DISTRICTS:
        out[multi] = M.reasons(reduced[multi], policy)
    else:
        out[multi] = [multi_member(s) for s in seats[multi]]
    return out


def classify(contests: pd.DataFrame, policy: str, treatment: str = M.LEAVE_OUT) -> pd.Series:
    """One reason per stored contest (aligned on ``contests.index``): ``ENTERS`` when the contest
    enters the measures, else why not: the contest-level rules for a deciding contest, the
    loader's reason (``left_out``) for any other."""
    if contests.empty:
        return pd.Series([], index=contests.index, dtype=object)
    decides = deciding(contests)
    history = np.full(len(contests), NOT_DECIDING, dtype=object)
    if "left_out" in contests.columns:
        given = contests["left_out"].to_numpy(object)
        stated = np.array([isinstance(x, str) and x != "" for x in given], dtype=bool)
        history[stated] = given[stated]
    return pd.Series(np.where(decides, contest_reasons(contests, policy, treatment), history), index=contests.index,
                     dtype=object)
