"""Writing the validation-study workbook: the pipeline of its sheets.

:func:`make_study` reads a data workbook (:mod:`.setup`), writes a new workbook with a copy of the data
and the analysis sheets, recalculates it with :func:`trueband.bridge.engine.recalc.recalculate` so every
cell carries its value, and only then moves it to the output path (a failure at any point leaves no file).

Every number on the analysis sheets is a live formula over the copy of the data: the registered functions
(``=CRONBACH_ALPHA(...)``) or standard spreadsheet functions (``=STDEV(...)``). Before a formula is written,
the same function is called here on the same data (:meth:`.context.StudyContext.formula`); when it cannot be
computed (an all-blank criterion, one group only, a cut that passes everyone...) the cell gets the text
``not computable: <reason>`` instead of a formula that would only show an error code.

Sheets (one module each in :mod:`.sheets`): Summary, Reliability, Items, Raters, Validity, Bands, Impact,
Utility, Notes, Setup (the settings used; the numbers on it are inputs the formulas read), Scored items
(when some items are reverse keyed), and the copy of the data sheet under its own name. :func:`plan`
writes them in the order their arguments need.
"""

from __future__ import annotations

import dataclasses
import time
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from ..workbook.files import private_temporary, replacing
from . import sheets
from .context import StudyContext
from .data_workbook import read_study_data
from .setup import SETUP_SHEET, SetupError, StudyData
from .setup_answers import ANSWERS_SHEET
from .sheets.bands import Bands
from .sheets.scored_items import SCORED_SHEET
from .sheets.setup import SetupSheet
from .workbook import ANALYSIS_SHEETS, save
from .words import CAUTION, NOT_COMPUTABLE

__all__ = ["StudyError", "StudyResult", "build_study", "make_study", "plan", "CAUTION", "NOT_COMPUTABLE",
           "ANALYSIS_SHEETS"]

#: Up to this many cells in the item (or rating) range, every range function is called once while the
#: study is built, to mark what cannot be computed; above it only cheap numpy checks are made.
FULL_CHECK_CELLS = 400_000


class StudyError(Exception):
    """The study cannot be built; nothing was written."""


@dataclasses.dataclass
class StudyResult:
    """Where the study went and where its headline numbers are (sheet, coordinate)."""

    path: Path
    cells: dict[str, tuple[str, str]]
    not_computable: list[tuple[str, str, str]]   # (sheet, coordinate, reason)
    recalc_report: Any = None
    timings: dict[str, float] = dataclasses.field(default_factory=dict)
    notes: list[str] = dataclasses.field(default_factory=list)
    problems: list[str] = dataclasses.field(default_factory=list)  # doubtful data cells, one line each
    cut_message: str | None = None  # why nobody passes the cut, when nobody does


def plan(ctx: StudyContext) -> tuple[SetupSheet, Bands]:
    """Compose every sheet, each from what the sheets before it publish; returns what :func:`.workbook.save`
    needs besides the composed sheets."""
    _check_layout(ctx.data)
    layout = sheets.bands.layout(ctx.data)
    setup = sheets.setup.write(ctx, layout.criterion)
    rel = sheets.reliability.write(ctx, setup, layout)
    bands = sheets.bands.plan(ctx, layout, setup, rel)
    sheets.items.write(ctx, setup, rel)
    options = sheets.distractors.write(ctx, rel)
    raters = sheets.raters.write(ctx, setup)
    validity = sheets.validity.write(ctx, setup, rel, layout)
    impact = sheets.impact.write(ctx, setup, rel, layout)
    strata = sheets.strata.write(ctx, setup, impact, layout)
    utility = sheets.utility.write(ctx, setup, layout, validity)
    sheets.groups.write(ctx, setup, impact, layout)
    sheets.stages.write(ctx, setup, impact, layout)
    sheets.cuts.write(ctx, setup, impact, layout, utility)
    ctx.predictors = [sheets.predictors.first(ctx, setup, rel, bands, validity),
                      *sheets.predictors.write(ctx, setup, _full_checks)]
    bias = []
    for predictor in ctx.predictors:  # each predictor's Fairness and DIF sheets, under its sheet titles
        with predictor.sheets(ctx, _full_checks(predictor.data)) as pctx:
            bias.append((predictor, sheets.fairness.write(pctx, predictor), sheets.dif.write(pctx, predictor)))
    combined = sheets.combined.write(ctx, ctx.predictors)
    cut_score = sheets.cut_score.write(ctx, setup, rel, impact)
    standard = sheets.judges.write(ctx, setup, rel, layout)
    content = sheets.content.write(ctx)
    sheets.summary.write(ctx, setup, rel, raters, validity, impact, utility, strata, combined, cut_score=cut_score,
                         standard=standard, content=content, options=options, bias=bias)
    sheets.notes.write(ctx, impact)
    return setup, bands


def _check_layout(d: StudyData) -> None:
    for role, cols in (("item columns", d.item_columns), ("rating columns", d.rating_columns)):
        for a, b in zip(cols, cols[1:]):
            if b != a + 1:
                raise SetupError(f"{role}: the columns must stand side by side on sheet '{d.sheet}'; "
                                 f"{d.header[b]!r} does not follow {d.header[a]!r}")
    taken = {t.lower() for t in ANALYSIS_SHEETS} | {SETUP_SHEET.lower(), SCORED_SHEET.lower(), ANSWERS_SHEET.lower()}
    if d.sheet.lower() in taken:
        raise SetupError(f"the data sheet is called '{d.sheet}', a name the study uses for one of its own "
                         f"sheets; rename it (e.g. 'Candidates')")


def _full_checks(data: StudyData) -> bool:
    """Whether every range function is checked by calling it: small data, or data the functions may refuse."""
    return (data.n * max(len(data.item_columns), len(data.rating_columns), 1) <= FULL_CHECK_CELLS
            or _degenerate(data.items) or _degenerate(data.ratings))


def _degenerate(x: np.ndarray | None) -> bool:
    """Too few complete rows, or a column that does not vary: the range functions may refuse these."""
    if x is None:
        return False
    complete = x[~np.isnan(x).any(axis=1)]
    return complete.shape[0] < 3 or bool((np.ptp(complete, axis=0) == 0).any())


def build_study(data: StudyData, path: str | Path) -> StudyResult:
    """Write the (not yet recalculated) study workbook for checked ``data`` to ``path``."""
    ctx = StudyContext(data, full_checks=_full_checks(data))
    setup, bands = plan(ctx)
    save(ctx, setup, bands, Path(path))
    return StudyResult(path=Path(path), cells=ctx.cells, not_computable=ctx.not_computable,
                       notes=ctx.notes, problems=list(data.problems), cut_message=setup.cut_message)


def make_study(data_path: str | Path, out_path: str | Path, overrides: Mapping[str, Any] | None = None, *,
               overwrite: bool = False, progress=None) -> StudyResult:
    """Read, check, build and recalculate; the output appears only when it is complete."""
    out = Path(out_path)
    src = Path(data_path)
    if out.suffix.lower() != ".xlsx":
        raise StudyError(f"the study is an .xlsx workbook; give an output name ending in .xlsx, got {out.name}")
    if out.exists() and not overwrite:
        raise StudyError(f"{out} already exists; give another name or --overwrite")
    if out.resolve() == src.resolve():
        raise StudyError("the study must be a new workbook, not the data workbook itself")
    if not out.parent.exists():
        raise StudyError(f"the folder {out.parent} does not exist")
    from ..engine.recalc import recalculate  # the engine loads only when a study is made

    timings = {}
    t0 = time.perf_counter()
    data = read_study_data(src, overrides)
    timings["read"] = time.perf_counter() - t0
    # Both intermediate files are private temporaries beside the output (removed by the next run of
    # any command in the folder should this one be killed); the study takes the data workbook's permissions.
    with replacing(out, like=src, suffix=".xlsx") as done:
        raw = private_temporary(out.parent, "study-raw", ".xlsx")
        try:
            t0 = time.perf_counter()
            result = build_study(data, raw)
            timings["build"] = time.perf_counter() - t0
            t0 = time.perf_counter()
            done.unlink()
            try:
                report = recalculate(raw, done, progress=progress)
            except Exception as exc:  # the engine's own failures end the command cleanly; nothing is kept
                raise StudyError(f"the recalculation of the new study failed ({type(exc).__name__}: {exc})") from exc
            timings["recalculate"] = time.perf_counter() - t0
        finally:
            raw.unlink(missing_ok=True)
    result.path = out
    result.recalc_report = report
    result.timings = timings
    return result
