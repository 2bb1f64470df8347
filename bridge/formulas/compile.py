"""Formulas of a workbook as position-independent expressions and a dependency graph.

Reading a formula
-----------------
:func:`formula_key` rewrites a formula's cell references relative to the cell
that holds it (``=B2*2`` in C2 and ``=B3*2`` in C3 both become
``=R[0]C[-1]*2``), so the cells of a filled-down column share one key and
the formula is parsed and compiled once per key (:func:`compile_formula`),
with the ``formulas`` package's parser. The compiled form is a small tree
(:class:`Node`) whose leaves are literals or :class:`Ref` s: references whose
row and column are either absolute or an offset from the formula's cell.

The graph
---------
Formula cells are grouped into *runs*: consecutive rows of one column with
the same key (:class:`Run`). :class:`FormulaGraph` links a run to every run
whose cells one of its references can reach (same sheet, other sheets,
through defined names, full columns included), orders the runs with
Tarjan's strongly connected components, and hands back groups in
evaluation order. A group of one run without a self-reference can be
evaluated as one column; other groups (a running total such as
``=C1+B2``, real circular references) are expanded to single cells, ordered
again, and the cells that sit on a cycle are reported by address.

>>> key, refs = formula_key("=SUM(B2:K2)+$A$1", 2, 12)
>>> key
'=SUM(R[0]C[-10]:R[0]C[-1])+R1C1'
>>> compile_formula("=SUM(B2:K2)*2", 2, 12).tree.describe()
'*(SUM(ref), 2.0)'
"""

from __future__ import annotations

import bisect
import dataclasses
import functools
import re
from typing import Callable, Iterable, Iterator

import formulas
from formulas.builder import AstBuilder
from formulas.tokens.function import Function
from formulas.tokens.operand import Empty, Error, Number, Range, String
from formulas.tokens.operator import Operator

from .text import parser, syntax_reason
from ..workbook.cells import MAX_COLUMN, column_index, column_letters, split_ref

__all__ = [
    "Ref", "Node", "Compiled", "Run", "FormulaGraph", "formula_key", "compile_formula",
    "column_index", "column_letters", "split_address", "FormulaSyntaxError", "KeyTemplate",
]


class FormulaSyntaxError(ValueError):
    """A formula the parser cannot read; ``reason`` is the message without the formula (why, and where)."""

    def __init__(self, message: str, reason: str | None = None):
        super().__init__(message)
        self.reason = reason or message


# Cell addresses are read and written by the package layer's helpers (one definition of each).
split_address = split_ref


# ---------------------------------------------------------------- position-independent keys

# Strings, then references (optionally sheet-qualified): column ranges, row ranges, cells.
_KEY_TOKEN = re.compile(
    r'''(?P<string>"(?:[^"]|"")*")'''
    r"|(?P<quoted>'(?:[^']|'')*'!)"
    r"|(?<![\w.$])(?P<cols>\$?[A-Za-z]{1,3}:\$?[A-Za-z]{1,3})(?![\w.(!])"
    r"|(?<![\w.$])(?P<rows>\$?\d+:\$?\d+)(?![\w.(!])"
    r"|(?<![\w.$])(?P<cell>\$?[A-Za-z]{1,3}\$?\d+)(?![\w.(!])")
_PART = re.compile(r"(\$?)([A-Za-z]{1,3})?(\$?)(\d+)?")


def _rc(text: str, row: int, col: int) -> str:
    cabs, letters, rabs, digits = _PART.fullmatch(text).groups()
    out = ""
    if digits is not None:
        out += f"R{digits}" if rabs else f"R[{int(digits) - row}]"
    if letters is not None:
        out += f"C{column_index(letters)}" if cabs else f"C[{column_index(letters) - col}]"
    return out


def formula_key(formula: str, row: int, col: int) -> tuple[str, int]:
    """The formula with its references written relative to (row, col), and how many it has."""
    count = 0

    def sub(m: re.Match) -> str:
        nonlocal count
        kind = m.lastgroup
        text = m.group(0)
        if kind in ("string", "quoted"):
            return text
        count += 1
        if kind == "cell":
            return _rc(text, row, col)
        a, b = text.split(":")
        return _rc(a, row, col) + ":" + _rc(b, row, col)

    return _KEY_TOKEN.sub(sub, formula), count


class KeyTemplate:
    """Predicts the text a formula has when filled down one row, to recognise a filled-down run cheaply.

    Built from one cell's formula: the relative row numbers become slots
    (offset from the cell's row), everything else is kept as written. A cell
    at ``row`` belongs to the same run when its text is
    ``template.text_at(row)``; checking that is one string format and one
    comparison, instead of rewriting every reference.
    """

    __slots__ = ("fmt", "offsets", "key")

    def __init__(self, formula: str, row: int, col: int):
        pieces: list[str] = []
        offsets: list[int] = []
        pos = 0
        for m in _KEY_TOKEN.finditer(formula):
            if m.lastgroup in ("string", "quoted"):
                continue
            for part in re.finditer(r"\$?[A-Za-z]*(\$?)(\d+)", m.group(0)):
                if part.group(1) or not part.group(2):
                    continue
                start = m.start() + part.start(2)
                pieces.append(formula[pos:start].replace("{", "{{").replace("}", "}}"))
                pieces.append("{%d}" % len(offsets))
                offsets.append(int(part.group(2)) - row)
                pos = m.start() + part.end(2)
        pieces.append(formula[pos:].replace("{", "{{").replace("}", "}}"))
        self.fmt = "".join(pieces)
        self.offsets = tuple(offsets)
        self.key = formula_key(formula, row, col)[0]

    def text_at(self, row: int) -> str:
        return self.fmt.format(*[row + o for o in self.offsets])


# ---------------------------------------------------------------- references

@dataclasses.dataclass(frozen=True)
class Ref:
    """A reference in position-independent form.

    Each of ``r1, c1, r2, c2`` is an absolute 1-based index when the matching
    ``*_abs`` flag is set and an offset from the formula's cell otherwise.
    ``sheet`` is ``None`` for the formula's own sheet. ``name`` is set for a
    defined name (then the coordinates are unused).
    """

    sheet: str | None = None
    r1: int = 0
    c1: int = 0
    r2: int = 0
    c2: int = 0
    r1_abs: bool = False
    c1_abs: bool = False
    r2_abs: bool = False
    c2_abs: bool = False
    name: str | None = None

    def area(self, row: int, col: int) -> tuple[int, int, int, int]:
        """(r1, c1, r2, c2) for the formula in (row, col), ordered."""
        r1 = self.r1 if self.r1_abs else row + self.r1
        r2 = self.r2 if self.r2_abs else row + self.r2
        c1 = self.c1 if self.c1_abs else col + self.c1
        c2 = self.c2 if self.c2_abs else col + self.c2
        return min(r1, r2), min(c1, c2), max(r1, r2), max(c1, c2)

    @property
    def is_cell(self) -> bool:
        return self.name is None and self.r1 == self.r2 and self.c1 == self.c2 and \
            self.r1_abs == self.r2_abs and self.c1_abs == self.c2_abs

    @property
    def rows_fixed(self) -> bool:
        return self.r1_abs and self.r2_abs

    @property
    def one_row_moving(self) -> bool:
        """Both rows relative with the same offset: a one-row range that moves with the cell."""
        return not self.r1_abs and not self.r2_abs and self.r1 == self.r2


def _ref_from_token(token: Range, raw: str, row: int, col: int) -> Ref:
    attr = token.attr
    if attr.get("is_reference") and "r1" not in attr:
        return Ref(name=attr["name"].upper() if "!" not in attr["name"] else attr["name"].split("!")[-1].upper(),
                   sheet=attr.get("sheet"))
    body = raw.split("!")[-1].strip()
    parts = body.split(":")
    a = _PART.fullmatch(parts[0].strip())
    b = _PART.fullmatch(parts[-1].strip())
    c1abs, _, r1abs, _ = a.groups()
    c2abs, _, r2abs, _ = b.groups()
    r1, r2 = int(attr["r1"]), int(attr["r2"])
    n1, n2 = int(attr["n1"]), int(attr["n2"])
    if r1 == 0:  # a column range A:C covers every row
        r1, r1abs, r2abs = 1, "$", "$"
    if a.group(2) is None and b.group(2) is None:  # a row range 2:5 covers every column
        c1abs = c2abs = "$"
        n1, n2 = 1, MAX_COLUMN
    return Ref(sheet=attr.get("sheet"),
               r1=r1 if r1abs else r1 - row, c1=n1 if c1abs else n1 - col,
               r2=r2 if r2abs else r2 - row, c2=n2 if c2abs else n2 - col,
               r1_abs=bool(r1abs), c1_abs=bool(c1abs), r2_abs=bool(r2abs), c2_abs=bool(c2abs))


# ---------------------------------------------------------------- the expression tree

@dataclasses.dataclass
class Node:
    """One node of a compiled formula.

    ``kind`` is ``"lit"`` (``value``), ``"ref"`` (``ref``), ``"empty"`` (a
    missing argument), ``"op"`` (an operator ``name``) or ``"fn"`` (a function
    ``name``, upper case as written, prefixes kept); ``args`` the operands.
    """

    kind: str
    name: str = ""
    value: object = None
    ref: Ref | None = None
    args: tuple = ()

    def describe(self) -> str:
        if self.kind == "lit":
            return repr(self.value) if not isinstance(self.value, str) else f'"{self.value}"'
        if self.kind in ("ref", "empty"):
            return self.kind
        return f"{self.name}({', '.join(a.describe() for a in self.args)})"

    def walk(self) -> Iterator["Node"]:
        yield self
        for a in self.args:
            yield from a.walk()


@dataclasses.dataclass
class Compiled:
    """A formula compiled once for every cell that shares its key."""

    key: str
    tree: Node
    refs: tuple[Ref, ...]
    functions: frozenset[str]  # function names as written (upper case, prefixes kept)
    is_array: bool = False


def _operand_node(token, row: int, col: int, refs: list) -> Node:
    if isinstance(token, Range):
        raw = token.source[:token.end_match]
        ref = _ref_from_token(token, raw, row, col)
        refs.append(ref)
        return Node("ref", ref=ref)
    if isinstance(token, Empty):
        return Node("empty")
    if isinstance(token, (Number, String, Error)):
        value = token.compile()
        if isinstance(value, int) and not isinstance(value, bool):
            value = float(value)
        return Node("lit", value=value)
    raise FormulaSyntaxError(f"unsupported operand {token!r}")


class _TreeBuilder(AstBuilder):
    """Builds :class:`Node` trees from the parser's token stream instead of a dispatcher."""

    def __init__(self, *, row: int, col: int, refs: list, match=None):
        super().__init__(match=match)
        self.row, self.col, self.refs = row, col, refs

    def append(self, token):
        if isinstance(token, (Operator, Function)):
            n = token.get_n_args
            if len(self._deque) < n:
                raise formulas.errors.FormulaError()
            args = [self._deque.pop() for _ in range(n)][::-1]
            token.update_input_tokens(*[a[0] for a in args])
            kind = "op" if isinstance(token, Operator) else "fn"
            node = Node(kind, name=token.name.upper(), args=tuple(a[1] for a in args))
        else:
            node = _operand_node(token, self.row, self.col, self.refs)
        self._deque.append((token, node))

    def finish(self):
        pass


def compile_formula(formula: str, row: int, col: int) -> Compiled:
    """Parse ``formula`` (as it stands in cell (row, col)) into a :class:`Compiled` tree."""
    text = formula.strip()
    is_array = text.startswith("{")
    if not text.startswith(("=", "{")):
        text = "=" + text
    refs: list[Ref] = []
    reader = parser()
    reader.ast_builder = functools.partial(_TreeBuilder, row=row, col=col, refs=refs)
    try:
        _, builder = reader.ast(text)
    except FormulaSyntaxError:
        raise
    except Exception as exc:  # the parser's exception types vary by version
        reason = syntax_reason(formula, reader, exc)
        raise FormulaSyntaxError(f"cannot read the formula {formula!r}: {reason}", reason) from None
    root = builder._deque[-1][1]
    key, _ = formula_key(text, row, col)
    functions = frozenset(n.name for n in root.walk() if n.kind == "fn")
    return Compiled(key=key, tree=root, refs=tuple(refs), functions=functions, is_array=is_array)


# ---------------------------------------------------------------- runs and the graph

@dataclasses.dataclass(eq=False)
class Run:
    """Formula cells in rows ``first..last`` of one column sharing one compiled formula."""

    sheet: str
    col: int
    first: int
    last: int
    compiled: Compiled
    index: int = -1
    array_ref: str | None = None  # an array formula's range ("C2:C10"); the run is then its master cell

    @property
    def spans(self) -> list[tuple[int, int, int]]:
        """(column, first row, last row) of every cell whose value the run gives."""
        if self.array_ref is None:
            return [(self.col, self.first, self.last)]
        a, _, b = self.array_ref.partition(":")
        r1, c1 = split_address(a)
        r2, c2 = split_address(b or a)
        return [(c, r1, r2) for c in range(c1, c2 + 1)]

    @property
    def size(self) -> int:
        return self.last - self.first + 1

    def address(self, row: int) -> str:
        return f"{column_letters(self.col)}{row}"


class FormulaGraph:
    """Runs and the links between them (see the module docstring)."""

    def __init__(self, runs: list[Run], names: dict[str, list[tuple[str, tuple[int, int, int, int]]]] | None = None):
        self.runs = runs
        for i, r in enumerate(runs):
            r.index = i
        # defined name → areas it reaches [(sheet, (r1, c1, r2, c2))]
        self.names = names or {}
        # (sheet, column) → [(first row, last row, run)] sorted by first row
        self._by_column: dict[tuple[str, int], list[tuple[int, int, Run]]] = {}
        for r in runs:
            for c, first, last in r.spans:
                self._by_column.setdefault((r.sheet.casefold(), c), []).append((first, last, r))
        self._columns: dict[str, list[int]] = {}
        for (sheet, c), lst in self._by_column.items():
            lst.sort(key=lambda t: t[0])
            self._columns.setdefault(sheet, []).append(c)
        for cols in self._columns.values():
            cols.sort()
        self._firsts = {k: [t[0] for t in lst] for k, lst in self._by_column.items()}
        self.edges: list[set[int]] = [set() for _ in runs]  # run → runs it reads
        for r in runs:
            for sheet, area in self.run_areas(r):
                for other in self.runs_in(sheet, area):
                    self.edges[r.index].add(other.index)

    def ref_areas(self, ref: Ref, sheet: str, row: int, col: int) -> list[tuple[str, tuple[int, int, int, int]]]:
        if ref.name is not None:
            return list(self.names.get(ref.name, ()))
        return [(ref.sheet or sheet, ref.area(row, col))]

    def run_areas(self, run: Run) -> Iterator[tuple[str, tuple[int, int, int, int]]]:
        """Every area any cell of the run reads (a relative reference sweeps the run's rows)."""
        for ref in run.compiled.refs:
            if ref.name is not None:
                yield from self.names.get(ref.name, ())
                continue
            a1 = ref.area(run.first, run.col)
            a2 = ref.area(run.last, run.col)
            yield ref.sheet or run.sheet, (min(a1[0], a2[0]), min(a1[1], a2[1]), max(a1[2], a2[2]), max(a1[3], a2[3]))

    def _spans_in(self, sheet: str, area: tuple[int, int, int, int]) -> Iterator[tuple[int, int, Run]]:
        r1, c1, r2, c2 = area
        sheet = sheet.casefold()
        cols = self._columns.get(sheet, ())
        for c in cols[bisect.bisect_left(cols, c1):bisect.bisect_right(cols, c2)]:
            lst = self._by_column[(sheet, c)]
            firsts = self._firsts[(sheet, c)]
            # spans do not overlap within a column, so start at the last one beginning at or before r1
            i = max(bisect.bisect_right(firsts, r1) - 1, 0)
            while i < len(lst) and lst[i][0] <= r2:
                if lst[i][1] >= r1:
                    yield lst[i]
                i += 1

    def runs_in(self, sheet: str, area: tuple[int, int, int, int]) -> Iterator[Run]:
        seen = set()
        for _, _, run in self._spans_in(sheet, area):
            if run.index not in seen:
                seen.add(run.index)
                yield run

    def cells_in(self, sheet: str, area: tuple[int, int, int, int], among: set[int]) -> Iterator[tuple[Run, int]]:
        """(run, row) of formula cells in ``area`` that belong to the runs numbered in ``among``
        (an array formula counts as its master cell)."""
        r1, c1, r2, c2 = area
        for first, last, run in self._spans_in(sheet, area):
            if run.index in among:
                if run.array_ref is not None:
                    yield run, run.first
                    continue
                for row in range(max(r1, first), min(r2, last) + 1):
                    yield run, row

    def dependents(self, seeds: Iterable[int]) -> set[int]:
        """The seed runs and every run that reads one of them, transitively."""
        readers: list[list[int]] = [[] for _ in self.runs]
        for i, deps in enumerate(self.edges):
            for d in deps:
                readers[d].append(i)
        out = set()
        stack = list(seeds)
        while stack:
            i = stack.pop()
            if i in out:
                continue
            out.add(i)
            stack.extend(readers[i])
        return out

    def components(self, among: set[int]) -> list[list[int]]:
        """Strongly connected components of the runs in ``among``, dependencies first."""
        return strongly_connected(among, lambda run: sorted(d for d in self.edges[run] if d in among))

    def is_vector_group(self, comp: list[int]) -> bool:
        return len(comp) == 1 and comp[0] not in self.edges[comp[0]]

    def cell_order(self, comp: list[int]) -> tuple[list[tuple[Run, int]], list[list[tuple[Run, int]]]]:
        """Cells of a group in evaluation order, and the cycles (lists of cells) that block the rest.

        Cells on a cycle are left out of the order (each cycle is reported
        once, as the cells of one strongly connected set); cells behind a
        cycle come after it.
        """
        among = set(comp)
        cells = [(self.runs[i], row) for i in comp for row in range(self.runs[i].first, self.runs[i].last + 1)
                 if self.runs[i].array_ref is None or row == self.runs[i].first]
        key = {(run.index, row): k for k, (run, row) in enumerate(cells)}
        deps = self._cell_deps(cells, key, among)
        order = _kahn(cells, deps, set())
        if len(order) == len(cells):
            return [cells[k] for k in order], []
        blocked = set(range(len(cells))) - set(order)
        cycles = []
        on_cycle: set[int] = set()
        for c in _cell_components(blocked, deps):
            if len(c) > 1 or c[0] in deps[c[0]]:
                on_cycle.update(c)
                cycles.append([cells[k] for k in sorted(c, key=lambda k: (cells[k][0].col, cells[k][1]))])
        # Cells behind a cycle are evaluated after it, reading the cycle cells' error values.
        order = _kahn(cells, deps, on_cycle)
        return [cells[k] for k in order], cycles

    def _cell_deps(self, cells, key, among) -> list[list[int]]:
        deps: list[list[int]] = []
        for run, row in cells:
            d = []
            for ref in run.compiled.refs:
                for sheet, area in self.ref_areas(ref, run.sheet, row, run.col):
                    for other, orow in self.cells_in(sheet, area, among):
                        d.append(key[(other.index, orow)])
            deps.append(d)
        return deps


def _kahn(cells, deps: list[list[int]], removed: set[int]) -> list[int]:
    """Kahn's algorithm on the cell graph, leaving out ``removed`` cells (and ignoring links from them)."""
    readers: list[list[int]] = [[] for _ in cells]
    waiting = [0] * len(cells)
    for k, d in enumerate(deps):
        if k in removed:
            continue
        for j in set(d):
            if j in removed:
                continue
            readers[j].append(k)
            waiting[k] += 1
    ready = [k for k in range(len(cells)) if waiting[k] == 0 and k not in removed][::-1]
    order = []
    while ready:
        k = ready.pop()
        order.append(k)
        for r in readers[k]:
            waiting[r] -= 1
            if waiting[r] == 0:
                ready.append(r)
    return order


def _cell_components(nodes: set[int], deps: list[list[int]]) -> list[list[int]]:
    return strongly_connected(nodes, lambda cell: [d for d in deps[cell] if d in nodes])


def strongly_connected(nodes: Iterable[int], successors: Callable[[int], Iterable[int]]) -> list[list[int]]:
    """Strongly connected components (Tarjan, iterative so deep chains do not hit the recursion limit).

    A component is emitted after every component it reaches, so the list comes dependencies first.
    """
    index: dict[int, int] = {}
    low: dict[int, int] = {}
    on_stack: set[int] = set()
    stack: list[int] = []
    out: list[list[int]] = []
    counter = 0
    for start in sorted(nodes):
        if start in index:
            continue
        work = [(start, iter(successors(start)))]
        index[start] = low[start] = counter
        counter += 1
        stack.append(start)
        on_stack.add(start)
        while work:
            node, it = work[-1]
            advanced = False
            for nxt in it:
                if nxt not in index:
                    index[nxt] = low[nxt] = counter
                    counter += 1
                    stack.append(nxt)
                    on_stack.add(nxt)
                    work.append((nxt, iter(successors(nxt))))
                    advanced = True
                    break
                if nxt in on_stack:
                    low[node] = min(low[node], index[nxt])
            if advanced:
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[node])
            if low[node] == index[node]:
                comp = []
                while True:
                    x = stack.pop()
                    on_stack.discard(x)
                    comp.append(x)
                    if x == node:
                        break
                out.append(comp)
    return out
