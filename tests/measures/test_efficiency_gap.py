"""Efficiency gap: worked examples with the arithmetic shown, and the paper's identities."""

from fractions import Fraction

import numpy as np
import pytest

from monitor.measures import (
    efficiency_gap,
    efficiency_gap_equal_turnout,
    efficiency_gap_seats,
    seats_a,
    wasted_votes,
)


def one_unit(a, b):
    a, b = np.asarray(a, float), np.asarray(b, float)
    return np.zeros(a.size, np.int64), a, b, 1


def test_authors_example_ten_districts():
    # Stephanopoulos & McGhee (2015), 82 U. Chi. L. Rev. 831: 1,000 voters in 10 districts,
    # A has 55 % of the vote and 8 seats, A wastes 150 votes, B 350, gap 20 %, "2 extra
    # seats" (the aggregates as reported in a newspaper summary of the paper; the district
    # split below is ours - any split with 8 wins and 550 A votes gives the same numbers).
    # A wins 8 districts 60-40:  A wastes 60 - 50 = 10 each -> 80;  B wastes 40 each -> 320
    # A loses 2 districts 35-65: A wastes 35 each -> 70;       B wastes 65 - 50 = 15 each -> 30
    # W_A = 80 + 70 = 150, W_B = 320 + 30 = 350, EG = (350 - 150) / 1000 = 0.20
    plan = one_unit([60] * 8 + [35] * 2, [40] * 8 + [65] * 2)
    w_a, w_b = wasted_votes(*plan)
    assert (w_a[0], w_b[0]) == (150.0, 350.0)
    assert efficiency_gap(*plan)[0] == pytest.approx(0.20, abs=1e-15)
    assert efficiency_gap_seats(*plan)[0] == pytest.approx(2.0, abs=1e-14)


def test_newspaper_example_packed_district():
    # Detroit Free Press (2017) illustration of the same definition: one district D 95-R 5,
    # nine districts R 55-D 45, 100 voters each (party a = D).
    # D wastes 95 - 50 = 45 in the district it wins and 45 in each of nine it loses: 45 + 405 = 450
    # R wastes 5 where it loses and 55 - 50 = 5 in each of nine it wins:            5 + 45 = 50
    # EG_D = (50 - 450) / 1000 = -0.40 (40 % for R)
    plan = one_unit([95] + [45] * 9, [5] + [55] * 9)
    w_a, w_b = wasted_votes(*plan)
    assert (w_a[0], w_b[0]) == (450.0, 50.0)
    assert efficiency_gap(*plan)[0] == pytest.approx(-0.40, abs=1e-15)


def test_hand_computed_five_districts():
    # Hand-computed: 5 x 100 voters, A wins three 60-40 and loses two 20-80.
    # W_A = 3 * (60 - 50) + 2 * 20 = 70;  W_B = 3 * 40 + 2 * (80 - 50) = 180
    # EG = (180 - 70) / 500 = 0.22
    plan = one_unit([60] * 3 + [20] * 2, [40] * 3 + [80] * 2)
    w_a, w_b = wasted_votes(*plan)
    assert (w_a[0], w_b[0]) == (70.0, 180.0)
    assert efficiency_gap(*plan)[0] == pytest.approx(0.22, abs=1e-15)


def test_hand_computed_unequal_turnout_with_tie():
    # Hand-computed, exact fractions (tie convention: each party wastes n/4):
    # district   a    b    n     winner  W_a               W_b
    #   1        30   70   100   b       30                70 - 50  = 20
    #   2       520  480  1000   a       520 - 500 = 20    480
    #   3       700  300  1000   a       700 - 500 = 200   300
    #   4       150  350   500   b       150               350 - 250 = 100
    #   5       400  400   800   tie     800/4 = 200       200
    # W_a = 600, W_b = 1100, EG = 500 / 3400 = 5/34
    a, b = [30, 520, 700, 150, 400], [70, 480, 300, 350, 400]
    plan = one_unit(a, b)
    w_a, w_b = wasted_votes(*plan)
    assert (w_a[0], w_b[0]) == (600.0, 1100.0)
    assert efficiency_gap(*plan)[0] == pytest.approx(5 / 34, abs=1e-15)
    # identity with the turnout-weighted seat share S_w = (1000 + 1000 + 800/2) / 3400
    s_w, v = Fraction(2400, 3400), Fraction(1800, 3400)
    assert (s_w - Fraction(1, 2)) - 2 * (v - Fraction(1, 2)) == Fraction(5, 34)


def test_clean_sweep_above_three_quarters_is_negative():
    # Derived from (S - 1/2) - 2 (V - 1/2): V = 0.8, S = 1 gives 3/2 - 1.6 = -0.10 (the gap
    # "favours" the losing party once a party's vote exceeds 75 %).
    plan = one_unit([80] * 5, [20] * 5)
    assert efficiency_gap(*plan)[0] == pytest.approx(-0.10, abs=1e-15)
    assert efficiency_gap_equal_turnout(*plan)[0] == pytest.approx(-0.10, abs=1e-15)


def test_identity_aggregate_state_assembly():
    # Stephanopoulos & McGhee's identity (S - 1/2) - 2(V - 1/2) on published aggregates:
    # Wisconsin Assembly 2012, Republicans (party a here) 48.6 % of the two-party vote and 60
    # of 99 seats, published gap 13 %-13.3 % (as reported by the Washington Post and others);
    # the residual comes from unequal turnout and imputation in the published figure, hence the
    # 1-point tolerance.  Plan with those aggregates: 60 wins at 1000 votes each and 39 losses,
    # equal turnout, a's votes 0.486 * 99000.
    wins, losses = 60, 39
    a_total = 0.486 * 99 * 1000
    win_share = 0.51
    loss_share = (a_total - wins * win_share * 1000) / (losses * 1000)
    plan = one_unit([win_share * 1000] * wins + [loss_share * 1000] * losses,
                    [(1 - win_share) * 1000] * wins + [(1 - loss_share) * 1000] * losses)
    assert seats_a(*plan)[0] == 60
    assert efficiency_gap_equal_turnout(*plan)[0] == pytest.approx(0.133, abs=0.01)


def _random_elections(rng, n_units, equal_turnout):
    sizes = rng.integers(1, 40, n_units)
    unit = np.repeat(np.arange(n_units), sizes)
    n = np.full(unit.size, 1000.0) if equal_turnout else rng.integers(1, 5000, unit.size).astype(float)
    a = np.round(n * rng.uniform(0, 1, unit.size))
    tie = rng.random(unit.size) < 0.1
    n = np.where(tie, 2 * np.ceil(n / 2), n)
    a = np.where(tie, n / 2, a)
    return unit, a, n - a, n_units


def test_identity_with_turnout_weighted_seats():
    # Derived from the 50 % wasted-vote rule (per district W_b - W_a = n (1/2 + s - 2x)):
    # EG = (S_w - 1/2) - 2 (V - 1/2) exactly, for any turnout, ties included.
    unit, a, b, n_units = _random_elections(np.random.default_rng(3), 2000, equal_turnout=False)
    n = a + b
    seat = np.where(a > b, 1.0, np.where(a < b, 0.0, 0.5))
    s_w = np.bincount(unit, n * seat) / np.bincount(unit, n)
    v = np.bincount(unit, a) / np.bincount(unit, n)
    eg = efficiency_gap(unit, a, b, n_units)
    np.testing.assert_allclose(eg, (s_w - 0.5) - 2 * (v - 0.5), rtol=0, atol=1e-12)
    assert np.all(np.abs(eg) <= 0.5)


def test_equal_turnout_form_is_exact_with_equal_turnout():
    # Stephanopoulos & McGhee (2015): with equal district turnout the gap reduces to
    # (S - 1/2) - 2 (V - 1/2).
    data = _random_elections(np.random.default_rng(4), 2000, equal_turnout=True)
    np.testing.assert_allclose(efficiency_gap(*data), efficiency_gap_equal_turnout(*data), rtol=0, atol=1e-12)


def test_wasted_votes_add_to_half_the_votes():
    # Under the 50 % rule every district wastes exactly n_i / 2 votes in total (derived), so
    # W_a + W_b = (sum n_i) / 2 exactly (integer votes: the float arithmetic is exact).
    unit, a, b, n_units = _random_elections(np.random.default_rng(5), 2000, equal_turnout=False)
    w_a, w_b = wasted_votes(unit, a, b, n_units)
    assert np.array_equal(w_a + w_b, np.bincount(unit, a + b) / 2)


def test_seat_form_is_gap_times_districts():
    unit, a, b, n_units = _random_elections(np.random.default_rng(6), 500, equal_turnout=False)
    np.testing.assert_allclose(efficiency_gap_seats(unit, a, b, n_units),
                               efficiency_gap(unit, a, b, n_units) * np.bincount(unit), rtol=1e-15, atol=0)


def test_empty_units_and_vote_less_districts_are_nan():
    # unit 1: (60, 40) W_a = 10, W_b = 40; (20, 80) W_a = 20, W_b = 30 -> EG = (70 - 30) / 200
    unit = np.array([1, 1, 3, 3])
    a = np.array([60.0, 20.0, 0.0, 10.0])
    b = np.array([40.0, 80.0, 0.0, 5.0])
    eg = efficiency_gap(unit, a, b, 4)
    assert np.isnan(eg[[0, 2, 3]]).all()
    assert eg[1] == pytest.approx(0.2, abs=1e-15)
