"""Large files (issue 9, item 5): a 1,000,000-row file loads within a stated peak-memory bound.

The load runs as ``python -m monitor load`` in a child process; its peak resident set size is the
kernel's ``ru_maxrss``, read with ``resource.getrusage`` by a small parent process (see
``makers.run_peak_rss``). The normal run loads 200,000
rows; ``make fuzz`` adds the 1,000,000-row file (marked ``slow``: about a minute here).

The bounds asserted (measured values in RELIABILITY.md): 200,000 rows under 700 MB,
1,000,000 rows under 2 GB.
"""

from __future__ import annotations

import csv
import os
import sys
import time

import pytest

from conftest import ENV_VAR

from reliability.makers import Shape, open_plain, run_peak_rss, write_results

CASES = {
    "200k": (Shape(cycles=tuple(range(2004, 2024, 2)), states=50, districts=134), 700),
    "1M": (Shape(cycles=tuple(range(1974, 2024, 2)), states=50, chambers=("federal", "state_lower"), districts=134),
           2048),
}


@pytest.mark.parametrize("case", [
    pytest.param("200k"),
    pytest.param("1M", marks=pytest.mark.slow),
])
def test_a_large_file_loads_within_the_memory_bound(workspace, tmp_path, case):
    shape, bound_mb = CASES[case]
    path = tmp_path / f"{case}.csv"
    counts = write_results(path, shape, seed=11)
    assert shape.rows >= (1_000_000 if case == "1M" else 200_000)
    with open(path, newline="", encoding="utf-8") as fh:
        total = sum(int(row["votes"]) for row in csv.DictReader(fh))

    env = {k: v for k, v in os.environ.items() if k != ENV_VAR}
    started = time.perf_counter()
    code, peak_mb = run_peak_rss([sys.executable, "-m", "monitor", "-w", str(workspace.root), "load", str(path)],
                                 tmp_path / "out.txt", env)
    seconds = time.perf_counter() - started
    output = (tmp_path / "out.txt").read_text(encoding="utf-8")
    print(f"\n{case}: {shape.rows:,} rows ({path.stat().st_size / 2**20:.0f} MiB, {shape.units} units) loaded in "
          f"{seconds:.1f} s, peak RSS {peak_mb:.0f} MB (bound {bound_mb} MB)")
    assert code == 0, output
    assert f"rows read {shape.rows}, accepted {shape.rows}, rejected 0" in output

    conn = open_plain(workspace.store_path)
    try:
        assert conn.execute("SELECT COUNT(*), SUM(votes) FROM district_results").fetchone() == (shape.rows, total)
        assert conn.execute("SELECT COUNT(*) FROM units").fetchone() == (len(counts),)
    finally:
        conn.close()
    assert peak_mb < bound_mb
