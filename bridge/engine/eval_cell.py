"""One formula cell evaluated the way the ``formulas`` engine does: the reference semantics.

References are 2-D object arrays (blanks ``EMPTY``), every operator and
function is the library's own (:mod:`~trueband.bridge.formulas.library`,
registered functions included). :mod:`.eval_run` evaluates a whole
filled-down run at once and gives the same values; it falls back on this
module's pieces (:func:`area_value`, :func:`range_aggregate`).

>>> import numpy as np
>>> from trueband.bridge.formulas.compile import compile_formula
>>> class Store:
...     def value(self, sheet, row, col):
...         return float(row)
>>> evaluate_cell(compile_formula("=A3*10+1", 3, 2), Store(), "S", 3, 2).value
31.0
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np
from formulas.functions import XlError
from formulas.functions.operators import OPERATORS

from ..formulas.compile import Compiled, Node
from ..workbook.cells import MAX_COLUMN, MAX_ROW
from ..formulas.library import ERROR_LOG, NOT_IMPLEMENTED, NotEvaluated, function_table, message_for
from ..formulas.names import registered_name
from .criteria import AGGREGATE_FUNCTIONS, COUNT_FUNCTIONS, aggregate_if, count_if
from . import fast_paths
from .extent import EXTENT_FUNCTIONS, add_cut_off_blanks, blank_cells_cut_off, extent_size, pad_paired_ranges
from .values import (NA_ERROR, NAME_ERROR, REF_ERROR, VALUE_ERROR, CannotEvaluate, CellProblem, VectorUnsupported,
                     error_value, filled, final_value, unknown_function)

__all__ = ["CellResult", "evaluate_cell", "evaluate_array_formula", "area_value", "range_aggregate",
           "RANGE_AGGREGATES", "broadcast_as_apps", "intersect", "ARRAY_ARGUMENT_FUNCTIONS", "SINGLE_VALUE_FUNCTIONS",
           "single_value_arguments"]


@dataclasses.dataclass
class CellResult:
    """A cell's value, and why it is an error when it is one."""

    value: Any
    problem: CellProblem | None = None
    #: The formula cannot be evaluated here: the cell keeps the value the file holds (``problem`` says why,
    #: and is the error to give where there is none, or where the cell depends on a trueband result).
    kept: bool = False


def area_value(store, sheet, area):
    """The values of an area (r1, c1, r2, c2) as a 2-D object array, or ``#REF!`` when it leaves the sheet."""
    r1, c1, r2, c2 = area
    if r1 < 1 or c1 < 1 or r2 > MAX_ROW or c2 > MAX_COLUMN:
        return REF_ERROR
    if r1 == r2 and c1 == c2:
        out = np.empty((1, 1), dtype=object)
        out[0, 0] = store.value(sheet, r1, c1)
        return out
    return store.area(sheet, r1, c1, r2, c2)


#: Aggregates over fixed ranges that are computed from the numbers directly when every cell of the
#: ranges is a number or blank: name → (numpy function, ddof). The library's functions compute the same
#: thing then (numpy over the numbers in reading order, blanks skipped), but reading a large range as
#: engine values costs a Python step per cell, and its statistics module imports scipy.stats. Anything
#: else (text, logicals or errors in a range, scalar arguments, too few numbers) goes to the library.
RANGE_AGGREGATES = {
    "SUM": (np.sum, None), "AVERAGE": (np.mean, None), "COUNT": (len, None), "MIN": (np.min, None),
    "MAX": (np.max, None), "STDEV": (np.std, 1), "STDEV.S": (np.std, 1), "STDEVP": (np.std, 0),
    "STDEV.P": (np.std, 0), "VAR": (np.var, 1), "VAR.S": (np.var, 1), "VARP": (np.var, 0), "VAR.P": (np.var, 0),
}


def range_aggregate(name: str, args, store, sheet: str, row: int, col: int, *, fixed_rows: bool = False):
    """The value of ``name(range, ...)`` over number-only ranges, or None when the library must decide."""
    key = name[6:] if name.startswith("_XLFN.") else name
    how = RANGE_AGGREGATES.get(key)
    numbers_of = getattr(store, "numbers", None)
    if how is None or numbers_of is None or not args:
        return None
    parts = []
    for a in args:
        if a.kind != "ref" or a.ref.name is not None or (fixed_rows and not a.ref.rows_fixed):
            return None
        r1, c1, r2, c2 = a.ref.area(row, col)
        if r1 < 1 or c1 < 1 or r2 > MAX_ROW or c2 > MAX_COLUMN:
            return None
        nums = numbers_of(a.ref.sheet or sheet, r1, c1, r2, c2)
        if nums is None:
            return None
        parts.append(nums)
    values = parts[0] if len(parts) == 1 else np.concatenate(parts)
    fn, ddof = how
    if fn is len:
        return float(values.size)
    if values.size <= (ddof or 0) or (fn is not np.sum and values.size == 0):
        return None  # the library's error or default
    out = fn(values) if ddof is None else fn(values, ddof=ddof)
    out = float(out)
    return out if math.isfinite(out) else None


#: Functions whose arguments spreadsheet apps evaluate as arrays even in an ordinary (not array) formula, so a
#: range inside them is not reduced to one cell (``SUMPRODUCT((A1:A5>2)*B1:B5)``).
ARRAY_ARGUMENT_FUNCTIONS = frozenset({
    "SUMPRODUCT", "LOOKUP", "INDEX", "MMULT", "MDETERM", "MINVERSE", "TRANSPOSE", "FREQUENCY", "LINEST", "LOGEST",
    "TREND", "GROWTH", "SUMX2MY2", "SUMX2PY2", "SUMXMY2", "_XLFN.AGGREGATE", "_XLFN._XLWS.FILTER", "_XLFN._XLWS.SORT",
    "_XLFN.SORTBY", "_XLFN.UNIQUE", "_XLFN.XLOOKUP", "_XLFN.XMATCH"})


#: Functions whose array result spreadsheet apps spill over the neighbouring cells (dynamic arrays).
SPILLING_FUNCTIONS = frozenset({"_XLFN.UNIQUE", "_XLFN._XLWS.FILTER", "_XLFN._XLWS.SORT", "_XLFN.SORTBY",
                                "_XLFN.SEQUENCE", "_XLFN.RANDARRAY"})


#: Standard functions each of whose arguments is one value (a range there is read by implicit intersection in an
#: ordinary formula: ``=ROUND(A:A,0)`` in row 12 rounds A12); and those where only the first one is.
SINGLE_VALUE_FUNCTIONS = frozenset({
    "ABS", "INT", "TRUNC", "ROUND", "ROUNDUP", "ROUNDDOWN", "MROUND", "SIGN", "SQRT", "EXP", "LN", "LOG", "LOG10",
    "MOD", "POWER", "EVEN", "ODD", "FACT", "FLOOR", "CEILING", "FLOOR.MATH", "CEILING.MATH", "FLOOR.PRECISE",
    "CEILING.PRECISE", "ISO.CEILING", "TEXT", "LEFT", "RIGHT", "MID", "LEN", "UPPER", "LOWER", "PROPER", "TRIM",
    "CLEAN", "VALUE", "FIXED", "REPT", "SUBSTITUTE", "REPLACE", "FIND", "SEARCH", "EXACT", "CHAR", "CODE", "DATE",
    "YEAR", "MONTH", "DAY", "HOUR", "MINUTE", "SECOND", "WEEKDAY", "DATEVALUE", "TIMEVALUE", "EDATE", "EOMONTH",
    "N", "T", "ISNUMBER", "ISTEXT", "ISNONTEXT", "ISBLANK", "ISERROR", "ISERR", "ISNA", "ISLOGICAL", "ISEVEN",
    "ISODD", "NOT"})
FIRST_SINGLE_VALUE_FUNCTIONS = frozenset({"IF", "IFERROR", "_XLFN.IFNA"})


def single_value_arguments(name: str, count: int) -> range:
    """The positions of the arguments of ``name`` that take one value (see :data:`SINGLE_VALUE_FUNCTIONS`)."""
    bare = name[6:] if name.startswith("_XLFN.") else name
    if bare in SINGLE_VALUE_FUNCTIONS:
        return range(count)
    if name in FIRST_SINGLE_VALUE_FUNCTIONS:
        return range(min(count, 1))
    return range(0)


def intersect(store, sheet: str, area, row: int, col: int):
    """Implicit intersection, as spreadsheet apps read a range where one value is wanted in an ordinary formula:
    a one-column range gives its cell in the formula's row, a one-row range its cell in the formula's column;
    anything else (or no such cell) is ``#VALUE!``."""
    r1, c1, r2, c2 = area
    if r1 == r2 and c1 == c2:
        return store.value(sheet, r1, c1)
    if c1 == c2 and r1 <= row <= r2:
        return store.value(sheet, row, c1)
    if r1 == r2 and c1 <= col <= c2:
        return store.value(sheet, r1, col)
    return VALUE_ERROR


class _CellEval:
    """Evaluates the tree of one cell's formula; collects the problems of the functions that fail.

    In an ordinary formula (``array`` False) a reference used where one value is wanted (an operand of an
    operator or an argument of :data:`SINGLE_VALUE_FUNCTIONS` outside the functions of
    :data:`ARRAY_ARGUMENT_FUNCTIONS`, or the whole formula) is read by implicit intersection
    (:func:`intersect`); in an array formula it stays a range.
    """

    def __init__(self, store, sheet: str, row: int, col: int, *, array: bool = False):
        self.store, self.sheet, self.row, self.col = store, sheet, row, col
        self.problems: list[CellProblem] = []
        self.array_depth = 1 if array else 0  # > 0: ranges stay ranges

    def single(self, node: Node):
        """The value of ``node`` where one value is wanted (implicit intersection of a range in an ordinary formula)."""
        if self.array_depth or node.kind != "ref" or node.ref.name is not None:
            return self.evaluate(node)
        area = node.ref.area(self.row, self.col)
        r1, c1, r2, c2 = area
        if r1 < 1 or c1 < 1 or r2 > MAX_ROW or c2 > MAX_COLUMN:
            return REF_ERROR
        out = np.empty((1, 1), dtype=object)  # a one-cell range, as the library reads a cell
        out[0, 0] = intersect(self.store, node.ref.sheet or self.sheet, area, self.row, self.col)
        return out

    def arguments_as_arrays(self, nodes) -> list:
        self.array_depth += 1
        try:
            return [self.evaluate(a) for a in nodes]
        finally:
            self.array_depth -= 1

    def evaluate(self, node: Node):
        k = node.kind
        if k == "lit":
            return node.value
        if k == "empty":
            return 0
        if k == "ref":
            ref = node.ref
            if ref.name is not None:
                return NAME_ERROR
            return area_value(self.store, ref.sheet or self.sheet, ref.area(self.row, self.col))
        if k == "op":
            return self.operator(node)
        if k == "undefined":
            raise CannotEvaluate(CellProblem("", "#NAME?", node.name))
        return self.call(node)

    def operator(self, node: Node):
        name = node.name
        if name in (":", ",", " "):
            raise CannotEvaluate(CellProblem("", "#VALUE!", f"the range operator {name!r} (a 3-D reference, "
                                                            "a union or an intersection) is not evaluated"))
        args = [self.single(a) for a in node.args]
        if len(args) == 2 and all(isinstance(a, np.ndarray) for a in args) and args[0].shape != args[1].shape:
            args = broadcast_as_apps(*args)  # the library refuses to broadcast these (BroadcastError)
        return OPERATORS[name](*args)

    def call(self, node: Node):
        name = node.name
        reg = registered_name(name)
        if reg is not None:
            return self._registered(reg, node)
        if name in ("ROW", "COLUMN"):
            return self._row_column(node)
        if name in EXTENT_FUNCTIONS and (size := extent_size(name, node.args, self.row, self.col)) is not None:
            return size
        fast = range_aggregate(name, node.args, self.store, self.sheet, self.row, self.col)
        if fast is None and name in COUNT_FUNCTIONS:
            fast = count_if(name, node.args, self.evaluate, self.store, self.sheet, self.row, self.col)
        elif fast is None and name in AGGREGATE_FUNCTIONS:
            fast = aggregate_if(name, node.args, self.evaluate, self.store, self.sheet, self.row, self.col)
        elif fast is None and name in fast_paths.PAIR_FUNCTIONS and fast_paths.ENABLED:
            fast = fast_paths.pair_statistic(name, node.args, self.store, self.sheet, self.row, self.col)
        if fast is not None:
            return fast
        table = function_table()
        if name not in table or table[name] is NOT_IMPLEMENTED:
            raise CannotEvaluate(unknown_function(name))
        fn = table[name]
        single = range(0)
        if name in ARRAY_ARGUMENT_FUNCTIONS:
            args = self.arguments_as_arrays(node.args)
        else:
            single = single_value_arguments(name, len(node.args))
            args = [self.single(a) if i in single else self.evaluate(a) for i, a in enumerate(node.args)]
        if len(args) > 1:  # ranges of one size cut at different heights (sheets of different heights)
            args = pad_paired_ranges(node.args, args, self.row, self.col, single)
        if name == "CHOOSE" and args and fast_paths.ENABLED:
            fast = fast_paths.choose_cell(args[0], args[1:])
            if fast is not None:
                return fast
        if name in EXTENT_FUNCTIONS and not isinstance(fn, dict):
            missing = blank_cells_cut_off(name, node.args, args[0] if args else None, self.row, self.col)
            if missing:  # blank cells the store did not read still count (see extent.py)
                return add_cut_off_blanks(fn, args, self._library_call(name, fn, args), missing)
        if isinstance(fn, dict):
            extra = fn.get("extra_inputs", {})
            fn = fn["function"]
            if extra:
                if "Dsp" in map(str, extra) or "Cell" in map(str, extra):
                    raise CannotEvaluate(CellProblem(name, "#VALUE!", f"{name} is not evaluated in a saved workbook"))
                args = [False] * len(extra) + args  # the "compiling" flag: evaluate now
        return self._library_call(name, fn, args)

    @staticmethod
    def _library_call(name: str, fn, args: list):
        try:
            return fn(*args)
        except CannotEvaluate:
            raise
        except NotEvaluated as exc:
            raise CannotEvaluate(CellProblem(name, "#VALUE!", str(exc))) from None
        except Exception as exc:  # the library raises on inputs it does not handle: not evaluated
            raise CannotEvaluate(CellProblem(name, "#VALUE!", f"{name} cannot be evaluated here "
                                                              f"({type(exc).__name__}: {exc})")) from None

    def _registered(self, reg: str, node: Node):
        self.array_depth += 1  # a registered function's range arguments take arrays
        try:
            args = [None if a.kind == "empty" else self.evaluate(a) for a in node.args]
        finally:
            self.array_depth -= 1
        ERROR_LOG.clear()
        try:
            out = function_table()[reg](*args)
        except TypeError:
            out = VALUE_ERROR
        if isinstance(out, XlError) and ERROR_LOG.entries:
            fname, exc = ERROR_LOG.entries[-1]
            self.problems.append(CellProblem(fname, exc.code, message_for(fname, exc)))
        return out

    def _row_column(self, node: Node):
        want_row = node.name == "ROW"
        if not node.args:
            return float(self.row if want_row else self.col)
        a = node.args[0]
        if a.kind != "ref" or a.ref.name is not None:
            return VALUE_ERROR
        r1, c1, r2, c2 = a.ref.area(self.row, self.col)
        return float(r1 if want_row else c1)


def broadcast_as_apps(a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Two arrays of different shapes brought to a common one as spreadsheet apps do for an operator:
    a single row or column is repeated, and positions outside the smaller array are ``#N/A``."""
    a, b = np.atleast_2d(a), np.atleast_2d(b)
    rows, cols = max(a.shape[0], b.shape[0]), max(a.shape[1], b.shape[1])

    def spread(x: np.ndarray) -> np.ndarray:
        if x.shape[0] == 1:
            x = np.repeat(x, rows, axis=0)
        if x.shape[1] == 1:
            x = np.repeat(x, cols, axis=1)
        out = filled((rows, cols), NA_ERROR)
        out[:x.shape[0], :x.shape[1]] = x
        return out

    return spread(a), spread(b)


def _unexpected(exc: Exception) -> CellProblem:
    return CellProblem("", "#VALUE!", f"the formula cannot be evaluated ({type(exc).__name__}: {exc})")


def evaluate_cell(compiled: Compiled, store, sheet: str, row: int, col: int) -> CellResult:
    """Evaluate one formula cell with the library's functions (the reference path).

    Total: whatever a formula holds, the answer is a value, an error value with its problem, or a
    ``kept`` result (the formula cannot be evaluated here; :class:`CannotEvaluate`).
    """
    evaluator = _CellEval(store, sheet, row, col)
    try:
        value = final_value(evaluator.single(compiled.tree))
    except CannotEvaluate as exc:
        return CellResult(error_value(exc.problem.code), exc.problem, kept=True)
    except VectorUnsupported as exc:
        problem = CellProblem("", "#VALUE!", f"not evaluated: {exc}")
        return CellResult(VALUE_ERROR, problem, kept=True)
    except Exception as exc:  # one cell never stops a workbook: a library fault is this cell's error
        return CellResult(VALUE_ERROR, _unexpected(exc))
    problem = None
    if isinstance(value, XlError):
        code = str(value)
        problem = next((p for p in reversed(evaluator.problems) if p.code == code), None)
    return CellResult(value, problem)


def evaluate_array_formula(compiled: Compiled, store, sheet: str, row: int, col: int,
                           shape: tuple[int, int]) -> tuple[np.ndarray, CellProblem | None]:
    """Evaluate an array formula once; its result spread over ``shape`` (rows, columns), #N/A beyond it.

    Raises :class:`CannotEvaluate` for a formula the engine cannot evaluate (the caller keeps the stored
    values); any other failure is the cells' ``#VALUE!``."""
    evaluator = _CellEval(store, sheet, row, col, array=True)
    try:
        raw = evaluator.evaluate(compiled.tree)
    except CannotEvaluate:
        raise  # the caller keeps the array's stored values
    except VectorUnsupported as exc:
        raise CannotEvaluate(CellProblem("", "#VALUE!", f"not evaluated: {exc}")) from None
    except Exception as exc:  # one cell never stops a workbook
        return filled(shape, VALUE_ERROR), _unexpected(exc)
    arr = np.asarray(raw, dtype=object)
    if arr.ndim == 0:
        arr = arr.reshape(1, 1)
    elif arr.ndim == 1:
        arr = arr.reshape(1, -1)
    if shape == (1, 1) and arr.size > 1 and compiled.functions & SPILLING_FUNCTIONS:
        # the app spills this result over the cells below and beside (or shows #SPILL! where they are taken)
        raise CannotEvaluate(CellProblem("", "#VALUE!", "a dynamic array that spills beyond its cell"))
    out = filled(shape, NA_ERROR)
    rr, cc = arr.shape
    # a single row or column is repeated across the other direction, as spreadsheet apps do
    if rr == 1 and shape[0] > 1:
        arr = np.repeat(arr, shape[0], axis=0)
        rr = shape[0]
    if cc == 1 and shape[1] > 1:
        arr = np.repeat(arr, shape[1], axis=1)
        cc = shape[1]
    out[:min(rr, shape[0]), :min(cc, shape[1])] = arr[:shape[0], :shape[1]]
    final = np.empty(shape, dtype=object)
    for i in range(shape[0]):
        for j in range(shape[1]):
            final[i, j] = final_value(out[i, j])
    problem = evaluator.problems[-1] if evaluator.problems else None
    return final, problem
