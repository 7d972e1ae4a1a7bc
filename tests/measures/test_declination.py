"""Declination (Warrington 2018), stored with the sign flipped: positive favours party a."""

import math

import numpy as np
import pytest

from monitor.measures import declination

from .test_mean_median import from_shares


def test_worked_example_and_its_mirror():
    # COMPUTED from Warrington's definition (Election Law Journal 17, 2018; arXiv:1705.09393):
    # x = (0.3, 0.3, 0.7): k = 2, ybar = 0.3, k' = 1, zbar = 0.7,
    # delta = (2/pi) (arctan(1.2) - arctan(0.6)) = 0.2136741375 (a disadvantaged).
    # Stored value: -delta.  The mirror (0.7, 0.7, 0.3) has +delta stored (derived: x -> 1 - x
    # negates delta).
    dec = declination(*from_shares([0.3, 0.3, 0.7], [0.7, 0.7, 0.3]))
    assert dec[0] == pytest.approx(-0.2136741375, abs=1e-9)
    assert dec[1] == pytest.approx(0.2136741375, abs=1e-9)
    assert (2 / math.pi) * (math.atan(1.2) - math.atan(0.6)) == pytest.approx(0.2136741375, abs=1e-9)


def test_undefined_when_a_party_wins_every_seat():
    # Warrington (2018), "Quantifying Gerrymandering Using the Vote Distribution", Election Law
    # Journal 17(1): no angle for a party without seats (that the paper leaves this case
    # undefined is from memory; derived here: the angle divides by the party's seat count k = 0).
    # (0.6, 0.7) and (0.2, 0.4, 0.1) and a single district are undefined (NaN), never 0.
    dec = declination(*from_shares([0.6, 0.7], [0.2, 0.4, 0.1], [0.55]))
    assert np.isnan(dec).all()


def test_mirror_symmetric_plans_give_zero():
    # Derived: delta(1 - x) = -delta(x), so a set equal to its own mirror has delta = 0.
    dec = declination(*from_shares([0.3, 0.7], [0.4, 0.45, 0.55, 0.6], [0.2, 0.35, 0.5, 0.65, 0.8]))
    np.testing.assert_allclose(dec, 0.0, atol=1e-12)


def test_tie_counts_half_on_each_side():
    # Project convention (documented in the module): a 50-50 district is half a loss and half a
    # win.  x = (0.3, 0.5, 0.8): k = 1.5, ybar = (0.3 + 0.25) / 1.5; k' = 1.5,
    # zbar = (0.8 + 0.25) / 1.5.  Hand-computed from the definition:
    k, ybar, zbar = 1.5, 0.55 / 1.5, 1.05 / 1.5
    delta = (2 / math.pi) * (math.atan((2 * zbar - 1) * 3 / k) - math.atan((1 - 2 * ybar) * 3 / k))
    unit, a, b, n = from_shares([0.3, 0.5, 0.8])
    got = declination(unit, a, b, n)[0]
    assert got == pytest.approx(-delta, abs=1e-12)
    # the convention is what makes the party swap exact with a tie present
    assert declination(unit, b, a, n)[0] == pytest.approx(delta, abs=1e-12)


def test_bounded_and_order_free():
    rng = np.random.default_rng(8)
    x = rng.uniform(0.05, 0.95, (500, 9))
    unit = np.repeat(np.arange(500), 9)
    dec = declination(unit, 1000 * x.ravel(), 1000 * (1 - x.ravel()), 500)
    perm = np.argsort(rng.random((500, 9)), axis=1)
    xp = np.take_along_axis(x, perm, axis=1).ravel()
    np.testing.assert_allclose(declination(unit, 1000 * xp, 1000 * (1 - xp), 500), dec, atol=1e-12)
    ok = ~np.isnan(dec)
    assert ok.sum() > 450 and np.all(np.abs(dec[ok]) < 1)
