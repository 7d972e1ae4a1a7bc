"""Rules over the lines of one contest: repeated lines, fusion lines and placeholder counts.

* Repeated lines (``repeated_lines = "sum"``): several lines of one candidate on one party line
  in one contest (write-in tallies reported on separate lines, counting modes such as election
  day / early / absentee on separate rows) become one line with their sum.
* Fusion (``candidate_lines = "sum"``): a named candidate's lines on several party lines become
  one line for the candidate's major party.
* Placeholder counts: an unopposed candidate who was not on the ballot, recorded with a count
  that is no count (``[placeholders] counts``, such as -1, on any line; ``lone_counts``, such as
  0 or 1, on a contest's only candidate). The contest is an uncontested win with no real vote
  total: its line is stored with 0 votes and the contest is marked ``placeholder``.
"""

from __future__ import annotations

from dataclasses import dataclass

from monitor.ingest.records import Record, describe_contest


def candidate_key(rec: Record) -> str:
    """Who a line is for: the candidate's name (case ignored), or for an unnamed line its party."""
    return rec.candidate.casefold() if rec.candidate else "\x00" + rec.party.casefold()


def combine_repeated_lines(records: list[Record]) -> tuple[list[Record], int]:
    """One line per (contest, party line, candidate), votes summed; returns the lines and how many
    lines were folded into another (0: nothing repeated). The combined line keeps the first
    line's row; it is a write-in if any of its lines is, and a placeholder only if all are."""
    groups: dict[tuple, list[Record]] = {}
    for rec in records:
        groups.setdefault((rec.contest, rec.party.casefold(), rec.candidate.casefold()), []).append(rec)
    out: list[Record] = []
    folded = 0
    for lines in groups.values():
        if len(lines) == 1:
            out.append(lines[0])
            continue
        merged = lines[0].copy()
        merged.votes = sum(r.votes for r in lines)
        merged.writein = any(r.writein for r in lines)
        merged.placeholder = lines[0].placeholder if all(r.placeholder for r in lines) else ""
        out.append(merged)
        folded += len(lines) - 1
    out.sort(key=lambda r: r.row)
    return out, folded


def sum_candidate_lines(records: list[Record]) -> list[Record]:
    """Fusion: one record per (contest, named candidate), votes summed over their party lines,
    attributed to the candidate's major-party line (the larger one if they carry both)."""
    out: list[Record] = []
    groups: dict[tuple, list[Record]] = {}
    for rec in records:
        if not rec.candidate:
            out.append(rec)
            continue
        groups.setdefault((rec.contest, rec.candidate.casefold()), []).append(rec)
    for lines in groups.values():
        if len(lines) == 1:
            out.append(lines[0])
            continue
        major = [r for r in lines if r.party_code in ("a", "b")]
        lead = max(major or lines, key=lambda r: r.votes)
        merged = lead.copy()
        merged.row = min(r.row for r in lines)
        merged.votes = sum(r.votes for r in lines)
        out.append(merged)
    out.sort(key=lambda r: r.row)
    return out


@dataclass(frozen=True)
class Placeholder:
    """A contest loaded as an uncontested win with no real vote count."""

    contest: tuple
    candidate: str
    party: str
    count: str   # what the file had instead of a count ("-1", "0", ...)
    row: int

    def describe(self, file: str) -> str:
        who = self.candidate or "(no name)"
        party = f" ({self.party})" if self.party else ""
        return (f"{file}:{self.row}: {describe_contest(*self.contest)}: {who}{party} unopposed, "
                f"placeholder count {self.count!r}: an uncontested win with no vote count")


def mark_placeholders(records: list[Record], lone_counts: frozenset[int]) -> list[Placeholder]:
    """Mark the placeholder contests (their lines get 0 votes and the file's placeholder text)
    and return them. A contest is one when a line carries a declared placeholder count (the
    parser has set ``placeholder``; :func:`monitor.ingest.validate.check_records` has refused
    such a line beside other candidates) or when its only candidate's count is in
    ``lone_counts``."""
    contests: dict[tuple, list[Record]] = {}
    for rec in records:
        contests.setdefault(rec.contest, []).append(rec)
    found = []
    for key, lines in contests.items():
        marked = [r for r in lines if r.placeholder]
        if not marked:
            if len({candidate_key(r) for r in lines}) != 1 or sum(r.votes for r in lines) not in lone_counts:
                continue
            text = str(sum(r.votes for r in lines))
            for r in lines:
                r.placeholder, r.votes = text, 0
            marked = lines
        first = min(marked, key=lambda r: r.row)
        found.append(Placeholder(key, first.candidate, first.party, first.placeholder, first.row))
    return found
