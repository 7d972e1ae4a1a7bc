"""The chart kit: the neutral palette, the :class:`Chart` and :class:`Style` objects, value
formatting and the small Vega-Lite building blocks every chart of :mod:`monitor.publish.charts`
is made of (encodings, tooltips, rules, cycle axes, plan-era bands)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import altair as alt
import numpy as np
import pandas as pd

from monitor.config import Party
from monitor.measures import registry
from monitor.publish import formats as F
from monitor.publish.words import Words

INK = "#2b2a27"
MUTED = "#6f6b63"
FAINT = "#b9b4a9"
GRID = "#e7e3da"
ERA_FILLS = ("#f3f0e8", "#e6e2d6")
BAND = "#cdd3d8"
FONT = "system-ui, -apple-system, 'Segoe UI', Roboto, 'Helvetica Neue', Arial, sans-serif"
NOT_FLAGGED = "not flagged"
#: Units below ``flags.min_districts``: never flagged, shown apart and in grey.
TOO_FEW = "too few districts to flag"
#: The codes of the four flag labels (:meth:`Style.flag_domain`) in compact chart data.
FLAG_CODES = ("a", "b", "n", "x")
SCHEMA_URL = alt.SCHEMA_URL

CONFIG = {
    "font": FONT,
    "background": "#ffffff",
    "view": {"stroke": None},
    "axis": {"labelColor": MUTED, "titleColor": INK, "gridColor": GRID, "domainColor": FAINT,
             "tickColor": FAINT, "labelFontSize": 11, "titleFontSize": 12, "titleFontWeight": "normal",
             "titlePadding": 8},
    "legend": {"orient": "bottom", "labelColor": INK, "titleColor": INK, "labelFontSize": 11,
               "titleFontSize": 11, "titleFontWeight": "normal", "symbolStrokeWidth": 1.5,
               "labelLimit": 320},
    "text": {"color": INK, "fontSize": 11},
}

#: Digits shown for each measure (three for share-like measures).
DIGITS = {**{m.name: m.digits for m in registry.measures()},
          **{m.flag.name: m.flag.digits for m in registry.flagged() if m.flag.digits is not None}}


def fmt_measure(measure: str, value) -> str:
    return F.signed(value, DIGITS.get(measure, 3))


@dataclass
class Chart:
    """One chart: the spec, its accessible text and the table of its data."""

    id: str
    title: str
    description: str
    spec: dict
    columns: list[str] = field(default_factory=list)
    rows: list[list[str]] = field(default_factory=list)
    #: the id and title of a table of the page that holds this chart's numbers (with others'), when
    #: the chart carries no table of its own (:func:`monitor.publish.compact.measure_table`)
    table_ref: str = ""
    table_title: str = ""


@dataclass(frozen=True)
class Style:
    a: Party
    b: Party

    def party(self, code) -> str:
        return {"a": self.a.name, "b": self.b.name}.get(code, NOT_FLAGGED)

    def flag_domain(self) -> list[str]:
        return [f"favours {self.a.name}", f"favours {self.b.name}", NOT_FLAGGED, TOO_FEW]

    def flag_colour(self) -> dict:
        return {"domain": self.flag_domain(), "range": [self.a.colour, self.b.colour, MUTED, FAINT]}

    def flag_shape(self) -> dict:
        return {"domain": self.flag_domain(), "range": ["triangle-up", "triangle-down", "circle", "circle"]}

    @property
    def words(self) -> Words:
        """The site's words helpers (:mod:`monitor.publish.words`) for these two parties."""
        return Words({"a": self.a, "b": self.b})

    def lean(self, measure: str, value) -> str:
        """A signed measure value in words, by the one sign rule: ``0.067 towards Upland Party``."""
        return self.words.leaning(value, DIGITS.get(measure, 3))

    def flag_codes(self) -> dict[str, str]:
        """flag label -> the one-letter code a compact dataset stores (:meth:`flag_calculate`)."""
        return dict(zip(self.flag_domain(), FLAG_CODES))

    def flag_calculate(self, code_field: str = "f", as_field: str = "flag") -> dict:
        """A Vega-Lite transform that turns the stored code back into its label (for scales and
        tooltips): a chart's data then carries one letter per state instead of the label."""
        expr = "'" + self.flag_domain()[2].replace("'", "\\'") + "'"
        for code, label in reversed(list(zip(FLAG_CODES, self.flag_domain()))):
            if code != "n":
                expr = f"datum.{code_field} === '{code}' ? '" + label.replace("'", "\\'") + f"' : ({expr})"
        return {"calculate": expr, "as": as_field}

    def flag_label(self, flagged, direction, too_few: bool = False) -> str:
        if flagged and direction in ("a", "b"):
            return f"favours {self.party(direction)}"
        return TOO_FEW if too_few else NOT_FLAGGED


# --- spec helpers -------------------------------------------------------------------------------
def _clean(value):
    kind = type(value)  # the plain Python types first: most values of every chart are these
    if kind is float:
        return round(value, 6) if value - value == 0 else None  # NaN and infinities -> null
    if kind is int or kind is str:
        return value
    if value is None or value is pd.NA:
        return None
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        value = float(value)
        return None if math.isnan(value) or math.isinf(value) else round(value, 6)
    if isinstance(value, np.bool_):
        return bool(value)
    return value


def records(frame: pd.DataFrame, columns: list[str], names: list[str] | None = None, digits: int = 6) -> list[dict]:
    """Rows as JSON-ready dicts (NaN -> null, floats rounded to ``digits``), keyed by ``names``
    (default: the column names). ``frame`` may also be a mapping of column lists."""
    cols = [frame[c].tolist() if isinstance(frame, pd.DataFrame) else list(frame[c]) for c in columns]
    keys = names or columns
    out = [{c: _clean(v) for c, v in zip(keys, row)} for row in zip(*cols)]
    if digits < 6:
        for row in out:
            for k, v in row.items():
                if isinstance(v, float):
                    row[k] = round(v, digits)
    return out


def _columns(frame: pd.DataFrame) -> zip:
    """(state_label, value, flag) of each row of a chart's frame, from column lists."""
    return zip(*(frame[c].tolist() for c in ("state_label", "value", "flag")))


def _js(text: str) -> str:
    """A string literal for a Vega expression."""
    return "'" + text.replace("\\", "\\\\").replace("'", "\\'") + "'"


def _q(field_name: str, **extra) -> dict:
    return {"field": field_name, "type": "quantitative", **extra}


def _n(field_name: str, **extra) -> dict:
    return {"field": field_name, "type": "nominal", **extra}


def _tip(field_name: str, kind: str = "quantitative", title: str | None = None, fmt: str | None = None) -> dict:
    out = {"field": field_name, "type": kind}
    if title:
        out["title"] = title
    if fmt:
        out["format"] = fmt
    return out


def _spec(layers: list[dict], datasets: dict[str, list], height: int) -> dict:
    """A layered spec. Its look (:data:`CONFIG`, the same for every chart) is not repeated in each
    spec: a page carries it once (``chart-config``) and ``site/assets/charts.js`` hands it to the
    renderer with every chart (``vegaEmbed``'s ``config`` option), which saves 0.6 KB a chart."""
    return {"$schema": SCHEMA_URL, "width": "container", "height": height, "autosize": {"type": "fit-x", "contains": "padding"},
            "datasets": datasets, "layer": layers}


def _rule(axis: str, value: float, title: str, colour: str = FAINT, dash: list | None = None) -> dict:
    """A reference line; ``title`` repeats the axis title so that layers merge to one title."""
    mark = {"type": "rule", "color": colour}
    if dash:
        mark["strokeDash"] = dash
    return {"data": {"values": [{"v": value}]}, "mark": mark, "encoding": {axis: _q("v", title=title)}}


def _signed_title(label: str, style: Style) -> list[str]:
    """An axis title in two short lines, the measure and then its direction, so that it fits the
    narrow charts of the cycle pages instead of running past their edge."""
    return [label, f"positive favours {style.a.name}"]


def _cycle_ticks(lo: float, hi: float, most: int = 7) -> list[int]:
    """Explicit cycle ticks: every 2, 4, 10, 20 or 50 years, the finest step giving at most ``most``
    ticks between the first and last cycle shown (``lo + 1`` to ``hi - 1``), so labels never crowd.

    >>> _cycle_ticks(1971, 2027)
    [1980, 1990, 2000, 2010, 2020]
    >>> _cycle_ticks(2017, 2025)
    [2018, 2020, 2022, 2024]
    """
    first, last = math.ceil(lo + 1), math.floor(hi - 1)
    for step in (2, 4, 10, 20, 50):
        values = list(range(math.ceil(first / step) * step, last + 1, step))
        if len(values) <= most:
            break
    return values or [first]


def _cycle_axis(lo: float, hi: float) -> dict:
    """The cycle x encoding: explicit ticks (see ``_cycle_ticks``), labels centred on their tick
    (not pushed flush against the ends, which made neighbours collide) and, as a last resort at very
    narrow widths, overlapping labels dropped."""
    return _q("cycle", title="cycle", scale={"domain": [lo, hi], "nice": False, "zero": False},
              axis={"format": "d", "values": _cycle_ticks(lo, hi), "tickMinStep": 2, "labelFlush": False,
                    "labelOverlap": "greedy", "labelSeparation": 6})


#: Height in pixels of the band above the plot that holds the plan-era labels.
ERA_BAND = 16


#: Width of one character of an era label (10 px system-ui), a little over the widest average, so a
#: label shown is never cut.
ERA_CHAR = 6.2


def _eras(eras: pd.DataFrame, lo: float, hi: float) -> tuple[list[dict], list[dict]]:
    """Era rectangles (first - 1 to last + 1, clipped to the shown cycles), alternately shaded
    (two layers with a constant colour each, so the colour scale stays free for the data), and
    the era labels: ``[rect_even, rect_odd]`` go under the data, ``[labels]`` after it.

    The rectangles reach ``ERA_BAND`` pixels above the plot; the labels sit in that band, outside
    the data area. A label is never cut: an era too narrow for its whole label shows its number
    instead (``era_no``, 1 for the first era of the state; the page's key and the chart's
    description give each number's plan), and nothing when even that does not fit."""
    if eras.empty:
        return [], []
    # a handful of rows per chart, on every state page: plain lists, not frames
    firsts, lasts, names = (eras[c].tolist() for c in ("first_cycle", "last_cycle", "era_label"))
    e = [{"x": max(float(first) - 1, lo), "x2": min((hi if F.missing(last) else float(last)) + 1, hi),
          "era_label": label, "era_no": str(i)} for i, (first, last, label) in enumerate(zip(firsts, lasts, names), 1)]
    e = sorted((r for r in e if r["x2"] > r["x"]), key=lambda r: r["x"])
    for i, r in enumerate(e):
        r.update(parity=i % 2, chars=len(str(r["era_label"])))
    x = _q("x", title="cycle")
    tip = [_tip("era_no", "nominal", "plan era"), _tip("era_label", "nominal", "plan drawn by")]
    rects = [{"data": {"name": "eras"}, "transform": [{"filter": {"field": "parity", "equal": k}}],
              "mark": {"type": "rect", "color": ERA_FILLS[k]},
              "encoding": {"x": x, "x2": {"field": "x2"}, "y": {"value": -ERA_BAND}, "y2": {"value": "height"},
                           "tooltip": tip}}
             for k in (0, 1) if any(r["parity"] == k for r in e)]
    room = "(scale('x', datum.x2) - scale('x', datum.x) - 6)"
    fits = f"{room} >= datum.chars * {ERA_CHAR}"
    text = {"type": "text", "align": "left", "baseline": "middle", "dx": 3, "fontSize": 10, "color": INK}
    labels = {"data": {"name": "eras"},
              "mark": {**text, "opacity": {"expr": f"{fits} ? 1 : 0"}},
              "encoding": {"x": x, "y": {"value": -ERA_BAND / 2}, "text": _n("era_label"), "tooltip": tip}}
    numbers = {"data": {"name": "eras"},
               "mark": {**text, "opacity": {"expr": f"!({fits}) && {room} >= {2 * ERA_CHAR} ? 1 : 0"}},
               "encoding": {"x": x, "y": {"value": -ERA_BAND / 2}, "text": _n("era_no"), "tooltip": tip}}
    columns = ["x", "x2", "parity", "era_label", "era_no", "chars"]
    return [{c: _clean(r[c]) for c in columns} for r in e], rects + [{"layer": [labels, numbers]}]


class EraBands:
    """A state's plan eras (``first_cycle``, ``last_cycle``, ``era_label``) as its charts draw them:
    the bands and labels of :func:`_eras` worked out once per shown cycle range (every trend chart
    of a state page shows the same cycles), and the key of :func:`era_key` once."""

    def __init__(self, eras: pd.DataFrame):
        self.frame = eras
        self.empty = eras.empty
        self.key = era_key(eras) if not eras.empty else ""
        self._bands: dict[tuple[float, float], tuple[list[dict], list[dict]]] = {}

    def at(self, lo: float, hi: float) -> tuple[list[dict], list[dict]]:
        """:func:`_eras` between ``lo`` and ``hi`` (the same lists for every chart of that range:
        a chart copies the list it extends and changes no layer)."""
        if (lo, hi) not in self._bands:
            self._bands[(lo, hi)] = _eras(self.frame, lo, hi)
        return self._bands[(lo, hi)]


def era_key(eras: pd.DataFrame) -> str:
    """``1: 1972-1980, drawn by Upland Party; 2: ...``: the numbers the era bands show."""
    return "; ".join(f"{i}: {int(first)}{F.DASH}{'' if F.missing(last) else int(last)}, drawn by {label}"
                     for i, (first, last, label) in enumerate(zip(*(eras[c].tolist() for c in
                                                                    ("first_cycle", "last_cycle", "era_label"))), 1))
