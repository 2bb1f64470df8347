"""Modules imported on first use.

``scipy.stats`` and ``scipy.optimize`` take most of a second to import, which
every command would pay at start-up even when it never calls a function that
needs them (``trueband --help``, a workbook without those functions). A
module bound with :func:`lazy_module` is imported the first time one of its
attributes is read.
"""

from __future__ import annotations

import importlib
import types


class _LazyModule(types.ModuleType):
    def __getattr__(self, attribute):
        return getattr(importlib.import_module(self.__name__), attribute)


def lazy_module(name: str) -> types.ModuleType:
    """A stand-in for the module ``name`` that imports it on first attribute access.

    >>> stats = lazy_module("scipy.stats")
    >>> float(stats.norm.cdf(0.0))
    0.5
    """
    return _LazyModule(name)
