"""The proposals of the national-pool sampler (:mod:`monitor.pool.sampler`, whose docstring derives
them): the tilt, inverse-CDF draws by guide table, and the law of a delegation's last district
within reach with its rejection control and the importance weight."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq


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


#: Guide-table slots per pool district (rounded up to a power of two): with many slots per
#: district almost every draw is resolved by one table look-up.
GUIDE_SLOTS = 16
_GUIDE_MAX = 1 << 24


def guide_table(cdf: np.ndarray, slots: int = GUIDE_SLOTS) -> np.ndarray:
    """The guide table of :func:`_inverse_cdf` for ``cdf``: ``K`` slots (a power of two, about
    ``slots`` per entry of ``cdf``), ``guide[k] = min{i : cdf[i] > k/K}``.

    Built without a search: ``cdf[i] <= k/K`` exactly when ``ceil(K cdf[i]) <= k`` (``K cdf[i]``
    is exact, ``K`` being a power of two), so ``guide[k]`` counts the entries with
    ``ceil(K cdf[i]) <= k``."""
    size = min(_GUIDE_MAX, 1 << max(1, int(np.ceil(np.log2(max(cdf.size, 1) * slots)))))
    slot = np.minimum(np.ceil(cdf * size), size).astype(np.int64)
    return np.cumsum(np.bincount(slot, minlength=size + 1))[:size]


def _inverse_cdf(cdf: np.ndarray, guide: np.ndarray, u: np.ndarray) -> np.ndarray:
    """``j = min{i : cdf[i] > u}`` for each ``u`` in [0, 1): the index sampled by inverse CDF.

    Same result as ``np.searchsorted(cdf, u, side="right")`` (so the law is exactly the one
    ``cdf`` encodes; zero-probability entries are never returned), found faster with a guide
    table (:func:`guide_table`; Devroye 1986, "Non-Uniform Random Variate Generation",
    ch. III, indexed search; from memory): start at the guide entry of ``u``'s slot and step
    forward. The table has a power-of-two size ``K``, so ``floor(u K)`` is exact and the guide
    entry never lies past the answer. ``cdf`` must end in exactly 1.0.
    """
    shape, u = u.shape, u.ravel()
    k = (u * guide.size).astype(np.int64)
    j = guide[k]
    todo = np.flatnonzero(cdf[j] <= u)
    for _ in range(2):  # a step or two settles nearly all the rest
        if not todo.size:
            break
        j[todo] += 1
        todo = todo[cdf[j[todo]] <= u[todo]]
    if todo.size:  # the few in a slot that spans many entries (a run of zero mass, say): a search
        j[todo] = np.searchsorted(cdf, u[todo], side="right")
    return j.reshape(shape)


def _tilted_proposal(a: np.ndarray, n: np.ndarray, share: np.ndarray, v: float, tol: float, tilt: bool = True):
    """Centre share T, tilt lam, scaled y and proposal q for one unit; None if A is empty.

    Every delegation's share is a weighted mean of its districts' shares, so it lies in
    [min x, max x]; the event A is empty when [V - tol, V + tol] misses that range. Without
    ``tilt`` (a delegation of one district: no districts before the last) ``lam = 0``.
    """
    xmin, xmax = float(share.min()), float(share.max())
    lo, hi = max(v - tol, xmin), min(v + tol, xmax)
    if lo > hi:
        return None
    # Centre on V when the pool can average to V; otherwise on the reachable part of the window.
    t = v if xmin < v < xmax or xmin == xmax else 0.5 * (lo + hi)
    y = (a - t * n) / n.mean()
    if tilt and y.min() < 0.0 < y.max():
        lam = _solve_tilt(y)
    else:
        # All districts on one side of T (identical shares, or T on the pool's edge): no finite
        # tilt centres on T; uniform proposals (plain rejection) stay exact.
        lam = 0.0
    z = lam * y
    q = np.exp(z - z.max())
    q /= q.sum()
    return t, lam, y, q


#: Rejection control of the last district (module docstring of :mod:`monitor.pool.sampler`): a draw
#: whose window mass ``m`` is below ``c = LAST_FLOOR * m_0`` (``m_0`` the mass when the districts
#: before the last sum to exactly the centre) is kept with probability ``m / c`` and weighted ``c``.
#: Measured at the bench's x1 history: 1.0 keeps the effective sample size per kept draw of the
#: tilted pool alone (median 1,991 of 2,000 federal) with 4x fewer proposals; 0.5 keeps 1.4x more
#: proposals at 0.9 of the effective size, the same effective draws per second.
LAST_FLOOR = 1.0
#: Delegations of fewer districts draw their last district within reach; larger ones draw all from
#: the tilted pool (``S`` the whole pool): one district moves a delegation's share by about 1/N of
#: the districts' spread, so for large N few more proposals land in the window, and the per-row
#: steps cost more than they save. Measured at the bench's x1 history (effective draws per CPU
#: second, new over tilted alone: 1.1-1.2 below 45 districts, 0.7-0.9 above; README, Performance).
LAST_MAX_N = 45


_BELOW_ONE = np.nextafter(1.0, 0.0)
#: Guide-table slots per district of the last district's searches (one per row, not per cell: a
#: smaller table, cheaper to build per unit)
_ROW_SLOTS = 4


@dataclass(frozen=True)
class _LastDistrict:
    """The law of a unit's last district: the tilted pool restricted to the window ``S`` that the
    districts before it leave (:meth:`window`), sampled by inverse CDF over the eligible districts
    sorted by ``y``.

    Both searches are guide-table look-ups (:func:`_inverse_cdf`): the window's ends on the sorted
    ``y`` scaled into (0, 1) (``x_k = (y_k - y_0 + d) / (y_{M-1} - y_0 + 2 d)``, ``d`` a thousandth
    of the span, with an entry 1.0 after the last, so that ``min{k : x_k > u}`` is the position
    after the districts with ``y`` up to the end, for every ``u`` clipped into [0, 1)), the last
    district on the cumulative mass. The ends are affine in the rows' votes and turnout, so each
    is one multiply-add per row (``_ends``)."""

    district: np.ndarray  # pool index of the eligible districts, sorted by y
    y: np.ndarray         # their y, sorted
    scaled: np.ndarray    # x_k above, and 1.0
    y_guide: np.ndarray   # guide table of scaled
    cum: np.ndarray       # cum[k] = q-mass of the first k of them (cum[0] = 0, cum[-1] = 1)
    guide: np.ndarray     # guide table of cum[1:]
    ends: np.ndarray      # (2, 3): the scaled lower and upper ends = e0 * sa + e1 * sn + e2
    floor: float          # c of the rejection control

    @classmethod
    def of(cls, eligible: np.ndarray, y: np.ndarray, q: np.ndarray, n: np.ndarray, v: float, t: float,
           tol: float, N: int) -> "_LastDistrict":
        order = np.argsort(y, kind="stable")
        ys = y[order]
        cum = np.r_[0.0, np.cumsum(q[order])]
        cum /= cum[-1]
        span = float(ys[-1] - ys[0])
        d = 1e-3 * span if span > 0 else 1.0
        scaled = np.r_[(ys - ys[0] + d) / (span + 2 * d), 1.0]
        n_mean, n_max = float(n.mean()), float(n.max())
        # nbar y_j >= -P + (V - T - tol)(SN + n_max), P = SA - T SN: the lower end is
        # (-SA + (V - tol) SN + (V - T - tol) n_max) / nbar, the upper one likewise with +tol; each
        # is widened by 1e-9 of the largest magnitude an end can take (|P| <= (N - 1) n_max and the
        # rest <= 2 tol N n_max, so N n_max / nbar bounds both, shares and T lying in [0, 1])
        eps = 1e-9 * (1.0 + 2.0 * N * n_max / n_mean)
        ends = []
        for sign in (-1.0, 1.0):
            e = np.array([-1.0, v + sign * tol, (v - t + sign * tol) * n_max]) / n_mean
            e[2] += sign * eps - ys[0] + d
            ends.append(e / (span + 2 * d))
        last = cls(eligible[order], ys, scaled, guide_table(scaled, _ROW_SLOTS), cum, guide_table(cum[1:], _ROW_SLOTS),
                   np.array(ends), 0.0)
        before = np.full(1, (N - 1) * n_mean)  # N - 1 districts of mean turnout at exactly the centre
        lo, hi = last.window(t * before, before)
        return cls(**{**last.__dict__, "floor": LAST_FLOOR * float(cum[hi[0]] - cum[lo[0]])})

    def window(self, sa: np.ndarray, sn: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``S`` for districts before the last with votes ``sa`` and turnout ``sn`` (arrays): the
        sorted positions ``[lo, hi)`` with ``y`` in the interval that contains every last district
        completing the delegation into ``A`` (module docstring), widened by 1e-9 of its scale so
        that rounding never leaves such a district out."""
        out = []
        for e in self.ends:
            u = e[0] * sa + e[1] * sn + e[2]
            out.append(_inverse_cdf(self.scaled, self.y_guide, np.clip(u, 0.0, _BELOW_ONE, out=u)))
        return out[0], out[1]

    def draw(self, sa: np.ndarray, sn: np.ndarray, u: np.ndarray, u_keep: np.ndarray):
        """The last district (pool index) of each row, its window's mass ``m`` and whether the
        rejection control keeps the row (``u_keep < m / c``; always when ``m >= c``). A row whose
        window is empty (``m = 0``: no last district can complete it) is not kept."""
        lo, hi = self.window(sa, sn)
        start = self.cum[lo]
        mass = self.cum[hi] - start
        pos = u * mass
        pos += start
        k = _inverse_cdf(self.cum[1:], self.guide, np.minimum(pos, _BELOW_ONE, out=pos))
        np.minimum(k, hi - 1, out=k)  # in [lo, hi) but for rounding at the window's top
        keep = u_keep * self.floor < mass if self.floor > 0 else mass > 0
        return self.district[k], mass, keep


def log_weight(lam: float, y_sum: np.ndarray, mass: np.ndarray, floor: float) -> np.ndarray:
    """Log importance weight of kept draws, up to a constant per unit:
    ``-lam * sum_i y_{j_i} + log max(m, c)`` (module docstring)."""
    return -lam * y_sum + np.log(np.maximum(mass, floor))


def _pool_cdf(size: int, eligible: np.ndarray, q: np.ndarray) -> np.ndarray:
    """The CDF over the whole pool of the proposal ``q`` on ``eligible`` (zero mass elsewhere).

    At the eligible entries it holds exactly the values of ``cumsum(q) / sum`` over the eligible
    districts alone (adding the zeros of the others leaves a float sum unchanged), and an entry
    of zero mass repeats its predecessor's value, so ``min{i : cdf[i] > u}`` is never one: the
    inverse CDF returns ``eligible[j]`` for the ``j`` the eligible districts' own CDF gives."""
    full = np.zeros(size)
    full[eligible] = q
    cdf = np.cumsum(full)
    cdf /= cdf[-1]
    return cdf
