"""The flag history: every raised or cleared unit flag and every plan put on or taken off watch,
with why, in words, and the load it is credited to.

A change is credited to the newest load among the units of the (cycle, chamber) group whose pool
the null is drawn from (over the plan's cycles, for a watch entry), since a correction in one state
moves every other state's null in that group.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from monitor.inputs import UNIT_KEYS
from monitor.tails import JUDGED


def why_text(r) -> str:
    if r.get("basis") == "p-value":
        return f"{_measure_text(r['measure'], r['value'])} with p = {r['p_value']:.3g} below the threshold"
    pct = r.get("null_percentile")
    text = f"{_measure_text(r['measure'], r['value'])} at percentile {pct:.3f} of its national-pool null"
    if r.get("basis") == "null tail and p-value":
        text += f" (and p = {r['p_value']:.3g})"
    return text


def group_loads(units: pd.DataFrame, loads: pd.Series) -> dict[tuple, int]:
    """The newest load among the current units of each (cycle, chamber) group.

    A unit's null is drawn from its whole group's districts, so a load of any state in the group
    (a new cycle, a correction) can raise or clear another state's flag: that load is the one a
    change is credited to."""
    load = pd.to_numeric(units["unit_id"].map(loads), errors="coerce")
    frame = pd.DataFrame({"cycle": units["cycle"].astype(int), "chamber": units["chamber"], "load": load})
    newest = frame.dropna(subset=["load"]).groupby(["cycle", "chamber"])["load"].max()
    return {(int(c), ch): int(v) for (c, ch), v in newest.items()}


def cycles_of_plans(plans: pd.DataFrame) -> dict[tuple, set]:
    """(state, chamber, plan_id) -> the cycles of the plan's current units."""
    out: dict[tuple, set] = {}
    for r in plans[["cycle", "state", "chamber", "plan_id"]].itertuples(index=False):
        out.setdefault((r.state, r.chamber, r.plan_id), set()).add(int(r.cycle))
    return out


def unit_events(old: pd.DataFrame, new: pd.DataFrame, group_load: dict[tuple, int], stamp) -> list[dict]:
    """Raised and cleared unit flags, each credited to the newest load of its (cycle, chamber)
    group (:func:`group_loads`)."""
    key = [*UNIT_KEYS, "measure"]
    before = {tuple(r[k] for k in key): r for r in old[old["flagged"] == 1].to_dict("records")} if not old.empty else {}
    after = {tuple(r[k] for k in key): r for r in new[new["flagged"] == 1].to_dict("records")}
    # the current rows of the cleared flags only (every unit's row is in ``new``: a scan of its keys,
    # not a record per row)
    cleared = set(before) - set(after)
    keys = list(zip(*(new[k].tolist() for k in key))) if cleared else []
    rows = new[[k in cleared for k in keys]] if cleared else new.iloc[0:0]
    current = {tuple(r[k] for k in key): r for r in rows.to_dict("records")}
    events = []
    for k in sorted(set(before) | set(after), key=lambda k: (k[0], k[1], k[2], k[3])):
        b, a = before.get(k), after.get(k)
        load = group_load.get((int(k[0]), k[2]))
        if a is not None and (b is None or b["direction"] != a["direction"]):
            event, direction, why = "raised", a["direction"], why_text(a)
        elif b is not None and a is None:
            now = current.get(k)
            event, direction = "cleared", b["direction"]
            if now is None:
                why = "the unit is no longer in the store"
            elif str(now.get("reason") or "").endswith("not flagged"):  # too few districts or seats covered
                why = now["reason"]
            elif now.get("value") is None or not np.isfinite(now.get("value") or np.nan):
                why = f"{k[3]} is now undefined ({now.get('reason') or 'no value'})"
            elif now.get("null_percentile") is not None and np.isfinite(now.get("null_percentile") or np.nan):
                why = f"{_measure_text(k[3], now['value'])} now, at percentile {now['null_percentile']:.3f} of its null"
            else:
                why = f"{_measure_text(k[3], now['value'])} now" + (f" with p = {now['p_value']:.3g}" if now.get('p_value') is not None and np.isfinite(now['p_value']) else "")
        else:
            continue
        events.append({"scope": "unit", "cycle": int(k[0]), "state": k[1], "chamber": k[2],
                       "plan_id": (a or b).get("plan_id"), "measure": k[3], "event": event,
                       "direction": direction, "why": why, "load_id": load,
                       "text": f"{event} {k[1]} {k[2]} {k[0]} {k[3]} (favours {direction}): {why}"})
    return events


def watch_events(old: pd.DataFrame, new: pd.DataFrame, plan_cycles: dict[tuple, set],
                  group_load: dict[tuple, int], stamp) -> list[dict]:
    """Plans put on or taken off the watch list, each credited to the newest load among the
    (cycle, chamber) groups of the plan's cycles (:func:`group_loads`)."""
    key = ["state", "chamber", "plan_id"]
    before = {tuple(r[k] for k in key): r for r in old.to_dict("records")}
    after = {tuple(r[k] for k in key): r for r in new.to_dict("records")}
    events = []
    for k in sorted(set(before) | set(after)):
        b, a = before.get(k), after.get(k)
        if a is not None and (b is None or b["favours"] != a["favours"]):
            event, direction = "on watch", a["favours"]
            why = (f"cycles {a['cycles']} each flagged by at least two measures favouring {a['favours']} "
                   f"({a['measures']}); {_stake_text(a['seats_at_stake'])}")
        elif b is not None and a is None:
            event, direction = "off watch", b["favours"]
            why = "fewer than two cycles of the plan are now flagged by two agreeing measures"
        else:
            continue
        cycles = set(plan_cycles.get(k, ()))
        for entry in (a, b):
            if entry is not None:
                cycles |= {int(c) for c in str(entry["cycles"]).split()}
        credited = [group_load[(c, k[1])] for c in cycles if (c, k[1]) in group_load]
        inferred = bool((a or b).get("inferred"))
        plan = f"{k[2]} (inferred)" if inferred else k[2]
        events.append({"scope": "plan", "cycle": None, "state": k[0], "chamber": k[1], "plan_id": k[2],
                       "measure": None, "event": event, "direction": direction, "why": why,
                       "load_id": max(credited) if credited else None,
                       "text": f"{event}: {k[0]} {k[1]} plan {plan} (favours {direction}): {why}"})
    return events


def _measure_text(measure: str, value: float) -> str:
    """A measure's value as change texts write it: as its flag declaration describes it (seats as
    a count of seats), else signed (positive favours a)."""
    m = JUDGED.get(measure)
    if m is not None and m.flag.describe is not None:
        return m.flag.describe(value)
    return f"{measure} {value:+.3f}"


def _stake_text(stake) -> str:
    if stake is None or (isinstance(stake, float) and not np.isfinite(stake)):
        return "seats at stake unknown"
    return f"seats at stake {stake:+.1f} (positive favours a)"
