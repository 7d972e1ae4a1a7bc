"""Cross-state context: where a unit's value lies among the other states' values of its cycle and
chamber (percentile and robust z-score), beside its national-pool null."""

from __future__ import annotations

import numpy as np
from scipy.special import ndtri

# 1 / Phi^{-1}(3/4) = 1.4826...: makes the MAD a consistent estimator of a normal SD.
_MAD_NORMAL = 1.0 / float(ndtri(0.75))


def _group_codes(values, group):
    v = np.asarray(values, dtype=np.float64)
    grp = np.asarray(group)
    if v.ndim != 1 or grp.shape != v.shape:
        raise ValueError("values and group must be 1-D arrays of the same length")
    live = np.flatnonzero(~np.isnan(v))
    _, code = np.unique(grp[live], return_inverse=True)
    return v, live, code.astype(np.int64)


def _live_sorted(values, group):
    """An all-NaN output of the values' shape, the indexes of the non-NaN values, their group codes,
    the values themselves and their order by (group, value)."""
    v, live, code = _group_codes(values, group)
    x = v[live]
    return np.full(v.shape, np.nan), live, code, x, np.lexsort((x, code))


def _sorted_group_median(vs, gs, counts):
    """Median of each group from values sorted by (group, value)."""
    start = np.r_[0, np.cumsum(counts)[:-1]]
    return 0.5 * (vs[start + (counts - 1) // 2] + vs[start + counts // 2])


def cross_state_percentile(values, group) -> np.ndarray:
    """Mid-rank percentile of each value among the values of its group, in [0, 1].

    ``pct_i = (#{j in g(i): x_j < x_i} + 1/2 #{j in g(i): x_j == x_i}) / n_g(i)`` over the
    non-NaN values of the group (itself included): the ``kind="mean"`` percentile of
    ``scipy.stats.percentileofscore``, divided by 100.  NaN values get NaN and are not counted.

    Examples
    --------
    >>> cross_state_percentile([0.1, 0.3, 0.2, 5.0], [1, 1, 1, 2]).tolist()
    [0.16666666666666666, 0.8333333333333334, 0.5, 0.5]
    """
    out, live, code, x, order = _live_sorted(values, group)
    if live.size == 0:
        return out
    xs, gs = x[order], code[order]
    counts = np.bincount(gs)
    gstart = np.r_[0, np.cumsum(counts)[:-1]]
    new_run = np.r_[True, (gs[1:] != gs[:-1]) | (xs[1:] != xs[:-1])]
    run_id = np.cumsum(new_run) - 1
    run_start = np.flatnonzero(new_run)
    run_len = np.diff(np.r_[run_start, xs.size])
    less = run_start[run_id] - gstart[gs]
    out[live[order]] = (less + 0.5 * run_len[run_id]) / counts[gs]
    return out


def robust_z(values, group) -> np.ndarray:
    """Robust z-score within each group: ``(x - median_g) / (1.4826 * MAD_g)``.

    ``MAD_g = median_g |x - median_g|`` and ``1.4826 = 1 / Phi^{-1}(3/4)`` (so that the scaled MAD
    estimates the SD of normal data; the ``scale="normal"`` of
    ``scipy.stats.median_abs_deviation``).  NaN values are ignored and give NaN; a group whose MAD
    is 0 (half or more of its values equal) gives NaN for all its members: the scale is undefined.

    Examples
    --------
    >>> robust_z([1.0, 2.0, 3.0, 4.0, 100.0], [0, 0, 0, 0, 0]).round(3).tolist()
    [-1.349, -0.674, 0.0, 0.674, 65.426]
    """
    out, live, code, x, order = _live_sorted(values, group)
    if live.size == 0:
        return out
    counts = np.bincount(code[order])
    med = _sorted_group_median(x[order], code[order], counts)
    dev = np.abs(x - med[code])
    order2 = np.lexsort((dev, code))
    mad = _sorted_group_median(dev[order2], code[order2], counts)
    scale = _MAD_NORMAL * mad
    with np.errstate(invalid="ignore", divide="ignore"):
        z = np.where(scale[code] > 0, (x - med[code]) / scale[code], np.nan)
    out[live] = z
    return out
