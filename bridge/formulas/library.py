"""The registered functions as functions of the ``formulas`` engine.

``formulas`` parses spreadsheet formulas and evaluates the standard functions;
:func:`install` adds every function of the registry to its function table
(under its name and under each prefix that spreadsheet apps put before
functions they do not know, such as ``_xludf.``), so one engine evaluates a
formula that mixes both. Nothing here knows any single function.

Argument conversion, from what the engine passes to what the registry takes:

* a range or array literal of a *range* argument becomes a read-only 2-D
  float array (blanks ``nan``) when it holds only numbers and blanks, and
  nested rows with ``None`` for empty cells otherwise; an error cell inside
  it makes the result that error (as spreadsheet functions do). The last
  few ranges converted are remembered, so 40 cells reading the same
  50,000-row range convert it once;
* a *scalar* argument given as a one-cell range is that cell; a larger range
  is ``#VALUE!``; an error value passes through as the result;
* a project error becomes the engine's error value of the same code, and its
  message is kept in :data:`ERROR_LOG` for the caller to report.
"""

from __future__ import annotations

import logging
import threading
from typing import Callable

import numpy as np
import formulas
import schedula
from formulas.functions import Error, XlError, not_implemented

from trueband.funcs.errors import ArgumentTypeError, TruebandError
from trueband.funcs.registry import REGISTRY, SpreadsheetFunction

from .names import NAME_PREFIXES, library_module_functions, library_modules
from .standard import STANDARD_CORRECTIONS, NotEvaluated

__all__ = ["install", "function_table", "FunctionTable", "ERROR_LOG", "to_engine_error", "message_for",
           "range_argument", "scalar_argument", "PassError", "NOT_IMPLEMENTED", "NotEvaluated", "STANDARD_CORRECTIONS"]

# The engine logs every failing function with a traceback; errors are values here.
logging.getLogger("schedula").setLevel(logging.CRITICAL)
logging.getLogger("formulas").setLevel(logging.CRITICAL)

#: What the engine's function table gives for a name it does not know.
NOT_IMPLEMENTED = not_implemented


class FunctionTable:
    """The engine's standard functions and the registered ones, with the library loaded a module at a time.

    ``table[name]`` is the function (``NOT_IMPLEMENTED`` for a name nobody
    defines) and ``name in table`` tells whether it is defined, as with the
    engine's own table; a name not found among the modules loaded so far
    loads the next one. A registered function takes precedence over a
    standard function of the same name, as :func:`install` does.
    """

    def __init__(self):
        from formulas.functions import FUNCTIONS as base

        self._table: dict = dict(base)
        install(self._table)
        self._table.update(STANDARD_CORRECTIONS)
        self._pending = library_modules()

    def _find(self, name: str):
        table = self._table
        fn = table.get(name)
        while fn is None and self._pending:
            for key, value in library_module_functions(self._pending.pop(0)).items():
                table.setdefault(key, value)
            fn = table.get(name)
        return fn

    def __getitem__(self, name: str):
        fn = self._find(name)
        return NOT_IMPLEMENTED if fn is None else fn

    def __contains__(self, name: str) -> bool:
        fn = self._find(name)
        return fn is not None and fn is not NOT_IMPLEMENTED


_TABLE: FunctionTable | None = None


def function_table() -> FunctionTable:
    """The process's :class:`FunctionTable` (made on first use)."""
    global _TABLE
    if _TABLE is None:
        _TABLE = FunctionTable()
    return _TABLE


class _ErrorLog(threading.local):
    """Per-thread list of (function name, project error) seen since the last ``clear``."""

    def __init__(self):
        self.entries: list[tuple[str, TruebandError]] = []

    def clear(self):
        self.entries = []


ERROR_LOG = _ErrorLog()


def to_engine_error(exc: TruebandError) -> XlError:
    """The engine's error value for a project error."""
    return Error.errors.get(exc.code, Error.errors["#VALUE!"])


class PassError(Exception):
    """An error value inside an argument: it becomes the function's result."""

    def __init__(self, value: XlError):
        self.value = value


def _cell(value):
    if value is schedula.EMPTY:
        return None
    if isinstance(value, XlError):
        raise PassError(value)
    if isinstance(value, np.generic):
        return value.item()
    return value


class _RangeCache:
    """The last few ranges converted, keyed by the identity of the engine's array (kept alive here)."""

    size = 8

    def __init__(self):
        self.entries: list[tuple[object, object]] = []

    def get(self, value):
        for source, converted in self.entries:
            if source is value:
                return converted
        return None

    def put(self, value, converted):
        self.entries.insert(0, (value, converted))
        del self.entries[self.size:]


_RANGES = threading.local()


def _range_cache() -> _RangeCache:
    cache = getattr(_RANGES, "cache", None)
    if cache is None:
        cache = _RANGES.cache = _RangeCache()
    return cache


#: Whether :func:`_convert_range` converts a range of only numbers with numpy in one step (False: cell by
#: cell, as before; the benchmarks' reference run and the tests' slow path).
FAST_RANGES = True
#: The cell types the fast step takes as numbers: exactly those the cell-by-cell loop takes (not bool, not
#: numpy's integers, which are not ``int``). Ranges with blanks stay with the loop: every one-step form of
#: them that was tried (numpy masks, a dict lookup per cell) was slower than the loop (``bench/README.md``).
_NUMBER_TYPES = frozenset({float, int, np.float64})


def _convert_range(arr: np.ndarray):
    flat = arr.ravel().tolist()
    if FAST_RANGES and flat and set(map(type, flat)) <= _NUMBER_TYPES:
        try:
            out = arr.astype(float)
        except OverflowError:  # a whole number beyond float range: the loop below does what it did before
            pass
        else:
            out.flags.writeable = False  # shared between cells: no function may change it
            return out
    out = np.empty(len(flat))
    numeric = True
    for k, x in enumerate(flat):
        if type(x) is float or (isinstance(x, (int, float)) and not isinstance(x, bool)):
            out[k] = x
        elif x is schedula.EMPTY or x is None:
            out[k] = np.nan
        elif isinstance(x, XlError):
            return PassError(x)  # the first error in reading order is the result
        else:
            numeric = False
    if numeric:
        out = out.reshape(arr.shape)
        out.flags.writeable = False  # shared between cells: no function may change it
        return out
    return [[_cell(x) for x in row] for row in arr]


def range_argument(value):
    """A range argument as the registry takes it (see the module docstring)."""
    if not isinstance(value, np.ndarray):
        return [[_cell(value)]]
    cache = _range_cache()
    converted = cache.get(value)
    if converted is None:
        arr = np.atleast_2d(np.asarray(value, dtype=object))
        converted = _convert_range(arr)
        cache.put(value, converted)
    if isinstance(converted, PassError):
        raise converted
    return converted


def scalar_argument(value, name: str):
    """A scalar argument: a one-cell range is that cell; a larger range is refused."""
    if isinstance(value, np.ndarray):
        if value.size != 1:
            raise ArgumentTypeError(f"{name} must be a single value, got a range of {value.size} cells", argument=name)
        value = value.ravel()[0]
    return _cell(value)


def adapter(spec: SpreadsheetFunction) -> Callable:
    """The engine-side function for one registered function."""
    arguments = spec.arguments

    def engine_function(*args):
        try:
            converted = []
            for i, value in enumerate(args):
                if i < len(arguments) and arguments[i].kind == "range":
                    converted.append(range_argument(value))
                else:
                    converted.append(scalar_argument(value, arguments[i].name if i < len(arguments) else "argument"))
            result = spec(*converted)
        except PassError as passed:
            return passed.value
        except TruebandError as exc:
            ERROR_LOG.entries.append((spec.name, exc))
            return to_engine_error(exc)
        return result

    engine_function.__name__ = spec.name
    engine_function.spreadsheet = spec
    return engine_function


def message_for(name: str, exc: TruebandError) -> str:
    """A message that names the function once."""
    return exc.message if exc.message.startswith(name) else f"{name}: {exc.message}"


def install(table: dict | None = None) -> dict:
    """Add every registered function (and its prefixed aliases) to ``table``: by default the engine's own
    table (which imports the whole standard library), as formulas compiled by the engine itself need."""
    if table is None:
        table = formulas.get_functions()
        table.update(STANDARD_CORRECTIONS)
    for name, spec in REGISTRY.items():
        fn = adapter(spec)
        for key in (name, *spec.aliases):
            table[key] = fn
            for prefix in NAME_PREFIXES:
                table[prefix + key] = fn
    return table
