"""Bands: one row per person (score, confidence interval, band, pass/fail at the cut, criterion, group, hired).

Its layout (which column holds what) is known from the data alone, before any sheet is written, since the
Setup, Reliability, Validity, Impact and Utility sheets read its columns; its rows are written last, in
streaming mode (see :mod:`..long_sheets`).
"""

from __future__ import annotations

import dataclasses
import functools
from typing import Any, Iterator, Mapping

import numpy as np

from trueband.funcs import call
from trueband.funcs.errors import TruebandError, UnknownFunctionError

from ..context import Ref, StudyContext, area, cell, fill_row, formula_text
from ..setup import StudyData
from ..words import NOT_COMPUTABLE
from .scored_items import SCORED_SHEET

__all__ = ["BANDS_SHEET", "BandsLayout", "Bands", "layout", "plan"]

BANDS_SHEET = "Bands"
#: The column widths of the Bands sheet, from column A.
WIDTHS = (14, 12, 9, 10, 10, 10, 8, 12, 11, 14)


@dataclasses.dataclass(frozen=True)
class BandsLayout:
    """The Bands sheet's header and the whole-column ranges other sheets read (rows 2 to n + 1)."""

    header: tuple[str, ...]
    last: int                       # the last row (n + 1)
    group_numbers: Mapping[str, int]
    group_col: int | None           # the group number column (1-based), when there is a group column
    hired_col: int | None           # the hired column (1-based), when there is a hired column

    def column(self, col: int) -> Ref:
        return area(BANDS_SHEET, col, 2, col, self.last)

    @property
    def scores(self) -> Ref:
        return self.column(3)

    @property
    def answered(self) -> Ref:
        return self.column(4)

    @property
    def selected(self) -> Ref:
        return self.column(8)

    @property
    def criterion(self) -> Ref:
        return self.column(9)

    @property
    def scores_with_criterion(self) -> Ref:
        return self.column(10)

    @property
    def group_numbers_range(self) -> Ref:
        return self.column(self.group_col)

    @property
    def hired(self) -> Ref:
        return self.column(self.hired_col)


def layout(data: StudyData) -> BandsLayout:
    header = ["Applicant", "Group", "Score", "Items answered" if data.items is not None else "Has a score",
              "CI lower", "CI upper", "Band", "At or above cut (1 = yes)"]
    if data.criterion is not None:
        header += ["Criterion", "Score of people with a criterion value"]
    # the study's reading of two label columns, as numbers the counts can match exactly (a
    # spreadsheet's COUNTIF would treat a label such as "<40" or "A*" as a condition)
    numbers = {name: k + 1 for k, name in enumerate(data.group_tally.names)} if data.group_tally else {}
    group_col = hired_col = None
    if data.group_tally is not None:
        header.append("Group number (as counted on Impact)")
        group_col = len(header)
    if data.hired is not None:
        header.append("Hired (1 = yes, as read from the hired column)")
        hired_col = len(header)
    return BandsLayout(tuple(header), data.n + 1, numbers, group_col, hired_col)


@dataclasses.dataclass(frozen=True)
class Bands:
    """What the Bands rows need: the layout, the Setup and Reliability cells, and whether bands are computable."""

    layout: BandsLayout
    can_band: bool
    sd: Ref
    reliability: Ref
    confidence: Ref
    cut: Ref

    def rows(self, data: StudyData) -> Iterator[list[Any]]:
        """The rows below the header: formulas as text starting with '='."""
        return _rows(self, data)


def plan(ctx: StudyContext, layout: BandsLayout, setup, rel) -> Bands:
    """Decide whether the bands are computable (they need the SEM), noting why not."""
    sem = rel.sem.value
    can_band = isinstance(sem, float)
    if not can_band:
        ctx.notes.append("Confidence intervals and bands are not computable: " + (
            sem.message if isinstance(sem, TruebandError) else "no SEM"))
    else:
        scores = ctx.data.scores
        has_score = ~np.isnan(scores)
        try:
            call("SCORE_BAND", float(scores[has_score][0]), scores[has_score], ctx.value(rel.sd),
                 ctx.value(rel.reliability), ctx.setup.confidence)
        except UnknownFunctionError:
            pass
        except TruebandError as exc:
            can_band = False
            ctx.notes.append(f"Bands are not computable: {exc.message}")
    return Bands(layout, can_band, rel.sd, rel.reliability, setup.confidence, setup.cut_cell)


def _rows(bands: Bands, data: StudyData) -> Iterator[list[Any]]:
    here = functools.partial(formula_text, on=BANDS_SHEET)
    guard = not (~np.isnan(data.scores)).all()
    id_col = data.columns.get("id")
    score, answered, criterion_here = (cell(BANDS_SHEET, None, c) for c in (3, 4, 9))
    id_text = (here("={person_id}", person_id=cell(data.sheet, None, id_col + 1).qualified_relative())
               if id_col is not None else None)
    if data.items is not None:
        if data.scored_sheet:  # the scores after reverse keying, or of raw answers
            items = area(SCORED_SHEET, 1, None, len(data.item_columns), None)
        else:
            items = area(data.sheet, data.item_columns[0] + 1, None, data.item_columns[-1] + 1, None)
        items = items.qualified_relative()
        score_text = here('=IF({answered}=0,"",SUM({items}))' if guard else "=SUM({items})",
                          answered=answered, items=items)
        count_text = here("=COUNT({items})", items=items)
    else:
        total = cell(data.sheet, None, data.columns["total"] + 1).qualified_relative()
        score_text = here('=IF(COUNT({total})=1,{total},"")' if guard else "={total}", total=total)
        count_text = here("=COUNT({total})", total=total)
    if bands.can_band:
        places = dict(score=score, sd=bands.sd, rel=bands.reliability, conf=bands.confidence,
                      scores=area(BANDS_SHEET, 3, 2, 3, bands.layout.last).fixed())
        band_texts = [here('SCORE_CI({score},{sd},{rel},"lower",{conf})', **places),
                      here('SCORE_CI({score},{sd},{rel},"upper",{conf})', **places),
                      here("SCORE_BAND({score},{scores},{sd},{rel},{conf})", **places)]
        if guard:
            band_texts = [here('IF(COUNT({score})=0,"",', score=score) + x + ")" for x in band_texts]
        band_texts = ["=" + x for x in band_texts]
    selected_text = here('=IF(COUNT({score})=0,"",IF({score}>={cut},1,0))' if guard else "=IF({score}>={cut},1,0)",
                         score=score, cut=bands.cut)
    if data.criterion is not None:
        criterion = cell(data.sheet, None, data.columns["criterion"] + 1).qualified_relative()
        # COUNT(x)=1 rather than ISNUMBER(x): the same test, and the recalculation computes it
        # for the whole column at once
        criterion_texts = (here('=IF(COUNT({criterion})=1,{criterion},"")', criterion=criterion),
                           here('=IF(COUNT({score},{criterion})=2,{score},"")', score=score,
                                criterion=criterion_here))
    na_band = NOT_COMPUTABLE + "no SEM (see Reliability)"
    group_numbers = bands.layout.group_numbers
    for i in range(data.n):
        r = i + 2
        row: list[Any] = [fill_row(id_text, r) if id_text is not None else data.ids[i],
                          # the group as counted: labels differing only in case or spacing are one group
                          data.groups[i] if "group" in data.columns else None,
                          fill_row(score_text, r), fill_row(count_text, r)]
        if bands.can_band:
            row += [fill_row(x, r) for x in band_texts]
        else:
            row += [na_band, None, None]
        row.append(fill_row(selected_text, r))
        if data.criterion is not None:
            row += [fill_row(x, r) for x in criterion_texts]
        if bands.layout.group_col is not None:
            row.append(group_numbers.get(data.groups[i]))
        if data.hired_codes is not None:
            row.append(None if data.hired_codes[i] is None else int(data.hired_codes[i]))
        yield row
