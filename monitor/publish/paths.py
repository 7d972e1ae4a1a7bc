"""Where each page of the site lives, and relative links between pages.

Every link in the site is relative (``../state/js/federal.html``), so the folder works from disk,
from any URL prefix and from an archive. State and chamber codes are free text in the store, so
they become file names through :func:`slug`, which never lets a separator, a dot or markup
through.
"""

from __future__ import annotations

import hashlib
import posixpath
import re
from collections.abc import Iterable

_UNSAFE = re.compile(r"[^a-z0-9_]+")


def slug(text: str) -> str:
    """A file-name-safe form of ``text``: lower-case letters, digits and ``_``.

    When ``text`` holds anything else (or is empty after cleaning), eight hex digits of its
    sha256 are appended, so two different codes never share a slug.

    >>> slug("JS"), slug("state_lower"), slug("a/b")
    ('js', 'state_lower', 'a_b-c14cddc0')
    """
    clean = _UNSAFE.sub("_", text.lower()).strip("_")
    if clean == text.lower() and clean:
        return clean
    digest = hashlib.sha256(text.encode("utf-8")).hexdigest()[:8]
    return f"{clean[:32]}-{digest}" if clean else f"x-{digest}"


def unique_slugs(codes: Iterable[str]) -> dict[str, str]:
    """Slugs for a set of codes; codes that differ only by case get their hash appended."""
    codes = sorted(set(codes))
    first = {code: slug(code) for code in codes}
    seen: dict[str, int] = {}
    for s in first.values():
        seen[s] = seen.get(s, 0) + 1
    out = {}
    for code, s in first.items():
        if seen[s] > 1:
            s = f"{s}-{hashlib.sha256(code.encode('utf-8')).hexdigest()[:8]}"
        out[code] = s
    return out


HOME = "index.html"
WATCH = "watch.html"
STATES = "states.html"
CYCLES = "cycles.html"
METHODS = "methods.html"
DOWNLOADS = "downloads.html"
FEED = "atom.xml"
DOWNLOAD_DIR = "downloads"
ASSET_DIR = "assets"


def state_page(state_slug: str, chamber_slug: str) -> str:
    return f"state/{state_slug}/{chamber_slug}.html"


def cycle_page(cycle: int) -> str:
    return f"cycle/{int(cycle)}.html"


def relative(target: str, page: str) -> str:
    """The relative link from ``page`` to ``target`` (both site paths, ``/``-separated).

    >>> relative("assets/style.css", "state/js/federal.html")
    '../../assets/style.css'
    >>> relative("index.html#watch", "index.html")
    'index.html#watch'
    """
    path, hash_, fragment = target.partition("#")
    base = posixpath.dirname(page) or "."
    rel = posixpath.relpath(path, base) if path else posixpath.basename(page)
    return rel + (hash_ + fragment if hash_ else "")
