"""The measure registry: every measure declared once, in the module that computes it.

A measure module declares ``DECLARED = (Measure(...), ...)``; :func:`measures` finds every module
of this package that has one (adding a measure means adding a module, nothing else) and returns
the declarations in ``order``. Everything that lists measures is built from here: the engine
(:func:`monitor.measures.engine.compute_measures`), the catalog and method versions, the methods
page, the site's tables and charts, the national-pool nulls, the flags and the README's measure
table (``python -m monitor.measures --readme README.md`` rewrites it; a test checks it).

A declaration holds:

* documentation: ``label``, ``plain`` (words a reader without statistics training follows),
  ``formula``, ``sign``, ``source``, ``summary`` (the README line), ``p_value`` (what the p-value
  column holds, "" when nothing);
* computation: ``compute(inputs)`` gives the per-unit values (or ``(values, p_values)``) from an
  :class:`Inputs`; ``undefined(inputs)`` the rules that null a value, as ``(mask, reason)`` pairs
  in order of precedence (``inputs.base`` and ``inputs.asymmetry`` are the common ones);
  ``interval(seg, settings)`` the function behind its simulation interval; ``null(unit, votes_a,
  votes_b, n_units)`` the function evaluated on the national pool's simulated delegations;
* display: ``kind`` (share | count | score), ``digits``, ``headline`` (charted over time and across
  states), ``table`` (a column of the state pages' measure table), ``flag_of`` (show another
  measure's flag), ``thresholds`` (proposed reference lines);
* flags: ``flag``, a :class:`Flag` saying under which name and how the measure is judged.

Examples
--------
>>> m = by_name()["seats_a"]
>>> m.kind, m.flag.name, m.flag.null, m.flag.also_undefined_where
('count', 'seats', True, 'efficiency_gap_seats')
>>> [m.name for m in flagged() if m.flag.p_value]
['mean_median', 'lopsided_t']
"""

from __future__ import annotations

import importlib
import pkgutil
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any, Callable

import numpy as np

from .segments import Segments

NO_DISTRICTS = "no districts"
NO_VOTES = "a district has no votes for either major party (its two-party share is undefined)"
ALL_UNCONTESTED = "every district uncontested (the value would only reflect the uncontested policy)"
NON_FINITE = "non-finite result"

FAVOURS_A = "positive favours party a, negative party b"
KINDS = ("share", "count", "score")

Gate = tuple[Any, str]


class Inputs:
    """What the engine hands every measure: the districts of many units and the settings, with
    the common undefined rules and a cache for results several measures share."""

    def __init__(self, seg: Segments, uncontested: np.ndarray, settings):
        self.seg = seg
        self.settings = settings
        self.uncontested = uncontested
        self._cache: dict[str, Any] = {}

    def shared(self, key: str, make: Callable[[], Any]) -> Any:
        """``make()`` computed once per engine run (e.g. the mean-median test that both
        ``mean_median`` and ``mean_median_z`` read)."""
        if key not in self._cache:
            self._cache[key] = make()
        return self._cache[key]

    @property
    def n(self) -> np.ndarray:
        """Districts per unit."""
        return self.seg.count

    @cached_property
    def n_uncontested(self) -> np.ndarray:
        return self.seg.sum(self.uncontested.astype(np.float64))

    @cached_property
    def base(self) -> list[Gate]:
        """Undefined without districts, or when a district has no two-party votes."""
        return [(self.n == 0, NO_DISTRICTS), (self.seg.has_empty_district, NO_VOTES)]

    @cached_property
    def asymmetry(self) -> list[Gate]:
        """The base rules, then fewer than ``min_districts`` districts or every district
        uncontested: the common rules of the asymmetry measures."""
        s, n = self.settings, self.n
        return self.base + [(n < s.min_districts, f"fewer than {s.min_districts} districts"),
                            ((n > 0) & (self.n_uncontested == n), ALL_UNCONTESTED)]


@dataclass(frozen=True)
class Flag:
    """How a measure is judged for the flags.

    ``name``: the name its judgement carries in ``tails``, ``flag_events`` and ``watch.measures``;
    ``null``: flagged in the outer tails of its national-pool null; ``p_value``: flagged when its
    own p-value is below ``flags.p_threshold``; ``also_undefined_where``: another measure whose
    undefined rules apply too (a descriptive count judged like an asymmetry measure);
    ``short`` and ``label``: its name in dense tables and on pages (``(a)`` becomes party a's name);
    ``describe(value)``: the value in the words of the flag history; ``digits``: shown digits."""

    name: str
    null: bool = False
    p_value: bool = False
    short: str = ""
    label: str = ""
    also_undefined_where: str = ""
    describe: Callable[[float], str] | None = None
    digits: int | None = None


@dataclass(frozen=True)
class Measure:
    """One measure (see the module docstring for what each field is for)."""

    name: str
    order: int
    label: str
    plain: str
    formula: str
    sign: str
    source: str
    summary: str
    compute: Callable[[Inputs], Any]
    undefined: Callable[[Inputs], list[Gate]] = lambda inputs: inputs.asymmetry
    signed: bool = False
    p_value: str = ""
    kind: str = "score"
    digits: int = 3
    interval: Callable[[Segments, Any], np.ndarray] | None = None
    null: Callable[..., np.ndarray] | None = None
    #: ``null`` on a :class:`Segments` (``null(unit, a, b, n) == null_of(Segments(unit, a, b, n))``):
    #: the national-pool nulls evaluate every judged measure on one shared Segments per batch
    null_of: Callable[[Segments], np.ndarray] | None = None
    flag: Flag | None = None
    flag_of: str = ""
    headline: bool = False
    table: bool = False
    thresholds: tuple[dict, ...] = field(default=())
    version: str = "1"

    def __post_init__(self):
        if self.kind not in KINDS:
            raise ValueError(f"measure {self.name}: kind must be one of {KINDS}, got {self.kind!r}")
        if self.flag is not None and not (self.flag.null or self.flag.p_value):
            raise ValueError(f"measure {self.name}: a flag is judged by its null, its p-value or both")
        if self.flag is not None and self.flag.null and self.null is None:
            raise ValueError(f"measure {self.name}: flagged against its null, but has no null function")
        if self.flag is not None and self.flag.p_value and not self.p_value:
            raise ValueError(f"measure {self.name}: flagged by its p-value, but has none")

    @property
    def null_band(self) -> bool:
        """Its national-pool null is in its own units (so the band can be drawn behind it)."""
        return self.flag is not None and self.flag.null and self.flag.name == self.name

    @property
    def tail(self) -> str:
        """The name under which its flag is found in ``tails`` ("" when it has none)."""
        if self.flag_of:
            return self.flag_of
        return self.flag.name if self.flag is not None else ""


_MEASURES: list[Measure] | None = None

#: the modules of this package that declare no measure (the engine and its infrastructure)
INFRASTRUCTURE = frozenset({"__main__", "catalog", "engine", "intervals", "registry", "segments", "settings", "ttest"})


def measures() -> list[Measure]:
    """Every declared measure, in ``order``: the ``DECLARED`` tuples of this package's modules."""
    global _MEASURES
    if _MEASURES is None:
        found: list[Measure] = []
        package = importlib.import_module(__package__)
        for info in sorted(pkgutil.iter_modules(package.__path__), key=lambda i: i.name):
            if info.name in INFRASTRUCTURE:
                continue
            module = importlib.import_module(f"{__package__}.{info.name}")
            found.extend(getattr(module, "DECLARED", ()))
        names = [m.name for m in found]
        twice = sorted({n for n in names if names.count(n) > 1})
        if twice:
            raise ValueError(f"measures declared twice: {twice}")
        orders = [m.order for m in found]
        if len(set(orders)) != len(orders):
            raise ValueError("two measures share an order number")
        _MEASURES = sorted(found, key=lambda m: m.order)
    return list(_MEASURES)


def by_name() -> dict[str, Measure]:
    return {m.name: m for m in measures()}


def flagged() -> list[Measure]:
    """The measures the flags judge, in order."""
    return [m for m in measures() if m.flag is not None]


def flag_by_name() -> dict[str, Measure]:
    """Flag name -> the measure judged under it."""
    return {m.flag.name: m for m in flagged()}
