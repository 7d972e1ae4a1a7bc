"""The canonical result record every input format is turned into, and the row parser."""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field
from typing import Callable

from monitor.config import normalise_label
from monitor.errors import Problem
from monitor.ingest import fields as F

FIELDS = ("cycle", "state", "chamber", "district", "party", "candidate", "votes",
          "seats", "special", "writein", "status")


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

    @property
    def unit(self) -> tuple[int, str, str]:
        return (self.cycle, self.state, self.chamber)

    @property
    def contest(self) -> tuple[int, str, str, str, bool]:
        return (self.cycle, self.state, self.chamber, self.district, self.special)


@dataclass
class ParseContext:
    file: str
    max_votes: int
    label_codes: dict[str, str]          # normalised label -> a | b
    at_large: str | None = None           # the file's code for an at-large seat
    fixed: dict[str, str] = field(default_factory=dict)  # field -> value for every row
    other_labels: Counter = field(default_factory=Counter)

    def code(self, label: str) -> str:
        code = self.label_codes.get(normalise_label(label))
        if code is None:
            self.other_labels[label] += 1
            return "other"
        return code


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
    district = take("district", F.parse_text(cell("district"), "district", required=True))
    if district is not None and ctx.at_large is not None and district == ctx.at_large:
        district = "AL"
    party = take("party", F.parse_text(cell("party"), "party", required=False))
    candidate = take("candidate", F.parse_text(cell("candidate"), "candidate", required=False))
    votes = take("votes", F.parse_votes(cell("votes"), ctx.max_votes))
    seats = take("seats", F.parse_seats(cell("seats")))
    special = take("special", F.parse_flag(cell("special"), "special"))
    writein = take("writein", F.parse_flag(cell("writein"), "writein"))
    status = take("status", F.parse_certification(cell("status")))
    if problems:
        return None, problems
    return (
        Record(row, cycle, state, chamber, district, party, ctx.code(party), candidate, votes,
               seats, special, writein, status, columns),
        [],
    )
