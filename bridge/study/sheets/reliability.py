"""Reliability: score statistics, internal consistency, test–retest, and the measurement error."""

from __future__ import annotations

import dataclasses

import numpy as np

from trueband.funcs.errors import InsufficientDataError

from ..context import Ref, StudyContext, area
from . import raters as raters_sheet
from .bands import BandsLayout
from .retest import retest_gain
from .scored_items import SCORED_SHEET
from .setup import SetupSheet

__all__ = ["Reliability", "write"]

SHEET = "Reliability"
MEASUREMENT_ROW = 28   # the measurement error heading (the retest rows are above it)


@dataclasses.dataclass(frozen=True)
class Reliability:
    """The cells other sheets read, each with its value (or why it is not computable)."""

    scores: Ref                # every score (Bands column C)
    items: Ref | None          # the item scores the statistics use, valued as the item matrix
    n_scored: Ref
    sd: Ref
    alpha: Ref
    alpha_lower: Ref | None
    alpha_upper: Ref | None
    reliability: Ref           # the reliability the SEM, intervals and bands use
    sem: Ref
    band_width: Ref


def _items_range(ctx: StudyContext, last: int) -> Ref:
    """The item scores the statistics use: the data's item columns, or the Scored items sheet."""
    d = ctx.data
    if d.scored_sheet:
        return area(SCORED_SHEET, 1, 2, len(d.item_columns), last, value=d.items)
    return area(d.sheet, d.item_columns[0] + 1, 2, d.item_columns[-1] + 1, last, value=d.items)


def write(ctx: StudyContext, setup: SetupSheet, bands: BandsLayout) -> Reliability:
    g = ctx.sheet(SHEET)
    g.widths.update({1: 58, 2: 14, 3: 14, 4: 60})
    d = ctx.data
    g.set(1, 1, f"Reliability of {ctx.setup.test_name}", "title")
    conf = ctx.setup.confidence
    scores_range = bands.scores
    scores_all = d.scores
    has_score = ~np.isnan(scores_all)
    s = scores_all[has_score]
    g.set(3, 1, "People with a score")
    n_scored = ctx.formula(g, 3, 2, "COUNT", scores_range, check=lambda: int(s.size), style="count", key="n_scored")
    g.set(4, 1, "Mean score")
    ctx.formula(g, 4, 2, "AVERAGE", scores_range, check=lambda: float(np.mean(s)), style="score", key="mean")
    g.set(5, 1, "Standard deviation of scores (n − 1)")

    def sd_check():
        if s.size < 2:
            raise InsufficientDataError("fewer than 2 people have a score")
        sd = float(np.std(s, ddof=1))
        if sd == 0:
            raise InsufficientDataError("every person has the same score")
        return sd

    sd = ctx.formula(g, 5, 2, "STDEV", scores_range, check=sd_check, style="score", key="sd")
    g.set(7, 1, "Internal consistency", "heading")
    g.set(7, 2, "Estimate", "header")
    g.set(7, 3, f"{conf:.0%} CI lower", "header")
    g.set(7, 4, f"{conf:.0%} CI upper", "header")
    items, alpha, alpha_lower, alpha_upper = _internal_consistency(ctx, g, setup, bands)
    retest_r = _retest(ctx, g, setup, scores_range, has_score)
    panel = raters_sheet.panel_reliability(ctx, g, 8, setup) if raters_sheet.is_panel(d) else None
    g.set(MEASUREMENT_ROW, 1, "Measurement error", "heading")
    g.set(MEASUREMENT_ROW + 1, 1, "Reliability used for the SEM, intervals and bands (edit to use another)")
    if d.items is not None:
        reliability = ctx.link(g, MEASUREMENT_ROW + 1, 2, alpha, style="input_coef", key="reliability")
    elif panel is not None:  # a panel of ratings only: the ICC of the raters' mean
        reliability = ctx.link(g, MEASUREMENT_ROW + 1, 2, panel, style="input_coef", key="reliability")
    elif retest_r is not None and isinstance(retest_r.value, float):
        reliability = ctx.link(g, MEASUREMENT_ROW + 1, 2, retest_r, style="input_coef", key="reliability")
    else:
        reliability = ctx.not_computable_at(g, MEASUREMENT_ROW + 1, 2, "no reliability estimate: give item columns or a retest column",
                                            key="reliability")
    g.set(MEASUREMENT_ROW + 2, 1, "Standard error of measurement (SEM)")
    sem = ctx.formula(g, MEASUREMENT_ROW + 2, 2, "SEM", sd, reliability, style="coef", key="sem")
    g.set(MEASUREMENT_ROW + 3, 1, "Standard error of the difference between two scores (SED)")
    ctx.formula(g, MEASUREMENT_ROW + 3, 2, "SED", sd, reliability, style="coef", key="sed")
    g.set(MEASUREMENT_ROW + 4, 1, f"Band width: scores closer than this are not reliably different ({conf:.0%})")
    band_width = ctx.formula(g, MEASUREMENT_ROW + 4, 2, "BAND_WIDTH", sd, reliability, setup.confidence, style="coef",
                             key="band_width")
    g.para(MEASUREMENT_ROW + 6, 1, "Alpha, KR-20, split-half and omega estimate internal consistency from one sitting; the SEM "
                  "and bands use the reliability used above. Intervals: Feldt's F-based limits for alpha, Fisher's z "
                  "for the retest correlation.")
    return Reliability(scores=scores_range, items=items, n_scored=n_scored, sd=sd, alpha=alpha,
                       alpha_lower=alpha_lower, alpha_upper=alpha_upper, reliability=reliability, sem=sem,
                       band_width=band_width)


def _retest(ctx: StudyContext, g, setup: SetupSheet, scores_range: Ref, has_score) -> Ref | None:
    """The test–retest rows (15 to 17); returns the retest correlation's cell, or None without a retest column."""
    d = ctx.data
    g.set(15, 1, "Test–retest", "heading")
    g.set(16, 1, "People who sat the test twice")
    g.set(17, 1, "Test–retest correlation")
    if d.retest is None:
        ctx.not_computable_at(g, 16, 2, "no retest column was given", key="n_retest")
        ctx.not_computable_at(g, 17, 2, "no retest column was given", key="retest_r")
        return None
    retest = d.retest
    both = has_score & ~np.isnan(retest)
    col = d.columns["retest"] + 1
    retest_range = area(d.sheet, col, 2, col, d.n + 1)
    n_retest = ctx.expression(g, 16, 2, "SUMPRODUCT(ISNUMBER({scores})*ISNUMBER({retest}))",
                              lambda: int(both.sum()), style="count", key="n_retest", scores=scores_range,
                              retest=retest_range)

    def retest_check():
        if both.sum() < 3:
            raise InsufficientDataError(f"fewer than 3 people have both a score and a retest score "
                                        f"(column {ctx.setup.retest!r})")
        a, b = d.scores[both], retest[both]
        if np.std(a) == 0 or np.std(b) == 0:
            raise InsufficientDataError("the scores or the retest scores do not vary")
        return float(np.corrcoef(a, b)[0, 1])

    retest_r = ctx.formula(g, 17, 2, "CORREL", scores_range, retest_range, check=retest_check, style="coef",
                           key="retest_r")
    for col, part in ((3, "lower"), (4, "upper")):
        ctx.formula(g, 17, col, "R_CI", retest_r, n_retest, part, setup.confidence, style="coef",
                    key=f"retest_{part}")
    first = scores_range.with_value([[None if np.isnan(x) else float(x)] for x in d.scores])
    second = retest_range.with_value([[None if np.isnan(x) else float(x)] for x in retest])
    retest_gain(ctx, g, 18, setup, first, second)
    return retest_r


def _internal_consistency(ctx: StudyContext, g, setup: SetupSheet, bands: BandsLayout):
    """Rows 8 to 13: alpha and its interval, KR-20, split-half, omega; returns the item range and alpha's cells."""
    d = ctx.data
    alpha_lower = alpha_upper = items = None
    x = d.items
    if x is not None:
        items = _items_range(ctx, bands.last)
        complete = ~np.isnan(x).any(axis=1)
        xc = x[complete]
        k = x.shape[1]
        g.set(8, 1, "Items")
        g.set(8, 2, k, "count")
        n_items = Ref(SHEET, 8, 2, value=k, name="k").qualified()
        g.set(9, 1, "People with every item answered (used by the item statistics)")
        n_complete = ctx.expression(g, 9, 2, "COUNTIF({answered},{k})", lambda: int(complete.sum()),
                                    style="count", key="n_complete", answered=bands.answered, k=n_items)
        g.set(10, 1, "Coefficient alpha (Cronbach)")
        alpha = ctx.formula(g, 10, 2, "CRONBACH_ALPHA", items, style="coef", key="alpha")
        alpha_lower, alpha_upper = (
            ctx.formula(g, 10, col, "ALPHA_CI", alpha, n_complete.qualified(), n_items, part, setup.confidence,
                        style="coef", key=f"alpha_{part}") for col, part in ((3, "lower"), (4, "upper")))
        binary = bool(np.isin(xc, (0.0, 1.0)).all()) if xc.size else False
        g.set(11, 1, "KR-20 (items scored 0/1)")
        if binary:
            # the alias: "KR20(" reads as the cell KR20 followed by a bracket in spreadsheet apps
            ctx.formula(g, 11, 2, "KR_20", items, checked=ctx.full_checks, style="coef", key="kr20")
        else:
            ctx.not_computable_at(g, 11, 2, "the items are not all scored 0/1", key="kr20")
        g.set(12, 1, "Split-half, odd against even items, Spearman–Brown stepped up")
        ctx.formula(g, 12, 2, "SPLIT_HALF", items, "odd-even", checked=ctx.full_checks, style="coef",
                    key="split_half")
        g.set(13, 1, "Omega total (McDonald), one-factor model")
        ctx.formula(g, 13, 2, "OMEGA", items, checked=ctx.full_checks, style="coef", key="omega")
    else:
        reason = ("no item columns were given (a panel of ratings: its reliability is the ICC above)"
                  if raters_sheet.is_panel(d) else "no item columns were given (only a total), so internal "
                  "consistency needs items")
        for r, label, key in ((10, "Coefficient alpha (Cronbach)", "alpha"), (11, "KR-20", "kr20"),
                              (12, "Split-half", "split_half"), (13, "Omega", "omega")):
            g.set(r, 1, label)
            missing = ctx.not_computable_at(g, r, 2, reason, key=key)
            if key == "alpha":
                alpha = missing
    return items, alpha, alpha_lower, alpha_upper
