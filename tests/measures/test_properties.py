"""Hypothesis properties of the whole engine.

* swapping the parties negates every signed measure (``MeasureDoc.signed``), complements the
  shares and seat counts, and leaves p-values, counts and responsiveness unchanged;
* permuting districts within units changes nothing (intervals included);
* scaling every vote by one constant changes no measure.
"""

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from monitor.measures import MEASURES, MeasureSettings, compute_measures

SIGNED = [d.name for d in MEASURES if d.signed]
COMPLEMENT_SHARE = ["vote_share", "seat_share"]
INVARIANT_UNDER_SWAP = ["districts", "uncontested", "competitive", "responsiveness"]
POINT = MeasureSettings(interval_draws=0)

contested = st.tuples(st.integers(0, 400), st.integers(0, 400), st.just(False)).filter(lambda d: d[0] + d[1] > 0)
one_sided = st.tuples(st.integers(1, 400), st.booleans()).map(
    lambda t: (t[0], 0, True) if t[1] else (0, t[0], True))
tie = st.integers(1, 200).map(lambda v: (v, v, False))
vote_less = st.just((0, 0, False))
# mostly contested districts, some exact ties and one-sided contests, rarely one without votes
district = st.integers(0, 39).flatmap(
    lambda k: vote_less if k == 0 else tie if k < 5 else one_sided if k < 9 else contested)
units_strategy = st.lists(st.lists(district, max_size=16), min_size=1, max_size=6)


def arrays(units):
    unit = np.array([i for i, u in enumerate(units) for _ in u], dtype=np.int64)
    rows = [d for u in units for d in u]
    a = np.array([float(r[0]) for r in rows])
    b = np.array([float(r[1]) for r in rows])
    unc = np.array([bool(r[2]) for r in rows], dtype=bool)
    return unit, a, b, unc


def frame(unit, a, b, unc, n_units, s=POINT, seed=0):
    return compute_measures(unit, a, b, unc, n_units, s, np.random.default_rng(seed)).set_index(["unit", "measure"])


def assert_close(x, y, atol=1e-12, rtol=1e-12):
    x, y = np.asarray(x, float), np.asarray(y, float)
    assert np.array_equal(np.isnan(x), np.isnan(y))
    ok = ~np.isnan(x)
    np.testing.assert_allclose(x[ok], y[ok], atol=atol, rtol=rtol)


def swap_reason(text):
    return text.replace("party a", "\0").replace("party b", "party a").replace("\0", "party b")


@settings(max_examples=150, deadline=None)
@given(units_strategy)
def test_swapping_parties(units):
    unit, a, b, unc = arrays(units)
    n = len(units)
    one, two = frame(unit, a, b, unc, n), frame(unit, b, a, unc, n)
    assert (two["reason"] == one["reason"].map(swap_reason)).all()
    pick = lambda f, names: f[f.index.get_level_values("measure").isin(names)]
    assert_close(pick(two, SIGNED)["value"], -pick(one, SIGNED)["value"])
    assert_close(pick(two, COMPLEMENT_SHARE)["value"], 1 - pick(one, COMPLEMENT_SHARE)["value"])
    assert_close(pick(two, INVARIANT_UNDER_SWAP)["value"], pick(one, INVARIANT_UNDER_SWAP)["value"])
    assert_close(two.xs("seats_a", level="measure")["value"], one.xs("seats_b", level="measure")["value"])
    districts = one.xs("districts", level="measure")["value"]
    assert_close(two.xs("seats_at_flipped_vote", level="measure")["value"],
                 districts - one.xs("seats_at_flipped_vote", level="measure")["value"])
    assert_close(two["p_value"], one["p_value"], rtol=1e-9)


def _permute_within_units(unit, rng):
    return np.lexsort((rng.random(unit.size), unit))


@settings(max_examples=100, deadline=None)
@given(units_strategy, st.integers(0, 2**32 - 1))
def test_permuting_districts_changes_nothing(units, seed):
    unit, a, b, unc = arrays(units)
    order = _permute_within_units(unit, np.random.default_rng(seed))
    s = MeasureSettings(interval_draws=12, noise_sd=0.05)
    one = frame(unit, a, b, unc, len(units), s)
    two = frame(unit[order], a[order], b[order], unc[order], len(units), s)
    assert (one["reason"] == two["reason"]).all()
    for col in ("value", "low", "high", "p_value"):
        assert_close(two[col], one[col])


@settings(max_examples=100, deadline=None)
@given(units_strategy, st.sampled_from([1e-3, 0.37, 3.0, 7.0, 1000.0, 123456.5]))
def test_scaling_votes_changes_no_measure(units, factor):
    unit, a, b, unc = arrays(units)
    one = frame(unit, a, b, unc, len(units))
    two = frame(unit, a * factor, b * factor, unc, len(units))
    assert (one["reason"] == two["reason"]).all()
    for col in ("value", "p_value"):
        assert_close(two[col], one[col], atol=1e-12, rtol=1e-9)


@settings(max_examples=60, deadline=None)
@given(units_strategy, st.sampled_from([0.25, 3.0, 7.0, 1024.0, 123456.5]))
def test_scaling_votes_changes_no_interval(units, factor):
    # Exact factors only (the scaled integer votes are exact in floating point).  Under an
    # inexact factor two districts with equal margins may come out an ulp apart and take each
    # other's noise: the intervals are then equal in distribution, not draw for draw.
    unit, a, b, unc = arrays(units)
    s = MeasureSettings(interval_draws=12, noise_sd=0.05)
    one = frame(unit, a, b, unc, len(units), s)
    two = frame(unit, a * factor, b * factor, unc, len(units), s)
    for col in ("low", "high"):
        assert_close(two[col], one[col], atol=1e-12, rtol=1e-9)
