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

from .registry import FAVOURS_A, Flag, Measure
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


#: Thresholds proposed in the legal literature, drawn as reference lines: proposals, not law.
PROPOSED_THRESHOLDS = (
    {"measure": "efficiency_gap_seats", "value": 2.0, "unit": "seats", "applies_to": "congressional plans",
     "source": "Stephanopoulos & McGhee (2015), 82 U. Chi. L. Rev. 831, as reported in press summaries of "
               "the paper (not checked against the paper's text)"},
    {"measure": "efficiency_gap", "value": 0.08, "unit": "share", "applies_to": "state-house plans",
     "source": "Stephanopoulos & McGhee (2015), as reported in press summaries of the paper"},
    {"measure": "efficiency_gap", "value": 0.07, "unit": "share", "applies_to": "state-house plans",
     "source": "threshold argued by the plaintiffs in Whitford v. Gill (2016), as reported in the press"},
)

DECLARED = (
    Measure(
        name="efficiency_gap", order=80, label="Efficiency gap", signed=True, headline=True, table=True,
        plain="Counts the votes each party 'wasted': every vote for a losing candidate, and every vote "
              "for a winner beyond what was needed to win. The gap is the difference between the two "
              "parties' wasted votes as a share of all votes. A plan that makes one party waste many more "
              "votes than the other favours the party that wastes fewer.",
        formula="EG = sum_i (w_b,i - w_a,i) / sum_i n_i; the loser's votes and the winner's votes above n_i/2 "
                "are wasted, a tie wastes n_i/4 each; equals (S_w - 1/2) - 2 (V - 1/2), S_w turnout-weighted",
        sign=FAVOURS_A, source="Stephanopoulos & McGhee, 82 U. Chi. L. Rev. 831 (2015); McGhee, LSQ 39 (2014)",
        summary="difference of the parties' wasted votes over all votes",
        compute=lambda u: efficiency_gap_of(u.seg), interval=lambda seg, settings: efficiency_gap_of(seg),
        null=efficiency_gap, null_of=efficiency_gap_of, flag=Flag("efficiency_gap", null=True, short="efficiency gap"),
        thresholds=PROPOSED_THRESHOLDS,
    ),
    Measure(
        name="efficiency_gap_equal_turnout", order=90, label="Efficiency gap (equal-turnout form)", signed=True,
        plain="A shortcut to the efficiency gap that assumes every district casts the same number of votes: it "
              "compares the seat share with twice the vote margin.",
        formula="(S - 1/2) - 2 (V - 1/2)", sign=FAVOURS_A, source="Stephanopoulos & McGhee (2015), simplified form",
        summary="the efficiency gap's equal-turnout form (S - 1/2) - 2 (V - 1/2)",
        compute=lambda u: efficiency_gap_equal_turnout_of(u.seg),
    ),
    Measure(
        name="efficiency_gap_seats", order=100, label="Efficiency gap in seats", signed=True, digits=2,
        headline=True, table=True, flag_of="efficiency_gap",
        plain="The efficiency gap expressed in seats: the gap times the number of districts.",
        formula="EG x N", sign=FAVOURS_A, source="Stephanopoulos & McGhee (2015), seat form for congressional plans",
        summary="the efficiency gap times the number of districts",
        compute=lambda u: efficiency_gap_seats_of(u.seg),
    ),
)
