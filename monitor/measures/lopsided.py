"""Lopsided-outcomes test: are one party's wins more lopsided than the other's?

References
----------
.. [1] S. S.-H. Wang, "Three Tests for Practical Evaluation of Partisan Gerrymandering",
       68 Stan. L. Rev. 1263 (2016).
.. [2] S. S.-H. Wang, "Three Practical Tests for Gerrymandering: Application to Maryland and
       Wisconsin", Election Law Journal 15 (2016) 367-384, doi:10.1089/elj.2016.0387.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from .registry import FAVOURS_A, Flag, Measure
from .segments import Segments
from .ttest import t_test_from_summary


class LopsidedResult(NamedTuple):
    """Per unit: t (positive favours a), two-sided p, df, seats won outright by a and by b."""

    statistic: np.ndarray
    pvalue: np.ndarray
    df: np.ndarray
    wins_a: np.ndarray
    wins_b: np.ndarray


def lopsided_of(seg: Segments, variant: str = "welch") -> LopsidedResult:
    """Lopsided-outcomes t-test per unit; see :func:`lopsided_test`."""
    won_a = seg.seat == 1.0
    won_b = seg.seat == 0.0
    n1, m1, s1 = seg.group_stats(seg.share, won_a)
    n2, m2, s2 = seg.group_stats(seg.share_b, won_b)
    raw = t_test_from_summary(m1, s1, n1, m2, s2, n2, variant)
    ok = (n1 >= 2) & (n2 >= 2)  # two outright wins per party, for both variants
    return LopsidedResult(
        statistic=seg.mask(np.where(ok, -raw.statistic, np.nan)),
        pvalue=seg.mask(np.where(ok, raw.pvalue, np.nan)),
        df=seg.mask(np.where(ok, raw.df, np.nan)),
        wins_a=n1,
        wins_b=n2,
    )


def lopsided_test(unit, votes_a, votes_b, n_units: int, variant: str = "welch") -> LopsidedResult:
    """Two-sample t-test of the winners' shares (Wang's lopsided-outcomes test [1]_ [2]_).

    Samples per unit: X = {x_i : a won i} (a's share where a won) and
    Y = {1 - x_i : b won i} (b's share where b won); exact ties belong to neither.
    The raw statistic ``t_raw = (mean X - mean Y) / SE`` is positive when a's wins are the more
    lopsided (a's voters are packed, which *disadvantages* a).  **The stored statistic is
    ``-t_raw``, so that positive favours party a**, like every signed measure here; the
    two-sided p-value is unchanged by the sign flip.

    ``variant``: ``"welch"`` (unequal variances, default) or ``"pooled"`` (Student); see
    :func:`~monitor.measures.ttest.t_test_from_summary`.  NaN when either party won fewer
    than 2 seats outright, or when the winners' shares of both parties are constant.

    Examples
    --------
    a wins narrowly six times, b wins big three times (a benefits: positive t):

    >>> x = [0.55, 0.56, 0.57, 0.58, 0.60, 0.62, 0.20, 0.15, 0.25]
    >>> r = lopsided_test([0] * 9, [100 * v for v in x], [100 * (1 - v) for v in x], 1, "pooled")
    >>> round(float(r.statistic[0]), 5), int(r.df[0])
    (8.98146, 7)
    """
    return lopsided_of(Segments(unit, votes_a, votes_b, n_units), variant)


def _test(u) -> LopsidedResult:
    return u.shared("lopsided", lambda: lopsided_of(u.seg, u.settings.lopsided_variant))


def _gates(u):
    lop = _test(u)
    return u.asymmetry + [
        ((lop.wins_a < 2) & (lop.wins_b < 2), "each party won fewer than 2 seats outright"),
        (lop.wins_a < 2, "party a won fewer than 2 seats outright (the test needs 2 per party)"),
        (lop.wins_b < 2, "party b won fewer than 2 seats outright (the test needs 2 per party)"),
        (np.isnan(lop.statistic), "the winners' shares are constant in both parties (zero standard error)"),
    ]


DECLARED = (
    Measure(
        name="lopsided_t", order=130, label="Lopsided-outcomes t", signed=True, digits=2, headline=True, table=True,
        plain="Compares how big each party's wins are. If one party wins its seats by much larger margins "
              "than the other, its voters may have been packed. The test asks whether the difference in "
              "average winning margins is larger than chance would give.",
        formula="-(mean X - mean Y) / SE, X = a's shares where a won, Y = b's shares where b won (ties in "
                "neither); Welch or pooled SE (setting lopsided_variant)",
        sign=FAVOURS_A + " (the negated published t: positive raw t means a's wins are more lopsided)",
        source="Wang, 68 Stan. L. Rev. 1263 (2016); ELJ 15 (2016) 367-384",
        p_value="two-sided t-test p (lopsided_p)",
        summary="t-test of each party's winning shares (Welch; pooled on request), with its p",
        compute=lambda u: (_test(u).statistic, _test(u).pvalue), undefined=_gates,
        flag=Flag("lopsided", p_value=True, short="lopsided t-test", label="Lopsided outcomes (t-test p)"),
    ),
)
