"""A whole filled-down run of formula cells evaluated at once, with numpy.

:func:`evaluate_run` evaluates every cell of a :class:`~.graph.Run` at once.
A reference that moves with the row becomes a column of values (``Col``), a
one-row range that moves with the row a block of rows (``RowRange``), an
absolute reference a fixed range (``Fixed``). Arithmetic, comparisons,
``IF``, the row-wise aggregates (``SUM``, ``AVERAGE``, ``COUNT``, ``MIN``,
``MAX``) and ``ABS``/``SQRT`` run as numpy operations on clean numbers
(``ROUND``, ``ROUNDUP``, ``ROUNDDOWN``, ``TRUNC`` call the engine's own
decimal rounding on each clean number, without the library's per-cell
wrapper); registered elementwise
functions run their body on whole float arrays (failing blocks are halved
to find the rows that fail, as :func:`trueband.funcs.registry.call_column`
does). Every row that is not clean (text, blanks, errors, a non-finite
intermediate) and every other function goes through the library function
for that row only, so the values are those of :func:`.eval_cell.evaluate_cell`
(the reference semantics) cell by cell.

>>> import numpy as np
>>> from trueband.bridge.formulas.compile import compile_formula
>>> from trueband.bridge.engine.graph import Run
>>> class Store:
...     def column(self, sheet, col, r1, r2):
...         return np.arange(r1, r2 + 1, dtype=float)
...     def value(self, sheet, row, col):
...         return float(row)
>>> run = Run("S", 2, 2, 5, compile_formula("=A2*10+1", 2, 2))
>>> evaluate_run(run, Store()).values.tolist()
[21.0, 31.0, 41.0, 51.0]
"""

from __future__ import annotations

import dataclasses
from typing import Callable, Sequence

import numpy as np
from formulas.functions import XlError
from formulas.functions.operators import OPERATORS

from trueband.funcs._columns import evaluate_rows, number_columns
from trueband.funcs.errors import TruebandError
from trueband.funcs.registry import REGISTRY

from ..formulas.compile import Node
from ..formulas.library import (ERROR_LOG, NOT_IMPLEMENTED, PassError, function_table, message_for, range_argument,
                                scalar_argument)
from ..formulas.names import registered_name
from ..formulas.standard import NUMBER_FUNCTIONS, STANDARD_CORRECTIONS
from .criteria import AGGREGATE_FUNCTIONS, COUNT_FUNCTIONS, count_if_rows
from .eval_cell import area_value, range_aggregate, single_value_arguments
from .graph import Run
from . import fast_paths
from .extent import EXTENT_FUNCTIONS, blank_cells_cut_off, extent_size, pad_paired_ranges
from .values import (EMPTY, NAME_ERROR, VALUE_ERROR, CannotEvaluate, CellProblem, VectorUnsupported, final_array,
                     final_value, library_callable as _library_callable, tidy_column as _tidy,
                     unknown_function)
from ..workbook.cells import MAX_COLUMN, MAX_ROW

__all__ = ["RunResult", "evaluate_run"]


class Col:
    """Per-row values of a run: ``a`` has one entry per row (float, bool or object dtype)."""

    __slots__ = ("a",)

    def __init__(self, a: np.ndarray):
        self.a = a


class Fixed:
    """A value that is the same for every row: a 2-D object array in the engine's form."""

    __slots__ = ("a", "_numbers")

    def __init__(self, a):
        self.a = a
        self._numbers = None

    def scalar_number(self):
        """The float of a one-cell fixed range holding a number, else None."""
        a = self.a
        if isinstance(a, np.ndarray) and a.size == 1 and a.ndim <= 2:
            x = a.ravel()[0]
            if isinstance(x, (float, int, np.floating, np.integer)) and not isinstance(x, (bool, np.bool_)):
                return float(x)
        return None

    def numbers(self):
        """(values as floats with NaN for non-numbers, holds an error) for aggregates."""
        if self._numbers is None:
            a = self.a
            if not isinstance(a, np.ndarray):
                self._numbers = (None, True)
            else:
                flat = a.ravel()
                out = np.full(flat.shape, np.nan)
                err = False
                for k, x in enumerate(flat):
                    if isinstance(x, (float, int)) and not isinstance(x, bool):
                        out[k] = x
                    elif isinstance(x, XlError):
                        err = True
                self._numbers = (out, err)
        return self._numbers


class RowRange:
    """Per-row one-row ranges (``SUM(B2:K2)`` filled down): ``num`` is (rows, cells), NaN where a cell
    is not a number; ``cells(i)`` gives row i in the engine's form."""

    __slots__ = ("num", "clean", "_cells")

    def __init__(self, num: np.ndarray, clean: np.ndarray, cells: Callable[[int], np.ndarray]):
        self.num = num
        self.clean = clean  # rows whose cells are all numbers (no blanks, text, logicals or errors)
        self._cells = cells

    def cells(self, i: int) -> np.ndarray:
        return self._cells(i)


@dataclasses.dataclass
class RunResult:
    """The values of a run's cells, and why the error cells are errors."""

    values: np.ndarray  # one value per row of the run (float, bool or object dtype)
    problems: dict[int, CellProblem]  # row offset within the run → why that cell is an error


def _cell(x):
    """A per-row value in the engine's form for the library functions (a one-cell range)."""
    out = np.empty((1, 1), dtype=object)
    out[0, 0] = x
    return out


def _row_arg(x, i: int):
    if isinstance(x, Col):
        return _cell(x.a[i].item() if isinstance(x.a[i], np.generic) else x.a[i])
    if isinstance(x, Fixed):
        return x.a
    if isinstance(x, RowRange):
        return x.cells(i)
    return x


def _numbers_of(x):
    """A float array (per row) or float scalar when ``x`` holds clean numbers only, else None."""
    if isinstance(x, Col):
        return x.a if x.a.dtype.kind == "f" else None
    if isinstance(x, Fixed):
        return x.scalar_number()
    if isinstance(x, (float, int, np.floating, np.integer)) and not isinstance(x, (bool, np.bool_)):
        return float(x)
    return None


_ARITH = {"+": np.add, "-": np.subtract, "*": np.multiply, "/": np.divide, "^": np.power}
_COMPARE = {"=": np.equal, "<>": np.not_equal, "<": np.less, ">": np.greater, "<=": np.less_equal,
            ">=": np.greater_equal}
_AGGREGATES = ("SUM", "AVERAGE", "COUNT", "MIN", "MAX")
#: Functions of one number run as numpy operations on clean numbers. ROUND is not among them: the engine's
#: ROUND rounds the 15-digit decimal form, halves away from zero (``_RunEval.number_function`` calls it per number).
_ELEMENTWISE = {"ABS": np.abs, "SQRT": np.sqrt}


class _RunEval:
    """Evaluates the tree of a run's formula for all its rows; collects each row's problem."""

    def __init__(self, run: Run, store):
        self.run, self.store = run, store
        self.sheet, self.col = run.sheet, run.col
        self.first, self.last, self.n = run.first, run.last, run.size
        self.problems: dict[int, CellProblem] = {}

    # -- generic per-row fallback through the library (or the registered function's engine adapter)

    def rowwise(self, fn, args: Sequence, rows=None, *, label: str, registered: bool = False) -> np.ndarray:
        n = self.n
        idx = range(n) if rows is None else rows
        out = np.empty(n, dtype=object)
        for i in idx:
            a = [_row_arg(x, i) for x in args]
            if registered:
                ERROR_LOG.clear()
            try:
                r = fn(*a)
            except Exception as exc:  # the library raises on inputs it does not handle
                if not registered:  # the reference path decides such a cell (its value kept, or an error)
                    raise VectorUnsupported(f"{label} raised {type(exc).__name__}") from None
                self.problems.setdefault(i, CellProblem(label, "#VALUE!", f"{label}: {exc}"))
                r = VALUE_ERROR
            if isinstance(r, np.ndarray):
                r = r.ravel()[0] if r.size else VALUE_ERROR
            if isinstance(r, np.generic):
                r = r.item()
            if registered and isinstance(r, XlError) and ERROR_LOG.entries:
                fname, exc = ERROR_LOG.entries[-1]
                self.problems[i] = CellProblem(fname, exc.code, message_for(fname, exc))
            out[i] = r
        return out

    def as_col(self, x) -> Col:
        if isinstance(x, Col):
            return x
        if isinstance(x, Fixed):
            if isinstance(x.a, np.ndarray) and x.a.shape == (1, 1):
                v = x.a[0, 0]
            else:
                raise VectorUnsupported("a range where one value per row is needed")
        else:
            v = x
        if isinstance(v, float):
            return Col(np.full(self.n, v))
        if isinstance(v, bool):
            return Col(np.full(self.n, v, dtype=bool))
        if isinstance(v, int):
            return Col(np.full(self.n, float(v)))
        a = np.empty(self.n, dtype=object)
        a[:] = [v] * self.n
        return Col(a)

    # -- the tree

    def evaluate(self, node: Node):
        k = node.kind
        if k == "lit":
            return node.value
        if k == "empty":
            return 0
        if k == "ref":
            return self.ref(node)
        if k == "op":
            return self.operator(node)
        if k == "undefined":
            raise CannotEvaluate(CellProblem("", "#NAME?", node.name))
        return self.call(node)

    def ref(self, node: Node):
        ref = node.ref
        if ref.name is not None:
            return NAME_ERROR
        sheet = ref.sheet or self.sheet
        if ref.is_cell and not ref.r1_abs:
            r1, c1, _, _ = ref.area(self.first, self.col)
            r2 = r1 + self.n - 1
            if r1 < 1 or r2 > MAX_ROW or c1 < 1 or c1 > MAX_COLUMN:
                raise VectorUnsupported("a reference that leaves the sheet")
            return Col(self.store.column(sheet, c1, r1, r2))
        if ref.rows_fixed:
            return Fixed(area_value(self.store, sheet, ref.area(self.first, self.col)))
        if ref.one_row_moving:
            r1, c1, _, c2 = ref.area(self.first, self.col)
            r2 = r1 + self.n - 1
            if r1 < 1 or r2 > MAX_ROW or c1 < 1 or c2 > MAX_COLUMN:
                raise VectorUnsupported("a reference that leaves the sheet")
            if not hasattr(self.store, "row_block"):
                raise VectorUnsupported("row blocks")
            num, clean, cells = self.store.row_block(sheet, r1, r2, c1, c2)
            return RowRange(num, clean, cells)
        raise VectorUnsupported("a range whose size changes from row to row")

    def operator(self, node: Node):
        name = node.name
        if name in (":", ",", " "):
            raise VectorUnsupported(f"the range operator {name!r}")
        args = [self.evaluate(a) for a in node.args]
        if any(isinstance(a, RowRange) or (isinstance(a, Fixed) and np.size(a.a) != 1) for a in args):
            raise VectorUnsupported("a range as an operand (read by implicit intersection, or as an array)")
        if not any(isinstance(a, (Col, RowRange)) for a in args):
            return _constant(OPERATORS[name](*[a.a if isinstance(a, Fixed) else a for a in args]))
        fn = OPERATORS[name]
        if name in _ARITH or name in ("U-", "U+", "%"):
            nums = [_numbers_of(a) for a in args]
            if all(x is not None for x in nums):
                with np.errstate(all="ignore"):
                    if name == "U-":
                        res = -nums[0]
                    elif name == "U+":
                        res = nums[0] + 0.0
                    elif name == "%":
                        res = nums[0] / 100.0
                    else:
                        res = _ARITH[name](nums[0], nums[1])
                # division by zero, overflow, 0^-1 ...: the library decides those rows
                return self.finite_or_library(res, fn, args, name)
        elif name in _COMPARE:
            nums = [_numbers_of(a) for a in args]
            if all(x is not None for x in nums):
                return Col(np.broadcast_to(_COMPARE[name](nums[0], nums[1]), (self.n,)).copy())
        return Col(_tidy(self.rowwise(fn, args, label=name)))

    def call(self, node: Node):
        name = node.name
        reg = registered_name(name)
        if reg is not None:
            return self.registered(reg, node)
        if name in ("ROW", "COLUMN"):
            return self.row_column(node)
        if name in EXTENT_FUNCTIONS and (size := extent_size(name, node.args, self.first, self.col)) is not None:
            if extent_size(name, node.args, self.last, self.col) is None:
                raise VectorUnsupported(f"{name} of a reference that leaves the sheet in some rows")
            return size
        fast = range_aggregate(name, node.args, self.store, self.sheet, self.first, self.col, fixed_rows=True)
        if fast is not None:
            return fast
        if name in COUNT_FUNCTIONS or name in AGGREGATE_FUNCTIONS:
            counts = count_if_rows(name, node.args, self.per_row, self.store, self.sheet, self.first, self.col, self.n)
            if counts is not None:
                return Col(counts)
        table = function_table()
        if name not in table or table[name] is NOT_IMPLEMENTED:
            raise CannotEvaluate(unknown_function(name))
        single = single_value_arguments(name, len(node.args))
        args = [self.evaluate(a) for a in node.args]
        if any(isinstance(args[i], RowRange) or (isinstance(args[i], Fixed) and np.size(args[i].a) != 1)
               for i in single):
            raise VectorUnsupported(f"a range as a one-value argument of {name} (read by implicit intersection)")
        if len(args) > 1:  # fixed ranges of one size cut at different heights, as in the cell path
            raw = [a.a if isinstance(a, Fixed) else None for a in args]
            raw = pad_paired_ranges(node.args, raw, self.first, self.col, single)
            args = [Fixed(p) if isinstance(a, Fixed) and p is not a.a else a for a, p in zip(args, raw)]
        if name == "IF":
            return self.if_function(node, args)
        if name in _AGGREGATES:
            fast = self.aggregate(name, args)
            if fast is not None:
                return fast
        if name == "COUNT" and fast_paths.ENABLED and (counted := self.count(args)) is not None:
            return counted
        if name in EXTENT_FUNCTIONS and args and isinstance(args[0], Fixed) and \
                blank_cells_cut_off(name, node.args, args[0].a, self.first, self.col):
            raise VectorUnsupported(f"{name} over blank cells the store did not read (counted cell by cell)")
        fn = _library_callable(name, table[name])
        if not any(isinstance(a, (Col, RowRange)) for a in args):
            return _constant(fn(*[a.a if isinstance(a, Fixed) else a for a in args]))
        if name in NUMBER_FUNCTIONS and table[name] is STANDARD_CORRECTIONS.get(name):
            fast = self.number_function(name, fn, args)
            if fast is not None:
                return fast
        if name == "INDEX" and len(args) == 2:
            fast = self.index_rows(fn, args)
            if fast is not None:
                return fast
        if name in _ELEMENTWISE and all(_numbers_of(a) is not None for a in args):
            with np.errstate(all="ignore"):
                res = _ELEMENTWISE[name](_numbers_of(args[0]))
            return self.finite_or_library(res, fn, args, name)
        return Col(_tidy(self.rowwise(fn, args, label=name)))

    def count(self, args: list):
        """``COUNT`` of per-row values (:func:`.fast_paths.count_rows`); the rows it leaves to the library row by row."""
        got = fast_paths.count_rows(args, self.n, Col, RowRange, Fixed, function_table()["COUNT"])
        if got is None or not any(isinstance(a, (Col, RowRange)) for a in args):
            return None
        res, todo = got
        if todo.any():
            fixed = self.rowwise(function_table()["COUNT"], args, np.flatnonzero(todo), label="COUNT")
            res = res.astype(object)
            res[todo] = fixed[todo]
            return Col(_tidy(res))
        return Col(res)

    def number_function(self, name: str, fn, args: list):
        """``ROUND``/``ROUNDUP``/``ROUNDDOWN``/``TRUNC`` of a column of clean numbers, the other arguments one
        finite number for every row: the corrected function called on each finite number directly, as the
        library's element-by-element wrapper calls it, without the wrapper's per-cell arrays; None when it does
        not apply. Rows whose number or result is not finite, or where the function raises, go to the library."""
        x = _numbers_of(args[0]) if args else None
        rest = [_numbers_of(a) for a in args[1:]]
        if not isinstance(x, np.ndarray) or any(r is None or isinstance(r, np.ndarray) or not np.isfinite(r)
                                                for r in rest):
            return None
        body, rest = NUMBER_FUNCTIONS[name], [float(r) for r in rest]

        def one(v: float) -> float:
            try:
                return body(v, *rest) if np.isfinite(v) else np.nan
            except Exception:  # the library's wrapper decides (an error value, or the reference path)
                return np.nan

        return self.finite_or_library(np.array([one(v) for v in x.tolist()], dtype=float), fn, args, name)

    def index_rows(self, fn, args: list):
        """``INDEX(range, k)`` with one fixed range of one column (or one row) and a position per row: the
        cell at each whole position 1..length taken from the range at once (a blank read as 0, as the library
        reads it); None when it does not apply. Other positions (not whole, out of the range, not numbers)
        go to the library row by row."""
        area, k = args
        if not isinstance(area, Fixed) or not isinstance(area.a, np.ndarray) or area.a.ndim != 2:
            return None
        if min(area.a.shape) != 1 or max(area.a.shape) < 2:
            return None
        k = _numbers_of(k)
        if not isinstance(k, np.ndarray):
            return None
        cells = area.a.ravel()
        ok = (k >= 1) & (k <= cells.size) & (np.floor(k) == k)
        picked = cells[np.where(ok, k, 1).astype(np.int64) - 1]
        out = np.empty(self.n, dtype=object)
        out[:] = [0 if v is EMPTY else (v.item() if isinstance(v, np.generic) else v) for v in picked]
        if not ok.all():
            rest = np.flatnonzero(~ok)
            out[rest] = self.rowwise(fn, args, rest, label="INDEX")[rest]
        return Col(_tidy(out))

    def per_row(self, node: Node) -> list | None:
        """A criterion's value in each row of the run (a list), or None when it is a range of several cells."""
        x = self.evaluate(node)
        if isinstance(x, Col):
            return [v.item() if isinstance(v, np.generic) else v for v in x.a]
        if isinstance(x, RowRange) or (isinstance(x, Fixed) and np.size(x.a) != 1):
            return None
        if isinstance(x, Fixed):
            x = np.ravel(x.a)[0]
        return [x] * self.n

    def row_column(self, node: Node):
        """``ROW()``, ``COLUMN()``, ``ROW(ref)``, ``COLUMN(ref)``: a row number moves with the run's rows."""
        name = node.name
        if not node.args:
            if name == "ROW":
                return Col(np.arange(self.first, self.last + 1, dtype=float))
            return float(self.col)
        a = node.args[0]
        if a.kind != "ref" or a.ref.name is not None:
            return VALUE_ERROR
        if name == "COLUMN":
            return float(a.ref.area(self.first, self.col)[1])
        if a.ref.r1_abs:
            return float(a.ref.area(self.first, self.col)[0])
        start = a.ref.area(self.first, self.col)[0]
        return Col(np.arange(start, start + self.n, dtype=float))

    def finite_or_library(self, res, fn, args: Sequence, label: str) -> Col:
        """Per-row numbers ``res`` (or one number for every row), the rows where it is not finite decided by
        the library function ``fn``."""
        res = np.broadcast_to(res, (self.n,)).astype(float)
        bad = ~np.isfinite(res)
        if bad.any():
            fixed = self.rowwise(fn, args, np.flatnonzero(bad), label=label)
            res = res.astype(object)
            res[bad] = fixed[bad]
            return Col(_tidy(res))
        return Col(res)

    def if_function(self, node: Node, args: list):
        fn = function_table()["IF"]["function"]
        cond = args[0] if args else 0
        if not isinstance(cond, (Col, RowRange)) and not any(isinstance(a, (Col, RowRange)) for a in args):
            return _constant(fn(*[a.a if isinstance(a, Fixed) else a for a in args]))
        c = cond.a if isinstance(cond, Col) else None
        if c is not None and c.dtype.kind in "fb" and len(args) in (2, 3) and \
                not any(isinstance(a, RowRange) for a in args[1:]):
            try:
                yes = self.as_col(args[1])
                no = self.as_col(args[2]) if len(args) == 3 else self.as_col(False)
            except VectorUnsupported:
                return Col(_tidy(self.rowwise(fn, args, label="IF")))
            truth = c != 0 if c.dtype.kind == "f" else c
            if yes.a.dtype == no.a.dtype and yes.a.dtype.kind in "fb":
                return Col(np.where(truth, yes.a, no.a))
            out = np.where(truth, yes.a.astype(object), no.a.astype(object))
            return Col(_tidy(out))
        return Col(_tidy(self.rowwise(fn, args, label="IF")))

    def aggregate(self, name: str, args: list):
        """Row-wise SUM / AVERAGE / COUNT / MIN / MAX over clean rows; None when it does not apply."""
        parts = []
        clean = np.ones(self.n, dtype=bool)
        for a in args:
            if isinstance(a, RowRange):
                parts.append(a.num)
                clean &= a.clean
            elif isinstance(a, Col):
                if a.a.dtype.kind != "f":
                    return None
                parts.append(a.a.reshape(-1, 1))
            elif isinstance(a, Fixed):
                nums, err = a.numbers()
                if nums is None or err or np.isnan(nums).any():
                    return None
                parts.append(np.broadcast_to(nums, (self.n, nums.size)))
            elif isinstance(a, float) or (isinstance(a, int) and not isinstance(a, bool)):
                parts.append(np.full((self.n, 1), float(a)))
            else:
                return None
        if not parts or not any(isinstance(a, (RowRange, Col)) for a in args):
            return None
        block = np.ascontiguousarray(np.hstack(parts)) if len(parts) > 1 else np.ascontiguousarray(parts[0])
        if block.shape[1] == 0:
            return None
        with np.errstate(all="ignore"):
            if name == "COUNT":
                res = np.full(self.n, float(block.shape[1]))
            elif name == "SUM":
                res = block.sum(axis=1)
            elif name == "AVERAGE":
                res = block.mean(axis=1)
            elif name == "MIN":
                res = block.min(axis=1)
            else:
                res = block.max(axis=1)
        todo = ~clean | ~np.isfinite(res)
        if todo.any():
            fixed = self.rowwise(function_table()[name], args, np.flatnonzero(todo), label=name)
            res = res.astype(object)
            res[todo] = fixed[todo]
            return Col(_tidy(res))
        return Col(res)

    # -- registered functions

    def registered(self, reg: str, node: Node):
        spec = REGISTRY[reg]
        adapter = function_table()[reg]
        args = [None if a.kind == "empty" else self.evaluate(a) for a in node.args]
        per_row = [i for i, a in enumerate(args) if isinstance(a, (Col, RowRange))]
        if not per_row:
            ERROR_LOG.clear()
            out = adapter(*[a.a if isinstance(a, Fixed) else a for a in args])
            if isinstance(out, XlError) and ERROR_LOG.entries:
                fname, exc = ERROR_LOG.entries[-1]
                problem = CellProblem(fname, exc.code, message_for(fname, exc))
                for i in range(self.n):
                    self.problems[i] = problem
            return _constant(out)
        names = [a.name for a in spec.arguments]
        vector_ok = (len(args) <= len(names)
                     and all(isinstance(args[i], Col) and names[i] in spec.elementwise for i in per_row))
        if not vector_ok:
            return Col(_tidy(self.rowwise(adapter, args, label=reg, registered=True)))
        return Col(_tidy(self.registered_column(spec, adapter, args, per_row)))

    def registered_column(self, spec, adapter, args, per_row) -> np.ndarray:
        """The body on whole float arrays (:func:`trueband.funcs._columns.evaluate_rows`, the evaluator
        ``call_column`` uses too); rows that are not clean numbers, or that fail, one by one."""
        names = [a.name for a in spec.arguments]
        whole = {a.name for a in spec.arguments if a.kind == "integer"}
        arrays, ok = number_columns({names[i]: args[i].a for i in per_row}, whole, self.n)
        # Shared arguments are bound and converted once, as the engine adapter would convert them.
        try:
            scalars = []
            for i, a in enumerate(args):
                if i in per_row:
                    scalars.append(0.0)
                elif i < len(names) and spec.arguments[i].kind == "range":
                    scalars.append(range_argument(a.a if isinstance(a, Fixed) else a))
                else:
                    scalars.append(scalar_argument(a.a if isinstance(a, Fixed) else a, names[i]))
            bound = spec.bind(scalars)
            fixed = {a.name: a.coerce(bound[a.name]) for a in spec.arguments if a.name not in arrays}
        except (TruebandError, PassError):
            return self.rowwise(adapter, args, label=spec.name, registered=True)

        def one(k: int):
            return self.rowwise(adapter, args, [k], label=spec.name, registered=True)[k]

        return evaluate_rows(spec.body, spec.check_results, fixed, arrays, ok, one)


def _constant(x):
    """A value that does not vary by row, kept in the engine's form (a computed single value unwrapped)."""
    if isinstance(x, np.ndarray):
        if x.ndim == 0:
            x = x.item()
            return x.item() if isinstance(x, np.generic) else x
        return Fixed(x)
    if isinstance(x, np.generic):
        return x.item()
    return x


def evaluate_run(run: Run, store) -> RunResult:
    """Evaluate every cell of a run as arrays (raises :class:`VectorUnsupported` when it cannot)."""
    evaluator = _RunEval(run, store)
    if run.compiled.tree.kind == "ref" and not run.compiled.tree.ref.is_cell:
        raise VectorUnsupported("a formula that is a range (read by implicit intersection)")
    res = evaluator.evaluate(run.compiled.tree)
    if isinstance(res, Col):
        values = final_array(res.a)
    elif isinstance(res, RowRange):
        raise VectorUnsupported("a formula whose value is a range")
    else:
        v = final_value(res.a if isinstance(res, Fixed) else res)
        values = np.empty(run.size, dtype=object)
        values[:] = [v] * run.size
        values = _tidy(values)
    problems = {}
    if values.dtype == object:
        for i, p in evaluator.problems.items():
            x = values[i]
            if isinstance(x, XlError) and str(x) == p.code:
                problems[i] = p
    return RunResult(values, problems)
