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

    def condemn(indexes, problem: Problem, scope: str) -> None:
        for i in indexes:
            bad.setdefault(i, (problem, scope))
    contests: dict[tuple, list[int]] = defaultdict(list)
    units: dict[tuple, list[int]] = defaultdict(list)
    for i, rec in enumerate(records):
        contests[rec.contest].append(i)
        units[rec.unit].append(i)

    for key, members in contests.items():
        where = describe_contest(*key)
        lines: dict[tuple[str, str], int] = {}
        for i in members if repeated_lines == "refuse" else ():
            rec = records[i]
            if not rec.candidate:
                continue
            line = (rec.party.casefold(), rec.candidate.casefold())
            if line in lines:
                first = records[lines[line]]
                problem = Problem(file, rec.row, shown(rec.columns.get("candidate", "candidate")),
                                  f"candidate {rec.candidate!r} appears twice on the "
                                  f"{rec.party or '(no party)'!r} line of {where} (first at row {first.row})"
                                  + "; a mapping sums such lines (repeated_lines = \"sum\", its default)")
                problems.append(problem)
                condemn(members, problem, "contest")  # which line is right is unknown: the contest goes
            else:
                lines[line] = i
        marked = [records[i] for i in members if records[i].placeholder]
        if marked:
            candidates = {candidate_key(records[i]) for i in members}
            counted = [records[i] for i in members if records[i].votes > 0]
            if len(candidates) > 1 or counted:
                first = marked[0]
                problem = Problem(file, first.row, shown(first.columns.get("votes", "votes")),
                                  f"placeholder count {first.placeholder!r} (an unopposed candidate not on the "
                                  f"ballot) in {where}, which has "
                                  + (f"{len(candidates)} candidates" if len(candidates) > 1
                                     else f"a real count at row {counted[0].row}")
                                  + ": a placeholder contest has one candidate and no count")
                problems.append(problem)
                condemn(members, problem, "contest")
        seats = {records[i].seats for i in members}
        if len(seats) > 1:
            first = records[members[0]]
            found = []
            for i in members:
                if records[i].seats != first.seats:
                    found.append(Problem(file, records[i].row, shown(records[i].columns.get("seats", "seats")),
                                         f"seats {records[i].seats} disagrees with {first.seats} at row "
                                         f"{first.row} for {where}"))
            problems.extend(found)
            condemn(members, found[0], "contest")
        lone = len({candidate_key(records[i]) for i in members}) == 1
        if sum(records[i].votes for i in members) == 0 and not marked and not (lone and 0 in lone_counts):
            first = records[members[0]]
            problem = Problem(file, first.row, shown(first.columns.get("votes", "votes")),
                              f"{where} has no votes at all")
            problems.append(problem)
            condemn(members, problem, "contest")

    for key, members in units.items():
        statuses = {records[i].status for i in members}
        if len(statuses) > 1:
            first = records[members[0]]
            other = next(records[i] for i in members if records[i].status != first.status)
            problem = Problem(file, other.row, shown(other.columns.get("status", "status")),
                              f"{shown(first.state)} {shown(first.chamber)} {first.cycle} mixes certified and "
                              f"unofficial rows (row {first.row} is {first.status}, this row is "
                              f"{other.status}); a unit is delivered whole, with one status")
            problems.append(problem)
            condemn(members, problem, "unit")
    problems.sort(key=lambda p: (p.row or 0))
    return problems, bad
