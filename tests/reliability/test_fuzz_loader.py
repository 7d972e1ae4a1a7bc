"""Bad input: property-based fuzzing of the loader (README "Validation"; issue 9, item 2).

Every generated file either loads whole (and then exactly its lines are in ``district_results``)
or is refused with a :class:`DataError` whose every problem names the file and, where the problem
is about a place in it, its row and column; or, for an impossible option, a :class:`UsageError`.
Never another exception, and after a refusal the store is byte-for-byte what it was (a full dump).

The library function :func:`monitor.ingest.load_file` is called directly (fast), on a fresh copy
of a store that already holds one unit; a few hundred files also go through the command line
(click's runner), and the nastiest few through a real ``python -m monitor`` process.

Budgets: the normal run draws about 2,400 files for the library and 300 for the command line, with
a fixed seed (``derandomize``: the same files every run, so a failure is reproducible);
``LEVELFIELD_FUZZ=long`` (``make fuzz``) draws 20 times as many, from a fresh seed each run.

Each test counts its own outcomes and checks, after its files, that the strategy reached the
outcomes it is meant to reach (a strategy that only ever produced refusals would test nothing
about loading): the check belongs to the test, so it runs under ``-k`` too.
"""

from __future__ import annotations

import itertools
import re
import shutil
import sqlite3
import tempfile
from collections import Counter
from pathlib import Path

import pytest
from click.testing import CliRunner
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import store
from conftest import BASE_ROWS, CONFIG, dump_store, long_csv, run_subprocess
from monitor import reductions
from monitor.cli import main
from monitor.config import load_config
from monitor.errors import DataError, UsageError
from monitor.ingest import load_file
from monitor.ingest.mapping import load_mapping
from monitor.workspace import Workspace

from reliability import badfiles as bf
from reliability.conftest import LONG

NAMES = ["results.csv", "r.csv.gz", "Ünïcode näme.csv", "semi;colon 'q'.csv", "-dash.csv"]
ENCODINGS = [None] * 6 + ["cp1252", "latin-1", "utf-16", "ascii", "utf-8"]
#: the least share of each strategy's budget that must reach an outcome (the normal run's counts
#: are well above these; see each test)


def budget(n: int):
    return settings(max_examples=n * (20 if LONG else 1), deadline=None, derandomize=not LONG,
                    database=None if not LONG else settings.default.database, print_blob=True,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                           HealthCheck.filter_too_much, HealthCheck.large_base_example])


class Bench:
    """A template store (migrated, one unit loaded) and a scratch folder for the examples."""

    def __init__(self):
        self.dir = Path(tempfile.mkdtemp(prefix="lf-fuzz-"))
        (self.dir / "levelfield.toml").write_text(CONFIG, encoding="utf-8")
        self.config = load_config(self.dir / "levelfield.toml")
        base = self.dir / "base.csv"
        base.write_text(long_csv(BASE_ROWS), encoding="utf-8")
        path = self.dir / "template.sqlite"
        db = store.connect(path)
        load_file(db, base, self.config)
        reductions.refresh(db, self.config)  # a whole store: its contests reduced, as after any command
        db.conn.close()
        self.template = path.read_bytes()
        self.counter = itertools.count()

    def fresh(self) -> tuple[Path, "store.sqlite_utils.Database"]:
        n = next(self.counter)
        path = self.dir / f"s{n}.sqlite"
        path.write_bytes(self.template)
        return path, store.connect(path)

    def discard(self, path: Path, db) -> None:
        db.conn.close()
        for suffix in ("", "-wal", "-shm"):
            Path(f"{path}{suffix}").unlink(missing_ok=True)

    def file(self, name: str, data: bytes) -> Path:
        folder = self.dir / f"f{next(self.counter)}"
        folder.mkdir()
        path = folder / name
        path.write_bytes(data)
        return path


@pytest.fixture(scope="module")
def bench():
    b = Bench()
    yield b
    shutil.rmtree(b.dir, ignore_errors=True)


def fuzz(n: int, **strategies):
    """Run the decorated ``body(**example) -> outcome`` on ``n`` generated examples (``budget(n)``)
    and return the outcomes' tally."""
    def wrap(body):
        def run_all() -> Counter:
            tally: Counter = Counter()

            @budget(n)
            @given(**strategies)
            def run(**example):
                tally[body(**example)] += 1

            run()
            print(f"\n{body.__name__}: {dict(sorted(tally.items(), key=str))}")
            return tally
        return run_all
    return wrap


def try_load(bench: Bench, strategy: str, data: bytes, name: str, encoding: str | None = None,
             skip_bad_rows: bool = False, mapping=None) -> str:
    """Load ``data`` and check the outcome; returns 'loaded', 'refused' or 'usage'."""
    path = bench.file(name, data)
    store_path, db = bench.fresh()
    before = dump_store(store_path)
    try:
        try:
            report = load_file(db, path, bench.config, encoding=encoding, skip_bad_rows=skip_bad_rows,
                               mapping=mapping)
        except DataError as exc:
            bf.check_refusal(exc, name, data)
            assert bf.refusal_only(dump_store(store_path), before), "a refused file changed the store"
            outcome = "refused"
        except UsageError as exc:
            assert str(exc)
            assert dump_store(store_path) == before
            outcome = "usage"
        else:
            assert report.outcome == "loaded", report.outcome
            assert (report.rows_accepted + report.rows_rejected + report.rows_filtered
                    + sum(report.not_candidates.values()) == report.rows_read)
            units = [(u.cycle, u.state, u.chamber) for u in report.units]
            stored = bf.stored_rows(db.conn, units)
            if mapping is not None:  # their columns, filtered rows: count what was stored against the report
                # (a candidate's repeated lines on one party line are stored as one: repeated_lines = "sum")
                assert sum(stored.values()) == report.rows_accepted - report.lines_combined
                assert not [s for s in stored if s[1] == "ZZ"], "an excluded state was stored"
                assert not [s for s in stored if s[3] == "0"], "the at-large code was not mapped to AL"
            elif skip_bad_rows:
                readable = bf.expected_rows(data, encoding, lenient=True)
                assert not stored - readable, f"rows in the store that are not in the file: {stored - readable}"
            else:
                assert report.rows_rejected == 0
                assert stored == bf.expected_rows(data, encoding), "the store does not hold the file's lines"
            assert db.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
            outcome = "loaded"
    finally:
        bench.discard(store_path, db)
        shutil.rmtree(path.parent, ignore_errors=True)
    return outcome


names = st.sampled_from(NAMES)


def test_sound_long_files_load_with_exactly_their_lines(bench):
    @fuzz(300, data=bf.sound_files(), name=names)
    def sound(data, name):
        return try_load(bench, "sound", data, name)

    tally = sound()
    assert set(tally) == {"loaded"} and tally["loaded"] >= 250


def test_sound_wide_files_load_with_exactly_their_lines(bench):
    @fuzz(150, data=bf.sound_files(wide=True), name=names)
    def sound_wide(data, name):
        return try_load(bench, "sound-wide", data, name)

    tally = sound_wide()
    assert set(tally) == {"loaded"} and tally["loaded"] >= 120


def test_broken_files_load_whole_or_are_refused_with_their_place(bench):
    @fuzz(800, data=bf.broken_files(), name=names, encoding=st.sampled_from(ENCODINGS))
    def broken(data, name, encoding):
        return try_load(bench, "broken", data, name, encoding)

    tally = broken()
    assert tally["loaded"] >= 10 and tally["refused"] >= 300


def test_huge_and_odd_numbers_in_any_number_cell_load_or_are_refused(bench):
    refused = 0
    for number in bf.HUGE:
        @fuzz(12, data=bf.odd_number_files(number), name=names)
        def numbers(data, name):
            return try_load(bench, "numbers", data, name)

        refused += numbers()["refused"]
    assert refused >= 50


def test_broken_wide_files_load_whole_or_are_refused(bench):
    @fuzz(150, data=bf.broken_files(wide=True), name=names)
    def broken_wide(data, name):
        return try_load(bench, "broken-wide", data, name)

    tally = broken_wide()
    assert tally["refused"] >= 30


def test_skip_bad_rows_never_stores_a_line_the_file_does_not_hold(bench):
    @fuzz(250, data=bf.broken_files(), name=names)
    def skipping(data, name):
        return try_load(bench, "skip-bad-rows", data, name, skip_bad_rows=True)

    tally = skipping()
    assert tally["loaded"] >= 5


def test_junk_is_refused_cleanly(bench):
    @fuzz(300, data=bf.junk_files(), name=names, encoding=st.sampled_from(ENCODINGS))
    def junk(data, name, encoding):
        return try_load(bench, "junk", data, name, encoding)

    tally = junk()
    assert tally["refused"] >= 100


@pytest.fixture(scope="module")
def mapping(bench):
    path = bench.dir / "map.toml"
    path.write_text(bf.MAPPING, encoding="utf-8")
    return load_mapping(path)


def test_foreign_files_through_a_mapping_load_whole_or_are_refused(bench, mapping):
    @fuzz(200, data=bf.foreign_files(), name=names)
    def mapped(data, name):
        return try_load(bench, "mapped", data, name, mapping=mapping)

    tally = mapped()
    assert tally["loaded"] >= 20 and tally["refused"] >= 20


# -- the same through the command line --------------------------------------------------------------

ERROR_LINE = re.compile(r"^error: (?P<where>[^\n]+?): \S")


class CliBench:
    """A fresh workspace per example (a copy of a template store that holds one unit)."""

    def __init__(self, root: Path, template: bytes):
        self.root, self.template, self.counter = root, template, itertools.count()

    def __repr__(self) -> str:
        return f"CliBench({self.root})"

    def workspace(self) -> Workspace:
        ws = Workspace(self.root / f"ws{next(self.counter)}")
        ws.root.mkdir()
        (ws.root / "levelfield.toml").write_text(CONFIG, encoding="utf-8")
        ws.ensure()
        ws.store_path.write_bytes(self.template)
        return ws


@pytest.fixture(scope="module")
def cli_bench(tmp_path_factory, bench):
    return CliBench(tmp_path_factory.mktemp("fuzz-cli"), bench.template)


def test_the_command_line_never_shows_a_traceback(cli_bench):
    # sound files among the broken ones, so that both exit codes are reached whatever the draws
    # (broken files alone loaded 1 to 15 times in 300, depending on the run's order)
    @fuzz(300, data=st.one_of(bf.broken_files(), bf.junk_files(), bf.sound_files()), name=names, skip=st.booleans())
    def cli(data, name, skip):
        return _cli_load(cli_bench, data, name, skip)

    tally = cli()
    assert tally[0] >= 20 and tally[1] >= 100, tally  # both exit codes reached


def _cli_load(cli_bench: CliBench, data: bytes, name: str, skip: bool) -> int:
    ws = cli_bench.workspace()
    try:
        path = ws.root / "inbox" / name
        path.write_bytes(data)
        before = dump_store(ws.store_path)
        args = ["-w", str(ws.root), "load", str(path)] + (["--skip-bad-rows"] if skip else [])
        result = CliRunner().invoke(main, args)
        assert result.exception is None or isinstance(result.exception, SystemExit), result.exception
        out = result.output
        assert "Traceback" not in out and "internal error" not in out, out[-2000:]
        assert result.exit_code in (0, 1), out[-2000:]
        # nothing from the file reaches the terminal raw: no control character can move the cursor
        assert all(line.isprintable() for line in out.split("\n")), [l for l in out.split("\n") if not l.isprintable()][:3]
        if result.exit_code == 1:
            errors = [line for line in result.stderr.split("\n") if line.startswith("error: ")]
            assert errors, result.stderr
            for line in errors[:-1]:  # the last line is the summary
                match = ERROR_LINE.match(line)
                assert match and match["where"].startswith(name), line
            assert bf.refusal_only(dump_store(ws.store_path), before)
        return result.exit_code
    finally:
        path.unlink(missing_ok=True)  # the workspace stays until pytest's tmp cleanup (its store may be open)


NASTY = {
    "5000 digits.csv": (",".join(bf.LONG_HEADER) + "\n2024,QV,federal,1,Harbour,A,1\n2024,QV,federal,1,Upland,B,"
                        + "9" * 5000 + "\n").encode(),
    "junk.csv": bytes(range(256)) * 8,
    "cut.csv.gz": __import__("gzip").compress(long_csv(BASE_ROWS).encode(), mtime=0)[:-9],
    "utf16.csv": long_csv(BASE_ROWS).encode("utf-16"),
    "huge cell.csv": (",".join(bf.LONG_HEADER) + "\n2024,QV,federal,1,Harbour," + "x" * 200_000 + ",1\n").encode(),
}


@pytest.mark.parametrize("name", sorted(NASTY))
def test_a_real_process_refuses_the_nastiest_files_in_plain_words(workspace, tmp_path, name):
    path = tmp_path / name
    path.write_bytes(NASTY[name])
    before = dump_store(workspace.store_path)
    done = run_subprocess(workspace.root, "load", str(path))
    assert done.returncode == 1, done.stderr
    assert "Traceback" not in done.stderr and "internal error" not in done.stderr, done.stderr
    assert done.stderr.startswith(f"error: {name}"), done.stderr
    assert "nothing was loaded" in done.stderr or "refused" in done.stderr or "truncated" in done.stderr
    assert bf.refusal_only(dump_store(workspace.store_path), before)
    with sqlite3.connect(workspace.store_path) as conn:
        assert conn.execute("SELECT COUNT(*) FROM loads WHERE outcome != 'refused'").fetchone()[0] == 0
