"""Rendering the changed state pages on more than one process, with the same bytes as one process.

A change to one unit redraws its (cycle, chamber) national pool, so every state page of that
chamber is rendered again (50 at the bench's x1 history), and a new cycle renders every state
page. :class:`Farm` hands those pages, a few at a time, to worker processes forked from the build
(they share its collected data; nothing is pickled but the pages' bytes) while the build itself
renders the other files (home, cycle pages, downloads). When the build is done with those, it
takes back the chunks no worker has started and renders them itself, then gathers the workers'
pages. Each page is rendered by the same code on the same data whichever process renders it.

Only where ``fork`` exists (Linux, macOS) and the build's process runs no other thread; elsewhere,
with one worker, or with few pages, every page is rendered in the build's own process. A fork
copies only the forking thread, with every lock as it was at that instant: a lock another thread
held (the watcher's scheduler runs the build in a thread of its own) would stay held for ever in
the worker. So the service renders its pages in one process; ``levelfield publish`` and
``watch --once`` may fork.
"""

from __future__ import annotations

import multiprocessing
import os
import threading
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import Future, ProcessPoolExecutor

#: Fewer pages than this are rendered in the build's process (starting a worker is not worth it).
MIN_PAGES = 8
#: Pages handed to a worker at a time: small enough that the build can take back what is left.
CHUNK = 3

_TASK: dict = {}


def default_workers() -> int:
    """Two processes where the build may use two CPUs or more and a second one is idle (the
    1-minute load average, this build's process included, under the CPUs less one half, as
    ``make -l`` judges); else one. On a busy machine a worker only competes with the build for
    the same CPU: measured at x1 with the load at 2.5 to 3.3 on 2 CPUs, two processes took as
    long or longer (total CPU grows by about a tenth: the fork, the pages sent back)."""
    try:
        cpus = len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not on Linux
        cpus = os.cpu_count() or 1
    if cpus < 2:
        return 1
    try:
        load = os.getloadavg()[0]
    except (AttributeError, OSError):  # pragma: no cover - no load average here
        return 1
    return 2 if load < cpus - 0.5 else 1


def _may_fork() -> bool:
    """Whether worker processes may be forked from here: ``fork`` exists and no other thread runs."""
    return "fork" in multiprocessing.get_all_start_methods() and threading.active_count() == 1


def _run(chunk: Sequence) -> list:
    render, setup = _TASK["render"], _TASK["setup"]
    if _TASK.get("pid") != os.getpid():  # first chunk in this worker
        _TASK["pid"] = os.getpid()
        setup()
    return [render(item) for item in chunk]


class Farm:
    """``render(item)`` for every item, in worker processes and in this one.

    ``render`` returns any picklable result; ``setup()`` runs once in each worker before its first
    item (to open what must not be shared across a fork, such as a database connection).
    :meth:`finish` yields ``(item, result)`` for every item."""

    def __init__(self, render: Callable, items: Sequence, workers: int, setup: Callable[[], None] = lambda: None):
        self.render = render
        self.items = list(items)
        self.futures: list[tuple[list, Future]] = []
        self.pool = None
        if workers > 1 and len(self.items) >= MIN_PAGES and _may_fork():
            _TASK.update(render=render, setup=setup, pid=os.getpid())
            self.pool = ProcessPoolExecutor(workers - 1, mp_context=multiprocessing.get_context("fork"))
            for start in range(0, len(self.items), CHUNK):
                chunk = self.items[start:start + CHUNK]
                self.futures.append((chunk, self.pool.submit(_run, chunk)))

    def finish(self) -> Iterator[tuple[object, object]]:
        """Every item with its result: the chunks no worker started are rendered here (from the
        last one back), then the workers' results are gathered in order."""
        if self.pool is None:
            for item in self.items:
                yield item, self.render(item)
            return
        try:
            for chunk, future in reversed(self.futures):
                if future.cancel():
                    for item in chunk:
                        yield item, self.render(item)
            for chunk, future in self.futures:
                if not future.cancelled():
                    yield from zip(chunk, future.result())
        finally:
            self.close()

    def close(self) -> None:
        if self.pool is not None:
            self.pool.shutdown(wait=True, cancel_futures=True)
            self.pool = None
            _TASK.clear()

    def __enter__(self) -> "Farm":
        return self

    def __exit__(self, *exc) -> None:
        self.close()
