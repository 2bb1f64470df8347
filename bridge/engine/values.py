"""The values of evaluation: the engine's error values, ``EMPTY``, and turning results into cell values.

Values are ``float``, ``str``, ``bool``, the engine's error values
(``XlError``) and ``EMPTY`` for a blank cell. A formula's final value is
never ``EMPTY`` (a formula that points at a blank cell shows 0), never a
non-finite number (``#NUM!``) and never a complex number (``#NUM!``):
:func:`final_value` and :func:`final_array` make it so. :class:`CellProblem`
says why a cell holds an error.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import schedula as sh
from formulas.functions import Error, XlError

from ..formulas.text import did_you_mean
from ..workbook import sheet_data

__all__ = ["EMPTY", "NUM_ERROR", "VALUE_ERROR", "REF_ERROR", "NAME_ERROR", "NA_ERROR", "error_value", "filled",
           "CellProblem", "unknown_function", "VectorUnsupported", "CannotEvaluate", "final_value", "final_array",
           "as_values", "cell_value_for_xml", "tidy_column", "library_callable"]

EMPTY = sh.EMPTY
_ERRORS = Error.errors
NUM_ERROR = _ERRORS["#NUM!"]
VALUE_ERROR = _ERRORS["#VALUE!"]
REF_ERROR = _ERRORS["#REF!"]
NAME_ERROR = _ERRORS["#NAME?"]
NA_ERROR = _ERRORS["#N/A"]


def filled(shape, value) -> np.ndarray:
    """An object array of ``value`` everywhere (``np.full`` would turn an error value, a ``str``, into plain text)."""
    out = np.empty(shape, dtype=object)
    out.fill(value)
    return out


def error_value(code: str) -> XlError:
    """The engine's error value of a code (``#SPILL!`` and other newer codes as they are)."""
    return _ERRORS.get(code) or XlError(code)


@dataclasses.dataclass(frozen=True)
class CellProblem:
    """Why a cell holds an error: the function that raised it and its message."""

    function: str
    code: str
    message: str


def unknown_function(name: str) -> CellProblem:
    """The problem of a call of a function nobody knows, with the closest names (``SME``: SEM)."""
    return CellProblem(name, "#NAME?", f"{name} is not a function trueband or the formula engine knows"
                                       f"{did_you_mean(name)}")


class VectorUnsupported(Exception):
    """The run cannot be evaluated as arrays (the caller evaluates its cells one by one)."""


class CannotEvaluate(Exception):
    """A formula the engine cannot evaluate: a function it lacks, a form of reference it does not read, a
    format code its TEXT does not know. The cell keeps the value the file holds (and is listed); where it has
    none, or depends on a trueband result, it gets ``problem``'s error value and message instead."""

    def __init__(self, problem: CellProblem):
        super().__init__(problem.message)
        self.problem = problem


def final_value(x):
    """A formula result as a cell value."""
    if isinstance(x, np.ndarray):
        if x.size == 0:
            return VALUE_ERROR
        x = x.ravel()[0] if x.ndim else x.item()
    if isinstance(x, np.generic):
        x = x.item()
    if x is EMPTY or x is None:
        return 0.0
    if isinstance(x, XlError):
        return x
    if isinstance(x, bool):
        return x
    if isinstance(x, (int, float)):
        x = float(x)
        return x if math.isfinite(x) else NUM_ERROR
    if isinstance(x, str):
        return x
    if isinstance(x, complex):
        return NUM_ERROR
    return VALUE_ERROR


def final_array(a: np.ndarray) -> np.ndarray:
    """A run's results (one per row) as cell values: :func:`final_value` of each, as a float array when it can be."""
    if a.dtype.kind == "f":
        bad = ~np.isfinite(a)
        if bad.any():
            out = a.astype(object)
            out[bad] = NUM_ERROR
            return out
        return a
    if a.dtype.kind == "b":
        return a
    if a.dtype.kind in "iu":
        return a.astype(float)
    return np.array([final_value(x) for x in a], dtype=object) if a.size else a


def library_callable(name: str, entry):
    """A standard function of the library as a plain callable (the entries that take the engine's
    "compiling" flags get them bound; those that need the engine's own objects cannot run on arrays)."""
    if not isinstance(entry, dict):
        return entry
    extra = entry.get("extra_inputs", {})
    fn = entry["function"]
    if not extra:
        return fn
    if "Dsp" in map(str, extra) or "Cell" in map(str, extra):
        raise VectorUnsupported(name)
    flags = [False] * len(extra)
    return lambda *a: fn(*flags, *a)


def tidy_column(a: np.ndarray) -> np.ndarray:
    """An object array of per-row results as float when every entry is a plain number."""
    if a.dtype != object or a.size == 0:
        return a
    flat = [x.item() if isinstance(x, np.generic) else x for x in a]
    if all(type(x) is float for x in flat):
        return np.array(flat, dtype=float)
    out = np.empty(len(flat), dtype=object)
    out[:] = flat
    return out


def as_values(values: list) -> np.ndarray:
    """Cell values as the store takes them: a float array when all are floats, else an object array."""
    if all(type(v) is float for v in values):
        return np.array(values, dtype=float)
    out = np.empty(len(values), dtype=object)
    out[:] = values
    return out


def cell_value_for_xml(value):
    """An evaluated value as the sheet writer takes it (errors as :class:`~trueband.bridge.workbook.sheet_data.ErrorValue`)."""
    if isinstance(value, XlError):
        return sheet_data.ErrorValue(str(value))
    if isinstance(value, np.generic):
        value = value.item()
    if value is EMPTY or value is None:
        return 0.0
    if isinstance(value, float) and not math.isfinite(value):
        return sheet_data.ErrorValue("#NUM!")
    return value
