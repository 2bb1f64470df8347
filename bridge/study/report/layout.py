"""The report's page layout: column widths that fit the page, landscape pages for wide tables, table headers
repeated on every page a table runs over, and rows kept whole.

A table is laid out from its texts: each column is given room in proportion to its longest text (capped, so
one long label does not starve the numbers), and the whole table is fitted into the page's width between the
margins. A table that would need more than a portrait page's width at the report's table type size (or that has
many columns) is printed on landscape pages; Writer and Word then never cut it at the right margin.
"""

from __future__ import annotations

import re

from docx.enum.section import WD_ORIENT, WD_SECTION
from docx.oxml import OxmlElement
from docx.oxml.ns import qn
from docx.shared import Cm, Emu

from .read import Table

__all__ = ["PAGE", "column_widths", "narrow_margins", "needs_landscape", "orient", "repeat_header", "usable_width"]

#: A4 (210 mm by 297 mm) and the margins, in centimetres
PAGE = {"short": 21.0, "long": 29.7, "margin": 2.0}
#: the width of one character of the tables' 7.5 pt type, about half an em (common practice), and a cell's padding
_CHAR_CM, _PAD_CM = 0.17, 0.3
_ROW_NUMBER_CM = 0.9
#: a column never gets less than this (a number such as "-0.123" fits), nor a text more room than this many characters
_MIN_CM, _CAP_CHARS = 1.2, 44
#: above this many columns a table goes on a landscape page even if its texts are short
_MAX_PORTRAIT_COLUMNS = 8


#: a number as the report prints it ("< 0.0001", "-0.123", "12.5%", "613,478"): kept on one line
_NUMBER = re.compile(r"^[<>]?\s?[-+\u2212]?[0-9][0-9.,]*%?$")


def usable_width(landscape: bool) -> float:
    """The width between the margins, in cm."""
    return (PAGE["long"] if landscape else PAGE["short"]) - 2 * PAGE["margin"]


def _cm(chars: int) -> float:
    return max(_MIN_CM, min(chars, _CAP_CHARS) * _CHAR_CM + _PAD_CM)


def _widths_wanted(block: Table) -> tuple[list[float], list[float]]:
    """Per column, the width (cm) its longest text wants on one line (capped), and the least it can take: its
    longest word (texts wrap between words; a number does not wrap)."""
    preferred, least = [], []
    for k in range(len(block.columns)):
        texts = [t[k] for _, t in block.rows if k < len(t)]
        preferred.append(_cm(max((len(t) for t in texts), default=0)))
        least.append(_cm(max((len(t) if _NUMBER.match(t) else max(map(len, t.split()), default=0)
                              for t in texts), default=0)))
    return preferred, least


def needs_landscape(block: Table) -> bool:
    """Many columns, or columns whose longest words do not fit beside each other on a portrait page."""
    _, least = _widths_wanted(block)
    return len(least) > _MAX_PORTRAIT_COLUMNS or sum(least) + _ROW_NUMBER_CM > usable_width(False)


def column_widths(block: Table, landscape: bool) -> list[Emu]:
    """The row-number column and the table's columns, fitted into the usable width: each column its preferred
    width when they fit, else each gives up room towards its least width in proportion to what it can give
    (and, should even the least widths not fit, all shrink in proportion)."""
    room = usable_width(landscape) - _ROW_NUMBER_CM
    preferred, least = _widths_wanted(block)
    widths = preferred
    if sum(preferred) > room:
        spare = sum(p - q for p, q in zip(preferred, least))
        over = sum(preferred) - room
        share = min(1.0, over / spare) if spare > 0 else 1.0
        widths = [p - (p - q) * share for p, q in zip(preferred, least)]
        if sum(widths) > room:
            widths = [w * room / sum(widths) for w in widths]
    return [Cm(_ROW_NUMBER_CM)] + [Cm(w) for w in widths]


def orient(doc, landscape: bool) -> None:
    """Continue on a landscape (or portrait) page: a new section with a page break, only when the orientation
    changes. Header, footer and margins carry over (python-docx copies the last section's settings)."""
    current = doc.sections[-1]
    if (current.orientation == WD_ORIENT.LANDSCAPE) == landscape:
        return
    section = doc.add_section(WD_SECTION.NEW_PAGE)
    section.orientation = WD_ORIENT.LANDSCAPE if landscape else WD_ORIENT.PORTRAIT
    long, short = Cm(PAGE["long"]), Cm(PAGE["short"])
    section.page_width, section.page_height = (long, short) if landscape else (short, long)


#: the cells' left and right padding, in twentieths of a point (45 = 0.08 cm; the default style's is 0.19 cm)
_CELL_MARGIN_TWIPS = "45"


def narrow_margins(table) -> None:
    """Narrow left and right cell padding, so that a wide table's numbers keep to one line."""
    tbl_pr = table._tbl.tblPr
    margins = OxmlElement("w:tblCellMar")
    for side in ("left", "right"):
        m = OxmlElement(f"w:{side}")
        m.set(qn("w:w"), _CELL_MARGIN_TWIPS)
        m.set(qn("w:type"), "dxa")
        margins.append(m)
    tbl_pr.append(margins)


def repeat_header(table) -> None:
    """The table's first row is repeated at the top of each page it runs over; no row is split across pages."""
    for k, row in enumerate(table.rows):
        tr_pr = row._tr.get_or_add_trPr()
        cant = OxmlElement("w:cantSplit")
        tr_pr.append(cant)
        if k == 0:
            header = OxmlElement("w:tblHeader")
            tr_pr.append(header)
