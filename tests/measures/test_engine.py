"""compute_measures: the long frame, the null-with-reason rules and the edge cases."""

import inspect

import numpy as np
import pytest

import monitor.measures as m
from monitor.measures import MEASURE_NAMES, MEASURE_VERSIONS, MEASURES, MeasureSettings, compute_measures
from monitor.measures.engine import NON_FINITE

from .synth import random_units

NO_INTERVALS = MeasureSettings(interval_draws=0)
ASYMMETRY = ["efficiency_gap", "efficiency_gap_equal_turnout", "efficiency_gap_seats", "mean_median",
             "mean_median_z", "lopsided_t", "declination", "partisan_bias", "symmetry_bias",
             "responsiveness", "seats_at_flipped_vote"]


def run(units, uncontested=None, settings=NO_INTERVALS):
    """compute_measures on units given as lists of (a, b) vote pairs."""
    unit = np.concatenate([np.full(len(u), i) for i, u in enumerate(units)] + [np.zeros(0)]).astype(np.int64)
    pairs = np.array([p for u in units for p in u], float).reshape(-1, 2)
    unc = np.zeros(len(unit), bool) if uncontested is None else np.asarray(uncontested, bool)
    frame = compute_measures(unit, pairs[:, 0], pairs[:, 1], unc, len(units), settings, np.random.default_rng(0))
    return {u: g.set_index("measure") for u, g in frame.groupby("unit")}


def test_frame_layout_and_reason_rule():
    rng = np.random.default_rng(1)
    data = random_units(rng, 300)
    frame = compute_measures(*data, 300, MeasureSettings(interval_draws=20), rng)
    assert list(frame.columns) == ["unit", "measure", "value", "low", "high", "p_value", "reason"]
    assert frame["unit"].dtype == np.int64
    assert len(frame) == 300 * len(MEASURE_NAMES)
    assert (frame["unit"].to_numpy() == np.repeat(np.arange(300), len(MEASURE_NAMES))).all()
    assert (frame["measure"].to_numpy() == np.tile(MEASURE_NAMES, 300)).all()
    # reason is non-empty exactly when value is null, and never the catch-all
    assert ((frame["reason"] != "") == frame["value"].isna()).all()
    assert not (frame["reason"] == NON_FINITE).any()
    assert not np.isinf(frame[["value", "low", "high", "p_value"]].to_numpy()).any()
    with_interval = {d.name for d in MEASURES if d.interval}
    with_p = {d.name for d in MEASURES if d.p_value}
    assert with_interval == {"efficiency_gap", "partisan_bias", "declination"}
    assert with_p == {"mean_median", "mean_median_z", "lopsided_t"}
    assert frame.loc[~frame.measure.isin(with_interval), ["low", "high"]].isna().all().all()
    assert frame.loc[~frame.measure.isin(with_p), "p_value"].isna().all()
    assert frame.loc[frame.measure.isin(with_interval), "low"].notna().sum() > 300
    assert frame.loc[frame.measure.isin(with_p), "p_value"].notna().sum() > 200
    # null value -> null interval and p
    null = frame["value"].isna()
    assert frame.loc[null, ["low", "high", "p_value"]].isna().all().all()


def test_one_party_wins_every_seat():
    u = run([[(60, 40), (70, 30), (55, 45), (80, 20)]])[0]
    assert u.loc["declination", "reason"] == "party b won no seat"
    assert u.loc["lopsided_t", "reason"].startswith("party b won fewer than 2 seats")
    assert u.loc["seats_a", "value"] == 4 and u.loc["seats_b", "value"] == 0
    for name in ("efficiency_gap", "partisan_bias", "mean_median", "symmetry_bias"):
        assert u.loc[name, "reason"] == "" and np.isfinite(u.loc[name, "value"])
    b_sweep = run([[(40, 60), (30, 70), (45, 55)]])[0]
    assert b_sweep.loc["declination", "reason"] == "party a won no seat"


def test_ties_at_exactly_fifty_percent():
    # a 500-500 district gives 1/2 seat to each party and wastes 250 votes of each.
    u = run([[(500, 500), (600, 400), (300, 700)]])[0]
    assert u.loc["seats_a", "value"] == 1.5 and u.loc["seat_share", "value"] == 0.5
    # W_a = 250 + 100 + 300 = 650, W_b = 250 + 400 + 200 = 850, EG = 200 / 3000
    assert u.loc["efficiency_gap", "value"] == pytest.approx(200 / 3000, abs=1e-15)
    ties = run([[(500, 500), (40, 40), (7, 7)]])[0]
    assert ties.loc["seats_a", "value"] == 1.5
    assert ties.loc["efficiency_gap", "value"] == 0 and ties.loc["partisan_bias", "value"] == 0
    assert ties.loc["declination", "value"] == 0  # half a seat each: defined
    assert ties.loc["lopsided_t", "reason"] == "each party won fewer than 2 seats outright"
    assert ties.loc["mean_median", "value"] == 0
    assert ties.loc["mean_median_z", "reason"] == "all district shares are equal (zero standard error)"


def test_single_district():
    u = run([[(600, 400)]])[0]
    assert u.loc["districts", "value"] == 1 and u.loc["seats_a", "value"] == 1
    assert u.loc["vote_share", "value"] == 0.6
    for name in ASYMMETRY:
        assert u.loc[name, "reason"] == "fewer than 2 districts", name
    u = run([[(600, 400)]], settings=MeasureSettings(interval_draws=0, min_districts=1))[0]
    assert u.loc["efficiency_gap", "value"] == pytest.approx(1.5 - 1.2, abs=1e-15)  # 3/2 - 2x
    assert u.loc["declination", "reason"] == "party b won no seat"


def test_two_districts_mean_median_not_informative():
    u = run([[(600, 400), (300, 700)]])[0]
    assert u.loc["mean_median", "reason"] == "identically 0 with fewer than 3 districts"
    assert np.isfinite(u.loc["efficiency_gap", "value"])


def test_all_districts_uncontested():
    units = [[(750, 250), (250, 750), (750, 250)], [(750, 250), (600, 400), (250, 750)]]
    got = run(units, uncontested=[True, True, True, True, False, True])
    u = got[0]
    assert u.loc["uncontested", "value"] == 3 and u.loc["districts", "value"] == 3
    assert u.loc["seats_a", "value"] == 2 and u.loc["vote_share", "value"] == pytest.approx(1750 / 3000)
    for name in ASYMMETRY:
        assert u.loc[name, "reason"].startswith("every district uncontested"), name
    assert got[1].loc["uncontested", "value"] == 2 and got[1].loc["efficiency_gap", "reason"] == ""


def test_zero_vote_district_and_empty_unit():
    got = run([[(600, 400), (0, 0), (300, 700)], []])
    u = got[0]
    assert u.loc["vote_share", "value"] == pytest.approx(0.45)
    assert u.loc["districts", "value"] == 3
    for name in ["seat_share", "seats_a", "seats_b", "competitive"] + ASYMMETRY:
        assert u.loc[name, "reason"].startswith("a district has no votes"), name
    e = got[1]
    assert e.loc["districts", "value"] == 0 and e.loc["uncontested", "value"] == 0
    assert e.loc["competitive", "value"] == 0
    for name in ["vote_share", "seat_share", "seats_a", "seats_b"] + ASYMMETRY:
        assert e.loc[name, "reason"] == "no districts", name


def test_constant_winners_shares():
    u = run([[(60, 40), (60, 40), (30, 70), (30, 70)]])[0]
    assert u.loc["lopsided_t", "reason"].startswith("the winners' shares are constant")
    assert np.isfinite(u.loc["mean_median_z", "value"])


def test_lopsided_variant_and_competitive_window_settings():
    units = [[(55, 45), (57, 43), (62, 38), (20, 80), (25, 75), (48, 52), (45, 55)]]
    welch = run(units)[0]
    pooled = run(units, settings=MeasureSettings(interval_draws=0, lopsided_variant="pooled"))[0]
    assert welch.loc["lopsided_t", "value"] > 0 and pooled.loc["lopsided_t", "value"] > 0
    assert welch.loc["lopsided_t", "value"] != pooled.loc["lopsided_t", "value"]
    # |x - 1/2| <= 0.05: 55, 52 (48), 55 (45) -> 3 (boundary inclusive); <= 0.1 adds 57 -> 4
    assert welch.loc["competitive", "value"] == 3
    wide = run(units, settings=MeasureSettings(interval_draws=0, competitive_window=0.1))[0]
    assert wide.loc["competitive", "value"] == 4


def test_settings_validation_reports_every_problem():
    with pytest.raises(ValueError) as err:
        MeasureSettings(noise_sd=-0.1, lopsided_variant="student", interval_draws=2.5, swing_reference="x")
    text = str(err.value)
    for name in ("noise_sd", "lopsided_variant", "interval_draws", "swing_reference"):
        assert name in text
    assert MeasureSettings().competitive_window == 0.05 and MeasureSettings().min_districts == 2


@pytest.mark.parametrize(
    "unit, a, b, message",
    [
        ([1, 0], [1.0, 1.0], [1.0, 1.0], "non-decreasing"),
        ([0, 5], [1.0, 1.0], [1.0, 1.0], "0..n_units-1"),
        ([0, 0], [1.0, np.nan], [1.0, 1.0], "finite"),
        ([0, 0], [1.0, 1.0], [1.0, -1.0], ">= 0"),
        ([0, 0, 0], [1.0, 1.0], [1.0, 1.0], "differ in length"),
        ([0.0, 1.0], [1.0, 1.0], [1.0, 1.0], "integers"),
    ],
)
def test_input_validation(unit, a, b, message):
    with pytest.raises(ValueError, match=message):
        m.efficiency_gap(np.asarray(unit), np.asarray(a), np.asarray(b), 2)


def test_uncontested_flags_must_be_boolean_per_row():
    with pytest.raises(ValueError, match="uncontested"):
        compute_measures(np.array([0, 0]), np.ones(2), np.ones(2), np.zeros(2), 1, NO_INTERVALS, None)
    with pytest.raises(TypeError, match="rng"):
        compute_measures(np.array([0]), np.ones(1), np.ones(1), np.zeros(1, bool), 1, MeasureSettings(), None)


def test_catalog_documents_every_measure():
    names = [d.name for d in MEASURES]
    assert names == MEASURE_NAMES and len(set(names)) == len(names)
    assert set(MEASURE_VERSIONS) == set(names) and all(MEASURE_VERSIONS.values())
    for d in MEASURES:
        assert d.label and d.formula and d.sign and d.source, d.name
        assert ("favours party a" in d.sign) == d.signed, d.name
    issue = {"vote_share", "seat_share", "seats_a", "seats_b", "districts", "uncontested", "competitive",
             "efficiency_gap", "efficiency_gap_equal_turnout", "efficiency_gap_seats", "mean_median",
             "lopsided_t", "declination", "partisan_bias", "symmetry_bias", "responsiveness",
             "seats_at_flipped_vote"}
    assert issue <= set(names)


@pytest.mark.parametrize("name", ["efficiency_gap", "mean_median", "declination", "partisan_bias", "seats_a"])
def test_public_single_measures(name):
    # The signature the national-pool simulation calls, NaN for empty units.
    f = getattr(m, name)
    assert list(inspect.signature(f).parameters)[:4] == ["unit", "votes_a", "votes_b", "n_units"]
    out = f(np.array([0, 0, 2, 2, 2]), np.array([60.0, 30, 55, 45, 70]), np.array([40.0, 70, 45, 55, 30]), 4)
    assert out.shape == (4,) and out.dtype == np.float64
    assert np.isnan(out[[1, 3]]).all() and np.isfinite(out[[0, 2]]).all()
