"""What every command module shares: exit codes, the one-line error, the output options, the recalculation outcome."""

from __future__ import annotations

import argparse
import sys

EXIT_OK = 0
EXIT_CELL_ERRORS = 1
EXIT_FAILED = 2
EXIT_INTERRUPTED = 130

#: Rows of the error table printed before "... and N more".
TABLE_LIMIT = 50


class CommandError(Exception):
    """A problem that ends a command with one clear line and exit status 2."""


def add_output_options(parser: argparse.ArgumentParser) -> None:
    """The output options every command that writes a workbook takes (same words everywhere)."""
    parser.add_argument("-o", "--output", help="where to write (default: a new file beside the input)")
    parser.add_argument("--overwrite", action="store_true", help="allow replacing an existing output file")
    parser.add_argument("--in-place", action="store_true",
                        help="replace the input, only once the new file is complete and re-opens cleanly")
    parser.add_argument("--backup", action="store_true", help="with --in-place, keep the original as BOOK.backup.xlsx "
                             "(BOOK.backup-2.xlsx, -3, ... when that exists: a backup is never overwritten)")


def error_table(errors, limit: int = TABLE_LIMIT) -> str:
    """The compact table of error cells: sheet!cell, function, message."""
    rows = [(f"{e.sheet}!{e.cell}", e.function or "-", f"{e.code}  {e.message}") for e in errors[:limit]]
    if not rows:
        return ""
    w1 = max(len("cell"), *(len(r[0]) for r in rows))
    w2 = max(len("function"), *(len(r[1]) for r in rows))
    lines = [f"{'cell':<{w1}}  {'function':<{w2}}  message"]
    lines += [f"{a:<{w1}}  {b:<{w2}}  {c}" for a, b, c in rows]
    if len(errors) > limit:
        lines.append(f"... and {len(errors) - limit} more error cells")
    return "\n".join(lines)


def print_recalc_outcome(report) -> int:
    """The outcome of a recalculation (a ``RecalcReport``, or None when there was none) and its exit code.

    The error cells as a table on stdout; circular references and the one-line summary on stderr.
    """
    if report is None:
        return EXIT_OK
    if report.errors:
        print(error_table(report.errors))
    for cycle in report.cycles:
        print(f"circular reference (not iterated): {' → '.join(cycle + cycle[:1])}", file=sys.stderr)
    print(report.summary(), file=sys.stderr)
    return EXIT_OK if report.ok else EXIT_CELL_ERRORS
