"""The shared-string table of a workbook package, and the one guarded way to parse a part with ElementTree."""

from __future__ import annotations

import re
from xml.etree import ElementTree

from .xml_form import part_may_be_irregular
from .xml_text import decode_escaped, unescape_xml

__all__ = ["parse_shared_strings", "safe_xml"]


def safe_xml(data: bytes) -> ElementTree.Element:
    """A package part parsed with ElementTree; a part with a DTD is refused (parts never need one)."""
    if b"<!DOCTYPE" in data[:4096] or b"<!ENTITY" in data[:4096]:
        raise ElementTree.ParseError("document type declarations are not allowed in a workbook part")
    return ElementTree.fromstring(data)


# an item is <si>; files of the 2006 beta of the format (namespace .../office/excel/2006/2) call it <sstItem>
_SI = re.compile(rb"<(?:\w+:)?(si|sstItem)\b[^>]*?(?:/>|>(.*?)</(?:\w+:)?\1>)", re.S)
_T = re.compile(rb"<(?:\w+:)?t\b[^>]*?(?:/>|>(.*?)</(?:\w+:)?t>)", re.S)
_PHONETIC = re.compile(rb"<(?:\w+:)?rPh\b.*?</(?:\w+:)?rPh>", re.S)
_SIMPLE_SI = re.compile(rb"<t(?: [^>]*)?>([^<]*)</t>\Z")


def parse_shared_strings(xml: bytes) -> list[str]:
    """Shared-string table as a list of str; rich-text runs are joined, phonetic guides dropped.

    Read with regular expressions over the bytes; a part that the pre-scan
    (:func:`~.xml_form.part_may_be_irregular`) flags as possibly in an irregular form
    (single-quoted attributes, whitespace in tags, CDATA, comments, character
    references, another encoding) is read with ElementTree instead.
    """
    if part_may_be_irregular(xml):
        return _parsed_shared_strings(xml)
    out: list[str] = []
    append = out.append
    for m in _SI.finditer(xml):
        body = m.group(2)
        if not body:
            append("")
            continue
        simple = _SIMPLE_SI.match(body)
        if simple:
            raw = simple.group(1)
            append(raw.decode("utf-8") if b"&" not in raw and b"_x" not in raw and b"\r" not in raw
                   else unescape_xml(raw))
            continue
        if b"<rPh" in body or b":rPh" in body:
            body = _PHONETIC.sub(b"", body)
        append("".join(unescape_xml(t.group(1) or b"") for t in _T.finditer(body)))
    return out


def _parsed_shared_strings(xml: bytes) -> list[str]:
    """:func:`parse_shared_strings` through ElementTree (the standard library's parser)."""
    root = safe_xml(xml)

    def texts(el, into):
        for child in el:
            local = child.tag.rsplit("}", 1)[-1]
            if local == "t":
                into.append(child.text or "")
            elif local != "rPh":
                texts(child, into)
        return into

    return [decode_escaped("".join(texts(si, [])))
            for si in root if si.tag.rsplit("}", 1)[-1] in ("si", "sstItem")]
