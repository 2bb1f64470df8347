"""Adding and removing cells and rows of a worksheet part, and its ``<dimension>``.

=========================  ===================================================================
:class:`NewCell`           a cell to add: a value and/or a formula, and a style
:func:`add_cells`          new cells into existing or new rows, in order; widens ``<dimension>``
:func:`remove_cells`       the inverse of :func:`add_cells`
:func:`set_dimension`      sets (or adds) ``<dimension ref>``
:func:`patch_or_add_values` :func:`~.sheet_patch.patch_values`, with cells the sheet lacks written in
=========================  ===================================================================

New values for cells that exist are written with :mod:`.sheet_patch`.
"""

from __future__ import annotations

import dataclasses
import functools
import re
from typing import Mapping

from .cells import column_letters, split_ref
from .sheet_data import R_ATTRIBUTE, ROOT_TAG, SheetXmlError, attributes, cell_pattern, main_prefix, sheet_data_span
from .sheet_patch import patch_values, value_xml
from .sheet_read import DIMENSION, dimension
from .xml_form import RewrittenPart, edit_keeping_bytes, regular_form, rewrite_in_regular_form
from .xml_text import escape_text

__all__ = ["NewCell", "add_cells", "remove_cells", "set_dimension", "patch_or_add_values"]


@dataclasses.dataclass(frozen=True)
class NewCell:
    """A cell to add (:func:`add_cells`): a value and/or a formula (text without ``=``), and a style index."""

    value: object = None
    formula: str | None = None
    style: int = 0


@functools.lru_cache(maxsize=8)
def _row_pattern(prefix: bytes):
    p = re.escape(prefix)
    return re.compile(rb"<" + p + rb"row\b([^>]*?)(/?)>", re.S)


def _new_cell_xml(ref: str, cell: NewCell, prefix: bytes) -> bytes:
    attrs = b' r="' + ref.encode("ascii") + b'"'
    if cell.style:
        attrs += b' s="' + str(int(cell.style)).encode("ascii") + b'"'
    f_xml = b""
    if cell.formula is not None:
        text = cell.formula[1:] if cell.formula.startswith("=") else cell.formula
        f_xml = b"<" + prefix + b"f>" + escape_text(text) + b"</" + prefix + b"f>"
    t, v_xml = value_xml(cell.value, bool(f_xml), prefix, ref)
    if t is not None:
        attrs += b' t="' + t + b'"'
    inner = f_xml + v_xml
    if not inner:
        return b"<" + prefix + b"c" + attrs + b"/>"
    return b"<" + prefix + b"c" + attrs + b">" + inner + b"</" + prefix + b"c>"


def add_cells(xml: bytes, cells: Mapping[str, NewCell], *, replace: bool = False) -> bytes:
    """Insert new cells in column order into their rows (new rows in row order); widen ``<dimension>``.

    Parameters
    ----------
    xml : bytes
        The worksheet part.
    cells : mapping of str to NewCell
        Cell reference → the new cell.
    replace : bool, optional
        A listed cell that already exists: False (default) raises
        :class:`~.sheet_data.SheetXmlError` if it holds a value or formula (an empty styled
        cell is always replaced, keeping its style when the new cell has none);
        True replaces it.

    Notes
    -----
    Rows with a ``spans`` attribute keep it; it is an optional hint that
    spreadsheet apps recompute, so a new cell outside it is valid. Rows
    written without ``r`` are numbered first by the parser path
    (:func:`~.xml_form.rewrite_in_regular_form`), which writes every row's number.
    """
    if not cells:
        return xml
    xml = regular_form(xml)
    start, end, prefix = sheet_data_span(xml)
    if start == end:  # <sheetData/>: open it up
        tag_end = xml.index(b">", start) + 1
        xml = xml[:start] + b"<" + prefix + b"sheetData></" + prefix + b"sheetData>" + xml[tag_end:]
        start, end, prefix = sheet_data_span(xml)
    by_row: dict[int, list[tuple[int, str, NewCell]]] = {}
    for ref, cell in cells.items():
        r, c = split_ref(ref)
        by_row.setdefault(r, []).append((c, f"{column_letters(c)}{r}", cell))
    row_re = _row_pattern(prefix)
    cell_re = cell_pattern(prefix)
    close_row = b"</" + prefix + b"row>"
    pieces: list[bytes] = []
    pos = start
    todo = sorted(by_row)
    ti = 0
    for m in row_re.finditer(xml, start, end):
        ra = attributes(m.group(1))
        if b"r" not in ra:
            if type(xml) is not RewrittenPart:  # the parser's form numbers every row and cell
                return add_cells(rewrite_in_regular_form(xml), cells, replace=replace)
            raise SheetXmlError("the sheet has rows written without row numbers; cells cannot be added")
        rnum = int(ra[b"r"])
        # new rows that come before this one
        while ti < len(todo) and todo[ti] < rnum:
            pieces.append(xml[pos:m.start()])
            pos = m.start()
            pieces.append(_new_row_xml(todo[ti], by_row[todo[ti]], prefix))
            ti += 1
        if ti < len(todo) and todo[ti] == rnum:
            new = sorted(by_row[rnum], key=lambda t: t[0])
            if m.group(2) == b"/":  # <row .../>: becomes a row with the new cells
                pieces.append(xml[pos:m.start()])
                pieces.append(b"<" + prefix + b"row" + m.group(1) + b">"
                              + b"".join(_new_cell_xml(ref, c, prefix) for _, ref, c in new) + close_row)
                pos = m.end()
            else:
                row_end = xml.index(close_row, m.end())
                body = xml[m.end():row_end]
                pieces.append(xml[pos:m.end()])
                pieces.append(_merge_row(body, new, prefix, cell_re, replace))
                pos = row_end
            ti += 1
        if ti >= len(todo):
            break
    pieces.append(xml[pos:end])
    while ti < len(todo):
        pieces.append(_new_row_xml(todo[ti], by_row[todo[ti]], prefix))
        ti += 1
    out = xml[:start] + b"".join(pieces) + xml[end:]
    return _widen_dimension(out, cells.keys())


def patch_or_add_values(xml: bytes, values, *, consume: bool = False, pieces: bool = False):
    """:func:`~.sheet_patch.patch_values`, with the listed cells that the sheet does not have added
    (:func:`add_cells`: in row and column order, every other byte kept).

    What a recalculation writes: the other cells of an array formula's range
    hold values, and some writers (openpyxl's ``ArrayFormula``) leave them out
    of the part; spreadsheet apps write them as plain value cells.
    """
    absent: dict = {}
    out = patch_values(xml, values, consume=consume, pieces=pieces, absent=absent)
    if not absent:
        return out
    new = add_cells(b"".join(out) if pieces else out, {ref: NewCell(value=v) for ref, v in absent.items()})
    return [new] if pieces else new


def remove_cells(xml: bytes, refs, *, empty_rows=()) -> bytes:
    """Take the listed cells out of the part (the inverse of :func:`add_cells`); cells not there are ignored.

    ``empty_rows`` lists row numbers whose ``<row>`` element is taken out too
    when no cell is left in it (rows that :func:`add_cells` made). A part in an irregular form keeps
    every other byte (:func:`~.xml_form.edit_keeping_bytes`) unless a row goes too.
    """
    if not empty_rows:
        return edit_keeping_bytes(xml, lambda regular: _remove_cells(regular, refs))
    return _remove_cells(regular_form(xml), refs, empty_rows=empty_rows)


def _remove_cells(xml: bytes, refs, *, empty_rows=()) -> bytes:
    start, end, prefix = sheet_data_span(xml)
    want = {ref.encode("ascii") for ref in refs}
    spans = []
    for m in cell_pattern(prefix).finditer(xml, start, end):
        rm = R_ATTRIBUTE.search(m.group(1))
        if rm is not None and rm.group(1) in want:
            spans.append((m.start(), m.end()))
    for a, b in reversed(spans):
        xml = xml[:a] + xml[b:]
    if empty_rows:
        start, end, prefix = sheet_data_span(xml)
        drop = {str(r).encode("ascii") for r in empty_rows}
        close = b"</" + prefix + b"row>"
        spans = []
        for m in _row_pattern(prefix).finditer(xml, start, end):
            if attributes(m.group(1)).get(b"r") not in drop:
                continue
            if m.group(2) == b"/":
                spans.append((m.start(), m.end()))
            elif xml.startswith(close, m.end()):
                spans.append((m.start(), m.end() + len(close)))
        for a, b in reversed(spans):
            xml = xml[:a] + xml[b:]
    return xml


def _new_row_xml(rnum: int, new: list, prefix: bytes) -> bytes:
    new = sorted(new, key=lambda t: t[0])
    return (b"<" + prefix + b'row r="' + str(rnum).encode("ascii") + b'">'
            + b"".join(_new_cell_xml(ref, c, prefix) for _, ref, c in new) + b"</" + prefix + b"row>")


def _merge_row(body: bytes, new: list, prefix: bytes, cell_re, replace: bool) -> bytes:
    """A row's content with the new cells (column, reference, NewCell; in column order) put in their places."""
    out: list[bytes] = []
    pos = 0
    ni = 0
    c = 0
    for m in cell_re.finditer(body):
        rm = R_ATTRIBUTE.search(m.group(1))
        # a cell written without r is the one after its left neighbour
        c = split_ref(rm.group(1).decode("ascii"))[1] if rm is not None else c + 1
        while ni < len(new) and new[ni][0] < c:
            out.append(body[pos:m.start()])
            pos = m.start()
            out.append(_new_cell_xml(new[ni][1], new[ni][2], prefix))
            ni += 1
        if ni < len(new) and new[ni][0] == c:
            ref, cell = new[ni][1], new[ni][2]
            inner = m.group(2)
            if inner and not replace:
                raise SheetXmlError(f"cell {ref} is not empty; refusing to overwrite it")
            if not cell.style:
                old_style = attributes(m.group(1)).get(b"s")
                if old_style:
                    cell = dataclasses.replace(cell, style=int(old_style))
            out.append(body[pos:m.start()])
            out.append(_new_cell_xml(ref, cell, prefix))
            pos = m.end()
            ni += 1
    out.append(body[pos:])
    while ni < len(new):
        out.append(_new_cell_xml(new[ni][1], new[ni][2], prefix))
        ni += 1
    return b"".join(out)


def set_dimension(xml: bytes, ref: str) -> bytes:
    """Set ``<dimension ref>`` (adding the element after ``<sheetPr>`` if the part has none)."""
    m = DIMENSION.search(xml)
    if m:
        return xml[:m.start(1)] + ref.encode("ascii") + xml[m.end(1):]
    prefix = main_prefix(xml)
    el = b"<" + prefix + b'dimension ref="' + ref.encode("ascii") + b'"/>'
    # dimension follows sheetPr if present, else opens the worksheet
    sp = re.search(rb"<" + re.escape(prefix) + rb"sheetPr\b[^>]*?(?:/>|>.*?</" + re.escape(prefix) + rb"sheetPr>)",
                   xml, re.S)
    if sp:
        return xml[:sp.end()] + el + xml[sp.end():]
    root = ROOT_TAG.search(xml)
    i = xml.index(b">", root.end()) + 1
    return xml[:i] + el + xml[i:]


def _widen_dimension(xml: bytes, refs) -> bytes:
    cur = dimension(xml)
    rows, cols = [], []
    if cur:
        for part in cur.split(":"):
            try:
                r, c = split_ref(part)
            except ValueError:
                continue
            rows.append(r)
            cols.append(c)
    for ref in refs:
        r, c = split_ref(ref)
        rows.append(r)
        cols.append(c)
    new = f"{column_letters(min(cols))}{min(rows)}:{column_letters(max(cols))}{max(rows)}"
    if new == cur:
        return xml
    return set_dimension(xml, new)
