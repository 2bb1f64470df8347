"""Replace trueband formulas by their values, keeping the formulas in a hidden sheet; and put them back.

For a workbook sent to people who do not have trueband, ``trueband recalc
--values`` leaves each cell that uses a registered function holding only its
value, and records the formula in a hidden sheet named
:data:`FORMULA_SHEET` (state ``hidden``: the recipient can unhide it to see
what the values came from; nothing else depends on it). Each record is one
row: sheet name, cell, the formula as text (``=…``) and the cell's ``<f>``
element exactly as it was (so a shared or array formula comes back with its
attributes). Formulas that only use standard functions stay formulas.

``trueband restore BOOK.xlsx`` puts every recorded formula back beside the
cell's current value, removes the hidden sheet (its part, its ``<sheet>``
entry, its relationship and content type) and drops the calculation chain.

Why a notice on every sheet, not live formulas: the values of trueband
functions cannot be kept live in a file for people without trueband (their
spreadsheet app does not have the functions; that is why the values are
written). Standard formulas that read them stay live, so once an input is
edited in a spreadsheet app the file mixes new figures with frozen ones (a
new cut beside an old selection ratio). So every sheet gets one text cell, a
notice, saying that the values of trueband functions were fixed when the
file was written (with the date and time), which cells hold them, which
inputs they were computed from with the inputs' values then, and how to
update them. The notice goes where it overwrites nothing and changes no
result: a row with no cells near the top (above the data, or under a title),
else the first free column right of the used range, else the row under it;
never a merged cell, a cell that any formula of the workbook reads, or a cell of
a table, filter, chart series or defined name (chart sheets hold no cells and get none). A
cell, not a header or a note: spreadsheet apps show header text only in
print preview and a note only on hover, and LibreOffice Calc shows the cell
(tests check it). Its place is recorded in the hidden sheet, and ``trueband
restore`` takes it out again (unless it was edited).

Package edits made here, all as byte edits of the small parts involved:
``xl/workbook.xml`` (a ``<sheet>`` appended at the end, so the positions that
sheet-local defined names count are unchanged), the workbook relationships,
``[Content_Types].xml``, and the removal of ``xl/calcChain.xml`` (formulas
are removed or added, so the chain is stale; apps rebuild it).
"""

from __future__ import annotations

import dataclasses
import datetime
import posixpath
import re
from typing import Mapping
from xml.etree import ElementTree

from trueband.funcs.registry import REGISTRY, normalize_name

from . import sheet_xml
from .safe_write import PackageChanges, add_override, remove_override
from .sheet_xml import CellUpdate, escape_text, iter_cells
from .xlsx_package import NS_REL, REL_WORKSHEET, UnusableWorkbook, WorkbookPackage, rels_part_of

__all__ = [
    "FORMULA_SHEET",
    "FormulaRecord",
    "uses_registered_function",
    "replace_with_values",
    "restore_formulas",
    "RestoreReport",
    "Notice",
    "NOTICE_OPENING",
    "notice_text",
    "read_notices",
    "frozen_inputs",
    "reader_of",
]

#: Name of the hidden sheet that keeps the replaced formulas.
FORMULA_SHEET = "trueband_formulas"
FORMULA_SHEET_STATE = "hidden"
_HEADER = ("sheet", "cell", "formula", "formula element")
_NOTE = "Formulas replaced by their values by trueband; `trueband restore FILE` puts them back."
CT_WORKSHEET = "application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"

_NAME_CALL = re.compile(r'"[^"]*"|((?:_xludf\.|_xlfn\._xlws\.|_xlfn\.|_xlws\.|com\.microsoft\.|org\.openoffice\.)?'
                        r"[A-Za-z_][A-Za-z0-9_.]*)\s*\(", re.I)


def uses_registered_function(formula: str) -> bool:
    """True if the formula calls a registered function (any case, any app prefix; text in quotes ignored).

    >>> uses_registered_function('ROUND(_xludf.SEM(B1, B2), 2)')
    True
    >>> uses_registered_function('SUM(A1:A9) & "SEM("')
    False
    """
    return any(m.group(1) and normalize_name(m.group(1)) in REGISTRY for m in _NAME_CALL.finditer(formula))


@dataclasses.dataclass(frozen=True)
class FormulaRecord:
    """One replaced formula: where it was, its text (without ``=``; None for a shared dependent) and ``<f>`` XML."""

    sheet: str
    cell: str
    text: str | None
    element: bytes


@dataclasses.dataclass(frozen=True)
class Notice:
    """The notice cell written on a sheet: where, its text, and whether its row was made for it."""

    sheet: str
    cell: str
    text: str
    new_row: bool = False


#: First words of every notice (how a notice is told from other text).
NOTICE_OPENING = "Fixed values, not formulas:"
_NOTICE_MARK = "(values notice)"
_NOTICE_NEW_ROW = "(values notice, own row)"
#: Items listed in a notice before "and N more".
NOTICE_ITEMS = 8


def _cell_ranges(refs) -> list[str]:
    """Cells as compact ranges: runs down a column, then neighbouring columns with the same rows."""
    by_col: dict[int, list[int]] = {}
    for ref in refs:
        r, c = sheet_xml.split_ref(ref)
        by_col.setdefault(c, []).append(r)
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
    L = sheet_xml.column_letters
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
        return value if isinstance(value, sheet_xml.ErrorValue) else f'"{value[:40]}"'
    return "(blank)"


def notice_text(records: list[FormulaRecord], inputs=(), written_at: datetime.datetime | None = None) -> str:
    """The text of the notice: when, which cells hold fixed values, from which inputs (values then), what to do.

    ``inputs`` are (``Sheet!A1`` or ``Sheet!A1:B9``, value or None) pairs; a
    single cell's value is shown as it was when the file was written.
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
        text += f" Computed from: {_listed(shown)}."
    return text + (" After an edit, formulas that read them mix new and fixed figures. To update them: trueband "
                   "restore FILE, then trueband recalc.")


def frozen_inputs(runs, store, uses_registered, as_value) -> list[tuple[str, object]]:
    """What the formula runs that call registered functions read, for the notice.

    ``Sheet!A1`` with its value from ``store`` (a blank one labelled
    ``(blank)``), or ``Sheet!A1:B9`` with None for a range; single cells first.
    ``runs`` are the recalculation's formula runs, ``uses_registered(compiled)``
    tells the ones to describe, ``as_value`` turns a stored value into a cell value.
    """
    from .column_eval import EMPTY

    out: dict[str, object] = {}
    for run in runs:
        if not uses_registered(run.compiled):
            continue
        for ref in run.compiled.refs:
            if ref.name is not None:
                continue
            sheet = store.canonical(ref.sheet or run.sheet) or (ref.sheet or run.sheet)
            r1, c1, r2, c2 = _run_area(ref, run)
            L = sheet_xml.column_letters
            label = f"{_quoted_sheet(sheet)}!{L(c1)}{r1}" + ("" if (r1, c1) == (r2, c2) else f":{L(c2)}{r2}")
            if label in out or label + " (blank)" in out:
                continue
            value = store.value(sheet, r1, c1) if (r1, c1) == (r2, c2) else None
            if value is EMPTY:
                out[label + " (blank)"] = None
            else:
                out[label] = None if value is None else as_value(value)
    return sorted(out.items(), key=lambda item: item[1] is None)


def _run_area(ref, run) -> tuple[int, int, int, int]:
    a1, a2 = ref.area(run.first, run.col), ref.area(run.last, run.col)
    return min(a1[0], a2[0]), min(a1[1], a2[1]), max(a1[2], a2[2]), max(a1[3], a2[3])


def reader_of(runs):
    """``is_read(sheet, row, col)``: True when one of the formula runs reads that cell (through any reference)."""
    boxes: dict[str, list[tuple[int, int, int, int]]] = {}
    for run in runs:
        for ref in run.compiled.refs:
            if ref.name is None:
                boxes.setdefault((ref.sheet or run.sheet).casefold(), []).append(_run_area(ref, run))

    def is_read(sheet: str, row: int, col: int) -> bool:
        return any(r1 <= row <= r2 and c1 <= col <= c2 for r1, c1, r2, c2 in boxes.get(sheet.casefold(), ()))
    return is_read


_AREA = re.compile(r"(?:'((?:[^']|'')+)'|([A-Za-z_][\w.]*))!\$?([A-Za-z]{1,3})\$?([0-9]+)"
                   r"(?::\$?([A-Za-z]{1,3})\$?([0-9]+))?")
_REF_ATTR = re.compile(rb'<(?:[\w.-]+:)?(?:autoFilter|table)\b[^>]*?\bref\s*=\s*["\']([A-Z]+[0-9]+(?::[A-Z]+[0-9]+)?)["\']')
_CHART_FORMULA = re.compile(rb"<(?:[\w.-]+:)?f>([^<]*)</(?:[\w.-]+:)?f>")


def _areas_in(text: str, sheet: str) -> list[tuple[int, int, int, int]]:
    """The areas of ``sheet`` named in a formula text (``Sheet!$A$1:$B$9``, quoted names too)."""
    out = []
    for m in _AREA.finditer(text):
        name = (m.group(1) or "").replace("''", "'") or m.group(2)
        if name.casefold() != sheet.casefold():
            continue
        (r1, c1) = sheet_xml.split_ref(m.group(3) + m.group(4))
        (r2, c2) = sheet_xml.split_ref((m.group(5) or m.group(3)) + (m.group(6) or m.group(4)))
        out.append((min(r1, r2), min(c1, c2), max(r1, r2), max(c1, c2)))
    return out


def _kept_areas(pkg: WorkbookPackage, info, xml: bytes) -> list[tuple[int, int, int, int]]:
    """Areas of a sheet that belong to something other than formulas: its tables and filter, chart series,
    defined names. A notice placed there would join a table or a chart."""
    areas = []
    for m in _REF_ATTR.finditer(xml):
        a, _, b = m.group(1).decode("ascii").partition(":")
        (r1, c1), (r2, c2) = sheet_xml.split_ref(a), sheet_xml.split_ref(b or a)
        areas.append((r1, c1, r2, c2))
    for rel in pkg.relationships(info.part):
        part = rel.get("part")
        if part and rel.get("Type", "").endswith("/table") and part in pkg:
            m = _REF_ATTR.search(pkg.read(part))
            if m:
                a, _, b = m.group(1).decode("ascii").partition(":")
                (r1, c1), (r2, c2) = sheet_xml.split_ref(a), sheet_xml.split_ref(b or a)
                areas.append((r1, c1, r2, c2))
    for name in pkg.entry_names:
        if name.startswith("xl/charts/chart") and name.endswith(".xml"):
            for m in _CHART_FORMULA.finditer(pkg.read(name)):
                areas += _areas_in(sheet_xml.unescape_xml(m.group(1)), info.name)
    for d in pkg.defined_names:
        areas += _areas_in(d.text, info.name)
    return areas


def _place_notice(xml: bytes, strings, sheet: str, is_read, kept=()) -> tuple[str, bool] | None:
    """Where a sheet's notice goes, (cell, whether its row is new), or None when no place is safe.

    A place is safe when its cell holds nothing, lies in no merged range, no
    ``kept`` area (tables, filters, chart series, defined names) and no
    formula reads it; its row must also be free for a row choice (so the
    text shows across the empty cells to its right).
    """
    used_rows: dict[int, int] = {}  # row → cells holding something
    existing_rows: set[int] = set()
    r0 = c0 = 10 ** 9
    r1 = c1 = 0
    for cell in iter_cells(xml, strings):
        existing_rows.add(cell.row)
        if cell.value is None and cell.formula is None:
            continue
        used_rows[cell.row] = used_rows.get(cell.row, 0) + 1
        r0, r1, c0, c1 = min(r0, cell.row), max(r1, cell.row), min(c0, cell.col), max(c1, cell.col)
    merges = sheet_xml.merged_ranges(xml)
    blocked = merges + list(kept)

    def free(row, col):
        return (not any(a <= row <= c and b <= col <= d for a, b, c, d in blocked)
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
            return f"{sheet_xml.column_letters(col)}{row}", row not in existing_rows
    for c in range(c1 + 1, min(c1 + 4, 16384) + 1):  # beside the used range, on its first row
        if free(r0, c):
            return f"{sheet_xml.column_letters(c)}{r0}", False
    for row in range(r1 + 1, min(r1 + 4, 1048576) + 1):  # under it
        if row not in used_rows and free(row, c0):
            return f"{sheet_xml.column_letters(c0)}{row}", row not in existing_rows
    return None


# ------------------------------------------------------------------ replacing


def replace_with_values(pkg: WorkbookPackage, changes: PackageChanges,
                        values: Mapping[str, Mapping[str, object]] | None = None, *, inputs=(),
                        is_read=None, written_at: datetime.datetime | None = None,
                        unplaced: list[str] | None = None) -> list[FormulaRecord]:
    """Drop every formula that uses a registered function, keeping its value; record it in the hidden sheet.

    Parameters
    ----------
    pkg : WorkbookPackage
    changes : PackageChanges
        The edits so far (normally the sheets patched with the new cached
        values); the sheets are read as they will be written, and edited further.
    values : mapping, optional
        ``{sheet name: {cell: value}}`` of freshly computed values; a replaced
        cell takes its value from here, else keeps its cached value.
    inputs : sequence of (str, value or None), optional
        The inputs the replaced formulas read (``Sheet!A1`` with its value then,
        or a range with None), named in the notice (:func:`notice_text`).
    is_read : callable, optional
        ``is_read(sheet, row, col)`` is True for a cell that some formula of the
        workbook reads: the notice never goes there. Default: no formula is
        known to read any empty cell.
    written_at : datetime, optional
        The time named in the notice (default now, UTC).
    unplaced : list, optional
        Receives the names of sheets where no safe place for a notice was found.

    Returns
    -------
    list of FormulaRecord
        The formulas replaced (empty when the workbook has none).

    Notes
    -----
    A shared formula is replaced as a whole group (master and dependents use
    the same functions). Cells of an array formula other than its top-left
    cell hold only values already and are left alone.
    """
    values = values or {}
    records: list[FormulaRecord] = []
    for info in pkg.worksheets:
        if info.name == FORMULA_SHEET:
            continue
        try:  # a part in an unusual form is read and edited in the parser's form (sheet_xml.normal_form)
            xml = sheet_xml.normal_form(changes.current(pkg, info.part))
        except sheet_xml.SheetXmlError as exc:
            raise UnusableWorkbook(f"{pkg.path.name}: sheet {info.name!r}: {exc}", path=pkg.path) from None
        masters: dict[int, str] = {}
        chosen: dict[str, tuple[str | None, object]] = {}
        for cell in iter_cells(xml, pkg.shared_strings):
            f = cell.formula
            if f is None:
                continue
            if f.kind == "shared" and f.is_master and f.text is not None:
                masters[f.shared_index] = f.text
            text = f.text if f.text is not None else masters.get(f.shared_index)
            if text is not None and uses_registered_function(text):
                chosen[cell.ref] = (f.text, values.get(info.name, {}).get(cell.ref, cell.value))
        if not chosen:
            continue
        elements = formula_elements(xml, chosen)
        if len(elements) < len(chosen):  # cells written without r: the parser's form gives each its reference
            xml = sheet_xml.parsed_form(xml)
            elements = formula_elements(xml, chosen)
        missing = sorted(set(chosen) - set(elements), key=sheet_xml.split_ref)
        if missing:
            raise UnusableWorkbook(f"{pkg.path.name}: sheet {info.name!r}: cell {missing[0]} is written without "
                                   f"its reference (r); --values cannot replace its formula (re-save the file "
                                   f"in a spreadsheet app first)", path=pkg.path)
        updates = {}
        for ref, (text, value) in chosen.items():
            records.append(FormulaRecord(info.name, ref, text, elements[ref]))
            updates[ref] = CellUpdate(value, drop_formula=True)
        try:
            changes.set(pkg, info.part, sheet_xml.patch_sheet(xml, updates))
        except sheet_xml.SheetXmlError as exc:
            raise UnusableWorkbook(f"{pkg.path.name}: sheet {info.name!r}: {exc}", path=pkg.path) from None
    if records:
        all_records = _existing_records(pkg) + records
        notices = _write_notices(pkg, changes, notice_text(all_records, inputs, written_at), is_read, unplaced)
        _write_formula_sheet(pkg, changes, all_records, notices)
        changes.drop_calc_chain(pkg)
    return records


def _write_notices(pkg: WorkbookPackage, changes: PackageChanges, text: str, is_read,
                   unplaced: list[str] | None) -> list[Notice]:
    """A notice cell on every worksheet (a notice from an earlier run is rewritten where it is)."""
    earlier = {n.sheet.casefold(): n for n in _existing_notices(pkg)}
    notices = []
    for info in pkg.worksheets:
        if info.name == FORMULA_SHEET:
            continue
        xml = sheet_xml.normal_form(changes.current(pkg, info.part))
        old = earlier.get(info.name.casefold())
        if old is not None:
            cell = next((c for c in iter_cells(xml, pkg.shared_strings) if c.ref == old.cell), None)
            if cell is not None and isinstance(cell.value, str) and cell.value.startswith(NOTICE_OPENING):
                changes.set(pkg, info.part, sheet_xml.patch_sheet(xml, {old.cell: CellUpdate(text)}))
                notices.append(Notice(info.name, old.cell, text, old.new_row))
                continue
        place = _place_notice(xml, pkg.shared_strings, info.name, is_read, _kept_areas(pkg, info, xml))
        if place is None:
            if unplaced is not None:
                unplaced.append(info.name)
            continue
        ref, new_row = place
        before = sheet_xml.dimension(xml)
        try:
            new = sheet_xml.add_cells(xml, {ref: sheet_xml.NewCell(value=text)})
        except sheet_xml.SheetXmlError:  # rows written without numbers: no cell can be added safely
            if unplaced is not None:
                unplaced.append(info.name)
            continue
        if before is not None:  # the notice stays outside the recorded extent: restore gives the same bytes back
            new = sheet_xml.set_dimension(new, before)
        changes.set(pkg, info.part, new)
        notices.append(Notice(info.name, ref, text, new_row))
    return notices


_CELL = re.compile(rb'<(?:\w+:)?c\b[^>]*?\br="([A-Z]+[0-9]+)"[^>]*?(?:/>|>(.*?)</(?:\w+:)?c>)', re.S)
_F = re.compile(rb"<(?:\w+:)?f\b[^>]*?(?:/>|>.*?</(?:\w+:)?f>)", re.S)


def formula_elements(xml: bytes, refs) -> dict[str, bytes]:
    """The raw ``<f>`` element of each listed cell, as bytes from the part."""
    want = set(refs)
    out = {}
    for m in _CELL.finditer(xml):
        ref = m.group(1).decode("ascii")
        if ref in want and m.group(2):
            f = _F.search(m.group(2))
            if f:
                out[ref] = f.group(0)
    return out


def _inline(ref: str, text: str) -> bytes:
    space = b' xml:space="preserve"' if text != text.strip() else b""
    return (f'<c r="{ref}" t="inlineStr"><is><t'.encode() + space + b">" + escape_text(text) + b"</t></is></c>")


def _records_part(records: list[FormulaRecord], notices: list[Notice] = ()) -> bytes:
    rows = [b'<row r="1">' + b"".join(_inline(f"{c}1", h) for c, h in zip("ABCD", _HEADER))
            + _inline("F1", _NOTE) + b"</row>"]
    i = 1
    for i, rec in enumerate(records, start=2):
        shown = "=" + rec.text if rec.text is not None else "(shares the formula above it in its group)"
        rows.append(f'<row r="{i}">'.encode() + _inline(f"A{i}", rec.sheet) + _inline(f"B{i}", rec.cell)
                    + _inline(f"C{i}", shown) + _inline(f"D{i}", rec.element.decode("utf-8")) + b"</row>")
    for i, note in enumerate(notices, start=i + 1):
        mark = _NOTICE_NEW_ROW if note.new_row else _NOTICE_MARK
        rows.append(f'<row r="{i}">'.encode() + _inline(f"A{i}", note.sheet) + _inline(f"B{i}", note.cell)
                    + _inline(f"C{i}", note.text) + _inline(f"D{i}", mark) + b"</row>")
    last = len(records) + len(notices) + 1
    return (b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
            b'<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main" '
            b'xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/relationships">'
            + f'<dimension ref="A1:F{last}"/>'.encode() + b"<sheetData>" + b"".join(rows) + b"</sheetData></worksheet>")


def _existing_records(pkg: WorkbookPackage) -> list[FormulaRecord]:
    try:
        info = pkg.sheet(FORMULA_SHEET)
    except KeyError:
        return []
    return read_records(pkg.read(info.part), pkg.shared_strings)


def read_records(xml: bytes, shared_strings=()) -> list[FormulaRecord]:
    """The records of a formula sheet part (the inverse of what :func:`replace_with_values` writes)."""
    return _read_sheet_records(xml, shared_strings)[0]


def read_notices(xml: bytes, shared_strings=()) -> list[Notice]:
    """The notices recorded in a formula sheet part."""
    return _read_sheet_records(xml, shared_strings)[1]


def _existing_notices(pkg: WorkbookPackage) -> list[Notice]:
    try:
        info = pkg.sheet(FORMULA_SHEET)
    except KeyError:
        return []
    return read_notices(pkg.read(info.part), pkg.shared_strings)


def _read_sheet_records(xml: bytes, shared_strings=()) -> tuple[list[FormulaRecord], list[Notice]]:
    rows: dict[int, dict[int, object]] = {}
    for cell in iter_cells(xml, shared_strings):
        rows.setdefault(cell.row, {})[cell.col] = cell.value
    out = []
    notices = []
    for r in sorted(rows):
        if r == 1:
            continue
        row = rows[r]
        sheet, ref, shown, element = (row.get(i) for i in (1, 2, 3, 4))
        if element in (_NOTICE_MARK, _NOTICE_NEW_ROW) and isinstance(sheet, str) and isinstance(ref, str):
            notices.append(Notice(sheet, ref, shown if isinstance(shown, str) else "", element == _NOTICE_NEW_ROW))
            continue
        if not (isinstance(sheet, str) and isinstance(ref, str) and isinstance(element, str)):
            raise UnusableWorkbook(f"the hidden sheet {FORMULA_SHEET} has an incomplete record in row {r}; "
                                   f"it was edited by hand")
        text = shown[1:] if isinstance(shown, str) and shown.startswith("=") else None
        out.append(FormulaRecord(sheet, ref, text, element.encode("utf-8")))
    return out, notices


def _free_name(names, pattern: str) -> str:
    n = 1
    while pattern.format(n) in names:
        n += 1
    return pattern.format(n)


def _write_formula_sheet(pkg: WorkbookPackage, changes: PackageChanges, records: list[FormulaRecord],
                         notices: list[Notice] = ()) -> None:
    data = _records_part(records, notices)
    try:
        existing = pkg.sheet(FORMULA_SHEET)
    except KeyError:
        existing = None
    if existing is not None:
        changes.set(pkg, existing.part, data)
        return
    folder = posixpath.dirname(pkg.sheets[0].part) if pkg.sheets else "xl/worksheets"
    taken = set(pkg.entry_names) | set(changes.add)
    part = _free_name(taken, folder + "/sheet{}.xml")
    changes.set(pkg, part, data)
    rels_name = rels_part_of(pkg.workbook_part)
    rels = changes.current(pkg, rels_name)
    rid = _free_name({el.get("Id", "") for el in _small_xml(pkg, rels_name, rels)}, "rId{}")
    target = posixpath.relpath(part, posixpath.dirname(pkg.workbook_part))
    rel_el = f'<Relationship Id="{rid}" Type="{REL_WORKSHEET}" Target="{target}"/>'.encode()
    i = rels.rindex(b"</")
    changes.set(pkg, rels_name, rels[:i] + rel_el + rels[i:])
    ct = changes.current(pkg, "[Content_Types].xml")
    changes.set(pkg, "[Content_Types].xml", add_override(ct, "/" + part, CT_WORKSHEET))
    changes.set(pkg, pkg.workbook_part, _append_sheet(pkg, changes.current(pkg, pkg.workbook_part), rid))


_SHEETS_END = re.compile(rb"</((?:[A-Za-z_][\w.-]*:)?)sheets\s*>")


def _small_xml(pkg: WorkbookPackage, name: str, data: bytes):
    try:
        return ElementTree.fromstring(data)
    except ElementTree.ParseError as exc:
        raise UnusableWorkbook(f"{pkg.path.name}: part {name} is not well-formed XML ({exc})", path=pkg.path) from None


def _append_sheet(pkg: WorkbookPackage, wb: bytes, rid: str) -> bytes:
    """``workbook.xml`` with the hidden sheet's ``<sheet>`` appended to ``<sheets>``, namespace-aware.

    The new element declares the relationships namespace itself (writers bind
    it on the root, or, as openpyxl with lxml does, on each ``<sheet>``), and
    takes the prefix of the ``</sheets>`` it goes before, which is bound
    there. The result is parsed to check that the new sheet names its
    relationship as the package reader will look it up.
    """
    root = _small_xml(pkg, pkg.workbook_part, wb)
    ns = root.tag[1:].split("}", 1)[0] if root.tag.startswith("{") else ""
    q = (lambda t: f"{{{ns}}}{t}") if ns else (lambda t: t)
    ids = [int(el.get("sheetId")) for el in root.iter(q("sheet")) if (el.get("sheetId") or "").isdigit()]
    ends = list(_SHEETS_END.finditer(wb))
    if len(ends) != 1:
        raise UnusableWorkbook(f"{pkg.path.name}: {pkg.workbook_part} has no single <sheets> list", path=pkg.path)
    prefix = ends[0].group(1)
    sheet_el = (b"<" + prefix + b'sheet xmlns:r="' + NS_REL.encode() + b'" name="' + FORMULA_SHEET.encode()
                + b'" sheetId="' + str(max(ids, default=0) + 1).encode() + b'" state="'
                + FORMULA_SHEET_STATE.encode() + b'" r:id="' + rid.encode() + b'"/>')
    j = ends[0].start()
    new = wb[:j] + sheet_el + wb[j:]
    check = [el for el in _small_xml(pkg, pkg.workbook_part, new).iter(q("sheet"))
             if el.get("name") == FORMULA_SHEET]
    if len(check) != 1 or check[0].get(f"{{{NS_REL}}}id") != rid:
        raise UnusableWorkbook(f"{pkg.path.name}: the hidden sheet could not be added to {pkg.workbook_part}",
                               path=pkg.path)
    return new


# ------------------------------------------------------------------ restoring


@dataclasses.dataclass
class RestoreReport:
    """What a restore did: formulas put back, and cells that could not be (sheet!cell, why)."""

    restored: int = 0
    skipped: list[tuple[str, str]] = dataclasses.field(default_factory=list)


def restore_formulas(pkg: WorkbookPackage, changes: PackageChanges) -> RestoreReport:
    """Put back the formulas recorded in the hidden sheet and remove the sheet.

    Each formula goes back into its cell beside the cell's current value (so
    the file still shows the same values until recalculated). A recorded
    cell whose sheet was renamed or deleted, or that holds a formula again,
    is listed in ``skipped``.

    Works on files that a spreadsheet app opened and saved meanwhile:
    the app rewrites the hidden sheet with shared strings (read through the
    workbook's table), drops the cells whose value was empty text (they are
    written again, with their formula and no cached value), and numbers its
    own shared formulas, so a restored shared group whose ``si`` is taken in
    its sheet gets a free one.

    Raises
    ------
    UnusableWorkbook
        The workbook has no hidden formula sheet (nothing to restore), or a
        part cannot be read (one line naming the sheet and the cell).
    """
    try:
        info = pkg.sheet(FORMULA_SHEET)
    except KeyError:
        raise UnusableWorkbook(f"{pkg.path.name} has no sheet {FORMULA_SHEET}: there are no replaced formulas "
                               f"to restore", path=pkg.path) from None
    try:
        records, notices = _read_sheet_records(pkg.read(info.part), pkg.shared_strings)
    except sheet_xml.SheetXmlError as exc:
        raise UnusableWorkbook(f"{pkg.path.name}: the hidden sheet {FORMULA_SHEET} cannot be read ({exc})",
                               path=pkg.path) from None
    report = RestoreReport()
    by_sheet: dict[str, list[FormulaRecord]] = {}
    for rec in records:
        by_sheet.setdefault(rec.sheet, []).append(rec)
    notes_by_sheet: dict[str, list[Notice]] = {}
    for note in notices:
        by_sheet.setdefault(note.sheet, [])
        notes_by_sheet.setdefault(note.sheet, []).append(note)
    for name, recs in by_sheet.items():
        try:
            target = pkg.sheet(name)
        except KeyError:
            report.skipped += [(f"{rec.sheet}!{rec.cell}", "the sheet no longer exists") for rec in recs]
            continue
        try:
            report.restored += _restore_sheet(pkg, changes, target, recs, report, notes_by_sheet.get(name, []))
        except sheet_xml.SheetXmlError as exc:
            raise UnusableWorkbook(f"{pkg.path.name}: sheet {name!r}: {exc}; nothing was restored",
                                   path=pkg.path) from None
    _remove_sheet(pkg, changes, info)
    changes.drop_calc_chain(pkg)
    changes.keep_cached_values(pkg)
    return report


_SI = re.compile(rb'(\bsi=")([0-9]+)(")')
_F_RECORD = re.compile(rb'<(?:[A-Za-z_][\w.-]*:)?f((?: [A-Za-z]+="[^"<>]*")*) ?(?:/>|>([^<]*)</(?:[A-Za-z_][\w.-]*:)?f>)')


def _element_for(element: bytes, prefix: bytes) -> bytes | None:
    """A recorded ``<f>`` element under the target sheet's namespace prefix (the file may have been saved
    by an app that writes another); None when the record no longer holds a formula element."""
    m = _F_RECORD.fullmatch(element.strip())
    if m is None:
        return None
    attrs, text = m.group(1), m.group(2)
    if text is None:
        return b"<" + prefix + b"f" + attrs + b"/>"
    return b"<" + prefix + b"f" + attrs + b">" + text + b"</" + prefix + b"f>"


def _restore_sheet(pkg: WorkbookPackage, changes: PackageChanges, target, recs: list[FormulaRecord],
                   report: RestoreReport, notices: list[Notice] = ()) -> int:
    """Put one sheet's records back and take its notice out; the number of formulas restored."""
    xml = sheet_xml.normal_form(changes.current(pkg, target.part))
    prefix = sheet_xml.sheet_data_span(xml)[2]
    current = {}
    taken_si: set[int] = set()
    for c in iter_cells(xml, pkg.shared_strings):
        current[c.ref] = c
        if c.formula is not None and c.formula.shared_index is not None:
            taken_si.add(c.formula.shared_index)
    # a recorded shared group whose si the sheet uses now (an app numbered its own groups) gets a free one
    recorded_si = {int(m.group(2)) for m in (_SI.search(rec.element) for rec in recs) if m is not None}
    renumber: dict[int, int] = {}
    used_si = taken_si | recorded_si
    for si in sorted(recorded_si & taken_si):
        renumber[si] = max(used_si) + 1
        used_si.add(renumber[si])
    updates: dict[str, CellUpdate] = {}
    absent: dict[str, sheet_xml.NewCell] = {}
    for rec in recs:
        ref = rec.cell.replace("$", "").upper()
        try:
            sheet_xml.split_ref(ref)
        except ValueError:
            report.skipped.append((f"{rec.sheet}!{rec.cell}", "the record does not name a cell"))
            continue
        cell = current.get(ref)
        element = _element_for(rec.element, prefix)
        if element is None:
            report.skipped.append((f"{rec.sheet}!{rec.cell}", "the recorded formula element was edited"))
            continue
        if renumber:
            element = _SI.sub(lambda m: m.group(1) + str(renumber.get(int(m.group(2)), int(m.group(2)))).encode()
                              + m.group(3), element, count=1)
        if cell is None:
            # spreadsheet apps do not save a cell whose value is empty text: it comes back without a value
            absent[ref] = sheet_xml.NewCell()
            updates[ref] = CellUpdate(None, formula_xml=element)
            continue
        if cell.formula is not None:
            report.skipped.append((f"{rec.sheet}!{rec.cell}", "the cell holds a formula again"))
            continue
        # text values (shared or inline strings) become the formula's text result (t="str")
        updates[ref] = CellUpdate(cell.value, formula_xml=element)
    gone, own_rows = [], []
    for note in notices:
        cell = current.get(note.cell)
        if cell is None:
            continue
        if cell.value == note.text and cell.formula is None:
            gone.append(note.cell)
            if note.new_row:
                own_rows.append(cell.row)
        else:
            report.skipped.append((f"{note.sheet}!{note.cell}", "the values notice was edited; it is left there"))
    if not updates and not gone:
        return 0
    if absent:
        xml = sheet_xml.add_cells(xml, absent)
    if updates:
        xml = sheet_xml.patch_sheet(xml, updates)
    if gone:
        xml = sheet_xml.remove_cells(xml, gone, empty_rows=own_rows)
    changes.set(pkg, target.part, xml)
    return len(updates)


def _remove_sheet(pkg: WorkbookPackage, changes: PackageChanges, info) -> None:
    changes.delete(info.part)
    own_rels = rels_part_of(info.part)
    if own_rels in pkg:
        changes.delete(own_rels)
    wb = changes.current(pkg, pkg.workbook_part)
    # either quote, any prefix, whitespace in the tag: the file may have been saved by another app
    wb, n = re.subn(rb'<(?:[\w.-]+:)?sheet\s[^>]*?\bname\s*=\s*(["\'])' + re.escape(_xml_attr(FORMULA_SHEET))
                    + rb'\1[^>]*?/>', b"", wb, count=1)
    if n != 1 or any(el.get("name") == FORMULA_SHEET for el in _small_xml(pkg, pkg.workbook_part, wb).iter()
                     if el.tag.rsplit("}", 1)[-1] == "sheet"):
        raise UnusableWorkbook(f"{pkg.path.name}: the hidden sheet {FORMULA_SHEET} could not be taken out of "
                               f"{pkg.workbook_part}; nothing was restored", path=pkg.path)
    if info.index != len(pkg.sheets) - 1:
        wb = _renumber_local_names(wb, info.index)
    changes.set(pkg, pkg.workbook_part, wb)
    rels_name = rels_part_of(pkg.workbook_part)
    rels = changes.current(pkg, rels_name)
    rels = re.sub(rb'<(?:[\w.-]+:)?Relationship\s[^>]*?\bId\s*=\s*(["\'])' + re.escape(info.rel_id.encode())
                  + rb'\1[^>]*?/>', b"", rels, count=1)
    changes.set(pkg, rels_name, rels)
    ct = changes.current(pkg, "[Content_Types].xml")
    changes.set(pkg, "[Content_Types].xml", remove_override(ct, "/" + info.part))



_LOCAL_NAME = re.compile(rb'(<(?:[\w.-]+:)?definedName\b[^>]*?\blocalSheetId\s*=\s*["\'])([0-9]+)'
                         rb'(["\'][^>]*>.*?</(?:[\w.-]+:)?definedName\s*>)', re.S)


def _xml_attr(text: str) -> bytes:
    return text.replace("&", "&amp;").replace("<", "&lt;").encode("utf-8")


def _renumber_local_names(wb: bytes, removed: int) -> bytes:
    """Sheet-local defined names count sheet positions: shift those after a removed sheet, drop its own."""
    def fix(m):
        index = int(m.group(2))
        if index == removed:
            return b""
        if index > removed:
            return m.group(1) + str(index - 1).encode() + m.group(3)
        return m.group(0)
    return _LOCAL_NAME.sub(fix, wb)
