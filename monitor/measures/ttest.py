"""Two-sample t statistic from summary statistics (pooled or Welch), vectorised.

References
----------
.. [1] NIST/SEMATECH e-Handbook of Statistical Methods, section 1.3.5.3, "Two-Sample t-Test for
       Equal Means" (pooled and Welch-Satterthwaite formulas).
.. [2] B. L. Welch, "The generalization of 'Student's' problem when several different population
       variances are involved", Biometrika 34 (1947) 28-35.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from scipy import stats

VARIANTS = ("welch", "pooled")


class TTestResult(NamedTuple):
    """statistic t, degrees of freedom, standard error of the difference, two-sided p."""

    statistic: np.ndarray
    df: np.ndarray
    se: np.ndarray
    pvalue: np.ndarray


def t_test_from_summary(mean1, sd1, n1, mean2, sd2, n2, variant: str = "welch") -> TTestResult:
    """Two-sample t-test of ``mean1 - mean2`` from means, sample SDs (ddof=1) and sizes.

    pooled:
        ``s_p^2 = ((n1-1) s1^2 + (n2-1) s2^2) / (n1+n2-2)``, ``SE = s_p sqrt(1/n1 + 1/n2)``,
        ``df = n1 + n2 - 2``.
    welch:
        ``SE = sqrt(s1^2/n1 + s2^2/n2)``,
        ``df = SE^4 / ((s1^2/n1)^2/(n1-1) + (s2^2/n2)^2/(n2-1))`` (Welch-Satterthwaite).

    ``t = (mean1 - mean2) / SE`` and ``p = 2 P(T_df > |t|)``.  Every input broadcasts; an element
    is NaN where the test is undefined: Welch needs 2 members per sample, pooled n1 + n2 >= 3
    with a member in each (a sample of one adds nothing to the pooled variance, its SD may be
    NaN), and neither is defined when ``SE == 0`` (both samples constant).

    Examples
    --------
    NIST/SEMATECH e-Handbook section 1.3.5.3 (n = 249 and 79):

    >>> r = t_test_from_summary(20.14458, 6.41470, 249, 30.48101, 6.10771, 79, "pooled")
    >>> round(float(r.statistic), 5), float(r.df)
    (-12.62059, 326.0)
    """
    if variant not in VARIANTS:
        raise ValueError(f"variant must be one of {VARIANTS}, got {variant!r}")
    m1, s1, n1, m2, s2, n2 = (np.asarray(v, dtype=np.float64) for v in (mean1, sd1, n1, mean2, sd2, n2))
    with np.errstate(invalid="ignore", divide="ignore"):
        v1, v2 = s1**2, s2**2
        if variant == "pooled":
            ok = (n1 >= 1) & (n2 >= 1) & (n1 + n2 >= 3)
            df = n1 + n2 - 2.0
            ss1 = np.where(n1 == 1, 0.0, (n1 - 1.0) * v1)
            ss2 = np.where(n2 == 1, 0.0, (n2 - 1.0) * v2)
            sp2 = (ss1 + ss2) / df
            se = np.sqrt(sp2 * (1.0 / n1 + 1.0 / n2))
        else:
            ok = (n1 >= 2) & (n2 >= 2)
            q1, q2 = v1 / n1, v2 / n2
            se = np.sqrt(q1 + q2)
            df = (q1 + q2) ** 2 / (q1**2 / (n1 - 1.0) + q2**2 / (n2 - 1.0))
        ok = ok & (se > 0)
        t = np.where(ok, (m1 - m2) / np.where(ok, se, 1.0), np.nan)
    df = np.where(ok, df, np.nan)
    p = np.where(ok, 2.0 * stats.t.sf(np.abs(np.where(ok, t, 0.0)), np.where(ok, df, 1.0)), np.nan)
    return TTestResult(t, df, np.where(ok, se, np.nan), p)
