"""What the measures see: the current single-member contests that decide their seats, in every
unit, as two-party votes after the uncontested policy, grouped into sorted unit arrays.

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
from monitor.reduce import reduce_contests, two_party_inputs
from store import queries

UNIT_KEYS = ["cycle", "state", "chamber"]


def reduced_contests(db: sqlite_utils.Database, where: str = "", params=()) -> pd.DataFrame:
    """One row per current contest: unit keys, district, special, runoff, decides (whether it
    decides its seat; else left_out says why), placeholder (no real count), seats and its
    reduction."""
    lines = queries.current_votes(db, where, params)
    if lines.empty:
        return pd.DataFrame(columns=["unit_id", *UNIT_KEYS, "certification", "load_id", "contest_id",
                                     "district", "position", "seats", "special", "runoff", "decides", "left_out", "placeholder",
                                     "votes_a", "votes_b", "votes_other",
                                     "total", "status", "seats_a", "seats_b", "seats_other", "winner",
                                     "candidates_a", "candidates_b", "candidates_other"])
    contests = lines.drop_duplicates("contest_id")[
        ["unit_id", *UNIT_KEYS, "certification", "load_id", "contest_id", "district", "position", "seats", "special",
         "runoff", "decides", "left_out", "placeholder"]
    ]
    reduced = reduce_contests(lines, contests[["contest_id", "seats"]]).drop(columns=["seats"])
    return contests.merge(reduced, on="contest_id", how="left")


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


def measure_inputs(contests: pd.DataFrame, config: Config, salt: str = "") -> UnitArrays:
    """Apply the uncontested policy and build the unit arrays, keeping every unit that has
    current contests (a unit with no eligible contest gets an empty segment: its measures are
    null with a reason). ``salt`` (settings and method versions) enters every inputs hash."""
    deciding = deciding_contests(contests)
    units = (deciding[["unit_id", *UNIT_KEYS]].drop_duplicates()
             .sort_values(UNIT_KEYS).reset_index(drop=True))
    two = two_party_inputs(deciding, config["uncontested.policy"], config["uncontested.winner_share"])
    index = pd.Series(units.index, index=units["unit_id"])
    two = two.assign(unit=index.reindex(two["unit_id"]).to_numpy())
    two = two.sort_values(["unit", "district"], kind="mergesort")
    unit = two["unit"].to_numpy(np.int64)
    va = two["votes_a"].to_numpy(np.float64)
    vb = two["votes_b"].to_numpy(np.float64)
    unc = two["uncontested"].to_numpy(bool)
    units["districts_eligible"] = np.bincount(unit, minlength=len(units))
    units["inputs_hash"] = _hashes(unit, two["district"].to_numpy(object), va, vb, unc, len(units),
                                   f"{config.policy}|{salt}")
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
