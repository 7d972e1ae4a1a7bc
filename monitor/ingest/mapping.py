"""Mapping files: make a foreign candidate-level CSV loadable without editing it.

A mapping (TOML) says which of their columns hold our fields, which rows to keep, how their
party labels group into our party codes, which states to skip, their at-large district code,
a fixed chamber, and whether a candidate's several party lines (fusion) are summed.
The keys shown in README are a fixed contract; missing keys take the defaults below.
"""

from __future__ import annotations

import hashlib
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterable

from monitor.config import normalise_label
from monitor.errors import ConfigError, DataError, Problem
from monitor.ingest.fields import shown
from monitor.ingest.native import cells_getter, width_problem
from monitor.ingest.records import FIELDS, ParseContext, Record, contest_key, parse_record

REQUIRED_FIELDS = ("cycle", "state", "district", "party", "votes")
TOP_KEYS = {"chamber", "candidate_lines", "encoding", "delimiter", "source",
            "columns", "keep", "parties", "exclude", "districts"}


@dataclass
class Mapping:
    path: Path
    sha256: str
    columns: dict[str, str]
    chamber: str | None = None
    candidate_lines: str = "separate"
    encoding: str | None = None
    delimiter: str = ","
    source: str | None = None
    keep: dict[str, set[str]] = field(default_factory=dict)
    parties: dict[str, str] = field(default_factory=dict)  # normalised label -> code
    exclude_states: set[str] = field(default_factory=set)
    at_large: str | None = None


def load_mapping(path: Path) -> Mapping:
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise ConfigError(f"{path}: cannot read the mapping file ({exc.strerror})") from None
    try:
        raw = tomllib.loads(data.decode("utf-8-sig"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise ConfigError(f"{path}: not a valid TOML mapping file: {exc}") from None
    problems: list[str] = []
    for key in raw:
        if key not in TOP_KEYS:
            problems.append(f"unknown key {key!r}")
    for key in ("keep", "parties", "exclude", "districts"):
        if not isinstance(raw.get(key, {}), dict):
            problems.append(f"{key} must be a table ([{key}] on its own line, then key = value lines)")
            raw[key] = {}
    columns = raw.get("columns", {})
    if not isinstance(columns, dict) or not all(isinstance(v, str) and v for v in columns.values()):
        problems.append("[columns] must map our field names to their column names (text)")
        columns = {}
    for ours in columns:
        if ours not in FIELDS:
            problems.append(f"[columns] {ours!r} is not one of our fields ({', '.join(FIELDS)})")
    for ours in REQUIRED_FIELDS:
        if ours not in columns:
            problems.append(f"[columns] needs {ours!r}")
    chamber = raw.get("chamber")
    if chamber is None and "chamber" not in columns:
        problems.append("give a fixed chamber = \"...\" or a [columns] chamber")
    if chamber is not None and (not isinstance(chamber, str) or not chamber.strip()):
        problems.append("chamber must be a non-empty text")
    lines = raw.get("candidate_lines", "separate")
    if lines not in ("sum", "separate"):
        problems.append(f"candidate_lines must be \"sum\" or \"separate\", got {lines!r}")
    for key in ("encoding", "source"):
        if key in raw and not (isinstance(raw[key], str) and raw[key].strip()):
            problems.append(f"{key} must be a non-empty text")
    delimiter = raw.get("delimiter", ",")
    if not isinstance(delimiter, str) or len(delimiter) != 1:
        problems.append("delimiter must be one character")
    keep: dict[str, set[str]] = {}
    for column, values in raw.get("keep", {}).items():
        if not isinstance(values, list) or not all(isinstance(v, str) for v in values):
            problems.append(f"[keep] {column!r} must be a list of texts")
            continue
        keep[column] = {keep_value(v) for v in values}
    parties: dict[str, str] = {}
    for code, labels in raw.get("parties", {}).items():
        if code not in ("a", "b", "other"):
            problems.append(f"[parties] {code!r}: our party codes are a, b (and other)")
            continue
        if not isinstance(labels, list) or not all(isinstance(v, str) for v in labels):
            problems.append(f"[parties] {code} must be a list of labels")
            continue
        for label in labels:
            key = normalise_label(label)
            if key in parties and parties[key] != code:
                problems.append(f"[parties] label {label!r} is listed under two codes")
            parties[key] = code
    exclude = raw.get("exclude", {}).get("states", [])
    if not isinstance(exclude, list) or not all(isinstance(v, str) for v in exclude):
        problems.append("[exclude] states must be a list of state codes")
        exclude = []
    at_large = raw.get("districts", {}).get("at_large")
    if at_large is not None and not isinstance(at_large, str):
        problems.append("[districts] at_large must be text (quote it: at_large = \"0\")")
    if problems:
        raise ConfigError(f"{path}: " + "; ".join(problems))
    return Mapping(
        path=path, sha256=hashlib.sha256(data).hexdigest(), columns=dict(columns),
        chamber=chamber.strip() if chamber else None, candidate_lines=lines,
        encoding=raw.get("encoding"), delimiter=delimiter, source=raw.get("source"), keep=keep,
        parties=parties, exclude_states={exclude_value(s) for s in exclude}, at_large=at_large,
    )


def keep_value(text: str) -> str:
    """``[keep]`` values match whatever the case and surrounding spaces."""
    return text.strip().casefold()


def exclude_value(text: str) -> str:
    """``[exclude] states`` match whatever the case and surrounding spaces."""
    return text.strip().casefold()


def used_header_problems(file: str, header: list[str], used: Iterable[str]) -> list[Problem]:
    """Duplicated or blank names among the columns the mapping uses; other columns do not matter."""
    problems = []
    names = [h.strip() for h in header]
    for theirs in dict.fromkeys(used):
        if not theirs.strip():
            problems.append(Problem(file, 1, None, "the mapping names a column with no name (a blank text)"))
            continue
        where = [i + 1 for i, n in enumerate(names) if n == theirs.strip()]
        if len(where) > 1:
            problems.append(Problem(file, 1, shown(theirs.strip()),
                                    f"duplicated column, used by the mapping (columns "
                                    f"{', '.join(f'#{i}' for i in where)}): which one is meant?"))
    return problems


def parse_mapped(
    ctx: ParseContext, mapping: Mapping, header: list[str], rows: Iterable[tuple[int, list[str]]]
) -> tuple[list[Record], list[Problem], int, int]:
    """Parse a foreign file through ``mapping``; returns (records, row problems, rows read, rows filtered)."""
    problems = used_header_problems(ctx.file, header, [*mapping.columns.values(), *mapping.keep])
    names = [h.strip() for h in header]
    index: dict[str, int] = {}
    for i, n in enumerate(names):
        index.setdefault(n, i)
    for ours, theirs in mapping.columns.items():
        if theirs.strip() and theirs.strip() not in index:
            problems.append(Problem(ctx.file, 1, shown(theirs),
                                    f"missing column (the mapping's [columns] {ours} = {theirs!r})"))
    for theirs in mapping.keep:
        if theirs.strip() and theirs.strip() not in index:
            problems.append(Problem(ctx.file, 1, shown(theirs), "missing column (named in the mapping's [keep])"))
    if problems:
        raise DataError(problems, f"{len(problems)} problem(s) in the header; nothing was loaded")
    if mapping.chamber:
        ctx.fixed["chamber"] = mapping.chamber
    ctx.at_large = mapping.at_large
    if mapping.parties:
        ctx.label_codes = {k: v for k, v in mapping.parties.items() if v in ("a", "b")}
    field_index = {ours: index[theirs.strip()] for ours, theirs in mapping.columns.items()}
    columns = dict(mapping.columns)
    keep = [(index[c.strip()], values) for c, values in mapping.keep.items()]
    state_i = field_index["state"]
    records: list[Record] = []
    row_problems: list[Problem] = []
    read = filtered = 0
    width = len(names)
    for row, cells in rows:
        if not cells or (len(cells) == 1 and not cells[0].strip()):
            continue
        read += 1
        get = cells_getter(cells, field_index)
        if len(cells) != width:
            row_problems.append(width_problem(ctx.file, row, cells, names))
            ctx.bad_rows.append((row, contest_key(ctx, get)))
            continue
        if (any(keep_value(cells[i]) not in values for i, values in keep)
                or exclude_value(cells[state_i]) in mapping.exclude_states):
            filtered += 1
            continue
        record, problems = parse_record(ctx, row, get, columns)
        row_problems.extend(problems)
        if record:
            records.append(record)
        else:
            ctx.bad_rows.append((row, contest_key(ctx, get)))
    return records, row_problems, read, filtered


def quiet_labels(mapping: Mapping | None) -> set[str]:
    """Normalised labels the mapping lists under ``other``: not reported as unknown."""
    if mapping is None:
        return set()
    return {k for k, v in mapping.parties.items() if v == "other"}


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
        merged = Record(**{f: getattr(lead, f) for f in Record.__slots__})
        merged.row = min(r.row for r in lines)
        merged.votes = sum(r.votes for r in lines)
        out.append(merged)
    out.sort(key=lambda r: r.row)
    return out
