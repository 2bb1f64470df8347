"""Validity: criterion-related validity, its corrections, the fitted line and the expectancy table."""

from __future__ import annotations

import dataclasses

import numpy as np
from openpyxl.utils import get_column_letter

from trueband.funcs.errors import InsufficientDataError

from .. import charts
from ..words import CHART_SUBSET, CORRECTED_LIMITS_NOTE, INDIRECT_RULE
from ..context import Ref, StudyContext, area, cell, fill_row
from ..setup import HIRED_CODINGS
from .bands import BANDS_SHEET, BandsLayout
from .reliability import Reliability
from .setup import SetupSheet
from . import validity_checks

__all__ = ["Validity", "write"]

SHEET = "Validity"
FITTED_ROW = 36       # the fitted line's label
EXPECTANCY_ROW = 39   # the expectancy table's heading
LISTED_ROW = 3        # the first row of the people with a criterion value (columns O:Q, the chart's data)
#: The people with a score and a criterion value the scatter plots at most (the first, in data order): more
#: points are unreadable and slow to draw; every figure of the sheet uses everyone.
CHART_PEOPLE = 2_000


@dataclasses.dataclass(frozen=True)
class Validity:
    """The cells other sheets read; ``None``: not part of this study (no criterion column)."""

    r: Ref
    r_lower: Ref | None = None
    r_upper: Ref | None = None
    r_p: Ref | None = None
    operational: Ref | None = None
    n_criterion: Ref | None = None
    criteria_listed: Ref | None = None   # the criterion values listed in column Q, when r is computable
    r_range: Ref | None = None   # r corrected for direct range restriction only (against the observed criterion)


def write(ctx: StudyContext, setup: SetupSheet, rel: Reliability, bands: BandsLayout) -> Validity:
    g = ctx.sheet(SHEET)
    g.widths.update({1: 62, 2: 14, 3: 14, 4: 14, 5: 14, 6: 16})
    d, s = ctx.data, ctx.setup
    g.set(1, 1, "Criterion-related validity", "title")
    if d.criterion is None:
        return Validity(r=ctx.not_computable_at(g, 3, 1, "no criterion column was given", key="r"))
    scores, criterion = d.scores, d.criterion
    both = ~np.isnan(scores) & ~np.isnan(criterion)
    n = int(both.sum())
    criterion_range, restricted_range = bands.criterion, bands.scores_with_criterion
    g.set(3, 1, "People with a test score and a criterion value")
    n_criterion = ctx.formula(g, 3, 2, "COUNT", restricted_range, check=lambda: n, style="count",
                              key="n_criterion")
    if d.hired is not None:
        g.set(4, 1, "People hired (hired column)")
        ctx.formula(g, 4, 2, "SUM", bands.hired, check=lambda: int(d.hired.sum()), style="count")
        g.set(4, 3, f"({HIRED_CODINGS} in column {s.hired!r}, read into Bands column "
                    f"{get_column_letter(bands.hired_col)})")

    def r_check():
        if n < 3:
            raise InsufficientDataError(
                f"fewer than 3 people have both a score and a criterion value (column {s.criterion!r} on sheet "
                f"'{d.sheet}'{' is blank for everyone' if np.isnan(criterion).all() else ''})")
        a, b = scores[both], criterion[both]
        if np.std(a) == 0:
            raise InsufficientDataError("the people with a criterion value all have the same test score")
        if np.std(b) == 0:
            raise InsufficientDataError("every criterion value is the same")
        return float(np.corrcoef(a, b)[0, 1])

    conf = s.confidence
    g.set(5, 1, "Observed validity: correlation of score and criterion (r)")
    r = ctx.formula(g, 5, 2, "CORREL", restricted_range, criterion_range, check=r_check, style="coef", key="r")
    g.set(5, 3, f"{conf:.0%} CI lower", "header")
    g.set(5, 4, f"{conf:.0%} CI upper", "header")
    g.set(5, 5, "p (two-sided)", "header")
    r_lower, r_upper = (ctx.formula(g, 6, col, "R_CI", r, n_criterion, part, setup.confidence, style="coef",
                                    key=f"r_{part}") for col, part in ((3, "lower"), (4, "upper")))
    r_p = ctx.formula(g, 6, 5, "R_PVALUE", r, n_criterion, style="p", key="r_p")
    g.set(6, 1, "  interval (Fisher z) and p (t test of r = 0)")
    marked = restricted_range.with_value([[float(x)] if ok else [""] for x, ok in zip(scores, both)])
    operational, r_range = _corrections(ctx, g, setup, rel, r, (r_lower, r_upper), marked, scores[both])
    g.set(FITTED_ROW, 1, "Fitted line: criterion = intercept + slope × score")
    g.set(FITTED_ROW, 3, "slope", "header")
    g.set(FITTED_ROW, 5, "intercept", "header")

    def line(part):
        ctx.value(r)
        slope, intercept = np.polyfit(scores[both], criterion[both], 1)
        return float(slope if part == "slope" else intercept)

    ctx.formula(g, FITTED_ROW + 1, 3, "SLOPE", criterion_range, restricted_range, check=lambda: line("slope"), style="coef",
                key="slope")
    ctx.formula(g, FITTED_ROW + 1, 5, "INTERCEPT", criterion_range, restricted_range, check=lambda: line("intercept"),
                style="coef", key="intercept")
    listed = np.flatnonzero(both) + 2   # the Bands rows of the people with a criterion value
    have_r = isinstance(r.value, float)
    whole = len(listed) <= CHART_PEOPLE   # the list is everyone (else the chart's first CHART_PEOPLE)
    end = LISTED_ROW - 1 + min(len(listed), CHART_PEOPLE)
    listed_scores, listed_criteria = (area(SHEET, col, LISTED_ROW, col, end) for col in (16, 17))
    below = _expectancy(ctx, g, setup, rel, have_r, bands.scores_with_criterion, bands.criterion)
    if have_r:
        _listed(ctx, g, bands, listed, end, s.criterion, below)
    return Validity(r=r, r_lower=r_lower, r_upper=r_upper, r_p=r_p, operational=operational, n_criterion=n_criterion,
                    criteria_listed=listed_criteria.qualified() if have_r and whole else None, r_range=r_range)


def _corrections(ctx: StudyContext, g, setup: SetupSheet, rel: Reliability, r: Ref, limits: tuple[Ref, Ref],
                 restricted_range: Ref, restricted_scores) -> tuple[Ref, Ref]:
    """Rows 8 to 22 and the notes below: the inputs to the corrections, the restricted group's reliability (its
    own and the one the indirect correction implies) and the corrected validities with their intervals; returns
    operational validity and the validity corrected for range restriction only."""
    s = ctx.setup
    g.set(8, 1, "Inputs to the corrections", "heading")
    g.set(8, 3, f"{s.confidence:.0%} CI lower", "header")
    g.set(8, 4, f"{s.confidence:.0%} CI upper", "header")
    g.set(9, 1, "Criterion reliability (from Setup)")
    g.set(9, 2, "=" + setup.criterion_reliability.address(SHEET), "coef")
    ryy = cell(SHEET, 9, 2, value=s.criterion_reliability, name="ryy")
    g.set(10, 1, "Test reliability among all applicants (from Reliability)")
    rxx = ctx.link(g, 10, 2, rel.reliability, style="coef", key="rxx")
    g.set(11, 1, "SD of scores, all applicants")
    sd_all = ctx.formula(g, 11, 2, "STDEV", rel.scores, check=lambda: ctx.value(rel.sd), style="coef", key="sd_all")

    def sd_restricted_check():
        if restricted_scores.size < 2:
            raise InsufficientDataError("fewer than 2 people have a criterion value")
        return float(np.std(restricted_scores, ddof=1))

    g.set(12, 1, "SD of scores, people with a criterion value (restricted group)")
    sd_restricted = ctx.formula(g, 12, 2, "STDEV", restricted_range, check=sd_restricted_check, style="coef",
                                key="sd_restricted")
    g.set(13, 1, "Ratio of the two SDs, u")
    u = ctx.expression(g, 13, 2, "{restricted}/{all}", lambda: ctx.value(sd_restricted) / ctx.value(sd_all),
                       style="coef", key="u", restricted=sd_restricted, all=sd_all)
    own = validity_checks.restricted_reliability(ctx, g, 14, rel, restricted_range, setup.confidence)
    g.set(15, 1, "Test reliability among the restricted group implied by the indirect correction")
    implied = ctx.formula(g, 15, 2, "RESTRICTED_RELIABILITY", rxx, u, style="coef", key="implied_rxx_restricted")
    g.set(17, 1, "Corrected validity", "heading")
    g.set(17, 2, "Estimate", "header")
    g.set(17, 3, f"{s.confidence:.0%} CI lower", "header")
    g.set(17, 4, f"{s.confidence:.0%} CI upper", "header")
    rows = (
        (18, "Corrected for criterion unreliability (Spearman)", "r_disattenuated", "DISATTENUATE", (1, ryy)),
        (19, "Corrected for direct range restriction on the test (Thorndike Case II)", "r_range", "RANGE_CORRECT",
         (sd_restricted, sd_all)),
        (20, "Operational validity: criterion unreliability, then direct range restriction", "operational",
         "OPERATIONAL_VALIDITY", (ryy, sd_restricted, sd_all)))
    found = {}
    for row, label, key, function, rest in rows:
        g.set(row, 1, label)
        found[key] = ctx.formula(g, row, 2, function, r, *rest, style="coef", key=key)
        for col, part, limit in zip((3, 4), ("lower", "upper"), limits):
            ctx.formula(g, row, col, function, limit, *rest, style="coef", key=f"{key}_{part}")
    g.set(21, 1, "Operational validity under indirect range restriction (Hunter, Schmidt & Le, 2006)")
    validity_checks.indirect(ctx, g, 21, r, limits, u, rxx, ryy, implied, own)
    g.set(22, 1, "Maximum possible observed validity, √(test reliability × criterion reliability)")
    ctx.formula(g, 22, 2, "MAX_VALIDITY", rxx, ryy, style="coef", key="max_validity")
    row = 24 + g.para(24, 1, CORRECTED_LIMITS_NOTE)
    g.para(row, 1, INDIRECT_RULE)
    return found["operational"], found["r_range"]


def _expectancy(ctx: StudyContext, g, setup: SetupSheet, rel: Reliability, have_r: bool, listed_scores: Ref,
                listed_criteria: Ref) -> int:
    """The expectancy table: criterion by score fifth (quintile) of all applicants.

    ``listed_scores`` and ``listed_criteria`` are Bands' whole columns of the score of each person with a
    criterion value and of the criterion (empty text for everyone else, which the conditional counts skip), so
    every number of the table is a live formula over the data: a criterion filled in later enters it. Returns the
    row below its note."""
    row = EXPECTANCY_ROW
    g.set(row, 1, "Expectancy table: criterion by score fifth (quintile) of all applicants", "heading")
    g.set(row + 1, 1, "Success means a criterion value at or above (Setup: success threshold)")
    g.set(row + 1, 2, "=" + setup.success_cell.address(SHEET), "coef")
    threshold = cell(SHEET, row + 1, 2).fixed()
    head = ("Score fifth", "Scores from", "up to (below)", "People with a criterion value", "Mean criterion",
            "Share successful")
    for c, h in enumerate(head, start=1):
        g.set(row + 2, c, h, "header")
    for q in range(5):
        r = row + 3 + q
        g.set(r, 1, ("lowest", "second", "middle", "fourth", "highest")[q] + " fifth")
        if not have_r:
            ctx.not_computable_at(g, r, 2, "validity is not computable (see B5)")
            continue
        places = dict(scores=rel.scores, low=cell(SHEET, r, 2), high=cell(SHEET, r, 3), count=cell(SHEET, r, 4),
                      listed=listed_scores, criteria=listed_criteria, threshold=threshold, fifth=q / 5,
                      next_fifth=(q + 1) / 5)
        text = lambda template: ctx.text(template, SHEET, **places)  # noqa: E731
        g.set(r, 2, text("=MIN({scores})" if q == 0 else "=PERCENTILE({scores},{fifth})"), "score")
        if q < 4:
            g.set(r, 3, text("=PERCENTILE({scores},{next_fifth})"), "score")
            within = '{listed},">="&{low},{listed},"<"&{high}'
        else:
            g.set(r, 3, text("=MAX({scores})"), "score")
            within = '{listed},">="&{low},{listed},"<="&{high}'
        g.set(r, 4, text("=COUNTIFS(" + within + ")"), "count")
        g.set(r, 5, text('=IF({count}=0,"none",AVERAGEIFS({criteria},' + within + "))"), "coef")
        g.set(r, 6, text('=IF({count}=0,"none",COUNTIFS(' + within + ',{criteria},">="&{threshold})/{count})'), "pct")
    return row + 9 + g.para(row + 9, 1, "Fifths are cut at the 20th, 40th, 60th and 80th percentiles of all "
                                        "applicants' scores; a score on a cut point belongs to the higher fifth. "
                                        "Rising shares down the table are what a valid test shows. Validity figures "
                                        "are statistical indicators, not legal findings.")


def _listed(ctx: StudyContext, g, bands: BandsLayout, listed, end: int, criterion_name: str | None,
            below: int) -> None:
    """The people with a score and a criterion value (columns N:Q: k, their position among the Bands rows, score
    and criterion) and the scatter. Live: column O finds the k-th person with both (NTH_NUMBER_ROW over Bands'
    score-with-criterion column), so an edited or blanked criterion flows through; the list is as long as the
    number of such people when the study was built (a value added later enters r and the tables, not this list),
    at most :data:`CHART_PEOPLE` (the chart's subset, said in words above the chart from row ``below``)."""
    for col, head in ((14, "k"), (15, "Position among Bands rows"), (16, "Score"), (17, "Criterion")):
        g.set(2, col, head, "header")
    # one formula filled down (the k beside it differs), not one formula per person
    position = cell(SHEET, None, 15)
    find_text = "=" + ctx.call_text("NTH_NUMBER_ROW", (bands.scores_with_criterion, cell(SHEET, None, 14)),
                                    SHEET)
    score_text, criterion_text = (
        ctx.text('=IF({row}>0,INDEX({column},{row}),"")', SHEET, column=column, row=position)
        for column in (bands.scores, bands.criterion))
    anchor = EXPECTANCY_ROW + 13
    if len(listed) > CHART_PEOPLE:
        lines = g.para(below + 1, 1, CHART_SUBSET.format(shown=CHART_PEOPLE, total=len(listed)))
        anchor = max(anchor, below + 2 + lines)
    for k in range(min(len(listed), CHART_PEOPLE)):
        g.set(LISTED_ROW + k, 14, k + 1)
        g.set(LISTED_ROW + k, 15, fill_row(find_text, LISTED_ROW + k))
        g.set(LISTED_ROW + k, 16, fill_row(score_text, LISTED_ROW + k))
        g.set(LISTED_ROW + k, 17, fill_row(criterion_text, LISTED_ROW + k))
    g.charts.append((charts.score_vs_criterion(charts.area(area(SHEET, 16, LISTED_ROW, 16, end)),
                                               charts.area(area(SHEET, 17, LISTED_ROW, 17, end)),
                                               x_title="Test score", y_title=criterion_name or "Criterion"),
                     f"A{anchor}"))
    g.print_area = f"A1:F{anchor + 20}"  # the chart's data (columns P:Q) is not printed
