"""The reduction step: every contest's two-party reduction, stored, with the shares the measures
use after the uncontested policy.

Runs right after the loader (and whenever ``levelfield.toml``'s party labels or uncontested
policy change): a unit is reduced again only when its content (``units.content_sha256``) or the
policy differs from what its stored rows were made from. Everything downstream (measures, national
pool, national aggregates, exports, the site) reads the stored rows, never the vote lines.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import sqlite_utils

from monitor.config import Config
from monitor.eligibility import deciding
from monitor.multi_member import LEAVE_OUT
from monitor.reduce import reduce_contests, two_party_inputs
from store import queries, write_from_snapshot
from store import reductions as stored

#: how many units are read and reduced at once (bounds memory on a national history)
BATCH_UNITS = 2_000
#: the method version of the stored reductions (:func:`reduce_units`): bump it when what a
#: reduction stores changes, and every unit is reduced again
METHOD_VERSION = "reduce-1"


def reduce_units(lines: pd.DataFrame, contests: pd.DataFrame, policy: str, winner_share: float,
                 treatment: str = LEAVE_OUT) -> pd.DataFrame:
    """The rows of ``store.reductions.COLUMNS`` for ``contests`` (contest_id, unit_id, seats,
    special, decides, placeholder) from their vote ``lines`` (:func:`monitor.reduce.reduce_contests`),
    with the raw two-party share ``share_a`` and what enters the measures under ``policy`` and the
    multi-member ``treatment`` (:func:`monitor.reduce.two_party_inputs` over the contests that
    decide their seats): ``enters``, ``uncontested``, ``votes_a_used``, ``votes_b_used`` (a
    multi-member contest's pseudo-districts added up), ``share_used`` (NaN when the contest does
    not enter) and ``imputed``; and what the pseudo-districts are made of (``won_votes_a``,
    ``won_votes_b``, ``tie_across_parties``)."""
    reduced = reduce_contests(lines, contests[["contest_id", "seats"]]).drop(columns=["seats"])
    out = contests[["contest_id", "unit_id", "seats", "special", "decides", "placeholder"]].merge(
        reduced, on="contest_id", how="left")
    two = (out["votes_a"] + out["votes_b"]).astype(float)
    out["share_a"] = np.where(two > 0, out["votes_a"] / two.where(two > 0, 1.0), np.nan)
    used = two_party_inputs(out[deciding(out)], policy, winner_share, treatment).set_index("contest_id")
    out["enters"] = out["contest_id"].isin(used.index).astype(int)
    va = used["votes_a"].reindex(out["contest_id"]).to_numpy(float)
    vb = used["votes_b"].reindex(out["contest_id"]).to_numpy(float)
    out["votes_a_used"], out["votes_b_used"] = va, vb
    with np.errstate(invalid="ignore", divide="ignore"):
        out["share_used"] = np.where(va + vb > 0, va / (va + vb), np.nan)
    unc = used["uncontested"].reindex(out["contest_id"]).fillna(False).astype(bool).to_numpy()
    out["uncontested"] = unc.astype(int)
    out["imputed"] = (unc & (policy == "impute")).astype(int)
    out["tie_across_parties"] = out["tie_across_parties"].astype(int)
    return out[stored.COLUMNS]


def refresh(db: sqlite_utils.Database, config: Config, *, full: bool = False) -> int:
    """Reduce every unit whose reductions are stale (``full``: every unit); return how many. Each
    batch is one consistent read-reduce-write step (:func:`store.write_from_snapshot`)."""
    done = 0
    while True:
        if not full and not stored.stale_units(db, config.policy, METHOD_VERSION):
            return done  # the usual case: one read, no write transaction
        count = write_from_snapshot(db, lambda: _step(db, config, full, done))
        if count == 0:
            return done
        done += count


def _step(db: sqlite_utils.Database, config: Config, full: bool, done: int):
    units = stored.stale_units(db, config.policy, METHOD_VERSION, every=full)
    units = units[done:done + BATCH_UNITS] if full else units[:BATCH_UNITS]
    ids = [u for u, _ in units]
    if not ids:
        return lambda conn: 0
    frame = reduce_units(queries.unit_votes(db, ids), stored.unit_contests(db, ids), config["uncontested.policy"],
                         config["uncontested.winner_share"], config["multi_member.treatment"])
    rows = [tuple(_plain(v) for v in r) for r in frame.itertuples(index=False)]
    digests = [(u, digest, config.policy, METHOD_VERSION) for u, digest in units]

    def write(conn) -> int:
        stored.replace(conn, ids, rows, digests)
        return len(ids)

    return write


def _plain(value):
    """A numpy scalar as the Python value SQLite stores (NaN as NULL)."""
    if hasattr(value, "item"):
        value = value.item()
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value
