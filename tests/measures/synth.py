"""Random multi-unit inputs for the property and reference tests (not check values).

Votes are integers or quarter-integers (imputed 0.75 / 0.25 shares of an integer turnout), so
every per-unit sum is exact in floating point whatever the summation order: the fast path and
the reference then see bit-identical statewide shares and take the same threshold decisions.
"""

from __future__ import annotations

import numpy as np

SIZES = np.array([0, 1, 2, 3, 4, 5, 6, 7, 9, 12, 18, 27, 40])


def _constant_unit(rng, n):
    """n identical 60-40 (or 40-60) districts: constant shares, a sweep."""
    share = rng.choice([0.6, 0.4])
    turnout = np.full(n, 100.0)
    return turnout * share, turnout * (1 - share)


def random_units(rng: np.random.Generator, n_units: int):
    """(unit, votes_a, votes_b, uncontested) of ``n_units`` random units with edge cases mixed
    in: empty units, single districts, exact ties, sweeps, constant shares, uncontested and
    fully uncontested units, and a few districts with no two-party votes."""
    units, va, vb, unc = [], [], [], []
    for u in range(n_units):
        n = int(rng.choice(SIZES))
        kind = rng.random()
        if n and kind < 0.05:
            a, b = _constant_unit(rng, n)
            flag = np.zeros(n, bool)
        elif n >= 4 and kind < 0.09:
            # two blocks of identical wins (60-40 for a, 30-70 for b): constant winners' shares
            a = np.where(np.arange(n) % 2 == 0, 60.0, 30.0)
            b = 100.0 - a
            flag = np.zeros(n, bool)
        else:
            turnout = rng.integers(1, 3000, n).astype(float)
            centre = rng.uniform(0.3, 0.7)
            share = np.clip(rng.normal(centre, 0.15, n), 0.02, 0.98)
            a = np.round(turnout * share)
            tie = rng.random(n) < 0.08
            turnout = np.where(tie, 2 * np.round(turnout / 2) + 2, turnout)
            a = np.where(tie, turnout / 2, a)
            b = turnout - a
            flag = rng.random(n) < (0.9 if kind > 0.95 else 0.12)
            a_side = rng.random(n) < 0.5
            a = np.where(flag, np.where(a_side, 0.75, 0.25) * turnout, a)
            b = np.where(flag, turnout - a, b)
            if kind > 0.97:
                flag[:] = True
            if n and 0.90 < kind < 0.92:
                a[0] = b[0] = 0.0
        units.append(np.full(n, u))
        va.append(a)
        vb.append(b)
        unc.append(flag)
    cat = np.concatenate
    return (cat(units).astype(np.int64), cat(va).astype(float), cat(vb).astype(float), cat(unc).astype(bool))


def split_units(unit, votes_a, votes_b, uncontested, n_units):
    """The rows of each unit, as a list of (a, b, uncontested) per unit."""
    bounds = np.searchsorted(unit, np.arange(n_units + 1))
    return [(votes_a[s:e], votes_b[s:e], uncontested[s:e]) for s, e in zip(bounds, bounds[1:])]
