"""The predictors of a study: the first one's sheets (written by :func:`..build.plan` as always) and, for each
further predictor, the same sheet modules written again under titles that name it.

A further predictor (a ``predictor`` block of the Setup sheet) gets its settings on the Setup sheet below the
study's, and its own Reliability, Items, Validity and Bands sheets (``Reliability (Work Style
Questionnaire)``...), written by the very modules that write the first predictor's: inside
:meth:`..context.StudyContext.predictor` the handles those modules make take the predictor's sheet titles.
Its named cells are listed as ``p2_alpha``, ``p2_r``... Impact and Utility are the first predictor's.
"""

from __future__ import annotations

import contextlib
import dataclasses
from typing import Callable

import numpy as np

from ..context import Ref, StudyContext, cell, in_sheet_names
from ..setup import SETUP_SHEET, StudyData
from ..setup_predictors import sheet_label
from . import bands as bands_sheet
from . import items as items_sheet
from . import raters as raters_sheet
from . import reliability as reliability_sheet
from . import validity as validity_sheet
from .bands import BANDS_SHEET, Bands, BandsLayout
from .reliability import Reliability
from .scored_items import SCORED_SHEET
from .setup import SetupSheet, _cut_message
from .validity import Validity

__all__ = ["Predictor", "write", "PER_PREDICTOR_SHEETS"]

#: The sheets each further predictor gets a copy of (the Fairness and DIF sheets are named by their modules).
PER_PREDICTOR_SHEETS = (reliability_sheet.SHEET, items_sheet.SHEET, validity_sheet.SHEET, BANDS_SHEET,
                        SCORED_SHEET, "Fairness", "DIF", raters_sheet.SHEET)


@dataclasses.dataclass(frozen=True)
class Predictor:
    """One predictor's data, sheets and the cells other sheets read (made under its sheet titles)."""

    number: int                 # 1 for the first predictor
    name: str
    data: StudyData
    setup: SetupSheet
    layout: BandsLayout
    rel: Reliability
    bands: Bands
    validity: Validity
    names: dict                 # sheet module title -> this predictor's title ({} for the first)
    key_prefix: str
    scores: Ref                 # Bands: every score
    criterion: Ref | None       # Bands: the criterion (blank for people without one)
    scores_with_criterion: Ref | None
    group_numbers: Ref | None   # Bands: the group number column

    @contextlib.contextmanager
    def sheets(self, ctx: StudyContext, full_checks: bool):
        """The context its sheets are written in (the study's own for the first predictor)."""
        if self.number == 1:
            yield ctx
            return
        with ctx.predictor(self.data, self.names, self.key_prefix, full_checks=full_checks) as pctx:
            yield pctx

    def title(self, base: str) -> str:
        return self.names.get(base, base)

    def long_rows(self) -> Callable:
        """The Bands rows of this predictor, made under its sheet titles while the workbook is saved."""
        return lambda: in_sheet_names(self.names, lambda: self.bands.rows(self.data))


def _handles(layout: BandsLayout, data: StudyData) -> dict:
    """The Bands ranges other sheets read, made now (under the sheet titles in force)."""
    has_criterion = data.criterion is not None
    return dict(scores=layout.scores, criterion=layout.criterion if has_criterion else None,
                scores_with_criterion=layout.scores_with_criterion if has_criterion else None,
                group_numbers=layout.group_numbers_range if layout.group_col is not None else None)


def first(ctx: StudyContext, setup: SetupSheet, rel: Reliability, bands: Bands, validity: Validity) -> Predictor:
    """The first predictor, whose sheets :func:`..build.plan` has written."""
    d = ctx.data
    return Predictor(1, d.setup.test_name, d, setup, bands.layout, rel, bands, validity, {}, "",
                     **_handles(bands.layout, d))


def write(ctx: StudyContext, setup: SetupSheet, full_checks: Callable[[StudyData], bool]) -> list[Predictor]:
    """Each further predictor's Setup rows and sheets; ``full_checks(data)`` as :func:`..build._full_checks`."""
    out = []
    taken = {t.lower() for t in ctx.grids} | {ctx.data.sheet.lower()}
    for number, pdata in enumerate(ctx.data.predictors, start=2):
        name = pdata.setup.test_name
        label = sheet_label(name, PER_PREDICTOR_SHEETS, taken)
        names = {base: f"{base} ({label})" for base in PER_PREDICTOR_SHEETS}
        taken |= {t.lower() for t in names.values()}
        with ctx.predictor(pdata, names, f"p{number}_", full_checks=full_checks(pdata)) as pctx:
            layout = bands_sheet.layout(pdata)
            psetup = _setup_rows(pctx, setup, number, layout)
            rel = reliability_sheet.write(pctx, psetup, layout)
            bands = bands_sheet.plan(pctx, layout, psetup, rel)
            items_sheet.write(pctx, psetup, rel)
            if pdata.ratings is not None:  # the panel's agreement on its own Raters sheet
                raters_sheet.write(pctx, psetup)
            validity = validity_sheet.write(pctx, psetup, rel, layout)
            out.append(Predictor(number, name, pdata, psetup, layout, rel, bands, validity, names, f"p{number}_",
                                 **_handles(layout, pdata)))
    return out


def _setup_rows(ctx: StudyContext, setup: SetupSheet, number: int, layout: BandsLayout) -> SetupSheet:
    """The predictor's block on the Setup sheet (its name, columns, item scale and cut: inputs its sheets read)."""
    g = ctx.grids[SETUP_SHEET]
    d, s = ctx.data, ctx.setup
    row = max(r for r, _ in g.cells) + 2
    g.set(row, 1, "predictor", "heading")
    g.set(row, 2, s.test_name, "heading")
    g.set(row, 3, f"predictor {number}: the settings below belong to it alone", "wrap")
    cut = s.cut
    if cut is None:
        cut = float(np.nanmedian(d.scores))
        ctx.notes.append(f"No cut score was given for {s.test_name}; the study uses its median score, {cut:g}.")
    cut_message = _cut_message(d, cut)
    if cut_message:
        ctx.notes.append(f"Cut score of {s.test_name}: {cut_message}.")
    shown = {"item columns": ", ".join(s.items) or None, "reverse keyed items": ", ".join(s.reverse) or None,
             "item scale minimum": s.item_min, "item scale maximum": s.item_max, "total column": s.total,
             "rating columns": ", ".join(s.ratings) or None, "retest column": s.retest, "cut score": cut}
    rows = {}
    for k, (key, value) in enumerate(shown.items(), start=1):
        g.set(row + k, 1, key)
        g.set(row + k, 2, value, "input" if key in ("cut score", "item scale minimum", "item scale maximum")
              else None)
        rows[key] = row + k
    if s.ratings:
        g.set(rows["rating columns"], 3, ("the score is each person's mean of the ratings given; " if
                                          raters_sheet.is_panel(d) else "") + "the raters' agreement is on its "
                                         "Raters sheet", "wrap")

    def setting(key: str, value, field: str) -> Ref:
        return cell(SETUP_SHEET, rows[key], 2, value=value, name=field)

    return dataclasses.replace(setup, cut=cut, cut_message=cut_message, cut_cell=setting("cut score", cut, "cut"),
                               item_min=setting("item scale minimum", s.item_min, "item_min"),
                               item_max=setting("item scale maximum", s.item_max, "item_max"))
