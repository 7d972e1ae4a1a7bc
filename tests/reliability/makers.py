"""Invented test inputs made on the fly: result files of any size (written row by row, never held
whole in memory), a gzip bomb, and small workspace helpers shared by the reliability tests.

Everything here is invented test input, never a check value from outside.
"""

from __future__ import annotations

import csv
import gzip
import random
import sqlite3
import time
import zlib
from dataclasses import dataclass
from pathlib import Path

HEADER = ["cycle", "state", "chamber", "district", "party", "candidate", "votes"]
LABELS = ("Harbour", "Upland", "Greens")  # a, b and one "other" label (see tests/conftest.py CONFIG)


@dataclass(frozen=True)
class Shape:
    """How many units (cycles x states x chambers), districts per unit and lines per district."""

    cycles: tuple[int, ...] = (2016, 2018, 2020, 2022)
    states: int = 4
    chambers: tuple[str, ...] = ("federal",)
    districts: int = 50
    lines: int = 3

    @property
    def units(self) -> int:
        return len(self.cycles) * self.states * len(self.chambers)

    @property
    def rows(self) -> int:
        return self.units * self.districts * self.lines


def state_code(i: int) -> str:
    return "S" + chr(65 + i // 26) + chr(65 + i % 26)


def write_results(path: Path, shape: Shape, *, seed: int = 0, bump: int = 0, compress: bool = False) -> dict:
    """Write a native long CSV of ``shape`` row by row; return per-unit counts
    ``{(cycle, state, chamber): (contests, vote_lines)}``. ``bump`` adds that many votes to every
    line of party a (a correction of the same units)."""
    rng = random.Random(seed)
    counts = {}
    opener = (lambda p: gzip.open(p, "wt", encoding="utf-8", newline="", compresslevel=1)) if compress else \
        (lambda p: open(p, "w", encoding="utf-8", newline=""))
    with opener(path) as fh:
        out = csv.writer(fh, lineterminator="\n")
        out.writerow(HEADER)
        for cycle in shape.cycles:
            for s in range(shape.states):
                state = state_code(s)
                for chamber in shape.chambers:
                    for d in range(1, shape.districts + 1):
                        for line in range(shape.lines):
                            label = LABELS[line % len(LABELS)]
                            votes = rng.randint(1_000, 90_000) + (bump if line == 0 else 0)
                            out.writerow([cycle, state, chamber, d, label, f"Cand {state}-{d}-{line}", votes])
                    counts[(cycle, state, chamber)] = (shape.districts, shape.districts * shape.lines)
    return counts


def wait_for(predicate, timeout: float, what: str):
    """Poll ``predicate`` until it returns something true and return that (a hang guard, not a
    speed claim); fail the test after ``timeout`` seconds."""
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        value = predicate()
        if value:
            return value
        time.sleep(0.05)
    raise AssertionError(f"timed out waiting for {what}")


def gzip_bomb(path: Path, decompressed_bytes: int, *, chunk: int = 8 * 2**20) -> int:
    """A single-member gzip of ``decompressed_bytes`` zeros, compressed chunk by chunk (the zeros
    are never all in memory); returns the compressed size."""
    zeros = bytes(chunk)
    crc = 0
    with open(path, "wb") as fh:
        fh.write(b"\x1f\x8b\x08\x00\x00\x00\x00\x00\x02\xff")  # gzip header, no name, mtime 0
        comp = zlib.compressobj(9, zlib.DEFLATED, -15)
        left = decompressed_bytes
        while left:
            n = min(chunk, left)
            block = zeros if n == chunk else bytes(n)
            crc = zlib.crc32(block, crc)
            fh.write(comp.compress(block))
            left -= n
        fh.write(comp.flush())
        fh.write(crc.to_bytes(4, "little") + (decompressed_bytes & 0xFFFFFFFF).to_bytes(4, "little"))
    return path.stat().st_size


# -- looking at a store ---------------------------------------------------------------------------

def open_plain(path: Path) -> sqlite3.Connection:
    """A plain sqlite3 connection (no levelfield code), as an analyst's tool would open the store."""
    return sqlite3.connect(f"file:{path}?mode=rw", uri=True, timeout=30)


def results_rows(conn: sqlite3.Connection) -> list[tuple]:
    """district_results without load_id, sorted."""
    return sorted(conn.execute(
        "SELECT cycle, state, chamber, district, party, candidate, votes, status FROM district_results"))


def units_rows(conn: sqlite3.Connection) -> list[tuple]:
    """The units table without ids and load ids: (cycle, state, chamber, certification,
    content_sha256, current?, supersedes someone?), sorted."""
    return sorted(conn.execute(
        "SELECT cycle, state, chamber, certification, content_sha256, superseded_by IS NULL, "
        "supersedes IS NOT NULL FROM units"))


def unit_counts(conn: sqlite3.Connection) -> dict[tuple, tuple[int, int]]:
    """Per current unit: (contests, vote lines)."""
    return {(c, s, ch): (n_contests, n_votes) for c, s, ch, n_contests, n_votes in conn.execute(
        "SELECT u.cycle, u.state, u.chamber, COUNT(DISTINCT c.id), COUNT(v.id) FROM units u "
        "LEFT JOIN contests c ON c.unit_id = u.id LEFT JOIN votes v ON v.contest_id = c.id "
        "WHERE u.superseded_by IS NULL GROUP BY u.id")}


def store_bytes(path: Path) -> bytes:
    """The store's bytes with everything in its write-ahead log folded in (a template to copy)."""
    conn = sqlite3.connect(path)
    try:
        conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    finally:
        conn.close()
    return path.read_bytes()


def loads_rows(conn: sqlite3.Connection) -> list[tuple]:
    """The loads table without ids, timestamps and reports: (file, sha256, outcome, rows, units)."""
    return sorted(conn.execute(
        "SELECT file_name, sha256, outcome, rows_accepted, units_new, units_corrected, units_unchanged, "
        "supersedes IS NOT NULL FROM loads"))


def snapshot(path: Path) -> dict:
    """What two stores must agree on to be 'the same' (ids, timestamps and reports aside)."""
    conn = open_plain(path)
    try:
        return {"results": results_rows(conn), "units": units_rows(conn), "loads": loads_rows(conn)}
    finally:
        conn.close()


# -- a command in a warm process --------------------------------------------------------------------

RUNNER = Path(__file__).with_name("runner.py")


class Warm:
    """``levelfield ARGS`` in a process that has done its imports and waits for :meth:`go`."""

    def __init__(self, *args: str, env: dict | None = None):
        import subprocess
        import sys

        self.proc = subprocess.Popen([sys.executable, str(RUNNER), *args], stdin=subprocess.PIPE,
                                     stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env)
        self.started = None
        self.marks: list[str] = []
        self._early: list[bytes] = []  # output read before finish()

    def go(self) -> None:
        import time

        line = self.proc.stdout.readline()
        assert line == b"ready\n", (line, self.proc.stderr.read())
        self.started = time.perf_counter()
        self.proc.stdin.write(b"go\n")
        self.proc.stdin.flush()

    def kill_at(self, delay: float) -> None:
        """SIGKILL ``delay`` seconds after :meth:`go` (at once if the command is already done)."""
        import os
        import signal
        import time

        left = self.started + delay - time.perf_counter()
        if left > 0:
            time.sleep(left)
        try:
            os.kill(self.proc.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass

    def kill_after(self, mark: str, delay: float) -> bool:
        """SIGKILL ``delay`` seconds after the command printed the marker line ``mark``; False when
        it ended without printing it."""
        import os
        import signal
        import time

        for raw in self.proc.stdout:
            self._early.append(raw)
            if raw.decode("utf-8", "replace").strip() == mark:
                time.sleep(delay)
                try:
                    os.kill(self.proc.pid, signal.SIGKILL)
                except ProcessLookupError:
                    pass
                return True
        return False

    def finish(self, timeout: float = 120) -> tuple[int, str, str]:
        """Wait for the end; return (exit code, stdout, stderr). Marker lines are kept apart."""
        out, err = self.proc.communicate(timeout=timeout)
        lines = b"".join([*self._early, out]).decode("utf-8", "replace").splitlines()
        self.marks = [line for line in lines if line.startswith("@")]
        text = "\n".join(line for line in lines if not line.startswith("@"))
        return self.proc.returncode, text, err.decode("utf-8", "replace")

    def timed(self, timeout: float = 120) -> tuple[int, dict[str, list[float]], str]:
        """Run to the end, timing each marker from :meth:`go` (a calibration run)."""
        import time

        times: dict[str, list[float]] = {}
        for raw in self.proc.stdout:
            line = raw.decode("utf-8", "replace").strip()
            times.setdefault(line if line.startswith("@") else "output", []).append(time.perf_counter() - self.started)
        self.proc.wait(timeout=timeout)
        times["exit"] = [time.perf_counter() - self.started]
        return self.proc.returncode, times, self.proc.stderr.read().decode("utf-8", "replace")


# -- peak memory of a command ----------------------------------------------------------------------

_MEASURE = (
    "import resource, subprocess, sys\n"
    "code = subprocess.call(sys.argv[2:], stdout=open(sys.argv[1], 'wb'), stderr=subprocess.STDOUT)\n"
    "print(code, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)\n"
)


def run_peak_rss(args: list[str], output: Path, env: dict | None = None) -> tuple[int, float]:
    """Run ``args`` and return (exit code, its peak RSS in MB); its stdout and stderr go to ``output``.

    The command runs as the child of a small Python process that reads
    ``getrusage(RUSAGE_CHILDREN)``: measured from the test process directly, a child's
    ``ru_maxrss`` would include the test process's own memory, which the child shares until exec.
    """
    import subprocess
    import sys

    done = subprocess.run([sys.executable, "-c", _MEASURE, str(output), *args], capture_output=True, text=True,
                          env=env, check=True)
    code, kilobytes = done.stdout.split()
    return int(code), int(kilobytes) / 1024
