"""Work follows the change (issue 17): after a history, a new cycle and corrections arriving one
after another, each followed by the incremental chain (only the changed units re-reduced and
re-measured, only their groups' national pool redrawn, only the changed aggregates recomputed),
the store equals a from-scratch recompute (``levelfield verify``), and the incremental chain did
less work than a full one.

The data is the benchmark's invented federation at a tiny size (bench/synthetic.py: 3 states,
2 cycles and a new one); nothing here is a check value from outside: the reference is the
project's own full recompute.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from bench import scenarios, synthetic
from monitor import pipeline
from monitor.ingest.load import load_file
from monitor.publish import build
from monitor.publish.build import MARKER
from monitor.publish.reuse import MANIFEST
from monitor.verify import verify_store
from monitor.workspace import Workspace


def _computed_store(root: Path, loaded: int | None = None):
    """The benchmark's invented federation (3 states, 2 cycles and a new one) written under
    ``root``, its first ``loaded`` files (all by default) loaded, prepared and recomputed in a
    workspace there: ``(ws, db, config, files)``."""
    data = root / "data"
    summary = synthetic.generate(data, states=3, cycles=2, new_cycles=1)
    ws = Workspace(root / "ws")
    ws.ensure()
    (ws.root / "levelfield.toml").write_text((data / "levelfield.toml").read_text(), encoding="utf-8")
    db, config = ws.open_store(), ws.config()
    files = [Path(p) for p in summary["files"]]
    for path in files[:loaded]:
        load_file(db, path, config)
    pipeline.prepare(db, config)
    pipeline.recompute(db, config)
    return ws, db, config, files


@pytest.fixture(scope="module")
def history(tmp_path_factory):
    root = tmp_path_factory.mktemp("incremental")
    ws, db, config, files = _computed_store(root, loaded=2)
    return {"root": root, "ws": ws, "db": db, "config": config, "files": files}


def _arrive(h, path: Path) -> pipeline.RefreshReport:
    load_file(h["db"], path, h["config"])
    pipeline.prepare(h["db"], h["config"])
    return pipeline.recompute(h["db"], h["config"])


def _files(folder: Path) -> dict[str, bytes]:
    return {p.relative_to(folder).as_posix(): p.read_bytes() for p in sorted(folder.rglob("*"))
            if p.is_file() and p.name != MANIFEST}


def _republish_equals_a_full_build(h, label: str):
    """The incremental republish (pages and downloads whose inputs changed) gives the bytes of a
    build that renders everything; returns the incremental build's report. Both start from the
    same previous feed: the feed adds the changes since the previous build's (issue 15), so it is a
    function of the store and that feed (the full build's folder holds only it and the site mark)."""
    full_dir = h["root"] / f"full-{label}"
    full_dir.mkdir()
    for name in (MARKER, "atom.xml"):
        shutil.copyfile(h["root"] / "public" / name, full_dir / name)
    report = build(h["db"], h["config"], h["root"] / "public")
    full = build(h["db"], h["config"], h["root"] / f"full-{label}", full=True)
    assert _files(h["root"] / "public") == _files(h["root"] / f"full-{label}")
    assert full.written and set(full.unchanged) <= {MARKER}  # everything rendered (the mark was there)
    return report


def test_a_new_cycle_then_corrections_equal_a_full_recompute(history):
    h = history
    build(h["db"], h["config"], h["root"] / "public")
    new_cycle = _arrive(h, h["files"][2])
    assert new_cycle.measures_computed == 9  # the new cycle's 3 states x 3 chambers, nothing else
    assert new_cycle.groups_computed == 3    # its three (cycle, chamber) groups
    assert not verify_store(h["db"], h["config"])
    site = _republish_equals_a_full_build(h, "new-cycle")
    # the first cycle's page did not change and was not even rendered (a new cycle changes its
    # neighbour's link to the next cycle, not every page); the previous cycle's page now links to it
    assert "cycle/1972.html" in site.kept
    assert "cycle/1974.html" in site.written and "cycle/1974.html" not in site.kept
    # a correction of the new cycle, then one of an earlier cycle (the previous cycle's unit is
    # what the coverage of the next cycle of the same plan is measured against)
    for source, state, chamber in ((h["files"][2], None, "state_lower"), (h["files"][0], None, "federal")):
        path, state, chamber = scenarios.corrected_file(source, h["root"] / f"fix-{source.stem}.csv", state=state,
                                                        chamber=chamber)
        report = _arrive(h, path)
        assert report.measures_computed == 1  # only the corrected unit is measured again
        assert report.groups_computed == 1    # only its (cycle, chamber) national pool is redrawn
        differences = verify_store(h["db"], h["config"])
        assert not differences, "\n".join(map(str, differences[:20]))
        site = _republish_equals_a_full_build(h, source.stem)
        assert site.unchanged and site.written


def test_nothing_changed_means_nothing_recomputed(history):
    h = history
    again = pipeline.recompute(h["db"], h["config"])
    assert again.measures_computed == 0 and again.groups_computed == 0
    assert not verify_store(h["db"], h["config"])


def test_a_build_that_keeps_a_file_keeps_the_parts_it_is_made_of(history):
    """The encoded parts beside the site (a state page's results table, a download's cycles) of a
    file kept from the previous build stay in the cache: without them the next change to one cycle
    re-encodes every other cycle of the download, and re-renders the results table of every page
    the change touches."""
    h = history
    out = h["root"] / "kept-parts"
    build(h["db"], h["config"], out)
    cache = out.parent / f".{out.name}-parts"
    made = sorted(p.name for p in cache.iterdir())
    assert any(n.startswith("results.") and n.endswith(".html") for n in made)
    assert any(n.startswith("results.csv.") for n in made)
    again = build(h["db"], h["config"], out)  # nothing changed: every page and download is kept
    assert again.unchanged and set(again.written) <= {MANIFEST}
    assert sorted(p.name for p in cache.iterdir()) == made


def test_staggered_chambers_follow_the_change_too(tmp_path):
    """With the state senates declared staggered (issue 16), a correction of one senate unit
    recomputes that unit and its chamber's whole-chamber units, and nothing else; the store still
    equals a from-scratch recompute after a new cycle and the correction."""
    data = tmp_path / "data"
    summary = synthetic.generate(data, states=3, cycles=2, new_cycles=1)
    ws = Workspace(tmp_path / "ws")
    ws.ensure()
    toml = (data / "levelfield.toml").read_text(encoding="utf-8")
    (ws.root / "levelfield.toml").write_text(toml + "\n[staggered]\nclasses.state_upper = 2\n", encoding="utf-8")
    db, config = ws.open_store(), ws.config()
    h = {"db": db, "config": config, "root": tmp_path}
    files = [Path(p) for p in summary["files"]]
    for path in files[:2]:
        load_file(db, path, config)
    pipeline.prepare(db, config)
    pipeline.recompute(db, config)
    build(db, config, tmp_path / "public")
    whole = db.execute("SELECT COUNT(DISTINCT cycle || state) FROM measures WHERE chamber = 'state_upper_whole'")
    assert whole.fetchone()[0] == 6  # 3 states x 2 cycles
    assert not verify_store(db, config)
    new_cycle = _arrive(h, files[2])
    # the new cycle's 9 units, and the 2 + 1 whole-chamber units of each of the 3 senates
    assert new_cycle.measures_computed == 9 + 9
    assert not verify_store(db, config)
    path, state, _ = scenarios.corrected_file(files[0], tmp_path / "fix.csv", state=None, chamber="state_upper")
    report = _arrive(h, path)
    assert report.measures_computed == 1 + 3  # the corrected unit and its senate's 3 whole-chamber units
    differences = verify_store(db, config)
    assert not differences, "\n".join(map(str, differences[:20]))
    _republish_equals_a_full_build(h, "staggered")
    # a correction of the latest cycle's senate of one state redraws that cycle's whole-chamber
    # pool, which moves the other states' whole-chamber rows (expected seats, tails, standing) shown
    # on their senate pages although none of their own units changed
    path, state, _ = scenarios.corrected_file(files[2], tmp_path / "fix-latest.csv", state=None, chamber="state_upper")
    _arrive(h, path)
    assert not verify_store(db, config)
    site = _republish_equals_a_full_build(h, "staggered-latest")
    others = [p for p in site.written if p.startswith("state/") and "upper" in p and state.lower() not in p]
    assert others, site.written
    # the page plan names the whole-chamber units among their chamber's pages' inputs: a change to
    # a whole-chamber unit's rows alone (played here by editing its stored expected seats) renders
    # its state's senate page again, and that page equals a full build's
    latest = db.execute("SELECT MAX(cycle) FROM pool_seats").fetchone()[0]
    db.execute("UPDATE pool_seats SET expected_seats = expected_seats + 0.5, excess_seats = excess_seats - 0.5 "
               "WHERE chamber = 'state_upper_whole' AND cycle = ? AND state = ?", [latest, state])
    db.conn.commit()
    site = build(db, config, tmp_path / "public")
    assert [p for p in site.written if p.startswith("state/") and "upper" in p], site.written
    full_dir = tmp_path / "full-whole-row"
    full_dir.mkdir()
    for name in (MARKER, "atom.xml"):  # no flag changed: the feed stays as it was
        shutil.copyfile(tmp_path / "public" / name, full_dir / name)
    build(db, config, full_dir, full=True)
    assert _files(tmp_path / "public") == _files(full_dir)
    again = pipeline.recompute(db, config)
    assert again.measures_computed == 0 and again.groups_computed == 0


def _flag_rows(db) -> dict[str, list[tuple]]:
    """Every row of the flags' tables but when it was computed, in key order (Python values as
    SQLite returns them: floats compare bit for bit)."""
    from store.flags import SEAT_COLUMNS, TAIL_COLUMNS, WATCH_VIEW_COLUMNS

    return {"pool_seats": db.execute(f"SELECT {', '.join(SEAT_COLUMNS)}, method_version FROM pool_seats "
                                     "ORDER BY cycle, state, chamber").fetchall(),
            "tails": db.execute(f"SELECT {', '.join(TAIL_COLUMNS)} FROM tails "
                                "ORDER BY cycle, state, chamber, measure").fetchall(),
            "watch": db.execute(f"SELECT {', '.join(WATCH_VIEW_COLUMNS)} FROM watch "
                                "ORDER BY state, chamber, plan_id").fetchall()}


def test_a_changed_groups_incremental_flags_equal_flags_from_scratch(tmp_path):
    """After a correction, the flags step redoes the one (cycle, chamber) group that changed and
    leaves the other groups' rows as stored (their when-computed included), yet every row of
    pool_seats, tails and watch equals, value for value, a flags run from scratch on a copy of the
    same store (its flag tables and their bases emptied first). The reference is the project's own
    full run; the data is the benchmark's invented federation."""
    import datetime as dt
    import sqlite3

    import store
    from monitor.flags import run_flags

    _, db, config, files = _computed_store(tmp_path)
    path, state, chamber = scenarios.corrected_file(files[1], tmp_path / "fix.csv", chamber="state_lower")
    load_file(db, path, config)
    pipeline.prepare(db, config)
    from monitor.compute import compute

    compute(db, config)
    later = dt.datetime(2031, 1, 1, tzinfo=dt.timezone.utc)
    report = run_flags(db, config, now=later)
    assert report.groups_computed == 1
    stamp = later.isoformat(timespec="seconds")
    cycle = db.execute("SELECT MAX(cycle) FROM units WHERE superseded_by IS NULL AND load_id = "
                       "(SELECT MAX(load_id) FROM units)").fetchone()[0]
    redone = db.execute("SELECT DISTINCT cycle, chamber FROM pool_seats WHERE computed_at = ?", [stamp]).fetchall()
    assert redone == [(cycle, chamber)]  # the other groups' expected seats were not rewritten
    kept = db.execute("SELECT COUNT(*) FROM tails WHERE computed_at <> ?", [stamp]).fetchone()[0]
    assert kept > 0
    incremental = _flag_rows(db)

    scratch_path = tmp_path / "scratch.sqlite"
    target = sqlite3.connect(scratch_path)
    db.conn.backup(target)
    target.close()
    scratch = store.connect(scratch_path)
    for table in ("pool_seats", "tails", "watch"):
        scratch.execute(f"DELETE FROM {table}")
    scratch.execute("DELETE FROM bases WHERE step = 'flags'")
    scratch.conn.commit()
    run_flags(scratch, config, full=True, now=later)
    fresh = _flag_rows(scratch)
    for table, rows in fresh.items():
        assert rows, table
        assert incremental[table] == rows, table
