"""The column-array reader: every cell of a worksheet part, column by column, in numpy arrays.

=============================  ==================================================================
:func:`read_column_arrays`     the fast bulk form of :func:`~.sheet_read.iter_cells` (:class:`SheetArrays`)
:func:`read_columns`           the same as lists (:class:`SheetColumns`)
=============================  ==================================================================

What a column-wise evaluator needs: the numbers of a column as one float64
array, the rest (text, logical values, errors) beside it, the formulas in
blocks. The readers agree with :func:`~.sheet_read.iter_cells` cell for cell
(tests check it on random sheets).
"""

from __future__ import annotations

import bisect
import dataclasses
import functools
import gc
import itertools
import re
from typing import Sequence

import numpy as np

from .cells import column_index, column_letters
from .sheet_data import CELL_ATTRIBUTES, CELL_WITHOUT_R, FORMULA_ELEMENT, Formula, SheetXmlError, chunks
from .sheet_read import cell_content, cell_patterns, iter_cells, plain_value, style_and_type
from .xml_form import (RewrittenPart, locate_cell_data, may_be_irregular, rewrite_in_regular_form,
                       why_irregular_around_cells)
from .xml_text import decode_text, unescape_xml

__all__ = ["read_columns", "read_column_arrays", "SheetColumns", "SheetArrays", "ColumnArrays"]

_repeat = itertools.repeat

@dataclasses.dataclass
class SheetColumns:
    """A worksheet's cells column by column (what a column-wise evaluator needs), from :func:`read_columns`.

    ``columns`` maps a column index (A = 1) to ``(rows, values)``: parallel
    lists, rows ascending, of every cell that holds a value or a formula
    (a formula cell without a cached value has ``None``). ``formulas`` lists
    ``(row, col, Formula)`` in document order. ``styles`` maps ``(row, col)``
    to the style index of the cells that have one (empty styled cells
    included).
    """

    columns: dict[int, tuple[list[int], list[object]]]
    formulas: list[tuple[int, int, Formula]]
    styles: dict[tuple[int, int], int]

    def value(self, row: int, col: int):
        """The value of one cell (None when it is empty or not there)."""
        entry = self.columns.get(col)
        if entry is None:
            return None
        i = bisect.bisect_left(entry[0], row)
        return entry[1][i] if i < len(entry[0]) and entry[0][i] == row else None


def read_columns(xml: bytes, shared_strings: Sequence[str] = ()) -> SheetColumns:
    """Every cell of a worksheet part, column by column, as lists (see :func:`read_column_arrays`)."""
    arrays = read_column_arrays(xml, shared_strings)
    columns: dict[int, tuple[list[int], list[object]]] = {}
    for c, col in arrays.columns.items():
        values: list[object] = col.numbers.tolist()
        for i in np.flatnonzero(np.isnan(col.numbers)).tolist():
            values[i] = None
        if col.others:
            where = np.searchsorted(col.rows, np.fromiter(col.others, np.int64, len(col.others))).tolist()
            for i, v in zip(where, col.others.values()):
                values[i] = v
        columns[c] = (col.rows.tolist(), values)
    return SheetColumns(columns, arrays.formulas, arrays.styles)


@dataclasses.dataclass
class ColumnArrays:
    """One column of :func:`read_column_arrays`: ``rows`` (int64, ascending) of every cell that holds a
    value or a formula; ``numbers`` (float64, parallel to ``rows``) the value of each number cell and NaN
    for the others; ``others`` row → value of the cells that hold text, a logical or an
    :class:`ErrorValue`. A row with NaN that is not in ``others`` is a formula cell without a cached
    value (spreadsheet files cannot store NaN as a number)."""

    rows: np.ndarray
    numbers: np.ndarray
    others: dict[int, object]


@dataclasses.dataclass
class SheetArrays:
    """A worksheet's cells column by column in arrays, from :func:`read_column_arrays`.

    ``columns`` as :class:`ColumnArrays`; ``styles`` as in :class:`SheetColumns`.
    The formulas come in two parts: ``plain_formulas``, the ordinary
    formulas (``<f>text</f>``, by far the commonest) as (rows, columns,
    texts) blocks, rows and columns in int arrays and the texts in a list;
    and ``other_formulas``, every other formula cell (shared, array, data
    table) as (row, col, :class:`Formula`). :attr:`formulas` puts them
    together in document order.
    """

    columns: dict[int, ColumnArrays]
    plain_formulas: list[tuple[np.ndarray, np.ndarray, list[str]]]
    other_formulas: list[tuple[int, int, Formula]]
    styles: dict[tuple[int, int], int]

    @property
    def formulas(self) -> list[tuple[int, int, Formula]]:
        """Every formula cell as (row, col, :class:`Formula`), in document order."""
        cells = list(self.other_formulas)
        for rows, cols, texts in self.plain_formulas:
            cells.extend(zip(rows.tolist(), cols.tolist(),
                             map(_NEW_NORMAL, zip(texts, _repeat("normal"), _repeat(None), _repeat(None),
                                                  _repeat(False), _repeat(b"")))))
        cells.sort(key=lambda t: (t[0], t[1]))
        return cells


#: A cell holding only a value, in the form spreadsheet apps and libraries write (the reference first,
#: then an optional style and type): letters, digits, style, type, value text.
_PLAIN_CELL = re.compile(rb'<c r="([A-Z]{1,3})([0-9]+)"(?: s="([0-9]+)")?(?: t="([a-zA-Z]+)")?><v>([^<]+)</v></c>')
#: A formula cell in the regular form: letters, digits, attributes, formula element, value text.
_FORMULA_CELL = re.compile(rb'<c r="([A-Z]{1,3})([0-9]+)"' + CELL_ATTRIBUTES + rb">" + FORMULA_ELEMENT
                           + rb"(?:<v>([^<]*)</v>)?</c>")

#: A cell holding one plain inline string, as trueband's long sheets write text: letters, digits, style, text.
_INLINE_CELL = re.compile(rb'<c r="([A-Z]{1,3})([0-9]+)"(?: s="([0-9]+)")? t="inlineStr"><is><t(?: xml:space="preserve")?>'
                          rb"([^<]*)</t></is></c>")
#: Whether :func:`read_column_arrays` reads :data:`_INLINE_CELL` cells in a pass of their own (False: one by
#: one with the other cells, as before; the benchmarks' reference run).
INLINE_PASS = True

_NEW_NORMAL = functools.partial(tuple.__new__, Formula)
_NAN = float("nan")


def _lookup(items: list, convert):
    """``convert`` as a dict lookup when ``items`` repeat a lot (row numbers, 0/1 scores, column letters)."""
    distinct = set(items)
    if len(distinct) * 4 > len(items):
        return convert
    return {x: convert(x) for x in distinct}.__getitem__


class _Collector:
    """Cells gathered piece by piece: numbers in arrays, everything else as (row, col, value)."""

    def __init__(self, strings: Sequence[str]):
        self.strings = strings
        self.cols: list[np.ndarray] = []
        self.rows: list[np.ndarray] = []
        self.nums: list[np.ndarray] = []
        self.others: list[tuple[int, int, object]] = []
        self.plain_formulas: list[tuple[np.ndarray, np.ndarray, list[str]]] = []
        self.formulas: list[tuple[int, int, Formula]] = []  # the other formula cells
        self.styles: dict[tuple[int, int], int] = {}
        self.single: tuple[list, list, list] = ([], [], [])  # number cells decoded one by one

    def numbers(self, cols, rows, nums):
        self.cols.append(np.asarray(cols, dtype=np.int16))
        self.rows.append(np.asarray(rows, dtype=np.int64))
        self.nums.append(np.asarray(nums, dtype=float))

    def plain(self, parts: list) -> None:
        """Pass 1: the plain value cells of a piece (its split by :data:`_PLAIN_CELL`)."""
        letters, digits, styles, types, raws = parts[1::6], parts[2::6], parts[3::6], parts[4::6], parts[5::6]
        n = len(letters)
        cols = cols_all = np.fromiter(map(_lookup(letters, column_index), letters), np.int16, n)
        rows = np.fromiter(map(_lookup(digits, int), digits), np.int64, n)
        typed = [i for i, t in enumerate(types) if t is not None and t != b"n"] if any(types) else []
        if typed:
            raws = list(raws)
            for i in typed:
                ref = (letters[i] + digits[i]).decode("ascii")
                value = plain_value(raws[i], types[i].decode("ascii"), ref, self.strings)
                self.others.append((int(digits[i]), int(cols[i]), value))
                raws[i] = b"nan"
            keep = np.ones(n, dtype=bool)
            keep[typed] = False
        try:
            nums = np.fromiter(map(_lookup(raws, float), raws), float, n)
        except ValueError:
            bad = next(i for i, x in enumerate(raws) if not _is_number(x))
            raise SheetXmlError(f"cell {(letters[bad] + digits[bad]).decode('ascii')} holds {raws[bad][:40]!r}, "
                                f"which is not a number") from None
        if typed:
            cols, rows, nums = cols[keep], rows[keep], nums[keep]
        self.numbers(cols, rows, nums)
        if any(styles):
            for i, s in enumerate(styles):
                if s and s != b"0" and int(s):  # s="00" is the default style too, as iter_cells reads it
                    self.styles[(int(digits[i]), int(cols_all[i]))] = int(s)

    def formula_cells(self, parts: list) -> None:
        """Pass 2: the formula cells of a piece (its split by :data:`_FORMULA_CELL`)."""
        letters, digits, attrs_l, f_l, raws = parts[1::6], parts[2::6], parts[3::6], parts[4::6], parts[5::6]
        n = len(letters)
        cols = list(map(_lookup(letters, column_index), letters))
        rows = list(map(int, digits))
        joined = b"\x00".join(f_l)  # formula text holds neither "<" nor NUL, so the elements split back apart
        if b"<f " in joined or b"_x" in joined or b"\r" in joined:
            plain_rows, plain_cols, texts = [], [], []
            for row, col, f in zip(rows, cols, f_l):
                if f[:3] == b"<f>":
                    plain_rows.append(row)
                    plain_cols.append(col)
                    texts.append(decode_text(f[3:-4]))
                else:
                    self.formulas.append((row, col, self._formula(f)))
        else:  # all ordinary <f>text</f>: decoded in one go
            text = joined[3:-4]
            texts = (text.decode("utf-8") if b"&" not in text else unescape_xml(text)).split("</f>\x00<f>")
            plain_rows, plain_cols = rows, cols
        del joined
        if texts:
            self.plain_formulas.append((np.asarray(plain_rows, dtype=np.int64), np.asarray(plain_cols, dtype=np.int16),
                                        texts))
        if not any(attrs_l) and not any(raws):  # no cached values and no attributes: the cells are there, empty
            self.numbers(cols, rows, np.full(n, np.nan))
            return
        num_cols, num_rows, nums = [], [], []
        strings = self.strings
        for i in range(n):
            typ = "n"
            attrs = attrs_l[i]
            if attrs:
                style, typ = style_and_type(attrs)
                if style:
                    self.styles[(rows[i], cols[i])] = style
            raw = raws[i]
            value = plain_value(raw, typ, (letters[i] + digits[i]).decode("ascii"), strings) if raw else _NAN
            if type(value) is float:  # a number, or NaN for a formula without a cached value
                num_cols.append(cols[i])
                num_rows.append(rows[i])
                nums.append(value)
            else:
                self.others.append((rows[i], cols[i], value))
        if num_cols:
            self.numbers(num_cols, num_rows, nums)

    def inline_cells(self, parts: list) -> None:
        """Pass 3: the plain inline-string cells of a piece (its split by :data:`_INLINE_CELL`), decoded as
        :func:`iter_cells` decodes a single text run."""
        letters, digits, styles, texts = parts[1::5], parts[2::5], parts[3::5], parts[4::5]
        cols = list(map(_lookup(letters, column_index), letters))
        for col, digit, style, text in zip(cols, digits, styles, texts):
            row = int(digit)
            if style and int(style):  # s="0" (or "00") is the default style: not listed, as iter_cells does
                self.styles[(row, col)] = int(style)
            self.others.append((row, col, unescape_xml(text)))

    @staticmethod
    def _formula(f: bytes) -> Formula:
        """The :class:`Formula` of one ``<f>`` element, decoded by the cell reader's own code."""
        return cell_content(f, "n", "", (), *cell_patterns(b"")[1:])[1]

    def other_cells(self, rest: bytes) -> None:
        """Pass 4: every other cell of a piece, decoded one by one as :func:`iter_cells` does."""
        self.add_cells(iter_cells(b"<worksheet><sheetData>" + rest + b"</sheetData></worksheet>", self.strings))

    def add_cells(self, cells) -> None:
        for cell in cells:
            if cell.style:
                self.styles[(cell.row, cell.col)] = cell.style
            if cell.formula is not None:
                self.formulas.append((cell.row, cell.col, cell.formula))
            value = cell.value
            if value is None:
                if cell.formula is None:
                    continue
                value = _NAN  # a formula without a cached value
            if type(value) is float:
                self.single[0].append(cell.col)
                self.single[1].append(cell.row)
                self.single[2].append(value)
            else:
                self.others.append((cell.row, cell.col, cell.value))
        if len(self.single[0]) > 100_000:
            self.numbers(*self.single)
            self.single = ([], [], [])

    def result(self) -> SheetArrays:
        if self.single[0]:
            self.numbers(*self.single)
            self.single = ([], [], [])
        others = self.others
        if others:
            self.numbers([c for _, c, _ in others], [r for r, _, _ in others], np.full(len(others), np.nan))
        if not self.cols:
            return SheetArrays({}, self.plain_formulas, self.formulas, self.styles)
        cols = np.concatenate(self.cols)
        rows = np.concatenate(self.rows)
        nums = np.concatenate(self.nums)
        self.cols = self.rows = self.nums = []
        order = np.argsort(cols, kind="stable")  # a radix sort for 16-bit keys; document order kept within
        cols, rows, nums = cols[order], rows[order], nums[order]
        del order
        by_col: dict[int, dict[int, object]] = {}
        for r, c, v in others:
            by_col.setdefault(c, {})[r] = v
        starts = np.flatnonzero(np.diff(cols)) + 1
        columns: dict[int, ColumnArrays] = {}
        for a, b in zip(np.concatenate([[0], starts]).tolist(), np.concatenate([starts, [cols.size]]).tolist()):
            r, x = rows[a:b], nums[a:b]
            c = int(cols[a])
            if r.size > 1 and not (r[1:] > r[:-1]).all():  # cells of several passes: put them in row order
                k = np.argsort(r, kind="stable")
                r, x = r[k], x[k]
                _refuse_a_cell_listed_twice(r, c)
            columns[c] = ColumnArrays(r, x, by_col.get(c, {}))
        return SheetArrays(columns, self.plain_formulas, self.formulas, self.styles)


def read_column_arrays(xml: bytes, shared_strings: Sequence[str] = ()) -> SheetArrays:
    """Every cell of a worksheet part, column by column in arrays: the fast bulk form of :func:`iter_cells`.

    Each piece of about :data:`~.sheet_data.CHUNK_BYTES` of ``<sheetData>`` is read in
    four passes: the plain value cells (the bulk of a data sheet) are split
    off by one regular expression and converted a piece at a time with
    numpy; formula cells in the regular form by a second, with one short
    step per cell; cells of one plain inline string (the text of the
    study's long sheets) by a third; what is left (rich text, cells in
    irregular forms) goes through the same decoding as :func:`iter_cells`, so the readers
    always agree (tests check it on random sheets). A sheet with cells
    written without ``r`` attributes is read by the row-aware reader.
    The cyclic garbage collector is paused meanwhile: none of the objects
    made form cycles.
    """
    gc_was = gc.isenabled()
    gc.disable()
    try:
        xml, (start, end, prefix) = locate_cell_data(xml)
        if type(xml) is not RewrittenPart and why_irregular_around_cells(xml, start, end) is not None:
            return read_column_arrays(rewrite_in_regular_form(xml), shared_strings)
        got = _Collector(shared_strings)
        if start == end:
            return got.result()
        if prefix:
            return _arrays_from_cells(iter_cells(xml, shared_strings))
        for cs, ce in chunks(xml, start, end, prefix):
            parts = _PLAIN_CELL.split(xml[cs:ce])
            if len(parts) > 1:
                got.plain(parts)
            rest = b"".join(parts[0::6])
            del parts
            parts = _FORMULA_CELL.split(rest)
            if len(parts) > 1:
                got.formula_cells(parts)
                rest = b"".join(parts[0::6])
            del parts
            if type(xml) is not RewrittenPart and may_be_irregular(rest):  # what the fast patterns left: irregular?
                return read_column_arrays(rewrite_in_regular_form(xml), shared_strings)
            if b"<c" in rest:
                if CELL_WITHOUT_R.search(rest):
                    return _arrays_from_cells(iter_cells(xml, shared_strings))
                if INLINE_PASS and b"inlineStr" in rest:  # after the checks above, which see these cells too
                    parts = _INLINE_CELL.split(rest)
                    if len(parts) > 1:
                        got.inline_cells(parts)
                        rest = b"".join(parts[0::5])
                    del parts
                got.other_cells(rest)
        return got.result()
    finally:
        if gc_was:
            gc.enable()


def _refuse_a_cell_listed_twice(rows: np.ndarray, col: int) -> None:
    """A sheet that lists a cell twice (``rows`` sorted) is damaged: which value would count is not defined."""
    same = np.flatnonzero(rows[1:] == rows[:-1])
    if same.size:
        raise SheetXmlError(f"cell {column_letters(col)}{int(rows[same[0]])} is listed twice in the sheet, so its "
                            f"value is not defined; open and save the file in a spreadsheet app, which repairs it")


def _arrays_from_cells(cells) -> SheetArrays:
    got = _Collector(())
    got.add_cells(cells)
    return got.result()


def _is_number(raw: bytes) -> bool:
    try:
        float(raw)
        return True
    except ValueError:
        return False
