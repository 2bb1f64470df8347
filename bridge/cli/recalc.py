"""``trueband recalc`` (evaluate a saved workbook, write the cached values), ``trueband check`` (list likely
mistakes, write nothing) and ``trueband restore`` (put back the formulas ``recalc --values`` replaced)."""

from __future__ import annotations

import sys
import time
from pathlib import Path

from .common import EXIT_CELL_ERRORS, EXIT_FAILED, EXIT_OK, CommandError, add_output_options, print_recalc_outcome

#: Workbook files at least this large (bytes) show a progress bar (when stderr is a terminal).
PROGRESS_THRESHOLD = 1_000_000


class _Progress:
    """A one-line bar on stderr, redrawn at most ten times a second; silent when stderr is not a terminal."""

    def __init__(self, stream=None):
        self.stream = stream or sys.stderr
        self.enabled = self.stream.isatty()
        self.last = 0.0
        self.shown = False

    def __call__(self, stage: str, fraction: float) -> None:
        if not self.enabled:
            return
        now = time.monotonic()
        if now - self.last < 0.1 and fraction < 1.0:
            return
        self.last = now
        width = 30
        filled = int(round(width * max(0.0, min(1.0, fraction))))
        self.stream.write(f"\r{stage:<10} [{'#' * filled}{'.' * (width - filled)}] {fraction * 100:5.1f}%")
        self.stream.flush()
        self.shown = True

    def close(self) -> None:
        if self.shown:
            self.stream.write("\r" + " " * 60 + "\r")
            self.stream.flush()


def _recalc(args) -> int:
    from ..engine.recalc import UnusableWorkbook, recalculate

    if args.backup and not args.in_place:
        print("trueband recalc: --backup goes with --in-place", file=sys.stderr)
        return EXIT_FAILED
    if args.in_place and args.output:
        print("trueband recalc: give either -o/--output or --in-place, not both", file=sys.stderr)
        return EXIT_FAILED
    progress = _Progress()
    try:
        progress.enabled = progress.enabled and Path(args.book).stat().st_size >= PROGRESS_THRESHOLD
    except OSError:
        progress.enabled = False  # a missing file is reported by recalculate
    try:
        report = recalculate(args.book, args.output, in_place=args.in_place, backup=args.backup,
                             all_formulas=args.all, values=args.values, overwrite=args.overwrite,
                             progress=progress if progress.enabled else None)
    except UnusableWorkbook as exc:
        progress.close()
        print(f"trueband recalc: {exc.message}", file=sys.stderr)
        return EXIT_FAILED
    progress.close()
    return print_recalc_outcome(report)


def _check(args) -> int:
    from ..engine.check import check_workbook
    from ..engine.recalc import UnusableWorkbook

    try:
        findings = check_workbook(args.book)
    except UnusableWorkbook as exc:
        print(f"trueband check: {exc.message}", file=sys.stderr)
        return EXIT_FAILED
    for line in findings.lines():
        print(line)
    return EXIT_OK if findings.ok else EXIT_CELL_ERRORS


def _restore(args) -> int:
    from ..engine.values_mode import restore_formulas
    from ..workbook.package import UnusableWorkbook, open_workbook_package
    from ..workbook.save import OutputRefused, PackageChanges, save_workbook

    if args.in_place and args.output:
        raise CommandError("give either -o/--output or --in-place, not both")
    if args.backup and not args.in_place:
        raise CommandError("--backup goes with --in-place")

    try:
        with open_workbook_package(args.book) as pkg:
            changes = PackageChanges()
            report = restore_formulas(pkg, changes)
            out = save_workbook(pkg, changes, output=args.output, in_place=args.in_place, backup=args.backup,
                                overwrite=args.overwrite, tag="restored")
    except UnusableWorkbook as exc:
        raise CommandError(exc.message) from None
    except OutputRefused as exc:
        raise CommandError(str(exc)) from None
    for where, why in report.skipped:
        print(f"{where}: not restored ({why})")
    print(f"restored {report.restored} formula(s) → {out}", file=sys.stderr)
    return EXIT_OK if not report.skipped else EXIT_CELL_ERRORS


def register(sub) -> None:
    p = sub.add_parser(
        "recalc", help="evaluate a saved workbook's formulas and store the values in the file",
        description="Evaluate every formula that uses a trueband function (and every formula that depends on one, "
                    "or has no stored value), and write the values into the workbook as the cells' stored values, "
                    "changing nothing else. Cells whose inputs are out of range get the spreadsheet error code and "
                    "are listed. Exit status: 0 all evaluated, 1 some cells are errors, 2 the workbook could not "
                    "be processed (nothing written).")
    p.add_argument("book", help="the .xlsx or .xlsm workbook")
    add_output_options(p)  # default output: BOOK.recalc.xlsx beside the input
    p.add_argument("--all", action="store_true", help="evaluate every formula in the workbook")
    p.add_argument("--values", action="store_true",
                   help="replace trueband formulas by their values, keeping the formulas in a hidden sheet "
                        "(`trueband restore` puts them back)")
    p.set_defaults(handler=_recalc)

    p = sub.add_parser(
        "check", help="list trueband cells, unknown functions, argument-count mistakes and stray references",
        description="Read a workbook without writing anything and list the cells that use trueband functions "
                    "(cells whose formulas differ only in their constants as one block), unknown function names "
                    "(with a suggestion when one is close), calls with too few or too many arguments, quoted words "
                    "that are not one of an option's words, and references outside the sheet's used range; and, "
                    "apart, standard functions and table references trueband does not evaluate. Exit status 1 "
                    "when a problem is found (the functions trueband does not evaluate are not problems).")
    p.add_argument("book", help="the .xlsx or .xlsm workbook")
    p.set_defaults(handler=_check)


def register_restore(sub) -> None:
    p = sub.add_parser(
        "restore", help="put back the formulas that `recalc --values` replaced by values",
        description="Put every formula recorded in the hidden sheet trueband_formulas back into its cell (beside "
                    "the cell's current value) and remove that sheet. Default output: BOOK.restored.xlsx.")
    p.add_argument("book", help="the .xlsx or .xlsm workbook")
    add_output_options(p)
    p.set_defaults(handler=_restore)
