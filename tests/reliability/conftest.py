"""Reliability tests: markers, the long profile switch and workspace fixtures.

``LEVELFIELD_FUZZ=long`` (what ``make fuzz`` sets) multiplies every fuzzing budget and runs the
tests marked ``slow`` (the 1,000,000-row load, cold-start crash trials); the normal run skips them.
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest

from conftest import CONFIG
from monitor.workspace import Workspace

LONG = os.environ.get("LEVELFIELD_FUZZ", "").strip().lower() == "long"


def pytest_configure(config):
    config.addinivalue_line(
        "markers", "slow: minutes-long reliability runs (1M-row load, cold-start crash trials); "
                   "skipped unless LEVELFIELD_FUZZ=long (make fuzz)")


def pytest_collection_modifyitems(config, items):
    if LONG or "slow" in (config.getoption("markexpr", "") or ""):
        return
    skip = pytest.mark.skip(reason="slow: run by `make fuzz` (LEVELFIELD_FUZZ=long)")
    for item in items:
        if "slow" in item.keywords:
            item.add_marker(skip)


def make_workspace(root: Path, template: bytes, config: str = CONFIG) -> Workspace:
    """A workspace at ``root`` with the invented party config and a copy of ``template`` as its store."""
    ws = Workspace(root)
    root.mkdir(parents=True, exist_ok=True)
    (root / "levelfield.toml").write_text(config, encoding="utf-8")
    ws.ensure()
    for suffix in ("-wal", "-shm"):
        Path(f"{ws.store_path}{suffix}").unlink(missing_ok=True)
    ws.store_path.write_bytes(template)
    return ws


@pytest.fixture
def workspace(tmp_path, migrated_store) -> Workspace:
    """A fresh workspace with a migrated, empty store."""
    return make_workspace(tmp_path / "ws", migrated_store)
