"""Smoke test of the benchmark harness (bench/): what keeps its numbers honest.

* the synthetic national history (invented federation, bench/synthetic.py) is deterministic and
  every file it writes loads through ``monitor.ingest.load_file`` without a problem;
* the plain per-unit baseline the benchmark times against the measures engine computes the same
  numbers: efficiency gap, mean-median and declination equal ``compute_measures`` to 1e-9, and
  the lopsided-margins t equals the engine's (the baseline takes it from
  ``scipy.stats.ttest_ind``, Welch's test: Welch, Biometrika 34 (1947) 28-35);
* plain rejection sampling and the tilted national-pool sampler give the same expected seats
  within Monte Carlo error (4 combined standard errors).

The data is invented and small (3 states, 2 cycles); nothing here is a check value from outside,
and there is no timing assertion (speed is measured by ``make bench`` only).
"""

from __future__ import annotations

import dataclasses
import hashlib
import math
from pathlib import Path

import numpy as np
import pytest

from bench import synthetic
from bench.baselines import measures_per_unit, rejection_delegations
from monitor import pool as P
from monitor.compute import settings_salt
from monitor import reductions
from monitor.ingest.load import load_file
from monitor.inputs import measure_inputs, reduced_contests
from monitor.measures import compute_measures, seats_a
from monitor.workspace import Workspace


@pytest.fixture(scope="module")
def tiny(tmp_path_factory):
    """The generator at 3 states x 2 cycles, loaded into a fresh workspace."""
    root = tmp_path_factory.mktemp("bench")
    data = root / "data"
    summary = synthetic.generate(data, states=3, cycles=2, new_cycles=0)
    ws = Workspace(root / "ws")
    ws.ensure()
    (ws.root / "levelfield.toml").write_text((data / "levelfield.toml").read_text(), encoding="utf-8")
    db = ws.open_store()
    config = ws.config()
    reports = [load_file(db, Path(p), config) for p in summary["files"]]
    reductions.refresh(db, config)  # the step after every load
    return {"root": root, "data": data, "summary": summary, "db": db, "config": config, "reports": reports}


def test_generator_is_deterministic_and_has_the_requested_shape(tiny, tmp_path):
    again = synthetic.generate(tmp_path / "again", states=3, cycles=2, new_cycles=0)
    digest = lambda paths: [hashlib.sha256(open(p, "rb").read()).hexdigest() for p in paths]  # noqa: E731
    assert digest(again["files"]) == digest(tiny["summary"]["files"])
    assert tiny["summary"]["states"] == 3 and tiny["summary"]["cycles"] == 2
    fed = synthetic.federation(states=3)
    assert tiny["summary"]["contests"] == 2 * fed.contests_per_cycle
    # scale 1 is the national workload of the issue: 435 / 5,400 / 1,950 seats, 27 cycles
    full = synthetic.federation(1.0)
    assert len(full.states) == 50
    assert {k: int(v.sum()) for k, v in full.seats.items()} == synthetic.CHAMBER_SEATS
    assert 27 * full.contests_per_cycle == 210_195
    assert not set(full.states) & {"QA", "QC", "ZA", "JP"}  # codes of real places are never used


def test_every_generated_file_loads_whole(tiny):
    for report, path in zip(tiny["reports"], tiny["summary"]["files"]):
        with open(path, encoding="utf-8") as fh:
            lines = sum(1 for _ in fh) - 1
        assert report.outcome == "loaded"
        assert report.rows_rejected == 0 and not report.skipped
        assert report.rows_accepted == lines
        assert report.count("new") == 3 * 3  # 3 states x 3 chambers per cycle file
    statuses = dict(tiny["db"].execute("SELECT status, COUNT(*) FROM contests GROUP BY status").fetchall())
    assert statuses.get("contested", 0) > 0 and statuses.get("uncontested", 0) > 0  # a realistic mix


def _arrays(tiny):
    config = tiny["config"]
    return measure_inputs(reduced_contests(tiny["db"]), config, settings_salt(config)), config.measures


def test_per_unit_baseline_equals_the_engine(tiny):
    arr, settings = _arrays(tiny)
    settings = dataclasses.replace(settings, interval_draws=0)
    n = len(arr.units)
    long = compute_measures(arr.unit, arr.votes_a, arr.votes_b, arr.uncontested, n, settings,
                            np.random.default_rng(0))
    fast = long.pivot(index="unit", columns="measure", values="value")
    base = measures_per_unit(arr.unit, arr.votes_a, arr.votes_b, arr.uncontested, n, settings,
                             np.random.default_rng(0), intervals=False)
    for name in ("efficiency_gap", "mean_median", "declination", "lopsided_t"):
        f, b = fast[name].to_numpy(), base[name]
        np.testing.assert_array_equal(np.isnan(f), np.isnan(b), err_msg=name)
        assert np.isfinite(f).sum() >= 6, name  # enough defined units to compare
        np.testing.assert_allclose(b[np.isfinite(b)], f[np.isfinite(f)], rtol=0, atol=1e-9, err_msg=name)


def test_baseline_intervals_agree_with_the_engine_within_simulation_error(tiny):
    arr, settings = _arrays(tiny)
    n = len(arr.units)
    long = compute_measures(arr.unit, arr.votes_a, arr.votes_b, arr.uncontested, n, settings,
                            np.random.default_rng(1))
    eg = long[long["measure"] == "efficiency_gap"].set_index("unit")
    base = measures_per_unit(arr.unit, arr.votes_a, arr.votes_b, arr.uncontested, n, settings,
                             np.random.default_rng(2), intervals=True)
    width = (eg["high"] - eg["low"]).to_numpy()
    ok = np.isfinite(width)
    assert ok.sum() >= 6
    # same noise model, different random numbers: endpoints differ by a small part of the width
    for side in ("low", "high"):
        diff = np.abs(base[f"efficiency_gap_{side}"][ok] - eg[side].to_numpy()[ok])
        assert np.all(diff <= 0.25 * width[ok] + 1e-9), side


def test_rejection_and_tilted_expected_seats_agree(tiny):
    arr, _ = _arrays(tiny)
    config = tiny["config"]
    units = arr.units
    compared = 0
    for (cycle, chamber), part in units.groupby(["cycle", "chamber"]):
        members = part.index.to_numpy()
        rows = np.isin(arr.unit, members)
        va, vb, st = arr.votes_a[rows], arr.votes_b[rows], arr.state[rows]
        local = np.searchsorted(members, arr.unit[rows])
        k = len(members)
        size = np.bincount(local, minlength=k)
        share = np.bincount(local, va, k) / np.bincount(local, va + vb, k)
        actual = seats_a(local, va, vb, k)
        pool = P.national_pool(va, vb, st)
        states = part["state"].to_numpy()
        live = np.flatnonzero(size >= 2)
        tilted = P.simulate_delegations(pool, states[live], size[live], share[live], rng=5,
                                        tol=config["pool.tolerance"], accepted=10_000, max_draws=5_000_000,
                                        exclude_own=False)
        seats = P.expected_seats(tilted, actual[live])
        plain = rejection_delegations(va, vb, st, states[live], size[live], share[live],
                                      rng=np.random.default_rng(6), tol=config["pool.tolerance"],
                                      accepted=10_000, max_proposals=300_000, exclude_own=False)
        for i, r in enumerate(plain):
            if r["accepted"] < 3_000 or not tilted.n_accepted[i]:
                continue  # rejection too starved here for a sharp comparison
            se = math.hypot(r["mc_se"], seats.mc_se[i])
            assert abs(r["expected_seats"] - seats.expected_seats[i]) <= 4 * se + 1e-12, (cycle, chamber, i)
            compared += 1
    assert compared >= 4
