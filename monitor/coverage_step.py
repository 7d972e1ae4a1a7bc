"""The coverage step: the coverage of the state chambers whose inputs changed, read from the store
chamber by chamber (with their whole-chamber units), and written back; the pure computation is
:mod:`monitor.coverage`."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from monitor.coverage import UNIT_KEYS, Coverage, unit_coverage
from store import coverage as tables


def declared_counts(config) -> pd.DataFrame:
    """``[coverage] expected`` as rows: state, chamber, districts, seats (seats default to the
    districts). State and chamber codes follow the results' case rules."""
    from monitor.ingest.records import normalise_chamber, normalise_state

    rows = []
    for chamber, states in (config["coverage.expected"] or {}).items():
        for state, count in states.items():
            districts = count["districts"] if isinstance(count, dict) else count
            seats = count.get("seats", districts) if isinstance(count, dict) else count
            rows.append((normalise_state(state), normalise_chamber(chamber), int(districts), int(seats)))
    return pd.DataFrame(rows, columns=["state", "chamber", "districts", "seats"])


def compute_coverage(db, config, contests: pd.DataFrame, whole: pd.DataFrame | None = None) -> Coverage:
    """The coverage of every unit of ``contests`` (read in the caller's snapshot, the whole-chamber
    units' contests included, ``whole`` their units) with the plans and counts the store and the
    configuration declare."""
    from monitor.plans import assign_plans
    from monitor.staggered import Classes, partial

    units = contests[UNIT_KEYS].drop_duplicates()
    unit_plans, _ = assign_plans(db, units)
    return unit_coverage(contests, config["uncontested.policy"], config["uncontested.winner_share"], unit_plans,
                         tables.plan_counts(db), declared_counts(config), treatment=config["multi_member.treatment"],
                         whole=whole, partial=units[partial(units, Classes.from_config(config))])


#: units whose coverage is computed at once (whole state chambers): bounds the memory of a full recompute
BATCH_UNITS = 600
#: the method version of the stored coverage: bump it when what :func:`unit_coverage` stores changes
METHOD_VERSION = "coverage-1"


@dataclass
class CoverageUpdate(Coverage):
    """The coverage of the state chambers ``series`` recomputed (``units``, ``gaps``), what each was
    computed from (``bases``), and ``whole``: every unit's coverage once they are stored."""

    series: list = None
    bases: dict = None
    whole: pd.DataFrame = None
    every: bool = False
    all_bases: dict = None  # the basis of every current state chamber


def coverage_bases(units: pd.DataFrame, config, plans: pd.DataFrame) -> dict[str, str]:
    """``state|chamber`` -> what its coverage is computed from: every unit of the chamber (the
    coverage of a cycle reads the previous cycle of the same plan) with its content, policy and
    reduction method; the loaded plans of the chamber (eras and their counts); its
    ``[coverage] expected`` counts; its declared classes (a staggered chamber's whole-chamber units
    are part of its coverage); the policy with the multi-member treatment
    (:func:`store.reductions.current_keys` rows)."""
    import hashlib

    declared = {(s, c): (d, k) for s, c, d, k in declared_counts(config).itertuples(index=False)}
    eras: dict[tuple, list] = {}
    for r in plans.sort_values(["state", "chamber", "plan_id"]).itertuples(index=False):
        eras.setdefault((r.state, r.chamber), []).append(tuple(r))
    from monitor.staggered import Classes

    classes = Classes.from_config(config)
    head = f"{METHOD_VERSION}|{config.policy}|{config['uncontested.winner_share']!r}"
    out = {}
    for (state, chamber), part in units.groupby(["state", "chamber"], sort=True):
        h = hashlib.sha256(f"{head}|{declared.get((state, chamber))}|{eras.get((state, chamber))}|"
                           f"{classes.of(state, chamber)}".encode())
        for row in part.sort_values("cycle")[["cycle", "content_sha256", "policy", "method_version"]].itertuples(index=False):
            h.update(("|".join(map(str, row)) + "\n").encode())
        out[f"{state}|{chamber}"] = h.hexdigest()
    return out


def refresh_coverage(db, config, units: pd.DataFrame, stale: pd.DataFrame, full: bool = False) -> CoverageUpdate:
    """The coverage of the state chambers whose inputs changed (:func:`coverage_bases`; every one
    when ``full``), read and computed chamber by chamber; ``units``: every current unit
    (:func:`store.reductions.current_keys`)."""
    from monitor.inputs import measured_contests
    from monitor.staggered import Classes, whole_code
    from store import bases as store_bases

    classes = Classes.from_config(config)
    bases = coverage_bases(units, config, tables.plan_counts_and_eras(db))
    known = {} if full else store_bases.read(db, "coverage")
    old = tables.read_coverage(db)
    # a chamber whose stored rows are not those of its current units (a store from before the
    # coverage, rows removed by hand) is recomputed whatever its basis says
    held = {(s, c, int(u)) for s, c, u in zip(old["state"], old["chamber"], old["unit_id"]) if pd.notna(u)}
    for s, c, u in zip(units["state"], units["chamber"], units["unit_id"]):
        if (s, c, int(u)) not in held:
            known.pop(f"{s}|{c}", None)
    todo = [key for key, basis in bases.items() if known.get(key) != basis]
    parts, gap_parts = [], []
    for batch in chamber_batches(units, todo, BATCH_UNITS):
        cov = compute_coverage(db, config, *measured_contests(db, config, unit_ids=batch))
        parts.append(cov.units)
        gap_parts.append(cov.gaps)
    new_units = pd.concat(parts, ignore_index=True) if parts else pd.DataFrame(columns=unit_columns())
    new_gaps = pd.concat(gap_parts, ignore_index=True) if gap_parts else pd.DataFrame(columns=tables.GAP_COLUMNS)

    def with_whole(keys) -> list[tuple[str, str]]:
        """The (state, chamber) series of ``keys``, each staggered chamber's whole-chamber series too."""
        out = []
        for key in keys:
            state, chamber = key.split("|", 1)
            out += [(state, chamber), (state, whole_code(chamber))]  # a whole series no longer declared goes
        return out

    done = set(with_whole(todo))
    current = {(s, c) for s, c in zip(units["state"], units["chamber"])}
    current |= {(s, whole_code(c)) for s, c in current if classes.of(s, c) > 1}
    current -= done
    keep = old.loc[np.array([(s, c) in current for s, c in zip(old["state"], old["chamber"])], dtype=bool)]
    whole = pd.concat([keep[unit_columns()], new_units[unit_columns()]], ignore_index=True)
    gone = sorted({k for k in known if k not in bases})
    return CoverageUpdate(new_units, new_gaps, series=with_whole([*todo, *gone]),
                          bases={k: bases[k] for k in todo}, whole=whole, every=full, all_bases=bases)


def chamber_batches(units: pd.DataFrame, keys: list[str], size: int) -> list[list[int]]:
    """The unit ids of the state chambers ``keys`` (``state|chamber``), whole chambers at a time,
    about ``size`` units per batch (a chamber's coverage and whole-chamber units read its cycles
    together)."""
    ids = {key: part["unit_id"].tolist() for key, part in
           units.groupby(units["state"] + "|" + units["chamber"], sort=False)}
    batches, batch = [], []
    for key in keys:
        batch += ids.get(key, [])
        if len(batch) >= size:
            batches.append(batch)
            batch = []
    return batches + ([batch] if batch else [])


def unit_columns() -> list[str]:
    return [c for c in tables.UNIT_COLUMNS if c not in ("policy", "computed_at")]


def write_coverage(conn, cov: Coverage, policy: str, stamp: str) -> None:
    """Store the coverage (inside the caller's transaction): of the recomputed state chambers only
    for a :class:`CoverageUpdate`, else the whole tables."""
    from monitor.inputs import stored_unit_id
    from store import bases as store_bases

    units = cov.units.assign(policy=policy, computed_at=stamp)
    units["unit_id"] = [stored_unit_id(u) for u in units["unit_id"]]  # a whole-chamber unit has none
    units = units[tables.UNIT_COLUMNS]
    rows = [tuple(_plain(v) for v in r) for r in units.itertuples(index=False)]
    gaps = [tuple(_plain(v) for v in r) for r in cov.gaps.itertuples(index=False)]
    if isinstance(cov, CoverageUpdate) and not cov.every:
        tables.replace_series(conn, cov.series, rows, gaps)
        store_bases.replace(conn, "coverage", cov.bases, drop=[f"{s}|{c}" for s, c in cov.series
                                                                    if f"{s}|{c}" not in cov.bases])
        return
    tables.replace_coverage(conn, rows, gaps)
    if isinstance(cov, CoverageUpdate):
        store_bases.replace(conn, "coverage", cov.bases, every=True)


def _plain(value):
    if value is None or value is pd.NA:
        return None
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value.item() if hasattr(value, "item") else value
