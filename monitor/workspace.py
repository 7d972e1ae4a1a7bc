"""The workspace: one directory holding the config, the store and the file folders."""

from __future__ import annotations

import logging
import os
import sqlite3
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Callable

from monitor.config import Config, default_toml, load_config
from monitor.errors import ConfigError, UsageError

if TYPE_CHECKING:  # the store (sqlite_utils brings pandas and numpy) is imported where it is opened
    import sqlite_utils

DEFAULT_WORKSPACE = "workspace"
ENV_VAR = "LEVELFIELD_WORKSPACE"
FOLDERS = ("inbox", "archive", "rejected", "public", "logs")


def _log_notice(message: str) -> None:
    logging.getLogger("levelfield").warning(message)


@dataclass(frozen=True)
class Workspace:
    root: Path
    # where notices meant for the user go (the command line prints them; default: the log)
    notify: Callable[[str], None] = field(default=_log_notice, compare=False, repr=False)

    @classmethod
    def locate(cls, path: str | os.PathLike | None = None,
               notify: Callable[[str], None] | None = None) -> "Workspace":
        """``path``, else ``$LEVELFIELD_WORKSPACE``, else ``./workspace``."""
        chosen = path or os.environ.get(ENV_VAR) or DEFAULT_WORKSPACE
        return cls(Path(chosen).expanduser().resolve(), notify or _log_notice)

    @property
    def config_path(self) -> Path:
        return self.root / "levelfield.toml"

    @property
    def store_path(self) -> Path:
        return self.root / "history.sqlite"

    def folder(self, name: str) -> Path:
        assert name in FOLDERS, name
        return self.root / name

    @property
    def inbox(self) -> Path:
        return self.folder("inbox")

    def ensure(self) -> list[Path]:
        """Create whatever is missing (folders, commented default config); return what was made."""
        made = []
        try:
            if self.root.exists() and not self.root.is_dir():
                raise UsageError(f"{self.root}: the workspace is a file, not a folder")
            if not self.root.exists():
                self.root.mkdir(parents=True)
                made.append(self.root)
            for name in FOLDERS:
                path = self.folder(name)
                if path.exists() and not path.is_dir():
                    raise UsageError(f"{path}: should be a folder of the workspace, but is a file")
                if not path.exists():
                    path.mkdir()
                    made.append(path)
            if self.config_path.is_dir():
                raise ConfigError(f"{self.config_path}: is a folder; levelfield.toml must be a file")
            if not self.config_path.exists():
                self.config_path.write_text(default_toml(), encoding="utf-8")
                made.append(self.config_path)
        except OSError as exc:
            where = exc.filename or self.root
            raise UsageError(f"{where}: cannot create the workspace ({exc.strerror or exc})") from None
        return made

    def config(self) -> Config:
        if self.config_path.is_dir():
            raise ConfigError(f"{self.config_path}: is a folder; levelfield.toml must be a file")
        try:
            return load_config(self.config_path)
        except OSError as exc:
            raise ConfigError(f"{self.config_path}: cannot read ({exc.strerror or exc})") from None

    def open_store(self) -> sqlite_utils.Database:
        """Open the store (creating the workspace and the store's schema on first use). Opening never
        writes data: bringing the stored inputs up to date with levelfield.toml is an explicit step
        (:func:`monitor.pipeline.prepare`)."""
        import store

        self.ensure()
        if self.store_path.is_dir():
            raise UsageError(f"{self.store_path}: is a folder; the store must be a file")
        try:
            return store.connect(self.store_path)
        except store.SchemaTooNew as exc:
            raise UsageError(f"{self.store_path}: {exc}") from None
        except sqlite3.DatabaseError as exc:
            raise UsageError(f"{self.store_path}: cannot open the store ({exc}); is it a levelfield "
                             "history.sqlite?") from None
