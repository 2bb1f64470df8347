"""Generate the scoring workbook of the recalculation benchmark (invented demo data).

Osterfell Harbour Logistics (invented) scores applicants for cargo dispatch
coordinator posts on a test of ``--items`` 0/1 items. Sheet ``Scores``:

======  ==============================================================
column  content
======  ==============================================================
A       applicant id (number)
B..K    item scores 0/1 (10 items by default)
L       total ``=SUM(B2:K2)``
M       z score ``=(L2-$Q$1)/$Q$2``
N       decision ``=IF(M2>=1,"shortlist","review")``
O       lower 95 % confidence limit of the total:
        standard twin ``=L2-1.959963984540054*$Q$2*SQRT(1-$Q$3)``,
        registered twin ``=SCORE_CI(L2,$Q$2,$Q$3,"lower")``
Q1:Q3   mean ``=AVERAGE(L2:Ln)``, sd ``=STDEV(L2:Ln)``, reliability 0.8
======  ==============================================================

The XML is written directly (no spreadsheet library) so a full-height
sheet of 1,048,576 rows takes seconds; formulas are written one per cell
without cached values, as libraries such as openpyxl write them
(``--shared`` writes each column as one shared formula instead, as desktop
spreadsheet apps do).

Usage::

    python bench/make_scoring_book.py ROWS OUT.xlsx [--registered] [--shared] [--items 10]
"""

from __future__ import annotations

import argparse
import zipfile
from pathlib import Path

import numpy as np

from trueband.bridge.workbook.cells import MAX_ROW

CONTENT_TYPES = b"""<?xml version="1.0" encoding="UTF-8" standalone="yes"?>
<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types"><Default Extension="rels" ContentType="application/vnd.openxmlformats-package.relationships+xml"/><Default Extension="xml" ContentType="application/xml"/><Override PartName="/xl/workbook.xml" ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.sheet.main+xml"/><Override PartName="/xl/worksheets/sheet1.xml" ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"/><Override PartName="/xl/styles.xml" ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.styles+xml"/></Types>"""
ROOT_RELS = b"""<?xml version="1.0" encoding="UTF-8" standalone="yes"?>
<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships"><Relationship Id="rId1" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/officeDocument" Target="xl/workbook.xml"/></Relationships>"""
WORKBOOK = b"""<?xml version="1.0" encoding="UTF-8" standalone="yes"?>
<workbook xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main" xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/relationships"><sheets><sheet name="Scores" sheetId="1" r:id="rId1"/></sheets><calcPr calcId="191029"/></workbook>"""
WORKBOOK_RELS = b"""<?xml version="1.0" encoding="UTF-8" standalone="yes"?>
<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships"><Relationship Id="rId1" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/worksheet" Target="worksheets/sheet1.xml"/><Relationship Id="rId2" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/styles" Target="styles.xml"/></Relationships>"""
STYLES = b"""<?xml version="1.0" encoding="UTF-8" standalone="yes"?>
<styleSheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"><fonts count="1"><font><sz val="11"/><name val="Calibri"/></font></fonts><fills count="2"><fill><patternFill patternType="none"/></fill><fill><patternFill patternType="gray125"/></fill></fills><borders count="1"><border><left/><right/><top/><bottom/><diagonal/></border></borders><cellStyleXfs count="1"><xf numFmtId="0" fontId="0" fillId="0" borderId="0"/></cellStyleXfs><cellXfs count="1"><xf numFmtId="0" fontId="0" fillId="0" borderId="0" xfId="0"/></cellXfs></styleSheet>"""


def _letters(index: int) -> str:
    out = ""
    while index:
        index, rem = divmod(index - 1, 26)
        out = chr(65 + rem) + out
    return out


def sheet_xml(rows: int, *, items: int = 10, registered: bool = False, shared: bool = False, seed: int = 7) -> bytes:
    """The worksheet part: ``rows`` rows in all (a header row and rows - 1 applicants)."""
    rng = np.random.default_rng(seed)
    n = rows - 1
    ability = rng.normal(size=n)
    difficulty = np.linspace(-1.5, 1.5, items)
    answers = (rng.random((n, items)) < 1 / (1 + np.exp(-(ability[:, None] - difficulty)))).astype(int)
    item_cols = [_letters(2 + k) for k in range(items)]
    c_total, c_z, c_if, c_ci = (_letters(2 + items + k) for k in range(4))
    c_stats = _letters(2 + items + 5)
    last = rows
    header_cells = ["id"] + [f"item{k + 1}" for k in range(items)] + ["total", "z", "decision", "lower95"]
    out = [b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
           b'<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'
           + f'<dimension ref="A1:{c_stats}{last}"/>'.encode() + b"<sheetData>"]
    head = "".join(f'<c r="{_letters(k + 1)}1" t="inlineStr"><is><t>{h}</t></is></c>' for k, h in enumerate(header_cells))
    stats = (f'<c r="{c_stats}1"><f>AVERAGE({c_total}2:{c_total}{last})</f></c>')
    out.append(f'<row r="1">{head}{stats}</row>'.encode())
    if registered:
        ci = f'SCORE_CI({c_total}{{r}},${c_stats}$2,${c_stats}$3,"lower")'
    else:
        ci = f"{c_total}{{r}}-1.959963984540054*${c_stats}$2*SQRT(1-${c_stats}$3)"
    formulas = [
        f"SUM({item_cols[0]}{{r}}:{item_cols[-1]}{{r}})",
        f"({c_total}{{r}}-${c_stats}$1)/${c_stats}$2",
        f'IF({c_z}{{r}}&gt;=1,"shortlist","review")',
        ci,
    ]
    fcols = [c_total, c_z, c_if, c_ci]
    chunk = []
    for i in range(n):
        r = i + 2
        cells = [f'<c r="A{r}"><v>{1000 + i}</v></c>']
        row_answers = answers[i]
        cells += [f'<c r="{item_cols[k]}{r}"><v>{row_answers[k]}</v></c>' for k in range(items)]
        for k, (col, f) in enumerate(zip(fcols, formulas)):
            if shared:
                if r == 2:
                    cells.append(f'<c r="{col}{r}"><f t="shared" ref="{col}2:{col}{last}" si="{k}">'
                                 f'{f.format(r=r)}</f></c>')
                else:
                    cells.append(f'<c r="{col}{r}"><f t="shared" si="{k}"/></c>')
            else:
                cells.append(f'<c r="{col}{r}"><f>{f.format(r=r)}</f></c>')
        if r == 2:
            cells.append(f'<c r="{c_stats}2"><f>STDEV({c_total}2:{c_total}{last})</f></c>')
        elif r == 3:
            cells.append(f'<c r="{c_stats}3"><v>0.8</v></c>')
        chunk.append(f'<row r="{r}">{"".join(cells)}</row>')
        if len(chunk) >= 10000:
            out.append("".join(chunk).encode())
            chunk = []
    out.append("".join(chunk).encode())
    out.append(b"</sheetData></worksheet>")
    return b"".join(out)


def write_book(path: Path, rows: int, *, items: int = 10, registered: bool = False, shared: bool = False) -> Path:
    path = Path(path)
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED, compresslevel=1) as z:
        z.writestr("[Content_Types].xml", CONTENT_TYPES)
        z.writestr("_rels/.rels", ROOT_RELS)
        z.writestr("xl/workbook.xml", WORKBOOK)
        z.writestr("xl/_rels/workbook.xml.rels", WORKBOOK_RELS)
        z.writestr("xl/styles.xml", STYLES)
        z.writestr("xl/worksheets/sheet1.xml", sheet_xml(rows, items=items, registered=registered, shared=shared))
    return path


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("rows", type=int, help=f"rows in the sheet, header included (at most {MAX_ROW})")
    p.add_argument("out", type=Path)
    p.add_argument("--registered", action="store_true", help="the confidence limit through SCORE_CI")
    p.add_argument("--shared", action="store_true", help="write each formula column as one shared formula")
    p.add_argument("--items", type=int, default=10)
    a = p.parse_args(argv)
    if not 3 <= a.rows <= MAX_ROW:
        p.error(f"rows must be between 3 and {MAX_ROW}")
    write_book(a.out, a.rows, items=a.items, registered=a.registered, shared=a.shared)
    print(a.out)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
