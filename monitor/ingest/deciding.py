"""Which contest decides a seat when a file holds more than one for it.

A seat is (cycle, state, chamber, district, position): a district's numbered seats (positions)
are seats of their own, each decided by its own contests. Its contests differ by kind: ``general`` (the
regular election, first or only round), ``runoff`` (the regular runoff after a first round),
``special`` and ``special runoff``. Every contest is stored; exactly one per seat decides it
and enters the measures, the others stay as history with the reason they were left out.

The default order needs no configuration: a regular contest over a special one, and within
one kind the runoff over its first round. So a special counts only when the seat has no
regular contest (a special that replaced the regular general, as a court-ordered one may in
some districts of a state), and a special held alongside the regular general (for the rest of
an unexpired term) stays history. A mapping's ``[deciding]`` table can give another order for
the whole file (``order``) or for some states (``[deciding.states]``); a kind missing from an
order never decides.
"""

from __future__ import annotations

import difflib
from dataclasses import dataclass, field
from typing import Iterable

KINDS = ("runoff", "general", "special runoff", "special")
DEFAULT_ORDER = KINDS  # the regular runoff, the regular general, the special runoff, the special


def kind_of(special: bool, runoff: bool) -> str:
    return ("special runoff" if runoff else "special") if special else ("runoff" if runoff else "general")


@dataclass(frozen=True)
class DecidingRules:
    """The order in which a seat's contests decide it: for the file, and for some states."""

    order: tuple[str, ...] = DEFAULT_ORDER
    states: dict[str, tuple[str, ...]] = field(default_factory=dict)  # state code (upper case) -> order
    declared: bool = False  # the file-wide order comes from a mapping's [deciding] table

    def order_for(self, state: str) -> tuple[tuple[str, ...], str]:
        """The order for ``state`` and where it comes from, in words for the report."""
        if state in self.states:
            return self.states[state], f"the mapping's [deciding.states] order for {state}"
        return self.order, ("the mapping's [deciding] order" if self.declared else "the default order")


def parse_rules(table: object, problems: list[str]) -> DecidingRules:
    """A mapping's ``[deciding]`` table; problems are appended in words (a configuration error)."""
    if table is None:
        return DecidingRules()
    if not isinstance(table, dict):
        problems.append("deciding must be a table ([deciding] on its own line, then order = [...])")
        return DecidingRules()
    for key in table:
        if key not in ("order", "states"):
            hint = difflib.get_close_matches(key, ["order", "states"], n=1)
            problems.append(f"[deciding] {key!r} is not a key (order, states)"
                            + (f"; did you mean {hint[0]!r}?" if hint else ""))
    order = _order(table.get("order", list(DEFAULT_ORDER)), "[deciding] order", problems)
    states: dict[str, tuple[str, ...]] = {}
    raw_states = table.get("states", {})
    if not isinstance(raw_states, dict):
        problems.append("[deciding.states] must be a table of state code = [kinds]")
        raw_states = {}
    for code, kinds in raw_states.items():
        states[code.strip().upper()] = _order(kinds, f"[deciding.states] {code}", problems)
    return DecidingRules(order, states, declared="order" in table)


def _order(value: object, where: str, problems: list[str]) -> tuple[str, ...]:
    if not isinstance(value, list) or not value or not all(isinstance(v, str) for v in value):
        problems.append(f"{where} must be a non-empty list of contest kinds ({', '.join(map(repr, KINDS))})")
        return DEFAULT_ORDER
    out = []
    for v in value:
        k = " ".join(v.split()).casefold()
        if k not in KINDS:
            hint = difflib.get_close_matches(k, KINDS, n=1)
            problems.append(f"{where}: {v!r} is not a contest kind ({', '.join(map(repr, KINDS))})"
                            + (f"; did you mean {hint[0]!r}?" if hint else ""))
        elif k in out:
            problems.append(f"{where}: {v!r} is listed twice")
        else:
            out.append(k)
    return tuple(out)


def seat_of(key: tuple) -> tuple:
    """The seat of a contest key: (cycle, state, chamber, district, position)."""
    return (*key[:4], key[6] if len(key) > 6 else "")


def decide(contests: Iterable[tuple], rules: DecidingRules) -> dict[tuple, str | None]:
    """For each contest key ``(cycle, state, chamber, district, special, runoff, position)``: ``None``
    when it decides its seat, else why it does not (in words, naming what decides instead)."""
    seats: dict[tuple, dict[str, tuple]] = {}
    for key in contests:
        seats.setdefault(seat_of(key), {})[kind_of(key[4], key[5])] = key
    out: dict[tuple, str | None] = {}
    for seat, kinds in seats.items():
        order, origin = rules.order_for(seat[1])
        winner = next((k for k in order if k in kinds), None)
        for kind, key in kinds.items():
            if kind == winner:
                out[key] = None
            elif winner is None:
                out[key] = (f"{origin} ({', '.join(order)}) has no place for a {kind} contest: "
                            "no contest decides this seat")
            elif kind not in order:
                out[key] = f"the {winner} contest decides this seat ({origin} has no place for a {kind} contest)"
            else:
                out[key] = f"the {winner} contest decides this seat ({origin}: {', '.join(order)})"
    return out
