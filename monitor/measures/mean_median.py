r"""Mean-median difference of party a's district shares, and its z-test under normality.

Standard error (derivation).  For N i.i.d. N(mu, sigma^2) shares, the sample mean has variance
sigma^2/N and the sample median asymptotically (pi/2) sigma^2/N.  The mean is the
minimum-variance unbiased estimator of mu and the median is unbiased, so
Cov(mean, median) = Var(mean) = sigma^2/N (for any unbiased T, Cov(mean, T - mean) = 0, else a
combination of the two would beat the mean).  Hence

.. math:: \mathrm{Var}(\mathrm{median} - \mathrm{mean}) = (\pi/2 - 1)\,\sigma^2/N,
          \qquad SE = \sqrt{\pi/2 - 1}\,\sigma/\sqrt{N} = 0.7555\,\sigma/\sqrt{N}.

With sigma estimated by the sample SD s (ddof=1), ``z = MM / (0.7555 s / sqrt(N))`` and
``p = 2 (1 - Phi(|z|))``.  For small N the asymptotic factor overstates the SE (the test is
conservative).

References
----------
.. [1] M. D. McDonald & R. E. Best, "Unfair Partisan Gerrymanders in Politics and Law: A
       Diagnostic Applied to Six Cases", Election Law Journal 14 (2015),
       doi:10.1089/elj.2015.0358.
.. [2] S. S.-H. Wang, "Three Tests for Practical Evaluation of Partisan Gerrymandering",
       68 Stan. L. Rev. 1263 (2016) (mean-median test; its SE factor ~0.756 is from memory).
.. [3] R. E. Best, S. J. Donahue, J. Krasno, D. B. Magleby & M. D. McDonald, "Considering the
       Prospects for Establishing a Packing Gerrymandering Standard", Election Law Journal 17
       (2018), doi:10.1089/elj.2016.0392.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np
from scipy import stats

from .registry import FAVOURS_A, Flag, Measure
from .segments import Segments

#: sqrt(pi/2 - 1): SE of (median - mean) in units of sigma/sqrt(N) for normal data.
MM_SE_FACTOR = math.sqrt(math.pi / 2.0 - 1.0)


class MeanMedianTest(NamedTuple):
    """Per unit: MM, its z (positive favours a), two-sided p."""

    statistic: np.ndarray
    z: np.ndarray
    pvalue: np.ndarray


def mean_median_of(seg: Segments) -> np.ndarray:
    """median - mean of x_i per unit; see :func:`mean_median`."""
    med = seg.median_share()
    # median - mean = -mean(x_i - median): summing deviations avoids cancellation and gives an
    # exact 0 for a constant sample.
    dev = seg.share - seg.spread(med)
    return seg.mask(-seg.divide(seg.sum(dev), seg.count.astype(np.float64)))


def mean_median_test_of(seg: Segments) -> MeanMedianTest:
    """MM, z and p per unit; see :func:`mean_median_test`."""
    mm = mean_median_of(seg)
    n, _, sd = seg.group_stats(seg.share, np.ones(seg.unit.shape, dtype=bool))
    se = MM_SE_FACTOR * sd / np.sqrt(np.maximum(n, 1.0))
    z = seg.mask(seg.divide(mm, np.where(np.isfinite(se), se, 0.0)))
    with np.errstate(invalid="ignore"):
        p = np.where(np.isfinite(z), 2.0 * stats.norm.sf(np.abs(np.nan_to_num(z))), np.nan)
    return MeanMedianTest(mm, z, p)


def mean_median(unit, votes_a, votes_b, n_units: int) -> np.ndarray:
    """Mean-median difference ``MM = median(x_i) - mean(x_i)`` per unit [1]_ [3]_.

    Unweighted district shares x_i of party a; even N takes the mean of the two middle shares.
    Sign: positive favours party a (negative: a's median district is weaker than its average
    district, a's strength is concentrated in a few lopsided seats).  MM is identically 0 for
    N <= 2 (the engine reports it as undefined there) and for any set of shares symmetric about
    their mean.  NaN for empty units.

    Examples
    --------
    >>> x = [0.30, 0.40, 0.45, 0.47, 0.80]
    >>> mean_median([0] * 5, [100 * v for v in x], [100 * (1 - v) for v in x], 1).round(12)
    array([-0.034])
    """
    return mean_median_of(Segments(unit, votes_a, votes_b, n_units))


def mean_median_test(unit, votes_a, votes_b, n_units: int) -> MeanMedianTest:
    """MM with ``z = MM / (sqrt(pi/2 - 1) s / sqrt(N))`` and its two-sided normal p-value.

    See the module docstring for the derivation of the standard error.  z is NaN when all
    shares are equal (s = 0) or N < 2.  Sign of z: that of MM (positive favours party a).

    Examples
    --------
    >>> x = [0.30, 0.40, 0.45, 0.47, 0.80]
    >>> r = mean_median_test([0] * 5, [100 * v for v in x], [100 * (1 - v) for v in x], 1)
    >>> round(float(r.z[0]), 4)  # s = 0.18849, SE = 0.7555 * 0.18849 / sqrt(5) = 0.06369
    -0.5339
    """
    return mean_median_test_of(Segments(unit, votes_a, votes_b, n_units))


def _test(u) -> MeanMedianTest:
    return u.shared("mean_median_test", lambda: mean_median_test_of(u.seg))


def _gates(u):
    return u.asymmetry + [(u.n < 3, "identically 0 with fewer than 3 districts")]


DECLARED = (
    Measure(
        name="mean_median", order=110, label="Mean-median difference", signed=True, headline=True, table=True,
        plain="Compares party a's share in the middle district with its average share across districts. "
              "When a party's voters are packed into a few lopsided districts, its median district does "
              "worse than its average one.",
        formula="median(x_i) - mean(x_i), unweighted district shares of a", sign=FAVOURS_A,
        source="McDonald & Best, ELJ 14 (2015); Wang, 68 Stan. L. Rev. 1263 (2016); Best et al., ELJ 17 (2018)",
        p_value="two-sided normal p of z = MM / (sqrt(pi/2 - 1) s / sqrt(N))",
        summary="median minus mean of a's district shares, with its z-test p",
        compute=lambda u: (_test(u).statistic, _test(u).pvalue), undefined=_gates,
        null=mean_median, null_of=mean_median_of, flag=Flag("mean_median", null=True, p_value=True, short="mean-median"),
    ),
    Measure(
        name="mean_median_z", order=120, label="Mean-median z", signed=True, digits=2,
        plain="The mean-median difference divided by its standard error: how unusual the difference is "
              "for a plan of this size if district shares varied at random.",
        formula="MM / (sqrt(pi/2 - 1) s / sqrt(N)), s the sample SD of the x_i", sign=FAVOURS_A,
        source="SE of median - mean under normality (derived; Wang 2016 uses ~0.756, from memory)",
        p_value="two-sided normal p", summary="the mean-median difference over its standard error",
        compute=lambda u: (_test(u).z, _test(u).pvalue),
        undefined=lambda u: _gates(u) + [(np.isnan(_test(u).z), "all district shares are equal (zero standard error)")],
    ),
)
