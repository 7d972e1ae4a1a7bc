"""The state pages rendered on worker processes (``publish --workers``) give the site of one
process, byte for byte, including the record of each page's inputs and cached parts that the next
build reuses.

The site is built from ``site_fixture`` (invented results through the real loader, invented
derived rows): nothing here is a check value from outside; the reference is the one-process build.
"""

from __future__ import annotations

import os
import threading
from pathlib import Path

import pytest

import site_fixture as sf
from monitor.publish import build, workers
from monitor.publish.pages import Renderer
from monitor.publish.reuse import MANIFEST


def _files(folder: Path) -> dict[str, bytes]:
    return {p.relative_to(folder).as_posix(): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


@pytest.mark.skipif("fork" not in __import__("multiprocessing").get_all_start_methods(), reason="needs fork")
def test_state_pages_on_two_processes_give_the_bytes_of_one(tmp_path, monkeypatch):
    fx = sf.build(tmp_path / "ws")
    # the fixture has five state pages: hand every one but the first to the worker, one at a time
    monkeypatch.setattr(workers, "MIN_PAGES", 1)
    monkeypatch.setattr(workers, "CHUNK", 1)
    seen = tmp_path / "processes"
    seen.mkdir()
    reopen = Renderer._reopen

    def marked(self):  # runs in each worker, once, before its first page
        (seen / str(os.getpid())).touch()
        reopen(self)

    monkeypatch.setattr(Renderer, "_reopen", marked)
    try:
        for step in ("first", "correction"):
            one = build(fx.db, fx.config, tmp_path / "one", workers=1)
            two = build(fx.db, fx.config, tmp_path / "two", workers=2)
            assert _files(tmp_path / "one") == _files(tmp_path / "two"), step
            assert one.written == two.written and one.kept == two.kept, step
            manifest = (tmp_path / "two" / MANIFEST).read_text(encoding="utf-8")
            assert '"parts"' in manifest  # the state pages' results tables are recorded as their parts
            if step == "first":
                sf.correct_state(fx)  # then a republish: the kept pages' parts must still be there
        workers_seen = {p.name for p in seen.iterdir()} - {str(os.getpid())}
        assert workers_seen, "no state page was rendered on a worker process"
        assert sorted(p.name for p in (tmp_path / ".one-parts").iterdir()) == \
            sorted(p.name for p in (tmp_path / ".two-parts").iterdir())
    finally:
        fx.close()



def test_a_second_process_only_when_a_second_cpu_is_idle(monkeypatch):
    monkeypatch.setattr(os, "sched_getaffinity", lambda pid: {0, 1})
    monkeypatch.setattr(os, "getloadavg", lambda: (1.0, 1.0, 1.0))  # this build alone on 2 CPUs
    assert workers.default_workers() == 2
    monkeypatch.setattr(os, "getloadavg", lambda: (2.6, 2.0, 2.0))  # two other jobs running
    assert workers.default_workers() == 1
    monkeypatch.setattr(os, "sched_getaffinity", lambda pid: {0})
    monkeypatch.setattr(os, "getloadavg", lambda: (0.0, 0.0, 0.0))
    assert workers.default_workers() == 1


def test_no_worker_is_forked_while_another_thread_runs():
    # the watcher's scheduler runs a build in a thread of its own: a fork there could copy a lock
    # another thread holds, so the pages are rendered in the build's own process
    items = list(range(workers.MIN_PAGES + 1))
    with workers.Farm(lambda i: i * i, items, workers=2) as alone:
        forked_alone = alone.pool is not None
        assert dict(alone.finish()) == {i: i * i for i in items}
    stop = threading.Event()
    other = threading.Thread(target=stop.wait)
    other.start()
    try:
        with workers.Farm(lambda i: i * i, items, workers=2) as busy:
            assert busy.pool is None
            assert dict(busy.finish()) == {i: i * i for i in items}
    finally:
        stop.set()
        other.join()
    if "fork" in __import__("multiprocessing").get_all_start_methods():
        assert forked_alone  # the same call forks when the build is the only thread

