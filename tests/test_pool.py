"""Tests of the national-pool sampler, expected seats, null distributions and context statistics.

Outside references used here:
- plain rejection sampling (written below, independent of monitor.pool) and an exact enumeration
  of the uniform sampler by dynamic programming: the definition the sampler must reproduce;
- the closed-form approximation of S. Wang's blog post (formula seen verbatim in a copy of the
  post; post date not checked), and the textbook conditional law of i.i.d. normals given their
  mean (each N(m, S^2 (1 - 1/N)), pairwise correlation -1/(N - 1)), with the orthant probability
  from scipy.stats.multivariate_normal;
- scipy.stats.percentileofscore, scipy.stats.median_abs_deviation and numpy.quantile (weighted
  inverted CDF) as reference libraries.

Monte Carlo error rule used throughout: two estimates agree when their difference is within
4 standard errors, se = sqrt(se_1^2 + se_2^2), with se = sqrt(p (1 - p) / n) for a proportion from
n unweighted draws and se = sqrt(sum_r w_r^2 (f_r - m)^2) (delta method for the self-normalised
importance-sampling mean m = sum_r w_r f_r, weights summing to 1; Owen 2013, "Monte Carlo theory,
methods and examples", ch. 9, from memory).  4 SE is common practice: two-sided 6e-5 per check.
All seeds are fixed, so the tests are deterministic.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from monitor.pool import (
    NULL_MEASURES,
    compare_with_pool,
    cross_state_percentile,
    expected_seats,
    national_pool,
    null_distributions,
    robust_z,
    simulate_delegations,
)
from monitor.pool.proposal import LAST_FLOOR
from monitor.pool.sampler import LAST_MAX_N, _inverse_cdf, guide_table
from monitor.pool.seats import _stable_rows_order, _weighted_midrank, _weighted_quantiles

Z_MAX = 4.0


# ---------------------------------------------------------------------------------------------
# References written independently of monitor.pool
# ---------------------------------------------------------------------------------------------


def seat_of(a, b):
    return (a > b) + 0.5 * (a == b)


def rejection_seats(a, b, N, V, tol, draws, seed, chunk=500_000):
    """Plain rejection: N districts uniform with replacement, keep |sum a/sum n - V| <= tol."""
    g = np.random.default_rng(seed)
    n, s = a + b, seat_of(a, b)
    kept, done = [], 0
    while done < draws:
        r = min(chunk, draws - done)
        j = g.integers(0, a.size, size=(r, N))
        ok = np.abs(a[j].sum(1) / n[j].sum(1) - V) <= tol
        kept.append(s[j[ok]].sum(1))
        done += r
    k = np.concatenate(kept)
    return k, k.size / draws


def exact_seat_law(a, b, N, V, tol):
    """Exact law of seats under the uniform sampler given the window, by dynamic programming.

    Needs integer votes.  Counts ordered N-tuples by (sum a, sum n, 2 * seats); returns
    (P(A), dict 2*seats -> conditional probability).
    """
    a = a.astype(int)
    n = (a + b).astype(int)
    s2 = (2 * seat_of(a, b)).astype(int)
    A, T, K = a.sum() * N + 1, n.max() * N + 1, 2 * N + 1
    count = np.zeros((A, T, K))
    count[0, 0, 0] = 1.0
    for _ in range(N):
        new = np.zeros_like(count)
        for aj, nj, sj in zip(a, n, s2):
            new[aj:, nj:, sj:] += count[: A - aj, : T - nj, : K - sj]
        count = new
    sa, sn = np.meshgrid(np.arange(A), np.arange(T), indexing="ij")
    with np.errstate(invalid="ignore", divide="ignore"):
        inside = (sn > 0) & (np.abs(sa / sn - V) <= tol)
    by_k = count[inside].sum(axis=0)
    total = a.size**N
    return by_k.sum() / total, {k: by_k[k] / by_k.sum() for k in range(K) if by_k[k] > 0}


def weighted_share(d, unit, mask):
    w = d.weight[d.draw_unit == unit]
    f = mask[d.draw_unit == unit].astype(float)
    p = w @ f
    return p, np.sqrt((w**2) @ (f - p) ** 2)


@pytest.fixture(scope="module")
def small_pool():
    """40 districts of unequal turnout, one exact tie, eight 'states' of five districts."""
    g = np.random.default_rng(5)
    x = np.clip(g.normal(0.5, 0.12, 40), 0.05, 0.95)
    n = g.integers(50, 150, 40).astype(float)
    a = np.round(x * n)
    b = n - a
    a[0] = b[0] = 60.0  # an exact tie: half a seat
    return national_pool(a, b, np.repeat(np.arange(8), 5))


# ---------------------------------------------------------------------------------------------
# Sampler against rejection sampling and exact enumeration
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "V, tol",
    [(0.47, 0.005), (0.58, 0.005), (0.60, 0.02)],
    ids=["near-mean", "far-from-mean", "far-wide-window"],
)
def test_seat_law_matches_rejection_sampling(small_pool, V, tol):
    # pool vote-weighted mean is 0.466; at V = 0.58 rejection keeps ~1 draw in 900; the wide
    # window makes the importance weights matter most (log-weights spread ~ lam * tol * N)
    N = 6
    a, b = small_pool.votes_a, small_pool.votes_b
    k_rej, _ = rejection_seats(a, b, N, V, tol, draws=6_000_000, seed=11)
    assert k_rej.size > 4000
    d = simulate_delegations(small_pool, [-1], [N], [V], rng=12, tol=tol, accepted=20_000)
    assert d.n_accepted[0] == 20_000
    worst = 0.0
    for k in np.union1d(np.unique(k_rej), np.unique(d.seats)):
        p_rej = np.mean(k_rej == k)
        se_rej = np.sqrt(p_rej * (1 - p_rej) / k_rej.size)
        p_is, se_is = weighted_share(d, 0, d.seats == k)
        se = np.hypot(se_rej, se_is)
        assert se > 0 or p_rej == p_is
        if se > 0:
            worst = max(worst, abs(p_is - p_rej) / se)
    assert worst < Z_MAX
    r = expected_seats(d, [0.0])
    se_mean = np.hypot(r.mc_se[0], k_rej.std() / np.sqrt(k_rej.size))
    assert abs(r.expected_seats[0] - k_rej.mean()) < Z_MAX * se_mean


def test_large_delegation_matches_rejection_sampling(small_pool):
    # a delegation of LAST_MAX_N districts or more draws them all from the tilted pool (no last
    # district within reach): its seat law against plain rejection, the same 4-SE rule
    N, V, tol = LAST_MAX_N + 5, 0.49, 0.005
    a, b = small_pool.votes_a, small_pool.votes_b
    k_rej, _ = rejection_seats(a, b, N, V, tol, draws=400_000, seed=13, chunk=50_000)
    assert k_rej.size > 20_000
    d = simulate_delegations(small_pool, [-1], [N], [V], rng=14, tol=tol, accepted=20_000)
    r = expected_seats(d, [0.0])
    se_mean = np.hypot(r.mc_se[0], k_rej.std() / np.sqrt(k_rej.size))
    assert abs(r.expected_seats[0] - k_rej.mean()) < Z_MAX * se_mean
    for k in np.unique(k_rej)[np.bincount(np.searchsorted(np.unique(k_rej), k_rej)) >= 200]:  # seat counts seen 200+ times
        p_rej = np.mean(k_rej == k)
        p_is, se_is = weighted_share(d, 0, d.seats == k)
        assert abs(p_is - p_rej) < Z_MAX * np.hypot(se_is, np.sqrt(p_rej * (1 - p_rej) / k_rej.size))


def test_seat_law_matches_exact_enumeration_far_from_mean():
    # integer votes so the uniform sampler's law can be enumerated exactly (15^5 ordered tuples)
    g = np.random.default_rng(21)
    n = g.integers(20, 41, 15)
    a = np.round(np.clip(g.normal(0.45, 0.1, 15), 0.1, 0.9) * n)
    b = n - a
    pool = national_pool(a, b, np.zeros(15, int))
    N, V, tol = 5, 0.60, 0.005
    p_a, law = exact_seat_law(a, b, N, V, tol)
    assert 0 < p_a < 1e-2
    d = simulate_delegations(pool, [1], [N], [V], rng=4, accepted=20_000)
    for k2, p in law.items():
        p_is, se_is = weighted_share(d, 0, 2 * d.seats == k2)
        assert abs(p_is - p) < Z_MAX * max(se_is, np.sqrt(p * (1 - p) / d.ess[0]))
    assert set(np.unique(2 * d.seats).astype(int)) <= set(law)


@pytest.mark.parametrize("N, V", [(1, 0.505), (2, 0.47), (3, 0.47), (3, 0.62), (4, 0.38)])
def test_proposal_and_weights_exact_by_enumeration(N, V):
    # The exact expectation of the weighted estimator, by enumerating every proposal (every
    # district before the last, every last district of its window S, the rejection control's
    # keep probability) with the sampler's own window, mass, floor c and log-weight, equals the
    # conditional expectation under the uniform sampler, by enumerating every ordered N-tuple in A
    # (the definition the sampler must reproduce). Checked for seats and for the count of one
    # district in the delegation; and S contains every last district completing a tuple into A.
    import itertools

    from monitor.pool.sampler import _LastDistrict, _tilted_proposal, log_weight

    g = np.random.default_rng(31)
    n = g.integers(20, 61, 9).astype(float)
    a = np.round(np.clip(g.normal(0.47, 0.15, 9), 0.05, 0.95) * n)
    tol, M = 0.01, 9
    seat = seat_of(a, n - a)
    t, lam, y, q = _tilted_proposal(a, n, a / n, V, tol, tilt=N > 1)
    last = _LastDistrict.of(np.arange(M), y, q, n, V, t, tol, N)
    exact = np.zeros(3)  # sum over J in A of p(J) * (1, seats, count of district 0)
    estimator = np.zeros(3)  # sum over proposals of P(proposal, kept) * w(J) * (1, seats, count of 0)
    for before in itertools.product(range(M), repeat=N - 1):
        before = list(before)
        sa, sn = a[before].sum(), n[before].sum()
        lo, hi = last.window(np.array([sa]), np.array([sn]))
        S = last.district[lo[0]:hi[0]]
        m = last.cum[hi[0]] - last.cum[lo[0]]
        for j in range(M):
            J = before + [j]
            f = np.array([1.0, seat[J].sum(), J.count(0)])
            if abs((sa + a[j]) / (sn + n[j]) - V) > tol:
                continue
            exact += f / M**N
            assert j in S  # S holds every completion into A
            kept = np.prod(q[before]) * q[j] / m * (min(1.0, m / last.floor) if last.floor > 0 else 1.0)
            estimator += kept * np.exp(log_weight(lam, y[J].sum(), np.array([m]), last.floor)[0]) * f
    assert exact[0] > 0
    np.testing.assert_allclose(estimator[1:] / estimator[0], exact[1:] / exact[0], rtol=1e-11, atol=1e-14)


def test_ess_per_draw_beats_rejection_acceptance_far_from_mean():
    # rejection's ESS per proposal is its acceptance rate P(A), here exact by enumeration
    g = np.random.default_rng(21)
    n = g.integers(20, 41, 15)
    a = np.round(np.clip(g.normal(0.45, 0.1, 15), 0.1, 0.9) * n)
    pool = national_pool(a, n - a, np.zeros(15, int))
    N, V, tol = 5, 0.64, 0.005
    p_a, _ = exact_seat_law(a, n - a, N, V, tol)
    d = simulate_delegations(pool, [1], [N], [V], rng=4, accepted=5_000)
    ess_per_draw = d.ess[0] / d.n_proposed[0]
    assert p_a < 1e-4  # exact: 1.3e-5, so rejection would keep 1 draw in ~76,000
    # the tilt solves its defining equation sum_j q_j (a_j - T n_j) = 0 (proposals centre on T)
    y = a - d.tilt_share[0] * n
    q = np.exp(d.tilt[0] * (y / n.mean()) - np.max(d.tilt[0] * (y / n.mean())))
    assert abs(q @ y / q.sum()) < 1e-9 * n.mean()
    assert d.tilt_share[0] == V
    assert ess_per_draw > 1000 * p_a  # measured: 0.21 per draw, ~16,000 times P(A)


# ---------------------------------------------------------------------------------------------
# Closed-form approximation on a large Gaussian pool
# ---------------------------------------------------------------------------------------------


def test_gaussian_pool_closed_form():
    # Wang's blog approximation (formula V-primary per the post; check numbers COMPUTED):
    # N = 18, F1 = 0.51, S = 0.15 -> p = Phi((F1 - 0.5)/S) = 0.52658, E[k] = N p = 9.4784.
    # It treats the N districts as independent with SD S. Conditioning on their mean makes each
    # district N(m, S^2 (1 - 1/N)) with pairwise correlation -1/(N - 1) (textbook conditional
    # normal law), which moves the mean by 0.014 seats but shrinks the SD from 2.12 to ~1.28.
    # So: the mean is checked against the closed form within 0.05 seats (0.014 approximation
    # error + 4 MC SE ~ 0.02 + the window's curvature, < 0.001); the SD is checked against the
    # exact conditional law (derived here, with the window |m - F1| <= tol integrated out).
    N, F1, S, tol, M = 18, 0.51, 0.15, 0.005, 20_001
    x = np.clip(0.5 + S * stats.norm.ppf((np.arange(M) + 0.5) / M), 0.0, 1.0)  # quantile pool
    pool = national_pool(1000 * x, 1000 * (1 - x), np.zeros(M, int))
    d = simulate_delegations(pool, [1], [N], [F1], rng=3, accepted=40_000)
    r = expected_seats(d, [0.0])

    p = stats.norm.cdf((F1 - 0.5) / S)
    assert p == pytest.approx(0.52658, abs=1e-5)
    assert abs(r.expected_seats[0] - N * p) < 0.05

    s1, rho = S * np.sqrt(1 - 1 / N), -1 / (N - 1)
    nodes, wts = np.polynomial.legendre.leggauss(21)
    m = F1 + tol * nodes
    wts = wts * stats.norm.pdf(m, 0.5, S / np.sqrt(N))  # density of the mean on the window
    wts /= wts.sum()
    z = (m - 0.5) / s1
    p1 = stats.norm.cdf(z)
    bvn = stats.multivariate_normal(mean=[0, 0], cov=[[1, rho], [rho, 1]])
    p11 = np.array([bvn.cdf([zi, zi]) for zi in z])
    cond_mean = N * p1
    cond_var = N * p1 * (1 - p1) + N * (N - 1) * (p11 - p1**2)
    mean_ref = wts @ cond_mean
    sd_ref = np.sqrt(wts @ cond_var + wts @ (cond_mean - mean_ref) ** 2)
    assert abs(r.expected_seats[0] - mean_ref) < Z_MAX * r.mc_se[0] + 0.005  # + pool clipping
    assert r.sd_seats[0] == pytest.approx(sd_ref, rel=0.02)
    assert r.sd_seats[0] < 0.7 * np.sqrt(N * p * (1 - p))  # the closed-form SD overstates


# ---------------------------------------------------------------------------------------------
# Degenerate pools, tolerance, seeds, exclusion, validation
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("c, per_seat", [(0.625, 1.0), (0.375, 0.0), (0.5, 0.5)])
def test_identical_districts_give_fixed_seats(c, per_seat):
    # every district at share c (turnout varies): each delegation wins N * 1[c > 1/2] seats,
    # N/2 when c = 1/2 (ties count half a seat, project rule)
    n = 8.0 * np.arange(1, 31)
    pool = national_pool(c * n, (1 - c) * n, np.arange(30) % 3)
    Ns = np.array([1, 4, 7])
    d = simulate_delegations(pool, [0, 1, 2], Ns, [c, c + 0.004, c - 0.004], rng=9, accepted=300)
    assert (d.n_accepted == 300).all()
    r = expected_seats(d, Ns * per_seat)
    np.testing.assert_array_equal(d.seats, (Ns * per_seat)[d.draw_unit])
    np.testing.assert_allclose(r.expected_seats, Ns * per_seat, atol=1e-12)
    np.testing.assert_array_equal(r.low, Ns * per_seat)
    np.testing.assert_array_equal(r.high, Ns * per_seat)
    np.testing.assert_allclose(r.excess_seats, 0.0, atol=1e-12)
    np.testing.assert_array_equal(r.percentile, 0.5)


@pytest.mark.parametrize("tol", [0.001, 0.005, 0.03])
def test_tolerance_honoured(small_pool, tol):
    d = simulate_delegations(
        small_pool, [0, 3], [3, 9], [0.45, 0.55], rng=2, tol=tol, accepted=2000
    )
    assert (d.n_accepted == 2000).all()
    assert (np.abs(d.share - d.vote_share[d.draw_unit]) <= tol).all()
    # and the stored share is the delegation's vote-weighted share
    sa = np.bincount(d.row_draw, small_pool.votes_a[d.district])
    sn = np.bincount(d.row_draw, small_pool.turnout[d.district])
    np.testing.assert_allclose(d.share, sa / sn, rtol=1e-12)
    np.testing.assert_array_equal(d.seats, np.bincount(d.row_draw, small_pool.seat_a[d.district]))
    # a wider window admits delegations a narrower one rejects
    if tol == 0.03:
        assert (np.abs(d.share - d.vote_share[d.draw_unit]) > 0.005).any()


def test_seed_reproducible_and_distinct(small_pool):
    args = (small_pool, [0, 1, 2], [3, 5, 8], [0.42, 0.5, 0.6])
    fields = ("district", "weight", "share", "seats", "n_proposed")
    d1 = simulate_delegations(*args, rng=7, accepted=500)
    d2 = simulate_delegations(*args, rng=np.random.SeedSequence(7), accepted=500)
    for f in fields:
        np.testing.assert_array_equal(getattr(d1, f), getattr(d2, f))
    r1, r2 = expected_seats(d1, [1.0, 2.0, 5.0]), expected_seats(d2, [1.0, 2.0, 5.0])
    np.testing.assert_array_equal(r1.expected_seats, r2.expected_seats)
    d3 = simulate_delegations(*args, rng=8, accepted=500)
    assert not np.array_equal(d1.district, d3.district)
    # same-seeded Generators agree; reusing one Generator gives fresh draws
    g1, g2 = np.random.default_rng(7), np.random.default_rng(7)
    e1 = simulate_delegations(*args, rng=g1, accepted=500)
    e2 = simulate_delegations(*args, rng=g2, accepted=500)
    np.testing.assert_array_equal(e1.district, e2.district)
    again = simulate_delegations(*args, rng=g1, accepted=500)
    assert not np.array_equal(again.district, e1.district)
    # a unit's draws depend on its key, not on the other units in the call
    d4 = simulate_delegations(small_pool, [9, 1], [2, 5], [0.6, 0.5], rng=7, accepted=500)
    d5 = simulate_delegations(small_pool, [1], [5], [0.5], rng=7, accepted=500, unit_key=[1])
    np.testing.assert_array_equal(d4.district[d4.draw_unit[d4.row_draw] == 1], d5.district)
    np.testing.assert_array_equal(d4.weight[d4.draw_unit == 1], d5.weight)
    # and two identical units in one call get independent streams
    d6 = simulate_delegations(small_pool, [1, 1], [5, 5], [0.5, 0.5], rng=7, accepted=500)
    rows = d6.draw_unit[d6.row_draw]
    assert not np.array_equal(d6.district[rows == 0], d6.district[rows == 1])


def last_window(a, n, y, V, T, tol, sa, sn):
    """Which of the districts (votes a, turnout n, scaled y) lie in the window S of a last district
    after districts of votes ``sa`` and turnout ``sn``: the y-interval derived in the sampler's module
    docstring, with the largest turnout, widened by 1e-9 of its scale (written out here again)."""
    P, reach = sa - T * sn, sn + n.max()
    lo = (-P + (V - T - tol) * reach) / n.mean()
    hi = (-P + (V - T + tol) * reach) / n.mean()
    eps = 1e-9 * (1 + abs(lo) + abs(hi))
    return (y >= lo - eps) & (y <= hi + eps)


def inverse_cdf_reference(pool, state, N, V, tol, tilt, centre, seed_seq, key, rows):
    """A unit's kept draws and their weights written from the definitions (module docstring of
    monitor.pool.sampler; lam and T as the sampler reports them), one row at a time: q_j
    proportional to exp(lam y_j) over the districts of the other states, y_j = (a_j - T n_j) /
    mean(n); the unit's stream (child of the seed sequence with spawn key ``key``) has two children,
    each read row after row: N - 1 uniforms of the first give the districts before the last by
    numpy's weighted choice (searchsorted of the CDF, side="right"), two of the second the last
    district by the same on q restricted to the window S (districts sorted by y) and the rejection
    control (kept when u * c < m, c = LAST_FLOOR times the mass of S after N - 1 districts
    of mean turnout at exactly the centre). The weight is the definition p(J) / (proposal
    probability of J * probability of keeping it), normalised."""
    eligible = np.flatnonzero(pool.state != state)
    a, n = pool.votes_a[eligible], pool.turnout[eligible]
    y = (a - centre * n) / n.mean()
    z = tilt * y
    q = np.exp(z - z.max())
    q /= q.sum()
    cdf = np.cumsum(q)
    cdf /= cdf[-1]
    by_y = np.argsort(y, kind="stable")
    before = (N - 1) * n.mean()
    c = LAST_FLOOR * q[by_y][last_window(a, n, y[by_y], V, centre, tol, centre * before, before)].sum()
    stream = np.random.default_rng(np.random.SeedSequence(seed_seq.entropy, spawn_key=(*seed_seq.spawn_key, key)))
    if N >= LAST_MAX_N:  # a large delegation: all N districts from the tilted pool, N uniforms a row
        j = eligible[np.searchsorted(cdf, stream.random((rows, N)), side="right")]
        share = pool.votes_a[j].sum(axis=1) / pool.turnout[j].sum(axis=1)
        ok = np.flatnonzero(np.abs(share - V) <= tol)
        w = np.exp(-tilt * ((pool.votes_a[j[ok]] - centre * pool.turnout[j[ok]]) / n.mean()).sum(axis=1))
        return j[ok], w / w.sum(), share[ok], ok
    first, second = stream.spawn(2)
    u, u_last = first.random((rows, N - 1)), second.random((rows, 2))
    kept, weights, shares, ok = [], [], [], []
    for r in range(rows):
        j = list(np.searchsorted(cdf, u[r], side="right"))
        sa, sn = a[j].sum(), n[j].sum()
        S = by_y[last_window(a, n, y[by_y], V, centre, tol, sa, sn)]
        m = q[S].sum()
        if m == 0 or u_last[r, 1] * c >= m:
            continue
        last = S[min(np.searchsorted(np.cumsum(q[S]) / m, u_last[r, 0], side="right"), S.size - 1)]
        J = j + [last]
        share = a[J].sum() / n[J].sum()
        if abs(share - V) <= tol:
            proposal = np.prod(q[J]) / m * min(1.0, m / c)
            kept.append(eligible[J])
            weights.append((1 / eligible.size) ** N / proposal)
            shares.append(share)
            ok.append(r)
    w = np.array(weights)
    return np.array(kept), w / w.sum(), np.array(shares), np.array(ok)


def test_draws_are_the_inverse_cdf_of_the_units_own_stream(small_pool, monkeypatch):
    # the sampler's kept draws and weights equal the reference's (written from the definitions,
    # weights from p(J) / proposal probability), whatever the size of the batches it draws in (so
    # they do not depend on how the work is cut, nor does the count of proposals made: the rows up
    # to the last kept one); a delegation of one district (no tilt), of two, and one large enough
    # to draw every district from the tilted pool (LAST_MAX_N) included
    import monitor.pool.sampler as sampler_module

    seed = np.random.SeedSequence(17)
    units, Ns, V = np.array([2, 5, 6, 1, 3]), np.array([3, 7, 1, 2, LAST_MAX_N]), np.array([0.44, 0.55, 0.5, 0.6, 0.5])
    keys = [11, 12, 13, 14, 15]
    d = simulate_delegations(small_pool, units, Ns, V, rng=seed, accepted=300, unit_key=keys)
    monkeypatch.setattr(sampler_module, "_DRAW_CELLS", 50)  # batches of a few rows
    small = simulate_delegations(small_pool, units, Ns, V, rng=seed, accepted=300, unit_key=keys)
    for f in ("district", "weight", "share", "seats", "n_proposed", "n_accepted", "ess"):
        np.testing.assert_array_equal(getattr(d, f), getattr(small, f))
    assert d.tilt[2] == 0.0  # one district: nothing before the last to tilt
    rows = d.draw_unit[d.row_draw]
    for u in range(5):
        j, w, share, ok = inverse_cdf_reference(small_pool, units[u], Ns[u], V[u], d.tol, d.tilt[u],
                                                d.tilt_share[u], seed, keys[u], rows=3000)
        assert ok.size >= 300
        np.testing.assert_array_equal(d.district[rows == u], j[:300].ravel())
        np.testing.assert_array_equal(d.share[d.draw_unit == u], share[:300])
        np.testing.assert_allclose(d.weight[d.draw_unit == u], w[:300] / w[:300].sum(), rtol=1e-9)
        assert d.n_proposed[u] == ok[299] + 1


def test_batched_comparison_equals_one_pass(small_pool):
    from monitor import measures

    units, Ns, V = np.arange(5), np.array([2, 6, 3, 9, 4]), np.array([0.4, 0.45, 0.5, 0.55, 0.6])
    actual = np.array([0.0, 2.0, 1.5, 6.0, 4.0])
    fns = {"seats": measures.seats_a, "efficiency_gap": measures.efficiency_gap}
    obs = {"seats": actual, "efficiency_gap": np.zeros(5)}
    one = compare_with_pool(
        small_pool, units, Ns, V, actual, obs, rng=3, accepted=400, measures=fns
    )
    many = compare_with_pool(
        small_pool, units, Ns, V, actual, obs, rng=3, accepted=400, measures=fns, max_cells=2500
    )
    d = simulate_delegations(small_pool, units, Ns, V, rng=3, accepted=400)
    direct = expected_seats(d, actual)
    for f in ("expected_seats", "low", "high", "percentile", "mc_se", "n_proposed"):
        np.testing.assert_array_equal(getattr(one[0], f), getattr(direct, f))
        np.testing.assert_array_equal(getattr(many[0], f), getattr(direct, f))
    for name in fns:
        np.testing.assert_array_equal(one[1][name].percentile, many[1][name].percentile)
        np.testing.assert_array_equal(one[1][name].null_high, many[1][name].null_high)


def test_own_state_left_out(small_pool):
    units = np.arange(8)
    d = simulate_delegations(
        small_pool, units, np.full(8, 4), np.full(8, 0.47), rng=1, accepted=400
    )
    drawn_state = small_pool.state[d.district]
    own = d.unit_state[d.draw_unit[d.row_draw]]
    assert (drawn_state != own).all()
    d_in = simulate_delegations(
        small_pool, units, np.full(8, 4), np.full(8, 0.47), rng=1, accepted=400, exclude_own=False
    )
    assert (small_pool.state[d_in.district] == d_in.unit_state[d_in.draw_unit[d_in.row_draw]]).any()


def test_unreachable_target_gives_no_draws(small_pool):
    # every delegation's share lies within [min x, max x] of the pool
    top = small_pool.share.max()
    V = [0.5, min(1.0, top + 0.02)]
    d = simulate_delegations(small_pool, [0, 1], [3, 3], V, rng=1, accepted=100)
    assert d.n_accepted.tolist() == [100, 0]
    assert d.n_proposed[1] == 0  # nothing is drawn for an empty window
    r = expected_seats(d, [1.0, 3.0])
    assert np.isfinite(r.expected_seats[0]) and np.isnan(r.expected_seats[1])
    assert np.isnan([r.percentile[1], r.low[1], r.high[1], r.ess[1], r.mc_se[1]]).all()
    # a target just outside the pool's range but within tol is reachable
    d = simulate_delegations(small_pool, [0], [1], [top + 0.003], rng=1, accepted=50)
    assert d.n_accepted[0] == 50


def test_validation_messages(small_pool):
    with pytest.raises(ValueError, match="non-negative"):
        national_pool([1.0, -1.0], [1.0, 1.0], [0, 0])
    with pytest.raises(ValueError, match="votes_a \\+ votes_b > 0"):
        national_pool([0.0, 1.0], [0.0, 1.0], [0, 0])
    with pytest.raises(ValueError, match="vote_share"):
        simulate_delegations(small_pool, [0], [3], [1.2], rng=1)
    with pytest.raises(ValueError, match="n_districts"):
        simulate_delegations(small_pool, [0], [0], [0.5], rng=1)
    with pytest.raises(ValueError, match="tol"):
        simulate_delegations(small_pool, [0], [3], [0.5], rng=1, tol=-0.1)


# ---------------------------------------------------------------------------------------------
# Expected seats: state bound, percentile and interval
# ---------------------------------------------------------------------------------------------


def test_state_drawn_from_pool_has_no_excess_on_average():
    # 150 states whose districts are random samples of the pool (kept in it): given its share,
    # a state's seats then have the same law as the simulated delegations', so E[excess] = 0
    # and E[percentile] = 1/2 (mid-rank rule).  Checked on the average over states, 4 SE.
    g = np.random.default_rng(31)
    M = 600
    x = np.clip(g.normal(0.5, 0.13, M), 0.02, 0.98)
    n = g.integers(80, 120, M).astype(float)
    a, b = x * n, (1 - x) * n
    pool = national_pool(a, b, np.full(M, -1))
    U, N = 150, 12
    j = g.integers(0, M, size=(U, N))
    V = a[j].sum(1) / (a + b)[j].sum(1)
    actual = seat_of(a, b)[j].sum(1)
    d = simulate_delegations(
        pool, np.arange(U), np.full(U, N), V, rng=32, accepted=1500, exclude_own=False
    )
    r = expected_seats(d, actual)
    ex = r.excess_seats
    assert abs(ex.mean()) < Z_MAX * ex.std(ddof=1) / np.sqrt(U)
    pc = r.percentile
    assert abs(pc.mean() - 0.5) < Z_MAX * pc.std(ddof=1) / np.sqrt(U)
    # and no trend with the statewide vote: the conditioning on V is what removes it
    # (scipy.stats.linregress slope and its standard error)
    fit = stats.linregress(V, ex)
    assert abs(fit.slope) < Z_MAX * fit.stderr
    assert (r.low <= r.expected_seats).all() and (r.expected_seats <= r.high).all()


def test_mc_se_matches_spread_across_seeds(small_pool):
    # the delta-method SE of the self-normalised mean against the SD of 40 independent runs;
    # the sample SD of 40 values has relative error ~ 1/sqrt(2 * 39) = 11%, so +-40% is ~3.5 SE
    runs = [
        simulate_delegations(small_pool, [-1], [6], [0.58], rng=100 + i, accepted=400)
        for i in range(40)
    ]
    means = np.array([expected_seats(d, [0.0]).expected_seats[0] for d in runs])
    ses = np.array([expected_seats(d, [0.0]).mc_se[0] for d in runs])
    assert means.std(ddof=1) == pytest.approx(np.sqrt(np.mean(ses**2)), rel=0.4)


def test_percentile_and_interval_definitions(small_pool):
    d = simulate_delegations(small_pool, [0, 1], [5, 9], [0.44, 0.52], rng=5, accepted=3000)
    actual = np.array([2.0, 6.5])
    r = expected_seats(d, actual)
    for u in range(2):
        k, w = d.seats[d.draw_unit == u], d.weight[d.draw_unit == u]
        assert w.sum() == pytest.approx(1.0)
        assert r.percentile[u] == pytest.approx(w @ (k < actual[u]) + 0.5 * w @ (k == actual[u]))
        # numpy's weighted inverted-CDF quantile as reference
        lo, hi = np.quantile(k, [0.025, 0.975], method="inverted_cdf", weights=w)
        assert (r.low[u], r.high[u]) == (lo, hi)
        assert r.ess[u] == pytest.approx(w.sum() ** 2 / (w**2).sum())
        assert r.excess_seats[u] == pytest.approx(actual[u] - w @ k)


def test_weighted_helpers_against_reference_libraries():
    g = np.random.default_rng(3)
    seg = np.sort(g.integers(0, 5, 400))
    v = np.round(g.normal(size=400), 1)  # ties on purpose
    w = g.random(400)
    ref = g.normal(size=5)
    ref[2] = v[seg == 2][0]  # a reference equal to a sample value
    pct, _ = _weighted_midrank(v, np.ones(400), seg, 5, ref)
    for s in range(5):
        want = stats.percentileofscore(v[seg == s], ref[s], kind="mean") / 100
        assert pct[s] == pytest.approx(want)
    for q in (0.025, 0.3, 0.5, 0.975):
        got = _weighted_quantiles(v, w, seg, 5, (q,))[0]
        for s in range(5):
            want = np.quantile(v[seg == s], q, method="inverted_cdf", weights=w[seg == s])
            assert got[s] == want


@pytest.mark.parametrize("kind", ["continuous", "few_ties", "many_ties", "nan"])
def test_row_sort_is_numpys_stable_argsort(kind):
    # reference: numpy.argsort(kind="stable") (NumPy documentation: equal elements keep their order)
    g = np.random.default_rng(5)
    m = g.random((40, 301))
    if kind == "few_ties":
        m[:, ::50] = 0.5
    elif kind == "many_ties":
        m = g.integers(0, 9, m.shape) / 2.0
    elif kind == "nan":
        m[g.random(m.shape) < 0.1] = np.nan
    want = (np.argsort(m, axis=1, kind="stable") + np.arange(0, m.size, 301)[:, None]).ravel()
    assert np.array_equal(_stable_rows_order(m), want)


def test_quantiles_of_equal_segments_against_numpy():
    # reference: numpy.quantile(method="inverted_cdf", weights=...) per segment; equal segments take
    # the one-sort-per-row path, ties on purpose
    g = np.random.default_rng(8)
    seg = np.repeat(np.arange(6), 250)
    v, w = np.round(g.normal(size=seg.size), 2), g.random(seg.size)
    for q in (0.025, 0.5, 0.975):
        got = _weighted_quantiles(v, w, seg, 6, (q,))[0]
        for s in range(6):
            assert got[s] == np.quantile(v[seg == s], q, method="inverted_cdf", weights=w[seg == s])


def test_inverse_cdf_sampler_matches_searchsorted():
    # numpy's own weighted choice is searchsorted(cdf, u, side="right"); the guide-table search
    # must return the same index for every u, never a zero-probability entry
    g = np.random.default_rng(0)
    q = g.random(997) ** 8
    q[::7] = 0.0
    q[-5:] = 0.0
    cdf = np.cumsum(q)
    cdf /= cdf[-1]
    guide = guide_table(cdf)
    assert guide.size & (guide.size - 1) == 0 and guide.size >= 16 * cdf.size
    np.testing.assert_array_equal(guide, np.searchsorted(cdf, np.arange(guide.size) / guide.size, side="right"))
    # slot edges k/K and their neighbours are where a rounding slip would show
    edges = np.arange(guide.size) / guide.size
    u = np.r_[g.random(200_000), 0.0, np.nextafter(1.0, 0.0), cdf[:-1], np.nextafter(cdf[:-1], 0.0),
              edges, np.nextafter(edges[1:], 0.0)]
    u = u[u < 1.0]  # uniforms lie in [0, 1)
    u = u[: u.size // 3 * 3].reshape(-1, 3)
    j = _inverse_cdf(cdf, guide, u)
    np.testing.assert_array_equal(j, np.searchsorted(cdf, u, side="right"))
    assert (q[j] > 0).all()


# ---------------------------------------------------------------------------------------------
# Cross-state context
# ---------------------------------------------------------------------------------------------


def test_cross_state_percentile_matches_scipy():
    g = np.random.default_rng(8)
    v = np.round(g.normal(size=60), 1)
    v[[3, 17]] = np.nan
    grp = np.array(list("xyz"))[g.integers(0, 3, 60)]
    got = cross_state_percentile(v, grp)
    assert np.isnan(got[[3, 17]]).all()
    for i in np.flatnonzero(~np.isnan(v)):
        peers = v[(grp == grp[i]) & ~np.isnan(v)]
        assert got[i] == pytest.approx(stats.percentileofscore(peers, v[i], kind="mean") / 100)


def test_robust_z_matches_scipy():
    g = np.random.default_rng(9)
    v = g.standard_t(3, size=80)
    v[5] = np.nan
    grp = g.integers(0, 4, 80)
    got = robust_z(v, grp)
    assert np.isnan(got[5])
    for k in range(4):
        sel = (grp == k) & ~np.isnan(v)
        med = np.median(v[sel])
        mad = stats.median_abs_deviation(v[sel], scale="normal")
        np.testing.assert_allclose(got[sel], (v[sel] - med) / mad, rtol=1e-12)
    # MAD = 0 (more than half the values equal): scale undefined -> NaN
    assert np.isnan(robust_z([1.0, 1.0, 1.0, 2.0], [0, 0, 0, 0])).all()


# ---------------------------------------------------------------------------------------------
# Null distributions of the measures and their tails
# ---------------------------------------------------------------------------------------------


def quantile_pool(M=3000, sd=0.12):
    """A neutral pool: shares at the normal quantiles around 1/2 (symmetric), equal turnout."""
    x = np.clip(0.5 + sd * stats.norm.ppf((np.arange(M) + 0.5) / M), 0.02, 0.98)
    return national_pool(1000 * x, 1000 * (1 - x), np.full(M, -1))


def observed_measures(states):
    """The states' own values of the default null measures, from monitor.measures."""
    unit = np.repeat(np.arange(len(states)), [len(s) for s in states])
    x = np.concatenate(states)
    va, vb = 1000 * x, 1000 * (1 - x)
    V = np.bincount(unit, va) / np.bincount(unit, va + vb)
    obs = {
        name: fn(unit, va, vb, len(states)) for name, fn in NULL_MEASURES.items()
    }
    return V, obs


def test_packed_and_cracked_states_land_in_the_right_tail():
    # Hand-built at V = 1/2 in a neutral pool.  a packs b into 5 districts at 29 % and cracks it
    # across 15 at 43 %: EG = +0.25 (b wastes 7.5 of 20 district-totals, a 2.5), MM = +0.07,
    # PB = +0.25, 15 seats; its mirror favours b.  The third state sits at the pool's own
    # quantiles (a typical delegation of the pool): every measure 0, percentile near 1/2.
    pack_a = np.r_[np.full(15, 0.57), np.full(5, 0.29)]
    typical = 0.5 + 0.12 * stats.norm.ppf((np.arange(20) + 0.5) / 20)
    V, obs = observed_measures([pack_a, 1 - pack_a, typical])
    assert obs["efficiency_gap"][0] == pytest.approx(0.25)
    assert obs["mean_median"][0] == pytest.approx(0.07)
    d = simulate_delegations(quantile_pool(), [0, 1, 2], [20, 20, 20], V, rng=1, accepted=4000)
    res = null_distributions(d, obs)
    assert set(res) == {"efficiency_gap", "mean_median", "declination", "partisan_bias", "seats"}
    for name, r in res.items():
        assert r.tail.tolist() == [1, -1, 0], name
        assert r.percentile[0] > 0.99 and r.percentile[1] < 0.01, name
        assert abs(r.percentile[2] - 0.5) < 0.1, name
        assert r.null_low[2] < obs[name][2] < r.null_high[2], name


def test_alpha_moves_the_tail_threshold():
    from monitor import measures

    typical = 0.5 + 0.12 * stats.norm.ppf((np.arange(20) + 0.5) / 20)
    V, _ = observed_measures([typical])
    d = simulate_delegations(quantile_pool(), [0], [20], V, rng=1, accepted=4000)
    obs, fns = {"seats": np.array([12.0])}, {"seats": measures.seats_a}
    pct = null_distributions(d, obs, measures=fns)["seats"].percentile[0]
    assert 0.75 < pct < 0.99  # 12 of 20 seats at V = 1/2: high but not extreme
    assert null_distributions(d, obs, measures=fns, alpha=(1 - pct) * 0.9)["seats"].tail[0] == 0
    assert null_distributions(d, obs, measures=fns, alpha=(1 - pct) * 1.1)["seats"].tail[0] == 1
    obs_low = {"seats": np.array([8.0])}  # the mirror image lands in the lower tail
    pct_low = null_distributions(d, obs_low, measures=fns)["seats"].percentile[0]
    assert pct_low == pytest.approx(1 - pct, abs=0.03)
    assert null_distributions(d, obs_low, measures=fns, alpha=pct_low * 1.1)["seats"].tail[0] == -1


def test_states_drawn_from_the_pool_are_flagged_at_the_nominal_rate():
    # 200 states that are random draws of a skewed pool: their percentiles within their own null
    # are (close to) uniform, so each measure flags ~2 * alpha = 5 % of them (binomial 4 SE:
    # +-6 points) and the mean percentile is 1/2 (4 SE of 200 uniform draws: +-0.08)
    g = np.random.default_rng(41)
    M, U, N = 1500, 200, 12
    x = np.clip(g.beta(4, 5, M), 0.02, 0.98)  # mean 0.44, not symmetric
    pool = national_pool(1000 * x, 1000 * (1 - x), np.full(M, -1))
    states = [x[g.integers(0, M, N)] for _ in range(U)]
    V, obs = observed_measures(states)
    d = simulate_delegations(
        pool, np.arange(U), np.full(U, N), V, rng=42, accepted=1000, exclude_own=False
    )
    res = null_distributions(d, obs)
    for name, r in res.items():
        ok = ~np.isnan(r.percentile)
        assert ok.sum() >= 150, name  # declination is undefined for states that sweep
        rate = np.mean(r.tail[ok] != 0)
        assert abs(rate - 0.05) < Z_MAX * np.sqrt(0.05 * 0.95 / ok.sum()), (name, rate)
        assert abs(r.percentile[ok].mean() - 0.5) < Z_MAX * np.sqrt(1 / 12 / ok.sum()), name


def test_null_seats_agree_with_expected_seats_and_measures_engine(small_pool):
    from monitor import measures

    d = simulate_delegations(small_pool, [0, 1], [4, 7], [0.45, 0.55], rng=3, accepted=2000)
    a, b = small_pool.votes_a[d.district], small_pool.votes_b[d.district]
    np.testing.assert_array_equal(measures.seats_a(d.row_draw, a, b, d.n_draws), d.seats)
    actual = np.array([1.5, 5.0])
    r = null_distributions(d, {"seats": actual}, measures={"seats": measures.seats_a})["seats"]
    np.testing.assert_allclose(r.percentile, expected_seats(d, actual).percentile, rtol=1e-12)
    np.testing.assert_allclose(r.null_mean, expected_seats(d, actual).expected_seats, rtol=1e-12)


def test_undefined_declination_dropped_and_counted():
    # declination is undefined when a party wins every seat (Warrington 2018): with N = 3 at
    # V = 0.6 many delegations sweep; the dropped weight must equal the weighted sweep share
    from monitor import measures

    pool = quantile_pool(M=1000, sd=0.1)
    d = simulate_delegations(pool, [0, 1], [3, 1], [0.6, 0.6], rng=5, accepted=3000)
    obs = {"declination": np.array([0.1, np.nan])}
    r = null_distributions(d, obs, measures={"declination": measures.declination})["declination"]
    sweep = (d.seats == 0) | (d.seats == d.n_districts[d.draw_unit])
    want = np.bincount(d.draw_unit, d.weight * sweep, 2)
    np.testing.assert_allclose(r.nan_fraction, want, atol=1e-12)
    assert 0.2 < r.nan_fraction[0] < 0.9 and r.nan_fraction[1] == pytest.approx(1.0)
    assert r.n_used[0] == np.sum(~sweep[d.draw_unit == 0]) and r.n_used[1] == 0
    # the percentile uses the defined draws only, reweighted to sum to one
    keep = (d.draw_unit == 0) & ~sweep
    a, b = pool.votes_a[d.district], pool.votes_b[d.district]
    vals = measures.declination(d.row_draw, a, b, d.n_draws)
    w = d.weight[keep] / d.weight[keep].sum()
    assert r.percentile[0] == pytest.approx(w @ (vals[keep] < 0.1))
    assert np.isnan(r.percentile[1]) and r.tail[1] == 0  # nothing defined: no verdict


def test_observed_keys_must_match_measures(small_pool):
    from monitor import measures

    d = simulate_delegations(small_pool, [0], [3], [0.5], rng=1, accepted=10)
    with pytest.raises(ValueError, match="observed must give exactly"):
        obs = {"seats": [1.0], "extra": [0.0]}
        null_distributions(d, obs, measures={"seats": measures.seats_a})


def test_null_evaluated_in_chunks_equals_one_pass(small_pool, monkeypatch):
    import monitor.pool.nulls as pool_module  # where the measures are evaluated in chunks
    from monitor import measures

    V = [0.45, 0.5, 0.55]
    d = simulate_delegations(small_pool, [0, 1, 2], [2, 5, 9], V, rng=6, accepted=300)
    obs = {"efficiency_gap": np.zeros(3), "mean_median": np.zeros(3)}
    fns = {"efficiency_gap": measures.efficiency_gap, "mean_median": measures.mean_median}
    whole = null_distributions(d, obs, measures=fns)
    monkeypatch.setattr(pool_module, "_CHUNK_CELLS", 37)  # chunks end mid-unit, not on a draw
    parts = null_distributions(d, obs, measures=fns)
    for name in fns:
        np.testing.assert_array_equal(whole[name].percentile, parts[name].percentile)
        np.testing.assert_array_equal(whole[name].null_mean, parts[name].null_mean)
    direct = measures.mean_median(
        d.row_draw, small_pool.votes_a[d.district], small_pool.votes_b[d.district], d.n_draws
    )
    assert whole["mean_median"].null_mean[1] == pytest.approx(
        d.weight[d.draw_unit == 1] @ direct[d.draw_unit == 1]
    )


def test_registry_nulls_from_gathered_districts_equal_the_public_measures(small_pool):
    # the registry's null measures evaluated on one Segments per chunk that gathers each pool
    # district's share, seat and turnout (Segments.take) against the public measure functions
    # called on the drawn votes (monitor.measures, the engine's own definitions): value for value
    d = simulate_delegations(small_pool, [0, 1, 2], [2, 5, 9], [0.45, 0.5, 0.55], rng=6, accepted=400)
    obs = {name: np.full(3, 0.01) for name in NULL_MEASURES}
    shared = null_distributions(d, obs)
    public = {name: (lambda *args, f=f: f(*args)) for name, f in NULL_MEASURES.items()}  # not the shared path
    each = null_distributions(d, obs, measures=public)
    a, b = small_pool.votes_a[d.district], small_pool.votes_b[d.district]
    for name, f in NULL_MEASURES.items():
        direct = f(d.row_draw, a, b, d.n_draws)
        ok = ~np.isnan(direct)
        w = np.where(ok, d.weight, 0.0)
        mean = np.bincount(d.draw_unit, w * np.where(ok, direct, 0.0), 3) / np.bincount(d.draw_unit, w, 3)
        np.testing.assert_array_equal(shared[name].null_mean, mean)
        for field in ("percentile", "null_low", "null_high", "null_mean", "nan_fraction", "n_used"):
            np.testing.assert_array_equal(getattr(shared[name], field), getattr(each[name], field))


def test_undefined_observed_value_gives_no_verdict(small_pool):
    # a unit whose own declination is undefined (it swept) is not placed in its null
    from monitor import measures

    d = simulate_delegations(small_pool, [0, 1], [6, 6], [0.5, 0.5], rng=2, accepted=500)
    fns = {"declination": measures.declination}
    r = null_distributions(d, {"declination": np.array([np.nan, 5.0])}, measures=fns)["declination"]
    assert r.n_used[0] > 0 and np.isnan(r.percentile[0]) and np.isnan(r.percentile_se[0])
    assert r.tail.tolist() == [0, 1] and r.percentile[1] == 1.0
