"""The canonical result record every input format is turned into, and the row parser."""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from typing import Callable, Iterable

from monitor.config import normalise_label
from monitor.errors import Problem
from monitor.ingest import fields as F
from monitor.ingest.fields import shown

FIELDS = ("cycle", "state", "chamber", "district", "party", "candidate", "votes",
          "seats", "special", "runoff", "writein", "status", "position")


@dataclass(slots=True)
class Record:
    row: int
    cycle: int
    state: str
    chamber: str
    district: str
    party: str          # the party line's label, as delivered
    party_code: str     # a | b | other, resolved at load time
    candidate: str
    votes: int
    seats: int
    special: bool
    writein: bool
    status: str         # certified | unofficial
    columns: dict[str, str]  # our field -> the file's column name, for messages
    runoff: bool = False     # the runoff after a first round (False: the first or only round)
    placeholder: str = ""    # the file's placeholder count ("-1") when the count is one; votes is then 0
    position: str = ""       # the numbered seat (position) of the district this line runs for; "" = none

    @property
    def unit(self) -> tuple[int, str, str]:
        return (self.cycle, self.state, self.chamber)

    @property
    def contest(self) -> tuple[int, str, str, str, bool, bool, str]:
        """(cycle, state, chamber, district, special, runoff, position)."""
        return (self.cycle, self.state, self.chamber, self.district, self.special, self.runoff, self.position)

    @property
    def seat(self) -> tuple[int, str, str, str, str]:
        """(cycle, state, chamber, district, position): a numbered seat is a seat of its own."""
        return (self.cycle, self.state, self.chamber, self.district, self.position)

    def copy(self) -> "Record":
        return Record(**{f: getattr(self, f) for f in Record.__slots__})


def describe_contest(cycle, state: str, chamber: str, district: str, special: bool = False,
                     runoff: bool = False, position: str | None = "") -> str:
    """How every contest-level message names a contest: ``district '3' (special runoff), QV
    federal 2024`` (district, kind, state, chamber and cycle); a numbered seat is named with its
    position: ``district '3' seat 'B', QV state_lower 2024``."""
    kind = " ".join(k for k, on in (("special", special), ("runoff", runoff)) if on)
    seat = f" seat {shown(str(position))!r}" if position else ""
    return (f"district {shown(str(district))!r}{seat}" + (f" ({kind})" if kind else "")
            + f", {shown(str(state))} {shown(str(chamber))} {cycle}")


@dataclass
class ParseContext:
    file: str
    max_votes: int
    label_codes: dict[str, str]          # normalised label -> a | b
    at_large: str | None = None           # the file's code for an at-large seat
    fixed: dict[str, str] = field(default_factory=dict)  # field -> value for every row
    placeholder_counts: frozenset[int] = frozenset()  # counts meaning "unopposed, not on the ballot"
    # rows that could not be read whole, with what they say about their contest (see contest_key):
    # a bad row takes every row of its contest with it under --skip-bad-rows
    bad_rows: list[tuple[int, tuple]] = field(default_factory=list)

    def code(self, label: str) -> str:
        return self.label_codes.get(normalise_label(label), "other")


def normalise_state(text: str) -> str:
    """State codes are stored in upper case (``qv`` and ``QV`` are one state)."""
    return text.upper()


def normalise_chamber(text: str) -> str:
    """Chamber names are stored in lower case (``Federal`` and ``federal`` are one chamber)."""
    return text.lower()


#: chamber names ending with this are levelfield's whole-chamber views (:mod:`monitor.staggered`)
RESERVED_CHAMBER_SUFFIX = "_whole"

KEY_FIELDS = ("cycle", "state", "chamber", "district", "special", "runoff", "position")


def contest_key(ctx: ParseContext, get: Callable[[str], str | None]) -> tuple:
    """What a row's cells say about its contest, parsed and normalised as :func:`parse_record`
    does: ``(cycle, state, chamber, district, special, runoff, position)``, each ``None`` when its cell is unreadable
    (so that a bad row can take every row that may belong to its contest with it)."""

    def cell(name: str) -> str:
        if name in ctx.fixed:
            return ctx.fixed[name]
        value = get(name)
        return "" if value is None else value

    cycle = F.parse_cycle(cell("cycle"))[0]
    state = F.parse_text(cell("state"), "state", required=True)[0]
    chamber = F.parse_text(cell("chamber"), "chamber", required=True)[0]
    district = F.parse_text(cell("district"), "district", required=True)[0]
    if district is not None and ctx.at_large is not None and district == ctx.at_large:
        district = "AL"
    special = F.parse_flag(cell("special"), "special")[0]
    runoff = F.parse_flag(cell("runoff"), "runoff")[0]
    position = F.parse_text(cell("position"), "position", required=False)[0]
    return (cycle, None if state is None else normalise_state(state),
            None if chamber is None else normalise_chamber(chamber), district, special, runoff, position)


def key_matches(pattern: tuple, key: tuple) -> bool:
    """Whether a full contest key fits a pattern from :func:`contest_key` (``None`` fits anything)."""
    return all(p is None or p == k for p, k in zip(pattern, key))


def content_hash(lines: Iterable[tuple]) -> str:
    """The content hash of a unit: lines of (district, special, seats, party, party_code,
    candidate, votes, writein, status, runoff, decides, placeholder, position), in any order.

    The last four are written only where they differ from a first-round, deciding, counted
    contest without a numbered seat, so a unit stored before they existed keeps its hash."""
    text = sorted(
        f"{district}\x1f{int(special)}\x1f{seats}\x1f{party}\x1f{code}\x1f{candidate}"
        f"\x1f{votes}\x1f{int(writein)}\x1f{status}"
        + ("\x1frunoff" if runoff else "") + ("" if decides else "\x1fleft out")
        + ("\x1fplaceholder" if placeholder else "")
        + (f"\x1fposition\x1f{position}" if position else "")
        for (district, special, seats, party, code, candidate, votes, writein, status, runoff, decides,
             placeholder, position) in lines
    )
    return hashlib.sha256("\n".join(text).encode()).hexdigest()


def parse_record(
    ctx: ParseContext, row: int, get: Callable[[str], str | None], columns: dict[str, str]
) -> tuple[Record | None, list[Problem]]:
    """Turn one row's cells into a Record, or the problems that stop it."""
    problems: list[Problem] = []

    def take(name: str, parsed):
        value, reason = parsed
        if reason:
            problems.append(Problem(ctx.file, row, F.shown(columns.get(name, name)), reason))
        return value

    def cell(name: str) -> str:
        if name in ctx.fixed:
            return ctx.fixed[name]
        value = get(name)
        return "" if value is None else value

    cycle = take("cycle", F.parse_cycle(cell("cycle")))
    state = take("state", F.parse_text(cell("state"), "state", required=True))
    chamber = take("chamber", F.parse_text(cell("chamber"), "chamber", required=True))
    state = None if state is None else normalise_state(state)
    chamber = None if chamber is None else normalise_chamber(chamber)
    if chamber is not None and chamber.endswith(RESERVED_CHAMBER_SUFFIX):
        problems.append(Problem(ctx.file, row, F.shown(columns.get("chamber", "chamber")),
                                f"chamber {chamber!r}: names ending in {RESERVED_CHAMBER_SUFFIX!r} are reserved for "
                                "the whole-chamber view of a staggered chamber"))
        chamber = None
    district = take("district", F.parse_text(cell("district"), "district", required=True))
    if district is not None and ctx.at_large is not None and district == ctx.at_large:
        district = "AL"
    party = take("party", F.parse_text(cell("party"), "party", required=False))
    candidate = take("candidate", F.parse_text(cell("candidate"), "candidate", required=False))
    placeholder = F.placeholder_count(cell("votes"), ctx.placeholder_counts)
    votes = 0 if placeholder else take("votes", F.parse_votes(cell("votes"), ctx.max_votes))
    seats = take("seats", F.parse_seats(cell("seats")))
    special = take("special", F.parse_flag(cell("special"), "special"))
    runoff = take("runoff", F.parse_flag(cell("runoff"), "runoff"))
    writein = take("writein", F.parse_flag(cell("writein"), "writein"))
    status = take("status", F.parse_certification(cell("status")))
    position = take("position", F.parse_text(cell("position"), "position", required=False))
    if position and seats is not None and seats != 1:
        problems.append(Problem(ctx.file, row, F.shown(columns.get("seats", "seats")),
                                f"seats {seats} with position {position!r}: a numbered seat elects one member "
                                "(leave seats empty or 1, or leave position empty for a multi-member contest)"))
    if problems:
        return None, problems
    return (
        Record(row, cycle, state, chamber, district, party, ctx.code(party), candidate, votes,
               seats, special, writein, status, columns, runoff, placeholder, position),
        [],
    )
