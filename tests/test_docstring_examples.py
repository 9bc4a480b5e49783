"""Run the Examples sections of the docstrings (core and app), so documentation cannot drift from the code."""

import doctest
import importlib
import pkgutil

import pytest

import gainboard.app
import gainboard.app.views
import gainboard.core

MODULES = sorted(
    info.name
    for package in (gainboard.core, gainboard.app, gainboard.app.views)
    for info in pkgutil.iter_modules(package.__path__, package.__name__ + ".")
    if not info.ispkg
)


@pytest.mark.parametrize("module_name", MODULES)
def test_docstring_examples_run(module_name):
    module = importlib.import_module(module_name)
    result = doctest.testmod(module, optionflags=doctest.NORMALIZE_WHITESPACE | doctest.ELLIPSIS)
    assert result.failed == 0, f"{result.failed} docstring example(s) failed in {module_name}"
