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

Each sheet of a values file also gets a notice saying that those values are
fixed, in lines as wide as the sheet's printed columns, in new rows under its
print range, which is extended over them (:mod:`~trueband.bridge.engine.values_notice`
says why a notice and where it goes); the lines and the print range as it was
are recorded in the hidden sheet too, and restore takes them out and puts the
print range back.

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


from ..formulas.names import uses_registered_function
from ..workbook import sheet_data, sheet_edit, sheet_patch, sheet_read, xml_form
from ..workbook.cells import split_ref
from ..workbook.save import PackageChanges, add_override, remove_override
from .values_notice import (PRINT_AREA, Notice, NOTICE_OPENING, PrintRange, frozen_inputs, notice_text, place_on_sheet,
                            reader_of, set_print_range, sort_notice_cells, take_out)
from ..workbook.sheet_patch import CellUpdate
from ..workbook.sheet_read import iter_cells
from ..workbook.xml_text import escape_text
from ..workbook.package import NS_REL, REL_WORKSHEET, UnusableWorkbook, WorkbookPackage, rels_part_of

__all__ = [
    "FORMULA_SHEET",
    "FormulaRecord",
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
#: Column D of a hidden-sheet row that records a notice (its own row: made for the notice).
_NOTICE_MARK = "(values notice)"
_NOTICE_NEW_ROW = "(values notice, own row)"
#: Column D of a row that records a print range the notice extended: C the range now, E the range before (both as
#: the workbook part wrote them, so that restore gives the part back byte for byte).
_PRINT_MARK = "(values notice, print range)"
CT_WORKSHEET = "application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"

@dataclasses.dataclass(frozen=True)
class FormulaRecord:
    """One replaced formula: where it was, its text (without ``=``; None for a shared dependent) and ``<f>`` XML."""

    sheet: str
    cell: str
    text: str | None
    element: bytes


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
        original = changes.current(pkg, info.part)
        try:  # a part in an irregular form is read in the regular form, and patched keeping its other bytes
            xml = xml_form.regular_form(original)
        except sheet_data.SheetXmlError as exc:
            raise UnusableWorkbook(f"{pkg.path.name}: sheet {info.name!r}: {exc}", path=pkg.path) from None
        chosen = _registered_cells(xml, pkg.shared_strings, values.get(info.name, {}))
        if not chosen:
            continue
        elements = formula_elements(xml, chosen)
        if len(elements) < len(chosen):  # cells written without r: the parser's form gives each its reference
            xml = xml_form.rewrite_in_regular_form(xml)
            elements = formula_elements(xml, chosen)
        missing = sorted(set(chosen) - set(elements), key=split_ref)
        if missing:
            raise UnusableWorkbook(f"{pkg.path.name}: sheet {info.name!r}: cell {missing[0]} is written without "
                                   f"its reference (r); --values cannot replace its formula (re-save the file "
                                   f"in a spreadsheet app first)", path=pkg.path)
        updates = {}
        for ref, (text, value) in chosen.items():
            records.append(FormulaRecord(info.name, ref, text, elements[ref]))
            updates[ref] = CellUpdate(value, drop_formula=True)
        try:
            changes.set(pkg, info.part, sheet_patch.patch_sheet(original, updates))
        except sheet_data.SheetXmlError as exc:
            raise UnusableWorkbook(f"{pkg.path.name}: sheet {info.name!r}: {exc}", path=pkg.path) from None
    if records:
        all_records = _existing(pkg)[0] + records
        notices, ranges = _write_notices(pkg, changes, notice_text(all_records, inputs, written_at), is_read,
                                         unplaced)
        _write_formula_sheet(pkg, changes, all_records, notices, ranges)
        changes.drop_calc_chain(pkg)
    return records


def _registered_cells(xml: bytes, strings, values: Mapping[str, object]) -> dict[str, tuple[str | None, object]]:
    """The cells of a sheet whose formula uses a registered function: reference → (formula text, or None for a
    shared dependent; the value to keep, from ``values`` else the cached one)."""
    masters: dict[int, str] = {}
    chosen: dict[str, tuple[str | None, object]] = {}
    for cell in iter_cells(xml, strings):
        f = cell.formula
        if f is None:
            continue
        if f.kind == "shared" and f.is_master and f.text is not None:
            masters[f.shared_index] = f.text
        text = f.text if f.text is not None else masters.get(f.shared_index)
        if text is not None and uses_registered_function(text):
            chosen[cell.ref] = (f.text, values.get(cell.ref, cell.value))
    return chosen


def _write_notices(pkg: WorkbookPackage, changes: PackageChanges, text: str, is_read,
                   unplaced: list[str] | None) -> tuple[list[Notice], list[PrintRange]]:
    """The notice's lines on every worksheet, inside its print range (the lines and print range of an earlier run
    are taken out first; lines edited since stay, recorded)."""
    _, earlier, earlier_ranges = _existing(pkg)
    notices: list[Notice] = []
    ranges: list[PrintRange] = []
    for info in pkg.worksheets:
        if info.name == FORMULA_SHEET:
            continue
        mine = [n for n in earlier if n.sheet.casefold() == info.name.casefold()]
        xml = xml_form.regular_form(changes.current(pkg, info.part))
        if mine:
            xml, kept_lines = take_out(pkg, xml, mine)
            notices += kept_lines
            changes.set(pkg, info.part, xml)
        for old in earlier_ranges:
            if old.sheet.casefold() == info.name.casefold():
                set_print_range(pkg, changes, info, old.new, old.old)
        placed = place_on_sheet(pkg, changes, info, xml, text, is_read)
        if placed is None:
            if unplaced is not None:
                unplaced.append(info.name)
            continue
        notices += placed[0]
        ranges += placed[1]
    return notices, ranges


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


def _records_part(records: list[FormulaRecord], notices: list[Notice] = (), ranges: list[PrintRange] = ()) -> bytes:
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
    for i, pr in enumerate(ranges, start=len(records) + len(notices) + 2):
        rows.append(f'<row r="{i}">'.encode() + _inline(f"A{i}", pr.sheet) + _inline(f"B{i}", PRINT_AREA)
                    + _inline(f"C{i}", pr.new) + _inline(f"D{i}", _PRINT_MARK) + _inline(f"E{i}", pr.old) + b"</row>")
    last = len(records) + len(notices) + len(ranges) + 1
    return (b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
            b'<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main" '
            b'xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/relationships">'
            + f'<dimension ref="A1:F{last}"/>'.encode() + b"<sheetData>" + b"".join(rows) + b"</sheetData></worksheet>")


def _existing(pkg: WorkbookPackage) -> tuple[list[FormulaRecord], list[Notice], list[PrintRange]]:
    """The records, notices and print ranges of an earlier ``--values`` run (none without its formula sheet)."""
    try:
        info = pkg.sheet(FORMULA_SHEET)
    except KeyError:
        return [], [], []
    return _read_sheet_records(pkg.read(info.part), pkg.shared_strings)


def read_records(xml: bytes, shared_strings=()) -> list[FormulaRecord]:
    """The records of a formula sheet part (the inverse of what :func:`replace_with_values` writes)."""
    return _read_sheet_records(xml, shared_strings)[0]


def read_notices(xml: bytes, shared_strings=()) -> list[Notice]:
    """The notices recorded in a formula sheet part."""
    return _read_sheet_records(xml, shared_strings)[1]


def _read_sheet_records(xml: bytes, shared_strings=()) -> tuple[list[FormulaRecord], list[Notice], list[PrintRange]]:
    rows: dict[int, dict[int, object]] = {}
    for cell in iter_cells(xml, shared_strings):
        rows.setdefault(cell.row, {})[cell.col] = cell.value
    out = []
    notices = []
    ranges = []
    for r in sorted(rows):
        if r == 1:
            continue
        row = rows[r]
        sheet, ref, shown, element = (row.get(i) for i in (1, 2, 3, 4))
        if element == _PRINT_MARK and isinstance(sheet, str) and isinstance(shown, str) \
                and isinstance(row.get(5), str):
            ranges.append(PrintRange(sheet, shown, row.get(5)))
            continue
        if element in (_NOTICE_MARK, _NOTICE_NEW_ROW) and isinstance(sheet, str) and isinstance(ref, str):
            notices.append(Notice(sheet, ref, shown if isinstance(shown, str) else "", element == _NOTICE_NEW_ROW))
            continue
        if not (isinstance(sheet, str) and isinstance(ref, str) and isinstance(element, str)):
            raise UnusableWorkbook(f"the hidden sheet {FORMULA_SHEET} has an incomplete record in row {r}; "
                                   f"it was edited by hand")
        text = shown[1:] if isinstance(shown, str) and shown.startswith("=") else None
        out.append(FormulaRecord(sheet, ref, text, element.encode("utf-8")))
    return out, notices, ranges


def _free_name(names, pattern: str) -> str:
    n = 1
    while pattern.format(n) in names:
        n += 1
    return pattern.format(n)


def _write_formula_sheet(pkg: WorkbookPackage, changes: PackageChanges, records: list[FormulaRecord],
                         notices: list[Notice] = (), ranges: list[PrintRange] = ()) -> None:
    data = _records_part(records, notices, ranges)
    try:
        existing = pkg.sheet(FORMULA_SHEET)
    except KeyError:
        existing = None
    if existing is not None:
        changes.set(pkg, existing.part, data)
        return
    folder = posixpath.dirname(pkg.worksheets[0].part) if pkg.worksheets else "xl/worksheets"
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
        records, notices, ranges = _read_sheet_records(pkg.read(info.part), pkg.shared_strings)
    except sheet_data.SheetXmlError as exc:
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
        except sheet_data.SheetXmlError as exc:
            raise UnusableWorkbook(f"{pkg.path.name}: sheet {name!r}: {exc}; nothing was restored",
                                   path=pkg.path) from None
    for pr in ranges:  # the print ranges the notice extended, as they were
        try:
            target = pkg.sheet(pr.sheet)
        except KeyError:
            continue
        if not set_print_range(pkg, changes, target, pr.new, pr.old):
            report.skipped.append((f"{pr.sheet} print range", "it was changed since the notice extended it; it is "
                                                               "left as it is"))
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
    xml = xml_form.regular_form(changes.current(pkg, target.part))
    prefix = sheet_data.sheet_data_span(xml)[2]
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
    absent: dict[str, sheet_edit.NewCell] = {}
    for rec in recs:
        ref = rec.cell.replace("$", "").upper()
        try:
            split_ref(ref)
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
            absent[ref] = sheet_edit.NewCell()
            updates[ref] = CellUpdate(None, formula_xml=element)
            continue
        if cell.formula is not None:
            report.skipped.append((f"{rec.sheet}!{rec.cell}", "the cell holds a formula again"))
            continue
        # text values (shared or inline strings) become the formula's text result (t="str")
        updates[ref] = CellUpdate(cell.value, formula_xml=element)
    gone, own_rows, edited = sort_notice_cells(current, notices)
    for note in edited:
        report.skipped.append((f"{note.sheet}!{note.cell}", "the values notice was edited; it is left there"))
    if not updates and not gone:
        return 0
    if absent:
        xml = sheet_edit.add_cells(xml, absent)
    if updates:
        xml = sheet_patch.patch_sheet(xml, updates)
    if gone:
        xml = sheet_edit.remove_cells(xml, gone, empty_rows=own_rows)
    changes.set(pkg, target.part, xml)
    return len(updates)


def _remove_sheet(pkg: WorkbookPackage, changes: PackageChanges, info) -> None:
    changes.delete(info.part)
    own_rels = rels_part_of(info.part)
    if own_rels in pkg:
        changes.delete(own_rels)
    wb = changes.current(pkg, pkg.workbook_part)
    # either quote, any prefix, whitespace in the tag: the file may have been saved by another app
    wb, n = re.subn(rb'<(?:[\w.-]+:)?sheet\s[^>]*?\bname\s*=\s*(["\'])' + re.escape(FORMULA_SHEET.encode())
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
