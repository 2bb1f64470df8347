"""The copy of the data sheet, under its own name: the header as written and each cell's number format."""

from __future__ import annotations

from typing import Mapping

from openpyxl.cell import WriteOnlyCell

from ..grid import styled
from ..setup import StudyData

__all__ = ["write_header", "CopyStyles"]


def write_header(wb, data: StudyData) -> "CopyStyles":
    """Create the sheet and write its header; returns the styles of its rows (spliced in after saving)."""
    ws = wb.create_sheet(data.sheet)
    ws.freeze_panes = "A2"
    # the header as written in the source (not trimmed), and the source's number formats (dates stay dates)
    ws.append([styled(ws, h, "header") for h in (data.raw_header or data.header)])
    style_of: dict[str, int] = {}
    for code in sorted(set(data.formats.values())):
        cell = WriteOnlyCell(ws)
        cell.number_format = code
        style_of[code] = cell.style_id
    return CopyStyles(data.formats, style_of)


class CopyStyles(Mapping):
    """(sheet row, 0-based column) -> style index of the copy, looked up through the source's formats
    (no second per-cell table: a source may style every cell)."""

    def __init__(self, formats: Mapping[tuple[int, int], str], style_of: Mapping[str, int]):
        self.formats, self.style_of = formats, style_of

    def __getitem__(self, key):
        return self.style_of[self.formats[key]]

    def __contains__(self, key):
        return key in self.formats

    def __iter__(self):
        return iter(self.formats)

    def __len__(self):
        return len(self.formats)
