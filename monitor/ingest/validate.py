"""Checks across rows: a contest and a unit must hang together.

Each check returns problems located at the row that shows it, so ``--skip-bad-rows`` can drop
exactly the rows concerned (a whole contest or unit when the fault is the contest's or unit's).
"""

from __future__ import annotations

from collections import defaultdict

from monitor.errors import Problem
from monitor.ingest.fields import shown
from monitor.ingest.records import Record


def check_records(file: str, records: list[Record]) -> tuple[list[Problem], dict[int, tuple[Problem, str]]]:
    """Return the problems and the record indexes they condemn, each with the problem that
    condemns it and its scope (``contest`` or ``unit``)."""
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
        lines: dict[tuple[str, str], int] = {}
        for i in members:
            rec = records[i]
            if not rec.candidate:
                continue
            line = (rec.party.casefold(), rec.candidate.casefold())
            if line in lines:
                first = records[lines[line]]
                problem = Problem(file, rec.row, shown(rec.columns.get("candidate", "candidate")),
                                  f"candidate {rec.candidate!r} appears twice on the "
                                  f"{rec.party or '(no party)'!r} line of district "
                                  f"{rec.district!r} (first at row {first.row})")
                problems.append(problem)
                condemn(members, problem, "contest")  # which line is right is unknown: the contest goes
            else:
                lines[line] = i
        seats = {records[i].seats for i in members}
        if len(seats) > 1:
            first = records[members[0]]
            found = []
            for i in members:
                if records[i].seats != first.seats:
                    found.append(Problem(file, records[i].row, shown(records[i].columns.get("seats", "seats")),
                                         f"seats {records[i].seats} disagrees with {first.seats} at row "
                                         f"{first.row} for district {first.district!r}"))
            problems.extend(found)
            condemn(members, found[0], "contest")
        if sum(records[i].votes for i in members) == 0:
            first = records[members[0]]
            problem = Problem(file, first.row, shown(first.columns.get("votes", "votes")),
                              f"district {first.district!r} ({shown(first.state)} {shown(first.chamber)} "
                              f"{first.cycle}) has no votes at all")
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
