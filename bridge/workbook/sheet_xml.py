"""Fast reading and byte-exact patching of worksheet XML parts.

A worksheet part can be a gigabyte of XML (1,048,576 rows), so nothing here
builds a DOM: cells are found with one compiled regular expression over the
bytes of ``<sheetData>``, and a patch splices new cell elements between the
untouched bytes, so everything not named in the patch stays byte-identical.

Reading
    :func:`iter_cells` yields a :class:`Cell` per ``<c>`` element in document
    order; :func:`dimension` gives the ``<dimension ref>``; :func:`used_range`
    the extent actually occupied.

Writing
    :func:`patch_sheet` rewrites listed cells (a new cached value beside the
    kept formula, or the value alone when the formula is dropped, or a new or
    restored formula); :func:`add_cells` inserts new cells into existing or
    new rows in order and widens ``<dimension>``.

Unusual forms
    Valid XML that the regular expressions do not take (single-quoted
    attributes, whitespace inside tags, CDATA, comments, character
    references, another prefix or encoding) is found by a cheap scan
    (:func:`unusual_form`) and read through the XML parser
    (:func:`parsed_form`), so every reader and patcher gives what a parser reads.

Cell values
    numbers are ``float``; shared and inline strings and formula string
    results ``str``; logical values ``bool``; error values the code as
    :class:`ErrorValue` (a ``str`` subclass, e.g. ``"#N/A"``); an empty
    cell (no ``<v>``) ``None``. Dates are numbers, as stored.
"""

from __future__ import annotations

import dataclasses
import functools
import gc
import itertools
import math
import re
from typing import Iterator, Mapping, NamedTuple, Sequence

import numpy as np

from .package import unescape_xml

__all__ = [
    "Cell",
    "Formula",
    "ErrorValue",
    "CellUpdate",
    "NewCell",
    "ERROR_CODES",
    "iter_cells",
    "dimension",
    "used_range",
    "sheet_data_span",
    "patch_sheet",
    "patch_values",
    "add_cells",
    "set_dimension",
    "column_index",
    "column_letters",
    "split_ref",
    "escape_text",
    "SheetXmlError",
    "translate_formula",
    "unshare_formulas",
    "read_columns",
    "read_column_arrays",
    "SheetColumns",
    "SheetArrays",
    "ColumnArrays",
    "unusual_form",
    "parsed_form",
    "normal_form",
    "odd_part",
    "remove_cells",
    "merged_ranges",
    "range_box",
]

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


# ------------------------------------------------------------------ references

@functools.lru_cache(maxsize=20000)
def column_index(letters: str | bytes) -> int:
    """``"A"`` → 1, ``"AA"`` → 27, ``"XFD"`` → 16384."""
    if isinstance(letters, bytes):
        letters = letters.decode("ascii")
    n = 0
    for ch in letters.upper():
        n = n * 26 + (ord(ch) - 64)
    return n


@functools.lru_cache(maxsize=20000)
def column_letters(index: int) -> str:
    """1 → ``"A"``, 27 → ``"AA"``."""
    if index < 1:
        raise ValueError(f"column index must be at least 1, got {index}")
    out = ""
    while index:
        index, rem = divmod(index - 1, 26)
        out = chr(65 + rem) + out
    return out


_REF = re.compile(r"\$?([A-Za-z]{1,3})\$?([0-9]+)\Z")


def split_ref(ref: str) -> tuple[int, int]:
    """``"B7"`` (or ``"$B$7"``) → (row 7, column 2)."""
    m = _REF.match(ref.strip())
    if not m:
        raise ValueError(f"not a cell reference: {ref!r}")
    return int(m.group(2)), column_index(m.group(1).upper())


# ------------------------------------------------------------------ reading

@functools.lru_cache(maxsize=8)
def _patterns(prefix: bytes):
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


_ATTR = re.compile(rb'([A-Za-z:]+)="([^"]*)"')
_ROOT = re.compile(rb"<(?:(\w+):)?worksheet\b")


def _prefix(xml: bytes) -> bytes:
    m = _ROOT.search(xml, 0, 4096) or _ROOT.search(xml)
    if m is None:
        raise SheetXmlError("not a worksheet part (no <worksheet> element)")
    return (m.group(1) + b":") if m.group(1) else b""


def sheet_data_span(xml: bytes) -> tuple[int, int, bytes]:
    """(start, end, prefix): ``xml[start:end]`` is the inside of ``<sheetData>`` (empty for ``<sheetData/>``).

    ``start`` is just after the opening tag. For ``<sheetData/>`` both are the
    offset of the self-closing tag and the caller must expand it to insert rows.
    """
    prefix = _prefix(xml)
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


# ------------------------------------------------------------------ unusual forms: the pre-scan and the parser path
#
# The regular expressions read the forms spreadsheet apps and libraries write: double-quoted attributes
# separated by single spaces, "</c>" end tags, no comments, CDATA sections, processing instructions or
# character references, one prefix for the main namespace (the root's). Other writers may produce other
# valid XML. A cheap scan of the bytes (searches for single bytes and short strings, most of them only
# over what the fast patterns left over) flags a part that may hold such a form; a flagged part is read
# with expat, the standard library's XML parser, and written out again in the usual form, which the
# regular expressions then read. Nothing is guessed: a part the parser refuses is refused in one line.

#: Root tags binding the main namespace twice (a prefix and the default, or two prefixes).
_MAIN_URIS = (b"http://schemas.openxmlformats.org/spreadsheetml/2006/main", b"http://purl.oclc.org/ooxml/spreadsheetml/main")
#: Confirms a hit of the quick search: whitespace other than single spaces inside a tag, whitespace
#: around "=", a single-quoted value, a comment, CDATA section or processing instruction, a character reference.
_ODD_TAG = re.compile(rb"<[^<>]*?(?:[\t\n\r]|\s>|\s\s|\s=|=\s|=')|<[!?]|&#")
_XML_DECL = re.compile(rb"\A(?:\xef\xbb\xbf)?<\?xml[^>]*?\?>")
_DECL_ENCODING = re.compile(rb"""encoding\s*=\s*["']([A-Za-z0-9._-]+)["']""")


class _Parsed(bytes):
    """A part as :func:`parsed_form` wrote it: in the usual form by construction, not scanned again."""

    __slots__ = ()


_SPACE_BEFORE = re.compile(rb" [ =>]")  # one pattern with a literal first byte: searched at memchr-like speed


def _odd(region: bytes) -> bool:
    """True when ``region`` may hold an unusual form: quick searches (single bytes first, a short string only
    where its rarer byte occurs), then one confirming pattern, so that text such as ``a  b`` or ``x = y``
    alone does not count."""
    hit = (b"'" in region or b"\t" in region or b"\r" in region
           or (b"!" in region and b"<!" in region) or (b"?" in region and b"<?" in region)
           or (b"#" in region and b"&#" in region) or b"= " in region or _SPACE_BEFORE.search(region) is not None)
    if not hit and b"\n" in region:  # a newline anywhere but right after a tag (pretty-printed parts)
        hit = region.count(b"\n") != region.count(b">\n")
    return hit and _ODD_TAG.search(region) is not None


def _odd_outside(xml: bytes, start: int, end: int) -> str | None:
    """The parts of the scan that do not depend on the cells: encoding, root tag, the bytes around ``<sheetData>``."""
    why = _odd_head(xml, start)
    if why is not None:
        return why
    if _odd(xml[end:]):
        return "its tags are written in an unusual form"
    if xml.find(b"xmlns", start, end) >= 0:
        return "it declares namespaces inside the cell data"
    if b"\r" in xml or (b"&#" in xml if b"#" in xml else False):
        return "it holds character references or carriage returns"
    return None


def _odd_encoding(head: bytes) -> tuple[str | None, int]:
    """(why the part is not UTF-8, or None; where its content starts after the XML declaration)."""
    if head[:2] in (b"\xff\xfe", b"\xfe\xff") or b"\x00" in head[:64]:
        return "it is not UTF-8", 0
    decl = _XML_DECL.match(head)
    if not decl:
        return None, 0
    enc = _DECL_ENCODING.search(decl.group(0))
    if enc and enc.group(1).lower() not in (b"utf-8", b"utf8"):
        return f"it is encoded as {enc.group(1).decode('ascii')}", 0
    return None, decl.end()


def _odd_head(xml: bytes, start: int) -> str | None:
    """The scan of what comes before the cells: encoding, XML declaration, root tag, sheet properties."""
    why, after = _odd_encoding(xml[:start])
    if why is not None:
        return why
    head = xml[after:start]
    root = _ROOT.search(head)
    if root is not None:
        tag_end = head.find(b">", root.end())
        tag = head[root.start():tag_end + 1]
        if sum(tag.count(u) for u in _MAIN_URIS) > 1:
            return "the root binds the spreadsheet namespace twice"
    if _odd(head):
        return "its tags are written in an unusual form"
    return None


def odd_part(xml: bytes) -> bool:
    """The pre-scan for any other XML part read with regular expressions (the shared strings): True when
    the part may hold a form they do not take, or is not UTF-8."""
    why, after = _odd_encoding(xml[:256])
    return why is not None or _odd(xml[after:])


def unusual_form(xml: bytes) -> str | None:
    """Why the part must go through the XML parser (see :func:`parsed_form`), or None for the usual form.

    A scan of the whole part: cheap searches over the bytes; a hit is
    confirmed by one pattern (text such as ``a  b`` or ``x = y`` alone does not
    send a part to the parser). The bulk readers scan less: only what their
    fast patterns did not take.
    """
    if type(xml) is _Parsed:
        return None
    try:
        start, end, _ = sheet_data_span(xml)
    except SheetXmlError:
        return "its root or cell data cannot be found by the fast reader"
    why = _odd_outside(xml, start, end)
    if why is None and _odd(xml[start:end]):
        why = "its tags are written in an unusual form"
    return why


def _span(xml: bytes) -> tuple[bytes, tuple[int, int, bytes]]:
    """(part, :func:`sheet_data_span`), the part through the parser when the fast search cannot find its
    root or cell data (another encoding, say)."""
    try:
        return xml, sheet_data_span(xml)
    except SheetXmlError:
        if type(xml) is _Parsed:
            raise
        xml = parsed_form(xml)
        return xml, sheet_data_span(xml)


def _column_of(ref: str) -> int:
    try:
        return split_ref(ref)[1]
    except ValueError:
        raise SheetXmlError(f"a cell has the reference {ref[:20]!r}, which is not a cell") from None


def normal_form(xml: bytes) -> bytes:
    """The part itself when it is in the usual form, else :func:`parsed_form` of it."""
    return xml if unusual_form(xml) is None else parsed_form(xml)


def parsed_form(xml: bytes) -> bytes:
    """The part read by expat (the standard library's XML parser) and written again in the usual form.

    Written: every element with its attributes in their order, double-quoted
    and single-space separated; text escaped; CDATA sections as text;
    character references as the characters; an empty element as a start and
    an end tag; elements of the spreadsheet namespace under the root's prefix;
    namespace declarations kept where they were. Left out: comments and
    processing instructions (nothing a spreadsheet app reads), the document's
    own XML declaration (a UTF-8 one is written). Added: the ``r`` of a row
    or cell written without one (the position gives it), so every cell can
    be addressed.

    Raises
    ------
    SheetXmlError
        The part is not well-formed XML, has a document type declaration
        (never needed by a workbook part, and a way to expand entities), or
        rebinds the root's prefix to another namespace.
    """
    from xml.parsers import expat

    if type(xml) is _Parsed:
        return xml
    parser = expat.ParserCreate()  # no namespace processing: names come with their prefixes, as written
    parser.ordered_attributes = True
    parser.buffer_text = True
    out: list[str] = []
    scopes: list[dict[str, str]] = [{"xml": "http://www.w3.org/XML/1998/namespace"}]
    names: list[str] = []
    root: list[str] = []  # [prefix, uri] of the root element
    pending = [False]  # the last start tag is still open (no content yet)
    kinds: list[str | None] = []  # local names of the open elements of the spreadsheet namespace
    position: list = [0, 0, None]

    def start(name, attrs):
        if pending[0]:
            out.append(">")
        scope = scopes[-1]
        r = None
        written = []
        for k in range(0, len(attrs), 2):
            a, v = attrs[k], attrs[k + 1]
            if a == "r":
                r = v
            elif a[:5] == "xmlns" and (len(a) == 5 or a[5] == ":"):
                scope = {**scope, a[6:]: v}  # "" for the default namespace
            written.append(f' {a}="{v.translate(_ATTR_OUT)}"')
        scopes.append(scope)
        prefix, _, local = name.rpartition(":")
        uri = scope.get(prefix)
        if uri is None and prefix:
            raise SheetXmlError(f"the part uses the prefix {prefix!r} without declaring it")
        if not root:
            root.extend([prefix, uri])
        elif uri == root[1] and prefix != root[0]:
            if scope.get(root[0]) != root[1]:
                raise SheetXmlError(f"the part rebinds the prefix {root[0] or '(default)'!r} inside the sheet; "
                                    f"it cannot be read")
            name = f"{root[0]}:{local}" if root[0] else local
        elif prefix == root[0] and uri != root[1] and local in ("c", "row", "v", "f", "is", "t", "sheetData"):
            raise SheetXmlError(f"the part rebinds the prefix {root[0] or '(default)'!r} inside the sheet; "
                                f"it cannot be read")
        parent = kinds[-1] if kinds else None
        kind = local if uri == root[1] else None
        kinds.append(kind)
        names.append(name)
        # rows and cells without r get the one their position gives (position: row, column, last cell's r)
        if kind == "c" and parent == "row":
            if r is None:
                col = position[1] if position[2] is None else _column_of(position[2])
                position[1], position[2] = col + 1, None
                name += f' r="{column_letters(col + 1)}{position[0]}"'
            else:
                position[2] = r
        elif kind == "row" and parent == "sheetData":
            position[0] = int(r) if r and r.isdigit() else position[0] + 1
            position[1], position[2] = 0, None
            if r is None:
                name += f' r="{position[0]}"'
        out.append("<" + name)
        out.extend(written)
        pending[0] = True

    def end(name):
        if pending[0]:
            out.append(">")
            pending[0] = False
        out.append(f"</{names.pop()}>")
        scopes.pop()
        kinds.pop()

    def text(data):
        if pending[0]:
            out.append(">")
            pending[0] = False
        out.append(data.translate(_TEXT_OUT))

    def doctype(*args):
        raise SheetXmlError("the part has a document type declaration, which a workbook part never needs")

    parser.StartElementHandler = start
    parser.EndElementHandler = end
    parser.CharacterDataHandler = text
    parser.StartDoctypeDeclHandler = doctype
    parser.EntityDeclHandler = doctype
    try:
        parser.Parse(bytes(xml), True)
    except expat.ExpatError as exc:
        raise SheetXmlError(f"the part is not well-formed XML ({exc})") from None
    head = '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
    return _Parsed((head + "".join(out)).encode("utf-8"))


def _attrs(raw: bytes) -> dict[bytes, bytes]:
    return dict(_ATTR.findall(raw))


@functools.lru_cache(maxsize=4096)
def _style_type(rest: bytes) -> tuple[int, str]:
    a = _attrs(rest)
    return int(a.get(b"s", b"0") or 0), a.get(b"t", b"n").decode("ascii")


@functools.lru_cache(maxsize=4096)
def _formula_attrs(raw: bytes) -> tuple[str, int | None, str | None]:
    a = _attrs(raw)
    kind = a.get(b"t", b"normal").decode("ascii")
    si = a.get(b"si")
    ref = a.get(b"ref")
    return kind, (int(si) if si is not None else None), (ref.decode("ascii") if ref is not None else None)


def _inline_text(body: bytes, text_run, phonetic) -> str:
    if b"rPh" in body:
        body = phonetic.sub(b"", body)
    return "".join(unescape_xml(m.group(1) or b"") for m in text_run.finditer(body))


def _decode(raw: bytes) -> str:
    return raw.decode("utf-8") if b"&" not in raw and b"_x" not in raw else unescape_xml(raw)


#: Size of the pieces of ``<sheetData>`` matched at once (cut at row ends): bounds the memory of a
#: gigabyte-sized sheet while keeping the per-piece overhead negligible.
CHUNK_BYTES = 4 << 20


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


def _chunks(xml: bytes, start: int, end: int, prefix: bytes):
    close = b"</" + prefix + b"row>"
    pos = start
    while pos < end:
        cut = xml.find(close, min(pos + CHUNK_BYTES, end), end) if end - pos > CHUNK_BYTES else -1
        stop = end if cut < 0 else cut + len(close)
        yield pos, stop
        pos = stop


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
    The sheet is matched in pieces of about :data:`CHUNK_BYTES` with one
    ``findall`` each, so the Python work per cell is a handful of operations.
    A sheet whose cells are written without ``r`` attributes (allowed, rare)
    is read by a slower row-aware path. A part in an unusual form
    (:func:`unusual_form`) is read through the XML parser (:func:`parsed_form`).
    """
    if type(xml) is not _Parsed and unusual_form(xml) is not None:
        xml = parsed_form(xml)
    start, end, prefix = sheet_data_span(xml)
    if start == end:
        return
    pattern = _bulk_pattern(prefix)
    content_re, text_run, phonetic = _patterns(prefix)[1:]
    strings = shared_strings
    style_type = _style_type
    col_of = column_index
    new = tuple.__new__  # skips the namedtuple's Python-level __new__
    done = -1  # cells yielded before the current one
    for cs, ce in _chunks(xml, start, end, prefix):
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
                    yield new(Cell, (ref, row, col_of(letters), _plain_value(raw, typ, ref, strings) if raw else None,
                                     typ, style, None))
                    continue
                col = col_of(letters)
            else:
                a = _attrs(other_attrs)
                r = a.get(b"r")
                if not r:  # positions must be counted from the rows: go on with the row-aware reader
                    yield from itertools.islice(_iter_cells_rowwise(xml, shared_strings), done, None)
                    return
                ref = r.decode("ascii")
                row, col = split_ref(ref)
                style = int(a.get(b"s", b"0") or 0)
                typ = a.get(b"t", b"n").decode("ascii")
                body = other_body
                if not body:
                    yield Cell(ref, row, col, None, typ, style, None)
                    continue
            value, formula = _body_value(body, typ, ref, strings, content_re, text_run, phonetic)
            yield Cell(ref, row, col, value, typ, style, formula)


def _plain_value(raw: bytes, typ: str, ref: str, strings: Sequence[str]):
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
    return _decode(raw)  # "str" (a formula's text result), "d" (ISO date text), anything else: as text


_new_tuple = tuple.__new__


def _body_value(body: bytes, typ: str, ref: str, strings, content_re, text_run, phonetic):
    """(value, Formula or None) of a cell's content."""
    if body[:3] == b"<f>":  # the common ordinary formula, <f>text</f><v>value</v>, without the regex
        i = body.find(b"</f>")
        tail = body[i + 4:]
        if i > 3 and (not tail or (tail[:3] == b"<v>" and tail[-4:] == b"</v>" and b"<" not in tail[3:-4])):
            ftext = body[3:i]
            formula = _new_tuple(Formula, (ftext.decode("utf-8") if b"&" not in ftext and b"_x" not in ftext
                                           else unescape_xml(ftext), "normal", None, None, False, b""))
            raw = tail[3:-4]
            return (_plain_value(raw, typ, ref, strings) if raw else None), formula
    cm = content_re.match(body)
    fattrs, ftext, raw, inline = cm.group(1, 2, 3, 4)
    formula = None
    if cm.start(1) >= 0:
        kind, si, fref = _formula_attrs(fattrs) if fattrs else ("normal", None, None)
        text = _decode(ftext) if ftext else None
        if text is None and kind != "shared":
            text = ""
        formula = Formula(text, kind, si, fref, kind == "shared" and fref is not None and text is not None, fattrs)
    if inline is not None:
        return _inline_text(inline, text_run, phonetic), formula
    if raw:
        return _plain_value(raw, typ, ref, strings), formula
    return None, formula


def _iter_cells_rowwise(xml: bytes, shared_strings: Sequence[str]) -> Iterator[Cell]:
    """The slow path of :func:`iter_cells`, tracking rows for cells written without ``r``."""
    xml = normal_form(xml)
    start, end, prefix = sheet_data_span(xml)
    token, content_re, text_run, phonetic = _patterns(prefix)
    row = 0
    col = 0
    for m in token.finditer(xml, start, end):
        if m.group(5) is not None:  # a row start
            r = _attrs(m.group(5)).get(b"r")
            row = int(r) if r else row + 1
            col = 0
            continue
        if m.group(1) is not None:
            row = int(m.group(2))
            col = column_index(m.group(1))
            ref = (m.group(1) + m.group(2)).decode("ascii")
            style, typ = _style_type(m.group(3)) if m.group(3) else (0, "n")
            body = m.group(4)
        else:
            a = _attrs(m.group(6) or b"")
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
        value, formula = _body_value(body, typ, ref, shared_strings, content_re, text_run, phonetic)
        yield Cell(ref, row, col, value, typ, style, formula)


_DIMENSION = re.compile(rb'<(?:\w+:)?dimension\b[^>]*?\bref="([^"]*)"')


def dimension(xml: bytes) -> str | None:
    """The ``<dimension ref>`` the writing app recorded (e.g. ``"A1:K401"``), or None."""
    start = sheet_data_span(xml)[0]
    if type(xml) is not _Parsed and _odd_head(xml, start) is not None:
        xml = parsed_form(xml)
        start = sheet_data_span(xml)[0]
    m = _DIMENSION.search(xml, 0, start)
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


# ------------------------------------------------------------------ writing

_TEXT_ESCAPES = {ord("&"): "&amp;", ord("<"): "&lt;", ord(">"): "&gt;"}
_ATTR_ESCAPES = {**_TEXT_ESCAPES, ord('"'): "&quot;"}
# what parsed_form writes: also a carriage return in text (as the format escapes it) and whitespace in
# attribute values (as character references, which attribute-value normalisation would otherwise turn to spaces)
_TEXT_OUT = {**_TEXT_ESCAPES, ord("\r"): "_x000D_"}
_ATTR_OUT = {**_ATTR_ESCAPES, ord("\t"): "&#9;", ord("\n"): "&#10;", ord("\r"): "&#13;"}
_CONTROL = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]|_(?=x[0-9A-Fa-f]{4}_)")


def escape_text(text: str) -> bytes:
    """Text as element content: XML-escaped, control characters written ``_xHHHH_`` as the format requires."""
    text = text.translate(_TEXT_ESCAPES)
    if _CONTROL.search(text):
        text = _CONTROL.sub(lambda m: f"_x{ord(m.group(0)):04X}_", text)
    return text.encode("utf-8")


def _escape_attr(text: str) -> bytes:
    return text.translate(_ATTR_ESCAPES).encode("utf-8")


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


@dataclasses.dataclass(frozen=True)
class NewCell:
    """A cell to add (:func:`add_cells`): a value and/or a formula (text without ``=``), and a style index."""

    value: object = None
    formula: str | None = None
    style: int = 0


def _value_xml(value, has_formula: bool, prefix: bytes, ref: str) -> tuple[bytes | None, bytes]:
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


_T_ATTR = re.compile(rb' t="[^"]*"')
_S_ATTR = re.compile(rb' s="[^"]*"')


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
    t, v_xml = _value_xml(update.value, f_xml is not None, prefix, ref)
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
def _cell_pattern(prefix: bytes):
    p = re.escape(prefix)
    return re.compile(rb"<" + p + rb"c\b((?: [A-Za-z:]+=\"[^\"]*\")*?) ?(?:/>|>(.*?)</" + p + rb"c>)", re.S)


@functools.lru_cache(maxsize=8)
def _formula_cell_pattern(prefix: bytes):
    # only the cells whose first child is <f>: the regex engine skips the others without a Python step
    p = re.escape(prefix)
    return re.compile(rb"<" + p + rb'c( r="([A-Z]{1,3}[0-9]+)"[^>/]*)><' + p + rb"f\b")


_R_ATTR = re.compile(rb' r="([A-Z]{1,3}[0-9]+)"')


#: A formula cell in the form spreadsheet apps and libraries write (no namespace prefix, the reference
#: first, the formula and an optional value and nothing else): reference, attributes, formula element,
#: value element. Every byte of a match is in a group or literal, so a match is rebuilt exactly.
_CELL_ATTRS = rb'((?: [A-Za-z]+="[^"]*")*)'  # the attributes after r, as one group
_F_ELEMENT = rb"(<f>[^<]*</f>|<f [^>]*/>|<f [^>]*>[^<]*</f>)"  # a formula element, as one group
_VALUE_CELL = re.compile(rb'<c r="([A-Z]{1,3}[0-9]+)"' + _CELL_ATTRS + rb">" + _F_ELEMENT + rb"(<v>[^<]*</v>)?</c>")
_MISSING = object()
_repeat = itertools.repeat


def _number_v(x) -> bytes | None:
    """``<v>…</v></c>`` for a finite float (the shortest text that reads back as the same double,
    integers without ".0", as :func:`_value_xml` writes them); None for any other value."""
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
            t, v_xml = _value_xml(x, True, b"", refs[k].decode("ascii"))
            got = done[key] = (_set_attr(attrs, b"t", t) if t is not None or b't="' in attrs else attrs,
                               v_xml + b"</c>")
        out[8 * k + 4], out[8 * k + 7] = got
    return b"".join(out)


def patch_values(xml: bytes, values: Mapping, *, consume: bool = False, pieces: bool = False):
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

    Returns
    -------
    bytes or list of bytes
        The same as ``patch_sheet(xml, {ref: CellUpdate(value)})``: only the
        listed cells change, and only in their value and ``t`` attribute.

    Notes
    -----
    Formula cells in the usual form are rewritten a piece of the sheet at a
    time by one split of a regular expression (:func:`_patch_values_chunk`);
    cells in any other form (a namespace prefix, children after the value, a
    listed cell without a formula) go through :func:`patch_sheet`'s general
    path afterwards.
    """
    if not values:
        return [xml] if pieces else xml
    xml, (start, end, prefix) = _span(xml)
    if type(xml) is not _Parsed and _odd_for_patching(xml, start, end):
        xml = parsed_form(xml)
        start, end, prefix = sheet_data_span(xml)
    if type(next(iter(values))) is bytes:
        keyed = values if consume and isinstance(values, dict) else dict(values)
    else:
        keyed = dict(zip(map(str.encode, values), values.values()))
    out: list[bytes] = [xml]
    if not prefix and start < end:
        out = [xml[:start]]
        for cs, ce in _chunks(xml, start, end, prefix):
            out.append(_patch_values_chunk(xml[cs:ce], keyed))
        out.append(xml[end:])
    if keyed:
        out = [_patch_cells(b"".join(out), {ref.decode("ascii"): CellUpdate(v) for ref, v in keyed.items()})]
        keyed.clear()
    return out if pieces else b"".join(out)


def _odd_for_patching(xml: bytes, start: int, end: int) -> bool:
    """The scan :func:`patch_values` needs before its fast pass: the forms that could make a cell in the
    usual form mean something else (inside a comment or CDATA section, another namespace, character
    references). A cell that is itself in an unusual form is not taken by the fast pass and goes
    through :func:`_patch_cells`, which scans the whole part."""
    if _odd_outside(xml, start, end) is not None:
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
        A listed cell that is not in the sheet (use :func:`add_cells`), or a
        shared-formula master dropped while cells sharing its formula keep it.

    Notes
    -----
    Formula cells (what a recalculation patches) are found by a pattern that
    only stops at cells holding a formula; any other listed cell by a second
    pass over all cells, made only when needed. Cells written without an
    ``r`` attribute cannot be addressed and are left alone. A value written
    beside a kept formula gets the ``t`` its type needs (``n`` implied, ``b``,
    ``str``, ``e``); a value without a formula that is text is written as an
    inline string, so the shared-string part is not touched.
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


def _patch_cells(xml: bytes, updates: Mapping[str, CellUpdate]) -> bytes:
    """The general path of :func:`patch_sheet`: any update, any form of cell."""
    xml = normal_form(xml)
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
            _note_shared(body, ref, None, dropped_masters)
        spans.append((m.start(), stop + len(close), _cell_xml(ref, m.group(1), body, update, prefix, f_re)))
        if not by_bytes:
            break
    if by_bytes:  # cells without a formula, or written in a form the first pattern does not take
        for m in _cell_pattern(prefix).finditer(xml, start, end):
            rm = _R_ATTR.match(m.group(1)) or _R_ATTR.search(m.group(1))
            if rm is None:
                continue
            ref = get(rm.group(1), None)
            if ref is None:
                continue
            update = updates[ref]
            body = m.group(2)
            if update.drop_formula and body and b"si=" in body:
                _note_shared(body, ref, None, dropped_masters)
            spans.append((m.start(), m.end(), _cell_xml(ref, m.group(1), body, update, prefix, f_re)))
            if not by_bytes:
                break
    if by_bytes and type(xml) is not _Parsed and _CELL_WITHOUT_R.search(xml, start, end):
        return _patch_cells(parsed_form(xml), updates)  # cells without r: the parser's form names them
    if by_bytes:
        pending = sorted(by_bytes.values(), key=split_ref)
        raise SheetXmlError(f"cells not found in the sheet: {', '.join(pending[:5])}"
                            + (" and more" if len(pending) > 5 else ""))
    for si, master in dropped_masters.items():
        for user in _shared_users(xml[start:end], si, prefix):
            if user != master and not updates.get(user, CellUpdate()).drop_formula:
                raise SheetXmlError(f"cell {master} holds the shared formula that {user} also uses; "
                                    f"replace the whole group of cells or none")
    spans.sort()
    pieces: list[bytes] = [xml[:spans[0][0]]]
    pos = spans[0][0]
    for a, b, new in spans:
        pieces.append(xml[pos:a])
        pieces.append(new)
        pos = b
    pieces.append(xml[pos:])
    return b"".join(pieces)


_SI_ATTR = re.compile(rb'<(?:\w+:)?f\b[^>]*?\bt="shared"[^>]*?\bsi="([0-9]+)"|<(?:\w+:)?f\b[^>]*?\bsi="([0-9]+)"[^>]*?\bt="shared"')
_REF_IN_F = re.compile(rb'<(?:\w+:)?f\b[^>]*?\bref="')


def _note_shared(body: bytes, ref: str, kept: dict | None, dropped: dict | None) -> None:
    m = _SI_ATTR.search(body)
    if not m:
        return
    si = int(m.group(1) or m.group(2))
    if dropped is not None:
        if _REF_IN_F.search(body):
            dropped[si] = ref
    elif kept is not None:
        kept[ref] = si


def _shared_users(xml: bytes, si: int, prefix: bytes) -> list[str]:
    """Every cell that uses shared formula ``si`` (its master included)."""
    out = []
    for m in _cell_pattern(prefix).finditer(xml):
        body = m.group(2) or b""
        if b"si=" not in body:
            continue
        sm = _SI_ATTR.search(body)
        if sm and int(sm.group(1) or sm.group(2)) == si:
            rm = _R_ATTR.search(m.group(1))
            if rm:
                out.append(rm.group(1).decode("ascii"))
    return out


# ------------------------------------------------------------------ adding cells

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
    t, v_xml = _value_xml(cell.value, bool(f_xml), prefix, ref)
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
        :class:`SheetXmlError` if it holds a value or formula (an empty styled
        cell is always replaced, keeping its style when the new cell has none);
        True replaces it.

    Notes
    -----
    Rows with a ``spans`` attribute keep it; it is an optional hint that
    spreadsheet apps recompute, so a new cell outside it is valid. Rows and
    cells written without ``r`` cannot be placed against and raise.
    """
    if not cells:
        return xml
    xml = normal_form(xml)
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
    cell_re = _cell_pattern(prefix)
    close_row = b"</" + prefix + b"row>"
    pieces: list[bytes] = []
    pos = start
    todo = sorted(by_row)
    ti = 0
    for m in row_re.finditer(xml, start, end):
        ra = _attrs(m.group(1))
        if b"r" not in ra:
            if type(xml) is not _Parsed:  # the parser's form numbers every row and cell
                return add_cells(parsed_form(xml), cells, replace=replace)
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
                pieces.append(_merge_row(body, new, prefix, cell_re, rnum, replace))
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


def remove_cells(xml: bytes, refs, *, empty_rows=()) -> bytes:
    """Take the listed cells out of the part (the inverse of :func:`add_cells`); cells not there are ignored.

    ``empty_rows`` lists row numbers whose ``<row>`` element is taken out too
    when no cell is left in it (rows that :func:`add_cells` made).
    """
    xml = normal_form(xml)
    start, end, prefix = sheet_data_span(xml)
    want = {ref.encode("ascii") for ref in refs}
    spans = []
    for m in _cell_pattern(prefix).finditer(xml, start, end):
        rm = _R_ATTR.search(m.group(1))
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
            if _attrs(m.group(1)).get(b"r") not in drop:
                continue
            if m.group(2) == b"/":
                spans.append((m.start(), m.end()))
            elif xml.startswith(close, m.end()):
                spans.append((m.start(), m.end() + len(close)))
        for a, b in reversed(spans):
            xml = xml[:a] + xml[b:]
    return xml


def range_box(text: str) -> tuple[int, int, int, int]:
    """(first row, first column, last row, last column) of ``A1`` or ``A1:C9`` (either corner first);
    ``ValueError`` for anything else.

    >>> range_box("C9:A1")
    (1, 1, 9, 3)
    """
    a, _, b = text.partition(":")
    (r1, c1), (r2, c2) = split_ref(a), split_ref(b or a)
    return min(r1, r2), min(c1, c2), max(r1, r2), max(c1, c2)


def merged_ranges(xml: bytes) -> list[tuple[int, int, int, int]]:
    """(first row, first column, last row, last column) of each merged range (``<mergeCell ref>``)."""
    out = []
    for m in _MERGE_CELL.finditer(normal_form(xml)):
        try:
            out.append(range_box(m.group(1).decode("ascii")))
        except ValueError:
            continue
    return out


_MERGE_CELL = re.compile(rb'<(?:[\w.-]+:)?mergeCell\b[^>]*?\bref="([^"]*)"')


def _new_row_xml(rnum: int, new: list, prefix: bytes) -> bytes:
    new = sorted(new, key=lambda t: t[0])
    return (b"<" + prefix + b'row r="' + str(rnum).encode("ascii") + b'">'
            + b"".join(_new_cell_xml(ref, c, prefix) for _, ref, c in new) + b"</" + prefix + b"row>")


def _merge_row(body: bytes, new: list, prefix: bytes, cell_re, rnum: int, replace: bool) -> bytes:
    out: list[bytes] = []
    pos = 0
    ni = 0
    c = 0
    for m in cell_re.finditer(body):
        rm = _R_ATTR.search(m.group(1))
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
                old_style = _attrs(m.group(1)).get(b"s")
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
    m = _DIMENSION.search(xml)
    if m:
        return xml[:m.start(1)] + ref.encode("ascii") + xml[m.end(1):]
    prefix = _prefix(xml)
    el = b"<" + prefix + b'dimension ref="' + ref.encode("ascii") + b'"/>'
    # dimension follows sheetPr if present, else opens the worksheet
    sp = re.search(rb"<" + re.escape(prefix) + rb"sheetPr\b[^>]*?(?:/>|>.*?</" + re.escape(prefix) + rb"sheetPr>)",
                   xml, re.S)
    if sp:
        return xml[:sp.end()] + el + xml[sp.end():]
    root = _ROOT.search(xml)
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


# ------------------------------------------------------------------ shared formulas

_FORMULA_TOKEN = re.compile(r"""
    (?P<string>"(?:[^"]|"")*")
   |(?P<quoted>'(?:[^']|'')*'!)
   |(?P<bracket>\[[^\]]*\])
   |(?P<error>\#[A-Z0-9/]+[!?]|\#N/A)
   |(?P<func>[A-Za-z_\\][A-Za-z0-9_.]*(?=\s*\())
   |(?P<sheet>[A-Za-z_\\][A-Za-z0-9_.]*!)
   |(?P<colrange>(?<![A-Za-z0-9_.$])\$?[A-Za-z]{1,3}:\$?[A-Za-z]{1,3}(?![A-Za-z0-9_.(!]))
   |(?P<rowrange>(?<![A-Za-z0-9_.$:])\$?[0-9]+:\$?[0-9]+(?![A-Za-z0-9_.(]))
   |(?P<cell>(?<![A-Za-z0-9_.$])\$?[A-Za-z]{1,3}\$?[0-9]+(?![A-Za-z0-9_.(!]))
   |(?P<name>[A-Za-z_\\][A-Za-z0-9_.]*)
   |(?P<number>[0-9]+\.?[0-9]*(?:[eE][+-]?[0-9]+)?)
""", re.X)
_CELL_PARTS = re.compile(r"(\$?)([A-Za-z]{1,3})(\$?)([0-9]+)")


def _shift_col(absolute: str, letters: str, dc: int) -> str | None:
    if absolute:
        return "$" + letters.upper()
    c = column_index(letters.upper()) + dc
    return column_letters(c) if 1 <= c <= 16384 else None


def _shift_row(absolute: str, digits: str, dr: int) -> str | None:
    if absolute:
        return "$" + digits
    r = int(digits) + dr
    return str(r) if 1 <= r <= 1048576 else None


def translate_formula(text: str, rows: int, cols: int) -> str:
    """A formula as it reads when copied ``rows`` down and ``cols`` right (relative references move).

    This is how the dependents of a shared formula read (ECMA-376 Part 1,
    18.3.1.40: the master's formula with its relative references offset to
    each cell). A reference moved off the sheet becomes ``#REF!``. Text in
    quotes, sheet names, function names and defined names are kept.

    >>> translate_formula("SCORE_BAND(B2,$B$2:$B$9,Settings!$B$1,Reliability)", 3, 0)
    'SCORE_BAND(B5,$B$2:$B$9,Settings!$B$1,Reliability)'
    >>> translate_formula('SUM(A:A,2:2)&"A1"', 1, 1)
    'SUM(B:B,3:3)&"A1"'
    """
    out: list[str] = []
    pos = 0
    for m in _FORMULA_TOKEN.finditer(text):
        kind = m.lastgroup
        if kind not in ("cell", "colrange", "rowrange"):
            continue
        token = m.group(0)
        if kind == "cell":
            p = _CELL_PARTS.fullmatch(token)
            c = _shift_col(p.group(1), p.group(2), cols)
            r = _shift_row(p.group(3), p.group(4), rows)
            new = "#REF!" if c is None or r is None else f"{c}{r}"
        elif kind == "colrange":
            ends = []
            for part in token.split(":"):
                ends.append(_shift_col("$" if part.startswith("$") else "", part.lstrip("$"), cols))
            new = "#REF!" if None in ends else ":".join(ends)
        else:
            ends = []
            for part in token.split(":"):
                ends.append(_shift_row("$" if part.startswith("$") else "", part.lstrip("$"), rows))
            new = "#REF!" if None in ends else ":".join(ends)
        out.append(text[pos:m.start()])
        out.append(new)
        pos = m.end()
    out.append(text[pos:])
    return "".join(out)


class _AnyStrings:
    """A stand-in shared-string table for reads that only look at formula cells."""

    def __getitem__(self, index):
        return ""


def unshare_formulas(xml: bytes, shared_strings: Sequence[str] = (), groups=None) -> bytes:
    """Rewrite shared formulas as one ordinary formula per cell (each with its own text); values are kept.

    Parameters
    ----------
    xml : bytes
        The worksheet part.
    shared_strings : sequence of str
    groups : collection of int, optional
        The ``si`` indexes to rewrite; default every shared formula of the sheet.

    Notes
    -----
    LibreOffice Calc (7.x) recomputes shared formulas when it opens a file
    instead of showing their cached values, so a shared formula that calls a
    function Calc does not have shows ``#NAME?`` there even with a correct
    cached value. Written as ordinary formulas, the cells show the values
    stored with them. Only the cells of the groups named change.
    """
    masters: dict[int, tuple[str, int, int]] = {}
    updates: dict[str, CellUpdate] = {}
    # Formula cells never hold shared strings (a text result is t="str"), so other cells' strings are not needed.
    for cell in iter_cells(xml, shared_strings if shared_strings else _AnyStrings()):
        f = cell.formula
        if f is None or f.kind != "shared" or f.shared_index is None:
            continue
        if groups is not None and f.shared_index not in groups:
            continue
        if f.text is not None:
            masters[f.shared_index] = (f.text, cell.row, cell.col)
            text = f.text
        else:
            master = masters.get(f.shared_index)
            if master is None:
                continue  # a dependent before its master: malformed; left as it is
            text = translate_formula(master[0], cell.row - master[1], cell.col - master[2])
        updates[cell.ref] = CellUpdate(cell.value, formula=text)
    return patch_sheet(xml, updates) if updates else xml


# ------------------------------------------------------------------ column-wise bulk reading


@dataclasses.dataclass
class SheetColumns:
    """A worksheet's cells column by column (what a column-wise evaluator needs), from :func:`read_columns`.

    ``columns`` maps a column index (A = 1) to ``(rows, values)``: parallel
    lists, rows ascending, of every cell that holds a value or a formula
    (a formula cell without a cached value has ``None``). ``formulas`` lists
    ``(row, col, Formula)`` in document order. ``styles`` maps ``(row, col)``
    to the style index of the cells that have one (empty styled cells
    included).
    """

    columns: dict[int, tuple[list[int], list[object]]]
    formulas: list[tuple[int, int, Formula]]
    styles: dict[tuple[int, int], int]

    def value(self, row: int, col: int):
        entry = self.columns.get(col)
        if entry is None:
            return None
        import bisect
        i = bisect.bisect_left(entry[0], row)
        return entry[1][i] if i < len(entry[0]) and entry[0][i] == row else None


def read_columns(xml: bytes, shared_strings: Sequence[str] = ()) -> SheetColumns:
    """Every cell of a worksheet part, column by column, as lists (see :func:`read_column_arrays`)."""
    arrays = read_column_arrays(xml, shared_strings)
    columns: dict[int, tuple[list[int], list[object]]] = {}
    for c, col in arrays.columns.items():
        values: list[object] = col.numbers.tolist()
        for i in np.flatnonzero(np.isnan(col.numbers)).tolist():
            values[i] = None
        if col.others:
            where = np.searchsorted(col.rows, np.fromiter(col.others, np.int64, len(col.others))).tolist()
            for i, v in zip(where, col.others.values()):
                values[i] = v
        columns[c] = (col.rows.tolist(), values)
    return SheetColumns(columns, arrays.formulas, arrays.styles)


@dataclasses.dataclass
class ColumnArrays:
    """One column of :func:`read_column_arrays`: ``rows`` (int64, ascending) of every cell that holds a
    value or a formula; ``numbers`` (float64, parallel to ``rows``) the value of each number cell and NaN
    for the others; ``others`` row → value of the cells that hold text, a logical or an
    :class:`ErrorValue`. A row with NaN that is not in ``others`` is a formula cell without a cached
    value (spreadsheet files cannot store NaN as a number)."""

    rows: np.ndarray
    numbers: np.ndarray
    others: dict[int, object]


@dataclasses.dataclass
class SheetArrays:
    """A worksheet's cells column by column in arrays, from :func:`read_column_arrays`.

    ``columns`` as :class:`ColumnArrays`; ``styles`` as in :class:`SheetColumns`.
    The formulas come in two parts: ``plain_formulas``, the ordinary
    formulas (``<f>text</f>``, by far the commonest) as (rows, columns,
    texts) blocks, rows and columns in int arrays and the texts in a list;
    and ``other_formulas``, every other formula cell (shared, array, data
    table) as (row, col, :class:`Formula`). :attr:`formulas` puts them
    together in document order.
    """

    columns: dict[int, ColumnArrays]
    plain_formulas: list[tuple[np.ndarray, np.ndarray, list[str]]]
    other_formulas: list[tuple[int, int, Formula]]
    styles: dict[tuple[int, int], int]

    @property
    def formulas(self) -> list[tuple[int, int, Formula]]:
        """Every formula cell as (row, col, :class:`Formula`), in document order."""
        cells = list(self.other_formulas)
        for rows, cols, texts in self.plain_formulas:
            cells.extend(zip(rows.tolist(), cols.tolist(),
                             map(_NEW_NORMAL, zip(texts, _repeat("normal"), _repeat(None), _repeat(None),
                                                  _repeat(False), _repeat(b"")))))
        cells.sort(key=lambda t: (t[0], t[1]))
        return cells


#: A cell holding only a value, in the form spreadsheet apps and libraries write (the reference first,
#: then an optional style and type): letters, digits, style, type, value text.
_PLAIN_CELL = re.compile(rb'<c r="([A-Z]{1,3})([0-9]+)"(?: s="([0-9]+)")?(?: t="([a-zA-Z]+)")?><v>([^<]+)</v></c>')
#: A formula cell in the usual form: letters, digits, attributes, formula element, value text.
_FORMULA_CELL = re.compile(rb'<c r="([A-Z]{1,3})([0-9]+)"' + _CELL_ATTRS + rb">" + _F_ELEMENT
                           + rb"(?:<v>([^<]*)</v>)?</c>")


_NEW_NORMAL = functools.partial(tuple.__new__, Formula)
_NAN = float("nan")


def _lookup(items: list, convert):
    """``convert`` as a dict lookup when ``items`` repeat a lot (row numbers, 0/1 scores, column letters)."""
    distinct = set(items)
    if len(distinct) * 4 > len(items):
        return convert
    return {x: convert(x) for x in distinct}.__getitem__


class _Collector:
    """Cells gathered piece by piece: numbers in arrays, everything else as (row, col, value)."""

    def __init__(self, strings: Sequence[str]):
        self.strings = strings
        self.cols: list[np.ndarray] = []
        self.rows: list[np.ndarray] = []
        self.nums: list[np.ndarray] = []
        self.others: list[tuple[int, int, object]] = []
        self.plain_formulas: list[tuple[np.ndarray, np.ndarray, list[str]]] = []
        self.formulas: list[tuple[int, int, Formula]] = []  # the other formula cells
        self.styles: dict[tuple[int, int], int] = {}
        self.single: tuple[list, list, list] = ([], [], [])  # number cells decoded one by one

    def numbers(self, cols, rows, nums):
        self.cols.append(np.asarray(cols, dtype=np.int16))
        self.rows.append(np.asarray(rows, dtype=np.int64))
        self.nums.append(np.asarray(nums, dtype=float))

    def plain(self, parts: list) -> None:
        """Pass 1: the plain value cells of a piece (its split by :data:`_PLAIN_CELL`)."""
        letters, digits, styles, types, raws = parts[1::6], parts[2::6], parts[3::6], parts[4::6], parts[5::6]
        n = len(letters)
        cols = cols_all = np.fromiter(map(_lookup(letters, column_index), letters), np.int16, n)
        rows = np.fromiter(map(_lookup(digits, int), digits), np.int64, n)
        typed = [i for i, t in enumerate(types) if t is not None and t != b"n"] if any(types) else []
        if typed:
            raws = list(raws)
            for i in typed:
                ref = (letters[i] + digits[i]).decode("ascii")
                value = _plain_value(raws[i], types[i].decode("ascii"), ref, self.strings)
                self.others.append((int(digits[i]), int(cols[i]), value))
                raws[i] = b"nan"
            keep = np.ones(n, dtype=bool)
            keep[typed] = False
        try:
            nums = np.fromiter(map(_lookup(raws, float), raws), float, n)
        except ValueError:
            bad = next(i for i, x in enumerate(raws) if not _is_number(x))
            raise SheetXmlError(f"cell {(letters[bad] + digits[bad]).decode('ascii')} holds {raws[bad][:40]!r}, "
                                f"which is not a number") from None
        if typed:
            cols, rows, nums = cols[keep], rows[keep], nums[keep]
        self.numbers(cols, rows, nums)
        if any(styles):
            for i, s in enumerate(styles):
                if s is not None and s != b"0":
                    self.styles[(int(digits[i]), int(cols_all[i]))] = int(s)

    def formula_cells(self, parts: list) -> None:
        """Pass 2: the formula cells of a piece (its split by :data:`_FORMULA_CELL`)."""
        letters, digits, attrs_l, f_l, raws = parts[1::6], parts[2::6], parts[3::6], parts[4::6], parts[5::6]
        n = len(letters)
        cols = list(map(_lookup(letters, column_index), letters))
        rows = list(map(int, digits))
        joined = b"\x00".join(f_l)  # formula text holds neither "<" nor NUL, so the elements split back apart
        if b"<f " in joined or b"_x" in joined:
            plain_rows, plain_cols, texts = [], [], []
            for row, col, f in zip(rows, cols, f_l):
                if f[:3] == b"<f>":
                    plain_rows.append(row)
                    plain_cols.append(col)
                    texts.append(_decode(f[3:-4]))
                else:
                    self.formulas.append((row, col, self._formula(f)))
        else:  # all ordinary <f>text</f>: decoded in one go
            text = joined[3:-4]
            texts = (text.decode("utf-8") if b"&" not in text else unescape_xml(text)).split("</f>\x00<f>")
            plain_rows, plain_cols = rows, cols
        del joined
        if texts:
            self.plain_formulas.append((np.asarray(plain_rows, dtype=np.int64), np.asarray(plain_cols, dtype=np.int16),
                                        texts))
        if not any(attrs_l) and not any(raws):  # no cached values and no attributes: the cells are there, empty
            self.numbers(cols, rows, np.full(n, np.nan))
            return
        num_cols, num_rows, nums = [], [], []
        strings = self.strings
        for i in range(n):
            typ = "n"
            attrs = attrs_l[i]
            if attrs:
                style, typ = _style_type(attrs)
                if style:
                    self.styles[(rows[i], cols[i])] = style
            raw = raws[i]
            value = _plain_value(raw, typ, (letters[i] + digits[i]).decode("ascii"), strings) if raw else _NAN
            if type(value) is float:  # a number, or NaN for a formula without a cached value
                num_cols.append(cols[i])
                num_rows.append(rows[i])
                nums.append(value)
            else:
                self.others.append((rows[i], cols[i], value))
        if num_cols:
            self.numbers(num_cols, num_rows, nums)

    @staticmethod
    def _formula(f: bytes) -> Formula:
        """The :class:`Formula` of one ``<f>`` element, decoded by the cell reader's own code."""
        return _body_value(f, "n", "", (), *_patterns(b"")[1:])[1]

    def other_cells(self, rest: bytes) -> None:
        """Pass 3: every other cell of a piece, decoded one by one as :func:`iter_cells` does."""
        self.add_cells(iter_cells(b"<worksheet><sheetData>" + rest + b"</sheetData></worksheet>", self.strings))

    def add_cells(self, cells) -> None:
        for cell in cells:
            if cell.style:
                self.styles[(cell.row, cell.col)] = cell.style
            if cell.formula is not None:
                self.formulas.append((cell.row, cell.col, cell.formula))
            value = cell.value
            if value is None:
                if cell.formula is None:
                    continue
                value = _NAN  # a formula without a cached value
            if type(value) is float:
                self.single[0].append(cell.col)
                self.single[1].append(cell.row)
                self.single[2].append(value)
            else:
                self.others.append((cell.row, cell.col, cell.value))
        if len(self.single[0]) > 100_000:
            self.numbers(*self.single)
            self.single = ([], [], [])

    def result(self) -> SheetArrays:
        if self.single[0]:
            self.numbers(*self.single)
            self.single = ([], [], [])
        others = self.others
        if others:
            self.numbers([c for _, c, _ in others], [r for r, _, _ in others], np.full(len(others), np.nan))
        if not self.cols:
            return SheetArrays({}, self.plain_formulas, self.formulas, self.styles)
        cols = np.concatenate(self.cols)
        rows = np.concatenate(self.rows)
        nums = np.concatenate(self.nums)
        self.cols = self.rows = self.nums = []
        order = np.argsort(cols, kind="stable")  # a radix sort for 16-bit keys; document order kept within
        cols, rows, nums = cols[order], rows[order], nums[order]
        del order
        by_col: dict[int, dict[int, object]] = {}
        for r, c, v in others:
            by_col.setdefault(c, {})[r] = v
        starts = np.flatnonzero(np.diff(cols)) + 1
        columns: dict[int, ColumnArrays] = {}
        for a, b in zip(np.concatenate([[0], starts]).tolist(), np.concatenate([starts, [cols.size]]).tolist()):
            r, x = rows[a:b], nums[a:b]
            if r.size > 1 and not (r[1:] > r[:-1]).all():  # cells of several passes: put them in row order
                k = np.argsort(r, kind="stable")
                r, x = r[k], x[k]
            c = int(cols[a])
            columns[c] = ColumnArrays(r, x, by_col.get(c, {}))
        return SheetArrays(columns, self.plain_formulas, self.formulas, self.styles)


def read_column_arrays(xml: bytes, shared_strings: Sequence[str] = ()) -> SheetArrays:
    """Every cell of a worksheet part, column by column in arrays: the fast bulk form of :func:`iter_cells`.

    Each piece of about :data:`CHUNK_BYTES` of ``<sheetData>`` is read in
    three passes: the plain value cells (the bulk of a data sheet) are split
    off by one regular expression and converted a piece at a time with
    numpy; formula cells in the usual form by a second, with one short
    step per cell; what is left (inline strings, cells in unusual forms)
    goes through the same decoding as :func:`iter_cells`, so the readers
    always agree (tests check it on random sheets). A sheet with cells
    written without ``r`` attributes is read by the row-aware reader.
    The cyclic garbage collector is paused meanwhile: none of the objects
    made form cycles.
    """
    gc_was = gc.isenabled()
    gc.disable()
    try:
        xml, (start, end, prefix) = _span(xml)
        if type(xml) is not _Parsed and _odd_outside(xml, start, end) is not None:
            return read_column_arrays(parsed_form(xml), shared_strings)
        got = _Collector(shared_strings)
        if start == end:
            return got.result()
        if prefix:
            return _arrays_from_cells(iter_cells(xml, shared_strings))
        for cs, ce in _chunks(xml, start, end, prefix):
            parts = _PLAIN_CELL.split(xml[cs:ce])
            if len(parts) > 1:
                got.plain(parts)
            rest = b"".join(parts[0::6])
            del parts
            parts = _FORMULA_CELL.split(rest)
            if len(parts) > 1:
                got.formula_cells(parts)
                rest = b"".join(parts[0::6])
            del parts
            if type(xml) is not _Parsed and _odd(rest):  # what the fast patterns left: an unusual form?
                return read_column_arrays(parsed_form(xml), shared_strings)
            if b"<c" in rest:
                if _CELL_WITHOUT_R.search(rest):
                    return _arrays_from_cells(iter_cells(xml, shared_strings))
                got.other_cells(rest)
        return got.result()
    finally:
        if gc_was:
            gc.enable()


_CELL_WITHOUT_R = re.compile(rb'<c(?![^>]*\br=")[\s/>]')


def _arrays_from_cells(cells) -> SheetArrays:
    got = _Collector(())
    got.add_cells(cells)
    return got.result()


def _is_number(raw: bytes) -> bool:
    try:
        float(raw)
        return True
    except ValueError:
        return False


def _columns_from_cells(cells: list[Cell]) -> SheetColumns:
    columns: dict[int, tuple[list[int], list[object]]] = {}
    formulas: list[tuple[int, int, Formula]] = []
    styles: dict[tuple[int, int], int] = {}
    for c in cells:
        if c.style:
            styles[(c.row, c.col)] = c.style
        if c.formula is not None:
            formulas.append((c.row, c.col, c.formula))
        if c.value is None and c.formula is None:
            continue
        entry = columns.setdefault(c.col, ([], []))
        entry[0].append(c.row)
        entry[1].append(c.value)
    return SheetColumns(dict(sorted(columns.items())), formulas, styles)
