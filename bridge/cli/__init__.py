"""The ``trueband`` command.

Each group of subcommands lives in its own module with a ``register(subparsers)``
function that adds its parsers and sets ``handler`` on each (command modules
share :mod:`.common` and never import each other); this module only assembles
them and maps outcomes to exit codes that scripts can rely on:

====  ===========================================================
code  meaning
====  ===========================================================
0     done; every value computed
1     done, but some values are spreadsheet errors (listed)
2     nothing done: bad usage or unusable input (one line says why)
130   interrupted (Ctrl-C); inputs are left as they were
====  ===========================================================

No command ends in a traceback: an unexpected problem is one line and code 2
(set ``TRUEBAND_TRACEBACK=1`` to see the traceback when reporting it).
"""

from __future__ import annotations

import argparse
import importlib
import os
import sys
import textwrap

from .common import EXIT_CELL_ERRORS, EXIT_FAILED, EXIT_INTERRUPTED, EXIT_OK, CommandError, add_output_options  # noqa: F401


#: (command module, its function that adds subcommands), in the order the commands appear in ``--help``
#: (``restore`` lives with ``recalc`` and ``check`` and is listed after ``fill`` and ``bands``, as always).
COMMAND_REGISTRATIONS = (
    ("trueband.bridge.cli.functions", "register"),   # functions, eval
    ("trueband.bridge.cli.serve", "register"),       # serve
    ("trueband.bridge.cli.recalc", "register"),      # recalc, check
    ("trueband.bridge.cli.fill", "register"),        # fill, bands
    ("trueband.bridge.cli.recalc", "register_restore"),  # restore
    ("trueband.bridge.cli.study", "register"),       # study, demo
    ("trueband.bridge.cli.report", "register"),      # report
    ("trueband.bridge.cli.addin", "register"),       # addin
)


class _VersionAction(argparse.Action):
    """``--version``, reading the version only when asked."""

    def __init__(self, option_strings, dest=argparse.SUPPRESS, default=argparse.SUPPRESS, help=None):
        super().__init__(option_strings=option_strings, dest=dest, default=default, nargs=0, help=help)

    def __call__(self, parser, namespace, values, option_string=None):
        from trueband.funcs import __version__

        print(f"trueband {__version__}")
        parser.exit()


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="trueband",
        description="Tested reliability, validity, score-band, cut-score and adverse-impact functions "
                    "for hiring-test spreadsheets. The figures are statistical indicators to support "
                    "professional judgment, not legal findings.")
    parser.add_argument("--version", action=_VersionAction, help="show the version and exit")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True
    for module, function in COMMAND_REGISTRATIONS:
        getattr(importlib.import_module(module), function)(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.handler(args) or EXIT_OK)
    except CommandError as exc:
        print(f"trueband {args.command}: {exc}", file=sys.stderr)
        return EXIT_FAILED
    except BrokenPipeError:  # output piped into `head` and the like
        sys.stderr.close()
        return EXIT_OK
    except KeyboardInterrupt:
        print(f"trueband {args.command}: interrupted; inputs are unchanged", file=sys.stderr)
        return EXIT_INTERRUPTED
    except Exception as exc:  # never a traceback: one line, exit 2 (TRUEBAND_TRACEBACK=1 shows it)
        if os.environ.get("TRUEBAND_TRACEBACK"):
            raise
        print(f"trueband {args.command}: {_one_line(exc)}", file=sys.stderr)
        return EXIT_FAILED


def _raised_reading_a_workbook(exc: BaseException) -> bool:
    """True when the innermost frame of ``exc`` is in the package layer (``bridge/workbook``), which reads files."""
    import traceback
    from pathlib import Path

    frames = traceback.extract_tb(exc.__traceback__)
    if not frames:
        return False
    workbook_layer = Path(__file__).resolve().parent.parent / "workbook"
    return Path(frames[-1].filename).resolve().parent == workbook_layer


def _one_line(exc: Exception) -> str:
    """What an unexpected exception says, in one line: the project's message, a file problem, or a bug."""
    from trueband.funcs.errors import TruebandError

    if isinstance(exc, TruebandError):
        return exc.message
    if isinstance(exc, OSError):
        where = f" ({exc.filename})" if exc.filename else ""
        return f"cannot use a file{where}: {exc.strerror or exc}"
    if isinstance(exc, MemoryError):
        return "not enough memory for this work"
    text = textwrap.shorten(str(exc), 300, placeholder=" …") or "no message"
    if isinstance(exc, ValueError) and _raised_reading_a_workbook(exc):
        # what the package layer cannot read in a part (a malformed sheet) is a problem with the file
        return (f"the workbook cannot be read ({text}); the file is damaged or in a form trueband does not "
                f"read: open and save it in a spreadsheet app, then try again")
    return (f"stopped by an unexpected problem ({type(exc).__name__}: {text}). "
            f"This is a fault in trueband: please report it (TRUEBAND_TRACEBACK=1 shows the details)")


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
