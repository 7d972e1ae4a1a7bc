"""The site's weight against its budget (issue 15): every HTML page at most :data:`PAGE_BUDGET`
bytes and the whole site at most :data:`SITE_BUDGET` bytes, at the bench's x1 history.

Budgets in decimal units (300 KB = 300,000 bytes, 60 MB = 60,000,000 bytes), the stricter
reading. ``make bench`` reports the x1 site against them as ratios (``bench/stages.py``); the
tests check the sample site's pages.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

#: Largest HTML page, bytes.
PAGE_BUDGET = 300_000
#: Whole site (pages, assets, downloads, feed), bytes.
SITE_BUDGET = 60_000_000


@dataclass
class Weight:
    """A published folder weighed: ``total`` bytes of every file, its HTML ``pages`` and the
    pages over the page budget (path -> bytes, largest first)."""

    total: int = 0
    files: int = 0
    pages: int = 0
    largest_page: str = ""
    largest_page_bytes: int = 0
    over: dict[str, int] = field(default_factory=dict)
    page_budget: int = PAGE_BUDGET
    site_budget: int = SITE_BUDGET

    @property
    def site_ratio(self) -> float:
        """Total over the site budget (<= 1: within it)."""
        return self.total / self.site_budget

    @property
    def page_ratio(self) -> float:
        """Largest page over the page budget (<= 1: every page within it)."""
        return self.largest_page_bytes / self.page_budget

    def summary(self) -> dict:
        return {"site_bytes": self.total, "site_files": self.files, "html_pages": self.pages,
                "largest_page": self.largest_page, "largest_page_bytes": self.largest_page_bytes,
                "pages_over_budget": len(self.over), "site_budget_ratio": self.site_ratio,
                "page_budget_ratio": self.page_ratio}


def weigh(folder: Path, page_budget: int = PAGE_BUDGET, site_budget: int = SITE_BUDGET) -> Weight:
    """Weigh every file under ``folder`` (sizes as stored: a file hard-linked from an earlier build
    counts in full, as a reader downloads it in full)."""
    w = Weight(page_budget=page_budget, site_budget=site_budget)
    over = []
    for path in sorted(Path(folder).rglob("*")):
        if not path.is_file():
            continue
        size = path.stat().st_size
        w.total += size
        w.files += 1
        if path.suffix == ".html":
            w.pages += 1
            name = path.relative_to(folder).as_posix()
            if size > w.largest_page_bytes:
                w.largest_page, w.largest_page_bytes = name, size
            if size > page_budget:
                over.append((size, name))
    w.over = {name: size for size, name in sorted(over, reverse=True)}
    return w


__all__ = ["PAGE_BUDGET", "SITE_BUDGET", "Weight", "weigh"]
