"""Plain words for everything a person reads on the site and in the feed.

The store, the downloads and the CLI speak in codes (party ``a``/``b``, measure identifiers, signed
numbers positive for party a). The pages say the same things in words a journalist can quote:
party names, measure names, and a direction with every signed number ("favours Upland Party by
2.6 seats"). This module is the one place that turns the first into the second.

**One sign rule.** Every seat count at stake is shown through :meth:`Words.stake`: the party it
names is the party the stored number's sign favours (positive: party a), after rounding to the
digits shown, so a number that rounds to zero favours nobody. No page writes a direction and a
seat count separately.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from monitor.measures import registry
from monitor.publish import formats as F

#: Digits of a seat count at stake, everywhere it is shown.
STAKE_DIGITS = 1

#: Who drew a plan, by its ``drawn_by`` code (party codes are named by :meth:`Words.drawer`).
DRAWERS = {"split": "split control", "commission": "a commission", "court": "a court", "other": "another body"}
#: The words for a plan era that no plans file covers (inferred per decade): who drew it is unknown.
NOT_RECORDED = "not recorded (era inferred)"


@dataclass(frozen=True)
class Stake:
    """A seat count at stake in words: ``text`` ("favours Upland Party by 2.6 seats"), the party
    ``code`` it favours (None when it rounds to zero or is unknown) and the stored ``value``."""

    text: str
    code: str | None
    value: float | None
    amount: str = ""


class Words:
    """Plain words for one site: its two parties and the measures' names."""

    def __init__(self, parties: dict):
        self.parties = parties
        self.names = {"a": parties["a"].name, "b": parties["b"].name}
        # the same stored sentences come back on many pages: each is put in words once
        self._said: dict[tuple, str] = {}

    # --- parties and directions ---------------------------------------------------------------
    def party(self, code) -> str:
        return self.names.get(code, F.DASH if F.missing(code) else str(code))

    def other(self, code: str) -> str:
        return "b" if code == "a" else "a"

    def sign_code(self, value, digits: int = STAKE_DIGITS) -> str | None:
        """The party a signed number favours (positive: a), after rounding to ``digits``."""
        if F.missing(value):
            return None
        rounded = round(float(value), digits)
        return "a" if rounded > 0 else "b" if rounded < 0 else None

    def stake(self, value) -> Stake:
        """Seats at stake (excess seats, positive for party a) in words, by the one sign rule."""
        if F.missing(value):
            return Stake("seats at stake not known", None, None)
        code = self.sign_code(value)
        amount = f"{abs(float(value)):.{STAKE_DIGITS}f}"
        if code is None:
            return Stake(f"no seats at stake ({amount})", None, float(value), amount)
        return Stake(f"favours {self.names[code]} by {amount} seats", code, float(value), amount)

    def leaning(self, value, digits: int = 3) -> str:
        """A signed measure value as a size and a party: ``0.067 towards Upland Party``."""
        if F.missing(value):
            return F.DASH
        code = self.sign_code(value, digits)
        size = f"{abs(float(value)):.{digits}f}"
        return size if code is None else f"{size} towards {self.names[code]}"

    # --- who drew it --------------------------------------------------------------------------
    def drawer(self, drawn_by, inferred=False) -> str:
        """Who drew a plan: a party's name, a body, or "not recorded (era inferred)" for an era no
        plans file covers ("another body" stays for a loaded plan drawn by some other body)."""
        if inferred or F.missing(drawn_by) or drawn_by in ("", None):
            return NOT_RECORDED
        if drawn_by == "party_a":
            return self.names["a"]
        if drawn_by == "party_b":
            return self.names["b"]
        return DRAWERS.get(drawn_by, str(drawn_by))

    # --- measures -----------------------------------------------------------------------------
    def measure(self, name: str) -> str:
        """A judged or stored measure's name in running text (lower case, party named)."""
        return measure_name(name, self.names)

    def measure_list(self, names) -> str:
        return join_words([self.measure(n) for n in names])

    # --- stored texts rewritten ---------------------------------------------------------------
    def change(self, text: str) -> str:
        """A correction's change text (:func:`monitor.reduce.describe_changes`) with party names."""
        text = re.sub(r"seats of party ([ab]): ", lambda m: f"{self.names[m.group(1)]} seats: ", text)
        text = re.sub(r"votes of party ([ab]): ", lambda m: f"{self.names[m.group(1)]} votes: ", text)
        text = re.sub(r"winner (\w+) -> (\w+)",
                      lambda m: f"winner {self._winner(m.group(1))} -> {self._winner(m.group(2))}", text)
        return text.replace(" -> ", " \u2192 ")

    def _winner(self, code: str) -> str:
        return self.names.get(code, {"other": "another party", "split": "split", "none": "nobody"}.get(code, code))

    def why(self, text, measure=None) -> str:
        """A flag event's stored reason (:mod:`monitor.events`) in plain words."""
        text = F.text(text)
        if not text:
            return ""
        key = ("why", text)
        if key not in self._said:
            self._said[key] = self._why(text)
        return self._said[key]

    def _why(self, text: str) -> str:
        m = _PLAN_WHY.match(text)
        if m:
            cycles = ", ".join(m.group("cycles").split())
            stake = self.stake(float(m.group("stake"))).text if m.group("stake") else "seats at stake not known"
            return (f"cycles {cycles} each flagged by at least two measures favouring {self.party(m.group('party'))} "
                    f"({self.measure_list((m.group('measures') or '').split())}); seats at stake: {stake}")
        text = _SEATS_WON.sub(lambda m: f"{self.names[m.group(1)]} won {m.group(2)} seats", text)
        text = _VALUE.sub(lambda m: f"{self.measure(m.group(1))} {self.leaning(float(m.group(2)))}", text)
        text = _PERCENTILE.sub(lambda m: f"percentile {100 * float(m.group(1)):.1f}", text)
        text = _UNDEFINED.sub(lambda m: f"{self.measure(m.group(1))} is now undefined", text)
        text = _BARE.sub(lambda m: self.measure(m.group(1)), text)  # any identifier left: its name
        return self.plain(text)

    def plain(self, text: str) -> str:
        """Codes in a sentence replaced by names: "party a" -> the name, "favours a" -> "favours"
        the name, "(positive favours a)" dropped (the sentence then names the party)."""
        key = ("plain", text)
        if key not in self._said:
            self._said[key] = self._plain(text)
        return self._said[key]

    def _plain(self, text: str) -> str:
        a, b = self.names["a"], self.names["b"]
        text = re.sub(r"\s*\(positive (?:favours|means more for) a\)", "", text)
        text = re.sub(r"\b[Pp]arty ([ab])\b(?!')", lambda m: self.names[m.group(1)], text)
        text = re.sub(r"\b[Pp]arty ([ab])'s\b", lambda m: self.names[m.group(1)] + "'s", text)
        text = re.sub(r"\bfavou?r(s|ing)? ([ab])\b", lambda m: f"favour{m.group(1) or ''} {self.names[m.group(2)]}", text)
        text = re.sub(r"\(a\)", f"({a})", text)
        text = re.sub(r"\(b\)", f"({b})", text)
        return text


def measure_name(name: str, names: dict[str, str]) -> str:
    """The plain name of a measure or a judged measure (``seats`` is the seats against the national pool)."""
    judged = registry.flag_by_name().get(name)
    if judged is not None and judged.flag.short:
        text = judged.flag.short
    else:
        m = next((x for x in registry.measures() if x.name == name), None)
        text = m.label if m is not None else name.replace("_", " ")
        text = text[:1].lower() + text[1:] if text[:2] != text[:2].upper() else text
    return text.replace("(a)", f"({names['a']})").replace("(b)", f"({names['b']})")


def join_words(items) -> str:
    """``x``, ``x and y``, ``x, y and z``."""
    items = [i for i in items if i]
    if len(items) <= 1:
        return "".join(items)
    return ", ".join(items[:-1]) + " and " + items[-1]


def _identifiers() -> str:
    names = {m.name for m in registry.measures()} | set(registry.flag_by_name())
    return "|".join(sorted((re.escape(n) for n in names), key=len, reverse=True))


_IDS = _identifiers()
_PLAN_WHY = re.compile(r"^cycles (?P<cycles>[\d ]+) each flagged by at least two measures favouring (?P<party>[ab])"
                       r"(?: \((?P<measures>[^)]*)\))?(?:; seats at stake (?P<stake>[+-]?[\d.]+)"
                       r" \(positive favours a\)|; seats at stake unknown)?$")
_SEATS_WON = re.compile(r"\bseats won by ([ab]) (\d+(?:\.\d+)?)")
_VALUE = re.compile(rf"\b({_IDS}) ([+-]\d+(?:\.\d+)?)\b")
_PERCENTILE = re.compile(r"percentile (\d\.\d+)")
_UNDEFINED = re.compile(rf"\b({_IDS}) is now undefined")
#: Identifiers that are not also words (``efficiency_gap``, not ``seats``): safe to replace anywhere.
_BARE = re.compile(r"\b(" + "|".join(i for i in _IDS.split("|") if "_" in i) + r")\b")
