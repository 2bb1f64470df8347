"""What the other sheet modules share: the values of a worksheet part and where its cell data lies.

A worksheet part can be a gigabyte of XML (1,048,576 rows), so nothing in
``workbook/`` builds a DOM for it: cells are found with compiled regular
expressions over the bytes of ``<sheetData>``, matched in pieces of about
:data:`CHUNK_BYTES` cut at row ends.

Cell values
    numbers are ``float``; shared and inline strings and formula string
    results ``str``; logical values ``bool``; error values the code as
    :class:`ErrorValue` (a ``str`` subclass, e.g. ``"#N/A"``); an empty
    cell (no ``<v>``) ``None``. Dates are numbers, as stored.
"""

from __future__ import annotations

import functools
import re
from typing import NamedTuple

__all__ = ["Cell", "Formula", "ErrorValue", "ERROR_CODES", "SheetXmlError", "sheet_data_span", "CHUNK_BYTES"]

#: Error values a cell can hold.
ERROR_CODES = ("#NULL!", "#DIV/0!", "#VALUE!", "#REF!", "#NAME?", "#NUM!", "#N/A", "#GETTING_DATA",
               "#SPILL!", "#CALC!", "#FIELD!", "#BLOCKED!", "#CONNECT!", "#BUSY!", "#UNKNOWN!")


class SheetXmlError(ValueError):
    """A worksheet part that cannot be read or patched as asked (names the cell)."""


class ErrorValue(str):
    """A cell's error value: the code as a ``str`` (``ErrorValue("#N/A") == "#N/A"``), told apart from text."""

    __slots__ = ()

    def __repr__(self) -> str:
        return f"ErrorValue({str(self)!r})"


class Formula(NamedTuple):
    """The ``<f>`` element of a cell.

    ``text`` is the formula without ``=`` (``None`` for a cell that shares
    the formula of a master cell, whose text is on the master);
    ``kind`` is ``"normal"``, ``"shared"``, ``"array"`` or ``"dataTable"``;
    ``shared_index`` the ``si`` of a shared formula; ``ref`` the range of a
    shared master or an array formula; ``is_master`` True for the cell that
    holds a shared formula's text; ``attrs`` the raw attribute bytes.
    """

    text: str | None
    kind: str
    shared_index: int | None
    ref: str | None
    is_master: bool
    attrs: bytes


class Cell(NamedTuple):
    """One ``<c>`` element: ``ref`` ("B7"), ``row`` (1-based), ``col`` (1-based, A = 1), ``value``,
    ``type`` (the ``t`` attribute, ``"n"`` when absent), ``style`` (``s``, 0 when absent),
    ``formula`` (:class:`Formula` or None)."""

    ref: str
    row: int
    col: int
    value: object
    type: str
    style: int
    formula: Formula | None


# ------------------------------------------------------------------ where the cell data lies

ROOT_TAG = re.compile(rb"<(?:(\w+):)?worksheet\b")


def main_prefix(xml: bytes) -> bytes:
    """The prefix (``b"x:"``, or ``b""``) the root element gives the spreadsheet namespace."""
    m = ROOT_TAG.search(xml, 0, 4096) or ROOT_TAG.search(xml)
    if m is None:
        raise SheetXmlError("not a worksheet part (no <worksheet> element)")
    return (m.group(1) + b":") if m.group(1) else b""


def sheet_data_span(xml: bytes) -> tuple[int, int, bytes]:
    """(start, end, prefix): ``xml[start:end]`` is the inside of ``<sheetData>`` (empty for ``<sheetData/>``).

    ``start`` is just after the opening tag. For ``<sheetData/>`` both are the
    offset of the self-closing tag and the caller must expand it to insert rows.
    """
    prefix = main_prefix(xml)
    open_tag = b"<" + prefix + b"sheetData"
    i = xml.find(open_tag)
    if i < 0:
        raise SheetXmlError("worksheet part has no <sheetData> element")
    j = xml.index(b">", i)
    if xml[j - 1:j] == b"/":
        return i, i, prefix
    end = xml.find(b"</" + prefix + b"sheetData>", j)
    if end < 0:
        raise SheetXmlError("worksheet part is cut short (no </sheetData>)")
    return j + 1, end, prefix


#: Size of the pieces of ``<sheetData>`` matched at once (cut at row ends): bounds the memory of a
#: gigabyte-sized sheet while keeping the per-piece overhead negligible.
CHUNK_BYTES = 4 << 20


def chunks(xml: bytes, start: int, end: int, prefix: bytes):
    """(start, end) of the pieces of ``xml[start:end]``, each about :data:`CHUNK_BYTES` and ending at a row end."""
    close = b"</" + prefix + b"row>"
    pos = start
    while pos < end:
        cut = xml.find(close, min(pos + CHUNK_BYTES, end), end) if end - pos > CHUNK_BYTES else -1
        stop = end if cut < 0 else cut + len(close)
        yield pos, stop
        pos = stop


# ------------------------------------------------------------------ patterns the readers and patchers share

_ATTRIBUTE = re.compile(rb'([A-Za-z:]+)="([^"]*)"')


def attributes(raw: bytes) -> dict[bytes, bytes]:
    """Raw attribute bytes of a tag (double-quoted, as the regular form writes them) as name → value."""
    return dict(_ATTRIBUTE.findall(raw))


@functools.lru_cache(maxsize=8)
def cell_pattern(prefix: bytes):
    """Any cell element: group 1 its attributes, group 2 its content (None when self-closing)."""
    p = re.escape(prefix)
    return re.compile(rb"<" + p + rb"c\b((?: [A-Za-z:]+=\"[^\"]*\")*?) ?(?:/>|>(.*?)</" + p + rb"c>)", re.S)


#: The ``r`` attribute of a cell, the reference in group 1.
R_ATTRIBUTE = re.compile(rb' r="([A-Z]{1,3}[0-9]+)"')
#: A cell element written without ``r`` (its position gives it).
CELL_WITHOUT_R = re.compile(rb'<c(?![^>]*\br=")[\s/>]')
#: Pieces of the pattern of a formula cell in the form spreadsheet apps and libraries write (no namespace
#: prefix, the reference first): the attributes after ``r`` as one group, the formula element as one group.
CELL_ATTRIBUTES = rb'((?: [A-Za-z]+="[^"]*")*)'
FORMULA_ELEMENT = rb"(<f>[^<]*</f>|<f [^>]*/>|<f [^>]*>[^<]*</f>)"
