"""Security of the published site (issue 9, item 5).

* Script and markup in every text field of the input (state, chamber, district, party label,
  candidate, a plan's note and source, a load's file name and ``--source``, even the parties'
  display names) render as text on every page, checked in headless Chromium: no dialog opens,
  no injected script runs, no injected element exists, no injected request is made.
* Every CSV download neutralises formula injection in every text column (OWASP "CSV Injection":
  a cell starting with ``=``, ``+``, ``-``, ``@``, tab or carriage return gets a leading quote).
* ``levelfield serve`` listens on 127.0.0.1 only.

The workspace goes through the real pipeline: ``levelfield load`` of invented files, plans,
compute, flags and ``levelfield publish``. All names are invented.
"""

from __future__ import annotations

import csv
import gzip
import json
import os
import random
import re
import socket
import subprocess
import sys
import threading
from pathlib import Path

import pytest
from click.testing import CliRunner

from conftest import ENV_VAR, csv_text, long_csv
from monitor.cli import main
from monitor.publish import downloads as D
from monitor.publish.serve import make_server

CHROMIUM = Path("/usr/bin/chromium")
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
        "--disable-sync", "--no-first-run", "--disable-quic"]


def payload(field: str) -> str:
    """Markup that, if it were ever parsed as HTML, would leave a trace: a dialog, a global, an element."""
    mark = f"window.__pwned=(window.__pwned||[]).concat('{field}')"
    return (f"<script>{mark};alert('{field}')</script><img src=pwn-{field}.png data-pwn={field} "
            f"onerror=\"{mark}\"><svg onload=\"{mark}\"></svg>\"'><b data-pwn={field}>{field}</b>")


FIELDS = ["state", "chamber", "district", "party", "candidate", "note", "source", "plan", "file", "load-source",
          "party-name"]
P = {f: payload(f) for f in FIELDS}
P["file"] = "\"'><img src=pwn-file.png data-pwn=file onerror=alert('file')><b data-pwn=file>file<b>"  # no "/"
FORMULAS = {"candidate": '=HYPERLINK("http://example.invalid","x")', "party": "+cmd|' /C calc'!A0",
            "district": "@SUM(1+1)", "state": "-2+3", "note": "=1+2", "load-source": "@import"}

def toml_text(text: str) -> str:
    return json.dumps(text)  # a JSON string is a valid TOML basic string for this text


CONFIG = f"""
[parties.a]
name = {toml_text("Harbour Party " + P["party-name"])}
labels = ["Harbour", {toml_text(P["party"])}]
colour = "#1b7f79"

[parties.b]
name = "Upland League"
labels = ["Upland"]
colour = "#c9861a"
"""


def results(rng: random.Random) -> str:
    states = ["KA", "LU", "MO", P["state"], FORMULAS["state"]]
    rows = []
    for cycle in (2018, 2020, 2022):
        for state in states:
            chambers = ["federal"] + ([P["chamber"]] if state == "KA" else [])
            for chamber in chambers:
                for d in range(1, 9):
                    district = {1: P["district"], 2: FORMULAS["district"]}.get(d, str(d))
                    a_label = P["party"] if d % 3 == 0 else "Harbour"
                    rows.append([cycle, state, chamber, district, a_label,
                                 P["candidate"] if d == 4 else f"Cand A{d}", rng.randint(2000, 9000)])
                    rows.append([cycle, state, chamber, district, "Upland",
                                 FORMULAS["candidate"] if d == 5 else f"Cand B{d}", rng.randint(2000, 9000)])
                    if d == 6:
                        rows.append([cycle, state, chamber, district, FORMULAS["party"], "Minor", 300])
    return long_csv(rows)


@pytest.fixture(scope="module")
def site(tmp_path_factory):
    root = tmp_path_factory.mktemp("site-security") / "ws"
    run = CliRunner()

    def lf(*args):
        result = run.invoke(main, ["-w", str(root), *map(str, args)])
        assert result.exit_code == 0 and "Traceback" not in result.output, result.output
        return result

    lf("init")
    (root / "levelfield.toml").write_text(CONFIG, encoding="utf-8")
    files = root.parent / "files"
    files.mkdir()
    data = files / f"{P['file']}.csv"
    data.write_text(results(random.Random(5)), encoding="utf-8")
    lf("load", data, "--source", P["load-source"])
    extra = files / "extra.csv"
    extra.write_text(long_csv([[2022, "NE", "federal", "AL", "Harbour", "Ode", 10], [2022, "NE", "federal", "AL", "Upland", "Ivo", 9]]),
                     encoding="utf-8")
    lf("load", extra, "--source", FORMULAS["load-source"])
    plans = files / "plans.csv"
    plans.write_text(csv_text(
        ["state", "chamber", "plan_id", "first_cycle", "last_cycle", "drawn_by", "note", "source"],
        [["KA", "federal", P["plan"], 2012, "", "party_a", P["note"], P["source"]],
         ["LU", "federal", "L1", 2012, "", "party_b", FORMULAS["note"], P["source"]],
         [P["state"], "federal", P["plan"], 2012, "", "court", P["note"], P["source"]]]), encoding="utf-8")
    lf("plans", plans)
    lf("compute")
    lf("publish")
    return root / "public"


def html_pages(out: Path) -> list[Path]:
    return sorted(out.rglob("*.html"))


def test_no_page_carries_raw_markup_from_the_data(site):
    pages = html_pages(site)
    assert len(pages) >= 10
    for page in pages:
        text = page.read_text(encoding="utf-8")
        assert "<b data-pwn" not in text and "<img src=pwn" not in text, page
        for field, value in P.items():
            assert value not in text, (page, field)
        assert "<script>window.__pwned" not in text and "<img src=pwn" not in text, page


@pytest.fixture(scope="module")
def served(site):
    server = make_server(site, 0, quiet=True)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    yield f"http://127.0.0.1:{server.server_address[1]}/"
    server.shutdown()
    server.server_close()


@pytest.mark.skipif(not CHROMIUM.exists(), reason="needs Debian's chromium at /usr/bin/chromium")
def test_markup_in_every_field_renders_as_text_on_every_page_in_chromium(site, served, tmp_path):
    api = pytest.importorskip("playwright.sync_api")
    pages = [p.relative_to(site).as_posix() for p in html_pages(site)]
    seen_as_text: set[str] = set()
    with api.sync_playwright() as pw:
        context = pw.chromium.launch_persistent_context(str(tmp_path / "profile"), executable_path=str(CHROMIUM),
                                                        headless=True, args=ARGS)
        try:
            page = context.new_page()
            dialogs, requests, errors = [], [], []
            page.on("dialog", lambda d: (dialogs.append(d.message), d.dismiss()))
            page.on("request", lambda r: requests.append(r.url))
            page.on("pageerror", lambda e: errors.append(str(e)))
            for rel in pages:
                page.goto(served + rel)
                page.wait_for_load_state("networkidle")
                page.wait_for_function(
                    "() => [...document.querySelectorAll('.chart-view')].every("
                    "v => v.classList.contains('chart-ready') || v.classList.contains('chart-failed'))",
                    timeout=30_000)
                page.mouse.move(300, 300)  # hover handlers and chart tooltips get their chance
                assert page.evaluate("() => window.__pwned === undefined"), (rel, page.evaluate("window.__pwned"))
                assert page.evaluate("() => document.querySelectorAll('[data-pwn], [onerror], [onload]').length") == 0, rel
                text = page.evaluate("() => document.body.innerText")
                # state codes are stored in upper case (README): compare whatever the case
                seen_as_text |= {f for f in P if f"data-pwn={f}>{f}<".casefold() in text.casefold()}
                assert not dialogs, (rel, dialogs)
                assert not errors, (rel, errors)
        finally:
            context.close()
    assert not [u for u in requests if "pwn-" in u], "an injected image was requested"
    print(f"\nmarkup shown as text on the pages for: {sorted(seen_as_text)}; {len(pages)} pages")
    # the markup is on the pages, as text, for the fields that pages show
    assert {"state", "chamber", "party-name", "note", "source", "plan", "file"} <= seen_as_text, seen_as_text


def test_every_csv_download_neutralises_formulas_in_every_text_column(site):
    package = json.loads((site / "downloads" / "datapackage.json").read_text(encoding="utf-8"))
    checked = 0
    seen = set()
    for resource in package["resources"]:
        if resource.get("format") != "csv":
            continue
        types = {f["name"]: f["type"] for f in resource["schema"]["fields"]}
        path = site / "downloads" / resource["path"]
        opener = gzip.open if resource.get("compression") == "gz" else open  # the large tables (issue 15)
        with opener(path, "rt", newline="", encoding="utf-8") as fh:
            for row in csv.DictReader(fh):
                for name, value in row.items():
                    checked += 1
                    if types[name] == "string":
                        assert not value.startswith(D.FORMULA_START) or D._PLAIN_NUMBER.match(value), \
                            (resource["name"], name, value)
                    else:
                        assert not value.startswith(("=", "@", "\t", "\r")), (resource["name"], name, value)
                    seen |= {f for f, v in FORMULAS.items() if "'" + v in value}
    assert checked > 1000
    assert seen == set(FORMULAS), seen  # every planted formula came through, neutralised


def test_serve_listens_on_127_0_0_1_only(site):
    env = {k: v for k, v in os.environ.items() if k != ENV_VAR}
    proc = subprocess.Popen([sys.executable, "-m", "monitor", "serve", "--port", "0", "--dir", str(site)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env, text=True)
    try:
        line = proc.stdout.readline()
        match = re.search(r"http://127\.0\.0\.1:(\d+)/", line)
        assert match, (line, proc.stderr.read() if proc.poll() is not None else "")
        port = int(match[1])
        with socket.create_connection(("127.0.0.1", port), timeout=5) as conn:
            conn.sendall(b"GET /index.html HTTP/1.0\r\n\r\n")
            assert conn.recv(64).startswith(b"HTTP/1.0 200")
        listening = [ln.split() for name in ("/proc/net/tcp", "/proc/net/tcp6") if Path(name).exists()
                     for ln in Path(name).read_text().splitlines()[1:]]
        ours = [cols[1] for cols in listening if cols[3] == "0A" and int(cols[1].split(":")[1], 16) == port]
        assert ours == ["0100007F:%04X" % port], ours  # 127.0.0.1 (little-endian hex), IPv4 only
        for address in other_addresses():
            with pytest.raises(OSError):
                socket.create_connection((address, port), timeout=2).close()
    finally:
        proc.terminate()
        proc.wait(timeout=30)
    help_text = CliRunner().invoke(main, ["serve", "--help"]).output
    assert "--host" not in help_text and "--bind" not in help_text


def other_addresses() -> list[str]:
    """This machine's non-loopback IPv4 addresses (none in some sandboxes)."""
    out = []
    try:
        with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as s:
            s.connect(("192.0.2.1", 9))  # TEST-NET-1: no packet is sent for a UDP connect
            address = s.getsockname()[0]
            if not address.startswith("127."):
                out.append(address)
    except OSError:
        pass
    return out
