"""Crash safety of ``levelfield publish`` (issue 9, item 1): SIGKILL at seeded random moments of a
rebuild leaves the previous site whole.

The workspace holds a published site A; then a correction is loaded and recomputed, so the next
build gives site B. Each trial kills ``levelfield publish`` (a warm process) at a uniform random
moment of the build, or (every other trial) of its write step, timed from the moment it begins; ``public/`` must then be exactly A or exactly B, file for file and byte for
byte, never a mixture, never missing. A build after the kill completes and gives B.
"""

from __future__ import annotations

import hashlib
import random
import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner

from conftest import long_csv
from monitor.cli import main

from reliability.conftest import LONG
from reliability.makers import Warm

SEED = 20_241_212
TRIALS = 30 if LONG else 8


def site_files(public: Path) -> dict[str, str]:
    return {p.relative_to(public).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(public.rglob("*")) if p.is_file()}


def rows(bump: int = 0) -> list[list]:
    rng = random.Random(8)
    out = []
    for cycle in (2018, 2020, 2022):
        for state in ("KA", "LU", "MO", "NE"):
            for d in range(1, 8):
                extra = bump if (cycle, state, d) == (2022, "LU", 3) else 0
                out.append([cycle, state, "federal", str(d), "Harbour", f"A{d}", rng.randint(2000, 9000) + extra])
                out.append([cycle, state, "federal", str(d), "Upland", f"B{d}", rng.randint(2000, 9000)])
    return out


@pytest.fixture(scope="module")
def sites(tmp_path_factory, migrated_store):
    base = tmp_path_factory.mktemp("crash-publish")
    root = base / "ws"
    run = CliRunner()

    def lf(*args):
        result = run.invoke(main, ["-w", str(root), *map(str, args)])
        assert result.exit_code == 0, result.output
        return result.output

    from conftest import CONFIG

    lf("init")
    (root / "levelfield.toml").write_text(CONFIG, encoding="utf-8")
    first, correction = base / "results.csv", base / "correction.csv"
    first.write_text(long_csv(rows()), encoding="utf-8")
    correction.write_text(long_csv([r for r in rows(bump=5000) if r[:2] == [2022, "LU"]]), encoding="utf-8")
    lf("load", first)
    lf("compute")
    lf("publish")
    site_a = site_files(root / "public")
    assert "1 corrected" in lf("load", correction)
    lf("compute")
    # the reference: the same workspace published without interruption, timed
    reference = base / "reference"
    shutil.copytree(root, reference)
    warm = Warm("-w", str(reference), "publish")
    warm.go()
    code, times, err = warm.timed()
    assert code == 0, err
    site_b = site_files(reference / "public")
    assert site_a != site_b
    # the build ends where its report is printed (the process then only exits)
    return {"root": root, "a": site_a, "b": site_b, "seconds": times["output"][0] * 1.05, "reference": reference,
            "write": times["@write-end"][0] - times["@write-begin"][0]}


def test_sigkill_during_publish_leaves_the_previous_site_whole(sites, tmp_path):
    rng = random.Random(SEED)
    outcomes, left = [], 0
    for i in range(TRIALS):
        ws = tmp_path / f"p{i}"
        shutil.copytree(sites["root"], ws)
        warm = Warm("-w", str(ws), "publish")
        warm.go()
        if i % 2 == 0:  # uniform over the whole build
            delay = rng.uniform(0.0, sites["seconds"])
            warm.kill_at(delay)
        else:           # uniform inside its write step (files into a fresh folder, then the swap)
            delay = rng.uniform(0.0, sites["write"] * 1.2)
            assert warm.kill_after("@write-begin", delay)
        code, out, err = warm.finish()
        assert "Traceback" not in err, err
        now = site_files(ws / "public")
        assert now in (sites["a"], sites["b"]), f"trial {i} (killed at {delay:.2f}s): a mixed or broken site"
        outcomes.append("previous" if now == sites["a"] else "new")
        leftovers = [p.name for p in ws.iterdir() if p.name.startswith(".public.build-")]
        left += bool(leftovers)
        if i == TRIALS - 1 or leftovers:
            result = CliRunner().invoke(main, ["-w", str(ws), "publish"])
            assert result.exit_code == 0, result.output
            assert site_files(ws / "public") == sites["b"]
        shutil.rmtree(ws)
    print(f"\npublish kills: {TRIALS} trials, site after the kill: {outcomes}; "
          f"{left} left a build folder beside public/")
    assert "previous" in outcomes


def test_the_pages_name_the_load_behind_them(sites):
    """Audit on the site: the corrected state's page names the correction, the others the first load."""
    public = sites["reference"] / "public"
    lu = (public / "state" / "lu" / "federal.html").read_text(encoding="utf-8")
    ka = (public / "state" / "ka" / "federal.html").read_text(encoding="utf-8")
    assert "latest load #2 <code>correction.csv</code>" in lu
    assert "latest load #1 <code>results.csv</code>" in ka
    provenance = ka.split('class="provenance"')[1].split("</footer>")[0]  # not the chart styling after it
    assert "latest load #1" in provenance and "#2" not in provenance
