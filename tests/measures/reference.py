"""Plain per-unit reference implementation of every measure (loops, no vectorisation).

Written from the definitions, not from the fast code: Python loops over districts, ``math.fsum``
sums, ``statistics`` medians and standard deviations, the t-test from its textbook formula,
symmetry bias integrated piecewise between the step function's breakpoints, percentiles with
``numpy.quantile``.  It shares with the fast path only the project's conventions: the seat rule
(ties 1/2), the tie tolerance of uniform-swing thresholds, the reason texts and the recipe that
assigns simulated noise to districts (rank by margin, turnout, share; antithetic pairs).
"""

from __future__ import annotations

import math
import statistics

import numpy as np
from scipy import stats

from monitor.measures.segments import TIE_TOL


def step(d: float) -> float:
    return 1.0 if d > TIE_TOL else 0.0 if d < -TIE_TOL else 0.5


def seat(a: float, b: float) -> float:
    return 1.0 if a > b else 0.0 if a < b else 0.5


def efficiency_gap(a, b):
    wasted_a = wasted_b = 0.0
    for ai, bi in zip(a, b):
        n = ai + bi
        if ai > bi:
            wasted_a += ai - n / 2
            wasted_b += bi
        elif ai < bi:
            wasted_a += ai
            wasted_b += bi - n / 2
        else:
            wasted_a += n / 4
            wasted_b += n / 4
    return (wasted_b - wasted_a) / math.fsum(ai + bi for ai, bi in zip(a, b))


def shares(a, b):
    return [ai / (ai + bi) for ai, bi in zip(a, b)]


def statewide(a, b, reference="vote_weighted"):
    if reference == "vote_weighted":
        return math.fsum(a) / math.fsum(ai + bi for ai, bi in zip(a, b))
    return math.fsum(shares(a, b)) / len(a)


def seat_share_at(a, b, v, reference="vote_weighted"):
    """S(v): shift every district by v - V; the district is won when its shifted share > 1/2."""
    V = statewide(a, b, reference)
    return sum(step((x - V) - (0.5 - v)) for x in shares(a, b)) / len(a)


def partisan_bias(a, b, reference="vote_weighted"):
    return seat_share_at(a, b, 0.5, reference) - 0.5


def symmetry_bias(a, b, band, reference="vote_weighted"):
    """Mean of [S(v) - (1 - S(1 - v))] / 2 over [1/2 - band, 1/2 + band], piecewise exact."""
    if band == 0:
        return partisan_bias(a, b, reference)
    V = statewide(a, b, reference)
    lo, hi = 0.5 - band, 0.5 + band
    flips = [0.5 + V - x for x in shares(a, b)]  # S jumps at t_i; S(1 - v) at 1 - t_i
    points = sorted({lo, hi, *[t for t in flips if lo < t < hi], *[1 - t for t in flips if lo < 1 - t < hi]})

    def s_at(v):
        return sum(1.0 if v > t else 0.0 for t in flips) / len(flips)

    total = 0.0
    for left, right in zip(points, points[1:]):
        mid = (left + right) / 2
        total += (right - left) * (s_at(mid) - (1 - s_at(1 - mid))) / 2
    return total / (hi - lo)


def responsiveness(a, b, h):
    """[S(V + h) - S(V - h)] / 2h, shifting every district by +h and by -h."""
    xs = shares(a, b)
    up = sum(step(x + h - 0.5) for x in xs) / len(xs)
    down = sum(step(x - h - 0.5) for x in xs) / len(xs)
    return (up - down) / (2 * h)


def seats_at_flipped_vote(a, b, reference="vote_weighted"):
    V = statewide(a, b, reference)
    return len(a) * seat_share_at(a, b, 1 - V, reference)


def declination(a, b):
    """Warrington's delta with ties split half/half, returned with the sign flipped."""
    k_won = k_lost = sum_won = sum_lost = 0.0
    for ai, bi in zip(a, b):
        s, x = seat(ai, bi), ai / (ai + bi)
        k_won += s
        sum_won += s * x
        k_lost += 1 - s
        sum_lost += (1 - s) * x
    if k_won == 0 or k_lost == 0:
        return math.nan
    n = len(a)
    theta_p = math.atan((1 - 2 * sum_lost / k_lost) * n / k_lost)
    theta_q = math.atan((2 * sum_won / k_won - 1) * n / k_won)
    return -(2 / math.pi) * (theta_q - theta_p)


def t_test(x, y, variant):
    """Two-sample t of mean(x) - mean(y) from the samples; (t, p) or (nan, nan)."""
    n1, n2 = len(x), len(y)
    if n1 < 2 or n2 < 2:
        return math.nan, math.nan
    v1, v2 = statistics.variance(x), statistics.variance(y)
    if variant == "pooled":
        df = n1 + n2 - 2
        se = math.sqrt(((n1 - 1) * v1 + (n2 - 1) * v2) / df * (1 / n1 + 1 / n2))
    else:
        se = math.sqrt(v1 / n1 + v2 / n2)
        df = (v1 / n1 + v2 / n2) ** 2 / ((v1 / n1) ** 2 / (n1 - 1) + (v2 / n2) ** 2 / (n2 - 1)) if se else 1
    if se == 0:
        return math.nan, math.nan
    t = (statistics.fmean(x) - statistics.fmean(y)) / se
    return t, 2 * stats.t.sf(abs(t), df)


def unit_measures(a, b, unc, settings):
    """{measure: (value, p_value, reason)} of one unit; value None when null."""
    a, b = [float(v) for v in a], [float(v) for v in b]
    n = len(a)
    n_unc = float(sum(bool(u) for u in unc))
    out = {"districts": (float(n), None, ""), "uncontested": (n_unc, None, "")}
    zero = any(ai + bi == 0 for ai, bi in zip(a, b))
    if zero:
        out["competitive"] = (None, None, "a district has no votes for either major party (its two-party share is undefined)")
    else:
        w = settings.competitive_window
        out["competitive"] = (float(sum(1 for x in shares(a, b) if step(w - abs(x - 0.5)) > 0)), None, "")

    def null(reason, names):
        for name in names:
            out[name] = (None, None, reason)

    descriptive = ["vote_share", "seat_share", "seats_a", "seats_b"]
    asymmetric = ["efficiency_gap", "efficiency_gap_equal_turnout", "efficiency_gap_seats", "mean_median",
                  "mean_median_z", "lopsided_t", "declination", "partisan_bias", "symmetry_bias",
                  "responsiveness", "seats_at_flipped_vote"]
    if n == 0:
        null("no districts", descriptive + asymmetric)
        return out
    total = math.fsum(ai + bi for ai, bi in zip(a, b))
    out["vote_share"] = (math.fsum(a) / total, None, "") if total > 0 else (None, None, "no two-party votes")
    if zero:
        null("a district has no votes for either major party (its two-party share is undefined)",
             descriptive[1:] + asymmetric)
        return out
    seats = sum(seat(ai, bi) for ai, bi in zip(a, b))
    out["seat_share"] = (seats / n, None, "")
    out["seats_a"] = (seats, None, "")
    out["seats_b"] = (n - seats, None, "")
    if n < settings.min_districts:
        null(f"fewer than {settings.min_districts} districts", asymmetric)
        return out
    if n_unc == n:
        null("every district uncontested (the value would only reflect the uncontested policy)", asymmetric)
        return out

    V = math.fsum(a) / total
    eg = efficiency_gap(a, b)
    out["efficiency_gap"] = (eg, None, "")
    out["efficiency_gap_equal_turnout"] = ((seats / n - 0.5) - 2 * (V - 0.5), None, "")
    out["efficiency_gap_seats"] = (eg * n, None, "")

    xs = shares(a, b)
    if n < 3:
        null("identically 0 with fewer than 3 districts", ["mean_median", "mean_median_z"])
    else:
        mm = statistics.median(xs) - statistics.fmean(xs)
        sd = statistics.stdev(xs)
        if sd == 0:
            out["mean_median"] = (mm, None, "")
            out["mean_median_z"] = (None, None, "all district shares are equal (zero standard error)")
        else:
            z = mm / (math.sqrt(math.pi / 2 - 1) * sd / math.sqrt(n))
            p = 2 * stats.norm.sf(abs(z))
            out["mean_median"] = (mm, p, "")
            out["mean_median_z"] = (z, p, "")

    wins_a = [ai / (ai + bi) for ai, bi in zip(a, b) if ai > bi]
    wins_b = [bi / (ai + bi) for ai, bi in zip(a, b) if ai < bi]
    if len(wins_a) < 2 and len(wins_b) < 2:
        null("each party won fewer than 2 seats outright", ["lopsided_t"])
    elif len(wins_a) < 2:
        null("party a won fewer than 2 seats outright (the test needs 2 per party)", ["lopsided_t"])
    elif len(wins_b) < 2:
        null("party b won fewer than 2 seats outright (the test needs 2 per party)", ["lopsided_t"])
    else:
        t, p = t_test(wins_a, wins_b, settings.lopsided_variant)
        if math.isnan(t):
            null("the winners' shares are constant in both parties (zero standard error)", ["lopsided_t"])
        else:
            out["lopsided_t"] = (-t, p, "")  # stored sign: positive favours a

    if seats == 0:
        null("party a won no seat", ["declination"])
    elif seats == n:
        null("party b won no seat", ["declination"])
    else:
        out["declination"] = (declination(a, b), None, "")

    ref = settings.swing_reference
    out["partisan_bias"] = (partisan_bias(a, b, ref), None, "")
    out["symmetry_bias"] = (symmetry_bias(a, b, settings.symmetry_band, ref), None, "")
    out["responsiveness"] = (responsiveness(a, b, settings.responsiveness_h), None, "")
    out["seats_at_flipped_vote"] = (seats_at_flipped_vote(a, b, ref), None, "")
    return out


def unit_intervals(a, b, settings, z, level=0.95, min_defined=0.95):
    """{measure: (low, high)} for efficiency_gap, partisan_bias, declination of one unit.

    ``z``: the (pairs, width) noise matrix; district of rank r gets z[:, r] (and its negative).
    """
    a, b = [float(v) for v in a], [float(v) for v in b]
    n = [ai + bi for ai, bi in zip(a, b)]
    x = [ai / ni for ai, ni in zip(a, n)]
    margin = [abs(ai - bi) / ni for ai, bi, ni in zip(a, b, n)]
    order = sorted(range(len(a)), key=lambda i: (margin[i], n[i], x[i]))
    rank = [0] * len(a)
    for r, i in enumerate(order):
        rank[i] = r
    ref = settings.swing_reference
    fns = {
        "efficiency_gap": efficiency_gap,
        "partisan_bias": lambda sa, sb: partisan_bias(sa, sb, ref),
        "declination": declination,
    }
    values = {name: [] for name in fns}
    for j in range(z.shape[0]):
        for sign in (1.0, -1.0):
            xs = [min(max(x[i] + sign * (settings.noise_sd * z[j, rank[i]]), 0.0), 1.0) for i in range(len(a))]
            sa = [ni * xi for ni, xi in zip(n, xs)]
            sb = [ni * (1.0 - xi) for ni, xi in zip(n, xs)]
            for name, f in fns.items():
                values[name].append(f(sa, sb))
    draws = 2 * z.shape[0]
    out = {}
    q = [(1 - level) / 2, (1 + level) / 2]
    for name, vals in values.items():
        ok = [v for v in vals if not math.isnan(v)]
        if not ok or len(ok) < min_defined * draws:
            out[name] = (math.nan, math.nan)
        else:
            lo, hi = np.quantile(ok, q)
            out[name] = (float(lo), float(hi))
    return out
