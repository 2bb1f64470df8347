"""A workbook read for evaluation (:class:`WorkbookModel`): its cell values, formula runs and their graph.

:func:`load_model` reads every worksheet of an opened package with the
package layer's column reader, keeps the values in a :class:`~.store.CellStore`,
groups the formula cells into filled-down runs (a shared formula's
dependents take their master's text), compiles each distinct formula once
(:mod:`~trueband.bridge.formulas.compile`), puts defined names in place of
their references, and links the runs (:class:`~.graph.FormulaGraph`).
"""

from __future__ import annotations

import bisect
import dataclasses
from typing import Callable

import numpy as np

from ..formulas.compile import Compiled, FormulaSyntaxError, KeyTemplate, Node, Ref, compile_formula
from ..formulas.names import uses_registered_function
from ..workbook import sheet_columns, sheet_data
from ..workbook.package import UnusableWorkbook, WorkbookPackage
from ..workbook.cells import column_letters, split_ref
from .graph import FormulaGraph, Run
from .store import CellStore

__all__ = ["WorkbookModel", "load_model"]


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
    #: The formula text of each unreadable cell (the key of :attr:`unreadable`).
    unreadable_texts: dict[tuple[str, int, int], str] = dataclasses.field(default_factory=dict)


# A run while reading: [column, first row, last row, key, formula text, (row, col) of the text,
# array formula range]
_COL, _FIRST, _LAST, _KEY, _TEXT, _AT, _ARRAY = 0, 1, 2, 3, 4, 5, 6


def _read_sheet(xml: bytes, strings) -> tuple[dict, list[list], tuple | None, set[int]]:
    """Cell values by column, formula runs (filled-down cells recognised by :class:`KeyTemplate`), the used
    range, and the shared-formula groups that call registered functions."""
    sheet = sheet_columns.read_column_arrays(xml, strings)
    columns = sheet.columns
    runs, registered_groups = _formula_runs(sheet)
    used = None
    if columns:
        used = (min(int(c.rows[0]) for c in columns.values()), min(columns),
                max(int(c.rows[-1]) for c in columns.values()), max(columns))
    return columns, runs, used, registered_groups


def _formula_columns(sheet) -> dict[int, tuple[list[int], list]]:
    """Formula cells by column, rows ascending: (rows, items), an item the text of an ordinary formula
    (``str``) or the :class:`~trueband.bridge.workbook.sheet_data.Formula` of any other; from a :class:`~trueband.bridge.workbook.sheet_columns.SheetArrays`
    or a list of (row, col, Formula)."""
    if isinstance(sheet, sheet_columns.SheetArrays):
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


class _SharedMasters:
    """The masters of a sheet's shared formulas: which one a dependent takes its text from, and which
    groups call registered functions."""

    def __init__(self, by_col: dict[int, tuple[list[int], list]]):
        self.groups: dict[int, list[tuple[int, int, str]]] = {}  # si → [(row, col, text)] in document order
        self.registered: set[int] = set()
        for col, (rows, items) in by_col.items():
            for row, x in zip(rows, items):
                if type(x) is not str and x.kind == "shared" and x.text is not None and x.shared_index is not None:
                    self.groups.setdefault(x.shared_index, []).append((row, col, "=" + x.text))
                    if uses_registered_function("=" + x.text):
                        self.registered.add(x.shared_index)
        for group in self.groups.values():
            group.sort()
        self._keys: dict[tuple[int, int], str] = {}

    def master_of(self, si: int, row: int, col: int) -> tuple[str, int, int, str] | None:
        """(text, row, column, key) of the last master of group ``si`` before (row, col), or None."""
        group = self.groups.get(si)
        k = -1 if not group else bisect.bisect_left(group, (row, col)) - 1
        if k < 0:
            return None
        mr, mc, text = group[k]
        key = self._keys.get((mr, mc))
        if key is None:
            key = self._keys[(mr, mc)] = KeyTemplate(text, mr, mc).key
        return text, mr, mc, key


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
    by_col = _formula_columns(sheet)
    masters = _SharedMasters(by_col)
    runs: list[list] = []
    for col in sorted(by_col):
        rows, items = by_col[col]
        _column_runs(col, rows, items, masters, runs)
    runs.sort(key=lambda r: (r[_FIRST], r[_COL]))
    return runs, masters.registered


def _column_runs(col: int, rows: list[int], items: list, masters: _SharedMasters, runs: list[list]) -> None:
    """Append the runs of one column's formula cells (rows ascending) to ``runs``."""
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
            master = masters.master_of(x.shared_index, row, col)
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
            cur = [col, row, row, key, text, at, array_ref]
            runs.append(cur)
        i += 1
        if kind == "normal" and i < n:
            k = _filled_down(rows, items, i, row, template)
            if k:
                cur[_LAST] = template_row = row + k
                i += k


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
                # evaluated as the spreadsheet's #NAME? only where the file holds no value (see eval_cell)
                why = "is not defined in the workbook" if found is None else "cannot be read"
                return Node("undefined", name=f"the name {node.ref.name} {why}")
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
    unreadable_texts: dict[tuple[str, int, int], str] = {}
    names = _name_compiler(package)
    compiled_cache: dict[tuple[str, str], Compiled | str] = {}
    parsed: dict[str, Compiled] = {}  # by key, for every sheet (the three Bands sheets of a battery share theirs)
    used: dict[str, tuple | None] = {}
    shared_groups: dict[str, set[int]] = {}
    total = 0
    sheets = package.worksheets
    for k, info in enumerate(sheets):
        xml = package.read(info.part)
        try:
            columns, sheet_runs, used_range, groups = _read_sheet(xml, strings)
        except sheet_data.SheetXmlError as exc:
            raise UnusableWorkbook(f"{package.path.name}: sheet {info.name!r}: {exc}", path=package.path) from None
        del xml
        store.add_sheet(info.name, columns)
        del columns
        used[info.name] = used_range
        shared_groups[info.name] = groups
        for r in sheet_runs:
            if r[_ARRAY] is not None:
                a, _, b = r[_ARRAY].partition(":")
                (r1, c1), (r2, c2) = split_ref(a), split_ref(b or a)
                total += (r2 - r1 + 1) * (c2 - c1 + 1)
            else:
                total += r[_LAST] - r[_FIRST] + 1
            ck = (info.name, r[_KEY])
            comp = compiled_cache.get(ck)
            if comp is None:
                try:  # parsed once per key (position-independent); names put in per sheet
                    comp = parsed.get(r[_KEY])
                    if comp is None:
                        comp = parsed[r[_KEY]] = compile_formula(r[_TEXT], *r[_AT])
                    comp = _substitute_names(comp, info.name, names)
                except FormulaSyntaxError as exc:
                    comp = str(exc)
                compiled_cache[ck] = comp
            if isinstance(comp, str):
                for row in range(r[_FIRST], r[_LAST] + 1):
                    unreadable[(info.name, row, r[_COL])] = comp
                    unreadable_texts[(info.name, row, r[_COL])] = r[_TEXT]
                continue
            if store.has_blank(info.name, r[_COL], r[_FIRST], r[_LAST]):  # a formula without a cached value
                missing.add(len(runs))
            runs.append(Run(info.name, r[_COL], r[_FIRST], r[_LAST], comp, array_ref=r[_ARRAY]))
        if progress:
            progress("reading", (k + 1) / len(sheets))
    graph = FormulaGraph(runs)
    return WorkbookModel(package, store, runs, graph, missing, unreadable, used, shared_groups, total,
                         unreadable_texts)
