"""The native formats: long (one row per candidate line) and wide (one ``votes_<party>`` column per party).

Long header: ``cycle,state,chamber,district,party,candidate,votes`` plus optional
``seats,special,runoff,writein,status,position``. Wide header: ``cycle,state,chamber,district`` plus one
``votes_<party label>`` column per party, optional ``seats,special,runoff,status,position``. Native files
refuse a candidate's repeated lines on one party line (a mapping can sum them).
"""

from __future__ import annotations

import difflib
from typing import Iterable

from monitor.errors import DataError, Problem
from monitor.ingest.fields import shown
from monitor.ingest.records import ParseContext, Record, contest_key, describe_contest, parse_record

LONG_REQUIRED = ("cycle", "state", "chamber", "district", "party", "candidate", "votes")
LONG_OPTIONAL = ("seats", "special", "runoff", "writein", "status", "position")
WIDE_REQUIRED = ("cycle", "state", "chamber", "district")
WIDE_OPTIONAL = ("seats", "special", "runoff", "status", "position")
VOTES_PREFIX = "votes_"


def header_problems(file: str, header: list[str]) -> list[Problem]:
    """Duplicated and empty column names (row 1)."""
    problems = []
    seen: dict[str, int] = {}
    for index, name in enumerate(header):
        key = name.strip().casefold()
        if not key:
            problems.append(Problem(file, 1, f"#{index + 1}", "column has no name"))
        elif key in seen:
            problems.append(Problem(file, 1, shown(name.strip()), f"duplicated column (also column {seen[key] + 1})"))
        else:
            seen[key] = index
    return problems


def width_problem(file: str, row: int, cells: list[str], names: list[str]) -> Problem:
    """A row with more or fewer cells than the header has columns, located at the first column
    (``#n``, 1-based) that does not line up."""
    width = len(names)
    if len(cells) > width:
        return Problem(file, row, f"#{width + 1}",
                       f"has {len(cells)} cells but the header has {width} columns: cell #{width + 1} onwards "
                       "fall under no column (an unquoted comma inside a cell, such as a thousands "
                       "separator or a name? quote that cell)")
    missing = names[len(cells)]
    return Problem(file, row, f"#{len(cells) + 1}",
                   f"has {len(cells)} cells but the header has {width} columns: column #{len(cells) + 1}"
                   + (f" ({shown(missing)})" if missing else "") + " onwards missing")


def cells_getter(cells: list[str], index: dict[str, int]):
    """``get(field)`` over a row's cells, ``None`` for a field without a column (or a cell)."""

    def get(name: str) -> str | None:
        i = index.get(name)
        return None if i is None or i >= len(cells) else cells[i]

    return get


def detect_format(header: list[str]) -> str:
    names = {h.strip().casefold() for h in header}
    if "party" not in names and any(n.startswith(VOTES_PREFIX) for n in names):
        return "native-wide"
    return "native-long"


def parse_native(
    ctx: ParseContext, header: list[str], rows: Iterable[tuple[int, list[str]]]
) -> tuple[str, list[Record], list[Problem], int]:
    """Parse a native file; returns (format, records, row problems, rows read).

    Header problems raise :class:`DataError` at once: no row can be read without a sound header.
    """
    fmt, names, index, parties = _read_header(ctx.file, header)
    records: list[Record] = []
    row_problems: list[Problem] = []
    read = 0
    columns = {n.casefold(): n for n in names}
    for row, cells in rows:
        if not cells or (len(cells) == 1 and not cells[0].strip()):
            continue  # blank line
        read += 1
        get = cells_getter(cells, index)
        if len(cells) != len(names):
            row_problems.append(width_problem(ctx.file, row, cells, names))
            ctx.bad_rows.append((row, contest_key(ctx, get)))
            continue
        if fmt == "native-long":
            record, problems = parse_record(ctx, row, get, columns)
            found = [record] if record else None
        else:
            found, problems = _parse_wide_row(ctx, row, cells, get, parties, names, columns)
        row_problems.extend(problems)
        if found is None:
            ctx.bad_rows.append((row, contest_key(ctx, get)))
        else:
            records.extend(found)
    return fmt, records, row_problems, read


def _read_header(file: str, header: list[str]) -> tuple[str, list[str], dict[str, int], list[tuple[str, int]]]:
    """A native header's format, its stripped names, their index (by casefolded name) and, for a
    wide file, its ``votes_`` columns as (party label, index); every header problem (row 1) at
    once as a :class:`DataError`."""
    problems = header_problems(file, header)
    fmt = detect_format(header)
    names = [h.strip() for h in header]
    index = {n.casefold(): i for i, n in enumerate(names)}
    if fmt == "native-long":
        required, optional = LONG_REQUIRED, LONG_OPTIONAL
        parties: list[tuple[str, int]] = []
    else:
        required, optional = WIDE_REQUIRED, WIDE_OPTIONAL
        parties = [(n[len(VOTES_PREFIX):], i) for i, n in enumerate(names)
                   if n.casefold().startswith(VOTES_PREFIX)]
        empty = [n for n, _ in parties if not n.strip()]
        if empty:
            problems.append(Problem(file, 1, VOTES_PREFIX, "a votes_ column names no party"))
    known = set(required) | set(optional)
    for name in required:
        if name not in index:
            problems.append(Problem(file, 1, name, f"missing column (the {fmt} header needs "
                                                   f"{','.join(required)})"))
    for name in names:
        key = name.casefold()
        if key and key not in known and not (parties and key.startswith(VOTES_PREFIX)):
            hint = difflib.get_close_matches(key, sorted(known), n=1)
            problems.append(Problem(file, 1, shown(name), "unknown column" + (f" (did you mean {hint[0]!r}?)" if hint else "")))
    if len(names) == 1 and any(sep in names[0] for sep in ";\t|"):
        problems = [Problem(file, 1, None, "the header is one column: is the file separated by "
                                           "something other than commas? native files use commas")]
    if problems:
        raise DataError(problems, f"{len(problems)} problem(s) in the header; nothing was loaded")
    return fmt, names, index, parties


def _parse_wide_row(ctx: ParseContext, row: int, cells: list[str], get, parties: list[tuple[str, int]],
                    names: list[str], columns: dict[str, str]) -> tuple[list[Record] | None, list[Problem]]:
    """A wide row is one whole contest: its records (one per party with a count), or ``None``
    when a bad cell condemns the row (never half of it), with the row's problems (a cell the
    party lines share reported once)."""
    if not any(cells[i].strip() for _, i in parties):
        key = contest_key(ctx, get)
        where = (describe_contest(*key[:4], bool(key[4]), bool(key[5]), key[6]) if None not in key[:4]
                 else "a district")
        return None, [Problem(ctx.file, row, None, f"no votes_ column has a count: {where} "
                                                   "with no votes at all")]
    row_records: list[Record] = []
    row_problems: list[Problem] = []
    row_seen: set[Problem] = set()
    for label, i in parties:
        if not cells[i].strip():
            continue  # party not on the ballot in this district
        party_get = _party_line_getter(get, label, cells[i])
        record, problems = parse_record(ctx, row, party_get, {**columns, "votes": names[i]})
        row_problems.extend(p for p in problems if p not in row_seen)  # a shared cell once
        row_seen.update(problems)
        if record:
            row_records.append(record)
    return (None if row_seen else row_records), row_problems


def _party_line_getter(get, label: str, votes: str):
    """``get`` for one party's line of a wide row: the party is the column's label, the votes its cell."""

    def get_party_line(name: str) -> str | None:
        if name == "party":
            return label
        if name == "votes":
            return votes
        return get(name)

    return get_party_line
