"""Concurrency (issue 9, item 3; issue 7, item 4): a watcher and two manual loads in separate
processes, at once, on one workspace.

A real ``levelfield watch --every 1`` process polls the inbox while two ``levelfield load``
processes, started together, load their own files and one file that all three receive (the same
bytes from two loaders and the inbox at the same moment). Afterwards: every file landed exactly
once (one ``loaded`` row per sha256, never two), every unit is there once, nothing reached a user
as "database is locked" (or any other error), and the watcher stopped cleanly on SIGTERM.
"""

from __future__ import annotations

import datetime as dt
import json
import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path


from conftest import ENV_VAR

from reliability.conftest import LONG
from reliability.makers import Shape, Warm, open_plain, wait_for, write_results

ROUNDS = 10 if LONG else 3


INBOX = ["inbox-1", "inbox-2", "shared"]
A = [f"a-{i}" for i in range(1, 7)]
B = [f"b-{i}" for i in range(1, 7)]


def shapes(round_: int) -> dict[str, Shape]:
    """Files of distinct units (by cycle), so that each lands as new units; the inbox's are larger."""
    return {name: Shape(cycles=(1800 + 20 * round_ + i,), states=12 if name.startswith("inbox") else 6,
                        districts=60 if name.startswith("inbox") else 50)
            for i, name in enumerate(INBOX + A + B)}


def log_events(root: Path) -> list[dict]:
    path = root / "logs" / "levelfield.log"
    if not path.exists():
        return []
    return [json.loads(line) for line in path.read_text(encoding="utf-8").splitlines() if line.startswith("{")]


def test_a_watcher_and_two_manual_loads_at_once_land_every_file_exactly_once(workspace, tmp_path):
    root = workspace.root
    env = {k: v for k, v in os.environ.items() if k != ENV_VAR}
    watcher = subprocess.Popen([sys.executable, "-m", "monitor", "-w", str(root), "watch", "--every", "1",
                                "--no-publish"], stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env)
    outputs: list[str] = []
    manual: list[tuple[float, float]] = []  # when the two manual loads ran, per round
    expected_units: set[tuple] = set()
    files = 0
    try:
        wait_for(lambda: any(e["event"] == "start" for e in log_events(root)), 60, "the watcher to start")
        for r in range(ROUNDS):
            paths = {}
            for name, shape in shapes(r).items():
                paths[name] = tmp_path / f"{name}-{r}.csv"
                counts = write_results(paths[name], shape, seed=r)
                expected_units |= set(counts)
                files += 1
            a = Warm("-w", str(root), "load", *(str(paths[n]) for n in A[:3] + ["shared"] + A[3:]), env=env)
            b = Warm("-w", str(root), "load", *(str(paths[n]) for n in B[:2] + ["shared"] + B[2:]), env=env)
            for name in INBOX:
                shutil.copy(paths[name], root / "inbox" / paths[name].name)
            time.sleep(0.8 + 0.4 * r)  # the watcher takes files after two equal looks, 1-2 s from now
            started = time.time()
            a.go()
            b.go()
            for loader in (a, b):
                code, out, err = loader.finish()
                outputs += [out, err]
                assert code == 0, err
            manual.append((started, time.time()))
            wait_for(lambda: not any((root / "inbox").iterdir()), 60, "the watcher to empty the inbox")
        time.sleep(1.5)  # SIGTERM then lands in or after the watcher's last refresh: it must finish it
    finally:
        watcher.send_signal(signal.SIGTERM)
        out, err = watcher.communicate(timeout=120)
        outputs += [out.decode(), err.decode()]
    assert watcher.returncode == 0, outputs[-1]
    events = log_events(root)
    assert events[-1]["message"] == "stopped cleanly"

    everything = "\n".join(outputs) + (root / "logs" / "levelfield.log").read_text(encoding="utf-8")
    for bad in ("database is locked", "internal error", "Traceback", "OperationalError"):
        assert bad not in everything, bad
    assert not [e for e in events if e["level"] == "error"], [e for e in events if e["level"] == "error"]

    conn = open_plain(workspace.store_path)
    try:
        assert conn.execute("PRAGMA integrity_check").fetchone() == ("ok",)
        per_file = conn.execute("SELECT sha256, COUNT(*) FROM loads GROUP BY sha256").fetchall()
        assert len(per_file) == files, "a file did not land"
        assert all(n == 1 for _, n in per_file), f"a file landed twice: {[r for r in per_file if r[1] > 1]}"
        assert conn.execute("SELECT COUNT(*) FROM loads WHERE outcome != 'loaded'").fetchone() == (0,)
        units = conn.execute("SELECT cycle, state, chamber FROM units").fetchall()
        assert len(units) == len(set(units)) == len(expected_units), "a unit was lost or doubled"
        assert set(units) == expected_units
        assert conn.execute("SELECT COUNT(*) FROM units WHERE superseded_by IS NOT NULL").fetchone() == (0,)
    finally:
        conn.close()
    archived = sorted(p.name.split("-", 1)[1] for p in (root / "archive").rglob("*.csv"))
    assert archived == sorted(f"{n}-{r}.csv" for r in range(ROUNDS) for n in INBOX)
    assert not any((root / "rejected").iterdir())

    # the test is not vacuous: the watcher was loading or recomputing while manual loads ran
    spans: list[list[float]] = []  # a poll's work: from its first load line to its last refresh line
    last = None
    for e in events:
        t = dt.datetime.fromisoformat(e["at"]).timestamp()
        if e["event"] == "load" and last not in ("load",):
            spans.append([t, t])
        if e["event"] in ("load", "refresh") and spans:
            spans[-1][1] = t
        last = e["event"]
    overlaps = sum(any(s0 <= m1 and m0 <= s1 for s0, s1 in spans) for m0, m1 in manual)
    print(f"\nconcurrency: {ROUNDS} rounds, {files} files, the watcher busy during the manual loads of "
          f"{overlaps} round(s)")
    assert overlaps >= 1


def test_two_recomputes_at_once_record_each_flag_event_once(workspace, tmp_path):
    data = tmp_path / "results.csv"
    write_results(data, Shape(states=6, districts=30), seed=4)
    # a third of these random districts go to the minor party: keep such units flaggable (the
    # coverage rule, flags.min_coverage, is not what this test is about)
    with workspace.config_path.open("a", encoding="utf-8") as fh:
        fh.write("\n[flags]\nmin_coverage = 0.0\n")
    env = {k: v for k, v in os.environ.items() if k != ENV_VAR}
    assert subprocess.run([sys.executable, "-m", "monitor", "-w", str(workspace.root), "load", str(data)],
                          capture_output=True, env=env).returncode == 0
    runs = [Warm("-w", str(workspace.root), "compute", env=env) for _ in range(2)]
    for run in runs:
        run.go()
    for run in runs:
        code, out, err = run.finish()
        assert code == 0 and "database is locked" not in err, err
    conn = open_plain(workspace.store_path)
    try:
        events = conn.execute("SELECT scope, cycle, state, chamber, plan_id, measure, event FROM flag_events").fetchall()
    finally:
        conn.close()
    assert events, "the data raised no flag: the test would prove nothing"
    assert len(events) == len(set(events)), f"{len(events) - len(set(events))} flag event(s) recorded twice"
