"""Recalculate a saved workbook offline and write the values as the cells' cached values.

:func:`recalculate` reads every worksheet of the package (the package layer:
:mod:`~trueband.bridge.workbook.package`, :mod:`~trueband.bridge.workbook.sheet_xml`),
groups the formula cells into filled-down runs and links them
(:mod:`~trueband.bridge.formulas.compile`), evaluates what needs it in
dependency order (:mod:`~trueband.bridge.engine.evaluate`) and patches only the
evaluated cells into the sheet parts; every other part of the package is
copied unchanged.

What is evaluated
-----------------
* every formula that uses a registered function (any letter case, with or
  without the prefixes spreadsheet apps put before functions they do not
  know, such as ``_xludf.``);
* every formula that depends on one of those, transitively, across sheets
  and through defined names;
* every formula without a cached value;
* with ``all_formulas=True``, every formula.

Other formulas keep their cached values, which the evaluated ones read.
Cells on a circular reference are not iterated: they get ``#VALUE!`` and
are listed in :attr:`RecalcReport.cycles`.
"""

from __future__ import annotations

import dataclasses
import gc
import math
import time
from pathlib import Path
from typing import Callable

import numpy as np
from formulas.functions import XlError

from ..workbook import sheet_xml
from . import values_mode
from .evaluate import (EMPTY, CellProblem, VectorUnsupported, error_value, evaluate_array_formula, evaluate_cell,
                          evaluate_run)
from ..formulas.compile import (MAX_ROW, Compiled, FormulaGraph, FormulaSyntaxError, KeyTemplate, Node, Ref, Run,
                            column_letters, compile_formula, split_address)
from ..formulas.names import registered_name, uses_registered_function
from ..workbook.package import UnusableWorkbook, WorkbookPackage, open_workbook_package

__all__ = ["recalculate", "RecalcReport", "CellError", "WorkbookModel", "load_model", "evaluate_model",
           "check_workbook", "CheckFindings", "UnusableWorkbook"]


@dataclasses.dataclass(frozen=True)
class CellError:
    """A cell whose value is an error after recalculation."""

    sheet: str
    cell: str
    function: str
    code: str
    message: str

    def __iter__(self):  # unpacks as (sheet, cell, function, code, message)
        return iter((self.sheet, self.cell, self.function, self.code, self.message))


@dataclasses.dataclass
class RecalcReport:
    """What a recalculation did.

    ``evaluated`` counts the formula cells computed, ``formulas`` all formula
    cells found, ``vectorised`` the cells computed as part of a whole-column
    run; ``errors`` lists the cells whose value is an error; ``cycles`` the
    circular references, each as a list of ``Sheet!A1`` addresses.
    """

    source: Path
    output: Path | None
    formulas: int = 0
    evaluated: int = 0
    vectorised: int = 0
    errors: list[CellError] = dataclasses.field(default_factory=list)
    cycles: list[list[str]] = dataclasses.field(default_factory=list)
    seconds: float = 0.0
    values_mode: bool = False
    #: With ``values_mode``: sheets where no safe cell for the values notice was found.
    notices_missing: list[str] = dataclasses.field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.errors and not self.cycles

    def summary(self) -> str:
        where = f" → {self.output}" if self.output else ""
        missing = (f"; no free cell for the values notice on {', '.join(self.notices_missing)}"
                   if self.notices_missing else "")
        return (f"{self.evaluated} of {self.formulas} formula cells evaluated, {len(self.errors)} errors"
                + (f", {len(self.cycles)} circular references" if self.cycles else "")
                + f", {self.seconds:.2f} s{where}{missing}")


# ---------------------------------------------------------------- the cell values of a workbook

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
    if isinstance(v, sheet_xml.ErrorValue):
        return error_value(str(v))
    return v


class CellStore:
    """Cell values of every worksheet, by sheet (case-insensitive), column and row."""

    def __init__(self):
        self.sheets: dict[str, dict[int, _Column]] = {}
        self.names: dict[str, str] = {}  # casefolded → canonical
        self.max_row: dict[str, int] = {}
        self._areas: dict[tuple, np.ndarray] = {}

    def add_sheet(self, name: str, columns: dict[int, "sheet_xml.ColumnArrays | tuple[list[int], list]"]):
        """Add a sheet from the package reader's columns (:class:`~.sheet_xml.ColumnArrays`, or
        ``(rows, values)`` lists with rows ascending)."""
        cols = {}
        top = 0
        for c, entry in columns.items():
            if not isinstance(entry, sheet_xml.ColumnArrays):
                rows, values = entry
                others = {r: v for r, v in zip(rows, values) if type(v) is not float and v is not None}
                entry = sheet_xml.ColumnArrays(np.asarray(rows, dtype=np.int64),
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
        # A full-column reference reads only the rows the sheet uses.
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
        if self._areas:
            folded = name.casefold()
            for key in [k for k in self._areas if k[0] == folded and k[2] <= col <= k[4]
                        and not (k[3] < first or k[1] > last)]:
                del self._areas[key]


# ---------------------------------------------------------------- reading the workbook

@dataclasses.dataclass
class WorkbookModel:
    """A workbook read for evaluation: its cell values, formula runs and their graph."""

    package: WorkbookPackage
    store: CellStore
    runs: list[Run]
    graph: FormulaGraph
    cached_missing: set[int]  # runs with a cell that has no cached value
    unreadable: dict[tuple[str, int, int], str]  # formula cells the parser cannot read → message
    used: dict[str, tuple[int, int, int, int] | None]
    shared_groups: dict[str, set[int]]  # per sheet, the shared formulas that call registered functions
    formula_count: int = 0


# A run while reading: [column, first row, last row, key, formula text, (row, col) of the text,
# (unused), array formula range]
_COL, _FIRST, _LAST, _KEY, _TEXT, _AT, _ARRAY = 0, 1, 2, 3, 4, 5, 7


def _read_sheet(xml: bytes, strings) -> tuple[dict, list[list], tuple | None, set[int]]:
    """Cell values by column, formula runs (filled-down cells recognised by :class:`KeyTemplate`), the used
    range, and the shared-formula groups that call registered functions."""
    sheet = sheet_xml.read_column_arrays(xml, strings)
    columns = sheet.columns
    runs, registered_groups = _formula_runs(sheet)
    used = None
    if columns:
        used = (min(int(c.rows[0]) for c in columns.values()), min(columns),
                max(int(c.rows[-1]) for c in columns.values()), max(columns))
    return columns, runs, used, registered_groups


def _formula_columns(sheet) -> dict[int, tuple[list[int], list]]:
    """Formula cells by column, rows ascending: (rows, items), an item the text of an ordinary formula
    (``str``) or the :class:`~.sheet_xml.Formula` of any other; from a :class:`~.sheet_xml.SheetArrays`
    or a list of (row, col, Formula)."""
    if isinstance(sheet, sheet_xml.SheetArrays):
        blocks, others = sheet.plain_formulas, sheet.other_formulas
    else:
        blocks, others = [], sheet
    out: dict[int, tuple[list[int], list]] = {}
    if blocks:
        rows = np.concatenate([b[0] for b in blocks])
        cols = np.concatenate([b[1] for b in blocks])
        texts = [t for b in blocks for t in b[2]]
        order = np.argsort(cols, kind="stable")  # document order kept within a column
        cols_sorted = cols[order]
        starts = np.flatnonzero(np.diff(cols_sorted)) + 1
        for a, b in zip([0, *starts.tolist()], [*starts.tolist(), cols.size]):
            idx = order[a:b]
            items = [texts[i] for i in idx.tolist()]
            out[int(cols_sorted[a])] = (rows[idx].tolist(), items)
    if others:
        extra: dict[int, list] = {}
        for row, col, f in others:
            if f.kind == "normal":
                extra.setdefault(col, []).append((row, f.text or ""))
            else:
                extra.setdefault(col, []).append((row, f))
        for col, cells in extra.items():
            if col in out:
                rows_l, items = out[col]
                cells = sorted([*zip(rows_l, items), *cells], key=lambda t: t[0])
            out[col] = ([r for r, _ in cells], [x for _, x in cells])
    return out


def _formula_runs(sheet) -> tuple[list[list], set[int]]:
    """Formula runs of a sheet (:func:`_formula_columns` says what it takes), and the shared groups that
    call registered functions.

    A run is a stretch of consecutive rows of one column whose formulas have
    the same position-independent form (a filled-down column is one run).
    After each ordinary formula, the cells below that read exactly as it
    does filled down are taken in blocks (:func:`_filled_down`) instead of
    one by one. A shared formula's dependent takes the text of the last
    master of its group before it in document order (none: malformed, the
    cached value stays). Runs come in the document order of their first cells.
    """
    import bisect

    by_col = _formula_columns(sheet)
    masters: dict[int, list[tuple[int, int, str]]] = {}  # si → [(row, col, text)] in document order
    registered_groups: set[int] = set()
    for col, (rows, items) in by_col.items():
        for row, x in zip(rows, items):
            if type(x) is not str and x.kind == "shared" and x.text is not None and x.shared_index is not None:
                masters.setdefault(x.shared_index, []).append((row, col, "=" + x.text))
                if uses_registered_function("=" + x.text):
                    registered_groups.add(x.shared_index)
    for group in masters.values():
        group.sort()
    master_keys: dict[tuple[int, int], str] = {}

    def master_of(si: int, row: int, col: int):
        group = masters.get(si)
        k = -1 if not group else bisect.bisect_left(group, (row, col)) - 1
        if k < 0:
            return None
        mr, mc, text = group[k]
        key = master_keys.get((mr, mc))
        if key is None:
            key = master_keys[(mr, mc)] = KeyTemplate(text, mr, mc).key
        return text, mr, mc, key

    runs: list[list] = []
    for col in sorted(by_col):
        rows, items = by_col[col]
        template: KeyTemplate | None = None
        template_row = -1
        cur: list | None = None
        i, n = 0, len(rows)
        while i < n:
            row, x = rows[i], items[i]
            plain = type(x) is str
            kind = "normal" if plain else x.kind
            if kind == "dataTable":
                i += 1
                continue
            array_ref = None
            if kind == "shared" and x.text is None:
                master = master_of(x.shared_index, row, col)
                if master is None:
                    i += 1
                    continue
                text, mr, mc, key = master
                at = (mr, mc)
            else:
                text = "=" + (x if plain else (x.text or ""))
                if template is None or template_row != row - 1 or template.text_at(row) != text:
                    template = KeyTemplate(text, row, col)
                template_row = row
                key = template.key
                at = (row, col)
                if kind == "array":
                    array_ref = x.ref or f"{column_letters(col)}{row}"
            if cur is not None and cur[_LAST] == row - 1 and cur[_KEY] == key and array_ref is None \
                    and cur[_ARRAY] is None:
                cur[_LAST] = row
            else:
                cur = [col, row, row, key, text, at, False, array_ref]
                runs.append(cur)
            i += 1
            if kind == "normal" and i < n:
                k = _filled_down(rows, items, i, row, template)
                if k:
                    cur[_LAST] = template_row = row + k
                    i += k
    runs.sort(key=lambda r: (r[_FIRST], r[_COL]))
    return runs, registered_groups


def _filled_down(rows: list[int], items: list, i: int, row: int, template: KeyTemplate) -> int:
    """How many of ``items[i:]`` are ordinary formulas (texts) in the rows right below ``row`` that read
    as ``template`` filled down, checked a block at a time (the block doubling while all match)."""
    fmt = template.fmt[1:]  # without the "=" the template starts with
    offsets = template.offsets
    total, window, n = 0, 8, len(rows)
    while i < n:
        m = min(window, n - i)
        first = row + total + 1
        if offsets:
            expected = list(map(fmt.format, *[range(first + o, first + o + m) for o in offsets]))
        else:
            expected = [fmt] * m
        got_rows, got = rows[i:i + m], items[i:i + m]
        if got_rows != list(range(first, first + m)) or got != expected:
            k = 0
            while k < m and got_rows[k] == first + k and got[k] == expected[k]:
                k += 1
            return total + k
        total += m
        i += m
        window = min(window * 2, 1 << 16)
    return total


def _name_compiler(package: WorkbookPackage):
    """Defined names compiled once: (name upper, local sheet casefold or None) → Compiled or error text."""
    compiled: dict[tuple[str, str | None], Compiled | str] = {}
    for d in package.defined_names:
        if d.name.startswith("_xlnm."):
            continue  # print areas and the like
        try:
            compiled[(d.name.upper(), d.sheet.casefold() if d.sheet else None)] = compile_formula("=" + d.text, 1, 1)
        except FormulaSyntaxError as exc:
            compiled[(d.name.upper(), d.sheet.casefold() if d.sheet else None)] = str(exc)
    return compiled


def _substitute_names(c: Compiled, sheet: str, names: dict, depth: int = 0) -> Compiled:
    if not any(r.name is not None for r in c.refs):
        return c
    if depth > 20:
        raise FormulaSyntaxError("defined names refer to each other in a loop")
    refs: list[Ref] = []

    def sub(node: Node) -> Node:
        if node.kind == "ref":
            if node.ref.name is None:
                refs.append(node.ref)
                return node
            found = names.get((node.ref.name, (node.ref.sheet or sheet).casefold())) or \
                names.get((node.ref.name, None))
            if found is None or isinstance(found, str):
                return Node("lit", value=error_value("#NAME?"))
            inner = _substitute_names(found, sheet, names, depth + 1)
            refs.extend(inner.refs)
            return inner.tree
        if node.args:
            return dataclasses.replace(node, args=tuple(sub(a) for a in node.args))
        return node

    tree = sub(c.tree)
    functions = frozenset(n.name for n in tree.walk() if n.kind == "fn")
    return dataclasses.replace(c, tree=tree, refs=tuple(refs), functions=functions)


def load_model(package: WorkbookPackage, progress: Callable[[str, float], None] | None = None) -> WorkbookModel:
    """Read every worksheet of an opened package into a :class:`WorkbookModel`."""
    store = CellStore()
    strings = package.shared_strings
    runs: list[Run] = []
    missing: set[int] = set()
    unreadable: dict[tuple[str, int, int], str] = {}
    names = _name_compiler(package)
    compiled_cache: dict[tuple[str, str], Compiled | str] = {}
    used: dict[str, tuple | None] = {}
    shared_groups: dict[str, set[int]] = {}
    total = 0
    sheets = package.worksheets
    for k, info in enumerate(sheets):
        xml = package.read(info.part)
        try:
            columns, sheet_runs, used_range, groups = _read_sheet(xml, strings)
        except sheet_xml.SheetXmlError as exc:
            raise UnusableWorkbook(f"{package.path.name}: sheet {info.name!r}: {exc}", path=package.path) from None
        del xml
        store.add_sheet(info.name, columns)
        del columns
        used[info.name] = used_range
        shared_groups[info.name] = groups
        for r in sheet_runs:
            if r[_ARRAY] is not None:
                a, _, b = r[_ARRAY].partition(":")
                (r1, c1), (r2, c2) = split_address(a), split_address(b or a)
                total += (r2 - r1 + 1) * (c2 - c1 + 1)
            else:
                total += r[_LAST] - r[_FIRST] + 1
            ck = (info.name, r[_KEY])
            comp = compiled_cache.get(ck)
            if comp is None:
                try:
                    comp = compile_formula(r[_TEXT], *r[_AT])
                    comp = _substitute_names(comp, info.name, names)
                except FormulaSyntaxError as exc:
                    comp = str(exc)
                compiled_cache[ck] = comp
            if isinstance(comp, str):
                for row in range(r[_FIRST], r[_LAST] + 1):
                    unreadable[(info.name, row, r[_COL])] = comp
                continue
            if store.has_blank(info.name, r[_COL], r[_FIRST], r[_LAST]):  # a formula without a cached value
                missing.add(len(runs))
            runs.append(Run(info.name, r[_COL], r[_FIRST], r[_LAST], comp, array_ref=r[_ARRAY]))
        if progress:
            progress("reading", (k + 1) / len(sheets))
    graph = FormulaGraph(runs)
    return WorkbookModel(package, store, runs, graph, missing, unreadable, used, shared_groups, total)


# ---------------------------------------------------------------- evaluating

def _uses_registered(compiled: Compiled) -> bool:
    return any(registered_name(n) is not None for n in compiled.functions)


def _cell_value_for_xml(v):
    if isinstance(v, XlError):
        return sheet_xml.ErrorValue(str(v))
    if isinstance(v, np.generic):
        v = v.item()
    if v is EMPTY or v is None:
        return 0.0
    if isinstance(v, float) and not math.isfinite(v):
        return sheet_xml.ErrorValue("#NUM!")
    return v


def _function_of(compiled: Compiled) -> str:
    """The registered function a formula uses (for the error table), else its outermost function."""
    for node in compiled.tree.walk():
        if node.kind == "fn" and registered_name(node.name):
            return registered_name(node.name)
    for node in compiled.tree.walk():
        if node.kind == "fn":
            return node.name
    return ""


def _describe_error(compiled: Compiled, code: str, store, sheet, row, col) -> tuple[str, str]:
    """(function, message) for an error value with no function message: an error input, or the arithmetic."""
    for ref in compiled.refs:
        r1, c1, r2, c2 = ref.area(row, col)
        if (r2 - r1 + 1) * (c2 - c1 + 1) > 10000:
            continue
        target = ref.sheet or sheet
        for r in range(r1, r2 + 1):
            for c in range(c1, c2 + 1):
                v = store.value(target, r, c)
                if isinstance(v, XlError) and str(v) == code:
                    where = f"{target}!" if ref.sheet else ""
                    return _function_of(compiled), f"input {where}{column_letters(c)}{r} is {code}"
    return _function_of(compiled), f"the formula evaluates to {code}"


def evaluate_model(model: WorkbookModel, *, all_formulas: bool = False,
                   progress: Callable[[str, float], None] | None = None):
    """Evaluate what needs it; returns (updates by sheet {ref as bytes: value}, errors, cycles, evaluated,
    vectorised)."""
    graph, store = model.graph, model.store
    seeds = set(model.cached_missing)
    for run in model.runs:
        if all_formulas or _uses_registered(run.compiled):
            seeds.add(run.index)
    needed = graph.dependents(seeds)
    updates: dict[str, dict[bytes, object]] = {}
    errors: list[CellError] = []
    cycles: list[list[str]] = []
    evaluated = vectorised = 0
    total = sum(model.runs[i].size for i in needed) or 1
    done = 0

    def record(run: Run, row: int, col: int, value, problem: CellProblem | None):
        nonlocal evaluated
        evaluated += 1
        out = _cell_value_for_xml(value)
        updates.setdefault(run.sheet, {})[b"%s%d" % (column_letters(col).encode("ascii"), row)] = out
        if isinstance(out, sheet_xml.ErrorValue):
            if problem is not None and problem.code == str(out):
                errors.append(CellError(run.sheet, f"{column_letters(col)}{row}", problem.function, problem.code,
                                        problem.message))
            else:
                fn, msg = _describe_error(run.compiled, str(out), store, run.sheet, row, col)
                errors.append(CellError(run.sheet, f"{column_letters(col)}{row}", fn, str(out), msg))

    def one_cell(run: Run, row: int):
        res = evaluate_cell(run.compiled, store, run.sheet, row, run.col)
        store.write(run.sheet, run.col, row, _as_values([res.value]))
        record(run, row, run.col, res.value, res.problem)

    def array_run(run: Run):
        r1, c1 = split_address(run.array_ref.split(":")[0])
        r2, c2 = split_address(run.array_ref.split(":")[-1])
        values, problem = evaluate_array_formula(run.compiled, store, run.sheet, run.first, run.col,
                                                 (r2 - r1 + 1, c2 - c1 + 1))
        for j in range(values.shape[1]):
            store.write(run.sheet, c1 + j, r1, _as_values(list(values[:, j])))
            for i in range(values.shape[0]):
                record(run, r1 + i, c1 + j, values[i, j], problem)

    for comp in graph.components(needed):
        if graph.is_vector_group(comp):
            run = model.runs[comp[0]]
            if run.array_ref is not None:
                array_run(run)
            else:
                try:
                    result = evaluate_run(run, store) if run.size > 1 else None
                except VectorUnsupported:
                    result = None
                if result is None:
                    for row in range(run.first, run.last + 1):
                        one_cell(run, row)
                else:
                    store.write(run.sheet, run.col, run.first, result.values)
                    vectorised += run.size
                    values = result.values.tolist()
                    sheet_updates = updates.setdefault(run.sheet, {})
                    letters = column_letters(run.col).encode("ascii")
                    first = run.first
                    sheet_updates.update(zip([b"%s%d" % (letters, r) for r in range(first, first + run.size)],
                                             values))
                    evaluated += run.size
                    if result.values.dtype == object:
                        # error values (and anything else not a plain cell value) are recorded one by one
                        for i in [i for i, v in enumerate(values) if type(v) not in (float, str, bool)]:
                            evaluated -= 1
                            record(run, first + i, run.col, values[i], result.problems.get(i))
            done += run.size
        else:
            order, found = graph.cell_order(comp)
            on_cycle = {(r.index, row) for cyc in found for r, row in cyc}
            for cyc in found:
                addresses = [f"{r.sheet}!{r.address(row)}" for r, row in cyc]
                cycles.append(addresses)
                for r, row in cyc:
                    store.write(r.sheet, r.col, row, _as_values([error_value("#VALUE!")]))
                    record(r, row, r.col, error_value("#VALUE!"),
                           CellProblem("", "#VALUE!", "circular reference: " + " → ".join(addresses + addresses[:1])))
            for run, row in order:
                if (run.index, row) not in on_cycle:
                    if run.array_ref is not None:
                        array_run(run)
                    else:
                        one_cell(run, row)
            done += sum(model.runs[i].size for i in comp)
        if progress:
            progress("evaluating", done / total)
    # cells whose formula cannot be read
    for (sheet, row, col), message in model.unreadable.items():
        updates.setdefault(sheet, {})[b"%s%d" % (column_letters(col).encode("ascii"), row)] = \
            sheet_xml.ErrorValue("#NAME?")
        errors.append(CellError(sheet, f"{column_letters(col)}{row}", "", "#NAME?", message))
        evaluated += 1
    return updates, errors, cycles, evaluated, vectorised


def _as_values(values: list) -> np.ndarray:
    if all(type(v) is float for v in values):
        return np.array(values, dtype=float)
    out = np.empty(len(values), dtype=object)
    out[:] = values
    return out


# ---------------------------------------------------------------- writing

def _changes(model: WorkbookModel, updates: dict[str, dict[bytes, object]]):
    """The package edits: each sheet with evaluated cells patched, and no forced recalculation on open."""
    from ..workbook.save import PackageChanges

    changes = PackageChanges()
    pkg = model.package
    for info in pkg.worksheets:
        sheet_updates = updates.pop(info.name, None)
        if not sheet_updates:
            continue
        xml = pkg.read(info.part)
        patched = sheet_xml.patch_values(xml, sheet_updates, consume=True, pieces=True)
        del xml, sheet_updates
        pkg.forget(info.part)  # the package's copy of the old part is not needed any more
        groups = model.shared_groups.get(info.name)
        if groups:
            # LibreOffice recomputes shared formulas on opening; written one per cell, ours show their values
            patched = sheet_xml.unshare_formulas(b"".join(patched), pkg.shared_strings, groups)
        changes.set(pkg, info.part, patched)
    changes.keep_cached_values(pkg)
    return changes


# ---------------------------------------------------------------- the entry point

def recalculate(src, dst=None, *, in_place: bool = False, backup: bool = False, all_formulas: bool = False,
                values: bool = False, progress: Callable[[str, float], None] | None = None,
                overwrite: bool = False) -> RecalcReport:
    """Recalculate a workbook and write the values (see the module docstring).

    Parameters
    ----------
    src : path-like
        The .xlsx or .xlsm workbook.
    dst : path-like, optional
        Where to write; default ``NAME.recalculated.xlsx`` beside the input.
        Never the input itself unless ``in_place``.
    in_place : bool
        Replace the input (through a complete temporary file in the same
        folder, renamed over it only once it re-opens cleanly).
    backup : bool
        With ``in_place``, keep the original beside it.
    all_formulas : bool
        Evaluate every formula, not only those that need it.
    values : bool
        Replace the formulas that use registered functions by their values,
        keeping the originals in a hidden sheet (see ``trueband restore``).
    progress : callable, optional
        Called as ``progress(stage, fraction)``.
    overwrite : bool, optional
        Replace an existing output file; without it an existing output is refused.

    Returns
    -------
    RecalcReport

    Raises
    ------
    UnusableWorkbook
        The file cannot be processed; nothing was written.
    """
    from ..workbook.save import OutputRefused, save_workbook

    started = time.perf_counter()
    src = Path(src)
    package = open_workbook_package(src)
    # Millions of small tuples and lists live through a large recalculation and none of them form cycles;
    # the cyclic collector's passes over them would cost seconds. It runs again once the work is done.
    gc_was = gc.isenabled()
    gc.disable()
    try:
        model = load_model(package, progress)
        updates, errors, cycles, evaluated, vectorised = evaluate_model(model, all_formulas=all_formulas,
                                                                        progress=progress)
        if values:  # the inputs are read from the store before it is freed
            inputs = values_mode.frozen_inputs(model.runs, model.store, _uses_registered, _cell_value_for_xml)
        model.store = None  # the values are in ``updates`` now; free them before the sheets are patched
        model.graph = None
        changes = _changes(model, updates)
        missing: list[str] = []
        if values:
            values_mode.replace_with_values(model.package, changes, inputs=inputs,
                                            is_read=values_mode.reader_of(model.runs),
                                            unplaced=missing)  # the values are in the patched sheets
        if progress:
            progress("writing", 1.0)
        try:
            out = save_workbook(package, changes, output=dst, in_place=in_place, backup=backup, overwrite=overwrite)
        except OutputRefused as exc:
            raise UnusableWorkbook(str(exc), path=src) from None
    finally:
        package.close()
        if gc_was:
            gc.enable()
    return RecalcReport(source=src, output=out, formulas=model.formula_count, evaluated=evaluated,
                        vectorised=vectorised, errors=errors, cycles=cycles,
                        seconds=time.perf_counter() - started, values_mode=values, notices_missing=missing)


# ---------------------------------------------------------------- check (reads, writes nothing)

@dataclasses.dataclass
class CheckFindings:
    """What ``trueband check`` found: each list holds (where, what) pairs."""

    registered: list[tuple[str, str]] = dataclasses.field(default_factory=list)
    unknown: list[tuple[str, str]] = dataclasses.field(default_factory=list)
    argument_counts: list[tuple[str, str]] = dataclasses.field(default_factory=list)
    outside: list[tuple[str, str]] = dataclasses.field(default_factory=list)
    unreadable: list[tuple[str, str]] = dataclasses.field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not (self.unknown or self.argument_counts or self.outside or self.unreadable)

    def lines(self) -> list[str]:
        out = [f"trueband function cells: {len(self.registered)} group(s)"]
        out += [f"  {where}  {what}" for where, what in self.registered]
        for title, items in (("unknown functions", self.unknown), ("argument-count mistakes", self.argument_counts),
                             ("references outside the used range", self.outside),
                             ("formulas that cannot be read", self.unreadable)):
            if items:
                out.append(f"{title}: {len(items)}")
                out += [f"  {where}  {what}" for where, what in items]
        out.append("no problems found" if self.ok else "problems found (listed above)")
        return out


def _run_where(run: Run) -> str:
    first = f"{column_letters(run.col)}{run.first}"
    if run.size == 1:
        return f"{run.sheet}!{first}"
    return f"{run.sheet}!{first}:{column_letters(run.col)}{run.last}"


def check_workbook(src) -> CheckFindings:
    """Read a workbook and list registered-function cells and likely mistakes (see ``trueband check``)."""
    from ..formulas.text import call_findings

    findings = CheckFindings()
    with open_workbook_package(src) as package:
        model = load_model(package)
    for run in model.runs:
        where = _run_where(run)
        names = sorted({registered_name(n) for n in run.compiled.functions if registered_name(n)})
        if names:
            findings.registered.append((where, ", ".join(names)))
        unknown, counts = call_findings(run.compiled.tree)
        findings.unknown.extend((where, text) for text in unknown)
        findings.argument_counts.extend((where, text) for text in counts)
        for ref in run.compiled.refs:
            target = ref.sheet or run.sheet
            canonical = model.store.canonical(target)
            if canonical is None:
                findings.outside.append((where, f"refers to a sheet that does not exist: {target!r}"))
                continue
            full = (ref.r1_abs and ref.r2_abs and ref.r1 == 1 and ref.r2 == MAX_ROW) or \
                (ref.c1_abs and ref.c2_abs and ref.c1 == 1 and ref.c2 == 16384)
            if full:
                continue
            a1 = ref.area(run.first, run.col)
            a2 = ref.area(run.last, run.col)
            area = (min(a1[0], a2[0]), min(a1[1], a2[1]), max(a1[2], a2[2]), max(a1[3], a2[3]))
            used = model.used.get(canonical)
            if used is None or area[0] < used[0] or area[1] < used[1] or area[2] > used[2] or area[3] > used[3]:
                span = "empty sheet" if used is None else \
                    f"{column_letters(used[1])}{used[0]}:{column_letters(used[3])}{used[2]}"
                text = (f"{column_letters(area[1])}{area[0]}" if area[:2] == area[2:] else
                        f"{column_letters(area[1])}{area[0]}:{column_letters(area[3])}{area[2]}")
                findings.outside.append((where, f"reads {target}!{text}, outside the used range {span}"))
    for (sheet, row, col), message in model.unreadable.items():
        findings.unreadable.append((f"{sheet}!{column_letters(col)}{row}", message))
    return findings
