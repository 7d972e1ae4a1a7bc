"""Declination in seats (monitor.measures.declination_seats) against values from outside the project.

Source of the seat reading: G. S. Warrington, "Quantifying Gerrymandering Using the Vote
Distribution", Election Law Journal 17 (2018), arXiv:1705.09393: the declination delta of a plan of
N districts read as about delta N / 2 seats (from memory; the project's methods note, section 6.3,
tags it MEMORY). Check values: the methods note's worked example (section 6.5), computed there
with numpy outside this project: shares (0.3, 0.3, 0.7) give delta = 0.2136741375 and delta N / 2 =
0.3205112 (COMPUTED); our sign is the published one negated (positive favours party a). Edge cases
and invariants: DERIVED in the same note (section 6.2 and 6.5).
"""

from __future__ import annotations

import numpy as np
import pytest

from monitor.measures import MeasureSettings, compute_measures
from monitor.measures.declination_seats import declination_seats
from monitor.measures.registry import by_name


def _run(shares, n=100.0):
    x = np.asarray(shares, dtype=float)
    return declination_seats(np.zeros(len(x), np.int64), n * x, n * (1 - x), 1)[0]


def test_the_worked_example_in_seats():
    # methods note 6.5 (COMPUTED outside the project): delta N / 2 = 0.3205112 for (0.3, 0.3, 0.7)
    assert _run([0.3, 0.3, 0.7]) == pytest.approx(-0.3205112, abs=5e-8)
    assert _run([0.3, 0.3, 0.7]) == pytest.approx(-0.2136741375 * 3 / 2, abs=1e-10)


def test_swapping_the_parties_negates_it_and_mirror_sets_give_zero():
    # methods note 6.5, DERIVED: delta(1 - x) = -delta(x); delta = 0 for mirror-symmetric sets
    assert _run([0.7, 0.7, 0.3]) == pytest.approx(0.3205112, abs=5e-8)
    assert _run([0.4, 0.45, 0.55, 0.6]) == pytest.approx(0.0, abs=1e-12)


def test_undefined_where_the_declination_is_with_its_reason():
    # methods note 6.2 / DEC-3 (DERIVED): a party without a seat has no angle
    assert np.isnan(_run([0.6, 0.7]))
    unit = np.array([0, 0, 0, 1, 1], np.int64)
    a = np.array([30.0, 30.0, 70.0, 60.0, 70.0])
    frame = compute_measures(unit, a, 100.0 - a, np.zeros(5, bool), 2, MeasureSettings(interval_draws=0), None)
    rows = frame.set_index(["unit", "measure"])
    assert rows.loc[(0, "declination_seats"), "value"] == pytest.approx(-0.3205112, abs=5e-8)
    assert np.isnan(rows.loc[(1, "declination_seats"), "value"])
    assert rows.loc[(1, "declination_seats"), "reason"] == rows.loc[(1, "declination"), "reason"] == "party b won no seat"


def test_it_is_declared_once_and_signed():
    m = by_name()["declination_seats"]
    assert m.signed and m.flag is None and m.kind == "score" and "Warrington" in m.source
