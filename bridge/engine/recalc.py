"""Recalculate a saved workbook offline and write the values as the cells' cached values.

:func:`recalculate` does one job in four steps: it reads every worksheet of
the package into a model (:func:`~.model.load_model`: the cell values in a
:class:`~.store.CellStore`, the formula cells as filled-down runs linked in
a :class:`~.graph.FormulaGraph`), evaluates what needs it in dependency
order (:func:`evaluate_model`: whole runs with :mod:`.eval_run`, single
cells with :mod:`.eval_cell`), patches only the evaluated cells into the
sheet parts, and writes the package safely (every other part is copied
unchanged). :func:`check_workbook` reads the same model and lists likely
mistakes without writing anything.

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

A formula the engine cannot evaluate (a function it lacks, a structured or
3-D reference, a format code its TEXT does not know, a formula it cannot
read; :class:`~.values.CannotEvaluate`) keeps the value the file holds and is
listed in :attr:`RecalcReport.kept`, as is a circular reference that no
trueband result feeds; only where there is no stored value, or the cell
depends on a trueband result, does it get an error value and a line.
Nothing that one cell holds stops the workbook.
"""

from __future__ import annotations

import dataclasses
import gc
import time
from pathlib import Path
from typing import Callable

import numpy as np
from formulas.functions import XlError

from ..formulas.compile import Compiled
from ..formulas.names import registered_name, uses_registered_function
from ..formulas.standard import date_system
from ..workbook import shared_formulas, sheet_data, sheet_edit, sheet_patch
from ..workbook.package import UnusableWorkbook, open_workbook_package
from ..workbook.cells import column_letters, split_ref
from . import values_mode
from .eval_cell import evaluate_array_formula, evaluate_cell
from .eval_run import evaluate_run
from .graph import Run
from .model import WorkbookModel, load_model
from .values import (EMPTY, CannotEvaluate, CellProblem, VectorUnsupported, as_values, cell_value_for_xml, error_value,
                     filled)

__all__ = ["recalculate", "RecalcReport", "CellError", "KeptCell", "Evaluation", "evaluate_model", "UnusableWorkbook"]


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


@dataclasses.dataclass(frozen=True)
class KeptCell:
    """A formula cell that kept the value the file holds: the engine cannot evaluate it (``reason``)."""

    sheet: str
    cell: str
    reason: str


def kept_line(kept: list[KeptCell], most: int = 20) -> str:
    """One line naming the cells that kept their stored values (the first ``most`` of them)."""
    cells = ", ".join(f"{k.sheet}!{k.cell}" for k in kept[:most])
    more = f" and {len(kept) - most} more" if len(kept) > most else ""
    reasons = sorted({k.reason for k in kept})
    why = f" ({reasons[0]})" if len(reasons) == 1 else f" ({reasons[0]}; …)"
    return f"kept {len(kept)} stored values it cannot evaluate: cells {cells}{more}{why}"


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
    #: Formula cells that kept the value the file holds (the engine cannot evaluate them).
    kept: list[KeptCell] = dataclasses.field(default_factory=list)
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
                + f", {self.seconds:.2f} s{where}{missing}"
                + (f"\n{kept_line(self.kept)}" if self.kept else ""))


# ---------------------------------------------------------------- evaluating

def _uses_registered(compiled: Compiled) -> bool:
    return any(registered_name(n) is not None for n in compiled.functions)


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


@dataclasses.dataclass
class Evaluation:
    """What :func:`evaluate_model` computed.

    ``updates`` holds, per sheet, the new value of each evaluated cell keyed by
    its reference as bytes (``b"C2"``), as the sheet patcher takes them;
    ``errors`` the cells whose value is an error; ``cycles`` the circular
    references (``Sheet!A1`` addresses); ``evaluated`` counts the cells
    computed and ``vectorised`` those computed as part of a whole-column run.
    """

    updates: dict[str, dict[bytes, object]] = dataclasses.field(default_factory=dict)
    errors: list[CellError] = dataclasses.field(default_factory=list)
    cycles: list[list[str]] = dataclasses.field(default_factory=list)
    kept: list[KeptCell] = dataclasses.field(default_factory=list)
    evaluated: int = 0
    vectorised: int = 0


class _Evaluator:
    """Evaluates runs and cells of a model into an :class:`Evaluation`, writing each value into the store
    for the formulas that read it."""

    def __init__(self, model: WorkbookModel, fed_by_trueband: set[int] = frozenset()):
        self.model, self.store = model, model.store
        self.result = Evaluation()
        self.fed_by_trueband = fed_by_trueband  # runs that use a registered function or read one that does

    def keep(self, run: Run, row: int, col: int, problem: CellProblem) -> bool:
        """Keep the stored value of a cell the engine cannot evaluate (listed); False where it must be an error
        instead (no stored value, or a trueband result feeds it)."""
        if run.index in self.fed_by_trueband or self.store.value(run.sheet, row, col) is EMPTY:
            return False
        self.result.kept.append(KeptCell(run.sheet, f"{column_letters(col)}{row}", problem.message))
        return True

    def record(self, run: Run, row: int, col: int, value, problem: CellProblem | None):
        result = self.result
        result.evaluated += 1
        out = cell_value_for_xml(value)
        result.updates.setdefault(run.sheet, {})[b"%s%d" % (column_letters(col).encode("ascii"), row)] = out
        if isinstance(out, sheet_data.ErrorValue):
            if problem is not None and problem.code == str(out):
                function, message = problem.function, problem.message
            else:
                function, message = _describe_error(run.compiled, str(out), self.store, run.sheet, row, col)
            result.errors.append(CellError(run.sheet, f"{column_letters(col)}{row}", function, str(out), message))

    def one_cell(self, run: Run, row: int):
        res = evaluate_cell(run.compiled, self.store, run.sheet, row, run.col)
        if res.kept and self.keep(run, row, run.col, res.problem):
            return
        self.store.write(run.sheet, run.col, row, as_values([res.value]))
        self.record(run, row, run.col, res.value, res.problem)

    def array_formula(self, run: Run):
        r1, c1 = split_ref(run.array_ref.split(":")[0])
        r2, c2 = split_ref(run.array_ref.split(":")[-1])
        try:
            values, problem = evaluate_array_formula(run.compiled, self.store, run.sheet, run.first, run.col,
                                                     (r2 - r1 + 1, c2 - c1 + 1))
        except CannotEvaluate as exc:
            cells = [(r, c) for c in range(c1, c2 + 1) for r in range(r1, r2 + 1)]
            if all(self.keep(run, r, c, exc.problem) for r, c in cells[:1]):
                for r, c in cells[1:]:
                    self.keep(run, r, c, exc.problem)
                return
            values = filled((r2 - r1 + 1, c2 - c1 + 1), error_value(exc.problem.code))
            problem = exc.problem
        for j in range(values.shape[1]):
            self.store.write(run.sheet, c1 + j, r1, as_values(list(values[:, j])))
            for i in range(values.shape[0]):
                self.record(run, r1 + i, c1 + j, values[i, j], problem)

    def whole_run(self, run: Run):
        """A run that reads no cell of its own: as arrays when it can, else cell by cell."""
        if run.array_ref is not None:
            self.array_formula(run)
            return
        try:
            found = evaluate_run(run, self.store) if run.size > 1 else None
        except Exception:  # VectorUnsupported, CannotEvaluate, a library fault: the reference path, cell by cell
            found = None
        if found is None:
            for row in range(run.first, run.last + 1):
                self.one_cell(run, row)
            return
        self.store.write(run.sheet, run.col, run.first, found.values)
        result = self.result
        result.vectorised += run.size
        values = found.values.tolist()
        letters = column_letters(run.col).encode("ascii")
        first = run.first
        result.updates.setdefault(run.sheet, {}).update(
            zip([b"%s%d" % (letters, r) for r in range(first, first + run.size)], values))
        result.evaluated += run.size
        if found.values.dtype == object:
            # error values (and anything else not a plain cell value) are recorded one by one
            for i in [i for i, v in enumerate(values) if type(v) not in (float, str, bool)]:
                result.evaluated -= 1
                self.record(run, first + i, run.col, values[i], found.problems.get(i))

    def cell_group(self, comp: list[int]):
        """Runs that read their own cells or each other's: cell by cell in dependency order, the cells on a
        circular reference set to ``#VALUE!``."""
        order, found = self.model.graph.cell_order(comp)
        on_cycle = {(r.index, row) for cycle in found for r, row in cycle}
        for cycle in found:
            addresses = [f"{r.sheet}!{r.address(row)}" for r, row in cycle]
            self.result.cycles.append(addresses)
            problem = CellProblem("", "#VALUE!", "circular reference: " + " → ".join(addresses + addresses[:1]))
            for r, row in cycle:
                if self.keep(r, row, r.col, problem):
                    continue  # no trueband result feeds it: the value the app stored stays
                self.store.write(r.sheet, r.col, row, as_values([error_value("#VALUE!")]))
                self.record(r, row, r.col, error_value("#VALUE!"), problem)
        for run, row in order:
            if (run.index, row) not in on_cycle:
                if run.array_ref is not None:
                    self.array_formula(run)
                else:
                    self.one_cell(run, row)

    def unreadable(self):
        """The cells whose formula cannot be read: ``#NAME?``, with the parser's message."""
        result = self.result
        texts = self.model.unreadable_texts
        for (sheet, row, col), message in self.model.unreadable.items():
            if not uses_registered_function(texts.get((sheet, row, col), "")) and \
                    self.store.value(sheet, row, col) is not EMPTY:
                result.kept.append(KeptCell(sheet, f"{column_letters(col)}{row}", message))
                continue
            result.updates.setdefault(sheet, {})[b"%s%d" % (column_letters(col).encode("ascii"), row)] = \
                sheet_data.ErrorValue("#NAME?")
            result.errors.append(CellError(sheet, f"{column_letters(col)}{row}", "", "#NAME?", message))
            result.evaluated += 1


def evaluate_model(model: WorkbookModel, *, all_formulas: bool = False,
                   progress: Callable[[str, float], None] | None = None) -> Evaluation:
    """Evaluate what needs it (see the module docstring), in dependency order; the store is updated as it goes."""
    graph = model.graph
    seeds = set(model.cached_missing)
    for run in model.runs:
        if all_formulas or _uses_registered(run.compiled):
            seeds.add(run.index)
    needed = graph.dependents(seeds)
    fed = graph.dependents(i for i, run in enumerate(model.runs) if _uses_registered(run.compiled))
    evaluator = _Evaluator(model, fed)
    total = sum(model.runs[i].size for i in needed) or 1
    done = 0
    with date_system(getattr(model.package, "date1904", False)):  # dates count from 1904 in such a book
        for comp in graph.components(needed):
            if graph.is_vector_group(comp):
                evaluator.whole_run(model.runs[comp[0]])
            else:
                evaluator.cell_group(comp)
            done += sum(model.runs[i].size for i in comp)
            if progress:
                progress("evaluating", done / total)
    evaluator.unreadable()
    return evaluator.result


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
        # the other cells of an array formula's range may be absent from the part (openpyxl): written in
        patched = sheet_edit.patch_or_add_values(xml, sheet_updates, consume=True, pieces=True)
        del xml, sheet_updates
        pkg.forget(info.part)  # the package's copy of the old part is not needed any more
        groups = model.shared_groups.get(info.name)
        if groups:
            # LibreOffice recomputes shared formulas on opening; written one per cell, ours show their values
            patched = shared_formulas.unshare_formulas(b"".join(patched), pkg.shared_strings, groups)
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
        Where to write; default ``BOOK.recalc.xlsx`` beside the input ``BOOK.xlsx`` (``.xlsm``
        kept), as :func:`~trueband.bridge.workbook.save.default_output_path` names it.
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
        evaluation = evaluate_model(model, all_formulas=all_formulas, progress=progress)
        changes, missing = _patch(model, evaluation, values=values)
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
    return RecalcReport(source=src, output=out, formulas=model.formula_count, evaluated=evaluation.evaluated,
                        vectorised=evaluation.vectorised, errors=evaluation.errors, cycles=evaluation.cycles,
                        kept=evaluation.kept, seconds=time.perf_counter() - started, values_mode=values, notices_missing=missing)


def _patch(model: WorkbookModel, evaluation: Evaluation, *, values: bool):
    """The package edits (:func:`_changes`), with ``values`` the registered formulas replaced by their values
    (:mod:`.values_mode`); and the sheets where no safe cell for the values notice was found."""
    if values:  # the inputs are read from the store before it is freed
        inputs = values_mode.frozen_inputs(model.runs, model.store, _uses_registered, cell_value_for_xml)
    model.store = None  # the values are in ``evaluation.updates`` now; free them before the sheets are patched
    model.graph = None
    changes = _changes(model, evaluation.updates)
    missing: list[str] = []
    if values:
        values_mode.replace_with_values(model.package, changes, inputs=inputs,
                                        is_read=values_mode.reader_of(model.runs),
                                        unplaced=missing)  # the values are in the patched sheets
    return changes, missing
