"""Staggered chambers: a chamber elected in classes (a senate of which each cycle elects part),
and its whole-chamber view.

``[staggered] classes`` in levelfield.toml declares them: ``classes.state_upper = 2`` (every
state's chamber), or ``classes.state_upper = { QV = 2, ZX = 1, "*" = 2 }`` per state (``"*"``:
the other states; 1 or absent: not staggered). Then (project choice, no verified source):

* each cycle's unit of such a chamber (``cycle, state, state_upper``) is **partial**: it holds the
  seats elected that cycle, not the chamber. Its measures describe that cycle's elections and are
  kept, but it is never flagged, and its coverage is counted against the whole chamber (the seats
  not up that cycle are "not up", not missing);
* a **whole-chamber unit** keyed ``(cycle, state, <chamber>_whole)`` combines, for every seat
  (district and position), its latest election among the last N stored cycles of the same state
  and chamber up to ``cycle`` under the plan in force at ``cycle`` (N = the classes: the last two
  cycles of a two-class senate). It is measured, pooled and flagged like any unit, and stored with
  the cycles it combines (``combines``: ``2022+2024``). Its national pool is the other
  whole-chamber units of the same cycle and chamber code (whole chambers pooled with whole
  chambers). A cycle that elected every seat (the first cycle of a plan, often) gives a
  whole-chamber unit of that cycle alone.

Consecutive whole-chamber units share the seats of one class, so a plan's flagged cycles are not
independent there: the watch rule's "two cycles" can be two views that share half their seats.

Pure functions over frames; no I/O. The suffix ``_whole`` is reserved: the loader refuses a
chamber name that ends with it.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from monitor.ingest.records import RESERVED_CHAMBER_SUFFIX, normalise_chamber, normalise_state

WHOLE_SUFFIX = RESERVED_CHAMBER_SUFFIX
UNIT_KEYS = ["cycle", "state", "chamber"]


#: the most classes a chamber can be declared to elect in (a whole-chamber unit combines at most
#: this many of its chamber's cycles)
MAX_CLASSES = 10


def whole_code(chamber: str) -> str:
    return f"{chamber}{WHOLE_SUFFIX}"


def is_whole(chamber: str) -> bool:
    return str(chamber).endswith(WHOLE_SUFFIX)


def base_chamber(chamber: str) -> str:
    """The loaded chamber a code stands for: ``state_upper`` for ``state_upper_whole``."""
    return chamber[: -len(WHOLE_SUFFIX)] if is_whole(chamber) else chamber


class Classes:
    """The declared classes of each (state, chamber) (``[staggered] classes``)."""

    def __init__(self, table: dict | None):
        self._all: dict[str, int] = {}
        self._by_state: dict[tuple[str, str], int] = {}
        for chamber, value in (table or {}).items():
            code = normalise_chamber(chamber)
            if isinstance(value, dict):
                for state, n in value.items():
                    if state == "*":
                        self._all[code] = int(n)
                    else:
                        self._by_state[(normalise_state(state), code)] = int(n)
            else:
                self._all[code] = int(value)

    def __bool__(self) -> bool:
        return any(n > 1 for n in (*self._all.values(), *self._by_state.values()))

    def of(self, state: str, chamber: str) -> int:
        """The classes of ``state``'s ``chamber`` (1: not staggered)."""
        return self._by_state.get((state, chamber), self._all.get(chamber, 1))

    def column(self, units: pd.DataFrame) -> np.ndarray:
        """The classes of each row's (state, chamber)."""
        return np.array([self.of(s, c) for s, c in zip(units["state"], units["chamber"])], dtype=np.int64)

    @classmethod
    def from_config(cls, config) -> "Classes":
        return cls(config["staggered.classes"])


def partial(units: pd.DataFrame, classes: Classes) -> np.ndarray:
    """True for each unit (cycle, state, chamber) of a staggered chamber: a per-cycle unit that
    holds only the seats elected that cycle."""
    if units.empty or not classes:
        return np.zeros(len(units), dtype=bool)
    return classes.column(units) > 1


def whole_chambers(contests: pd.DataFrame, unit_plans: pd.DataFrame, classes: Classes,
                   first_id: int = -1) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The whole-chamber units of the staggered chambers in ``contests``.

    ``contests``: current contests with at least unit_id, cycle, state, chamber, district and
    (optional) position; ``unit_plans``: cycle, state, chamber, plan_id (the plan in force).
    Returns ``(contests, units)``: the contests of every whole-chamber unit (copies of the
    combined units' rows, each with ``chamber`` the whole code, ``cycle`` the unit's, ``unit_id``
    a virtual id counting down from ``first_id`` and ``from_cycle`` the cycle it was elected
    in), and one row per whole-chamber unit: unit_id, cycle, state, chamber, base_chamber,
    plan_id, classes, combines (``2022+2024``) and from_units (the stored unit ids, ``+``-joined).
    """
    unit_cols = ["unit_id", *UNIT_KEYS, "base_chamber", "plan_id", "classes", "combines", "from_units"]
    empty = (contests.iloc[0:0].assign(from_cycle=pd.Series(dtype=np.int64)), pd.DataFrame(columns=unit_cols))
    if contests.empty or not classes:
        return empty
    units = contests[["unit_id", *UNIT_KEYS]].drop_duplicates("unit_id")
    units = units[partial(units, classes)]
    if units.empty:
        return empty
    plans = unit_plans[[*UNIT_KEYS, "plan_id"]] if len(unit_plans) else pd.DataFrame(columns=[*UNIT_KEYS, "plan_id"])
    units = units.merge(plans, on=UNIT_KEYS, how="left").sort_values(["state", "chamber", "cycle"], kind="mergesort")
    units["classes"] = classes.column(units)
    units["plan_key"] = units["plan_id"].astype(object).where(units["plan_id"].notna(), "")
    staggered = contests[contests["unit_id"].isin(units["unit_id"])]
    staggered = staggered.assign(
        _seat=staggered["district"].astype(str) + "\x1f"
        + (staggered["position"].astype(str) if "position" in staggered.columns else ""),
        from_cycle=staggered["cycle"])
    by_unit = dict(tuple(staggered.groupby("unit_id", sort=False)))
    rows, heads = [], []
    next_id = first_id
    for (_, _), group in units.groupby(["state", "chamber"], sort=False):
        group = group.reset_index(drop=True)
        for i in range(len(group)):
            here = group.iloc[i]
            window = group.iloc[max(0, i - int(here["classes"]) + 1): i + 1]
            window = window[window["plan_key"] == here["plan_key"]]
            part = pd.concat([by_unit[u] for u in window["unit_id"]], ignore_index=True)
            # each seat's latest election: every contest of that seat in its latest cycle
            latest = part.groupby("_seat")["from_cycle"].transform("max")
            part = part[part["from_cycle"] == latest].drop(columns="_seat")
            part = part.assign(unit_id=next_id, cycle=int(here["cycle"]), chamber=whole_code(here["chamber"]))
            rows.append(part)
            heads.append((next_id, int(here["cycle"]), here["state"], whole_code(here["chamber"]), here["chamber"],
                          here["plan_id"], int(here["classes"]),
                          "+".join(str(int(c)) for c in window["cycle"]),
                          "+".join(str(int(u)) for u in window["unit_id"])))
            next_id -= 1
    out = pd.concat(rows, ignore_index=True)
    out["from_cycle"] = out["from_cycle"].astype(np.int64)
    return out, pd.DataFrame(heads, columns=unit_cols)
