"""Raters: agreement of the interview ratings (ICC forms, Krippendorff's alpha, Cohen's kappa).

A predictor given only as a panel of ratings (``rating columns`` without items or a total) scores each person
by the mean of the ratings given; :func:`panel_reliability` writes its reliability on its Reliability sheet:
the ICC for the mean of k raters with absolute agreement, ICC(A,k) (McGraw & Wong 1996), the form this sheet
reports as its headline, since rater leniency is error when people are compared on the panel's mean.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from trueband.funcs.errors import InsufficientDataError

from ..context import Ref, StudyContext, area
from .setup import SetupSheet

__all__ = ["Raters", "write", "panel_reliability", "is_panel"]

SHEET = "Raters"


@dataclasses.dataclass(frozen=True)
class Raters:
    icc_agreement_average: Ref   # ICC(A,k): the agreement of the mean panel rating


def write(ctx: StudyContext, setup: SetupSheet) -> Raters:
    g = ctx.sheet(SHEET)
    g.widths.update({1: 52, 2: 14, 3: 14, 4: 14, 5: 14})
    d = ctx.data
    g.set(1, 1, "Rater agreement (interview ratings)", "title")
    if d.ratings is None:
        return Raters(ctx.not_computable_at(g, 3, 1, "no rating columns were given", key="icc_agreement_average"))
    y = d.ratings
    m = y.shape[1]
    last = d.n + 1
    columns = [area(d.sheet, c + 1, 2, c + 1, last, value=y[:, [j]]) for j, c in enumerate(d.rating_columns)]
    ratings = area(d.sheet, d.rating_columns[0] + 1, 2, d.rating_columns[-1] + 1, last, value=y)
    complete = ~np.isnan(y).any(axis=1)
    g.set(3, 1, "Raters")
    g.set(3, 2, m, "count")
    g.set(4, 1, "People rated by every rater (used by the ICC)")
    product = "*".join("ISNUMBER({rater%d})" % j for j in range(m))
    ctx.expression(g, 4, 2, f"SUMPRODUCT({product})", lambda: int(complete.sum()), style="count", key="n_rated",
                   **{f"rater{j}": column for j, column in enumerate(columns)})
    for j, c in enumerate(d.rating_columns):
        g.set(5 + j, 1, f"Mean rating, {d.header[c]}")

        def mean_check(j=j, c=c):
            if not (~np.isnan(y[:, j])).any():
                raise InsufficientDataError(f"rater column {d.header[c]!r} is blank")
            return float(np.nanmean(y[:, j]))

        ctx.formula(g, 5 + j, 2, "AVERAGE", columns[j], check=mean_check, style="coef")
    row = 6 + m
    icc_agreement_average = _icc(ctx, g, row, setup, ratings, m)
    row += 8
    finite = y[~np.isnan(y)]
    ordinal = bool(finite.size and np.all(finite == np.round(finite)) and np.unique(finite).size <= 10)
    g.set(row, 1, "Agreement on the rating scale", "heading")
    g.set(row, 2, "Estimate", "header")
    row += 1
    levels = ("ordinal", "interval") if ordinal else ("interval",)
    for level in levels:
        g.set(row, 1, f"Krippendorff's alpha, {level} (uses every rating, missing ones allowed)")
        ctx.formula(g, row, 2, "KRIPPENDORFF_ALPHA", ratings, level, checked=ctx.full_checks, style="coef",
                    key=f"krippendorff_{level}")
        row += 1
    if ordinal:
        for a in range(m):
            for b in range(a + 1, m):
                names = f"{d.header[d.rating_columns[a]]} and {d.header[d.rating_columns[b]]}"
                for weights, what in (("none", "Cohen's kappa"), ("quadratic", "Quadratic-weighted kappa")):
                    g.set(row, 1, f"{what}, {names}")
                    ctx.formula(g, row, 2, "COHEN_KAPPA", columns[a], columns[b], weights, checked=ctx.full_checks,
                                style="coef", key=f"kappa_{weights}_{a + 1}_{b + 1}")
                    row += 1
    else:
        g.set(row, 1, "Cohen's kappa is left out: the ratings are not on a short whole-number scale")
        row += 1
    g.para(row + 1, 1, "The ICC asks whether raters order and place people alike (agreement counts rater leniency "
                      "as error, consistency does not); kappa and Krippendorff's alpha ask whether raters give "
                      "the same scale points. Use the average-rater forms when the interview score is the mean "
                      "of the panel.")
    return Raters(icc_agreement_average)


def _icc(ctx: StudyContext, g, row: int, setup: SetupSheet, ratings: Ref, m: int) -> Ref:
    """The six ICC forms from ``row``; returns the estimate of ICC(A,k)."""
    g.set(row, 1, "Intraclass correlation (McGraw & Wong, 1996)", "heading")
    conf = ctx.setup.confidence
    for c, h in enumerate(("Estimate", f"{conf:.0%} CI lower", f"{conf:.0%} CI upper", "p (ICC = 0)"), start=2):
        g.set(row, c, h, "header")
    forms = (("oneway", "single", "One-way, single rater — ICC(1)"),
             ("agreement", "single", "Two-way, absolute agreement, single rater — ICC(A,1)"),
             ("consistency", "single", "Two-way, consistency, single rater — ICC(C,1)"),
             ("oneway", "average", f"One-way, mean of {m} raters — ICC(k)"),
             ("agreement", "average", f"Two-way, absolute agreement, mean of {m} raters — ICC(A,k)"),
             ("consistency", "average", f"Two-way, consistency, mean of {m} raters — ICC(C,k)"))
    estimates = {}
    for i, (model, unit, label) in enumerate(forms):
        r = row + 1 + i
        g.set(r, 1, label)
        for c, part in ((2, "estimate"), (3, "lower"), (4, "upper"), (5, "p")):
            written = ctx.formula(g, r, c, "ICC", ratings, model, unit, part, setup.confidence,
                                  checked=part == "estimate" or ctx.full_checks,
                                  style="p" if part == "p" else "coef", key=f"icc_{model}_{unit}_{part}")
            if part == "estimate":
                estimates[model, unit] = written
    for (model, unit), estimate in estimates.items():
        ctx.name(f"icc_{model}_{unit}", estimate)
    return estimates["agreement", "average"]


def is_panel(data) -> bool:
    """Whether ``data``'s predictor is a panel of ratings only (its score the raters' mean)."""
    return data.items is None and data.total is None and data.ratings is not None


def panel_reliability(ctx: StudyContext, g, row: int, setup: SetupSheet) -> Ref:
    """Row ``row`` of a Reliability sheet: ICC(A,k) of a panel-only predictor's ratings and its interval;
    returns the estimate's cell (the reliability of the raters' mean)."""
    d = ctx.data
    m = len(d.rating_columns)
    ratings = area(d.sheet, d.rating_columns[0] + 1, 2, d.rating_columns[-1] + 1, d.n + 1, value=d.ratings)
    g.set(row, 1, f"Panel of {m} raters: ICC(A,{m}), absolute agreement of the raters' mean (McGraw & Wong 1996)")
    out = None
    for c, part in ((2, "estimate"), (3, "lower"), (4, "upper")):
        written = ctx.formula(g, row, c, "ICC", ratings, "agreement", "average", part, setup.confidence,
                              checked=part == "estimate" or ctx.full_checks, style="coef",
                              key=f"panel_icc_{part}" if part != "estimate" else "panel_icc")
        out = written if part == "estimate" else out
    complete = int((~np.isnan(d.ratings)).all(axis=1).sum())
    g.set(row + 1, 1, f"The score is each person's mean of the ratings given; the ICC uses the {complete} people "
                      f"rated by every rater, so it describes the mean of all {m} (fewer ratings: less reliable).",
          "wrap")
    return out
