"""Loading one file into the store: parse, validate, then write every unit in one transaction.

A file delivers whole (cycle, state, chamber) units. The same bytes twice change nothing. A unit
that is already stored with other contents is a correction: the new contests become current,
the old ones stay in history (``units.superseded_by``), and the report says what changed.
"""

from __future__ import annotations

import datetime as dt
import json
import sqlite3
from collections import Counter, defaultdict
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import sqlite_utils

from monitor.config import Config, normalise_label
from monitor.errors import DataError, Problem, UsageError
from monitor.ingest import labels as L
from monitor.ingest.deciding import DecidingRules, decide, kind_of, seat_of
from monitor.ingest.fields import shown
from monitor.ingest.lines import combine_repeated_lines, mark_placeholders, sum_candidate_lines
from monitor.ingest.mapping import Mapping, parse_mapped, quiet_labels
from monitor.ingest.native import detect_format, parse_native
from monitor.ingest.reader import csv_rows, decode, decompressed, read_raw
from monitor.ingest.records import ParseContext, Record, content_hash, describe_contest, key_matches
from monitor.ingest.report import LoadReport, UnitChange
from monitor.ingest.validate import check_records
from monitor.reduce import describe_changes, reduce_contests
from store import queries, transaction

__all__ = ["LoadReport", "UnitChange", "load_file"]


def load_file(
    db: sqlite_utils.Database,
    path: Path,
    config: Config,
    *,
    mapping: Mapping | None = None,
    source: str | None = None,
    dry_run: bool = False,
    skip_bad_rows: bool = False,
    encoding: str | None = None,
    now: dt.datetime | None = None,
    record_refusal: bool = True,
    report_dir: Path | None = None,
) -> LoadReport:
    """Load ``path``; raise :class:`DataError` when it cannot load whole.

    A refused file writes none of its rows: the store only gains a provenance row in ``loads``
    (outcome ``refused``, rows read and rejected, the first problem), in its own transaction after
    the load's own one rolled back (not for a dry run, or with ``record_refusal=False``).
    ``report_dir``: where to write the full report of a load or dry run (see
    :meth:`LoadReport.write`)."""
    try:
        raw = read_raw(path)
    except FileNotFoundError:
        raise UsageError(f"{path}: no such file") from None
    except IsADirectoryError:
        raise UsageError(f"{path}: is a folder, not a file") from None
    except OSError as exc:
        raise UsageError(f"{path}: cannot read ({exc.strerror})") from None
    report = LoadReport(file=raw.name, sha256=raw.sha256, outcome="dry run" if dry_run else "loaded")
    stamp = (now or dt.datetime.now(dt.timezone.utc)).isoformat(timespec="seconds")
    try:
        report = _load(db, raw, config, report, stamp, mapping=mapping, source=source, dry_run=dry_run,
                       skip_bad_rows=skip_bad_rows, encoding=encoding)
    except DataError as exc:
        if not dry_run and record_refusal:
            _record_refusal(db, raw, mapping, source, stamp, report, exc)
        raise
    if report_dir is not None and report.outcome != "already loaded":
        try:
            report.write(report_dir)
        except OSError as exc:  # the load stands; say that its report file is missing
            report.warnings.append(f"the full report could not be written to {report_dir} ({exc.strerror})")
    return report


def _load(db, raw, config: Config, report: LoadReport, stamp: str, *, mapping, source, dry_run,
          skip_bad_rows, encoding) -> LoadReport:
    if _already_loaded(db, raw, mapping, report):
        return report

    content = decompressed(raw, config["load.max_decompressed_mb"] * 2**20)
    delimiter = mapping.delimiter if mapping else ","
    text = decode(raw.name, content, encoding or (mapping.encoding if mapping else None), delimiter)
    rows = csv_rows(raw.name, text, delimiter)
    header = next(rows, None)
    if header is None or not any(c.strip() for c in header[1]):
        raise DataError([Problem(raw.name, 1, None, "the file is empty: no header row")])
    ctx = ParseContext(raw.name, config["load.max_votes_per_row"], config.label_codes())
    report.format = "mapped" if mapping is not None else detect_format(header[1])
    set_aside = 0
    if mapping is None:
        report.format, records, problems, report.rows_read = parse_native(ctx, header[1], rows)
    else:
        report.format = "mapped"
        parsed = parse_mapped(ctx, mapping, header[1], rows)
        records, problems, report.rows_read, report.rows_filtered = (parsed.records, parsed.problems, parsed.read,
                                                                      parsed.filtered)
        report.not_candidates = dict(sorted(parsed.not_candidates.items(), key=lambda kv: (-kv[1], kv[0])))
        set_aside = sum(parsed.not_candidates.values())
    lone_counts = mapping.lone_counts if mapping else frozenset()
    cross, bad = check_records(raw.name, records, repeated_lines=mapping.repeated_lines if mapping else "refuse",
                               lone_counts=lone_counts)
    problems = sorted(problems + cross, key=lambda p: p.row or 0)
    if problems and not skip_bad_rows:
        report.rows_rejected = len({p.row for p in problems if p.row is not None})
        raise DataError(problems, f"{len(problems)} problem(s) in {raw.name}; nothing was loaded "
                                  "(fix the file, or pass --skip-bad-rows to load the rest)")
    # a row that cannot be read takes its whole contest with it (never half a contest)
    skipped = _BadContests(ctx.bad_rows + [(p.row, records[i].contest) for i, (p, scope) in bad.items()
                                           if scope == "contest"])
    skipped_with = _skipped_with_bad_rows(ctx, records, bad, skipped)
    # every skipped row is listed: rows with a problem, then rows dropped with their contest or unit
    named = {p.row for p in problems}
    report.skipped = [str(p) for p in problems] + [
        why for row, why in sorted({records[i].row: why for i, why in skipped_with.items()}.items())
        if row not in named]
    if skipped_with:
        records = [r for i, r in enumerate(records) if i not in skipped_with]
    report.rows_accepted = len({r.row for r in records})
    report.rows_rejected = report.rows_read - report.rows_filtered - set_aside - report.rows_accepted
    if not records:
        raise DataError(problems or [Problem(raw.name, None, None, "no result rows to load")],
                        f"{raw.name}: no rows left to load; nothing was loaded")
    report.other_labels = _other_labels(records, mapping)
    _warn_without_major_parties(report, records, mapping)
    if mapping is not None and mapping.repeated_lines == "sum":
        records, report.lines_combined = combine_repeated_lines(records)
    report.placeholders = [p.describe(raw.name) for p in mark_placeholders(records, lone_counts)]
    if mapping is not None and mapping.candidate_lines == "sum":
        records = sum_candidate_lines(records)

    units = _group_units(records)
    decisions = _decide(records, mapping.deciding if mapping else DecidingRules(), skipped)
    first_rows: dict[tuple, int] = {}
    for rec in records:
        first_rows[rec.contest] = min(rec.row, first_rows.get(rec.contest, rec.row))
    report.left_out = [f"{raw.name}:{first_rows[key]}: {describe_contest(*key)}: {why}"
                       for key, why in sorted(decisions.items(), key=lambda kv: first_rows[kv[0]]) if why]
    # the CPU work happens before the write lock is taken: the transaction only writes
    prepared = _prepare_units(units, decisions)
    codes_from = L.MAPPING if mapping is not None and mapping.parties else L.CONFIG
    try:
        with transaction(db) as conn:
            _write(conn, raw, mapping, source, stamp, prepared, report, codes_from, config.label_codes(), dry_run)
            if dry_run:
                raise _DryRun()
    except _DryRun:
        report.load_id = None
    return report


class _BadContests:
    """What bad rows say about their contests: ``row_for(key)`` is the bad row whose contest is
    ``key`` (an unreadable key cell fits any value; a row that names no contest at all, with
    cycle, state, chamber and district unreadable, fits none and is skipped alone)."""

    def __init__(self, bad_rows: list[tuple[int | None, tuple]]):
        self.exact: dict[tuple, int | None] = {}
        self.partial: list[tuple[int | None, tuple]] = []
        for row, key in bad_rows:
            if None not in key:
                self.exact.setdefault(key, row)
            elif any(k is not None for k in key[:4]):
                self.partial.append((row, key))

    def __bool__(self) -> bool:
        return bool(self.exact or self.partial)

    def row_for(self, key: tuple) -> int | None:
        if key in self.exact:
            return self.exact[key]
        return next((r for r, pattern in self.partial if key_matches(pattern, key)), None)


def _skipped_with_bad_rows(ctx: ParseContext, records: list[Record], bad: dict[int, tuple[Problem, str]],
                           skipped: _BadContests) -> dict[int, str]:
    """Record indexes to skip, each with why: its contest or unit has a row with a problem."""
    out: dict[int, str] = {}
    for i, (problem, scope) in bad.items():
        rec = records[i]
        if scope == "unit":
            out[i] = (f"{ctx.file}:{rec.row}:{shown(rec.columns.get('state', 'state'))}: skipped with the rest of "
                      f"its unit ({shown(rec.state)} {shown(rec.chamber)} {rec.cycle}): row {problem.row} has a problem")
        else:
            out[i] = _with_contest(ctx.file, rec, problem.row)
    if skipped:
        for i, rec in enumerate(records):
            if i not in out and (row := skipped.row_for(rec.contest)) is not None:
                out[i] = _with_contest(ctx.file, rec, row)
    return out


def _with_contest(file: str, rec: Record, bad_row: int | None) -> str:
    return (f"{file}:{rec.row}:{shown(rec.columns.get('district', 'district'))}: skipped with the rest of its "
            f"contest ({describe_contest(*rec.contest)}): row {bad_row} has a problem")


def _decide(records: list[Record], rules: DecidingRules, skipped: _BadContests) -> dict[tuple, str | None]:
    """Which contest decides each seat (``None``) and why each other one does not. A seat whose
    deciding contest was skipped with a bad row gets no deciding contest: the one that would
    take its place is not the seat's result."""
    loaded = {rec.contest for rec in records}
    if not skipped:
        return decide(loaded, rules)
    seats = {seat_of(key) for key in loaded}
    ghosts = {key: row for seat in seats for special in (False, True) for runoff in (False, True)
              if (key := (*seat[:4], special, runoff, seat[4])) not in loaded
              and (row := skipped.row_for(key)) is not None}
    out = decide(loaded | set(ghosts), rules)
    for key in loaded:
        if out[key] is None:
            continue
        ghost = next((g for g in ghosts if seat_of(g) == seat_of(key) and out[g] is None), None)
        if ghost is not None:
            out[key] = (f"the {kind_of(ghost[4], ghost[5])} contest would decide this seat but was "
                        f"skipped (row {ghosts[ghost]} has a problem): no contest decides this seat")
    return {key: why for key, why in out.items() if key in loaded}


def _other_labels(records: list[Record], mapping: Mapping | None) -> dict[str, int]:
    """Labels counted as 'other' among the rows that are loaded (skipped rows do not count)."""
    quiet = quiet_labels(mapping)
    counts = Counter(r.party for r in records if r.party_code == "other" and normalise_label(r.party) not in quiet)
    return dict(counts)


def _warn_without_major_parties(report: LoadReport, records: list[Record], mapping: Mapping | None) -> None:
    """A file where no line matched party a or party b is almost always a label mismatch."""
    if any(r.party_code in ("a", "b") for r in records):
        return
    seen = Counter(r.party for r in records)
    labels = ", ".join(f"{shown(k)!r} ({v})" for k, v in sorted(seen.items(), key=lambda kv: (-kv[1], kv[0]))[:10])
    more = f" and {len(seen) - 10} more" if len(seen) > 10 else ""
    where = ("the mapping's [parties] (or, without it, [parties.a]/[parties.b] labels in levelfield.toml)"
             if mapping is not None else "the labels under [parties.a] and [parties.b] in levelfield.toml")
    report.warnings.append(f"no line matched party a or party b; labels seen: {labels}{more}. "
                           f"Every line counts as 'other': check {where}")


def _record_refusal(db, raw, mapping, source, stamp: str, report: LoadReport, exc: DataError) -> None:
    """Provenance of a refused load: one ``loads`` row, in its own small transaction."""
    first = str(exc.problems[0]) if exc.problems else exc.summary
    try:
        with transaction(db) as conn:
            queries.insert_load(conn, {
                "file_name": raw.name, "sha256": raw.sha256, "bytes": raw.size,
                "format": report.format or "unknown", "mapping_sha256": mapping.sha256 if mapping else None,
                "source": source or (mapping.source if mapping else None),
                "rows_read": report.rows_read, "rows_accepted": 0, "rows_rejected": report.rows_rejected,
                "loaded_at": stamp, "outcome": "refused", "error": first[:2000],
            })
    except sqlite3.Error as err:  # the refusal stands; say that its record is missing
        exc.summary += f" (the refusal could not be recorded in the store's loads: {err})"


def _already_loaded(db, raw, mapping, report: LoadReport) -> bool:
    """Mark ``report`` 'already loaded' when these bytes (through this mapping) were loaded before."""
    earlier = queries.load_by_sha256(db, raw.sha256, mapping.sha256 if mapping else None)
    if earlier is None:
        return False
    report.outcome = "already loaded"
    report.load_id = earlier["id"]
    report.units = []
    report.note = (f"the same bytes (sha256 {raw.sha256[:12]}...)"
                   + (" through the same mapping" if mapping else "")
                   + f" were loaded as load #{earlier['id']} on {earlier['loaded_at']}; nothing changed")
    return True


class _DryRun(Exception):
    """Raised inside the transaction so that a dry run rolls back everything it wrote."""


def _group_units(records: list[Record]) -> dict[tuple, list[Record]]:
    units: dict[tuple, list[Record]] = defaultdict(list)
    for rec in records:
        units[rec.unit].append(rec)
    return dict(sorted(units.items()))


def _content_hash(records: list[Record], decisions: dict[tuple, str | None]) -> str:
    return content_hash((r.district, r.special, r.seats, r.party, r.party_code, r.candidate, r.votes,
                         r.writein, r.status, r.runoff, decisions[r.contest] is None, bool(r.placeholder),
                         r.position)
                        for r in records)


def _local(rec: Record) -> tuple[str, bool, bool, str]:
    """A contest's key within its unit: (district, special, runoff, position)."""
    return (rec.district, rec.special, rec.runoff, rec.position)


@dataclass
class _Unit:
    """A unit ready to write: its records, content hash, contests and their reduction."""

    records: list[Record]
    digest: str
    contest_keys: dict[tuple, int]  # (district, special, runoff, position) -> row of ``reduced``
    reduced: pd.DataFrame            # one row per contest, indexed by position (with decides, left_out)


def _prepare_units(units: dict[tuple, list[Record]], decisions: dict[tuple, str | None]) -> dict[tuple, _Unit]:
    """Hash every unit and reduce every contest of the file in one vectorised call."""
    rows, seats, left_out, placeholder, spans = [], [], [], [], []
    for key, records in units.items():
        keys: dict[tuple, int] = {}
        base = len(seats)
        for rec in records:
            local = keys.setdefault(_local(rec), len(keys))
            if local == len(seats) - base:
                seats.append(rec.seats)
                left_out.append(decisions[rec.contest])
                placeholder.append(bool(rec.placeholder))
            rows.append((base + local, rec.party_code, rec.candidate, rec.votes))
        spans.append((key, records, keys, base))
    votes = pd.DataFrame(rows, columns=["contest_id", "party_code", "candidate", "votes"])
    contests = pd.DataFrame({"contest_id": np.arange(len(seats)), "seats": seats})
    reduced = reduce_contests(votes, contests).set_index("contest_id").sort_index()
    reduced["left_out"] = pd.Series(left_out, index=reduced.index, dtype=object)
    reduced["decides"] = [why is None for why in left_out]
    reduced["placeholder"] = placeholder
    out = {}
    for key, records, keys, base in spans:
        part = reduced.iloc[base:base + len(keys)].copy()
        part.index = np.arange(len(keys))
        out[key] = _Unit(records, _content_hash(records, decisions), keys, part)
    return out


def _write(conn, raw, mapping, source, stamp, units, report: LoadReport, codes_from: str,
           labels: dict[str, str], dry_run: bool) -> None:
    if _already_loaded(conn, raw, mapping, report):
        return  # another process loaded the same bytes while this one was parsing them
    if codes_from == L.CONFIG:
        # the stored config-derived codes and this file's codes follow the same labels
        recoded = L.recode(conn, labels)
        if recoded is not None:
            report.warnings.append(L.recode_message(recoded, dry_run=dry_run))
    current = queries.current_units(conn, units)
    load_id = queries.insert_load(conn, {
        "file_name": raw.name, "sha256": raw.sha256, "bytes": raw.size, "format": report.format,
        "mapping_sha256": mapping.sha256 if mapping else None,
        "source": source or (mapping.source if mapping else None),
        "rows_read": report.rows_read, "rows_accepted": report.rows_accepted,
        "rows_rejected": report.rows_rejected, "loaded_at": stamp, "outcome": "loading",
        "party_codes_from": codes_from,
    })
    report.load_id = load_id
    queries.ensure_keys(conn, "cycles", "year", sorted({k[0] for k in units}))
    queries.ensure_keys(conn, "states", "code", sorted({k[1] for k in units}))
    queries.ensure_keys(conn, "chambers", "code", sorted({k[2] for k in units}))
    superseded = []
    contest_id = queries.next_id(conn, "contests")
    for key, unit in units.items():
        records, digest, reduced, contest_keys = unit.records, unit.digest, unit.reduced, unit.contest_keys
        before = current.get(key)
        change = UnitChange(*key, action="new", contests=len(contest_keys))
        report.units.append(change)
        if before is not None and before["content_sha256"] == digest:
            change.action = "unchanged"
            continue
        if before is not None:
            change.action = "corrected"
            change.changes = _describe_changes(conn, before["id"], reduced, contest_keys)
            if before["certification"] != records[0].status:
                change.changes.insert(0, f"status: {before['certification']} -> {records[0].status}")
            superseded.append(before["load_id"])
        unit_id = queries.insert_unit(conn, key, load_id, records[0].status, digest,
                                      before["id"] if before else None)
        ids = {ck: contest_id + i for ck, i in contest_keys.items()}
        contest_id += len(ids)
        seats = {_local(r): r.seats for r in records}
        status, decides, placeholder = (reduced[c].tolist() for c in ("status", "decides", "placeholder"))
        why = [None if d else w for d, w in zip(decides, reduced["left_out"].tolist())]
        queries.insert_contests(conn, [
            (cid, unit_id, ck[0], seats[ck], int(ck[1]), int(ck[2]), status[i], int(decides[i]), why[i],
             int(placeholder[i]), ck[3])
            for (ck, cid), i in zip(ids.items(), contest_keys.values())
        ])
        queries.insert_votes(conn, [
            (ids[_local(r)], r.party, r.party_code, r.candidate, r.votes, int(r.writein), r.row)
            for r in records
        ])
    queries.update_load(conn, load_id, {
        "units_new": report.count("new"), "units_corrected": report.count("corrected"),
        "units_unchanged": report.count("unchanged"), "outcome": "loaded",
        "supersedes": json.dumps(sorted(set(superseded))) if superseded else None,
        "report": report.to_json(),
    })


def _describe_changes(conn, old_unit_id: int, new: pd.DataFrame, new_keys: dict[tuple, int]) -> list[str]:
    """Plain-words differences between a stored unit and its re-delivery."""
    old_votes = queries.unit_votes(conn, [old_unit_id])
    old_votes["key"] = list(zip(old_votes["district"], old_votes["special"].astype(bool),
                                old_votes["runoff"].astype(bool), old_votes["position"]))
    old_contests = old_votes.drop_duplicates("contest_id")[["contest_id", "seats", "key", "decides"]]
    old = reduce_contests(old_votes, old_contests).set_index("contest_id")
    old["decides"] = old_contests.set_index("contest_id")["decides"].reindex(old.index).astype(bool)
    old.index = old_contests.set_index("contest_id")["key"].reindex(old.index).tolist()
    new = new.loc[list(new_keys.values())].set_axis(list(new_keys.keys()))
    return describe_changes(old, new)
