"""The worked examples in the science docstrings run, so a wrong example fails.

Every module of ``fieldapp.science`` is run through the standard library's
``doctest``; the expected values in those examples come from the published
source or the reference library each function is tested against (named beside
the example). The model functions of ``osmotic`` and ``extracts`` must each
carry a numpydoc Parameters and Returns section and at least one example.
"""
from __future__ import annotations

import doctest
import importlib
import inspect
import pkgutil

import pytest

import fieldapp.science as science


def _science_modules():
    names = ["fieldapp.science"]
    for info in pkgutil.walk_packages(science.__path__, "fieldapp.science."):
        names.append(info.name)
    return sorted(names)


@pytest.mark.parametrize("name", _science_modules())
def test_doctests_pass(name):
    module = importlib.import_module(name)
    result = doctest.testmod(module, optionflags=doctest.NORMALIZE_WHITESPACE, verbose=False)
    assert result.failed == 0, f"{result.failed} of {result.attempted} examples failed in {name}"


def test_the_examples_are_there():
    """Not vacuous: the packages split in issue 12 carry dozens of examples."""
    attempted = 0
    for name in _science_modules():
        if name.startswith(("fieldapp.science.osmotic.", "fieldapp.science.extracts.")):
            finder = doctest.DocTestFinder()
            for test in finder.find(importlib.import_module(name)):
                attempted += len(test.examples)
    assert attempted >= 40


def _model_functions(package):
    mod = importlib.import_module(package)
    for name in mod.__all__:
        obj = getattr(mod, name)
        if inspect.isfunction(obj):
            yield f"{package}.{name}", obj


@pytest.mark.parametrize("qualname,fn", [
    *_model_functions("fieldapp.science.osmotic"),
    *_model_functions("fieldapp.science.extracts"),
], ids=lambda v: v if isinstance(v, str) else "")
def test_model_function_has_numpydoc_and_example(qualname, fn):
    doc = inspect.getdoc(fn) or ""
    for section in ("Parameters\n----------", "Returns\n-------", ">>> "):
        assert section in doc, f"{qualname}: no {section.splitlines()[0]!r} in its docstring"
