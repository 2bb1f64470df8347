"""Cuts: adverse impact at every possible cut (each distinct score), one table per demographic column, with the
lowest impact ratio and its interval, z, Fisher's p and the extra selections to reach four-fifths, and (with a
criterion) the expected success rate among those passing, so the trade-off between validity and impact shows;
a chart of the lowest impact ratio against the cut with the 0.80 line.

Each demographic column's block is two stacked tables of the same cuts, so that each prints across a landscape
page (issue 20): the groups' passing counts, pass rates and impact ratios; under it the lowest ratio of each cut
(Impact's ``LOWEST`` rule, so an error among the ratios passes on) with its group and that comparison's figures.
A column of more than :data:`GROUPS_SIDE_BY_SIDE` groups has the first table split by figure instead: the passing
counts, the pass rates and the impact ratios stacked, one group per column, each row's formulas as before.
"""

from __future__ import annotations

import dataclasses

import numpy as np
from openpyxl.chart import ScatterChart, Series

from trueband.funcs import call
from trueband.funcs.impact_intervals import passing_counts

from .. import charts
from ..context import Expr, Ref, StudyContext, area, cell
from ..words import CAUTION, EXTRA_SELECTIONS_WORDS
from .bands import BandsLayout
from .impact import LOWEST, SHEET as IMPACT_SHEET, Impact, ImpactTable
from .setup import SetupSheet

__all__ = ["Cuts", "write", "SHEET", "MAX_CUTS", "GROUPS_SIDE_BY_SIDE"]

SHEET = "Cuts"
#: Cut rows at most; with more distinct scores, evenly spaced distinct scores are shown (said on the sheet).
MAX_CUTS = 150
#: Groups at most whose passing counts, rates and ratios stand side by side in one table; a column with more groups
#: (a race/ethnicity column commonly has 5 to 7) gets three stacked tables of the same cuts, the passing counts, the
#: pass rates and the impact ratios, each one group wide per column, so that each prints across a landscape page at
#: 70% (issue 20). Each figure keeps its formula: the counts of a cut stay in one row, as the ratios do.
GROUPS_SIDE_BY_SIDE = 4


@dataclasses.dataclass(frozen=True)
class Cuts:
    rows: int = 0


def write(ctx: StudyContext, setup: SetupSheet, impact: Impact, bands: BandsLayout, utility) -> Cuts:
    d = ctx.data
    if not impact.tables or d.impact is None or not (d.impact.several or d.impact.stratum or d.impact.stages):
        return Cuts()
    g = ctx.sheet(SHEET)
    g.set(1, 1, "Adverse impact at every possible cut", "title")
    row = 2 + g.para(2, 1, CAUTION, "caution")
    scores = d.scores
    # the lowest score as a cut passes everybody: there is nothing to compare, so it is left out
    distinct = np.unique(scores[~np.isnan(scores)])[1:]
    if not distinct.size:
        ctx.not_computable_at(g, row, 1, "every applicant has the same score; no cut separates anyone")
        return Cuts()
    cuts = distinct
    if distinct.size > MAX_CUTS:
        cuts = distinct[np.unique(np.linspace(0, distinct.size - 1, MAX_CUTS).round().astype(int))]
    row += g.para(row, 1, f"One row per cut: passing = score at or above it. {distinct.size} distinct scores "
                          f"above the lowest (a cut at the lowest score passes everybody)"
                          + (f"; {cuts.size} of them, evenly spread, are shown." if cuts.size < distinct.size
                             else ".") + " One block per demographic column, as on Impact: each column has its own "
                          "reference group, and a reviewer reads each column's comparisons (and the chart's line "
                          "for each column) rather than one figure mixing them. Each group is compared with the "
                          "reference group named in the Impact sheet's cell for its column (edit it there: these "
                          "rows follow on recalculation); the lowest impact ratio of the row is shown with its "
                          "group, interval, z, Fisher p and the extra selections to reach four-fifths. A cut is a "
                          "decision for professional judgment: these figures show the trade-off, they do not "
                          "choose.", width=150)
    row += g.para(row, 1, EXTRA_SELECTIONS_WORDS, width=150) + 1
    validity = getattr(utility, "validity_used", None)
    chart = ScatterChart()
    chart.title = "Lowest impact ratio at each cut"
    chart.style = 13
    chart.x_axis.title, chart.y_axis.title = "Cut score", "Lowest impact ratio"
    for t in impact.tables:
        row, series = _table(ctx, g, row, t, cuts, bands, setup, utility, validity)
        chart.series.append(series)
    _line(g, chart, row, cuts)
    chart.width, chart.height = 18, 9
    g.charts.append((chart, f"A{row + 4}"))
    return Cuts(int(cuts.size))


def _line(g, chart, row: int, cuts: np.ndarray) -> None:
    """The four-fifths line: two points (lowest and highest cut, 0.80) written below the tables."""
    g.set(row + 1, 1, "Four-fifths line (the chart's)", "heading")
    for j, x in enumerate((float(cuts[0]), float(cuts[-1]))):
        g.set(row + 2 + j, 1, x, "score")
        g.set(row + 2 + j, 2, 0.8, "coef")
    line = Series(charts.area(area(SHEET, 2, row + 2, 2, row + 3)), charts.area(area(SHEET, 1, row + 2, 1, row + 3)),
                  title="four-fifths (0.80)")
    charts.threshold_line(line)  # the palette's dashed dark line (charts.py)
    chart.series.append(line)


def _table(ctx: StudyContext, g, row: int, t: ImpactTable, cuts: np.ndarray, bands: BandsLayout, setup: SetupSheet,
           utility, validity: Ref | None):
    """One demographic column's table of cuts from ``row``; returns (the next free row, its chart series)."""
    d = ctx.data
    order = list(t.names)                # every group: the reference is the one named on Impact now
    m = len(order)
    counts = passing_counts(d.scores, list(t.demographic.groups), cuts=cuts)
    index = {name: counts.groups.index(name) for name in order}
    applicants = {name: t.counts[name][1] for name in order}
    names_row, app_row, head = row + 1, row + 2, row + 3
    c_pass = 2
    c_rate, c_ratio, d_rate, d_ratio, ratio_names = _stacked(g, t, m, names_row, head, len(cuts))
    c_low = 2   # the second table's (under the first): the lowest ratio of each cut and its comparison
    g.set(row, 1, f"{t.demographic.header}", "heading")
    g.set(row, 2, "Reference group (the Impact sheet's cell)")
    ctx.link(g, row, c_pass + 3, t.reference_cell)
    g.set(row, c_pass + 4, "its place among the groups")
    ref_at = ctx.expression(g, row, c_pass + 5, "MATCH({reference},{names},0)", lambda: order.index(t.reference) + 1,
                            style="count", reference=t.reference_cell,
                            names=area(SHEET, c_pass, names_row, c_pass + m - 1, names_row)).fixed()
    g.set(names_row, 1, "Group")
    g.set(app_row, 1, "Applicants (Impact)")
    apps = {}
    for j, name in enumerate(order):
        g.set(names_row, c_pass + j, name)
        g.set(ratio_names, c_ratio + j, name)
        impact_row = t.first + t.names.index(name)
        # fixed ($B$17): every cut's row divides by the same applicants, so a row's formulas have one shape
        apps[name] = ctx.link(g, app_row, c_pass + j, cell(IMPACT_SHEET, impact_row, 2, value=applicants[name]),
                              style="count").fixed()
        g.set(head, c_pass + j, f"Passing: {name}", "header")
        g.set(head + d_rate, c_rate + j, f"Pass rate: {name}", "header")
        g.set(head + d_ratio, c_ratio + j, f"Impact ratio: {name}", "header")
    g.set(head, 1, "Cut", "header")
    first = head + 1
    last = first + len(cuts) - 1
    last += d_ratio
    # the second table, of the same cuts, under the first: one table of both would be wider than a landscape page
    # at 70% (issue 20)
    g.set(last + 2, 1, f"{t.demographic.header}: the lowest impact ratio at each cut, and its comparison",
          "heading")
    head_b = last + 3
    g.set(head_b, 1, "Cut", "header")
    tail = ("Lowest impact ratio", "Its group", "Lower limit", "Upper limit", "z: gap in standard deviations",
            "Fisher exact p", "Extra selections to reach four-fifths")
    with_criterion = validity is not None and isinstance(validity.value, float) and utility is not None \
        and isinstance(utility.base_rate.value, float)
    if with_criterion:
        tail += ("Selection ratio", "Expected success rate among those passing (Taylor–Russell)")
    for j, h in enumerate(tail):
        g.set(head_b, c_low + j, h, "header")
    for c in range(1, max(c_ratio + m, c_low + len(tail))):
        g.widths.setdefault(c, 12)
    app_area = area(SHEET, c_pass, app_row, c_pass + m - 1, app_row).fixed()
    for i, cut in enumerate(cuts):
        r, rb = first + i, head_b + 1 + i
        cut_ref = ctx.put(g, r, 1, float(cut), lambda v=float(cut): v, style="score")
        ctx.link(g, rb, 1, cut_ref, style="score")
        for shift in sorted({d_rate, d_ratio} - {0}):
            ctx.link(g, r + shift, 1, cut_ref, style="score")
        passing = {}
        for j, name in enumerate(order):
            passing[name] = ctx.expression(
                g, r, c_pass + j, 'COUNTIFS({groups},{number},{scores},">="&{cut})',
                lambda v=int(counts.passing[i, index[name]]): v, style="count", groups=t.numbers,
                number=t.demographic.numbers[name], scores=bands.scores, cut=cut_ref)
            ctx.formula(g, r + d_rate, c_rate + j, "SELECTION_RATE", passing[name], apps[name], style="coef")
        row_of = _RowOf(ctx, area(SHEET, c_pass, r, c_pass + m - 1, r), app_area)
        reference = (row_of.at(ref_at, passing[t.reference].value), row_of.at_app(ref_at, applicants[t.reference]))
        ratios = [_ratio(ctx, g, r + d_ratio, c_ratio + j, name, t, passing, apps, reference, ratio_names)
                  for j, name in enumerate(order)]
        _lowest(ctx, g, r + d_ratio, rb, c_low, order, ratios, passing, apps, reference, row_of, ratio_names,
                c_ratio, setup)
        if with_criterion:
            share = float((d.scores[~np.isnan(d.scores)] >= cut).mean())
            sr = ctx.expression(g, rb, c_low + len(tail) - 2, 'COUNTIF({scores},">="&{cut})/COUNT({scores})',
                                lambda v=share: v, style="coef", scores=bands.scores, cut=cut_ref)
            ctx.formula(g, rb, c_low + len(tail) - 1, "TAYLOR_RUSSELL", validity, utility.base_rate, sr, style="pct")
    first_b, last_b = head_b + 1, head_b + len(cuts)
    series = Series(charts.area(area(SHEET, c_low, first_b, c_low, last_b)),
                    charts.area(area(SHEET, 1, first_b, 1, last_b)), title=f"{t.demographic.header}")
    series.marker.symbol = "circle"
    series.marker.size = 4
    return last_b + 2, series


def _stacked(g, t: ImpactTable, m: int, names_row: int, head: int, n: int) -> tuple[int, int, int, int, int]:
    """(the rates' first column, the ratios' first column, the rates' and the ratios' row shift under the counts'
    table, the ratios' names row): side by side (shifts 0) up to :data:`GROUPS_SIDE_BY_SIDE` groups, else three
    stacked tables of the ``n`` cuts, whose headings, "Group" and "Cut" labels are written here."""
    if m <= GROUPS_SIDE_BY_SIDE:
        return 2 + m, 2 + 2 * m, 0, 0, names_row
    d_rate = n + 3              # heading and header rows, then the cuts, then a blank row
    d_ratio = 2 * n + 7         # the rates' table, then a heading, the names and the header rows
    ratio_names = head + d_ratio - 1
    g.set(head + d_rate - 1, 1, f"{t.demographic.header}: the pass rate of each group at each cut", "heading")
    g.set(ratio_names - 1, 1, f"{t.demographic.header}: the impact ratio of each group at each cut (against "
                              "the reference group)", "heading")
    g.set(ratio_names, 1, "Group")
    for shift in (d_rate, d_ratio):
        g.set(head + shift, 1, "Cut", "header")
    return 2, 2, d_rate, d_ratio, ratio_names


#: What a cut's ratio cell shows when the reference group has nobody passing (the ratio is not defined).
NOBODY_PASSES = "nobody in the reference group passes"
#: What the lowest-ratio cell shows when no ratio of its row is defined.
NO_RATIO = "no impact ratio is computable at this cut"


@dataclasses.dataclass(frozen=True)
class _RowOf:
    """INDEX into one cut row's passing counts and the applicants row, by a place (a cell or a MATCH text)."""

    ctx: StudyContext
    passing: Ref
    applicants: Ref

    def at(self, place, value) -> Expr:
        return Expr(self.ctx.text("INDEX({row},", SHEET, row=self.passing) + _place(place) + ")", value)

    def at_app(self, place, value) -> Expr:
        return Expr(self.ctx.text("INDEX({row},", SHEET, row=self.applicants) + _place(place) + ")", value)


def _place(place) -> str:
    return place if isinstance(place, str) else place.address(SHEET)


def _ratio(ctx, g, r, c, name, t: ImpactTable, passing, apps, reference, names_row) -> Ref:
    """A group's impact ratio at one cut against the reference group named on Impact; text for the reference
    group itself and when nobody of the reference group passes (same formula shape in every row)."""
    ref_pass, ref_app = reference
    text = ("=" + ctx.text('IF({name}={reference},"reference group",IF(', SHEET, name=cell(SHEET, names_row, c).fixed(),
                           reference=t.reference_cell) + ref_pass.text + '=0,"' + NOBODY_PASSES + '",'
            + ctx.call_text("IMPACT_RATIO", (passing[name], apps[name], ref_pass, ref_app), SHEET) + "))")

    def check():
        if name == t.reference:
            return "reference group"
        if ref_pass.value == 0:
            return NOBODY_PASSES
        return call("IMPACT_RATIO", passing[name].value, apps[name].value, ref_pass.value, ref_app.value)
    return ctx.put(g, r, c, text, check, style="coef")


def _lowest(ctx, g, r, out, c, order, ratios, passing, apps, reference, row_of: _RowOf, names_row, c_ratio,
            setup) -> None:
    """The lowest ratio of cut row ``r``, its group, and that comparison's interval, z, Fisher p and extra
    selections, in row ``out`` of the second table from column ``c``; text when no ratio of the row is defined
    (one formula shape in every row)."""
    usable = [(x.value, k) for x, k in zip(ratios, order) if isinstance(x.value, float)]
    ratio_row = area(SHEET, c_ratio, r, c_ratio + len(order) - 1, r)
    # Impact's LOWEST: words only when every ratio of the row is words (the reference group's label and "nobody
    # passes"; the count of groups is fixed at build), else MIN, which passes an error among the ratios on
    # (COUNT and ISNUMBER would skip it and show "no impact ratio" instead)
    low = ctx.expression(g, out, c, LOWEST.format(words=len(order) - 1, missing=NO_RATIO),
                         lambda: min(usable)[0] if usable else NO_RATIO, style="coef", ratios=ratio_row)
    low_group = min(usable, key=lambda x: x[0])[1] if usable else None
    names = area(SHEET, c_ratio, names_row, c_ratio + len(order) - 1, names_row).fixed()
    where = ctx.text("MATCH({low},{ratios},0)", SHEET, low=low, ratios=ratio_row)
    guard = ctx.text('IF(ISTEXT({low}),"",', SHEET, low=low)  # an error in the lowest passes on too
    ctx.put(g, out, c + 1, "=" + guard + ctx.text("INDEX({names},", SHEET, names=names) + where + "))",
            lambda: low_group or "")
    focal = (row_of.at(where, passing[low_group].value if low_group else None),
             row_of.at_app(where, apps[low_group].value if low_group else None))
    for j, (function, extra, style) in enumerate((("IMPACT_RATIO_CI", ("lower", setup.confidence), "coef"),
                                                  ("IMPACT_RATIO_CI", ("upper", setup.confidence), "coef"),
                                                  ("IMPACT_Z", (), "coef"), ("IMPACT_FISHER", (), "p"),
                                                  ("IMPACT_EXTRA_SELECTIONS", (), "count"))):
        args = (*focal, *reference, *extra)
        text = "=" + guard + ctx.call_text(function, args, SHEET) + ")"
        ctx.put(g, out, c + 2 + j, text,
                (lambda f=function, a=args: call(f, *(ctx.value(x) for x in a))) if low_group else (lambda: ""),
                style=style)
