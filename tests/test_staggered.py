"""Staggered chambers: which units are partial and how the whole-chamber units combine the latest
election of every seat.

Invented units and districts; the expectations are hand-computed from these tiny inputs (plumbing
of a project choice, not a check of any measure).
"""

from __future__ import annotations

import pandas as pd
import pytest

from conftest import long_csv
from monitor.staggered import Classes, partial, whole_chambers

# QV's senate (4 districts): every seat in 2020, the odd-numbered in 2022, the even in 2024; a new
# plan from 2026 elects every seat again. ZX's senate is not staggered.
ELECTED = {2020: ["1", "2", "3", "4"], 2022: ["1", "3"], 2024: ["2", "4"], 2026: ["1", "2", "3", "4"]}


def contests():
    rows, unit = [], 0
    for cycle, districts in ELECTED.items():
        unit += 1
        rows += [(unit, cycle, "QV", "state_upper", d, "", 1) for d in districts]
    rows += [(99, 2024, "ZX", "state_upper", "1", "", 1)]
    return pd.DataFrame(rows, columns=["unit_id", "cycle", "state", "chamber", "district", "position", "decides"])


PLANS = pd.DataFrame([(c, "QV", "state_upper", "QV-2020" if c < 2026 else "QV-2026") for c in ELECTED]
                     + [(2024, "ZX", "state_upper", "ZX-2020")], columns=["cycle", "state", "chamber", "plan_id"])


def test_classes_per_chamber_and_per_state():
    classes = Classes({"State_Upper": {"qv": 2, "*": 3}, "federal": 1})
    assert (classes.of("QV", "state_upper"), classes.of("ZX", "state_upper"), classes.of("QV", "federal")) == (2, 3, 1)
    assert not Classes({"federal": 1}) and not Classes({})
    units = pd.DataFrame({"state": ["QV", "ZX", "QV"], "chamber": ["state_upper", "state_upper", "state_lower"]})
    assert partial(units, Classes({"state_upper": {"QV": 2}})).tolist() == [True, False, False]


def test_each_whole_chamber_unit_takes_every_seats_latest_election():
    out, units = whole_chambers(contests(), PLANS, Classes({"state_upper": {"QV": 2}}))
    assert units[["cycle", "chamber", "combines", "plan_id"]].values.tolist() == [
        [2020, "state_upper_whole", "2020", "QV-2020"],        # the first stored cycle: itself
        [2022, "state_upper_whole", "2020+2022", "QV-2020"],
        [2024, "state_upper_whole", "2022+2024", "QV-2020"],
        [2026, "state_upper_whole", "2026", "QV-2026"],        # a new plan: not combined with the old one
    ]
    assert units["unit_id"].tolist() == [-1, -2, -3, -4]  # virtual ids: never a stored unit's
    seats = {c: sorted(zip(part["district"], part["from_cycle"])) for c, part in out.groupby("cycle")}
    assert seats[2022] == [("1", 2022), ("2", 2020), ("3", 2022), ("4", 2020)]
    assert seats[2024] == [("1", 2022), ("2", 2024), ("3", 2022), ("4", 2024)]
    assert seats[2026] == [("1", 2026), ("2", 2026), ("3", 2026), ("4", 2026)]
    assert set(out["state"]) == {"QV"}  # ZX's senate is not staggered: no whole-chamber unit


def test_numbered_seats_are_seats_of_their_own_in_the_whole_chamber():
    frame = pd.DataFrame([(1, 2022, "QV", "state_upper", "1", "A", 1), (1, 2022, "QV", "state_upper", "1", "B", 1),
                          (2, 2024, "QV", "state_upper", "1", "A", 1)],
                         columns=["unit_id", "cycle", "state", "chamber", "district", "position", "decides"])
    plans = pd.DataFrame([(2022, "QV", "state_upper", "P"), (2024, "QV", "state_upper", "P")],
                         columns=["cycle", "state", "chamber", "plan_id"])
    out, _ = whole_chambers(frame, plans, Classes({"state_upper": 2}))
    latest = out[out["cycle"] == 2024]
    assert sorted(zip(latest["position"], latest["from_cycle"])) == [("A", 2024), ("B", 2022)]


@pytest.mark.parametrize("chamber", ["state_upper_whole", "Senate_WHOLE"])
def test_the_loader_refuses_a_chamber_name_reserved_for_whole_chamber_views(lf, chamber):
    rows = [[2024, "QV", chamber, "1", "Harbour", "Rhea Lund", 10], [2024, "QV", chamber, "1", "Upland", "Tam Ivo", 9]]
    out = lf("load", lf.write("bad.csv", long_csv(rows)), code=1)
    assert "names ending in '_whole' are reserved for the whole-chamber view of a staggered chamber" in out.output
