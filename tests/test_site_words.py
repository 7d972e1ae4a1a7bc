"""The site in plain words, latest cycle first (issue 15): one sign rule for directions and seats
at stake, no internal codes in what people read, plans in force apart from past plans, natural
district order, the feed's first and later builds, refused loads kept out of the downloads, and
the Data Package checked by the ``frictionless`` validator.

The site is built from ``site_fixture`` (invented results through the real loader, invented
derived rows): its numbers exercise the rendering only, they are not check values. Outside
references: RFC 4287 (Atom: ``link`` ``href`` is an IRI reference, section 4.2.7; absolute IRIs
are what feed readers resolve reliably: common practice), the Frictionless Data Package spec v1
through its reference validator (``frictionless.validate``, frictionless-py 5), and the
expectations of the sign rule, which are the project's own convention (positive seats at stake
favour party a), computed here independently of :mod:`monitor.publish.words`.
"""

from __future__ import annotations

import csv
import datetime as dt
import hashlib
import html
import html.parser
import io
import json
import re
import shutil
import xml.etree.ElementTree as ET
from pathlib import Path

import pandas as pd
import pytest

import site_fixture as sf
import store
from monitor.config import load_config
from monitor.errors import DataError
from monitor.ingest import load_file
from monitor.measures import registry
from monitor.publish import build, collect
from monitor.publish import paths as P
from monitor.publish.chartkit import DIGITS
from monitor.publish.pages import render_site
from monitor.publish.views import Views

ATOM = "{http://www.w3.org/2005/Atom}"
BASE = "https://example.org/watch/"
NAMES = {"a": sf.PARTY_A[0], "b": sf.PARTY_B[0]}


@pytest.fixture(scope="module")
def fx(tmp_path_factory):
    fixture = sf.build(tmp_path_factory.mktemp("words") / "ws")
    yield fixture
    fixture.close()


@pytest.fixture(scope="module")
def site(fx):
    out = fx.root / "public"
    build(fx.db, fx.config, out)
    return out


class Text(html.parser.HTMLParser):
    """The text a person reads on a page: text nodes outside script, style and code."""

    SKIP = {"script", "style", "code", "noscript"}

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.depth = 0
        self.nodes: list[str] = []

    def handle_starttag(self, tag, attrs):
        if tag in self.SKIP:
            self.depth += 1

    def handle_endtag(self, tag):
        if tag in self.SKIP and self.depth:
            self.depth -= 1

    def handle_data(self, data):
        if not self.depth and data.strip():
            self.nodes.append(" ".join(data.split()))


def text_nodes(page: Path | str) -> list[str]:
    parser = Text()
    parser.feed(page.read_text(encoding="utf-8") if isinstance(page, Path) else page)
    return parser.nodes


def expected_code(value: float) -> str:
    """The party a seat count favours once rounded to the one digit shown (positive: a)."""
    shown = round(value, 1)
    return "a" if shown > 0 else "b" if shown < 0 else ""


STAKE = re.compile(r'<span class="stake favours-(?P<cls>\w+)" data-seats="(?P<seats>[^"]*)" '
                   r'data-favours="(?P<code>[ab]?)">(?P<text>[^<]*)</span>')


def stakes(page_html: str) -> list[re.Match]:
    return list(STAKE.finditer(page_html))


def check_stake(m: re.Match, where: str) -> None:
    """One shown seat count: the party it names is the one its stored number's sign favours."""
    text = html.unescape(m["text"])
    if m["seats"] == "":
        assert m["code"] == "" and text == "seats at stake not known", (where, text)
        return
    value = float(m["seats"])
    code = expected_code(value)
    assert m["code"] == code and m["cls"] == (code or "none"), (where, value, m["code"])
    if code:
        assert text == f"favours {NAMES[code]} by {abs(value):.1f} seats", (where, value, text)
    else:
        assert text.startswith("no seats at stake"), (where, value, text)


def rows_of(page_html: str, table_class: str) -> list[str]:
    out = []
    for table in re.findall(rf'<table class="[^"]*\b{table_class}\b[^"]*">(.*?)</table>', page_html, re.S):
        out += re.findall(r"<tr[^>]*>(.*?)</tr>", table.split("<tbody>")[1], re.S)
    return out


def check_tails_rows(page_html: str, cycle: int, data, where: str) -> int:
    """Every row of a table of flagged units of ``cycle``: its seats are the stored excess of that
    unit, named by their sign, and a direction that differs from the seats' party is said in words
    beside them."""
    pool = data.pool[data.pool["cycle"] == cycle].set_index(["state", "chamber"])["excess_seats"]
    chamber_of = {data.chamber_label(c): c for c in data.chambers}
    n = 0
    for section in re.findall(r"<h2>([^<:]*?)(?:, <a [^>]*>\d+</a>)?: \d+ of \d+ states flagged(.*?)</section>",
                              page_html, re.S):
        chamber = chamber_of[section[0]]
        for code, cells in re.findall(r'<tr data-state="([^"]*)">(.*?)</tr>', section[1], re.S):
            found = stakes(cells)
            assert len(found) == 1, (where, code)
            check_stake(found[0], where)
            assert float(found[0]["seats"]) == pytest.approx(pool[(html.unescape(code), chamber)]), (where, code)
            n += _check_measures_words(cells, found[0], where)
    return n


def _check_measures_words(cells: str, stake: re.Match, where: str) -> int:
    """The measures' party is shown apart only when the seats name another party (or none), and
    "the seats point the other way" exactly when the seats name the other party."""
    measures = re.search(r'measures favour <span class="favours favours-(\w+)">', cells)
    if measures:
        assert measures[1] != stake["code"], where
        assert ("the seats point the other way" in cells) == (stake["code"] not in ("", measures[1])), where
    else:
        assert "the seats point the other way" not in cells, where
    return 1


# --- one sign rule ------------------------------------------------------------------------------
def test_every_seat_count_on_every_page_names_the_party_its_sign_favours(site):
    checked = 0
    for page in sorted(site.rglob("*.html")):
        text = page.read_text(encoding="utf-8")
        for m in stakes(text):
            check_stake(m, page.name)
            checked += 1
        # no signed seat count shown beside a direction: seats appear only through the stake words
        for node in text_nodes(page):
            assert not re.search(r"seats at stake [+\-\u2212]\d", node), (page.name, node)
            assert "seats at stake no seats at stake" not in node, (page.name, node)
    assert checked >= 10


FIGURE = re.compile(r'<figure class="chart" id="(?P<id>[^"]*)">.*?<script type="application/json" id="[^"]*">'
                    r'(?P<spec>.*?)</script>.*?<p class="chart-desc" id="[^"]*">(?P<desc>.*?)</p>', re.S)
SIGNED = re.compile(r"(?<![\w\-\u2013])[+\u2212-]\d")


def test_chart_descriptions_follow_the_sign_rule_in_words(site):
    """Every chart's text alternative speaks like the rest of the page: no signed number and no
    sign note, a direction named by the sign of the number it describes. Checked against the
    numbers the chart itself draws (its spec's data): the ranked charts' highest and lowest
    states and the expected-seats chart's ends."""
    ranked = pooled = 0
    for page in sorted(site.rglob("*.html")):
        for fig in FIGURE.finditer(page.read_text(encoding="utf-8")):
            desc = html.unescape(fig["desc"])
            where = (page.name, fig["id"])
            assert not SIGNED.search(desc), (where, desc)
            assert "positive" not in desc.casefold() and "negative value" not in desc.casefold(), (where, desc)
            spec = json.loads(fig["spec"])
            if fig["id"].startswith("chart-rank-"):
                states = spec["datasets"]["states"]
                ordered = [r for r in states if r["f"] != "x"]
                top, bottom = max(ordered, key=lambda r: r["v"]), min(ordered, key=lambda r: r["v"])
                digits = DIGITS.get(fig["id"].rsplit("-", 1)[1], 3)  # the digits the page shows
                ends = re.search(r"Highest: (.*?), ([\d.]+)(?: towards ([^;]*))?; lowest: (.*?), ([\d.]+)"
                                 r"(?: towards ([^.]*?))?\. ", desc)
                assert ends, (where, desc)
                for (state, amount, party), r in ((ends.groups()[:3], top), (ends.groups()[3:], bottom)):
                    # the chart's data holds 4 decimals: the words name the party its sign favours
                    assert state == r["s"] and abs(float(amount) - abs(r["v"])) <= 0.6 * 10 ** -digits, (where, desc)
                    if abs(r["v"]) > 10 ** -digits:
                        assert party == NAMES["a" if r["v"] > 0 else "b"], (where, desc)
                ranked += 1
            if fig["id"].startswith("chart-pool-"):
                units = spec["datasets"]["units"]
                top, bottom = units[0], units[-1]
                for r in (top, bottom):
                    code = expected_code(r["excess_seats"])
                    words = (f"favours {NAMES[code]} by {abs(r['excess_seats']):.1f} seats" if code
                             else "no seats at stake")
                    assert f"{r['state_label']}, {words}" in desc, (where, desc)
                pooled += 1
    assert ranked >= 3 and pooled >= 1


def test_cycle_pages_count_every_stored_flag_change_and_tabulate_every_charted_state(fx, site):
    """The weight-saving forms keep every number: a cycle page's counts of flag changes add up to
    the stored flag history of that cycle (by chamber), and each chamber's every-state table has a
    row for every state its ranked charts draw, with the value and the flagged party of each."""
    stored = {}
    for cycle, chamber in fx.db.execute("SELECT cycle, chamber FROM flag_events WHERE cycle IS NOT NULL"):
        stored[(int(cycle), chamber)] = stored.get((int(cycle), chamber), 0) + 1
    data = collect(fx.db, fx.config)
    short = {data.chamber_short(c): c for c in data.chambers}
    checked = 0
    for cycle in data.cycles:
        text = (site / P.cycle_page(cycle)).read_text(encoding="utf-8")
        counted = {}
        section = re.search(r'<section id="flags">(.*?)</section>', text, re.S)[1]
        for chamber, _, n, _, _ in re.findall(r"<tr><td>([^<]*)</td><td>([^<]*)</td><td>([\d,]+)</td><td>([\d,]+)</td>"
                                              r"<td>([^<]*)</td></tr>", section):
            key = (cycle, short[html.unescape(chamber)])
            counted[key] = counted.get(key, 0) + int(n.replace(",", ""))
        assert counted == {k: v for k, v in stored.items() if k[0] == cycle}, cycle
        for fig in FIGURE.finditer(text):
            if not fig["id"].startswith("chart-rank-"):
                continue
            ref = re.search(rf'id="{re.escape(fig["id"])}".*?<a href="#([^"]+)">', text, re.S)[1]
            table = re.search(rf'<details class="chart-data measure-table" id="{ref}">(.*?)</details>', text, re.S)[1]
            heads = [html.unescape(h) for h in re.findall(r"<th[^>]*>([^<]*)</th>", table)]
            rows = {html.unescape(r[0]).split(" (too few")[0]: [html.unescape(c) for c in r]
                    for r in (re.findall(r"<td>([^<]*)</td>", row) for row in re.findall(r"<tr>(.*?)</tr>", table.split("<tbody>")[1], re.S))}
            title = json.loads(fig["spec"])["layer"][0]["encoding"]["x"]["title"][0]
            col = heads.index(title)
            for point in json.loads(fig["spec"])["datasets"]["states"]:
                cell = rows[point["s"]][col]
                assert abs(float(cell.split()[0].replace("\u2212", "-")) - point["v"]) < 6e-3, (cycle, point, cell)
                assert ("(flagged: " in cell) == (point["f"] in ("a", "b")), (cycle, point, cell)
                if point["f"] in ("a", "b"):
                    assert cell.endswith(f"(flagged: {NAMES[point['f']]})"), (cycle, point, cell)
                checked += 1
    assert checked > 20


def test_watch_rows_show_the_stored_seats_and_say_when_the_measures_disagree(fx, site):
    stored = {r[0]: r[1] for r in fx.db.execute("SELECT plan_id, seats_at_stake FROM watch")}
    favours = {r[0]: r[1] for r in fx.db.execute("SELECT plan_id, favours FROM watch")}
    page = (site / P.WATCH).read_text(encoding="utf-8")
    rows = rows_of(page, "watch")
    assert len(rows) == len(stored)
    for row in rows:
        plan = html.unescape(re.search(r'<span class="plan">([^<]*)</span>', row)[1])
        (m,) = stakes(row)
        assert float(m["seats"]) == pytest.approx(stored[plan]), plan
        check_stake(m, plan)
        measures = re.search(r'<span class="favours favours-(\w+)">([^<]*)</span>', row)
        assert measures[1] == favours[plan] and html.unescape(measures[2]) == NAMES[favours[plan]]
        assert ("the seats point the other way" in row) == (m["code"] not in ("", favours[plan])), plan


def test_a_disagreeing_unit_is_said_in_words_on_the_home_page_and_in_the_feed(fx):
    """The measures of the latest cycle's flagged unit favour one party; give its stored seats at
    stake the other sign: the home page, the cycle page and the first feed entry then name the
    seats' party for the seats and the measures' party for the measures, and say they disagree."""
    from monitor.publish.feed import atom_feed

    data = collect(fx.db, fx.config)
    latest = data.chamber_latest()["federal"]
    v = Views(data)
    (unit,) = v.flagged_in(latest, "federal", "")
    state, direction = unit["state_code"], unit["direction_code"]
    pool = data.pool.copy()
    at = (pool["cycle"] == latest) & (pool["state"] == state) & (pool["chamber"] == "federal")
    stake = float(pool.loc[at, "excess_seats"].iloc[0])
    assert expected_code(stake) == direction  # as built, they agree
    pool.loc[at, "excess_seats"] = -stake
    data.pool = pool
    pages = render_site(data)
    for path in (P.HOME, P.cycle_page(latest)):
        text = pages[path].decode()
        assert check_tails_rows(text, latest, data, path) >= 1
        row = re.search(rf'<tr data-state="{re.escape(html.escape(state))}">(.*?)</tr>', text, re.S)[1]
        assert f"measures favour <span class=\"favours favours-{direction}\">{NAMES[direction]}</span>" in row
        assert "the seats point the other way" in row
        assert f"favours {NAMES[expected_code(-stake)]} by {abs(stake):.1f} seats" in row
    summary = ET.fromstring(atom_feed(data, Views(data))).find(f"{ATOM}entry/{ATOM}summary").text
    assert (f"where the measures favour {NAMES[direction]} but the seats at stake favour "
            f"{NAMES[expected_code(-stake)]} by {abs(stake):.1f} seats") in summary


def test_latest_cycle_tables_follow_the_sign_rule(fx, site):
    data = collect(fx.db, fx.config)
    checked = 0
    latest = data.chamber_latest()
    assert len(set(latest.values())) == 1  # the fixture's chambers share their latest cycle
    checked += check_tails_rows((site / P.HOME).read_text(encoding="utf-8"), latest["federal"], data, P.HOME)
    for cycle in data.cycles:
        path = P.cycle_page(cycle)
        checked += check_tails_rows((site / path).read_text(encoding="utf-8"), cycle, data, path)
    assert checked >= 3


# --- plain words --------------------------------------------------------------------------------
CODES = re.compile(r"\b(?:favou?r(?:s|ing)?|[Pp]arty|seats of party|votes of party) [ab]\b"
                   r"|\bwon by [ab]\b(?! (?:minor|major|single|party|candidate|margin)\b)"
                   r"|\((?:positive|negative) favours")
IDENTIFIERS = sorted({m.name for m in registry.measures() if "_" in m.name}
                     | {n for n in registry.flag_by_name() if "_" in n}, key=len, reverse=True)


def code_problems(nodes: list[str], state_codes: dict[str, str]) -> list[str]:
    bare = [re.compile(rf"(?<![\w(<>/-]){re.escape(code)}(?![\w)<>-])") for code in state_codes]
    out = []
    for node in nodes:
        if CODES.search(node):
            out.append(node)
        out += [f"{ident}: {node}" for ident in IDENTIFIERS if re.search(rf"\b{ident}\b", node)]
        out += [f"bare state code: {node}" for pattern in bare if pattern.search(node)]
    return out


def test_no_page_speaks_in_codes(fx, site):
    """No text a person reads says "favours a", "party b", a measure identifier or a bare state
    code with a configured name. Codes stay where they are code: <code> elements (the methods
    page names settings and download columns), the downloads and the CLI."""
    names = {c: n for c, n in collect(fx.db, fx.config).state_names.items() if n != c}
    assert names == sf.STATE_NAMES
    problems = {}
    for page in sorted(site.rglob("*.html")):
        found = code_problems(text_nodes(page), names)
        if found:
            problems[page.relative_to(site).as_posix()] = found[:5]
    assert problems == {}


def test_the_code_check_finds_codes():
    """The check above can fail: each kind of code it looks for is found in a sentence holding it."""
    names = {"KA": "Karrowen"}
    for node in ("flagged, favours a", "seats of party b: 10 -> 9", "a district is won by a when", "won by b.", "efficiency_gap +0.07",
                 "seats at stake -2.6 (positive favours a)", "KA 2022: flagged", "in KA, 2 seats"):
        assert code_problems([node], names), node
    for node in ("Karrowen (KA)", "plan KA-federal-2012", "favours Lantern Party by 2.6 seats", "efficiency gap",
                 "a seat won by a minor party"):
        assert not code_problems([node], names), node


def test_who_drew_it_is_never_other_for_an_inferred_era(fx, site):
    data = collect(fx.db, fx.config)
    page = (site / Views(data).state_path("KA", "state_lower")).read_text(encoding="utf-8")
    nodes = text_nodes(page)
    assert any("not recorded (era inferred)" in n for n in nodes)
    assert not any(re.search(r"\bdrawn by:? other\b", n) for n in nodes)
    states = " ".join(text_nodes(site / P.STATES))
    assert "not recorded (era inferred)" in states  # KA's lower chamber: inferred plan in force


# --- plans in force and past plans --------------------------------------------------------------
def test_plans_in_force_and_past_plans_are_apart(fx, site):
    past = "KA-federal-2012"  # the fixture's KA plan of 2012, replaced by its 2022 plan
    in_force = ["MO-federal-2022", f"{sf.XSS}-federal-2022"]
    watch = (site / P.WATCH).read_text(encoding="utf-8")
    section = lambda text, sid: text.split(f'<section id="{sid}">')[1].split("</section>")[0]  # noqa: E731
    force, earlier = section(watch, "in-force"), section(watch, "past")
    assert all(html.escape(p) in force for p in in_force) and past not in force
    assert past in earlier and not any(html.escape(p) in earlier for p in in_force)
    home = (site / P.HOME).read_text(encoding="utf-8")
    home_watch = section(home, "watch")
    assert all(html.escape(p) in home_watch for p in in_force) and past not in home_watch
    assert "1 past plan (no longer in force) was on watch" in " ".join(text_nodes(home_watch))
    states = (site / P.STATES).read_text(encoding="utf-8")
    ka = next(r for r in rows_of(states, "sortable") if ">Karrowen (KA)</a>" in r and "<td>federal" in r)
    cells = re.findall(r"<td[^>]*>(.*?)</td>", ka, re.S)
    assert cells[6] == "" and past in cells[7]  # not on watch in force; the past plan in its own column
    mo = next(r for r in rows_of(states, "sortable") if ">Mossvale (MO)</a>" in r)
    assert "on watch: " in mo and past not in mo


# --- natural district order -----------------------------------------------------------------------
def test_district_results_are_in_natural_order(fx):
    """Districts coded 1..10 without leading zeros, stored in shuffled order: the state page lists
    1, 2, ..., 10 (text order would give 1, 10, 2, ...)."""
    data = collect(fx.db, fx.config)
    c = data.contests.copy()
    lower = c["chamber"] == "state_lower"
    c.loc[lower, "district"] = c.loc[lower, "district"].map(lambda d: str(int(d)))
    data._contests = c.sample(frac=1, random_state=7).reset_index(drop=True)  # what contests_of then reads
    path = Views(data).state_path("KA", "state_lower")
    page = render_site(data)[path].decode()
    table = page.split('id="results"')[1].split("</table>")[0]
    districts = re.findall(r"<tr><td>([^<]*)</td>", table)
    assert districts == [str(i) for i in range(1, 11)]


# --- the feed -------------------------------------------------------------------------------------
def _feed(out: Path):
    root = ET.fromstring((out / P.FEED).read_bytes())
    return root, root.findall(f"{ATOM}entry")


def test_feed_first_build_one_entry_later_builds_one_per_change_links_absolute(tmp_path):
    fx = sf.build(tmp_path / "ws")
    try:
        path = fx.root / "levelfield.toml"
        path.write_text(sf.CONFIG + f'\n[site]\nbase_url = "{BASE}"\n', encoding="utf-8")
        config = load_config(path)
        out = tmp_path / "public"
        report = build(fx.db, config, out)
        assert not report.warnings
        root, entries = _feed(out)
        n_watch = fx.db.execute("SELECT COUNT(*) FROM watch").fetchone()[0]
        assert [e.find(f"{ATOM}title").text for e in entries] == [f"Site published, {n_watch} plans on watch"]
        summary = entries[0].find(f"{ATOM}summary").text
        assert f"Federal lower chamber, 2022: 1 state flagged: {sf.STATE_NAMES.get(sf.XSS, sf.XSS)} favours " in summary

        def links(root):
            return [link.get("href") for link in root.iter(f"{ATOM}link")]

        assert links(root) and all(h.startswith(BASE) for h in links(root))
        assert (out / links(root)[-1][len(BASE):]).is_file()  # the entry's page, under the base address

        events = fx.db.execute("SELECT COUNT(*) FROM flag_events").fetchone()[0]
        sf.correct_state(fx, "LU", 2022)  # one load correcting one unit, and one flag event
        assert fx.db.execute("SELECT COUNT(*) FROM flag_events").fetchone()[0] == events + 1
        build(fx.db, config, out)
        root, entries = _feed(out)
        titles = [e.find(f"{ATOM}title").text for e in entries]
        assert len(titles) == 3, titles  # the first build's entry, the flag event, the correction
        assert sum(t.startswith("Correction: ") for t in titles) == 1
        assert sum("flagged on partisan bias" in t for t in titles) == 1
        assert sum(t.startswith("Site published") for t in titles) == 1
        assert all(h.startswith(BASE) for h in links(root))
        for e in entries:
            href = e.find(f"{ATOM}link").get("href")
            assert (out / href[len(BASE):]).is_file(), href
        build(fx.db, config, out)  # nothing new: nothing added
        assert [e.find(f"{ATOM}title").text for e in _feed(out)[1]] == titles
    finally:
        fx.close()


def test_feed_links_are_relative_with_a_warning_without_a_base_url(fx, tmp_path):
    out = tmp_path / "public"
    report = build(fx.db, fx.config, out)
    assert any("site.base_url" in w for w in report.warnings)
    assert any("warning: site.base_url" in line for line in report.lines())
    root, entries = _feed(out)
    hrefs = [link.get("href") for link in root.iter(f"{ATOM}link")]
    assert hrefs and not any(h.startswith(("http:", "https:", "/")) for h in hrefs)


# --- provenance -------------------------------------------------------------------------------------
def test_refused_loads_stay_in_the_store_and_out_of_the_downloads(tmp_path):
    fx = sf.build(tmp_path / "ws")
    try:
        bad = fx.root / "files" / "refused_delivery.csv"
        bad.write_text("cycle,state,chamber,district,party,candidate,votes,status\n"
                       "2022,KA,federal,01,Lantern Party,Ael,not-a-number,certified\n", encoding="utf-8")
        with pytest.raises(DataError):
            load_file(fx.db, bad, fx.config, source="invented refused delivery", now=sf.T0 + dt.timedelta(days=50))
        assert fx.db.execute("SELECT outcome FROM loads WHERE file_name = ?", [bad.name]).fetchall() == [("refused",)]
        out = tmp_path / "public"
        build(fx.db, fx.config, out)
        loads = list(csv.DictReader(io.StringIO((out / "downloads/loads.csv").read_text(encoding="utf-8"))))
        assert loads and {r["outcome"] for r in loads} == {"loaded"}
        assert bad.name not in {r["file_name"] for r in loads}
        assert bad.name not in {r["file_name"] for r in json.loads((out / "downloads/loads.json").read_text())}
        for page in out.rglob("*.html"):
            assert bad.name not in page.read_text(encoding="utf-8"), page.name
        # status still lists it (it reads the store)
        from monitor.status import StoreStatus
        from store import status as status_counts

        held = status_counts.summary(fx.db, 10)
        lines = StoreStatus(0, {}, 0, 0, 0, held["loads"], [], []).lines()
        assert any("refused: refused_delivery.csv" in line for line in lines), lines
        # each load's source text is on the pages that use it
        assert "invented fixture" in " ".join(text_nodes(out / P.HOME))
    finally:
        fx.close()


# --- the Data Package ---------------------------------------------------------------------------------
def test_the_data_package_validates_with_frictionless(site, tmp_path):
    """The reference validator of the Data Package spec reads every resource (types, hashes,
    sizes): valid as published, invalid once a byte of a resource changes."""
    frictionless = pytest.importorskip("frictionless")
    report = frictionless.validate(str(site / "downloads" / "datapackage.json"))
    assert report.valid, report.flatten(["title", "message"])[:5]
    assert len(report.tasks) >= 10
    copy = tmp_path / "downloads"
    shutil.copytree(site / "downloads", copy)
    watch = copy / "watch.csv"
    watch.write_bytes(watch.read_bytes().replace(b"KA-federal-2012", b"KA-federal-2013"))
    assert not frictionless.validate(str(copy / "datapackage.json")).valid


def test_the_compressed_results_are_the_csv_and_frictionless_reads_inside_them(fx, site, tmp_path):
    """``results.csv.gz`` decompresses to exactly the CSV of the results' columns (gzip members,
    RFC 1952 section 2.2: one for the header, one per cycle, mtime 0); the reference validator
    reads its rows (a bad cell inside a correctly hashed file is an error) and its bytes (a
    changed byte is an error)."""
    frictionless = pytest.importorskip("frictionless")
    import gzip

    from monitor.publish import downloads as D

    packed = (site / "downloads" / "results.csv.gz").read_bytes()
    spec = next(r for r in D.RESOURCES if r["name"] == "results")
    data = collect(fx.db, fx.config)
    assert gzip.decompress(packed) == D.to_csv(data.results, spec["fields"])
    # one member per cycle after the header's: the header line alone decompresses from the start
    header = D.gzip_member(D._csv_header(spec["fields"]))
    assert packed.startswith(header) and gzip.decompress(header).decode().startswith("cycle,state,chamber,district,")
    assert packed.count(b"\x1f\x8b\x08\x00\x00\x00\x00\x00") >= 1 + len(data.cycles)  # mtime 0 in every member
    package = json.loads((site / "downloads" / "datapackage.json").read_text(encoding="utf-8"))
    (res,) = [r for r in package["resources"] if r["name"] == "results"]
    assert (res["path"], res["compression"], res["format"]) == ("results.csv.gz", "gz", "csv")
    report = frictionless.validate(str(site / "downloads" / "datapackage.json"))
    (task,) = [t for t in report.tasks if t.name == "results"]
    assert task.valid and task.stats["rows"] == len(data.results)

    def republish(content: bytes) -> Path:
        copy = tmp_path / f"v{len(list(tmp_path.iterdir()))}"
        shutil.copytree(site / "downloads", copy)
        (copy / "results.csv.gz").write_bytes(content)
        doc = json.loads((copy / "datapackage.json").read_text(encoding="utf-8"))
        for r in doc["resources"]:
            if r["name"] == "results":
                r["bytes"], r["hash"] = len(content), "sha256:" + hashlib.sha256(content).hexdigest()
        (copy / "datapackage.json").write_text(json.dumps(doc), encoding="utf-8")
        return copy / "datapackage.json"

    def results_errors(descriptor: Path) -> list[str]:
        out = frictionless.validate(str(descriptor))
        return [e.type for t in out.tasks if t.name == "results" for e in t.errors]

    assert results_errors(republish(packed)) == []  # re-hashed but unchanged: still valid
    text = gzip.decompress(packed).decode("utf-8").splitlines(keepends=True)
    votes = [f["name"] for f in res["schema"]["fields"]].index("votes")
    cells = text[1].split(",")
    cells[votes] = "many"
    broken = D.gzip_member("".join([text[0], ",".join(cells), *text[2:]]).encode("utf-8"))
    assert "type-error" in results_errors(republish(broken))
    flipped = bytearray(packed)
    flipped[len(packed) // 2] ^= 0xFF
    copy = tmp_path / "flipped"
    shutil.copytree(site / "downloads", copy)
    (copy / "results.csv.gz").write_bytes(bytes(flipped))
    assert not frictionless.validate(str(copy / "datapackage.json")).valid
