"""Where each unit stands in a cycle, in words: the answer to "which states sit at the tails this
cycle, since when, by how much, and why?" (a part of :class:`monitor.publish.views.Views`).

A unit is *flagged* in a cycle when at least one of its judged measures is flagged (the ``tails``
rows the flags step stored). For a flagged unit this module says:

* its **direction**: the party most of its flagged measures favour (``mixed`` on a tie);
* its **seats at stake**: its excess seats against the national pool, in words by the one sign
  rule (:meth:`monitor.publish.words.Words.stake`), with the seats won and the 95% range of the
  seats that delegations drawn from the national pool win at the same vote;
* **why**: which measures agree, and which point the other way;
* **since when**: the first cycle of the plan in force in which the unit was flagged favouring
  the same party, and how many of the plan's cycles were;
* **what changed** against the unit's previous cycle: measures newly flagged or cleared, and the
  seats at stake then.

The home page's table, the state page's "latest cycle" line and the feed's words all come from
:meth:`Standing.standing`, so a number reads the same wherever it is shown.
"""

from __future__ import annotations

import pandas as pd

from monitor.inputs import UNIT_KEYS
from monitor.publish import formats as F
from monitor.publish.words import join_words
from monitor.staggered import base_chamber, whole_code


class Standing:
    """The standing of units (mixed into :class:`~monitor.publish.views.Views`, which provides
    ``d``, ``words``, ``by`` and the state and plan helpers)."""

    # --- indexes, built once ------------------------------------------------------------------
    @property
    def _flags(self) -> dict[tuple, dict[str, list[str]]]:
        """(cycle, state, chamber) -> {direction: [flagged measures]} over every judged unit."""
        if not hasattr(self, "_flags_cache"):
            t = self.d.tails
            t = t[t["flagged"].fillna(0).astype(int) == 1]
            out: dict[tuple, dict[str, list[str]]] = {}
            for cycle, state, chamber, measure, direction in zip(t["cycle"], t["state"], t["chamber"],
                                                                 t["measure"], t["direction"]):
                out.setdefault((int(cycle), state, chamber), {}).setdefault(direction, []).append(measure)
            self._flags_cache = {k: {d: sorted(ms) for d, ms in v.items()} for k, v in out.items()}
        return self._flags_cache

    @property
    def _unit_plan(self) -> dict[tuple, tuple]:
        """(cycle, state, chamber) -> (plan_id, drawn_by, inferred) of the plan in force then."""
        if not hasattr(self, "_unit_plan_cache"):
            p = self.d.unit_plans
            self._unit_plan_cache = {(int(c), s, ch): (pid if isinstance(pid, str) else None, by, int(inf or 0))
                                     for c, s, ch, pid, by, inf in zip(p["cycle"], p["state"], p["chamber"],
                                                                       p["plan_id"], p["drawn_by"], p["inferred"])}
            # a whole-chamber unit of a staggered chamber is under its chamber's plan
            self._unit_plan_cache.update({(c, s, whole_code(ch)): v for (c, s, ch), v in
                                          list(self._unit_plan_cache.items())})
        return self._unit_plan_cache

    def _pool_row(self, cycle: int, state: str, chamber: str):
        rows = self.by("pool", tuple(UNIT_KEYS), (cycle, state, chamber))
        return rows.iloc[0] if len(rows) else None

    def _memo(self, name: str, key, make):
        """``make()``, computed once per key for this build (the data never change during one)."""
        memo = self.__dict__.setdefault(f"_memo_{name}", {})
        if key not in memo:
            memo[key] = make()
        return memo[key]

    def unit_cycles(self, state: str, chamber: str) -> list[int]:
        """The cycles with results of a state's chamber (a whole-chamber unit: of its chamber)."""
        base = base_chamber(chamber)
        return self._memo("cycles", (state, base), lambda: sorted(
            int(c) for c in self.by("units", ("state", "chamber"), (state, base))["cycle"]))

    # --- one unit ------------------------------------------------------------------------------
    def direction(self, flags: dict[str, list[str]]) -> str | None:
        """The party most flagged measures favour; None on a tie or without flags."""
        counts = {d: len(ms) for d, ms in flags.items() if d in ("a", "b")}
        if not counts:
            return None
        best = max(counts.values())
        top = [d for d, n in counts.items() if n == best]
        return top[0] if len(top) == 1 else None

    def stake_of(self, cycle: int, state: str, chamber: str) -> dict:
        """The unit's seats at stake in words, with the seats won and the national pool's range."""
        return self._memo("stake", (int(cycle), state, chamber), lambda: self._stake_of(cycle, state, chamber))

    def _stake_of(self, cycle: int, state: str, chamber: str) -> dict:
        r = self._pool_row(cycle, state, chamber)
        if r is None or F.missing(r["excess_seats"]):
            return {"stake": self.words.stake(None), "detail": "no national-pool expectation"}
        stake = self.words.stake(r["excess_seats"])
        excess = float(r["excess_seats"])
        than = (f"{stake.amount} {'more' if excess > 0 else 'fewer'} than the" if stake.code else "as many as the")
        detail = (f"{self.words.party('a')} won {F.number(r['seats_a'], 1)} of {F.count(r['districts'])}, {than} "
                  f"{F.number(r['expected_seats'], 1)} expected from the national pool (95%: {F.number(r['low'], 1)} "
                  f"to {F.number(r['high'], 1)})")
        return {"stake": stake, "detail": detail}

    def standing(self, cycle: int, state: str, chamber: str) -> dict | None:
        """Everything the pages say about one flagged unit (None when it is not flagged); the home,
        states, cycle and state pages ask for the same units, so each is worked out once (a copy
        is returned: a page adds its own link)."""
        s = self._memo("standing", (int(cycle), state, chamber), lambda: self._standing(cycle, state, chamber))
        return None if s is None else dict(s)

    def _standing(self, cycle: int, state: str, chamber: str) -> dict | None:
        flags = self._flags.get((int(cycle), state, chamber))
        if not flags:
            return None
        w = self.words
        direction = self.direction(flags)
        judged = self.by("tails", tuple(UNIT_KEYS), (cycle, state, chamber))
        n_judged = int(judged["value"].notna().sum()) if len(judged) else 0
        if direction is not None:
            agree, against = flags[direction], flags.get(w.other(direction), [])
            why = (f"{len(agree)} of the {n_judged} measures judged favour{'s' if len(agree) == 1 else ''} "
                   f"{w.party(direction)}: {w.measure_list(agree)}")
            if against:
                why += f"; {w.measure_list(against)} {'favours' if len(against) == 1 else 'favour'} {w.party(w.other(direction))}"
        else:
            why = "; ".join(f"{w.measure_list(ms)} favour{'s' if len(ms) == 1 else ''} {w.party(d)}"
                            for d, ms in sorted(flags.items()))
            why = f"measures disagree: {why}"
        plan_id, drawn_by, inferred = self._unit_plan.get((int(cycle), state, chamber), (None, None, 1))
        stake = self.stake_of(cycle, state, chamber)
        return {
            "cycle": int(cycle), "state": self.state_label(state), "state_code": state,
            "chamber": self.d.chamber_short(chamber), "plan_id": plan_id or "not recorded",
            "drawn_by": w.drawer(drawn_by, inferred), "inferred": bool(inferred),
            "direction": w.party(direction) if direction else "mixed", "direction_code": direction,
            "stake": stake["stake"], "stake_detail": stake["detail"],
            "disagree": direction is not None and stake["stake"].code not in (None, direction),
            "why": why, "since": self._since(cycle, state, chamber, plan_id, direction),
            "changed": self._changed(cycle, state, chamber),
            "unofficial": (int(cycle), state, chamber) in self._unofficial_units,
            "incomplete": (int(cycle), state, chamber) in self._incomplete_units,
        }

    def _since(self, cycle: int, state: str, chamber: str, plan_id, direction) -> dict:
        """The first cycle of the same plan, up to ``cycle``, flagged favouring ``direction``."""
        plan_cycles = [c for c in self.unit_cycles(state, chamber)
                       if c <= cycle and self._unit_plan.get((c, state, chamber), (None,))[0] == plan_id]
        same = [c for c in plan_cycles if direction in self._flags.get((c, state, chamber), {})] if direction else []
        first = same[0] if same else int(cycle)
        if len(same) == len(plan_cycles) and len(same) > 1:
            text = f"{first} (every cycle of this plan)"
        elif len(plan_cycles) == 1:
            text = f"{first} (the plan's first cycle)"
        else:
            text = f"{first} ({len(same)} of this plan's {len(plan_cycles)} cycles)"
        return {"cycle": first, "text": text, "flagged": len(same), "cycles": len(plan_cycles)}

    def _previous_cycle(self, cycle: int, state: str, chamber: str) -> int | None:
        earlier = [c for c in self.unit_cycles(state, chamber) if c < cycle]
        return earlier[-1] if earlier else None

    def _changed(self, cycle: int, state: str, chamber: str) -> str:
        """What changed against the unit's previous cycle, in a sentence."""
        prev = self._previous_cycle(cycle, state, chamber)
        if prev is None:
            return "first cycle with results"
        w = self.words
        now = self._flags.get((int(cycle), state, chamber), {})
        before = self._flags.get((prev, state, chamber), {})
        flat_now = {(m, d) for d, ms in now.items() for m in ms}
        flat_before = {(m, d) for d, ms in before.items() for m in ms}
        then = self.stake_of(prev, state, chamber)["stake"]
        if not flat_before:
            text = f"not flagged in {prev}"
        else:
            was = self.direction(before)
            text = f"in {prev} flagged favouring {w.party(was) if was else 'both parties'}"
        if then.value is not None:  # "no seats at stake (0.0)" says it alone
            text += f", {then.text}" if then.code is None else f", seats at stake {then.text.replace('favours ', 'favouring ')}"
        new = sorted({m for m, d in flat_now - flat_before})
        gone = sorted({m for m, d in flat_before - flat_now})
        if flat_before and new:
            text += f"; newly flagged: {w.measure_list(new)}"
        if gone:
            text += f"; no longer flagged: {w.measure_list(gone)}"
        if flat_before and not new and not gone:
            text += "; the same measures flagged"
        return text

    # --- a chamber's latest cycle ------------------------------------------------------------
    def flagged_in(self, cycle: int, chamber: str, root: str) -> list[dict]:
        """The flagged units of a cycle and chamber, largest seats at stake first."""
        units = self.by("units", ("cycle",), cycle)
        rows = []
        for state in sorted(units.loc[units["chamber"] == chamber, "state"]):
            # a staggered chamber's per-cycle units are never flagged: its whole-chamber unit is
            for judged in (chamber, whole_code(chamber)):
                s = self.standing(cycle, state, judged)
                if s is not None:
                    s["href"] = root + self.state_path(state, chamber)
                    rows.append(s)
        return sorted(rows, key=lambda s: (-(abs(s["stake"].value) if s["stake"].value is not None else -1),
                                           s["state"]))

    def cleared_in(self, cycle: int, chamber: str, root: str) -> list[dict]:
        """Units flagged in their previous cycle and not in this one."""
        units = self.by("units", ("cycle",), cycle)
        rows = []
        for state in sorted(units.loc[units["chamber"] == chamber, "state"]):
            prev = self._previous_cycle(cycle, state, chamber)
            if prev is None or (cycle, state, chamber) in self._flags or (prev, state, chamber) not in self._flags:
                continue
            was = self.direction(self._flags[(prev, state, chamber)])
            rows.append({"state": self.state_label(state), "href": root + self.state_path(state, chamber),
                         "previous": prev, "was": self.words.party(was) if was else "mixed",
                         "measures": self.words.measure_list(sorted({m for ms in self._flags[(prev, state, chamber)].values()
                                                                     for m in ms}))})
        return rows

    # --- plans in force and past -------------------------------------------------------------
    def plan_in_force(self, state: str, chamber: str) -> str | None:
        """The plan of the unit's latest cycle (the plan in force: no later plan is known)."""
        cycles = self.unit_cycles(state, chamber)
        if not cycles:
            return None
        return self._unit_plan.get((cycles[-1], state, chamber), (None,))[0]

    def watch_split(self, watch: pd.DataFrame | None = None) -> tuple[pd.DataFrame, pd.DataFrame]:
        """The watch list split into plans in force and past plans (each keeps its order)."""
        watch = self.d.watch if watch is None else watch
        if watch.empty:
            return watch, watch
        force = [self.plan_in_force(s, ch) == p for s, ch, p in zip(watch["state"], watch["chamber"], watch["plan_id"])]
        force = pd.Series(force, index=watch.index, dtype=bool)
        return watch[force], watch[~force]


def flagged_sentence(rows: list[dict], words) -> str:
    """A one-line summary of a chamber's flagged units: how many favour each party."""
    counts = {}
    for r in rows:
        counts[r["direction"]] = counts.get(r["direction"], 0) + 1
    return join_words(f"{n} favour{'s' if n == 1 else ''} {d}" if d != "mixed" else f"{n} mixed"
                      for d, n in sorted(counts.items(), key=lambda kv: -kv[1]))
