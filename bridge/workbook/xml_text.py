"""Text in spreadsheet XML, both ways: escaping what is written and unescaping what is read.

Element text in a workbook part is XML-escaped (``&amp;``, ``&lt;``, character
references) and, on top of that, the format writes characters XML cannot hold
or would not keep (control characters, a carriage return, and an underscore
that would start such an escape) as ``_xHHHH_`` (ECMA-376 Part 1, 22.9.2.19
ST_Xstring). An XML parser reads a line end written raw (``\r\n`` or a lone
``\r``) as ``\n`` (XML 1.0, 2.11): so do the readers here.

=========================  ==================================================
:func:`escape_text`        ``str`` → element content bytes
:func:`unescape_xml`       element content bytes → ``str``
:func:`decode_text`        the same, without the unescaping work for plain text
:func:`decode_escaped`     ``_xHHHH_`` → the character (text already unescaped)
=========================  ==================================================
"""

from __future__ import annotations

import html
import re

__all__ = ["escape_text", "unescape_xml", "decode_text", "decode_escaped"]

#: What the writers escape in element text, and in attribute values.
TEXT_ESCAPES = {ord("&"): "&amp;", ord("<"): "&lt;", ord(">"): "&gt;"}
ATTRIBUTE_ESCAPES = {**TEXT_ESCAPES, ord('"'): "&quot;"}
# What the parser path writes (xml_form.rewrite_in_regular_form): also a carriage return in text (as the format
# escapes it) and whitespace in attribute values (as character references, which attribute-value normalisation
# would otherwise turn to spaces).
REWRITE_TEXT_ESCAPES = {**TEXT_ESCAPES, ord("\r"): "_x000D_"}
REWRITE_ATTRIBUTE_ESCAPES = {**ATTRIBUTE_ESCAPES, ord("\t"): "&#9;", ord("\n"): "&#10;", ord("\r"): "&#13;"}

# a carriage return too: written raw, a parser would read it as a line feed (XML 1.0, 2.11)
_CONTROL = re.compile(r"[\x00-\x08\x0b-\x1f\ufffe\uffff]|_(?=x[0-9A-Fa-f]{4}_)")
_ESCAPED_CHAR = re.compile(r"_x([0-9A-Fa-f]{4})_")


def escape_text(text: str) -> bytes:
    """Text as element content: XML-escaped, control characters written ``_xHHHH_`` as the format requires."""
    text = text.translate(TEXT_ESCAPES)
    if _CONTROL.search(text):
        text = _CONTROL.sub(lambda m: f"_x{ord(m.group(0)):04X}_", text)
    return text.encode("utf-8")


def decode_escaped(text: str) -> str:
    """``_xHHHH_`` escapes of text (already XML-unescaped) decoded to their characters."""
    return _ESCAPED_CHAR.sub(lambda m: chr(int(m.group(1), 16)), text)


def unescape_xml(raw: bytes) -> str:
    """Text content of an element, as bytes from the XML, to ``str`` (line ends, entities and ``_xHHHH_`` decoded
    as a parser and the format read them)."""
    if b"\r" in raw:  # line ends first, as a parser does before it reads references (XML 1.0, 2.11)
        raw = raw.replace(b"\r\n", b"\n").replace(b"\r", b"\n")
    if b"&" in raw and b"&#" not in raw:  # the five named entities only: plain replacements, &amp; last
        raw = (raw.replace(b"&lt;", b"<").replace(b"&gt;", b">").replace(b"&quot;", b'"')
               .replace(b"&apos;", b"'").replace(b"&amp;", b"&"))
    text = raw.decode("utf-8")
    if "&" in text and b"&#" in raw:
        text = html.unescape(text)  # numeric character references (valid XML has no other entities)
    if "_x" in text:
        text = decode_escaped(text)
    return text


def decode_text(raw: bytes) -> str:
    """:func:`unescape_xml`, with plain text (no ``&``, no ``_x``, no carriage return) only decoded."""
    return (raw.decode("utf-8") if b"&" not in raw and b"_x" not in raw and b"\r" not in raw
            else unescape_xml(raw))
