"""Files for the election-night scenarios of the benchmarks (issue 17), made from a generated
cycle file (:mod:`bench.synthetic`): the cycle split into one file per state (results arriving
state by state), and one state's chamber re-delivered with changed counts (a correction).

Invented data only, written deterministically from the input file.
"""

from __future__ import annotations

import csv
from pathlib import Path


def _rows(path: Path) -> tuple[list[str], list[list[str]]]:
    with open(path, newline="", encoding="utf-8") as fh:
        reader = csv.reader(fh)
        header = next(reader)
        return header, list(reader)


def _write(path: Path, header: list[str], rows: list[list[str]]) -> Path:
    path.parent.mkdir(parents=True, exist_ok=True)
    with open(path, "w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh, lineterminator="\n")
        writer.writerow(header)
        writer.writerows(rows)
    return path


def state_files(cycle_file: Path, out_dir: Path) -> list[Path]:
    """One file per state of ``cycle_file`` (every chamber of the state), in state order."""
    header, rows = _rows(Path(cycle_file))
    col = header.index("state")
    by_state: dict[str, list[list[str]]] = {}
    for row in rows:
        by_state.setdefault(row[col], []).append(row)
    stem = Path(cycle_file).stem
    return [_write(Path(out_dir) / f"{stem}_{state}.csv", header, part) for state, part in sorted(by_state.items())]


def corrected_file(cycle_file: Path, out: Path, *, state: str | None = None, chamber: str = "state_lower",
                   every: int = 7, delta: int = 137) -> tuple[Path, str, str]:
    """One unit of ``cycle_file`` re-delivered: the rows of ``state`` (default: the first state)
    and ``chamber``, with ``delta`` votes added to every ``every``-th line (a canvass correction
    that leaves the contests as they were). Returns the file, the state and the chamber."""
    header, rows = _rows(Path(cycle_file))
    s_col, c_col, v_col = header.index("state"), header.index("chamber"), header.index("votes")
    state = state or min(r[s_col] for r in rows)
    unit = [list(r) for r in rows if r[s_col] == state and r[c_col] == chamber]
    if not unit:
        raise ValueError(f"{cycle_file} has no rows of {state} {chamber}")
    for i, row in enumerate(unit):
        if i % every == 0:
            row[v_col] = str(int(row[v_col]) + delta)
    return _write(Path(out), header, unit), state, chamber
