"""The one column evaluator: a registered elementwise function down a whole column.

:func:`evaluate_rows` runs a function body once on whole float arrays and
splits a failing block in halves until the failing rows are isolated, so one
bad row costs a few extra array calls rather than a Python call per row. The
rows it cannot compute as arrays (cells that are not clean numbers, and the
single rows left when a block fails) go to the caller's ``one(i)``, which
gives that row's value or error exactly as a single call would.

Callers: :func:`trueband.funcs.registry.call_column` (Python lists, numpy
arrays, pandas Series) and the workbook evaluator (columns read from a sheet).
Each brings its own ``one``; both get one value or error per row back.

:func:`number_columns` turns per-row cells into the float arrays and the mask
of clean-number rows that :func:`evaluate_rows` takes.
"""

from __future__ import annotations

import math
from typing import Any, Callable, Mapping, Sequence

import numpy as np

from ._budget import check_time
from .errors import TruebandError

__all__ = ["evaluate_rows", "number_columns"]


def number_columns(columns: Mapping[str, Sequence], whole: frozenset[str] | set[str] = frozenset(),
                   n: int | None = None) -> tuple[dict[str, np.ndarray], np.ndarray]:
    """Per-row cells as float arrays, and the mask of rows where every cell is a clean number.

    A clean number is a finite real number that is not a logical value (and,
    for the arguments named in ``whole``, has no fraction). The other rows get
    0.0 in the arrays and ``False`` in the mask: they are computed one by one.
    A float (or integer) numpy array is taken as it is, without a step per cell.

    >>> arrays, ok = number_columns({"x": [1.0, "a", None, 2, True]})
    >>> arrays["x"].tolist(), ok.tolist()
    ([1.0, 0.0, 0.0, 2.0, 0.0], [True, False, False, True, False])
    """
    if n is None:
        n = len(next(iter(columns.values()))) if columns else 0
    ok = np.ones(n, dtype=bool)
    arrays = {}
    for key, col in columns.items():
        if isinstance(col, np.ndarray) and col.dtype.kind in "fiu" and col.ndim == 1:
            arr = col.astype(float)  # a copy: the caller's array is never changed
            good = np.isfinite(arr)
            if key in whole:
                good &= arr == np.round(arr)
            arr[~good] = 0.0
        elif isinstance(col, list) and _plain_numbers(col):
            arr = np.array(col, dtype=float)  # one C loop instead of a Python step per cell
            good = np.isfinite(arr)
            if key in whole:
                good &= arr == np.round(arr)
            arr[~good] = 0.0
        else:
            arr = np.empty(n, dtype=float)
            good = np.ones(n, dtype=bool)
            for i, cell in enumerate(col):
                x = _as_float(cell)
                if math.isfinite(x) and not (key in whole and not x.is_integer()):
                    arr[i] = x
                else:
                    arr[i] = 0.0
                    good[i] = False
        ok &= good
        arrays[key] = arr
    return arrays, ok


def _plain_numbers(col: list) -> bool:
    """True when every cell is a Python float, or an int small enough to be one exactly as a float would read it."""
    kinds = set(map(type, col))
    if not kinds <= {float, int}:
        return False
    if int in kinds:  # a whole number beyond the float range goes the slow way, whose single call names it
        return all(-_FLOAT_INT < x < _FLOAT_INT for x in col if type(x) is int)
    return True


_FLOAT_INT = 2 ** 1023


def _as_float(cell) -> float:
    """A cell as a float when it is a real number (not a logical value); nan otherwise."""
    if isinstance(cell, (bool, np.bool_)) or not isinstance(cell, (int, float, np.integer, np.floating)):
        return math.nan
    try:
        return float(cell)
    except OverflowError:  # a whole number beyond the float range: the single call names it
        return math.nan


def evaluate_rows(body: Callable, check_results: Callable[[np.ndarray], list], fixed: Mapping[str, Any],
                  arrays: Mapping[str, np.ndarray], ok: np.ndarray, one: Callable[[int], Any]) -> np.ndarray:
    """One result per row (an object array): the body on whole arrays, failing blocks halved.

    Parameters
    ----------
    body
        The function body; takes the ``fixed`` arguments and float arrays for the ``arrays`` ones.
    check_results
        The registered result check for a whole array (``SpreadsheetFunction.check_results``); it
        raises a :class:`TruebandError` for a block with a result out of its kind.
    fixed
        The arguments shared by every row, already converted to their kinds.
    arrays
        The arguments that vary by row, as float arrays of one length n.
    ok
        The rows whose cells are clean numbers (see :func:`number_columns`); the others go to ``one``.
    one
        ``one(i)`` is row i's value or error from a single call; it also takes each row of a failing
        block that cannot be split further.

    >>> out = evaluate_rows(lambda x: 1.0 / x, lambda a: a.tolist(), {}, {"x": np.array([1.0, 2.0, 4.0])},
    ...                     np.array([True, True, False]), lambda i: f"row {i} alone")
    >>> out.tolist()
    [1.0, 0.5, 'row 2 alone']
    """
    n = len(ok)
    out = np.empty(n, dtype=object)
    for i in np.flatnonzero(~ok):
        out[i] = one(int(i))

    def block(idx: np.ndarray) -> None:
        check_time()
        try:
            with np.errstate(all="ignore"):  # non-finite results are refused by check_results
                res = np.broadcast_to(body(**fixed, **{k: a[idx] for k, a in arrays.items()}), idx.shape)
            converted = check_results(res)
        except TruebandError:
            if len(idx) == 1:
                out[idx[0]] = one(int(idx[0]))
                return
            half = len(idx) // 2
            block(idx[:half])
            block(idx[half:])
            return
        # element by element into the object array: a list of Python numbers keeps their types
        out[idx] = converted if isinstance(converted, np.ndarray) else _object_array(converted)

    good = np.flatnonzero(ok)
    if len(good):
        block(good)
    return out


def _object_array(values: list) -> np.ndarray:
    arr = np.empty(len(values), dtype=object)
    arr[:] = values
    return arr
