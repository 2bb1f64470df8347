"""Standard functions computed from whole arrays where the library would step through every cell in Python.

Each fast path takes only inputs whose meaning is plain and gives the library's own value for them (the same
arithmetic on the same numbers, so the same bits); anything else returns None (or marks the row) and the
library decides, so the values are those of the reference path (:mod:`.eval_cell`):

* :func:`count_rows`: ``COUNT`` of per-row values in a filled-down run (``IF(COUNT(A2)=1,A2,"")``): a row
  counts its numbers (a text counts as the library counts a cell holding it, asked once per distinct text: the
  library counts ``"1"``); a row holding a logical or an error goes to the library;
* :func:`choose_cell`: ``CHOOSE(k, range1, range2, ...)`` with one whole-number position and ranges of one
  shape: the k-th range, each cell as the library's element-by-element ``CHOOSE`` gives it (a number, a
  text, a logical or an error as it is; a blank ``#VALUE!``; a non-finite number ``#NUM!``);
* :func:`pair_statistic`: ``SLOPE``, ``INTERCEPT``, ``STEYX``, ``CORREL``, ``RSQ`` of two plain references
  to ranges of numbers, texts and blanks, from the store's dense arrays: the pairs where both cells are
  numbers (the library leaves out a pair with a text or a blank), then the library's own arithmetic on those
  arrays (``_slope_coeff``, ``np.corrcoef``, ``scipy.stats.linregress``, the library's STEYX sums); too few
  pairs, a logical or an error, ranges of other sizes or a result that is not finite go to the library.

:data:`ENABLED` switches them all off (``bench/`` measures the reference in the same run with it False).
``tests/test_engine_fast_paths.py`` compares each with the library path and with LibreOffice.
"""

from __future__ import annotations

import math

import numpy as np
from formulas.functions import Array, XlError

from ..workbook.cells import MAX_COLUMN, MAX_ROW
from .values import EMPTY, NUM_ERROR, VALUE_ERROR

__all__ = ["ENABLED", "PAIR_FUNCTIONS", "count_rows", "choose_cell", "pair_statistic"]

#: The module flag: False sends every call to the library (the reference path).
ENABLED = True

#: The statistics of two ranges taken here.
PAIR_FUNCTIONS = frozenset({"SLOPE", "INTERCEPT", "STEYX", "CORREL", "RSQ"})


def count_rows(args: list, n: int, col_type, range_type, fixed_type, library_count):
    """``COUNT`` of a run's per-row arguments: (counts as floats, rows the library must decide), or None.

    ``args`` are the run's evaluated arguments (``Col``, ``RowRange``, ``Fixed``; the types are passed in, as
    this module does not import the run evaluator); a text in a row counts as the library's ``library_count``
    counts a cell holding it (asked once per distinct text: it counts ``"1"``, not ``""``); a ``Fixed`` range
    counts its numbers when it holds no error, a literal number counts 1; any other argument (a literal text or
    logical) returns None."""
    memo: dict[str, int] = {}

    def texts(v: str) -> int:
        if v not in memo:
            cell = np.empty((1, 1), dtype=object)
            cell[0, 0] = v
            got = library_count(cell)
            memo[v] = int(got) if type(got) in (int, float) and got in (0, 1) else 2
        return memo[v]

    counts = np.zeros(n)
    todo = np.zeros(n, dtype=bool)
    for a in args:
        if isinstance(a, col_type):
            x = a.a
            if x.dtype.kind == "f":
                ok = np.isfinite(x)
                counts += ok
                todo |= ~ok
                continue
            if x.dtype.kind != "O":
                return None  # logicals: the library's
            k = np.asarray([1 if type(v) is float else 0 if v is EMPTY else texts(v) if type(v) is str else 2
                            for v in x.tolist()], dtype=np.int8)
            counts += k == 1
            todo |= k == 2
        elif isinstance(a, range_type):
            counts += (~np.isnan(a.num)).sum(axis=1)
            todo |= ~a.clean
        elif isinstance(a, fixed_type):
            nums, err = a.numbers()
            if nums is None or err:
                return None
            counts += float(np.count_nonzero(~np.isnan(nums)))
        elif type(a) is float or type(a) is int:
            counts += 1.0
        else:
            return None
    return counts, todo


def _choice(x):
    """One cell of the chosen range as the library's element-by-element CHOOSE gives it."""
    if type(x) is float:
        return x if math.isfinite(x) else NUM_ERROR
    if isinstance(x, (XlError, str)):
        return x
    try:
        return x if np.isfinite(x) else NUM_ERROR
    except (TypeError, ValueError):  # a blank (and any other object): the library's #VALUE!
        return VALUE_ERROR


def choose_cell(index, choices: list):
    """``CHOOSE(index, choice1, ...)`` for a number ``index`` (or a one-cell range holding one) and choices
    that are ranges of one shape; None when it does not apply (the library decides)."""
    if isinstance(index, np.ndarray):
        if index.size != 1:
            return None
        index = index.ravel()[0]
    if isinstance(index, (np.integer, np.floating)):  # MATCH's position, say
        index = index.item()
    if type(index) not in (float, int) or not math.isfinite(index):
        return None
    k = int(index) - 1
    if not choices or not 0 <= k < len(choices):
        return None
    shape = np.shape(choices[0])
    if len(shape) != 2 or any(not isinstance(c, np.ndarray) or c.shape != shape or c.dtype != object
                              for c in choices):
        return None
    out = np.empty(shape, dtype=object)
    out.ravel()[:] = [_choice(x) for x in choices[k].ravel().tolist()]
    return out.view(Array)


def _dense_range(node, store, sheet: str, row: int, col: int):
    """The numbers of a plain reference's range (NaN for a blank or a text), flattened in reading order; None when
    it is not a plain reference, leaves the sheet, is very wide, or holds a logical or an error."""
    if node.kind != "ref" or node.ref.name is not None or not hasattr(store, "dense"):
        return None
    r1, c1, r2, c2 = node.ref.area(row, col)
    if r1 < 1 or c1 < 1 or r2 > MAX_ROW or c2 > MAX_COLUMN or c2 - c1 > 1000:
        return None  # the store trims a wider range to its used columns: the library reads that
    got = store.dense(node.ref.sheet or sheet, r1, c1, r2, c2)
    return None if got is None else got[0].ravel()


def pair_statistic(name: str, nodes, store, sheet: str, row: int, col: int):
    """``name(known_y, known_x)`` over two ranges of numbers and blanks, or None when the library decides."""
    if name not in PAIR_FUNCTIONS or len(nodes) != 2:
        return None
    y = _dense_range(nodes[0], store, sheet, row, col)
    x = _dense_range(nodes[1], store, sheet, row, col)
    if y is None or x is None or y.size != x.size or y.size < 2:
        return None
    both = ~np.isnan(y) & ~np.isnan(x)
    y, x = y[both], x[both]
    if y.size <= 2:
        return None  # too few pairs: the library's error
    with np.errstate(all="ignore"):
        out = _statistic(name, y, x)
    return out if out is not None and np.isfinite(out) else None


def _statistic(name: str, y: np.ndarray, x: np.ndarray):
    """The library's own arithmetic (formulas.functions.stat) on the cleaned pairs."""
    if name in ("SLOPE", "INTERCEPT"):
        from formulas.functions.stat import _slope_coeff

        if not ((x - x.mean()) ** 2).sum():
            return None
        a, b = _slope_coeff(y, x)
        return b if name == "SLOPE" else a
    if name == "CORREL":
        return np.corrcoef(y, x)[0, 1]
    if name == "RSQ":
        from scipy import stats

        return stats.linregress(y, x)[2] ** 2
    # STEYX, as xsteyx computes it
    n = y.size
    xd = x - x.mean()
    yd = y - y.mean()
    see = np.dot(yd, yd) - np.dot(xd, yd) ** 2 / np.dot(xd, xd)
    return np.sqrt(max(0.0, see / (n - 2)))
