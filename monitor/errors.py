"""Domain errors. The CLI turns them into messages and exit codes; nothing else prints them."""

from __future__ import annotations

from dataclasses import dataclass


class LevelfieldError(Exception):
    """Base of every error meant for the user (no traceback)."""

    exit_code = 1


class UsageError(LevelfieldError):
    """Wrong command, option, file path or config: exit code 2."""

    exit_code = 2


class ConfigError(UsageError):
    """levelfield.toml or a mapping file is invalid."""


@dataclass(frozen=True)
class Problem:
    """One thing wrong with an input file, located as ``file:row:column``.

    ``row`` counts physical lines from 1 (the header is row 1); ``column`` is the header name.
    """

    file: str
    row: int | None
    column: str | None
    reason: str

    def __str__(self) -> str:
        where = self.file
        if self.row is not None:
            where += f":{self.row}"
        if self.column:
            where += f":{self.column}"
        return f"{where}: {self.reason}"


class DataError(LevelfieldError):
    """The input file is wrong; carries every problem found (exit code 1)."""

    exit_code = 1

    def __init__(self, problems: list[Problem], summary: str | None = None):
        self.problems = problems
        self.summary = summary or f"{len(problems)} problem(s) found; nothing was loaded"
        super().__init__(self.summary)
