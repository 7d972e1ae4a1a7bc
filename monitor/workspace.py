"""The workspace: one directory holding the config, the store and the file folders."""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

import sqlite_utils

import store
from monitor.config import Config, default_toml, load_config

DEFAULT_WORKSPACE = "workspace"
ENV_VAR = "LEVELFIELD_WORKSPACE"
FOLDERS = ("inbox", "archive", "rejected", "public", "logs")


@dataclass(frozen=True)
class Workspace:
    root: Path

    @classmethod
    def locate(cls, path: str | os.PathLike | None = None) -> "Workspace":
        """``path``, else ``$LEVELFIELD_WORKSPACE``, else ``./workspace``."""
        chosen = path or os.environ.get(ENV_VAR) or DEFAULT_WORKSPACE
        return cls(Path(chosen).expanduser().resolve())

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
        if not self.root.exists():
            self.root.mkdir(parents=True)
            made.append(self.root)
        for name in FOLDERS:
            path = self.folder(name)
            if not path.exists():
                path.mkdir()
                made.append(path)
        if not self.config_path.exists():
            self.config_path.write_text(default_toml(), encoding="utf-8")
            made.append(self.config_path)
        return made

    def config(self) -> Config:
        return load_config(self.config_path)

    def open_store(self) -> sqlite_utils.Database:
        self.ensure()
        return store.connect(self.store_path)
