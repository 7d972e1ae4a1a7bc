"""Shared fixtures: a fresh workspace in ``tmp_path``, a CLI runner bound to it, file writers
and a full dump of the store to prove that a command wrote nothing.

All data here is invented and tiny; it is test input, never a check value from outside.
"""

from __future__ import annotations

import csv
import gzip
import io
import os
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner, Result

import store
from monitor.cli import main
from monitor.workspace import ENV_VAR, Workspace

# Invented parties: a = Harbour (two labels), b = Upland; anything else is "other".
CONFIG = """\
[parties.a]
name = "Harbour Party"
labels = ["Harbour", "Harbour-Lantern"]
colour = "#1b7f79"

[parties.b]
name = "Upland League"
labels = ["Upland"]
colour = "#c9861a"
"""

LONG_HEADER = ["cycle", "state", "chamber", "district", "party", "candidate", "votes"]


def csv_text(header: list[str], rows: list[list]) -> str:
    """A CSV as a spreadsheet would write it (cells with commas get quoted)."""
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(header)
    writer.writerows(rows)
    return buf.getvalue()


def long_csv(rows: list[list], extra: tuple[str, ...] = ()) -> str:
    """A native long CSV; ``extra`` names optional columns appended after ``votes``."""
    return csv_text(LONG_HEADER + list(extra), rows)


def dump_store(path: Path) -> list[str]:
    """Every table, index, view and row of the store as SQL text (schema and data)."""
    conn = sqlite3.connect(path)
    try:
        return list(conn.iterdump())
    finally:
        conn.close()


class Levelfield:
    """``levelfield --workspace ROOT ...`` through click's runner, plus helpers on that workspace."""

    def __init__(self, root: Path, files: Path):
        self.root = root
        self.files = files

    def __call__(self, *args, code: int | None = 0) -> Result:
        result = CliRunner().invoke(main, ["--workspace", str(self.root), *map(str, args)])
        # no traceback and no "internal error" ever reaches the user
        assert "Traceback" not in result.output, result.output
        assert "internal error" not in result.output, result.output
        if result.exception is not None and not isinstance(result.exception, SystemExit):
            raise result.exception
        if code is not None:
            assert result.exit_code == code, f"exit {result.exit_code}, expected {code}:\n{result.output}"
        return result

    # files -------------------------------------------------------------------------------
    def write(self, name: str, text: str | bytes, encoding: str = "utf-8") -> Path:
        path = self.files / name
        path.write_bytes(text if isinstance(text, bytes) else text.encode(encoding))
        return path

    def write_gz(self, name: str, text: str) -> Path:
        return self.write(name, gzip.compress(text.encode("utf-8"), mtime=0))

    def configure(self, toml: str) -> None:
        """Replace levelfield.toml with the party config plus ``toml``."""
        (self.root / "levelfield.toml").write_text(CONFIG + "\n" + toml, encoding="utf-8")

    # store -------------------------------------------------------------------------------
    @property
    def store_path(self) -> Path:
        return self.root / "history.sqlite"

    def dump(self) -> list[str]:
        return dump_store(self.store_path)

    def rows(self, sql: str, params=()) -> list[tuple]:
        conn = sqlite3.connect(self.store_path)
        try:
            return conn.execute(sql, params).fetchall()
        finally:
            conn.close()

    def export_rows(self) -> list[dict]:
        """``levelfield export results`` (CSV) read back as one dict per line."""
        return list(csv.DictReader(io.StringIO(self("export", "results").stdout)))

    def results(self) -> list[tuple]:
        """district_results without load_id, sorted: (cycle, state, chamber, district, party,
        candidate, votes, status)."""
        return sorted(self.rows("SELECT cycle, state, chamber, district, party, candidate, votes, status "
                                "FROM district_results"))


@pytest.fixture(scope="session")
def migrated_store(tmp_path_factory) -> bytes:
    """The bytes of a freshly migrated, empty store (migrating once per session keeps tests fast)."""
    path = tmp_path_factory.mktemp("template") / "history.sqlite"
    store.connect(path).close()  # the last connection closing checkpoints and removes the WAL
    assert not path.with_name("history.sqlite-wal").exists()
    return path.read_bytes()


@pytest.fixture
def lf(tmp_path, monkeypatch, migrated_store) -> Levelfield:
    """A fresh, initialised workspace (invented party config, migrated empty store)."""
    monkeypatch.delenv(ENV_VAR, raising=False)
    root = tmp_path / "ws"
    root.mkdir()
    (root / "levelfield.toml").write_text(CONFIG, encoding="utf-8")
    Workspace(root).ensure()
    (root / "history.sqlite").write_bytes(migrated_store)
    files = tmp_path / "files"
    files.mkdir()
    return Levelfield(root, files)


# A small unit used as "data already in the store" by tests that check nothing else changes.
BASE_ROWS = [
    [2022, "QV", "federal", "1", "Harbour", "Maren Olvas", "1,200"],
    [2022, "QV", "federal", "1", "Upland", "Tobin Resk", 1000],
    [2022, "QV", "federal", "2", "Harbour", "Ilse Varro", 700],
    [2022, "QV", "federal", "2", "Upland", "Piet Amsel", 900],
    [2022, "QV", "federal", "3", "Upland", "Ode Brask", 800],
]


@pytest.fixture
def loaded(lf) -> Levelfield:
    """The workspace of ``lf`` with BASE_ROWS loaded (load #1)."""
    lf("load", lf.write("base.csv", long_csv(BASE_ROWS)))
    return lf


def run_subprocess(root: Path, *args: str) -> subprocess.CompletedProcess:
    """``python -m monitor --workspace ROOT ...`` in a real process: real exit codes and stderr."""
    env = {k: v for k, v in os.environ.items() if k != ENV_VAR}
    return subprocess.run([sys.executable, "-m", "monitor", "--workspace", str(root), *args],
                          capture_output=True, text=True, env=env, timeout=120)


SAMPLE = Path(__file__).resolve().parent.parent / "sample_history"


def build_sample_workspace(root: Path, *, publish: bool = False) -> Workspace:
    """The whole pipeline on the committed sample history: load, plans, compute, flags."""
    from monitor.ingest import load_file
    from monitor.pipeline import refresh
    from monitor.plans import load_plans

    ws = Workspace(root)
    ws.ensure()
    ws.config_path.write_text((SAMPLE / "levelfield.toml").read_text(encoding="utf-8"), encoding="utf-8")
    db, config = ws.open_store(), ws.config()
    for path in sorted((SAMPLE / "results").glob("*.csv")):
        load_file(db, path, config)
    load_plans(db, SAMPLE / "plans.csv")
    refresh(ws, publish=publish, db=db, config=config)
    return ws


@pytest.fixture(scope="session")
def sample_workspace(tmp_path_factory) -> Workspace:
    """One sample-history workspace for the whole session (read it, do not change it)."""
    return build_sample_workspace(tmp_path_factory.mktemp("sample") / "ws")
