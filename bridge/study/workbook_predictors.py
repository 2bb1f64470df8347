"""Saving what several predictors add: each further predictor's sheets, and the study's extra long sheets.

Called by :func:`.workbook.save` after the analysis sheets: each further predictor's Reliability, Items,
Raters (with rating columns), Validity, Fairness and DIF (composed grids) and its Bands and Scored items (a
header now, the rows spliced in after saving, made under the predictor's sheet titles), then the long
sheets of ``ctx.long_sheets`` (the Combined sheet's scores).
"""

from __future__ import annotations

from openpyxl.utils import get_column_letter

from . import long_sheets
from .context import StudyContext, in_sheet_names
from .grid import styled
from .sheets import scored_items
from .sheets.bands import BANDS_SHEET
from .sheets.scored_items import SCORED_SHEET

__all__ = ["write_headers"]


def write_headers(wb, ctx: StudyContext, bands_header) -> tuple[dict, dict]:
    """Create the sheets; returns the rows to splice in (title -> function making the rows' XML) and each long
    sheet's last cell. ``bands_header(wb, bands, title)`` writes a Bands sheet's header."""
    rows, corners = {}, {}
    for p in ctx.predictors[1:]:
        d = p.data
        last = d.n + 1
        for base in ("Reliability", "Items", "Raters", "Validity", "Fairness", "DIF"):
            title = p.title(base)
            if title in ctx.grids:
                ctx.grids[title].write(wb)
        title = p.title(BANDS_SHEET)
        styles = bands_header(wb, p.bands, title)
        rows[title] = (lambda p=p, styles=styles: long_sheets.rows_xml(p.long_rows()(), 2, formulas=True,
                                                                      styles=styles))
        corners[title] = f"{get_column_letter(p.bands.width)}{p.bands.last_row}"
        if d.reverse_items:
            title = p.title(SCORED_SHEET)
            ws = wb.create_sheet(title)
            ws.freeze_panes = "A2"
            ws.append([styled(ws, h, "header") for h in scored_items.header(d)])
            make = (lambda p=p: in_sheet_names(p.names, lambda: scored_items.rows(p.data, p.setup.item_min,
                                                                                   p.setup.item_max)))
            rows[title] = (lambda make=make: long_sheets.rows_xml(make(), 2, formulas=True))
            corners[title] = f"{get_column_letter(len(d.item_columns))}{last}"
    for title, header, widths, make, width in ctx.long_sheets:
        ws = wb.create_sheet(title)
        ws.freeze_panes = "A2"
        for c, w in enumerate(widths, start=1):
            ws.column_dimensions[get_column_letter(c)].width = w
        ws.append([styled(ws, h, "header") for h in header])
        rows[title] = (lambda make=make: long_sheets.rows_xml(make(), 2, formulas=True))
        corners[title] = f"{get_column_letter(width)}{ctx.data.n + 1}"
    return rows, corners
