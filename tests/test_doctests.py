"""Run the examples in every docstring of the package (doctests)."""

import doctest
import importlib
import pkgutil

import pytest

import trueband.bridge
import trueband.funcs

MODULES = sorted(
    name
    for package in (trueband.funcs, trueband.bridge)
    for _, name, _ in pkgutil.walk_packages(package.__path__, package.__name__ + ".")  # sub-packages too
    if not name.endswith("__main__")
)


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name):
    module = importlib.import_module(name)
    result = doctest.testmod(module, optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    assert result.failed == 0, f"{result.failed} of {result.attempted} examples failed in {name}"
