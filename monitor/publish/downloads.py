"""Downloads: results, measures and flags as CSV, described by a Frictionless Data Package
descriptor (``datapackage.json``, Data Package spec v1, https://specs.frictionlessdata.io/).

Weight: every table is published once as CSV. The small tables (the watch list, the flag
history, plans, loads, the national aggregates) also come as JSON; the large per-unit and
per-vote-line tables do not (a JSON twin of the results alone weighed three times its CSV, and
the CSV is what users open). The three large tables (:data:`COMPRESSED`: the results, one row per
vote line, 60 MB of CSV at the bench's x1 history, more than the whole site's budget; the
measures; the national tails) are published gzip-compressed, ``<name>.csv.gz``: the same CSV,
columns and bytes once decompressed (``gunzip``; pandas and frictionless read it as it is),
about a fifth to an eighth of the size. The file is a series of gzip members (RFC 1952, section
2.2: a gzip file is a series of members, read as the concatenation of their data): the header
line, then one member per cycle, each written with mtime 0 and no file name, so a member depends
only on its rows: an incremental build recompresses only the cycles that changed, and its file
is byte for byte the one a full build writes.

CSV cells of text fields that begin with ``=``, ``+``, ``-``, ``@`` (or a tab or carriage return)
get a leading single quote, so that a spreadsheet does not run them as formulas (OWASP, "CSV
Injection"). Numbers are written as numbers and never quoted that way; a text cell that is a plain
number (a district code "-1", say) is not a formula either and stays as it is. The JSON files hold
the original text.
"""

from __future__ import annotations

import csv
import gzip
import hashlib
import io
import itertools
import json
import re
from collections.abc import Iterator

import numpy as np
import pandas as pd

from monitor.exports import COVERAGE_FIELDS, EXPECTED_SEATS_FIELDS, GAP_FIELDS, KEYS, TAILS_FIELDS
from monitor.national import HISTOGRAM_FIELDS, SUMMARY_FIELDS
from monitor.publish import formats as F
from monitor.publish.collect import SiteData
from monitor.publish.plan import row_hashes
from monitor.publish.reuse import KEPT, Parts

#: Field types of the Table Schema spec (v1) that our schemas may use.
FRICTIONLESS_TYPES = {"string", "number", "integer", "boolean", "object", "array", "date", "time", "datetime",
                      "year", "yearmonth", "duration", "geopoint", "geojson", "any"}

FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
_PLAIN_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")


#: Tables published without a JSON twin (large: one row per unit, measure or vote line).
CSV_ONLY = {"results", "measures", "coverage", "coverage-gaps", "expected-seats", "flagged-units"}
#: Tables published gzip-compressed (``<name>.csv.gz``, one gzip member per cycle): the three over
#: a megabyte at the bench's x1 history (vote lines 60 MB, measures 5.7 MB, tails 3.9 MB as CSV).
COMPRESSED = {"results", "measures", "flagged-units"}
#: zlib's default level: 4% larger than level 9 on the x1 results (7.86 against 7.57 MB from 60.4 MB),
#: in about half its time (2.2 s against 4.0 s, measured once under load 2-3).
GZIP_LEVEL = 6

RESOURCES: list[dict] = [
    {"name": "results", "title": "District results",
     "description": "Every current vote line (the district_results columns) with its contest's two-party reduction. "
                    "status is certified or unofficial: unofficial results can change until certified.",
     "fields": [*KEYS, ("district", "string", "district code (AL: a single at-large seat)"),
                ("party", "string", "party label as printed"), ("candidate", "string", "candidate name"),
                ("votes", "integer", "votes of this line"), ("status", "string", "certified | unofficial"),
                ("load_id", "integer", "the load that delivered this unit (see loads)"),
                ("special", "boolean", "special election contest"), ("seats", "integer", "seats of the contest"),
                ("contest_status", "string", "contested | uncontested | same_party | no_major"),
                ("votes_a", "integer", "contest votes of party a (fusion lines attributed)"),
                ("votes_b", "integer", "contest votes of party b"),
                ("share_a", "number", "party a's share of the contest's two-party vote (before any imputation)"),
                ("winner", "string", "a | b | other | split"),
                ("runoff", "boolean", "the runoff after a first round"),
                ("decides", "boolean", "the contest that decides its seat (one per seat; the others are history)")]},
    {"name": "measures", "title": "Measures per state, chamber and cycle",
     "description": "One row per unit and measure. Signed measures are positive when they favour party a. "
                    "low/high: 95% interval where given; reason: why a value is undefined. Each unit's coverage "
                    "and vote shares are in the coverage download (levelfield export measures repeats them on "
                    "every row).",
     "fields": [*KEYS, ("measure", "string", "measure name (see the methods page)"), ("value", "number", "value"),
                ("low", "number", "95% interval, low end"), ("high", "number", "95% interval, high end"),
                ("p_value", "number", "p-value where the measure has a test"),
                ("reason", "string", "why the value is undefined"), ("method_version", "string", "method version"),
                ("policy", "string", "uncontested policy the value was computed under")]},
    {"name": "coverage", "title": "Coverage and vote shares per state, chamber and cycle",
     "description": "One row per unit: the districts and seats it should have and those that enter the measures, "
                    "whether it is incomplete and what is missing or left out (and why), and party a's two-party "
                    "vote share as cast and after the uncontested policy, for the state and nationwide. The same "
                    "columns as levelfield export coverage (and the columns export measures adds after reason).",
     "fields": [*KEYS, *COVERAGE_FIELDS]},
    {"name": "coverage-gaps", "title": "Districts missing or left out of the measures",
     "description": "One row per district of a unit that is missing (results in the previous cycle of the same "
                    "plan, none now; or more districts expected than stored) or left out of the measures, with "
                    "why. The same columns as levelfield export coverage --districts.",
     "fields": GAP_FIELDS},
    {"name": "expected-seats", "title": "Expected seats from the national pool",
     "description": "Seats of party a against delegations of the same size and statewide vote drawn from the "
                    "cycle's districts nationwide. excess_seats = seats_a - expected_seats (positive favours a).",
     "fields": EXPECTED_SEATS_FIELDS},
    {"name": "flagged-units", "title": "National tails: every unit and measure judged",
     "description": "Each measure of each unit against its national-pool null (percentiles are fractions 0-1). "
                    "flagged units favour the party in favours.",
     "fields": TAILS_FIELDS},
    {"name": "flags", "title": "Flag history",
     "description": "Every flag raised or cleared, and every plan put on or taken off the watch list, with why and "
                    "the load that caused it.",
     "fields": [("id", "integer", "event number"), ("scope", "string", "unit | plan"), ("cycle", "integer", "cycle (unit events)"),
                ("state", "string", "state code"), ("chamber", "string", "chamber code"), ("plan_id", "string", "plan"),
                ("measure", "string", "measure (unit events)"), ("event", "string", "raised | cleared | on watch | off watch"),
                ("favours", "string", "a | b"), ("why", "string", "why"), ("at", "string", "when (ISO 8601)"),
                ("load_id", "integer", "load that caused the change")]},
    {"name": "watch", "title": "Watch list",
     "description": "Plans on watch: at least two cycles each flagged by at least two measures agreeing in direction.",
     "fields": [("state", "string", "state code"), ("chamber", "string", "chamber code"), ("plan_id", "string", "plan"),
                ("favours", "string", "a | b"), ("severity", "number", "seats at stake (absolute)"),
                ("cycles", "string", "flagged cycles, space separated"), ("measures", "string", "agreeing measures, space separated"),
                ("drawn_by", "string", "who drew the plan"), ("inferred", "boolean", "plan era inferred, not loaded"),
                ("seats_at_stake", "number", "mean excess seats over the agreeing cycles (signed)"),
                ("concurring", "integer", "most measures agreeing in one cycle"), ("since", "integer", "first flagged cycle")]},
    {"name": "national", "title": "National aggregates per cycle and chamber",
     "description": "One row per cycle and chamber: states, districts, seats and votes of each party, the districts "
                    "that enter the measures and party a's two-party share over them after the uncontested policy, "
                    "uncontested and competitive districts (sums of the stored measures), flagged states and excess "
                    "seats by who drew the plan (actual minus expected from the national pool; positive favours a). "
                    "The same table as the command levelfield export national prints.",
     "fields": SUMMARY_FIELDS},
    {"name": "national-histogram", "title": "National histogram of district shares",
     "description": "Districts per bin of party a's two-party share after the uncontested policy, per cycle and "
                    "chamber: the histogram on the home and cycle pages. Uncontested districts are counted at their "
                    "imputed share (kind), with the side of 50% their share lies on.",
     "fields": HISTOGRAM_FIELDS},
    {"name": "plans", "title": "Plan eras",
     "description": "Redistricting plans by state and chamber; inferred eras assume a new plan from each cycle ending in 2.",
     "fields": [("state", "string", "state code"), ("chamber", "string", "chamber code"), ("plan_id", "string", "plan"),
                ("first_cycle", "integer", "first cycle"), ("last_cycle", "integer", "last cycle (empty: still in force)"),
                ("drawn_by", "string", "party_a | party_b | split | commission | court | other"),
                ("note", "string", "note"), ("source", "string", "source"), ("inferred", "boolean", "era inferred")]},
    {"name": "loads", "title": "Loads (provenance)",
     "description": "Every file loaded into the store, with its sha256, when it was loaded and what it changed.",
     "fields": [("id", "integer", "load number"), ("file_name", "string", "file name"), ("sha256", "string", "sha256 of the file's bytes"),
                ("bytes", "integer", "file size"), ("format", "string", "file format"), ("source", "string", "where it came from"),
                ("rows_accepted", "integer", "rows accepted"), ("units_new", "integer", "units new"),
                ("units_corrected", "integer", "units corrected"), ("units_unchanged", "integer", "units unchanged"),
                ("loaded_at", "string", "when (ISO 8601)"), ("outcome", "string", "outcome")]},
]


#: The package's licence entry: not specified, for the publisher to fill in (see ``downloads``).
DATA_LICENCE = {
    "name": "notspecified",
    "title": "Licence not specified: these files hold the publisher's election results and numbers derived from "
             "them. The publisher must state the licence of the source results here before redistributing them.",
}


def _frame(data: SiteData, name: str) -> pd.DataFrame:
    if name == "results":
        return data.results
    if name == "measures":
        return data.measures
    if name == "coverage":
        return data.coverage_export
    if name == "coverage-gaps":
        return data.coverage_gaps
    if name == "expected-seats":
        return data.pool
    if name == "flagged-units":
        return data.tails.rename(columns={"direction": "favours"})
    if name == "flags":
        return data.events.rename(columns={"direction": "favours"})
    if name == "watch":
        return data.watch
    if name == "national":
        return data.national
    if name == "national-histogram":
        return data.histogram
    if name == "plans":
        return data.plans
    if name == "loads":  # a refused load stored nothing: it stays in the store and in status, not here
        return data.loads[data.loads["outcome"] == "loaded"]
    raise KeyError(name)


def neutralise(text: str) -> str:
    """Prefix a single quote to text a spreadsheet would run as a formula.

    >>> neutralise("=SUM(A1)"), neutralise("-1"), neutralise("Harbour")
    ("'=SUM(A1)", '-1', 'Harbour')
    """
    if text.startswith(FORMULA_START) and not _PLAIN_NUMBER.match(text):
        return "'" + text
    return text


def _csv_column(values: list, kind: str) -> list[str]:
    """One column's CSV cells: numbers as numbers, text neutralised, missing as empty."""
    miss = F.missing
    if kind == "integer":
        return ["" if miss(v) else str(int(v)) for v in values]
    if kind == "number":
        out = []
        for v in values:
            if miss(v):
                out.append("")
                continue
            v = float(v)
            out.append(str(int(v)) if v.is_integer() and abs(v) < 1e15 else repr(v))
        return out
    if kind == "boolean":
        return ["" if miss(v) else ("true" if bool(int(v)) else "false") for v in values]
    return ["" if miss(v) else neutralise(str(v)) for v in values]


def _json_column(values: list, kind: str) -> list:
    miss = F.missing
    if kind == "integer":
        return [None if miss(v) else int(v) for v in values]
    if kind == "number":
        return [None if miss(v) else float(v) for v in values]
    if kind == "boolean":
        return [None if miss(v) else bool(int(v)) for v in values]
    return [None if miss(v) else str(v) for v in values]


def _columns(frame: pd.DataFrame, fields) -> list[list]:
    return [frame[name].tolist() if name in frame else [None] * len(frame) for name, _, _ in fields]


def _csv_rows(frame: pd.DataFrame, fields) -> bytes:
    """The CSV rows of ``frame`` (no header)."""
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    cells = [_csv_column(col, kind) for col, (_, kind, _) in zip(_columns(frame, fields), fields)]
    writer.writerows(zip(*cells))
    return buf.getvalue().encode("utf-8")


def _csv_header(fields) -> bytes:
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n").writerow([f[0] for f in fields])
    return buf.getvalue().encode("utf-8")


def to_csv(frame: pd.DataFrame, fields) -> bytes:
    return _csv_header(fields) + _csv_rows(frame, fields)


def _json_lines(frame: pd.DataFrame, fields) -> bytes:
    """The JSON objects of ``frame``'s rows, one per line, joined by ``,\n`` (no brackets)."""
    names = [f[0] for f in fields]
    cols = [_json_column(col, kind) for col, (_, kind, _) in zip(_columns(frame, fields), fields)]
    dumps = json.JSONEncoder(ensure_ascii=False, allow_nan=False).encode
    return ",\n".join(dumps(dict(zip(names, row))) for row in zip(*cols)).encode("utf-8")


def to_json(frame: pd.DataFrame, fields) -> bytes:
    return _json_file([_json_lines(frame, fields)])


def _json_file(bodies) -> bytes:
    return b"".join(_json_parts(bodies))


def _json_parts(bodies):
    """``[`` + the non-empty bodies joined by ``,\n`` + ``]``: what :func:`to_json` writes for the
    rows of every body in turn."""
    yield b"[\n"
    first = True
    for body in bodies:
        if not body:
            continue
        yield body if first else b",\n" + body
        first = False
    yield b"]\n" if first else b"\n]\n"


def _sha(content: bytes) -> str:
    return hashlib.sha256(content).hexdigest()


def gzip_member(content: bytes) -> bytes:
    """``content`` as one gzip member that depends on nothing else: mtime 0, no file name (so the
    same rows always give the same bytes; RFC 1952 allows MTIME = 0, "no time stamp")."""
    return gzip.compress(content, compresslevel=GZIP_LEVEL, mtime=0)


def _stem(name: str) -> str:
    """A resource's file name stem (``flagged-units`` -> ``flagged_units``)."""
    return name.replace("-", "_")


def csv_path(name: str) -> str:
    """A resource's CSV file name inside the downloads folder."""
    return f"{_stem(name)}.csv.gz" if name in COMPRESSED else f"{_stem(name)}.csv"


def downloads(data: SiteData, prefix: str = "downloads") -> tuple[dict[str, bytes], list[dict]]:
    """The download files (path -> bytes, paths under ``prefix``) including ``datapackage.json``,
    and a listing for the downloads page."""
    listing: list[dict] = []
    files = dict(iter_downloads(data, prefix, listing))
    return files, listing


def _by_cycle(data: SiteData, spec: dict) -> dict[int, str] | None:
    """cycle -> digest of a resource's rows of that cycle, when its rows are in cycle order (the
    file is then made of per-cycle parts); None otherwise. The results' vote lines are not read:
    their digest is that of the cycle's units as delivered (content, reduction, status, load)."""
    name = spec["name"]
    if name == "results":
        from store.reductions import current_keys

        keys = current_keys(data.db).merge(data.units[["unit_id", "certification"]], on="unit_id", how="left")
        out: dict[int, list] = {}
        for row in keys.itertuples(index=False):
            out.setdefault(int(row.cycle), []).append("|".join(map(str, row)))
        return {c: _sha("\n".join(sorted(v)).encode()) for c, v in out.items()}
    frame = _frame(data, name)
    if "cycle" not in frame.columns or frame.empty or frame["cycle"].isna().any() \
            or not frame["cycle"].astype(int).is_monotonic_increasing:
        return None
    cols = [f[0] for f in spec["fields"] if f[0] in frame.columns]
    hashed = row_hashes(frame, cols)
    cycles = frame["cycle"].astype(int).to_numpy()
    out = {}
    for c in np.unique(cycles):
        rows = hashed[cycles == c]
        out[int(c)] = _sha(rows.tobytes())
    return out


def _part_rows(data: SiteData, name: str, cycle: int) -> pd.DataFrame:
    if name == "results":
        return data.results_of(cycle)
    frame = _frame(data, name)
    return frame[frame["cycle"].astype(int) == cycle]


def _file(data: SiteData, spec: dict, kind: str, reuse, path: str, parts: dict[int, str] | None):
    """A download's content: bytes, KEPT (same inputs as the previous build's file) or Parts.

    A compressed CSV (:data:`COMPRESSED`) is always written as per-cycle gzip members (with or
    without ``reuse``), so that every build writes the same bytes for the same rows."""
    fields = spec["fields"]
    packed = kind == "csv" and spec["name"] in COMPRESSED
    if parts is None:
        frame = _frame(data, spec["name"])
        content = to_csv(frame, fields) if kind == "csv" else to_json(frame, fields)
        return gzip_member(content) if packed else content
    head = _sha(repr((fields, packed)).encode())
    if reuse is not None and reuse.keep(path, _sha(f"{head}|{sorted(parts.items())}".encode())):
        return KEPT
    base = _stem(spec["name"])
    rows = _csv_rows if kind == "csv" else _json_lines

    def encode(cycle: int) -> bytes:
        body = rows(_part_rows(data, spec["name"], cycle), fields)
        return gzip_member(body) if packed else body

    def bodies():
        for cycle, digest in sorted(parts.items()):
            name = f"{base}.{kind}{'.gz' if packed else ''}.{head[:16]}.{digest}"
            yield encode(cycle) if reuse is None else reuse.part(name, lambda c=cycle: encode(c), path)

    if packed:
        return Parts(itertools.chain([gzip_member(_csv_header(fields))], bodies()))
    if kind == "csv":
        return Parts(itertools.chain([_csv_header(fields)], bodies()))
    return Parts(_json_parts(bodies()))


def iter_downloads(data: SiteData, prefix: str, listing: list[dict], reuse=None) -> Iterator[tuple[str, bytes]]:
    """The download files one resource at a time (so a build never holds them all), then
    ``datapackage.json``; each resource's entry for the downloads page is appended to ``listing``.

    With ``reuse`` (:class:`monitor.publish.reuse.Reuse`), a resource whose rows are in cycle
    order is made of per-cycle parts: a file whose parts did not change is kept from the previous
    build, and only the parts of the cycles that changed are encoded again (the results' vote
    lines are read one cycle at a time)."""
    resources = []
    for spec in RESOURCES:
        base = _stem(spec["name"])
        packed = spec["name"] in COMPRESSED
        parts = _by_cycle(data, spec) if reuse is not None or packed else None
        kinds = ("csv",) if spec["name"] in CSV_ONLY else ("csv", "json")
        made = {}
        for kind in kinds:
            path = f"{prefix}/{csv_path(spec['name'])}" if kind == "csv" else f"{prefix}/{base}.{kind}"
            content = _file(data, spec, kind, reuse, path, parts)
            yield path, content
            made[kind] = _facts(content, reuse, path)
        csv_bytes, csv_sha = made["csv"]
        schema = {"fields": [{"name": n, "type": t, "description": d} for n, t, d in spec["fields"]],
                  "missingValues": [""]}
        resource = {
            "name": spec["name"], "path": csv_path(spec["name"]), "title": spec["title"],
            "description": spec["description"] + " Text cells beginning with =, +, - or @ carry a leading "
                                                  "single quote against spreadsheet formula injection.",
            "profile": "tabular-data-resource", "format": "csv", "mediatype": "text/csv", "encoding": "utf-8",
            "bytes": csv_bytes, "hash": f"sha256:{csv_sha}",
            "dialect": {"delimiter": ",", "doubleQuote": True, "lineTerminator": "\n", "quoteChar": '"', "header": True},
            "schema": schema,
        }
        if packed:  # bytes and hash are those of the compressed file, as published
            resource["compression"] = "gz"
            resource["description"] += " Gzip-compressed (the CSV once decompressed)."
        resources.append(resource)
        entry = {"name": spec["name"], "title": spec["title"], "description": spec["description"],
                 "rows": _rows(data, spec["name"]), "csv": f"{prefix}/{csv_path(spec['name'])}", "csv_bytes": csv_bytes,
                 "csv_sha256": csv_sha, "compressed": packed, "json": None, "json_bytes": 0}
        if "json" in made:
            json_bytes, json_sha = made["json"]
            resources.append({
                "name": f"{spec['name']}-json", "path": f"{base}.json", "title": spec["title"] + " (JSON)",
                "description": f"The rows of {base}.csv as a JSON array of objects (original text, no quote prefix).",
                "profile": "data-resource", "format": "json", "mediatype": "application/json", "encoding": "utf-8",
                "bytes": json_bytes, "hash": f"sha256:{json_sha}", "schema": schema,
            })
            entry.update(json=f"{prefix}/{base}.json", json_bytes=json_bytes)
        listing.append(entry)
    package = {
        "profile": "data-package",
        "name": "levelfield-published-data",
        "title": "District results, asymmetry measures and flags",
        "description": "Published by levelfield. The measures are indicators, not legal findings; results marked "
                       "unofficial can change until certified; uncontested districts enter the measures under the "
                       f"stated policy ({data.policy}). Signed measures are positive when they favour party a "
                       f"({data.parties['a'].name}); party b is {data.parties['b'].name}.",
        "created": F.rfc3339(data.site_time),
        "keywords": ["elections", "districts", "partisan asymmetry"],
        # The data are the publisher's: election results they loaded (and numbers derived from them),
        # under whatever terms those results came with. levelfield cannot know those terms, and
        # claiming an open licence here would misstate them. So the descriptor says so with the
        # Open Definition id "notspecified" (a licence id the Data Package spec accepts) and a title
        # telling the publisher to replace the entry with the data's real licence before
        # redistributing the files.
        "licenses": [DATA_LICENCE],
        "resources": resources,
    }
    yield f"{prefix}/datapackage.json", (json.dumps(package, indent=2, ensure_ascii=False) + "\n").encode("utf-8")




def _facts(content, reuse, path: str) -> tuple[int, str]:
    """Size and sha256 of a download just written (bytes, Parts) or kept from the previous build."""
    if content is KEPT:
        entry = reuse.now[path]
        return int(entry["bytes"]), entry["sha256"]
    if isinstance(content, Parts):
        return content.size, content.sha256
    return len(content), _sha(content)


def _rows(data: SiteData, name: str) -> int:
    """Rows of a resource (the results' vote lines are counted in the store, not read)."""
    if name == "results":
        from store.reductions import count_result_lines

        return count_result_lines(data.db)
    return len(_frame(data, name))


def check_types(fields) -> list[str]:
    """Problems with a field list: unknown types, duplicate names."""
    problems = [f"{n}: {t} is not a Table Schema type" for n, t, _ in fields if t not in FRICTIONLESS_TYPES]
    names = [n for n, _, _ in fields]
    problems += [f"{n}: listed twice" for n in sorted({n for n in names if names.count(n) > 1})]
    return problems


__all__ = ["COMPRESSED", "RESOURCES", "check_types", "csv_path", "downloads", "gzip_member", "neutralise", "to_csv",
           "to_json"]
