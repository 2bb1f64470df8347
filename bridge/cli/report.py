"""``trueband report``: a validation report document from a saved, recalculated study workbook."""

from __future__ import annotations

import sys
from pathlib import Path

from .common import EXIT_OK, CommandError


def register(sub) -> None:
    p = sub.add_parser(
        "report", help="write a validation report (.docx) from a study workbook",
        description="Write a word-processing document (.docx, opened by LibreOffice Writer and other word "
                    "processors) from a study workbook that trueband study wrote and that holds its values: the "
                    "headings a validation report needs, every number read from the study with its cell beside "
                    "it, and marked places for what only the study's author can write.")
    p.add_argument("study", help="the study workbook (.xlsx), recalculated")
    p.add_argument("-o", "--output", help="the report to write (default: STUDY-report.docx beside it)")
    p.add_argument("--overwrite", action="store_true", help="replace the output if it exists")
    p.set_defaults(handler=run_report)


def run_report(args) -> int:
    from trueband.funcs import __version__

    from ..study.report import CHARTS_NOTE, ReportError, charts_drawable, write_report

    study = Path(args.study)
    if not study.is_file():
        raise CommandError(f"{study}: no such file")
    out = Path(args.output) if args.output else study.with_name(study.stem + "-report.docx")
    if out.suffix.lower() != ".docx":
        raise CommandError(f"{out}: the report is a .docx document; give an output name ending in .docx")
    if out.exists() and not args.overwrite:
        raise CommandError(f"{out} exists; give another --output or add --overwrite to replace it")
    if not out.parent.is_dir():
        raise CommandError(f"{out.parent}: no such folder")
    try:
        write_report(study, out, version=__version__)
    except ReportError as e:
        raise CommandError(str(e)) from None
    print(f"wrote {out}")
    if not charts_drawable():
        print(f"note: {CHARTS_NOTE}", file=sys.stderr)
    return EXIT_OK
