"""The weight check of the site (issue 15: every HTML page <= 300 KB, the whole site <= 60 MB at
the bench's x1 history), as ``make bench`` applies it to the x1 site. Plumbing test on a folder
of files of known sizes: the expectations are hand-computed from those sizes."""

from __future__ import annotations

import os

from monitor.publish.weight import PAGE_BUDGET, SITE_BUDGET, weigh


def _file(path, size: int) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(b"x" * size)


def test_budgets_are_the_issue_s_in_decimal_units():
    assert (PAGE_BUDGET, SITE_BUDGET) == (300_000, 60_000_000)


def test_weigh_counts_every_file_and_names_the_pages_over_budget(tmp_path):
    site = tmp_path / "public"
    _file(site / "index.html", 1_000)
    _file(site / "cycle" / "1996.html", 1_200)  # over a 1,100-byte page budget
    _file(site / "cycle" / "1998.html", 1_100)  # at the budget: within it
    _file(site / "state" / "qb" / "federal.html", 1_150)  # over
    _file(site / "downloads" / "results.csv.gz", 5_000)  # not a page: weighs in the total only
    _file(site / ".levelfield-inputs.json", 50)
    os.link(site / "index.html", tmp_path / "elsewhere.html")  # a hard link counts in full where it is
    w = weigh(site, page_budget=1_100, site_budget=10_000)
    assert (w.total, w.files, w.pages) == (1_000 + 1_200 + 1_100 + 1_150 + 5_000 + 50, 6, 4)
    assert (w.largest_page, w.largest_page_bytes) == ("cycle/1996.html", 1_200)
    assert w.over == {"cycle/1996.html": 1_200, "state/qb/federal.html": 1_150}
    assert list(w.over) == ["cycle/1996.html", "state/qb/federal.html"]  # largest first
    assert w.site_ratio == 9_500 / 10_000 and w.page_ratio == 1_200 / 1_100
    summary = w.summary()
    assert summary["pages_over_budget"] == 2 and summary["site_bytes"] == 9_500


def test_a_site_within_its_budgets_has_ratios_at_most_one(tmp_path):
    _file(tmp_path / "index.html", 300_000)
    w = weigh(tmp_path)
    assert w.over == {} and w.page_ratio == 1.0 and w.site_ratio == 300_000 / 60_000_000


def test_the_bench_reports_the_weight_as_ratios_against_the_budgets(tmp_path):
    """``make bench`` turns the full publish's weight into two targets (hand-made stage entries)."""
    import bench.__main__ as bench

    for page_bytes, verdict in ((285_707, "met"), (480_000, "MISSED")):
        _file(tmp_path / str(page_bytes) / "cycle" / "1996.html", page_bytes)
        weight = weigh(tmp_path / str(page_bytes)).summary()
        stages = {"publish_full": {"seconds": 1.0, "weight": weight, "peak_rss_mb": 1.0}}
        derived = bench.derive({"stages": stages})
        _, checks = bench.table({"1": {"stages": stages, "derived": derived}}, {})
        by_name = {c["target"]: c for c in checks}
        page = by_name["largest HTML page / budget (300 KB)"]
        assert page["measured"] == page_bytes / PAGE_BUDGET and page["verdict"] == verdict
        site = by_name["site weight / budget (60 MB), full publish"]
        assert site["measured"] == page_bytes / SITE_BUDGET and site["verdict"] == "met"
