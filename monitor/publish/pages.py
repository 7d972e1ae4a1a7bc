"""Render: every page of the site as ``(path, bytes)``, one at a time (nothing is written here).

Templates are found along an ordered search path: an optional override folder first, then the
built-in ``site/templates``; a template can extend a built-in one as ``default:base.html``.
Autoescape is on for every template. The filters that return markup escape what they are given:
``json_script`` escapes ``<``, ``>`` and ``&`` inside the JSON it writes, so no data value can
close the ``<script>`` element it sits in; ``idents`` escapes the text, then sets its identifiers
(download columns, measure names) in ``<code>``.
"""

from __future__ import annotations

import json
import posixpath
import re
from collections.abc import Iterator, Sequence
from pathlib import Path

import jinja2
from markupsafe import Markup

from monitor.publish.chartkit import CONFIG as CHART_CONFIG
from monitor.publish import formats as F
from monitor.publish import paths as P
from monitor.publish.collect import SiteData
from monitor.publish.downloads import iter_downloads
from monitor.publish.feed import atom_feed
from monitor.publish.plan import deliveries, digests, page_digests, page_inputs
from monitor.publish.reuse import KEPT, Reuse
from monitor.publish.views import Views
from monitor.publish.workers import Farm

SITE_DIR = Path(__file__).resolve().parents[2] / "site"
TEMPLATE_DIR = SITE_DIR / "templates"
ASSET_DIR = SITE_DIR / "assets"

CAUTION = ("Indicators, not legal findings. Unofficial results can change until certified. "
           "Imputed uncontested districts change the numbers. Defer to counsel and the courts.")


def json_script(value) -> Markup:
    """JSON for a ``<script type="application/json">`` element (sorted keys: stable bytes)."""
    text = json.dumps(value, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False)
    text = text.replace("&", "\\u0026").replace("<", "\\u003c").replace(">", "\\u003e")
    text = text.replace("\u2028", "\\u2028").replace("\u2029", "\\u2029")
    return Markup(text)


#: A snake_case word in running text: an identifier (a download column or a measure's name).
_IDENT = re.compile(r"\b[a-z][a-z0-9]*(?:_[a-z0-9]+)+\b")


def idents(text) -> Markup:
    """Text with its identifiers set as code: ``uses seats_a`` -> ``uses <code>seats_a</code>``
    (the text is escaped first)."""
    escaped = str(Markup.escape("" if text is None else text))
    return Markup(_IDENT.sub(lambda m: f"<code>{m.group(0)}</code>", escaped))


def environment(extra_dirs: Sequence[str | Path] = ()) -> jinja2.Environment:
    """The Jinja environment: override folders, then the built-in templates; autoescape always."""
    builtin = jinja2.FileSystemLoader(str(TEMPLATE_DIR))
    loader = jinja2.ChoiceLoader([
        *(jinja2.FileSystemLoader(str(d)) for d in extra_dirs),
        builtin,
        jinja2.PrefixLoader({"default": builtin}, delimiter=":"),
    ])
    env = jinja2.Environment(loader=loader, autoescape=True, undefined=jinja2.StrictUndefined,
                             trim_blocks=True, lstrip_blocks=True, keep_trailing_newline=True)
    register_filters(env)
    return env


def register_filters(env: jinja2.Environment) -> None:
    """Every filter the templates use, in one place."""
    env.filters.update({
        "json_script": json_script,
        "idents": idents,
        "share": F.share,
        "signed": F.signed,
        "number": F.number,
        "count": F.count,
        "size": F.size,
    })
    env.globals["caution"] = CAUTION
    env.globals["chart_config"] = CHART_CONFIG  # once per page, not in every chart (charts.js applies it)


def _root(page: str) -> str:
    depth = page.count("/")
    return "../" * depth


class Renderer:
    def __init__(self, data: SiteData, env: jinja2.Environment, reuse: Reuse | None = None,
                 previous_feed: bytes | None = None, workers: int = 1):
        self.data = data
        self.workers = workers
        self._store_path = None
        if workers > 1 and data.db is not None:
            from store import path_of

            self._store_path = path_of(data.db)
        self.env = env
        self.views = Views(data)
        self.reuse = reuse
        self.previous_feed = previous_feed
        self.inputs: dict[str, str] = {}
        self.delivered: dict[tuple, str] = {}
        if reuse is not None and reuse.out is not None and not data.empty:
            from store.reductions import current_keys

            keys = current_keys(data.db)
            self.inputs = page_digests(page_inputs(data), digests(data, keys))
            self.delivered = deliveries(data, keys)

    def kept(self, path: str) -> bool:
        """Whether the previous build's ``path`` was made from the same inputs (then it is kept)."""
        return self.reuse is not None and self.reuse.keep(path, self.inputs.get(path))

    def page(self, path: str, template: str, title: str, section: str, **context) -> tuple[str, bytes]:
        root = _root(path)
        html = self.env.get_template(template).render(
            page=path, root=root, title=title, section=section, parties=self.data.parties, **context)
        return path, html.encode("utf-8")

    def results(self, state: str, chamber: str, page: str | None = None) -> list[Markup]:
        """A state page's district results: the latest cycle's table (earlier cycles are in the
        results download: a page holding every cycle of a large chamber would weigh megabytes).
        The table depends only on its unit's delivery (:func:`monitor.publish.plan.deliveries`): it
        is kept with the site's parts and rendered again only when the unit is re-delivered."""
        cycles, names = self._results_names(state, chamber)
        html = {c: self.reuse.cached(n, page) for c, n in names.items()} if self.reuse is not None else {}
        missing = [c for c in cycles if html.get(c) is None]
        if missing:
            template = self.env.get_template("_results_cycle.html")
            for entry in self.views._results(state, chamber, missing):
                c = entry["cycle"]
                html[c] = template.render(c=entry, first=c == cycles[0], parties=self.data.parties).encode("utf-8")
                if c in names and self.reuse is not None:
                    self.reuse.store(names[c], html[c], page)
        return [Markup(html[c].decode("utf-8")) for c in cycles if c in html]

    def _results_names(self, state: str, chamber: str) -> tuple[list[int], dict[int, str]]:
        """The cycles of a state page's results table (the latest) and the cached parts' names."""
        units = self.views.by("units", ("state", "chamber"), (state, chamber))
        cycles = sorted(units["cycle"].astype(int), reverse=True)[:1]
        names = {c: f"results.{self.delivered[(c, state, chamber)]}.{int(i == 0)}.html"
                 for i, c in enumerate(cycles) if (c, state, chamber) in self.delivered}
        return cycles, names

    def _read_results_ahead(self, todo: list[tuple[str, str, str]]) -> None:
        """Read in one query the contests of the results tables the pages ``todo`` must render
        (not cached: a new cycle, a re-delivered unit)."""
        cache = self.reuse.cache if self.reuse is not None else None
        units = []
        for state, chamber, _ in todo:
            cycles, names = self._results_names(state, chamber)
            units += [(c, state, chamber) for c in cycles if cache is None or c not in names
                      or not (cache / names[c]).is_file()]
        if len(units) > 1:
            self.data.read_ahead(units)

    def render(self) -> Iterator[tuple[str, bytes]]:
        """Each file as soon as it is rendered, so that a build holds one page at a time."""
        d, v = self.data, self.views
        yield self.page(P.HOME, "index.html", "Home", "home", **v.home(_root(P.HOME)))
        yield self.page(P.WATCH, "watch.html", "Watch list", "watch", **v.watch(_root(P.WATCH)))
        yield self.page(P.STATES, "states.html", "States", "states", **v.states(_root(P.STATES)))
        yield self.page(P.CYCLES, "cycles.html", "Cycles", "cycles", **v.cycles(_root(P.CYCLES)))
        todo = []
        for state, chamber in d.pairs():
            path = v.state_path(state, chamber)
            if self.kept(path):
                yield path, KEPT
            else:
                todo.append((state, chamber, path))
        self._read_results_ahead(todo)
        if todo:  # the first one here: what every state page reads is then ready before any fork
            yield todo[0][2], self._state_page(todo[0])[0]
        # the other state pages on the workers while this process renders the rest of the site
        with Farm(self._state_page, todo[1:], self._workers(), self._reopen) as farm:
            yield from self._rest()
            for (state, chamber, path), (html, parts) in farm.finish():
                if self.reuse is not None:
                    self.reuse.adopt(path, parts)
                yield path, html

    def _rest(self) -> Iterator[tuple[str, bytes]]:
        """The cycle pages, methods, downloads and feed."""
        d, v = self.data, self.views
        for cycle in d.cycles:
            path = P.cycle_page(cycle)
            if self.kept(path):
                yield path, KEPT
                continue
            yield self.page(path, "cycle.html", f"Cycle {cycle}", "cycles", **v.cycle(cycle, _root(path)))
        yield self.page(P.METHODS, "methods.html", "Methods", "methods", **v.methods())
        listing: list[dict] = []
        yield from iter_downloads(d, P.DOWNLOAD_DIR, listing, self.reuse)
        files = [{**f, "description": v.words.plain(f["description"])} for f in listing]
        yield self.page(P.DOWNLOADS, "downloads.html", "Downloads", "downloads", files=files,
                        datapackage=f"{P.DOWNLOAD_DIR}/datapackage.json", provenance=v.provenance(), empty=d.empty)
        yield P.FEED, atom_feed(d, v, P.FEED, self.previous_feed)

    def _state_page(self, item: tuple[str, str, str]) -> tuple[bytes, list[str]]:
        """One state page's bytes and the cached parts it is made with (a worker returns both, so
        that the build records the parts as its own)."""
        state, chamber, path = item
        ctx = self.views.state(state, chamber, _root(path))
        ctx["results"] = self.results(state, chamber, path)
        html = self.page(path, "state.html", ctx["where"], "states", **ctx)[1]
        return html, self.reuse.parts_of(path) if self.reuse is not None else []

    def _workers(self) -> int:
        """Processes for the state pages: one when the store cannot be opened again by a worker
        (an in-memory database)."""
        return self.workers if self._store_path is not None else 1

    def _reopen(self) -> None:
        """In a worker: its own connection to the store (one must not be used across a fork)."""
        import store

        self._inherited_db = self.data.db  # kept referenced: never closed from a worker
        self.data.db = store.connect(self._store_path, migrate=False)


def iter_site(data: SiteData, extra_template_dirs: Sequence[str | Path] = (), *,
              reuse: Reuse | None = None, previous_feed: bytes | None = None,
              workers: int = 1) -> Iterator[tuple[str, bytes]]:
    """Every generated page and download (not the static assets) as ``(path, content)``, lazily;
    with ``reuse`` (the previous build's manifest), a state or cycle page or a download whose
    inputs did not change comes as ``(path, KEPT)`` without being rendered. ``previous_feed``:
    the feed of the build this one replaces (None for a first build). ``workers``: processes
    rendering the state pages (:mod:`monitor.publish.workers`; the bytes are the same)."""
    return Renderer(data, environment(extra_template_dirs), reuse, previous_feed, workers).render()


def render_site(data: SiteData, extra_template_dirs: Sequence[str | Path] = ()) -> dict[str, bytes]:
    """Every generated page and download (not the static assets) as ``path -> bytes``."""
    return dict(iter_site(data, extra_template_dirs))


def static_assets() -> dict[str, bytes]:
    """Our own CSS and scripts from ``site/assets``."""
    out = {}
    for path in sorted(ASSET_DIR.rglob("*")):
        if path.is_file():
            out[posixpath.join(P.ASSET_DIR, path.relative_to(ASSET_DIR).as_posix())] = path.read_bytes()
    return out
