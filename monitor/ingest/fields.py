"""Parsing one cell into a typed value; each parser returns ``(value, reason)``, reason None if fine."""

from __future__ import annotations

import re

_INT = re.compile(r"^[+]?\d+$")
# thousands separators: a comma, a space, a no-break space or a narrow no-break space, the same
# one throughout the number ("1,234,567", "1 234 567")
_GROUPED = re.compile(r"^\d{1,3}(?P<sep>[, \u00a0\u202f])\d{3}(?:(?P=sep)\d{3})*$")
_FLOATISH = re.compile(r"^[+-]?(\d+\.\d*|\.\d+|\d+(\.\d*)?[eE][+-]?\d+)$")
YEAR_RANGE = (1789, 2200)
TRUE = {"1", "true", "yes", "y", "t"}
FALSE = {"0", "false", "no", "n", "f", ""}
CERTIFICATION = ("certified", "unofficial")


def parse_votes(cell: str, max_votes: int):
    text = cell.strip()
    if not text:
        return None, "votes is empty"
    grouped = _GROUPED.match(text)
    if grouped:
        text = text.replace(grouped["sep"], "")
    if text.startswith("-") and (_INT.match(text[1:]) or _FLOATISH.match(text)):
        return None, f"votes {cell.strip()!r} is negative"
    if not _INT.match(text):
        if _FLOATISH.match(text):
            return None, f"votes {cell.strip()!r} is not a whole number"
        return None, f"votes {cell.strip()!r} is not a number"
    if len(text.lstrip("+0")) > len(str(max_votes)):  # int() refuses 4,300+ digits; no count is that long
        return None, (f"votes ({len(text.lstrip('+0'))} digits) is above the sane bound of {max_votes:,} "
                      "(load.max_votes_per_row)")
    value = int(text)
    if value > max_votes:
        return None, f"votes {value:,} is above the sane bound of {max_votes:,} (load.max_votes_per_row)"
    return value, None


def placeholder_count(cell: str, counts: frozenset[int]) -> str:
    """The cell's text when it holds one of the declared placeholder ``counts`` (a whole number,
    perhaps negative, such as ``-1``), else ``""``."""
    text = cell.strip()
    if counts and re.match(r"^[+-]?\d{1,12}$", text) and int(text) in counts:
        return text
    return ""


def parse_cycle(cell: str):
    text = cell.strip()
    if not re.match(r"^\d{4}$", text) or not YEAR_RANGE[0] <= int(text) <= YEAR_RANGE[1]:
        return None, f"cycle {cell.strip()!r} is not a year ({YEAR_RANGE[0]}-{YEAR_RANGE[1]})"
    return int(text), None


def parse_seats(cell: str):
    text = cell.strip()
    if not text:
        return 1, None
    if not _INT.match(text) or len(text.lstrip("+0")) > 4 or int(text) < 1 or int(text) > 1000:
        return None, f"seats {text!r} is not a whole number of seats (1 or more)"
    return int(text), None


def parse_flag(cell: str, column: str):
    text = cell.strip().casefold()
    if text in TRUE:
        return True, None
    if text in FALSE:
        return False, None
    return None, f"{column} {cell.strip()!r} is not 0/1 (or true/false)"


def parse_certification(cell: str):
    text = cell.strip().casefold()
    if not text:
        return "certified", None
    if text not in CERTIFICATION:
        return None, f"status {cell.strip()!r} is neither 'certified' nor 'unofficial'"
    return text, None


def parse_text(cell: str, column: str, *, required: bool):
    text = " ".join(cell.split())
    if required and not text:
        return None, f"{column} is empty"
    return text, None


def shown(text: str) -> str:
    """``text`` safe to print in a message: control and other unprintable characters escaped, so
    that a header or a code taken from a file cannot move the cursor or recolour a terminal."""
    return text if text.isprintable() else text.encode("unicode_escape").decode("ascii")
