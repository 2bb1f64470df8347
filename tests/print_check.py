"""Checks of a workbook's printed form: LibreOffice's PDF export read back with poppler's ``pdftotext -bbox-layout``.

- :func:`overlaps`: no two words' boxes on a page intersect (text over text: a header over the first data row, a
  chart over a note);
- :func:`cut_cells`: every word of a printed cell's text appears on the pages of its sheet (a label cut by the
  next cell, a text running off the print range, two cells' texts run together);
- :func:`split_rows`: every printed row's text cells appear together on one page (a table whose right-hand
  columns print on a further page is split sideways);
- :func:`sideways_pages`: every sheet prints on as many pages as its first column alone does (:func:`first_column_copy`
  renders that): a sheet with more has columns printed sideways onto further pages, whatever they hold (numbers
  only too, which :func:`split_rows` cannot see);
- :func:`page_count`.

A page's sheet is read from its header's right part, where the study prints the sheet's name (``&A``).
"""

from __future__ import annotations

import re
import shutil
import zipfile
import subprocess
import unicodedata
import xml.etree.ElementTree as ET
from pathlib import Path

from openpyxl import load_workbook
from openpyxl.utils import range_boundaries

__all__ = ["to_pdf", "pdf_pages", "overlaps", "cut_cells", "split_rows", "page_count", "page_sheets", "Word",
           "printed_texts", "found", "first_column_copy", "sideways_pages"]

_XHTML = "{http://www.w3.org/1999/xhtml}"
#: Words whose boxes overlap by less than this many points across are taken as touching.
TOLERANCE_PT = 1.0
#: pdftotext's boxes span the font's whole ascent and descent, so the lines of one wrapped cell overlap by about
#: a tenth of their height (1 to 2 points) without any ink touching; text printed over text overlaps by most of
#: its height (0.8 and more in the PDF of the study before the print pass). Boxes overlapping by more than this
#: share of the lower one's height count as text over text.
OVERLAP_SHARE = 0.4


class Word(tuple):
    """(x0, y0, x1, y1, text)"""


def to_pdf(soffice: str, book: Path, outdir: Path, profile: Path) -> Path:
    outdir.mkdir(parents=True, exist_ok=True)
    subprocess.run([soffice, f"-env:UserInstallation={profile.as_uri()}", "--headless", "--norestore",
                    "--convert-to", "pdf", "--outdir", str(outdir), str(book)],
                   check=True, capture_output=True, timeout=900)
    return outdir / (book.stem + ".pdf")


def pdf_pages(pdf: Path) -> list[dict]:
    """Each page: its height and its words (x0, y0, x1, y1, text), from ``pdftotext -bbox-layout``."""
    tool = shutil.which("pdftotext")
    if tool is None:
        raise RuntimeError("pdftotext (poppler-utils) is needed to read the PDF back")
    html = subprocess.run([tool, "-bbox-layout", str(pdf), "-"], check=True, capture_output=True,
                          timeout=300).stdout.decode("utf-8")
    html = re.sub(r"<!DOCTYPE[^>]*>", "", html)
    root = ET.fromstring(html)
    pages = []
    for page in root.iter(f"{_XHTML}page"):
        words = [Word((float(w.get("xMin")), float(w.get("yMin")), float(w.get("xMax")), float(w.get("yMax")),
                       unicodedata.normalize("NFKC", w.text or ""))) for w in page.iter(f"{_XHTML}word")]
        pages.append({"width": float(page.get("width")), "height": float(page.get("height")), "words": words})
    return pages


def page_count(pdf: Path) -> int:
    return len(pdf_pages(pdf))


def overlaps(pages) -> list[tuple[int, str, str]]:
    """(page, word, word) for each two words whose boxes intersect by more than :data:`TOLERANCE_PT` across and
    :data:`OVERLAP_SHARE` of their height down."""
    found = []
    for number, page in enumerate(pages, start=1):
        words = sorted(page["words"])
        for i, a in enumerate(words):
            for b in words[i + 1:]:
                if b[0] >= a[2] - TOLERANCE_PT:
                    break  # sorted by left edge: no later word reaches back over a
                dx = min(a[2], b[2]) - max(a[0], b[0])
                dy = min(a[3], b[3]) - max(a[1], b[1])
                if dx > TOLERANCE_PT and dy > OVERLAP_SHARE * min(a[3] - a[1], b[3] - b[1]):
                    found.append((number, a[4], b[4]))
    return found


def page_sheets(pages) -> list[str]:
    """The sheet of each page: the words of the header's right half (the study prints ``&A`` there)."""
    out = []
    for page in pages:
        top = [w for w in page["words"] if w[3] < 0.09 * page["height"] and w[0] > page["width"] * 0.55]
        out.append(" ".join(w[4] for w in sorted(top, key=lambda w: w[0])))
    return out


def _printed_texts(book: Path):
    """(sheet, cell, text) of every text cell inside a sheet's print range (values as stored)."""
    wb = load_workbook(book, data_only=True)
    for ws in wb.worksheets:
        if ws.sheet_state != "visible":
            continue
        area = ws.print_area
        if area:
            ref = area[0] if isinstance(area, (list, tuple)) else area
            ref = ref.split("!")[-1].replace("$", "")
            c1, r1, c2, r2 = range_boundaries(ref if ":" in ref else f"{ref}:{ref}")
        else:
            c1, r1, c2, r2 = 1, 1, ws.max_column, ws.max_row
        for row in ws.iter_rows(min_row=r1, max_row=r2, min_col=c1, max_col=c2):
            for cell in row:
                if isinstance(cell.value, str) and cell.value.strip():
                    yield ws.title, cell.coordinate, unicodedata.normalize("NFKC", cell.value)


def _found(word: str, words: set[str]) -> bool:
    """The word is printed: whole, or broken after dashes or slashes (as a wrapped cell may break it) into
    pieces that are each printed."""
    if word in words:
        return True
    pieces = [p for p in re.split(r"(?<=[-–—/])", word) if p]
    reach = [True] + [False] * len(pieces)
    for i in range(1, len(pieces) + 1):
        reach[i] = any(reach[j] and "".join(pieces[j:i]) in words for j in range(i))
    return reach[-1]


def cut_cells(book: Path, pages) -> list[tuple[str, str, str]]:
    """(sheet, cell, missing word) for each word of a printed text cell not found on its sheet's pages."""
    by_sheet: dict[str, set[str]] = {}
    for name, page in zip(page_sheets(pages), pages):
        by_sheet.setdefault(name, set()).update(w[4] for w in page["words"])
    missing = []
    for sheet, coordinate, text in _printed_texts(book):
        words = by_sheet.get(sheet, set())
        for word in text.split():
            if not _found(word, words):
                missing.append((sheet, coordinate, word))
                break
    return missing


def split_rows(book: Path, pages) -> list[tuple[str, int]]:
    """(sheet, row) of each printed row of two or more text cells whose words are on no single page of its sheet:
    a table split sideways (its right-hand columns on a further page)."""
    by_page = [(name, {w[4] for w in page["words"]}) for name, page in zip(page_sheets(pages), pages)]
    rows: dict[tuple[str, int], list[str]] = {}
    for sheet, coordinate, text in _printed_texts(book):
        row = int(re.sub(r"[A-Z]+", "", coordinate))
        rows.setdefault((sheet, row), []).append(text)
    out = []
    for (sheet, row), texts in rows.items():
        if len(texts) < 2:
            continue
        words = [w for t in texts for w in t.split()]
        if not any(name == sheet and all(_found(w, seen) for w in words) for name, seen in by_page):
            out.append((sheet, row))
    return sorted(out)


_AREA = re.compile(r'(<definedName name="_xlnm\.Print_Area" localSheetId="(\d+)"[^>]*>)([^<]*)(</definedName>)')
_RANGE = re.compile(r"^(.*!)?\$?([A-Z]+)\$?(\d+)(?::\$?[A-Z]+\$?(\d+))?$")


def first_column_copy(book: Path, out: Path) -> Path:
    """A copy of ``book`` whose sheets print only the first column of their print range (the same rows, row
    heights, page breaks, scale and header): LibreOffice prints it on as many pages as the book's sheets take
    down, so a sheet of ``book`` on more pages than in the copy prints columns sideways. A sheet without a print
    range gets one over the first column of its used range. Only ``xl/workbook.xml``'s defined names change (the
    charts and everything else are copied byte for byte)."""
    wb = load_workbook(book, read_only=True)
    used = [(ws.title, ws.max_row or 1) for ws in wb.worksheets]
    wb.close()
    with zipfile.ZipFile(book) as src:
        text = src.read("xl/workbook.xml").decode("utf-8")
        seen: set[int] = set()

        def narrow(m):
            seen.add(int(m.group(2)))
            parts = []
            for ref in m.group(3).split(","):
                r = _RANGE.match(ref.strip())
                if r is None:
                    return m.group(0)
                sheet, col, first, last = r.group(1) or "", r.group(2), r.group(3), r.group(4) or r.group(3)
                parts.append(f"{sheet}${col}${first}:${col}${last}")
            return m.group(1) + ",".join(parts) + m.group(4)
        text = _AREA.sub(narrow, text)
        added = "".join(f'<definedName name="_xlnm.Print_Area" localSheetId="{k}">'
                        f"'{title.replace(chr(39), chr(39) * 2)}'!$A$1:$A${rows}</definedName>"
                        for k, (title, rows) in enumerate(used) if k not in seen)
        if added:
            text = text.replace("</definedNames>", added + "</definedNames>") if "</definedNames>" in text \
                else text.replace("</sheets>", "</sheets><definedNames>" + added + "</definedNames>")
        with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
            for item in src.infolist():
                data = text.encode("utf-8") if item.filename == "xl/workbook.xml" else src.read(item)
                dst.writestr(item, data)
    return out


def sideways_pages(pages, first_column_pages) -> dict[str, tuple[int, int]]:
    """{sheet: (its pages, the pages of its first column alone)} for each sheet printed on more pages than its
    first column alone (:func:`first_column_copy`): its right-hand columns went onto further pages."""
    def count(names):
        out: dict[str, int] = {}
        for name in names:
            out[name] = out.get(name, 0) + 1
        return out
    whole, first = count(page_sheets(pages)), count(page_sheets(first_column_pages))
    return {name: (n, first.get(name, 0)) for name, n in whole.items() if n > first.get(name, 0)}


printed_texts = _printed_texts
found = _found
