"""The published site in headless Chromium (Debian's chromium through Playwright).

Every page is served by our preview server on 127.0.0.1; each test records every request the page
makes and every console message. Screenshots go to ``test-artifacts/`` (gitignored).
"""

from __future__ import annotations

import shutil
import threading
from pathlib import Path

import pytest

import site_fixture as sf
from monitor.publish import build, collect
from monitor.publish import paths as P
from monitor.publish.serve import make_server
from monitor.publish.views import Views

playwright_api = pytest.importorskip("playwright.sync_api")

CHROMIUM = Path("/usr/bin/chromium")
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
        "--disable-sync", "--no-first-run", "--disable-quic"]
ARTIFACTS = Path(__file__).resolve().parents[1] / "test-artifacts"

pytestmark = pytest.mark.skipif(not CHROMIUM.exists(), reason="needs Debian's chromium at /usr/bin/chromium")


@pytest.fixture(scope="module")
def site(tmp_path_factory):
    fx = sf.build(tmp_path_factory.mktemp("browser") / "ws")
    out = fx.root / "public"
    build(fx.db, fx.config, out)
    views = Views(collect(fx.db, fx.config))
    server = make_server(out, 0, quiet=True)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    yield {"out": out, "base": f"http://127.0.0.1:{server.server_address[1]}/", "views": views}
    server.shutdown()
    server.server_close()
    fx.close()


@pytest.fixture(scope="module")
def browser(tmp_path_factory):
    profile = tmp_path_factory.mktemp("chromium-profile")
    with playwright_api.sync_playwright() as p:
        context = p.chromium.launch_persistent_context(
            str(profile), executable_path=str(CHROMIUM), headless=True, args=ARGS,
            viewport={"width": 1280, "height": 900})
        yield context
        context.close()
    shutil.rmtree(profile, ignore_errors=True)


class Visit:
    """A page with every request, console message, page error and dialog recorded."""

    def __init__(self, context):
        self.page = context.new_page()
        self.requests: list[str] = []
        self.console: list[tuple[str, str]] = []
        self.errors: list[str] = []
        self.dialogs: list[str] = []
        self.page.on("request", lambda r: self.requests.append(r.url))
        self.page.on("console", lambda m: self.console.append((m.type, m.text)))
        self.page.on("pageerror", lambda e: self.errors.append(str(e)))
        self.page.on("dialog", self._dialog)

    def _dialog(self, dialog):
        self.dialogs.append(dialog.message)
        dialog.dismiss()

    def open(self, url: str):
        self.page.goto(url)
        self.page.wait_for_load_state("networkidle")
        self.page.wait_for_function(
            "() => [...document.querySelectorAll('.chart-view')].every("
            "v => v.classList.contains('chart-ready') || v.classList.contains('chart-failed'))",
            timeout=30_000)
        return self

    def charts(self) -> tuple[int, int]:
        views = self.page.locator(".chart-view")
        drawn = self.page.locator(".chart-view.chart-ready svg, .chart-view.chart-ready canvas")
        return views.count(), drawn.count()

    def shot(self, name: str) -> Path:
        ARTIFACTS.mkdir(exist_ok=True)
        path = ARTIFACTS / f"{name}.png"
        self.page.screenshot(path=str(path), full_page=True)
        return path

    def close(self):
        self.page.close()


def _check(visit: Visit, base: str, charts_expected: bool):
    assert not visit.errors, visit.errors
    errors = [text for kind, text in visit.console if kind == "error"]
    assert not errors, errors
    vega_warnings = [text for kind, text in visit.console if kind == "warning" and "WARN" in text]
    assert not vega_warnings, vega_warnings
    outside = [u for u in visit.requests if not (u.startswith(base) or u.startswith("data:"))]
    assert not outside, outside
    assert visit.requests and visit.requests[0].startswith(base)
    views, drawn = visit.charts()
    if charts_expected:
        assert views > 0
    assert drawn == views, (views, drawn)
    assert not visit.dialogs, visit.dialogs


@pytest.mark.parametrize("name, page", [
    ("home", P.HOME),
    ("state", "state:KA:federal"),
    ("watch", P.WATCH),
    ("cycle", P.cycle_page(2022)),
])
def test_page_loads_offline_with_charts_and_no_errors(site, browser, name, page):
    if page.startswith("state:"):
        _, state, chamber = page.split(":")
        page = site["views"].state_path(state, chamber)
    visit = Visit(browser).open(site["base"] + page)
    try:
        _check(visit, site["base"], charts_expected=name != "watch")
        assert visit.shot(f"site-{name}").stat().st_size > 10_000
        assert "Indicators, not legal findings" in visit.page.inner_text("footer")
    finally:
        visit.close()


def test_state_name_with_script_is_shown_as_text(site, browser):
    page = site["views"].state_path(sf.XSS, "federal")
    visit = Visit(browser).open(site["base"] + page)
    try:
        _check(visit, site["base"], charts_expected=True)
        heading = visit.page.locator("h1")
        assert sf.XSS in heading.inner_text() and heading.is_visible()
        assert visit.page.evaluate("() => document.querySelectorAll('script:not([src]):not([type])').length") == 0
        # hovering the chart marks opens tooltips with the name: still no dialog
        marks = visit.page.locator(".chart-view svg .mark-symbol path").all()
        assert marks
        for mark in marks[:8]:
            mark.hover(force=True)
        visit.shot("site-state-markup-name")
        assert not visit.dialogs
    finally:
        visit.close()
    home = Visit(browser).open(site["base"] + P.HOME)
    try:
        assert home.page.get_by_text(sf.XSS, exact=True).first.is_visible()
        assert home.page.locator("svg text", has_text="<script>").count() >= 1  # chart labels are SVG text
        assert not home.dialogs
    finally:
        home.close()


def test_watch_list_sorts_without_a_server(site, browser):
    visit = Visit(browser)
    try:
        visit.page.goto((site["out"] / P.WATCH).as_uri())  # straight from disk
        visit.page.wait_for_load_state("load")
        table = visit.page.locator("#in-force table.watch")
        rows = lambda: table.locator("tbody tr td:first-child").all_inner_texts()
        assert len(rows()) >= 2
        header = table.locator("thead th").nth(0).locator("button")
        header.click()
        first = rows()
        assert first == sorted(first, key=str.lower)
        header.click()
        assert rows() == sorted(first, key=str.lower, reverse=True)
        assert table.locator("thead th").nth(0).get_attribute("aria-sort") == "descending"
        assert all(u.startswith("file://") or u.startswith("data:") for u in visit.requests), visit.requests
        assert not visit.errors
    finally:
        visit.close()


def test_charts_render_from_disk(site, browser):
    visit = Visit(browser)
    try:
        visit.page.goto((site["out"] / P.HOME).as_uri())
        visit.page.wait_for_function(
            "() => [...document.querySelectorAll('.chart-view')].every(v => v.classList.contains('chart-ready'))",
            timeout=30_000)
        views, drawn = visit.charts()
        assert views > 0 and drawn == views
        assert all(u.startswith("file://") or u.startswith("data:") for u in visit.requests), visit.requests
        assert not visit.errors
    finally:
        visit.close()


# --- readable at 1280 and 375 px, accessible (issue 15) -----------------------------------------------
READ_PAGES = [("home", P.HOME), ("watch", P.WATCH), ("states", P.STATES), ("cycle", P.cycle_page(2022)),
              ("state", "state:KA:federal"), ("state-lower", "state:KA:state_lower")]

#: Page width, and every table header whose text does not fit its cell (cut), in the page.
LAYOUT = """() => {
  const doc = document.documentElement;
  const cut = [...document.querySelectorAll('th')].filter(th => th.offsetParent !== null
      && (th.scrollWidth > th.clientWidth + 1 || th.scrollHeight > th.clientHeight + 1))
    .map(th => th.innerText.trim());
  const wide = [...document.querySelectorAll('table')].filter(t => t.offsetParent !== null
      && t.getBoundingClientRect().right > doc.clientWidth + 1 && !t.closest('.table-wrap'))
    .map(t => t.className || t.id || 'table');
  return {scroll: doc.scrollWidth, client: doc.clientWidth, body: document.body.scrollWidth, cut, wide};
}"""


def _page_path(site, page: str) -> str:
    if page.startswith("state:"):
        _, state, chamber = page.split(":")
        return site["views"].state_path(state, chamber)
    return page


@pytest.mark.parametrize("width", [375, 1280])
@pytest.mark.parametrize("name, page", READ_PAGES)
def test_no_horizontal_page_scroll_and_no_cut_headers(site, browser, name, page, width):
    """The page itself never scrolls sideways (a wide table scrolls inside its own box), and no
    table header is cut (its text fits its cell)."""
    visit = Visit(browser)
    try:
        visit.page.set_viewport_size({"width": width, "height": 900})
        visit.open(site["base"] + _page_path(site, page))
        layout = visit.page.evaluate(LAYOUT)
        assert layout["scroll"] <= layout["client"] and layout["body"] <= layout["client"], (name, width, layout)
        assert layout["cut"] == [], (name, width, layout["cut"])
        assert layout["wide"] == [], (name, width, layout["wide"])
        visit.shot(f"read-{name}-{width}")
    finally:
        visit.close()


def test_the_layout_check_sees_a_page_that_scrolls(site, browser):
    """The check above can fail: a table forced wider than the window outside any scroll box."""
    visit = Visit(browser)
    try:
        visit.page.set_viewport_size({"width": 375, "height": 900})
        visit.open(site["base"] + P.WATCH)
        visit.page.evaluate("""() => { const t = document.querySelector('table.watch');
            document.querySelector('main').appendChild(t); t.style.minWidth = '900px'; }""")
        layout = visit.page.evaluate(LAYOUT)
        assert layout["scroll"] > layout["client"] and layout["wide"]
        visit.page.evaluate("() => { const th = document.querySelector('th'); th.style.display = 'block';"
                            " th.style.width = '12px'; th.style.overflow = 'hidden'; th.style.whiteSpace = 'nowrap'; }")
        assert visit.page.evaluate(LAYOUT)["cut"]
    finally:
        visit.close()


def test_home_lists_exactly_the_units_flagged_in_the_latest_cycle(site, browser):
    views = site["views"]
    d = views.d
    visit = Visit(browser).open(site["base"] + P.HOME)
    try:
        for i, (chamber, cycle) in enumerate(d.chamber_latest().items(), start=1):
            shown = visit.page.locator(f"#tails-{i} tr[data-state]").evaluate_all(
                "rows => rows.map(r => r.dataset.state)")
            t = d.tails[(d.tails["cycle"] == cycle) & (d.tails["chamber"] == chamber) & (d.tails["flagged"] == 1)]
            assert sorted(shown) == sorted(set(t["state"])), (chamber, cycle)
    finally:
        visit.close()


def _axe():
    """axe-playwright-python's runner (skips only the accessibility tests when it is missing)."""
    return pytest.importorskip("axe_playwright_python.sync_playwright").Axe()


@pytest.mark.parametrize("name, page", [("home", P.HOME), ("watch", P.WATCH), ("cycle", P.cycle_page(2022)),
                                        ("state", "state:KA:federal")])
def test_no_serious_or_critical_accessibility_violation(site, browser, name, page):
    """axe-core (bundled with axe-playwright-python, run inside the page, offline): no violation
    of impact serious or critical (Deque's axe-core rules, WCAG 2 A/AA and best practices)."""
    visit = Visit(browser).open(site["base"] + _page_path(site, page))
    try:
        results = _axe().run(visit.page)
        found = [(v["id"], v["impact"], len(v["nodes"]), v["nodes"][0]["target"])
                 for v in results.response["violations"] if v["impact"] in ("serious", "critical")]
        assert found == [], (name, found)
        assert results.response["testEngine"]["name"] == "axe-core"
    finally:
        visit.close()


def test_the_accessibility_check_finds_a_violation(site, browser):
    """The check above can fail: a button without a name (axe rule button-name, critical)."""
    visit = Visit(browser).open(site["base"] + P.WATCH)
    try:
        visit.page.evaluate("() => document.querySelector('main').appendChild(document.createElement('button'))")
        results = _axe().run(visit.page)
        assert "button-name" in {v["id"] for v in results.response["violations"] if v["impact"] == "critical"}
    finally:
        visit.close()
