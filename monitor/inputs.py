"""What the measures see: the stored reductions (written by :mod:`monitor.reductions`) of the
current contests that decide their seats, in every unit, as two-party votes after the uncontested
policy, grouped into sorted unit arrays.

One contest per seat enters: the one the loader marked as deciding it (``contests.decides``:
the regular contest, its runoff when there is one, or a special that replaced the regular
election; see :mod:`monitor.ingest.deciding`). The others stay stored as history."""

from __future__ import annotations

import hashlib
from dataclasses import dataclass

import numpy as np
import pandas as pd
import sqlite_utils

from monitor.config import Config
from monitor.eligibility import deciding
from store import reductions as stored

UNIT_KEYS = ["cycle", "state", "chamber"]


def reduced_contests(db: sqlite_utils.Database, cycle: int | None = None, *, chamber: str | None = None,
                     unit_ids=None) -> pd.DataFrame:
    """One row per current contest (of ``cycle``, ``chamber`` and the units ``unit_ids`` only, when
    given): unit keys, district, special, runoff, decides (whether it decides its seat; else
    left_out says why), placeholder (no real count), seats and its stored reduction
    (``store.reductions.CONTEST_COLUMNS``), sorted by unit, district, special and runoff."""
    return stored.current(db, cycle, chamber=chamber, unit_ids=unit_ids)


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
    two = deciding[deciding["enters"].astype(int) == 1]
    index = pd.Series(units.index, index=units["unit_id"])
    two = two.assign(unit=index.reindex(two["unit_id"]).to_numpy())
    two = two.sort_values(["unit", "district"], kind="mergesort")
    unit = two["unit"].to_numpy(np.int64)
    va = two["votes_a_used"].to_numpy(np.float64)
    vb = two["votes_b_used"].to_numpy(np.float64)
    unc = two["uncontested"].astype(bool).to_numpy(bool)
    units["districts_eligible"] = np.bincount(unit, minlength=len(units))
    units["inputs_hash"] = _hashes(unit, two["district"].to_numpy(object), va, vb, unc, len(units),
                                   f"{config.policy}|{salt}") if hashes else ""
    return UnitArrays(units, unit, va, vb, unc, two["district"].to_numpy(object), two["state"].to_numpy(object))


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
