"""Crash safety of ``levelfield load`` (issue 9, item 1): SIGKILL at seeded random moments.

Each trial copies one pre-made store, starts ``levelfield load`` in a warm process (see
``runner.py``), kills it with SIGKILL at a seeded random moment of the load, and then checks,
with plain sqlite3 as any tool would open the store:

* ``PRAGMA integrity_check`` is ``ok`` and no foreign key dangles;
* the file landed whole or not at all: every current unit has exactly the file's contests and
  vote lines, the units are all there or none are (for a correction: all old or all new), and no
  load is left half-recorded;
* loading the file again completes, and the store then equals the store of an uninterrupted load
  (``district_results``, the units table and the loads table; ids and timestamps aside).

Half the trials kill uniformly over the whole load, half uniformly inside its write transaction
(timed by a calibration run), so that a fair number of kills land between ``BEGIN`` and ``COMMIT``.
"""

from __future__ import annotations

import random
import shutil
import sqlite3
from collections import Counter
from pathlib import Path

import pytest

from monitor.config import load_config
from monitor.ingest import load_file
from monitor.workspace import Workspace

from reliability.conftest import LONG, make_workspace
from reliability.makers import Shape, Warm, open_plain, snapshot, store_bytes, unit_counts, write_results

SEED = 20_240_917
TRIALS = 240 if LONG else 60
SHAPE = Shape(states=4, districts=75)  # 16 units, 3,600 vote lines: a load of about 0.2-0.5 s


class Scenario:
    """A file to load onto a template store, its per-unit counts and the uninterrupted result."""

    def __init__(self, root: Path, name: str, template: bytes, file: Path, counts: dict):
        self.root, self.name, self.template, self.file, self.counts = root, name, template, file, counts
        ws = make_workspace(root / f"{name}-reference", template)
        before = open_plain(ws.store_path)
        self.units_before = {k for k in unit_counts(before)}
        self.results_before = snapshot(ws.store_path)["results"]
        before.close()
        warm = Warm("-w", str(ws.root), "load", str(file))
        warm.go()
        code, times, err = warm.timed()
        assert code == 0, err
        self.begin, self.commit = times["@begin"][-1], times["@commit"][-1]
        self.reference = snapshot(ws.store_path)
        self.after_bytes = store_bytes(ws.store_path)


@pytest.fixture(scope="module")
def scenarios(tmp_path_factory, migrated_store):
    root = tmp_path_factory.mktemp("crash-load")
    v1, v2 = root / "results.csv", root / "correction.csv"
    counts = write_results(v1, SHAPE, seed=1)
    assert write_results(v2, SHAPE, seed=1, bump=7) == counts
    fresh = Scenario(root, "fresh", migrated_store, v1, counts)
    correction = Scenario(root, "correction", fresh.after_bytes, v2, counts)
    assert len(fresh.reference["results"]) == SHAPE.rows
    assert fresh.reference["results"] != correction.reference["results"]
    return {"fresh": fresh, "correction": correction}


def check_after_kill(s: Scenario, path: Path) -> str:
    """The store a kill left behind is whole; returns 'before', 'mid' or 'committed'."""
    conn = open_plain(path)
    try:
        assert conn.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
        assert conn.execute("PRAGMA foreign_key_check").fetchall() == []
        outcomes = Counter(o for (o,) in conn.execute("SELECT outcome FROM loads"))
        assert set(outcomes) <= {"loaded"}, outcomes
        committed = conn.execute("SELECT COUNT(*) FROM loads WHERE file_name = ?", [s.file.name]).fetchone()[0]
        assert committed in (0, 1)
        counts = unit_counts(conn)
        for unit, got in counts.items():
            assert got == s.counts[unit], f"unit {unit} partially present: {got} != {s.counts[unit]}"
        results = snapshot(path)["results"]
    finally:
        conn.close()
    if committed:
        assert set(counts) == set(s.counts)
        assert results == s.reference["results"]
        return "committed"
    assert set(counts) == s.units_before, "units changed though the load did not commit"
    assert results == s.results_before
    return "not committed"


def test_sigkill_during_load_leaves_a_whole_store_that_a_rerun_completes(scenarios, tmp_path):
    rng = random.Random(SEED)
    config = load_config(Path(scenarios["fresh"].root / "fresh-reference" / "levelfield.toml"))
    landed: Counter = Counter()
    plan = []
    for i in range(TRIALS):
        s = scenarios["fresh" if i % 2 == 0 else "correction"]
        if i % 4 < 2:   # uniform over the load, up to just past its commit
            delay = rng.uniform(0.0, s.commit * 1.1)
        else:           # uniform inside the write transaction of the calibration run
            delay = rng.uniform(s.begin, s.commit)
        plan.append((s, delay))

    def start(i):
        s, _ = plan[i]
        ws = make_workspace(tmp_path / f"t{i}", s.template)
        return ws, Warm("-w", str(ws.root), "load", str(s.file))

    upcoming = [start(0), start(1)]  # two warm processes ahead: their imports overlap with the checks
    for i, (s, delay) in enumerate(plan):
        ws, warm = upcoming.pop(0)
        warm.go()
        warm.kill_at(delay)
        code, out, err = warm.finish()
        if i + 2 < TRIALS:
            upcoming.append(start(i + 2))
        assert "Traceback" not in err, err
        began = "@begin" in warm.marks
        state = check_after_kill(s, ws.store_path)
        where = "committed" if state == "committed" else ("mid-transaction" if began else "before the transaction")
        landed[where] += 1

        db = Workspace(ws.root).open_store()
        report = load_file(db, s.file, config)
        db.conn.close()
        assert report.outcome == ("already loaded" if state == "committed" else "loaded")
        assert snapshot(ws.store_path) == s.reference, f"trial {i} ({where}, {delay:.3f}s) differs after the rerun"
        shutil.rmtree(ws.root)
    print(f"\nload kills: {TRIALS} trials, {dict(landed)}")
    assert sum(landed.values()) == TRIALS
    assert landed["mid-transaction"] >= TRIALS // 10, landed
    assert landed["before the transaction"] >= TRIALS // 10, landed


@pytest.mark.slow
def test_sigkill_of_a_cold_python_dash_m_monitor_load(scenarios, tmp_path):
    """The same through the console entry point from a cold start (imports included)."""
    import os
    import signal
    import subprocess
    import sys
    import time

    s = scenarios["fresh"]
    rng = random.Random(SEED + 1)
    t0 = time.perf_counter()
    ws = make_workspace(tmp_path / "cold-calibration", s.template)
    assert subprocess.run([sys.executable, "-m", "monitor", "-w", str(ws.root), "load", str(s.file)],
                          capture_output=True).returncode == 0
    total = time.perf_counter() - t0
    config = load_config(ws.config_path)
    for i in range(30):
        ws = make_workspace(tmp_path / f"cold{i}", s.template)
        proc = subprocess.Popen([sys.executable, "-m", "monitor", "-w", str(ws.root), "load", str(s.file)],
                                stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
        time.sleep(rng.uniform(0, total))
        try:
            os.kill(proc.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
        assert b"Traceback" not in proc.communicate()[1]
        state = check_after_kill(s, ws.store_path)
        db = Workspace(ws.root).open_store()
        assert load_file(db, s.file, config).outcome == ("already loaded" if state == "committed" else "loaded")
        db.conn.close()
        assert snapshot(ws.store_path) == s.reference
        shutil.rmtree(ws.root)


def test_the_check_sees_a_partial_unit(scenarios, tmp_path):
    """The checker is not vacuous: a store with one vote line removed fails it."""
    s = scenarios["fresh"]
    ws = make_workspace(tmp_path / "partial", s.after_bytes)
    with sqlite3.connect(ws.store_path) as conn:
        conn.execute("DELETE FROM votes WHERE id = (SELECT MAX(id) FROM votes)")
    with pytest.raises(AssertionError, match="partially present"):
        check_after_kill(s, ws.store_path)
