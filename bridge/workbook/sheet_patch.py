"""New values (and formulas, styles) for cells a worksheet part already has; every other byte stays as it was.

=========================  ======================================================================
:class:`CellUpdate`        what to write into one existing cell
:func:`patch_values`       new cached values beside kept formulas (what a recalculation writes)
:func:`patch_sheet`        any :class:`CellUpdate`: drop or replace a formula, restyle, a value
=========================  ======================================================================

A patch splices new cell elements between the untouched bytes, so nothing
not named in it changes. Cells are added with :mod:`.sheet_edit`.
"""

from __future__ import annotations

import dataclasses
import functools
import itertools
import math
import re
from typing import Mapping

from .cells import split_ref
from .sheet_data import (CELL_ATTRIBUTES, CELL_WITHOUT_R, FORMULA_ELEMENT, R_ATTRIBUTE, ErrorValue, SheetXmlError,
                         cell_pattern, chunks, sheet_data_span)
from .xml_form import (RewrittenPart, edit_keeping_bytes, locate_cell_data, why_irregular,
                       why_irregular_around_cells)
from .xml_text import escape_text

__all__ = ["CellUpdate", "patch_values", "patch_sheet"]


@dataclasses.dataclass(frozen=True)
class CellUpdate:
    """What to write into one existing cell.

    Parameters
    ----------
    value : float, int, bool, str, ErrorValue or None
        The new cached value (``None``: no value). Its Python type decides
        the ``t`` attribute: number ``n`` (no attribute), ``bool`` ``b``,
        :class:`ErrorValue` ``e``, ``str`` ``str`` beside a formula or an
        inline string without one. A non-finite float is refused.
    drop_formula : bool
        Remove the cell's ``<f>`` (``--values``); the value stays.
    formula : str, optional
        Replace the formula with this one (text without ``=``), as a normal formula.
    formula_xml : bytes, optional
        Replace the formula with this raw ``<f ...>...</f>`` element (restoring
        a shared or array formula exactly as it was).
    style : int, optional
        New style index; default keeps the cell's.
    """

    value: object = None
    drop_formula: bool = False
    formula: str | None = None
    formula_xml: bytes | None = None
    style: int | None = None

    @staticmethod
    def error(code: str) -> "CellUpdate":
        return CellUpdate(ErrorValue(code))


def value_xml(value, has_formula: bool, prefix: bytes, ref: str) -> tuple[bytes | None, bytes]:
    """(t attribute value or None, inner XML for the value) of a cached value."""
    if type(value) is float and value - value == 0.0:  # the common case: a finite float
        text = repr(int(value)) if value.is_integer() and abs(value) < 1e16 else repr(value)
        return None, b"<" + prefix + b"v>" + text.encode("ascii") + b"</" + prefix + b"v>"
    if value is None:
        return None, b""
    if isinstance(value, bool):
        return b"b", b"<" + prefix + b"v>" + (b"1" if value else b"0") + b"</" + prefix + b"v>"
    if isinstance(value, ErrorValue):
        return b"e", b"<" + prefix + b"v>" + escape_text(str(value)) + b"</" + prefix + b"v>"
    if isinstance(value, str):
        if has_formula:
            return b"str", b"<" + prefix + b"v>" + escape_text(value) + b"</" + prefix + b"v>"
        space = b' xml:space="preserve"' if value != value.strip() else b""
        return b"inlineStr", (b"<" + prefix + b"is><" + prefix + b"t" + space + b">" + escape_text(value)
                              + b"</" + prefix + b"t></" + prefix + b"is>")
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise SheetXmlError(f"cell {ref}: cannot store a {type(value).__name__} as a cell value") from None
    if not math.isfinite(x):
        raise SheetXmlError(f"cell {ref}: {x} is not a finite number; store an error value instead")
    # repr gives the shortest text that reads back as the same double; integers without ".0".
    text = repr(int(x)) if x.is_integer() and abs(x) < 1e16 else repr(x)
    return None, b"<" + prefix + b"v>" + text.encode("ascii") + b"</" + prefix + b"v>"


def _f_pattern(prefix: bytes):
    p = re.escape(prefix)
    return re.compile(rb"<" + p + rb"f\b[^>]*?(?:/>|>.*?</" + p + rb"f>)", re.S)


@functools.lru_cache(maxsize=16)
def _attr_pattern(name: bytes):
    return re.compile(rb" " + name + rb'="[^"]*"')


def _set_attr(attrs: bytes, name: bytes, value: bytes | None) -> bytes:
    """Set or remove one attribute in raw attribute bytes, keeping the others and their order."""
    if name + b'="' not in attrs:
        return attrs if value is None else attrs + b" " + name + b'="' + value + b'"'
    pat = _attr_pattern(name)
    if value is None:
        return pat.sub(b"", attrs, count=1)
    return pat.sub((b" " + name + b'="' + value + b'"').replace(b"\\", b"\\\\"), attrs, count=1)


def _cell_xml(ref: str, attrs: bytes, body: bytes | None, update: CellUpdate, prefix: bytes, f_re) -> bytes:
    """New bytes of one cell element under ``update``; ``attrs`` are the raw attributes (with r)."""
    f_xml = None
    if body:
        if body[:3] == b"<f>" or body[:3] == b"<f ":
            # <f …/> (a shared dependent) or <f …>…</f>
            k = body.find(b">")
            if body[k - 1:k] == b"/":
                f_xml = body[:k + 1]
            else:
                i = body.find(b"</f>")
                f_xml = body[:i + 4] if i >= 0 else None
        elif b"<" + prefix + b"f" in body:
            fm = f_re.search(body)
            f_xml = fm.group(0) if fm else None
    if update.formula_xml is not None:
        f_xml = update.formula_xml
    elif update.formula is not None:
        f_xml = b"<" + prefix + b"f>" + escape_text(update.formula) + b"</" + prefix + b"f>"
    if update.drop_formula:
        f_xml = None
    # text in the other cells of an array formula's range is written t="str" (no formula), as apps do: kept so
    text_result = f_xml is not None or (not update.drop_formula and b't="str"' in attrs)
    t, v_xml = value_xml(update.value, text_result, prefix, ref)
    if t is not None or b't="' in attrs:
        attrs = _set_attr(attrs, b"t", t)
    if update.style is not None:
        attrs = _set_attr(attrs, b"s", str(update.style).encode("ascii") if update.style else None)
    # extLst and other children after <v>/<is> are kept; the old value elements go.
    tail = b""
    if body and b"extLst" in body:
        ext = body.find(b"<" + prefix + b"extLst")
        if ext >= 0:
            tail = body[ext:]
    inner = (f_xml or b"") + v_xml + tail
    if not inner:
        return b"<" + prefix + b"c" + attrs + b"/>"
    return b"<" + prefix + b"c" + attrs + b">" + inner + b"</" + prefix + b"c>"


@functools.lru_cache(maxsize=8)
def _formula_cell_pattern(prefix: bytes):
    # only the cells whose first child is <f>: the regex engine skips the others without a Python step
    p = re.escape(prefix)
    return re.compile(rb"<" + p + rb'c( r="([A-Z]{1,3}[0-9]+)"[^>/]*)><' + p + rb"f\b")


#: A formula cell in the regular form (no namespace prefix, the reference first, the formula and an optional
#: value and nothing else): reference, attributes, formula element, value element. Every byte of a match is
#: in a group or literal, so a match is rebuilt exactly.
_VALUE_CELL = re.compile(rb'<c r="([A-Z]{1,3}[0-9]+)"' + CELL_ATTRIBUTES + rb">" + FORMULA_ELEMENT
                         + rb"(<v>[^<]*</v>)?</c>")
_MISSING = object()
_repeat = itertools.repeat


def _number_v(x) -> bytes | None:
    """``<v>…</v></c>`` for a finite float (the shortest text that reads back as the same double,
    integers without ".0", as :func:`value_xml` writes them); None for any other value."""
    if type(x) is float and x - x == 0.0:
        return b"<v>%d</v></c>" % x if x.is_integer() and -1e16 < x < 1e16 else b"<v>%r</v></c>" % x
    return None


def _patch_values_chunk(chunk: bytes, values: dict) -> bytes:
    """One piece of ``<sheetData>`` with new cached values for the listed formula cells (popped from ``values``).

    The piece is split by :data:`_VALUE_CELL`; each matched cell is written
    back as eight pieces (``<c r="``, reference, ``"``, attributes, ``>``,
    formula, value and ``</c>``), set with list slices, so the common case
    (a number beside a formula, no type attribute) costs one formatting per cell.
    """
    parts = _VALUE_CELL.split(chunk)
    m = (len(parts) - 1) // 5
    if not m:
        return chunk
    refs, attrs_l, olds = parts[1::5], parts[2::5], parts[4::5]
    new = list(map(values.pop, refs, _repeat(_MISSING)))
    tails = list(map(_number_v, new))
    out: list = [b""] * (8 * m + 1)
    out[0::8] = parts[0::5]
    out[1::8] = [b'<c r="'] * m
    out[2::8] = refs
    out[3::8] = [b'"'] * m
    out[4::8] = attrs_l
    out[5::8] = [b">"] * m
    out[6::8] = parts[3::5]
    out[7::8] = tails
    done: dict[tuple, tuple[bytes, bytes]] = {}  # (type, value, attributes) → (attributes, tail): labels repeat
    for k in [k for k, t in enumerate(tails) if t is None] + \
            [k for k, (t, a) in enumerate(zip(tails, attrs_l)) if t is not None and a and b't="' in a]:
        x = new[k]
        if x is _MISSING:
            out[8 * k + 7] = (olds[k] or b"") + b"</c>"
            continue
        attrs = attrs_l[k]
        key = (type(x), x, attrs)
        got = done.get(key)
        if got is None:
            t, v_xml = value_xml(x, True, b"", refs[k].decode("ascii"))
            got = done[key] = (_set_attr(attrs, b"t", t) if t is not None or b't="' in attrs else attrs,
                               v_xml + b"</c>")
        out[8 * k + 4], out[8 * k + 7] = got
    return b"".join(out)


def patch_values(xml: bytes, values: Mapping, *, consume: bool = False, pieces: bool = False,
                 absent: dict | None = None):
    """Write new cached values beside the kept formulas of the listed formula cells (what a recalculation does).

    Parameters
    ----------
    xml : bytes
        The worksheet part.
    values : mapping of str or bytes to value
        Cell reference (``"B7"`` or ``b"B7"``) → the new value, typed as for :class:`CellUpdate`.
    consume : bool, optional
        Allowed to empty ``values`` (a dict with bytes keys) as it goes, instead of working on a copy:
        saves a copy of a mapping of millions of cells.
    pieces : bool, optional
        Return the new part as a list of byte strings to be joined (or written one after the
        other) instead of one joined copy.
    absent : dict, optional
        Receives the listed cells that the sheet does not have (reference → value) instead of
        their being refused (:func:`~.sheet_edit.patch_or_add_values` writes them in).

    Returns
    -------
    bytes or list of bytes
        The same as ``patch_sheet(xml, {ref: CellUpdate(value)})``: only the
        listed cells change, and only in their value and ``t`` attribute.

    Notes
    -----
    Formula cells in the regular form are rewritten a piece of the sheet at a
    time by one split of a regular expression (:func:`_patch_values_chunk`);
    cells in any other form (a namespace prefix, children after the value, a
    listed cell without a formula) go through :func:`patch_sheet`'s general
    path afterwards.
    """
    if not values:
        return [xml] if pieces else xml
    found, (start, end, prefix) = locate_cell_data(xml)
    if type(found) is RewrittenPart and found is not xml or (
            type(xml) is not RewrittenPart and _irregular_for_value_patch(xml, start, end)):
        # through the parser: the cells patched are spliced back into the part, every other byte kept
        new = edit_keeping_bytes(xml, lambda regular: patch_values(regular, values, absent=absent), force=True)
        return [new] if pieces else new
    if type(next(iter(values))) is bytes:
        keyed = values if consume and isinstance(values, dict) else dict(values)
    else:
        keyed = dict(zip(map(str.encode, values), values.values()))
    out: list[bytes] = [xml]
    if not prefix and start < end:
        out = [xml[:start]]
        for cs, ce in chunks(xml, start, end, prefix):
            out.append(_patch_values_chunk(xml[cs:ce], keyed))
        out.append(xml[end:])
    if keyed:
        out = [_patch_cells(b"".join(out), {ref.decode("ascii"): CellUpdate(v) for ref, v in keyed.items()},
                            absent)]
        keyed.clear()
    return out if pieces else b"".join(out)


def _irregular_for_value_patch(xml: bytes, start: int, end: int) -> bool:
    """The scan :func:`patch_values` needs before its fast pass: the irregular forms that could make a cell in
    the regular form mean something else (inside a comment or CDATA section, another namespace, character
    references). A cell that is itself in an irregular form is not taken by the fast pass and goes
    through :func:`_patch_cells`, which scans the whole part."""
    if why_irregular_around_cells(xml, start, end) is not None:
        return True
    return ((xml.find(b"!", start, end) >= 0 and xml.find(b"<!", start, end) >= 0)
            or (xml.find(b"?", start, end) >= 0 and xml.find(b"<?", start, end) >= 0))


def patch_sheet(xml: bytes, updates: Mapping[str, CellUpdate]) -> bytes:
    """Rewrite the listed existing cells; every other byte of the part stays as it was.

    Parameters
    ----------
    xml : bytes
        The worksheet part.
    updates : mapping of str to CellUpdate
        Cell reference (``"B7"``, upper case, no ``$``) → what to write.

    Returns
    -------
    bytes

    Raises
    ------
    SheetXmlError
        A listed cell that is not in the sheet (use :func:`~.sheet_edit.add_cells`), or a
        shared-formula master dropped while cells sharing its formula keep it.

    Notes
    -----
    Formula cells (what a recalculation patches) are found by a pattern that
    only stops at cells holding a formula; any other listed cell by a second
    pass over all cells, made only when needed. A cell written without an
    ``r`` attribute is addressed by its position (the parser path numbers
    it). A value written beside a kept formula gets the ``t`` its type needs
    (``n`` implied, ``b``, ``str``, ``e``); a value without a formula that is
    text is written as an inline string, so the shared-string part is not touched.
    """
    if not updates:
        return xml
    simple = {ref: u.value for ref, u in updates.items()
              if u.formula is None and u.formula_xml is None and u.style is None and not u.drop_formula}
    if len(simple) == len(updates):
        return patch_values(xml, simple)
    if simple:
        xml = patch_values(xml, simple)
        updates = {ref: u for ref, u in updates.items() if ref not in simple}
    return _patch_cells(xml, updates)


def _patch_cells(xml: bytes, updates: Mapping[str, CellUpdate], absent: dict | None = None) -> bytes:
    """The general path of :func:`patch_sheet`: any update, any form of cell (``absent`` as for
    :func:`patch_values`). A part in an irregular form is patched through the parser, the patched cells
    spliced back into it (:func:`~.xml_form.edit_keeping_bytes`)."""
    if type(xml) is not RewrittenPart and why_irregular(xml) is not None:
        return edit_keeping_bytes(xml, lambda regular: _patch_cells(regular, updates, absent), force=True)
    start, end, prefix = sheet_data_span(xml)
    f_re = _f_pattern(prefix)
    close = b"</" + prefix + b"c>"
    by_bytes = {ref.encode("ascii"): ref for ref in updates}
    get = by_bytes.pop
    spans: list[tuple[int, int, bytes]] = []
    dropped_masters: dict[int, str] = {}
    for m in _formula_cell_pattern(prefix).finditer(xml, start, end):
        ref = get(m.group(2), None)
        if ref is None:
            continue
        body_start = m.end() - len(prefix) - 2  # at "<f"
        stop = xml.find(close, body_start)
        body = xml[body_start:stop]
        update = updates[ref]
        value = update.value
        if (type(value) is float and value - value == 0.0 and not prefix and update.formula is None
                and update.formula_xml is None and update.style is None and not update.drop_formula
                and b't="' not in m.group(1) and b"extLst" not in body):
            # the commonest patch, a new number beside a kept formula: only the bytes after </f> change
            k = body.find(b">")
            f_end = k + 1 if body[k - 1:k] == b"/" else body.find(b"</f>") + 4
            if f_end > 3:
                text = repr(int(value)) if value.is_integer() and abs(value) < 1e16 else repr(value)
                spans.append((body_start + f_end, stop + len(close), b"<v>" + text.encode("ascii") + b"</v></c>"))
                if not by_bytes:
                    break
                continue
        if update.drop_formula and b"si=" in body[:200]:
            _note_dropped_master(body, ref, dropped_masters)
        spans.append((m.start(), stop + len(close), _cell_xml(ref, m.group(1), body, update, prefix, f_re)))
        if not by_bytes:
            break
    if by_bytes:  # cells without a formula, or written in a form the first pattern does not take
        for m in cell_pattern(prefix).finditer(xml, start, end):
            rm = R_ATTRIBUTE.match(m.group(1)) or R_ATTRIBUTE.search(m.group(1))
            if rm is None:
                continue
            ref = get(rm.group(1), None)
            if ref is None:
                continue
            update = updates[ref]
            body = m.group(2)
            if update.drop_formula and body and b"si=" in body:
                _note_dropped_master(body, ref, dropped_masters)
            spans.append((m.start(), m.end(), _cell_xml(ref, m.group(1), body, update, prefix, f_re)))
            if not by_bytes:
                break
    if by_bytes and type(xml) is not RewrittenPart and CELL_WITHOUT_R.search(xml, start, end):
        # cells without r: the parser's form names them
        return edit_keeping_bytes(xml, lambda regular: _patch_cells(regular, updates, absent), force=True)
    if by_bytes and absent is not None:
        absent.update((ref, updates[ref].value) for ref in by_bytes.values())
        by_bytes.clear()
    if by_bytes:
        pending = sorted(by_bytes.values(), key=split_ref)
        raise SheetXmlError(f"cells not found in the sheet: {', '.join(pending[:5])}"
                            + (" and more" if len(pending) > 5 else ""))
    for si, master in dropped_masters.items():
        for user in _shared_users(xml[start:end], si, prefix):
            if user != master and not updates.get(user, CellUpdate()).drop_formula:
                raise SheetXmlError(f"cell {master} holds the shared formula that {user} also uses; "
                                    f"replace the whole group of cells or none")
    return _spliced(xml, spans)


def _spliced(xml: bytes, spans: list[tuple[int, int, bytes]]) -> bytes:
    """``xml`` with each (start, end) span replaced by its new bytes."""
    spans.sort()
    pieces: list[bytes] = []
    pos = 0
    for a, b, new in spans:
        pieces.append(xml[pos:a])
        pieces.append(new)
        pos = b
    pieces.append(xml[pos:])
    return b"".join(pieces)


_SI_ATTR = re.compile(rb'<(?:\w+:)?f\b[^>]*?\bt="shared"[^>]*?\bsi="([0-9]+)"|<(?:\w+:)?f\b[^>]*?\bsi="([0-9]+)"[^>]*?\bt="shared"')
_REF_IN_F = re.compile(rb'<(?:\w+:)?f\b[^>]*?\bref="')


def _note_dropped_master(body: bytes, ref: str, dropped: dict[int, str]) -> None:
    """Record ``ref`` under its ``si`` when the cell whose formula is dropped is a shared formula's master."""
    m = _SI_ATTR.search(body)
    if m and _REF_IN_F.search(body):
        dropped[int(m.group(1) or m.group(2))] = ref


def _shared_users(xml: bytes, si: int, prefix: bytes) -> list[str]:
    """Every cell that uses shared formula ``si`` (its master included)."""
    out = []
    for m in cell_pattern(prefix).finditer(xml):
        body = m.group(2) or b""
        if b"si=" not in body:
            continue
        sm = _SI_ATTR.search(body)
        if sm and int(sm.group(1) or sm.group(2)) == si:
            rm = R_ATTRIBUTE.search(m.group(1))
            if rm:
                out.append(rm.group(1).decode("ascii"))
    return out
