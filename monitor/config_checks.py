"""The value checks of the options in :data:`monitor.config.OPTIONS`: each takes a value read
from ``levelfield.toml`` and returns None when it is valid, else what is wrong with it in words."""

from __future__ import annotations

import re

_COLOUR = re.compile(r"^#[0-9a-fA-F]{6}$")


def _typed(kind, *, low=None, high=None, choices=None, above=None, below=None):
    def check(value):
        if kind is float and isinstance(value, int) and not isinstance(value, bool):
            value = float(value)
        if not isinstance(value, kind) or (kind is int and isinstance(value, bool)):
            return f"must be {kind.__name__}, got {type(value).__name__} {value!r}"
        if choices is not None and value not in choices:
            return f"must be one of {', '.join(map(repr, choices))}, got {value!r}"
        if low is not None and value < low:
            return f"must be at least {low}, got {value!r}"
        if high is not None and value > high:
            return f"must be at most {high}, got {value!r}"
        if above is not None and value <= above:
            return f"must be above {above}, got {value!r}"
        if below is not None and value >= below:
            return f"must be below {below}, got {value!r}"
        return None

    return check


def _labels(value):
    if not isinstance(value, list) or not value or not all(isinstance(v, str) and v for v in value):
        return "must be a non-empty list of non-empty strings"
    return None


def _base_url(value):
    if not isinstance(value, str):
        return f"must be a string, got {type(value).__name__} {value!r}"
    if value and not re.match(r"^https?://[^\s/?#]+(/[^\s?#]*)?$", value):
        return f'must be empty or an http(s) address like "https://example.org/watch/", got {value!r}'
    return None


def _count(value) -> bool:
    return isinstance(value, int) and not isinstance(value, bool) and value >= 1


def _expected_counts(value):
    """``{chamber: {STATE: N | {districts = N, seats = M}}}``."""
    if not isinstance(value, dict):
        return f"must be a table like expected.federal.QV = 12, got {value!r}"
    for chamber, states in value.items():
        if not isinstance(states, dict):
            return f"has {chamber} = {states!r}: must be a table of state codes, like expected.{chamber}.QV = 12"
        for state, count in states.items():
            where = f"has {chamber}.{state} = {count!r}"
            if isinstance(count, dict):
                unknown = sorted(set(count) - {"districts", "seats"})
                if unknown:
                    return f"{where}: unknown key(s) {', '.join(unknown)} (districts and seats only)"
                if "districts" not in count:
                    return f"{where}: give districts (and, optionally, seats)"
                if not all(_count(v) for v in count.values()):
                    return f"{where}: districts and seats must be whole numbers of at least 1"
            elif not _count(count):
                return f"{where}: must be a whole number of districts (at least 1) or {{ districts = N, seats = M }}"
    return None


def _state_names(value):
    """``{CODE: "Name"}``: state codes follow the results' case rules (stored in upper case)."""
    if not isinstance(value, dict):
        return f'must be a table of state code = "name", like QV = "Quillan Vale", got {value!r}'
    seen: dict[str, str] = {}
    for code, name in value.items():
        if not code.strip() or code != code.strip():
            return f"has the state code {code!r}: a code has no surrounding spaces and is not empty"
        if not isinstance(name, str) or not name.strip():
            return f"has {code} = {name!r}: the name must be a non-empty string"
        if code.upper() in seen:
            return (f"names {seen[code.upper()]!r} and {code!r}, the same state code (codes are stored in "
                    "upper case)")
        seen[code.upper()] = code
    return None


def _staggered_classes(value):
    """``{chamber: N | {STATE: N, "*": N}}``: the classes a chamber is elected in (1 to 10)."""
    if not isinstance(value, dict):
        return f"must be a table like classes.state_upper = 2, got {value!r}"
    for chamber, classes in value.items():
        for where, n in (classes.items() if isinstance(classes, dict) else [("", classes)]):
            if not (_count(n) and n <= 10):  # monitor.staggered.MAX_CLASSES
                return (f"has {chamber}{'.' + where if where else ''} = {n!r}: must be a whole number of classes, "
                        f"1 (not staggered) to 10, or a table of states like classes.{chamber} = {{ QV = 2 }}")
    return None


def _colour(value):
    if not isinstance(value, str) or not _COLOUR.match(value):
        return f'must be a colour like "#1b7f79", got {value!r}'
    return None
