"""Plain-text formatting of numbers for pages, tables and chart descriptions (one place, so a
number reads the same in a table, a description and a download note)."""

from __future__ import annotations

import datetime as dt

DASH = "\u2013"  # en dash: "no value"
MINUS = "\u2212"


def missing(value) -> bool:
    """None, NaN or pandas' NA."""
    if value is None:
        return True
    if isinstance(value, float):
        return value != value
    if isinstance(value, (int, str)):
        return False
    try:
        return bool(value != value)
    except TypeError:  # pandas.NA
        return True


def signed(value, digits: int = 3) -> str:
    """``+0.031`` / ``−0.012`` (a real minus sign), en dash when missing."""
    if missing(value):
        return DASH
    text = f"{float(value):+.{digits}f}"
    return text.replace("-", MINUS)


def number(value, digits: int = 2) -> str:
    if missing(value):
        return DASH
    value = float(value)
    if value == int(value) and abs(value) < 1e15 and digits >= 0:
        return f"{int(value):,}".replace("-", MINUS)
    return f"{value:,.{digits}f}".replace("-", MINUS)


def count(value) -> str:
    if missing(value):
        return DASH
    return f"{int(round(float(value))):,}"


def share(value, digits: int = 1) -> str:
    """A share as a percentage: ``0.523`` -> ``52.3%``."""
    if missing(value):
        return DASH
    return f"{100 * float(value):.{digits}f}%".replace("-", MINUS)


def pvalue(value) -> str:
    if missing(value):
        return DASH
    value = float(value)
    return "< 0.001" if value < 0.001 else f"{value:.3f}"


def percentile(value) -> str:
    """A percentile stored as a fraction in [0, 1], shown as ``97.5th``-style text."""
    if missing(value):
        return DASH
    return f"{100 * float(value):.1f}"


def stamp(value: dt.datetime | None) -> str:
    if value is None:
        return DASH
    return value.astimezone(dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")


def day(value: dt.datetime | None) -> str:
    if value is None:
        return DASH
    return value.astimezone(dt.timezone.utc).strftime("%Y-%m-%d")


def rfc3339(value: dt.datetime) -> str:
    return value.astimezone(dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def text(value) -> str:
    """A text cell: empty for None / NaN."""
    return "" if missing(value) or value is None else str(value)


def size(n: int) -> str:
    """A file size: ``812 bytes``, ``3.2 KiB``, ``5.7 MiB``."""
    if n < 1024:
        return f"{n} bytes"
    if n < 1024 ** 2:
        return f"{n / 1024:.1f} KiB"
    return f"{n / 1024 ** 2:.1f} MiB"
