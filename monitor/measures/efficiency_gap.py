"""Efficiency gap: wasted votes (vote-count form), the equal-turnout identity, the seat form.

References
----------
.. [1] N. O. Stephanopoulos & E. M. McGhee, "Partisan Gerrymandering and the Efficiency Gap",
       82 U. Chi. L. Rev. 831 (2015).
.. [2] E. McGhee, "Measuring Partisan Bias in Single-Member District Electoral Systems",
       Legislative Studies Quarterly 39 (2014), doi:10.1111/lsq.12033.
"""

from __future__ import annotations

import numpy as np

from .segments import Segments


def wasted_votes_of(seg: Segments) -> tuple[np.ndarray, np.ndarray]:
    """Per-unit wasted votes (W_a, W_b) under the 50 % rule, ties splitting the seat.

    Per district, with s_i the seat of a (1, 0 or 1/2):
    ``w_a = a_i - s_i n_i / 2`` and ``w_b = b_i - (1 - s_i) n_i / 2``: the loser wastes all its
    votes, the winner those above half the two-party total; a tie averages both awards
    (n_i / 4 each).  Hence ``W_a + W_b = sum n_i / 2`` exactly.
    """
    half = seg.total / 2.0
    w_a = seg.votes_a - seg.seat * half
    w_b = seg.votes_b - (1.0 - seg.seat) * half
    return seg.mask(seg.sum(w_a)), seg.mask(seg.sum(w_b))


def efficiency_gap_of(seg: Segments) -> np.ndarray:
    """EG = (W_b - W_a) / sum n_i per unit; see :func:`efficiency_gap`."""
    # per district w_b - w_a = (b_i - (1 - s_i) n_i / 2) - (a_i - s_i n_i / 2), in one pass
    net = (seg.votes_b - seg.votes_a) + (seg.seat - 0.5) * seg.total
    return seg.mask(seg.divide(seg.sum(net), seg.total_votes))


def efficiency_gap_equal_turnout_of(seg: Segments) -> np.ndarray:
    """(S - 1/2) - 2 (V - 1/2) per unit; see :func:`efficiency_gap_equal_turnout`."""
    s = seg.divide(seg.seats_a, seg.count.astype(np.float64))
    return seg.mask((s - 0.5) - 2.0 * (seg.votes_share - 0.5))


def efficiency_gap_seats_of(seg: Segments) -> np.ndarray:
    """EG x N per unit; see :func:`efficiency_gap_seats`."""
    return efficiency_gap_of(seg) * seg.count


def wasted_votes(unit, votes_a, votes_b, n_units: int) -> tuple[np.ndarray, np.ndarray]:
    """Wasted votes of party a and party b per unit (50 % rule, ties split).

    Examples
    --------
    Stephanopoulos & McGhee's 10-district example (8 wins at 60-40, 2 losses at 35-65):

    >>> wa, wb = wasted_votes([0] * 10, [60.0] * 8 + [35.0] * 2, [40.0] * 8 + [65.0] * 2, 1)
    >>> wa.tolist(), wb.tolist()
    ([150.0], [350.0])
    """
    return wasted_votes_of(Segments(unit, votes_a, votes_b, n_units))


def efficiency_gap(unit, votes_a, votes_b, n_units: int) -> np.ndarray:
    """Efficiency gap from vote counts, per unit.

    .. math:: EG = \\frac{\\sum_i (w_{b,i} - w_{a,i})}{\\sum_i n_i}

    with wasted votes as in :func:`wasted_votes_of` (all of the loser's votes, the winner's
    votes above half the district's two-party total [1]_).  Exactly equal to
    ``(S_w - 1/2) - 2 (V - 1/2)`` with S_w the turnout-weighted seat share.

    Sign: positive favours party a (more of b's votes are wasted).  Range [-1/2, 1/2].

    Returns NaN for a unit without districts or with a district without two-party votes.

    Examples
    --------
    >>> efficiency_gap([0] * 10, [60.0] * 8 + [35.0] * 2, [40.0] * 8 + [65.0] * 2, 1).round(12)
    array([0.2])
    """
    return efficiency_gap_of(Segments(unit, votes_a, votes_b, n_units))


def efficiency_gap_equal_turnout(unit, votes_a, votes_b, n_units: int) -> np.ndarray:
    """Stephanopoulos & McGhee's simplified gap ``(S - 1/2) - 2 (V - 1/2)`` [1]_.

    S = seats of a / N (ties 1/2), V = statewide vote-weighted two-party share of a.  Equals
    :func:`efficiency_gap` exactly when every district has the same two-party turnout.
    Sign: positive favours party a.

    Examples
    --------
    >>> efficiency_gap_equal_turnout([0] * 5, [80.0] * 5, [20.0] * 5, 1).round(12)
    array([-0.1])
    """
    return efficiency_gap_equal_turnout_of(Segments(unit, votes_a, votes_b, n_units))


def efficiency_gap_seats(unit, votes_a, votes_b, n_units: int) -> np.ndarray:
    """Seat form of the efficiency gap: EG x N (the form used for congressional plans [1]_).

    Sign: positive favours party a.

    Examples
    --------
    >>> efficiency_gap_seats([0] * 10, [60.0] * 8 + [35.0] * 2, [40.0] * 8 + [65.0] * 2, 1).round(12)
    array([2.])
    """
    return efficiency_gap_seats_of(Segments(unit, votes_a, votes_b, n_units))
