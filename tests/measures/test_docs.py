"""The docstring examples run: every module of the measures and the national pool must have at
least one (a module whose examples are all gone fails here instead of passing silently), and so
must every other module of ``monitor/`` and ``store/`` that shows one (an example in a comment or
an unimported module would otherwise never run); every public function of ``monitor.measures``
documents itself."""

import doctest
import importlib
import inspect
import pkgutil
from pathlib import Path

import pytest

import monitor.measures as m
import monitor.pool as pool


def _modules(package) -> list[str]:
    names = [package.__name__] + [f"{package.__name__}.{i.name}" for i in pkgutil.iter_modules(package.__path__)]
    return [n for n in names if not n.endswith(".__main__")]  # a command entry point, not a library module


ROOT = Path(__file__).resolve().parents[2]


def _showing_examples() -> list[str]:
    """Every other module of monitor/ and store/ whose source shows a ``>>>`` example."""
    out = []
    for path in sorted([*ROOT.joinpath("monitor").rglob("*.py"), *ROOT.joinpath("store").rglob("*.py")]):
        name = ".".join(path.relative_to(ROOT).with_suffix("").parts).removesuffix(".__init__")
        if ">>>" in path.read_text(encoding="utf-8") and not name.startswith(("monitor.measures", "monitor.pool")):
            out.append(name)
    return out


MODULES = _modules(m) + _modules(pool) + _showing_examples()


def test_the_module_list_is_complete():
    assert "monitor.measures.engine" in MODULES and "monitor.pool.sampler" in MODULES
    assert "monitor.publish.chartkit" in MODULES
    assert len(MODULES) >= 20


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name):
    module = importlib.import_module(name)
    result = doctest.testmod(module, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert result.attempted >= 1, f"{name} has no docstring example"
    assert result.failed == 0


@pytest.mark.parametrize("name", [n for n in m.__all__ if inspect.isfunction(getattr(m, n))])
def test_public_functions_have_examples(name):
    doc = inspect.getdoc(getattr(m, name)) or ""
    assert "Examples" in doc, name
    assert len(doc.splitlines()) >= 3, name
