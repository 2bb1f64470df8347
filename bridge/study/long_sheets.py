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


def rows_xml(rows: Iterable[list], first_row: int, *, formulas: bool,
             styles: Mapping[tuple[int, int], int] | None = None) -> Iterator[str]:
    """``<row>`` elements for ``rows`` starting at ``first_row``; with ``formulas``, text starting
    with ``=`` is a formula, otherwise all text is text. ``styles`` maps (row, 0-based column) to
    the style index a cell is written with (a date keeps its date format)."""
    letters: list[str] = []
    styled = bool(styles)  # asked once: a mapping of many cells may be costly to test (the Bands' styles)
    for r, row in enumerate(rows, start=first_row):
        while len(letters) < len(row):
            letters.append(get_column_letter(len(letters) + 1))
        digits = str(r)
        parts = [f'<row r="{digits}">']
        for c, value in enumerate(row):
            if value is None:
                continue
            ref = letters[c] + digits
            if styled and (r, c) in styles:
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
        yield "".join(parts)


def _other_cell(ref: str, value, formulas: bool) -> str:
    """The element of a cell that is neither a formula nor a plain number (empty for blank text)."""
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
