"""A small sheet composed cell by cell (:class:`Grid`), its cell styles, and how a sheet name is quoted."""

from __future__ import annotations

import textwrap
from typing import Any

from openpyxl import Workbook
from openpyxl.cell import WriteOnlyCell
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter

__all__ = ["Grid", "P_FORMAT", "STYLES", "styled", "quote"]

#: p values to four decimals, and "< 0.0001" below that rather than a misleading 0.0000 (a conditional
#: number format that LibreOffice and other spreadsheet apps read alike)
P_FORMAT = '[<0.0001]"< 0.0001";0.0000'

STYLES: dict[str, dict[str, Any]] = {
    "title": {"font": Font(bold=True, size=14)},
    "heading": {"font": Font(bold=True, size=11)},
    "header": {"font": Font(bold=True), "fill": PatternFill("solid", fgColor="DDE4EE"),
               "alignment": Alignment(wrap_text=True, vertical="top")},
    "label": {},
    # long text is split into lines over several rows (see Grid.para): apps do not all grow a row
    # to fit wrapped text when they open a file
    "wrap": {"alignment": Alignment(vertical="top")},
    "caution": {"font": Font(bold=True, color="7A2E00")},
    "na": {"font": Font(italic=True, color="9C0006")},
    "coef": {"number_format": "0.000"},
    "p": {"number_format": P_FORMAT},
    "count": {"number_format": "0"},
    "score": {"number_format": "0.0"},
    "pct": {"number_format": "0.0%"},
    "money": {"number_format": "#,##0"},
    "input": {"fill": PatternFill("solid", fgColor="FFF2CC"), "number_format": "General"},
    "input_coef": {"fill": PatternFill("solid", fgColor="FFF2CC"), "number_format": "0.000"},
    "input_money": {"fill": PatternFill("solid", fgColor="FFF2CC"), "number_format": "#,##0"},
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
        if self.cells:
            n_rows = max(r for r, _ in self.cells)
            n_cols = max(c for _, c in self.cells)
            for r in range(1, n_rows + 1):
                row = []
                for c in range(1, n_cols + 1):
                    entry = self.cells.get((r, c))
                    row.append(None if entry is None else styled(ws, *entry))
                while row and row[-1] is None:
                    row.pop()
                ws.append(row)
        for chart, anchor in self.charts:
            ws.add_chart(chart, anchor)
        return ws


def styled(ws, value, style):
    if style is None:
        return value
    cell = WriteOnlyCell(ws, value=value)
    for attr, val in STYLES[style].items():
        setattr(cell, attr, val)
    return cell
