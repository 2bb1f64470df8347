"""Fast writing of the study's two long sheets (the copy of the data and the Bands sheet).

openpyxl builds an XML element per cell, about 20 µs each: for 50,000 candidates x 47
columns that alone is a minute. The study therefore lets openpyxl write the workbook with
only the header row of these two sheets (so styles, column widths, panes and page setup are
openpyxl's), then splices the data rows into those sheet parts as plain text: numbers as
``<c r="C2"><v>1</v></c>``, text as inline strings, formulas as ``<f>`` without a cached value
(the recalculation adds it). Every other part of the package is copied as it is.

The package written here is the study's intermediate file: the recalculation reads it and writes the study
with every entry compressed again (:func:`~trueband.bridge.workbook.save.write_package`), so its entries are
compressed at zlib's fastest level (:data:`LEVEL`): the study a user gets is the same.
"""

from __future__ import annotations

import datetime
import math
import re
import zipfile
from pathlib import Path
from typing import Callable, Iterable, Iterator, Mapping
from xml.sax.saxutils import escape

from openpyxl.utils import get_column_letter

from ..formulas.calc_binding import bind_for_calc, bind_for_calc_xml, bind_sheet_xml
from ..workbook.files import replacing
from ..workbook.save import set_compress_level
from ..workbook.sheet_data import ErrorValue

__all__ = ["rows_xml", "splice_rows", "sheet_parts"]

#: zlib level of the intermediate package's entries (the recalculation compresses the study's own entries)
LEVEL = 1

_ILLEGAL = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f]")
_NS_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"


def _text(value: str) -> str:
    value = _ILLEGAL.sub("", value)
    space = ' xml:space="preserve"' if value != value.strip() else ""
    return f"<is><t{space}>{escape(value)}</t></is>"


#: Whether :func:`rows_xml` writes a row of text and formulas from its shape's template (False: cell by cell).
ROW_MEMO = True
#: Stands for a number in a row's template: a noncharacter, neither a word character nor space, nor
#: changed by escaping (a row holding one is written cell by cell).
_MARK = "\ufdd0"
_NUMBER = re.compile(r"([0-9]+)(?!\w*\s*\()")  # as calc_binding's holes: never a digit of a called name
_MOST_SHAPES = 4096


def rows_xml(rows: Iterable[list], first_row: int, *, formulas: bool,
             styles: Mapping[tuple[int, int], int] | None = None) -> Iterator[str]:
    """``<row>`` elements for ``rows`` starting at ``first_row``; with ``formulas``, text starting
    with ``=`` is a formula, otherwise all text is text. ``styles`` maps (row, 0-based column) to
    the style index a cell is written with (a date keeps its date format).

    A filled-down row differs from the one above only in its numbers (the row number, the row in its
    references): a row of text and formulas is therefore written from a template of its shape (its numbers
    taken out, as :func:`~trueband.bridge.formulas.calc_binding.bind_for_calc` takes them out), made once
    by the cell-by-cell writer, and its numbers put back; the text is the same."""
    letters: list[str] = []
    styled = bool(styles)  # asked once: a mapping of many cells may be costly to test (the Bands' styles)
    templates: dict = {}
    for r, row in enumerate(rows, start=first_row):
        while len(letters) < len(row):
            letters.append(get_column_letter(len(letters) + 1))
        digits = str(r)
        xml = _row_from_template(row, r, digits, letters, formulas, styles if styled else None, templates) \
            if ROW_MEMO else None
        yield xml if xml is not None else _row_xml(row, r, digits, letters, formulas, styles if styled else None)


class _NumberShape(str):
    """A number cell's value in a row's template (its digits taken out): written as the number it stands for."""


def _row_from_template(row: list, r: int, digits: str, letters: list, formulas: bool, styles, templates: dict):
    """The row's XML from its shape's template, or None when the row holds anything but text and whole numbers
    (fractions, logical values, dates, ...: the cell-by-cell writer takes those) or the templates are too many."""
    cells = [digits]  # the row number, then each cell's: its row number, a separator (text or number), its text
    for value in row:
        kind = type(value)
        if kind is str:
            cells.append(digits + "\x02" + value if value else "")  # "" writes nothing, as None does
        elif kind is int:
            cells.append(digits + "\x03" + repr(value))
        elif value is None:
            cells.append("")
        else:  # a row of measured numbers (the data copy) is written faster cell by cell
            return None
    text = "\x01".join(cells)
    if _MARK in text or text.count("\x01") != len(row):
        return None  # a separator or the mark inside the text itself
    parts = _NUMBER.split(text)
    key = shape = _MARK.join(parts[::2])
    if styles is not None:
        key = (shape, tuple(styles[(r, c)] if (r, c) in styles else None for c in range(len(row)) if cells[c + 1]))
    pieces = templates.get(key)
    if pieces is None:
        if len(templates) >= _MOST_SHAPES:
            return None
        cells = shape.split("\x01")[1:]  # each cell: the mark of its row number, a separator, its text
        values = [None if not cell else cell[2:] if cell[1] == "\x02" else _NumberShape(cell[2:]) for cell in cells]
        template = _row_xml(values, r, _MARK, letters, formulas, styles)
        pieces = templates[key] = template.split(_MARK) if template.count(_MARK) == len(parts) // 2 else False
    if pieces is False:  # the template did not keep every number in place: cell by cell
        return None
    parts[::2] = pieces
    return "".join(parts)


def _row_xml(row: list, r: int, digits: str, letters: list, formulas: bool, styles) -> str:
    """One ``<row>`` element, cell by cell (``digits`` is how the row number is written)."""
    parts = [f'<row r="{digits}">']
    for c, value in enumerate(row):
        if value is None:
            continue
        ref = letters[c] + digits
        if styles is not None and (r, c) in styles:
            ref += f'" s="{styles[(r, c)]}'  # the attribute rides on the reference
        kind = type(value)  # the common exact types first; subclasses (bool, ErrorValue) below
        if kind is str and formulas and value.startswith("="):
            parts.append(f'<c r="{ref}"><f>{bind_for_calc_xml(value[1:])}</f></c>')
        elif kind is float:
            if math.isfinite(value):
                parts.append(f'<c r="{ref}"><v>{value!r}</v></c>')
        elif kind is int:
            parts.append(f'<c r="{ref}"><v>{value}</v></c>')
        else:
            parts.append(_other_cell(ref, value, formulas))
    parts.append("</row>")
    return "".join(parts)


def _other_cell(ref: str, value, formulas: bool) -> str:
    """The element of a cell that is neither a formula nor a plain number (empty for blank text)."""
    if type(value) is _NumberShape:
        return f'<c r="{ref}"><v>{value}</v></c>'
    if isinstance(value, bool):
        return f'<c r="{ref}" t="b"><v>{int(value)}</v></c>'
    if isinstance(value, int):
        return f'<c r="{ref}"><v>{value}</v></c>'
    if isinstance(value, float):
        return f'<c r="{ref}"><v>{value!r}</v></c>' if math.isfinite(value) else ""
    if isinstance(value, ErrorValue):  # a formula's error result in the source stays an error
        return f'<c r="{ref}" t="e"><v>{escape(str(value))}</v></c>'
    if isinstance(value, str):
        if formulas and value.startswith("="):
            return f'<c r="{ref}"><f>{escape(bind_for_calc(value[1:]))}</f></c>'
        return f'<c r="{ref}" t="inlineStr">{_text(value)}</c>' if value else ""
    if isinstance(value, (datetime.datetime, datetime.date, datetime.time)):
        return f'<c r="{ref}" t="inlineStr">{_text(value.isoformat())}</c>'
    return f'<c r="{ref}" t="inlineStr">{_text(str(value))}</c>'


def sheet_parts(z: zipfile.ZipFile) -> dict[str, str]:
    """Sheet name -> part name (e.g. ``xl/worksheets/sheet6.xml``) from the workbook part and its links."""
    import xml.etree.ElementTree as ET

    wb = ET.fromstring(z.read("xl/workbook.xml"))
    rels = ET.fromstring(z.read("xl/_rels/workbook.xml.rels"))
    target = {r.get("Id"): r.get("Target") for r in rels}
    out = {}
    for sheet in wb.iter("{http://schemas.openxmlformats.org/spreadsheetml/2006/main}sheet"):
        t = target[sheet.get(f"{{{_NS_REL}}}id")].lstrip("/")
        out[sheet.get("name")] = t if t.startswith("xl/") else "xl/" + t
    return out


def splice_rows(path: Path, rows: Mapping[str, Callable[[], Iterator[str]]], last_cell: Mapping[str, str]):
    """Insert generated ``<row>`` elements before ``</sheetData>`` of the named sheets, in place.

    ``rows`` maps a sheet name to a function giving its row elements; ``last_cell`` the
    bottom-right cell for the sheet's ``<dimension>``. The package is rewritten to a
    temporary file beside it and renamed over it when complete.
    """
    path = Path(path)
    with replacing(path) as tmp, zipfile.ZipFile(path) as src, \
            zipfile.ZipFile(tmp, "w", zipfile.ZIP_DEFLATED, compresslevel=LEVEL) as dst:
        parts = sheet_parts(src)
        wanted = {parts[name]: name for name in rows}
        for info in src.infolist():
            data = src.read(info.filename)
            sheet = info.filename.startswith("xl/worksheets/") and info.filename.endswith(".xml")
            if info.filename not in wanted:
                if sheet:  # registered calls as _xludf.NAME(, the form LibreOffice binds to the add-in
                    data = bind_sheet_xml(data.decode("utf-8")).encode("utf-8")
                dst.writestr(info, data, compress_type=zipfile.ZIP_DEFLATED, compresslevel=LEVEL)
                continue
            name = wanted[info.filename]
            xml = bind_sheet_xml(data.decode("utf-8"))
            xml = re.sub(r'<dimension ref="[^"]*"\s*/>', f'<dimension ref="A1:{last_cell[name]}"/>', xml, count=1)
            if "</sheetData>" in xml:
                head, tail = xml.split("</sheetData>", 1)
                tail = "</sheetData>" + tail
            else:  # an empty <sheetData/>
                head, tail = xml.split("<sheetData/>", 1)
                head += "<sheetData>"
                tail = "</sheetData>" + tail
            part = zipfile.ZipInfo(info.filename, date_time=info.date_time)
            part.compress_type = zipfile.ZIP_DEFLATED
            set_compress_level(part, LEVEL)
            with dst.open(part, "w", force_zip64=True) as out:
                out.write(head.encode("utf-8"))
                batch: list[str] = []
                for row in rows[name]():
                    batch.append(row)
                    if len(batch) >= 2000:
                        out.write("".join(batch).encode("utf-8"))
                        batch = []
                out.write("".join(batch).encode("utf-8"))
                out.write(tail.encode("utf-8"))
