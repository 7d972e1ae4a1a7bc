"""Hypothesis strategies for result files, good and bad, and the checks every load must pass.

A *file* here is ``(name, bytes)``. The strategies build sound native files (long and wide, with
every optional column, header order and case, quoting, line ends, BOM, thousands separators and
gzip variants) and then break them on purpose: truncation, stray quotes, other delimiters,
binary junk, huge and odd numbers, empty cells, duplicated or missing header columns, mixed and
foreign encodings, NUL bytes, overlong cells, broken gzip streams. All text is invented.

:func:`expected_rows` is the independent reading of a file that a successful load must match:
the csv module (the reference CSV reader of the standard library) and the README's cell rules.
"""

from __future__ import annotations

import csv
import gzip
import io
import re
import zlib
from collections import Counter

from hypothesis import strategies as st

from monitor.errors import DataError, Problem

LONG_HEADER = ["cycle", "state", "chamber", "district", "party", "candidate", "votes"]
LONG_OPTIONAL = ["seats", "special", "writein", "status"]
LABELS = ["Harbour", "Harbour-Lantern", "Upland", "Greens", "Independent"]  # tests/conftest.py CONFIG
ODD_TEXT = [
    "O'Brien", 'Quote "Q" Man', "semi;colon", "comma, inc", "tab\there", "new\nline", "  padded  ",
    "Zoë Ångström", "\u202eRTL override", "\u200bzero width", "\x07bell", "<b>bold</b>", "=1+2", "١٢٣",
    "'); DROP TABLE votes; --", "\U0001F5F3 ballot", "\\back\\slash",
]

# -- the sound files --------------------------------------------------------------------------------

texts = st.one_of(
    st.sampled_from(ODD_TEXT),
    st.text(st.characters(blacklist_categories=("Cs",), blacklist_characters="\x00"), min_size=1, max_size=12),
)


@st.composite
def tables(draw, *, wide: bool = False, blank_rows: bool = False):
    """``(header, rows)`` of a native file that should load: distinct units, unique candidate
    lines, at least one vote per contest, one status per unit."""
    optional = draw(st.lists(st.sampled_from(LONG_OPTIONAL if not wide else ["seats", "special", "status"]),
                             unique=True, max_size=4))
    rows: list[dict] = []
    parties = draw(st.lists(st.sampled_from(LABELS), min_size=1, max_size=4, unique_by=str.casefold)) if wide else None
    for u in range(draw(st.integers(1, 3))):
        unit = {"cycle": str(draw(st.sampled_from([1789, 1972, 2022, 2024, 2200]))),
                "state": draw(st.sampled_from(["QV", "NR", "qv ", "X"])) + str(u),
                "chamber": draw(st.sampled_from(["federal", "state_lower", "Lower House"])),
                "status": draw(st.sampled_from(["", "certified", "unofficial", "Certified"]))}
        for d in range(draw(st.integers(1, 4))):
            contest = {**unit, "district": draw(st.sampled_from(["1", "AL", "07", "North 2"])) + f"-{d}",
                       "seats": draw(st.sampled_from(["", "1", "2"])),
                       "special": draw(st.sampled_from(["", "0", "1", "false"]))}
            if wide:
                votes = {p: draw(st.one_of(st.just(""), votes_cells())) for p in parties}
                votes[parties[0]] = draw(st.sampled_from(["1", "12,345", "50000000"]))  # a contest has votes
                if blank_rows and draw(st.integers(0, 3)) == 0:
                    votes = {p: draw(st.sampled_from(["", " "])) for p in parties}  # a district with no count at all
                row = dict(contest)
                row.update({f"votes_{p}".casefold(): v for p, v in votes.items()})
                rows.append(row)
                continue
            for line in range(draw(st.integers(1, 4))):
                rows.append({**contest, "party": draw(st.one_of(st.sampled_from(LABELS), texts)),
                             "candidate": draw(st.one_of(st.just(""), texts)) + f" #{line}",
                             "votes": draw(votes_cells()),
                             "writein": draw(st.sampled_from(["", "0", "1", "yes"]))})
            rows[-1]["votes"] = draw(st.sampled_from(["1", "12,345", "50000000"]))  # a contest has votes
    if wide:
        header = ["cycle", "state", "chamber", "district"] + optional + [f"votes_{p}" for p in parties]
    else:
        header = LONG_HEADER + optional
    header = draw(st.permutations(header))
    header = [draw(st.sampled_from([h, h.upper(), f" {h} ", h.title()])) for h in header]
    return header, [[row.get(h.strip().casefold(), "") for h in header] for row in rows]


def votes_cells():
    return st.one_of(st.integers(0, 50_000_000).map(str), st.integers(1000, 50_000_000).map(lambda v: f"{v:,}"),
                     st.sampled_from(["0", "+7", " 12 ", "0012", "\u00a0300"]))


@st.composite
def rendered(draw, table, pack: bool = True):
    """A table as the bytes a spreadsheet, a script or an archive might deliver."""
    header, rows = table
    buf = io.StringIO()
    quoting = draw(st.sampled_from([csv.QUOTE_MINIMAL, csv.QUOTE_ALL]))
    if any("\r" in c or "\n" in c for row in rows for c in row):
        quoting = csv.QUOTE_ALL  # the csv module quotes a line end only when it is its own terminator
    out = csv.writer(buf, lineterminator=draw(st.sampled_from(["\n", "\r\n", "\r"])), quoting=quoting)
    out.writerow(header)
    out.writerows(rows)
    text = buf.getvalue() + draw(st.sampled_from(["", "\n", "\n\n", "\r\n \r\n"]))
    data = (draw(st.sampled_from(["", "\ufeff"])) + text).encode("utf-8")
    return draw(gzipped(data)) if pack else data


@st.composite
def gzipped(draw, data: bytes):
    """``data`` as is, or gzipped: one member, several members, trailing padding."""
    how = draw(st.sampled_from(["plain"] * 4 + ["gzip", "members", "padded"]))
    if how == "plain":
        return data
    if how == "gzip":
        return gzip.compress(data, compresslevel=draw(st.integers(1, 9)), mtime=0)
    if how == "members":
        cut = draw(st.integers(0, len(data)))
        return gzip.compress(data[:cut], mtime=0) + gzip.compress(data[cut:], mtime=0)
    return gzip.compress(data, mtime=0) + b"\x00" * draw(st.integers(1, 64))


def sound_files(wide: bool = False, blank_rows: bool = False):
    return tables(wide=wide, blank_rows=blank_rows).flatmap(rendered)


# -- breaking them -------------------------------------------------------------------------------

def _at(draw, data: bytes) -> int:
    return draw(st.integers(0, len(data)))


def _cells(draw, data: bytes, new: bytes) -> bytes:
    """Replace one comma-separated cell (by bytes, quotes ignored) with ``new``."""
    spans = [m.span() for m in re.finditer(rb"[^,\r\n]*", data)]
    spans = [s for s in spans if s[0] > data.find(b"\n")] or spans
    i, j = draw(st.sampled_from(spans))
    return data[:i] + new + data[j:]


HUGE = [b"9" * n for n in (9, 19, 20, 40, 4300, 4301, 5000)] + [
    b"-5", b"1.5", b"1e5", b"NaN", b"inf", b"0x10", b"1_000", b"\xd9\xa1\xd9\xa2", b"1,2,3", b'"1,234,567,890"',
    b"+" + b"0" * 50 + b"7", b"\xef\xbc\x92\xef\xbc\x90\xef\xbc\x92\xef\xbc\x92"]


def _number_cell(draw, data: bytes, new: bytes) -> bytes:
    """Replace the votes (or seats, or cycle) cell of one data row, read as CSV; bytes as they are
    when the file does not read as UTF-8 CSV."""
    bom = "\ufeff" if data.startswith(b"\xef\xbb\xbf") else ""
    try:
        rows = list(csv.reader(io.StringIO(data.decode("utf-8").removeprefix(bom), newline="")))
    except (UnicodeDecodeError, csv.Error):
        return _cells(draw, data, new)
    header = [h.strip().casefold() for h in rows[0]] if rows else []
    targets = [i for i, h in enumerate(header) if h in ("votes", "seats", "cycle") or h.startswith("votes_")]
    body = [i for i in range(1, len(rows)) if len(rows[i]) == len(header)]
    if not targets or not body:
        return _cells(draw, data, new)
    r, c = draw(st.sampled_from(body)), draw(st.sampled_from(targets))
    rows[r][c] = new.decode("utf-8", "replace")
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n").writerows(rows)
    return (bom + buf.getvalue()).encode("utf-8")


def mutate(draw, data: bytes) -> bytes:
    kind = draw(st.sampled_from([
        "number_cell", "number_cell", "truncate", "quote", "delimiter", "junk", "number", "empty", "dup_header", "drop_header", "cp1252",
        "utf16", "nul", "gzip_cut", "gzip_flip", "gzip_twice", "crlf", "dup_row", "long_cell", "wide_row",
        "bom_mid", "control", "encoding_mix"]))
    if kind == "truncate":
        return data[:_at(draw, data)]
    if kind == "quote":
        i = _at(draw, data)
        return data[:i] + b'"' + data[i:]
    if kind == "delimiter":
        return data.replace(b",", draw(st.sampled_from([b";", b"\t", b"|", b", "])))
    if kind == "junk":
        i = _at(draw, data)
        return data[:i] + draw(st.binary(min_size=1, max_size=40)) + data[i:]
    if kind == "number":
        return _cells(draw, data, draw(st.sampled_from(HUGE)))
    if kind == "number_cell":
        return _number_cell(draw, data, draw(st.sampled_from(HUGE)))
    if kind == "empty":
        return _cells(draw, data, b"")
    if kind in ("dup_header", "drop_header"):
        head, sep, rest = data.partition(b"\n")
        names = head.rstrip(b"\r").split(b",")
        i = draw(st.integers(0, len(names) - 1))
        names = names + [names[i]] if kind == "dup_header" else names[:i] + names[i + 1:]
        return b",".join(names) + sep + rest
    if kind == "cp1252":
        return data.decode("utf-8", "replace").encode("cp1252", "replace") + "Jérôme,".encode("cp1252")
    if kind == "utf16":
        return data.decode("utf-8", "replace").encode(draw(st.sampled_from(["utf-16", "utf-16-le", "utf-32"])))
    if kind == "nul":
        i = _at(draw, data)
        return data[:i] + b"\x00" + data[i:]
    if kind == "gzip_cut":
        packed = gzip.compress(data, mtime=0)
        return packed[:_at(draw, packed)]
    if kind == "gzip_flip":
        packed = bytearray(gzip.compress(data, mtime=0))
        i = draw(st.integers(0, len(packed) - 1))
        packed[i] ^= draw(st.integers(1, 255))
        return bytes(packed)
    if kind == "gzip_twice":
        return gzip.compress(gzip.compress(data, mtime=0), mtime=0)
    if kind == "crlf":
        return data.replace(b"\n", draw(st.sampled_from([b"\r", b"\r\r\n", b"\n\r", b"\x85", b"\xe2\x80\xa8"])))
    if kind == "dup_row":
        lines = data.splitlines(keepends=True) or [b""]
        i = draw(st.integers(0, len(lines) - 1))
        return b"".join(lines[: i + 1] + [lines[i]] + lines[i + 1:])
    if kind == "long_cell":
        return _cells(draw, data, b"x" * draw(st.sampled_from([1000, 131_072, 131_073, 200_000])))
    if kind == "wide_row":
        i = _at(draw, data)
        return data[:i] + b"," * draw(st.integers(1, 3000)) + data[i:]
    if kind == "bom_mid":
        i = _at(draw, data)
        return data[:i] + b"\xef\xbb\xbf" + data[i:]
    if kind == "control":
        i = _at(draw, data)
        return data[:i] + bytes([draw(st.sampled_from([1, 8, 11, 12, 27, 28, 127]))]) + data[i:]
    # encoding_mix: a latin-1 byte inside an otherwise UTF-8 file
    i = _at(draw, data)
    return data[:i] + draw(st.sampled_from([b"\xe9", b"\xff\xfe", b"\xc3", b"\xed\xa0\x80", b"\xf4\x90\x80\x80"])) + data[i:]


@st.composite
def broken_files(draw, wide: bool = False):
    data = draw(sound_files(wide, blank_rows=wide))
    for _ in range(draw(st.integers(0 if wide else 1, 3))):
        data = mutate(draw, data)
    return data


@st.composite
def odd_number_files(draw, number: bytes):
    """A sound plain file with one votes, seats or cycle cell replaced by ``number``."""
    data = draw(rendered(draw(tables(wide=draw(st.booleans()))), pack=False))
    return _number_cell(draw, data, number)


def junk_files():
    """Bytes with no intent at all, and bytes that merely start like a CSV or a gzip."""
    header = ",".join(LONG_HEADER).encode()
    return st.one_of(
        st.binary(max_size=3000),
        st.binary(max_size=3000).map(lambda b: b"\x1f\x8b" + b),
        st.binary(max_size=3000).map(lambda b: b"\x1f\x8b\x08\x00\x00\x00\x00\x00\x00\x03" + b),
        st.lists(st.sampled_from(list(',"\n\r;\t 019aQV-') + ["Harbour", "2024"]), max_size=200)
        .map(lambda t: header + b"\n" + "".join(t).encode()),
        st.text(max_size=400).map(lambda t: header + b"\n" + t.encode("utf-8", "surrogatepass")),
    )


# -- what a load must do -------------------------------------------------------------------------

def plain_content(data: bytes) -> bytes:
    """The file's content, gunzipped member by member as gzip(1) does (the reference reading)."""
    if not data.startswith(b"\x1f\x8b"):
        return data
    out = []
    while data.startswith(b"\x1f\x8b"):
        d = zlib.decompressobj(wbits=31)
        out.append(d.decompress(data))
        data = d.unused_data
    return b"".join(out)


def _text(cell: str) -> str:
    return " ".join(cell.split())


def expected_rows(data: bytes, encoding: str | None = None, *, lenient: bool = False) -> Counter:
    """The multiset of (cycle, state, chamber, district, party, candidate, votes) lines that a
    file which loads whole must leave in ``district_results`` (README: cells are trimmed and inner
    whitespace collapsed; votes may carry thousands separators and a no-break space). ``lenient``
    leaves out the rows it cannot read instead of failing."""
    text = plain_content(data).decode(encoding or "utf-8-sig").removeprefix("\ufeff")
    rows = csv.reader(io.StringIO(text, newline=""))
    names = [h.strip() for h in next(rows)]
    header = [h.casefold() for h in names]
    out: Counter = Counter()
    for cells in rows:
        if not cells or (len(cells) == 1 and not cells[0].strip()):
            continue
        try:
            row = dict(zip(header, cells, strict=True))
            # README: state codes are stored in upper case, chamber names in lower case
            key = (int(row["cycle"].strip()), _text(row["state"]).upper(), _text(row["chamber"]).lower(),
                   _text(row["district"]))
            if "party" in header:
                lines = [(row["party"], row["candidate"], row["votes"])]
            else:
                lines = [(n[len("votes_"):], "", row[h]) for n, h in zip(names, header)
                         if h.startswith("votes_") and row[h].strip()]
            parsed = [(*key, _text(party), _text(candidate), int(votes.strip().replace("\u00a0", "").replace(",", "")))
                      for party, candidate, votes in lines]
        except (ValueError, KeyError):
            if lenient:
                continue  # a row a --skip-bad-rows load may drop
            raise
        out.update(parsed)
    return out


def refusal_only(after: list[str], before: list[str]) -> bool:
    """A refused load writes none of its rows; the store only gains one provenance row in
    ``loads`` (outcome 'refused'). ``after`` (a dump) is ``before`` plus that one row."""
    extra = [line for line in after if line.startswith('INSERT INTO "loads"') and "'refused'" in line]
    return len(extra) == 1 and [line for line in after if line not in extra] == before


def stored_rows(conn, units) -> Counter:
    """``district_results`` lines of the given (cycle, state, chamber) units."""
    out: Counter = Counter()
    for unit in units:
        for row in conn.execute(
            "SELECT cycle, state, chamber, district, party, candidate, votes FROM district_results "
            "WHERE cycle = ? AND state = ? AND chamber = ?", list(unit)):
            out[row] += 1
    return out


FILE_LEVEL = ("gzip", "not a valid gzip", "no result rows")  # problems about the file, not a place in it
CELL_LEVEL = ("votes ", "cycle ", "seats ", "special ", "writein ", "status ", "state is empty",
              "chamber is empty", "district is empty")


def check_refusal(exc: DataError, name: str, data: bytes) -> None:
    """Every problem names the file, and a row (and column) wherever it is about a place in it."""
    assert exc.problems, "a DataError must carry its problems"
    lines = plain_content_lines(data)
    for p in exc.problems:
        assert isinstance(p, Problem)
        assert p.file == name, p
        assert p.reason and isinstance(p.reason, str), p
        if p.row is None:
            assert p.reason.startswith(FILE_LEVEL), f"no row for a problem about a place: {p}"
        else:
            assert 1 <= p.row <= lines, f"row {p.row} outside the file's {lines} lines: {p}"
        if p.reason.startswith(CELL_LEVEL) and "has no votes at all" not in p.reason \
                and "mixes certified" not in p.reason:
            assert p.column, f"a cell problem without its column: {p}"
        assert str(p).startswith(name), p


def plain_content_lines(data: bytes) -> int:
    try:
        content = plain_content(data)
    except zlib.error:
        return 0
    return content.count(b"\n") + content.count(b"\r") + 1  # an upper bound on physical lines


# -- foreign files read through a mapping ---------------------------------------------------------------

MAPPING = """\
chamber = "federal"
[columns]
cycle = "year"
state = "st"
district = "dist"
party = "party_label"
candidate = "cand"
votes = "cand_votes"
[keep]
stage = ["GEN", ""]
[parties]
a = ["HARBOUR", "HARBOUR-ALLIED"]
b = ["UPLAND"]
[exclude]
states = ["ZZ"]
[districts]
at_large = "0"
"""
FOREIGN_HEADER = ["year", "st", "dist", "party_label", "cand", "cand_votes", "stage", "notes"]


@st.composite
def foreign_files(draw):
    """A foreign candidate-level file for MAPPING, then broken like the native ones."""
    rows = []
    for u in range(draw(st.integers(1, 3))):
        state = draw(st.sampled_from(["QV", "NR", "ZZ", "qv"]))
        state += "" if state == "ZZ" else str(u)
        year = str(draw(st.sampled_from([2020, 2022])))
        for d in range(draw(st.integers(1, 3))):
            dist = draw(st.sampled_from(["0", "1", "2", "AL"])) + ("" if d == 0 else f"-{d}")
            for line in range(draw(st.integers(1, 3))):
                rows.append([year, state, dist, draw(st.sampled_from(["HARBOUR", "UPLAND", "HARBOUR-ALLIED", "Greens"])),
                             draw(texts) + f" #{line}", draw(votes_cells()),
                             draw(st.sampled_from(["GEN", "GEN", "", "RUNOFF", "PRI"])), draw(texts)])
            rows[-1][5] = "7"
            rows[-1][6] = "GEN"
    buf = io.StringIO()
    header = draw(st.permutations(FOREIGN_HEADER))
    order = [FOREIGN_HEADER.index(h) for h in header]
    csv.writer(buf, lineterminator="\n", quoting=csv.QUOTE_ALL).writerows(
        [header] + [[row[i] for i in order] for row in rows])
    data = buf.getvalue().encode("utf-8")
    for _ in range(draw(st.integers(0, 2))):
        data = mutate(draw, data)
    return data
