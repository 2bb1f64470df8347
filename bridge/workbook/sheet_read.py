"""Reading a worksheet part: its cells with their values and formulas, its dimension, used range and merged ranges.

=========================  ===================================================================
:func:`iter_cells`         a :class:`~.sheet_data.Cell` per ``<c>`` element, in document order
:func:`dimension`          the ``<dimension ref>`` the writing app recorded
:func:`used_range`         the extent actually occupied
:func:`merged_ranges`      the ``<mergeCell>`` ranges as boxes
=========================  ===================================================================

Cells are found with one compiled regular expression over the bytes of
``<sheetData>``, a piece at a time (:func:`~.sheet_data.chunks`). A part in an
irregular form (:mod:`.xml_form`) is read through the XML parser first.
"""

from __future__ import annotations

import functools
import gc
import itertools
import math
import re
from typing import Iterator, Sequence

from .cells import column_index, column_letters, range_box, split_ref
from .sheet_data import Cell, ErrorValue, Formula, SheetXmlError, attributes, chunks, sheet_data_span
from .xml_form import RewrittenPart, regular_form, rewrite_in_regular_form, why_irregular, why_irregular_head
from .xml_text import decode_text, unescape_xml

__all__ = ["iter_cells", "dimension", "used_range", "merged_ranges"]


@functools.lru_cache(maxsize=8)
def cell_patterns(prefix: bytes):
    """(token, content, text run, phonetic guide) patterns of the row-aware reader and of a cell's content."""
    p = re.escape(prefix)
    token = re.compile(
        # 1. the common form, r first: <c r="B7" s="3" t="s">...</c>
        rb"<" + p + rb'c r="([A-Z]{1,3})([0-9]+)"((?: [A-Za-z:]+="[^"]*")*?) ?(?:/>|>(.*?)</' + p + rb"c>)"
        # 2. a row start (needed for cells written without r, and for row numbers)
        rb"|<" + p + rb"row\b([^>]*)>"
        # 3. any other cell element
        rb"|<" + p + rb"c\b([^>]*?)(?:/>|>(.*?)</" + p + rb"c>)",
        re.S)
    content = re.compile(  # whitespace between the children is allowed (pretty-printed parts)
        rb"\s*(?:<" + p + rb"f\b([^>]*?)(?:/>|>(.*?)</" + p + rb"f>))?"
        rb"\s*(?:<" + p + rb"v(?: [^>]*)?(?:/>|>(.*?)</" + p + rb"v>))?"
        rb"\s*(?:<" + p + rb"is>(.*?)</" + p + rb"is>)?",
        re.S)
    text_run = re.compile(rb"<" + p + rb"t\b[^>]*?(?:/>|>(.*?)</" + p + rb"t>)", re.S)
    phonetic = re.compile(rb"<" + p + rb"rPh\b.*?</" + p + rb"rPh>", re.S)
    return token, content, text_run, phonetic


@functools.lru_cache(maxsize=4096)
def style_and_type(rest: bytes) -> tuple[int, str]:
    """(``s``, ``t``) of a cell's raw attributes (0 and ``"n"`` when absent)."""
    a = attributes(rest)
    return int(a.get(b"s", b"0") or 0), a.get(b"t", b"n").decode("ascii")


@functools.lru_cache(maxsize=4096)
def _formula_attrs(raw: bytes) -> tuple[str, int | None, str | None]:
    a = attributes(raw)
    kind = a.get(b"t", b"normal").decode("ascii")
    si = a.get(b"si")
    ref = a.get(b"ref")
    return kind, (int(si) if si is not None else None), (ref.decode("ascii") if ref is not None else None)


def _inline_text(body: bytes, text_run, phonetic) -> str:
    if b"rPh" in body:
        body = phonetic.sub(b"", body)
    return "".join(unescape_xml(m.group(1) or b"") for m in text_run.finditer(body))


@functools.lru_cache(maxsize=8)
def _bulk_pattern(prefix: bytes):
    p = re.escape(prefix)
    return re.compile(
        # 1-5: the common form, r first and no "/" in the attributes: <c r="B7" s="3" t="s"><v>..</v></c>
        rb"<" + p + rb'c r="([A-Z]{1,3})([0-9]+)"([^>/]*)(?:/>|>(?:<' + p + rb"v>([^<]*)</" + p + rb"v>|(.*?))</"
        + p + rb"c>)"
        # 6-7: any other cell element
        rb"|<" + p + rb"c\b([^>]*?)(?:/>|>(.*?)</" + p + rb"c>)",
        re.S)


# The hot loop of every read of a sheet: its locals are bound once and the commonest cells are built
# inline, so splitting it would add a call per cell.
def iter_cells(xml: bytes, shared_strings: Sequence[str] = ()) -> Iterator[Cell]:
    """Every cell element of a worksheet part, in document order (row by row, left to right).

    Parameters
    ----------
    xml : bytes
        The worksheet part.
    shared_strings : sequence of str
        The workbook's shared-string table (``WorkbookPackage.shared_strings``).

    Yields
    ------
    Cell
        Including empty styled cells (value None) and formula cells.

    Raises
    ------
    SheetXmlError
        A shared-string index out of the table, or a malformed number; the
        message names the cell.

    Notes
    -----
    The sheet is matched in pieces of about :data:`~.sheet_data.CHUNK_BYTES` with one
    ``findall`` each, so the Python work per cell is a handful of operations.
    A sheet whose cells are written without ``r`` attributes (allowed, rare)
    is read by a slower row-aware path. A part in an irregular form
    (:func:`~.xml_form.why_irregular`) is read through the XML parser
    (:func:`~.xml_form.rewrite_in_regular_form`).
    """
    if type(xml) is not RewrittenPart and why_irregular(xml) is not None:
        xml = rewrite_in_regular_form(xml)
    start, end, prefix = sheet_data_span(xml)
    if start == end:
        return
    pattern = _bulk_pattern(prefix)
    content_re, text_run, phonetic = cell_patterns(prefix)[1:]
    strings = shared_strings
    style_type = style_and_type
    col_of = column_index
    new = tuple.__new__  # skips the namedtuple's Python-level __new__
    done = -1  # cells yielded before the current one
    for cs, ce in chunks(xml, start, end, prefix):
        gc_was = gc.isenabled()
        gc.disable()  # millions of short tuples: collection passes would cost more than the matching
        try:
            found = pattern.findall(xml, cs, ce)
        finally:
            if gc_was:
                gc.enable()
        for letters, rownum, rest, raw, body, other_attrs, other_body in found:
            done += 1
            if letters:
                if not body and not rest:  # the commonest cell: a plain number (or empty)
                    try:
                        yield new(Cell, ((letters + rownum).decode("ascii"), int(rownum), col_of(letters),
                                         float(raw) if raw else None, "n", 0, None))
                    except ValueError:
                        raise SheetXmlError(f"cell {(letters + rownum).decode('ascii')} holds {raw[:40]!r}, "
                                            f"which is not a number") from None
                    continue
                row = int(rownum)
                ref = (letters + rownum).decode("ascii")
                style, typ = style_type(rest) if rest else (0, "n")
                if not body:
                    yield new(Cell, (ref, row, col_of(letters), plain_value(raw, typ, ref, strings) if raw else None,
                                     typ, style, None))
                    continue
                col = col_of(letters)
            else:
                a = attributes(other_attrs)
                r = a.get(b"r")
                if not r:  # positions must be counted from the rows: go on with the row-aware reader
                    yield from itertools.islice(iter_cells_rowwise(xml, shared_strings), done, None)
                    return
                ref = r.decode("ascii")
                row, col = split_ref(ref)
                style = int(a.get(b"s", b"0") or 0)
                typ = a.get(b"t", b"n").decode("ascii")
                body = other_body
                if not body:
                    yield Cell(ref, row, col, None, typ, style, None)
                    continue
            value, formula = cell_content(body, typ, ref, strings, content_re, text_run, phonetic)
            yield Cell(ref, row, col, value, typ, style, formula)


def plain_value(raw: bytes, typ: str, ref: str, strings: Sequence[str]):
    """The value of a ``<v>`` under cell type ``typ``."""
    if typ == "n":
        try:
            return float(raw)
        except ValueError:
            raise SheetXmlError(f"cell {ref} holds {raw[:40]!r}, which is not a number") from None
    if typ == "s":
        try:
            return strings[int(raw)]
        except (IndexError, ValueError):
            raise SheetXmlError(f"cell {ref} points at shared string {raw[:20]!r}, which the "
                                f"workbook does not have") from None
    if typ == "b":
        return raw.strip() in (b"1", b"true")
    if typ == "e":
        return ErrorValue(raw.decode("ascii", "replace"))
    return decode_text(raw)  # "str" (a formula's text result), "d" (ISO date text), anything else: as text


_new_tuple = tuple.__new__


def cell_content(body: bytes, typ: str, ref: str, strings, content_re, text_run, phonetic):
    """(value, Formula or None) of a cell's content."""
    if body[:3] == b"<f>":  # the common ordinary formula, <f>text</f><v>value</v>, without the regex
        i = body.find(b"</f>")
        tail = body[i + 4:]
        if i > 3 and (not tail or (tail[:3] == b"<v>" and tail[-4:] == b"</v>" and b"<" not in tail[3:-4])):
            ftext = body[3:i]
            plain = b"&" not in ftext and b"_x" not in ftext and b"\r" not in ftext
            formula = _new_tuple(Formula, (ftext.decode("utf-8") if plain else unescape_xml(ftext),
                                           "normal", None, None, False, b""))
            raw = tail[3:-4]
            return (plain_value(raw, typ, ref, strings) if raw else None), formula
    cm = content_re.match(body)
    fattrs, ftext, raw, inline = cm.group(1, 2, 3, 4)
    formula = None
    if cm.start(1) >= 0:
        kind, si, fref = _formula_attrs(fattrs) if fattrs else ("normal", None, None)
        text = decode_text(ftext) if ftext else None
        if text is None and kind != "shared":
            text = ""
        formula = Formula(text, kind, si, fref, kind == "shared" and fref is not None and text is not None, fattrs)
    if inline is not None:
        return _inline_text(inline, text_run, phonetic), formula
    if raw:
        return plain_value(raw, typ, ref, strings), formula
    return None, formula


def iter_cells_rowwise(xml: bytes, shared_strings: Sequence[str]) -> Iterator[Cell]:
    """The slow path of :func:`iter_cells`, tracking rows for cells written without ``r``."""
    xml = regular_form(xml)
    start, end, prefix = sheet_data_span(xml)
    token, content_re, text_run, phonetic = cell_patterns(prefix)
    row = 0
    col = 0
    for m in token.finditer(xml, start, end):
        if m.group(5) is not None:  # a row start
            r = attributes(m.group(5)).get(b"r")
            row = int(r) if r else row + 1
            col = 0
            continue
        if m.group(1) is not None:
            row = int(m.group(2))
            col = column_index(m.group(1))
            ref = (m.group(1) + m.group(2)).decode("ascii")
            style, typ = style_and_type(m.group(3)) if m.group(3) else (0, "n")
            body = m.group(4)
        else:
            a = attributes(m.group(6) or b"")
            r = a.get(b"r")
            if r:
                row, col = split_ref(r.decode("ascii"))
            else:
                col += 1
            ref = column_letters(col) + str(row)
            style = int(a.get(b"s", b"0") or 0)
            typ = a.get(b"t", b"n").decode("ascii")
            body = m.group(7)
        if not body:
            yield Cell(ref, row, col, None, typ, style, None)
            continue
        value, formula = cell_content(body, typ, ref, shared_strings, content_re, text_run, phonetic)
        yield Cell(ref, row, col, value, typ, style, formula)


DIMENSION = re.compile(rb'<(?:\w+:)?dimension\b[^>]*?\bref="([^"]*)"')


def dimension(xml: bytes) -> str | None:
    """The ``<dimension ref>`` the writing app recorded (e.g. ``"A1:K401"``), or None."""
    start = sheet_data_span(xml)[0]
    if type(xml) is not RewrittenPart and why_irregular_head(xml, start) is not None:
        xml = rewrite_in_regular_form(xml)
        start = sheet_data_span(xml)[0]
    m = DIMENSION.search(xml, 0, start)
    return m.group(1).decode("ascii") if m else None


def used_range(xml: bytes, shared_strings: Sequence[str] = ()) -> tuple[int, int, int, int] | None:
    """(first row, first column, last row, last column) of the cells that hold a value or formula.

    Read from the cells themselves (the recorded ``<dimension>`` may be
    stale or absent); None for an empty sheet.
    """
    r0 = c0 = math.inf
    r1 = c1 = 0
    for cell in iter_cells(xml, shared_strings):
        if cell.value is None and cell.formula is None:
            continue
        r0 = min(r0, cell.row)
        r1 = max(r1, cell.row)
        c0 = min(c0, cell.col)
        c1 = max(c1, cell.col)
    return None if r1 == 0 else (int(r0), int(c0), r1, c1)


_MERGE_CELL = re.compile(rb'<(?:[\w.-]+:)?mergeCell\b[^>]*?\bref="([^"]*)"')


def merged_ranges(xml: bytes) -> list[tuple[int, int, int, int]]:
    """(first row, first column, last row, last column) of each merged range (``<mergeCell ref>``)."""
    out = []
    for m in _MERGE_CELL.finditer(regular_form(xml)):
        try:
            out.append(range_box(m.group(1).decode("ascii")))
        except ValueError:
            continue
    return out
