"""What a build keeps from the previous one: the digest of every page's and download's inputs
(recorded in the site, :data:`MANIFEST`, so it is swapped in with the pages it describes), and the
encoded per-cycle parts of the downloads (a cache beside the site, ``.<site folder>-parts``, named
by the digest of what they encode, so an entry is never stale; a build removes the parts it did
not use).

A page or download whose inputs digest equals the recorded one (and whose file is still there) is
not rendered again: the build hard-links the previous file (:data:`KEPT`).
"""

from __future__ import annotations

import hashlib
import json
import os
from collections.abc import Iterable, Iterator
from pathlib import Path

#: the inputs digests of the build, inside the site folder
MANIFEST = ".levelfield-inputs.json"


class _Kept:
    def __repr__(self) -> str:
        return "KEPT"


#: the content of a file the previous build wrote with the same inputs: hard-linked, not rendered
KEPT = _Kept()


class Parts:
    """A file written from parts (bytes), one at a time; its size and sha256 are known once it has
    been written (:func:`monitor.publish.build.write_site` consumes it)."""

    def __init__(self, parts: Iterable[bytes]):
        self._parts = parts
        self.size = 0
        self._sha = hashlib.sha256()
        self.done = False

    def __iter__(self) -> Iterator[bytes]:
        for part in self._parts:
            self.size += len(part)
            self._sha.update(part)
            yield part
        self.done = True

    @property
    def sha256(self) -> str:
        return self._sha.hexdigest()


class Reuse:
    """The previous build's manifest (``previous``) and this build's (``now``): path -> {"inputs":
    digest, "bytes": size, "sha256": hash}; and the parts cache beside the output folder."""

    def __init__(self, out: Path | None, *, full: bool = False):
        self.out = out
        self.previous: dict[str, dict] = {}
        self.now: dict[str, dict] = {}
        self.cache = None if out is None else out.parent / f".{out.name}-parts"
        self.used: set[str] = set()
        if out is not None and not full:
            try:
                self.previous = json.loads((out / MANIFEST).read_text(encoding="utf-8")).get("files", {})
            except (OSError, ValueError, AttributeError):
                self.previous = {}

    def keep(self, path: str, inputs: str | None) -> bool:
        """Record ``inputs`` for ``path``; True when the previous build wrote it from the same inputs
        and its file is still there (then its size and hash are carried over)."""
        if inputs is None:
            return False
        self.now[path] = {"inputs": inputs}
        old = self.previous.get(path)
        if self.out is None or not old or old.get("inputs") != inputs or not (self.out / path).is_file():
            return False
        self.now[path] = dict(old)
        # the parts a kept file was made of stay in the cache: the next build that changes one of
        # its other parts needs them (a kept page's results table, a kept download's cycles)
        self.used.update(old.get("parts", ()))
        return True

    def wrote(self, path: str, size: int, sha256: str) -> None:
        if path in self.now:
            self.now[path].update(bytes=size, sha256=sha256)

    def _owns(self, owner: str | None, name: str) -> None:
        """Record that the file ``owner`` is made with the part ``name`` (kept with it when it is kept)."""
        if owner is not None and owner in self.now:
            parts = self.now[owner].setdefault("parts", [])
            if name not in parts:
                parts.append(name)

    def parts_of(self, path: str) -> list[str]:
        """The cached parts recorded for the file ``path`` in this build."""
        return list(self.now.get(path, {}).get("parts", ()))

    def adopt(self, path: str, parts: list[str]) -> None:
        """Record parts that ``path`` was made with in another process (a worker rendering it)."""
        for name in parts:
            self.used.add(name)
            self._owns(path, name)

    def cached(self, name: str, owner: str | None = None) -> bytes | None:
        """The cached part ``name``, or None (marked as used either way: a part asked for and then
        made is kept); ``owner``: the file made with it."""
        if self.cache is None:
            return None
        self.used.add(name)
        self._owns(owner, name)
        try:
            return (self.cache / name).read_bytes()
        except OSError:
            return None

    def store(self, name: str, data: bytes, owner: str | None = None) -> None:
        if self.cache is None:
            return
        self.used.add(name)
        self._owns(owner, name)
        self.cache.mkdir(parents=True, exist_ok=True)
        path = self.cache / name
        tmp = path.with_suffix(path.suffix + f".{os.getpid()}.tmp")
        tmp.write_bytes(data)
        tmp.replace(path)

    def part(self, name: str, make, owner: str | None = None) -> bytes:
        """The cached part ``name`` (a digest-derived file name), made by ``make()`` when absent;
        ``owner``: the file made with it."""
        data = self.cached(name, owner)
        if data is None:
            data = make()
            self.store(name, data, owner)
        return data

    def manifest(self) -> bytes:
        return (json.dumps({"files": self.now}, indent=0, sort_keys=True) + "\n").encode("utf-8")

    def prune(self) -> None:
        """Remove the cached parts this build did not use (after a successful build)."""
        if self.cache is None or not self.cache.is_dir():
            return
        for path in self.cache.iterdir():
            if path.name not in self.used:
                try:
                    path.unlink()
                except OSError:
                    pass
