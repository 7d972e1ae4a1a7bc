"""Checks across rows: a contest and a unit must hang together.

Each check returns problems located at the row that shows it, so ``--skip-bad-rows`` can drop
exactly the rows concerned (a whole contest or unit when the fault is the contest's or unit's).
"""

from __future__ import annotations

from collections import defaultdict

from monitor.errors import Problem
from monitor.ingest.fields import shown
from monitor.ingest.lines import candidate_key
from monitor.ingest.records import Record, describe_contest


def check_records(file: str, records: list[Record], *, repeated_lines: str = "refuse",
                  lone_counts: frozenset[int] = frozenset()) -> tuple[list[Problem], dict[int, tuple[Problem, str]]]:
    """Return the problems and the record indexes they condemn, each with the problem that
    condemns it and its scope (``contest`` or ``unit``).

    ``repeated_lines``: ``refuse`` (a candidate twice on one party line of a contest is an
    error) or ``sum`` (such lines are combined later). ``lone_counts``: counts that make a
    contest's only candidate a placeholder (such a contest is not "without votes")."""
    problems: list[Problem] = []
    bad: dict[int, tuple[Problem, str]] = {}

    def condemn(indexes: list[int], found: list[Problem], scope: str) -> None:
        """Keep ``found``; its first problem condemns ``indexes`` unless an earlier one did."""
        problems.extend(found)
        for i in indexes if found else ():
            bad.setdefault(i, (found[0], scope))

    contests: dict[tuple, list[int]] = defaultdict(list)
    units: dict[tuple, list[int]] = defaultdict(list)
    for i, rec in enumerate(records):
        contests[rec.contest].append(i)
        units[rec.unit].append(i)
    for key, members in contests.items():
        where = describe_contest(*key)
        contest = [records[i] for i in members]
        if repeated_lines == "refuse":  # which line is right is unknown: the contest goes
            condemn(members, _repeated_lines(file, contest, where), "contest")
        condemn(members, _misplaced_placeholder(file, contest, where), "contest")
        condemn(members, _disagreeing_seats(file, contest, where), "contest")
        condemn(members, _without_votes(file, contest, where, lone_counts), "contest")
    for members in units.values():
        condemn(members, _mixed_statuses(file, [records[i] for i in members]), "unit")
    problems.sort(key=lambda p: (p.row or 0))
    return problems, bad


def _repeated_lines(file: str, contest: list[Record], where: str) -> list[Problem]:
    """A candidate's second (third, ...) line on one party line of the contest."""
    problems = []
    lines: dict[tuple[str, str], Record] = {}
    for rec in contest:
        if not rec.candidate:
            continue
        line = (rec.party.casefold(), rec.candidate.casefold())
        if line in lines:
            first = lines[line]
            problems.append(Problem(file, rec.row, shown(rec.columns.get("candidate", "candidate")),
                                    f"candidate {rec.candidate!r} appears twice on the "
                                    f"{rec.party or '(no party)'!r} line of {where} (first at row {first.row})"
                                    + "; a mapping sums such lines (repeated_lines = \"sum\", its default)"))
        else:
            lines[line] = rec
    return problems


def _misplaced_placeholder(file: str, contest: list[Record], where: str) -> list[Problem]:
    """A placeholder count in a contest with more than one candidate or with a real count."""
    marked = [rec for rec in contest if rec.placeholder]
    if not marked:
        return []
    candidates = {candidate_key(rec) for rec in contest}
    counted = [rec for rec in contest if rec.votes > 0]
    if len(candidates) <= 1 and not counted:
        return []
    first = marked[0]
    return [Problem(file, first.row, shown(first.columns.get("votes", "votes")),
                    f"placeholder count {first.placeholder!r} (an unopposed candidate not on the "
                    f"ballot) in {where}, which has "
                    + (f"{len(candidates)} candidates" if len(candidates) > 1
                       else f"a real count at row {counted[0].row}")
                    + ": a placeholder contest has one candidate and no count")]


def _disagreeing_seats(file: str, contest: list[Record], where: str) -> list[Problem]:
    """Each line whose seats differ from the contest's first line."""
    if len({rec.seats for rec in contest}) <= 1:
        return []
    first = contest[0]
    return [Problem(file, rec.row, shown(rec.columns.get("seats", "seats")),
                    f"seats {rec.seats} disagrees with {first.seats} at row {first.row} for {where}")
            for rec in contest if rec.seats != first.seats]


def _without_votes(file: str, contest: list[Record], where: str, lone_counts: frozenset[int]) -> list[Problem]:
    """A contest without a single vote, unless a placeholder (or a lone candidate's zero listed
    in ``lone_counts``) says its candidate was unopposed."""
    lone = len({candidate_key(rec) for rec in contest}) == 1
    marked = any(rec.placeholder for rec in contest)
    if sum(rec.votes for rec in contest) != 0 or marked or (lone and 0 in lone_counts):
        return []
    first = contest[0]
    return [Problem(file, first.row, shown(first.columns.get("votes", "votes")), f"{where} has no votes at all")]


def _mixed_statuses(file: str, unit: list[Record]) -> list[Problem]:
    """A unit (state, chamber, cycle) with both certified and unofficial rows, at its first row
    whose status differs from the unit's first."""
    if len({rec.status for rec in unit}) <= 1:
        return []
    first = unit[0]
    other = next(rec for rec in unit if rec.status != first.status)
    return [Problem(file, other.row, shown(other.columns.get("status", "status")),
                    f"{shown(first.state)} {shown(first.chamber)} {first.cycle} mixes certified and "
                    f"unofficial rows (row {first.row} is {first.status}, this row is "
                    f"{other.status}); a unit is delivered whole, with one status")]
