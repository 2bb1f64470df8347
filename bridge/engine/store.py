"""The cell values of a workbook while it is evaluated, by sheet, column and row.

:class:`CellStore` keeps each column as a dense float array with a kind per
row (blank, number, other) and the other values (text, logicals, errors) by
row, so a filled-down run reads a column of numbers as one slice
(:meth:`~CellStore.column`), an aggregate reads a number-only range without
a Python step per cell (:meth:`~CellStore.numbers`), and evaluated values are
written back a run at a time (:meth:`~CellStore.write`).
"""

from __future__ import annotations

import numpy as np

from ..workbook import sheet_columns, sheet_data
from .values import EMPTY, error_value

__all__ = ["CellStore", "PAD_CELLS"]

#: A reference of at most this many cells is read to its full area (blank cells below the sheet's last used
#: row included); a larger one (``A:A``) is cut at the last used row (see :meth:`CellStore.area`).
PAD_CELLS = 1 << 18

_KIND_BLANK, _KIND_NUMBER, _KIND_OTHER = 0, 1, 2


class _Column:
    """One column of a sheet: dense float values and kinds by row number; other values by row."""

    __slots__ = ("num", "kind", "other")

    def __init__(self, size: int):
        self.num = np.full(size, np.nan)
        self.kind = np.zeros(size, dtype=np.int8)
        self.other: dict[int, object] = {}

    def grow(self, size: int):
        if size > self.num.size:
            size = max(size, int(self.num.size * 1.5) + 16)
            num = np.full(size, np.nan)
            num[:self.num.size] = self.num
            kind = np.zeros(size, dtype=np.int8)
            kind[:self.kind.size] = self.kind
            self.num, self.kind = num, kind


def _engine_value(v):
    """A reader value (float, str, bool, ErrorValue, None) as the evaluator's value."""
    if v is None:
        return EMPTY
    if isinstance(v, sheet_data.ErrorValue):
        return error_value(str(v))
    return v


class CellStore:
    """Cell values of every worksheet, by sheet (case-insensitive), column and row (see the module docstring)."""

    def __init__(self):
        self.sheets: dict[str, dict[int, _Column]] = {}
        self.names: dict[str, str] = {}  # casefolded → canonical
        self.max_row: dict[str, int] = {}
        self._areas: dict[tuple, np.ndarray] = {}
        self._dense: dict[tuple, np.ndarray | None] = {}

    def add_sheet(self, name: str, columns: dict[int, "sheet_columns.ColumnArrays | tuple[list[int], list]"]):
        """Add a sheet from the package reader's columns (:class:`~trueband.bridge.workbook.sheet_columns.ColumnArrays`, or
        ``(rows, values)`` lists with rows ascending)."""
        cols = {}
        top = 0
        for c, entry in columns.items():
            if not isinstance(entry, sheet_columns.ColumnArrays):
                rows, values = entry
                others = {r: v for r, v in zip(rows, values) if type(v) is not float and v is not None}
                entry = sheet_columns.ColumnArrays(np.asarray(rows, dtype=np.int64),
                                               np.array([v if type(v) is float else np.nan for v in values],
                                                        dtype=float), others)
            if not entry.rows.size:
                continue
            size = int(entry.rows[-1]) + 1
            col = _Column(size)
            number = ~np.isnan(entry.numbers)  # NaN: text and the like (in others) or a formula without a value
            col.num[entry.rows[number]] = entry.numbers[number]
            col.kind[entry.rows[number]] = _KIND_NUMBER
            for row, v in entry.others.items():
                col.other[row] = _engine_value(v)
                col.kind[row] = _KIND_OTHER
            cols[c] = col
            top = max(top, size - 1)
        self.sheets[name] = cols
        self.names[name.casefold()] = name
        self.max_row[name] = top

    def _sheet(self, sheet: str):
        name = self.names.get(sheet.casefold())
        return None if name is None else self.sheets[name]

    def has_blank(self, sheet: str, col: int, r1: int, r2: int) -> bool:
        """Whether any of rows r1..r2 of a column is blank (for formula cells: has no cached value)."""
        c = self._sheet(sheet).get(col)
        if c is None or r2 >= c.kind.size:
            return True
        return bool((c.kind[r1:r2 + 1] == _KIND_BLANK).any())

    def canonical(self, sheet: str) -> str | None:
        return self.names.get(sheet.casefold())

    def value(self, sheet: str, row: int, col: int):
        cols = self._sheet(sheet)
        if cols is None:
            return error_value("#REF!")
        c = cols.get(col)
        if c is None or row >= c.kind.size:
            return EMPTY
        k = c.kind[row]
        if k == _KIND_NUMBER:
            return float(c.num[row])
        if k == _KIND_OTHER:
            return c.other[row]
        return EMPTY

    def column(self, sheet: str, col: int, r1: int, r2: int) -> np.ndarray:
        n = r2 - r1 + 1
        cols = self._sheet(sheet)
        if cols is None:
            out = np.empty(n, dtype=object)
            out[:] = [error_value("#REF!")] * n
            return out
        c = cols.get(col)
        if c is None:
            out = np.empty(n, dtype=object)
            out[:] = [EMPTY] * n
            return out
        size = c.kind.size
        stop = min(r2 + 1, size)
        kind = c.kind[r1:stop] if r1 < size else c.kind[:0]
        if kind.size == n and (kind == _KIND_NUMBER).all():
            return c.num[r1:stop].copy()
        out = np.empty(n, dtype=object)
        out[:] = [EMPTY] * n
        if kind.size:
            numbers = kind == _KIND_NUMBER
            out[:kind.size][numbers] = c.num[r1:stop][numbers].tolist()
            for i in np.flatnonzero(kind == _KIND_OTHER):
                out[i] = c.other[r1 + int(i)]
        return out

    def numbers(self, sheet: str, r1: int, c1: int, r2: int, c2: int) -> np.ndarray | None:
        """The numbers of a range in reading order (row by row), blanks left out; None when a cell of it
        holds text, a logical or an error, or the sheet does not exist (the caller then asks the library)."""
        name = self.canonical(sheet)
        if name is None:
            return None
        r2 = min(r2, max(self.max_row[name], r1))
        cols = self.sheets[name]
        parts, kinds = [], []
        for c in range(c1, c2 + 1):
            col = cols.get(c)
            stop = 0 if col is None else min(r2 + 1, col.kind.size)
            if stop <= r1:
                if c2 - c1 > 1000:
                    continue  # a blank column of a wide range adds nothing
                parts.append(np.full(r2 - r1 + 1, np.nan))
                kinds.append(np.zeros(r2 - r1 + 1, dtype=np.int8))
                continue
            num, kind = col.num[r1:stop], col.kind[r1:stop]
            if stop <= r2:
                num = np.concatenate([num, np.full(r2 + 1 - stop, np.nan)])
                kind = np.concatenate([kind, np.zeros(r2 + 1 - stop, dtype=np.int8)])
            parts.append(num)
            kinds.append(kind)
        if not parts:
            return np.empty(0)
        if len(parts) == 1:
            num, kind = parts[0], kinds[0]
        else:
            num, kind = np.column_stack(parts).ravel(), np.column_stack(kinds).ravel()
        if (kind == _KIND_OTHER).any():
            return None
        return num[kind == _KIND_NUMBER]

    def dense(self, sheet: str, r1: int, c1: int, r2: int, c2: int):
        """A range of numbers, texts and blanks as (a (rows, columns) float array, NaN for a blank or a text; the
        texts as a list of (row index, column index, text)), read down to the last row the sheet uses and kept
        until a write into it; None when a cell of it holds a logical or an error, or the sheet does not exist."""
        key = (sheet.casefold(), r1, c1, r2, c2)
        if key in self._dense:
            return self._dense[key]
        name = self.canonical(sheet)
        out = None
        if name is not None:
            r2 = min(r2, max(self.max_row[name], r1))
            num, texts = np.full((r2 - r1 + 1, c2 - c1 + 1), np.nan), []
            out = (num, texts)
            for c, col in self.sheets[name].items():
                if c1 <= c <= c2 and r1 < col.kind.size:
                    stop = min(r2 + 1, col.kind.size)
                    kind = col.kind[r1:stop]
                    num[:stop - r1, c - c1] = np.where(kind == _KIND_NUMBER, col.num[r1:stop], np.nan)
                    for i in np.flatnonzero(kind == _KIND_OTHER).tolist():
                        v = col.other[r1 + i]
                        if type(v) is not str:
                            out = None
                            break
                        texts.append((i, c - c1, v))
                    if out is None:
                        break
        self._dense[key] = out
        return out

    def row_block(self, sheet: str, r1: int, r2: int, c1: int, c2: int):
        """(numbers NaN elsewhere (rows, cols), rows that are all numbers, row i in the engine's form)."""
        n, k = r2 - r1 + 1, c2 - c1 + 1
        num = np.full((n, k), np.nan)
        clean = np.ones(n, dtype=bool)
        cols = self._sheet(sheet)
        if cols is None:
            clean[:] = False
        for j in range(k):
            c = None if cols is None else cols.get(c1 + j)
            if c is None:
                clean[:] = False
                continue
            stop = min(r2 + 1, c.kind.size)
            if r1 >= stop:
                clean[:] = False
                continue
            m = stop - r1
            num[:m, j] = c.num[r1:stop]
            clean[:m] &= c.kind[r1:stop] == _KIND_NUMBER
            clean[m:] = False

        def cells(i: int, sheet=sheet, r=r1, c1=c1, c2=c2) -> np.ndarray:
            return self.area(sheet, r + i, c1, r + i, c2, cache=False)

        return num, clean, cells

    def area(self, sheet: str, r1: int, c1: int, r2: int, c2: int, *, cache: bool = True) -> np.ndarray:
        key = (sheet.casefold(), r1, c1, r2, c2)
        if cache and key in self._areas:
            return self._areas[key]
        name = self.canonical(sheet)
        if name is None:
            out = np.empty((1, 1), dtype=object)
            out[0, 0] = error_value("#REF!")
            return out
        # A large reference (a full column) reads only the rows the sheet uses; a bounded one of at most
        # PAD_CELLS cells is read whole, its rows below the last used one blank, as the apps read it (so INDEX
        # reaches them and ranges of one size on sheets of different heights keep one size).
        if (r2 - r1 + 1) * (c2 - c1 + 1) > PAD_CELLS:
            r2 = min(r2, max(self.max_row[name], r1))
        cols = self.sheets[name]
        used = [c for c in cols if c1 <= c <= c2]
        c2 = min(c2, max(used)) if used and c2 - c1 > 1000 else c2
        out = np.empty((r2 - r1 + 1, c2 - c1 + 1), dtype=object)
        out[:] = EMPTY
        for c in used:
            if c > c2:
                continue
            out[:, c - c1] = self.column(name, c, r1, r2)
        if cache:
            self._areas[key] = out
        return out

    def write(self, sheet: str, col: int, first: int, values: np.ndarray):
        name = self.canonical(sheet)
        cols = self.sheets[name]
        c = cols.get(col)
        last = first + len(values) - 1
        if c is None:
            c = cols[col] = _Column(last + 1)
        c.grow(last + 1)
        if values.dtype.kind == "f":
            c.num[first:last + 1] = values
            c.kind[first:last + 1] = _KIND_NUMBER
            for r in [r for r in c.other if first <= r <= last]:
                del c.other[r]
        else:
            for i, v in enumerate(values.tolist()):
                r = first + i
                if type(v) is float:
                    c.num[r] = v
                    c.kind[r] = _KIND_NUMBER
                    c.other.pop(r, None)
                else:
                    c.num[r] = np.nan
                    c.kind[r] = _KIND_OTHER
                    c.other[r] = v
        self.max_row[name] = max(self.max_row[name], last)
        if self._dense:
            folded = name.casefold()
            for key in [k for k in self._dense if k[0] == folded and k[2] <= col <= k[4]
                        and not (k[3] < first or k[1] > last)]:
                del self._dense[key]
        if self._areas:
            folded = name.casefold()
            for key in [k for k in self._areas if k[0] == folded and k[2] <= col <= k[4]
                        and not (k[3] < first or k[1] > last)]:
                del self._areas[key]
