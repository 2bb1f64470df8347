"""Setup: the settings the study used; its numbers are inputs the other sheets' formulas read."""

from __future__ import annotations

import dataclasses

import numpy as np

from trueband.funcs.errors import InsufficientDataError

from ..context import Ref, StudyContext, cell
from ..setup import SETTINGS, SETUP_SHEET, StudyData

__all__ = ["SetupSheet", "write"]


@dataclasses.dataclass(frozen=True)
class SetupSheet:
    """The Setup cells other sheets read, each with its value, and the cut the study uses."""

    cut: float
    cut_message: str | None        # why nobody passes the cut, when nobody does
    success: float | None          # the success threshold: given, or the median criterion value
    confidence: Ref
    cut_cell: Ref
    criterion_reliability: Ref
    success_cell: Ref
    item_min: Ref
    item_max: Ref
    applicant_base_rate: Ref | None = None   # the applicant base rate the user gave (None: not given)

    def passes(self) -> None:
        """Raise the plain reason when nobody reaches the cut (the checks of cut-dependent figures call it)."""
        if self.cut_message:
            raise InsufficientDataError(self.cut_message)


def write(ctx: StudyContext, criterion_median: Ref) -> SetupSheet:
    """``criterion_median``: the range whose median is the default success threshold (Bands' criterion)."""
    g = ctx.sheet(SETUP_SHEET)
    g.widths.update({1: 24, 2: 30, 3: 70})
    for c, h in enumerate(("Setting", "Value", "What it means"), start=1):
        g.set(1, c, h, "header")
    s, d = ctx.setup, ctx.data
    cut = s.cut
    if cut is None:
        cut = float(np.nanmedian(d.scores))
        ctx.notes.append(f"No cut score was given; the study uses the median score, {cut:g}. Set 'cut score' on "
                         f"the Setup sheet (or --cut) to study your own cut.")
    cut_message = _cut_message(d, cut)
    if cut_message:
        ctx.notes.append("Cut score: " + cut_message + ".")
    rows: dict[str, int] = {}
    row = 2
    for key, (field, kind, meaning) in SETTINGS.items():
        value = getattr(s, field)
        if field == "data_sheet":
            value = d.sheet
        elif field == "cut":
            value = cut
        elif kind == "columns":
            value = ", ".join(value) if value else None
        elif field == "success" and value is None and d.criterion is not None and not np.isnan(d.criterion).all():
            value = "=" + ctx.call_text("MEDIAN", [criterion_median], SETUP_SHEET)
            meaning += "; here the median criterion value (a formula)"
        style = "input" if kind == "number" else None
        g.set(row, 1, key)
        g.set(row, 2, value, style)
        g.set(row, 3, meaning, "wrap")
        rows[field] = row
        row += 1
    g.para(row + 1, 1, "The numbers above are inputs: change them here and recalculate (trueband recalc) to "
                      "update the study. Changing a column name here does not re-map the study; run "
                      "trueband study again for that.")
    if s.success is not None:
        success = s.success
    elif d.criterion is not None and not np.isnan(d.criterion).all():
        success = float(np.nanmedian(d.criterion))
    else:
        success = None

    def setting(field: str, value) -> Ref:
        return cell(SETUP_SHEET, rows[field], 2, value=value, name=field)

    return SetupSheet(cut=cut, cut_message=cut_message, success=success,
                      confidence=setting("confidence", s.confidence), cut_cell=setting("cut", cut),
                      criterion_reliability=setting("criterion_reliability", s.criterion_reliability),
                      success_cell=setting("success", success), item_min=setting("item_min", s.item_min),
                      item_max=setting("item_max", s.item_max),
                      applicant_base_rate=(setting("applicant_base_rate", s.applicant_base_rate)
                                           if s.applicant_base_rate is not None else None))


def _cut_message(d: StudyData, cut: float) -> str | None:
    """Why nobody passes the cut (above the highest possible score, or above every score), or None."""
    scores = d.scores[~np.isnan(d.scores)]
    if not scores.size or (scores >= cut).any():
        return None
    again = "; set a lower cut score on the Setup sheet (or --cut)"
    if d.total is None and d.items is not None and d.item_scale is not None:
        lo, hi = d.item_scale
        k = d.items.shape[1]
        whence = "" if d.item_scale_given or d.binary_items else ", the range found in the data"
        if cut > k * hi:
            return (f"the cut score, {cut:g}, is above the highest possible score, {k * hi:g} ({k} items scored "
                    f"{lo:g} to {hi:g}{whence}), so nobody can pass{again}")
    return f"nobody reaches the cut score, {cut:g}: the highest score in the data is {scores.max():g}{again}"
