"""The study's print layout: one pass over the composed sheets before they are written (issue 20).

:func:`lay_out` runs once, after every sheet module has composed its :class:`.grid.Grid` and before the workbook
is written. For each analysis sheet (and Setup) it

- widens a column whose label would be cut by the cell to its right, up to :data:`MAX_LABEL_UNITS`, and wraps a
  longer label inside its cell;
- makes each table header's column at least as wide as its longest word and gives every row an explicit height
  (a header of three lines gets three lines: LibreOffice does not grow a row to fit its text when it opens an
  xlsx, so without it a header covers the first data row);
- moves a chart that would cover text down below that text;
- chooses one print scale for the sheet: one page wide, and the tallest table or chart on one page, never below
  :data:`MIN_SCALE` percent;
- puts a page break before a block (the rows between two empty rows, with the charts beside them; a lone
  heading goes with the block under it) that would not fit on the rest of the page, so each table and chart
  prints whole; a table taller than a page repeats its header row on every page;
- sets the print range, landscape, the margins, and the header and footer: the study's title and the sheet's
  name above, the build date, "Page X of Y" and the trueband version below;
- gives money cells the study's currency (the ``currency`` setting, default ``USD``).

:func:`out_of_print` takes the per-applicant sheets (the data copy, Bands, Scored items, Answers, the combined
scores) out of the default print: their print range is one empty cell far to the right (:data:`OUT_OF_PRINT`),
which LibreOffice prints as nothing, while the sheet stays visible. Clearing the print range
(Format > Print Ranges > Clear) prints such a sheet whole.

The sizes are estimates made without the fonts: a character is taken as :data:`CHAR_UNITS` units of column
width (wide enough for DejaVu Sans, which LibreOffice uses for Calibri where Carlito is not installed), a line as
:data:`LINE_PT` points. ``tests/test_print_pdf.py`` renders the demo with LibreOffice and checks the result.
"""

from __future__ import annotations

import dataclasses
import datetime
import math
import re
import textwrap
from typing import Any

from openpyxl.utils import column_index_from_string, get_column_letter
from openpyxl.worksheet.page import PageMargins
from openpyxl.worksheet.pagebreak import Break

from trueband.funcs import __version__

from .grid import Grid
from .setup import SetupError

__all__ = ["lay_out", "out_of_print", "money_format", "PageLayout", "MIN_SCALE", "OUT_OF_PRINT", "CHAR_UNITS",
           "LINE_PT", "MAX_LABEL_UNITS"]

#: The smaller of A4 and US Letter, landscape, in points: a sheet laid out for it fits either paper.
PAGE_WIDTH_PT, PAGE_HEIGHT_PT = 792.0, 595.0
#: Margins in inches: sides, top and bottom (the header and footer sit inside the top and bottom margins).
SIDE_IN, END_IN, HEADER_IN = 0.4, 0.8, 0.3
PRINT_WIDTH_PT = (PAGE_WIDTH_PT - 2 * 72 * SIDE_IN) * 0.97
PRINT_HEIGHT_PT = (PAGE_HEIGHT_PT - 2 * 72 * END_IN) * 0.95  # room for the app's own rounding of row heights
#: No sheet prints smaller than this (percent).
MIN_SCALE = 70
#: Points of one line of 11-point text, of the 14-point title.
LINE_PT, TITLE_PT = 15.0, 21.0
#: Points per unit of column width (a unit is one digit of the default font: measured 7.0 pt in LibreOffice 7.4's
#: PDF of the demo with DejaVu Sans standing in for Calibri; Carlito's is narrower, so this errs wide).
UNIT_PT = 7.0
#: Units of column width one character of text takes (measured 0.75 for plain text in the same PDF; bold text a
#: tenth more, the title a third more).
CHAR_UNITS = 0.85
#: Units one character of a word that must not break takes: a digit is one unit by definition, and a header is
#: bold.
WORD_UNITS = 1.2
#: A label longer than this (in units of column width) wraps inside its cell instead of widening the column.
MAX_LABEL_UNITS = 64.0
#: Column A narrows no further than this (units) when a sheet is wider than a page: its labels wrap.
MIN_LABEL_UNITS = 16.0
#: The widest a column right of column A grows for a text in a table (a "not computable" reason...): longer
#: text wraps in its cell.
MAX_TABLE_TEXT_UNITS = 24.0
#: Width of a cell that holds a number or a formula, at least.
NUMBER_UNITS = 11.0
#: Width of a column of numbers in a sheet too wide for a page: "< 0.0001", "-0.123", "100.0%" and a margin.
COMPACT_NUMBER_UNITS = 8.5
#: Units a character of a bold header's word takes when a sheet too wide for a page narrows its columns: 0.95
#: cut "Category," and 1.05 cut ".035/.070)" of the DIF sheet in LibreOffice's PDF (it breaks such words
#: itself); WORD_UNITS prints every header word of the demo whole.
HEADER_WORD_UNITS = WORD_UNITS
#: Width of an empty column between tables of a sheet too wide for a page.
EMPTY_COLUMN_UNITS = 2.0
#: The print range of a sheet kept out of the default print: one cell that stays empty (column 1024, the last
#: column of every LibreOffice version).
OUT_OF_PRINT = "AMJ1"
_CM_PT = 72 / 2.54
_BOLD = {"title": 1.35, "heading": 1.1, "header": 1.1, "caution": 1.1}


def money_format(currency: str, where: str = "currency") -> str:
    """The number format of money cells for ``currency`` (a code such as ``EUR`` after the number, a symbol such
    as ``€`` or ``$`` before it)."""
    text = str(currency).strip()
    if not text or len(text) > 8 or any(ch in text for ch in '"\\;[]') or not text.isprintable():
        raise SetupError(f"{where}: the currency must be a code or symbol of at most 8 characters without "
                         f"quotes, brackets or semicolons, got {currency!r}")
    if re.fullmatch(r"[A-Za-z]{2,8}", text):
        return f'#,##0 "{text}"'
    return f'"{text}"#,##0'


@dataclasses.dataclass
class PageLayout:
    """What :meth:`apply` sets on a sheet: its print scale, range, title rows, page breaks, header and footer."""

    scale: int
    area: str | None
    title_rows: int | None
    breaks: list[int]
    title: str
    built: str
    label_column: bool = False  # wider than a page at the lowest scale: column A repeats on the pages to the right

    def apply(self, ws) -> None:
        ws.page_setup.orientation = "landscape"
        ws.sheet_properties.pageSetUpPr.fitToPage = False
        ws.page_setup.scale = self.scale
        ws.page_margins = PageMargins(left=SIDE_IN, right=SIDE_IN, top=END_IN, bottom=END_IN, header=HEADER_IN,
                                      footer=HEADER_IN)
        if self.area:
            ws.print_area = self.area
        if self.title_rows:
            ws.print_title_rows = f"{self.title_rows}:{self.title_rows}"
        if self.label_column:
            ws.print_title_cols = "A:A"
        for row in self.breaks:
            ws.row_breaks.append(Break(id=row))
        header_footer(ws, self.title, self.built)


def header_footer(ws, title: str, built: str) -> None:
    """The study's title and the sheet's name above; the build date, page X of Y and the version below."""
    title = title.replace("&", "&&")
    if len(title) > 90:  # the left part of the header stays clear of the sheet's name on the right
        title = title[:89] + "…"
    for part, text in ((ws.oddHeader.left, title), (ws.oddHeader.right, "&A"),
                       (ws.oddFooter.left, f"Built {built}"), (ws.oddFooter.center, "Page &P of &N"),
                       (ws.oddFooter.right, f"trueband {__version__}")):
        part.text = text
        part.size = 8


def _units(text: str, style: str | None) -> float:
    return len(text) * CHAR_UNITS * _BOLD.get(style, 1.0)


#: What a number inside a formula-built text is taken to print as ("p = 0.012", "12.5%", "1,234").
NUMBER_TEXT = "0.0000"
_TEXT_OF_FIRST = ("MID", "LEFT", "RIGHT", "TRIM", "UPPER", "LOWER", "PROPER", "SUBSTITUTE")
_LINK = re.compile(r"=(?:'((?:[^']|'')+)'|([A-Za-z_][\w.]*))!\$?([A-Z]+)\$?(\d+)")
_TOKEN = re.compile(r'"(?:[^"]|"")*"|[A-Za-z_][A-Za-z0-9_.]*\(|[(),&]|[^"(),&]+')


def built_text(value: Any) -> str | None:
    """The text a formula that builds a text prints, estimated from the formula's literal texts (the longest
    branch of an ``IF``/``IFERROR``/``CHOOSE`` whose branches are all texts, a ``TEXT`` as its format, any other
    number as :data:`NUMBER_TEXT`); None for a formula that prints a number (no literal text in what it prints,
    or a choice between a number and a text, such as a "not computable" reason in a column of numbers)."""
    if not isinstance(value, str) or not value.startswith("=") or '"' not in value:
        return None
    tokens = _TOKEN.findall(value[1:])
    try:
        text, literal, _ = _estimate(tokens, 0)
    except (IndexError, ValueError):
        return None
    return text if literal and text.strip() else None


def _estimate(tokens: list[str], k: int) -> tuple[str, bool, int]:
    """(text, whether it holds literal text, next token) of the expression from ``tokens[k]`` to the next
    comma or closing bracket at its level."""
    parts, literal = [], False
    while k < len(tokens) and tokens[k] not in (",", ")"):
        tok = tokens[k]
        if tok == "&":
            k += 1
            continue
        if tok.startswith('"'):
            parts.append(tok[1:-1].replace('""', '"'))
            literal, k = True, k + 1
            continue
        if tok.endswith("(") or tok == "(":
            args, k = _arguments(tokens, k + 1)
            name = tok[:-1].upper()
            if name in ("IF", "IFS", "CHOOSE", "IFERROR", "SWITCH"):
                options = [a for a in (args[1:] if name in ("IF", "CHOOSE") else args) if a[0]]
                if all(lit for _, lit in options):
                    text, lit = max(options, key=lambda a: len(a[0]), default=("", False))
                else:  # a number, or a reason in its place: a number's width (a reason wraps in its cell)
                    text, lit = NUMBER_TEXT, False
            elif name in _TEXT_OF_FIRST and args:  # a part of a text, or the text changed: the text
                text, lit = args[0]
            elif name == "TEXT" and len(args) == 2 and args[1][1]:
                text, lit = args[1][0], False
            elif name == "" and len(args) == 1:
                text, lit = args[0]
            else:
                text, lit = NUMBER_TEXT, False
            parts.append(text)
            literal = literal or lit
            continue
        if tok.strip():  # a reference, a number or an operation: a number
            parts.append(NUMBER_TEXT)
        k += 1
    return "".join(parts), literal, k


def _arguments(tokens: list[str], k: int) -> tuple[list[tuple[str, bool]], int]:
    """The estimated arguments of a call whose opening bracket is before ``tokens[k]``; the token after ``)``."""
    args = []
    while True:
        text, lit, k = _estimate(tokens, k)
        args.append((text, lit))
        if tokens[k] == ")":
            return args, k + 1
        k += 1  # a comma


def _shown(g: Grid, r: int, c: int) -> str | None:
    """The text cell (r, c) prints, as far as it is known here: a text; a formula's value when the study was built
    (a number prints no text to measure); else the formula's :func:`built_text`."""
    value = g.cells[(r, c)][0]
    if not isinstance(value, str):
        return None
    if not value.startswith("="):
        return value
    known = g.values.get((r, c))
    if isinstance(known, str):
        return known
    return None if isinstance(known, (int, float)) else built_text(value)


class _Sheet:
    """The measures of one grid while it is laid out: column widths (units), row heights (points)."""

    def __init__(self, grid: Grid):
        self.g = grid
        self.cols = _printed_columns(grid)
        self.by_row: dict[int, list[int]] = {}
        for r, c in sorted(grid.cells):
            if c <= self.cols:
                self.by_row.setdefault(r, []).append(c)
        self.rows = max(self.by_row, default=0)

    def width(self, c: int) -> float:
        return float(self.g.widths.get(c, 8.43))

    def x(self, c: int) -> float:
        """Left edge of column ``c`` in points."""
        return sum(self.width(k) for k in range(1, c)) * UNIT_PT

    def column_at(self, x_pt: float) -> int:
        c, edge = 1, self.width(1) * UNIT_PT
        while edge < x_pt - 0.5:
            c += 1
            edge += self.width(c) * UNIT_PT
        return c


def _printed_columns(grid: Grid) -> int:
    """The last printed column: the sheet module's own print range, else the columns before the first gap of
    three empty columns (the data of a chart stand to the right of the sheet, after such a gap)."""
    used = sorted({c for _, c in grid.cells})
    if grid.print_area:
        return column_index_from_string(re.match(r"[A-Z]+\d*:([A-Z]+)", grid.print_area).group(1))
    last = used[0] if used else 1
    for c in used[1:]:
        if c - last > 3:
            break
        last = c
    return last


def _fit_columns(s: _Sheet) -> None:
    """Widen columns whose text the next cell would cut; wrap what is too long; headers fit their longest word."""
    g = s.g
    for (r, c), (value, style) in sorted(g.cells.items()):
        if c > s.cols:
            continue
        shown = _shown(g, r, c)
        if shown is None:  # a number, or a formula that prints one
            if value is not None and _next_filled(s, r, c) is not None:
                g.widths[c] = max(s.width(c), NUMBER_UNITS)
            continue
        value = shown
        if style == "header":
            longest = max((len(w) for w in value.split()), default=0)
            g.widths[c] = max(s.width(c), longest * WORD_UNITS + 2.0)
            continue
        right = _next_filled(s, r, c)
        if right is None:
            # the text runs on over the empty cells to its right (its width counts for the scale), unless, right of
            # column A, it would run past a page's width at the lowest scale: then it wraps in its column
            need = _units(value, style) + 1.0
            if s.x(c) + need * UNIT_PT > PRINT_WIDTH_PT * 100 / MIN_SCALE:  # column A's text wraps wider
                g.widths[c] = max(s.width(c), min(MAX_TABLE_TEXT_UNITS if c > 1 else MAX_LABEL_UNITS, need))
                g.wrapped.add((r, c))
            continue
        room = sum(s.width(k) for k in range(c, right))
        need = _units(value, style) + 1.0
        if need <= room:
            continue
        widest = MAX_TABLE_TEXT_UNITS if style == "na" or c > 1 else MAX_LABEL_UNITS
        if need - room + s.width(c) <= widest:
            g.widths[c] = s.width(c) + need - room
        else:
            g.widths[c] = max(s.width(c), min(widest, need))
            g.wrapped.add((r, c))


def _compact(s: _Sheet) -> None:
    """When the sheet is wider than a page at :data:`MIN_SCALE`, narrow the columns of numbers to what their
    numbers and their header's longest word need."""
    if _right_edge(s, []) <= PRINT_WIDTH_PT * 100 / MIN_SCALE:
        return
    need: dict[int, float] = {c: EMPTY_COLUMN_UNITS for c in range(2, s.cols + 1)}  # an empty column: a narrow gap
    labels: list[tuple[int, int, float]] = []
    for (r, c), (value, style) in s.g.cells.items():
        if c == 1 or c > s.cols:
            continue
        if style == "header":  # LibreOffice breaks a header's words after a hyphen or dash too (not a slash)
            words = re.split(r"\s+|(?<=[-–])", str(value))
            least = max((len(w) for w in words), default=0) * HEADER_WORD_UNITS + 2.0
        elif isinstance(value, str) and not value.startswith("="):  # a text needs its longest word: it wraps
            longest = max((len(w) for w in value.split()), default=0) * HEADER_WORD_UNITS + 1.5
            if (r, c) in s.g.wrapped:
                least = max(longest, 10.0)
            elif _next_filled(s, r, c) is None:  # runs on over the empty cells to its right
                least = EMPTY_COLUMN_UNITS
            else:  # a label the next cell would cut: it wraps when its column narrows below its width
                least = longest
                labels.append((r, c, _units(value, style) + 1.0))
        elif _shown(s.g, r, c) is not None:  # a formula that builds a text: its estimated width, up to its column's
            text = _shown(s.g, r, c)
            longest = max((len(w) for w in text.split()), default=0) * HEADER_WORD_UNITS + 1.5
            least = min(s.width(c), max(_units(text, style) + 1.0, longest))
            labels.append((r, c, _units(text, style) + 1.0))
        else:
            least = COMPACT_NUMBER_UNITS
        need[c] = max(need.get(c, 0.0), least)
    for c, least in need.items():
        floor = COMPACT_NUMBER_UNITS if least > EMPTY_COLUMN_UNITS else EMPTY_COLUMN_UNITS
        s.g.widths[c] = min(s.width(c), max(least, floor))
    for r, c, full in labels:
        if full > s.width(c):
            s.g.wrapped.add((r, c))
    _narrow_labels(s)


def _narrow_labels(s: _Sheet) -> None:
    """When the sheet is still wider than a page at :data:`MIN_SCALE`, narrow column A (its labels wrap), down to
    :data:`MIN_LABEL_UNITS`, so that its tables fit across a page where they can."""
    excess = _right_edge(s, []) - PRINT_WIDTH_PT * 100 / MIN_SCALE
    labels = [(r, _shown(s.g, r, 1), s.g.cells[(r, 1)][1]) for r, cols in s.by_row.items()
              if cols[0] == 1 and len(cols) > 1]  # a text alone in its row runs on over the empty cells to its right
    labels = [(r, text, style) for r, text, style in labels if text is not None]
    longest = max((len(w) for _, text, _ in labels for w in text.split()), default=0) * HEADER_WORD_UNITS + 1.5
    narrow = max(MIN_LABEL_UNITS, longest, s.width(1) - excess / UNIT_PT - 1.0)
    if excess <= 0 or narrow >= s.width(1):
        return
    s.g.widths[1] = narrow
    for r, text, style in labels:
        if _units(text, style) + 1.0 > narrow:
            s.g.wrapped.add((r, 1))


def _next_filled(s: _Sheet, r: int, c: int) -> int | None:
    return next((k for k in s.by_row.get(r, ()) if k > c), None)


def _row_heights(s: _Sheet) -> None:
    g = s.g
    for r in range(1, s.rows + 1):
        height = LINE_PT
        for c in s.by_row.get(r, ()):
            value, style = g.cells[(r, c)]
            if style == "title":
                height = max(height, TITLE_PT)
            value = _shown(g, r, c)
            if value is not None and (style == "header" or (r, c) in g.wrapped):
                chars = max(1, int((s.width(c) - 1.0) / (CHAR_UNITS * _BOLD.get(style, 1.0))))
                lines = len(textwrap.wrap(value, chars, break_long_words=False)) or 1
                height = max(height, lines * LINE_PT + 2)
        g.heights[r] = height


def _chart_boxes(s: _Sheet) -> list[list[float]]:
    """Each chart's box [x0, x1, first row, last row]. A chart that would make the sheet wider than its text (or
    than a page) goes to column A under the rows beside it; one that would cover text goes below that text."""
    boxes: list[list[float]] = []
    text_edge = max(_right_edge(s, []), PRINT_WIDTH_PT)
    for k, (chart, anchor) in enumerate(s.g.charts):
        col_letters, row = re.fullmatch(r"([A-Z]+)(\d+)", anchor).groups()
        c, r = column_index_from_string(col_letters), int(row)
        width, height = float(chart.width) * _CM_PT, float(chart.height) * _CM_PT
        if c > 1 and s.x(c) + width > text_edge:
            c = 1
            while r in s.by_row:  # to the end of the rows it stood beside
                r += 1
            r += 1
        x0 = s.x(c)
        x1 = x0 + width
        if r - 1 in s.by_row:  # an empty row above every chart (a page may break there)
            r += 1
        while True:
            last = _rows_for(s, r, height)
            hit = [rr for rr in range(r, last + 1) if _text_in(s, rr, x0, x1)]
            hit += [int(b[3]) for b in boxes if b[0] < x1 and x0 < b[1] and b[2] <= last and r <= b[3]]
            if not hit:
                break
            r = max(hit) + 2  # below what it would cover, one empty row between
        s.g.charts[k] = (chart, f"{get_column_letter(c)}{r}")
        boxes.append([x0, x1, r, last])
    return boxes


def _rows_for(s: _Sheet, first: int, height: float) -> int:
    r, total = first, 0.0
    while True:
        total += s.g.heights.get(r, LINE_PT)
        if total >= height:
            return r
        r += 1


def _text_in(s: _Sheet, r: int, x0: float, x1: float) -> bool:
    for c in s.by_row.get(r, ()):
        left = s.x(c)
        value, style = s.g.cells[(r, c)]
        shown = _shown(s.g, r, c)
        extent = _units(shown, style) * UNIT_PT if shown is not None else s.width(c) * UNIT_PT
        if left < x1 and x0 < left + max(extent, s.width(c) * UNIT_PT):
            return True
    return False


def _right_edge(s: _Sheet, boxes) -> float:
    edge = 0.0
    for (r, c), (value, style) in s.g.cells.items():
        if c > s.cols:
            continue
        shown = _shown(s.g, r, c)
        extent = _units(shown, style) * UNIT_PT if shown is not None else 0.0
        if (r, c) in s.g.wrapped or style == "header":
            extent = 0.0
        edge = max(edge, s.x(c) + max(extent, s.width(c) * UNIT_PT))
    return max([edge] + [b[1] for b in boxes])


def _blocks(s: _Sheet, boxes) -> list[tuple[int, int]]:
    """Runs of rows holding cells, and each chart with the runs beside it (a chart under a run is a block of its
    own, so that a break can fall between them); a lone heading joins the block below it."""
    runs: list[list[int]] = []
    for r in sorted(s.by_row):
        if runs and r == runs[-1][1] + 1:
            runs[-1][1] = r
        else:
            runs.append([r, r])
    for b in boxes:
        first, last = int(b[2]), int(b[3])
        beside = [run for run in runs if run[0] <= last and first <= run[1]]
        runs = [run for run in runs if run not in beside]
        runs.append([min([first] + [run[0] for run in beside]), max([last] + [run[1] for run in beside])])
    runs.sort()
    merged: list[list[int]] = []
    for run in runs:
        if merged and (run[0] <= merged[-1][1] or _lone_heading(s, merged[-1])):
            merged[-1][1] = max(merged[-1][1], run[1])
        else:
            merged.append(run)
    return [(a, b) for a, b in merged]


def _lone_heading(s: _Sheet, run) -> bool:
    return run[0] == run[1] and any(s.g.cells[(run[0], c)][1] in ("heading", "title")
                                    for c in s.by_row.get(run[0], ()))


def _height(s: _Sheet, a: int, b: int) -> float:
    return sum(s.g.heights.get(r, LINE_PT) for r in range(a, b + 1))


def _scale(s: _Sheet, blocks, width_pt: float) -> int:
    scale = min(100.0, 100.0 * PRINT_WIDTH_PT / max(width_pt, 1.0))
    for a, b in blocks:
        tall = _height(s, a, b)
        if tall * MIN_SCALE / 100 <= PRINT_HEIGHT_PT:  # a block that can fit on a page does
            scale = min(scale, 100.0 * PRINT_HEIGHT_PT / tall)
    return max(MIN_SCALE, int(math.floor(scale)))


def _breaks(s: _Sheet, blocks, scale: int, chart_rows=frozenset()) -> tuple[list[int], int | None]:
    """Page breaks (the last row of a page) before each block that would not fit on the rest of its page; the
    header row to repeat when a block is taller than a page."""
    page = PRINT_HEIGHT_PT * 100 / scale
    breaks, y, end, repeat = [], 0.0, 0, None
    for a, b in blocks:
        gap = _height(s, end + 1, a - 1)
        tall = _height(s, a, b)
        if y > 0 and y + gap + tall > page and tall <= page:  # a block taller than a page splits anyway
            # a chart at the top of a page keeps an empty row above it: LibreOffice places a chart by its drawn
            # position, and a chart touching the break leaks onto the page before (clipped, but in its text)
            cut = a - 2 if a in chart_rows and a - 1 not in s.by_row and a - 2 >= end else a - 1
            breaks.append(cut)
            y = _height(s, cut + 1, a - 1)
        else:
            y += gap
        if repeat is None and y + tall > page:  # the block runs over: repeat the header of the table it splits
            over = a
            while y + _height(s, a, over) <= page:
                over += 1
            repeat = next((r for r in range(over, a - 1, -1)
                           if any(s.g.cells[(r, c)][1] == "header" for c in s.by_row.get(r, ()))), None)
        y = (y + tall) % page if y + tall > page else y + tall
        end = b
    return breaks, repeat


def _whole_columns(s: _Sheet, edge_pt: float) -> float:
    """The printed width: LibreOffice prints whole columns, so the width runs to the right end of the column that
    ``edge_pt`` (the end of the text, which may run on into an empty column) falls in. An empty column that only
    a text runs on into is narrowed to that text's end first (a text running past the print range is cut, and
    the sheet printed at its scale would be wider than a page: its last column on a page of its own)."""
    last = s.column_at(edge_pt)
    if s.x(last + 1) - edge_pt > 0.5 and not any(c == last for _, c in s.g.cells):
        s.g.widths[last] = max(1.0, (edge_pt - s.x(last)) / UNIT_PT + 0.5)
    return s.x(last + 1)


def _lay_out_grid(grid: Grid, title: str, built: str, money: str) -> None:
    grid.formats.update({"money": money, "input_money": money})
    s = _Sheet(grid)
    if not s.rows:
        grid.page = PageLayout(100, None, None, [], title, built)
        return
    _fit_columns(s)
    _compact(s)
    _row_heights(s)
    boxes = _chart_boxes(s)
    blocks = _blocks(s, boxes)
    width_pt = _whole_columns(s, _right_edge(s, boxes))
    scale = _scale(s, blocks, width_pt)
    breaks, repeat = _breaks(s, blocks, scale, {int(b[2]) for b in boxes})
    last_row = max([s.rows] + [int(b[3]) for b in boxes])
    area = f"A1:{get_column_letter(s.column_at(width_pt))}{last_row}"
    grid.print_area = None  # the sheet module's own range gives way to the measured one
    wide = width_pt * MIN_SCALE / 100 > PRINT_WIDTH_PT
    grid.page = PageLayout(scale, area, repeat, breaks, title, built, label_column=wide)


def _link_values(grids: dict[str, Grid]) -> None:
    """A formula that only shows another sheet's cell (``='Sheet'!B21``) prints that cell's text: record it as the
    formula's value, so that a linked long text is measured (and wrapped) like the text it shows."""
    for grid in grids.values():
        for (r, c), (value, _) in grid.cells.items():
            m = _LINK.fullmatch(value) if isinstance(value, str) and (r, c) not in grid.values else None
            if m is None:
                continue
            target = grids.get((m.group(1) or "").replace("''", "'") or m.group(2))
            where = (int(m.group(4)), column_index_from_string(m.group(3)))
            if target is not None and where in target.cells and target is not grid:
                grid.values[(r, c)] = _shown(target, *where)


def lay_out(ctx: Any) -> None:
    """Lay out every composed sheet of the study for print (see the module's description)."""
    setup = ctx.data.setup
    money = money_format(setup.currency, setup.source.get("currency", "Setup: currency"))
    summary = ctx.grids.get("Summary")
    title_cell = summary.cells.get((1, 1)) if summary is not None else None
    title = str(title_cell[0]) if title_cell else f"Validation study: {setup.test_name}"
    built = datetime.date.today().isoformat()
    _link_values(ctx.grids)
    for grid in ctx.grids.values():
        _lay_out_grid(grid, title, built, money)
    ctx.print_title = (title, built)


def out_of_print(wb, ctx: Any) -> None:
    """Keep the sheets that are not composed grids (one row per applicant) out of the default print."""
    title, built = getattr(ctx, "print_title", ("Validation study", datetime.date.today().isoformat()))
    for ws in wb.worksheets:
        if ws.title in ctx.grids:
            continue
        ws.print_area = OUT_OF_PRINT
        ws.page_setup.orientation = "landscape"
        header_footer(ws, title, built)
