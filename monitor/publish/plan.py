"""Which pages the site has, what each one shows (its inputs), and so which pages a change touches.

Every page is listed here with the inputs it reads, named by key:

* ``("unit", cycle, state, chamber)``: every stored row of one unit (its results as delivered and
  reduced, measures, coverage, expected seats, tails, plan, seats and votes, the loads behind it);
* ``("pair", state, chamber)``: what belongs to a state chamber across cycles (plan eras, watch
  entries, flag history, corrections, seats-votes curve);
* ``("cycle", cycle)``: what belongs to a cycle nationwide (national summary, histogram, excess seats
  by who drew the plan, the cycle's flag history); a cycle page also reads the earlier units of each
  of its state chambers (since when a unit is flagged, what changed since its previous cycle);
* ``SITE``: what every page shows (parties, settings, the measures' documentation, the set of
  states, chambers and cycles, the code and templates that render them);
* ``EVERYTHING``: the pages that summarise the whole store (home, watch list, states, cycles,
  methods, downloads, feed): rendered at every build.

:func:`page_inputs` gives each page's keys; :func:`touched_pages` the pages a set of changed units
touches (a new page kind adds its entry to ``page_inputs`` and is then rebuilt when, and only when,
its inputs change). :func:`digests` hashes the stored rows behind every key, so a build renders a
page only when the digest of its inputs differs from the one recorded with the page last time
(:mod:`monitor.publish.build`). A change to one unit usually touches more than its own state's
page: its (cycle, chamber) national pool is redrawn, which moves every unit's expected seats and
nulls in that group, and those show on their states' pages.
"""

from __future__ import annotations

import hashlib
from collections.abc import Iterable
from pathlib import Path

import numpy as np
import pandas as pd

from monitor.publish import paths as P
from monitor.staggered import base_chamber, is_whole

SITE = ("site",)
EVERYTHING = ("everything",)
#: the pages rendered at every build: they summarise the whole store
SUMMARY_PAGES = (P.HOME, P.WATCH, P.STATES, P.CYCLES, P.METHODS, P.DOWNLOADS, P.FEED)
UNIT_KEYS = ["cycle", "state", "chamber"]
#: columns that say when a row was computed, not what it holds
STAMPS = ("computed_at",)
_CODE = Path(__file__).resolve().parent
_SITE_FILES = Path(__file__).resolve().parents[2] / "site"


def page_inputs(data) -> dict[str, tuple]:
    """path -> the input keys of every state and cycle page of ``data`` (a SiteData); the summary
    pages (:data:`SUMMARY_PAGES`) read :data:`EVERYTHING`."""
    units = data.units
    out: dict[str, tuple] = {page: (EVERYTHING,) for page in SUMMARY_PAGES}
    by_pair: dict[tuple, list] = {}
    by_cycle: dict[int, list] = {}
    for c, s, ch in zip(units["cycle"].astype(int), units["state"], units["chamber"]):
        by_pair.setdefault((s, ch), []).append(("unit", c, s, ch))
        by_cycle.setdefault(c, []).append(("unit", c, s, ch))
    cycles = data.cycles
    for c, s, ch in whole_units(data):
        # a staggered chamber's whole-chamber units are shown as their chamber's (standing, watch)
        by_pair[(s, base_chamber(ch))].extend([("unit", c, s, ch), ("pair", s, ch)])
        by_cycle.setdefault(c, []).append(("unit", c, s, ch))
    for s, ch in data.pairs():
        out[P.state_page(data.state_slugs[s], data.chamber_slugs[ch])] = (SITE, ("pair", s, ch),
                                                                         *sorted(set(by_pair[(s, ch)])))
    chamber_cycles: dict[str, list[int]] = {}
    for c in cycles:
        for ch in sorted({ch for *_, ch in by_cycle[c]}):
            chamber_cycles.setdefault(ch, []).append(c)
    for i, c in enumerate(cycles):
        # the national table compares with each chamber's cycle before (and the cycle before overall)
        before = {("cycle", p) for p in cycles[:i][-1:]}
        before |= {("cycle", cs[cs.index(c) - 1]) for cs in chamber_cycles.values() if c in cs and cs.index(c) > 0}
        # the links to the previous and next cycle pages: the key itself holds them
        links = (("links", cycles[i - 1] if i else None, cycles[i + 1] if i + 1 < len(cycles) else None),)
        # each flagged unit's "since when" and "what changed" read the earlier cycles of its state chamber
        earlier = sorted({k for _, _, s, ch in by_cycle[c] for k in by_pair.get((s, ch), ())
                          if k[0] == "unit" and k[1] < c})
        out[P.cycle_page(c)] = (SITE, ("cycle", c), *sorted(before), *links, *sorted(by_cycle[c]), *earlier)
    return out


def whole_units(data) -> list[tuple[int, str, str]]:
    """(cycle, state, chamber) of every whole-chamber unit of a staggered chamber
    (:mod:`monitor.staggered`) with stored measures: they hold no results of their own, so they
    are not among ``data.units``, yet their pool rows, tails and watch rows show on their chamber's
    pages."""
    m = data.measures
    if m.empty:
        return []
    rows = m.loc[m["chamber"].isin([c for c in m["chamber"].unique() if is_whole(c)]), UNIT_KEYS].drop_duplicates()
    return sorted(zip(rows["cycle"].astype(int), rows["state"], rows["chamber"]))


def touched_pages(inputs: dict[str, tuple], changed: Iterable[tuple]) -> set[str]:
    """The pages whose inputs include one of the ``changed`` keys (units ``("unit", cycle, state,
    chamber)``, ``("pair", state, chamber)``, ``("cycle", cycle)`` or :data:`SITE`), and the
    summary pages, which every change touches."""
    changed = set(changed)
    return {page for page, keys in inputs.items() if EVERYTHING in keys or changed.intersection(keys)}


def row_hashes(frame: pd.DataFrame, columns: list[str]) -> np.ndarray:
    """A hash of each row's values in ``columns`` (those ``frame`` has). Each column is hashed in
    its own type (numbers by value, without writing them as text); in a column of Python objects,
    a missing value hashes alike whether it is None or NaN."""
    cols = [c for c in columns if c in frame.columns]
    if frame.empty or not cols:
        return np.zeros(len(frame), np.uint64)
    sub = frame[cols]
    loose = [c for c in cols if sub[c].dtype == object]
    if loose:
        sub = sub.copy()
        for c in loose:
            sub[c] = sub[c].where(sub[c].notna(), None)
    return pd.util.hash_pandas_object(sub, index=False).to_numpy(np.uint64)


def _fold(frame: pd.DataFrame, keys: list[str], tag: str, into: dict) -> None:
    """Add a digest of ``frame``'s rows (every column, and their order within each group) grouped
    by ``keys`` to ``into``: ``"k1|k2"`` -> parts."""
    if frame is None or frame.empty:
        return
    # when a row was (re)computed is not what a page shows: a chamber's coverage is rewritten
    # whole when one of its units changes, and its other rows must not count as changed
    h = row_hashes(frame, [c for c in frame.columns if c not in STAMPS])
    codes = frame[keys[0]].astype(str).to_numpy(object)
    for k in keys[1:]:
        codes = codes + "|" + frame[k].astype(str).to_numpy(object)
    order = np.argsort(codes, kind="stable")
    sc, hv = codes[order], h[order]
    starts = np.r_[0, np.flatnonzero(sc[1:] != sc[:-1]) + 1]
    position = np.arange(sc.size) - np.repeat(starts, np.diff(np.r_[starts, sc.size]))
    mixed = hv * np.uint64(1_000_003) + position.astype(np.uint64)  # a row's place in its group matters
    for code, value in zip(sc[starts], np.bitwise_xor.reduceat(mixed, starts)):
        into.setdefault(code, []).append(f"{tag}:{int(value)}")


def digests(data, keys: pd.DataFrame) -> dict[tuple, str]:
    """key -> digest of the stored rows behind it, for every unit, pair and cycle of ``data`` and
    :data:`SITE`. ``keys``: the current units' content and reduction (``store.reductions.current_keys``),
    which stand for their contests and vote lines (never read here)."""
    units = data.units.merge(keys[["unit_id", "content_sha256", "policy", "method_version"]], on="unit_id", how="left")
    loads = data.loads[["id", "file_name", "sha256", "loaded_at", "source"]].rename(columns={"id": "load_id"}) \
        if "source" in data.loads else data.loads.rename(columns={"id": "load_id"})
    units = units.merge(loads, on="load_id", how="left")
    per_unit: dict[str, list] = {}
    for tag, frame in (("units", units), ("measures", data.measures), ("pool", data.pool), ("tails", data.tails),
                       ("coverage", data.coverage), ("gaps", data.coverage_gaps), ("plan", data.unit_plans),
                       ("seats_votes", data.seats_votes)):
        _fold(frame, UNIT_KEYS, tag, per_unit)
    per_pair: dict[str, list] = {}
    for tag, frame in (("plans", data.plans), ("watch", data.watch), ("curves", data.curves),
                       ("points", data.curve_points), ("corrections", data.corrections.astype(str)),
                       ("events", data.events[data.events["state"].notna()] if len(data.events) else data.events)):
        _fold(frame, ["state", "chamber"], tag, per_pair)
    per_cycle: dict[str, list] = {}
    events = data.events[data.events["cycle"].notna()].assign(cycle=lambda e: e["cycle"].astype(int)) \
        if len(data.events) else data.events
    for tag, frame in (("national", data.national), ("histogram", data.histogram), ("drawers", data.drawers),
                       ("events", events)):
        _fold(frame, ["cycle"], tag, per_cycle)
    out: dict[tuple, str] = {SITE: site_digest(data)}
    for c, s, ch in [*zip(data.units["cycle"].astype(int), data.units["state"], data.units["chamber"]),
                     *whole_units(data)]:
        out[("unit", c, s, ch)] = _sha(per_unit.get(f"{c}|{s}|{ch}", []))
        out[("pair", s, ch)] = _sha(per_pair.get(f"{s}|{ch}", []))
        out[("cycle", c)] = _sha(per_cycle.get(str(c), []))
    return out


def site_digest(data) -> str:
    """What every page shows: parties, policy, settings, the measures' documentation and
    thresholds, names and slugs of states and chambers, the chambers, the measures present, and
    the code and templates that render the pages. Not the cycles: a new cycle must not change
    every page (a cycle page's links to its neighbours are among its own inputs, :func:`page_inputs`)."""
    parts = [repr(sorted((k, vars(v)) for k, v in data.parties.items())), data.policy, repr(data.settings),
             repr([(m.name, m.label, m.formula, m.source, m.plain) for m in data.measure_docs]),
             repr(data.thresholds), repr(sorted(data.state_names.items())), repr(sorted(data.state_slugs.items())),
             repr(sorted(data.chamber_slugs.items())), repr(data.chambers),
             repr(sorted(set(data.measures["measure"].unique().tolist()))), repr(data.min_coverage), data.base_url,
             repr(sorted(data.pairs()))]
    h = hashlib.sha256("\n".join(parts).encode())
    for root in (_CODE, _SITE_FILES):
        for path in sorted(root.rglob("*")):
            if path.is_file() and path.suffix in (".py", ".html", ".css", ".js", ".svg"):
                h.update(path.name.encode())
                h.update(path.read_bytes())
    return h.hexdigest()


def _sha(parts: list[str]) -> str:
    return hashlib.sha256("\n".join(sorted(parts)).encode()).hexdigest()


def page_digests(inputs: dict[str, tuple], keyed: dict[tuple, str]) -> dict[str, str]:
    """path -> digest of its inputs (None for the summary pages, which are always rendered)."""
    out = {}
    for page, keys in inputs.items():
        if EVERYTHING in keys:
            continue
        out[page] = hashlib.sha256("|".join(f"{k}={keyed.get(k, '')}" for k in keys).encode()).hexdigest()
    return out


def deliveries(data, keys: pd.DataFrame) -> dict[tuple, str]:
    """(cycle, state, chamber) -> a digest of what a state page's table of that unit's district
    results shows: the unit as delivered (its content, reduction, status and load) and what every
    page shows (:func:`site_digest`, the templates and code included)."""
    site = site_digest(data)
    units = data.units.merge(keys[["unit_id", "content_sha256", "policy", "method_version"]], on="unit_id", how="left")
    return {(int(r.cycle), r.state, r.chamber): hashlib.sha256(f"{site}|{'|'.join(map(str, r))}".encode()).hexdigest()[:32]
            for r in units.itertuples(index=False)}
