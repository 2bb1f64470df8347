"""Bands: one row per person (score, confidence interval, band, pass/fail at the cut, criterion, group, hired),
and beside those rows the sliding band from the top score with its caution.

Its layout (which column holds what) is known from the data alone, before any sheet is written, since the
Setup, Reliability, Validity, Impact and Utility sheets read its columns; its rows are written last, in
streaming mode (see :mod:`..long_sheets`). The sliding band is composed like any sheet (a :class:`..grid.Grid`,
every figure through ``ctx.formula``) and its cells are merged into those rows, right of the per-person columns.
"""

from __future__ import annotations

import dataclasses
import functools
import math
from typing import Any, Iterator, Mapping

import numpy as np
from openpyxl.cell import WriteOnlyCell

from trueband.funcs import call
from trueband.funcs.errors import TruebandError, UnknownFunctionError

from ..context import Ref, StudyContext, area, cell, fill_row, formula_text, sheet_title
from .. import setup_impact
from ..grid import STYLES, Grid
from ..setup import StudyData
from ..words import BANDS_SIDE_NOTE, NOT_COMPUTABLE, SLIDING_BAND_CAUTION
from .scored_items import SCORED_SHEET

__all__ = ["BANDS_SHEET", "BandsLayout", "Bands", "layout", "plan", "sliding_band", "SLIDING_STEPS"]

BANDS_SHEET = "Bands"
#: The column widths of the Bands sheet, from column A.
WIDTHS = (14, 12, 9, 10, 10, 10, 8, 12, 11, 14)
#: The width of a further per-person column (group number, hired, interval note, impact columns).
OTHER_WIDTH = 16
#: The number format of CI lower and CI upper: two decimals shown, the cell keeps every digit.
INTERVAL_FORMAT = "0.00"
#: How many steps of the sliding band are shown.
SLIDING_STEPS = 5
#: The widths of the sliding band's columns (step, top score, floor, people), right of a blank column.
SIDE_WIDTHS = (14, 14, 12, 12)


@dataclasses.dataclass(frozen=True)
class BandsLayout:
    """The Bands sheet's header and the whole-column ranges other sheets read (rows 2 to n + 1)."""

    header: tuple[str, ...]
    last: int                       # the last row (n + 1)
    group_numbers: Mapping[str, int]
    group_col: int | None           # the group number column (1-based), when there is a group column
    hired_col: int | None           # the hired column (1-based), when there is a hired column
    extra: Mapping[str, int] = dataclasses.field(default_factory=dict)  # setup_impact.bands_columns key -> column
    note_col: int | None = None     # the interval note column (1-based), when the possible scores are known

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
    header = ["Applicant", "Group", "Score" if data.items is not None or data.total is not None or data.ratings is None
              else "Score (the raters' mean)",
              "Items answered" if data.items is not None else "Has a score" if data.total is not None or
              data.ratings is None else "Ratings given",
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
    note_col = None
    if _scale_known(data):
        header.append(INTERVAL_NOTE)
        note_col = len(header)
    extra = {}
    for key, heading in setup_impact.bands_columns(data):
        header.append(heading)
        extra[key] = len(header)
    return BandsLayout(tuple(header), data.n + 1, numbers, group_col, hired_col, extra, note_col)


#: The header of the interval note column: what the clipping of CI lower / CI upper means.
INTERVAL_NOTE = ("Interval note (an interval reaching below the lowest or above the highest possible score, "
                 "items × the item scale's ends, is cut there)")


def _scale_known(data: StudyData) -> bool:
    """Whether the lowest and highest possible scores are known: item scores on a known item scale."""
    return data.total is None and data.items is not None and data.item_scale is not None


@dataclasses.dataclass(frozen=True)
class Bands:
    """What the Bands rows need: the layout, the Setup and Reliability cells, and whether bands are computable."""

    layout: BandsLayout
    can_band: bool
    sd: Ref
    reliability: Ref
    confidence: Ref
    cut: Ref
    item_scale: tuple[Any, Any] | None = None  # the item scale's ends (Setup cells, or the numbers found)
    side: Grid | None = None        # the sliding band, in sheet rows and columns (right of the header)

    def rows(self, data: StudyData) -> Iterator[list[Any]]:
        """The rows below the header: formulas as text starting with '='; the sliding band's cells merged in."""
        if self.side is None:
            return _rows(self, data)
        return _with_side(_rows(self, data), self.side)

    @property
    def width(self) -> int:
        """The last column used (the per-person columns, and the sliding band beside them)."""
        return max([len(self.layout.header)] + [c for _, c in (self.side.cells if self.side else ())])

    @property
    def last_row(self) -> int:
        """The last row used (the people's rows, or the sliding band's when it is longer)."""
        return max([self.layout.last] + [r for r, _ in (self.side.cells if self.side else ())])

    def widths(self) -> list[float]:
        """The column widths from column A: the per-person columns, then the sliding band's."""
        n = len(self.layout.header)
        out = [WIDTHS[c] if c < len(WIDTHS) else OTHER_WIDTH for c in range(n)]
        if self.layout.note_col is not None:
            out[self.layout.note_col - 1] = 40
        if self.side is not None:
            out += [4, *SIDE_WIDTHS]
        return out

    def header_height(self) -> float:
        """The height (points) of the header row that shows every wrapped header whole: apps do not all grow a
        row to fit wrapped text when they open a file."""
        widths = self.widths()
        lines = max(math.ceil(len(h) / max(1.0, widths[c] - 1)) for c, h in enumerate(self.layout.header))
        return 15.0 * max(1, lines)

    def styles(self, ws) -> "BandStyles":
        """The style indexes of the spliced rows, registered in ``ws``'s workbook: CI lower and upper at two
        decimals (the values keep every digit), the sliding band's cells as composed."""
        ids: dict[str, int] = {}

        def style_id(style: str) -> int:
            if style not in ids:
                c = WriteOnlyCell(ws)
                for attr, val in STYLES[style].items():
                    setattr(c, attr, val)
                ids[style] = c.style_id
            return ids[style]

        interval = WriteOnlyCell(ws)
        interval.number_format = INTERVAL_FORMAT
        columns = {4: interval.style_id, 5: interval.style_id} if self.can_band else {}
        cells = {(r, c - 1): style_id(st) for (r, c), (_, st) in (self.side.cells.items() if self.side else ())
                 if st is not None}
        return BandStyles(columns, cells, self.layout.last)


class BandStyles(Mapping):
    """(sheet row, 0-based column) -> style index of the spliced Bands rows: whole columns of the people's rows
    (the interval limits) and single cells (the sliding band), without a per-cell table for the columns."""

    def __init__(self, columns: Mapping[int, int], cells: Mapping[tuple[int, int], int], last: int):
        self.columns, self.cells, self.last = columns, cells, last

    def __getitem__(self, key):
        if key in self.cells:
            return self.cells[key]
        r, c = key
        if 2 <= r <= self.last and c in self.columns:
            return self.columns[c]
        raise KeyError(key)

    def __contains__(self, key):
        return key in self.cells or (2 <= key[0] <= self.last and key[1] in self.columns)

    def __iter__(self):
        yield from self.cells
        for r in range(2, self.last + 1):
            for c in self.columns:
                if (r, c) not in self.cells:
                    yield (r, c)

    def __len__(self):
        return sum(1 for _ in self)

    def __bool__(self):  # the writer asks for every cell: never count the cells for that
        return bool(self.cells or self.columns)


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
    item_scale = None
    if layout.note_col is not None:
        d = ctx.data
        item_scale = (setup.item_min, setup.item_max) if d.item_scale_given else d.item_scale
        if can_band:
            _note_clipped(ctx, d, rel)
    side = None
    scores = ctx.data.scores[~np.isnan(ctx.data.scores)]
    if can_band and scores.size:
        side = Grid(sheet_title(BANDS_SHEET))
        col = len(layout.header) + 2
        side.set(2, col, "Sliding band from the top score", "heading")
        row = 3 + side.para(3, col, BANDS_SIDE_NOTE, width=60)
        row = sliding_band(ctx, side, row, col, layout.scores, rel.sd, rel.reliability, setup.confidence, scores)
        side.para(row + 1, col, SLIDING_BAND_CAUTION, "caution", width=60)
    return Bands(layout, can_band, rel.sd, rel.reliability, setup.confidence, setup.cut_cell, item_scale, side)


def sliding_band(ctx: StudyContext, g: Grid, row: int, col: int, scores_ref: Ref, sd: Ref, reliability: Ref,
                 confidence: Ref, scores: np.ndarray) -> int:
    """The first steps of a sliding band from the top score down (BAND_FLOOR) at (row, col) of ``g``: a header
    row, then one row per step; returns the next free row. ``scores`` are the scores as built (for the checks)."""
    for k, h in enumerate(("Step (all at the previous top chosen)", "Top score still in contention",
                           "Band floor", "People in the band")):
        g.set(row, col + k, h, "header")
    distinct = np.unique(scores)[::-1]
    top: Ref | None = None
    steps = min(SLIDING_STEPS, distinct.size)
    for step in range(1, steps + 1):
        r = row + step
        g.set(r, col, step, "count")
        value = float(distinct[step - 1])
        if top is None:
            top = ctx.formula(g, r, col + 1, "MAX", scores_ref, check=lambda v=value: v, style="score")
        else:
            top = ctx.expression(g, r, col + 1, 'LARGE({scores},COUNTIF({scores},">="&{top})+1)',
                                 lambda v=value: v, style="score", scores=scores_ref, top=top)
        floor = ctx.formula(g, r, col + 2, "BAND_FLOOR", top, sd, reliability, confidence, style="score",
                            key=f"band_floor_{step}")
        if isinstance(floor.value, float):
            inside = int(((scores >= floor.value) & (scores <= value)).sum())
            ctx.expression(g, r, col + 3, 'COUNTIFS({scores},">="&{floor},{scores},"<="&{top})', lambda n=inside: n,
                           style="count", scores=scores_ref, floor=floor, top=top)
        else:
            ctx.not_computable_at(g, r, col + 3, "the band floor is not computable")
    return row + steps + 1


def _with_side(rows: Iterator[list[Any]], side: Grid) -> Iterator[list[Any]]:
    """``rows`` (sheet rows from 2) with the cells of ``side`` put in their columns; rows added below the
    people's rows while the side block goes on."""
    by_row: dict[int, dict[int, Any]] = {}
    for (r, c), (v, _) in side.cells.items():
        by_row.setdefault(r, {})[c] = v
    last = max(by_row)
    r = 1
    for r, row in enumerate(rows, start=2):
        yield _put_side(row, by_row.get(r))
    for r in range(r + 1, last + 1):
        yield _put_side([], by_row.get(r))


def _put_side(row: list[Any], here: dict[int, Any] | None) -> list[Any]:
    if not here:
        return row
    row = list(row) + [None] * (max(here) - len(row))
    for c, v in here.items():
        row[c - 1] = v
    return row


def _note_clipped(ctx: StudyContext, d: StudyData, rel) -> None:
    """A Notes line saying how many intervals reach past the possible scores (as built; the sheet is live)."""
    k, (lo, hi) = len(d.item_columns), d.item_scale
    try:
        half = call("SCORE_CI", 0.0, ctx.value(rel.sd), ctx.value(rel.reliability), "upper", ctx.setup.confidence)
    except (TruebandError, TypeError):
        return
    scores = d.scores[~np.isnan(d.scores)]
    low, high = np.minimum(k * lo, scores), np.maximum(k * hi, scores)
    cut = int(((scores - half < low) | (scores + half > high)).sum())
    if cut:
        ctx.notes.append(f"{cut} score interval(s) on the Bands sheet reach below the lowest possible score, "
                         f"{k * lo:g}, or above the highest, {k * hi:g} ({k} items × the item scale's ends): they are "
                         f"cut at those scores and marked in the interval note column.")


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
    elif "total" not in data.columns:  # a panel of ratings only: the score is the raters' mean
        ratings = area(data.sheet, data.rating_columns[0] + 1, None, data.rating_columns[-1] + 1, None)
        ratings = ratings.qualified_relative()
        score_text = here('=IF(COUNT({ratings})=0,"",AVERAGE({ratings}))', ratings=ratings)
        count_text = here("=COUNT({ratings})", ratings=ratings)
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
        if bands.item_scale is not None:
            band_texts += [_clipped_interval(here, bands, data, score)]
            band_texts[:2] = _clipped_limits(here, bands, data, band_texts[0], band_texts[1], score)
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
    extra_row = setup_impact.bands_rows(data, bands.layout)
    for i in range(data.n):
        r = i + 2
        row: list[Any] = [fill_row(id_text, r) if id_text is not None else data.ids[i],
                          # the group as counted: labels differing only in case or spacing are one group
                          data.groups[i] if "group" in data.columns else None,
                          fill_row(score_text, r), fill_row(count_text, r)]
        if bands.can_band:
            row += [fill_row(x, r) for x in band_texts[:3]]
        else:
            row += [na_band, None, None]
        row.append(fill_row(selected_text, r))
        if data.criterion is not None:
            row += [fill_row(x, r) for x in criterion_texts]
        if bands.layout.group_col is not None:
            row.append(group_numbers.get(data.groups[i]))
        if data.hired_codes is not None:
            row.append(None if data.hired_codes[i] is None else int(data.hired_codes[i]))
        if bands.layout.note_col is not None:
            row.append(fill_row(band_texts[3], r) if bands.can_band else None)
        if extra_row is not None:
            row += extra_row(i)
        yield row


def _possible(here, bands: Bands, data: StudyData, score: Ref) -> tuple[str, str]:
    """Formula text of the lowest and highest possible score for the person (items × the scale's ends; never past
    the person's own score, which blank items, counted 0, or a value outside the scale may put outside)."""
    k = len(data.item_columns)
    lo, hi = bands.item_scale
    if isinstance(lo, Ref):  # the Setup cells: editing the scale there moves the cut
        return (here("MIN({k}*{lo},{score})", k=k, lo=lo, score=score),
                here("MAX({k}*{hi},{score})", k=k, hi=hi, score=score))
    return here("MIN({low},{score})", low=k * lo, score=score), here("MAX({high},{score})", high=k * hi, score=score)


def _clipped_limits(here, bands: Bands, data: StudyData, lower: str, upper: str, score: Ref) -> list[str]:
    """CI lower and CI upper cut at the lowest and highest possible score."""
    low, high = _possible(here, bands, data, score)
    return [f"MAX({low},{lower})", f"MIN({high},{upper})"]


def _clipped_interval(here, bands: Bands, data: StudyData, score: Ref) -> str:
    """The interval note: which end of the interval was cut at a possible score, or empty text.

    It compares the row's CI lower and CI upper cells with the possible scores, standard functions only: a
    spreadsheet app that does not know trueband's functions recomputes a formula cell holding empty text on
    opening, and would show ``#NAME?`` there."""
    low, high = _possible(here, bands, data, score)
    lower, upper = (here("{limit}", limit=cell(BANDS_SHEET, None, c)) for c in (5, 6))
    below, above = f"{lower}<={low}", f"{upper}>={high}"
    return (f'IF({below},IF({above},"cut at both possible ends","cut at the lowest possible score"),'
            f'IF({above},"cut at the highest possible score",""))')
