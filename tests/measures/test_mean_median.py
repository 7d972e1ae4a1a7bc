"""Mean-median difference and its z-test."""

import math

import numpy as np
import pytest
from scipy import stats

from monitor.measures import MM_SE_FACTOR, mean_median, mean_median_test


def from_shares(*units):
    """Units given as lists of party-a shares, 1000 two-party votes per district."""
    unit = np.concatenate([np.full(len(x), i) for i, x in enumerate(units)]).astype(np.int64)
    x = np.concatenate([np.asarray(u, float) for u in units])
    return unit, 1000 * x, 1000 * (1 - x), len(units)


MM1 = [0.30, 0.40, 0.45, 0.47, 0.80]


def test_worked_example():
    # Definition: median minus mean of the district shares, McDonald & Best (2015), "Unfair Partisan
    # Gerrymanders in Politics and Law: A Diagnostic Applied to Six Cases", Election Law Journal
    # 14(4) (abstract). Value hand-computed from that definition, not a published figure:
    # mean 0.484, median 0.45, MM = -0.034.
    assert mean_median(*from_shares(MM1))[0] == pytest.approx(-0.034, abs=1e-12)


def test_even_number_of_districts_uses_the_two_middle_shares():
    # Hand-computed: (0.2, 0.4, 0.5, 0.9): median (0.4 + 0.5) / 2 = 0.45, mean 0.5 -> -0.05.
    assert mean_median(*from_shares([0.9, 0.2, 0.5, 0.4]))[0] == pytest.approx(-0.05, abs=1e-12)


def test_se_factor_is_sqrt_half_pi_minus_one():
    # Derived: Var(median - mean) = (pi/2 - 1) sigma^2 / N for normal data, sqrt = 0.7555106398.
    assert MM_SE_FACTOR == pytest.approx(0.7555106398, abs=1e-10)


def test_z_and_p_of_worked_example():
    # COMPUTED with scipy: z = MM / (sqrt(pi/2 - 1) s / sqrt(N)), s the sample SD (ddof=1),
    # p = 2 * norm.sf(|z|).
    r = mean_median_test(*from_shares(MM1))
    s = np.std(MM1, ddof=1)
    z = -0.034 / (math.sqrt(math.pi / 2 - 1) * s / math.sqrt(5))
    assert r.z[0] == pytest.approx(z, rel=1e-10)
    assert r.pvalue[0] == pytest.approx(2 * stats.norm.sf(abs(z)), rel=1e-10)
    assert r.z[0] < 0  # a's median below its mean: disadvantages a


def test_z_is_standard_normal_under_the_null():
    # Asymptotic theory (derived above): for i.i.d. normal shares z ~ N(0, 1).  With N = 401
    # the finite-N factor is 0.756 vs 0.7555 (a Monte Carlo estimate with 200,000 normal
    # samples, not a published figure), so SD(z) = 1 to within 0.1 %; 4000 units give a Monte Carlo SE of 0.011 on SD(z) and 0.0034 on the 5 %
    # rejection rate.  Tolerances: 0.035 and 0.012 (about 3.5 SE).  A wrong factor (e.g. the
    # median's alone, 1.2533) would give SD(z) = 0.6.
    rng = np.random.default_rng(2024)
    units, n = 4000, 401
    x = rng.normal(0.5, 0.08, (units, n))
    unit = np.repeat(np.arange(units), n)
    r = mean_median_test(unit, 1000 * x.ravel(), 1000 * (1 - x.ravel()), units)
    assert abs(np.std(r.z) - 1) < 0.035
    assert abs(np.mean(r.pvalue < 0.05) - 0.05) < 0.012


def test_symmetric_shares_give_zero():
    # Derived: MM = 0 for any set symmetric about its mean (here about 0.37 and 0.61).
    units = [[0.37 - d for d in (0.1, 0.05, 0.02)] + [0.37] + [0.37 + d for d in (0.1, 0.05, 0.02)],
             [0.61 - 0.2, 0.61 - 0.01, 0.61 + 0.01, 0.61 + 0.2]]
    np.testing.assert_allclose(mean_median(*from_shares(*units)), 0.0, atol=1e-12)


def test_uniform_swing_leaves_mean_median_unchanged():
    # Derived: adding a constant to every share moves median and mean alike.
    base = np.array(MM1)
    mm = mean_median(*from_shares(base, base + 0.07, base - 0.1))
    np.testing.assert_allclose(mm, -0.034, atol=1e-12)


def test_one_and_two_districts_are_identically_zero_and_empty_is_nan():
    unit = np.array([1, 2, 2])
    a, b = np.array([300.0, 100.0, 900.0]), np.array([700.0, 900.0, 100.0])
    mm = mean_median(unit, a, b, 3)
    assert np.isnan(mm[0]) and mm[1] == 0 and mm[2] == pytest.approx(0.0, abs=1e-15)


def test_constant_shares_give_exact_zero_and_undefined_z():
    r = mean_median_test(*from_shares([0.6] * 7))
    assert r.statistic[0] == 0.0
    assert np.isnan(r.z[0]) and np.isnan(r.pvalue[0])


@pytest.mark.parametrize("n", [1, 2, 7, 18, 101, 400])
def test_median_of_equal_units_against_numpy(n):
    # reference: numpy.median per unit (equal units take the row-sort path of sorted_share)
    from monitor.measures.segments import Segments

    g = np.random.default_rng(n)
    a, b = g.integers(1, 900, 30 * n).astype(float), g.integers(1, 900, 30 * n).astype(float)
    seg = Segments(np.repeat(np.arange(30), n), a, b, 30)
    want = np.median((a / (a + b)).reshape(30, n), axis=1)
    assert np.array_equal(seg.median_share(), want)
