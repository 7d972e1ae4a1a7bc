"""The Atom feed (RFC 4287) of flag changes: one entry per row of ``flag_events``, newest first.

Identifiers are ``urn:uuid:`` URNs derived (uuid5) from the event's content, so a rebuild gives
the same ids and the same bytes. Links are relative to the feed's own address (RFC 4287 section
4.2.7 allows IRI references, resolved against the feed document), so the site works under any
prefix. Timestamps come from the data: an entry's ``updated`` is the event's time, the feed's is
the newest event (or the site time when there is none).
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
    times = [t for t in (parse_time(a) for a in events["at"]) if t is not None]
    updated = max(times) if times else data.site_time
    sub(feed, "id", _id("feed"))
    sub(feed, "title", "levelfield: flag changes")
    sub(feed, "subtitle", "Flags raised and cleared, and plans put on or taken off the watch list. "
                          "Indicators, not legal findings.")
    sub(feed, "updated", F.rfc3339(updated))
    author = sub(feed, "author")
    sub(author, "name", "levelfield")
    sub(feed, "link", rel="self", href=feed_path, type="application/atom+xml")
    sub(feed, "link", rel="alternate", href="index.html", type="text/html")
    sub(feed, "generator", "levelfield")
    pairs = set(data.pairs())
    for e in events.itertuples():
        at = parse_time(e.at) or data.site_time
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
