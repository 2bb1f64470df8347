"""The regular form of a worksheet part, the pre-scan that finds irregular ones, and the parser path.

The regular expressions of the sheet readers and patchers read the *regular form*, the one spreadsheet apps
and libraries write: double-quoted attributes separated by single spaces, ``</c>`` end tags, no comments,
CDATA sections, processing instructions or character references, one prefix for the main namespace (the
root's), UTF-8. Other writers may produce other valid XML: an *irregular form* (single-quoted attributes,
whitespace inside tags, CDATA, comments, character references, another prefix or encoding).

A cheap scan of the bytes (searches for single bytes and short strings, most of them only over what the fast
patterns left over) flags a part that may be irregular (:func:`why_irregular`, :func:`may_be_irregular`); a
flagged part is read with expat, the standard library's XML parser, and written out again in the regular form
(:func:`rewrite_in_regular_form`), which the regular expressions then read, so every reader and patcher gives
what a parser reads. Nothing is guessed: a part the parser refuses is refused in one line.

============================================  ================================================================
:func:`why_irregular`                         why a worksheet part must go through the parser, or None
:func:`regular_form`                          the part itself when regular, else rewritten
:func:`rewrite_in_regular_form`               the part through the parser, always
:func:`part_may_be_irregular`                 the pre-scan for another part read by patterns (shared strings)
:func:`edit_keeping_bytes`                    an edit of the regular form, spliced back cell by cell into the part
============================================  ================================================================
"""

from __future__ import annotations

import re
from xml.parsers import expat

from .cells import column_letters, split_ref
from .sheet_data import R_ATTRIBUTE, ROOT_TAG, SheetXmlError, cell_pattern, sheet_data_span
from .xml_text import REWRITE_ATTRIBUTE_ESCAPES, REWRITE_TEXT_ESCAPES

__all__ = ["why_irregular", "regular_form", "rewrite_in_regular_form", "part_may_be_irregular", "RewrittenPart",
           "edit_keeping_bytes"]

#: Root tags binding the main namespace twice (a prefix and the default, or two prefixes).
_MAIN_URIS = (b"http://schemas.openxmlformats.org/spreadsheetml/2006/main", b"http://purl.oclc.org/ooxml/spreadsheetml/main")
#: Confirms a hit of the quick search: whitespace other than single spaces between the attributes of a tag (or a
#: tab or line end inside a value, which a parser reads as a space), whitespace around "=", a single-quoted value,
#: a comment, CDATA section or processing instruction, a character reference. Double-quoted values are stepped
#: over whole, so two spaces or " >" inside a value (a data validation's message) do not count.
_IRREGULAR_TAG = re.compile(rb'<[^<>"\']*?(?:"[^"<\t\n\r]*"[^<>"\']*?)*?'
                            rb"""(?:[\t\n\r]|\s>|\s\s|\s=|=\s|='|"[^"<]*?[\t\n\r])|<[!?]|&#""")
_XML_DECL = re.compile(rb"\A(?:\xef\xbb\xbf)?<\?xml[^>]*?\?>")
_DECL_ENCODING = re.compile(rb"""encoding\s*=\s*["']([A-Za-z0-9._-]+)["']""")
_SPACE_BEFORE = re.compile(rb" [ =>]")
#: A start tag in any valid form; group 1 is "/" for an empty-element tag.
_START_TAG = re.compile(rb"""<[^\s/>]+(?:\s+[^\s=/>]+\s*=\s*(?:"[^"]*"|'[^']*'))*\s*(/?)>""")  # one pattern with a literal first byte: searched at memchr-like speed


class RewrittenPart(bytes):
    """A part as :func:`rewrite_in_regular_form` wrote it: in the regular form by construction, not scanned again."""

    __slots__ = ()


# ------------------------------------------------------------------ the pre-scan

def may_be_irregular(region: bytes) -> bool:
    """True when ``region`` may hold an irregular form: quick searches (single bytes first, a short string only
    where its rarer byte occurs), then one confirming pattern, so that text such as ``a  b`` or ``x = y``
    alone does not count."""
    hit = (b"'" in region or b"\t" in region or b"\r" in region
           or (b"!" in region and b"<!" in region) or (b"?" in region and b"<?" in region)
           or (b"#" in region and b"&#" in region) or b"= " in region or _SPACE_BEFORE.search(region) is not None)
    if not hit and b"\n" in region:  # a newline anywhere but right after a tag (pretty-printed parts)
        hit = region.count(b"\n") != region.count(b">\n")
    return hit and _IRREGULAR_TAG.search(region) is not None


def why_irregular_around_cells(xml: bytes, start: int, end: int) -> str | None:
    """The parts of the scan that do not depend on the cells: encoding, root tag, the bytes around ``<sheetData>``."""
    why = why_irregular_head(xml, start)
    if why is not None:
        return why
    if may_be_irregular(xml[end:]):
        return "its tags are written in an irregular form"
    if xml.find(b"xmlns", start, end) >= 0:
        return "it declares namespaces inside the cell data"
    if b"#" in xml and b"&#" in xml:
        return "it holds character references"
    return None


def _why_not_utf8(head: bytes) -> tuple[str | None, int]:
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


def why_irregular_head(xml: bytes, start: int) -> str | None:
    """The scan of what comes before the cells: encoding, XML declaration, root tag, sheet properties."""
    why, after = _why_not_utf8(xml[:start])
    if why is not None:
        return why
    head = xml[after:start]
    root = ROOT_TAG.search(head)
    if root is not None:
        tag_end = head.find(b">", root.end())
        tag = head[root.start():tag_end + 1]
        if sum(tag.count(u) for u in _MAIN_URIS) > 1:
            return "the root binds the spreadsheet namespace twice"
    if may_be_irregular(head):
        return "its tags are written in an irregular form"
    return None


def part_may_be_irregular(xml: bytes) -> bool:
    """The pre-scan for any other XML part read with regular expressions (the shared strings): True when
    the part may hold a form they do not take, or is not UTF-8."""
    why, after = _why_not_utf8(xml[:256])
    return why is not None or may_be_irregular(xml[after:])


def why_irregular(xml: bytes) -> str | None:
    """Why the part must go through the XML parser (see :func:`rewrite_in_regular_form`), or None for the
    regular form.

    A scan of the whole part: cheap searches over the bytes; a hit is
    confirmed by one pattern (text such as ``a  b`` or ``x = y`` alone does not
    send a part to the parser). The bulk readers scan less: only what their
    fast patterns did not take.
    """
    if type(xml) is RewrittenPart:
        return None
    try:
        start, end, _ = sheet_data_span(xml)
    except SheetXmlError:
        return "its root or cell data cannot be found by the fast reader"
    why = why_irregular_around_cells(xml, start, end)
    if why is None and may_be_irregular(xml[start:end]):
        why = "its tags are written in an irregular form"
    return why


def locate_cell_data(xml: bytes) -> tuple[bytes, tuple[int, int, bytes]]:
    """(part, :func:`sheet_data_span`), the part through the parser when the fast search cannot find its
    root or cell data (another encoding, say)."""
    try:
        return xml, sheet_data_span(xml)
    except SheetXmlError:
        if type(xml) is RewrittenPart:
            raise
        xml = rewrite_in_regular_form(xml)
        return xml, sheet_data_span(xml)


def regular_form(xml: bytes) -> bytes:
    """The part itself when it is in the regular form, else :func:`rewrite_in_regular_form` of it."""
    return xml if why_irregular(xml) is None else rewrite_in_regular_form(xml)


# ------------------------------------------------------------------ the parser path

def rewrite_in_regular_form(xml: bytes) -> bytes:
    """The part read by expat (the standard library's XML parser) and written again in the regular form.

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
    return _rewrite(xml)[0]


def _rewrite(xml: bytes, spans: bool = False) -> tuple[bytes, dict[str, tuple[int, int]] | None]:
    """:func:`rewrite_in_regular_form`, and with ``spans`` where each cell element lies in ``xml``
    (reference → (start, end) byte offsets; None when a reference is there twice)."""
    if type(xml) is RewrittenPart:
        return xml, None
    parser = expat.ParserCreate()  # no namespace processing: names come with their prefixes, as written
    parser.ordered_attributes = True
    parser.buffer_text = True
    writer = _RegularWriter(parser, xml if spans else None)
    parser.StartElementHandler = writer.start
    parser.EndElementHandler = writer.end
    parser.CharacterDataHandler = writer.text
    parser.StartDoctypeDeclHandler = _refuse_doctype
    parser.EntityDeclHandler = _refuse_doctype
    try:
        parser.Parse(bytes(xml), True)
    except expat.ExpatError as exc:
        raise SheetXmlError(f"the part is not well-formed XML ({exc})") from None
    head = '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
    return RewrittenPart((head + "".join(writer.out)).encode("utf-8")), writer.spans


def _refuse_doctype(*_declaration):
    raise SheetXmlError("the part has a document type declaration, which a workbook part never needs")


def _column_of_ref(ref: str) -> int:
    try:
        return split_ref(ref)[1]
    except ValueError:
        raise SheetXmlError(f"a cell has the reference {ref[:20]!r}, which is not a cell") from None


class _RegularWriter:
    """The expat handlers of :func:`rewrite_in_regular_form` and what they keep between calls."""

    def __init__(self, parser=None, source: bytes | None = None):
        self.parser, self.source = parser, source  # with a source: where each cell element lies in it
        self.spans: dict[str, tuple[int, int]] | None = {} if source is not None else None
        self.open_cells: list[tuple[str, int, int] | None] = []  # per open element: (ref, start, end if empty)
        self.out: list[str] = []
        self.scopes: list[dict[str, str]] = [{"xml": "http://www.w3.org/XML/1998/namespace"}]
        self.names: list[str] = []  # the names of the open elements, as written
        self.root: list[str] = []  # [prefix, uri] of the root element
        self.pending = False  # the last start tag is still open (no content yet)
        self.kinds: list[str | None] = []  # local names of the open elements of the spreadsheet namespace
        # where the parser is, for rows and cells without r: row number, column, the last cell's r
        self.row = 0
        self.column = 0
        self.last_ref: str | None = None

    def start(self, name, attrs):
        if self.pending:
            self.out.append(">")
        scope = self.scopes[-1]
        r = None
        written = []
        for k in range(0, len(attrs), 2):
            a, v = attrs[k], attrs[k + 1]
            if a == "r":
                r = v
            elif a[:5] == "xmlns" and (len(a) == 5 or a[5] == ":"):
                scope = {**scope, a[6:]: v}  # "" for the default namespace
            written.append(f' {a}="{v.translate(REWRITE_ATTRIBUTE_ESCAPES)}"')
        self.scopes.append(scope)
        prefix, _, local = name.rpartition(":")
        uri = scope.get(prefix)
        name = self._name_under_root_prefix(name, prefix, local, uri, scope)
        parent = self.kinds[-1] if self.kinds else None
        kind = local if uri == self.root[1] else None
        self.kinds.append(kind)
        self.names.append(name)
        self.out.append("<" + name + self._position(kind, parent, r))
        self.out.extend(written)
        self.pending = True
        if self.source is not None:
            self._note_start(kind == "c" and parent == "row", r)

    def _note_start(self, is_cell: bool, r: str | None) -> None:
        if not is_cell:
            self.open_cells.append(None)
            return
        start = self.parser.CurrentByteIndex
        tag = _START_TAG.match(self.source, start)
        ref = r if r is not None else f"{column_letters(self.column)}{self.row}"
        self.open_cells.append((ref, start, tag.end() if tag is not None and tag.group(1) else -1))

    def _note_end(self) -> None:
        cell = self.open_cells.pop()
        if cell is None or self.spans is None:
            return
        ref, start, end = cell
        if end < 0:  # at the end tag, "</c ...>"
            end = self.source.index(b">", self.parser.CurrentByteIndex) + 1
        if ref in self.spans:
            self.spans = None  # a cell listed twice: its place is not defined
        else:
            self.spans[ref] = (start, end)

    def _name_under_root_prefix(self, name: str, prefix: str, local: str, uri: str | None, scope: dict) -> str:
        """The element's name with the root's prefix when it is in the spreadsheet namespace."""
        root = self.root
        if uri is None and prefix:
            raise SheetXmlError(f"the part uses the prefix {prefix!r} without declaring it")
        if not root:
            root.extend([prefix, uri])
        elif uri == root[1] and prefix != root[0]:
            if scope.get(root[0]) != root[1]:
                raise SheetXmlError(f"the part rebinds the prefix {root[0] or '(default)'!r} inside the sheet; "
                                    f"it cannot be read")
            return f"{root[0]}:{local}" if root[0] else local
        elif prefix == root[0] and uri != root[1] and local in ("c", "row", "v", "f", "is", "t", "sheetData"):
            raise SheetXmlError(f"the part rebinds the prefix {root[0] or '(default)'!r} inside the sheet; "
                                f"it cannot be read")
        return name

    def _position(self, kind: str | None, parent: str | None, r: str | None) -> str:
        """The ``r`` attribute a row or cell written without one gets from its position ("" otherwise)."""
        if kind == "c" and parent == "row":
            if r is None:
                col = self.column if self.last_ref is None else _column_of_ref(self.last_ref)
                self.column, self.last_ref = col + 1, None
                return f' r="{column_letters(col + 1)}{self.row}"'
            self.last_ref = r
        elif kind == "row" and parent == "sheetData":
            self.row = int(r) if r and r.isdigit() else self.row + 1
            self.column, self.last_ref = 0, None
            if r is None:
                return f' r="{self.row}"'
        return ""

    def end(self, name):
        if self.pending:
            self.out.append(">")
            self.pending = False
        self.out.append(f"</{self.names.pop()}>")
        self.scopes.pop()
        self.kinds.pop()
        if self.source is not None:
            self._note_end()

    def text(self, data):
        if self.pending:
            self.out.append(">")
            self.pending = False
        self.out.append(data.translate(REWRITE_TEXT_ESCAPES))


# ------------------------------------------------------------------ edits of an irregular part, spliced back

def edit_keeping_bytes(xml: bytes, edit, *, force: bool = False) -> bytes:
    """``edit`` (bytes → bytes, working on the regular form) applied to a worksheet part, every byte outside
    the cells it changed kept.

    A part in the regular form is edited as it is. Any other (or with
    ``force``, any part not already rewritten) is rewritten by the parser
    (:func:`rewrite_in_regular_form`), edited, and each cell element the
    edit changed or took out is spliced into the original bytes where the
    parser found that cell: line ends, comments, quotes and empty elements
    elsewhere stay as they were. Where that cannot be done (the edit added
    cells or changed bytes outside the cells, or the part is not UTF-8) the
    edited regular form is returned, as before.
    """
    if type(xml) is RewrittenPart or (not force and why_irregular(xml) is None):
        return edit(xml)
    regular, spans = _rewrite(xml, spans=_why_not_utf8(xml[:256])[0] is None)
    after = edit(regular)
    kept = _splice_cells(xml, spans, regular, after) if spans is not None else None
    return after if kept is None else kept


def _cells_by_ref(xml: bytes) -> tuple[dict[bytes, tuple[int, int]], bytes]:
    """The cell elements of a part in the regular form (reference → span) and the bytes outside them."""
    start, end, prefix = sheet_data_span(xml)
    cells: dict[bytes, tuple[int, int]] = {}
    outside, pos = [], 0
    for m in cell_pattern(prefix).finditer(xml, start, end):
        rm = R_ATTRIBUTE.search(m.group(1))
        if rm is None or rm.group(1) in cells:
            return {}, b""  # not addressable cell by cell
        cells[rm.group(1)] = m.span()
        outside.append(xml[pos:m.start()])
        pos = m.end()
    outside.append(xml[pos:])
    return cells, b"".join(outside)  # a cell taken out leaves the bytes around it as they were


def _splice_cells(original: bytes, spans: dict[str, tuple[int, int]], before: bytes, after: bytes) -> bytes | None:
    """``original`` with the cells that differ between ``before`` and ``after`` (both regular) replaced, or None."""
    (cells_b, outside_b), (cells_a, outside_a) = _cells_by_ref(before), _cells_by_ref(after)
    if not cells_b or outside_b != outside_a or not set(cells_a) <= set(cells_b):
        return None
    edits = []
    for ref, (s, e) in cells_b.items():
        new = b""
        if ref in cells_a:
            a0, a1 = cells_a[ref]
            new = after[a0:a1]
            if new == before[s:e]:
                continue
        place = spans.get(ref.decode("ascii"))
        if place is None:
            return None
        edits.append((place[0], place[1], new))
    edits.sort()
    pieces, pos = [], 0
    for s, e, new in edits:
        pieces += [original[pos:s], new]
        pos = e
    pieces.append(original[pos:])
    return b"".join(pieces)
