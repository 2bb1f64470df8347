"""The validation report: a word-processing document written from a saved, recalculated study workbook.

:func:`write_report` reads the study's stored values (never recomputing them), lays them out under the
headings a validation report needs (see :mod:`.plan`), with each number's cell beside it, and marks every
part only a person can write.
"""

from __future__ import annotations

import os
from pathlib import Path

from ...workbook.files import replacing
from ..workbook import ANALYSIS_SHEETS
from .plan import PLACEHOLDER_MARK, SECTIONS
from .read import NotRecalculated, read_study

__all__ = ["CHARTS_NOTE", "PLACEHOLDER_MARK", "SECTIONS", "NotRecalculated", "ReportError", "charts_drawable",
           "write_report"]

#: what the command says once when the charts are described instead of drawn
CHARTS_NOTE = ('the charts are named in the report (sheet and cells), not drawn: install the charts extra '
               '(pip install "trueband[charts]") and write the report again to draw them')


def charts_drawable() -> bool:
    """Whether the report can draw the study's charts (matplotlib, the ``charts`` extra, is installed)."""
    from .draw import available

    return available()


class ReportError(Exception):
    """The study cannot be reported (one line says why)."""


def write_report(study: str | os.PathLike, out: str | os.PathLike, *, version: str, charts: bool = True) -> Path:
    """Write the report of the study workbook ``study`` to ``out`` (replaced atomically); return ``out``.

    The study's charts are drawn as images when ``charts`` and matplotlib is installed; otherwise the report says
    on which sheet and from which cells each chart is."""
    from .document import compose  # python-docx is loaded only when a report is written

    study, out = Path(study), Path(out)
    try:
        content = read_study(study, ANALYSIS_SHEETS)
    except NotRecalculated as e:
        raise ReportError(f"{study.name}: cell {e} has a formula without a stored value: the study was never "
                          f"recalculated; run: trueband recalc {study.name} --all --in-place, then report "
                          "again") from None
    except ValueError as e:
        raise ReportError(f"{study.name}: {e}") from None
    with replacing(out, suffix=".docx") as tmp:   # private until renamed; a killed run's copy is cleaned later
        compose(content, tmp, version=version, charts=charts)
    return out
