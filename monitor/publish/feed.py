"""The Atom feed (RFC 4287): what changed on the site, build after build, in plain words.

**First build.** A site published for the first time has nothing to announce but itself: the
flags the first computation raised over decades of history are not news. The first build writes
one entry, "site published, N plans on watch", and records in the feed how far the flag history
and the loads go (``lf:events-through``, ``lf:loads-through``: an extension element of our own
namespace, which RFC 4287 section 6 allows). A site without results writes a feed with neither
entries nor marks, so the first build with results is the first build.

**Later builds** keep the entries of the previous feed (read from the output folder that the
build replaces) and add one entry per change recorded since: a unit flag raised or cleared, a
plan put on or taken off the watch list, and a correction of stored results. A plan era that a
plans file re-drew (an inferred plan taken off watch and the loaded plan put on, in the same
recompute, favouring the same party) is one entry, not two. At most :data:`MAX_ENTRIES` are kept.

Links are absolute under ``site.base_url`` (feed readers resolve nothing else reliably); without
it they are relative to the feed's own address (RFC 4287 section 4.2.7 allows IRI references) and
publish warns. Identifiers are ``urn:uuid:`` URNs derived (uuid5) from each entry's content, and
timestamps come from the data, so the same store and the same previous feed give the same bytes.
"""

from __future__ import annotations

import uuid
import xml.etree.ElementTree as ET

from monitor.publish import formats as F
from monitor.publish.collect import SiteData, parse_time

ATOM = "http://www.w3.org/2005/Atom"
LF = "urn:levelfield:feed"
NAMESPACE = uuid.uuid5(uuid.NAMESPACE_URL, "levelfield:flag-events")
MAX_ENTRIES = 500


def _id(*parts) -> str:
    return f"urn:uuid:{uuid.uuid5(NAMESPACE, '|'.join(str(p) for p in parts))}"


def link_to(data: SiteData, path: str) -> str:
    """A site path as the feed links it: absolute under ``site.base_url``, else relative."""
    base = (data.base_url or "").strip()
    if not base:
        return path
    return base.rstrip("/") + "/" + path.lstrip("/")


def self_link(data: SiteData, feed_path: str) -> str:
    """The feed's own address: absolute under ``site.base_url``, else relative."""
    return link_to(data, feed_path)


def warnings(data: SiteData) -> list[str]:
    """What publish should tell the user about the feed."""
    if (data.base_url or "").strip():
        return []
    return ["site.base_url is not set in levelfield.toml: the feed's links are relative, which many feed readers "
            "cannot follow; set it to the address the site is served from (for example "
            '"https://example.org/watch/")']


def previous_state(previous: bytes | None) -> tuple[list[ET.Element], int, int] | None:
    """The entries of the previous build's feed and how far it went (events, loads), or None
    when there is none we can read (the next feed is then a first build's)."""
    if not previous:
        return None
    try:
        root = ET.fromstring(previous)
    except ET.ParseError:
        return None
    events, loads = root.find(f"{{{LF}}}events-through"), root.find(f"{{{LF}}}loads-through")
    if events is None or loads is None:
        return None
    try:
        return root.findall(f"{{{ATOM}}}entry"), int(events.text), int(loads.text)
    except (TypeError, ValueError):
        return None


def atom_feed(data: SiteData, views, feed_path: str = "atom.xml", previous: bytes | None = None) -> bytes:
    """The feed as UTF-8 bytes. ``views`` gives names, words and page paths; ``previous``: the
    previous build's feed (None: this is the first build)."""
    ET.register_namespace("", ATOM)
    ET.register_namespace("lf", LF)
    events_through = int(data.events["id"].max()) if len(data.events) else 0
    loads_through = int(data.loads["id"].max()) if len(data.loads) else 0
    state = previous_state(previous)
    if data.empty:  # nothing published yet: no entry, and no marks, so the first site with data is a first build
        entries = []
    elif state is None:
        entries = [_published_entry(data, views, events_through, loads_through)]
    else:
        kept, seen_events, seen_loads = state
        new = data.events[data.events["id"] > seen_events]
        entries = _event_entries(data, views, new) + _correction_entries(data, views, seen_loads) + kept
    entries = sorted(entries, key=lambda e: (e.findtext(f"{{{ATOM}}}updated") or "", e.findtext(f"{{{ATOM}}}id")),
                     reverse=True)[:MAX_ENTRIES]

    feed = ET.Element(f"{{{ATOM}}}feed")
    _sub(feed, "id", _id("feed"))
    _sub(feed, "title", "levelfield: what changed")
    _sub(feed, "subtitle", "States flagged and cleared, plans put on or taken off the watch list, and corrections of "
                           "published results. Indicators, not legal findings; unofficial results can change until "
                           "certified; defer to counsel and the courts.")
    times = [e.findtext(f"{{{ATOM}}}updated") for e in entries]
    _sub(feed, "updated", max(times) if times else F.rfc3339(data.site_time))
    _sub(_sub(feed, "author"), "name", "levelfield")
    _sub(feed, "link", rel="self", href=self_link(data, feed_path), type="application/atom+xml")
    _sub(feed, "link", rel="alternate", href=link_to(data, "index.html"), type="text/html")
    _sub(feed, "generator", "levelfield")
    if not data.empty:
        ET.SubElement(feed, f"{{{LF}}}events-through").text = str(max(events_through, state[1] if state else 0))
        ET.SubElement(feed, f"{{{LF}}}loads-through").text = str(max(loads_through, state[2] if state else 0))
    feed.extend(entries)
    ET.indent(feed)
    return b'<?xml version="1.0" encoding="utf-8"?>\n' + ET.tostring(feed, encoding="utf-8") + b"\n"


def _sub(parent, tag, text=None, **attrs):
    el = ET.SubElement(parent, f"{{{ATOM}}}{tag}", {k: v for k, v in attrs.items() if v is not None})
    if text is not None:
        el.text = text
    return el


def _entry(entry_id: str, title: str, at, summary: str, href: str | None, data: SiteData) -> ET.Element:
    entry = ET.Element(f"{{{ATOM}}}entry")
    _sub(entry, "id", entry_id)
    _sub(entry, "title", title)
    _sub(entry, "updated", F.rfc3339(at))
    if href:
        _sub(entry, "link", rel="alternate", type="text/html", href=link_to(data, href))
    _sub(entry, "summary", summary, type="text")
    return entry


def _published_entry(data: SiteData, views, events_through: int, loads_through: int) -> ET.Element:
    """The first build's one entry: the site, its plans on watch and the latest cycle's flags."""
    in_force, past = views.watch_split()
    n = len(data.watch)
    lines = [f"{n} plan{'s' if n != 1 else ''} on watch ({len(in_force)} in force, {len(past)} past)."]
    for chamber, cycle in data.chamber_latest().items():
        rows = views.flagged_in(cycle, chamber, "")
        lines.append(f"{data.chamber_label(chamber)}, {cycle}: {len(rows)} state{'s' if len(rows) != 1 else ''} flagged"
                     + (": " + "; ".join(_standing_phrase(r) for r in rows) if rows else "") + ".")
    lines.append("From now on this feed has one entry per change: a state flagged or cleared, a plan put on or taken "
                 "off the watch list, a correction of published results.")
    return _entry(_id("published", events_through, loads_through, n), f"Site published, {n} plans on watch",
                  data.site_time, " ".join(lines), "index.html", data)


def _standing_phrase(r: dict) -> str:
    """A flagged unit in a few words: its seats at stake (which name their party by the one sign
    rule), and the measures' party only when the seats do not name the same one."""
    stake = r["stake"]
    if r["direction_code"] and stake.code == r["direction_code"]:
        return f"{r['state']} {stake.text}"
    measures = f"the measures favour {r['direction']}" if r["direction_code"] else "the measures split between the parties"
    seats = (f"the seats at stake {stake.text.replace('favours ', 'favour ', 1)}" if stake.code else stake.text)
    return f"{r['state']}, where {measures} but {seats}"


def _event_entries(data: SiteData, views, events) -> list[ET.Element]:
    """One entry per flag event, with a re-drawn plan era's off/on pair made one."""
    w = views.words
    pairs = set(data.pairs())
    out = []
    plan = events[events["scope"] == "plan"]
    merged: set[int] = set()
    for _, group in plan.groupby(["at", "state", "chamber", "direction"], sort=False):
        off, on = group[group["event"] == "off watch"], group[group["event"] == "on watch"]
        if len(off) == 1 and len(on) == 1:
            o, n = off.iloc[0], on.iloc[0]
            merged |= {int(o["id"]), int(n["id"])}
            where = f"{views.state_label(n['state'])}, {data.chamber_label(n['chamber'])}"
            out.append(_entry(_id(o["id"], n["id"], n["why"], n["at"]),
                              f"{where}: plan era re-drawn, {n['plan_id']} (was {o['plan_id']}) stays on watch",
                              parse_time(n["at"]) or data.site_time,
                              f"A plans file replaced plan {o['plan_id']} by {n['plan_id']}; the watch list entry "
                              f"moves with it: {w.why(n['why'])}.",
                              views.state_path(n["state"], n["chamber"]) if (n["state"], n["chamber"]) in pairs else None,
                              data))
    for e in events.itertuples():
        if int(e.id) in merged:
            continue
        where = f"{views.state_label(e.state)}, {data.chamber_label(e.chamber)}"
        if e.scope == "plan":
            title = f"{where}: plan {e.plan_id} {e.event}, the measures favour {w.party(e.direction)}"
        else:
            what = "flagged" if e.event == "raised" else "no longer flagged" if e.event == "cleared" else e.event
            title = (f"{where} {'' if F.missing(e.cycle) else int(e.cycle)}: {what} on "
                     f"{w.measure(e.measure) if F.text(e.measure) else 'a measure'}, favouring {w.party(e.direction)}")
        load = "" if F.missing(e.load_id) else f" Load #{int(e.load_id)}."
        out.append(_entry(_id(e.id, e.scope, e.cycle, e.state, e.chamber, e.plan_id, e.measure, e.event, e.at),
                          title, parse_time(e.at) or data.site_time, f"{w.why(e.why)}.{load}".replace("..", "."),
                          views.state_path(e.state, e.chamber) if (e.state, e.chamber) in pairs else None, data))
    return out


def _correction_entries(data: SiteData, views, after_load: int) -> list[ET.Element]:
    """One entry per correcting load after ``after_load``: which units it superseded and what changed."""
    loads: dict[int, dict] = {}
    for r in data.corrections.itertuples():
        if int(r.load_id) <= after_load:
            continue
        c = loads.setdefault(int(r.load_id), {"load_id": int(r.load_id), "file_name": r.file_name, "sha256": r.sha256,
                                              "loaded_at": r.loaded_at, "units": []})
        c["units"].append(r)
    pairs = set(data.pairs())
    out = []
    for c in loads.values():
        units = c["units"]
        names = [f"{views.state_label(u.state)}, {data.chamber_short(u.chamber)} {int(u.cycle)}" for u in units]
        shown = "; ".join(names[:3]) + (f" and {len(names) - 3} more" if len(names) > 3 else "")
        lines = []
        for name, u in zip(names, units):
            what = "; ".join(views.words.change(ch) for ch in u.changes) if len(u.changes) else \
                "no difference in seats, winners or votes"
            source = ("from the load report" if u.basis == "load report" else
                      "comparing the superseded and the current results"
                      + ("; the stored load report is not readable" if "not readable" in u.basis else ""))
            lines.append(f"{name} (supersedes load #{int(u.old_load_id)}): {what} ({source}).")
        lines.append("The measures and flags are recomputed from the corrected results; flag changes they cause "
                     "appear as their own entries.")
        first = units[0]
        out.append(_entry(
            _id("correction", c["load_id"], c["sha256"], *[f"{u.cycle}|{u.state}|{u.chamber}|{u.old_unit_id}" for u in units]),
            f"Correction: {shown} re-delivered by {c['file_name']} (load #{c['load_id']})",
            parse_time(c["loaded_at"]) or data.site_time, " ".join(lines),
            views.state_path(first.state, first.chamber) if (first.state, first.chamber) in pairs else None, data))
    return out
