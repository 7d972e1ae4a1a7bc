"""Simulated delegations from the national pool, conditioned on the statewide share.

Sampler: exponential tilting, the last district drawn within reach, importance weights
-------------------------------------------------------------------------------------
Plain rejection (draw uniformly, keep draws in ``A``) is exact but keeps a vanishing fraction of
draws when ``V`` is far from the pool's average.  We draw the districts before the last from the
tilted pool

    q_j = exp(lam * y_j) / Z,    Z = sum_k exp(lam * y_k),    y_j = (a_j - T n_j) / nbar,

``nbar = mean(n)``, with ``T`` the target share (``V`` itself whenever the pool can reach it,
else the middle of the reachable part of the window, so always ``|T - V| <= tol``) and ``lam`` the
root of ``E_q[y] = sum_j q_j y_j = 0`` (found with ``scipy.optimize.brentq``; ``E_q[y]`` increases
with ``lam`` because its derivative is ``Var_q(y) >= 0``).  Since ``sum_i a_{j_i} / sum_i n_{j_i} -
T`` has the sign of ``sum_i y_{j_i}``, tilted draws centre on the share ``T`` wherever ``V`` lies.

*The last district within reach.*  With ``SA``, ``SN`` the votes and turnout of the first
``N - 1`` districts and ``P = SA - T SN``, a last district ``j`` completes the delegation into
``A`` when ``-tol (SN + n_j) <= SA + a_j - V (SN + n_j) <= tol (SN + n_j)``; writing
``a_j = nbar y_j + T n_j``, that is

    -P + (V - T - tol)(SN + n_j)  <=  nbar y_j  <=  -P + (V - T + tol)(SN + n_j),

two linear constraints in ``(y_j, n_j)``.  As ``V - T - tol <= 0 <= V - T + tol`` and
``n_j <= n_max`` (the largest eligible turnout), every such ``j`` lies in

    S = { j : -P + (V - T - tol)(SN + n_max) <= nbar y_j <= -P + (V - T + tol)(SN + n_max) },

a ``y``-interval (widened by 1e-9 of its scale so that rounding never leaves a completing
district out).  The last district is drawn from ``q`` restricted to ``S``: with the eligible
districts sorted by ``y``, ``S`` is a run of them and its mass ``m = q(S)`` a difference of
cumulative sums.  A draw is made of ``N + 1`` uniforms: ``N - 1`` for the first districts, one for
the last, one for the rejection control below.  The proposal probability of ``J`` is

    Q(J) = prod_{i<N} q_{j_i} * q_{j_N} / m(J_{<N})       (j_N in S; rows with m = 0 are dropped).

*Rejection control* (Liu, Chen and Wong 1998 [4]_): a row whose window mass is small (the first
districts landed where few last districts can complete them) is kept only with probability
``min(1, m / c)`` and then weighted ``max(m, c)``, where ``c = LAST_FLOOR * m_0`` and ``m_0`` is
the mass of ``S`` after ``N - 1`` districts of mean turnout summing to exactly the centre.  Without
it the many rows with tiny ``m`` are kept with tiny weights and the effective sample size halves;
with it they are thinned instead, at the same expected weight per row.

*Weight.*  A kept row (in ``A`` and passing the control) gets

    w(J) = p(J) / (Q(J) min(1, m/c)) = (1/M)^N / prod_i q_{j_i} * max(m, c)
         = (Z/M)^N * exp(-lam * sum_i y_{j_i}) * max(m, c),

``p(J) = M^{-N}`` the uniform law.  For any function ``f`` of the delegation,

    E[w f] = sum_{J_{<N}} sum_{j_N in S} Q(J) min(1, m/c) 1_A(J) w(J) f(J)
           = sum_J 1_A(J) p(J) f(J) = P(A) E_p[f | A],

because every ``J`` in ``A`` has its last district in the window of its first ``N - 1`` (so
``m > 0`` there and no ``J`` in ``A`` is missed), and likewise ``E[w] = P(A)``; so the
self-normalised average ``sum_r w_r f(J_r) / sum_r w_r`` over i.i.d. rows converges to ``E_p[f |
A]``, the conditional expectation under the uniform sampler, for every ``f`` at once: the weighted
kept draws *are* the conditional distribution (exact in the limit, with an ``O(1/R)`` ratio bias,
as for any self-normalised importance sampler [2]_).  The constant ``(Z/M)^N`` cancels on
normalising, so the stored weights are ``exp(-lam * sum_i y_{j_i}) * max(m, c)`` scaled to sum to
one per unit (:func:`log_weight`).  Any ``lam``, any superset ``S`` and any ``c >= 0`` keep the
estimator exact; they affect only its efficiency (``lam = 0``, ``S`` = the pool, ``c = 0`` is plain
rejection).  A delegation of one district has nothing before the last: ``lam = 0``, ``S`` depends
on ``V`` alone, and every kept draw weighs the same.

What it buys depends on how far one district can move the delegation's share, about 1/N of the
spread of the districts' shares. So only delegations of fewer than ``LAST_MAX_N`` (45) districts
draw their last district within reach; larger ones take ``S`` = the pool (``m = 1``, ``c = 0``):
every district from the tilted pool, as before this method. At the bench's x1 history
(README, Performance) the federal delegations (2 to 53 districts) keep 4 times as many of their
proposals, the state upper ones 1.2 times, with the same effective sample sizes; the state lower
ones (58 to 203 districts) draw as before.

Drawing: each unit draws from its own random stream (the child of the call's seed sequence keyed
by the unit), so its draws depend on nothing but the seed, its key and its own inputs: not on the
other units of the call, nor on how the work is cut into batches, chunks or threads.  The unit's
stream has two children, each read row after row: ``N - 1`` uniforms a row of the first for the
districts before the last, two of the second for the last district and the rejection control.
The tilt is solved per unit (``brentq``, above); the districts before the last are drawn in chunks
of 64K (draw, district) cells by inverse CDF with a guide table (:func:`_inverse_cdf`), over the
whole pool's index with the unit's own state at zero mass (:func:`_pool_cdf`), so every unit
reads the pool's arrays in place; the last districts of at least 4,096 rows at once (their steps
are per row: window ends, two guide-table searches, the test).  The units of a (cycle, chamber)
are not stacked into one array pass: with one stream per unit the work per cell (a uniform, a
table look-up, two gathers) would be the same, and a chunk of 64K cells takes some 20 array
operations, so the loop over units adds little (running batches of units on two threads was
slower on the bench's shared 2-CPU machine, so it is not done).

Monte Carlo error: Kish's effective sample size ``ESS = (sum w)^2 / sum w^2`` [3]_ and, for a
weighted mean ``m = sum w f`` (weights normalised to one), the delta-method standard error of the
self-normalised estimator, ``se = sqrt(sum w^2 (f - m)^2)`` [2]_.

References
----------
.. [2] A. B. Owen, "Monte Carlo theory, methods and examples" (2013), ch. 9 (importance sampling,
       self-normalised estimator and its variance, exponential tilting). Chapter from memory.
.. [3] L. Kish, "Survey Sampling", Wiley (1965): effective sample size of a weighted sample.
       From memory.
.. [4] J. S. Liu, R. Chen and W. H. Wong, "Rejection control and sequential importance
       sampling", Journal of the American Statistical Association 93 (1998), 1022-1031: keep a
       weighted draw with probability min(1, w / c) and weight it max(w, c). From memory.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .pool import NationalPool
from .proposal import (  # noqa: F401  (guide_table: the tests read it from here)
    LAST_MAX_N, _inverse_cdf, _LastDistrict, _pool_cdf, _tilted_proposal, guide_table, log_weight)

#: Proposal cells drawn at once per unit: 64K cells make temporaries of 512 KB, which stay in cache
#: and are reused by the allocator (timed on one unit of the bench's x1 history, on the shared
#: machine: chunks of 128K cells and more cost 1.5x to 3x as much per cell, 16K to 64K the same).
_DRAW_CELLS = 1 << 16
#: Rows whose last districts are drawn at once (in chunks of _DRAW_CELLS cells before that): the
#: per-row steps are some 30 array operations, so a few thousand rows make their fixed costs small.
_DRAW_ROWS = 4096


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
    >>> from monitor.pool import national_pool
    >>> p = national_pool([60, 40, 55, 45, 70], [40, 60, 45, 55, 30], ["X", "X", "Y", "Y", "Z"])
    >>> d = simulate_delegations(p, ["X"], [2], [0.5], rng=1, accepted=1000)
    >>> int(d.n_accepted[0]), bool(np.all(np.abs(d.share - 0.5) <= 0.005))
    (1000, True)
    >>> sorted(set(p.state[d.district].tolist()))  # X's own districts are left out
    ['Y']
    """
    unit_state, n_districts, vote_share, keys = _check_units(pool, unit_state, n_districts, vote_share, tol,
                                                             accepted, max_draws, unit_key)
    base = _base_seed(rng)
    group = _GroupArrays.of(pool)
    units = []
    for u in range(unit_state.shape[0]):
        eligible = np.flatnonzero(pool.state != unit_state[u]) if exclude_own else np.arange(pool.size)
        stream = lambda key=int(keys[u]): np.random.default_rng(  # noqa: E731
            np.random.SeedSequence(base.entropy, spawn_key=(*base.spawn_key, key)))
        units.append(_draw_unit(group, eligible, int(n_districts[u]), float(vote_share[u]), tol, accepted,
                                max_draws, stream))
    return _assemble(pool, group, unit_state, n_districts, vote_share, tol, units)


def _check_units(pool, unit_state, n_districts, vote_share, tol, accepted, max_draws, unit_key):
    """The units' arrays after checking them (every problem raises ValueError), and their keys."""
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
    keys = np.arange(U) if unit_key is None else np.asarray(unit_key)
    bad_keys = U and (not np.issubdtype(keys.dtype, np.integer) or (keys < 0).any())
    if keys.shape != (U,) or bad_keys:
        raise ValueError("unit_key must give one non-negative integer per unit")
    return unit_state, n_districts, vote_share, keys


@dataclass(frozen=True)
class _GroupArrays:
    """The per-district arrays every unit of a call reads, computed once: votes, turnout, seat to a,
    and the index type of the stored draws."""

    a: np.ndarray
    n: np.ndarray
    seat: np.ndarray
    index_type: type

    @classmethod
    def of(cls, pool: NationalPool) -> "_GroupArrays":
        return cls(pool.votes_a, pool.turnout, pool.seat_a, np.int32 if pool.size < 2**31 else np.int64)


@dataclass(frozen=True)
class _UnitDraws:
    """One unit's kept draws: pool indexes (flat, kept x N), normalised weights, shares, seats; counts."""

    district: np.ndarray
    weight: np.ndarray
    share: np.ndarray
    seats: np.ndarray
    proposed: int = 0
    accepted: int = 0
    ess: float = np.nan
    tilt: float = 0.0
    tilt_share: float = np.nan

    @classmethod
    def none(cls, index_type, proposed: int = 0, tilt: float = 0.0, tilt_share: float = np.nan) -> "_UnitDraws":
        """No kept draw (the target out of reach, or none of ``proposed`` landed in the window)."""
        return cls(np.empty(0, index_type), np.empty(0), np.empty(0), np.empty(0), proposed, 0, np.nan, tilt,
                   tilt_share)


def _draw_unit(group: _GroupArrays, eligible: np.ndarray, N: int, v: float, tol: float, accepted: int,
               max_draws: int, stream) -> _UnitDraws:
    """Proposals for one unit (``stream()`` gives its generator) until ``accepted`` land within
    ``tol`` of ``v`` (and pass the rejection control), or ``max_draws`` were made; nothing kept
    when the target is out of reach.

    A delegation of fewer than ``LAST_MAX_N`` districts draws its last district within reach
    (:class:`_LastDistrict`): ``N - 1`` uniforms a row of one child of the unit's stream for the
    districts before the last, two of another for the last district and the rejection control. A
    larger one draws all ``N`` from the tilted pool, ``N`` uniforms a row of the unit's stream.
    The tilted draws are by inverse CDF over the whole pool's index (:func:`_pool_cdf`), so the
    pool's arrays are read in place."""
    prop = None
    if eligible.size:
        a_el, n_el = group.a[eligible], group.n[eligible]
        prop = _tilted_proposal(a_el, n_el, a_el / n_el, v, tol, tilt=N > 1)
    if prop is None:
        return _UnitDraws.none(group.index_type)
    t, lam, y_el, q = prop
    a, n, seat = group.a, group.n, group.seat
    y = np.zeros(a.size)
    y[eligible] = y_el
    last = _LastDistrict.of(eligible, y_el, q, n_el, v, t, tol, N) if N < LAST_MAX_N else None
    free = N - 1 if last else N  # districts drawn from the tilted pool
    cdf = _pool_cdf(a.size, eligible, q) if free else None
    guide = guide_table(cdf) if free else None
    first_rng, last_rng = stream().spawn(2) if last else (stream(), None)
    sub = max(1, _DRAW_CELLS // max(free, 1))  # rows of a chunk of the tilted draws
    kept_j, kept_logw, kept_share, kept_seats = [], [], [], []
    got = done = 0
    while got < accepted and done < max_draws:
        # size the batch from the acceptance seen so far (the first guesses 1 in 2, so that a unit
        # whose draws mostly land in the window does not make many it will not use). The draws do
        # not depend on the batch sizes: each is the next row of the unit's streams, and the unit
        # stops at its accepted-th kept draw
        rate = got / done if got else (0.5 if done == 0 else 0.5 / done)
        want = int(np.ceil(1.1 * (accepted - got) / rate)) + 64
        r = min(max(sub, _DRAW_ROWS), max_draws - done, want)
        chunks, sa, sn = _tilted_districts(cdf, guide, first_rng, group, r, free, sub)
        inside = np.ones(r, bool)
        if last:
            u = last_rng.random((r, 2))
            j_last, mass, inside = last.draw(sa, sn, u[:, 0], u[:, 1])
            sa += a[j_last]
            sn += n[j_last]
        sh = sa / sn
        ok = np.flatnonzero(inside & (np.abs(sh - v) <= tol))
        if ok.size >= accepted - got:  # stop at the accepted-th kept draw (so the count of proposals
            ok = ok[: accepted - got]    # made does not depend on the batch sizes either)
            done += int(ok[-1]) + 1
        else:
            done += r
        got += ok.size
        if ok.size:
            jk = _kept_rows(chunks, ok, sub, N, j_last if last else None)
            kept_j.append(jk.astype(group.index_type).ravel())
            kept_logw.append(log_weight(lam, y[jk].sum(axis=1), mass[ok] if last else 1.0,
                                        last.floor if last else 0.0))
            kept_share.append(sh[ok])
            kept_seats.append(seat[jk].sum(axis=1))
    if not got:
        return _UnitDraws.none(group.index_type, done, lam, t)
    logw = np.concatenate(kept_logw)
    w = np.exp(logw - logw.max())
    w /= w.sum()
    ess = 1.0 / float(w @ w)
    return _UnitDraws(np.concatenate(kept_j), w, np.concatenate(kept_share), np.concatenate(kept_seats),
                      done, got, ess, lam, t)


def _tilted_districts(cdf, guide, rng, group: _GroupArrays, r: int, k: int, sub: int):
    """``k`` tilted districts for each of ``r`` rows (``k`` uniforms of ``rng`` a row), drawn in
    chunks of ``sub`` rows (about ``_DRAW_CELLS`` cells), and the rows' votes and turnout summed."""
    sa, sn, chunks = np.zeros(r), np.zeros(r), []
    if k == 0:
        return [np.empty((r, 0), np.intp)], sa, sn
    for lo in range(0, r, sub):
        j = _inverse_cdf(cdf, guide, rng.random((min(sub, r - lo), k)))
        sa[lo:lo + j.shape[0]] = group.a[j].sum(axis=1)
        sn[lo:lo + j.shape[0]] = group.n[j].sum(axis=1)
        chunks.append(j)
    return chunks, sa, sn


def _kept_rows(chunks, ok: np.ndarray, sub: int, N: int, j_last) -> np.ndarray:
    """The districts of the kept rows ``ok`` (sorted), from the tilted chunks and the last districts."""
    jk = np.empty((ok.size, N), np.intp)
    for c, part in enumerate(chunks):
        lo, hi = np.searchsorted(ok, (c * sub, (c + 1) * sub))
        jk[lo:hi, : part.shape[1]] = part[ok[lo:hi] - c * sub]
    if j_last is not None:
        jk[:, N - 1] = j_last[ok]
    return jk


def _assemble(pool, group: _GroupArrays, unit_state, n_districts, vote_share, tol,
              units: list[_UnitDraws]) -> Delegations:
    """The units' draws, flat, unit after unit."""
    U = len(units)
    n_acc = np.array([u.accepted for u in units], dtype=np.int64)
    district = np.concatenate([u.district for u in units] + [np.empty(0, group.index_type)])
    flat = lambda name: np.concatenate([getattr(u, name) for u in units]) if U else np.empty(0)  # noqa: E731
    return Delegations(
        pool=pool,
        n_districts=n_districts,
        vote_share=vote_share,
        unit_state=unit_state,
        tol=float(tol),
        draw_unit=np.repeat(np.arange(U, dtype=np.int64), n_acc),
        weight=flat("weight"),
        share=flat("share"),
        seats=flat("seats"),
        district=district,
        n_proposed=np.array([u.proposed for u in units], dtype=np.int64),
        n_accepted=n_acc,
        ess=np.array([u.ess for u in units], dtype=np.float64),
        tilt=np.array([u.tilt for u in units], dtype=np.float64),
        tilt_share=np.array([u.tilt_share for u in units], dtype=np.float64),
    )
