"""Fairness: differential prediction of the criterion from a predictor's score, group by group (Cleary 1968).

For each demographic column (the study's group column and each of ``group columns``, read through
:func:`demographic_columns`) and each group with enough people who have a score and a criterion value,
against that column's reference group: the
step-down tests (slopes, then intercepts, ``PREDICTION_SLOPE_P`` / ``PREDICTION_INTERCEPT_P``), each group's
line and the common line (``INTERCEPT`` / ``SLOPE`` over the group's own columns, the slope's interval from
``STEYX`` and ``DEVSQ``), and the gap at the cut (``PREDICTION_GAP``), with a chart of one line per group.
Below each group's tests, the reading of the steps in words (a live ``IF`` on the two p values and the
confidence level of Setup: "slopes differ", "intercepts differ" or "no difference detected at this sample
size: this does not show the absence of bias"), which the Summary links.

The people of the compared groups with a score and a criterion value are listed from column T group by group
(their Bands row, score, criterion and group), so each group's line reads its own block of rows; the
step-down tests and the common line read Bands' whole columns (blanks left out), and no column is copied per group;
each further demographic column has its own listing to the right of the one before. The cells of the first
column keep their keys (``fairness_gap_B``); those of the k-th column are keyed ``fairness_colK_gap_B``.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from .. import charts
from ..context import Ref, StudyContext, area, cell, fill_row, sheet_names
from ..words import (CAUTION, FAIRNESS_CAUTION, FAIRNESS_READING, INTERCEPTS_DIFFER, NO_DIFFERENCE, NOT_ABSENCE,
                     SLOPES_DIFFER)
from .bands import BANDS_SHEET

__all__ = ["Fairness", "GroupColumn", "write", "MIN_GROUP", "demographic_columns", "reference_of", "reading_words",
           "reading_formula"]

SHEET = "Fairness"
#: People with a score and a criterion value each group needs before its line is compared (common practice:
#: fewer give lines too unstable to read; even this many give the tests little power).
MIN_GROUP = 20
LIST_COL, LIST_ROW = 20, 3   # the listing's first column (T) and first row
CHART_ROWS = 22              # the rows a chart of the group lines takes


@dataclasses.dataclass(frozen=True)
class Fairness:
    """The gap at the cut and the two p values of each focal group (by group name); empty when not computed."""

    gaps: dict
    slope_p: dict
    intercept_p: dict
    #: the same, per further demographic column (its header -> a Fairness of its own)
    others: dict = dataclasses.field(default_factory=dict)
    header: str | None = None       # the demographic column compared
    key: str = ""                   # the column's part of its cells' keys: "" for the first, "col2_"...
    reference: str | None = None    # its reference group (None when not compared)
    #: per focal group name, the reading of its step-down tests in words (a live text cell)
    readings: dict = dataclasses.field(default_factory=dict)
    reason: Ref | None = None       # the cell saying why the column is not compared (when it is not)
    #: every demographic column's Fairness in order (on the one :func:`write` returns)
    columns: tuple = ()


@dataclasses.dataclass(frozen=True)
class GroupColumn:
    """One demographic column the study compares groups on, as the Fairness and DIF sheets read it."""

    index: int          # 0: the study's group column; 1, 2...: the further ``group columns`` in order
    header: str
    labels: tuple       # each person's group name as counted (None: blank)
    numbers: dict       # group name -> its number in the Bands column below
    reference: str | None   # the reference group given on Setup for this column (not yet matched), or None
    bands_col: int      # the Bands column of group numbers (1-based)
    bands: Ref          # that column, rows 1 to n + 1 (INDEX reads it by Bands row)
    codes: Ref          # that column, rows 2 to n + 1 (the people, for the DIF functions)

    @property
    def key(self) -> str:
        """What the column adds to its cells' keys: nothing for the first, ``col2_`` for the second..."""
        return "" if self.index == 0 else f"col{self.index + 1}_"


def demographic_columns(ctx: StudyContext, predictor=None) -> list[GroupColumn]:
    """Every demographic column the study compares groups on: the ``group column`` (its numbers on
    ``predictor``'s Bands sheet, as before) and each further one of ``group columns`` (its numbers on the
    study's Bands sheet, where :mod:`..setup_impact` puts them; every Bands sheet has a row per person)."""
    d = ctx.data
    if "group" not in d.columns or d.group_tally is None:
        return []
    first = ctx.predictors[0] if ctx.predictors else predictor
    impact = getattr(first.data, "impact", None) if first is not None else getattr(d, "impact", None)
    reference = ctx.setup.reference_group
    if impact is not None and impact.demographics:
        reference = impact.demographics[0].reference
    layout = (predictor or first).layout
    out = [GroupColumn(0, d.header[d.columns["group"]], tuple(d.groups), dict(layout.group_numbers), reference,
                       layout.group_col, area(BANDS_SHEET, layout.group_col, 1, layout.group_col, layout.last),
                       layout.column(layout.group_col))]
    if impact is None or first is None:
        return out
    with sheet_names({}):  # the study's own Bands sheet, also while a further predictor's sheets are written
        for k, demo in enumerate(impact.demographics[1:], start=1):
            col = first.layout.extra.get(f"group:{k}")
            if col is None:
                continue
            out.append(GroupColumn(k, demo.header, tuple(demo.groups), demo.numbers, demo.reference, col,
                                   area(BANDS_SHEET, col, 1, col, first.layout.last), first.layout.column(col)))
    return out


def write(ctx: StudyContext, predictor) -> Fairness:
    """``predictor``: a :class:`.predictors.Predictor` (its Bands ranges and Setup cells)."""
    d, s = ctx.data, ctx.setup
    columns = demographic_columns(ctx, predictor)
    if d.criterion is None or not columns:
        return Fairness({}, {}, {})
    g = ctx.sheet(SHEET)
    g.widths.update({1: 44, 2: 14, 3: 14, 4: 14, 5: 14, 6: 16, 7: 40})
    g.set(1, 1, f"Fairness: differential prediction of {s.criterion or 'the criterion'} from {s.test_name}", "title")
    row = 2 + g.para(2, 1, CAUTION, "caution")
    row += 1 + g.para(row, 1, FAIRNESS_CAUTION, "caution")
    scores, criterion = d.scores, d.criterion
    listed = np.flatnonzero(~np.isnan(scores) & ~np.isnan(criterion))
    found, list_col = [], LIST_COL
    for column in columns:
        row, list_col, out = _column(ctx, g, row, predictor, column, listed, list_col)
        found.append((column, out))
    g.print_area = f"A1:G{row}"
    first = found[0][1]
    return dataclasses.replace(first, others={c.header: f for c, f in found[1:]}, columns=tuple(f for _, f in found))


def _column(ctx, g, row, predictor, column: GroupColumn, listed, list_col: int):
    """The block of one demographic column from ``row``; its listing from column ``list_col``. Returns the
    next free row, the next free listing column and what the block publishes."""
    numbers = column.numbers
    g.set(row, 1, f"Groups of column {column.header!r}", "heading")
    row += 1
    group_of = [column.labels[i] for i in listed]
    counts = {name: sum(1 for x in group_of if x == name) for name in numbers}
    enough = [name for name in numbers if counts[name] >= MIN_GROUP]
    reference = reference_of(column.reference, counts, enough)
    for name in numbers:
        g.set(row, 1, f"People with a score and a criterion value in {name}")
        g.set(row, 2, counts[name], "count")
        if counts[name] < MIN_GROUP:
            g.set(row, 3, f"fewer than {MIN_GROUP}: this group's line is not compared", "na")
        row += 1
    if reference is None or len(enough) < 2:
        key = "fairness" + ("_" + column.key[:-1] if column.key else "")  # fairness, fairness_col2...
        reason = ctx.not_computable_at(g, row + 1, 1, f"differential prediction needs at least two groups with "
                                                      f"{MIN_GROUP} or more people who have a score and a criterion "
                                                      f"value (column {column.header!r})", key=key)
        return row + 3, list_col, Fairness({}, {}, {}, header=column.header, key=column.key, reason=reason)
    listing = _listing(ctx, g, predictor, column, listed, [numbers.get(x) for x in group_of], enough, list_col)
    row += 1
    g.set(row, 1, f"Reference group of {column.header!r} (the group each other group is compared with)")
    g.set(row, 2, reference, "header")
    row += 2
    out = Fairness({}, {}, {}, header=column.header, key=column.key, reference=reference)
    for name in enough:
        if name != reference:
            row = _tests(ctx, g, row, predictor, listing, column, name, reference, out)
    row = _lines(ctx, g, row, predictor, listing, column, enough)
    row += g.para(row, 1, FAIRNESS_READING) + 1
    series = [(name, charts.area(listing[("scores", name)]), charts.area(listing[("criterion", name)]))
              for name in enough]
    g.charts.append((charts.group_lines(series, x_title=ctx.setup.test_name, y_title=ctx.setup.criterion or
                                        "Criterion"), f"A{row}"))
    return row + CHART_ROWS, list_col + 5, out


def reference_of(given, counts, enough):
    """The reference group among the groups ``enough`` (large enough to compare): the one named on Setup,
    matched as group labels are, else the largest."""
    if given:
        from trueband.funcs.impact import group_key

        match = next((n for n in enough if group_key(n) == group_key(given)), None)
        if match is not None:
            return match
    # the largest group with a criterion value (common practice: the majority group as the reference)
    return max(enough, key=lambda n: counts[n]) if enough else None


def _listing(ctx, g, predictor, column: GroupColumn, listed, group_numbers, groups, c: int) -> dict:
    """Columns from ``c`` on: the people of the compared ``groups`` with a score and a criterion value, group by
    group (in Bands order within a group), with their Bands row, score, criterion and group in ``column``;
    returns each group's block of scores and criteria (contiguous rows, so the group's line is INTERCEPT and SLOPE
    of its block: no per-group copy of any column) and Bands' whole columns, which the step-down tests and the
    common line read (their blanks, empty text, are left out)."""
    d = ctx.data
    # the group is the block's (written as its name: the rows were chosen by group when the study was built, as
    # the typed Bands rows were; no formula reads it)
    for k, h in enumerate(("Row on Bands", "Score", "Criterion", f"Group ({column.header})")):
        g.set(LIST_ROW - 1, c + k, h, "header")
    places = dict(row=cell(SHEET, None, c))
    texts = [ctx.text("=INDEX({column},{row})", SHEET, column=area(BANDS_SHEET, col, 1, col, predictor.layout.last),
                      **places) for col in (3, 9)]
    codes = np.array([np.nan if x is None else x for x in group_numbers], dtype=float)
    out, r = {}, LIST_ROW
    for name in groups:
        mine = listed[codes == column.numbers[name]]
        for k, i in enumerate(mine):
            g.set(r + k, c, int(i) + 2)
            for j, t in enumerate(texts):
                g.set(r + k, c + 1 + j, fill_row(t, r + k))
            g.set(r + k, c + 3, name)
        end = r + len(mine) - 1
        out[("scores", name)] = area(SHEET, c + 1, r, c + 1, end, value=d.scores[mine])
        out[("criterion", name)] = area(SHEET, c + 2, r, c + 2, end, value=d.criterion[mine])
        r = end + 1
    layout = predictor.layout
    every = [column.numbers.get(x) if x is not None else None for x in column.labels]
    with_criterion = np.where(np.isnan(d.criterion), np.nan, d.scores)
    out.update(scores=layout.scores.with_value(d.scores), criterion=layout.criterion.with_value(d.criterion),
               groups=column.codes.with_value(every),
               scores_with_criterion=layout.scores_with_criterion.with_value(with_criterion))
    return out


def _tests(ctx, g, row, predictor, listing, column: GroupColumn, name, reference, out: Fairness) -> int:
    """The step-down tests and the gap at the cut of group ``name`` against ``reference`` (of ``column``)."""
    numbers = column.numbers
    g.set(row, 1, f"{name} compared with {reference} (column {column.header!r})", "heading")
    args = (listing["scores"], listing["criterion"], listing["groups"], numbers[name], numbers[reference])
    key = f"fairness_{column.key}"
    g.set(row + 1, 1, "Step 1, slopes: p of the score × group term")
    out.slope_p[name] = ctx.formula(g, row + 1, 2, "PREDICTION_SLOPE_P", *args, style="p",
                                    key=f"{key}slope_p_{name}")
    g.set(row + 2, 1, "Step 2, intercepts (common slope): p of the group term")
    out.intercept_p[name] = ctx.formula(g, row + 2, 2, "PREDICTION_INTERCEPT_P", *args, style="p",
                                        key=f"{key}intercept_p_{name}")
    g.set(row + 3, 1, "Common line minus the group's own line at the cut")
    gap = ctx.formula(g, row + 3, 2, "PREDICTION_GAP", *args, predictor.setup.cut_cell, style="coef",
                      key=f"{key}gap_{name}")
    out.gaps[name] = gap
    if isinstance(gap.value, float):
        g.set(row + 3, 3, ctx.text('=IF({gap}>0,"the common line over-predicts this group\'s criterion at the cut",'
                                   'IF({gap}<0,"the common line under-predicts this group\'s criterion at the cut",'
                                   '"the lines meet at the cut"))', SHEET, gap=gap))
    g.set(row + 4, 1, "Reading of the steps (p against 1 − the confidence level)")
    out.readings[name] = _reading(ctx, g, row + 4, 2, out.slope_p[name], out.intercept_p[name],
                                  predictor.setup.confidence, f"{key}reading_{name}")
    return row + 6


def _p_text(p: str) -> str:
    """Formula text: ``p = 0.012`` (or ``p < 0.001``) of the p value at the place ``p``."""
    return f'IF({p}<0.0005,"p < 0.001","p = "&TEXT({p},"0.000"))'


def _p_words(p: float) -> str:
    return "p < 0.001" if p < 0.0005 else f"p = {p:.3f}"


def reading_words(slope_p: float, intercept_p: float, confidence: float) -> str:
    """The reading of the step-down tests, as the Fairness sheet's formula puts it together (step 1, the slopes;
    step 2, the intercepts, read only when the slopes do not differ detectably)."""
    level = 1 - confidence
    shown = f"{level:.3f}".rstrip("0")
    if slope_p < level:
        return f"{SLOPES_DIFFER[0]} ({_p_words(slope_p)}, below the {shown} level): {SLOPES_DIFFER[1]}"
    if intercept_p < level:
        return f"{INTERCEPTS_DIFFER[0]} ({_p_words(intercept_p)}, below the {shown} level): {INTERCEPTS_DIFFER[1]}"
    return (f"{NO_DIFFERENCE} (slopes {_p_words(slope_p)}, intercepts {_p_words(intercept_p)}; level {shown}): "
            f"{NOT_ABSENCE}")


def reading_formula(slope_p, intercept_p, confidence) -> tuple[str, dict]:
    """The formula template of the reading of the step-down tests (:func:`reading_words` says the same) and its
    places: ``slope_p``, ``intercept_p`` and ``confidence`` (handles), and the words."""
    level = 'TEXT(1-{conf},"0.###")'
    template = ('IF({sp}<1-{conf},{s1}&" ("&' + _p_text("{sp}") + '&", below the "&' + level + '&" level): "&{s2},'
                'IF({ip}<1-{conf},{i1}&" ("&' + _p_text("{ip}") + '&", below the "&' + level + '&" level): "&{i2},'
                '{n1}&" (slopes "&' + _p_text("{sp}") + '&", intercepts "&' + _p_text("{ip}") + '&"; level "&'
                + level + '&"): "&{n2}))')
    return template, dict(sp=slope_p, ip=intercept_p, conf=confidence, s1=SLOPES_DIFFER[0], s2=SLOPES_DIFFER[1],
                          i1=INTERCEPTS_DIFFER[0], i2=INTERCEPTS_DIFFER[1], n1=NO_DIFFERENCE, n2=NOT_ABSENCE)


def _reading(ctx, g, r: int, c: int, slope_p: Ref, intercept_p: Ref, confidence: Ref, key: str) -> Ref:
    """The live reading of one group's step-down tests (:func:`reading_formula`)."""
    template, places = reading_formula(slope_p, intercept_p, confidence)
    return ctx.expression(g, r, c, template, lambda: reading_words(ctx.value(slope_p), ctx.value(intercept_p),
                                                                    ctx.value(confidence)), key=key, **places)


def _lines(ctx, g, row, predictor, listing, column: GroupColumn, groups) -> int:
    """Each group's line (intercept, slope and its interval) of ``column`` and the common line."""
    conf = ctx.setup.confidence
    head = (f"Line by {column.header}: criterion = intercept + slope × score", "People", "Intercept", "Slope",
            f"{conf:.0%} CI lower (slope)", f"{conf:.0%} CI upper (slope)", "Predicted criterion at the cut")
    for c, h in enumerate(head, start=1):
        g.set(row, c, h, "header")
    rows = [(name, listing[("criterion", name)], listing[("scores", name)], listing[("criterion", name)])
            for name in groups]
    # the common line over everyone with a score and a criterion value (Bands' columns; counted by the scores)
    rows.append(("All groups together (the common line)", listing["criterion"], listing["scores_with_criterion"],
                 listing["scores_with_criterion"]))
    for k, (name, y, x, counted) in enumerate(rows):
        r = row + 1 + k
        yv, xv = np.asarray(y.value, float), np.asarray(x.value, float)
        keep = ~np.isnan(yv) & ~np.isnan(xv)
        slope, intercept = np.polyfit(xv[keep], yv[keep], 1) if keep.sum() >= 3 and np.ptp(xv[keep]) > 0 else (
            np.nan, np.nan)
        g.set(r, 1, name)
        n = ctx.expression(g, r, 2, "COUNT({y})", lambda m=int(keep.sum()): m, style="count", y=counted)
        b = ctx.expression(g, r, 3, "INTERCEPT({y},{x})", lambda v=float(intercept): v, style="coef", y=y, x=x)
        a = ctx.expression(g, r, 4, "SLOPE({y},{x})", lambda v=float(slope): v, style="coef", y=y, x=x)
        for c, sign in ((5, "-"), (6, "+")):
            ctx.expression(g, r, c, "{a}" + sign + "TINV(1-{conf},{n}-2)*STEYX({y},{x})/SQRT(DEVSQ({x}))",
                           None, style="coef", a=a, conf=predictor.setup.confidence, n=n, y=y, x=x)
        ctx.expression(g, r, 7, "{b}+{a}*{cut}", None, style="coef", a=a, b=b, cut=predictor.setup.cut_cell)
    return row + len(rows) + 2
