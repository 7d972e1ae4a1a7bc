"""Mapping files: make a foreign candidate-level CSV loadable without editing it.

A mapping (TOML) says which of their columns hold our fields, which rows to keep, how their
values translate into ours, how their party labels group into our party codes, which lines are
not candidates, which counts are placeholders, which contest decides a seat, which states to
skip, their at-large district code, a fixed chamber, and how a candidate's repeated lines and
fusion lines combine. The keys shown in README are a fixed contract; missing keys take the
defaults below. Every problem with the mapping itself (or a column it names that the file
lacks) is a :class:`ConfigError` (exit 2), with a "did you mean" where a name is close.
"""

from __future__ import annotations

import difflib
import hashlib
import tomllib
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterable

from monitor.config import normalise_label
from monitor.errors import ConfigError, DataError, Problem
from monitor.ingest.deciding import DecidingRules, parse_rules
from monitor.ingest.fields import shown
from monitor.ingest.native import cells_getter, width_problem
from monitor.ingest.records import FIELDS, KEY_FIELDS, ParseContext, Record, contest_key, parse_record

REQUIRED_FIELDS = ("cycle", "state", "district", "party", "votes")
TOP_KEYS = ("chamber", "candidate_lines", "repeated_lines", "encoding", "delimiter", "source",
            "columns", "keep", "translate", "not_candidates", "placeholders", "parties", "exclude", "districts",
            "deciding")
TABLES = ("keep", "translate", "not_candidates", "placeholders", "parties", "exclude", "districts")
PLACEHOLDER_KEYS = ("counts", "lone_counts")


@dataclass
class Mapping:
    path: Path
    sha256: str
    columns: dict[str, str]
    chamber: str | None = None
    candidate_lines: str = "separate"
    repeated_lines: str = "sum"
    encoding: str | None = None
    delimiter: str = ","
    source: str | None = None
    keep: dict[str, set[str]] = field(default_factory=dict)
    # our field -> {their value (as keep_value) -> (their value as written, our value)}
    translate: dict[str, dict[str, tuple[str, str]]] = field(default_factory=dict)
    not_candidates: dict[str, set[str]] = field(default_factory=dict)  # their column -> labels (keep_value)
    placeholder_counts: frozenset[int] = frozenset()  # on any line: "unopposed, not on the ballot"
    lone_counts: frozenset[int] = frozenset()         # on a contest's only candidate: the same
    parties: dict[str, str] = field(default_factory=dict)  # normalised label -> code
    exclude_states: set[str] = field(default_factory=set)
    at_large: str | None = None
    deciding: DecidingRules = field(default_factory=DecidingRules)


def did_you_mean(word: str, choices: Iterable[str], n: int = 1) -> str:
    """``" (did you mean 'x'?)"`` for the closest of ``choices``, or ``""``."""
    close = difflib.get_close_matches(word, list(choices), n=n)
    if not close:
        return ""
    return " (did you mean " + " or ".join(repr(c) for c in close) + "?)"


def load_mapping(path: Path) -> Mapping:
    """Read and check the mapping file at ``path``: every problem at once, as one :class:`ConfigError`."""
    data, raw = _read_toml(path)
    problems: list[str] = []
    _check_layout(raw, problems)
    columns = _checked_columns(raw.get("columns", {}), problems)
    chamber = raw.get("chamber")
    if chamber is None and "chamber" not in columns:
        problems.append("give a fixed chamber = \"...\" or a [columns] chamber")
    if chamber is not None and (not isinstance(chamber, str) or not chamber.strip()):
        problems.append("chamber must be a non-empty text")
    lines = raw.get("candidate_lines", "separate")
    if lines not in ("sum", "separate"):
        problems.append(f"candidate_lines must be \"sum\" or \"separate\", got {lines!r}")
    repeated = raw.get("repeated_lines", "sum")
    if repeated not in ("sum", "refuse"):
        problems.append(f"repeated_lines must be \"sum\" or \"refuse\", got {repeated!r}")
    for key in ("encoding", "source"):
        if key in raw and not (isinstance(raw[key], str) and raw[key].strip()):
            problems.append(f"{key} must be a non-empty text")
    delimiter = raw.get("delimiter", ",")
    if not isinstance(delimiter, str) or len(delimiter) != 1:
        problems.append("delimiter must be one character")
    keep = _column_lists(raw.get("keep", {}), "keep", problems)
    not_candidates = _column_lists(raw.get("not_candidates", {}), "not_candidates", problems)
    translate = _translations(raw.get("translate", {}), columns, problems)
    counts = _placeholder_counts(raw.get("placeholders", {}), problems)
    parties = _party_codes(raw.get("parties", {}), problems)
    exclude = raw.get("exclude", {}).get("states", [])
    if not isinstance(exclude, list) or not all(isinstance(v, str) for v in exclude):
        problems.append("[exclude] states must be a list of state codes")
        exclude = []
    at_large = raw.get("districts", {}).get("at_large")
    if at_large is not None and not isinstance(at_large, str):
        problems.append("[districts] at_large must be text (quote it: at_large = \"0\")")
    deciding = parse_rules(raw.get("deciding"), problems)
    if problems:
        raise ConfigError(f"{path}: " + "; ".join(problems))
    return Mapping(
        path=path, sha256=hashlib.sha256(data).hexdigest(), columns=dict(columns),
        chamber=chamber.strip() if chamber else None, candidate_lines=lines, repeated_lines=repeated,
        encoding=raw.get("encoding"), delimiter=delimiter, source=raw.get("source"), keep=keep,
        translate=translate, not_candidates=not_candidates,
        placeholder_counts=frozenset(counts["counts"]), lone_counts=frozenset(counts["lone_counts"]),
        parties=parties, exclude_states={exclude_value(s) for s in exclude}, at_large=at_large,
        deciding=deciding,
    )


def _read_toml(path: Path) -> tuple[bytes, dict]:
    """The mapping file's bytes (for its hash) and its TOML; a :class:`ConfigError` when it
    cannot be read or is not TOML."""
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise ConfigError(f"{path}: cannot read the mapping file ({exc.strerror})") from None
    try:
        raw = tomllib.loads(data.decode("utf-8-sig"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise ConfigError(f"{path}: not a valid TOML mapping file: {exc}") from None
    return data, raw


def _check_layout(raw: dict, problems: list[str]) -> None:
    """Unknown top-level keys, and tables given as something else (each then read as empty)."""
    for key in raw:
        if key not in TOP_KEYS:
            problems.append(f"unknown key {key!r}{did_you_mean(key, TOP_KEYS)}")
    for key in TABLES:
        if not isinstance(raw.get(key, {}), dict):
            problems.append(f"{key} must be a table ([{key}] on its own line, then key = value lines)")
            raw[key] = {}


def _checked_columns(columns: object, problems: list[str]) -> dict[str, str]:
    """``[columns]``: our field -> their column name, every required field present."""
    if not isinstance(columns, dict) or not all(isinstance(v, str) and v for v in columns.values()):
        problems.append("[columns] must map our field names to their column names (text)")
        columns = {}
    for ours in columns:
        if ours not in FIELDS:
            problems.append(f"[columns] {ours!r} is not one of our fields ({', '.join(FIELDS)})"
                            + did_you_mean(ours, FIELDS))
    for ours in REQUIRED_FIELDS:
        if ours not in columns:
            problems.append(f"[columns] needs {ours!r}")
    return columns


def _placeholder_counts(table: dict, problems: list[str]) -> dict[str, list[int]]:
    """``[placeholders]``: ``counts`` and ``lone_counts``, each a list of whole numbers."""
    for key in table:
        if key not in PLACEHOLDER_KEYS:
            problems.append(f"[placeholders] {key!r} is not a key ({', '.join(PLACEHOLDER_KEYS)})"
                            + did_you_mean(key, PLACEHOLDER_KEYS))
    counts = {key: _whole_numbers(table.get(key, []), f"[placeholders] {key}", problems)
              for key in PLACEHOLDER_KEYS}
    if any(c < 0 for c in counts["lone_counts"]):
        problems.append("[placeholders] lone_counts must not be negative (a negative count belongs in counts)")
    return counts


def _party_codes(table: dict, problems: list[str]) -> dict[str, str]:
    """``[parties]``: our code (a, b, other) -> their labels, turned into normalised label -> code."""
    parties: dict[str, str] = {}
    for code, labels in table.items():
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
    return parties


def _column_lists(table: dict, name: str, problems: list[str]) -> dict[str, set[str]]:
    """``[keep]``/``[not_candidates]``: their column -> the texts to match (as :func:`keep_value`)."""
    out: dict[str, set[str]] = {}
    for column, values in table.items():
        if not isinstance(values, list) or not all(isinstance(v, str) for v in values):
            problems.append(f"[{name}] {column!r} must be a list of texts")
            continue
        out[column] = {keep_value(v) for v in values}
    return out


def _translations(table: dict, columns: dict, problems: list[str]) -> dict[str, dict[str, tuple[str, str]]]:
    """``[translate.<our field>]`` tables: their value = our value, for fields named in [columns]."""
    out: dict[str, dict[str, tuple[str, str]]] = {}
    for ours, values in table.items():
        if ours not in columns:
            where = ("not one of our fields" + did_you_mean(ours, FIELDS) if ours not in FIELDS
                     else "not a column of this mapping (add it to [columns])")
            problems.append(f"[translate.{ours}]: {ours!r} is {where}")
            continue
        if not isinstance(values, dict) or not values:
            problems.append(f"[translate.{ours}] must be a table of their value = our value lines")
            continue
        known: dict[str, tuple[str, str]] = {}
        for theirs, value in values.items():
            if isinstance(value, bool) or not isinstance(value, (str, int)):
                problems.append(f"[translate.{ours}] {theirs!r} must translate to a text or a whole number")
                continue
            key = keep_value(theirs)
            if key in known and known[key][1] != str(value):
                problems.append(f"[translate.{ours}] {theirs!r} and {known[key][0]!r} are the same value "
                                "(case and surrounding spaces are ignored) with two translations")
            known[key] = (theirs, str(value))
        out[ours] = known
    return out


def _whole_numbers(values: object, where: str, problems: list[str]) -> list[int]:
    if not isinstance(values, list) or not all(isinstance(v, int) and not isinstance(v, bool) for v in values):
        problems.append(f"{where} must be a list of whole numbers (such as [-1])")
        return []
    return values


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


@dataclass
class MappedRows:
    """What :func:`parse_mapped` read: records, row problems and counts of the rows set aside."""

    records: list[Record]
    problems: list[Problem]
    read: int = 0
    filtered: int = 0                      # rows [keep]/[exclude] left out
    not_candidates: Counter = field(default_factory=Counter)  # label -> lines kept out of the totals


def missing_columns(file: str, header: list[str], mapping: Mapping) -> str | None:
    """The columns the mapping names that the header lacks, each with the close header names
    (a mapping error: the mapping is fixed, not the file), or ``None``."""
    names = [h.strip() for h in header if h.strip()]
    wanted = [(theirs, f"[columns] {ours} = {theirs!r}") for ours, theirs in mapping.columns.items()]
    wanted += [(theirs, f"[keep] {theirs!r}") for theirs in mapping.keep]
    wanted += [(theirs, f"[not_candidates] {theirs!r}") for theirs in mapping.not_candidates]
    lines = []
    for theirs, where in wanted:
        if theirs.strip() and theirs.strip() not in names:
            close = difflib.get_close_matches(theirs.strip(), names, n=3)
            close += [n for n in names if n.casefold() == theirs.strip().casefold() and n not in close]
            hint = (f"did you mean {' or '.join(repr(shown(c)) for c in close)}?" if close else
                    "the header has " + ", ".join(repr(shown(n)) for n in names[:25])
                    + (f" and {len(names) - 25} more" if len(names) > 25 else ""))
            lines.append(f"{file}:1:{shown(theirs)}: the mapping's {where} names a column the file does not "
                         f"have ({hint})")
    if not lines:
        return None
    return (f"{mapping.path}: the mapping names {len(lines)} column(s) that {file} does not have; "
            "nothing was loaded\n  " + "\n  ".join(lines))


def parse_mapped(ctx: ParseContext, mapping: Mapping, header: list[str],
                 rows: Iterable[tuple[int, list[str]]]) -> MappedRows:
    """Parse a foreign file through ``mapping``: keep, exclude, set non-candidate lines aside,
    translate, then parse each row as our record."""
    missing = missing_columns(ctx.file, header, mapping)
    if missing:
        raise ConfigError(missing)
    problems = used_header_problems(ctx.file, header,
                                    [*mapping.columns.values(), *mapping.keep, *mapping.not_candidates])
    if problems:
        raise DataError(problems, f"{len(problems)} problem(s) in the header; nothing was loaded")
    names = [h.strip() for h in header]
    index: dict[str, int] = {}
    for i, n in enumerate(names):
        index.setdefault(n, i)
    if mapping.chamber:
        ctx.fixed["chamber"] = mapping.chamber
    ctx.at_large = mapping.at_large
    ctx.placeholder_counts = mapping.placeholder_counts
    if mapping.parties:
        ctx.label_codes = {k: v for k, v in mapping.parties.items() if v in ("a", "b")}
    field_index = {ours: index[theirs.strip()] for ours, theirs in mapping.columns.items()}
    columns = dict(mapping.columns)
    keep = [(index[c.strip()], values) for c, values in mapping.keep.items()]
    not_candidates = [(index[c.strip()], values) for c, values in mapping.not_candidates.items()]
    state_i = field_index["state"]
    out = MappedRows([], [])
    width = len(names)
    for row, cells in rows:
        if not cells or (len(cells) == 1 and not cells[0].strip()):
            continue
        out.read += 1
        get = cells_getter(cells, field_index)
        if len(cells) != width:
            out.problems.append(width_problem(ctx.file, row, cells, names))
            get, _, unknown = _translated(ctx.file, row, get, mapping)
            ctx.bad_rows.append((row, _bad_key(ctx, get, unknown)))
            continue
        if (any(keep_value(cells[i]) not in values for i, values in keep)
                or exclude_value(cells[state_i]) in mapping.exclude_states):
            out.filtered += 1
            continue
        label = next((cells[i] for i, values in not_candidates if keep_value(cells[i]) in values), None)
        if label is not None:
            out.not_candidates[" ".join(label.split())] += 1
            continue
        get, untranslated, unknown = _translated(ctx.file, row, get, mapping)
        if untranslated:
            out.problems.extend(untranslated)
            ctx.bad_rows.append((row, _bad_key(ctx, get, unknown)))
            continue
        record, problems = parse_record(ctx, row, get, columns)
        out.problems.extend(problems)
        if record:
            out.records.append(record)
        else:
            ctx.bad_rows.append((row, contest_key(ctx, get)))
    return out


def _bad_key(ctx: ParseContext, get, unknown: set[str]) -> tuple:
    """What a bad row says about its contest, a field it has no translation for left unknown
    (``None``: it fits any contest, so the row takes every contest it may belong to with it)."""
    return tuple(None if name in unknown else value for name, value in zip(KEY_FIELDS, contest_key(ctx, get)))


def _translated(file: str, row: int, get, mapping: Mapping):
    """``get`` with the mapping's ``[translate.<field>]`` applied, a problem for each cell whose
    value has no translation (that cell then reads as written) and the set of those fields."""
    if not mapping.translate:
        return get, [], set()
    problems = []
    values: dict[str, str | None] = {}
    unknown: set[str] = set()
    for ours, table in mapping.translate.items():
        cell = get(ours)
        hit = table.get(keep_value(cell or ""))
        if hit is None:
            unknown.add(ours)
            known = ", ".join(repr(theirs) for theirs, _ in table.values())
            problems.append(Problem(file, row, shown(mapping.columns[ours]),
                                    f"{ours} {shown((cell or '').strip())!r} has no translation in the mapping's "
                                    f"[translate.{ours}] (it knows {known}; case and surrounding spaces are "
                                    "ignored)"))
            values[ours] = cell
        else:
            values[ours] = hit[1]

    def get_translated(name: str) -> str | None:
        return values[name] if name in values else get(name)

    return get_translated, problems, unknown


def quiet_labels(mapping: Mapping | None) -> set[str]:
    """Normalised labels the mapping lists under ``other``: not reported as unknown."""
    if mapping is None:
        return set()
    return {k for k, v in mapping.parties.items() if v == "other"}
