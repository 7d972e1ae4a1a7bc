"""Partisan-asymmetry measures: pure, vectorised functions over many units at once.

Input layout (``notes/contracts.md``): flat arrays with one row per single-member district,
``unit`` (int64, non-decreasing, 0..n_units-1), ``votes_a``, ``votes_b`` (float64 >= 0).
Every function returns one value per unit; NaN marks an undefined value (an empty unit, a
district without two-party votes, or the measure's own undefined case).

One sign convention: every signed measure is positive when it favours party a.

The engine entry point is :func:`compute_measures`; the single measures below are what the
national-pool simulation calls on many simulated delegations at once. Every measure is declared
once, in the module that computes it (:mod:`monitor.measures.registry`).

Examples
--------
Two districts, a wins 60-40 and loses 30-70: a wastes 10 + 30 votes, b 40 + 20, of 200:

>>> efficiency_gap([0, 0], [60.0, 30.0], [40.0, 70.0], 1).round(12)
array([0.1])
"""

from .catalog import MEASURE_NAMES, MEASURE_VERSIONS, MEASURES, MeasureDoc
from .declination import declination
from .descriptive import seats_a
from .efficiency_gap import efficiency_gap, efficiency_gap_equal_turnout, efficiency_gap_seats, wasted_votes
from .engine import compute_measures
from .lopsided import LopsidedResult, lopsided_test
from .mean_median import MM_SE_FACTOR, MeanMedianTest, mean_median, mean_median_test
from .segments import Segments
from .settings import MeasureSettings
from .swing import (
    partisan_bias,
    responsiveness,
    seat_share_at,
    seats_at_flipped_vote,
    symmetry_bias,
)
from .ttest import TTestResult, t_test_from_summary

__all__ = [
    "MEASURES",
    "MEASURE_NAMES",
    "MEASURE_VERSIONS",
    "MM_SE_FACTOR",
    "LopsidedResult",
    "MeanMedianTest",
    "MeasureDoc",
    "MeasureSettings",
    "Segments",
    "TTestResult",
    "compute_measures",
    "declination",
    "efficiency_gap",
    "efficiency_gap_equal_turnout",
    "efficiency_gap_seats",
    "lopsided_test",
    "mean_median",
    "mean_median_test",
    "partisan_bias",
    "responsiveness",
    "seat_share_at",
    "seats_a",
    "seats_at_flipped_vote",
    "symmetry_bias",
    "t_test_from_summary",
    "wasted_votes",
]
