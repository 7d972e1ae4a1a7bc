"""What the measures see: the stored reductions (written by :mod:`monitor.reductions`) of the
current contests that decide their seats, in every unit, as two-party votes after the uncontested
policy, grouped into sorted unit arrays.

One contest per seat enters: the one the loader marked as deciding it (``contests.decides``:
the regular contest, its runoff when there is one, or a special that replaced the regular
election; see :mod:`monitor.ingest.deciding`). The others stay stored as history. A numbered
seat (``position``) is a district row of its own; a multi-member contest that enters under
``[multi_member] treatment = "pseudo_districts"`` is k district rows, its pseudo-districts
(:mod:`monitor.multi_member`).

The measures and the flags also see the whole-chamber units of staggered chambers
(:func:`measured_contests`, :mod:`monitor.staggered`): virtual units (negative ids, never a stored
unit's) whose contests are copies of the stored ones."""

from __future__ import annotations

import hashlib
from dataclasses import dataclass

import numpy as np
import pandas as pd
import sqlite_utils

from monitor import multi_member as M
from monitor.config import Config
from monitor.eligibility import deciding
from monitor.staggered import MAX_CLASSES, Classes, base_chamber, is_whole, whole_chambers
from store import reductions as stored

UNIT_KEYS = ["cycle", "state", "chamber"]


def reduced_contests(db: sqlite_utils.Database, cycle: int | None = None, *, chamber: str | None = None,
                     unit_ids=None) -> pd.DataFrame:
    """One row per current contest (of ``cycle``, ``chamber`` and the units ``unit_ids`` only, when
    given): unit keys, district, special, runoff, decides (whether it decides its seat; else
    left_out says why), placeholder (no real count), seats and its stored reduction
    (``store.reductions.CONTEST_COLUMNS``), sorted by unit, district, special and runoff."""
    return stored.current(db, cycle, chamber=chamber, unit_ids=unit_ids)


def measured_contests(db: sqlite_utils.Database, config: Config, *, unit_ids=None,
                      cycle: int | None = None, chamber: str | None = None) -> tuple[pd.DataFrame, pd.DataFrame]:
    """:func:`reduced_contests` and the contests of the whole-chamber units of the staggered
    chambers ``[staggered] classes`` declares (their ``from_cycle`` set; NaN on the stored
    contests), and those units (:func:`monitor.staggered.whole_chambers`).

    ``unit_ids``: only these stored units (pass whole state chambers: a whole-chamber unit combines
    the cycles of its chamber). ``cycle`` and ``chamber`` (a whole code, ``state_upper_whole``):
    only the whole-chamber units of that group, built from the last cycles of their chamber."""
    from monitor.plans import assign_plans

    classes = Classes.from_config(config)
    if chamber is not None and is_whole(chamber):
        base = base_chamber(chamber)
        cycles = stored.cycles_of(db, base, upto=cycle, last=MAX_CLASSES)
        contests = pd.concat([reduced_contests(db, c, chamber=base) for c in cycles], ignore_index=True) \
            if cycles else reduced_contests(db, cycle, chamber=base)
    else:
        contests = reduced_contests(db, cycle, chamber=chamber, unit_ids=unit_ids)
    if not classes or contests.empty:
        return contests, whole_chambers(contests.iloc[0:0], pd.DataFrame(), classes)[1]
    plans, _ = assign_plans(db, contests[UNIT_KEYS].drop_duplicates())
    whole, units = whole_chambers(contests, plans, classes)
    if chamber is not None and is_whole(chamber):
        return whole[whole["cycle"] == cycle], units[units["cycle"] == cycle]
    return pd.concat([contests, whole], ignore_index=True), units


def stored_unit_id(unit_id) -> int | None:
    """The store's id of a unit, None for a whole-chamber unit (a virtual, negative id)."""
    return None if unit_id is None or pd.isna(unit_id) or int(unit_id) < 0 else int(unit_id)


def deciding_contests(contests: pd.DataFrame) -> pd.DataFrame:
    """The contests that decide their seats (one per seat), from :func:`reduced_contests`
    (:func:`monitor.eligibility.deciding`)."""
    return contests[deciding(contests)]


@dataclass
class UnitArrays:
    """District rows sorted by unit; ``units`` has one row per unit (index = unit id)."""

    units: pd.DataFrame          # cycle, state, chamber, unit_id (store), inputs_hash, districts
    unit: np.ndarray             # int64 per district row, non-decreasing
    votes_a: np.ndarray
    votes_b: np.ndarray
    uncontested: np.ndarray
    district: np.ndarray         # district codes (object)
    state: np.ndarray            # state code per district row


def measure_inputs(contests: pd.DataFrame, config: Config, salt: str = "", *, hashes: bool = True) -> UnitArrays:
    """The unit arrays of the contests that enter the measures (their stored ``enters``, votes after
    the policy and ``uncontested`` flag), keeping every unit that has current contests deciding
    their seats (a unit with no eligible contest gets an empty segment: its measures are null with
    a reason). ``salt`` (settings and method versions) enters every inputs hash (``hashes=False``:
    no hash, for a step that reads the hashes the measures were stored with)."""
    deciding = deciding_contests(contests)
    units = (deciding[["unit_id", *UNIT_KEYS]].drop_duplicates()
             .sort_values(UNIT_KEYS).reset_index(drop=True))
    two = seat_rows(deciding[deciding["enters"].astype(int) == 1], config)
    index = pd.Series(units.index, index=units["unit_id"])
    two = two.assign(unit=index.reindex(two["unit_id"]).to_numpy())
    two = two.sort_values(["unit", "district"], kind="mergesort")
    unit = two["unit"].to_numpy(np.int64)
    va = two["votes_a_used"].to_numpy(np.float64)
    vb = two["votes_b_used"].to_numpy(np.float64)
    unc = two["uncontested"].astype(bool).to_numpy(bool)
    label = two["seat_label"].to_numpy(object)
    units["districts_eligible"] = np.bincount(unit, minlength=len(units))
    units["inputs_hash"] = _hashes(unit, label, va, vb, unc, len(units), f"{config.policy}|{salt}") if hashes else ""
    return UnitArrays(units, unit, va, vb, unc, label, two["state"].to_numpy(object))


def seat_rows(entering: pd.DataFrame, config: Config) -> pd.DataFrame:
    """One row per seat of the contests that enter: a multi-member contest (entering under the
    pseudo-district treatment) becomes its k pseudo-districts, with their votes after the policy;
    ``seat_label`` names each row (the district, ``/position`` for a numbered seat, ``#k`` for a
    pseudo-district), in the stored order."""
    position = entering["position"].fillna("").astype(str) if "position" in entering else ""
    rows = entering.assign(seat_label=entering["district"].astype(str) + np.where(position != "", "/" + position, ""))
    multi = rows["seats"].astype(int).to_numpy() > 1
    if not multi.any():
        return rows
    part = rows[multi].reset_index(drop=True)
    pseudo = M.pseudo_districts(part.assign(contest_id=np.arange(len(part))), config["uncontested.policy"],
                                config["uncontested.winner_share"])
    expanded = part.iloc[pseudo["contest_id"].to_numpy()].assign(
        votes_a_used=pseudo["votes_a"].to_numpy(float), votes_b_used=pseudo["votes_b"].to_numpy(float),
        uncontested=pseudo["uncontested"].to_numpy(bool))
    expanded["seat_label"] = expanded["seat_label"] + "#" + pseudo["seat"].astype(str).to_numpy()
    order = np.argsort(np.r_[np.flatnonzero(~multi), np.flatnonzero(multi)[pseudo["contest_id"].to_numpy()]],
                       kind="mergesort")
    return pd.concat([rows[~multi], expanded], ignore_index=True).iloc[order]


def _hashes(unit, district, va, vb, unc, n_units, salt) -> list[str]:
    starts = np.searchsorted(unit, np.arange(n_units))
    ends = np.searchsorted(unit, np.arange(n_units), side="right")
    out = []
    for s, e in zip(starts, ends):
        h = hashlib.sha256(salt.encode())
        for d, a, b, u in zip(district[s:e], va[s:e], vb[s:e], unc[s:e]):
            h.update(f"{d}\x1f{a!r}\x1f{b!r}\x1f{int(u)}\n".encode())
        out.append(h.hexdigest())
    return out


def unit_seeds(units: pd.DataFrame, seed: int) -> np.ndarray:
    """A 64-bit seed per unit from the configured seed and the unit's key, so that a unit's
    simulated intervals do not depend on which other units are computed with it."""
    keys = (units["cycle"].astype(str) + "|" + units["state"] + "|" + units["chamber"]).to_numpy()
    return np.array([int.from_bytes(hashlib.sha256(f"{seed}|{k}".encode()).digest()[:8], "little")
                     for k in keys], dtype=np.uint64)
