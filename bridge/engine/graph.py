"""The dependency graph of a workbook's formulas: runs, the links between them, and the order of evaluation.

Formula cells are grouped into *runs*: consecutive rows of one column with
the same key (:class:`Run`). :class:`FormulaGraph` links a run to every run
whose cells one of its references can reach (same sheet, other sheets,
through defined names, full columns included), orders the runs with
Tarjan's strongly connected components, and hands back groups in
evaluation order. A group of one run without a self-reference can be
evaluated as one column; other groups (a running total such as
``=C1+B2``, real circular references) are expanded to single cells, ordered
again, and the cells that sit on a cycle are reported by address.
"""

from __future__ import annotations

import bisect
import dataclasses
from typing import Callable, Iterable, Iterator

from ..formulas.compile import Compiled, Ref
from ..workbook.cells import column_letters, split_ref

__all__ = ["Run", "FormulaGraph", "strongly_connected"]


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
        r1, c1 = split_ref(a)
        r2, c2 = split_ref(b or a)
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
            yield ref.sheet or run.sheet, ref.swept_area(run.first, run.last, run.col)

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
