"""What ``trueband fill`` and ``trueband bands`` do: a formula down a table column, then recalculated.

A fill adds new cells to the sheet XML, in column order within their rows,
with the header styled like the neighbouring header, and changes nothing else
in the package (the calculation chain is dropped because formulas were added;
apps rebuild it). It then recalculates through
:func:`trueband.bridge.engine.recalc.recalculate`, so the file opens showing the values.

``bands`` builds the commonest fill, fixed score bands:
``=SCORE_BAND(H2,$H$2:$H$401,sd,reliability[,confidence])`` down a new column
(:func:`bands_formula`).

The table's data rows, when no rows are given: the header row is the
first row of the sheet that has a filled row right under it (so a title line
above the table is skipped); the data rows are the rows under it down to the
first row with nothing in it (the target column not counted).

Every refusal is a :class:`FillError` with one line saying why, raised before anything is written.
"""

from __future__ import annotations

import dataclasses
import os
import re
import shutil
import uuid
from pathlib import Path
from typing import Iterable

from trueband.funcs import _validate as validate
from trueband.funcs.errors import TruebandError

from ..formulas.calc_binding import bind_for_calc
from ..formulas.compile import FormulaSyntaxError, compile_formula
from ..formulas.text import TypedFormulaError, call_findings, choice_findings, typed_formula
from ..workbook.save import OutputRefused, PackageChanges, backup_path_for, default_output_path, save_workbook
from ..workbook.cells import MAX_ROW, column_index, column_letters
from ..workbook.sheet_data import SheetXmlError
from ..workbook.sheet_edit import NewCell, add_cells
from ..workbook.sheet_read import iter_cells
from ..workbook.package import WorkbookPackage, open_workbook_package
from . import recalc

__all__ = ["FillError", "FillPlan", "plan_fill", "checked_formula", "fill_changes", "fill_workbook",
           "bands_formula", "parse_scores", "first_free_column"]


class FillError(Exception):
    """A fill that cannot be done (a missing sheet, no data rows, a formula that fails the checks...)."""


@dataclasses.dataclass(frozen=True)
class FillPlan:
    """Where a fill goes: ``sheet``, ``column`` letters, data rows ``first``..``last``, the header cell (or None)."""

    sheet: str
    column: str
    first: int
    last: int
    header_ref: str | None
    header_style: int

    @property
    def range(self) -> str:
        return f"{self.sheet}!{self.column}{self.first}:{self.column}{self.last}"

    @property
    def rows(self) -> int:
        return self.last - self.first + 1


def plan_fill(pkg: WorkbookPackage, sheet: str, column: str, *, rows: tuple[int, int] | None = None,
              header: str | None = None) -> FillPlan:
    """Work out the rows to fill and the header cell, from the sheet's cells.

    Raises :class:`FillError` naming the sheet when it
    is missing, is not a worksheet, or has no data rows to fill.
    """
    try:
        info = pkg.sheet(sheet)
    except KeyError as exc:
        raise FillError(str(exc.args[0])) from None
    if info.kind != "worksheet":
        raise FillError(f"sheet {info.name!r} is a {info.kind}, not a sheet of cells")
    col = column_index(column)
    filled: dict[int, set[int]] = {}
    styles: dict[tuple[int, int], int] = {}
    try:
        for cell in iter_cells(pkg.read(info.part), pkg.shared_strings):
            if cell.style:
                styles[(cell.row, cell.col)] = cell.style
            if cell.value is None and cell.formula is None:
                continue
            filled.setdefault(cell.row, set()).add(cell.col)
    except SheetXmlError as exc:
        raise FillError(f"sheet {info.name!r}: {exc}") from None
    if not filled:
        raise FillError(f"sheet {info.name!r} is empty; there is no table to fill")
    # the header is the first row with a filled row under it (a title above the table is skipped)
    occupied = sorted(r for r, cols in filled.items() if cols - {col})
    header_row = next((r for r in occupied if (filled.get(r + 1, set()) - {col})), min(filled))
    if rows is None:
        first = header_row + 1
        last = header_row
        r = first
        while r <= MAX_ROW and (filled.get(r, set()) - {col}):
            last = r
            r += 1
        if last < first:
            raise FillError(f"sheet {info.name!r} has no data rows under its header (row {header_row}); "
                            f"give --rows FIRST:LAST")
    else:
        first, last = rows
    header_ref = None
    header_style = 0
    if header is not None:
        header_at = first - 1 if rows is not None else header_row  # the row the header cell goes in
        if header_at < 1:
            raise FillError(f"the header would go above row 1; the data rows start at row {first}")
        header_ref = f"{column}{header_at}"
        # styled like the neighbouring header: left first, then right, then the nearest styled one
        row_styles = {c: s for (r, c), s in styles.items() if r == header_at and c != col}
        for c in (col - 1, col + 1):
            if c in row_styles:
                header_style = row_styles[c]
                break
        else:
            if row_styles:
                header_style = row_styles[min(row_styles, key=lambda c: abs(c - col))]
    return FillPlan(info.name, column, first, last, header_ref, header_style)


def checked_formula(formula: str, plan: FillPlan, *, same_formula: bool = False,
                    sheets: Iterable[str] | None = None) -> str:
    """The formula text to write (without ``=``, ``;`` separators read as ``,``), once it has passed the checks
    ``trueband check`` makes: it reads as a formula, names only known functions, gives registered functions an
    allowed number of arguments and, as quoted text, only their allowed words (``"lower"`` for a ``part``),
    refers only to sheets of the workbook (``sheets``, when given), and holds ``{row}`` (unless
    ``same_formula``, or the fill is one row).

    Raises :class:`FillError` with one line naming the first problem, before anything is written.
    """
    text = formula.strip()
    if text.startswith("="):
        text = text[1:].lstrip()
    if not text:
        raise FillError("--formula is empty")
    if "{row}" not in text and plan.rows > 1 and not same_formula:
        raise FillError(f"--formula {formula!r} has no {{row}}, so all {plan.rows} rows would get the same formula; "
                        f"write {{row}} where each row's own number goes (e.g. H{{row}}), or add --same-formula")
    try:
        text = typed_formula(text)
    except TypedFormulaError as exc:
        raise FillError(f"--formula: {exc}; nothing was written") from None
    row_text = text.replace("{row}", str(plan.first))
    try:
        first = compile_formula(row_text, plan.first, column_index(plan.column))
    except FormulaSyntaxError as exc:
        shown = f" as written in row {plan.first}, {row_text!r}" if row_text != text else ""
        raise FillError(f"--formula {formula!r}{shown}: {exc.reason}; nothing was written") from None
    unknown, counts = call_findings(first.tree)
    if unknown:
        raise FillError(f"--formula: unknown function {', '.join(unknown)}; nothing was written")
    if counts:
        raise FillError(f"--formula: {counts[0]}; nothing was written")
    words = choice_findings(first.tree)
    if words:
        raise FillError(f"--formula: {words[0]}; nothing was written")
    if sheets is not None:
        known = {name.casefold() for name in sheets}
        missing = sorted({r.sheet for r in first.refs if r.sheet and r.sheet.casefold() not in known})
        if missing:
            raise FillError(f"--formula refers to a sheet that does not exist: {missing[0]!r} (the workbook's "
                            f"sheets: {', '.join(sheets)}); nothing was written")
    return text


def fill_changes(pkg: WorkbookPackage, plan: FillPlan, formula: str, *, header: str | None = None,
                 replace: bool = False, same_formula: bool = False) -> PackageChanges:
    """The package edits of a fill: the new cells in the sheet part, the calculation chain dropped.

    ``formula`` may contain ``{row}``, replaced by each row's number; it is checked first
    (:func:`checked_formula`), and registered calls are written ``_xludf.NAME(`` (the form LibreOffice
    Calc binds to trueband's add-in, :mod:`.calc_binding`).
    """
    sheets = [info.name for info in pkg.worksheets]
    text = bind_for_calc(checked_formula(formula, plan, same_formula=same_formula, sheets=sheets))  # Calc binds it
    cells = {f"{plan.column}{r}": NewCell(formula=text.replace("{row}", str(r))) for r in range(plan.first,
                                                                                            plan.last + 1)}
    if plan.header_ref is not None and header is not None:
        cells[plan.header_ref] = NewCell(value=header, style=plan.header_style)
    info = pkg.sheet(plan.sheet)
    try:
        xml = add_cells(pkg.read(info.part), cells, replace=replace)
    except SheetXmlError as exc:
        raise FillError(f"sheet {plan.sheet!r}: {exc} (choose another column, or add --replace to overwrite it)") from None
    changes = PackageChanges()
    changes.set(pkg, info.part, xml)
    changes.drop_calc_chain(pkg)
    changes.keep_cached_values(pkg)
    return changes


def fill_workbook(book: str | os.PathLike, sheet: str, column: str, formula: str, *, rows=None,
                  header: str | None = None, output=None, in_place: bool = False, backup: bool = False,
                  overwrite: bool = False, replace: bool = False, recalculate: bool = True, tag: str = "filled",
                  same_formula: bool = False) -> tuple[FillPlan, Path, recalc.RecalcReport | None]:
    """Fill a column and (by default) recalculate; returns (FillPlan, output path, RecalcReport or None).

    The filled package is first written to a temporary file beside the
    output; recalculation then writes the final file from it (atomically, by
    rename), so the input is never touched unless ``in_place``, and then only
    once the final file is complete.
    """
    src = Path(book)
    if in_place and output is not None:
        raise FillError("give either -o/--output or --in-place, not both")
    if backup and not in_place:
        raise FillError("--backup goes with --in-place")
    dest = src if in_place else (Path(output) if output is not None else default_output_path(src, tag))
    if not in_place:
        if dest.exists() and not overwrite:
            raise FillError(f"{dest} exists already; remove it, choose another output with -o, or add --overwrite")
        if dest.resolve() == src.resolve():
            raise FillError(f"the output {dest.name} is the input; use --in-place to replace the input")
    pkg = open_workbook_package(src)
    temp = dest.parent / f".~trueband-fill-{uuid.uuid4().hex[:12]}{src.suffix}"
    report = None
    try:
        try:
            plan = plan_fill(pkg, sheet, column, rows=rows, header=header)
            changes = fill_changes(pkg, plan, formula, header=header, replace=replace, same_formula=same_formula)
            if not recalculate:
                save_workbook(pkg, changes, output=None if in_place else dest, in_place=in_place, backup=backup,
                              overwrite=overwrite)
                return plan, dest, None
            save_workbook(pkg, changes, output=temp)
        finally:
            pkg.close()
        if in_place and backup:
            shutil.copy2(src, backup_path_for(src))
        report = recalc.recalculate(temp, dest, overwrite=overwrite or in_place)
    except OutputRefused as exc:
        raise FillError(str(exc)) from None
    finally:
        try:
            temp.unlink()
        except OSError:
            pass
    return plan, dest, report


# ------------------------------------------------------------------ bands

_SHEET_RANGE = re.compile(r"^(?:'((?:[^']|'')+)'|([^!]+))!\$?([A-Za-z]{1,3})\$?([0-9]+):\$?([A-Za-z]{1,3})\$?([0-9]+)$")
_CELL_ARG = re.compile(r"^(?:(?:'(?:[^']|'')+'|[^!'\s]+)!)?\$?[A-Za-z]{1,3}\$?[0-9]+$")


def parse_scores(text: str) -> tuple[str, str, int, int]:
    """``Sheet!H2:H401`` → (sheet, column, first row, last row); one column only."""
    m = _SHEET_RANGE.match(text.strip())
    if not m:
        raise FillError(f"--scores must be SHEET!H2:H401 (one column, sheet name included), got {text!r}")
    sheet = (m.group(1) or "").replace("''", "'") or m.group(2)
    c1, r1, c2, r2 = m.group(3).upper(), int(m.group(4)), m.group(5).upper(), int(m.group(6))
    if c1 != c2:
        raise FillError(f"--scores must be a single column, got {text!r}")
    if r1 > r2:
        r1, r2 = r2, r1
    return sheet, c1, r1, r2


def _argument(name: str, text: str, check) -> str:
    """A number (validated now) or a cell reference (made absolute), as formula text."""
    t = text.strip()
    if _CELL_ARG.match(t):
        if "!" in t:
            sheet, cell = t.rsplit("!", 1)
            return f"{sheet}!{_absolute(cell)}"
        return _absolute(t)
    try:
        x = float(t)
    except ValueError:
        raise FillError(f"--{name} must be a number or a cell such as K1, got {text!r}") from None
    try:
        check(name, x)
    except TruebandError as exc:
        raise FillError(f"--{name}: {exc}") from None
    return format(x, ".15g")


def _absolute(cell: str) -> str:
    m = re.match(r"\$?([A-Za-z]{1,3})\$?([0-9]+)$", cell)
    return f"${m.group(1).upper()}${m.group(2)}"


def bands_formula(scores: str, sd: str, reliability: str, confidence: str | None = None) -> tuple[str, str, int, int]:
    """The SCORE_BAND formula template for ``trueband bands`` and where the scores are.

    >>> bands_formula("Applicants!H2:H401", "K1", "0.88")[0]
    '=SCORE_BAND(H{row},$H$2:$H$401,$K$1,0.88)'
    """
    sheet, col, r1, r2 = parse_scores(scores)
    args = [f"{col}{{row}}", f"${col}${r1}:${col}${r2}",
            _argument("sd", sd, lambda n, x: validate.at_least(n, x, 0.0)),
            _argument("reliability", reliability, validate.reliability)]
    if confidence is not None:
        args.append(_argument("confidence", confidence, validate.confidence))
    return "=SCORE_BAND(" + ",".join(args) + ")", sheet, r1, r2


def first_free_column(book: str | os.PathLike, sheet: str) -> str:
    """The letters of the first column right of everything filled on ``sheet`` (where ``bands`` goes by default)."""
    with open_workbook_package(book) as pkg:
        try:
            info = pkg.sheet(sheet)
        except KeyError as exc:
            raise FillError(str(exc.args[0])) from None
        last = max((c.col for c in iter_cells(pkg.read(info.part), pkg.shared_strings)
                    if c.value is not None or c.formula is not None), default=0)
    return column_letters(last + 1)
