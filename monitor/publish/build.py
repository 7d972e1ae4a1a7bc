"""Build the site: collect -> render -> write, with an atomic swap.

1. **collect** reads the store into frames (:func:`monitor.publish.collect.collect`);
2. **render** turns them into every page, download and asset, ``(path, bytes)`` one at a time;
3. **write** puts each file into a fresh folder beside the output as it comes (so a build holds
   one page in memory, not the site) and, once all are written, swaps the folder into place in
   one step (``renameat2(RENAME_EXCHANGE)`` on Linux; elsewhere two renames). A build that fails
   at any stage leaves the previous site whole.

Only a levelfield site is ever replaced: the output folder must be new, empty, or hold the
marker file :data:`MARKER` that every build writes; anything else is refused (``--out`` pointed
at the workspace, a home folder or a folder of notes must not be emptied).

Incremental: a file whose bytes are unchanged is not rewritten; it is hard-linked from the
previous build (same inode, same mtime), so the pages of states whose data did not change stay
byte-identical and untouched. All timestamps on the pages come from the data (the latest load
behind each page) or ``$SOURCE_DATE_EPOCH``, never from the clock, so the same store gives the
same bytes.
"""

from __future__ import annotations

import contextlib
import ctypes
import datetime as dt
import errno
import itertools
import os
import shutil
import tempfile
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path, PurePosixPath

import sqlite_utils

import store
from monitor.config import Config
from monitor.errors import UsageError
from monitor.publish import paths as P
from monitor.publish.collect import collect
from monitor.publish.feed import warnings as feed_warnings
from monitor.publish.pages import iter_site, static_assets
from monitor.publish.reuse import KEPT, MANIFEST, Parts, Reuse
from monitor.publish.runtime import RUNTIME_PATH, vega_runtime
from monitor.publish.workers import default_workers

try:
    import fcntl
except ImportError:  # pragma: no cover - not on Windows
    fcntl = None


@dataclass
class BuildReport:
    """What a build did: paths (site-relative) written, left unchanged and removed; ``kept``: the
    unchanged ones that were not even rendered (their inputs were those of the previous build's)."""

    out: Path
    written: list[str] = field(default_factory=list)
    unchanged: list[str] = field(default_factory=list)
    removed: list[str] = field(default_factory=list)
    kept: list[str] = field(default_factory=list)
    total_bytes: int = 0
    site_time: dt.datetime | None = None
    swap: str = ""
    warnings: list[str] = field(default_factory=list)

    @property
    def files(self) -> int:
        return len(self.written) + len(self.unchanged)

    @property
    def pages(self) -> int:
        return sum(1 for p in [*self.written, *self.unchanged] if p.endswith(".html"))

    def lines(self) -> list[str]:
        out = [f"published {self.pages} pages ({self.files} files, {self.total_bytes / 2**20:.1f} MiB) to {self.out}",
               f"  {len(self.written)} written, {len(self.unchanged)} unchanged, {len(self.removed)} removed"]
        if self.site_time is not None:
            out.append(f"  data as of {self.site_time.isoformat()}")
        shown = [p for p in self.written if p != RUNTIME_PATH]
        if 0 < len(shown) <= 20:
            out.extend(f"  wrote {p}" for p in shown)
        out.extend(f"  warning: {w}" for w in self.warnings)
        return out


def build(source, config: Config | None = None, out: str | Path | None = None, *,
          templates: Sequence[str | Path] = (), full: bool = False, workers: int | None = None,
          _own: bool = False) -> BuildReport:
    """Build the site from ``source`` (a :class:`~monitor.workspace.Workspace` or a store
    database) into ``out`` (default: the workspace's ``public/``).

    A state or cycle page, or a download, whose inputs are those of the previous build's file
    (:mod:`monitor.publish.plan`) is kept, not rendered again; ``full`` renders every file.
    ``templates``: folders searched before the built-in templates (overrides). ``workers``:
    processes rendering the state pages (default :func:`~monitor.publish.workers.default_workers`;
    the site's bytes do not depend on it).
    """
    db, config, out, own = _resolve(source, config, out)
    own = own or _own
    out = Path(out).absolute()
    check_output(out, store.path_of(db), unmarked_ok=own)
    with _lock(out):
        data = collect(db, config)
        previous = _previous_feed(out)
        reuse = Reuse(out, full=full)

        def files():
            yield from iter_site(data, templates, reuse=reuse, previous_feed=previous,
                                 workers=default_workers() if workers is None else workers)
            yield from static_assets().items()
            yield RUNTIME_PATH, vega_runtime(out / RUNTIME_PATH)
            yield MANIFEST, reuse.manifest()  # last: every page and download has recorded its inputs

        report = write_site(files(), out, unmarked_ok=own, reuse=reuse)
        reuse.prune()
    report.site_time = data.site_time
    report.warnings = feed_warnings(data)
    return report


def _previous_feed(out: Path) -> bytes | None:
    """The feed of the site this build replaces (a levelfield build), None when there is none."""
    feed = out / P.FEED
    if not (out / MARKER).is_file() or not feed.is_file() or feed.is_symlink():
        return None
    try:
        return feed.read_bytes()
    except OSError:
        return None


#: Written at the root of every build; its presence marks a folder as a levelfield site.
MARKER = ".levelfield-site"
MARKER_TEXT = b"This folder is a site built by levelfield publish; the next build replaces all of it.\n"


def check_output(out: Path, store: Path | None = None, *, unmarked_ok: bool = False) -> None:
    """Refuse an output folder that a build would wrongly replace: one holding the store (or
    inside which the store lies), or a non-empty folder that no build made (``unmarked_ok``:
    the workspace's own ``public/``, which only builds fill, even those made before the marker)."""
    out = Path(out).absolute()
    if out.exists() and not out.is_dir():
        raise UsageError(f"{out} exists and is not a folder")
    if store is not None and (store == out or out in store.parents):
        raise UsageError(f"refusing to publish into {out}: it holds the store {store}; "
                         "a build replaces its output folder entirely (use the workspace's public/ "
                         "or a new folder)")
    if not unmarked_ok and out.is_dir() and not (out / MARKER).is_file() and any(out.iterdir()):
        raise UsageError(f"refusing to publish into {out}: it is not empty and was not made by "
                         "levelfield publish, and a build replaces its output folder entirely "
                         "(choose a new or empty folder)")


def build_site(ws, *, db: sqlite_utils.Database | None = None, config: Config | None = None,
               out: str | Path | None = None, templates: Sequence[str | Path] = (),
               full: bool = False, workers: int | None = None) -> BuildReport:
    """:func:`build` for a workspace, reusing an open store and config when given (the
    recompute chain calls this after the flags)."""
    if db is None:
        return build(ws, config, out, templates=templates, full=full, workers=workers)
    public = ws.folder("public")
    out = Path(out) if out else public
    return build(db, config or ws.config(), out, templates=templates, full=full, workers=workers,
                 _own=out.absolute() == public.absolute())


def _resolve(source, config, out) -> tuple[sqlite_utils.Database, Config, Path, bool]:
    """The store, config and output folder, and whether that folder is the workspace's own
    ``public/`` (which needs no marker: only builds ever fill it)."""
    if isinstance(source, sqlite_utils.Database):
        if config is None or out is None:
            raise UsageError("building from a database needs both a config and an output folder")
        return source, config, Path(out), False
    if hasattr(source, "open_store") and hasattr(source, "folder"):
        public = source.folder("public")
        out = Path(out) if out else public
        return source.open_store(), config or source.config(), out, out.absolute() == public.absolute()
    raise TypeError(f"build() needs a Workspace or a sqlite_utils.Database, got {type(source).__name__}")


@contextlib.contextmanager
def _lock(out: Path):
    """One build at a time per output folder (a lock file beside it)."""
    out.parent.mkdir(parents=True, exist_ok=True)
    path = out.parent / f".{out.name}.lock"
    with path.open("a") as fh:
        if fcntl is not None:
            fcntl.flock(fh, fcntl.LOCK_EX)
        try:
            yield
        finally:
            if fcntl is not None:
                fcntl.flock(fh, fcntl.LOCK_UN)


def _safe(path: str) -> PurePosixPath:
    p = PurePosixPath(path)
    if p.is_absolute() or not p.parts or any(part in ("", ".", "..") for part in p.parts):
        raise ValueError(f"unsafe site path {path!r}")
    return p


def _same(old: Path, content: bytes) -> bool:
    try:
        if not old.is_file() or old.is_symlink() or old.stat().st_size != len(content):
            return False
        return old.read_bytes() == content
    except OSError:
        return False


def write_site(files: Mapping[str, bytes] | Iterable[tuple[str, bytes]], out: Path, *,
               unmarked_ok: bool = False, reuse: Reuse | None = None) -> BuildReport:
    """Write ``files`` (a mapping, or ``(path, content)`` pairs consumed one at a time) as the new
    content of ``out``: into a temp folder beside it, reusing unchanged files of the previous
    build, then swap. On any error the temp folder is removed and ``out`` is left as it was.

    ``content`` is bytes, :data:`~monitor.publish.reuse.KEPT` (the previous build's file, whose
    inputs did not change: hard-linked without being read) or :class:`~monitor.publish.reuse.Parts`
    (written part by part; ``reuse`` records its size and hash)."""
    out = Path(out).absolute()
    check_output(out, unmarked_ok=unmarked_ok)
    out.parent.mkdir(parents=True, exist_ok=True)
    report = BuildReport(out)
    pairs = files.items() if isinstance(files, Mapping) else files
    seen: set[str] = set()
    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.build-", dir=out.parent))
    try:
        os.chmod(tmp, 0o755)
        for path, content in itertools.chain(pairs, [(MARKER, MARKER_TEXT)]):
            rel = _safe(path)
            if path in seen:
                raise ValueError(f"site path {path!r} produced twice")
            seen.add(path)
            dest = tmp.joinpath(*rel.parts)
            dest.parent.mkdir(parents=True, exist_ok=True)
            old = out.joinpath(*rel.parts)
            if content is KEPT:
                report.total_bytes += old.stat().st_size
                _reuse(old, dest)
                report.unchanged.append(path)
                report.kept.append(path)
                continue
            if isinstance(content, Parts):
                _write_parts(old, dest, content, report, path)
                if reuse is not None:
                    reuse.wrote(path, content.size, content.sha256)
                continue
            report.total_bytes += len(content)
            if _same(old, content):
                _reuse(old, dest)
                report.unchanged.append(path)
            else:
                dest.write_bytes(content)
                report.written.append(path)
        report.written.sort()
        report.unchanged.sort()
        report.kept.sort()
        if out.is_dir():
            report.removed = sorted(
                p.relative_to(out).as_posix() for p in out.rglob("*")
                if p.is_file() and p.relative_to(out).as_posix() not in seen)
        report.swap = _swap(tmp, out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    shutil.rmtree(tmp, ignore_errors=True)  # after the swap: the previous site
    return report


def _write_parts(old: Path, dest: Path, content: Parts, report: BuildReport, path: str) -> None:
    """Write a file part by part; when it turns out byte-identical to the previous build's, link
    that one instead (same inode and mtime, as for any unchanged file)."""
    with open(dest, "wb") as fh:
        for part in content:
            fh.write(part)
    report.total_bytes += content.size
    try:
        same = old.is_file() and old.stat().st_size == content.size and _sha256(old) == content.sha256
    except OSError:
        same = False
    if same:
        dest.unlink()
        _reuse(old, dest)
        report.unchanged.append(path)
    else:
        report.written.append(path)


def _sha256(path: Path) -> str:
    import hashlib

    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _reuse(old: Path, dest: Path) -> None:
    try:
        os.link(old, dest)
    except OSError:
        shutil.copy2(old, dest)


_AT_FDCWD = -100
_RENAME_EXCHANGE = 2


def _exchange(a: Path, b: Path) -> bool:
    """Atomically exchange two paths (Linux renameat2); False when unsupported here."""
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        renameat2 = libc.renameat2
    except (OSError, AttributeError):
        return False
    renameat2.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p, ctypes.c_uint]
    if renameat2(_AT_FDCWD, os.fsencode(a), _AT_FDCWD, os.fsencode(b), _RENAME_EXCHANGE) == 0:
        return True
    code = ctypes.get_errno()
    if code in (errno.ENOSYS, errno.EINVAL, errno.ENOTSUP, errno.EOPNOTSUPP):
        return False
    raise OSError(code, os.strerror(code), str(b))


def _swap(new: Path, out: Path) -> str:
    """Put ``new`` in place of ``out``; afterwards ``new`` holds the previous site (if any)."""
    if not out.exists():
        os.rename(new, out)
        return "rename"
    if _exchange(new, out):
        return "exchange"
    backup = out.with_name(f".{out.name}.previous")
    shutil.rmtree(backup, ignore_errors=True)
    os.rename(out, backup)
    try:
        os.rename(new, out)
    except BaseException:
        os.rename(backup, out)
        raise
    os.rename(backup, new)
    return "two renames"
