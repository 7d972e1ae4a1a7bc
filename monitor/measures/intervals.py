r"""Intervals from simulated district-level vote noise around the observed election.

Model.  Each simulated election keeps every district's two-party turnout n_i and perturbs its
share independently,

.. math:: \tilde x_i = \mathrm{clip}(x_i + \sigma \varepsilon_i, 0, 1), \qquad
          \varepsilon_i \sim N(0, 1) \text{ i.i.d.},

with ``votes_a = n_i x~_i`` and ``votes_b = n_i (1 - x~_i)``; the measure is recomputed on each
simulated election and the interval is the (2.5 %, 97.5 %) percentile range of the simulated
values (linear interpolation).  This follows the "hypothetical elections" idea of Gelman & King
[1]_: the same campaign run again, with the districts' relative positions held and only
district-level chance variation redrawn.  Their model (from memory) also has a systematic
component and a statewide swing; we keep only the independent district term, with a fixed,
configurable SD sigma (a project choice, not an estimate; 0.03 means "the same election run
again moves a district by about 3 points").

Details that make results reproducible and exactly symmetric:

* antithetic pairs [2]_: each draw eps is used as +eps and -eps (``draws`` is rounded up to an
  even number).  Since the noise is symmetric this is the same model; it usually lowers the
  Monte Carlo error and makes the simulated values of the party-swapped election exactly the
  negated ones;
* noise is assigned by a district's rank within its unit (ordered by margin, turnout, share)
  from one matrix drawn column by column, so a unit's interval depends only on its own
  districts and the generator's state, not on the order of its rows or on which other units
  are computed with it (incremental recomputes give the same intervals as full ones).  The
  price: units share their random numbers (common random numbers), so the Monte Carlo errors of
  different units' intervals are correlated; each interval on its own is unaffected;
* a draw on which the measure is undefined (declination after a simulated sweep) is left out;
  the interval is NaN when fewer than ``min_defined`` (default 95 %) of the draws are defined.

References
----------
.. [1] A. Gelman & G. King, "A Unified Method of Evaluating Electoral Systems and Redistricting
       Plans", AJPS 38 (1994) 514-554.
.. [2] J. M. Hammersley & K. W. Morton, "A new Monte Carlo technique: antithetic variates",
       Proc. Cambridge Philos. Soc. 52 (1956) 449-475 (from memory).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping

import numpy as np

from .segments import Segments

#: Simulated district rows per chunk (at least one antithetic pair of every unit is done at
#: once): about 1 MB per temporary array, which stays in cache; larger chunks were slower.
MAX_ROWS = 1 << 17
#: Cached properties of :class:`Segments` that district-level share noise leaves unchanged.
FIXED_UNDER_NOISE = ("total", "count", "starts", "_filled", "total_votes", "has_empty_district", "defined")


def district_rank(seg: Segments) -> np.ndarray:
    """Rank of each district within its unit by (margin, turnout, share), stable."""
    order = np.lexsort((seg.share, seg.total, seg.margin, seg.unit))
    rank = np.empty(seg.unit.size, dtype=np.int64)
    rank[order] = np.arange(seg.unit.size) - seg.starts[seg.unit[order]]
    return rank


def noise_matrix(rng: np.random.Generator, pairs: int, width: int) -> np.ndarray:
    """Standard normals of shape (pairs, width); column r is the generator's r-th block of
    ``pairs`` numbers, whatever ``width`` is."""
    return rng.standard_normal((width, pairs)).T


def percentile_interval(values: np.ndarray, level: float = 0.95, min_defined: float = 0.95):
    """Row-wise (low, high) percentile interval of ``values`` (n_rows, draws), NaN ignored.

    Linear interpolation between order statistics (numpy's default ``quantile`` method); NaN
    for a row whose defined share is below ``min_defined`` or that has no defined value.
    """
    values = np.asarray(values, dtype=np.float64)
    n_rows, draws = values.shape
    v = np.sort(values, axis=1)  # NaN sort last
    m = np.sum(~np.isnan(values), axis=1)
    ok = (m >= 1) & (m >= min_defined * draws)
    out = []
    for p in ((1.0 - level) / 2.0, (1.0 + level) / 2.0):
        pos = p * np.maximum(m - 1, 0)
        i = np.floor(pos).astype(np.int64)
        j = np.minimum(i + 1, np.maximum(m - 1, 0))
        lo = np.take_along_axis(v, i[:, None], axis=1)[:, 0] if draws else np.full(n_rows, np.nan)
        hi = np.take_along_axis(v, j[:, None], axis=1)[:, 0] if draws else np.full(n_rows, np.nan)
        out.append(np.where(ok, lo + (pos - i) * (hi - lo), np.nan))
    return out[0], out[1]


def simulate(
    seg: Segments,
    measures: Mapping[str, Callable[[Segments], np.ndarray]],
    noise_sd: float,
    draws: int,
    rng: np.random.Generator,
) -> dict[str, np.ndarray]:
    """Each measure on ``draws`` (rounded up to even) noisy elections: name -> (n_units, D)."""
    pairs = -(-int(draws) // 2)
    out = {name: np.full((seg.n_units, 2 * pairs), np.nan) for name in measures}
    rows = seg.unit.size
    if pairs == 0 or rows == 0:
        return out
    z = noise_matrix(rng, pairs, int(seg.count.max()))
    rank = district_rank(seg)
    x = np.where(seg.total > 0, seg.share, 0.5)
    chunk = max(1, MAX_ROWS // (2 * rows))
    for p0 in range(0, pairs, chunk):
        p1 = min(p0 + chunk, pairs)
        shift = noise_sd * z[p0:p1][:, rank]
        sims = np.clip(np.concatenate([x + shift, x - shift]), 0.0, 1.0)
        # row j of the (2k, M) arrays is simulated election j of every unit at once
        sim = Segments(seg.unit, seg.total * sims, seg.total * (1.0 - sims), seg.n_units, validate=False)
        # what the noise leaves unchanged (turnout, counts, empty districts) is taken from ``seg``
        sim.__dict__.update({name: getattr(seg, name) for name in FIXED_UNDER_NOISE}, share=sims)
        slots = np.r_[p0:p1, pairs + p0:pairs + p1]
        for name, f in measures.items():
            out[name][:, slots] = f(sim).T
    return out


def noise_intervals(
    seg: Segments,
    measures: Mapping[str, Callable[[Segments], np.ndarray]],
    noise_sd: float,
    draws: int,
    rng: np.random.Generator,
    level: float = 0.95,
    min_defined: float = 0.95,
) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """Percentile intervals of each measure under simulated district noise (module docstring).

    Parameters
    ----------
    seg : Segments
    measures : mapping name -> f(Segments) -> ndarray (n_units,)
    noise_sd : float
        sigma, SD of the district share noise.
    draws : int
        Simulated elections per unit (rounded up to even; 0 gives NaN intervals).
    rng : numpy.random.Generator
    level : float, default 0.95
    min_defined : float, default 0.95
        Least share of draws on which the measure must be defined.

    Returns
    -------
    dict name -> (low, high), arrays of shape (n_units,)

    Examples
    --------
    >>> from monitor.measures.efficiency_gap import efficiency_gap_of
    >>> seg = Segments([0] * 4, [70.0, 62.0, 40.0, 45.0], [30.0, 38.0, 60.0, 55.0], 1)
    >>> iv = noise_intervals(seg, {"eg": efficiency_gap_of}, 0.0, 10, np.random.default_rng(1))
    >>> low, high = iv["eg"]  # no noise: both ends are the observed gap
    >>> bool(np.allclose([low[0], high[0]], efficiency_gap_of(seg)[0], atol=1e-15))
    True
    """
    sims = simulate(seg, measures, noise_sd, draws, rng)
    return {name: percentile_interval(v, level, min_defined) for name, v in sims.items()}
