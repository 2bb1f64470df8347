"""Writing the study's sheets to a package: the composed sheets in their order, then the long sheets' rows.

The Bands, Scored items and data-copy sheets get only their header here; their rows are spliced into the
saved package (see :mod:`.long_sheets`), which is much faster than writing them cell by cell.
"""

from __future__ import annotations

import re
import zipfile
from pathlib import Path

from openpyxl import Workbook
from openpyxl.utils import get_column_letter

from ..workbook.files import replacing
from . import long_sheets, printing, workbook_predictors
from .context import StudyContext
from .grid import styled
from .setup import SETUP_SHEET
from .sheets import bands as bands_sheet
from .sheets import content, cut_score, data_copy, distractors, judges, scored_items
from .sheets.bands import BANDS_SHEET, Bands
from .sheets.scored_items import SCORED_SHEET
from .sheets.setup import SetupSheet

__all__ = ["ANALYSIS_SHEETS", "save"]

ANALYSIS_SHEETS = ("Summary", "Reliability", "Items", "Raters", "Validity", BANDS_SHEET, "Impact", "Strata",
                   "Cuts", "Stages", "Groups", "Utility", "Combined", "Fairness", "DIF", "Notes")
#: Sheets written only when the study has their data (cut score, judges' sheet, content ratings), before Notes.
_OPTIONAL = (distractors.SHEET, cut_score.SHEET, judges.SHEET, content.SHEET)
ANALYSIS_SHEETS = ANALYSIS_SHEETS[:-1] + _OPTIONAL + ANALYSIS_SHEETS[-1:]
# Strata, Cuts, Stages, Groups, Combined, Fairness, DIF and the optional ones: when the study has them


def _bands_header(wb: Workbook, bands: Bands, title: str = BANDS_SHEET) -> bands_sheet.BandStyles:
    ws = wb.create_sheet(title)
    for c, w in enumerate(bands.widths(), start=1):
        ws.column_dimensions[get_column_letter(c)].width = w
    ws.row_dimensions[1].height = bands.header_height()  # the wrapped headers whole
    ws.freeze_panes = "A2"
    ws.print_title_rows = "1:1"
    ws.page_setup.fitToWidth = 1
    ws.page_setup.fitToHeight = 0
    ws.sheet_properties.pageSetUpPr.fitToPage = True
    ws.append([styled(ws, h, "header") for h in bands.layout.header])
    return bands.styles(ws)


def save(ctx: StudyContext, setup: SetupSheet, bands: Bands, path: Path) -> None:
    """Write the workbook, then splice in the rows of the long sheets."""
    d = ctx.data
    printing.lay_out(ctx)  # the print layout of every composed sheet (issue 20)
    wb = Workbook(write_only=True)
    for title in ANALYSIS_SHEETS:
        if title == BANDS_SHEET:
            band_styles = _bands_header(wb, bands)
        elif title in ctx.grids:  # not every study has every sheet (Strata without a stratum column, ...)
            ctx.grids[title].write(wb)
    more_rows, more_corners = workbook_predictors.write_headers(wb, ctx, _bands_header)
    ctx.grids[SETUP_SHEET].write(wb)
    if d.answer_key is not None:  # raw answers: the Answers sheet, its key row as the header
        ws = wb.create_sheet(scored_items.ANSWERS_SHEET)
        ws.freeze_panes = "B2"
        ws.append([styled(ws, h, "input") for h in scored_items.answers_header(d)])
    if d.scored_sheet:
        ws = wb.create_sheet(SCORED_SHEET)
        ws.freeze_panes = "A2"
        ws.append([styled(ws, h, "header") for h in scored_items.header(d)])
    copy_styles = data_copy.write_header(wb, d)
    printing.out_of_print(wb, ctx)  # the per-applicant sheets print only when asked for
    wb.save(path)
    _characters_as_utf8(path)
    last = d.n + 1
    rows = {BANDS_SHEET: lambda: long_sheets.rows_xml(bands.rows(d), 2, formulas=True, styles=band_styles),
            d.sheet: lambda: long_sheets.rows_xml(d.rows, 2, formulas=False, styles=copy_styles)}
    corners = {BANDS_SHEET: f"{get_column_letter(bands.width)}{bands.last_row}",
               d.sheet: f"{get_column_letter(max(1, len(d.header)))}{last}"}
    if d.answer_key is not None:
        rows[scored_items.ANSWERS_SHEET] = lambda: long_sheets.rows_xml(scored_items.answers_rows(d), 2, formulas=True)
        corners[scored_items.ANSWERS_SHEET] = f"{get_column_letter(len(d.item_columns) + 1)}{last}"
    if d.scored_sheet:
        rows[SCORED_SHEET] = lambda: long_sheets.rows_xml(
            scored_items.rows(d, setup.item_min, setup.item_max), 2, formulas=True)
        corners[SCORED_SHEET] = f"{get_column_letter(len(d.item_columns))}{last}"
    rows.update(more_rows)
    corners.update(more_corners)
    long_sheets.splice_rows(path, rows, corners)


_CHARACTER_REFERENCE = re.compile(rb"&#(?:x([0-9A-Fa-f]+)|([0-9]+));")


def _characters_as_utf8(path: Path) -> None:
    """openpyxl writes every character beyond ASCII in a sheet as a character reference (``&#215;`` for ×),
    which sends each such part through the XML parser when the study is recalculated (the engine's fast
    readers take the regular form only; see :mod:`trueband.bridge.workbook.xml_form`): the references of
    characters beyond ASCII become the UTF-8 characters (the same text to any reader; ASCII references,
    which may stand for ``<``, ``&`` or a line end in an attribute, stay). Done before the long sheets' rows
    are spliced in, so the package is small."""
    def character(m: re.Match) -> bytes:
        code = int(m[1], 16) if m[1] else int(m[2])
        return chr(code).encode("utf-8") if 0x80 <= code <= 0x10FFFF and not 0xD800 <= code <= 0xDFFF else m[0]

    with replacing(path) as tmp, zipfile.ZipFile(path) as src, zipfile.ZipFile(tmp, "w", zipfile.ZIP_DEFLATED) as dst:
        for info in src.infolist():
            data = src.read(info.filename)
            if info.filename.startswith("xl/worksheets/") and info.filename.endswith(".xml") and b"&#" in data:
                data = _CHARACTER_REFERENCE.sub(character, data)
            dst.writestr(info, data, compress_type=zipfile.ZIP_DEFLATED, compresslevel=long_sheets.LEVEL)
