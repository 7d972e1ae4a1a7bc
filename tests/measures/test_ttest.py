"""The two-sample t-test behind lopsided_t, against published worked examples and scipy."""

import numpy as np
import pytest
from scipy import stats

from monitor.measures import lopsided_test, t_test_from_summary

# NIST/SEMATECH e-Handbook of Statistical Methods, section 1.3.5.3 "Two-Sample t-Test for Equal
# Means", AUTO83B data (US vs Japanese cars, mpg): summary statistics and results as printed.
NIST = dict(mean1=20.14458, sd1=6.41470, n1=249, mean2=30.48101, sd2=6.10771, n2=79)


def test_nist_pooled():
    # Published: T = -12.62059, pooled SD 6.34260, nu = 326 (values rounded to 5 decimals).
    r = t_test_from_summary(**NIST, variant="pooled")
    assert abs(r.statistic - (-12.62059)) <= 5e-6
    assert r.df == 326
    pooled_sd = r.se / np.sqrt(1 / 249 + 1 / 79)
    assert abs(pooled_sd - 6.34260) <= 5e-6


def test_nist_welch():
    # The NIST page gives only the Welch-Satterthwaite formula.  T = -12.94627 and
    # nu = 136.87499 for the same summary statistics are printed in the Boost.Math
    # documentation's two-sample t-test example (Boost C++ Libraries, Math Toolkit, "Comparing
    # the means of two samples with the Students-t test").
    r = t_test_from_summary(**NIST, variant="welch")
    assert abs(r.statistic - (-12.94627)) <= 5e-6
    assert abs(r.df - 136.87499) <= 5e-6


# NAG Library routine g07caf / g07cac, example program results (summary-statistics t-test):
# x: n = 4, mean 25.0, SD 0.8185; y: n = 8, mean 21.0, SD 4.2083.  Published to 4 decimals.
NAG = dict(mean1=25.0, sd1=0.8185, n1=4, mean2=21.0, sd2=4.2083, n2=8)


@pytest.mark.parametrize(
    "variant, t, df, p, ci",
    [
        ("pooled", 1.8403, 10.0, 0.0955, (-0.8429, 8.8429)),   # "equal variances"
        ("welch", 2.5922, 7.9925, 0.0320, (0.4410, 7.5590)),   # "unequal variances"
    ],
)
def test_nag_g07caf(variant, t, df, p, ci):
    r = t_test_from_summary(**NAG, variant=variant)
    assert abs(r.statistic - t) <= 5e-5
    assert abs(r.df - df) <= 5e-5
    assert abs(r.pvalue - p) <= 5e-5
    half = stats.t.ppf(0.975, r.df) * r.se
    assert abs((4.0 - half) - ci[0]) <= 5e-5
    assert abs((4.0 + half) - ci[1]) <= 5e-5


def _plan(win_a_shares, win_b_shares):
    """One unit: districts a won at the given a-shares, districts b won at the given b-shares."""
    x = np.r_[win_a_shares, 1 - np.asarray(win_b_shares)]
    return np.zeros(x.size, np.int64), 1000 * x, 1000 * (1 - x)


def test_lopsided_worked_example_sign_flipped():
    # Test definition: Wang (2016), "Three Tests for Practical Evaluation of Partisan
    # Gerrymandering", 68 Stanford Law Review 1263 (the lopsided-wins t-test; which t variant he
    # used is from memory, so both are checked). Values computed with scipy.stats.ttest_ind
    # (reference library), not published figures: X = a's winning shares,
    # Y = b's winning shares; raw pooled t = -8.98146 (df 7, p 4.3233e-05), raw Welch
    # t = -7.15030 (df 2.56204, p 0.0093223).  b's wins are the lopsided ones, a benefits: the
    # stored statistic is the negated raw t, +8.98146 / +7.15030.
    plan = _plan([0.55, 0.56, 0.57, 0.58, 0.60, 0.62], [0.80, 0.85, 0.75])
    pooled = lopsided_test(*plan, 1, variant="pooled")
    welch = lopsided_test(*plan, 1, variant="welch")
    assert abs(pooled.statistic[0] - 8.98146) <= 1e-5 and pooled.df[0] == 7
    assert abs(pooled.pvalue[0] - 4.3233e-05) <= 1e-9
    assert abs(welch.statistic[0] - 7.15030) <= 1e-5 and abs(welch.df[0] - 2.56204) <= 1e-5
    assert abs(welch.pvalue[0] - 0.0093223) <= 1e-7


@pytest.mark.parametrize("variant, equal_var", [("pooled", True), ("welch", False)])
def test_lopsided_matches_scipy_ttest_ind(variant, equal_var):
    # Reference library: scipy.stats.ttest_ind on the two winners' samples of each unit.
    rng = np.random.default_rng(11)
    units, a, b, samples = [], [], [], []
    for u in range(300):
        n1, n2 = rng.integers(2, 30, 2)
        x = rng.uniform(0.5005, 0.95, n1)
        y = rng.uniform(0.5005, 0.95, n2)
        turnout = rng.integers(1000, 100000, n1 + n2).astype(float)
        share_a = np.r_[x, 1 - y]
        units.append(np.full(n1 + n2, u))
        a.append(turnout * share_a)
        b.append(turnout * (1 - share_a))
        samples.append((turnout[:n1] * x / turnout[:n1], turnout[n1:] * y / turnout[n1:]))
    r = lopsided_test(np.concatenate(units), np.concatenate(a), np.concatenate(b), 300, variant=variant)
    for u, (x, y) in enumerate(samples):
        ref = stats.ttest_ind(x, y, equal_var=equal_var)
        assert r.statistic[u] == pytest.approx(-ref.statistic, rel=1e-9, abs=1e-12)
        assert r.pvalue[u] == pytest.approx(ref.pvalue, rel=1e-9, abs=1e-15)
        assert r.df[u] == pytest.approx(ref.df, rel=1e-9)


def test_pooled_with_a_sample_of_one_matches_scipy():
    # The pooled test is defined for n1 = 1 (df = n1 + n2 - 2); reference: scipy.stats.ttest_ind.
    y = [0.5, 0.6, 0.65, 0.8]
    r = t_test_from_summary(0.7, np.nan, 1, np.mean(y), np.std(y, ddof=1), 4, variant="pooled")
    ref = stats.ttest_ind([0.7], y, equal_var=True)
    assert r.statistic == pytest.approx(ref.statistic, rel=1e-12) and r.df == 3
    assert r.pvalue == pytest.approx(ref.pvalue, rel=1e-12)


def test_undefined_cases_are_nan():
    welch = t_test_from_summary([1.0, 1.0, 1.0], [1.0, 0.0, 1.0], [1, 5, 5], [0.0, 0.0, 0.0],
                                [1.0, 0.0, 1.0], [5, 5, 5])
    assert np.isnan(welch.statistic[0]) and np.isnan(welch.pvalue[0])   # Welch: a sample of one
    assert np.isnan(welch.statistic[1]) and np.isnan(welch.df[1])       # both samples constant
    assert np.isfinite(welch.statistic[2])
    pooled = t_test_from_summary([1.0, 1.0, 1.0], [np.nan, 0.0, 1.0], [1, 5, 0], [0.0, 0.0, 0.0],
                                 [np.nan, 0.0, 1.0], [1, 5, 5], variant="pooled")
    assert np.isnan(pooled.statistic).all()                              # n1 + n2 = 2; SE 0; n1 = 0
    with pytest.raises(ValueError, match="variant"):
        t_test_from_summary(0, 1, 3, 0, 1, 3, variant="student")


def test_lopsided_needs_two_outright_wins_per_party_in_both_variants():
    # a wins once (at 70 %), b four times: pooled t would exist, the lopsided test does not.
    x = np.array([0.7, 0.5, 0.4, 0.35, 0.2])
    plan = (np.zeros(5, np.int64), 1000 * x, 1000 * (1 - x), 1)
    for variant in ("pooled", "welch"):
        r = lopsided_test(*plan, variant=variant)
        assert np.isnan(r.statistic[0]) and np.isnan(r.pvalue[0]) and r.wins_a[0] == 1
