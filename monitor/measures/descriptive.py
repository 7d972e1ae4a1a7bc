"""Descriptive counts and shares of a unit: votes, seats, districts, competitive districts."""

from __future__ import annotations

import numpy as np

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
