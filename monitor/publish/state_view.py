"""The state page's context: a (state, chamber)'s measures over time, its plan eras, seats and
votes, seats-votes curve, results, corrections and flag history (a part of :class:`Views`)."""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

from monitor.coverage import summary as coverage_summary
from monitor.measures import registry
from monitor.publish import charts as C
from monitor.publish import formats as F
from monitor.publish.collect import parse_time
from monitor.staggered import whole_code

#: Column labels of the seats-and-votes chart's table: which share each line is (the same shares
#: as the measures table and the seats-votes curve).
SEATS_VOTES_COLUMNS = {"vote share": "vote share (two-party, after the uncontested policy)",
                       "seat share": "seat share (districts in the measures)",
                       "expected seat share": "expected seat share at that vote share (national pool)"}


TABLE_MEASURES = tuple(m.name for m in registry.measures() if m.table)
#: The columns of the headline measures' frame that a state page's trend charts read.
TREND_COLUMNS = ("value", "low", "high", "null_low", "null_high", "flagged", "direction")


class StatePage:
    """The state page of :class:`monitor.publish.views.Views` (which provides ``d``, ``by`` and the
    shared pieces)."""

    def state(self, state: str, chamber: str, root: str) -> dict:
        d = self.d
        where = f"{self.state_label(state)}, {d.chamber_label(chamber)}"
        units = self.by("units", ("state", "chamber"), (state, chamber))
        plans = self.by("plans", ("state", "chamber"), (state, chamber)).copy()
        plan_rows = self.records("plans", ("state", "chamber"), (state, chamber))
        plans["era_label"] = [self.drawer(r.drawn_by, r.inferred) for r in plan_rows]
        current = self.by("unit_plans", ("state", "chamber"), (state, chamber)).tail(1)
        slug = "m"
        charts = []
        eras = C.EraBands(plans[["first_cycle", "last_cycle", "era_label"]])  # drawn once per page
        for measure in d.headline():
            frame = self._on_units(self.lists("_mf", ("state", "chamber", "measure"), (state, chamber, measure),
                                                ("cycle", *TREND_COLUMNS)), units)
            if all(F.missing(v) for v in frame["value"]):
                continue
            lines = [t for t in d.thresholds if t.get("measure") == measure and applies(t, chamber)]
            charts.append(C.trend(f"{slug}-{measure}", frame, eras, measure, d.label(measure), self.style, where, lines))
        seats = self._seats_over_time(state, chamber, units)
        seats_chart = C.seats_votes_time("seats-votes", seats, eras, self.style, where) if not seats.empty else None
        if seats_chart is not None:
            self._label_seats_votes(seats_chart)
        curve = self.by("curves", ("state", "chamber"), (state, chamber))
        points = self.by("curve_points", ("state", "chamber"), (state, chamber))
        swing = None
        if not curve.empty:
            cycle = int(points["cycle"].iloc[0])
            swing = C.swing_curve("swing", curve, points, self.style, f"{where} ({cycle} results)")
        events = self.records("events", ("state", "chamber"), (state, chamber))
        # a staggered chamber is judged as a whole chamber: its watch rows and standing are shown here
        watch = (self.records("watch", ("state", "chamber"), (state, chamber))
                 + self.records("watch", ("state", "chamber"), (state, whole_code(chamber))))
        in_force = [r for r in watch if self.plan_in_force(r.state, r.chamber) == r.plan_id]
        past = sorted((r for r in watch if self.plan_in_force(r.state, r.chamber) != r.plan_id),
                      key=lambda r: -int((str(r.cycles).split() or ["0"])[0]))  # newest first
        last = int(units["cycle"].max()) if len(units) else None
        return {
            "latest": last,
            "standing": (self.standing(last, state, chamber) or self.standing(last, state, whole_code(chamber)))
            if last is not None else None,
            "watch_past": self._watch_rows(past, root),
            "era_key": eras.key,
            "state": self.state_label(state), "code": state, "chamber": d.chamber_label(chamber), "where": where,
            "chamber_code": chamber,
            "current_plan": self._plan_row(current.iloc[0]) if len(current) else None,
            "eras": [{"plan_id": r.plan_id, "first": int(r.first_cycle),
                      "last": "" if F.missing(r.last_cycle) else str(int(r.last_cycle)),
                      "drawn_by": self.drawer(r.drawn_by, r.inferred), "inferred": bool(r.inferred), "note": F.text(r.note),
                      "source": F.text(r.source)} for r in plan_rows],
            "watch": self._watch_rows(in_force, root), "charts": charts, "seats_chart": seats_chart,
            "undefined": self._undefined_reasons(state, chamber) if not charts else [],
            "swing": swing, "swing_cycle": int(points["cycle"].iloc[0]) if not points.empty else None,
            "table": self._measure_table(state, chamber, units),
            "coverage": self._coverage(state, chamber), "min_coverage": F.share(d.min_coverage, 0),
            "vote": self._vote_headline(state, chamber),
            # each cycle's district results: rendered by the renderer from _results, once per delivery
            "results": [],
            "events": self._events(events, root),
            "corrections": self._corrections(state, chamber),
            "policy": d.policy,
            "unofficial": [int(c) for c in units.loc[units["certification"] == "unofficial", "cycle"]],
            "provenance": self.provenance(units["load_id"]),
        }

    @staticmethod
    def _on_units(frame: dict[str, list], units: pd.DataFrame) -> dict[str, list]:
        """A trend chart's rows as column lists: one per unit of the state chamber (in ``units``'
        order), with its certification and this measure's columns (missing where the unit has no
        row in ``frame``, the measure's rows as column lists): a right merge on the unit keys, done
        with lists (one per chart on every state page)."""
        cycles = units["cycle"].tolist()
        at = dict(zip(frame["cycle"], range(len(frame["cycle"]))))
        take = [at.get(c) for c in cycles]
        out = {"cycle": cycles}
        for col in TREND_COLUMNS:
            values = frame[col]
            out[col] = [np.nan if i is None else values[i] for i in take]
        out["certification"] = units["certification"].tolist()
        return out

    def _undefined_reasons(self, state: str, chamber: str) -> list[str]:
        """Why the headline measures have no value for this state (as the engine stored it)."""
        m = self.by("measures", ("state", "chamber"), (state, chamber))
        m = m[m["measure"].isin(self.d.headline()) & m["value"].isna()]
        return sorted({self.words.plain(F.text(r)) for r in m["reason"] if F.text(r)})

    def _plan_row(self, r) -> dict:
        return {"plan_id": r["plan_id"] if isinstance(r["plan_id"], str) else None,
                "drawn_by": self.drawer(r["drawn_by"], r["inferred"]), "inferred": bool(r["inferred"]),
                "cycle": int(r["cycle"])}

    def _seats_over_time(self, state: str, chamber: str, units: pd.DataFrame) -> pd.DataFrame:
        """Party a's vote share and seat share per cycle as the measures define them: the districts
        that enter the measures, votes after the uncontested policy (the measures table's
        vote_share and seat_share, the seats-votes curve's observed point); and the seat share the
        national pool expects at that vote share (the pool conditions on the same vote share and
        counts the same districts), so that the band compares with the seat-share line. The shares
        are stored by the aggregates step (:func:`monitor.curves.seats_votes_series`)."""
        series = self.by("_seats_votes", ("state", "chamber"), (state, chamber))
        return series.drop(columns=["state", "chamber"]) if not series.empty else pd.DataFrame()

    @property
    def _seats_votes(self) -> pd.DataFrame:
        """The stored shares of every unit beside the seat share its national pool expects (the
        rows of :meth:`_seats_over_time`), worked out for all units at once, once per build."""
        if not hasattr(self, "_seats_votes_cache"):
            series = self.d.seats_votes
            if series.empty:
                self._seats_votes_cache = series
                return series
            out = series[["state", "chamber", "cycle", "vote_share", "seat_share"]].astype({"cycle": int})
            pool = self.d.pool
            pool = pool.assign(expected_share=pool["expected_seats"] / pool["districts"],
                               expected_low=pool["low"] / pool["districts"],
                               expected_high=pool["high"] / pool["districts"])
            keys = ["state", "chamber", "cycle"]
            out = out.reset_index(drop=True).merge(
                pool[keys + ["expected_share", "expected_low", "expected_high"]].astype({"cycle": int}),
                on=keys, how="left")
            for col in ("vote_share", "seat_share", "expected_share", "expected_low", "expected_high"):
                out[col] = pd.to_numeric(out[col], errors="coerce").astype(float)
            self._seats_votes_cache = out
        return self._seats_votes_cache

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
        m = self.lists("measures", ("state", "chamber"), (state, chamber),
                       ("cycle", "measure", "value", "p_value", "reason"))
        stored = set(m["measure"])
        present = [name for name in TABLE_MEASURES if name in stored]
        shown = set(present)
        cells: dict[tuple, str] = {}
        for cycle, name, value, p, reason in zip(*(m[c] for c in ("cycle", "measure", "value", "p_value", "reason"))):
            if name not in shown:
                continue
            if F.missing(value):
                text = f"{F.DASH} ({self.words.plain(reason)})" if isinstance(reason, str) else F.DASH
            else:
                text = self.measure_value(name, value) + ("" if F.missing(p) else f" (p {F.pvalue(p)})")
            cells[(int(cycle), name)] = text
        pool = self.lists("pool", ("state", "chamber"), (state, chamber), ("cycle", "excess_seats"))
        excess = {int(c): self.words.stake(x).text for c, x in zip(pool["cycle"], pool["excess_seats"])}
        flagged = self.lists("tails", ("state", "chamber"), (state, chamber),
                             ("cycle", "measure", "flagged", "direction"))
        flags: dict[int, list[str]] = {}
        for cycle, name, flag, direction in zip(*(flagged[c] for c in ("cycle", "measure", "flagged", "direction"))):
            if flag == 1:
                flags.setdefault(int(cycle), []).append(f"{d.label(name)} ({self.party(direction)})")
        rows = []
        for cycle, cert in sorted(zip(units["cycle"].astype(int).tolist(), units["certification"].tolist()), reverse=True):
            incomplete = (cycle, state, chamber) in self._incomplete_units
            flagged = ", ".join(flags.get(cycle, []))
            if flagged and incomplete:  # a flag on a unit the measures do not wholly cover says so
                flagged += " (on an incomplete unit: see coverage)"
            row = [cells.get((cycle, name), F.DASH) for name in present]
            row += [excess.get(cycle, F.DASH), flagged or F.DASH]
            rows.append({"cycle": cycle, "unofficial": cert == "unofficial", "incomplete": incomplete, "cells": row})
        labels = {"vote_share": f"{d.label('vote_share')}, two-party, after the uncontested policy",
                  "seat_share": f"{d.label('seat_share')}, districts in the measures"}
        signed = {m.name for m in registry.measures() if m.signed}
        columns = [(labels.get(n) or d.label(n)) + (f" (+ favours {d.parties['a'].name})" if n in signed else "")
                   for n in present]
        return {"columns": columns + ["Seats at stake (national pool)", "Flags"],
                "rows": rows}

    def _coverage(self, state: str, chamber: str) -> list[dict]:
        """Each cycle's coverage, newest first: what the measures cover, what is missing or left
        out and why, and whether the unit is below flags.min_coverage (never flagged)."""
        cov = self._coverage_lists(state, chamber)
        gaps = self.lists("coverage_gaps", ("state", "chamber"), (state, chamber), ("cycle", "district", "seats", "gap", "reason"))
        by_cycle: dict[int, list[tuple]] = {}  # each cycle's gaps, in their stored order
        for cycle, *gap in zip(*gaps.values()):
            by_cycle.setdefault(int(cycle), []).append(gap)
        records = [dict(zip(cov, row)) for row in zip(*cov.values())]
        rows = []
        for r in sorted(records, key=lambda r: r["cycle"], reverse=True):
            cycle = int(r["cycle"])
            share = r["seat_coverage"]
            rows.append({
                "cycle": cycle, "summary": _whole_in_words(coverage_summary(r)), "incomplete": int(r["incomplete"]) == 1,
                "share": F.share(share, 0),
                "never_flagged": not F.missing(share) and float(share) < self.d.min_coverage,
                "gaps": [{"district": dist or "codes not known", "gap": gap, "seats": F.count(seats),
                          "reason": self.words.plain(F.text(reason))}
                         for dist, seats, gap, reason in by_cycle.get(cycle, [])],
            })
        return rows

    def _coverage_lists(self, state: str, chamber: str) -> dict[str, list]:
        """The coverage rows of a state chamber, every column as a list."""
        return self.lists("coverage", ("state", "chamber"), (state, chamber), tuple(self.d.coverage.columns))

    def _vote_headline(self, state: str, chamber: str) -> dict | None:
        """The latest cycle's two vote shares of party a, each named: as cast and after the policy."""
        cov = self._coverage_lists(state, chamber)
        if not cov["cycle"]:
            return None
        latest = max(range(len(cov["cycle"])), key=cov["cycle"].__getitem__)
        r = {c: values[latest] for c, values in cov.items()}
        return {"cycle": int(r["cycle"]), "as_cast": F.share(r["vote_share_as_cast"]),
                "after_policy": F.share(r["vote_share_after_policy"]), "policy": self.d.policy,
                "differ": F.share(r["vote_share_as_cast"]) != F.share(r["vote_share_after_policy"])}

    def _corrections(self, state: str, chamber: str) -> list[dict]:
        """The corrections of this state and chamber, newest first, with what each changed."""
        c = self.records("corrections", ("state", "chamber"), (state, chamber))
        return [{"cycle": int(r.cycle), "load": f"#{int(r.load_id)}", "file_name": r.file_name,
                 "at": F.stamp(parse_time(r.loaded_at)),
                 "changes": [self.words.change(c) for c in r.changes] or ["no difference found"],
                 "basis": r.basis, "superseded": f"#{int(r.old_load_id)}"}
                for r in sorted(c, key=lambda r: (r.load_id, r.cycle), reverse=True)]

    def _results(self, state: str, chamber: str, cycles=None) -> list[dict]:
        """Each cycle's district results (of ``cycles`` only, when given), newest first, each in
        natural district order (1, 2, ..., 10)."""
        c = self.d.contests_of(state, chamber, cycles)
        if len(c):
            pos = c["position"].fillna("").astype(str).tolist() if "position" in c else [""] * len(c)
            keys = list(zip(c["district"].tolist(), pos, c["special"].tolist(), c["runoff"].tolist()))
            c = c.iloc[sorted(range(len(c)), key=lambda i: (district_key(keys[i][0]), district_key(keys[i][1]),
                                                              int(keys[i][2]), int(keys[i][3])))]
        out = []
        for cycle, part in sorted(c.groupby("cycle", sort=False), key=lambda kv: -kv[0]):
            part = part.assign(position=part["position"].fillna("").astype(str) if "position" in part else "",
                               placeholder=part["placeholder"].fillna(0).astype(int) if "placeholder" in part else 0,
                               left_out=part["left_out"] if "left_out" in part else None)
            cols = {k: part[k].tolist() for k in ("district", "position", "special", "runoff", "seats", "votes_a",
                                                  "votes_b", "votes_other", "share_a", "share_used", "imputed", "winner",
                                                  "status", "placeholder", "decides", "left_out")}
            rows = [{
                "district": dist + (f", seat {pos}" if pos else "") + {
                    (1, 0): " (special)", (0, 1): " (runoff)", (1, 1): " (special runoff)"}.get((int(spec), int(run)), ""),
                "seats": int(seats),
                "votes_a": F.count(va), "votes_b": F.count(vb), "votes_other": F.count(vo), "share": F.share(sa),
                "share_used": F.share(su) + (" (imputed)" if imp else ""),
                "winner": self.party(win) if win in ("a", "b") else win, "winner_code": win,
                "status": contest_status(status, int(ph), int(dec), self.words.plain(F.text(out))),
            } for dist, pos, spec, run, seats, va, vb, vo, sa, su, imp, win, status, ph, dec, out in zip(*cols.values())]
            deciding = part[part["decides"].astype(int) == 1]  # one contest per seat
            out.append({"cycle": int(cycle), "unofficial": part["certification"].iloc[0] == "unofficial", "rows": rows,
                        "seats_a": F.number(deciding["seats_a"].sum(), 1),
                        "seats_b": F.number(deciding["seats_b"].sum(), 1),
                        "load": int(part["load_id"].iloc[0])})
        return out



def contest_status(status: str, placeholder: int, decides: int, left_out: str) -> str:
    """A contest's status in words, saying when its count was a placeholder (unopposed, not on the
    ballot: entered as an uncontested win) and, for a contest that does not decide its seat,
    why it is kept as history only.

    >>> contest_status("uncontested", 1, 1, "")
    'uncontested (placeholder count: unopposed, not on the ballot)'
    >>> contest_status("contested", 0, 0, "replaced by a special election")
    'contested; not counted: replaced by a special election'
    """
    text = status.replace("_", " ")
    if placeholder:
        text += " (placeholder count: unopposed, not on the ballot)"
    if not decides:
        text += "; not counted" + (f": {left_out}" if left_out else " (another contest decides the seat)")
    return text


def district_key(code) -> tuple:
    """Natural order of district codes: numbers by value (``2`` before ``10``, ``007`` as 7),
    then codes with letters by their text (``AL``, ``12A``).

    >>> sorted(["10", "2", "AL", "1", "12A", "007"], key=district_key)
    ['1', '2', '007', '10', '12A', 'AL']
    """
    text = str(code)
    parts = re.split(r"(\d+)", text)
    return (0 if text.isdigit() else 1, [(0, int(p), "") if p.isdigit() else (1, 0, p.casefold()) for p in parts if p])


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


_WHOLE = re.compile(r"the whole chamber \(\w+_whole (\d{4}): ([\d+]+)\)")


def _whole_in_words(text: str) -> str:
    """A staggered chamber's coverage source without the whole-chamber unit's code:
    ``the whole chamber (state_upper_whole 2024: 2022+2024)`` -> ``the whole chamber (its latest
    election of every seat, 2022 and 2024)``."""
    return _WHOLE.sub(lambda m: "the whole chamber (its latest election of every seat, "
                                + " and ".join(m.group(2).split("+")) + ")", text)
