"""The Atom feed (RFC 4287) of flag changes and corrections, newest first: one entry per row of
``flag_events``, and one per load that superseded stored units (a correction: which units and
what changed in seats, winners and vote totals).

Identifiers are ``urn:uuid:`` URNs derived (uuid5) from the entry's content, so a rebuild gives
the same ids and the same bytes. Links are relative to the feed's own address (RFC 4287 section
4.2.7 allows IRI references, resolved against the feed document), so the site works under any
prefix; the one exception is the feed's ``rel="self"`` link, which RFC 4287 (section 4.2.7.2)
recommends be the feed's own absolute address: it is absolute when ``site.base_url`` is
configured, and relative (``atom.xml``) otherwise, because the feed cannot know where it will be
served from. Timestamps come from the data: an entry's ``updated`` is the event's or the load's
time, the feed's the newest entry's (or the site time when there is none).
"""

from __future__ import annotations

import uuid
import xml.etree.ElementTree as ET

from monitor.publish import formats as F
from monitor.publish.collect import SiteData, parse_time

ATOM = "http://www.w3.org/2005/Atom"
NAMESPACE = uuid.uuid5(uuid.NAMESPACE_URL, "levelfield:flag-events")
MAX_ENTRIES = 500


def _id(*parts) -> str:
    return f"urn:uuid:{uuid.uuid5(NAMESPACE, '|'.join(str(p) for p in parts))}"


def self_link(data: SiteData, feed_path: str) -> str:
    """The feed's own address: absolute under ``site.base_url``, else relative."""
    base = (data.base_url or "").strip()
    if not base:
        return feed_path
    return base.rstrip("/") + "/" + feed_path.lstrip("/")


def atom_feed(data: SiteData, views, feed_path: str = "atom.xml") -> bytes:
    """The feed as UTF-8 bytes. ``views`` gives names and the page path of each state."""
    ET.register_namespace("", ATOM)
    feed = ET.Element(f"{{{ATOM}}}feed")

    def sub(parent, tag, text=None, **attrs):
        el = ET.SubElement(parent, f"{{{ATOM}}}{tag}", {k: v for k, v in attrs.items() if v is not None})
        if text is not None:
            el.text = text
        return el

    events = data.events.sort_values("id", ascending=False).head(MAX_ENTRIES)
    loads = _corrections_by_load(data)
    entries = [(parse_time(e.at) or data.site_time, 1, int(e.id), "event", e) for e in events.itertuples()]
    entries += [(parse_time(c["loaded_at"]) or data.site_time, 0, load_id, "correction", c) for load_id, c in loads.items()]
    entries = sorted(entries, key=lambda x: (x[0], x[1], x[2]), reverse=True)[:MAX_ENTRIES]
    times = [x[0] for x in entries]
    updated = max(times) if times else data.site_time
    sub(feed, "id", _id("feed"))
    sub(feed, "title", "levelfield: flag changes")
    sub(feed, "subtitle", "Flags raised and cleared, plans put on or taken off the watch list, and corrections "
                          "of stored results. Indicators, not legal findings.")
    sub(feed, "updated", F.rfc3339(updated))
    author = sub(feed, "author")
    sub(author, "name", "levelfield")
    sub(feed, "link", rel="self", href=self_link(data, feed_path), type="application/atom+xml")
    sub(feed, "link", rel="alternate", href="index.html", type="text/html")
    sub(feed, "generator", "levelfield")
    pairs = set(data.pairs())
    for at, _, _, kind, e in entries:
        if kind == "correction":
            _correction_entry(sub, feed, data, views, pairs, e, at)
            continue
        entry = sub(feed, "entry")
        sub(entry, "id", _id(e.id, e.scope, e.cycle, e.state, e.chamber, e.plan_id, e.measure, e.event, e.at))
        where = f"{views.state_label(e.state)}, {data.chamber_label(e.chamber)}"
        if e.scope == "plan":
            title = f"{where}: plan {e.plan_id} {e.event} (favours {views.party(e.direction)})"
        else:
            cycle = "" if F.missing(e.cycle) else f" {int(e.cycle)}"
            title = f"{where}{cycle}: {data.label(e.measure) if e.measure else 'flag'} {e.event} (favours {views.party(e.direction)})"
        sub(entry, "title", title)
        sub(entry, "updated", F.rfc3339(at))
        if (e.state, e.chamber) in pairs:
            sub(entry, "link", rel="alternate", type="text/html", href=views.state_path(e.state, e.chamber))
        load = "" if F.missing(e.load_id) else f" Load #{int(e.load_id)}."
        sub(entry, "summary", f"{e.why}.{load}".replace("..", "."), type="text")
    ET.indent(feed)
    return b'<?xml version="1.0" encoding="utf-8"?>\n' + ET.tostring(feed, encoding="utf-8") + b"\n"


def _corrections_by_load(data: SiteData) -> dict[int, dict]:
    """The corrections (:func:`monitor.publish.collect.corrections`) grouped by the load that made them."""
    out: dict[int, dict] = {}
    for r in data.corrections.itertuples():
        c = out.setdefault(int(r.load_id), {"load_id": int(r.load_id), "file_name": r.file_name, "sha256": r.sha256,
                                            "loaded_at": r.loaded_at, "units": []})
        c["units"].append(r)
    return out


def _correction_entry(sub, feed, data: SiteData, views, pairs: set, c: dict, at) -> None:
    """One entry per correcting load: which units it superseded and what changed in each."""
    entry = sub(feed, "entry")
    units = c["units"]
    sub(entry, "id", _id("correction", c["load_id"], c["sha256"],
                         *[f"{u.cycle}|{u.state}|{u.chamber}|{u.old_unit_id}" for u in units]))
    names = [f"{views.state_label(u.state)}, {data.chamber_short(u.chamber)} {int(u.cycle)}" for u in units]
    shown = "; ".join(names[:3]) + (f" and {len(names) - 3} more" if len(names) > 3 else "")
    sub(entry, "title", f"Correction: {shown} re-delivered by {c['file_name']} (load #{c['load_id']})")
    sub(entry, "updated", F.rfc3339(at))
    first = units[0]
    if (first.state, first.chamber) in pairs:
        sub(entry, "link", rel="alternate", type="text/html", href=views.state_path(first.state, first.chamber))
    lines = []
    for name, u in zip(names, units):
        what = "; ".join(u.changes) if len(u.changes) else "no difference in seats, winners or votes"
        source = ("from the load report" if u.basis == "load report" else
                  "comparing the superseded and the current results"
                  + ("; the stored load report is not readable" if "not readable" in u.basis else ""))
        lines.append(f"{name} (supersedes load #{int(u.old_load_id)}): {what} ({source}).")
    parties = (f"Party a is {data.parties['a'].name}, party b {data.parties['b'].name}. The measures and flags are "
               "recomputed from the corrected results; flag changes they cause appear as their own entries.")
    sub(entry, "summary", " ".join(lines) + " " + parties, type="text")
