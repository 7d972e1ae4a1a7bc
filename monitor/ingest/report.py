"""The load report: what a load did, in words a person can read.

The printed report keeps long lists short (the 10 largest labels counted as 'other', the first
contests of each list); the full report, every list whole, is written to the load's report
file under the workspace's ``logs/loads/`` and the printed report says where.
"""

from __future__ import annotations

import json
from dataclasses import asdict, dataclass, field
from pathlib import Path

from monitor.ingest.fields import shown

TOP_LABELS = 10     # labels counted as 'other' shown in the printed report
TOP_CONTESTS = 20   # contests of each list (placeholders, left out) shown in the printed report


@dataclass
class UnitChange:
    cycle: int
    state: str
    chamber: str
    action: str  # new | corrected | unchanged
    contests: int
    changes: list[str] = field(default_factory=list)


@dataclass
class LoadReport:
    file: str
    sha256: str
    outcome: str  # loaded | already loaded | dry run (a refused load raises DataError)
    format: str = ""
    load_id: int | None = None
    rows_read: int = 0
    rows_accepted: int = 0
    rows_rejected: int = 0
    rows_filtered: int = 0
    units: list[UnitChange] = field(default_factory=list)
    other_labels: dict[str, int] = field(default_factory=dict)
    skipped: list[str] = field(default_factory=list)
    note: str = ""
    warnings: list[str] = field(default_factory=list)
    not_candidates: dict[str, int] = field(default_factory=dict)  # label -> lines kept out of the totals
    lines_combined: int = 0        # repeated lines folded into another line of the same candidate
    placeholders: list[str] = field(default_factory=list)  # contests loaded with a placeholder count
    left_out: list[str] = field(default_factory=list)      # contests that do not decide their seat
    report_file: str | None = None

    def count(self, action: str) -> int:
        return sum(1 for u in self.units if u.action == action)

    def lines(self, *, full: bool = False) -> list[str]:
        """The report; ``full`` lists everything, else long lists are cut and point at the
        report file."""
        head = f"{self.file}: {self.outcome}"
        if self.load_id is not None:
            head += f" (load #{self.load_id})"
        out = [head]
        if self.note:
            out.append(f"  {self.note}")
        if self.outcome == "already loaded":
            return out
        out.extend(f"  warning: {w}" for w in self.warnings)
        set_aside = sum(self.not_candidates.values())
        out.append(f"  format {self.format}; rows read {self.rows_read}, accepted {self.rows_accepted}, "
                   f"rejected {self.rows_rejected}" + (f", filtered out {self.rows_filtered}" if self.rows_filtered else "")
                   + (f", not candidates {set_aside}" if set_aside else ""))
        out.append(f"  units: {self.count('new')} new, {self.count('corrected')} corrected, "
                   f"{self.count('unchanged')} unchanged")
        for unit in self.units:
            if unit.action == "corrected":
                out.append(f"  correction {unit.cycle} {shown(unit.state)} {shown(unit.chamber)}:")
                out.extend(f"    {c}" for c in unit.changes or ["no change in seats, winners or vote totals"])
        if self.lines_combined:
            out.append(f"  repeated lines combined: {self.lines_combined} line(s) added into an earlier line of the "
                       "same candidate on the same party line in the same contest (repeated_lines = \"sum\")")
        if self.not_candidates:
            out.append("  not candidates, kept out of the vote totals: " + _counts(self.not_candidates))
        if self.placeholders:
            out.append(f"  placeholder counts: {len(self.placeholders)} contest(s) loaded as uncontested wins "
                       "with no vote count (they enter the measures under the uncontested policy):")
            out.extend(self._listed(self.placeholders, full))
        if self.left_out:
            out.append(f"  contests that do not decide their seat: {len(self.left_out)} (stored as history, "
                       "left out of the measures):")
            out.extend(self._listed(self.left_out, full))
        if self.other_labels:
            out.append(self._other_labels(full))
        if self.skipped:
            out.append(f"  skipped {self.rows_rejected} row(s):")
            out.extend(f"    {s}" for s in self.skipped)
        if self.report_file and not full:
            out.append(f"  full report: {self.report_file}")
        return out

    def _listed(self, items: list[str], full: bool) -> list[str]:
        shown_items = items if full else items[:TOP_CONTESTS]
        out = [f"    {s}" for s in shown_items]
        if len(items) > len(shown_items):
            out.append(f"    ... and {len(items) - len(shown_items)} more" + self._where())
        return out

    def _other_labels(self, full: bool) -> str:
        ranked = sorted(self.other_labels.items(), key=lambda kv: (-kv[1], kv[0]))
        if full or len(ranked) <= TOP_LABELS:
            return f"  party labels counted as 'other': {_counts(dict(ranked))}"
        rest = ranked[TOP_LABELS:]
        return (f"  party labels counted as 'other' ({len(ranked)} labels; the {TOP_LABELS} largest): "
                f"{_counts(dict(ranked[:TOP_LABELS]))}; and {len(rest)} more label(s) on "
                f"{sum(v for _, v in rest)} line(s)" + self._where())

    def _where(self) -> str:
        return f" (listed in {self.report_file})" if self.report_file else ""

    def to_json(self) -> str:
        return json.dumps(asdict(self), sort_keys=True)

    def write(self, folder: Path) -> Path:
        """Write the full report into ``folder`` (created if needed) and remember where."""
        from monitor.watcher import safe_name

        folder.mkdir(parents=True, exist_ok=True)
        stem = f"load-{self.load_id}" if self.load_id is not None else f"dry-run-{self.sha256[:12]}"
        path = folder / f"{stem}-{safe_name(self.file)}.txt"
        self.report_file = str(path)
        path.write_text("\n".join(self.lines(full=True)) + "\n", encoding="utf-8")
        return path


def _counts(counts: dict[str, int]) -> str:
    """``'label' (n), ...`` in the order given."""
    return ", ".join(f"{shown(k)!r} ({v})" if k else f"(no party) ({v})" for k, v in counts.items())
