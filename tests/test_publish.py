"""Tests of the published site (monitor.publish): pages, links, escaping, downloads, feed,
atomic and incremental builds.

The site is built from ``site_fixture`` (invented results through the real loader, invented
derived rows): those numbers exercise the rendering only and are not check values. Outside
references used here: the Frictionless Data Package / Table Schema specs v1
(https://specs.frictionlessdata.io/: descriptor properties, the field-type list, ``sha256:``
hashes), RFC 4287 (Atom: required feed and entry elements), RFC 3339 (timestamps), the OWASP
"CSV Injection" page (the formula-leading characters), and the Vega-Lite JSON schema bundled with
Altair (every chart spec is validated against it).
"""

from __future__ import annotations

import csv
import datetime as dt
import gzip
import hashlib
import html.parser
import io
import json
import re
import threading
import time
import urllib.request
import xml.etree.ElementTree as ET
from pathlib import Path, PurePosixPath

import numpy as np
import pandas as pd
import pytest

import site_fixture as sf
import store
from monitor.publish import build, collect
from monitor.publish import downloads as D
from monitor.publish import formats as F
from monitor.publish import pages as PG
from monitor.publish import paths as P
from monitor.curves import seats_votes_curves
from monitor.publish.reuse import MANIFEST
from monitor.publish.serve import make_server
from monitor.publish.views import Views

ROOT = Path(__file__).resolve().parents[1]
ATOM = "{http://www.w3.org/2005/Atom}"


# --- fixtures -----------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def fx(tmp_path_factory):
    fixture = sf.build(tmp_path_factory.mktemp("site") / "ws")
    yield fixture
    fixture.close()


@pytest.fixture(scope="module")
def site(fx):
    out = fx.root / "public"
    report = build(fx.db, fx.config, out)
    return out, report


def snapshot(folder: Path) -> dict[str, bytes]:
    return {p.relative_to(folder).as_posix(): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


def html_pages(folder: Path) -> list[Path]:
    return sorted(folder.rglob("*.html"))


class Links(html.parser.HTMLParser):
    """Every href/src, every id, and the text of <script> elements of a page."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.links: list[str] = []
        self.ids: set[str] = set()
        self.scripts: list[dict] = []
        self._script = None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        for name in ("href", "src"):
            if a.get(name) is not None:
                self.links.append(a[name])
        if "id" in a:
            self.ids.add(a["id"])
        if tag == "script":
            self._script = {"attrs": a, "text": ""}
            self.scripts.append(self._script)

    def handle_endtag(self, tag):
        if tag == "script":
            self._script = None

    def handle_data(self, data):
        if self._script is not None:
            self._script["text"] += data


def parse(path: Path) -> Links:
    parser = Links()
    parser.feed(path.read_text(encoding="utf-8"))
    return parser


def check_links(out: Path) -> int:
    """Check every href/src of every page under ``out``; return how many were checked."""
    parsed = {page.resolve(): parse(page) for page in html_pages(out)}
    checked = 0
    for page, links in parsed.items():
        rel_page = page.relative_to(out.resolve()).as_posix()
        for link in links.links:
            if link.startswith("data:"):
                continue
            assert not re.match(r"^[a-z][a-z0-9+.-]*:", link, re.I), f"{rel_page}: absolute link {link!r}"
            assert not link.startswith("/"), f"{rel_page}: root-relative link {link!r}"
            path, _, fragment = link.partition("#")
            target = (page.parent / path).resolve() if path else page
            assert target.is_file(), f"{rel_page}: broken link {link!r}"
            assert out.resolve() in target.parents, f"{rel_page}: link leaves the site: {link!r}"
            if fragment and target.suffix == ".html":
                ids = (parsed.get(target) or parse(target)).ids
                assert fragment in ids, f"{rel_page}: no id {fragment!r} in {path or rel_page}"
            checked += 1
    return checked


#: the page's one chart look (fonts, colours), which charts.js hands to the renderer with every chart
CHART_CONFIG_ID = "chart-config"


def chart_specs(folder: Path, with_config: bool = False) -> list[tuple[str, dict]]:
    """Every chart spec of every page; ``with_config``: each with its page's chart config merged
    in, as charts.js draws it."""
    out = []
    for page in html_pages(folder):
        scripts = [s for s in parse(page).scripts if s["attrs"].get("type") == "application/json"]
        config = [json.loads(s["text"]) for s in scripts if s["attrs"].get("id") == CHART_CONFIG_ID]
        for script in scripts:
            if script["attrs"].get("id") == CHART_CONFIG_ID:
                continue
            spec = json.loads(script["text"])
            if with_config:
                assert len(config) == 1, page
                spec = {**spec, "config": config[0]}
            out.append((f"{page.relative_to(folder)}#{script['attrs']['id']}", spec))
    return out


# --- the pages ------------------------------------------------------------------------------------
def test_every_page_is_built(fx, site):
    out, report = site
    data = collect(fx.db, fx.config)
    v = Views(data)
    expected = {P.HOME, P.WATCH, P.STATES, P.CYCLES, P.METHODS, P.DOWNLOADS, P.FEED, "downloads/datapackage.json",
                "assets/style.css", "assets/charts.js", "assets/sort.js", "assets/vega-runtime.js"}
    expected |= {v.state_path(s, c) for s, c in data.pairs()}
    expected |= {P.cycle_page(c) for c in sf.CYCLES}
    assert expected <= set(snapshot(out))
    assert len(data.pairs()) == len(sf.STATES) + 1  # every state's federal page and KA's lower chamber
    assert report.pages == len([p for p in expected if p.endswith(".html")])
    assert set(report.written) == set(snapshot(out))


def test_every_internal_link_resolves(site):
    out, _ = site
    assert check_links(out) > 200


def test_every_page_is_served_with_200(site):
    out, _ = site
    server = make_server(out, 0, quiet=True)
    assert server.server_address[0] == "127.0.0.1"
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    try:
        base = f"http://127.0.0.1:{server.server_address[1]}/"
        for rel in snapshot(out):
            with urllib.request.urlopen(base + urllib.request.pathname2url(rel)) as response:
                assert response.status == 200, rel
                body = response.read()
                assert body == (out / rel).read_bytes()
                if rel == P.FEED:
                    assert response.headers["Content-Type"] == "application/atom+xml"
    finally:
        server.shutdown()
        server.server_close()


def test_state_name_with_markup_is_escaped_everywhere(fx, site):
    out, _ = site
    data = collect(fx.db, fx.config)
    xss_page = out / Views(data).state_path(sf.XSS, "federal")
    escaped = html.escape(sf.XSS, quote=False)
    assert escaped == "&lt;SCRIPT&gt;ALERT(1)&lt;/SCRIPT&gt;"
    for page in html_pages(out):
        text = page.read_text(encoding="utf-8")
        assert sf.XSS not in text, page
        parser = parse(page)
        for script in parser.scripts:  # only our own scripts: local files or JSON data blocks
            src, kind = script["attrs"].get("src"), script["attrs"].get("type")
            assert (src and not script["text"].strip()) or kind == "application/json", (page, script)
            if kind == "application/json":
                assert "<" not in script["text"] and ">" not in script["text"]
    assert escaped in xss_page.read_text(encoding="utf-8")
    assert escaped in (out / P.HOME).read_text(encoding="utf-8")
    # inside chart data the name survives intact once the JSON is read
    specs = [spec for _, spec in chart_specs(out)]
    assert any(sf.XSS in json.dumps(spec, ensure_ascii=False) for spec in specs)


def test_json_script_cannot_close_its_element():
    value = {"name": "</script><script>alert(1)</script><!--", "amp": "a & b", "sep": "\u2028"}
    text = str(PG.json_script(value))
    assert "<" not in text and ">" not in text and "&" not in text and "\u2028" not in text
    assert json.loads(text) == value


def test_autoescape_is_on_for_every_template():
    env = PG.environment()
    for name in sorted(p.name for p in PG.TEMPLATE_DIR.glob("*.html")):
        template = env.get_template(name)
        assert env.autoescape is True or env.autoescape(name), name
        assert template is not None
    assert str(env.from_string("{{ x }}").render(x="<b>")) == "&lt;b&gt;"


def test_chart_specs_are_valid_vega_lite_with_party_colours(fx, site):
    from altair.utils.schemapi import validate_jsonschema
    from altair.vegalite.v6.schema import load_schema

    out, _ = site
    schema = load_schema()
    specs = chart_specs(out, with_config=True)  # the page's config is validated with each chart
    assert len(specs) > 40
    for where, spec in specs:
        validate_jsonschema(spec, schema)  # raises on an invalid spec
        assert spec["$schema"].startswith("https://vega.github.io/schema/vega-lite/"), where
    text = json.dumps([s for _, s in specs])
    assert sf.PARTY_A[1] in text and sf.PARTY_B[1] in text


def test_every_chart_has_a_description_and_a_data_table(site):
    out, _ = site
    found = 0
    shared_tables = 0
    for page in html_pages(out):
        text = page.read_text(encoding="utf-8")
        figures = re.findall(r'<figure class="chart" id="([^"]+)">(.*?)</figure>', text, re.S)
        # every chart spec on the page belongs to a figure this pattern found (none slips past it)
        assert len(figures) == text.count('<script type="application/json" id="') - text.count(f'id="{CHART_CONFIG_ID}"'), page
        found += len(figures)
        for cid, body in figures:
            assert f'data-spec="{cid}-spec"' in body and f'aria-describedby="{cid}-desc"' in body
            desc = re.search(rf'<p class="chart-desc" id="{cid}-desc">(.*?)</p>', body, re.S)
            assert desc and len(desc.group(1).strip()) > 40, (page, cid)
            ref = re.search(r'<p class="small chart-data-ref">.*?<a href="#([^"]+)">', body, re.S)
            if ref:  # its numbers are in the section's every-state table, which the page holds
                shared = re.search(rf'<details class="chart-data measure-table" id="{ref[1]}">(.*?)</details>', text, re.S)
                assert shared, (page, cid, ref[1])
                body = shared[1]
                shared_tables += 1
            rows = re.findall(r"<tbody>(.*?)</tbody>", body, re.S)
            assert rows and "<td>" in rows[0], (page, cid)
    assert shared_tables > 10
    assert found > 40  # the fixture's pages hold charts: a pattern that finds none fails here


def test_inferred_eras_and_unofficial_results_are_marked(fx, site):
    out, _ = site
    v = Views(collect(fx.db, fx.config))
    lower = (out / v.state_path("KA", "state_lower")).read_text(encoding="utf-8")
    assert "badge-inferred" in lower  # the table's badge
    eras = [e for where, spec in chart_specs(out) if where.startswith(v.state_path("KA", "state_lower"))
            for e in spec.get("datasets", {}).get("eras", [])]
    assert eras and {e["era_label"] for e in eras} == {"not recorded (era inferred)"}  # the charts' era labels
    assert "drawn by not recorded (era inferred)" in lower or "<td>not recorded (era inferred)" in lower  # the plans table
    federal = (out / v.state_path("KA", "federal")).read_text(encoding="utf-8")
    assert "badge-inferred" not in federal.split("<main")[1].split("</main>")[0]
    unofficial = (out / v.state_path(*sf.UNOFFICIAL[1:])).read_text(encoding="utf-8")
    assert "badge-unofficial" in unofficial
    assert "badge-unofficial" in (out / P.HOME).read_text(encoding="utf-8")
    assert "badge-unofficial" in (out / P.cycle_page(sf.UNOFFICIAL[0])).read_text(encoding="utf-8")
    assert "badge-unofficial" not in (out / P.cycle_page(2016)).read_text(encoding="utf-8").split("<footer")[0]


def test_footer_has_caution_and_provenance(fx, site):
    out, _ = site
    sha = {r[0]: r[1] for r in fx.db.execute("SELECT file_name, sha256 FROM loads")}
    for page in html_pages(out):
        footer = page.read_text(encoding="utf-8").split('<footer class="footer">')[1]
        assert "Indicators, not legal findings" in footer and "Defer to counsel and the courts" in footer
        assert any(s in footer for s in sha.values()), page  # every page, the methods page too
        assert re.search(r"loaded \d{4}-\d{2}-\d{2}", footer), page  # when
    for name in (P.HOME, P.METHODS):  # the pages about everything list every load
        footer = (out / name).read_text(encoding="utf-8").split('<footer class="footer">')[1]
        assert all(s in footer for s in sha.values()), name


def test_methods_page_documents_every_measure_and_setting(fx, site):
    from monitor.measures import MEASURES

    out, _ = site
    text = (out / P.METHODS).read_text(encoding="utf-8")
    for doc in MEASURES:
        assert f'id="measure-{doc.name}"' in text, doc.name
    for name in ("uncontested.policy", "measures.competitive_window"):
        assert f"<code>{name}</code>" in text
    for caution in ("Indicators, not legal findings", "Unofficial until certified", "Imputations matter",
                    "Defer to counsel and the courts"):
        assert caution in text
    assert "proposals, not law" in text


def test_watch_page_lists_every_plan_on_watch(fx, site):
    out, _ = site
    text = (out / P.WATCH).read_text(encoding="utf-8")
    plans = [r[0] for r in fx.db.execute("SELECT plan_id FROM watch")]
    assert plans and all(re.escape(p) and p.replace("<", "&lt;").replace(">", "&gt;") in text for p in plans)
    assert 'class="sortable watch"' in text and "assets/sort.js" in text


# --- downloads --------------------------------------------------------------------------------------
def read_csv_download(out: Path, name: str) -> str:
    """A CSV download's text, decompressed when it is published gzip-compressed."""
    path = out / "downloads" / D.csv_path(name)
    content = path.read_bytes()
    return (gzip.decompress(content) if path.suffix == ".gz" else content).decode("utf-8")


def _parse_cell(value: str, kind: str):
    if value == "":
        return None
    if kind == "integer":
        assert re.fullmatch(r"-?\d+", value), value
        return int(value)
    if kind == "number":
        return float(value)
    if kind == "boolean":
        assert value in ("true", "false"), value
        return value == "true"
    return value


def test_datapackage_descriptor_validates_against_its_field_list(site):
    out, _ = site
    folder = out / "downloads"
    package = json.loads((folder / "datapackage.json").read_text(encoding="utf-8"))
    assert package["profile"] == "data-package" and re.fullmatch(r"[a-z0-9._-]+", package["name"])
    dt.datetime.fromisoformat(package["created"].replace("Z", "+00:00"))
    names = [r["name"] for r in package["resources"]]
    assert len(names) == len(set(names))
    assert {"results", "measures", "flags"} <= set(names)
    for res in package["resources"]:
        assert re.fullmatch(r"[a-z0-9._-]+", res["name"]), res["name"]
        path = folder / res["path"]
        assert path.is_file() and PurePosixPath(res["path"]).parts[0] != ".."
        content = path.read_bytes()
        assert res["bytes"] == len(content)
        assert res["hash"] == "sha256:" + hashlib.sha256(content).hexdigest()
        if res.get("compression") == "gz":  # bytes and hash are the published (compressed) file's
            assert res["path"].endswith(".csv.gz") and res["name"] in D.COMPRESSED
            content = gzip.decompress(content)
        fields = res["schema"]["fields"]
        assert not D.check_types([(f["name"], f["type"], "") for f in fields])
        assert all(f["type"] in D.FRICTIONLESS_TYPES for f in fields)
        names = [f["name"] for f in fields]
        if res["format"] == "csv":
            assert res["profile"] == "tabular-data-resource" and res["mediatype"] == "text/csv"
            rows = list(csv.reader(io.StringIO(content.decode("utf-8"))))
            assert rows[0] == names, res["name"]
            for row in rows[1:]:
                assert len(row) == len(names)
                for value, f in zip(row, fields):
                    _parse_cell(value, f["type"])
        else:
            assert res["format"] == "json" and res["mediatype"] == "application/json"
            records = json.loads(content)
            assert all(list(r) == names for r in records), res["name"]


def test_csv_cells_are_neutralised_but_numbers_stay_numbers(site):
    out, _ = site
    results = list(csv.DictReader(io.StringIO(read_csv_download(out, "results"))))
    candidates = {r["candidate"] for r in results}
    parties = {r["party"] for r in results}
    assert "'" + sf.INJECTION_CANDIDATE in candidates and sf.INJECTION_CANDIDATE not in candidates
    assert "'@Minor Circle" in parties
    for row in results:
        for value in row.values():
            assert not value.startswith(D.FORMULA_START) or re.fullmatch(r"-?[\d.]+(e-?\d+)?", value), value
    measures = list(csv.DictReader(io.StringIO(read_csv_download(out, "measures"))))
    negative = [r["value"] for r in measures if r["value"].startswith("-")]
    assert negative and all(float(v) < 0 for v in negative)
    # the large tables come once, as CSV (weight); the small ones also as JSON, the same rows in original text
    assert not (out / "downloads/results.json").exists() and not (out / "downloads/measures.json").exists()
    for name in ("watch", "flags", "plans"):
        records = json.loads((out / f"downloads/{name}.json").read_text(encoding="utf-8"))
        rows = list(csv.DictReader(io.StringIO((out / f"downloads/{name}.csv").read_text(encoding="utf-8"))))
        assert records and len(records) == len(rows), name
        assert [str(r["state"]) for r in records] == [r["state"] for r in rows], name


@pytest.mark.parametrize("text, expected", [
    ("=SUM(A1:A2)", "'=SUM(A1:A2)"), ("+cmd|' /C calc'!A0", "'+cmd|' /C calc'!A0"), ("-2+3", "'-2+3"),
    ("@SUM(1)", "'@SUM(1)"), ("\tx", "'\tx"), ("\rx", "'\rx"), ("-1", "-1"), ("+3.5", "+3.5"), ("-1e-3", "-1e-3"),
    ("Harbour", "Harbour"), ("a=b", "a=b"), ("", ""),
])
def test_neutralise(text, expected):
    assert D.neutralise(text) == expected


def test_csv_writer_keeps_numbers_and_neutralises_text():
    frame = pd.DataFrame({"n": [-0.5, np.nan, 3.0], "i": [1, -2, None], "s": ["=1+1", "-x", None],
                          "b": [1, 0, None]})
    fields = [("n", "number", ""), ("i", "integer", ""), ("s", "string", ""), ("b", "boolean", "")]
    rows = list(csv.reader(io.StringIO(D.to_csv(frame, fields).decode())))
    assert rows == [["n", "i", "s", "b"], ["-0.5", "1", "'=1+1", "true"], ["", "-2", "'-x", "false"],
                    ["3", "", "", ""]]


# --- feed ---------------------------------------------------------------------------------------
def _check_rfc_4287(root, out: Path) -> list:
    """The required feed and entry elements of RFC 4287 (sections 4.1.1, 4.1.2), RFC 3339 UTC
    timestamps, unique ``urn:uuid:`` ids; every relative link resolves in ``out``."""
    assert root.tag == f"{ATOM}feed"
    for tag in ("id", "title", "updated"):
        assert root.find(f"{ATOM}{tag}") is not None, tag
    assert root.find(f"{ATOM}author/{ATOM}name").text
    entries = root.findall(f"{ATOM}entry")
    ids = [e.find(f"{ATOM}id").text for e in entries]
    assert len(set(ids)) == len(ids) and all(i.startswith("urn:uuid:") for i in ids)
    stamp = re.compile(r"^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}Z$")  # RFC 3339, UTC
    assert stamp.match(root.find(f"{ATOM}updated").text)
    for e in entries:
        assert e.find(f"{ATOM}title").text and stamp.match(e.find(f"{ATOM}updated").text)
        link = e.find(f"{ATOM}link")
        if link is not None:
            assert (out / link.get("href")).is_file()
    return entries


def _seen_nothing(feed: bytes) -> bytes:
    """A previous feed that had seen no flag event (every stored event is then news)."""
    return re.sub(rb"<lf:events-through>\d+</lf:events-through>", b"<lf:events-through>0</lf:events-through>", feed)


def test_atom_feed_follows_rfc_4287(fx, site):
    from monitor.publish.feed import atom_feed

    out, _ = site
    first = (out / P.FEED).read_bytes()
    entries = _check_rfc_4287(ET.fromstring(first), out)
    n_watch = fx.db.execute("SELECT COUNT(*) FROM watch").fetchone()[0]
    assert [e.find(f"{ATOM}title").text for e in entries] == [f"Site published, {n_watch} plans on watch"]
    # a later build: one entry per flag event it had not seen, the first build's entry kept
    data = collect(fx.db, fx.config)
    later = ET.fromstring(atom_feed(data, Views(data), P.FEED, _seen_nothing(first)))
    entries = _check_rfc_4287(later, out)
    assert len(entries) == fx.db.execute("SELECT COUNT(*) FROM flag_events").fetchone()[0] + 1
    assert any(sf.XSS in e.find(f"{ATOM}title").text for e in entries)  # text content, escaped by the XML writer


# --- the seats-votes curve ------------------------------------------------------------------------
def test_swing_curve_matches_the_definition(fx):
    """The step vertices against uniform swing computed directly from its definition: shift
    every district share by v - V and count the seats (a tie counting half)."""
    data = collect(fx.db, fx.config)
    rows = data.contests[np.isfinite(data.contests["share_used"].to_numpy(float))]
    assert not data.curves.empty
    for (state, chamber), curve in data.curves.groupby(["state", "chamber"]):
        cycle = int(curve["cycle"].iloc[0])
        unit = rows[(rows["state"] == state) & (rows["chamber"] == chamber) & (rows["cycle"] == cycle)]
        va, vb = unit["votes_a_used"].to_numpy(float), unit["votes_b_used"].to_numpy(float)
        x, V = va / (va + vb), va.sum() / (va + vb).sum()
        grid = np.linspace(0.001, 0.999, 499)
        direct = np.array([np.mean(np.where(x + (v - V) > 0.5, 1.0, np.where(x + (v - V) < 0.5, 0.0, 0.5)))
                           for v in grid])
        # the step curve read at v: the value of the last vertex at or before v
        vert = curve.sort_values("vote")
        idx = np.searchsorted(vert["vote"].to_numpy(), grid, side="right") - 1
        stepped = vert["seat_share"].to_numpy()[idx]
        assert np.array_equal(stepped, direct), (state, chamber)
        pts = data.curve_points[(data.curve_points["state"] == state) & (data.curve_points["chamber"] == chamber)]
        obs = pts[pts["point"] == "observed"].iloc[0]
        assert obs["vote"] == pytest.approx(V)
        assert obs["seats"] == pytest.approx(float(unit["seats_a"].sum()))  # the seats actually won


def test_swing_curve_of_a_hand_built_plan():
    """Five districts at 30/40/45/47/80% with equal turnout, worked by hand: V = 48.4%; the curve
    steps where each district reaches 50% (v = V + 1/2 - x_i). At v = 50% every share rises by 1.6
    points (31.6/41.6/46.6/48.6/81.6): a holds 1 of 5. At the flipped vote 1 - V = 51.6% they rise
    by 3.2 points and the 47% seat reaches 50.2%: 2 of 5."""
    shares = [0.30, 0.40, 0.45, 0.47, 0.80]
    contests = pd.DataFrame({"cycle": 2000, "state": "ZZ", "chamber": "federal", "district": list("abcde"),
                             "votes_a_used": [1000 * s for s in shares], "votes_b_used": [1000 * (1 - s) for s in shares],
                             "share_used": shares, "imputed": False})
    curve, points = seats_votes_curves(contests)
    V = np.mean(shares)
    assert curve["vote"].tolist() == pytest.approx([0.0, V + 0.5 - 0.80, V + 0.5 - 0.47, V + 0.5 - 0.45,
                                                    V + 0.5 - 0.40, V + 0.5 - 0.30, 1.0])
    assert curve["seat_share"].tolist() == pytest.approx([0.0, 0.2, 0.4, 0.6, 0.8, 1.0, 1.0])
    by = points.set_index("point")
    assert by.loc["observed", "seats"] == 1 and by.loc["flipped vote", "seats"] == 2
    assert by.loc["even vote", "seat_share"] == pytest.approx(0.2)


# --- build: atomic, incremental, reproducible ----------------------------------------------------
def _leftovers(out: Path) -> list[Path]:
    return [p for p in out.parent.iterdir() if p.name.startswith(f".{out.name}.") and not p.name.endswith(".lock")]


def test_failed_render_leaves_the_previous_site_whole(fx, site, monkeypatch):
    out, _ = site
    before = snapshot(out)
    calls = {"n": 0}
    real = Views.state

    def failing(self, *args, **kwargs):
        calls["n"] += 1
        if calls["n"] == 3:
            raise RuntimeError("render failed midway")
        return real(self, *args, **kwargs)

    monkeypatch.setattr(Views, "state", failing)
    with pytest.raises(RuntimeError, match="midway"):
        build(fx.db, fx.config, out, full=True)  # every page rendered (nothing changed since the last build)
    assert calls["n"] == 3
    assert snapshot(out) == before
    assert not _leftovers(out)


def test_failed_write_leaves_the_previous_site_whole(fx, tmp_path, monkeypatch):
    out = tmp_path / "public"
    build(fx.db, fx.config, out)
    (out / P.HOME).write_bytes(b"old")  # so that the next build has pages to write
    (out / P.WATCH).write_bytes(b"old")
    before = snapshot(out)
    real = Path.write_bytes
    calls = {"n": 0}

    def failing(self, data):
        calls["n"] += 1
        if calls["n"] == 2:
            raise OSError(28, "No space left on device")
        return real(self, data)

    monkeypatch.setattr(Path, "write_bytes", failing)
    with pytest.raises(OSError, match="No space"):
        build(fx.db, fx.config, out)
    assert calls["n"] == 2
    assert snapshot(out) == before
    assert not _leftovers(out)


def test_rebuild_without_change_rewrites_nothing(fx, tmp_path):
    out = tmp_path / "public"
    first = build(fx.db, fx.config, out)
    stats = {p: (p.stat().st_ino, p.stat().st_mtime_ns) for p in out.rglob("*") if p.is_file()}
    content = snapshot(out)
    second = build(fx.db, fx.config, out)
    assert first.written and not second.written and not second.removed
    assert sorted(second.unchanged) == sorted(content)
    assert snapshot(out) == content
    assert {p: (p.stat().st_ino, p.stat().st_mtime_ns) for p in out.rglob("*") if p.is_file()} == stats


def test_stale_files_are_removed(fx, tmp_path):
    out = tmp_path / "public"
    build(fx.db, fx.config, out)
    (out / "state" / "old.html").write_text("stale")
    report = build(fx.db, fx.config, out)
    assert report.removed == ["state/old.html"] and not (out / "state" / "old.html").exists()


def test_correcting_one_state_rewrites_only_its_pages_and_the_national_ones(tmp_path):
    fx = sf.build(tmp_path / "ws")
    try:
        out = tmp_path / "public"
        build(fx.db, fx.config, out)
        v = Views(collect(fx.db, fx.config))
        before = snapshot(out)
        sf.correct_state(fx, "LU", 2022)
        report = build(fx.db, fx.config, out)
        after = snapshot(out)
        changed = {p for p in after if before.get(p) != after[p]}
        assert changed == set(report.written)
        lu = {v.state_path("LU", "federal")}
        others = {v.state_path(s, c) for s, c in v.d.pairs()} - lu
        assert lu <= changed
        assert not changed & others, changed & others
        for page in others:
            assert after[page] == before[page]
        # the methods page lists every load in its footer, so a new load changes it too
        national = {P.HOME, P.STATES, P.CYCLES, P.WATCH, P.DOWNLOADS, P.FEED, P.METHODS, P.cycle_page(2022)}
        # and the record of every page's inputs (monitor.publish.reuse.MANIFEST) says what changed
        assert changed - lu <= national | {p for p in after if p.startswith("downloads/")} | {MANIFEST}
        assert P.cycle_page(2016) not in changed
        assert not {p for p in changed if p.startswith("assets/")}
        assert {P.HOME, P.cycle_page(2022), "downloads/results.csv.gz"} <= changed
    finally:
        fx.close()


def test_timestamps_come_from_the_data_or_source_date_epoch(fx, tmp_path, monkeypatch):
    monkeypatch.delenv("SOURCE_DATE_EPOCH", raising=False)
    a = tmp_path / "a"
    build(fx.db, fx.config, a)
    time.sleep(1.1)  # a wall-clock timestamp would now differ
    b = tmp_path / "b"
    build(fx.db, fx.config, b)
    assert snapshot(a) == snapshot(b)
    latest = fx.db.execute("SELECT MAX(loaded_at) FROM loads").fetchone()[0]
    package = json.loads((a / "downloads/datapackage.json").read_text())
    assert dt.datetime.fromisoformat(package["created"].replace("Z", "+00:00")) == dt.datetime.fromisoformat(latest)
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1700000000")
    c = tmp_path / "c"
    build(fx.db, fx.config, c)
    package = json.loads((c / "downloads/datapackage.json").read_text())
    assert package["created"] == "2023-11-14T22:13:20Z"


def test_a_fresh_store_publishes_a_valid_empty_site(tmp_path):
    sf_root = tmp_path / "ws"
    sf_root.mkdir()
    (sf_root / "levelfield.toml").write_text(sf.CONFIG, encoding="utf-8")
    from monitor.config import load_config

    db = store.connect(sf_root / "history.sqlite")
    out = tmp_path / "public"
    report = build(db, load_config(sf_root / "levelfield.toml"), out)
    assert report.pages == 6  # home, watch, states, cycles, methods, downloads
    assert "Nothing here yet" in (out / P.HOME).read_text(encoding="utf-8")
    root = ET.fromstring((out / P.FEED).read_bytes())
    assert not root.findall(f"{ATOM}entry") and root.find(f"{ATOM}updated").text == "1970-01-01T00:00:00Z"
    rows = list(csv.reader(io.StringIO(read_csv_download(out, "results"))))
    assert len(rows) == 1 and rows[0][:3] == ["cycle", "state", "chamber"]
    json.loads((out / "downloads/datapackage.json").read_text())
    for page in html_pages(out):
        for link in parse(page).links:
            if not link.startswith("data:"):
                assert (page.parent / link.partition("#")[0]).exists(), (page, link)
    db.conn.close()


def test_cli_publish_builds_the_workspace_site(fx, tmp_path):
    from click.testing import CliRunner

    from monitor.cli import main

    out = tmp_path / "site"
    result = CliRunner().invoke(main, ["-w", str(fx.root), "publish", "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert (out / P.HOME).is_file() and "published" in result.output
    result = CliRunner().invoke(main, ["-w", str(fx.root), "serve", "--dir", str(tmp_path / "nothing")])
    assert result.exit_code == 2 and "publish" in result.output


def test_slugs_are_safe_and_distinct():
    codes = ["JS", "js", "a/b", "..", "<script>alert(1)</script>", "state_lower", ""]
    slugs = P.unique_slugs(codes)
    assert len(set(slugs.values())) == len(codes)
    for s in slugs.values():
        assert re.fullmatch(r"[a-z0-9_-]+", s)
    assert P.slug("JS") == "js" and P.slug("state_lower") == "state_lower"
    assert P.relative("assets/style.css", "state/js/federal.html") == "../../assets/style.css"


# --- the sample history (switched on when the pipeline can run on it) ------------------------------
SAMPLE = ROOT / "sample_history"


def _pipeline_ready() -> bool:
    if not (SAMPLE / "results").is_dir() or not (SAMPLE / "plans.csv").is_file():
        return False
    try:
        from monitor.cli import main
    except ImportError:
        return False
    return {"load", "plans", "compute"} <= set(main.commands)


@pytest.mark.skipif(not _pipeline_ready(), reason="needs sample_history/results and the load/plans/compute commands")
def test_sample_history_site(sample_workspace, tmp_path):
    """The whole sample history through the real pipeline (the shared ``sample_workspace``), then
    the site, built into a folder of its own (the workspace is only read)."""
    from monitor.config import load_config

    ws = sample_workspace
    out = tmp_path / "public"
    report = build(ws, out=out)
    assert report.pages > 50 and not report.removed
    # weight budget (README "Weight"): no HTML page over 300 KB; no JSON twin of the large tables
    from monitor.publish.weight import weigh

    weight = weigh(out)  # the same check make bench reports on the x1 site
    assert weight.pages == report.pages and weight.over == {}
    assert not (out / "downloads/results.json").exists() and (out / "downloads/results.csv.gz").is_file()
    db = store.connect(ws.store_path)
    try:
        data = collect(db, load_config(ws.config_path))
        v = Views(data)
        for state, chamber in data.pairs():
            assert (out / v.state_path(state, chamber)).is_file()
        for cycle in data.cycles:
            assert (out / P.cycle_page(cycle)).is_file()
        # the curve's marked points agree with the engine's stored uniform-swing measures
        m = data.measures.set_index(["cycle", "state", "chamber", "measure"])["value"]
        checked = 0
        for p in data.curve_points.itertuples():
            key = (p.cycle, p.state, p.chamber)
            if p.point == "flipped vote":
                assert p.seats == pytest.approx(m[key + ("seats_at_flipped_vote",)], abs=1e-9), key
                checked += 1
            if p.point == "even vote":
                assert p.seat_share - 0.5 == pytest.approx(m[key + ("partisan_bias",)], abs=1e-9), key
        assert checked >= 30
        # one vote share on a state page: the seats-and-votes chart's is the stored measure's, and
        # the national pool conditions on it; its seat share is the one the pool's excess compares
        pool = data.pool.set_index(["cycle", "state", "chamber"])
        compared = 0
        for state, chamber in data.pairs():
            for r in v._seats_over_time(state, chamber, data.units).itertuples():
                key = (r.cycle, state, chamber)
                assert r.vote_share == pytest.approx(m[key + ("vote_share",)], abs=1e-12), key
                assert r.seat_share == pytest.approx(m[key + ("seat_share",)], abs=1e-12), key
                if key in pool.index and not pd.isna(pool.loc[key, "vote_share"]):
                    assert r.vote_share == pytest.approx(pool.loc[key, "vote_share"], abs=1e-9), key
                    assert r.seat_share == pytest.approx(pool.loc[key, "seats_a"] / pool.loc[key, "districts"]), key
                    compared += 1
        assert compared > 500
        watch = (out / P.WATCH).read_text(encoding="utf-8")
        for plan in data.watch["plan_id"]:
            assert plan in watch
        # a staggered senate is judged as a whole chamber (README "Staggered chambers"): its plan in
        # force is listed with the plans in force (not as a past plan), linked to the senate's page,
        # and its latest cycle's flag is on the home page under the upper chamber
        in_force, past = v.watch_split()
        whole = in_force[in_force["chamber"].str.endswith("_whole")]
        assert len(whole) >= 2, in_force[["state", "chamber", "plan_id"]]
        assert not past["plan_id"].isin(whole["plan_id"]).any()
        force_part = watch.split("Past plans on watch")[0]
        for r in whole.itertuples():
            assert r.plan_id in force_part
            assert f'href="{v.state_path(r.state, r.chamber.removesuffix("_whole"))}"' in force_part
        upper = [s["state_code"] for s in v.flagged_in(data.chamber_latest()["state_upper"], "state_upper", "")]
        assert set(whole["state"]) <= set(upper), upper
    finally:
        db.conn.close()
    assert check_links(out) > 1000
    test_datapackage_descriptor_validates_against_its_field_list((out, None))


def test_docstring_examples_hold():
    import doctest

    from monitor.publish import downloads, paths

    for module in (paths, downloads):
        result = doctest.testmod(module)
        assert result.attempted and not result.failed, module.__name__


# --- chart readability (spec-level: what each chart asks the renderer to draw) ---------------------
def _specs_named(out: Path, marker: str) -> list[tuple[str, dict]]:
    return [(where, spec) for where, spec in chart_specs(out) if marker in where.split("#")[1]]


def _layers_on(spec: dict, dataset: str) -> list[dict]:
    return [layer for layer in spec["layer"] if layer.get("data", {}).get("name") == dataset]


def _mark(layer: dict) -> dict:
    return layer["mark"] if isinstance(layer["mark"], dict) else {"type": layer["mark"]}


def test_seats_votes_curve_points_are_distinguishable_and_keyed(site):
    """The observed, flipped-vote and even-vote points lie close together near 50%: each gets its
    own shape, size and fill, a direct label, a legend entry and a sentence in the description;
    the curve and the seats = votes diagonal get legend entries too."""
    out, _ = site
    specs = _specs_named(out, "chart-swing-spec")
    assert specs
    names = ["observed", "flipped vote", "even vote"]
    for where, spec in specs:
        points = [layer for layer in _layers_on(spec, "points") if _mark(layer)["type"] == "point"]
        assert len(points) == 1, where
        enc = points[0]["encoding"]
        for channel in ("shape", "size", "color", "fill"):
            scale = enc[channel]["scale"]
            assert enc[channel]["field"] == "point" and scale["domain"] == names, (where, channel)
            assert enc[channel].get("legend", {}) is not None, (where, channel)  # shown in the key
            if channel != "fill":  # each of shape, size and colour tells all three apart on its own
                assert len(set(map(str, scale["range"]))) == 3, (where, channel)
        fills = dict(zip(names, enc["fill"]["scale"]["range"]))
        assert fills["flipped vote"] != "transparent" and fills["observed"] == fills["even vote"] == "transparent", where
        sizes = dict(zip(enc["size"]["scale"]["domain"], enc["size"]["scale"]["range"]))
        assert sizes["observed"] > sizes["even vote"] > sizes["flipped vote"], where  # nested
        assert enc["order"]["field"] == "z", where  # the large ring first, open marks over the filled one
        z = {p["point"]: p["z"] for p in spec["datasets"]["points"]}
        assert z["even vote"] > z["flipped vote"] > z["observed"], where
        # one direct label per point, each offset in its own direction
        labels = {}
        for layer in _layers_on(spec, "points"):
            if _mark(layer)["type"] == "text" and _mark(layer).get("color") != "#ffffff":
                name = layer["transform"][0]["filter"]["equal"]
                labels[name] = (_mark(layer)["dx"], _mark(layer)["dy"])
        assert set(labels) == set(names) and len(set(labels.values())) == 3, (where, labels)
        # the lines have legend entries: the curve and the diagonal, told apart by stroke and dash
        keyed = [layer for layer in spec["layer"] if "strokeDash" in layer.get("encoding", {})]
        assert len(keyed) == 2, where
        domain = keyed[0]["encoding"]["strokeDash"]["scale"]["domain"]
        assert any("diagonal" in d for d in domain) and any("curve" in d for d in domain), where
        dashes = keyed[0]["encoding"]["strokeDash"]["scale"]["range"]
        assert dashes[0] != dashes[1], where
    text = "".join(page.read_text(encoding="utf-8") for page in html_pages(out) if "state" in page.parts)
    for words in ("open circle", "filled diamond", "open square", "diagonal"):
        assert words in text, words


def test_era_labels_sit_in_a_band_above_the_data(site):
    """Plan-era labels are their own text layer, placed at a fixed pixel height above the plot
    (negative y), each cut to its era's drawn width; nothing of them is drawn over the data."""
    out, _ = site
    checked = 0
    for where, spec in chart_specs(out):
        if "eras" not in spec.get("datasets", {}):
            continue
        groups = [layer["layer"] for layer in spec["layer"] if "layer" in layer]
        texts = [t for g in groups for t in g if t.get("data", {}).get("name") == "eras" and _mark(t)["type"] == "text"]
        assert sorted(t["encoding"]["text"]["field"] for t in texts) == ["era_label", "era_no"], where
        for label in texts:
            y = label["encoding"]["y"]
            assert set(y) == {"value"} and y["value"] < 0, (where, y)
            # never cut: the whole label, else the era's number, else nothing (no "limit" that truncates)
            assert "limit" not in _mark(label) and "datum.chars" in _mark(label)["opacity"]["expr"], where
        rects = [layer for layer in _layers_on(spec, "eras") if _mark(layer)["type"] == "rect"]
        assert rects and all(r["encoding"]["y"]["value"] <= y["value"] for r in rects), where  # the band is shaded
        checked += 1
    assert checked >= 10


def test_cycle_axes_never_crowd_their_labels(site):
    """Every cycle axis has explicit ticks at least two years apart and at most seven of them,
    labels centred on their ticks (not pushed flush, which made '2020' and '2025' touch) and
    overlap handling switched on."""
    out, _ = site
    checked = 0
    for where, spec in chart_specs(out):
        for layer in spec["layer"]:
            x = layer.get("encoding", {}).get("x", {})
            if x.get("field") != "cycle":
                continue
            axis, (lo, hi) = x["axis"], x["scale"]["domain"]
            assert axis["labelOverlap"] in (True, "greedy", "parity"), where
            assert axis["labelFlush"] is False, where
            values = axis["values"]
            assert 1 <= len(values) <= 7 and all(lo < v < hi for v in values), (where, values)
            assert all(b - a >= 2 for a, b in zip(values, values[1:])), (where, values)
            checked += 1
    assert checked >= 10


def test_long_cycle_axes_get_decade_ticks():
    from monitor.publish.chartkit import _cycle_ticks

    assert _cycle_ticks(1971, 2027) == [1980, 1990, 2000, 2010, 2020]
    assert _cycle_ticks(2015, 2023) == [2016, 2018, 2020, 2022]
    assert _cycle_ticks(2021, 2023) == [2022]


def test_axis_titles_fit_the_narrow_charts(site):
    """Axis titles of the ranked and distribution charts fit a chart a third of the page wide: no
    line longer than 45 characters (about 330 px of 11-12 px text, the width of one chart in the
    grid of the cycle pages and the home page at 800 to 1280 px: a layout budget of ours); the
    direction goes on a line of its own. Full-width charts there get 70 characters a line."""
    out, _ = site
    checked = 0
    for where, spec in chart_specs(out):
        page, cid = where.split("#")
        if not (page.startswith("cycle") or page == P.HOME):
            continue
        budget = 45 if cid.startswith(("chart-rank-", "chart-dist-")) else 70
        for layer in spec["layer"]:
            for channel in ("x", "y"):
                title = layer.get("encoding", {}).get(channel, {}).get("title")
                lines = title if isinstance(title, list) else [title] if title else []
                for line in lines:
                    assert len(line) <= budget, (where, line)
                    checked += 1
                if isinstance(title, list):
                    assert any("favours" in line or "expected" in line for line in title[1:]), (where, title)
    assert checked > 20


def test_pool_chart_key_shows_the_marks_drawn(site):
    """The expected-seats chart draws an interval bar, an upright tick and a dot: its key lists
    all three, the tick as an upright bar (not a dot), each in the colour it is drawn in."""
    out, _ = site
    specs = _specs_named(out, "chart-pool-")
    assert specs
    for where, spec in specs:
        layers = spec["layer"]
        keyed = [layer for layer in layers if "shape" in layer["encoding"]]
        assert len(keyed) == 1, where
        enc = keyed[0]["encoding"]
        shapes = dict(zip(enc["shape"]["scale"]["domain"], enc["shape"]["scale"]["range"]))
        colours = dict(zip(enc["color"]["scale"]["domain"], enc["color"]["scale"]["range"]))
        assert enc["shape"]["scale"]["domain"] == enc["color"]["scale"]["domain"] and len(shapes) == 3, where
        by_mark = {_mark(layer)["type"]: layer for layer in layers}
        assert set(by_mark) == {"rule", "tick", "point"}, where
        expected = next(k for k in shapes if k.startswith("expected"))
        interval = next(k for k in shapes if "interval" in k)
        assert shapes[expected] not in ("circle", "square", "diamond") and shapes[expected].startswith("M"), where
        assert colours[expected] == _mark(by_mark["tick"])["color"], where
        assert colours[interval] == _mark(by_mark["rule"])["color"], where


def test_cycle_page_key_matches_the_ranked_bars(fx, site):
    out, _ = site
    page = (out / P.cycle_page(sf.CYCLES[-1])).read_text(encoding="utf-8")
    assert re.search(r'<p class="key key-bars"', page)
    css = (out / "assets" / "style.css").read_text(encoding="utf-8")
    rule = re.search(r"\.key-bars \.mark \{([^}]*)\}", css)
    assert rule and "clip-path: none" in rule.group(1) and "border-radius: 0" in rule.group(1)
    # the point charts keep the triangles and dots of their marks
    home = (out / P.HOME).read_text(encoding="utf-8")
    assert '<p class="key" aria-hidden="true">' in home


def test_setting_and_measure_names_are_not_broken_inside(site):
    out, _ = site
    page = (out / P.METHODS).read_text(encoding="utf-8")
    assert '<td class="ident"><code>uncontested.policy</code></td>' in page
    assert re.search(r'<code class="small ident">efficiency_gap</code>', page)
    css = (out / "assets" / "style.css").read_text(encoding="utf-8")
    rule = re.search(r"code\.ident, \.ident code \{([^}]*)\}", css)
    assert rule and "white-space: nowrap" in rule.group(1) and "overflow-wrap: normal" in rule.group(1)


def test_chart_docstring_examples_hold():
    import doctest

    from monitor.publish import chartkit

    result = doctest.testmod(chartkit)
    assert result.attempted and not result.failed


# --- national aggregates, partial cycles, corrections, watch-list details -------------------------
def _desc(page_text: str, chart_id: str) -> str:
    found = re.search(rf'<p class="chart-desc" id="chart-{chart_id}-desc">(.*?)</p>', page_text, re.S)
    assert found, chart_id
    return html.unescape(" ".join(found.group(1).split()))


def _national_rows(page_text: str) -> list[tuple[str, ...]]:
    """The rows of the national summary tables of a page, as the text of their cells."""
    rows = []
    for table in re.findall(r'<table class="national">(.*?)</table>', page_text, re.S):
        for row in re.findall(r"<tbody>(.*?)</tbody>", table, re.S)[0].split("</tr>"):
            cells = re.findall(r"<td>(.*?)</td>", row, re.S)
            if cells:
                rows.append(tuple(html.unescape(" ".join(re.sub(r"<[^>]+>", "", c).split())) for c in cells))
    return rows


HIST_TEXT = re.compile(
    r"Histogram of the (?P<total>\d+) districts of (?P<cycle>\d+) \(.+?\) that enter the measures, .*? "
    r"At their voted share: (?P<above>\d+) lie above 50% \(won by [^)]+\), (?P<below>\d+) below \(won by [^)]+\)"
    r"(?:, (?P<tied>\d+) at exactly 50%)?\. "
    r"(?:Uncontested: (?P<imputed>\d+) districts are shown at their imputed share \((?P<imp_a>\d+) won by [^,]+, "
    r"(?P<imp_b>\d+) by [^)]+\)\. |No district is shown at an imputed share\. )"
    r"In all, .+? won (?P<won_a>\d+) and .+? won (?P<won_b>\d+) of these (?P<shown>\d+) districts\.")


def test_histogram_description_counts_what_the_chart_shows(fx, site):
    """The text of every national histogram against the contests it is drawn from: the districts
    shown, those above and below 50% at their voted share, the uncontested ones (at their imputed
    share) counted apart by who won them, and the seats each party won among them (counted from
    the contests' winners, not from the shares)."""
    out, _ = site
    data = collect(fx.db, fx.config)
    c = data.contests[np.isfinite(data.contests["share_used"].to_numpy(float))]
    checked = 0
    for cycle in data.cycles:
        page = (out / P.cycle_page(cycle)).read_text(encoding="utf-8")
        for chamber in data.chambers:
            rows = c[(c["cycle"] == cycle) & (c["chamber"] == chamber)]
            if rows.empty:
                continue
            text = _desc(page, f"hist-{data.chamber_slugs[chamber]}")
            m = HIST_TEXT.search(text)
            assert m, text
            got = {k: int(v) for k, v in m.groupdict().items() if v is not None}
            voted, imputed = rows[~rows["imputed"]], rows[rows["imputed"]]
            assert got["total"] == got["shown"] == len(rows)
            assert got["above"] == int((voted["share_used"] > 0.5).sum())
            assert got["below"] == int((voted["share_used"] < 0.5).sum())
            assert got.get("imputed", 0) == len(imputed)
            assert got.get("imp_a", 0) == int((imputed["winner"] == "a").sum())
            assert got.get("imp_b", 0) == int((imputed["winner"] == "b").sum())
            assert got["won_a"] == rows["seats_a"].sum() and got["won_b"] == rows["seats_b"].sum()
            # and the chart draws exactly those districts
            spec = next(s for w, s in chart_specs(out) if w == f"{P.cycle_page(cycle)}#chart-hist-{data.chamber_slugs[chamber]}-spec")
            assert sum(b["districts"] for b in spec["datasets"]["bins"]) == len(rows)
            checked += 1
    assert checked == len(sf.CYCLES) * 2
    assert any(int(x) > 0 for x in re.findall(r"Uncontested: (\d+)", (out / P.HOME).read_text(encoding="utf-8")))


def test_every_cycle_page_shows_the_national_aggregates(fx, site):
    """Histogram, summary table and excess seats by who drew the plan on every cycle page, from
    monitor.national; the home page shows the same rows for its cycles."""
    out, _ = site
    data = collect(fx.db, fx.config)
    assert not data.national.empty
    home = _national_rows((out / P.HOME).read_text(encoding="utf-8"))
    for cycle in data.cycles:
        page = (out / P.cycle_page(cycle)).read_text(encoding="utf-8")
        for chamber in data.chambers:
            slug = data.chamber_slugs[chamber]
            assert f'id="chart-hist-{slug}"' in page and f'id="chart-drawer-{slug}"' in page, (cycle, chamber)
            n = data.national[(data.national["cycle"] == cycle) & (data.national["chamber"] == chamber)].iloc[0]
            by = data.drawers[(data.drawers["cycle"] == cycle) & (data.drawers["chamber"] == chamber)]
            assert by["excess_seats"].sum() == pytest.approx(n["excess_seats"])
            assert _desc(page, f"drawer-{slug}").count(" over ") == len(by)
        rows = _national_rows(page)
        mine = [r for r in rows if r[0] == str(cycle)]
        assert len(mine) == len(data.chambers), (cycle, rows)
        n = data.national[data.national["cycle"] == cycle]
        assert sorted(r[2] for r in mine) == sorted(f"{int(x['districts'])} ({int(x['measured_districts'])})"
                                                    for _, x in n.iterrows())
        # the two shares, each in its own named column: as cast, then after the uncontested policy
        assert sorted((r[5], r[6]) for r in mine) == sorted((F.share(x["vote_share_as_cast"]), F.share(x["vote_share"]))
                                                            for _, x in n.iterrows())
        assert sorted(r[8] for r in mine) == sorted(str(int(x)) for x in n["competitive"])
        if cycle >= sf.CYCLES[-2]:  # the home page shows the latest two cycles of each chamber
            assert set(mine) <= set(home), (cycle, mine, home)
    # the competitive column is the sum of the stored measure
    m = data.measures[data.measures["measure"] == "competitive"]
    stored = m.groupby(["cycle", "chamber"])["value"].sum()
    for r in data.national.itertuples():
        assert r.competitive == pytest.approx(stored.get((r.cycle, r.chamber), np.nan))


def test_national_download_is_described_and_matches_the_cli(fx, site):
    from monitor.exports import export
    from monitor.national import SUMMARY_COLUMNS

    out, _ = site
    package = json.loads((out / "downloads/datapackage.json").read_text(encoding="utf-8"))
    res = {r["name"]: r for r in package["resources"]}
    assert [f["name"] for f in res["national"]["schema"]["fields"]] == SUMMARY_COLUMNS
    assert {"national-json", "national-histogram", "national-histogram-json"} <= set(res)
    rows = list(csv.DictReader(io.StringIO((out / "downloads/national.csv").read_text(encoding="utf-8"))))
    expected = export(fx.db, "national")
    assert len(rows) == len(expected) == len(sf.CYCLES) * 2
    for row, (_, e) in zip(rows, expected.iterrows()):
        assert int(row["cycle"]) == e["cycle"] and row["chamber"] == e["chamber"]
        for col in ("districts", "measured_districts", "seats_a", "votes_a", "competitive", "flagged_units"):
            assert float(row[col]) == pytest.approx(float(e[col])), col
        assert float(row["vote_share"]) == pytest.approx(e["vote_share"])
    # a licence entry (Data Package spec v1: each licence has a name or a path), honest about whose data it is
    assert package["licenses"] and all("name" in lic or "path" in lic for lic in package["licenses"])
    assert package["licenses"][0]["name"] == "notspecified" and "publisher" in package["licenses"][0]["title"]


def test_what_changed_after_a_partial_cycle(tmp_path):
    """A federal-only cycle after a full one: the state-legislature flags are compared with their
    own previous cycle (not listed as cleared), and the home page keeps the state-legislature
    section at its own latest cycle."""
    fx = sf.build(tmp_path / "ws")
    try:
        with store.transaction(fx.db) as conn:  # a state-legislature flag in its latest cycle, not in the one before
            conn.execute("UPDATE tails SET flagged = 1, direction = 'a' WHERE cycle = 2022 AND state = 'KA' "
                         "AND chamber = 'state_lower' AND measure = 'efficiency_gap'")
        sf.add_cycle(fx, 2024, ("federal",))
        data = collect(fx.db, fx.config)
        assert data.chamber_latest() == {"federal": 2024, "state_lower": 2022}
        from monitor.publish.collect import flag_changes

        changes = flag_changes(data)
        lower = changes[changes["chamber"] == "state_lower"]
        assert lower[["state", "measure", "change", "now", "cycle_before", "cycle_now"]].values.tolist() == [
            ["KA", "efficiency_gap", "raised", "a", 2020, 2022]]
        assert lower["before"].isna().all()
        fed = changes[changes["chamber"] == "federal"]
        assert len(fed) and set(fed["cycle_now"]) == {2024} and set(fed["cycle_before"]) == {2022}
        # federal: each unit's 2024 flags against its own 2022 flags
        t = data.tails[(data.tails["chamber"] == "federal") & (data.tails["flagged"] == 1)]
        flagged = {(c, s, m) for c, s, m in zip(t["cycle"], t["state"], t["measure"])}
        for r in fed.itertuples():
            assert ((2022, r.state, r.measure) in flagged) == (not pd.isna(r.before))
            assert ((2024, r.state, r.measure) in flagged) == (not pd.isna(r.now))
        out = tmp_path / "public"
        build(fx.db, fx.config, out)
        home = (out / P.HOME).read_text(encoding="utf-8")
        # each chamber's latest cycle leads the home page, with its flagged units
        lower = re.search(r'<h2>State legislature, lower chamber, <a href="cycle/2022.html">2022</a>: 1 of 1 states '
                          r'flagged[^<]*</h2>(.*?)</section>', home, re.S)
        assert lower and re.search(r'<h2>Federal lower chamber, <a href="cycle/2024.html">2024</a>: \d+ of 4 states', home)
        assert 'id="chart-hist-state_lower"' in home and 'id="chart-hist-federal"' in home
        rows = re.findall(r'<tr data-state="([^"]*)">(.*?)</tr>', lower[1], re.S)
        assert [code for code, _ in rows] == ["KA"]
        # compared with its own previous cycle (2020), not with the federal 2024
        assert "not flagged in 2020" in rows[0][1] and "efficiency gap" in rows[0][1] and "2024" not in rows[0][1]
    finally:
        fx.close()


def test_seats_and_votes_chart_uses_the_share_after_the_policy(fx, site):
    """The seats-and-votes chart's vote share is the measures' (after the uncontested policy), not
    the raw count: in 2018 KA has an uncontested seat, so the two differ; the seat share counts the
    districts in the measures, as the national pool does."""
    out, _ = site
    data = collect(fx.db, fx.config)
    v = Views(data)
    frame = v._seats_over_time("KA", "federal", data.units)
    c = data.contests[(data.contests["state"] == "KA") & (data.contests["chamber"] == "federal")]
    for cycle in (2018, 2022):
        rows = c[(c["cycle"] == cycle) & np.isfinite(c["share_used"].to_numpy(float))]
        used = rows["votes_a_used"].sum() / (rows["votes_a_used"] + rows["votes_b_used"]).sum()
        raw = rows["votes_a"].sum() / (rows["votes_a"] + rows["votes_b"]).sum()
        got = frame.set_index("cycle").loc[cycle]
        assert got["vote_share"] == pytest.approx(used) and abs(used - raw) > 1e-3
        assert got["seat_share"] == pytest.approx(rows["seats_a"].sum() / len(rows))
    page = (out / v.state_path("KA", "federal")).read_text(encoding="utf-8")
    seats = page.split('id="chart-seats-votes"')[1].split("</figure>")[0]
    assert "vote share (two-party, after the uncontested policy)" in seats
    from monitor.publish import formats

    assert formats.share(frame.set_index("cycle").loc[2018, "vote_share"]) in seats
    assert "compare it with the seat-share line" in seats
    assert "two-party, after the uncontested policy" in page.split('id="table"')[1]


def test_feed_and_state_page_show_corrections(tmp_path):
    """A correction gets a feed entry naming the units it superseded and what changed (from the
    stored load report); without a stored report, the same changes come from comparing the
    superseded and the current units."""
    from monitor.publish.feed import atom_feed

    fx = sf.build(tmp_path / "ws")
    try:
        first = collect(fx.db, fx.config)
        before = atom_feed(first, Views(first))  # the first build's feed, before the correction
        n_before = fx.db.execute("SELECT COUNT(*) FROM flag_events").fetchone()[0]
        sf.correct_state(fx, "LU", 2022)
        load_id, report = fx.db.execute("SELECT id, report FROM loads WHERE units_corrected > 0").fetchone()
        listed = [u for u in json.loads(report)["units"] if u["action"] == "corrected"]
        assert [(u["cycle"], u["state"], u["chamber"]) for u in listed] == [(2022, "LU", "federal")]
        changes = listed[0]["changes"]
        assert any(ch.startswith("votes of party a") for ch in changes)
        plain = [Views(first).words.change(ch) for ch in changes]  # what people read: party names, no codes
        assert any(p.startswith(f"{sf.PARTY_A[0]} votes: ") for p in plain)

        def entries(data):
            root = ET.fromstring(atom_feed(data, Views(data), previous=before))
            return [e for e in root.findall(f"{ATOM}entry") if e.find(f"{ATOM}title").text.startswith("Correction")]

        data = collect(fx.db, fx.config)
        found = entries(data)
        assert len(found) == 1
        title, summary = found[0].find(f"{ATOM}title").text, found[0].find(f"{ATOM}summary").text
        assert f"load #{load_id}" in title and "Lunmere (LU)" in title and "2022" in title
        assert all(p in summary for p in plain) and "from the load report" in summary
        assert found[0].find(f"{ATOM}link").get("href") == Views(data).state_path("LU", "federal")
        # the later build: the first build's entry, one per flag event since, one for the correction
        n_new = fx.db.execute("SELECT COUNT(*) FROM flag_events").fetchone()[0] - n_before
        assert n_new == 1
        assert len(ET.fromstring(atom_feed(data, Views(data), previous=before)).findall(f"{ATOM}entry")) == 1 + n_new + 1
        # the state page lists it under the flag history
        out = tmp_path / "public"
        build(fx.db, fx.config, out)
        page = html.unescape((out / Views(data).state_path("LU", "federal")).read_text(encoding="utf-8"))
        corrections = page.split('id="corrections"')[1].split("</section>")[0]
        assert f"#{load_id}" in corrections and all(p in corrections for p in plain)
        # without the stored report: compared, with the same result
        with store.transaction(fx.db) as conn:
            conn.execute("UPDATE loads SET report = NULL WHERE id = ?", [load_id])
        data = collect(fx.db, fx.config)
        assert data.corrections["basis"].tolist() == ["compared"]
        assert list(data.corrections["changes"].iloc[0]) == changes
        summary = entries(data)[0].find(f"{ATOM}summary").text
        assert all(p in summary for p in plain) and "comparing the superseded and the current results" in summary
        with store.transaction(fx.db) as conn:  # an unreadable report: compared, and the feed says why
            conn.execute("UPDATE loads SET report = '{not json' WHERE id = ?", [load_id])
        data = collect(fx.db, fx.config)
        assert list(data.corrections["changes"].iloc[0]) == changes
        assert "not readable" in entries(data)[0].find(f"{ATOM}summary").text
    finally:
        fx.close()


def test_feed_self_link_is_absolute_only_with_a_base_url(fx, tmp_path):
    from monitor.config import load_config
    from monitor.errors import ConfigError
    from monitor.publish.feed import atom_feed

    data = collect(fx.db, fx.config)
    self_link = lambda d: next(link.get("href") for link in ET.fromstring(atom_feed(d, Views(d))).findall(f"{ATOM}link")
                               if link.get("rel") == "self")  # noqa: E731
    assert self_link(data) == "atom.xml"
    path = tmp_path / "levelfield.toml"
    path.write_text(sf.CONFIG + '\n[site]\nbase_url = "https://example.org/watch/"\n', encoding="utf-8")
    config = load_config(path)
    assert self_link(collect(fx.db, config)) == "https://example.org/watch/atom.xml"
    assert "site.base_url" not in {s["name"] for s in collect(fx.db, config).settings}  # not a setting of the numbers
    path.write_text(sf.CONFIG + '\n[site]\nbase_url = "example.org"\n', encoding="utf-8")
    with pytest.raises(ConfigError, match="base_url"):
        load_config(path)


def test_watch_list_rounds_once_and_marks_unofficial_cycles(fx):
    data = collect(fx.db, fx.config)
    watch = data.watch.copy()
    i = watch.index[watch["favours"] == "a"][0]  # a plan the measures say favours party a, given seats for b
    watch.loc[i, ["severity", "seats_at_stake"]] = [1.77, -1.765]  # stored by the flags: abs rounded to 2, signed to 3
    data.watch = watch
    units = data.units.copy()
    state, chamber, cycle = watch.loc[i, "state"], watch.loc[i, "chamber"], int(watch.loc[i, "cycles"].split()[-1])
    units.loc[(units["state"] == state) & (units["chamber"] == chamber) & (units["cycle"] == cycle),
              "certification"] = "unofficial"
    data.units = units
    v = Views(data)
    row = v._watch_rows(data.watch.loc[[i]], "")[0]
    # one number, one rounding, its party by the sign (negative: party b), and the disagreement said
    assert (row["stake"].text, row["stake"].code) == (f"favours {sf.PARTY_B[0]} by 1.8 seats", "b")
    assert row["favours_code"] == "a" and row["disagree"]
    assert [c["unofficial"] for c in row["cycles"]] == [str(c) == str(cycle) for c in watch.loc[i, "cycles"].split()]
    env = PG.environment()
    page = env.get_template("watch.html").render(page=P.WATCH, root="", title="Watch list", section="watch",
                                                 parties=data.parties, **v.watch(""))
    first = next(r for r in page.split("</tr>") if watch.loc[i, "plan_id"] in r)
    assert f"{cycle} <span class=\"badge badge-unofficial\"" in first
    assert "the seats point the other way from the measures" in first
    assert "most in one cycle" in page and "all flagged cycles" in page
    methods = env.get_template("methods.html").render(page=P.METHODS, root="", title="Methods", section="methods",
                                                      parties=data.parties, **v.methods())
    assert "most measures that agree in direction in any one" in methods
