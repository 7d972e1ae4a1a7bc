"""The measure modules' docstring examples run, and every public function documents itself."""

import doctest
import importlib
import inspect

import pytest

import monitor.measures as m

MODULES = ["segments", "efficiency_gap", "mean_median", "lopsided", "ttest", "declination", "swing",
           "descriptive", "intervals", "engine", "settings", "catalog"]


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name):
    module = importlib.import_module(f"monitor.measures.{name}")
    result = doctest.testmod(module, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert result.failed == 0


@pytest.mark.parametrize("name", [n for n in m.__all__ if inspect.isfunction(getattr(m, n))])
def test_public_functions_have_examples(name):
    doc = inspect.getdoc(getattr(m, name)) or ""
    assert "Examples" in doc, name
    assert len(doc.splitlines()) >= 3, name
