"""Groups: per demographic column and group, n, mean and SD of the test score and the criterion, and the
standardized difference d from the reference group with its noncentral-t interval (COHENS_D_CI).

The Uniform Guidelines' documentation of a validity study asks for the means and standard deviations of each
group (29 CFR 1607.15(B)(8)); d puts the score gap in standard-deviation units.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from trueband.funcs.errors import InsufficientDataError

from ..context import Expr, Ref, StudyContext, area, cell
from ..words import CAUTION
from .bands import BandsLayout
from .impact import SHEET as IMPACT_SHEET, Impact, unless_reference
from .setup import SetupSheet

__all__ = ["Groups", "write", "SHEET"]

SHEET = "Groups"

_HEAD = ("Group", "People with a score", "Mean score", "SD of the score", "d from the reference group (score)",
         "d, lower limit", "d, upper limit", "People with a criterion value", "Mean criterion",
         "SD of the criterion", "d from the reference group (criterion)", "d, lower limit", "d, upper limit")


@dataclasses.dataclass(frozen=True)
class Groups:
    """The d of the first comparison of the first column, or None when the sheet is not part of the study."""

    first_d: Ref | None = None


def write(ctx: StudyContext, setup: SetupSheet, impact: Impact, bands: BandsLayout) -> Groups:
    d = ctx.data
    if not impact.tables or not (d.impact.several or d.impact.stratum is not None or d.impact.stages):
        return Groups()
    g = ctx.sheet(SHEET)
    g.widths.update({1: 22, **{c: 13 for c in range(2, 14)}})
    g.set(1, 1, "Test scores and the criterion by group", "title")
    row = 2 + g.para(2, 1, CAUTION, "caution")
    row += g.para(row, 1, "Means and standard deviations by group, as the Uniform Guidelines ask a validity study to "
                          "report (29 CFR 1607.15(B)(8)). d is the group's mean minus the reference group's, over "
                          "the pooled standard deviation (negative: the group scores lower); its interval comes "
                          "from the noncentral t distribution (Steiger & Fouladi, 1997). A difference in means is "
                          "not by itself evidence that the test is unfair; read it with the Validity sheet.",
                  width=150) + 1
    first_d = None
    for k, t in enumerate(impact.tables):
        k_index = next(i for i, demo in enumerate(d.impact.demographics) if demo is t.demographic)
        g.set(row, 1, f"{t.demographic.header}", "heading")
        g.set(row, 2, "Reference group (the Impact sheet's cell)")
        ctx.link(g, row, 5, t.reference_cell)
        for c, h in enumerate(_HEAD if d.criterion is not None else _HEAD[:7], start=1):
            g.set(row + 1, c, h, "header")
        first = row + 2
        for i, name in enumerate(t.names):
            d_ref = _group_row(ctx, g, first + i, t, k_index, name, bands, setup, (first, first + len(t.names) - 1))
            first_d = first_d or d_ref
        row = first + len(t.names) + 2
    return Groups(first_d)


def _values(ctx: StudyContext, t, name: str, x: np.ndarray) -> list[float]:
    member = np.array([grp == name for grp in t.demographic.groups], dtype=bool)
    picked = x[member]
    return picked[~np.isnan(picked)].tolist()


def _group_row(ctx, g, r: int, t, k: int, name: str, bands: BandsLayout, setup: SetupSheet,
               block: tuple[int, int]) -> Ref | None:
    """One group's row (``block``: the first and last rows of its column's groups); returns its d of the score.

    Every figure reads Bands' whole columns (the scores, the criterion) beside the column's group numbers, with
    criteria functions and the registered SUBGROUP_SD and SUBGROUP_D: no per-group copy of any column."""
    d = ctx.data
    g.set(r, 1, name)
    result = None
    demo = t.demographic
    number = demo.numbers[name]
    groups = t.numbers.with_value([demo.numbers.get(x) if x is not None else None for x in demo.groups],
                                  f"the group numbers of {demo.header}")
    blocks = [("score", 2, d.scores, bands.scores)]
    if d.criterion is not None:
        blocks.append(("criterion", 8, d.criterion, bands.criterion))
    # the reference group's number, chosen by the name in the Impact sheet's cell
    ref_number = Expr(ctx.text("CHOOSE(MATCH({reference},{names},0),", SHEET, reference=t.reference_cell,
                               names=area(IMPACT_SHEET, 1, t.first, 1, t.last))
                      + ",".join(str(demo.numbers[n]) for n in t.names) + ")",
                      demo.numbers[t.reference], "the reference group's number")
    for what, c0, x, column in blocks:
        mine = _values(ctx, t, name, x)
        values = column.with_value([None if np.isnan(v) else float(v) for v in x], f"the {what}s")
        # numbers only (the criteria >=0 and <0 match no text): the people of the group with a value
        n = ctx.expression(g, r, c0, 'COUNTIFS({groups},{number},{x},">=0")+COUNTIFS({groups},{number},{x},"<0")',
                           lambda v=len(mine): v, style="count", groups=t.numbers, number=number, x=column)
        ctx.expression(g, r, c0 + 1, "AVERAGEIFS({x},{groups},{number})", _stat(mine, np.mean, 1), style="coef",
                       x=column, groups=t.numbers, number=number)
        sd = ctx.formula(g, r, c0 + 2, "SUBGROUP_SD", values, groups, number, style="coef")
        guards, places = _d_guards(ctx, t, what, c0, block, x, n, sd)
        for j, part in enumerate(("estimate", "lower", "upper")):
            written = unless_reference(ctx, g, r, c0 + 3 + j, "SUBGROUP_D", values, groups, number, ref_number, part,
                                       setup.confidence, group=cell(SHEET, r, 1).local(), reference=t.reference_cell,
                                       is_reference=name == t.reference,
                                       label="reference group" if part == "estimate" else "", style="coef",
                                       guards=guards, places=places,
                                       key=f"{t.demographic.header}:d_{what}_{part}_{name}")
            if what == "score" and part == "estimate" and name != t.reference:
                result = written
    return result


def _d_guards(ctx, t, what: str, c0: int, block: tuple[int, int], x: np.ndarray, n: Ref, sd: Ref):
    """The live guards of d (fewer than two values in either group, no spread in both) and their places: this
    row's n and SD, and the reference group's, found in this block by the name in the Impact sheet's cell."""
    first, last = block
    names = area(SHEET, 1, first, 1, last).fixed()
    mine = _values(ctx, t, t.reference, x)
    ref_sd = float(np.std(mine, ddof=1)) if len(mine) >= 2 else InsufficientDataError("fewer than 2 values")
    lookup = "INDEX({column},MATCH({reference},{names},0))"
    places = dict(nf=n, sf=sd,
                  nr=Expr(ctx.text(lookup, SHEET, column=area(SHEET, c0, first, c0, last).fixed(),
                                   reference=t.reference_cell, names=names), len(mine)),
                  sr=Expr(ctx.text(lookup, SHEET, column=area(SHEET, c0 + 2, first, c0 + 2, last).fixed(),
                                   reference=t.reference_cell, names=names), ref_sd))
    guards = (("{nf}<2", lambda nf, sf, nr, sr: nf < 2, f"the group has fewer than 2 {what} values"),
              ("{nr}<2", lambda nf, sf, nr, sr: nr < 2, f"the reference group has fewer than 2 {what} values"),
              ("AND({sf}=0,{sr}=0)", lambda nf, sf, nr, sr: sf == 0 and sr == 0,
               f"every {what} of both groups is the same, so the pooled standard deviation is 0"))
    return guards, places


def _stat(values: list[float], f, at_least: int):
    def check():
        from trueband.funcs.errors import InsufficientDataError

        if len(values) < at_least:
            raise InsufficientDataError(f"needs at least {at_least} value(s), got {len(values)}")
        return float(f(np.asarray(values)))
    return check
