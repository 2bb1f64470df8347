"""``trueband fill`` (a formula down a table column, then recalculated), ``trueband bands`` and ``trueband restore``.

``fill`` adds new cells to the sheet XML, in column order within their rows,
with the header styled like the neighbouring header, and changes nothing else
in the package (the calculation chain is dropped because formulas were added;
apps rebuild it). It then recalculates through
:func:`trueband.bridge.engine.recalc.recalculate`, so the file opens showing the values.

``bands`` builds the commonest fill, fixed score bands:
``=SCORE_BAND(H2,$H$2:$H$401,sd,reliability[,confidence])`` down a new column.

``restore`` puts back the formulas that ``trueband recalc --values`` replaced
(see :mod:`~trueband.bridge.engine.values_mode`).

The table's data rows, when ``--rows`` is not given: the header row is the
first row of the sheet that has a filled row right under it (so a title line
above the table is skipped); the data rows are the rows under it down to the
first row with nothing in it (the target column not counted).
"""

from __future__ import annotations

import dataclasses
import os
import re
import shutil
import sys
import uuid
from pathlib import Path
from typing import Iterable

from trueband.funcs import _validate as v
from trueband.funcs.errors import TruebandError

from .common import EXIT_CELL_ERRORS, EXIT_OK, CommandError, add_output_options, error_table
from ..workbook.save import OutputRefused, PackageChanges, backup_path_for, default_output_path, save_workbook
from ..workbook.cells import MAX_COLUMN, MAX_ROW, column_index, column_letters
from ..workbook.sheet_data import SheetXmlError
from ..workbook.sheet_edit import NewCell, add_cells
from ..workbook.sheet_read import iter_cells
from ..workbook.package import UnusableWorkbook, WorkbookPackage, open_workbook_package

__all__ = ["FillPlan", "plan_fill", "fill_changes", "fill_workbook", "bands_formula", "register"]


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


def parse_column(text: str) -> str:
    """Column letters, upper case; refuses anything else with a one-line message."""
    t = text.strip().lstrip("$").upper()
    if not re.fullmatch(r"[A-Z]{1,3}", t) or column_index(t) > MAX_COLUMN:
        raise CommandError(f"--column must be column letters such as L (at most XFD), got {text!r}")
    return t


def parse_rows(text: str) -> tuple[int, int]:
    m = re.fullmatch(r"\s*([0-9]+)\s*[:-]\s*([0-9]+)\s*", text)
    if not m:
        raise CommandError(f"--rows must be FIRST:LAST such as 2:401, got {text!r}")
    a, b = int(m.group(1)), int(m.group(2))
    if not 1 <= a <= b <= MAX_ROW:
        raise CommandError(f"--rows must satisfy 1 <= FIRST <= LAST <= {MAX_ROW}, got {text!r}")
    return a, b


def plan_fill(pkg: WorkbookPackage, sheet: str, column: str, *, rows: tuple[int, int] | None = None,
              header: str | None = None) -> FillPlan:
    """Work out the rows to fill and the header cell, from the sheet's cells.

    Raises :class:`~trueband.bridge.cli.common.CommandError` naming the sheet when it
    is missing, is not a worksheet, or has no data rows to fill.
    """
    try:
        info = pkg.sheet(sheet)
    except KeyError as exc:
        raise CommandError(str(exc.args[0])) from None
    if info.kind != "worksheet":
        raise CommandError(f"sheet {info.name!r} is a {info.kind}, not a sheet of cells")
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
        raise CommandError(f"sheet {info.name!r}: {exc}") from None
    if not filled:
        raise CommandError(f"sheet {info.name!r} is empty; there is no table to fill")
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
            raise CommandError(f"sheet {info.name!r} has no data rows under its header (row {header_row}); "
                               f"give --rows FIRST:LAST")
    else:
        first, last = rows
    header_ref = None
    header_style = 0
    if header is not None:
        hr = first - 1 if rows is not None else header_row
        if hr < 1:
            raise CommandError(f"the header would go above row 1; the data rows start at row {first}")
        header_ref = f"{column}{hr}"
        # styled like the neighbouring header: left first, then right, then the nearest styled one
        row_styles = {c: s for (r, c), s in styles.items() if r == hr and c != col}
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
    allowed number of arguments, refers only to sheets of the workbook (``sheets``, when given), and holds
    ``{row}`` (unless ``same_formula``, or the fill is one row).

    Raises :class:`CommandError` with one line naming the first problem, before anything is written.
    """
    from ..formulas.compile import FormulaSyntaxError, compile_formula
    from ..formulas.text import TypedFormulaError, call_findings, typed_formula

    text = formula.strip()
    if text.startswith("="):
        text = text[1:].lstrip()
    if not text:
        raise CommandError("--formula is empty")
    if "{row}" not in text and plan.rows > 1 and not same_formula:
        raise CommandError(f"--formula {formula!r} has no {{row}}, so all {plan.rows} rows would get the same formula; "
                           f"write {{row}} where each row's own number goes (e.g. H{{row}}), or add --same-formula")
    try:
        text = typed_formula(text)
    except TypedFormulaError as exc:
        raise CommandError(f"--formula: {exc}; nothing was written") from None
    row_text = text.replace("{row}", str(plan.first))
    try:
        first = compile_formula(row_text, plan.first, column_index(plan.column))
    except FormulaSyntaxError as exc:
        shown = f" as written in row {plan.first}, {row_text!r}" if row_text != text else ""
        raise CommandError(f"--formula {formula!r}{shown}: {exc.reason}; nothing was written") from None
    unknown, counts = call_findings(first.tree)
    if unknown:
        raise CommandError(f"--formula: unknown function {', '.join(unknown)}; nothing was written")
    if counts:
        raise CommandError(f"--formula: {counts[0]}; nothing was written")
    if sheets is not None:
        known = {name.casefold() for name in sheets}
        missing = sorted({r.sheet for r in first.refs if r.sheet and r.sheet.casefold() not in known})
        if missing:
            raise CommandError(f"--formula refers to a sheet that does not exist: {missing[0]!r} (the workbook's "
                               f"sheets: {', '.join(sheets)}); nothing was written")
    return text


def fill_changes(pkg: WorkbookPackage, plan: FillPlan, formula: str, *, header: str | None = None,
                 replace: bool = False, same_formula: bool = False) -> PackageChanges:
    """The package edits of a fill: the new cells in the sheet part, the calculation chain dropped.

    ``formula`` may contain ``{row}``, replaced by each row's number; it is checked first
    (:func:`checked_formula`), and registered calls are written ``_xludf.NAME(`` (the form LibreOffice
    Calc binds to trueband's add-in, :mod:`.calc_binding`).
    """
    from ..formulas.calc_binding import bind_for_calc

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
        raise CommandError(f"sheet {plan.sheet!r}: {exc} (choose another column, or allow replacing)") from None
    changes = PackageChanges()
    changes.set(pkg, info.part, xml)
    changes.drop_calc_chain(pkg)
    changes.keep_cached_values(pkg)
    return changes


def _recalculate(path: Path, dst: Path, overwrite: bool):
    from ..engine.recalc import recalculate  # the evaluation engine (imported late: it loads the formula parser)

    return recalculate(path, dst, overwrite=overwrite)


def fill_workbook(book: str | os.PathLike, sheet: str, column: str, formula: str, *, rows=None,
                  header: str | None = None, output=None, in_place: bool = False, backup: bool = False,
                  overwrite: bool = False, replace: bool = False, recalculate: bool = True, tag: str = "filled",
                  same_formula: bool = False):
    """Fill a column and (by default) recalculate; returns (FillPlan, output path, RecalcReport or None).

    The filled package is first written to a temporary file beside the
    output; recalculation then writes the final file from it (atomically, by
    rename), so the input is never touched unless ``in_place``, and then only
    once the final file is complete.
    """
    src = Path(book)
    if in_place and output is not None:
        raise CommandError("give either -o/--output or --in-place, not both")
    if backup and not in_place:
        raise CommandError("--backup goes with --in-place")
    dest = src if in_place else (Path(output) if output is not None else default_output_path(src, tag))
    if not in_place:
        if dest.exists() and not overwrite:
            raise CommandError(f"{dest} exists already; remove it, choose another output with -o, or add --overwrite")
        if dest.resolve() == src.resolve():
            raise CommandError(f"the output {dest.name} is the input; use --in-place to replace the input")
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
        report = _recalculate(temp, dest, overwrite=overwrite or in_place)
    except OutputRefused as exc:
        raise CommandError(str(exc)) from None
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
        raise CommandError(f"--scores must be SHEET!H2:H401 (one column, sheet name included), got {text!r}")
    sheet = (m.group(1) or "").replace("''", "'") or m.group(2)
    c1, r1, c2, r2 = m.group(3).upper(), int(m.group(4)), m.group(5).upper(), int(m.group(6))
    if c1 != c2:
        raise CommandError(f"--scores must be a single column, got {text!r}")
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
        raise CommandError(f"--{name} must be a number or a cell such as K1, got {text!r}") from None
    try:
        check(name, x)
    except TruebandError as exc:
        raise CommandError(f"--{name}: {exc}") from None
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
            _argument("sd", sd, lambda n, x: v.at_least(n, x, 0.0)),
            _argument("reliability", reliability, v.reliability)]
    if confidence is not None:
        args.append(_argument("confidence", confidence, v.confidence))
    return "=SCORE_BAND(" + ",".join(args) + ")", sheet, r1, r2


# ------------------------------------------------------------------ command handlers


def _print_outcome(plan: FillPlan, dest: Path, report) -> int:
    print(f"filled {plan.range} ({plan.rows} rows) → {dest}", file=sys.stderr)
    if report is None:
        return EXIT_OK

    if report.errors:
        print(error_table(report.errors))
    for cycle in report.cycles:
        print(f"circular reference (not iterated): {' → '.join(cycle + cycle[:1])}", file=sys.stderr)
    print(report.summary(), file=sys.stderr)
    return EXIT_OK if report.ok else EXIT_CELL_ERRORS


def _run(fn):
    try:
        return fn()
    except UnusableWorkbook as exc:
        raise CommandError(exc.message) from None


def _fill(args) -> int:
    column = parse_column(args.column)
    rows = parse_rows(args.rows) if args.rows else None
    plan, dest, report = _run(lambda: fill_workbook(
        args.book, args.sheet, column, args.formula, rows=rows, header=args.header, output=args.output,
        in_place=args.in_place, backup=args.backup, overwrite=args.overwrite, replace=args.replace,
        same_formula=args.same_formula))
    return _print_outcome(plan, dest, report)


def _bands(args) -> int:
    formula, sheet, r1, r2 = bands_formula(args.scores, args.sd, args.reliability, args.confidence)
    if args.into:
        column = parse_column(args.into)
    else:
        def first_free():
            with open_workbook_package(args.book) as pkg:
                try:
                    info = pkg.sheet(sheet)
                except KeyError as exc:
                    raise CommandError(str(exc.args[0])) from None
                last = max((c.col for c in iter_cells(pkg.read(info.part), pkg.shared_strings)
                            if c.value is not None or c.formula is not None), default=0)
            return column_letters(last + 1)
        column = _run(first_free)
    plan, dest, report = _run(lambda: fill_workbook(
        args.book, sheet, column, formula, rows=(r1, r2), header=args.header, output=args.output,
        in_place=args.in_place, backup=args.backup, overwrite=args.overwrite, replace=args.replace))
    return _print_outcome(plan, dest, report)


def _restore(args) -> int:
    from ..engine.values_mode import restore_formulas

    if args.in_place and args.output:
        raise CommandError("give either -o/--output or --in-place, not both")
    if args.backup and not args.in_place:
        raise CommandError("--backup goes with --in-place")

    def go():
        pkg = open_workbook_package(args.book)
        try:
            changes = PackageChanges()
            report = restore_formulas(pkg, changes)
            out = save_workbook(pkg, changes, output=args.output, in_place=args.in_place, backup=args.backup,
                                overwrite=args.overwrite, tag="restored")
        except OutputRefused as exc:
            raise CommandError(str(exc)) from None
        finally:
            pkg.close()
        return report, out

    report, out = _run(go)
    for where, why in report.skipped:
        print(f"{where}: not restored ({why})")
    print(f"restored {report.restored} formula(s) → {out}", file=sys.stderr)
    return EXIT_OK if not report.skipped else EXIT_CELL_ERRORS


def register(sub) -> None:
    p = sub.add_parser(
        "fill", help="write a formula down a table column, then recalculate",
        description="Write FORMULA into every data row of a column ({row} becomes the row number), add an "
                    "optional header styled like its neighbour, then recalculate so the file shows the values. The "
                    "formula is checked first as `trueband check` does (unknown names, argument counts); ';' between "
                    "arguments is read as ','. "
                    "Nothing else in the workbook changes. Default output: BOOK.filled.xlsx beside the input.")
    p.add_argument("book", help="the .xlsx or .xlsm workbook")
    p.add_argument("--sheet", required=True, help="the sheet holding the table")
    p.add_argument("--column", required=True, help="the column to fill, e.g. L")
    p.add_argument("--formula", required=True, help='e.g. "=SCORE_BAND(H{row}, $H$2:$H$401, $K$1, $K$2)"')
    p.add_argument("--header", help="text for the header cell above the filled rows")
    p.add_argument("--rows", help="FIRST:LAST data rows (default: the rows of the table under its header)")
    p.add_argument("--replace", action="store_true", help="overwrite cells of the column that are not empty")
    p.add_argument("--same-formula", action="store_true",
                   help="allow a formula without {row} (every row then gets the same formula)")
    add_output_options(p)
    p.set_defaults(handler=_fill)

    p = sub.add_parser(
        "bands", help="fill a column with fixed score bands (SCORE_BAND) for a column of scores",
        description="Build =SCORE_BAND(score, all scores, sd, reliability[, confidence]) for each score and fill "
                    "it down a column beside them (default: the first empty column), then recalculate. Band 1 "
                    "holds the highest scores. --sd, --reliability and --confidence take a number or a cell.")
    p.add_argument("book", help="the .xlsx or .xlsm workbook")
    p.add_argument("--scores", required=True, help="the scores, e.g. Applicants!H2:H401")
    p.add_argument("--sd", required=True, help="standard deviation of the scores: a number or a cell such as K1")
    p.add_argument("--reliability", required=True, help="reliability of the scores: a number or a cell")
    p.add_argument("--confidence", help="two-sided confidence level (default 0.95): a number or a cell")
    p.add_argument("--into", help="the column to fill (default: the first empty column of the sheet)")
    p.add_argument("--header", default="Score band", help='header text (default "Score band")')
    p.add_argument("--replace", action="store_true", help="overwrite cells of the column that are not empty")
    add_output_options(p)
    p.set_defaults(handler=_bands)

    p = sub.add_parser(
        "restore", help="put back the formulas that `recalc --values` replaced by values",
        description="Put every formula recorded in the hidden sheet trueband_formulas back into its cell (beside "
                    "the cell's current value) and remove that sheet. Default output: BOOK.restored.xlsx.")
    p.add_argument("book", help="the .xlsx or .xlsm workbook")
    add_output_options(p)
    p.set_defaults(handler=_restore)
