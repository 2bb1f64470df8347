"""Utility: success rate (Taylor–Russell), criterion gain (Naylor–Shine), money gain (Brogden–Cronbach–Gleser)."""

from __future__ import annotations

import dataclasses

import numpy as np

from ..context import Ref, StudyContext, cell
from .bands import BandsLayout
from .setup import SetupSheet
from ..words import BASE_RATE_NOTE, UTILITY_VALIDITY_NOTE, VALIDITY_NOT_ESTABLISHED
from .validity import Validity

__all__ = ["Utility", "write"]

SHEET = "Utility"

#: The inputs a user replaces with their own figures: (row, label, value, style).
INPUTS = ((7, "People hired a year with the test", 20, "input"),
          (8, "Average tenure of those hired, years", 3, "input"),
          (9, "SD of yearly job performance in money (a common rule of thumb: 40% of pay)", 19200, "input_money"),
          (10, "Testing cost per applicant", 40, "input_money"))


@dataclasses.dataclass(frozen=True)
class Utility:
    taylor_russell: Ref
    base_rate: Ref
    bcg: Ref
    validity_used: Ref | None = None   # the validity the figures use (the Cuts sheet reads it)
    base_rate_words: str = "base rate"  # what the base rate is (the hires' share, or the applicant base rate given)


def write(ctx: StudyContext, setup: SetupSheet, bands: BandsLayout, validity: Validity) -> Utility:
    g = ctx.sheet(SHEET)
    g.widths.update({1: 70, 2: 16})
    d = ctx.data
    g.set(1, 1, "Selection utility", "title")
    g.para(2, 1, "Shaded cells with a dashed border are inputs: replace them with your own figures.")
    validity_caution(ctx, g, 3, validity, "utility_validity_not_established")
    g.set(4, 1, "Validity used (operational validity from the Validity sheet; see the note below)")
    source = validity.operational if validity.operational is not None and isinstance(validity.operational.value,
                                                                                       float) else validity.r
    if isinstance(source.value, float):
        validity_used = ctx.link(g, 4, 2, source.bare(), style="input_coef", key="validity_used")
    else:
        validity_used = ctx.not_computable_at(g, 4, 2, "no validity estimate (see the Validity sheet)",
                                              key="validity_used")
    scores = d.scores
    has_score = ~np.isnan(scores)
    share = float((scores[has_score] >= setup.cut).mean())
    g.set(5, 1, "Selection ratio: share of applicants at or above the cut")
    selection_ratio = ctx.expression(g, 5, 2, "COUNTIF({selected},1)/COUNT({selected})", lambda: share,
                                     style="coef", key="selection_ratio", selected=bands.selected)
    base_rate, base_words = _base_rate(ctx, g, setup, bands, validity)
    inputs = {}
    for r, label, value, style in INPUTS:
        g.set(r, 1, label)
        g.set(r, 2, value, style)
        inputs[r] = cell(SHEET, r, 2, value=value)
    hired, tenure, money_sd, cost = (inputs[r] for r in (7, 8, 9, 10))
    g.set(12, 1, "Results", "heading")
    g.set(13, 1, "Success rate among those selected (Taylor–Russell)")
    taylor_russell = ctx.formula(g, 13, 2, "TAYLOR_RUSSELL", validity_used, base_rate, selection_ratio,
                                 before=setup.passes, style="pct", key="taylor_russell")
    g.set(14, 1, "Gain in success rate over hiring without the test")
    ctx.expression(g, 14, 2, "{selected}-{base}", lambda: ctx.value(taylor_russell) - ctx.value(base_rate),
                   style="pct", key="success_gain", selected=taylor_russell, base=base_rate)
    g.set(15, 1, "Mean standard criterion score of those selected (Naylor–Shine)")
    ctx.formula(g, 15, 2, "NAYLOR_SHINE", validity_used, selection_ratio, before=setup.passes, style="coef",
                key="naylor_shine")
    g.set(16, 1, "Money gain over the tenure of one year's hires, less testing cost (Brogden–Cronbach–Gleser)")
    bcg = ctx.formula(g, 16, 2, "BCG_UTILITY", hired, tenure, validity_used, money_sd, selection_ratio, cost,
                      before=setup.passes, style="money", key="bcg")
    g.set(17, 1, "For comparison: success rate with the validity against the observed criterion (range "
                 "restriction corrected only)")
    ctx.formula(g, 17, 2, "TAYLOR_RUSSELL", validity.r_range or validity.r, base_rate, selection_ratio, before=setup.passes,
                style="pct", key="taylor_russell_observed")
    row = 19 + g.para(19, 1, "Utility figures rest on assumptions (validity, performance value, tenure) that the "
                             "inputs state; treat them as orders of magnitude, not forecasts.")
    row += g.para(row, 1, UTILITY_VALIDITY_NOTE)
    g.para(row, 1, BASE_RATE_NOTE)
    return Utility(taylor_russell, base_rate, bcg, validity_used, base_words)


def validity_caution(ctx: StudyContext, g, row: int, validity: Validity, key: str) -> int:
    """A live line at ``row`` saying that local validity is not established when the observed validity's interval
    includes 0 (empty text otherwise), above utility figures (the Summary and Utility use it); the rows it takes."""
    low, high = validity.r_lower, validity.r_upper
    if low is None or high is None or not all(isinstance(x.value, float) for x in (low, high)):
        return 0
    shown = VALIDITY_NOT_ESTABLISHED if low.value <= 0 <= high.value else ""
    ctx.expression(g, row, 1, 'IF(AND({low}<=0,{high}>=0),{text},"")', lambda: shown, style="caution", key=key,
                   low=low.qualified_relative(), high=high.qualified_relative(), text=VALIDITY_NOT_ESTABLISHED)
    return 1


def _base_rate(ctx: StudyContext, g, setup: SetupSheet, bands: BandsLayout, validity: Validity):
    """Row 6: the base rate the figures use (the applicant base rate given on Setup, else the hires' share reaching
    the success threshold) and the words that say which; returns (its cell, the words)."""
    d = ctx.data
    if setup.applicant_base_rate is not None:
        g.set(6, 1, "Base rate: the applicant base rate given on Setup (share of applicants who would succeed)")
        g.set(6, 3, "(applicant base rate, from Setup)")
        return (ctx.link(g, 6, 2, setup.applicant_base_rate, style="input_coef", key="base_rate"),
                "applicant base rate, from Setup")
    g.set(6, 1, "Base rate: share of the hires (people with a criterion value) who reach the success threshold")
    g.set(6, 3, "(share of the hires; give the applicant base rate on Setup if known)")
    words = "share of the hires reaching the success threshold"
    if d.criterion is not None and setup.success is not None and (~np.isnan(d.criterion)).any():
        values = d.criterion[~np.isnan(d.criterion)]
        base = float((values >= setup.success).mean())
        criteria = validity.criteria_listed or bands.criterion
        return ctx.expression(g, 6, 2, 'COUNTIF({criteria},">="&{success})/COUNT({criteria})', lambda: base,
                              style="input_coef", key="base_rate", criteria=criteria,
                              success=setup.success_cell), words
    return ctx.not_computable_at(g, 6, 2, "no criterion values", key="base_rate"), words
