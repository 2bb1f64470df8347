"""``trueband fill`` (a formula down a table column, then recalculated) and ``trueband bands`` (fixed score bands).

The work is :mod:`trueband.bridge.engine.fill`; this module reads the options, turns a refusal into
one line and exit code 2, and prints the outcome.
"""

from __future__ import annotations

import re
import sys
from pathlib import Path

from .common import CommandError, add_output_options, print_recalc_outcome
from ..workbook.package import UnusableWorkbook
from ..workbook.cells import MAX_COLUMN, MAX_ROW, column_index

__all__ = ["parse_column", "parse_rows", "register"]



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


def _run(work):
    """``work()``, its refusal (an unusable workbook, a fill that cannot be done) as a :class:`CommandError`."""
    from ..engine.fill import FillError  # the engine loads the formula parser: only when a fill runs

    try:
        return work()
    except UnusableWorkbook as exc:
        raise CommandError(exc.message) from None
    except FillError as exc:
        raise CommandError(str(exc)) from None


def _print_outcome(plan, dest: Path, report) -> int:
    print(f"filled {plan.range} ({plan.rows} rows) → {dest}", file=sys.stderr)
    return print_recalc_outcome(report)


def _fill(args) -> int:
    from ..engine.fill import fill_workbook

    column = parse_column(args.column)
    rows = parse_rows(args.rows) if args.rows else None
    plan, dest, report = _run(lambda: fill_workbook(
        args.book, args.sheet, column, args.formula, rows=rows, header=args.header, output=args.output,
        in_place=args.in_place, backup=args.backup, overwrite=args.overwrite, replace=args.replace,
        same_formula=args.same_formula))
    return _print_outcome(plan, dest, report)


def _bands(args) -> int:
    from ..engine.fill import bands_formula, fill_workbook, first_free_column

    formula, sheet, r1, r2 = _run(lambda: bands_formula(args.scores, args.sd, args.reliability, args.confidence))
    if args.into:
        column = parse_column(args.into)
    else:
        column = _run(lambda: first_free_column(args.book, sheet))
    plan, dest, report = _run(lambda: fill_workbook(
        args.book, sheet, column, formula, rows=(r1, r2), header=args.header, output=args.output,
        in_place=args.in_place, backup=args.backup, overwrite=args.overwrite, replace=args.replace, tag="bands"))
    return _print_outcome(plan, dest, report)


def register(sub) -> None:
    p = sub.add_parser(
        "fill", help="write a formula down a table column, then recalculate",
        description="Write FORMULA into every data row of a column ({row} becomes the row number), add an "
                    "optional header styled like its neighbour, then recalculate so the file shows the values. The "
                    "formula is checked first as `trueband check` does (unknown names, argument counts); ';' between "
                    "arguments is read as ','. "
                    "Nothing else in the workbook changes. Default output: BOOK.filled.xlsx beside the input "
                    "(BOOK.filled-2.xlsx when the input is BOOK.filled.xlsx, and so on).")
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
                    "holds the highest scores. --sd, --reliability and --confidence take a number or a cell. "
                    "Default output: BOOK.bands.xlsx beside the input (BOOK.bands-2.xlsx when the input is "
                    "BOOK.bands.xlsx, and so on).")
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
