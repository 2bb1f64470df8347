"""Impact: adverse impact at the cut score (selection rates, impact ratios, tests) and the score distribution."""

from __future__ import annotations

import dataclasses

import numpy as np
from openpyxl.utils import get_column_letter

from trueband.funcs.impact import tally_groups

from .. import charts
from ..context import Expr, Ref, StudyContext, area, cell
from ..setup import SetupError
from ..words import CAUTION
from .bands import BandsLayout
from .reliability import Reliability
from .setup import SetupSheet

__all__ = ["Impact", "write"]

SHEET = "Impact"
DISTRIBUTION_ROW, DISTRIBUTION_COL = 5, 12   # the score distribution's heading (columns L:Q, not printed)


@dataclasses.dataclass(frozen=True)
class Impact:
    min_ratio: Ref   # the lowest impact ratio
    rates: tuple = ()  # (group, its selection-rate cell) for each group, in the table's order


def write(ctx: StudyContext, setup: SetupSheet, rel: Reliability, bands: BandsLayout) -> Impact:
    g = ctx.sheet(SHEET)
    g.widths.update({1: 22, 2: 13, 3: 13, 4: 13, 5: 15, 6: 15, 7: 11, 8: 11, 9: 13, 10: 16})
    d, s = ctx.data, ctx.setup
    g.set(1, 1, "Adverse impact at the cut score", "title")
    cut_row = 2 + g.para(2, 1, CAUTION, "caution")
    cut = cell(SHEET, cut_row, 2).fixed()
    g.set(cut_row, 1, "Cut score (from Setup)")
    g.set(cut_row, 2, "=" + setup.cut_cell.address(SHEET), "score")
    g.set(cut_row + 1, 1, "Selected = score at or above the cut")
    row = cut_row + 3
    groups = list(d.group_tally.names) if d.group_tally is not None else []
    if "group" not in d.columns:
        min_ratio = ctx.not_computable_at(g, row, 1, "no group column was given", key="min_ratio")
    elif len(groups) < 2:
        only = f"only one group ({groups[0]!r})" if groups else "no group labels"
        min_ratio = ctx.not_computable_at(g, row, 1, f"column {s.group!r} on sheet '{d.sheet}' holds {only}; impact "
                                                     f"compares groups", key="min_ratio")
    else:
        rates: dict[str, Ref] = {}
        min_ratio = _table(ctx, g, row, groups, setup, bands, chart_row=row + len(groups) + 10, rates=rates)
        # beside the rates chart, on the same page
        _distribution(ctx, g, row + len(groups) + 10, setup, rel, cut, anchor_col="E")
        return Impact(min_ratio, rates=tuple(rates.items()))
    _distribution(ctx, g, row + 3, setup, rel, cut)
    return Impact(min_ratio)


def _table(ctx: StudyContext, g, row: int, groups: list[str], setup: SetupSheet, bands: BandsLayout,
           chart_row: int, rates: dict | None = None) -> Ref:
    """The table of groups from ``row`` (the reference group above it) and its chart; returns the lowest ratio."""
    d = ctx.data
    scores = d.scores
    has_score = ~np.isnan(scores)
    selected = has_score & (scores >= setup.cut)
    # people with a score, counted by group as the Python functions count them (labels merged as
    # funcs.impact.group_key does); the sheet's COUNTIFS count the same rows by group number
    scored = np.flatnonzero(has_score)
    tally = tally_groups([d.groups[i] for i in scored], [bool(selected[i]) for i in scored])
    counts = {name: (tally.selected.get(name, 0), tally.applicants.get(name, 0)) for name in groups}
    reference = _reference_group(ctx, groups, counts)
    g.set(row - 1, 1, "Reference group (edit to compare with another)")
    g.set(row - 1, 3, reference, "input")
    head = ("Group", "Applicants", "Selected", "Selection rate", "Impact ratio (rate ÷ reference rate)",
            "Below four-fifths?", "z", "Fisher exact p", "Shortfall (selections to reach 4/5)",
            "Four-fifths of the highest rate")
    for c, h in enumerate(head, start=1):
        g.set(row, c, h, "header")
    first, last = row + 1, row + len(groups)
    reference_selected, reference_applicants = counts[reference]
    places = dict(name=cell(SHEET, row - 1, 3).fixed(), names=area(SHEET, 1, first, 1, last).fixed())
    lookup = 'INDEX({column},MATCH({name},{names},0))'
    reference_selected = Expr(ctx.text(lookup, SHEET, column=area(SHEET, 3, first, 3, last).fixed(), **places),
                              reference_selected)
    reference_applicants = Expr(ctx.text(lookup, SHEET, column=area(SHEET, 2, first, 2, last).fixed(), **places),
                                reference_applicants)
    group_numbers, selected_flags = bands.group_numbers_range, bands.selected
    ratios_by_group: dict[str, Ref] = {}
    for i, name in enumerate(groups):
        r = first + i
        focal_selected, focal_applicants = counts[name]
        g.set(r, 1, name)
        number = bands.group_numbers[name]
        applicants = ctx.expression(g, r, 2, 'COUNTIFS({groups},{number},{selected},">=0")',
                                    lambda n=focal_applicants: n, style="count", groups=group_numbers,
                                    number=number, selected=selected_flags)
        chosen = ctx.expression(g, r, 3, "COUNTIFS({groups},{number},{selected},1)", lambda n=focal_selected: n,
                                style="count", groups=group_numbers, number=number, selected=selected_flags)
        rate = ctx.formula(g, r, 4, "SELECTION_RATE", chosen, applicants, style="coef", key=f"rate_{name}")
        if rates is not None:
            rates[name] = rate
        g.set(r, 10, ctx.text("=0.8*MAX({rates})", SHEET, rates=area(SHEET, 4, first, 4, last).fixed()), "coef")
        if name == reference:
            for c in range(5, 10):
                g.set(r, c, "reference group" if c == 5 else "")
            continue
        for c, function, style in ((5, "IMPACT_RATIO", "coef"), (6, "FOUR_FIFTHS", None), (7, "IMPACT_Z", "coef"),
                                   (8, "IMPACT_FISHER", "p"), (9, "IMPACT_SHORTFALL", "count")):
            written = ctx.formula(g, r, c, function, chosen, applicants, reference_selected, reference_applicants,
                        # Fisher's p is defined (1) when nobody passes; the rest are not
                        before=None if function == "IMPACT_FISHER" else setup.passes,
                        # shown as yes/no: spreadsheet apps show a stored TRUE/FALSE of a function they do not
                        # know as an error, while stored text shows as it is
                        wrap='IF({},"yes","no")' if function == "FOUR_FIFTHS" else "{}",
                        style=style, key=f"{function.lower()}_{name}")
            if function == "IMPACT_RATIO":
                ratios_by_group[name] = written
    g.set(last + 2, 1, "Lowest impact ratio")
    ratios = [ratios_by_group[k].value for k in groups if k != reference]
    if all(isinstance(x, float) for x in ratios):
        min_ratio = ctx.expression(g, last + 2, 5, "MIN({ratios})", lambda: min(ratios), style="coef",
                                   key="min_ratio", ratios=area(SHEET, 5, first, 5, last))
        g.set(last + 3, 1, "Groups below four-fifths")
        below = cell(SHEET, last + 3, 5)
        g.set(below.row, below.col, ctx.text('=COUNTIF({flags},"yes")', SHEET, flags=area(SHEET, 6, first, 6, last)),
              "count")
        ctx.name("n_below", below)
    else:
        min_ratio = ctx.not_computable_at(g, last + 2, 5, setup.cut_message or "an impact ratio is not computable "
                                                                             "(see the table)", key="min_ratio")
    _table_notes(g, last + 5, d, bands)
    g.charts.append((charts.selection_rates(charts.area(area(SHEET, 1, first, 1, last)),
                                            charts.area(area(SHEET, 4, row, 4, last)),
                                            charts.area(area(SHEET, 10, row, 10, last))), f"A{chart_row}"))
    g.charts[-1][0].width = 11.5
    return min_ratio


def _reference_group(ctx: StudyContext, groups: list[str], counts: dict[str, tuple[int, int]]) -> str:
    """The group others are compared with: as given (matched as the groups are), else the highest rate."""
    d, s = ctx.data, ctx.setup
    reference = s.reference_group
    if reference is not None:
        reference = d.group_tally.name(reference)
        if reference is None:
            raise SetupError(f"reference group: no group {s.reference_group!r} in column {s.group!r} on sheet "
                             f"'{d.sheet}' (groups: {', '.join(groups)})")
        return reference
    rates = {k: (sel / app if app else 0.0) for k, (sel, app) in counts.items()}
    reference = max(groups, key=lambda k: (rates[k], counts[k][1]))
    ctx.notes.append(f"Reference group for impact: {reference}, the group with the highest selection rate at "
                     f"the cut when the study was built.")
    return reference


def _table_notes(g, at: int, d, bands: BandsLayout) -> None:
    """How the table counts, which labels were merged, and how many groups are blank, from row ``at``."""
    at += g.para(at, 1, f"Applicants and Selected count the rows of the Bands sheet by group number (Bands column "
                        f"{get_column_letter(bands.group_col)}: group 1 is the first row of this table, and so on); "
                        f"people with a blank group are in no group.", width=150)
    merged = [f"{', '.join(repr(x) for x in raw)} counted as {name!r}"
              for name, raw in d.group_tally.merged.items()]
    if merged:
        at += g.para(at, 1, "Labels that differ only in letter case or spacing are one group: "
                            + "; ".join(merged) + ".", width=150)
    if d.group_tally.blank:
        g.para(at, 1, f"{d.group_tally.blank} row(s) have a blank group (listed on Notes).", width=150)


def _distribution(ctx: StudyContext, g, chart_row: int, setup: SetupSheet, rel: Reliability, cut: Ref,
                  anchor_col: str = "A") -> None:
    """The score distribution table (columns L:Q, not printed) and its chart at ``chart_row``."""
    scores = ctx.data.scores
    scores = scores[~np.isnan(scores)]
    row, c0 = DISTRIBUTION_ROW, DISTRIBUTION_COL
    g.set(row, c0, "Score distribution (the data of the chart)", "heading")
    for c, h in enumerate(("Score", "from", "below (upper end, not included)", "Below the cut",
                           "At or above the cut"), start=c0):
        g.set(row + 1, c, h, "header")
    for c in range(c0, c0 + 5):
        g.widths[c] = 12
    lo, hi = float(scores.min()), float(scores.max())
    integer = bool(np.all(scores == np.round(scores))) and hi - lo <= 120
    if integer:
        edges = [(v, v + 1.0, f"{v:g}") for v in np.arange(lo, hi + 1)]
    else:
        width = (hi - lo) / 25 if hi > lo else 1.0
        edges = [(lo + j * width, lo + (j + 1) * width + (width * 1e-9 if j == 24 else 0.0),
                  f"{lo + j * width:.4g}–{lo + (j + 1) * width:.4g}") for j in range(25)]
    first = row + 2
    g.set(row + 1, c0 + 5, "Scoring at least 'from'", "header")
    g.set(row - 1, c0, "Applicants at or above the cut")
    g.set(row - 1, c0 + 3, ctx.text('=COUNTIF({scores},">="&{cut})', SHEET, scores=rel.scores, cut=cut), "count")
    # one count per bin edge (counts of "at least x"); a bin is the difference of two: one pass
    # over the scores per edge instead of four
    for j, (a, b, label) in enumerate(edges):
        r = first + j
        places = dict(start=cell(SHEET, r, c0 + 1), end=cell(SHEET, r, c0 + 2), below=cell(SHEET, r, c0 + 3),
                      at_least=cell(SHEET, r, c0 + 5), cut=cut, scores=rel.scores,
                      next=cell(SHEET, r + 1, c0 + 5) if j < len(edges) - 1 else 0,
                      at_cut=cell(SHEET, row - 1, c0 + 3).fixed())
        g.set(r, c0, label)
        g.set(r, c0 + 1, float(a))
        g.set(r, c0 + 2, float(b))
        g.set(r, c0 + 3, ctx.text("=IF({end}<={cut},{at_least}-{next},IF({start}>={cut},0,{at_least}-{at_cut}))",
                                  SHEET, **places), "count")
        g.set(r, c0 + 4, ctx.text("={at_least}-{next}-{below}", SHEET, **places), "count")
        g.set(r, c0 + 5, ctx.text('=COUNTIF({scores},">="&{start})', SHEET, **places), "count")
    last = first + len(edges) - 1
    g.charts.append((charts.score_distribution(charts.area(area(SHEET, c0, first, c0, last)),
                                               charts.area(area(SHEET, c0 + 3, row + 1, c0 + 3, last)),
                                               charts.area(area(SHEET, c0 + 4, row + 1, c0 + 4, last)),
                                               cut_text=f"cut at {setup.cut:g}"), f"{anchor_col}{chart_row}"))
    g.charts[-1][0].width = 14
    g.print_area = f"A1:J{chart_row + 21}"
