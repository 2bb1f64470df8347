"""Modules imported on first use.

``scipy.stats``, ``scipy.optimize`` and ``scipy.special`` take from half a second to a second to import, which
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
        # Called only for names not yet copied: the first access imports the module and copies its
        # namespace, so later accesses are plain attribute reads (functions call these in loops).
        real = importlib.import_module(self.__name__)
        self.__dict__.update(real.__dict__)
        return getattr(real, attribute)


def lazy_module(name: str) -> types.ModuleType:
    """A stand-in for the module ``name`` that imports it on first attribute access.

    >>> stats = lazy_module("scipy.stats")
    >>> float(stats.norm.cdf(0.0))
    0.5
    """
    return _LazyModule(name)
