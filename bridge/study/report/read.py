"""Reading a saved study workbook for the report: each analysis sheet as headings, paragraphs and tables.

The report never recomputes: it reads the values the study stores beside its formulas (every number a
reviewer sees in the report is the one the workbook shows), and remembers the cell each came from so the
report can print its address. A sheet is read as blocks of rows:

* a row with one bold text cell is a heading;
* rows with one plain text cell are the lines of a paragraph (the study splits long text over rows);
* rows with two or more cells are the rows of a table.

Only a sheet's main block of columns is read: the columns from A up to the first column that is empty on
the whole sheet. The study keeps the data behind its charts to the right of such a gap; those columns are
the chart's, not the reader's.
"""

from __future__ import annotations

import html
import re
import zipfile
from dataclasses import dataclass, field
from pathlib import Path, PurePosixPath
from typing import Any

from openpyxl import load_workbook
from openpyxl.utils import get_column_letter

from ..grid import CAUTION_INK
from .charts import StudyChart, read_charts

__all__ = [
    "Figure",
    "Heading",
    "NotRecalculated",
    "Paragraph",
    "SheetContent",
    "StudyContent",
    "Table",
    "first_unstored",
    "format_value",
    "read_study",
]

#: sheets that hold one row per candidate or the data: the report describes them, never prints them
PER_CANDIDATE = ("Bands", "Scored items", "Setup")


class NotRecalculated(Exception):
    """The study holds formulas without stored values: it was never recalculated."""


@dataclass(frozen=True)
class Figure:
    """One number (or text) read from the study, with the cell it came from."""

    sheet: str
    address: str
    value: Any
    text: str

    @property
    def where(self) -> str:
        return f"{self.sheet}!{self.address}"


@dataclass(frozen=True)
class Heading:
    text: str
    row: int = 0        # its sheet row (0: not from a sheet)


@dataclass(frozen=True)
class Paragraph:
    text: str
    caution: bool = False
    row: int = 0        # the sheet row of its first line


@dataclass(frozen=True)
class Table:
    first_row: int
    last_row: int
    columns: tuple[str, ...]
    rows: tuple[tuple[int, tuple[str, ...]], ...]   # (sheet row number, the cells' texts)


@dataclass(frozen=True)
class SheetContent:
    title: str
    blocks: tuple[Heading | Paragraph | Table, ...]


@dataclass
class StudyContent:
    path: Path
    sheets: dict[str, SheetContent] = field(default_factory=dict)
    order: list[str] = field(default_factory=list)
    summary: list[tuple[str, list[Figure]]] = field(default_factory=list)   # (label, figures) or a heading
    settings: dict[str, Any] = field(default_factory=dict)
    data_sheets: list[str] = field(default_factory=list)
    charts: list[StudyChart] = field(default_factory=list)   # every chart of the analysis sheets, in order


_DECIMALS = re.compile(r"0\.(0+)")
_BELOW = re.compile(r'^\[<([0-9.]+)\]"([^"]*)";(.*)$')


def format_value(value: Any, number_format: str | None) -> str:
    """A cell's value as the study's number format shows it (the report rounds for print only).

    A p value format (four decimals) prints values below 0.0001 as ``< 0.0001`` rather than ``0.0000``.
    """
    if value is None:
        return ""
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    if not isinstance(value, (int, float)):
        return str(value)
    fmt = number_format or "General"
    conditional = _BELOW.match(fmt)
    if conditional:   # [<limit]"text";format, as the study's p values use
        if value < float(conditional.group(1)):
            return conditional.group(2)
        fmt = conditional.group(3)
    m = _DECIMALS.search(fmt)
    decimals = len(m.group(1)) if m else 0
    if "%" in fmt:
        return f"{value * 100:.{decimals}f}%"
    if "#,##0" in fmt:
        return f"{value:,.{decimals}f}"
    if m or fmt in ("0",):
        if decimals == 4 and 0 < abs(value) < 0.0001:
            return "< 0.0001"
        return f"{value:.{decimals}f}"
    if float(value).is_integer():
        return str(int(value))
    return f"{value:.4g}"


def _cells_by_row(ws) -> dict[int, dict[int, Any]]:
    rows: dict[int, dict[int, Any]] = {}
    for row in ws.iter_rows():
        for c in row:
            if c.value is not None and getattr(c, "column", None) is not None:
                rows.setdefault(c.row, {})[c.column] = c
    return rows


def _main_width(rows: dict[int, dict[int, Any]]) -> int:
    """Columns A.. up to the first column nobody uses on the sheet."""
    used = {col for cells in rows.values() for col in cells}
    width = 1
    while width + 1 in used:
        width += 1
    return width


def _blocks(title: str, rows: dict[int, dict[int, Any]], candidates: frozenset = frozenset()) -> tuple:
    """The sheet's headings, paragraphs and tables; a table row naming a candidate (an id of ``candidates``) is
    left out, and a paragraph after the table says how many were."""
    width = _main_width(rows)
    left_out = 0
    blocks: list = []
    table: list[tuple[int, tuple[str, ...]]] = []
    para: list[str] = []
    para_caution = False
    para_row = 0

    def flush_table():
        if table:
            n_cols = max(len(cells) for _, cells in table)
            body = tuple((r, cells + ("",) * (n_cols - len(cells))) for r, cells in table)
            blocks.append(Table(table[0][0], table[-1][0], tuple(get_column_letter(c + 1) for c in range(n_cols)),
                                body))
            table.clear()

    def flush_para():
        nonlocal para_caution
        if para:
            blocks.append(Paragraph(" ".join(para), caution=para_caution, row=para_row))
            para.clear()
            para_caution = False

    last_row = 0
    for r in sorted(rows):
        cells = {c: cell for c, cell in rows[r].items() if c <= width}
        if not cells:
            continue
        gap = r > last_row + 1
        last_row = r
        if gap:
            flush_table()
            flush_para()
        texts = {c: format_value(cell.value, cell.number_format) for c, cell in cells.items()}
        if len(cells) == 1 and 1 in cells and isinstance(cells[1].value, str):
            flush_table()
            font = cells[1].font
            if font is not None and font.b and not _in_caution_ink(font):
                flush_para()
                blocks.append(Heading(texts[1], row=r))
            else:
                caution = bool(font is not None and font.b)
                if para and caution != para_caution:
                    flush_para()
                if para and _STARTS_ENTRY.match(texts[1]):
                    flush_para()   # a list of entries ("NAME: …") written without blank rows between them
                para_caution = caution
                if not para:
                    para_row = r
                para.append(texts[1])
            continue
        flush_para()
        last = max(cells)
        if candidates and any(t in candidates for t in texts.values()):
            left_out += 1
            continue
        if left_out:
            flush_table()
            blocks.append(Paragraph(f"({left_out} rows naming individual candidates are left out here; they are "
                                    f"on the study's sheet {title}.)"))
            left_out = 0
        table.append((r, tuple(texts.get(c, "") for c in range(1, last + 1))))
    flush_table()
    flush_para()
    if left_out:
        blocks.append(Paragraph(f"({left_out} rows naming individual candidates are left out here; they are on "
                                f"the study's sheet {title}.)"))
    return tuple(blocks)


_STARTS_ENTRY = re.compile(r"^[A-Z][A-Z0-9_.]+: |^[A-Z][a-z]+ [a-z]+ default ")
_LINK = re.compile(r"^=\s*(?:'((?:[^']|'')+)'|([A-Za-z0-9_.]+))!\$?([A-Z]{1,3})\$?(\d+)\s*$")


def _summary(values_ws, formulas_ws) -> list[tuple[str, list[Figure]]]:
    """The Summary's rows: a label and, per figure, the cell of the sheet that computes it."""
    values = _cells_by_row(values_ws)
    formulas = _cells_by_row(formulas_ws)
    out: list[tuple[str, list[Figure]]] = []
    for r in sorted(formulas):
        cells = formulas[r]
        label = cells.get(1)
        if label is None or not isinstance(label.value, str):
            continue
        if label.value.startswith("="):
            # a live sentence (the line saying local validity is not established): the report words it itself, and
            # a row without figures would read as a heading and end its section's rows
            shown_label = values.get(r, {}).get(1)
            if len(cells) == 1 or shown_label is None or not isinstance(shown_label.value, str):
                continue
            label = shown_label
        figures = []
        for c in sorted(cells):
            m = _LINK.match(str(cells[c].value)) if c > 1 else None
            if not m:
                if c > 1 and figures and isinstance(cells[c].value, str):
                    note = cells[c].value.strip("() ")
                    # "95% interval" names the interval the three figures form; other words name the last one
                    if "interval" not in note:
                        figures[-1] = Figure(figures[-1].sheet, figures[-1].address, figures[-1].value,
                                             f"{figures[-1].text} ({note})")
                continue
            shown = values.get(r, {}).get(c)
            if shown is None:
                raise NotRecalculated(f"Summary!{get_column_letter(c)}{r}")
            sheet = (m.group(1) or m.group(2)).replace("''", "'")
            figures.append(Figure(sheet, f"{m.group(3)}{m.group(4)}", shown.value,
                                  format_value(shown.value, shown.number_format)))
        if figures or len(cells) == 1:
            out.append((label.value, figures))
    return out


def _settings(ws) -> dict[str, Any]:
    out = {}
    for r, cells in _cells_by_row(ws).items():
        if r > 1 and 1 in cells and 2 in cells and isinstance(cells[1].value, str):
            out[cells[1].value.strip().lower()] = cells[2].value
    return out


_NO_VALUE = re.compile(rb'<c r="([A-Z]+[0-9]+)"[^>]*>(?:<f>[^<]*</f>|<f [^>]*/>|<f [^>]*>[^<]*</f>)</c>')


def _sheet_parts(z: zipfile.ZipFile) -> dict[str, str]:
    """Sheet title -> its part name in the package."""
    workbook = z.read("xl/workbook.xml").decode("utf-8")
    rels = z.read("xl/_rels/workbook.xml.rels").decode("utf-8")
    targets = {}
    for rel in re.findall(r"<Relationship [^>]*>", rels):
        rid, target = re.search(r'Id="([^"]+)"', rel), re.search(r'Target="([^"]+)"', rel)
        if rid and target:
            t = target.group(1).lstrip("/")
            targets[rid.group(1)] = t if t.startswith("xl/") else "xl/" + t
    out = {}
    for tag in re.findall(r"<sheet [^>]*>", workbook):
        name, rid = re.search(r'name="([^"]+)"', tag), re.search(r'r:id="([^"]+)"', tag)
        if name and rid and rid.group(1) in targets:
            out[html.unescape(name.group(1))] = targets[rid.group(1)]
    return out


def first_unstored(path: Path, kinds) -> str | None:
    """The first formula cell with no stored value at all (no ``<v>``) on a sheet of one of ``kinds`` (sheet
    titles; a further predictor's ``Reliability (Work Style)`` is of the kind ``Reliability``), or None.

    A formula whose value is the empty text is stored as an empty ``<v></v>`` and counts as stored.
    """
    with zipfile.ZipFile(path) as z:
        for title, part in _sheet_parts(z).items():
            if _base_title(title) in kinds:
                m = _NO_VALUE.search(z.read(part))
                if m:
                    return f"{title}!{m.group(1).decode()}"
    return None


def _candidate_ids(wb, settings: dict[str, Any]) -> frozenset:
    """The candidates' ids, as the report would print them, read from the study's copy of the data."""
    sheet, column = settings.get("data sheet"), settings.get("id column")
    if not isinstance(sheet, str) or not isinstance(column, str) or sheet not in wb.sheetnames:
        return frozenset()
    rows = wb[sheet].iter_rows(values_only=True)
    header = next(rows, ())
    names = [str(h).strip() if h is not None else "" for h in header]
    if column.strip() not in names:
        return frozenset()
    k = names.index(column.strip())
    return frozenset(format_value(row[k], None) for row in rows if k < len(row) and row[k] is not None)


def _base_title(title: str) -> str:
    """A further predictor's sheet, ``Reliability (Work Style)``, is read as its kind, ``Reliability``."""
    return title.split(" (")[0] if title.endswith(")") and " (" in title else title


def _in_caution_ink(font) -> bool:
    """A bold line in the study's caution ink is a caution, not a heading."""
    rgb = font.color.rgb if font.color is not None else None
    return isinstance(rgb, str) and rgb[-6:].upper() == CAUTION_INK.upper()


def read_study(path: str | Path, analysis_sheets: tuple[str, ...]) -> StudyContent:
    """Read the analysis sheets of a saved study (values as stored, and the Summary's links).

    Raises :class:`NotRecalculated` (its message the first cell without a stored value) when the study
    was saved without the values of its formulas.
    """
    path = Path(path)
    where = first_unstored(path, analysis_sheets)
    if where is not None:
        raise NotRecalculated(where)
    values_wb = load_workbook(path, data_only=True, read_only=True)
    formulas_wb = load_workbook(path, data_only=False, read_only=True)
    try:
        content = StudyContent(path)
        if "Summary" not in values_wb.sheetnames:
            raise ValueError("it has no Summary sheet: is it a study that trueband study wrote?")
        content.summary = _summary(values_wb["Summary"], formulas_wb["Summary"])
        settings = _settings(values_wb["Setup"]) if "Setup" in values_wb.sheetnames else {}
        candidates = _candidate_ids(values_wb, settings)
        for title in values_wb.sheetnames:
            base = _base_title(title)
            if base not in analysis_sheets or base in PER_CANDIDATE:
                if base not in analysis_sheets and title != "Setup":
                    content.data_sheets.append(title)
                continue
            content.sheets[title] = SheetContent(title, _blocks(title, _cells_by_row(values_wb[title]), candidates))
            content.order.append(title)
        if "Setup" in values_wb.sheetnames:
            content.settings = _settings(values_wb["Setup"])
        with zipfile.ZipFile(path) as z:
            parts = _sheet_parts(z)
        content.charts = read_charts(path, parts, values_wb, set(content.order))
    finally:
        values_wb.close()
        formulas_wb.close()
    return content
