"""Chart specifications: Vega-Lite dicts, each with a text description and a table of its data
(the accessible equivalent of the chart).

No rendering here and no chart logic in templates: a page embeds ``Chart.spec`` as JSON and our
loader script (``site/assets/charts.js``) draws it with the local Vega runtime. The specs follow
the Vega-Lite schema that Altair bundles (``$schema`` is Altair's); they are written as plain
dicts because composing layered charts through Altair's objects costs about a fifth of a second
per chart, minutes for a national history. The tests validate every spec against that schema.

Colours: the two party colours from ``levelfield.toml`` for what belongs to a party; everything
else uses the neutral palette below. Flagged values are marked by shape as well as colour
(triangle up: favours party a, triangle down: favours party b), so the charts read in
greyscale too.
"""


from __future__ import annotations

import numpy as np
import pandas as pd

from monitor.publish import formats as F
from monitor.publish.chartkit import (BAND, FAINT, FLAG_CODES, GRID, INK, MUTED, NOT_FLAGGED, TOO_FEW, Chart, EraBands,
                                      Style, _columns, _js, _n, _q, _rule, _signed_title, _spec, _tip, _cycle_axis,
                                      _clean, fmt_measure, records)


def histogram(chart_id: str, hist: pd.DataFrame, style: Style, cycle: int, chamber_label: str) -> Chart:
    """District two-party shares of party a nationwide (after the uncontested policy).

    ``hist``: bin_start, bin_end, kind (won by a | won by b | tied | uncontested ...), districts.
    """
    kinds = [f"won by {style.a.name}", f"won by {style.b.name}", "tied", "uncontested (imputed share)"]
    frame = hist.assign(kind=hist["kind"].replace({"won by a": kinds[0], "won by b": kinds[1]}))
    frame = frame.assign(order=frame["kind"].map({k: i for i, k in enumerate(kinds)}))
    # compact data (weight): each bin's kind is stored as its place in ``kinds`` (order) and named here
    named = {"calculate": "[" + ", ".join(_js(k) for k in kinds) + "][datum.order]", "as": "kind"}
    bars = {"data": {"name": "bins"}, "transform": [named], "mark": {"type": "bar", "stroke": "#ffffff", "strokeWidth": 0.5},
            "encoding": {
                "x": _q("bin_start", title=f"{style.a.name} share of the two-party vote in the district",
                        scale={"domain": [0, 1], "nice": False}, axis={"format": ".0%"}),
                "x2": {"field": "bin_end"},
                "y": _q("districts", aggregate="sum", title="districts", stack="zero"),
                "color": _n("kind", title=None, scale={"domain": kinds, "range": [style.a.colour, style.b.colour, MUTED, FAINT]}),
                "order": _q("order"),
                "tooltip": [_tip("bin_start", title="from", fmt=".1%"), _tip("bin_end", title="to", fmt=".1%"),
                            _tip("kind", "nominal"), _tip("districts")]}}
    spec = _spec([bars, _rule("x", 0.5, bars["encoding"]["x"]["title"], INK, [4, 3])],
                 {"bins": records(frame, ["bin_start", "bin_end", "order", "districts"])}, 220)
    # every count below is a sum of the bars drawn; uncontested districts (shown at their imputed
    # share) are counted apart, by the side of 50% their share lies on (``side``: a | b | tied)
    side = frame["side"] if "side" in frame else pd.Series("", index=frame.index)

    def count(kind: str, where: str | None = None) -> int:
        pick = (frame["kind"] == kind) & ((side == where) if where else True)
        return int(frame.loc[pick, "districts"].sum())

    total = int(frame["districts"].sum())
    a_won, b_won, tied = count(kinds[0]), count(kinds[1]), count(kinds[2])
    imputed, imp_a, imp_b, imp_tied = count(kinds[3]), count(kinds[3], "a"), count(kinds[3], "b"), count(kinds[3], "tied")
    width = float(hist["bin_end"].iloc[0] - hist["bin_start"].iloc[0]) if len(hist) else 0.0
    a, b = style.a.name, style.b.name
    desc = (f"Histogram of the {total} districts of {cycle} ({chamber_label}) that enter the measures, by {a}'s share "
            f"of the two-party vote after the uncontested policy, in bins of {F.share(width, 1)}. At their voted share: "
            f"{a_won} lie above 50% (won by {a}), {b_won} below (won by {b})" + (f", {tied} at exactly 50%" if tied else "")
            + ". " + (f"Uncontested: {imputed} districts are shown at their imputed share ({imp_a} won by {a}, {imp_b} by {b}"
                      + (f", {imp_tied} at 50%" if imp_tied else "") + "). " if imputed else
                      "No district is shown at an imputed share. ")
            + f"In all, {a} won {a_won + imp_a} and {b} won {b_won + imp_b} of these {total} districts.")
    rows = [[f"{F.share(r.bin_start)} to {F.share(r.bin_end)}", r.kind, F.count(r.districts)] for r in frame.itertuples()]
    return Chart(chart_id, f"District shares, {chamber_label}, {cycle}", desc, spec, ["share bin", "kind", "districts"], rows)


def _with_flags(frame: pd.DataFrame, style: Style, min_districts: int | None = None) -> pd.DataFrame:
    """``flag``: the flag label of each row; below ``min_districts`` districts (never flagged), "too few"."""
    if min_districts is not None and "districts" in frame:
        few = (pd.to_numeric(frame["districts"], errors="coerce") < min_districts).fillna(False).to_numpy()
    else:
        few = np.zeros(len(frame), bool)
    return frame.assign(flag=[style.flag_label(fl, d, s) for fl, d, s in zip(frame["flagged"], frame["direction"], few)])


def distribution(chart_id: str, frame: pd.DataFrame, measure: str, label: str, style: Style, cycle: int,
                 chamber_label: str, min_districts: int | None = None) -> Chart:
    """One measure across states in a cycle: a strip of values, flagged states marked and named;
    states with too few districts to be flagged on a row of their own, in grey.

    ``frame``: state_label, value, flagged, direction (and districts).
    """
    f = _with_flags(frame, style, min_districts).dropna(subset=["value"])
    flagged_labels = style.flag_domain()[:2]
    # compact data (weight): s = state, v = value (4 decimals; 3 are shown), f = flag code, l = label row
    points = {"data": {"name": "states"}, "transform": [style.flag_calculate()],
              "mark": {"type": "point", "filled": True, "size": 70, "opacity": 0.85},
              "encoding": {
                  "x": _q("v", title=_signed_title(label, style)),
                  # the rows are placed by the flag code (the axis shows no labels): the name layers need no label
                  "y": _n("f", title=None, sort=list(FLAG_CODES), axis={"labels": False, "ticks": False, "domain": False}),
                  "color": _n("flag", title=None, scale=style.flag_colour(), legend=None),
                  "shape": _n("flag", title=None, scale=style.flag_shape(), legend=None),
                  "tooltip": [_tip("s", "nominal", "state"), _tip("v", title="value", fmt="+.3f"), _tip("flag", "nominal")]}}
    xtitle = points["encoding"]["x"]["title"]
    f = f.assign(label_level=label_levels(f, flagged_labels))
    levels = int(f["label_level"].max()) + 1 if len(f) else 1
    names = [{"data": {"name": "states"},
              "transform": [{"filter": {"field": "f", "oneOf": list(FLAG_CODES[:2])}}, {"filter": {"field": "l", "equal": level}}],
              "mark": {"type": "text", "dy": -11 * (level + 1), "fontSize": 10},
              "encoding": {"x": _q("v", title=xtitle), "y": _n("f", title=None, sort=list(FLAG_CODES)),
                           "text": _n("s")}} for level in range(levels)]
    flagged = f[f["flag"].isin(flagged_labels)]
    few = f[f["flag"] == TOO_FEW]
    layers = [_rule("x", 0.0, xtitle), points] + (names if len(flagged) else [])
    coded = f.assign(code=f["flag"].map(style.flag_codes()))
    spec = _spec(layers, {"states": records(coded, ["state_label", "value", "code", "label_level"], ["s", "v", "f", "l"],
                                            digits=4)},
                 (110 if len(few) else 90) + 11 * (levels - 1))
    desc = (f"{label} of {len(f)} states in {cycle} ({chamber_label}): median {style.lean(measure, f['value'].median())}; "
            f"from {style.lean(measure, f['value'].min())} to {style.lean(measure, f['value'].max())}. ")
    desc += (f"Flagged at the tails: {flagged_by_party(flagged, style)}." if len(flagged)
             else "No state is flagged on this measure.")
    if len(few):
        desc += (f" On a row of their own, in grey: {len(few)} states with fewer than {min_districts} districts, "
                 "too few to flag.")
    rows = [[s, fmt_measure(measure, v), fl] for s, v, fl in _columns(f.sort_values("value", ascending=False))]
    return Chart(chart_id, f"{label} across states, {cycle}", desc, spec, ["state", label, "flag"], rows)


def flagged_by_party(flagged: pd.DataFrame, style: Style) -> str:
    """``favouring Upland Party: Aa (A), Bb (B); favouring ...``: the flagged states of a chart,
    grouped by the party their flag favours (each party named once, not once per state)."""
    named = list(zip(flagged["state_label"].tolist(), flagged["flag"].tolist()))  # lists: no itertuples per chart
    groups = [(label, [state for state, flag in named if flag == label]) for label in style.flag_domain()[:2]]
    return "; ".join(f"{label.replace('favours', 'favouring', 1)}: {', '.join(states)}" for label, states in groups if states)


def label_levels(frame: pd.DataFrame, labelled, width_px: float = 300.0, char_px: float = 5.6) -> np.ndarray:
    """A text row (0 = just above the point, 1 = one line higher, ...) for each labelled state of
    a strip chart, so that names of states close together do not run into each other: within a
    row of points, each label takes the lowest level where it clears the labels already placed,
    judged on a plot ``width_px`` wide with ``char_px`` per character (the narrowest layout, three
    charts abreast at 1280 px or one on a phone). Unlabelled states get 0.

    >>> f = pd.DataFrame({"state_label": ["Aa (A)", "Bb (B)", "Cc (C)"], "value": [0.0, 0.01, 1.0],
    ...                   "flag": ["x", "x", "x"]})
    >>> label_levels(f, ["x"]).tolist()
    [0, 1, 0]
    """
    out = np.zeros(len(frame), dtype=np.int64)
    values = frame["value"].to_numpy(float)
    if not len(frame) or not np.isfinite(values).any():
        return out
    span = float(np.nanmax(values) - np.nanmin(values)) or 1.0
    px = (values - np.nanmin(values)) / span * width_px
    half = frame["state_label"].astype(str).str.len().to_numpy() * char_px / 2 + 3
    for flag in labelled:
        placed: list[list[tuple[float, float]]] = []
        rows = np.flatnonzero((frame["flag"] == flag).to_numpy() & np.isfinite(values))
        for i in rows[np.argsort(px[rows], kind="mergesort")]:  # left to right
            lo, hi = px[i] - half[i], px[i] + half[i]
            level = next((k for k, row in enumerate(placed) if all(hi < a or lo > b for a, b in row)), len(placed))
            if level == len(placed):
                placed.append([])
            placed[level].append((lo, hi))
            out[i] = level
    return out


def trend(chart_id: str, frame: pd.DataFrame, eras: EraBands, measure: str, label: str, style: Style,
          where: str, thresholds: list[dict] | None = None) -> Chart:
    """A measure of one state over all cycles: its 95% interval, its national-pool null band
    (where it is judged against one), flagged cycles marked, plan eras shaded and labelled.

    ``frame``: cycle, value, low, high, null_low, null_high, flagged, direction, certification.
    ``eras``: the state's plan eras (first_cycle, last_cycle, era_label).
    """
    # one chart per measure on every state page: plain lists, not frames
    columns = ["cycle", "value", "low", "high", "null_low", "null_high", "flag", "certification"]
    cols = {c: frame[c].tolist() if isinstance(frame, pd.DataFrame) else list(frame[c])
            for c in ("cycle", "value", "low", "high", "null_low", "null_high", "flagged", "direction", "certification")}
    cols["flag"] = [style.flag_label(fl, d) for fl, d in zip(cols["flagged"], cols["direction"])]
    has_interval = any(not F.missing(v) for v in cols["low"])
    lo, hi = float(min(cols["cycle"])) - 1, float(max(cols["cycle"])) + 1
    x = _cycle_axis(lo, hi)
    era_rows, era_layers = eras.at(lo, hi)
    layers = era_layers[:-1]
    if any(not F.missing(v) for v in cols["null_low"]):
        layers.append({"data": {"name": "values"}, "mark": {"type": "area", "color": BAND, "opacity": 0.6},
                       "encoding": {"x": x, "y": _q("null_low", title=label), "y2": {"field": "null_high"},
                                    "tooltip": [_tip("cycle"), _tip("null_low", title="null tail from", fmt="+.3f"),
                                                _tip("null_high", title="null tail to", fmt="+.3f")]}})
    layers.append(_rule("y", 0.0, label))
    lines = [{"v": s * float(t["value"]), "text": f"proposed threshold ({t.get('applies_to', '')}), not law"}
             for t in (thresholds or []) for s in (1, -1)]
    if lines:
        layers.append({"data": {"values": lines}, "mark": {"type": "rule", "color": MUTED, "strokeDash": [2, 3]},
                       "encoding": {"y": _q("v", title=label), "tooltip": [_tip("text", "nominal", "reference")]}})
    if has_interval:
        layers.append({"data": {"name": "values"}, "mark": {"type": "rule", "color": MUTED, "strokeWidth": 1.5},
                       "encoding": {"x": x, "y": _q("low", title=label), "y2": {"field": "high"}}})
    layers.append({"data": {"name": "values"}, "mark": {"type": "line", "color": INK, "strokeWidth": 1},
                   "encoding": {"x": x, "y": _q("value", title=label)}})
    layers.append({"data": {"name": "values"}, "mark": {"type": "point", "filled": True, "size": 60, "opacity": 1},
                   "encoding": {
                       "x": x, "y": _q("value", title=label),
                       "color": _n("flag", title=None, scale=style.flag_colour(), legend=None),
                       "shape": _n("flag", title=None, scale=style.flag_shape(), legend=None),
                       "tooltip": [_tip("cycle"), _tip("value", fmt="+.3f")]
                       + ([_tip("low", title="95% low", fmt="+.3f"), _tip("high", title="95% high", fmt="+.3f")]
                          if has_interval else [])
                       + [_tip("flag", "nominal"), _tip("certification", "nominal", "results")]}})
    layers += era_layers[-1:]
    table = list(zip(*(cols[c] for c in columns)))
    datasets = {"values": [{c: _clean(v) for c, v in zip(columns, row)} for row in table]}
    if era_rows:
        datasets["eras"] = era_rows
    defined = [r for r in table if not F.missing(r[1])]
    flagged = [r for r in table if r[6] != NOT_FLAGGED]
    desc = f"{label} of {where}: {len(defined)} of {len(table)} cycles defined"
    if defined:
        cycle, value, low, high = defined[-1][:4]
        desc += f"; latest {int(cycle)}: {style.lean(measure, value)}"
        if not F.missing(low):
            desc += f" (95% interval from {style.lean(measure, low)} to {style.lean(measure, high)})"
    desc += ". "
    desc += ("Flagged at the national tails in " + ", ".join(f"{int(r[0])} ({r[6]})" for r in flagged) + "."
             if flagged else "Not flagged in any cycle.")
    if not eras.empty:
        desc += " Plan eras (numbered in the band above the chart where a name does not fit): " + eras.key + "."
    if lines:
        desc += " Dotted lines: thresholds proposed in the literature (proposals, not law)."
    rows = [[str(int(cycle)), fmt_measure(measure, value), fmt_measure(measure, low), fmt_measure(measure, high),
             (f"{fmt_measure(measure, null_low)} to {fmt_measure(measure, null_high)}" if not F.missing(null_low) else F.DASH),
             flag, cert] for cycle, value, low, high, null_low, null_high, flag, cert in table]
    return Chart(chart_id, label, desc, _spec(layers, datasets, 190),
                 ["cycle", label, "95% low", "95% high", "national-pool null (outer tails)", "flag", "results"], rows)


def seats_votes_time(chart_id: str, frame: pd.DataFrame, eras: EraBands, style: Style, where: str) -> Chart:
    """Party a's vote share, seat share and expected seat share (national pool) over cycles.

    ``frame``: cycle, vote_share, seat_share, expected_share, expected_low, expected_high.
    """
    # one chart on every state page: plain lists, not frames
    f = {c: frame[c].tolist() for c in ("cycle", "vote_share", "seat_share", "expected_share", "expected_low",
                                        "expected_high")}
    lo, hi = float(min(f["cycle"])) - 1, float(max(f["cycle"])) + 1
    x = _cycle_axis(lo, hi)
    names = {"vote_share": f"{style.a.name} vote share", "seat_share": f"{style.a.name} seat share"}
    domain = list(names.values())
    era_rows, era_layers = eras.at(lo, hi)
    layers = era_layers[:-1]
    if any(not F.missing(v) for v in f["expected_share"]):
        layers.append({"data": {"name": "seats"}, "mark": {"type": "area", "color": BAND, "opacity": 0.7},
                       "encoding": {"x": x, "y": _q("expected_low", title=f"{style.a.name} share"), "y2": {"field": "expected_high"},
                                    "tooltip": [_tip("cycle"), _tip("expected_share", title="expected seat share", fmt=".1%"),
                                                _tip("expected_low", title="95% low", fmt=".1%"),
                                                _tip("expected_high", title="95% high", fmt=".1%")]}})
    layers.append(_rule("y", 0.5, f"{style.a.name} share"))
    share = _q("share", title=f"{style.a.name} share", scale={"domain": [0, 1], "nice": False}, axis={"format": ".0%"})
    colour = _n("series", title=None, scale={"domain": domain, "range": [MUTED, INK]})
    layers.append({"data": {"name": "long"}, "mark": {"type": "line", "strokeWidth": 1.5},
                   "encoding": {"x": x, "y": share, "color": colour,
                                "strokeDash": _n("series", title=None, scale={"domain": domain, "range": [[4, 3], [1, 0]]})}})
    layers.append({"data": {"name": "long"}, "mark": {"type": "point", "filled": True, "size": 45, "opacity": 1},
                   "encoding": {"x": x, "y": share, "color": colour,
                                "shape": _n("series", title=None, scale={"domain": domain, "range": ["square", "circle"]}),
                                "tooltip": [_tip("cycle"), _tip("series", "nominal"), _tip("share", fmt=".1%")]}})
    layers += era_layers[-1:]
    seats = ["cycle", "expected_share", "expected_low", "expected_high"]
    datasets = {"seats": [{c: _clean(v) for c, v in zip(seats, row)} for row in zip(*(f[c] for c in seats))],
                # long form: every cycle's vote share, then every cycle's seat share
                "long": [{"cycle": _clean(cycle), "series": names[series], "share": _clean(value)}
                         for series in names for cycle, value in zip(f["cycle"], f[series])]}
    if era_rows:
        datasets["eras"] = era_rows
    last = {c: values[-1] for c, values in f.items()}
    desc = (f"{style.a.name}'s share of the two-party vote and of the seats in {where}, {int(min(f['cycle']))} to "
            f"{int(last['cycle'])}. In {int(last['cycle'])}: {F.share(last['vote_share'])} of the vote, "
            f"{F.share(last['seat_share'])} of the seats")
    if not F.missing(last["expected_share"]):
        desc += (f"; delegations drawn from the national pool at the same vote would expect "
                 f"{F.share(last['expected_share'])} (95% {F.share(last['expected_low'])} to {F.share(last['expected_high'])})"
                 ". The grey band is that expectation")
    desc += "."
    rows = [[str(int(cycle)), F.share(vote), F.share(seat), F.share(expected),
             (f"{F.share(low)} to {F.share(high)}" if not F.missing(low) else F.DASH)]
            for cycle, vote, seat, expected, low, high in zip(*f.values())]
    return Chart(chart_id, "Seats and votes over time", desc, _spec(layers, datasets, 200),
                 ["cycle", "vote share", "seat share", "expected seat share", "expected 95%"], rows)


def swing_curve(chart_id: str, curve: pd.DataFrame, points: pd.DataFrame, style: Style, where: str) -> Chart:
    """The seats-votes curve of the current plan under uniform swing, with the observed result,
    the flipped-vote point and the 50% point.

    ``curve``: vote, seat_share (step vertices). ``points``: point, vote, seat_share, seats, districts.
    """
    marks = ["observed", "flipped vote", "even vote"]
    axis = {"format": ".0%"}
    xt, yt = f"{style.a.name} statewide share of the two-party vote", f"{style.a.name} seat share"
    x, y = _q("vote", title=xt), _q("seat_share", title=yt)
    pts = {c: points[c].tolist() for c in ("point", "vote", "seat_share", "seats", "districts")}  # lists, not frames
    by = {row[0]: dict(zip(pts, row)) for row in zip(*pts.values())}
    obs, flip, even = by["observed"], by["flipped vote"], by["even vote"]
    # The three points often lie within a point or two of each other near 50%: nested marks of
    # distinct shape, size and fill (filled one under open ones) stay visible when they coincide, and each
    # has a direct label. The even vote lies midway between the other two and the curve never
    # falls, so the space up and left of the left-hand point and down and right of the right-hand
    # one is free of the curve: their labels go there; the even vote's goes well above (or, near
    # the top, well below), clear of both.
    lines = ["seats-votes curve (uniform swing)", "seats = votes (diagonal)"]
    line_key = {"stroke": _n("line", title=None, scale={"domain": lines, "range": [style.a.colour, MUTED]}),
                "strokeDash": _n("line", title=None, scale={"domain": lines, "range": [[1, 0], [2, 3]]})}
    point_key = {"shape": {"domain": marks, "range": ["circle", "diamond", "square"]},
                 "color": {"domain": marks, "range": [INK, style.b.colour, MUTED]},
                 "fill": {"domain": marks, "range": ["transparent", style.b.colour, "transparent"]}}
    sizes = {"domain": marks, "range": [300, 80, 130]}
    left, right = ("observed", "flipped vote") if obs["vote"] <= flip["vote"] else ("flipped vote", "observed")
    place = {left: ("right", -9, -9, "bottom"),
             right: ("left", 9, 9, "top") if by[right]["seat_share"] > 0.1 else ("left", 9, -9, "bottom"),
             "even vote": ("center", 0, -22, "bottom") if even["seat_share"] < 0.88 else ("center", 0, 22, "top")}

    def label(name: str) -> list[dict]:
        align, dx, dy, baseline = place[name]
        mark = {"type": "text", "align": align, "dx": dx, "dy": dy, "baseline": baseline, "fontSize": 11}
        enc = {"x": x, "y": y, "text": _n("point")}
        keep = [{"filter": {"field": "point", "equal": name}}]
        halo = {**mark, "color": "#ffffff", "stroke": "#ffffff", "strokeWidth": 4, "strokeJoin": "round"}
        return [{"data": {"name": "points"}, "transform": keep, "mark": halo, "encoding": enc},
                {"data": {"name": "points"}, "transform": keep, "mark": {**mark, "color": INK}, "encoding": enc}]

    layers = [
        _rule("x", 0.5, xt, GRID), _rule("y", 0.5, yt, GRID),
        {"data": {"values": [{"vote": 0, "seat_share": 0, "line": lines[1]}, {"vote": 1, "seat_share": 1, "line": lines[1]}]},
         "mark": {"type": "line", "strokeWidth": 1.2}, "encoding": {"x": x, "y": y, **line_key}},
        {"data": {"name": "curve"},
         "mark": {"type": "line", "interpolate": "step-after", "strokeWidth": 2},
         "encoding": {"x": _q("vote", title=xt, scale={"domain": [0, 1], "nice": False}, axis=axis),
                      "y": _q("seat_share", title=yt, scale={"domain": [0, 1], "nice": False}, axis=axis), **line_key}},
        {"data": {"name": "points"}, "mark": {"type": "point", "filled": False, "strokeWidth": 2, "opacity": 1},
         "encoding": {"x": x, "y": y, **{k: _n("point", title=None, scale=v, sort=marks) for k, v in point_key.items()},
                      "size": {"field": "point", "type": "ordinal", "title": None, "scale": sizes, "sort": marks},
                      "order": _q("z"),
                      "tooltip": [_tip("point", "nominal"), _tip("vote", fmt=".1%"), _tip("seat_share", title="seat share", fmt=".1%"),
                                  _tip("seats", fmt=".1f")]}},
    ] + [layer for name in marks for layer in label(name)]
    # drawing order: the large ring, then the filled diamond, then the open square over it (its
    # outline stays visible on the diamond when the two coincide)
    pts["z"] = [{"observed": 0, "flipped vote": 1, "even vote": 2}.get(p) for p in pts["point"]]
    datasets = {"curve": records({"vote": curve["vote"].tolist(), "seat_share": curve["seat_share"].tolist(),
                                  "line": [lines[0]] * len(curve)}, ["vote", "seat_share", "line"]),
                "points": records(pts, ["point", "vote", "seat_share", "seats", "z"])}
    n = int(pts["districts"][0])
    desc = (f"Seats-votes curve of {where} under uniform swing: every district's share shifted by the same amount. "
            f"Observed: {F.share(obs['vote'])} of the vote gave {style.a.name} {F.number(obs['seats'], 1)} of {n} seats. "
            f"With the vote flipped to {F.share(flip['vote'])}, {style.a.name} would win {F.number(flip['seats'], 1)} seats "
            f"(a symmetric plan would give {F.number(n - obs['seats'], 1)}). At 50% of the vote: "
            f"{F.number(even['seats'], 1)} seats (partisan bias {style.words.leaning(even['seat_share'] - 0.5)}). "
            "Marks: the stepped line is the curve and the dotted diagonal is seats equal to votes; the observed result "
            "is the large open circle, the flipped vote the small filled diamond and the even vote (50%) the open square, "
            "each labelled beside it.")
    rows = _curve_rows(curve) + [[f"{p}: {F.share(v)}", f"{F.share(s)} ({F.number(won, 1)} seats)"]
                                 for p, v, s, won in zip(pts["point"], pts["vote"], pts["seat_share"], pts["seats"])]
    return Chart(chart_id, "Seats-votes curve of the current plan", desc, _spec(layers, datasets, 260),
                 ["statewide vote share", "seat share"], rows)


def _curve_rows(curve: pd.DataFrame) -> list[list[str]]:
    """The curve read every 5 points of vote share from 30% to 70% (the step function, as drawn),
    not at each of its vertices: two per district would make the table, and the page, grow with
    the chamber."""
    vote, seat = curve["vote"].to_numpy(float), curve["seat_share"].to_numpy(float)
    order = np.argsort(vote, kind="stable")
    vote, seat = vote[order], seat[order]
    rows = []
    for v in np.round(np.arange(0.30, 0.7001, 0.05), 2):
        i = int(np.searchsorted(vote, v, side="right")) - 1
        rows.append([F.share(v), F.share(seat[i]) if i >= 0 else F.share(0.0)])
    return rows


def ranking(chart_id: str, frame: pd.DataFrame, measure: str, label: str, style: Style, cycle: int,
            chamber_label: str, min_districts: int | None = None) -> Chart:
    """All states ranked by a measure in one cycle; flagged states coloured by the party favoured.
    States with fewer than ``min_districts`` districts (never flagged) are ranked apart, below a
    heading row, in grey: a small delegation swings to the extremes without being unusual.

    ``frame``: state_label, value, flagged, direction (and districts).
    """
    f = _with_flags(frame, style, min_districts).dropna(subset=["value"])
    f = f.assign(few=f["flag"] == TOO_FEW).sort_values(["few", "value", "state_label"], ascending=[True, False, True])
    ranked, few = f[~f["few"]], f[f["few"]]
    heading = f"fewer than {min_districts} districts: too few to flag"
    order = list(dict.fromkeys(ranked["state_label"])) + ([heading] if len(few) else []) + list(dict.fromkeys(few["state_label"]))
    y_axis = {"labelLimit": 400}
    if len(few):  # the heading row of the states too small to flag, set apart
        y_axis.update(labelColor={"condition": {"test": f"datum.value == {_js(heading)}", "value": MUTED}, "value": INK},
                      labelFontStyle={"condition": {"test": f"datum.value == {_js(heading)}", "value": "italic"},
                                      "value": "normal"})
    # compact data (weight): s = state, v = value (4 decimals; 3 are shown), f = flag code
    bars = {"data": {"name": "states"}, "transform": [style.flag_calculate()], "mark": {"type": "bar", "height": {"band": 0.7}},
            # the title ends at the plot's right edge: centred under a plot narrowed by long state
            # labels it ran past the chart's edge and was cut ("Mean-median differenc")
            "encoding": {"x": _q("v", title=_signed_title(label, style), axis={"titleAnchor": "end"}),
                         "y": _n("s", title=None, scale={"domain": order}, axis=y_axis),  # the domain sets the order
                         "color": _n("flag", title=None, scale=style.flag_colour(), legend=None),
                         "tooltip": [_tip("s", "nominal", "state"), _tip("v", title="value", fmt="+.3f"), _tip("flag", "nominal")]}}
    coded = f.assign(code=f["flag"].map(style.flag_codes()))
    spec = _spec([bars, _rule("x", 0.0, bars["encoding"]["x"]["title"], INK)],
                 {"states": records(coded, ["state_label", "value", "code"], ["s", "v", "f"], digits=4)},
                 max(60, 16 * len(order)))
    flagged = ranked[ranked["flag"] != NOT_FLAGGED]
    desc = f"{len(ranked)} states ranked by {label} in {cycle} ({chamber_label}). "
    if len(ranked):
        desc += (f"Highest: {ranked.iloc[0]['state_label']}, {style.lean(measure, ranked.iloc[0]['value'])}; lowest: "
                 f"{ranked.iloc[-1]['state_label']}, {style.lean(measure, ranked.iloc[-1]['value'])}. ")
    desc += (f"Flagged: {flagged_by_party(flagged, style)}." if len(flagged)
             else "None flagged.")
    if len(few):
        desc += (f" Below them, apart and in grey: {len(few)} states with fewer than {min_districts} districts, "
                 "never flagged (a small delegation lands at the extremes easily).")
    rows = [[str(i), s, fmt_measure(measure, v), fl] for i, (s, v, fl) in enumerate(_columns(ranked), 1)]
    rows += [["", s, fmt_measure(measure, v), fl] for s, v, fl in _columns(few)]
    return Chart(chart_id, f"{label}, {chamber_label}, {cycle}", desc, spec, ["rank", "state", label, "flag"], rows)


def pool_seats(chart_id: str, frame: pd.DataFrame, style: Style, cycle: int, chamber_label: str) -> Chart:
    """Expected seats (national pool, with its 95% interval) against the seats actually won.

    ``frame``: state_label, districts, seats_a, expected_seats, low, high, excess_seats.
    """
    f = frame.dropna(subset=["expected_seats"]).sort_values(["excess_seats", "state_label"], ascending=[False, True])
    order = list(dict.fromkeys(f["state_label"]))
    # The key lists every mark drawn, each with a symbol of its own shape: a horizontal bar for the
    # interval, an upright bar for the expected-seats tick, a dot for the seats won. It comes from
    # the dots' layer alone (its colour and shape scales share one domain, so they make one legend);
    # the bar and the tick take their colours from the same constants.
    marks = ["95% interval (national pool)", "expected (national pool)", f"won by {style.a.name}"]
    y = _n("state_label", title=None, sort=order, axis={"labelLimit": 400})
    x_title = f"{style.a.name} seats"
    colour = {"domain": marks, "range": [FAINT, INK, style.a.colour]}
    shape = {"domain": marks, "range": ["M-1,-0.3H1V0.3H-1Z", "M-0.22,-1H0.22V1H-0.22Z", "circle"]}
    tips = [_tip("state_label", "nominal", "state"), _tip("seats_a", title="seats won", fmt=".1f"),
            _tip("expected_seats", title="expected", fmt=".2f"), _tip("low", title="95% low", fmt=".1f"),
            _tip("high", title="95% high", fmt=".1f"), _tip("excess_seats", title="excess seats", fmt="+.2f")]
    layers = [
        {"data": {"name": "units"}, "mark": {"type": "rule", "color": FAINT, "strokeWidth": 3},
         "encoding": {"x": _q("low", title=x_title, axis={"format": "d", "tickMinStep": 1}), "x2": {"field": "high"}, "y": y,
                      "tooltip": tips}},
        {"data": {"name": "units"}, "mark": {"type": "tick", "thickness": 2, "size": 14, "color": INK},
         "encoding": {"x": _q("expected_seats", title=x_title), "y": y, "tooltip": tips}},
        {"data": {"name": "units"}, "transform": [{"calculate": _js(marks[2]), "as": "kind_won"}],
         "mark": {"type": "point", "filled": True, "size": 60, "opacity": 1},
         "encoding": {"x": _q("seats_a", title=x_title), "y": y,
                      "color": _n("kind_won", title=None, scale=colour),
                      "shape": _n("kind_won", title=None, scale=shape), "tooltip": tips}},
    ]
    # 3 decimals: the tooltips show 2 at most; the dots' key label is set in the chart, not per row
    datasets = {"units": records(f, ["state_label", "low", "high", "expected_seats", "seats_a", "excess_seats"], digits=3)}
    desc = (f"Seats {style.a.name} won in each state in {cycle} ({chamber_label}) against the seats expected for "
            f"delegations of the same size and statewide vote drawn from the national pool (grey bar: 95% interval; "
            f"upright tick: expected seats; dot: seats won). ")
    if len(f):
        top, bottom = f.iloc[0], f.iloc[-1]
        desc += (f"Most seats beyond the expectation for {style.a.name}: {top['state_label']}, "
                 f"{style.words.stake(top['excess_seats']).text}; at the other end: {bottom['state_label']}, "
                 f"{style.words.stake(bottom['excess_seats']).text}.")
    rows = [[r.state_label, F.count(r.districts), F.number(r.seats_a, 1), F.number(r.expected_seats, 2),
             f"{F.number(r.low, 1)} to {F.number(r.high, 1)}", F.signed(r.excess_seats, 2)] for r in f.itertuples()]
    return Chart(chart_id, f"Expected and actual seats, {chamber_label}, {cycle}", desc,
                 _spec(layers, datasets, max(60, 18 * len(f))),
                 ["state", "districts", "seats won", "expected", "expected 95%", "excess seats"], rows)


def excess_by_drawer(chart_id: str, frame: pd.DataFrame, style: Style, cycle: int, chamber_label: str) -> Chart:
    """Sum of excess seats (actual minus expected) by who drew the plan in force.

    ``frame``: drawer (label), excess_seats (sum), units.
    """
    sides = [f"towards {style.a.name}", f"towards {style.b.name}"]
    f = frame.assign(side=np.where(frame["excess_seats"] >= 0, sides[0], sides[1]))
    bars = {"data": {"name": "drawers"}, "mark": {"type": "bar"},
            "encoding": {"x": _q("excess_seats", title=["excess seats", f"positive: more than expected for {style.a.name}"]),
                         "y": _n("drawer", title=None, sort=list(f["drawer"]), axis={"labelLimit": 400}),
                         "color": _n("side", title=None, scale={"domain": sides, "range": [style.a.colour, style.b.colour]}),
                         "tooltip": [_tip("drawer", "nominal", "drawn by"), _tip("excess_seats", fmt="+.2f"),
                                     _tip("units", title="states")]}}
    spec = _spec([bars, _rule("x", 0.0, bars["encoding"]["x"]["title"], INK)], {"drawers": records(f, ["drawer", "excess_seats", "units", "side"])},
                 max(60, 26 * len(f)))
    desc = (f"Excess seats summed by who drew the plan in force, {cycle} ({chamber_label}): "
            + "; ".join(f"{r.drawer}: {style.words.stake(r.excess_seats).text} over {int(r.units)} states"
                        for r in f.itertuples()) + ".")
    rows = [[r.drawer, F.count(r.units), F.signed(r.excess_seats, 2)] for r in f.itertuples()]
    return Chart(chart_id, f"Excess seats by who drew the plan, {chamber_label}, {cycle}", desc, spec,
                 ["drawn by", "states", "excess seats"], rows)
