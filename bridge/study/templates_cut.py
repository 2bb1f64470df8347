"""The judges' sheet and the content ratings sheet of the study data workbook (filled for the demo, empty in
the template), written by :func:`.templates.study_data_workbook`."""

from __future__ import annotations

from openpyxl.styles import Alignment, Font, PatternFill

from .demo import DemoData
from .demo_answers import KEY_SHEET, key_rows, raw_answers
from .demo_cut import CONTENT_SHEET, JUDGES_SHEET, content_rows, judges_rows
from .setup_cut import BLOCKS
from .grid import HEADER_FILL

__all__ = ["add_cut_sheets", "add_answer_key", "answer_rows"]

_BOLD = Font(bold=True)
_TITLE = Font(bold=True, size=12)
_HEADER_FILL = PatternFill("solid", fgColor=HEADER_FILL)  # the study's palette (grid.py)
_WRAP = Alignment(wrap_text=True, vertical="top")


def add_cut_sheets(wb, demo: DemoData | None, cut: float | None) -> None:
    """Append the judges' sheet and the content ratings sheet to ``wb`` (an openpyxl workbook)."""
    ws = wb.create_sheet(JUDGES_SHEET)
    ws.column_dimensions["A"].width = 22
    header_next = False
    for r, row in enumerate(judges_rows(demo, cut), start=1):
        for c, value in enumerate(row, start=1):
            cell = ws.cell(r, c, value)
            if header_next:
                cell.font, cell.fill, cell.alignment = _BOLD, _HEADER_FILL, _WRAP
        title = row[0].lower() if row and isinstance(row[0], str) else None
        if title in BLOCKS:
            ws.cell(r, 1).font = _TITLE
            ws.cell(r, 2, BLOCKS[title])  # what the block holds, beside its title (not read)
        header_next = title in BLOCKS
    cs = wb.create_sheet(CONTENT_SHEET)
    cs.column_dimensions["A"].width = 14
    cs.freeze_panes = "B2"
    for r, row in enumerate(content_rows(demo), start=1):
        for c, value in enumerate(row, start=1):
            cell = cs.cell(r, c, value)
            if r == 1:
                cell.font, cell.fill, cell.alignment = _BOLD, _HEADER_FILL, _WRAP


def answer_rows(demo: DemoData):
    """The demo's data rows with the raw answers (letters) in place of the 0/1 item scores."""
    answers = raw_answers(demo)
    k = len(demo.item_names)
    for i, row in enumerate(demo.rows()):
        yield [row[0], row[1], *answers[i], *row[2 + k:]]


def add_answer_key(wb, demo: DemoData) -> None:
    """Append the answer key sheet: item headers, keys, options offered."""
    ws = wb.create_sheet(KEY_SHEET)
    ws.column_dimensions["A"].width = 16
    for r, row in enumerate(key_rows(demo), start=1):
        for c, value in enumerate(row, start=1):
            cell = ws.cell(r, c, value)
            if r == 1 or c == 1:
                cell.font = _BOLD
