"""Progress of long work (loads, recompute, publish), for a person watching a terminal.

The library functions take an optional ``progress`` callback and know nothing of terminals:
``progress(stage, done, total, detail)`` with ``total`` None when the amount of work is not known.
The CLI passes :func:`for_terminal`, which draws one updating line on stderr when stderr is an
interactive terminal and gives ``None`` (no progress at all) otherwise: nothing of it reaches a
pipe, a cron mail or ``logs/levelfield.log``.
"""

from __future__ import annotations

import sys
import threading
import time
from collections.abc import Callable
from typing import TextIO

#: ``progress(stage, done, total, detail="")``
Progress = Callable[..., None]


def tell(progress: Progress | None, stage: str, done: int, total: int | None = None, detail: str = "") -> None:
    """Call ``progress`` when there is one (library code calls this, never prints)."""
    if progress is not None:
        progress(stage, done, total, detail)


class TerminalProgress:
    """One line on ``stream``, redrawn in place (``\\r`` and erase-line); a small timer thread
    redraws it every ``tick`` seconds so that work of unknown size shows its elapsed time."""

    def __init__(self, stream: TextIO, *, width: int = 100, tick: float = 0.5):
        self.stream = stream
        self.width = width
        self._lock = threading.Lock()
        self._state: tuple[str, int, int | None, str] | None = None
        self._since = time.monotonic()
        self._shown = False
        self._stop = threading.Event()
        self._timer = threading.Thread(target=self._tick, args=(tick,), daemon=True, name="progress")
        self._timer.start()

    def __call__(self, stage: str, done: int, total: int | None = None, detail: str = "") -> None:
        with self._lock:
            if self._state is None or self._state[0] != stage:
                self._since = time.monotonic()
            self._state = (stage, done, total, detail)
            self._draw()

    def _text(self) -> str:
        stage, done, total, detail = self._state
        elapsed = time.monotonic() - self._since
        if total:
            text = f"{stage}: {done}/{total} ({100 * done // total}%)"
        else:
            text = f"{stage}: working"
        text += f" {elapsed:.0f}s"
        if detail:
            text += f"  {detail}"
        return text[: self.width]

    def _draw(self) -> None:
        if self._state is None:
            return
        try:
            self.stream.write("\r\x1b[K" + self._text())
            self.stream.flush()
            self._shown = True
        except (OSError, ValueError):  # the terminal went away: progress is not worth an error
            self._stop.set()

    def _tick(self, every: float) -> None:
        while not self._stop.wait(every):
            with self._lock:
                self._draw()

    def clear(self) -> None:
        """Erase the line (before other output, or when the work is done)."""
        with self._lock:
            self._state = None
            if self._shown:
                try:
                    self.stream.write("\r\x1b[K")
                    self.stream.flush()
                except (OSError, ValueError):
                    pass
                self._shown = False

    def close(self) -> None:
        self._stop.set()
        self.clear()


def for_terminal(stream: TextIO | None = None) -> TerminalProgress | None:
    """A :class:`TerminalProgress` on ``stream`` (default stderr) when it is an interactive
    terminal, else None."""
    stream = stream if stream is not None else sys.stderr
    try:
        interactive = stream.isatty()
    except (AttributeError, ValueError):
        interactive = False
    return TerminalProgress(stream) if interactive else None
