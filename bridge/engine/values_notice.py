"""The notice that a ``--values`` file carries on every sheet: its text and where it goes.

Why a notice on every sheet, not live formulas: the values of trueband
functions cannot be kept live in a file for people without trueband (their
spreadsheet app does not have the functions; that is why the values are
written). Standard formulas that read them stay live, so once an input is
edited in a spreadsheet app the file mixes new figures with frozen ones (a
new cut beside an old selection ratio). So every sheet gets one text cell, a
notice, saying that the values of trueband functions were fixed when the
file was written (with the date and time), which cells hold them, which
inputs they were computed from with the inputs' values then, and how to
update them. The notice is printed with the sheet (issue 20): its text is
split into lines as wide as the sheet's printed columns (:func:`notice_lines`;
the print range's columns, else the used range's), one line a cell, in new
rows under the print range (else under the used range), and a sheet's print
range is extended over them. The rows go where they overwrite nothing and
change no result (:func:`place_lines`): rows that hold no row element at all
(so ``restore`` removes them and gives the part back byte for byte), in no
merged cell, no cell that any formula of the workbook reads, no cell of a
table, filter, chart series or defined name (chart sheets hold no cells and
get none). Cells, not a header or a note: spreadsheet apps show header text
only in print preview and a note only on hover, and LibreOffice Calc shows
the cells (tests check it). Their places and the print range as it was are
recorded in the hidden sheet, and ``trueband restore`` takes them out again
(unless a line was edited).

:func:`notice_text` writes the text, :func:`frozen_inputs` lists the inputs
(from the recalculation's formula runs), :func:`reader_of` tells the cells
formulas read, :func:`place_notice` chooses one cell (kept for callers that
write one), :func:`place_lines` the rows of the lines; :mod:`.values_mode`
writes, records and removes them.
"""

from __future__ import annotations

import dataclasses
import datetime
import re
import textwrap

from ..workbook import sheet_data, sheet_edit, sheet_read, xml_text
from ..workbook.cells import MAX_COLUMN, MAX_ROW, column_letters, range_box, split_ref
from ..workbook.sheet_read import iter_cells
from ..workbook.package import WorkbookPackage
from ..workbook.xml_text import escape_text, unescape_xml
from .values import EMPTY

__all__ = ["Notice", "NOTICE_OPENING", "NOTICE_ITEMS", "notice_text", "frozen_inputs", "reader_of", "kept_areas",
           "place_notice", "notice_lines", "place_lines", "printed_width", "page_width", "PRINT_AREA", "PrintRange", "place_on_sheet",
           "print_range", "set_print_range", "take_out"]


@dataclasses.dataclass(frozen=True)
class Notice:
    """The notice cell written on a sheet: where, its text, and whether its row was made for it."""

    sheet: str
    cell: str
    text: str
    new_row: bool = False


@dataclasses.dataclass(frozen=True)
class PrintRange:
    """A sheet's print range as the notice left it (``new``) and as it was (``old``): the raw text of the
    ``_xlnm.Print_Area`` defined name in ``xl/workbook.xml``."""

    sheet: str
    new: str
    old: str


#: First words of every notice (how a notice is told from other text).
NOTICE_OPENING = "Fixed values, not formulas:"
#: Items listed in a notice before "and N more".
NOTICE_ITEMS = 8


def _cell_ranges(refs) -> list[str]:
    """Cells as compact ranges: runs down a column, then neighbouring columns with the same rows."""
    by_col: dict[int, list[int]] = {}
    for ref in refs:
        try:
            r, c = split_ref(ref)
        except ValueError:  # a record edited by hand: restore reports it
            continue
        by_col.setdefault(c, []).append(r)
    if not by_col:
        return []
    runs: list[tuple[int, int, int, int]] = []  # (c1, c2, r1, r2)
    for c in sorted(by_col):
        rows = sorted(set(by_col[c]))
        start = prev = rows[0]
        for r in rows[1:] + [None]:
            if r is not None and r == prev + 1:
                prev = r
                continue
            last = next((k for k in range(len(runs) - 1, -1, -1) if runs[k][1] == c - 1
                         and runs[k][2:] == (start, prev)), None)
            if last is not None:
                runs[last] = (runs[last][0], c, start, prev)
            else:
                runs.append((c, c, start, prev))
            if r is not None:
                start = prev = r
    runs.sort(key=lambda t: (t[2], t[0]))
    L = column_letters
    return [f"{L(c1)}{r1}" if (c1, r1) == (c2, r2) else f"{L(c1)}{r1}:{L(c2)}{r2}" for c1, c2, r1, r2 in runs]


def _listed(items: list[str]) -> str:
    if len(items) <= NOTICE_ITEMS:
        return ", ".join(items)
    return ", ".join(items[:NOTICE_ITEMS]) + f" and {len(items) - NOTICE_ITEMS} more"


def _quoted_sheet(name: str) -> str:
    return name if re.fullmatch(r"[A-Za-z_][A-Za-z0-9_.]*", name) else "'" + name.replace("'", "''") + "'"


def _shown(value) -> str:
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    if isinstance(value, float):
        return f"{value:.6g}"
    if isinstance(value, str):
        return value if isinstance(value, sheet_data.ErrorValue) else f'"{value[:40]}"'
    return "(blank)"


def notice_text(records, inputs=(), written_at: datetime.datetime | None = None) -> str:
    """The text of the notice: when, which cells hold fixed values, from which inputs (values then), what to do.

    ``records`` name the cells (``.sheet``, ``.cell``: the formula records of
    :mod:`.values_mode`).
    ``inputs`` are (``Sheet!A1`` or ``Sheet!A1:B9``, value or None) pairs; a
    single cell's value is shown as it was when the file was written.

    >>> from types import SimpleNamespace as R
    >>> cells = [R(sheet="Bands", cell=f"C{r}") for r in range(2, 6)] + [R(sheet="Bands", cell="D2")]
    >>> print(notice_text(cells, [("Setup!B3", 23.0), ("Bands!B2:B5", None)],
    ...                   datetime.datetime(2026, 3, 2, 9, 30)))  # doctest: +NORMALIZE_WHITESPACE
    Fixed values, not formulas: trueband results in this file do not follow edits of their inputs (fixed on
    2026-03-02 09:30 UTC by trueband recalc --values). Cells: Bands!C2:C5, Bands!D2. Computed from:
    Setup!B3 = 23, Bands!B2:B5, and every cell those are computed from. After an edit of any of them, formulas
    that read the fixed cells mix new and fixed figures. To update them: trueband restore FILE, then trueband
    recalc.
    """
    when = (written_at or datetime.datetime.now(datetime.timezone.utc)).strftime("%Y-%m-%d %H:%M UTC")
    cells: dict[str, list[str]] = {}
    for rec in records:
        cells.setdefault(rec.sheet, []).append(rec.cell)
    held = [f"{_quoted_sheet(sheet)}!{r}" for sheet, refs in cells.items() for r in _cell_ranges(refs)]
    # the essentials first: a spreadsheet app shows the start of a long text in the row, the rest in the cell
    text = (f"{NOTICE_OPENING} trueband results in this file do not follow edits of their inputs (fixed on "
            f"{when} by trueband recalc --values). Cells: {_listed(held)}.")
    shown = [label if value is None else f"{label} = {_shown(value)}" for label, value in inputs]
    if shown:
        text += f" Computed from: {_listed(shown)}, and every cell those are computed from."
    return text + (" After an edit of any of them, formulas that read the fixed cells mix new and fixed figures. "
                   "To update them: trueband restore FILE, then trueband recalc.")


def frozen_inputs(runs, store, uses_registered, as_value) -> list[tuple[str, object]]:
    """What the formula runs that call registered functions read, for the notice.

    ``Sheet!A1`` with its value from ``store`` (a blank one labelled
    ``(blank)``), or ``Sheet!A1:B9`` with None for a range; single cells first.
    ``runs`` are the recalculation's formula runs, ``uses_registered(compiled)``
    tells the ones to describe, ``as_value`` turns a stored value into a cell value.
    """
    out: dict[str, object] = {}
    for run in runs:
        if not uses_registered(run.compiled):
            continue
        for ref in run.compiled.refs:
            if ref.name is not None:
                continue
            sheet = store.canonical(ref.sheet or run.sheet) or (ref.sheet or run.sheet)
            r1, c1, r2, c2 = ref.swept_area(run.first, run.last, run.col)
            L = column_letters
            label = f"{_quoted_sheet(sheet)}!{L(c1)}{r1}" + ("" if (r1, c1) == (r2, c2) else f":{L(c2)}{r2}")
            if label in out or label + " (blank)" in out:
                continue
            value = store.value(sheet, r1, c1) if (r1, c1) == (r2, c2) else None
            if value is EMPTY:
                out[label + " (blank)"] = None
            else:
                out[label] = None if value is None else as_value(value)
    return sorted(out.items(), key=lambda item: item[1] is None)


def reader_of(runs):
    """``is_read(sheet, row, col)``: True when one of the formula runs reads that cell (through any reference)."""
    boxes: dict[str, list[tuple[int, int, int, int]]] = {}
    for run in runs:
        for ref in run.compiled.refs:
            if ref.name is None:
                box = ref.swept_area(run.first, run.last, run.col)
                boxes.setdefault((ref.sheet or run.sheet).casefold(), []).append(box)

    def is_read(sheet: str, row: int, col: int) -> bool:
        return any(r1 <= row <= r2 and c1 <= col <= c2 for r1, c1, r2, c2 in boxes.get(sheet.casefold(), ()))
    return is_read


_AREA = re.compile(r"(?:'((?:[^']|'')+)'|([A-Za-z_][\w.]*))!\$?([A-Za-z]{1,3})\$?([0-9]+)"
                   r"(?::\$?([A-Za-z]{1,3})\$?([0-9]+))?")
_REF_ATTR = re.compile(rb'<(?:[\w.-]+:)?(?:autoFilter|table)\b[^>]*?\bref\s*=\s*["\']([A-Z]{1,3}[0-9]+(?::[A-Z]{1,3}[0-9]+)?)["\']')
_CHART_FORMULA = re.compile(rb"<(?:[\w.-]+:)?f>([^<]*)</(?:[\w.-]+:)?f>")


#: The defined name of a sheet's print range (ECMA-376 Part 1, 18.2.5: built-in names).
PRINT_AREA = "_xlnm.Print_Area"
_PRINT_NAMES = {PRINT_AREA.casefold(), "_xlnm.print_titles"}


def _areas_in(text: str, sheet: str) -> list[tuple[int, int, int, int]]:
    """The areas of ``sheet`` named in a formula text (``Sheet!$A$1:$B$9``, quoted names too)."""
    out = []
    for m in _AREA.finditer(text):
        name = (m.group(1) or "").replace("''", "'") or m.group(2)
        if name.casefold() != sheet.casefold():
            continue
        (r1, c1) = split_ref(m.group(3) + m.group(4))
        (r2, c2) = split_ref((m.group(5) or m.group(3)) + (m.group(6) or m.group(4)))
        out.append((min(r1, r2), min(c1, c2), max(r1, r2), max(c1, c2)))
    return out


def kept_areas(pkg: WorkbookPackage, info, xml: bytes) -> list[tuple[int, int, int, int]]:
    """Areas of a sheet that belong to something other than formulas: its tables and filter, chart series,
    defined names. A notice placed there would join a table or a chart."""
    refs = [m.group(1) for m in _REF_ATTR.finditer(xml)]
    for rel in pkg.relationships(info.part):
        part = rel.get("part")
        if part and rel.get("Type", "").endswith("/table") and part in pkg:
            m = _REF_ATTR.search(pkg.read(part))
            if m:
                refs.append(m.group(1))
    areas = [range_box(ref.decode("ascii")) for ref in refs]  # the pattern takes only A1 or A1:B9
    for name in pkg.entry_names:
        if name.startswith("xl/charts/chart") and name.endswith(".xml"):
            for m in _CHART_FORMULA.finditer(pkg.read(name)):
                areas += _areas_in(xml_text.unescape_xml(m.group(1)), info.name)
    for d in pkg.defined_names:
        if d.name.casefold() not in _PRINT_NAMES:  # what is printed is no data: the notice may join it
            areas += _areas_in(d.text, info.name)
    return areas


def place_notice(xml: bytes, strings, sheet: str, is_read, kept=()) -> tuple[str, bool] | None:
    """Where a sheet's notice goes, (cell, whether its row is new), or None when no place is safe.

    A place is safe when the sheet has no cell element there (not even an
    empty styled one: its style would go with the notice, and ``restore``
    could not give it back as it was), it lies in no merged range, no
    ``kept`` area (tables, filters, chart series, defined names) and no
    formula reads it; its row must also be free for a row choice (so the
    text shows across the empty cells to its right).
    """
    used_rows: dict[int, int] = {}  # row → cells holding something
    existing_rows: set[int] = set()
    existing: set[tuple[int, int]] = set()
    r0 = c0 = 10 ** 9
    r1 = c1 = 0
    for cell in iter_cells(xml, strings):
        existing_rows.add(cell.row)
        existing.add((cell.row, cell.col))
        if cell.value is None and cell.formula is None:
            continue
        used_rows[cell.row] = used_rows.get(cell.row, 0) + 1
        r0, r1, c0, c1 = min(r0, cell.row), max(r1, cell.row), min(c0, cell.col), max(c1, cell.col)
    merges = sheet_read.merged_ranges(xml)
    blocked = merges + list(kept)

    def free(row, col):
        return ((row, col) not in existing and not any(a <= row <= c and b <= col <= d for a, b, c, d in blocked)
                and not (is_read is not None and is_read(sheet, row, col)))

    if not used_rows:
        return ("A1", 1 not in existing_rows) if free(1, 1) else None
    col = 1
    for row in range(1, min(r1, 8) + 1):  # a free row above the data, or under a title or caption
        if row in used_rows:
            continue
        above = used_rows.get(row - 1, 0)
        if (row < r0 or above <= 2) and free(row, col) and not any(
                a <= row <= c for a, b, c, d in merges):
            return f"{column_letters(col)}{row}", row not in existing_rows
    for c in range(c1 + 1, min(c1 + 4, MAX_COLUMN) + 1):  # beside the used range, on its first row
        if free(r0, c):
            return f"{column_letters(c)}{r0}", False
    for row in range(r1 + 1, min(r1 + 4, MAX_ROW) + 1):  # under it
        if row not in used_rows and free(row, c0):
            return f"{column_letters(c0)}{row}", row not in existing_rows
    return None


#: Column-width units (one digit's width) a character of the notice takes: text averages about a digit's width;
#: 0.95 leaves room for wide fonts (LibreOffice prints Calibri as DejaVu Sans, 0.85 units a character as
#: ``study/printing.py`` measured it).
UNITS_PER_CHAR = 0.95
#: Fewest and most characters on a line of the notice (a very narrow sheet still gets readable lines, and the
#: first line holds the whole NOTICE_OPENING, by which a notice is told from other text).
LINE_CHARS = (40, 160)
#: Default column width in units when a sheet states none (ECMA-376 Part 1, 18.3.1.81: 8 digits and padding).
DEFAULT_WIDTH = 8.43
_COL = re.compile(rb"<(?:[\w.-]+:)?col\b([^>]*)/?>")
_ATTR = re.compile(rb'\b(min|max|width|hidden)\s*=\s*["\']([^"\']*)["\']')
_DEFAULT_WIDTH = re.compile(rb'<(?:[\w.-]+:)?sheetFormatPr\b[^>]*?\bdefaultColWidth\s*=\s*["\']([0-9.]+)["\']')
_ROW_NUMBER = re.compile(rb'<(?:[\w.-]+:)?row\b[^>]*?\br\s*=\s*["\']([0-9]+)["\']')


def printed_width(xml: bytes, c1: int, c2: int) -> float:
    """The width of columns ``c1``..``c2`` in column-width units (``<cols>``; hidden columns count 0)."""
    m = _DEFAULT_WIDTH.search(xml)
    default = float(m.group(1)) if m else DEFAULT_WIDTH
    widths = {c: default for c in range(c1, c2 + 1)}
    for col in _COL.finditer(xml):
        attrs = {k.decode(): v.decode() for k, v in _ATTR.findall(col.group(1))}
        try:
            lo, hi = int(attrs["min"]), int(attrs["max"])
            width = 0.0 if attrs.get("hidden") in ("1", "true") else float(attrs.get("width", default))
        except (KeyError, ValueError):
            continue
        for c in range(max(lo, c1), min(hi, c2) + 1):
            widths[c] = width
    return sum(widths.values())


_PAGE_SETUP = re.compile(rb"<(?:[\w.-]+:)?pageSetup\b([^>]*)/?>")
_MARGINS = re.compile(rb"<(?:[\w.-]+:)?pageMargins\b([^>]*)/?>")
_NUMBER_ATTR = re.compile(rb'\b(scale|orientation|left|right)\s*=\s*["\']([^"\']*)["\']')
#: Points of one unit of column width in print (one digit of the default font: 7 pt as LibreOffice prints
#: Calibri 11 with DejaVu Sans, measured by ``study/printing.py``; narrower fonts leave room).
UNIT_PT = 7.0


def page_width(xml: bytes) -> float:
    """The width of one printed page of the sheet in column-width units: the smaller of A4 and US Letter in the
    sheet's orientation, less its side margins (0.7 inch when it states none), at its print scale."""
    attrs = {}
    for pattern in (_PAGE_SETUP, _MARGINS):
        m = pattern.search(xml)
        if m:
            attrs.update({k.decode(): v.decode() for k, v in _NUMBER_ATTR.findall(m.group(1))})
    try:
        scale = min(400.0, max(10.0, float(attrs.get("scale", 100))))
        sides = float(attrs.get("left", 0.7)) + float(attrs.get("right", 0.7))
    except ValueError:
        scale, sides = 100.0, 1.4
    inches = (11.0 if attrs.get("orientation") == "landscape" else 8.27) - sides
    return max(inches, 1.0) * 72 / UNIT_PT * 100 / scale


def notice_lines(text: str, width: float) -> list[str]:
    """The notice as lines that fit ``width`` column-width units (at least ``LINE_CHARS[0]`` characters a line).

    >>> notice_lines("one two three four five six seven eight nine ten eleven twelve thirteen", 40)
    ['one two three four five six seven eight', 'nine ten eleven twelve thirteen']
    """
    chars = max(LINE_CHARS[0], min(LINE_CHARS[1], int(width / UNITS_PER_CHAR)))
    return textwrap.wrap(text, chars, break_long_words=True, break_on_hyphens=False) or [text]


def place_lines(xml: bytes, strings, sheet: str, is_read, kept, lines: int,
                area: tuple[int, int, int, int] | None = None) -> tuple[int, int] | None:
    """(first row, column) of ``lines`` consecutive new rows for the notice, or None when no place is safe.

    Under ``area`` (the print range: one empty row between), in its first
    column; without it under the used range, in its first column. The rows
    must have no row element (not even an empty styled one), and the cell of
    each line must be in no merged range, no ``kept`` area and read by no formula.
    """
    used = sheet_read.used_range(xml, strings)
    if area is not None:
        top, col = area[2] + 2, area[1]
    elif used is not None:
        top, col = used[2] + 2, used[1]
    else:
        top, col = 1, 1
    taken = {int(m.group(1)) for m in _ROW_NUMBER.finditer(xml)}
    blocked = sheet_read.merged_ranges(xml) + list(kept)

    def free(row):
        return (row not in taken and row <= MAX_ROW
                and not any(a <= row <= c and b <= col <= d for a, b, c, d in blocked)
                and not (is_read is not None and is_read(sheet, row, col)))

    for start in range(top, min(top + 400, MAX_ROW) + 1):
        if all(free(r) for r in range(start, start + lines)):
            return start, col
    return None


def place_on_sheet(pkg, changes, info, xml: bytes, text: str, is_read):
    """Write the notice's lines on one sheet (``changes``: the package edits so far, ``info`` the sheet, ``xml`` its
    part as it stands): (notices, print ranges changed), or None when no place is safe."""
    raw, area = print_range(pkg, changes, info)
    if area is not None and area[0] == area[2] and area[1] == area[3]:
        raw = area = None  # one cell: the sheet is kept out of print (the study's per-applicant sheets)
    used = sheet_read.used_range(xml, pkg.shared_strings)
    c1, c2 = (area[1], area[3]) if area is not None else (used[1], used[3]) if used is not None else (1, 8)
    lines = notice_lines(text, min(printed_width(xml, c1, c2), page_width(xml)))  # the columns on one page
    where = place_lines(xml, pkg.shared_strings, info.name, is_read, kept_areas(pkg, info, xml), len(lines), area)
    if where is None:
        return None
    top, col = where
    refs = [f"{column_letters(col)}{top + k}" for k in range(len(lines))]
    before = sheet_read.dimension(xml)
    try:
        new = sheet_edit.add_cells(xml, {ref: sheet_edit.NewCell(value=line) for ref, line in zip(refs, lines)})
    except sheet_data.SheetXmlError:  # rows written without numbers: no cell can be added safely
        return None
    if before is not None:  # the notice stays outside the recorded extent: restore gives the same bytes back
        new = sheet_edit.set_dimension(new, before)
    changes.set(pkg, info.part, new)
    ranges = []
    if area is not None:
        m = _AREA.fullmatch(unescape_xml(raw.encode("utf-8")))
        last = top + len(lines) - 1
        if m.group(6) is not None:
            extended = m.string[:m.start(6)] + str(last) + m.string[m.end(6):]
        else:
            extended = m.string + f":${m.group(3)}${last}"
        extended_raw = escape_text(extended).decode("utf-8")
        set_print_range(pkg, changes, info, raw, extended_raw)
        ranges.append(PrintRange(info.name, extended_raw, raw))
    return [Notice(info.name, ref, line, True) for ref, line in zip(refs, lines)], ranges


_DEFINED_PRINT = re.compile(rb'(<(?:[\w.-]+:)?definedName\b[^>]*?\bname\s*=\s*["\']' + re.escape(PRINT_AREA.encode())
                            + rb'["\'][^>]*>)(.*?)(</(?:[\w.-]+:)?definedName\s*>)', re.S)
_LOCAL_ID = re.compile(rb'\blocalSheetId\s*=\s*["\']([0-9]+)["\']')


def print_range(pkg, changes, info) -> tuple[str | None, tuple[int, int, int, int] | None]:
    """The raw text of a sheet's print range in the workbook part and its area, when it is one area of the sheet."""
    wb = changes.current(pkg, pkg.workbook_part)
    for m in _DEFINED_PRINT.finditer(wb):
        local = _LOCAL_ID.search(m.group(1))
        if local is None or int(local.group(1)) != info.index:
            continue
        text = unescape_xml(m.group(2)).strip()
        area = _AREA.fullmatch(text)
        name = area and ((area.group(1) or "").replace("''", "'") or area.group(2))
        if area is None or name.casefold() != info.name.casefold():
            return None, None  # several areas, or a form not read here: the notice goes under the used range
        (r1, c1) = split_ref(area.group(3) + area.group(4))
        (r2, c2) = split_ref((area.group(5) or area.group(3)) + (area.group(6) or area.group(4)))
        return m.group(2).decode("utf-8"), (min(r1, r2), min(c1, c2), max(r1, r2), max(c1, c2))
    return None, None


def set_print_range(pkg, changes, info, now: str, then: str) -> bool:
    """Replace a sheet's print range whose raw text is ``now`` by ``then`` (False when it was changed since)."""
    wb = changes.current(pkg, pkg.workbook_part)
    for m in _DEFINED_PRINT.finditer(wb):
        local = _LOCAL_ID.search(m.group(1))
        if local is not None and int(local.group(1)) == info.index and m.group(2) == now.encode("utf-8"):
            changes.set(pkg, pkg.workbook_part, wb[:m.start(2)] + then.encode("utf-8") + wb[m.end(2):])
            return True
    return False


def sort_notice_cells(current: dict, notices: list[Notice]) -> tuple[list[str], list[int], list[Notice]]:
    """The notice's cells still as written (to remove), the rows they alone filled, and the lines edited since.

    ``current`` maps a cell reference to the sheet's cell as read now; a line whose cell is gone is neither."""
    gone, own_rows, edited = [], [], []
    for note in notices:
        cell = current.get(note.cell)
        if cell is None:
            continue
        if cell.value == note.text and cell.formula is None:
            gone.append(note.cell)
            if note.new_row:
                own_rows.append(cell.row)
        else:
            edited.append(note)
    return gone, own_rows, edited


def take_out(pkg, xml: bytes, notices: list[Notice]) -> tuple[bytes, list[Notice]]:
    """A sheet part without the notice's lines that still read as written, and the lines edited since (kept)."""
    current = {c.ref: c for c in iter_cells(xml, pkg.shared_strings)}
    gone, own_rows, edited = sort_notice_cells(current, notices)
    if gone:
        xml = sheet_edit.remove_cells(xml, gone, empty_rows=own_rows)
    return xml, edited
