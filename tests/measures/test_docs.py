"""The docstring examples of the measures and the national pool run, every module has at least one
(a module whose examples are all gone fails here instead of passing silently), and every public
function of ``monitor.measures`` documents itself."""

import doctest
import importlib
import inspect
import pkgutil

import pytest

import monitor.measures as m
import monitor.pool as pool


def _modules(package) -> list[str]:
    names = [package.__name__] + [f"{package.__name__}.{i.name}" for i in pkgutil.iter_modules(package.__path__)]
    return [n for n in names if not n.endswith(".__main__")]  # a command entry point, not a library module


MODULES = _modules(m) + _modules(pool)


def test_the_module_list_is_complete():
    assert "monitor.measures.engine" in MODULES and "monitor.pool.sampler" in MODULES
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
