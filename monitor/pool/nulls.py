"""Null distributions of the measures from the national pool, and the batched comparison of many
units with the pool (expected seats and every null at once, in bounded memory)."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, fields

import numpy as np

from monitor.measures import registry

from .pool import NationalPool
from .sampler import Delegations, _base_seed, simulate_delegations
from .seats import SeatsResult, _midrank_weights, _weighted_midrank, _weighted_quantiles, expected_seats

#: The measures judged against their national-pool null (the registry's flags with ``null``), by
#: their flag name, with the vectorised function ``f(unit, votes_a, votes_b, n_units)`` that
#: :func:`null_distributions` evaluates on the simulated delegations.
NULL_MEASURES: dict[str, Callable] = {m.flag.name: m.null for m in registry.flagged() if m.flag.null}
#: The same measures on a :class:`~monitor.measures.segments.Segments` (shared by all of them per batch).
NULL_MEASURES_OF: dict[str, Callable] = {m.flag.name: m.null_of for m in registry.flagged()
                                         if m.flag.null and m.null_of is not None}


@dataclass(frozen=True)
class NullResult:
    """One measure's null distribution from the national pool, per unit (arrays of shape (U,)).

    Attributes
    ----------
    observed : the unit's own value, as given.
    percentile : ``P(null < observed) + 1/2 P(null == observed)`` under the weighted null, in
        [0, 1]; NaN when the observed value is NaN or no kept draw has a defined measure.
    percentile_se : Monte Carlo standard error of ``percentile``.
    tail : int8, +1 when ``percentile > 1 - alpha`` (favours a beyond the null), -1 when
        ``percentile < alpha`` (favours b), 0 otherwise *and wherever percentile is NaN*.
    null_low, null_high : weighted ``alpha`` and ``1 - alpha`` quantiles of the null.
    null_mean : weighted mean of the null.
    nan_fraction : weighted share of kept draws on which the measure is undefined (dropped).
    n_used : kept draws with a defined measure.
    """

    observed: np.ndarray
    percentile: np.ndarray
    percentile_se: np.ndarray
    tail: np.ndarray
    null_low: np.ndarray
    null_high: np.ndarray
    null_mean: np.ndarray
    nan_fraction: np.ndarray
    n_used: np.ndarray


#: District rows of simulated delegations evaluated at once (2 MB per temporary of the measures).
_CHUNK_CELLS = 1 << 18


def _default_measures() -> dict[str, Callable]:
    return dict(NULL_MEASURES)


def _chunks(d: Delegations):
    """(first, last) draw ranges of about ``_CHUNK_CELLS`` district rows that never mix two units."""
    size = d.n_districts[d.draw_unit]
    row_start = np.r_[0, np.cumsum(size)]
    unit_end = np.cumsum(d.n_accepted)[d.draw_unit] if d.n_draws else np.zeros(0, np.int64)
    first = 0
    while first < d.n_draws:
        last = int(np.searchsorted(row_start, row_start[first] + _CHUNK_CELLS, side="right")) - 1
        last = min(max(last, first + 1), int(unit_end[first]))
        yield first, last, row_start, size
        first = last


def _evaluate_shared(fns: Mapping[str, Callable], d: Delegations) -> dict[str, np.ndarray]:
    """Every measure of ``fns`` (Segments forms, :data:`NULL_MEASURES_OF`) on every kept draw,
    one Segments per chunk shared by all of them (their per-district sums are computed once), and
    each pool district's share and seat computed once and gathered (:meth:`Segments.take`); each
    draw's seats are the sampler's sums (:attr:`Delegations.seats`, halves: exact in any order).
    Equal to :func:`_evaluate` of the public forms, value for value."""
    from monitor.measures.segments import Segments

    out = {name: np.empty(d.n_draws) for name in fns}
    pool = Segments(np.zeros(d.pool.size, np.int64), d.pool.votes_a, d.pool.votes_b, 1, validate=False)
    for name in ("total", "share", "seat"):  # each district's, once: the chunks gather them
        getattr(pool, name)
    for first, last, row_start, size in _chunks(d):
        idx = d.district[row_start[first]:row_start[last]].astype(np.intp)
        unit = np.repeat(np.arange(last - first, dtype=np.int64), size[first:last])
        seg = Segments.take(pool, idx, unit, last - first, count=size[first:last])
        seg.__dict__["seats_a"] = d.seats[first:last]  # summed by the sampler (halves: exact in any order)
        for name, f in fns.items():
            out[name][first:last] = f(seg)
    return out


def _evaluate(f: Callable, d: Delegations) -> np.ndarray:
    """``f`` on every kept draw, in chunks of about ``_CHUNK_CELLS`` district rows that never mix
    two units (every delegation of a chunk then has the same size, which the measures' sorting
    exploits: :attr:`monitor.measures.segments.Segments.sorted_share`)."""
    out = np.empty(d.n_draws)
    a, b = d.pool.votes_a, d.pool.votes_b
    for first, last, row_start, size in _chunks(d):
        idx = d.district[row_start[first]:row_start[last]]
        unit = np.repeat(np.arange(last - first, dtype=np.int64), size[first:last])
        vals = np.asarray(f(unit, a[idx], b[idx], last - first), dtype=np.float64)
        if vals.shape != (last - first,):
            raise ValueError(f"measure {getattr(f, '__name__', f)!r} returned shape {vals.shape}")
        out[first:last] = vals
    return out


def null_distributions(
    delegations: Delegations,
    observed: Mapping[str, object],
    *,
    alpha: float = 0.025,
    measures: Mapping[str, Callable] | None = None,
) -> dict[str, NullResult]:
    """Each measure's percentile within its null distribution from the national pool.

    The null of a measure for unit ``u`` is its value on the unit's weighted simulated
    delegations (:func:`simulate_delegations`): what the measure looks like for a state of this
    size and statewide vote when its districts are drawn like the nation's.  Draws on which the
    measure is NaN (declination after a sweep, say) are dropped and the rest reweighted; their
    weighted share is reported as ``nan_fraction``.

    Parameters
    ----------
    delegations : Delegations
    observed : mapping name -> array_like of shape (U,)
        The units' own values, one entry per measure evaluated (by default the keys of
        :data:`NULL_MEASURES`: efficiency_gap, mean_median, declination, partisan_bias, seats).
    alpha : float, default 0.025
        Tail size on each side (two-sided test at level ``2 alpha``).
    measures : mapping name -> callable, optional
        Vectorised measures ``f(unit, votes_a, votes_b, n_units) -> ndarray``; default the
        functions of ``monitor.measures`` named in :data:`NULL_MEASURES`.

    Returns
    -------
    dict name -> NullResult

    Examples
    --------
    At 50 % every two-district delegation of this pool pairs a 60/40 or 55/45 win with its mirror
    loss, so the efficiency gap of every simulated delegation is exactly 0: an observed 0.1 lies
    above the whole null (percentile 1, flagged in a's tail), an observed 0 at its mid-rank 1/2:

    >>> from monitor.measures import efficiency_gap
    >>> from monitor.pool import national_pool, simulate_delegations
    >>> p = national_pool([60, 40, 55, 45], [40, 60, 45, 55], [0, 0, 1, 1])
    >>> d = simulate_delegations(p, [9, 9], [2, 2], [0.5, 0.5], rng=0, accepted=500)
    >>> r = null_distributions(d, {"eg": [0.1, 0.0]}, measures={"eg": efficiency_gap})["eg"]
    >>> r.percentile.tolist(), r.tail.tolist(), r.null_mean.tolist()
    ([1.0, 0.5], [1, 0], [0.0, 0.0])
    """
    d = delegations
    if not 0 < alpha < 0.5:
        raise ValueError("alpha must lie in (0, 0.5)")
    fns = _default_measures() if measures is None else dict(measures)
    if set(observed) != set(fns):
        raise ValueError(
            f"observed must give exactly the measures {sorted(fns)}; got {sorted(observed)}"
        )
    out: dict[str, NullResult] = {}
    shared = {}
    if set(NULL_MEASURES_OF) == set(fns) and all(fns[k] is NULL_MEASURES.get(k) for k in fns):
        # the registry's own measures: one Segments per chunk, shared
        shared = _evaluate_shared(NULL_MEASURES_OF, d)
    whole = _midrank_weights(d.weight, d.draw_unit, d.n_units)  # the weights of a measure defined on every draw
    for name, f in fns.items():
        obs = np.asarray(observed[name], dtype=np.float64)
        if obs.shape != (d.n_units,):
            raise ValueError(f"observed[{name!r}] must have one value per unit")
        out[name] = _null_of(shared[name] if name in shared else _evaluate(f, d), obs, d, alpha, whole)
    return out


def _null_of(vals: np.ndarray, obs: np.ndarray, d: Delegations, alpha: float, whole: tuple) -> NullResult:
    """One measure's null from its values ``vals`` on every kept draw (NaN draws dropped);
    ``whole`` is :func:`_midrank_weights` of all the draws' weights, used as they are when the
    measure is defined on every draw (the same arrays the dropping would build)."""
    U, g = d.n_units, d.draw_unit
    ok = ~np.isnan(vals)
    if ok.all():
        w, v, used = d.weight, vals, whole
    else:
        w = np.where(ok, d.weight, 0.0)
        v = np.where(ok, vals, 0.0)
        used = _midrank_weights(w, g, U)
    used_w = used[0]
    pct, se = _weighted_midrank(v, w, g, U, obs, shared=used)
    pct = np.where(np.isnan(obs) | (used_w <= 0), np.nan, pct)
    se = np.where(np.isnan(pct), np.nan, se)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = np.where(used_w > 0, np.bincount(g, w * v, U) / used_w, np.nan)
    tail = np.zeros(U, np.int8)
    tail[pct > 1 - alpha] = 1
    tail[pct < alpha] = -1
    low, high = _weighted_quantiles(v, w, g, U, (alpha, 1 - alpha))
    return NullResult(
        observed=obs,
        percentile=pct,
        percentile_se=se,
        tail=tail,
        null_low=low,
        null_high=high,
        null_mean=mean,
        nan_fraction=np.where(d.n_accepted > 0, np.bincount(g, d.weight * ~ok, U), np.nan),
        n_used=np.bincount(g, ok, U).astype(np.int64),
    )


def _concat(parts):
    """Join per-unit result dataclasses of consecutive unit batches."""
    cls = type(parts[0])
    return cls(**{f.name: np.concatenate([getattr(p, f.name) for p in parts]) for f in fields(cls)})


def compare_with_pool(
    pool: NationalPool,
    unit_state,
    n_districts,
    vote_share,
    actual_seats,
    observed: Mapping[str, object],
    *,
    rng,
    tol: float = 0.005,
    accepted: int = 10_000,
    max_draws: int = 1_000_000,
    exclude_own: bool = True,
    unit_key=None,
    level: float = 0.95,
    alpha: float = 0.025,
    measures: Mapping[str, Callable] | None = None,
    max_cells: int = 1 << 25,
) -> tuple[SeatsResult, dict[str, NullResult]]:
    """Expected seats and null percentiles for many units, in memory-bounded batches.

    Runs :func:`simulate_delegations`, :func:`expected_seats` and :func:`null_distributions` on
    consecutive batches of units holding at most ``max_cells`` simulated district rows (about
    ``accepted * N`` per unit; a larger unit runs alone) and joins the per-unit results.  With an
    int or SeedSequence ``rng`` the output equals one unbatched run with the same ``unit_key``.

    Returns
    -------
    (SeatsResult, dict name -> NullResult), both over all U units in the given order.
    """
    n_districts = np.asarray(n_districts)
    U = n_districts.shape[0]
    unit_state, vote_share = np.asarray(unit_state), np.asarray(vote_share, dtype=np.float64)
    actual = np.asarray(actual_seats, dtype=np.float64)
    obs = {k: np.asarray(v, dtype=np.float64) for k, v in observed.items()}
    keys = np.arange(U) if unit_key is None else np.asarray(unit_key)
    if actual.shape != (U,) or keys.shape != (U,) or any(v.shape != (U,) for v in obs.values()):
        raise ValueError("actual_seats, unit_key and every observed array need one value per unit")
    if max_cells < 1:
        raise ValueError("max_cells must be >= 1")
    base = _base_seed(rng)
    fns = _default_measures() if measures is None else dict(measures)
    cells = accepted * np.asarray(n_districts, dtype=np.int64)
    batch = np.zeros(U, np.int64)
    if U:
        used = 0
        for u in range(1, U):  # greedy cut into consecutive batches
            used += int(cells[u - 1])
            batch[u] = batch[u - 1]
            if used + cells[u] > max_cells:
                batch[u] += 1
                used = 0
    seats_parts, null_parts = [], []
    for b in range(int(batch[-1]) + 1 if U else 0):
        sel = np.flatnonzero(batch == b)
        d = simulate_delegations(
            pool, unit_state[sel], n_districts[sel], vote_share[sel], rng=base, tol=tol,
            accepted=accepted, max_draws=max_draws, exclude_own=exclude_own, unit_key=keys[sel],
        )
        seats_parts.append(expected_seats(d, actual[sel], level=level))
        null_parts.append(
            null_distributions(d, {k: v[sel] for k, v in obs.items()}, alpha=alpha, measures=fns)
        )
    if not seats_parts:  # no units: run once on the empty set for correctly typed empty output
        d = simulate_delegations(pool, unit_state, n_districts, vote_share, rng=base, tol=tol)
        nulls = null_distributions(d, obs, alpha=alpha, measures=fns)
        return expected_seats(d, actual, level=level), nulls
    nulls = {name: _concat([part[name] for part in null_parts]) for name in fns}
    return _concat(seats_parts), nulls

