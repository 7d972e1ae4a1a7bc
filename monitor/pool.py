"""Expected seats and null distributions from the national pool of districts.

A unit (cycle, state, chamber) with ``N`` districts and statewide vote-weighted two-party share
``V`` is compared with *simulated delegations*: ``N`` districts drawn with replacement from the same
cycle's and chamber's districts nationwide (the state's own districts left out by default), kept
only when the delegation's statewide share lies within ``tol`` of ``V``.  The idea of judging a
state's seats against delegations assembled from real districts nationwide with the same statewide
vote is Wang's [1]_; the sampler below is ours.

The target distribution, for one unit, is that of ``J = (j_1, ..., j_N)``, i.i.d. uniform over the
``M`` eligible pool districts, conditioned on the event

    A = { |sum_i a_{j_i} / sum_i n_{j_i} - V| <= tol },        n_j = a_j + b_j,

that is, on the delegation's *vote-weighted* share (votes pooled, not district shares averaged).

Sampler: exponential tilting with importance weights
----------------------------------------------------
Plain rejection (draw uniformly, keep draws in ``A``) is exact but keeps a vanishing fraction of
draws when ``V`` is far from the pool's average.  We draw instead from the tilted pool

    q_j = exp(lam * y_j) / sum_k exp(lam * y_k),    y_j = (a_j - T n_j) / mean(n),

with ``T`` the target share (``V`` itself whenever the pool can reach it) and ``lam`` the root of
``E_q[y] = sum_j q_j y_j = 0`` (found with ``scipy.optimize.brentq``; ``E_q[y]`` increases with
``lam`` because its derivative is ``Var_q(y) >= 0``).  Since ``sum_i a_{j_i} / sum_i n_{j_i} - T``
has the sign of ``sum_i y_{j_i}``, tilted draws centre on the share ``T``, so a steady fraction of
them lands in ``A`` wherever ``V`` lies.  Each kept draw gets the importance weight

    w(J) = 1_A(J) * prod_i (1/M) / q_{j_i}  =  1_A(J) * (Z/M)^N * exp(-lam * sum_i y_{j_i}),

Z = sum_k exp(lam y_k).  For any function ``f`` of the delegation,

    E_q[w f] = sum_J q(J) 1_A(J) (p(J)/q(J)) f(J) = sum_{J in A} p(J) f(J) = P(A) E_p[f | A],

with ``p(J) = M^{-N}`` the uniform law, and likewise ``E_q[w] = P(A)``; so the self-normalised
average ``sum_r w_r f(J_r) / sum_r w_r`` over i.i.d. tilted draws converges to ``E_p[f | A]``, the
conditional expectation under the uniform sampler, for every ``f`` at once: the weighted kept draws
*are* the conditional distribution (exact in the limit, with an ``O(1/R)`` ratio bias, as for any
self-normalised importance sampler [2]_).  The constant ``(Z/M)^N`` cancels on normalising, so the
stored weights are ``exp(-lam * sum_i y_{j_i})`` scaled to sum to one per unit.  Draws in ``A`` have
``|sum_i y_{j_i}| <= tol * sum_i n_{j_i} / mean(n)``, which keeps the weights nearly equal and the
effective sample size close to the number of kept draws.  Any ``lam`` keeps the estimator exact; the
choice of ``lam`` affects only its efficiency (``lam = 0`` is plain rejection).

Monte Carlo error: Kish's effective sample size ``ESS = (sum w)^2 / sum w^2`` [3]_ and, for a
weighted mean ``m = sum w f`` (weights normalised to one), the delta-method standard error of the
self-normalised estimator, ``se = sqrt(sum w^2 (f - m)^2)`` [2]_.

Seats follow the project rule: a district is won by ``a`` when ``a_j > b_j``, by ``b`` when
``a_j < b_j``, and counts 1/2 on an exact tie.  Every signed output is positive when it favours
party ``a``.

Percentiles are fractions in [0, 1] (not 0-100) and use the mid-rank rule
``P(X < x) + 1/2 P(X = x)``.

References
----------
.. [1] S. S.-H. Wang, "Three Tests for Practical Evaluation of Partisan Gerrymandering",
       Stanford Law Review 68:1263 (2016), the section on national districting patterns.
.. [2] A. B. Owen, "Monte Carlo theory, methods and examples" (2013), ch. 9 (importance sampling,
       self-normalised estimator and its variance, exponential tilting). Chapter from memory.
.. [3] L. Kish, "Survey Sampling", Wiley (1965): effective sample size of a weighted sample.
       From memory.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, fields

import numpy as np
from scipy.optimize import brentq
from scipy.special import ndtri

__all__ = [
    "NationalPool",
    "Delegations",
    "SeatsResult",
    "NullResult",
    "national_pool",
    "simulate_delegations",
    "expected_seats",
    "null_distributions",
    "compare_with_pool",
    "cross_state_percentile",
    "robust_z",
    "NULL_MEASURES",
]

#: Names of the measures whose null distributions ``null_distributions`` computes by default,
#: mapped to the name of the vectorised function in ``monitor.measures`` that computes each.
NULL_MEASURES: dict[str, str] = {
    "efficiency_gap": "efficiency_gap",
    "mean_median": "mean_median",
    "declination": "declination",
    "partisan_bias": "partisan_bias",
    "seats": "seats_a",
}

# Upper bound on the number of (draw, district) cells held in memory at once.
_CHUNK_CELLS = 1 << 21

# 1 / Phi^{-1}(3/4) = 1.4826...: makes the MAD a consistent estimator of a normal SD.
_MAD_NORMAL = 1.0 / float(ndtri(0.75))


# --------------------------------------------------------------------------------------------
# The pool
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class NationalPool:
    """The districts of one cycle and chamber nationwide (after the uncontested policy).

    Build it with :func:`national_pool`, which validates the arrays.

    Attributes
    ----------
    votes_a, votes_b : ndarray of float64, shape (M,)
        Two-party votes of each district.
    state : ndarray, shape (M,)
        State id of each district (any dtype comparable with ``==``), used to leave a state's own
        districts out of its simulated delegations.
    """

    votes_a: np.ndarray
    votes_b: np.ndarray
    state: np.ndarray

    @property
    def size(self) -> int:
        return int(self.votes_a.shape[0])

    @property
    def turnout(self) -> np.ndarray:
        """Two-party total ``n_j = a_j + b_j`` (always > 0)."""
        return self.votes_a + self.votes_b

    @property
    def share(self) -> np.ndarray:
        """Party a's two-party share ``x_j = a_j / n_j``."""
        return self.votes_a / self.turnout

    @property
    def seat_a(self) -> np.ndarray:
        """Seat to a of each district: 1 if ``a > b``, 0 if ``a < b``, 1/2 on an exact tie."""
        return (self.votes_a > self.votes_b) + 0.5 * (self.votes_a == self.votes_b)


def national_pool(votes_a, votes_b, state) -> NationalPool:
    """Validate and wrap the national pool of district results.

    Parameters
    ----------
    votes_a, votes_b : array_like, shape (M,)
        Finite, non-negative two-party votes; every district needs ``a + b > 0``.
    state : array_like, shape (M,)
        State id per district.

    Raises
    ------
    ValueError
        On shape mismatch, empty pool, negative/non-finite votes or a district with no votes.
    """
    a = np.asarray(votes_a, dtype=np.float64)
    b = np.asarray(votes_b, dtype=np.float64)
    s = np.asarray(state)
    if a.ndim != 1 or a.shape != b.shape or s.shape != a.shape:
        raise ValueError("votes_a, votes_b and state must be 1-D arrays of the same length")
    if a.size == 0:
        raise ValueError("the national pool is empty")
    if not (np.isfinite(a).all() and np.isfinite(b).all()):
        raise ValueError("pool votes must be finite")
    if (a < 0).any() or (b < 0).any():
        raise ValueError("pool votes must be non-negative")
    if ((a + b) <= 0).any():
        raise ValueError("every pool district needs votes_a + votes_b > 0")
    return NationalPool(a, b, s)


# --------------------------------------------------------------------------------------------
# Sampler
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Delegations:
    """Weighted simulated delegations for U units (output of :func:`simulate_delegations`).

    Kept draws of all units are stored flat, unit after unit, in the layout the measures engine
    reads: ``row_draw`` (non-decreasing draw id per district row) and ``district`` (pool index of
    each row), so ``f(row_draw, pool.votes_a[district], pool.votes_b[district], n_draws)``
    evaluates any vectorised measure ``f`` on every simulated delegation at once.  Memory is
    about 4 bytes per district row (``accepted * sum(N)`` rows); :func:`compare_with_pool` bounds
    it by batching units.

    Attributes
    ----------
    pool : NationalPool
    n_districts, vote_share, unit_state : ndarray, shape (U,)
        The units as given.
    tol : float
    draw_unit : ndarray of int64, shape (D,)
        Unit of each kept draw (non-decreasing).
    weight : ndarray of float64, shape (D,)
        Importance weight of each kept draw, normalised to sum to 1 within its unit.
    share : ndarray of float64, shape (D,)
        Vote-weighted share of a in each kept draw (within ``tol`` of the unit's ``vote_share``).
    seats : ndarray of float64, shape (D,)
        Seats won by a in each kept draw (ties count 1/2).
    district : ndarray of int32 (int64 for pools of 2**31 districts or more)
        Pool index of each district row of the kept draws, shape (sum over kept draws of N,).
    row_draw : ndarray of int64 (property, computed on access)
        Draw id of each district row, non-decreasing.
    n_proposed, n_accepted : ndarray of int64, shape (U,)
        Tilted proposals drawn and kept per unit.
    ess : ndarray of float64, shape (U,)
        Kish effective sample size ``1 / sum w^2`` of the kept draws (NaN with no kept draw).
    tilt : ndarray of float64, shape (U,)
        The tilt ``lam`` used (0 = plain rejection).
    tilt_share : ndarray of float64, shape (U,)
        The share ``T`` the proposals were centred on (NaN when the target cannot be reached).
    """

    pool: NationalPool
    n_districts: np.ndarray
    vote_share: np.ndarray
    unit_state: np.ndarray
    tol: float
    draw_unit: np.ndarray
    weight: np.ndarray
    share: np.ndarray
    seats: np.ndarray
    district: np.ndarray
    n_proposed: np.ndarray
    n_accepted: np.ndarray
    ess: np.ndarray
    tilt: np.ndarray
    tilt_share: np.ndarray

    @property
    def n_units(self) -> int:
        return int(self.n_districts.shape[0])

    @property
    def n_draws(self) -> int:
        return int(self.draw_unit.shape[0])

    @property
    def row_draw(self) -> np.ndarray:
        return np.repeat(np.arange(self.n_draws, dtype=np.int64), self.n_districts[self.draw_unit])


def _base_seed(rng) -> np.random.SeedSequence:
    """The seed sequence the per-unit streams are spawned from."""
    if isinstance(rng, np.random.SeedSequence):
        return rng
    if isinstance(rng, np.random.Generator):
        return rng.spawn(1)[0].bit_generator.seed_seq
    if isinstance(rng, (int, np.integer)) and not isinstance(rng, bool) and rng >= 0:
        return np.random.SeedSequence(int(rng))
    raise TypeError("rng must be a non-negative int, a numpy SeedSequence or a numpy Generator")


def _solve_tilt(y: np.ndarray) -> float:
    """Root ``lam`` of ``E_q[y] = 0`` for ``q_j ∝ exp(lam y_j)``; needs ``min y < 0 < max y``."""

    def mean_tilted(lam: float) -> float:
        z = lam * y
        e = np.exp(z - z.max())
        return float(e @ y / e.sum())

    m0 = mean_tilted(0.0)
    if m0 == 0.0:
        return 0.0
    step = -1.0 if m0 > 0 else 1.0  # E_q[y] increases with lam
    inner, outer = 0.0, step
    # E_q[y] tends to max y > 0 (lam -> inf) and min y < 0 (lam -> -inf): a sign change exists.
    for _ in range(200):
        if np.sign(mean_tilted(outer)) != np.sign(m0):
            break
        inner, outer = outer, 2.0 * outer
    else:  # pragma: no cover - unreachable when min y < 0 < max y
        raise RuntimeError("could not bracket the tilt")
    lo, hi = sorted((inner, outer))
    return float(brentq(mean_tilted, lo, hi, xtol=1e-12, rtol=1e-12))


def _inverse_cdf(cdf: np.ndarray, guide: np.ndarray, u: np.ndarray) -> np.ndarray:
    """``j = min{i : cdf[i] > u}`` for each ``u`` in [0, 1): the index sampled by inverse CDF.

    Same result as ``np.searchsorted(cdf, u, side="right")`` (so the law is exactly the one
    ``cdf`` encodes; zero-probability entries are never returned), found faster with a guide
    table (``guide[k] = min{i : cdf[i] > k/M}``, Devroye 1986, "Non-Uniform Random Variate
    Generation", ch. III, indexed search; from memory): start at the guide entry just below
    ``u`` and step forward.  ``cdf`` must end in exactly 1.0.
    """
    shape, u = u.shape, u.ravel()
    m = cdf.size
    k = np.minimum((u * m).astype(np.int64), m - 1)
    j = guide[np.maximum(k - 1, 0)]  # one slot lower: safe against rounding in u * m
    todo = np.flatnonzero(cdf[j] <= u)
    while todo.size:
        j[todo] += 1
        todo = todo[cdf[j[todo]] <= u[todo]]
    return j.reshape(shape)


def _tilted_proposal(a: np.ndarray, n: np.ndarray, share: np.ndarray, v: float, tol: float):
    """Centre share T, tilt lam, scaled y and proposal q for one unit; None if A is empty.

    Every delegation's share is a weighted mean of its districts' shares, so it lies in
    [min x, max x]; the event A is empty when [V - tol, V + tol] misses that range.
    """
    xmin, xmax = float(share.min()), float(share.max())
    lo, hi = max(v - tol, xmin), min(v + tol, xmax)
    if lo > hi:
        return None
    # Centre on V when the pool can average to V; otherwise on the reachable part of the window.
    t = v if xmin < v < xmax or xmin == xmax else 0.5 * (lo + hi)
    y = (a - t * n) / n.mean()
    if y.min() < 0.0 < y.max():
        lam = _solve_tilt(y)
    else:
        # All districts on one side of T (identical shares, or T on the pool's edge): no finite
        # tilt centres on T; uniform proposals (plain rejection) stay exact.
        lam = 0.0
    z = lam * y
    q = np.exp(z - z.max())
    q /= q.sum()
    return t, lam, y, q


def simulate_delegations(
    pool: NationalPool,
    unit_state,
    n_districts,
    vote_share,
    *,
    rng,
    tol: float = 0.005,
    accepted: int = 10_000,
    max_draws: int = 1_000_000,
    exclude_own: bool = True,
    unit_key=None,
) -> Delegations:
    """Simulated delegations from the national pool, conditioned on the statewide share.

    For each unit ``u``, draws ``N_u`` districts i.i.d. from the eligible pool (all districts, or
    all but the unit's own state's when ``exclude_own``), by exponential tilting (module
    docstring), until ``accepted`` draws fall within ``tol`` of ``V_u`` or ``max_draws`` proposals
    have been made.  The kept draws with their normalised weights represent the uniform sampler
    conditioned on ``|sum a / sum (a + b) - V_u| <= tol``.

    Parameters
    ----------
    pool : NationalPool
        From :func:`national_pool`.
    unit_state : array_like, shape (U,)
        State id of each unit (matched against ``pool.state`` for ``exclude_own``).
    n_districts : array_like of int, shape (U,)
        Districts per unit, >= 1.
    vote_share : array_like of float, shape (U,)
        Statewide vote-weighted two-party share of a, in [0, 1].
    rng : int or numpy.random.SeedSequence or numpy.random.Generator
        Source of randomness (required).  Unit ``u`` draws from its own stream, the child of the
        base seed sequence with spawn key ``unit_key[u]``; with an int or SeedSequence the draws
        of a unit therefore depend only on the seed, its key and its own inputs (not on the other
        units in the call or how units are batched), and the same seed gives identical output.
        A Generator supplies the base by spawning one child (so reusing it gives fresh draws).
    tol : float, default 0.005
        Half-width of the acceptance window on the statewide share (design choice, see the
        methods note on simulated delegations).
    accepted : int, default 10_000
        Kept draws wanted per unit.
    max_draws : int, default 1_000_000
        Cap on proposals per unit; a unit may end with fewer kept draws (see ``n_accepted``).
    exclude_own : bool, default True
        Leave the unit's own state's districts out of its pool.
    unit_key : array_like of non-negative int, shape (U,), optional
        Stable key of each unit's random stream; default ``0..U-1``.

    Returns
    -------
    Delegations
        Units with an empty eligible pool, or a target the pool cannot reach, get no kept draws
        (``n_accepted == 0``, ``ess`` and ``tilt_share`` NaN).

    Examples
    --------
    >>> import numpy as np
    >>> p = national_pool([60, 40, 55, 45, 70], [40, 60, 45, 55, 30], ["X", "X", "Y", "Y", "Z"])
    >>> d = simulate_delegations(p, ["X"], [2], [0.5], rng=1, accepted=1000)
    >>> int(d.n_accepted[0]), bool(np.all(np.abs(d.share - 0.5) <= 0.005))
    (1000, True)
    >>> sorted(set(p.state[d.district].tolist()))  # X's own districts are left out
    ['Y']
    """
    if not isinstance(pool, NationalPool):
        raise TypeError("pool must be a NationalPool (use national_pool())")
    unit_state = np.asarray(unit_state)
    n_districts = np.asarray(n_districts)
    vote_share = np.asarray(vote_share, dtype=np.float64)
    shape = unit_state.shape
    if unit_state.ndim != 1 or n_districts.shape != shape or vote_share.shape != shape:
        raise ValueError(
            "unit_state, n_districts and vote_share must be 1-D arrays of the same length"
        )
    if n_districts.size and (
        not np.issubdtype(n_districts.dtype, np.integer) or (n_districts < 1).any()
    ):
        raise ValueError("n_districts must be integers >= 1")
    n_districts = n_districts.astype(np.int64)
    if not (np.isfinite(vote_share).all() and ((vote_share >= 0) & (vote_share <= 1)).all()):
        raise ValueError("vote_share must lie in [0, 1]")
    if not (np.isfinite(tol) and tol >= 0):
        raise ValueError("tol must be a finite number >= 0")
    if accepted < 1 or max_draws < 1:
        raise ValueError("accepted and max_draws must be >= 1")

    U = unit_state.shape[0]
    base = _base_seed(rng)
    keys = np.arange(U) if unit_key is None else np.asarray(unit_key)
    bad_keys = U and (not np.issubdtype(keys.dtype, np.integer) or (keys < 0).any())
    if keys.shape != (U,) or bad_keys:
        raise ValueError("unit_key must give one non-negative integer per unit")
    n_proposed = np.zeros(U, np.int64)
    n_acc = np.zeros(U, np.int64)
    ess = np.full(U, np.nan)
    tilt = np.zeros(U)
    tilt_share = np.full(U, np.nan)
    per_unit: list[tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]] = []

    a_all, n_all, x_all, s_all = pool.votes_a, pool.turnout, pool.share, pool.seat_a
    for u in range(U):
        N, v = int(n_districts[u]), float(vote_share[u])
        if exclude_own:
            eligible = np.flatnonzero(pool.state != unit_state[u])
        else:
            eligible = np.arange(pool.size)
        prop = None
        if eligible.size:
            a, n, x = a_all[eligible], n_all[eligible], x_all[eligible]
            prop = _tilted_proposal(a, n, x, v, tol)
        if prop is None:
            per_unit.append((np.empty((0, N), np.int64), np.empty(0), np.empty(0), np.empty(0)))
            continue
        t, lam, y, q = prop
        tilt[u], tilt_share[u] = lam, t
        stream = np.random.default_rng(
            np.random.SeedSequence(base.entropy, spawn_key=(*base.spawn_key, int(keys[u])))
        )
        seat = s_all[eligible]
        cdf = np.cumsum(q)
        cdf /= cdf[-1]
        guide = np.searchsorted(cdf, np.arange(cdf.size) / cdf.size, side="right")
        rows = max(1, _CHUNK_CELLS // N)
        kept_j, kept_logw, kept_share, kept_seats = [], [], [], []
        got = done = 0
        while got < accepted and done < max_draws:
            # size the batch from the acceptance seen so far (the first guesses 1 in 4)
            rate = got / done if got else (0.25 if done == 0 else 0.5 / done)
            want = int(np.ceil(1.2 * (accepted - got) / rate)) + 64
            r = min(rows, max_draws - done, want)
            j = _inverse_cdf(cdf, guide, stream.random((r, N)))
            sh = a[j].sum(axis=1) / n[j].sum(axis=1)
            ok = np.flatnonzero(np.abs(sh - v) <= tol)
            if ok.size > accepted - got:  # stop at the accepted-th kept draw
                ok = ok[: accepted - got]
                done += int(ok[-1]) + 1
            else:
                done += r
            got += ok.size
            kept_j.append(j[ok])
            kept_logw.append(-lam * y[j[ok]].sum(axis=1))
            kept_share.append(sh[ok])
            kept_seats.append(seat[j[ok]].sum(axis=1))
        n_proposed[u], n_acc[u] = done, got
        jj = np.concatenate(kept_j)
        logw = np.concatenate(kept_logw)
        if got:
            w = np.exp(logw - logw.max())
            w /= w.sum()
            ess[u] = 1.0 / float(w @ w)
        else:
            w = logw
        per_unit.append((eligible[jj], w, np.concatenate(kept_share), np.concatenate(kept_seats)))

    draw_unit = np.repeat(np.arange(U, dtype=np.int64), n_acc)
    index_type = np.int32 if pool.size < 2**31 else np.int64
    district = np.concatenate(
        [p[0].ravel().astype(index_type) for p in per_unit] + [np.empty(0, index_type)]
    )
    return Delegations(
        pool=pool,
        n_districts=n_districts,
        vote_share=vote_share,
        unit_state=unit_state,
        tol=float(tol),
        draw_unit=draw_unit,
        weight=np.concatenate([p[1] for p in per_unit]) if U else np.empty(0),
        share=np.concatenate([p[2] for p in per_unit]) if U else np.empty(0),
        seats=np.concatenate([p[3] for p in per_unit]) if U else np.empty(0),
        district=district,
        n_proposed=n_proposed,
        n_accepted=n_acc,
        ess=ess,
        tilt=tilt,
        tilt_share=tilt_share,
    )


# --------------------------------------------------------------------------------------------
# Weighted summaries over draws (segment reductions by unit)
# --------------------------------------------------------------------------------------------


def _weighted_midrank(values, weights, seg, n_seg, ref):
    """Per segment: ``sum w [v < ref] + 1/2 sum w [v == ref]`` over ``sum w``, and its SE.

    ``weights`` need not be normalised; NaN where a segment's total weight is 0.
    """
    total = np.bincount(seg, weights, n_seg)
    r = ref[seg]
    ind = (values < r) + 0.5 * (values == r)
    with np.errstate(invalid="ignore", divide="ignore"):
        pct = np.bincount(seg, weights * ind, n_seg) / total
        wn = weights / total[seg]
        se = np.sqrt(np.bincount(seg, wn**2 * (ind - pct[seg]) ** 2, n_seg))
    return pct, se


def _weighted_quantile(values, weights, seg, n_seg, q):
    """Per segment, the smallest value whose weighted CDF reaches ``q`` (inverse CDF).

    ``values`` must be free of NaN; segments with zero total weight give NaN.  The inverse-CDF
    rule returns an observed value, which suits discrete quantities such as seats.
    """
    out = np.full(n_seg, np.nan)
    live = weights > 0
    if not live.any():
        return out
    v, w, g = values[live], weights[live], seg[live]
    order = np.lexsort((v, g))
    v, w, g = v[order], w[order], g[order]
    total = np.bincount(g, w, n_seg)
    cw = np.cumsum(w)
    start = np.r_[0.0, cw][np.searchsorted(g, np.arange(n_seg), side="left")]
    frac = (cw - start[g]) / total[g]  # within-segment CDF at each sorted value, ends at 1
    key = g + np.minimum(frac, 1.0)
    present = np.flatnonzero(total > 0)
    # first sorted position in segment s with frac >= q (q < 1 keeps it inside the segment)
    pos = np.searchsorted(key, present + q * (1 - 1e-12), side="left")
    pos = np.minimum(pos, np.searchsorted(g, present, side="right") - 1)
    out[present] = v[pos]
    return out


@dataclass(frozen=True)
class SeatsResult:
    """Expected seats from the national pool, per unit (arrays of shape (U,)).

    Attributes
    ----------
    expected_seats : weighted mean of simulated seats of a.
    low, high : weighted ``(1 - level)/2`` and ``(1 + level)/2`` quantiles of simulated seats
        (inverse weighted CDF; seats are multiples of 1/2).
    sd_seats : weighted SD of simulated seats.
    actual_seats : as given.
    percentile : ``P(sim < actual) + 1/2 P(sim == actual)`` under the weighted draws, in [0, 1].
    excess_seats : ``actual - expected`` (positive favours a).
    n_proposed, n_accepted : tilted proposals drawn and kept.  ess : Kish effective sample size.
    mc_se : Monte Carlo standard error of ``expected_seats`` (self-normalised IS, delta method).
    All float outputs are NaN for a unit with no kept draw.
    """

    expected_seats: np.ndarray
    low: np.ndarray
    high: np.ndarray
    sd_seats: np.ndarray
    actual_seats: np.ndarray
    percentile: np.ndarray
    excess_seats: np.ndarray
    n_proposed: np.ndarray
    n_accepted: np.ndarray
    ess: np.ndarray
    mc_se: np.ndarray


def expected_seats(delegations: Delegations, actual_seats, *, level: float = 0.95) -> SeatsResult:
    """Expected seats, interval, percentile and excess of each unit's actual seats.

    ``expected = sum_r w_r k_r`` with ``k_r`` the seats of a in kept draw ``r`` and ``w_r`` its
    normalised weight; ``mc_se = sqrt(sum_r w_r^2 (k_r - expected)^2)``; ``excess = actual -
    expected``, positive when a holds more seats than delegations drawn from the nation with the
    same statewide vote (conditioned on the state's size ``N`` and share ``V`` within ``tol``).

    Examples
    --------
    Every two-district delegation of this pool at 50 % pairs a 60/55 % win with a 40/45 % loss:

    >>> p = national_pool([60, 40, 55, 45], [40, 60, 45, 55], [0, 0, 1, 1])
    >>> d = simulate_delegations(p, [9], [2], [0.5], rng=0, accepted=2000)
    >>> r = expected_seats(d, [2.0])
    >>> [round(float(v[0]), 9) for v in (r.expected_seats, r.excess_seats, r.percentile)]
    [1.0, 1.0, 1.0]
    """
    d = delegations
    actual = np.asarray(actual_seats, dtype=np.float64)
    if actual.shape != (d.n_units,):
        raise ValueError("actual_seats must have one value per unit")
    if not 0 < level < 1:
        raise ValueError("level must lie in (0, 1)")
    U, g, w, k = d.n_units, d.draw_unit, d.weight, d.seats
    has = d.n_accepted > 0
    with np.errstate(invalid="ignore"):
        mean = np.where(has, np.bincount(g, w * k, U), np.nan)
        dev2 = (k - mean[g]) ** 2
        sd = np.where(has, np.sqrt(np.bincount(g, w * dev2, U)), np.nan)
        se = np.where(has, np.sqrt(np.bincount(g, w**2 * dev2, U)), np.nan)
    pct, _ = _weighted_midrank(k, w, g, U, actual)
    return SeatsResult(
        expected_seats=mean,
        low=_weighted_quantile(k, w, g, U, (1 - level) / 2),
        high=_weighted_quantile(k, w, g, U, (1 + level) / 2),
        sd_seats=sd,
        actual_seats=actual,
        percentile=np.where(has, pct, np.nan),
        excess_seats=actual - mean,
        n_proposed=d.n_proposed.copy(),
        n_accepted=d.n_accepted.copy(),
        ess=d.ess.copy(),
        mc_se=se,
    )


# --------------------------------------------------------------------------------------------
# Null distributions of the measures
# --------------------------------------------------------------------------------------------


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


def _default_measures() -> dict[str, Callable]:
    from monitor import measures  # the measures engine; imported here to keep the sampler light

    return {name: getattr(measures, fn) for name, fn in NULL_MEASURES.items()}


def _evaluate(f: Callable, d: Delegations) -> np.ndarray:
    """``f`` on every kept draw, in chunks of about ``_CHUNK_CELLS`` district rows."""
    out = np.empty(d.n_draws)
    if d.n_draws == 0:
        return out
    size = d.n_districts[d.draw_unit]
    row_start = np.r_[0, np.cumsum(size)]
    a, b = d.pool.votes_a, d.pool.votes_b
    first = 0
    while first < d.n_draws:
        last = int(np.searchsorted(row_start, row_start[first] + _CHUNK_CELLS, side="right")) - 1
        last = min(max(last, first + 1), d.n_draws)
        r0, r1 = row_start[first], row_start[last]
        idx = d.district[r0:r1]
        unit = np.repeat(np.arange(last - first, dtype=np.int64), size[first:last])
        vals = np.asarray(f(unit, a[idx], b[idx], last - first), dtype=np.float64)
        if vals.shape != (last - first,):
            raise ValueError(f"measure {getattr(f, '__name__', f)!r} returned shape {vals.shape}")
        out[first:last] = vals
        first = last
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
    """
    d = delegations
    if not 0 < alpha < 0.5:
        raise ValueError("alpha must lie in (0, 0.5)")
    fns = _default_measures() if measures is None else dict(measures)
    if set(observed) != set(fns):
        raise ValueError(
            f"observed must give exactly the measures {sorted(fns)}; got {sorted(observed)}"
        )
    U, g = d.n_units, d.draw_unit
    out: dict[str, NullResult] = {}
    for name, f in fns.items():
        obs = np.asarray(observed[name], dtype=np.float64)
        if obs.shape != (U,):
            raise ValueError(f"observed[{name!r}] must have one value per unit")
        vals = _evaluate(f, d)
        ok = ~np.isnan(vals)
        w = np.where(ok, d.weight, 0.0)
        v = np.where(ok, vals, 0.0)
        used_w = np.bincount(g, w, U)
        pct, se = _weighted_midrank(v, w, g, U, obs)
        pct = np.where(np.isnan(obs) | (used_w <= 0), np.nan, pct)
        se = np.where(np.isnan(pct), np.nan, se)
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = np.where(used_w > 0, np.bincount(g, w * v, U) / used_w, np.nan)
        tail = np.zeros(U, np.int8)
        tail[pct > 1 - alpha] = 1
        tail[pct < alpha] = -1
        out[name] = NullResult(
            observed=obs,
            percentile=pct,
            percentile_se=se,
            tail=tail,
            null_low=_weighted_quantile(v, w, g, U, alpha),
            null_high=_weighted_quantile(v, w, g, U, 1 - alpha),
            null_mean=mean,
            nan_fraction=np.where(d.n_accepted > 0, np.bincount(g, d.weight * ~ok, U), np.nan),
            n_used=np.bincount(g, ok, U).astype(np.int64),
        )
    return out


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


# --------------------------------------------------------------------------------------------
# Cross-state context
# --------------------------------------------------------------------------------------------


def _group_codes(values, group):
    v = np.asarray(values, dtype=np.float64)
    grp = np.asarray(group)
    if v.ndim != 1 or grp.shape != v.shape:
        raise ValueError("values and group must be 1-D arrays of the same length")
    live = np.flatnonzero(~np.isnan(v))
    _, code = np.unique(grp[live], return_inverse=True)
    return v, live, code.astype(np.int64)


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
    v, live, code = _group_codes(values, group)
    out = np.full(v.shape, np.nan)
    if live.size == 0:
        return out
    x = v[live]
    order = np.lexsort((x, code))
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
    v, live, code = _group_codes(values, group)
    out = np.full(v.shape, np.nan)
    if live.size == 0:
        return out
    x = v[live]
    order = np.lexsort((x, code))
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
