"""A small sheet composed cell by cell (:class:`Grid`), its cell styles, and how a sheet name is quoted."""

from __future__ import annotations

import textwrap
from typing import Any

from openpyxl import Workbook
from openpyxl.cell import WriteOnlyCell
from openpyxl.styles import Alignment, Border, Font, PatternFill, Side
from openpyxl.utils import get_column_letter

__all__ = ["Grid", "P_FORMAT", "STYLES", "styled", "quote", "INK", "HEADER_FILL", "INPUT_FILL", "CAUTION_INK", "NA_INK", "INPUT_BORDER"]

#: p values to four decimals, and "< 0.0001" below that rather than a misleading 0.0000 (a conditional
#: number format that LibreOffice and other spreadsheet apps read alike)
P_FORMAT = '[<0.0001]"< 0.0001";0.0000'

#: The study's own palette, chosen to read in grey print: each colour a distinct lightness (CIE L*, checked by
#: tests/test_print_pdf.py), and input cells marked by a dashed border as well as by their fill.
INK = "1F3A4D"            # titles, headings, dark chart series (L* about 24)
HEADER_FILL = "A7BAB4"    # table header rows (L* about 74)
INPUT_FILL = "E9DDC0"     # cells a user may edit (L* about 88)
CAUTION_INK = "7A3B12"    # cautions (L* about 33)
NA_INK = "8C1C13"         # "not computable" (italic as well as coloured)
_INPUT_EDGE = Side(style="dashed", color=INK)
_INPUT_BORDER = Border(left=_INPUT_EDGE, right=_INPUT_EDGE, top=_INPUT_EDGE, bottom=_INPUT_EDGE)
_INPUT_FILL = PatternFill("solid", fgColor=INPUT_FILL)
#: The dashed border of input cells (the templates mark their input cells the same way)
INPUT_BORDER = _INPUT_BORDER

STYLES: dict[str, dict[str, Any]] = {
    "title": {"font": Font(bold=True, size=14, color=INK)},
    "heading": {"font": Font(bold=True, size=11, color=INK)},
    "header": {"font": Font(bold=True), "fill": PatternFill("solid", fgColor=HEADER_FILL),
               "alignment": Alignment(wrap_text=True, vertical="top")},
    "label": {},
    # long text is split into lines over several rows (see Grid.para): apps do not all grow a row
    # to fit wrapped text when they open a file
    "wrap": {"alignment": Alignment(vertical="top")},
    "caution": {"font": Font(bold=True, color=CAUTION_INK)},
    "na": {"font": Font(italic=True, color=NA_INK)},
    "coef": {"number_format": "0.000"},
    "p": {"number_format": P_FORMAT},
    "count": {"number_format": "0"},
    "score": {"number_format": "0.0"},
    "pct": {"number_format": "0.0%"},
    "money": {"number_format": "#,##0"},
    "input": {"fill": _INPUT_FILL, "border": _INPUT_BORDER, "number_format": "General"},
    "input_coef": {"fill": _INPUT_FILL, "border": _INPUT_BORDER, "number_format": "0.000"},
    "input_money": {"fill": _INPUT_FILL, "border": _INPUT_BORDER, "number_format": "#,##0"},
}


def quote(sheet: str) -> str:
    """A sheet name as a formula writes it before '!': in single quotes, a quote doubled."""
    return "'" + sheet.replace("'", "''") + "'"


class Grid:
    """A small sheet composed cell by cell, streamed out in row order when the workbook is written."""

    def __init__(self, title: str):
        self.title = title
        self.cells: dict[tuple[int, int], tuple[Any, str | None]] = {}
        self.widths: dict[int, float] = {}
        self.charts: list[tuple[Any, str]] = []
        self.freeze: str | None = None
        self.landscape = True  # printed landscape, one page wide
        self.print_area: str | None = None
        # set by the print pass (:mod:`.printing`): row heights in points, cells whose text wraps in the cell,
        # number formats by style name (the currency of money), and the page layout (``apply(ws)``)
        self.heights: dict[int, float] = {}
        self.wrapped: set[tuple[int, int]] = set()
        self.formats: dict[str, str] = {}
        self.page: Any = None
        #: what a formula cell computed when the study was built (the print layout measures a text formula by it)
        self.values: dict[tuple[int, int], Any] = {}

    def set(self, row: int, col: int, value, style: str | None = None):
        self.cells[(row, col)] = (value, style)

    def para(self, row: int, col: int, text: str, style: str | None = "wrap", width: int = 118) -> int:
        """Write ``text`` as lines of at most ``width`` characters down from ``row``; returns the lines used."""
        lines = textwrap.wrap(text, width) or [""]
        for k, line in enumerate(lines):
            if (row + k, col) in self.cells:
                raise AssertionError(f"{self.title}!{get_column_letter(col)}{row + k} is taken")
            self.set(row + k, col, line, style)
        return len(lines)

    def write(self, wb: Workbook):
        ws = wb.create_sheet(self.title)
        for col, width in self.widths.items():
            ws.column_dimensions[get_column_letter(col)].width = width
        if self.freeze:
            ws.freeze_panes = self.freeze
        if self.landscape:
            ws.page_setup.orientation = "landscape"
            ws.page_setup.fitToWidth = 1
            ws.page_setup.fitToHeight = 0
            ws.sheet_properties.pageSetUpPr.fitToPage = True
        if self.print_area:
            ws.print_area = self.print_area
        if self.page is not None:
            self.page.apply(ws)
        for r, height in self.heights.items():
            ws.row_dimensions[r].height = height
        if self.cells:
            n_rows = max(r for r, _ in self.cells)
            n_cols = max(c for _, c in self.cells)
            for r in range(1, n_rows + 1):
                row = []
                for c in range(1, n_cols + 1):
                    entry = self.cells.get((r, c))
                    row.append(None if entry is None else styled(ws, *entry, wrap=(r, c) in self.wrapped,
                                                                 formats=self.formats))
                while row and row[-1] is None:
                    row.pop()
                ws.append(row)
        for chart, anchor in self.charts:
            ws.add_chart(chart, anchor)
        return ws


def styled(ws, value, style, *, wrap: bool = False, formats: dict[str, str] | None = None):
    """A cell of ``value`` in ``style`` (a key of :data:`STYLES`); ``wrap``: its text wraps inside the cell;
    ``formats`` replaces a style's number format (the study's currency in money cells)."""
    if style is None and not wrap:
        return value
    cell = WriteOnlyCell(ws, value=value)
    for attr, val in STYLES.get(style, {}).items():
        setattr(cell, attr, val)
    if formats and style in formats:
        cell.number_format = formats[style]
    if wrap:
        cell.alignment = Alignment(wrap_text=True, vertical="top", horizontal=cell.alignment.horizontal)
    return cell
