"""Input checks shared by every function module.

Scalar checks accept a Python number or, on the vectorised column path, a
float array; they return the value as ``float`` (or the array) and raise the
project's errors with the argument's name and the offending value.

Range helpers turn what a spreadsheet hands over (nested rows of numbers,
``None`` for blanks, sometimes text) into numpy arrays:

* blanks (``None``, the empty string, ``nan``) become ``nan`` in numeric
  ranges and ``None`` in label ranges; each function documents what it does
  with them (listwise deletion, pairwise use, ...);
* text and logical values in a numeric range are refused with the row and
  column of the first one (spreadsheet statistics skip them silently, which
  hides data errors, so we do not).
"""

from __future__ import annotations

import itertools
import math
import numbers
from typing import Iterable, NewType

import numpy as np

from ._budget import check_time
from .errors import (
    ArgumentTypeError,
    DomainError,
    InsufficientDataError,
    ZeroVarianceError,
)

_PLAIN_NUMBERS = {float, int, type(None)}

#: Annotation marking a range argument: 2-D data as a spreadsheet gives it.
Range = NewType("Range", object)

#: Annotation marking a single category label: a number or a text (an answer option such as "B" or 2).
Label = NewType("Label", object)


def show(value) -> str:
    """A value as it is echoed in a message."""
    if isinstance(value, (bool, np.bool_)):
        return "TRUE" if value else "FALSE"
    if isinstance(value, numbers.Real):
        value = to_float(value)
        if value.is_integer() and abs(value) < 1e15:
            return str(int(value))
        return format(value, ".15g")
    if isinstance(value, str):
        return f'"{value}"'
    if value is None:
        return "a blank"
    return type(value).__name__


def to_float(value) -> float:
    """float(value), with a whole number beyond the float range read as an infinity (refused later)."""
    try:
        return float(value)
    except OverflowError:
        return math.inf if value > 0 else -math.inf


def _first(array: np.ndarray, mask: np.ndarray):
    return array[mask].flat[0]


# ---------------------------------------------------------------- scalars

def number(name: str, value):
    """A finite real number (float), or a float array on the column path."""
    if isinstance(value, np.ndarray) and value.dtype.kind in "fiu":
        value = np.asarray(value, dtype=float)
        bad = ~np.isfinite(value)
        if bad.any():
            raise DomainError(f"{name} must be a finite number, got {show(_first(value, bad))}", argument=name)
        return value
    if isinstance(value, np.ndarray) and value.ndim == 0:
        value = value.item()
    if value is None or (isinstance(value, str) and value == ""):
        raise ArgumentTypeError(f"{name} is blank; it must be a number", argument=name)
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        kind = "a logical value" if isinstance(value, (bool, np.bool_)) else (
            f"text {show(value)}" if isinstance(value, str) else
            "a range" if isinstance(value, (list, tuple, np.ndarray)) else show(value))
        raise ArgumentTypeError(f"{name} must be a number, got {kind}", argument=name)
    value = to_float(value)
    if not math.isfinite(value):
        raise DomainError(f"{name} must be a finite number, got {show(value)}", argument=name)
    return value


def integer(name: str, value):
    """A whole number, given as an int or as a float with no fraction."""
    value = number(name, value)
    frac = np.asarray(value) != np.round(value)
    if frac.any():
        raise DomainError(f"{name} must be a whole number, got {show(_first(np.asarray(value), frac))}", argument=name)
    if isinstance(value, np.ndarray):
        return value
    return int(value)


def boolean(name: str, value) -> bool:
    """A logical value (TRUE/FALSE); numbers 0 and 1 are accepted as in spreadsheets."""
    if isinstance(value, np.ndarray) and value.ndim == 0:
        value = value.item()
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, numbers.Real) and to_float(value) in (0.0, 1.0):  # to_float: no overflow on 10**400
        return bool(value)
    if isinstance(value, str) and value.strip().upper() in ("TRUE", "FALSE"):
        return value.strip().upper() == "TRUE"
    raise ArgumentTypeError(f"{name} must be TRUE or FALSE, got {show(value)}", argument=name)


def choice(name: str, value, options: Iterable[str]) -> str:
    """One of a fixed set of words, matched without regard to case or surrounding spaces.

    Anything else (another word, a number, a blank) is an ArgumentTypeError (#VALUE!).
    """
    options = tuple(options)
    if isinstance(value, np.ndarray) and value.ndim == 0:
        value = value.item()
    if not isinstance(value, str):
        raise ArgumentTypeError(
            f"{name} must be one of {', '.join(show(o) for o in options)}, got {show(value)}", argument=name)
    key = value.strip().lower()
    for option in options:
        if option.lower() == key:
            return option
    # A word outside the list is bad text, which spreadsheet apps answer with #VALUE!, not #NUM!.
    raise ArgumentTypeError(
        f"{name} must be one of {', '.join(show(o) for o in options)}, got {show(value)}", argument=name)


def label(name: str, value):
    """A single category label: a number (as float, so 2 and 2.0 are one label) or a text, stripped.

    Blanks, logical values and ranges are refused.
    """
    if isinstance(value, np.ndarray) and value.ndim == 0:
        value = value.item()
    if isinstance(value, str):
        if value.strip() == "":
            raise ArgumentTypeError(f"{name} is blank; it must be a number or a text", argument=name)
        return value.strip()
    if value is None:
        raise ArgumentTypeError(f"{name} is blank; it must be a number or a text", argument=name)
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        kind = "a logical value" if isinstance(value, (bool, np.bool_)) else (
            "a range" if isinstance(value, (list, tuple, np.ndarray)) else show(value))
        raise ArgumentTypeError(f"{name} must be a number or a text, got {kind}", argument=name)
    value = to_float(value)
    if not math.isfinite(value):
        raise DomainError(f"{name} must be a finite number or a text, got {show(value)}", argument=name)
    return value


def text(name: str, value) -> str:
    """Any text."""
    if not isinstance(value, str):
        raise ArgumentTypeError(f"{name} must be text, got {show(value)}", argument=name)
    return value


# ---------------------------------------------------------------- domains

def between(name: str, value, low: float, high: float, *, low_open: bool = False, high_open: bool = False):
    """``low <= value <= high``, with either end excluded on request."""
    arr = np.asarray(value)
    bad = (arr <= low if low_open else arr < low) | (arr >= high if high_open else arr > high)
    if bad.any():
        lo = "greater than" if low_open else "at least"
        hi = "less than" if high_open else "at most"
        if not low_open and not high_open:
            rule = f"between {show(low)} and {show(high)}"
        else:
            rule = f"{lo} {show(low)} and {hi} {show(high)}"
        raise DomainError(f"{name} must be {rule}, got {show(_first(arr, bad))}", argument=name)
    return value


def positive(name: str, value):
    """``value > 0``."""
    arr = np.asarray(value)
    bad = arr <= 0
    if bad.any():
        raise DomainError(f"{name} must be greater than 0, got {show(_first(arr, bad))}", argument=name)
    return value


def at_least(name: str, value, low: float):
    """``value >= low``."""
    arr = np.asarray(value)
    bad = arr < low
    if bad.any():
        raise DomainError(f"{name} must be at least {show(low)}, got {show(_first(arr, bad))}", argument=name)
    return value


def confidence(name: str, value):
    """A confidence level strictly between 0 and 1 (0.95 for 95%)."""
    return between(name, value, 0.0, 1.0, low_open=True, high_open=True)


def reliability(name: str, value, *, allow_zero: bool = True, allow_one: bool = True):
    """A reliability coefficient in [0, 1] (ends excluded on request)."""
    return between(name, value, 0.0, 1.0, low_open=not allow_zero, high_open=not allow_one)


def nonzero_variance(name: str, variance, what: str = "variance"):
    """Refuse a zero (or numerically zero) variance that a method divides by."""
    arr = np.asarray(variance)
    if (arr <= 0).any():
        raise ZeroVarianceError(f"{name} has zero {what}; the coefficient is undefined", argument=name)
    return variance


# ---------------------------------------------------------------- ranges

#: What a range argument takes, as messages say it.
RANGE_FORMS = "a list of rows, a numpy array or a pandas DataFrame"


def _table_values(value):
    """A pandas DataFrame or Series as its numpy values (duck-typed: pandas is not a dependency)."""
    if hasattr(value, "to_numpy") and hasattr(value, "shape") and not isinstance(value, np.ndarray):
        return value.to_numpy()
    return value


def _as_rows(name: str, value, what: str = "a range") -> np.ndarray:
    """Any range-like input as a 2-D array (object dtype unless already numeric).

    Lists of rows, numpy arrays and pandas DataFrames and Series (NaN and pandas' NA read as
    blanks); a single number or text is a range of one cell. Anything else (a dict, a set, ...) is
    refused, saying what was given and what is wanted.
    """
    value = _table_values(value)
    if not isinstance(value, (np.ndarray, list, tuple, str, numbers.Number, np.generic)) and value is not None:
        raise ArgumentTypeError(f"{name} must be {what} ({RANGE_FORMS}), got a {type(value).__name__}",
                                argument=name)
    if isinstance(value, np.ndarray):
        arr = np.asarray(value)  # a plain ndarray: subclasses (an engine's array type) do not leak into the math
    elif isinstance(value, (list, tuple)):
        if len(value) == 0:
            raise InsufficientDataError(f"{name} is empty", argument=name)
        if all(isinstance(row, (list, tuple, np.ndarray)) for row in value):
            widths = {len(row) for row in value}
            if len(widths) != 1:
                raise ArgumentTypeError(f"{name} must be a rectangular range; its rows have different lengths", argument=name)
            arr = np.empty((len(value), widths.pop()), dtype=object)
            for i, row in enumerate(value):
                arr[i, :] = list(row)
        elif any(isinstance(row, (list, tuple, np.ndarray)) for row in value):
            raise ArgumentTypeError(f"{name} must be a rectangular range; it mixes rows and single cells", argument=name)
        else:
            # a flat list is one column of cells
            arr = np.empty((len(value), 1), dtype=object)
            arr[:, 0] = list(value)
    else:
        arr = np.empty((1, 1), dtype=object)
        arr[0, 0] = value
    if arr.ndim == 1:
        arr = arr.reshape(-1, 1)
    if arr.ndim != 2:
        raise ArgumentTypeError(f"{name} must be a 2-D range, got {arr.ndim} dimensions", argument=name)
    if arr.size == 0:
        raise InsufficientDataError(f"{name} is empty", argument=name)
    return arr


_PANDAS_BLANKS = frozenset({"NAType", "NaTType"})  # pandas' missing-value markers, known by their type names


def _is_blank(cell) -> bool:
    return cell is None or (isinstance(cell, str) and cell.strip() == "") or (
        isinstance(cell, float) and math.isnan(cell)) or type(cell).__name__ in _PANDAS_BLANKS


#: Whether :func:`numeric_matrix` reads numbers mixed with blank texts (a formula's ``""``) in one step (False:
#: cell by cell, as before; the benchmarks' reference run and the tests' slow path).
FAST_BLANK_TEXTS = True
_NUMBERS_AND_TEXT = _PLAIN_NUMBERS | {str}


def _numbers_and_blank_texts(cells: list):
    """Plain numbers, ``None`` and texts as floats in one step when every text is blank (as :func:`_is_blank`
    reads it: empty or only spaces), blanks as NaN; None when a text is not blank or a number is out of range
    (the cell-by-cell check then says what it says)."""
    if not FAST_BLANK_TEXTS:
        return None
    texts = [x for x in set(cells) if type(x) is str]  # the distinct cells, hashed in C: few texts among them
    if any(t.strip() != "" for t in texts):
        return None
    as_nan = dict.fromkeys(texts, math.nan)
    as_nan[None] = math.nan
    try:
        return np.fromiter(map(as_nan.get, cells, cells), float, len(cells))
    except OverflowError:
        return None


def numeric_matrix(name: str, value) -> np.ndarray:
    """A range of numbers as a 2-D float array; blanks become ``nan``.

    Text, logical values and infinities are refused, naming the first such
    cell by its 1-based row and column within the range.
    """
    if isinstance(value, (list, tuple)) and value and all(isinstance(row, (list, tuple)) for row in value):
        # Fast path for rows that hold only numbers and blanks (the usual range): the set of cell
        # types is gathered in C; anything else (text, logicals) goes through the cell-by-cell check.
        types = set(map(type, itertools.chain.from_iterable(value)))
        if types <= _PLAIN_NUMBERS and len({len(row) for row in value}) == 1 and len(value[0]):
            try:
                value = np.array(value, dtype=float)  # None -> nan
            except OverflowError:  # a whole number beyond float range: the cell-by-cell check names it
                pass
        elif types <= _NUMBERS_AND_TEXT and len({len(row) for row in value}) == 1 and len(value[0]):
            fast = _numbers_and_blank_texts(list(itertools.chain.from_iterable(value)))
            if fast is not None:
                value = fast.reshape(len(value), -1)
    elif isinstance(value, (list, tuple)) and value and set(map(type, value)) <= _PLAIN_NUMBERS:
        try:  # the same for a flat list (one column of cells)
            value = np.array(value, dtype=float).reshape(-1, 1)
        except OverflowError:
            pass
    elif isinstance(value, (list, tuple)) and value and set(map(type, value)) <= _NUMBERS_AND_TEXT:
        fast = _numbers_and_blank_texts(list(value))
        if fast is not None:
            value = fast.reshape(-1, 1)
    arr = _as_rows(name, _table_values(value), "a range of numbers")
    if arr.dtype.kind in "fiu":
        out = arr.astype(float)
        inf = np.isinf(out)
        if inf.any():
            r, c = np.argwhere(inf)[0]
            raise DomainError(f"{name} holds an infinite value at row {r + 1}, column {c + 1}", argument=name)
        return out
    if arr.dtype.kind == "b":
        raise ArgumentTypeError(f"{name} must hold numbers, got logical values", argument=name)
    flat = arr.ravel()
    out = np.empty(flat.shape, dtype=float)
    for k, cell in enumerate(flat):
        if not k & 4095:
            check_time()  # a budget set by the caller (the HTTP bridge) stops a long cell-by-cell check
        if _is_blank(cell):
            out[k] = np.nan
        elif isinstance(cell, numbers.Real) and not isinstance(cell, (bool, np.bool_)):
            out[k] = to_float(cell)
            if math.isinf(out[k]):
                r, c = divmod(k, arr.shape[1])
                raise DomainError(f"{name} holds an infinite value at row {r + 1}, column {c + 1}", argument=name)
        else:
            r, c = divmod(k, arr.shape[1])
            what = "a logical value" if isinstance(cell, (bool, np.bool_)) else (
                f"text {show(cell)}" if isinstance(cell, str) else show(cell))
            raise ArgumentTypeError(
                f"{name} must hold numbers only; found {what} at row {r + 1}, column {c + 1}", argument=name)
    return out.reshape(arr.shape)


def numeric_vector(name: str, value) -> np.ndarray:
    """A single row or column of numbers as a 1-D float array; blanks become ``nan``."""
    m = numeric_matrix(name, value)
    if m.shape[0] != 1 and m.shape[1] != 1:
        raise ArgumentTypeError(
            f"{name} must be a single row or column, got {m.shape[0]} rows by {m.shape[1]} columns", argument=name)
    return m.ravel()


def label_matrix(name: str, value) -> np.ndarray:
    """A range of category labels (numbers or text) as a 2-D object array; blanks become ``None``.

    Numbers are stored as floats (so 1 and 1.0 are one category); text is
    stripped of surrounding spaces; logical values are refused.
    """
    arr = _as_rows(name, value, "a range of category labels")
    out = np.empty(arr.shape, dtype=object)
    for k, cell in enumerate(arr.ravel()):
        if not k & 4095:
            check_time()
        r, c = divmod(k, arr.shape[1])
        if _is_blank(cell):
            out[r, c] = None
        elif isinstance(cell, (bool, np.bool_)):
            raise ArgumentTypeError(
                f"{name} must hold category labels (numbers or text); found a logical value at row {r + 1}, "
                f"column {c + 1}", argument=name)
        elif isinstance(cell, numbers.Real):
            out[r, c] = to_float(cell)
            if not math.isfinite(out[r, c]):
                raise DomainError(f"{name} holds an infinite value at row {r + 1}, column {c + 1}", argument=name)
        elif isinstance(cell, str):
            out[r, c] = cell.strip()
        else:
            raise ArgumentTypeError(
                f"{name} must hold category labels; found {show(cell)} at row {r + 1}, column {c + 1}", argument=name)
    return out


def label_vector(name: str, value) -> np.ndarray:
    """A single row or column of category labels as a 1-D object array."""
    m = label_matrix(name, value)
    if m.shape[0] != 1 and m.shape[1] != 1:
        raise ArgumentTypeError(
            f"{name} must be a single row or column, got {m.shape[0]} rows by {m.shape[1]} columns", argument=name)
    return m.ravel()


def complete_rows(name: str, matrix: np.ndarray, *, min_rows: int, min_columns: int = 1) -> np.ndarray:
    """Listwise deletion: keep the rows with no blank, and insist on enough of them."""
    if matrix.shape[1] < min_columns:
        raise InsufficientDataError(
            f"{name} needs at least {min_columns} columns, got {matrix.shape[1]}", argument=name)
    keep = ~np.isnan(matrix).any(axis=1)
    kept = matrix[keep] if not keep.all() else matrix
    if kept.shape[0] < min_rows:
        raise InsufficientDataError(
            f"{name} needs at least {min_rows} complete rows, got {kept.shape[0]}", argument=name)
    return kept


def column_index(name: str, value, n_columns: int) -> int:
    """A 1-based column number within a range, returned 0-based."""
    value = integer(name, value)
    between(name, value, 1, n_columns)
    return int(value) - 1
