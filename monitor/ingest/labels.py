"""Party codes that follow ``levelfield.toml``.

A native file's party labels are turned into party codes (a | b | other) through the ``[parties]``
labels of ``levelfield.toml``; the store keeps the codes (``votes.party_code``) and, in
``party_labels``, the labels they were derived from. When the configured labels change, every
vote line whose codes came from the configuration (``loads.party_codes_from = 'config'``) is
re-coded, and the contest status and unit content hash that depend on the codes follow, all in
one transaction. Lines loaded through a mapping with its own ``[parties]`` keep the mapping's
grouping (``party_codes_from = 'mapping'``).
"""

from __future__ import annotations

import sqlite3

import sqlite_utils

from monitor.config import Config, normalise_label
from monitor.ingest.records import content_hash
from monitor.reduce import reduce_contests
from store import queries, transaction

CONFIG = "config"
MAPPING = "mapping"


def recode_message(count: int, *, dry_run: bool = False) -> str:
    verb = "would be re-coded" if dry_run else "re-coded"
    return f"party labels changed in levelfield.toml: {count} vote line{'' if count == 1 else 's'} {verb}"


def sync_party_codes(db: sqlite_utils.Database, config: Config) -> int | None:
    """Make the stored config-derived party codes follow ``config``'s labels.

    Returns ``None`` when nothing had to change (the usual case: one small read), else the
    number of vote lines whose code changed (0 when the labels changed but no stored line
    carries an affected label)."""
    labels = config.label_codes()
    if queries.party_labels(db) == labels or not queries.has_votes_coded_from(db, CONFIG):
        return None
    with transaction(db) as conn:
        return recode(conn, labels)  # re-checks inside the writer lock


def recode(conn: sqlite3.Connection, labels: dict[str, str]) -> int | None:
    """Inside a write transaction: re-derive the config-derived codes from ``labels`` (normalised
    label -> a | b) when they differ from the stored basis; store ``labels`` as the new basis.
    Returns the number of lines re-coded, or ``None`` when the labels did not change (or no basis
    was stored yet and no line needed a new code)."""
    previous = queries.party_labels(conn)
    if previous == labels:
        return None
    lines = queries.votes_coded_from(conn, CONFIG)
    queries.replace_party_labels(conn, labels)
    wanted = lines["party"].map(lambda p: labels.get(normalise_label(p), "other"))
    # (assigning to the filtered frame would give an empty one the Series' index: NaN rows)
    changed = lines.assign(new=wanted)[wanted != lines["party_code"]]
    if changed.empty:
        # no basis stored yet (a store from before the basis was kept) and nothing to change:
        # nothing the user needs to hear about
        return 0 if previous else None
    queries.set_party_codes(conn, list(zip(changed["new"], changed["id"].astype(int).tolist())))

    # what depends on the codes: each touched contest's status, each touched unit's content hash
    units = sorted(int(u) for u in changed["unit_id"].unique())
    votes = queries.unit_votes(conn, units)
    touched = set(changed["contest_id"].astype(int))
    votes = votes[votes["contest_id"].isin(touched)]
    contests = votes.drop_duplicates("contest_id")[["contest_id", "seats"]]
    reduced = reduce_contests(votes, contests)
    queries.set_contest_status(conn, list(zip(reduced["status"], reduced["contest_id"].astype(int).tolist())))
    stored = queries.unit_lines(conn, units)
    digests = []
    for unit_id, part in stored.groupby("unit_id", sort=True):
        digests.append((content_hash(part[["district", "special", "seats", "party", "party_code", "candidate",
                                           "votes", "writein", "certification", "runoff", "decides",
                                           "placeholder", "position"]].itertuples(index=False)),
                        int(unit_id)))
    queries.set_unit_digest(conn, digests)
    return len(changed)


__all__ = ["CONFIG", "MAPPING", "recode", "recode_message", "sync_party_codes"]
