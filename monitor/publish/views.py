"""What each page shows: plain dicts of strings, tables and charts, built from a :class:`SiteData`.

The templates only lay these out. Every value is plain text (the templates escape it); numbers are
formatted here with :mod:`monitor.publish.formats`.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from monitor.coverage import summary as coverage_summary
from monitor.inputs import UNIT_KEYS
from monitor.national import measured
from monitor.publish import charts as C
from monitor.publish import formats as F
from monitor.publish import paths as P
from monitor.publish.collect import SiteData, flag_changes, parse_time

#: Measures in the store whose flag lives in ``tails`` under another name.
TAIL_OF = {"lopsided_t": "lopsided", "efficiency_gap_seats": "efficiency_gap"}
#: Tail names whose null band is in the measure's own units (so it can be drawn behind it).
NULL_BANDS = {"efficiency_gap", "mean_median", "declination", "partisan_bias"}

DRAWERS = {"party_a": "party a", "party_b": "party b", "split": "split control", "commission": "a commission",
           "court": "a court", "other": "other"}
#: The excess-by-drawer groups of :mod:`monitor.national` that are not a ``drawn_by`` code.
DRAWER_GROUPS = {"inferred": "inferred era (who drew it not recorded)", "no_plan": "no plan era"}

#: Column labels of the seats-and-votes chart's table: which share each line is (the same shares
#: as the measures table and the seats-votes curve).
SEATS_VOTES_COLUMNS = {"vote share": "vote share (two-party, after the uncontested policy)",
                       "seat share": "seat share (districts in the measures)",
                       "expected seat share": "expected seat share at that vote share (national pool)"}

#: Short names of the measures the flags judge, for dense tables.
SHORT = {"efficiency_gap": "efficiency gap", "mean_median": "mean-median", "declination": "declination",
         "partisan_bias": "partisan bias", "seats": "seats vs national pool", "lopsided": "lopsided t-test"}

TABLE_MEASURES = ("vote_share", "seat_share", "seats_a", "districts", "uncontested", "competitive",
                  "efficiency_gap", "efficiency_gap_seats", "mean_median", "lopsided_t", "declination",
                  "partisan_bias", "symmetry_bias", "responsiveness", "seats_at_flipped_vote")
SHARE_MEASURES = {"vote_share", "seat_share"}
COUNT_MEASURES = {"seats_a", "seats_b", "districts", "uncontested", "competitive", "seats_at_flipped_vote"}


class Views:
    """Page contexts for one :class:`SiteData`."""

    def __init__(self, data: SiteData):
        self.d = data
        self.style = C.Style(data.parties["a"], data.parties["b"])
        self._splits: dict = {}
        self._mf = self._headline_frame()

    def by(self, name: str, keys: tuple[str, ...], key) -> pd.DataFrame:
        """Rows of frame ``name`` (a SiteData frame, or ``_mf``) whose ``keys`` equal ``key``;
        each frame is split once, so a page costs a lookup, not a scan."""
        if (name, keys) not in self._splits:
            frame = getattr(self, name) if name.startswith("_") else getattr(self.d, name)
            groups = {}
            if len(frame):
                for k, g in frame.groupby(list(keys), sort=False):
                    groups[k if isinstance(k, tuple) else (k,)] = g
            self._splits[(name, keys)] = (groups, frame.iloc[0:0])
        groups, empty = self._splits[(name, keys)]
        return groups.get(key if isinstance(key, tuple) else (key,), empty)

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
        out["state_label"] = out["state"].map(d.state_name)
        return out.sort_values([*UNIT_KEYS, "measure"]).reset_index(drop=True)

    # --- names and links ------------------------------------------------------------------
    def party(self, code) -> str:
        return self.style.party(code) if code in ("a", "b") else (F.text(code) or F.DASH)

    def drawer(self, drawn_by) -> str:
        if drawn_by is None or (isinstance(drawn_by, float) and np.isnan(drawn_by)):
            return "not recorded"
        if drawn_by == "party_a":
            return self.d.parties["a"].name
        if drawn_by == "party_b":
            return self.d.parties["b"].name
        return DRAWERS.get(drawn_by, str(drawn_by))

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
        loads = self.d.loads[self.d.loads["outcome"] == "loaded"]
        if load_ids is not None:
            loads = loads[loads["id"].isin({int(i) for i in load_ids})]
        rows = [{"id": int(r.id), "file_name": r.file_name, "loaded_at": r.loaded_at, "sha256": r.sha256,
                 "short": r.sha256[:12]} for r in loads.itertuples()]
        times = [t for t in (parse_time(r["loaded_at"]) for r in rows) if t is not None]
        return {"loads": rows, "count": len(rows), "latest": rows[-1] if rows else None,
                "first_day": F.day(min(times, default=None)), "last_day": F.day(max(times, default=None)),
                "as_of": F.stamp(max(times, default=None))}

    # --- shared pieces ------------------------------------------------------------------------
    def _measure_frame(self, measure: str, cycle=None, state=None, chamber=None) -> pd.DataFrame:
        if state is not None:
            return self.by("_mf", ("state", "chamber", "measure"), (state, chamber, measure))
        return self.by("_mf", ("cycle", "chamber", "measure"), (cycle, chamber, measure))

    def _watch_rows(self, watch: pd.DataFrame, root: str) -> list[dict]:
        rows = []
        unofficial, incomplete = self._unofficial_units, self._incomplete_units
        for r in watch.itertuples():
            severity, stake = _severity_and_stake(r.severity, r.seats_at_stake)
            cycles = str(r.cycles or "").split()
            rows.append({
                "state": self.state_label(r.state), "state_code": r.state, "chamber": self.d.chamber_short(r.chamber),
                "href": root + self.state_path(r.state, r.chamber) if (r.state, r.chamber) in self._pairs else None,
                "plan_id": r.plan_id, "drawn_by": self.drawer(r.drawn_by), "inferred": bool(r.inferred),
                "favours": self.party(r.favours), "favours_code": r.favours,
                "severity": severity, "severity_sort": _num(r.severity),
                "seats_at_stake": stake, "stake_sort": _num(r.seats_at_stake),
                "concurring": F.count(r.concurring), "concurring_sort": _num(r.concurring),
                "measures": [SHORT.get(m, m.replace("_", " ")) for m in F.text(r.measures).split()],
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

    def _events(self, events: pd.DataFrame, root: str) -> list[dict]:
        rows = []
        for e in events.sort_values("id", ascending=False).itertuples():
            rows.append({
                "id": int(e.id), "at": F.stamp(parse_time(e.at)), "scope": e.scope, "event": e.event,
                "cycle": "" if F.missing(e.cycle) else str(int(e.cycle)),
                "state": self.state_label(e.state), "chamber": self.d.chamber_short(e.chamber),
                "href": root + self.state_path(e.state, e.chamber) if (e.state, e.chamber) in self._pairs else None,
                "plan_id": F.text(e.plan_id), "measure": self.d.label(e.measure) if F.text(e.measure) else "",
                "favours": self.party(e.direction), "why": F.text(e.why),
                "load": "" if F.missing(e.load_id) else f"#{int(e.load_id)}",
            })
        return rows

    def _unofficial(self, units: pd.DataFrame, root: str) -> list[dict]:
        u = units[units["certification"] == "unofficial"]
        return [{"cycle": int(r.cycle), "state": self.state_label(r.state), "chamber": self.d.chamber_label(r.chamber),
                 "href": root + self.state_path(r.state, r.chamber)} for r in u.itertuples()]

    # --- pages --------------------------------------------------------------------------------
    def home(self, root: str) -> dict:
        d = self.d
        ctx = {"empty": d.empty, "latest": d.latest_cycle, "latest_by_chamber": [], "sections": [],
               "provenance": self.provenance(), "watch": self._watch_rows(d.watch.head(10), root),
               "watch_total": len(d.watch), "unofficial": [], "changes": [], "events": []}
        if d.empty:
            return ctx
        latest = d.chamber_latest()
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
            cycles = d.chamber_cycles(chamber)
            label = d.chamber_label(chamber)
            slug = d.chamber_slugs[chamber]
            ctx["latest_by_chamber"].append({"chamber": label, "cycle": cycle, "href": root + P.cycle_page(cycle)})
            section = {"chamber": label, "cycle": cycle, "href": root + P.cycle_page(cycle),
                       "summary": self._national_rows(chamber, cycles[-2:]),
                       "histogram": self._histogram(f"hist-{slug}", cycle, chamber), "charts": []}
            for measure in d.headline():
                frame = self._measure_frame(measure, cycle=cycle, chamber=chamber)
                if frame["value"].notna().sum() == 0:
                    continue
                section["charts"].append(C.distribution(f"dist-{slug}-{measure}", frame, measure, d.label(measure),
                                                        self.style, cycle, label))
            ctx["sections"].append(section)
        ctx["changes"] = [{"state": self.state_label(r.state), "chamber": d.chamber_short(r.chamber),
                           "href": root + self.state_path(r.state, r.chamber) if (r.state, r.chamber) in self._pairs else None,
                           "measure": d.label(r.measure), "change": r.change,
                           "cycle_before": "" if F.missing(r.cycle_before) else str(int(r.cycle_before)),
                           "cycle_now": str(int(r.cycle_now)),
                           "before": self.party(r.before), "now": self.party(r.now)} for r in flag_changes(d).itertuples()]
        e = d.events
        at_latest = e["cycle"].astype(float) == e["chamber"].map(latest).astype(float)
        ctx["events"] = self._events(e[at_latest | e["cycle"].isna()].tail(15), root)
        return ctx

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
                "excess": F.signed(r["excess_seats"], 2) if int(r["pool_units"]) else F.DASH,
            })
        return rows

    def watch(self, root: str) -> dict:
        return {"rows": self._watch_rows(self.d.watch, root), "provenance": self.provenance(), "empty": self.d.empty}

    def states(self, root: str) -> dict:
        d = self.d
        rows = []
        on_watch = set(zip(d.watch["state"], d.watch["chamber"]))
        for state, chamber in d.pairs():
            u = self.by("units", ("state", "chamber"), (state, chamber))
            plan = self.by("unit_plans", ("state", "chamber"), (state, chamber)).tail(1)
            p = plan.iloc[0] if len(plan) else None
            rows.append({"state": self.state_label(state), "chamber": d.chamber_short(chamber),
                         "href": root + self.state_path(state, chamber),
                         "cycles": f"{int(u['cycle'].min())}{F.DASH}{int(u['cycle'].max())} ({len(u)})",
                         "plan": (p["plan_id"] if p is not None and isinstance(p["plan_id"], str) else F.DASH),
                         "drawn_by": self.drawer(p["drawn_by"]) if p is not None else F.DASH,
                         "inferred": bool(p is not None and p["inferred"]),
                         "watch": (state, chamber) in on_watch})
        return {"rows": rows, "provenance": self.provenance(), "empty": d.empty}

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

    def state(self, state: str, chamber: str, root: str) -> dict:
        d = self.d
        where = f"{self.state_label(state)}, {d.chamber_label(chamber)}"
        units = self.by("units", ("state", "chamber"), (state, chamber))
        plans = self.by("plans", ("state", "chamber"), (state, chamber)).copy()
        plans["era_label"] = [self.drawer(r.drawn_by) + (" (inferred)" if r.inferred else "") for r in plans.itertuples()]
        current = self.by("unit_plans", ("state", "chamber"), (state, chamber)).tail(1)
        slug = "m"
        charts = []
        for measure in d.headline():
            frame = self._measure_frame(measure, state=state, chamber=chamber)
            frame = frame.merge(units[UNIT_KEYS + ["certification"]], on=UNIT_KEYS, how="right")
            if frame["value"].notna().sum() == 0:
                continue
            lines = [t for t in d.thresholds if t.get("measure") == measure and applies(t, chamber)]
            charts.append(C.trend(f"{slug}-{measure}", frame, plans[["first_cycle", "last_cycle", "era_label"]],
                                  measure, d.label(measure), self.style, where, lines))
        seats = self._seats_over_time(state, chamber, units)
        seats_chart = C.seats_votes_time("seats-votes", seats, plans[["first_cycle", "last_cycle", "era_label"]],
                                         self.style, where) if not seats.empty else None
        if seats_chart is not None:
            self._label_seats_votes(seats_chart)
        curve = self.by("curves", ("state", "chamber"), (state, chamber))
        points = self.by("curve_points", ("state", "chamber"), (state, chamber))
        swing = None
        if not curve.empty:
            cycle = int(points["cycle"].iloc[0])
            swing = C.swing_curve("swing", curve, points, self.style, f"{where} ({cycle} results)")
        events = self.by("events", ("state", "chamber"), (state, chamber))
        watch = self.by("watch", ("state", "chamber"), (state, chamber))
        return {
            "state": self.state_label(state), "code": state, "chamber": d.chamber_label(chamber), "where": where,
            "current_plan": self._plan_row(current.iloc[0]) if len(current) else None,
            "eras": [{"plan_id": r.plan_id, "first": int(r.first_cycle),
                      "last": "" if F.missing(r.last_cycle) else str(int(r.last_cycle)),
                      "drawn_by": self.drawer(r.drawn_by), "inferred": bool(r.inferred), "note": F.text(r.note),
                      "source": F.text(r.source)} for r in plans.itertuples()],
            "watch": self._watch_rows(watch, root), "charts": charts, "seats_chart": seats_chart,
            "undefined": self._undefined_reasons(state, chamber) if not charts else [],
            "swing": swing, "swing_cycle": int(points["cycle"].iloc[0]) if not points.empty else None,
            "table": self._measure_table(state, chamber, units),
            "coverage": self._coverage(state, chamber), "min_coverage": F.share(d.min_coverage, 0),
            "vote": self._vote_headline(state, chamber),
            "results": self._results(state, chamber),
            "events": self._events(events, root),
            "corrections": self._corrections(state, chamber),
            "policy": d.policy,
            "unofficial": [int(c) for c in units.loc[units["certification"] == "unofficial", "cycle"]],
            "provenance": self.provenance(units["load_id"]),
        }

    def _undefined_reasons(self, state: str, chamber: str) -> list[str]:
        """Why the headline measures have no value for this state (as the engine stored it)."""
        m = self.by("measures", ("state", "chamber"), (state, chamber))
        m = m[m["measure"].isin(self.d.headline()) & m["value"].isna()]
        return sorted({F.text(r) for r in m["reason"] if F.text(r)})

    def _plan_row(self, r) -> dict:
        return {"plan_id": r["plan_id"] if isinstance(r["plan_id"], str) else None,
                "drawn_by": self.drawer(r["drawn_by"]), "inferred": bool(r["inferred"]), "cycle": int(r["cycle"])}

    def _seats_over_time(self, state: str, chamber: str, units: pd.DataFrame) -> pd.DataFrame:
        """Party a's vote share and seat share per cycle as the measures define them: the districts
        that enter the measures, votes after the uncontested policy (the measures table's
        vote_share and seat_share, the seats-votes curve's observed point); and the seat share the
        national pool expects at that vote share (the pool conditions on the same vote share and
        counts the same districts), so that the band compares with the seat-share line."""
        c = self.by("contests", ("state", "chamber"), (state, chamber))
        rows = measured(c)
        if rows.empty:
            return pd.DataFrame()
        g = rows.groupby("cycle").agg(va=("votes_a_used", "sum"), vb=("votes_b_used", "sum"), sa=("seats_a", "sum"),
                                      n=("district", "size")).reset_index()
        out = pd.DataFrame({"cycle": g["cycle"].astype(int),
                            "vote_share": g["va"] / (g["va"] + g["vb"]).where(lambda s: s > 0),
                            "seat_share": g["sa"] / g["n"]})
        pool = self.by("pool", ("state", "chamber"), (state, chamber))
        pool = pool.assign(expected_share=pool["expected_seats"] / pool["districts"],
                           expected_low=pool["low"] / pool["districts"], expected_high=pool["high"] / pool["districts"])
        out = out.merge(pool[["cycle", "expected_share", "expected_low", "expected_high"]], on="cycle", how="left")
        for col in ("vote_share", "seat_share", "expected_share", "expected_low", "expected_high"):
            out[col] = pd.to_numeric(out[col], errors="coerce").astype(float)
        return out

    def _label_seats_votes(self, chart) -> None:
        """Say in the seats-and-votes chart's table and text which shares its lines are."""
        chart.columns = [SEATS_VOTES_COLUMNS.get(col, col) for col in chart.columns]
        chart.description += (f" Vote share: {self.d.parties['a'].name}'s share of the two-party vote after the uncontested "
                              f"policy ({self.d.policy}), as in the measures table and on the seats-votes curve; seat "
                              "share: seats won in the districts that enter the measures. The grey band is the seat "
                              "share expected at that vote share from the national pool: compare it with the "
                              "seat-share line.")

    def _measure_table(self, state: str, chamber: str, units: pd.DataFrame) -> dict:
        d = self.d
        m = self.by("measures", ("state", "chamber"), (state, chamber))
        present = [name for name in TABLE_MEASURES if name in set(m["measure"])]
        cells: dict[tuple, str] = {}
        for cycle, name, value, p, reason in zip(m["cycle"], m["measure"], m["value"], m["p_value"], m["reason"]):
            if name not in present:
                continue
            if F.missing(value):
                text = f"{F.DASH} ({reason})" if isinstance(reason, str) else F.DASH
            else:
                text = self.measure_value(name, value) + ("" if F.missing(p) else f" (p {F.pvalue(p)})")
            cells[(int(cycle), name)] = text
        pool = self.by("pool", ("state", "chamber"), (state, chamber))
        excess = {int(c): F.signed(x, 2) for c, x in zip(pool["cycle"], pool["excess_seats"])}
        flagged = self.by("tails", ("state", "chamber"), (state, chamber))
        flags: dict[int, list[str]] = {}
        for cycle, name, flag, direction in zip(flagged["cycle"], flagged["measure"], flagged["flagged"], flagged["direction"]):
            if flag == 1:
                flags.setdefault(int(cycle), []).append(f"{d.label(name)} ({self.party(direction)})")
        rows = []
        for cycle, cert in sorted(zip(units["cycle"].astype(int), units["certification"]), reverse=True):
            incomplete = (cycle, state, chamber) in self._incomplete_units
            flagged = ", ".join(flags.get(cycle, []))
            if flagged and incomplete:  # a flag on a unit the measures do not wholly cover says so
                flagged += " (on an incomplete unit: see coverage)"
            row = [cells.get((cycle, name), F.DASH) for name in present]
            row += [excess.get(cycle, F.DASH), flagged or F.DASH]
            rows.append({"cycle": cycle, "unofficial": cert == "unofficial", "incomplete": incomplete, "cells": row})
        labels = {"vote_share": f"{d.label('vote_share')}, two-party, after the uncontested policy",
                  "seat_share": f"{d.label('seat_share')}, districts in the measures"}
        return {"columns": [labels.get(n) or d.label(n) for n in present] + ["Excess seats (national pool)", "Flags"],
                "rows": rows}

    def _coverage(self, state: str, chamber: str) -> list[dict]:
        """Each cycle's coverage, newest first: what the measures cover, what is missing or left
        out and why, and whether the unit is below flags.min_coverage (never flagged)."""
        cov = self.by("coverage", ("state", "chamber"), (state, chamber))
        gaps = self.by("coverage_gaps", ("state", "chamber"), (state, chamber))
        by_cycle = {int(c): g for c, g in gaps.groupby("cycle")} if len(gaps) else {}
        rows = []
        for r in cov.sort_values("cycle", ascending=False).to_dict("records"):
            cycle = int(r["cycle"])
            share = r["seat_coverage"]
            g = by_cycle.get(cycle, gaps.iloc[0:0])
            rows.append({
                "cycle": cycle, "summary": coverage_summary(r), "incomplete": int(r["incomplete"]) == 1,
                "share": F.share(share, 0),
                "never_flagged": not F.missing(share) and float(share) < self.d.min_coverage,
                "gaps": [{"district": dist or "codes not known", "gap": gap, "seats": F.count(seats), "reason": reason}
                         for dist, seats, gap, reason in zip(g["district"], g["seats"], g["gap"], g["reason"])],
            })
        return rows

    def _vote_headline(self, state: str, chamber: str) -> dict | None:
        """The latest cycle's two vote shares of party a, each named: as cast and after the policy."""
        cov = self.by("coverage", ("state", "chamber"), (state, chamber))
        if cov.empty:
            return None
        r = cov.sort_values("cycle").iloc[-1]
        return {"cycle": int(r["cycle"]), "as_cast": F.share(r["vote_share_as_cast"]),
                "after_policy": F.share(r["vote_share_after_policy"]), "policy": self.d.policy,
                "differ": F.share(r["vote_share_as_cast"]) != F.share(r["vote_share_after_policy"])}

    def _corrections(self, state: str, chamber: str) -> list[dict]:
        """The corrections of this state and chamber, newest first, with what each changed."""
        c = self.d.corrections
        c = c[(c["state"] == state) & (c["chamber"] == chamber)]
        return [{"cycle": int(r.cycle), "load": f"#{int(r.load_id)}", "file_name": r.file_name,
                 "at": F.stamp(parse_time(r.loaded_at)), "changes": list(r.changes) or ["no difference found"],
                 "basis": r.basis, "superseded": f"#{int(r.old_load_id)}"}
                for r in c.sort_values(["load_id", "cycle"], ascending=False).itertuples()]

    def _results(self, state: str, chamber: str) -> list[dict]:
        c = self.by("contests", ("state", "chamber"), (state, chamber))
        out = []
        for cycle, part in sorted(c.groupby("cycle"), key=lambda kv: -kv[0]):
            cols = {k: part[k].tolist() for k in ("district", "special", "runoff", "seats", "votes_a", "votes_b",
                                                  "votes_other", "share_a", "share_used", "imputed", "winner", "status")}
            rows = [{
                "district": dist + {(1, 0): " (special)", (0, 1): " (runoff)", (1, 1): " (special runoff)"}.get(
                    (int(spec), int(run)), ""), "seats": int(seats),
                "votes_a": F.count(va), "votes_b": F.count(vb), "votes_other": F.count(vo), "share": F.share(sa),
                "share_used": F.share(su) + (" (imputed)" if imp else ""),
                "winner": self.party(win) if win in ("a", "b") else win, "winner_code": win,
                "status": status.replace("_", " "),
            } for dist, spec, run, seats, va, vb, vo, sa, su, imp, win, status in zip(*cols.values())]
            deciding = part[part["decides"].astype(int) == 1]  # one contest per seat
            out.append({"cycle": int(cycle), "unofficial": part["certification"].iloc[0] == "unofficial", "rows": rows,
                        "seats_a": F.number(deciding["seats_a"].sum(), 1),
                        "seats_b": F.number(deciding["seats_b"].sum(), 1),
                        "load": int(part["load_id"].iloc[0])})
        return out

    def cycle(self, cycle: int, root: str) -> dict:
        d = self.d
        sections = []
        units = self.by("units", ("cycle",), cycle)
        for chamber in d.chambers:
            if chamber not in set(units["chamber"]):
                continue
            label = d.chamber_label(chamber)
            slug = d.chamber_slugs[chamber]
            charts = []
            for measure in d.headline():
                frame = self._measure_frame(measure, cycle=cycle, chamber=chamber)
                if frame["value"].notna().sum() == 0:
                    continue
                charts.append(C.ranking(f"rank-{slug}-{measure}", frame, measure, d.label(measure), self.style, cycle, label))
            pool = self.by("pool", ("cycle", "chamber"), (cycle, chamber)).copy()
            pool_chart = drawer_chart = None
            if pool["expected_seats"].notna().any():
                pool["state_label"] = pool["state"].map(d.state_name)
                for col in ("seats_a", "expected_seats", "low", "high", "excess_seats"):
                    pool[col] = pd.to_numeric(pool[col], errors="coerce").astype(float)
                pool_chart = C.pool_seats(f"pool-{slug}", pool, self.style, cycle, label)
            by = self.by("drawers", ("cycle", "chamber"), (cycle, chamber))
            if not by.empty:
                by = by.assign(drawer=[self.drawer_group(k) for k in by["drawer"]])
                drawer_chart = C.excess_by_drawer(f"drawer-{slug}", by, self.style, cycle, label)
            earlier = [c for c in d.chamber_cycles(chamber) if c < cycle]
            states = [{"state": self.state_label(s), "href": root + self.state_path(s, chamber),
                       "incomplete": (int(cycle), s, chamber) in self._incomplete_units}
                      for s in sorted(units.loc[units["chamber"] == chamber, "state"])]
            sections.append({"chamber": label, "charts": charts, "pool": pool_chart, "drawer": drawer_chart,
                             "states": states, "summary": self._national_rows(chamber, earlier[-1:] + [cycle]),
                             "histogram": self._histogram(f"hist-{slug}", cycle, chamber)})
        events = self.by("events", ("cycle",), cycle)
        return {"cycle": cycle, "sections": sections, "unofficial": self._unofficial(units, root),
                "events": self._events(events, root), "provenance": self.provenance(units["load_id"]),
                "previous": max((c for c in d.cycles if c < cycle), default=None),
                "next": min((c for c in d.cycles if c > cycle), default=None)}

    def drawer_group(self, key: str) -> str:
        """The label of an excess-by-drawer group (:data:`monitor.national.DRAWER_KEYS`)."""
        return DRAWER_GROUPS.get(key) or self.drawer(key)

    def methods(self) -> dict:
        d = self.d
        from monitor.publish.methods import plain_words

        docs = [{"name": m.name, "label": m.label, "formula": m.formula, "sign": m.sign, "source": m.source,
                 "signed": m.signed, "interval": m.interval, "p_value": m.p_value, "plain": plain_words(m)}
                for m in d.measure_docs]
        settings = [{"name": s["name"], "value": _setting(s["value"]), "default": _setting(s["default"]),
                     "changed": s["value"] != s["default"], "help": s["help"]} for s in d.settings]
        return {"docs": docs, "settings": settings, "policy": d.policy, "thresholds": d.thresholds,
                "provenance": self.provenance()}


def applies(threshold: dict, chamber: str) -> bool:
    """Whether a proposed threshold is meant for this chamber: proposals for congressional plans
    go with the federal chamber, proposals for state-house plans with the state chambers; a
    threshold saying neither goes everywhere."""
    text = str(threshold.get("applies_to", "")).casefold()
    if "congress" in text:
        return chamber == "federal"
    if "state" in text:
        return chamber != "federal"
    return True


def _severity_and_stake(severity, stake) -> tuple[str, str]:
    """The watch list's severity and signed seats at stake, shown with one rounding: the stored
    severity (seats at stake, absolute, two decimals) with the sign of the seats at stake, so that
    "1.77" never stands beside "(−1.76)"."""
    if F.missing(severity):
        return F.DASH, F.signed(stake, 2)
    shown = f"{abs(float(severity)):.2f}"
    if F.missing(stake):
        return shown, F.DASH
    sign = F.MINUS if float(stake) < 0 else "+"
    return shown, sign + shown


def _num(value) -> str:
    return "" if F.missing(value) else repr(float(value))


def _setting(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, dict):  # coverage.expected, the one table option: chamber.STATE = count
        return "; ".join(f"{chamber}.{state} = " + (
            ", ".join(f"{k} {v}" for k, v in count.items()) if isinstance(count, dict) else f"{count} districts")
            for chamber, states in value.items() for state, count in states.items()) or "none"
    return str(value)
