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

__all__ = ["PLACEHOLDER_MARK", "SECTIONS", "NotRecalculated", "ReportError", "write_report"]


class ReportError(Exception):
    """The study cannot be reported (one line says why)."""


def write_report(study: str | os.PathLike, out: str | os.PathLike, *, version: str) -> Path:
    """Write the report of the study workbook ``study`` to ``out`` (replaced atomically); return ``out``."""
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
        compose(content, tmp, version=version)
    return out
