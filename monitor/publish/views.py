"""What each page shows: plain dicts of strings, tables and charts, built from a :class:`SiteData`.

The templates only lay these out. Every value is plain text (the templates escape it); numbers are
formatted here with :mod:`monitor.publish.formats`.
"""

from __future__ import annotations

from collections import namedtuple

import numpy as np
import pandas as pd

from monitor.inputs import UNIT_KEYS
from monitor.measures import registry
from monitor.publish import charts as C
from monitor.publish.compact import events_summary, measure_table
from monitor.publish import formats as F
from monitor.publish import paths as P
from monitor.publish.collect import SiteData, flag_changes, parse_time
from monitor.publish.standing import Standing, flagged_sentence
from monitor.publish.state_view import StatePage
from monitor.publish.words import NOT_RECORDED, Words
from monitor.staggered import base_chamber, whole_code

#: Measures in the store whose flag lives in ``tails`` under another name.
TAIL_OF = {m.name: m.tail for m in registry.measures() if m.tail and m.tail != m.name}
#: Tail names whose null band is in the measure's own units (so it can be drawn behind it).
NULL_BANDS = {m.flag.name for m in registry.measures() if m.null_band}

#: The excess-by-drawer groups of :mod:`monitor.national` that are not a ``drawn_by`` code.
DRAWER_GROUPS = {"inferred": NOT_RECORDED, "no_plan": "no plan era"}

#: Short names of the measures the flags judge, for dense tables.
SHORT = {m.flag.name: m.flag.short for m in registry.flagged()}

SHARE_MEASURES = {m.name for m in registry.measures() if m.kind == "share"}
COUNT_MEASURES = {m.name for m in registry.measures() if m.kind == "count"}


class Views(StatePage, Standing):
    """Page contexts for one :class:`SiteData`."""

    def __init__(self, data: SiteData):
        self.d = data
        self.words = Words(data.parties)
        self.style = C.Style(data.parties["a"], data.parties["b"])
        self._splits: dict = {}
        self._mf = self._headline_frame()

    def by(self, name: str, keys: tuple[str, ...], key) -> pd.DataFrame:
        """Rows of frame ``name`` (a SiteData frame, or ``_mf``) whose ``keys`` equal ``key``;
        each frame is split once, so a page costs a lookup, not a scan."""
        grouped, spans = self._split(name, keys)
        start, end = _span(spans, key)
        return grouped.iloc[start:end]

    def _split(self, name: str, keys: tuple[str, ...]) -> tuple[pd.DataFrame, dict]:
        """Frame ``name``'s rows grouped by ``keys`` and each group's (start, end), made once."""
        if (name, keys) not in self._splits:
            frame = getattr(self, name) if name.startswith("_") else getattr(self.d, name)
            # the rows grouped (each group's rows in the frame's order, as a groupby gives them;
            # rows with a missing key belong to no group), so that a group is one slice
            positions: dict[tuple, list[int]] = {}
            missing = frame[list(keys)].isna().any(axis=1).tolist() if len(frame) else []
            for i, (k, skip) in enumerate(zip(zip(*(frame[c].tolist() for c in keys)), missing)):
                if not skip:
                    positions.setdefault(k, []).append(i)
            ends = np.cumsum([len(p) for p in positions.values()]).tolist()
            spans = {k: (end - len(p), end) for (k, p), end in zip(positions.items(), ends)}
            grouped = frame.take([i for p in positions.values() for i in p])
            self._splits[(name, keys)] = (grouped, spans)
        return self._splits[(name, keys)]

    def lists(self, name: str, keys: tuple[str, ...], key, columns: tuple[str, ...]) -> dict[str, list]:
        """The ``columns`` of the rows of :meth:`by` as one list each (each column of a frame turned
        into a list once per build): what a page reads many values of, without slicing a frame."""
        grouped, spans = self._split(name, keys)
        whole = self._splits.setdefault((name, keys, "lists"), {})
        start, end = _span(spans, key)
        for c in columns:
            if c not in whole:
                whole[c] = grouped[c].tolist()
        return {c: whole[c][start:end] for c in columns}

    def records(self, name: str, keys: tuple[str, ...], key) -> list:
        """The rows of :meth:`by` as plain named tuples (as ``itertuples`` gives them, without the
        index), each frame turned into tuples once per build, so that a page reads lists, not frames."""
        grouped, spans = self._split(name, keys)
        if (name, keys, "records") not in self._splits:
            columns = list(grouped.columns)
            row = namedtuple("Row", columns, rename=True)
            self._splits[(name, keys, "records")] = [row._make(r) for r in zip(*(grouped[c].tolist() for c in columns))]
        start, end = _span(spans, key)
        return self._splits[(name, keys, "records")][start:end]

    def _headline_frame(self) -> pd.DataFrame:
        """The headline measures with their tails judgement (flag, direction, null band)."""
        d = self.d
        m = d.measures[d.measures["measure"].isin(d.headline())][[*UNIT_KEYS, "measure", "value", "low", "high",
                                                                    "p_value", "reason"]]
        m = m.assign(tail=m["measure"].map(lambda x: TAIL_OF.get(x, x)))
        t = d.tails[[*UNIT_KEYS, "measure", "flagged", "direction", "null_low", "null_high", "null_percentile"]]
        out = m.merge(t.rename(columns={"measure": "tail"}), on=[*UNIT_KEYS, "tail"], how="left")
        no_band = (out["measure"] != out["tail"]) | ~out["tail"].isin(NULL_BANDS)
        for col in ("value", "low", "high", "null_low", "null_high"):
            out[col] = pd.to_numeric(out[col], errors="coerce").astype(float)
        out.loc[no_band, ["null_low", "null_high"]] = np.nan
        out["flagged"] = out["flagged"].fillna(0).astype(int)
        out["state_label"] = out["state"].map(self.state_label)
        districts = d.measures[d.measures["measure"] == "districts"][[*UNIT_KEYS, "value"]]
        out = out.merge(districts.rename(columns={"value": "districts"}), on=UNIT_KEYS, how="left")
        out["districts"] = pd.to_numeric(out["districts"], errors="coerce").astype(float)
        return out.sort_values([*UNIT_KEYS, "measure"]).reset_index(drop=True)

    # --- names and links ------------------------------------------------------------------
    def party(self, code) -> str:
        return self.style.party(code) if code in ("a", "b") else (F.text(code) or F.DASH)

    def drawer(self, drawn_by, inferred=False) -> str:
        return self.words.drawer(drawn_by, inferred)

    def state_path(self, state: str, chamber: str) -> str:
        return P.state_page(self.d.state_slugs[state], self.d.chamber_slugs[chamber])

    def state_label(self, state: str) -> str:
        name = self.d.state_name(state)
        return name if name == state else f"{name} ({state})"

    def measure_value(self, measure: str, value) -> str:
        if measure in SHARE_MEASURES:
            return F.share(value)
        if measure in COUNT_MEASURES:
            return F.number(value, 1)
        return C.fmt_measure(measure, value)

    # --- provenance -------------------------------------------------------------------------
    def provenance(self, load_ids=None) -> dict:
        """The loads behind a page (all loads when ``load_ids`` is None): what the footer shows."""
        if not hasattr(self, "_loaded_cache"):  # every loaded file in words, once per build
            loads = self.d.loads[self.d.loads["outcome"] == "loaded"]
            rows = [{"id": int(i), "file_name": name, "source": F.text(source), "loaded_at": at,
                     "sha256": sha, "short": sha[:12]}
                    for i, name, source, at, sha in zip(*(loads[c].tolist() for c in
                                                          ("id", "file_name", "source", "loaded_at", "sha256")))]
            self._loaded_cache = (rows, {r["id"]: k for k, r in enumerate(rows)},
                                  [parse_time(r["loaded_at"]) for r in rows])
        loaded, at, stamps = self._loaded_cache
        keep = range(len(loaded)) if load_ids is None else sorted({at[i] for i in {int(i) for i in load_ids} if i in at})
        rows = [dict(loaded[k]) for k in keep]
        times = [t for t in (stamps[k] for k in keep) if t is not None]
        return {"loads": rows, "count": len(rows), "latest": rows[-1] if rows else None,
                "first_day": F.day(min(times, default=None)), "last_day": F.day(max(times, default=None)),
                "as_of": F.stamp(max(times, default=None))}

    # --- shared pieces ------------------------------------------------------------------------
    def _measure_frame(self, measure: str, cycle: int, chamber: str) -> pd.DataFrame:
        return self.by("_mf", ("cycle", "chamber", "measure"), (cycle, chamber, measure))

    def _watch_rows(self, watch: pd.DataFrame, root: str) -> list[dict]:
        """Watch-list rows in words: the party the measures agree on, and the seats at stake by the
        one sign rule (a row whose seats point the other way says so)."""
        rows = []
        unofficial, incomplete = self._unofficial_units, self._incomplete_units
        w = self.words
        for r in (watch.itertuples() if isinstance(watch, pd.DataFrame) else watch):
            cycles = str(r.cycles or "").split()
            stake = w.stake(r.seats_at_stake)
            rows.append({
                "state": self.state_label(r.state), "state_code": r.state, "chamber": self.d.chamber_short(r.chamber),
                "href": (root + self.state_path(r.state, base_chamber(r.chamber))
                         if (r.state, base_chamber(r.chamber)) in self._pairs else None),
                "plan_id": r.plan_id, "drawn_by": self.drawer(r.drawn_by, r.inferred), "inferred": bool(r.inferred),
                "favours": w.party(r.favours), "favours_code": r.favours,
                "stake": stake, "stake_sort": _num(abs(float(r.seats_at_stake)) if not F.missing(r.seats_at_stake) else None),
                "disagree": stake.code not in (None, r.favours),
                "concurring": F.count(r.concurring), "concurring_sort": _num(r.concurring),
                "measures": [w.measure(m) for m in F.text(r.measures).split()],
                "cycles": [{"cycle": c, "unofficial": (int(c), r.state, r.chamber) in unofficial,
                            "incomplete": (int(c), r.state, r.chamber) in incomplete} for c in cycles],
                "cycles_count": len(cycles),
                "unofficial_cycles": [c for c in cycles if (int(c), r.state, r.chamber) in unofficial],
                "since": "" if F.missing(r.since) else str(int(r.since)),
            })
        return rows

    @property
    def _unofficial_units(self) -> set:
        """(cycle, state, chamber) of every current unit whose results are unofficial."""
        if not hasattr(self, "_unofficial_cache"):
            u = self.d.units[self.d.units["certification"] == "unofficial"]
            self._unofficial_cache = {(int(c), s, ch) for c, s, ch in zip(u["cycle"], u["state"], u["chamber"])}
        return self._unofficial_cache

    @property
    def _incomplete_units(self) -> set:
        """(cycle, state, chamber) of every unit with districts missing or left out of its measures."""
        if not hasattr(self, "_incomplete_cache"):
            c = self.d.coverage
            c = c[c["incomplete"].astype(int) == 1] if len(c) else c
            self._incomplete_cache = {(int(x), s, ch) for x, s, ch in zip(c["cycle"], c["state"], c["chamber"])}
        return self._incomplete_cache

    @property
    def _pairs(self) -> set:
        if not hasattr(self, "_pairs_cache"):
            self._pairs_cache = set(self.d.pairs())
        return self._pairs_cache

    def _events(self, events: list, root: str) -> list[dict]:
        """Flag events (rows of :meth:`records`) in words, newest first."""
        rows, stamps, places = [], {}, {}  # a page's events share a few times and one place: each said once
        for e in sorted(events, key=lambda e: -e.id):
            if e.at not in stamps:
                stamps[e.at] = F.stamp(parse_time(e.at))
            place = (e.state, e.chamber)
            if place not in places:
                places[place] = (self.state_label(e.state), self.d.chamber_short(e.chamber),
                                 root + self.state_path(*place) if place in self._pairs else None)
            state, chamber, href = places[place]
            rows.append({
                "id": int(e.id), "at": stamps[e.at], "scope": e.scope, "event": e.event,
                "cycle": "" if F.missing(e.cycle) else str(int(e.cycle)),
                "state": state, "chamber": chamber, "href": href,
                "plan_id": F.text(e.plan_id), "measure": self.d.label(e.measure) if F.text(e.measure) else "",
                "favours": self.party(e.direction), "why": self.words.why(e.why),
                "load": "" if F.missing(e.load_id) else f"#{int(e.load_id)}",
            })
        return rows

    def _unofficial(self, units: pd.DataFrame, root: str) -> list[dict]:
        u = units[units["certification"] == "unofficial"]
        return [{"cycle": int(r.cycle), "state": self.state_label(r.state), "chamber": self.d.chamber_label(r.chamber),
                 "href": root + self.state_path(r.state, r.chamber)} for r in u.itertuples()]

    # --- pages --------------------------------------------------------------------------------
    def home(self, root: str) -> dict:
        """The latest cycle first: per chamber, the units flagged in it (direction, seats at stake,
        why, since when, what changed) and those no longer flagged; then the plans on watch that
        are in force; then the national picture."""
        d = self.d
        in_force, past = self.watch_split()
        ctx = {"empty": d.empty, "latest": d.latest_cycle, "latest_by_chamber": [], "sections": [], "tails": [],
               "title_cycles": "",
               "provenance": self.provenance(), "watch": self._watch_rows(in_force, root),
               "watch_past": len(past), "watch_total": len(d.watch), "unofficial": []}
        if d.empty:
            return ctx
        latest = d.chamber_latest()
        ctx["title_cycles"] = " and ".join(str(c) for c in sorted(set(latest.values())))
        units = d.units[d.units["cycle"] == d.units["chamber"].map(latest)]
        for chamber in d.chambers:
            part = units[units["chamber"] == chamber]
            listed = self._unofficial(part, root)
            if listed:
                ctx["unofficial"].append({"chamber": d.chamber_label(chamber), "cycle": latest[chamber],
                                          "href": root + P.cycle_page(latest[chamber]),
                                          "all": len(listed) == len(part), "units": listed})
        for chamber in d.chambers:
            cycle = latest[chamber]
            label = d.chamber_label(chamber)
            ctx["latest_by_chamber"].append({"chamber": label, "cycle": cycle, "href": root + P.cycle_page(cycle)})
            ctx["tails"].append(self._tails_section(cycle, chamber, root))
            slug = d.chamber_slugs[chamber]
            section = {"chamber": label, "cycle": cycle, "href": root + P.cycle_page(cycle),
                       "summary": self._national_rows(chamber, d.chamber_cycles(chamber)[-2:]),
                       "histogram": self._histogram(f"hist-{slug}", cycle, chamber), "charts": []}
            judged, judged_label = self._judged(cycle, chamber)
            frames, measures = [], []
            for measure in d.headline():
                frame = self._measure_frame(measure, cycle=cycle, chamber=judged)
                if frame["value"].notna().sum() == 0:
                    continue
                frames.append(frame)
                measures.append(measure)
                section["charts"].append(C.distribution(f"dist-{slug}-{measure}", frame, measure, d.label(measure),
                                                        self.style, cycle, judged_label, self._min_districts))
            section["table"] = self._states_table(f"measures-{slug}", f"{judged_label}, {cycle}", section["charts"],
                                                   frames, measures)
            ctx["sections"].append(section)
        return ctx

    def _tails_section(self, cycle: int, chamber: str, root: str) -> dict:
        """One chamber's flagged units of one cycle, and those flagged only in their previous cycle."""
        d = self.d
        rows = self.flagged_in(cycle, chamber, root)
        units = self.by("units", ("cycle",), cycle)
        n = int((units["chamber"] == chamber).sum())
        return {"chamber": d.chamber_label(chamber), "cycle": cycle, "href": root + P.cycle_page(cycle),
                "rows": rows, "states": n, "summary": flagged_sentence(rows, self.words),
                "cleared": self.cleared_in(cycle, chamber, root)}

    def _judged(self, cycle: int, chamber: str) -> tuple[str, str]:
        """The chamber code whose units a cycle's charts of judged measures show, and its label: a
        staggered chamber's whole-chamber units (its per-cycle units hold one class of the seats
        and are never flagged), else the chamber's own."""
        whole = whole_code(chamber)
        if len(self.by("pool", ("cycle", "chamber"), (cycle, whole))):
            return whole, f"{self.d.chamber_label(chamber)}, whole chambers (latest election of every seat)"
        return chamber, self.d.chamber_label(chamber)

    @property
    def _min_districts(self) -> int:
        """``flags.min_districts``: units with fewer districts are never flagged."""
        return int(next((s["value"] for s in self.d.settings if s["name"] == "flags.min_districts"), 6))

    def _histogram(self, chart_id: str, cycle: int, chamber: str):
        """The national histogram of one cycle and chamber (None without districts in the measures),
        its description completed with the districts it leaves out."""
        hist = self.by("histogram", ("cycle", "chamber"), (cycle, chamber))
        if hist.empty:
            return None
        chart = C.histogram(chart_id, hist, self.style, cycle, self.d.chamber_label(chamber))
        n = self.by("national", ("cycle", "chamber"), (cycle, chamber))
        if len(n):
            r = n.iloc[0]
            left_out = int(r["districts"]) - int(r["measured_districts"])
            if left_out:
                chart.description += (f" Not shown: {F.count(left_out)} of the {F.count(r['districts'])} districts with "
                                      "results, which do not enter the measures (multi-member, won by neither major "
                                      "party, or left out by the uncontested policy).")
        return chart

    def _national_rows(self, chamber: str, cycles) -> list[dict]:
        """Rows of the national summary table (:func:`monitor.national.national_summary`)."""
        rows = []
        for cycle in cycles:
            n = self.by("national", ("cycle", "chamber"), (cycle, chamber))
            if n.empty:
                continue
            r = n.iloc[0]
            partial = int(r["measured_units"]) < int(r["states"])
            rows.append({
                "cycle": int(cycle), "href": P.cycle_page(int(cycle)), "states": F.count(r["states"]),
                "districts": F.count(r["districts"]), "measured": F.count(r["measured_districts"]),
                "seats_a": F.number(r["seats_a"], 1), "seats_b": F.number(r["seats_b"], 1),
                "seats_other": F.number(r["seats_other"], 1) if r["seats_other"] else "",
                "votes_a": F.count(r["votes_a"]), "votes_b": F.count(r["votes_b"]),
                "vote_share": F.share(r["vote_share"]), "vote_share_as_cast": F.share(r["vote_share_as_cast"]),
                "uncontested": F.count(r["uncontested"]), "competitive": F.count(r["competitive"]),
                "partial": (f"over the {F.count(r['measured_units'])} of {F.count(r['states'])} states with stored "
                            "measures") if partial else "",
                "flagged_units": F.count(r["flagged_units"]),
                "excess": self.words.stake(r["excess_seats"]) if int(r["pool_units"]) else None,
            })
        return rows

    def watch(self, root: str) -> dict:
        in_force, past = self.watch_split()
        return {"rows": self._watch_rows(in_force, root), "past": self._watch_rows(past, root),
                "provenance": self.provenance(), "empty": self.d.empty}

    def states(self, root: str) -> dict:
        """Every state and chamber: its plan in force, whether it is flagged in its latest cycle,
        whether the plan in force is on watch, and (apart) past plans that were."""
        d = self.d
        rows = []
        in_force, past = self.watch_split()
        force = {(r.state, r.chamber): r for r in in_force.itertuples()}
        earlier: dict[tuple, list[str]] = {}
        for r in past.itertuples():
            earlier.setdefault((r.state, r.chamber), []).append(
                f"{r.plan_id} ({self.words.party(r.favours)}, cycles {', '.join(str(r.cycles).split())})")
        for state, chamber in d.pairs():
            u = self.by("units", ("state", "chamber"), (state, chamber))
            plan = self.by("unit_plans", ("state", "chamber"), (state, chamber)).tail(1)
            p = plan.iloc[0] if len(plan) else None
            last = int(u["cycle"].max())
            standing = self.standing(last, state, chamber)
            watch = force.get((state, chamber))
            rows.append({"state": self.state_label(state), "chamber": d.chamber_short(chamber),
                         "href": root + self.state_path(state, chamber),
                         "cycles": f"{int(u['cycle'].min())}{F.DASH}{last} ({len(u)})",
                         "plan": (p["plan_id"] if p is not None and isinstance(p["plan_id"], str) else F.DASH),
                         "drawn_by": self.drawer(p["drawn_by"], p["inferred"]) if p is not None else F.DASH,
                         "inferred": bool(p is not None and p["inferred"]),
                         "latest": last, "standing": standing,
                         "watch": self.words.stake(watch.seats_at_stake) if watch is not None else None,
                         "watch_favours": self.words.party(watch.favours) if watch is not None else "",
                         "past": earlier.get((state, chamber), [])})
        rows.sort(key=lambda r: (r["state"].casefold(), r["chamber"]))  # by name, as a reader looks one up
        return {"rows": rows, "provenance": self.provenance(), "empty": d.empty,
                "in_force": len(in_force), "past_plans": len(past)}

    def cycles(self, root: str) -> dict:
        d = self.d
        rows = []
        for cycle in reversed(d.cycles):
            u = self.by("units", ("cycle",), cycle)
            t = d.tails[(d.tails["cycle"] == cycle) & (d.tails["flagged"].fillna(0).astype(int) == 1)]
            rows.append({"cycle": cycle, "href": root + P.cycle_page(cycle),
                         "chambers": ", ".join(d.chamber_short(c) for c in d.chambers if c in set(u["chamber"])),
                         "units": len(u), "unofficial": int((u["certification"] == "unofficial").sum()),
                         "flagged": len(t[UNIT_KEYS].drop_duplicates())})
        return {"rows": rows, "provenance": self.provenance(), "empty": d.empty}

    def cycle(self, cycle: int, root: str) -> dict:
        d = self.d
        sections = []
        units = self.by("units", ("cycle",), cycle)
        for chamber in d.chambers:
            if chamber not in set(units["chamber"]):
                continue
            label = d.chamber_label(chamber)
            slug = d.chamber_slugs[chamber]
            charts, frames, measures = [], [], []
            judged, judged_label = self._judged(cycle, chamber)
            for measure in d.headline():
                frame = self._measure_frame(measure, cycle=cycle, chamber=judged)
                if frame["value"].notna().sum() == 0:
                    continue
                frames.append(frame)
                measures.append(measure)
                charts.append(C.ranking(f"rank-{slug}-{measure}", frame, measure, d.label(measure), self.style, cycle,
                                        judged_label, self._min_districts))
            table = self._states_table(f"measures-{slug}", f"{judged_label}, {cycle}", charts, frames, measures)
            pool = self.by("pool", ("cycle", "chamber"), (cycle, judged)).copy()
            pool_chart = drawer_chart = None
            if pool["expected_seats"].notna().any():
                pool["state_label"] = pool["state"].map(self.state_label)
                for col in ("seats_a", "expected_seats", "low", "high", "excess_seats"):
                    pool[col] = pd.to_numeric(pool[col], errors="coerce").astype(float)
                pool_chart = C.pool_seats(f"pool-{slug}", pool, self.style, cycle, judged_label)
            by = self.by("drawers", ("cycle", "chamber"), (cycle, chamber))
            if not by.empty:
                by = by.assign(drawer=[self.drawer_group(k) for k in by["drawer"]])
                drawer_chart = C.excess_by_drawer(f"drawer-{slug}", by, self.style, cycle, label)
            earlier = [c for c in d.chamber_cycles(chamber) if c < cycle]
            states = [{"state": self.state_label(s), "href": root + self.state_path(s, chamber),
                       "incomplete": (int(cycle), s, chamber) in self._incomplete_units}
                      for s in sorted(units.loc[units["chamber"] == chamber, "state"])]
            sections.append({"chamber": label, "tails": self._tails_section(cycle, chamber, root),
                             "charts": charts, "table": table, "pool": pool_chart, "drawer": drawer_chart,
                             "states": states, "summary": self._national_rows(chamber, earlier[-1:] + [cycle]),
                             "histogram": self._histogram(f"hist-{slug}", cycle, chamber)})
        events = self.by("events", ("cycle",), cycle)
        return {"cycle": cycle, "sections": sections, "unofficial": self._unofficial(units, root),
                "events": events_summary(events, d.chamber_short), "provenance": self.provenance(units["load_id"]),
                "previous": max((c for c in d.cycles if c < cycle), default=None),
                "next": min((c for c in d.cycles if c > cycle), default=None)}

    def _states_table(self, table_id: str, where: str, charts, frames, measures) -> dict | None:
        """One table of every state's value of each charted measure (the charts point to it)."""
        if not charts:
            return None
        labels = [self.d.label(m) for m in measures]
        return measure_table(table_id, f"Every state, every measure: {where}", charts, frames, measures, labels,
                             self.party, self._min_districts)

    def drawer_group(self, key: str) -> str:
        """The label of an excess-by-drawer group (:data:`monitor.national.DRAWER_KEYS`)."""
        return DRAWER_GROUPS.get(key) or self.drawer(key)

    def methods(self) -> dict:
        d = self.d
        w = self.words
        docs = [{"name": m.name, "label": d.label(m.name), "formula": m.formula, "sign": w.plain(m.sign),
                 "source": m.source, "signed": m.signed, "interval": m.interval is not None,
                 "p_value": w.plain(m.p_value) if m.p_value else m.p_value, "plain": w.plain(m.plain)}
                for m in d.measure_docs]
        settings = [{"name": s["name"], "value": _setting(s["value"], s["name"]),
                     "default": _setting(s["default"], s["name"]),
                     "changed": s["value"] != s["default"], "help": w.plain(s["help"])} for s in d.settings]
        return {"docs": docs, "settings": settings, "policy": d.policy, "thresholds": d.thresholds,
                "labels": {m.name: d.label(m.name) for m in d.measure_docs}, "provenance": self.provenance()}


def _num(value) -> str:
    return "" if F.missing(value) else repr(float(value))


def _setting(value, name: str = "") -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, dict):  # the table options: chamber.STATE = count (coverage.expected), chamber = N or
        # chamber.STATE = N (staggered.classes)
        unit = " classes" if name == "staggered.classes" else " districts"

        def entries(chamber, states):
            if not isinstance(states, dict):
                return [f"{chamber} = {states}{unit}"]
            return [f"{chamber}.{state} = " + (", ".join(f"{k} {v}" for k, v in count.items())
                                                if isinstance(count, dict) else f"{count}{unit}")
                    for state, count in states.items()]
        return "; ".join(e for chamber, states in value.items() for e in entries(chamber, states)) or "none"
    return str(value)


def _span(spans: dict, key) -> tuple[int, int]:
    """Where the group ``key`` (a tuple, or one value) lies in a split frame; (0, 0) when absent."""
    return spans.get(key if isinstance(key, tuple) else (key,), (0, 0))

