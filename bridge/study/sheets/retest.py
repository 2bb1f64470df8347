"""Reliability sheet: the retesters' mean gain (practice effect) and whether they are a selected group.

Rows below the test–retest correlation: the mean gain with its t interval, the SD of the gains, the standardized
gain, the share of the retesters who failed the first sitting and their first-sitting distance from all applicants,
then a live caution when they are a selected group (the rule: ``words.RETEST_RULE``).
"""

from __future__ import annotations

from ..context import Ref, StudyContext
from ..words import RETEST_RULE, RETEST_SELECTED
from .setup import SetupSheet

__all__ = ["retest_gain", "SELECTED_SHARE", "SELECTED_DIFFERENCE"]

#: The caution's thresholds (this tool's choice, stated on the sheet): most retesters failed the first sitting,
#: or their first-sitting mean lies half an SD or more from all applicants' (a "medium" difference, Cohen 1988).
SELECTED_SHARE = 0.8
SELECTED_DIFFERENCE = 0.5


def retest_gain(ctx: StudyContext, g, row: int, setup: SetupSheet, first: Ref, second: Ref) -> int:
    """Write the gain rows from ``row``; ``first`` is every applicant's score, ``second`` the retest column
    (both valued for the checks). Returns the rows used."""
    conf = ctx.setup.confidence
    g.set(row, 1, "Mean gain at the second sitting (second − first; practice effect)")
    ctx.formula(g, row, 2, "RETEST_GAIN", first, second, "gain", style="coef", key="retest_gain")
    for col, part in ((3, "lower"), (4, "upper")):
        ctx.formula(g, row, col, "RETEST_GAIN", first, second, part, setup.confidence, style="coef",
                    key=f"retest_gain_{part}")
    g.set(row + 1, 1, f"  SD of the gains (the interval is the paired t interval, {conf:.0%})")
    ctx.formula(g, row + 1, 2, "RETEST_GAIN", first, second, "sd", style="coef", key="retest_gain_sd")
    g.set(row + 2, 1, "Standardized gain (mean gain / root mean of the two sittings' variances, d_av)")
    ctx.formula(g, row + 2, 2, "RETEST_GAIN", first, second, "standardized", style="coef",
                key="retest_gain_standardized")
    g.set(row + 3, 1, "Share of the retesters who scored below the cut at the first sitting")
    share = ctx.formula(g, row + 3, 2, "RETEST_SELECTION", first, second, setup.cut_cell, "below cut",
                        style="pct", key="retest_below_cut")
    g.set(row + 4, 1, "Retesters' first-sitting mean minus all applicants' mean, in all applicants' SDs")
    difference = ctx.formula(g, row + 4, 2, "RETEST_SELECTION", first, second, setup.cut_cell, "first difference",
                             style="coef", key="retest_first_difference")
    used = 5
    if isinstance(share.value, float) and isinstance(difference.value, float):
        selected = share.value >= SELECTED_SHARE or abs(difference.value) >= SELECTED_DIFFERENCE
        ctx.expression(g, row + used, 1, "IF(OR({share}>={limit},ABS({difference})>={gap}),{text},\"\")",
                       lambda: RETEST_SELECTED if selected else "", style="caution", key="retest_selected",
                       share=share, limit=SELECTED_SHARE, difference=difference, gap=SELECTED_DIFFERENCE,
                       text=RETEST_SELECTED)
        used += 1
    return used + g.para(row + used, 1, RETEST_RULE)
