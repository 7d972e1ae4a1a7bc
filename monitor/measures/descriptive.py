"""Descriptive counts and shares of a unit: votes, seats, districts, competitive districts."""

from __future__ import annotations

import numpy as np

from .registry import NO_DISTRICTS, NO_VOTES, Flag, Measure
from .segments import Segments, step


def vote_share_of(seg: Segments) -> np.ndarray:
    """V = sum a_i / sum (a_i + b_i), party a's statewide two-party share (NaN without votes)."""
    return seg.votes_share


def seats_a_of(seg: Segments) -> np.ndarray:
    """Seats of a, ties 1/2 (NaN for empty units or a district without two-party votes)."""
    return seg.mask(seg.seats_a)


def seats_b_of(seg: Segments) -> np.ndarray:
    """Seats of b = N - seats of a."""
    return seg.mask(seg.count - seg.seats_a)


def seat_share_of(seg: Segments) -> np.ndarray:
    """S = seats of a / N."""
    return seg.mask(seg.divide(seg.seats_a, seg.count.astype(np.float64)))


def competitive_of(seg: Segments, window: float = 0.05) -> np.ndarray:
    """Number of districts with |x_i - 1/2| <= window (margin |2 x_i - 1| <= 2 window).

    0 for an empty unit; NaN when a district has no two-party votes.  The +-5-point default is
    common practice (no single source).
    """
    within = step(2.0 * window - seg.margin) > 0.0
    counted = seg.sum(within.astype(np.float64))
    return np.where(seg.has_empty_district, np.nan, counted)


def seats_a(unit, votes_a, votes_b, n_units: int) -> np.ndarray:
    """Seats won by party a per unit, an exact tie counting 1/2 to each party.

    NaN for an empty unit or one with a district without two-party votes.

    Examples
    --------
    >>> seats_a([0, 0, 0, 2], [60.0, 50.0, 10.0, 7.0], [40.0, 50.0, 90.0, 3.0], 3)
    array([1.5, nan, 1. ])
    """
    return seats_a_of(Segments(unit, votes_a, votes_b, n_units))


def seat_count(value: float) -> str:
    """A seat count: whole seats without decimals, a tie's half seat as .5."""
    return f"{value:.0f}" if float(value).is_integer() else f"{value:.1f}"


DECLARED = (
    Measure(
        name="vote_share", order=10, label="Vote share (a)", kind="share", table=True,
        plain="Of all votes cast for the two major parties in the state's districts, the share that went to party a.",
        formula="V = sum a_i / sum (a_i + b_i), two-party votes only",
        sign="share of party a (b's is 1 - V)", source="definition",
        summary="party a's share of the two-party vote over the districts in the measures",
        compute=lambda u: vote_share_of(u.seg),
        undefined=lambda u: [(u.n == 0, NO_DISTRICTS), (u.seg.total_votes <= 0, "no two-party votes")],
    ),
    Measure(
        name="seat_share", order=20, label="Seat share (a)", kind="share", table=True,
        plain="The share of the state's seats that party a won.",
        formula="S = seats of a / N, an exact tie counting 1/2",
        sign="share of party a (b's is 1 - S)", source="definition",
        summary="party a's share of the seats", compute=lambda u: seat_share_of(u.seg), undefined=lambda u: u.base,
    ),
    Measure(
        name="seats_a", order=30, label="Seats (a)", kind="count", table=True,
        plain="How many seats party a won (a tied seat counts as half).",
        formula="sum_i s_i, s_i = 1 / 0 / 1/2 for a win / loss / tie", sign="count", source="definition",
        summary="seats won by party a; judged against the seats expected from the national pool",
        compute=lambda u: seats_a_of(u.seg), undefined=lambda u: u.base, null=seats_a, null_of=seats_a_of,
        flag=Flag("seats", null=True, short="seats against the national pool", label="Seats (a) against the national pool",
                  also_undefined_where="efficiency_gap_seats", describe=lambda v: f"seats won by a {seat_count(v)}",
                  digits=2),
    ),
    Measure(
        name="seats_b", order=40, label="Seats (b)", kind="count",
        plain="How many seats party b won.", formula="N - seats_a", sign="count", source="definition",
        summary="seats won by party b", compute=lambda u: seats_b_of(u.seg), undefined=lambda u: u.base,
    ),
    Measure(
        name="districts", order=50, label="Districts", kind="count", table=True,
        plain="How many single-member districts enter the measures.",
        formula="N, single-member contests entering the measures", sign="count", source="definition",
        summary="single-member districts that enter the measures",
        compute=lambda u: u.n.astype(np.float64), undefined=lambda u: [],
    ),
    Measure(
        name="uncontested", order=60, label="Uncontested districts", kind="count", table=True,
        plain="Districts where one of the two major parties ran no candidate. Their share is imputed "
              "(or the district is left out) according to the policy in force, and that choice changes results.",
        formula="districts where one major party was absent (before imputation)", sign="count", source="definition",
        summary="districts where one major party was absent", compute=lambda u: u.n_uncontested,
        undefined=lambda u: [],
    ),
    Measure(
        name="competitive", order=70, label="Competitive districts", kind="count", table=True,
        plain="Districts decided by a narrow margin, within the configured window around 50%.",
        formula="#{i : |x_i - 1/2| <= w}, w = competitive_window (default 0.05)", sign="count",
        source="common practice (no single source)",
        summary="districts within `measures.competitive_window` of 50%",
        compute=lambda u: competitive_of(u.seg, u.settings.competitive_window),
        undefined=lambda u: [(u.seg.has_empty_district, NO_VOTES)],
    ),
)
