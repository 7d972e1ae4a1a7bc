"""Plain baselines the benchmarks time against the fast paths.

Written plainly on purpose, the way one would without the segment machinery:

* :func:`measures_per_unit`: a Python loop over units; inside it, numpy and scipy calls on that
  unit's districts (``np.median``, ``scipy.stats.ttest_ind``, ``np.percentile``...).  The same
  measures, gates and interval model as ``monitor.measures.compute_measures`` (the simulated
  noise is drawn per unit, so intervals agree within Monte Carlo error, not digit for digit);
* :func:`rejection_delegations`: plain rejection sampling from the national pool: draw ``N``
  districts uniformly (the unit's own state left out), keep the draw when its vote-weighted
  share is within ``tol`` of the unit's; vectorised over draws within a unit, one unit at a time.

Both are used by the smoke test (tests/test_bench_smoke.py) to keep the fast paths honest: the
per-unit efficiency gap, mean-median and declination equal the engine's to 1e-9, and rejection
and tilted expected seats agree within Monte Carlo error.
"""

from __future__ import annotations

import math
import time

import numpy as np
from scipy import stats

#: Measures the per-unit baseline computes (the engine's catalogue).
POINT_MEASURES = (
    "vote_share", "seat_share", "seats_a", "seats_b", "districts", "uncontested", "competitive",
    "efficiency_gap", "efficiency_gap_equal_turnout", "efficiency_gap_seats", "mean_median",
    "mean_median_z", "lopsided_t", "declination", "partisan_bias", "symmetry_bias",
    "responsiveness", "seats_at_flipped_vote",
)
INTERVAL_MEASURES = ("efficiency_gap", "partisan_bias", "declination")
TIE_TOL = 1e-14


def _seats(a, b):
    return np.where(a > b, 1.0, np.where(a < b, 0.0, 0.5))


def _efficiency_gap(a, b):
    n = a + b
    s = _seats(a, b)
    wasted_a = a - s * n / 2
    wasted_b = b - (1 - s) * n / 2
    return (wasted_b.sum() - wasted_a.sum()) / n.sum()


def _declination(x, s):
    won, lost = s.sum(), (1 - s).sum()
    if won == 0 or lost == 0:
        return math.nan
    n = x.size
    zbar = (s * x).sum() / won
    ybar = ((1 - s) * x).sum() / lost
    theta_p = math.atan((1 - 2 * ybar) * n / lost)
    theta_q = math.atan((2 * zbar - 1) * n / won)
    return -(2 / math.pi) * (theta_q - theta_p)


def _seat_share_at(x, V, v):
    d = x - V + v - 0.5
    return np.where(d > TIE_TOL, 1.0, np.where(d < -TIE_TOL, 0.0, 0.5)).mean()


def unit_point_measures(a, b, uncontested, settings) -> dict[str, float]:
    """Every point measure of one unit (``a``, ``b``: its districts' two-party votes)."""
    nan = math.nan
    out = dict.fromkeys(POINT_MEASURES, nan)
    n_d = a.size
    out["districts"] = float(n_d)
    out["uncontested"] = float(np.sum(uncontested))
    if n_d == 0:
        out["competitive"] = 0.0
        return out
    tot = a + b
    if np.any(tot <= 0):
        return out
    x = a / tot
    s = _seats(a, b)
    V = a.sum() / tot.sum()
    out["vote_share"] = V
    out["seats_a"] = s.sum()
    out["seats_b"] = n_d - s.sum()
    out["seat_share"] = s.mean()
    margin = np.abs(a - b) / tot
    out["competitive"] = float(np.sum(2 * settings.competitive_window - margin > -TIE_TOL))
    if n_d < settings.min_districts or out["uncontested"] == n_d:
        return out
    out["efficiency_gap"] = _efficiency_gap(a, b)
    out["efficiency_gap_equal_turnout"] = (s.mean() - 0.5) - 2 * (V - 0.5)
    out["efficiency_gap_seats"] = out["efficiency_gap"] * n_d
    if n_d >= 3:
        mm = np.median(x) - np.mean(x)
        out["mean_median"] = mm
        sd = np.std(x, ddof=1)
        if sd > 0:
            out["mean_median_z"] = mm / (math.sqrt(math.pi / 2 - 1) * sd / math.sqrt(n_d))
    wins_a, wins_b = x[s == 1.0], (b / tot)[s == 0.0]
    if wins_a.size >= 2 and wins_b.size >= 2:
        t = stats.ttest_ind(wins_a, wins_b, equal_var=settings.lopsided_variant == "pooled")
        out["lopsided_t"] = -float(t.statistic)
    out["declination"] = _declination(x, s)
    out["partisan_bias"] = _seat_share_at(x, V, 0.5) - 0.5
    w = settings.symmetry_band
    out["symmetry_bias"] = (np.clip((x - V + w) / (2 * w), 0, 1).mean() - 0.5) if w > 0 else out["partisan_bias"]
    h = settings.responsiveness_h
    inside = 2 * h - margin
    out["responsiveness"] = np.where(inside > TIE_TOL, 1.0, np.where(inside < -TIE_TOL, 0.0, 0.5)).sum() / (2 * h * n_d)
    out["seats_at_flipped_vote"] = _seat_share_at(x, V, 1 - V) * n_d
    return out


def unit_intervals(a, b, settings, rng) -> dict[str, tuple[float, float]]:
    """95% intervals of efficiency_gap, partisan_bias and declination of one unit from
    ``settings.interval_draws`` noisy elections (antithetic pairs, shares clipped to [0, 1])."""
    tot = a + b
    x = a / tot
    pairs = -(-settings.interval_draws // 2)
    eps = rng.standard_normal((pairs, x.size)) * settings.noise_sd
    sims = np.clip(np.concatenate([x + eps, x - eps]), 0.0, 1.0)      # (draws, N)
    sa, sb = tot * sims, tot * (1 - sims)
    seat = np.where(sa > sb, 1.0, np.where(sa < sb, 0.0, 0.5))
    eg = ((sb - (1 - seat) * tot / 2).sum(axis=1) - (sa - seat * tot / 2).sum(axis=1)) / tot.sum()
    V = sa.sum(axis=1) / tot.sum()
    d = sims - V[:, None]
    pb = np.where(d > TIE_TOL, 1.0, np.where(d < -TIE_TOL, 0.0, 0.5)).mean(axis=1) - 0.5
    won, lost = seat.sum(axis=1), (1 - seat).sum(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        zbar = (seat * sims).sum(axis=1) / won
        ybar = ((1 - seat) * sims).sum(axis=1) / lost
        dec = -(2 / np.pi) * (np.arctan((2 * zbar - 1) * x.size / won) - np.arctan((1 - 2 * ybar) * x.size / lost))
    dec = np.where((won > 0) & (lost > 0), dec, np.nan)
    lo_q, hi_q = 50 * (1 - settings.interval_level), 50 * (1 + settings.interval_level)
    out = {}
    for name, v in (("efficiency_gap", eg), ("partisan_bias", pb), ("declination", dec)):
        ok = v[~np.isnan(v)]
        if ok.size == 0 or ok.size < 0.95 * v.size:
            out[name] = (math.nan, math.nan)
        else:
            lo, hi = np.percentile(ok, [lo_q, hi_q])
            out[name] = (float(lo), float(hi))
    return out


def measures_per_unit(unit, votes_a, votes_b, uncontested, n_units, settings, rng,
                      intervals: bool = True) -> dict[str, np.ndarray]:
    """Every measure of every unit by a Python loop over units (the plain baseline).

    Returns name -> array of shape (n_units,); intervals as ``<name>_low`` / ``<name>_high``.
    """
    unit = np.asarray(unit)
    starts = np.searchsorted(unit, np.arange(n_units), side="left")
    ends = np.searchsorted(unit, np.arange(n_units), side="right")
    out = {name: np.full(n_units, np.nan) for name in POINT_MEASURES}
    if intervals:
        for name in INTERVAL_MEASURES:
            out[f"{name}_low"] = np.full(n_units, np.nan)
            out[f"{name}_high"] = np.full(n_units, np.nan)
    for u in range(n_units):
        s, e = starts[u], ends[u]
        a, b, unc = votes_a[s:e], votes_b[s:e], uncontested[s:e]
        values = unit_point_measures(a, b, unc, settings)
        for name, value in values.items():
            out[name][u] = value
        if intervals and settings.interval_draws and e > s and np.all(a + b > 0) \
                and e - s >= settings.min_districts and not np.all(unc):
            for name, (lo, hi) in unit_intervals(a, b, settings, rng).items():
                if not math.isnan(values[name]):
                    out[f"{name}_low"][u], out[f"{name}_high"][u] = lo, hi
    return out


def rejection_delegations(pool_a, pool_b, pool_state, unit_state, n_districts, vote_share, *,
                          rng, tol=0.005, accepted=10_000, max_seconds=None,
                          max_proposals=10_000_000, cells=1 << 21, exclude_own=True) -> list[dict]:
    """Plain rejection sampling of delegations from the national pool, one unit at a time.

    Per unit: draw ``N`` districts uniformly with replacement from the pool (without the unit's
    own state when ``exclude_own``), keep the draw when ``|sum a / sum (a + b) - V| <= tol``; stop at ``accepted``
    kept draws, ``max_proposals`` proposals or ``max_seconds`` of work on the unit.

    Returns one dict per unit: ``accepted``, ``proposed``, ``seconds``, ``expected_seats``
    (mean seats of a over kept draws), ``mc_se`` (its standard error, sd / sqrt(kept)).
    """
    pool_a = np.asarray(pool_a, dtype=np.float64)
    pool_n = pool_a + np.asarray(pool_b, dtype=np.float64)
    pool_seat = _seats(pool_a, np.asarray(pool_b, dtype=np.float64))
    pool_state = np.asarray(pool_state)
    results = []
    for st, N, v in zip(unit_state, n_districts, vote_share):
        t0 = time.perf_counter()
        eligible = np.flatnonzero(pool_state != st) if exclude_own else np.arange(pool_state.size)
        a, n, seat = pool_a[eligible], pool_n[eligible], pool_seat[eligible]
        rows = max(1, cells // int(N))
        kept_seats = []
        got = done = 0
        while got < accepted and done < max_proposals:
            if max_seconds is not None and time.perf_counter() - t0 > max_seconds:
                break
            r = min(rows, max_proposals - done)
            j = rng.integers(0, eligible.size, size=(r, int(N)))
            share = a[j].sum(axis=1) / n[j].sum(axis=1)
            ok = np.flatnonzero(np.abs(share - v) <= tol)[: accepted - got]
            kept_seats.append(seat[j[ok]].sum(axis=1))
            got += ok.size
            done += r if got < accepted else int(ok[-1]) + 1
        k = np.concatenate(kept_seats) if kept_seats else np.empty(0)
        results.append({
            "accepted": int(got), "proposed": int(done), "seconds": time.perf_counter() - t0,
            "expected_seats": float(k.mean()) if got else math.nan,
            "mc_se": float(k.std(ddof=1) / math.sqrt(got)) if got > 1 else math.nan,
        })
    return results
