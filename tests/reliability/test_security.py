"""Security of the loader and the watcher (issue 9, item 5): odd inbox file names stay inside the
workspace, SQL only with bound parameters, and a gzip bomb is refused by the decompressed-size
cap without exhausting memory. (The site's parts are in test_site_security.py.)"""

from __future__ import annotations

import csv
import io
import os
import sys
from pathlib import Path

import pytest

from conftest import CONFIG, ENV_VAR, long_csv
from monitor.watcher import Service, safe_name

from reliability.conftest import make_workspace
from reliability.makers import gzip_bomb, open_plain, run_peak_rss

# Names a POSIX inbox can hold (no "/" and no NUL are possible) that a careless archive step
# could turn into a path outside the folder, a hidden file, a terminal trick or an overwrite.
ODD_NAMES = [
    "a..b.csv", "x..", "up\u2215..\u2215..\u2215etc\u2215passwd.csv",
    "\uff0e\uff0e\uff0fetc\uff0fpasswd",          # fullwidth "../etc/passwd": NFKC makes it real dots and a slash
    "report\u202ecsv.exe", "tab\tname\x01\x1b[31m.csv", "line\nbreak.csv", "\u0085nel\u2028ls.csv",
    "ü" * 120 + ".csv", "-rf.csv", " spaced .csv", "$(touch pwned).csv", "`id`.csv", "a b.csv", "a:b.csv",
    "a*b.csv", "a?b.csv", "a|b.csv", "~", "CON", "\u200b", "😀.csv", "%2e%2e%2fup.csv", "a.csv.error.txt",
    "a.csv",
]
HIDDEN = [".hidden.csv", "..csv", "...", ".\u202e.csv", "..\u2215..\u2215etc\u2215passwd.csv"]
SAFE = set("abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789._-")


def good_file(i: int) -> str:
    return long_csv([[1900 + i, "QV", "federal", "1", "Harbour", f"Cand {i}", 10 + i],
                     [1900 + i, "QV", "federal", "1", "Upland", f"Other {i}", 5]])


def everything_under(folder: Path) -> list[Path]:
    return sorted(p for p in folder.rglob("*"))


@pytest.mark.parametrize("kind", ["rejected", "archived"])
def test_odd_inbox_names_stay_inside_the_workspace(tmp_path, migrated_store, monkeypatch, kind):
    ws = make_workspace(tmp_path / "ws", migrated_store)
    before_outside = everything_under(tmp_path.parent)
    contents = {}
    for i, name in enumerate(ODD_NAMES + HIDDEN):
        text = good_file(i) if kind == "archived" else f"not,a,results,file\n{i},{name!r},x,y\n"
        (ws.inbox / name).write_text(text, encoding="utf-8")
        contents[name] = text.encode()
    monkeypatch.chdir(ws.inbox)  # a relative-path slip would show up right here
    Service(ws, echo=False, publish=False).run_once(settle=0.0)

    root = ws.root.resolve()
    for path in everything_under(ws.root):
        assert path.resolve().is_relative_to(root), path
    escaped = [p for p in everything_under(tmp_path.parent) if p not in before_outside
               and not p.resolve().is_relative_to(root)]
    assert not escaped, escaped
    # hidden files are left alone (temp files of a sync tool); everything else was taken
    assert sorted(p.name for p in ws.inbox.iterdir()) == sorted(HIDDEN)
    odd = {contents[n] for n in ODD_NAMES}
    files = [p for p in (ws.root / ("rejected" if kind == "rejected" else "archive")).rglob("*") if p.is_file()]
    data = [p for p in files if p.read_bytes() in odd]
    reports = [p for p in files if p not in data]
    # nothing overwritten: every odd file is there once, byte for byte, under a plain name
    assert sorted(p.read_bytes() for p in data) == sorted(odd)
    for p in data:
        assert set(p.name) <= SAFE and not p.name.startswith(".") and len(p.name.encode()) <= 255, p.name
    if kind == "rejected":
        assert sorted(r.name for r in reports) == sorted(f"{p.name}.error.txt" for p in data)
    else:
        assert reports == []
        conn = open_plain(ws.store_path)
        assert conn.execute("SELECT COUNT(*) FROM loads").fetchone()[0] == len(ODD_NAMES)
        conn.close()


def test_safe_name_keeps_a_plain_name_and_neutralises_the_rest():
    assert safe_name("results-2024.csv") == "results-2024.csv"
    assert safe_name("\uff0e\uff0e\uff0fetc\uff0fpasswd") == "etc_passwd"
    assert safe_name("..") == "file" and safe_name("") == "file"
    assert len(safe_name("x" * 1000)) <= 120


# -- SQL only with bound parameters -------------------------------------------------------------------

HOSTILE = {
    "state": "Q'V\"; DROP TABLE units; --",
    "chamber": "federal'); DELETE FROM loads; --",
    "district": "1; UPDATE votes SET votes = 0",
    "party": "Harbour' OR '1'='1",
    "candidate": "Robert'); DROP TABLE votes; --",
}


def test_names_with_quotes_and_sql_load_fine_and_come_back_unchanged(lf):
    rows = [[2022, HOSTILE["state"], HOSTILE["chamber"], HOSTILE["district"], HOSTILE["party"], HOSTILE["candidate"], 120],
            [2022, HOSTILE["state"], HOSTILE["chamber"], HOSTILE["district"], "Upland", "O'Hara \"Jr\"; --", 80],
            [2022, HOSTILE["state"], HOSTILE["chamber"], "2", "Upland", "'; SELECT 1; --", 90]]
    source = "'); DROP TABLE loads; --"
    lf("load", lf.write("x'; DROP TABLE votes; --.csv", long_csv(rows)), "--source", source)
    tables = {r[0] for r in lf.rows("SELECT name FROM sqlite_master WHERE type = 'table'")}
    assert {"units", "votes", "loads", "contests"} <= tables
    got = lf.rows("SELECT cycle, state, chamber, district, party, candidate, votes FROM district_results ORDER BY votes DESC")
    # state codes are stored in upper case and chamber names in lower case (README); nothing else changes
    assert got == [(r[0], r[1].upper(), r[2].lower(), *r[3:]) for r in sorted(rows, key=lambda r: -r[6])]
    assert lf.rows("SELECT file_name, source FROM loads") == [("x'; DROP TABLE votes; --.csv", source)]
    exported = list(csv.DictReader(io.StringIO(lf("export", "results").stdout)))
    assert sorted(r["candidate"] for r in exported) == sorted(r[5] for r in rows)
    assert {r["state"] for r in exported} == {HOSTILE["state"].upper()}
    status = lf("status").stdout
    assert "x'; DROP TABLE votes; --.csv" in status
    # a correction of that unit finds it by its hostile keys (a lookup, not a string-built query)
    rows[0][6] = 130
    out = lf("load", lf.write("again.csv", long_csv(rows))).stdout
    assert "1 corrected" in out
    assert lf.rows("SELECT COUNT(*) FROM units") == [(2,)]


# -- gzip bomb ------------------------------------------------------------------------------------------

BOMB_GB = 2
CAP_MB = 8
BOMB_RSS_BOUND_MB = 200  # what we assert (python, pandas and the 8 MB cap); the measured value is in RELIABILITY.md


@pytest.fixture(scope="module")
def bomb(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("bomb") / "results.csv.gz"
    size = gzip_bomb(path, BOMB_GB * 2**30)
    assert size < 5 * 2**20, size  # 2 GiB of zeros in a few MB
    return path


def run_measured(args: list[str], root: Path) -> tuple[int, str, float]:
    """Run ``python -m monitor`` with ``args``; return (exit code, output, the child's peak RSS in MB)."""
    env = {k: v for k, v in os.environ.items() if k != ENV_VAR}
    out = root / "output.txt"
    code, peak = run_peak_rss([sys.executable, "-m", "monitor", "-w", str(root), *args], out, env)
    return code, out.read_text(encoding="utf-8", errors="replace"), peak


def test_a_gzip_bomb_is_refused_by_the_cap_without_exhausting_memory(tmp_path, migrated_store, bomb):
    ws = make_workspace(tmp_path / "ws", migrated_store, CONFIG + f"\n[load]\nmax_decompressed_mb = {CAP_MB}\n")
    code, err, peak = run_measured(["load", str(bomb)], ws.root)
    print(f"\ngzip bomb: {BOMB_GB} GiB of zeros in {bomb.stat().st_size / 2**20:.1f} MiB; refused with exit {code}, "
          f"peak RSS {peak:.0f} MB (cap {CAP_MB} MB)")
    assert code == 1, err
    assert f"results.csv.gz: gzip content is larger than the {CAP_MB} MB cap (load.max_decompressed_mb); refused" in err
    assert "Traceback" not in err and "internal error" not in err
    assert peak < BOMB_RSS_BOUND_MB
    conn = open_plain(ws.store_path)
    assert conn.execute("SELECT COUNT(*) FROM loads WHERE outcome != 'refused'").fetchone() == (0,)
    conn.close()


def test_the_cap_is_exact(lf):
    """Content of exactly the cap loads; one byte more is refused (the bound is not approximate)."""
    lf.configure("[load]\nmax_decompressed_mb = 1\n")
    body = long_csv([[2024, "QV", "federal", "1", "Harbour", "A", 3], [2024, "QV", "federal", "1", "Upland", "B", 2]])
    exact = body + "\n" * (2**20 - len(body.encode()))
    assert len(exact.encode()) == 2**20
    lf("load", lf.write_gz("exact.csv.gz", exact))
    result = lf("load", lf.write_gz("over.csv.gz", exact + "\n"), code=1)
    assert "larger than the 1 MB cap" in result.stderr


def test_the_watcher_rejects_a_gzip_bomb_too(tmp_path, migrated_store, bomb):
    ws = make_workspace(tmp_path / "ws", migrated_store, CONFIG + f"\n[load]\nmax_decompressed_mb = {CAP_MB}\n")
    os.link(bomb, ws.inbox / bomb.name)
    Service(ws, echo=False, publish=False).run_once(settle=0.0)
    report = (ws.root / "rejected" / f"{bomb.name}.error.txt").read_text(encoding="utf-8")
    assert f"larger than the {CAP_MB} MB cap" in report
    assert (ws.root / "rejected" / bomb.name).stat().st_size == bomb.stat().st_size
