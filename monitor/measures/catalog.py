"""The measures the engine computes, from the registry (:mod:`monitor.measures.registry`).

``MEASURES`` is what the methods page renders; ``MEASURE_VERSIONS`` is stored with every value
(bump a measure's ``version`` in its declaration whenever its formula, tie rule or undefined rule
changes).

Examples
--------
>>> MEASURE_NAMES[:3], MEASURE_VERSIONS["efficiency_gap"]
(['vote_share', 'seat_share', 'seats_a'], '1')
"""

from __future__ import annotations

from .registry import FAVOURS_A, Measure, measures

#: a measure's documentation is its declaration (name, label, formula, sign, source, ...)
MeasureDoc = Measure

MEASURES: list[Measure] = measures()

MEASURE_NAMES: list[str] = [m.name for m in MEASURES]

#: Method version of each measure: bump on any change of formula, tie rule or undefined rule.
MEASURE_VERSIONS: dict[str, str] = {m.name: m.version for m in MEASURES}

__all__ = ["FAVOURS_A", "MEASURES", "MEASURE_NAMES", "MEASURE_VERSIONS", "MeasureDoc"]


#: The README's measure table sits between these two lines (``python -m monitor.measures --readme
#: README.md`` rewrites it; a test checks that it matches the registry).
README_START = "<!-- measures table: generated from the registry by `python -m monitor.measures --readme README.md` -->"
README_END = "<!-- end of the measures table -->"


def _judged(m: Measure) -> str:
    if m.flag is None:
        return ""
    how = [w for w, on in (("national-pool null", m.flag.null), ("own p-value", m.flag.p_value)) if on]
    name = "" if m.flag.name == m.name else f" (as `{m.flag.name}`)"
    return " and ".join(how) + name


def readme_table() -> str:
    """The README's measure table, one row per declared measure, and the interval sentence."""
    lines = [README_START, "", "| measure | what it says | signed | flagged by | source |", "|---|---|---|---|---|"]
    for m in MEASURES:
        lines.append(f"| `{m.name}` | {m.summary} | {'yes' if m.signed else ''} | {_judged(m)} | {m.source} |")
    with_interval = ", ".join(f"`{m.name}`" for m in MEASURES if m.interval is not None)
    lines += ["", f"95% intervals ({with_interval}): the measure on simulated elections with district-level "
                  "vote noise of SD `measures.noise_sd` around the observed one (Gelman & King 1994, the approach).",
              "", README_END]
    return "\n".join(lines)


def with_readme_table(text: str) -> str:
    """``text`` (the README) with its measure table replaced by :func:`readme_table`."""
    start, end = text.find(README_START), text.find(README_END)
    if start < 0 or end < start:
        raise ValueError("the README has no measures table markers")
    return text[:start] + readme_table() + text[end + len(README_END):]
