"""Sizes a person can hold: no module of ``monitor/`` or ``store/`` over 500 lines, no function
over 80 (docstring included). A plumbing test of the code base itself."""

from __future__ import annotations

import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
MAX_MODULE, MAX_FUNCTION = 500, 80


def _sources():
    for package in ("monitor", "store"):
        yield from sorted((ROOT / package).rglob("*.py"))


def test_the_walk_sees_the_code():
    names = {p.relative_to(ROOT).as_posix() for p in _sources()}
    assert {"monitor/cli.py", "store/db.py", "monitor/pool/sampler.py"} <= names


def test_no_module_over_500_lines():
    long = {p.relative_to(ROOT).as_posix(): n for p in _sources() if (n := len(p.read_text().splitlines())) > MAX_MODULE}
    assert long == {}


def test_no_function_over_80_lines():
    long = {}
    for path in _sources():
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                length = node.end_lineno - node.lineno + 1
                if length > MAX_FUNCTION:
                    long[f"{path.relative_to(ROOT).as_posix()}:{node.name}"] = length
    assert long == {}
