"""Simulation intervals (district-level share noise around the observed election)."""

import numpy as np
import pytest
from scipy import stats

from monitor.measures import MeasureSettings, compute_measures
from monitor.measures.declination import declination_of
from monitor.measures.efficiency_gap import efficiency_gap_of
from monitor.measures.intervals import noise_intervals, percentile_interval, simulate
from monitor.measures.segments import Segments
from monitor.measures.swing import partisan_bias_of

MEASURES = {"efficiency_gap": efficiency_gap_of, "partisan_bias": partisan_bias_of,
            "declination": declination_of}


def _continuous_units(rng, n_units, low=2, high=25):
    sizes = rng.integers(low, high, n_units)
    unit = np.repeat(np.arange(n_units), sizes)
    n = rng.uniform(500, 5000, unit.size)
    x = rng.uniform(0.2, 0.8, unit.size)
    return unit, n * x, n * (1 - x), np.zeros(unit.size, bool)


def _intervals(frame):
    rows = frame[frame.measure.isin(list(MEASURES))]
    return rows.set_index(["unit", "measure"])[["value", "low", "high"]].sort_index()


def test_zero_noise_collapses_onto_each_units_own_value():
    # With sigma = 0 every simulated election is the observed one: low = high = value, unit by
    # unit (this catches draws assigned to the wrong unit).
    rng = np.random.default_rng(1)
    unit, a, b, unc = _continuous_units(rng, 200)
    frame = compute_measures(unit, a, b, unc, 200, MeasureSettings(noise_sd=0.0, interval_draws=8), rng)
    iv = _intervals(frame).dropna(subset=["value"])
    assert len(iv) > 500
    np.testing.assert_allclose(iv["low"], iv["value"], atol=1e-12)
    np.testing.assert_allclose(iv["high"], iv["value"], atol=1e-12)


def test_efficiency_gap_interval_matches_normal_theory():
    # Derived: if no district can change hands (all shares 20-30 points from 50 %, sigma =
    # 0.01), EG = (S_w - 1/2) - 2 (V~ - 1/2) with S_w fixed and V~ - V ~ N(0, sigma^2 sum n_i^2 /
    # (sum n_i)^2).  The 95 % interval is EG0 -/+ z_0.975 * 2 sigma sqrt(sum n^2) / sum n
    # (z_0.975 COMPUTED with scipy.stats.norm.ppf).  Monte Carlo SE of a 2.5 % quantile with
    # D = 20000 draws: sqrt(0.025 * 0.975 / D) / phi(1.96) = 0.019 SD units; tolerance 0.06.
    rng = np.random.default_rng(5)
    x = np.r_[rng.uniform(0.2, 0.3, 7), rng.uniform(0.7, 0.8, 5)]
    n = rng.integers(1000, 9000, 12).astype(float)
    seg = Segments(np.zeros(12, np.int64), n * x, n * (1 - x), 1)
    sigma = 0.01
    (low, high), = [noise_intervals(seg, {"eg": efficiency_gap_of}, sigma, 20000, rng)["eg"]]
    sd = 2 * sigma * np.sqrt((n**2).sum()) / n.sum()
    eg0 = efficiency_gap_of(seg)[0]
    z = stats.norm.ppf(0.975)
    assert abs((low[0] - (eg0 - z * sd)) / sd) < 0.06
    assert abs((high[0] - (eg0 + z * sd)) / sd) < 0.06


def test_intervals_do_not_depend_on_the_other_units():
    # Incremental recomputes: a unit's intervals depend only on its own districts and the seed,
    # not on the other units of the batch (here the batch has a 30-district unit, the subset
    # at most 8 districts per unit, so the noise matrices differ in width).
    rng = np.random.default_rng(2)
    unit, a, b, unc = _continuous_units(rng, 40, low=2, high=9)
    big = 30
    unit = np.r_[np.zeros(big, np.int64), unit + 1]
    x = rng.uniform(0.3, 0.7, big)
    a, b, unc = np.r_[1000 * x, a], np.r_[1000 * (1 - x), b], np.r_[np.zeros(big, bool), unc]
    settings = MeasureSettings(interval_draws=50, noise_sd=0.05)
    full = compute_measures(unit, a, b, unc, 41, settings, np.random.default_rng(77))
    keep = (unit >= 10) & (unit < 15)
    part = compute_measures(unit[keep] - 10, a[keep], b[keep], unc[keep], 5, settings, np.random.default_rng(77))
    sub = full[(full.unit >= 10) & (full.unit < 15)].reset_index(drop=True)
    assert sub.loc[sub.measure == "efficiency_gap", "low"].notna().all()
    np.testing.assert_array_equal(sub["low"].to_numpy(), part["low"].to_numpy())
    np.testing.assert_array_equal(sub["high"].to_numpy(), part["high"].to_numpy())


def test_party_swap_negates_intervals():
    # Antithetic draws: the swapped election's simulated values are exactly the negated ones,
    # so low and high trade places with a sign flip.
    rng = np.random.default_rng(3)
    unit, a, b, unc = _continuous_units(rng, 100)
    settings = MeasureSettings(interval_draws=60, noise_sd=0.04)
    one = _intervals(compute_measures(unit, a, b, unc, 100, settings, np.random.default_rng(5)))
    two = _intervals(compute_measures(unit, b, a, unc, 100, settings, np.random.default_rng(5)))
    np.testing.assert_allclose(two["low"], -one["high"], atol=1e-12)
    np.testing.assert_allclose(two["high"], -one["low"], atol=1e-12)
    assert one["low"].notna().sum() > 250


def test_percentile_interval_matches_numpy_quantile():
    # Reference library: numpy.quantile (default 'linear' method) on the defined draws.
    rng = np.random.default_rng(4)
    values = rng.normal(size=(50, 41))
    values[rng.random(values.shape) < 0.02] = np.nan
    low, high = percentile_interval(values, 0.95, min_defined=0.0)
    for row, lo, hi in zip(values, low, high):
        ok = row[~np.isnan(row)]
        assert (lo, hi) == pytest.approx(tuple(np.quantile(ok, [0.025, 0.975])), abs=1e-14)


def test_interval_is_null_when_too_many_draws_are_undefined():
    # a holds one seat at 51 %: under 5-point noise the seat is lost in about 40 % of the draws,
    # where declination is undefined; the interval is then not given (value still is).
    x = np.array([0.51, 0.2, 0.25, 0.3, 0.35])
    seg = Segments(np.zeros(5, np.int64), 1000 * x, 1000 * (1 - x), 1)
    sims = simulate(seg, {"declination": declination_of}, 0.05, 400, np.random.default_rng(6))
    undefined = np.isnan(sims["declination"]).mean()
    assert 0.2 < undefined < 0.6
    low, high = percentile_interval(sims["declination"], 0.95, 0.95)
    assert np.isnan(low[0]) and np.isnan(high[0]) and np.isfinite(declination_of(seg)[0])
    low, high = percentile_interval(sims["declination"], 0.95, 0.5)
    assert np.isfinite(low[0]) and low[0] < high[0]


def test_draws_round_up_to_antithetic_pairs():
    seg = Segments([0, 0, 0], [60.0, 30.0, 55.0], [40.0, 70.0, 45.0], 1)
    sims = simulate(seg, {"eg": efficiency_gap_of}, 0.03, 5, np.random.default_rng(0))
    assert sims["eg"].shape == (1, 6)


def test_chunked_simulation_equals_one_pass(monkeypatch):
    # Memory cap: the draws are simulated in chunks of pairs; chunks of 3 pairs for 10 pairs
    # (a partial last chunk) must give exactly the one-pass result.
    import monitor.measures.intervals as intervals

    rng = np.random.default_rng(9)
    unit, a, b, _ = _continuous_units(rng, 30)
    seg = Segments(unit, a, b, 30)
    whole = simulate(seg, MEASURES, 0.05, 20, np.random.default_rng(4))
    monkeypatch.setattr(intervals, "MAX_ROWS", 6 * unit.size)
    chunked = simulate(seg, MEASURES, 0.05, 20, np.random.default_rng(4))
    for name in MEASURES:
        np.testing.assert_array_equal(chunked[name], whole[name])
