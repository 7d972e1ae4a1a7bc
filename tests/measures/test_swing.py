"""Uniform-swing seats-votes curve: partisan bias, symmetry bias, responsiveness, cube law."""

import numpy as np
import pytest

from monitor.measures import (
    partisan_bias,
    responsiveness,
    seat_share_at,
    seats_a,
    seats_at_flipped_vote,
    symmetry_bias,
)
from monitor.measures.swing import symmetry_bias_of
from monitor.measures.segments import Segments

from .test_mean_median import from_shares

MM1 = [0.30, 0.40, 0.45, 0.47, 0.80]


def test_partisan_bias_worked_example():
    # Definition: partisan bias S(1/2) - 1/2 under uniform swing, Tufte (1973), "The Relationship
    # between Seats and Votes in Two-Party Systems", APSR 67(2):540-554, and King & Browning
    # (1987), APSR 81(4):1251-1273. Value hand-computed from that definition, not a published
    # figure: shift by the mean 0.484 (equal turnout, so the vote-weighted share is the mean):
    # only the 0.80 district is above 0.484, S(1/2) = 1/5, PB = -0.30 (exact).
    assert partisan_bias(*from_shares(MM1))[0] == pytest.approx(-0.30, abs=1e-15)


def test_symmetry_bias_worked_example_exact_integration():
    # Definition: symmetric bias [S(v) - (1 - S(1 - v))] / 2 averaged over a band around 50 %,
    # Gelman & King (1994), "A Unified Method of Evaluating Electoral Systems and Redistricting
    # Plans", AJPS 38(2):514-554 (the halved form and the 45-55 % band from memory). Value
    # hand-computed from that definition, not a published figure: over [0.45, 0.55], integrated
    # exactly: S = 1/5 below 0.514, 2/5 to 0.534, 3/5 above;
    # mean S = (0.2 * 0.064 + 0.4 * 0.02 + 0.6 * 0.016) / 0.1 = 0.304, so the average is
    # 0.304 - 1/2 = -0.196 (a 101-point grid would give -0.1950).
    assert symmetry_bias(*from_shares(MM1), band=0.05)[0] == pytest.approx(-0.196, abs=1e-12)


def test_symmetry_bias_band_zero_is_partisan_bias_and_small_band_converges():
    seg = Segments(*from_shares(MM1, [0.2, 0.35, 0.52, 0.6, 0.66, 0.7]))
    pb = partisan_bias(*from_shares(MM1, [0.2, 0.35, 0.52, 0.6, 0.66, 0.7]))
    np.testing.assert_array_equal(symmetry_bias_of(seg, 0.0), pb)
    np.testing.assert_allclose(symmetry_bias_of(seg, 1e-6), pb, atol=1e-12)


def test_responsiveness_worked_example():
    # Definition: responsiveness (swing ratio) as the slope of the seats-votes curve, Tufte (1973),
    # APSR 67(2):540-554. Value hand-computed from the central difference, not a published figure:
    # (S(0.55) - S(0.45)) / 0.10 = (3/5 - 1/5) / 0.1 = 4.0.
    assert responsiveness(*from_shares(MM1), h=0.05, at=0.5)[0] == pytest.approx(4.0, abs=1e-12)


def _cube_law_plan(n):
    """n equal-turnout districts whose shares are the quantiles (i - 1/2)/n of the cube-law
    CDF C(v) = v^3 / (v^3 + (1 - v)^3).  C is symmetric (C(1 - v) = 1 - C(v)), the plan's
    statewide share is 1/2, and S(v) = #{x_i > 1 - v} / n = 1 - F_n(1 - v), within 1/n of
    1 - C(1 - v) = C(v): the uniform-swing curve follows the cube law."""
    p = (np.arange(n) + 0.5) / n
    r = np.cbrt(p / (1 - p))
    x = r / (1 + r)
    return np.zeros(n, np.int64), 1000 * x, 1000 * (1 - x), 1


def cube(v):
    return v**3 / (v**3 + (1 - v) ** 3)


def test_cube_law_curve_and_responsiveness_three():
    # Kendall & Stuart, British Journal of Sociology 1 (1950) 183-197: S/(1-S) = (V/(1-V))^3.
    # Check values COMPUTED from that law: S(0.60) = 0.771428571 ("77:23"), S(0.52) =
    # 0.559745223 ("56:44"), S(2/3) = 8/9; our plan matches them within 1/n (step function).
    # Responsiveness: dS/dV = 3 at V = 1/2 (derived).  Tolerances: with n = 20001 and
    # h = 0.005 the step function adds at most 1/(n * 2h) = 0.005 and the central difference
    # of the exact law is 3 - 0.0015 (third-derivative term), hence |R - 3| < 0.01.  At h = 0.05
    # the value must equal the exact law's own central difference, 2.9224, within 1/(n * 0.1).
    n = 20001
    plan = _cube_law_plan(n)
    for v, s in ((0.60, 0.771428571), (0.52, 0.559745223), (2 / 3, 8 / 9)):
        assert abs(seat_share_at(*plan, v)[0] - s) <= 1 / n
    assert abs(responsiveness(*plan, h=0.005, at=0.5)[0] - 3) < 0.01
    finite = (cube(0.55) - cube(0.45)) / 0.1
    assert abs(responsiveness(*plan, h=0.05, at=0.5)[0] - finite) <= 1 / (n * 0.1)
    assert finite == pytest.approx(2.9224, abs=1e-4)


def test_symmetric_plans_have_zero_bias():
    # Derived: for shares symmetric about their mean (equal turnout), as many districts lie
    # above the statewide share as below, so S(1/2) = 1/2; the band average vanishes too.
    units = [[0.33, 0.40, 0.43, 0.46, 0.53], [0.5, 0.6, 0.7], [0.2, 0.3, 0.4, 0.5],
             [0.45, 0.45, 0.55, 0.55]]
    data = from_shares(*units)
    np.testing.assert_allclose(partisan_bias(*data), 0.0, atol=1e-15)
    np.testing.assert_allclose(symmetry_bias(*data, band=0.05), 0.0, atol=1e-12)
    np.testing.assert_allclose(symmetry_bias(*data, band=0.2), 0.0, atol=1e-12)
    # and gives a, at b's vote, b's seats (derived; ties at 50 % included: 0.5, 3.5)
    seats_b = np.array([len(u) for u in units]) - seats_a(*data)
    np.testing.assert_array_equal(seats_b, [4, 0.5, 3.5, 2])
    np.testing.assert_array_equal(seats_at_flipped_vote(*data), seats_b)


def test_flipped_vote_worked_example():
    # MM-1 shares shifted from 0.484 to 1 - 0.484 = 0.516 (+0.032): 0.332, 0.432, 0.482,
    # 0.502, 0.832 -> a wins 2 seats (hand-computed).
    assert seats_at_flipped_vote(*from_shares(MM1))[0] == 2.0


def test_vote_weighted_swing_hits_the_target_share():
    # Uniform swing with the vote-weighted reference (the definition): the shifted
    # plan x_i + (v - V) has vote-weighted share exactly v, and S(v) counts its seats.
    rng = np.random.default_rng(12)
    n = rng.integers(100, 5000, 15).astype(float)
    x = rng.uniform(0.25, 0.75, 15)
    unit = np.zeros(15, np.int64)
    V = (n * x).sum() / n.sum()
    for v in (0.4, 0.47, 0.5, 0.55, 0.61):
        shifted = x + (v - V)
        assert (n * shifted).sum() / n.sum() == pytest.approx(v, abs=1e-14)
        assert seat_share_at(unit, n * x, n * (1 - x), 1, v)[0] * 15 == np.sum(shifted > 0.5)
    # with unequal turnout the unweighted-mean reference differs
    vw = partisan_bias(unit, n * x, n * (1 - x), 1)
    dm = partisan_bias(unit, n * x, n * (1 - x), 1, reference="district_mean")
    assert vw[0] == np.sum(x > V) / 15 - 0.5 and dm[0] == np.sum(x > x.mean()) / 15 - 0.5


def test_responsiveness_at_observed_vote_agrees_with_the_general_curve():
    rng = np.random.default_rng(13)
    sizes = rng.integers(1, 30, 300)
    unit = np.repeat(np.arange(300), sizes)
    n = rng.integers(100, 5000, unit.size).astype(float)
    x = rng.uniform(0.2, 0.8, unit.size)
    a, b = n * x, n * (1 - x)
    V = np.bincount(unit, a) / np.bincount(unit, n)
    for h in (0.02, 0.05, 0.1):
        np.testing.assert_allclose(responsiveness(unit, a, b, 300, h=h),
                                   responsiveness(unit, a, b, 300, h=h, at=V), atol=1e-12)


def test_invalid_reference_and_band():
    with pytest.raises(ValueError, match="reference"):
        partisan_bias(*from_shares(MM1), reference="median")
    with pytest.raises(ValueError, match="band"):
        symmetry_bias(*from_shares(MM1), band=0.7)
