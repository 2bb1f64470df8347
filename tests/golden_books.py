"""Golden workbooks, built by code at test time (no binary files in the repository).

Three kinds:

* :func:`features_book`: written with xlsxwriter, holding the parts real
  workbooks carry and the processor must keep byte for byte: a chart, an
  image, a comment, data validation, conditional formatting, defined names,
  an array formula, a second sheet, plus a pivot-cache-like extra part added
  to the package afterwards. ``macros=True`` makes an .xlsm with a
  ``vbaProject.bin`` part.
* :func:`formula_forms_book`: hand-written XML for what the libraries do not
  write: shared formulas (one master, dependents), registered functions in the
  forms other spreadsheet apps save unknown functions in (``_xludf.`` prefix,
  lower case), cross-sheet and defined-name references (global and
  sheet-local), blanks and text in ranges, error inputs, a cycle, a
  full-column reference, an array formula, rich-text and escaped shared
  strings, a cell written without ``r``.
* :func:`unusable_books`: files the processor must refuse, each with the
  words its one-line message must contain.

:func:`handmade_package` is the general builder (sheets as ``<sheetData>``
rows); other test modules may build their own cases with it. The scenario is
the invented Osterfell Harbour Logistics hiring cargo dispatch coordinators.
"""

from __future__ import annotations

import shutil
import struct
import zipfile
import zlib
from pathlib import Path
from typing import Mapping, Sequence
from xml.sax.saxutils import escape, quoteattr

NS = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
NS_R = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships/"
CT_SHEET = "application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"
CT_WORKBOOK = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet.main+xml"
CT_WORKBOOK_MACRO = "application/vnd.ms-excel.sheet.macroEnabled.main+xml"

#: The pivot-cache-like part added to the features book (kept byte-identical by every write).
EXTRA_PART = "xl/pivotCache/pivotCacheDefinition1.xml"
EXTRA_PART_BYTES = (b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
                    b'<pivotCacheDefinition xmlns="' + NS.encode() + b'" refreshOnLoad="0" recordCount="4">'
                    b'<cacheSource type="worksheet"><worksheetSource ref="A1:C5" sheet="Applicants"/></cacheSource>'
                    b'<cacheFields count="1"><cacheField name="Group" numFmtId="0"><sharedItems count="2">'
                    b'<s v="Group A"/><s v="Group B"/></sharedItems></cacheField></cacheFields>'
                    b'</pivotCacheDefinition>')
#: Bytes of the stand-in macro part (any bytes do: the processor must carry them unchanged).
VBA_BYTES = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(range(256)) * 8


# ------------------------------------------------------------------ general builders


def write_zip(path: str | Path, parts: Mapping[str, bytes], *, stored: Sequence[str] = ()) -> Path:
    """A zip with the given entries in order (``stored`` names are written without compression)."""
    path = Path(path)
    with zipfile.ZipFile(path, "w") as zf:
        for name, data in parts.items():
            method = zipfile.ZIP_STORED if name in stored else zipfile.ZIP_DEFLATED
            zf.writestr(zipfile.ZipInfo(name, date_time=(2026, 3, 2, 9, 30, 0)), data, compress_type=method)
    return path


def cell_xml(ref: str, value=None, *, formula: str | None = None, t: str | None = None, s: int | None = None,
             f_attrs: str = "") -> str:
    """One ``<c>`` element as another app writes it; ``value`` is written as the cached ``<v>``."""
    attrs = f' r="{ref}"' + (f' s="{s}"' if s else "") + (f' t="{t}"' if t else "")
    inner = ""
    if formula is not None or f_attrs:
        inner += f"<f{f_attrs}>{escape(formula)}</f>" if formula else f"<f{f_attrs}/>"
    if value is not None:
        if isinstance(value, bool):
            value = "1" if value else "0"
        inner += f"<v>{escape(str(value))}</v>"
    return f"<c{attrs}>{inner}</c>" if inner else f"<c{attrs}/>"


def row_xml(r: int, cells: Sequence[str], extra: str = "") -> str:
    return f'<row r="{r}"{extra}>' + "".join(cells) + "</row>"


def sheet_part(rows: Sequence[str], *, dimension: str | None = None, after: str = "") -> bytes:
    """A worksheet part from row elements; ``after`` is XML placed after ``</sheetData>``."""
    dim = f'<dimension ref="{dimension}"/>' if dimension else ""
    return (f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
            f'<worksheet xmlns="{NS}" xmlns:r="{NS_R}">{dim}'
            f'<sheetViews><sheetView workbookViewId="0"/></sheetViews><sheetFormatPr defaultRowHeight="15"/>'
            f'<sheetData>{"".join(rows)}</sheetData>{after}'
            f'<pageMargins left="0.7" right="0.7" top="0.75" bottom="0.75" header="0.3" footer="0.3"/>'
            f"</worksheet>").encode()


STYLES = (b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
          b'<styleSheet xmlns="' + NS.encode() + b'"><fonts count="2"><font><sz val="11"/><name val="Calibri"/></font>'
          b'<font><b/><sz val="11"/><name val="Calibri"/></font></fonts>'
          b'<fills count="2"><fill><patternFill patternType="none"/></fill><fill><patternFill patternType="gray125"/>'
          b'</fill></fills><borders count="1"><border><left/><right/><top/><bottom/><diagonal/></border></borders>'
          b'<cellStyleXfs count="1"><xf numFmtId="0" fontId="0" fillId="0" borderId="0"/></cellStyleXfs>'
          b'<cellXfs count="3"><xf numFmtId="0" fontId="0" fillId="0" borderId="0" xfId="0"/>'
          b'<xf numFmtId="0" fontId="1" fillId="0" borderId="0" xfId="0" applyFont="1"/>'
          b'<xf numFmtId="2" fontId="0" fillId="0" borderId="0" xfId="0" applyNumberFormat="1"/></cellXfs>'
          b'<cellStyles count="1"><cellStyle name="Normal" xfId="0" builtinId="0"/></cellStyles></styleSheet>')


def handmade_package(path: str | Path, sheets: Sequence[tuple[str, bytes]], *,
                     shared_strings: Sequence[str] | bytes | None = None,
                     defined_names: Sequence[tuple[str, str, int | None]] = (),
                     states: Mapping[str, str] | None = None, calc_pr: str = '<calcPr calcId="191029"/>',
                     calc_chain: bool = False, macros: bool = False,
                     extra_parts: Mapping[str, bytes] | None = None) -> Path:
    """A workbook package from hand-written sheet parts.

    ``defined_names`` are (name, text, localSheetId or None); ``shared_strings``
    a list (written plainly) or the raw part bytes; ``calc_chain`` adds an
    ``xl/calcChain.xml`` listing every formula cell; ``extra_parts`` are
    added as they are (with a default content type).
    """
    states = dict(states or {})
    overrides = []
    rels = []
    sheet_els = []
    parts: dict[str, bytes] = {}
    for i, (name, xml) in enumerate(sheets, start=1):
        state = states.get(name)
        sheet_els.append(f"<sheet name={quoteattr(name)} sheetId=\"{i}\"" + (f' state="{state}"' if state else "")
                         + f' r:id="rId{i}"/>')
        rels.append(f'<Relationship Id="rId{i}" Type="{REL}worksheet" Target="worksheets/sheet{i}.xml"/>')
        overrides.append(f'<Override PartName="/xl/worksheets/sheet{i}.xml" ContentType="{CT_SHEET}"/>')
        parts[f"xl/worksheets/sheet{i}.xml"] = xml
    n = len(sheets)
    rels.append(f'<Relationship Id="rId{n + 1}" Type="{REL}styles" Target="styles.xml"/>')
    overrides.append('<Override PartName="/xl/styles.xml" '
                     'ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.styles+xml"/>')
    parts["xl/styles.xml"] = STYLES
    if shared_strings is not None:
        if isinstance(shared_strings, bytes):
            sst = shared_strings
        else:
            sst = (f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<sst xmlns="{NS}" '
                   f'count="{len(shared_strings)}" uniqueCount="{len(shared_strings)}">'
                   + "".join(f'<si><t xml:space="preserve">{escape(s)}</t></si>' for s in shared_strings)
                   + "</sst>").encode()
        parts["xl/sharedStrings.xml"] = sst
        rels.append(f'<Relationship Id="rId{n + 2}" Type="{REL}sharedStrings" Target="sharedStrings.xml"/>')
        overrides.append('<Override PartName="/xl/sharedStrings.xml" ContentType="application/'
                         'vnd.openxmlformats-officedocument.spreadsheetml.sharedStrings+xml"/>')
    if calc_chain:
        import re
        cells = []
        for i, (_, xml) in enumerate(sheets, start=1):
            for m in re.finditer(rb'<c r="([A-Z]+[0-9]+)"[^>]*><f', xml):
                cells.append(f'<c r="{m.group(1).decode()}" i="{i}"/>')
        parts["xl/calcChain.xml"] = (f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
                                     f'<calcChain xmlns="{NS}">{"".join(cells)}</calcChain>').encode()
        rels.append(f'<Relationship Id="rId{n + 3}" Type="{REL}calcChain" Target="calcChain.xml"/>')
        overrides.append('<Override PartName="/xl/calcChain.xml" ContentType="application/'
                         'vnd.openxmlformats-officedocument.spreadsheetml.calcChain+xml"/>')
    if macros:
        parts["xl/vbaProject.bin"] = VBA_BYTES
        rels.append(f'<Relationship Id="rId{n + 4}" Type="http://schemas.microsoft.com/office/2006/relationships/'
                    f'vbaProject" Target="vbaProject.bin"/>')
    names = ""
    if defined_names:
        names = "<definedNames>" + "".join(
            f"<definedName name={quoteattr(nm)}" + (f' localSheetId="{loc}"' if loc is not None else "")
            + f">{escape(text)}</definedName>" for nm, text, loc in defined_names) + "</definedNames>"
    workbook = (f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
                f'<workbook xmlns="{NS}" xmlns:r="{NS_R}"><bookViews><workbookView/></bookViews>'
                f'<sheets>{"".join(sheet_els)}</sheets>{names}{calc_pr}</workbook>').encode()
    ct = (f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
          f'<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types">'
          f'<Default Extension="rels" ContentType="application/vnd.openxmlformats-package.relationships+xml"/>'
          f'<Default Extension="xml" ContentType="application/xml"/>'
          + ('<Default Extension="bin" ContentType="application/vnd.ms-office.vbaProject"/>' if macros else "")
          + f'<Override PartName="/xl/workbook.xml" ContentType="{CT_WORKBOOK_MACRO if macros else CT_WORKBOOK}"/>'
          + "".join(overrides) + "</Types>").encode()
    root_rels = (f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
                 f'<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">'
                 f'<Relationship Id="rId1" Type="{REL}officeDocument" Target="xl/workbook.xml"/>'
                 f"</Relationships>").encode()
    wb_rels = (f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
               f'<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">'
               + "".join(rels) + "</Relationships>").encode()
    ordered = {"[Content_Types].xml": ct, "_rels/.rels": root_rels, "xl/workbook.xml": workbook,
               "xl/_rels/workbook.xml.rels": wb_rels, **parts, **(extra_parts or {})}
    return write_zip(path, ordered)


# ------------------------------------------------------------------ the formula-forms book

#: Scores of the eight applicants in Scores!B2:B9 (None: no score; text: "absent").
SCORES = [31.0, 27.0, None, 35.0, "absent", 24.0, 29.0, 33.0]
SHARED = ["Applicant", "Score", "Band", "absent", "Group A", "Group B", "R&D <lab>", "Dispatch Knowledge Test"]


def _s(text: str) -> int:
    return SHARED.index(text)


def formula_forms_book(path: str | Path, *, calc_chain: bool = True, full_calc_on_load: bool = False) -> Path:
    """Hand-written workbook with every formula form the processor must read (see the module docstring).

    Sheet ``Scores`` (cached values as another app left them):

    * A1:C1 headers (shared strings, style 1 bold), A2:A9 applicant ids, B2:B9 :data:`SCORES`;
    * C2:C9 ``SCORE_BAND(B2,$B$2:$B$9,Settings!$B$1,Reliability)`` as a shared
      formula: master C2 (``ref="C2:C9"``, ``si="0"``), dependents C3:C9;
    * D2 ``_xludf.SEM(Settings!B1,Reliability)``, D3 ``sem(12,0.91)`` (lower case),
      D4 ``SUM(B:B)`` (full column), D5 ``1/0`` cached ``#DIV/0!`` (an error input),
      D6 ``D7+1`` and D7 ``D6+1`` (a cycle), D8 an array formula ``{=B2:B3*2}``
      over D8:D9 (D9 holds only its cached value), D10 a text result ``t="str"``,
      D11 a boolean result;
    * E2 a cell written without ``r`` (it is E2 by position), E3 an inline string,
      E4 a rich-text shared string, F2 a local-name reference ``=Cut*2``.

    Sheet ``Settings``: B1 sd 4.2, B2 reliability 0.88, B3 the text "R&D <lab>".
    Defined names: ``Reliability`` → ``Settings!$B$2`` (global), ``Cut`` → ``Settings!$B$1``
    local to ``Scores``, ``Cut`` → ``Settings!$B$2`` global.
    """
    rows = [row_xml(1, [cell_xml("A1", _s("Applicant"), t="s", s=1), cell_xml("B1", _s("Score"), t="s", s=1),
                        cell_xml("C1", _s("Band"), t="s", s=1), cell_xml("D1", _s("Dispatch Knowledge Test"), t="s")])]
    d_cells = {
        2: cell_xml("D2", 1.45, formula="_xludf.SEM(Settings!B1,Reliability)"),
        3: cell_xml("D3", "#NAME?", formula="sem(12,0.91)", t="e"),
        4: cell_xml("D4", 179, formula="SUM(B:B)"),
        5: cell_xml("D5", "#DIV/0!", formula="1/0", t="e"),
        6: cell_xml("D6", 0, formula="D7+1"),
        7: cell_xml("D7", 0, formula="D6+1"),
        8: cell_xml("D8", 62, formula="B2:B3*2", f_attrs=' t="array" ref="D8:D9"'),
        9: cell_xml("D9", 54),
    }
    for i, score in enumerate(SCORES):
        r = i + 2
        cells = [f'<c r="A{r}" t="inlineStr"><is><t>OHL-{100 + i}</t></is></c>']
        if score is None:
            cells.append(f'<c r="B{r}" s="2"/>')
        elif isinstance(score, str):
            cells.append(cell_xml(f"B{r}", _s(score), t="s"))
        else:
            cells.append(cell_xml(f"B{r}", int(score) if float(score).is_integer() else score, s=2))
        if r == 2:
            cells.append(cell_xml("C2", 2, formula="SCORE_BAND(B2,$B$2:$B$9,Settings!$B$1,Reliability)",
                                  f_attrs=' t="shared" ref="C2:C9" si="0"'))
        else:
            cells.append(cell_xml(f"C{r}", 1, f_attrs=' t="shared" si="0"'))
        cells.append(d_cells[r])
        if r == 2:
            cells.append('<c t="inlineStr"><is><t>no reference</t></is></c>')  # E2 by position
            cells.append(cell_xml("F2", 8.4, formula="Cut*2"))
        if r == 3:
            cells.append('<c r="E3" t="inlineStr"><is><t xml:space="preserve"> padded </t></is></c>')
        if r == 4:
            cells.append(cell_xml("E4", len(SHARED), t="s"))
        rows.append(row_xml(r, cells))
    rows.append(row_xml(10, [cell_xml("D10", "Group A", formula='IF(B2>30,"Group A","Group B")', t="str")]))
    rows.append(row_xml(11, [cell_xml("D11", True, formula="B2>30", t="b")]))
    scores = sheet_part(rows, dimension="A1:F11")
    settings = sheet_part([row_xml(1, [cell_xml("A1", 0, t="s"), cell_xml("B1", 4.2)]),
                           row_xml(2, [cell_xml("B2", 0.88)]),
                           row_xml(3, [cell_xml("B3", _s("R&D <lab>"), t="s")])], dimension="A1:B3")
    sst = ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
           f'<sst xmlns="{NS}" count="{len(SHARED) + 1}" uniqueCount="{len(SHARED) + 1}">'
           + "".join(f"<si><t>{escape(s)}</t></si>" for s in SHARED)
           # rich text with a phonetic guide, flattened to "Cargo dispatch"
           + '<si><r><rPr><b/></rPr><t>Cargo</t></r><r><t xml:space="preserve"> dispatch</t></r>'
             '<rPh sb="0" eb="1"><t>KA</t></rPh></si>'
           + "</sst>").encode()
    calc = '<calcPr calcId="191029"' + (' fullCalcOnLoad="1"' if full_calc_on_load else "") + "/>"
    return handmade_package(path, [("Scores", scores), ("Settings", settings)], shared_strings=sst,
                            defined_names=[("Reliability", "Settings!$B$2", None), ("Cut", "Settings!$B$1", 0),
                                           ("Cut", "Settings!$B$2", None)],
                            calc_pr=calc, calc_chain=calc_chain)


# ------------------------------------------------------------------ the features book


def tiny_png(width: int = 2, height: int = 2) -> bytes:
    """A valid PNG image (grey pixels), built with zlib."""
    def chunk(kind: bytes, data: bytes) -> bytes:
        return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)
    raw = b"".join(b"\x00" + b"\x80\x80\x80" * width for _ in range(height))
    return (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", struct.pack(">IIBBBBB", width, height, 8, 2, 0, 0, 0))
            + chunk(b"IDAT", zlib.compress(raw)) + chunk(b"IEND", b""))


#: The applicant table of the features book: (id, group, score).
APPLICANTS = [("OHL-201", "Group A", 31), ("OHL-202", "Group B", 27), ("OHL-203", "Group A", 35),
              ("OHL-204", "Group B", 24), ("OHL-205", "Group A", 29), ("OHL-206", "Group B", 33)]


def features_book(path: str | Path, *, macros: bool = False) -> Path:
    """An xlsxwriter workbook with a chart, an image, a comment, data validation, conditional formatting,
    defined names, an array formula and a pivot-cache-like extra part.

    Sheet ``Applicants``: A1:D1 headers (bold), A2:A7 ids, B2:B7 groups, C2:C7
    scores (:data:`APPLICANTS`), D2:D7 ``SCORE_BAND(C2,$C$2:$C$7,Settings!$B$1,Reliability)``
    (cached 0, as the library writes), E2 ``SUM(C2:C7)``, E3 the array formula
    ``{=MAX(C2:C7-1)}``; columns F and after are empty. Sheet ``Settings``: B1 sd 4.2,
    B2 reliability 0.88 (name ``Reliability``). With ``macros`` the file is
    an .xlsm carrying :data:`VBA_BYTES` as ``xl/vbaProject.bin``.
    """
    import xlsxwriter

    path = Path(path)
    tmp = path.with_name(path.stem + ".build" + path.suffix)
    wb = xlsxwriter.Workbook(str(tmp))
    bold = wb.add_format({"bold": True, "bg_color": "#DDEBF7"})
    ws = wb.add_worksheet("Applicants")
    settings = wb.add_worksheet("Settings")
    ws.write_row(0, 0, ["Applicant", "Group", "Score", "Band"], bold)
    for i, (ident, group, score) in enumerate(APPLICANTS, start=1):
        ws.write_string(i, 0, ident)
        ws.write_string(i, 1, group)
        ws.write_number(i, 2, score)
        ws.write_formula(i, 3, f"=SCORE_BAND(C{i + 1},$C$2:$C$7,Settings!$B$1,Reliability)")
    ws.write_formula("E2", "=SUM(C2:C7)", None, sum(a[2] for a in APPLICANTS))
    ws.write_array_formula("E3:E3", "{=MAX(C2:C7-1)}", None, 34)
    settings.write_string("A1", "sd")
    settings.write_number("B1", 4.2)
    settings.write_string("A2", "reliability")
    settings.write_number("B2", 0.88)
    wb.define_name("Reliability", "=Settings!$B$2")
    wb.define_name("Applicants!Pool", "=Applicants!$C$2:$C$7")
    ws.write_comment("C1", "Dispatch Knowledge Test, 40 items")
    ws.data_validation("C2:C7", {"validate": "integer", "criteria": "between", "minimum": 0, "maximum": 40})
    ws.conditional_format("C2:C7", {"type": "cell", "criteria": ">=", "value": 30, "format": bold})
    chart = wb.add_chart({"type": "column"})
    chart.add_series({"categories": "=Applicants!$A$2:$A$7", "values": "=Applicants!$C$2:$C$7", "name": "Score"})
    ws.insert_chart("H2", chart)
    png = path.with_name(path.stem + ".logo.png")
    png.write_bytes(tiny_png())
    ws.insert_image("H20", str(png))
    if macros:
        vba = path.with_name(path.stem + ".vbaProject.bin")
        vba.write_bytes(VBA_BYTES)
        wb.add_vba_project(str(vba))
    wb.close()
    # the extra part, with its content type, as a pivot cache would be carried
    with zipfile.ZipFile(tmp) as src, zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as dst:
        for info in src.infolist():
            data = src.read(info)
            if info.filename == "[Content_Types].xml":
                data = data.replace(b"</Types>", b'<Override PartName="/' + EXTRA_PART.encode() + b'" ContentType="'
                                    b'application/vnd.openxmlformats-officedocument.spreadsheetml.'
                                    b'pivotCacheDefinition+xml"/></Types>')
            dst.writestr(info, data)
        dst.writestr(zipfile.ZipInfo(EXTRA_PART, date_time=(2026, 3, 2, 9, 30, 0)), EXTRA_PART_BYTES,
                     compress_type=zipfile.ZIP_DEFLATED)
    tmp.unlink()
    png.unlink()
    if macros:
        vba.unlink()
    return path


# ------------------------------------------------------------------ unusable files


def _ole2(streams: Sequence[str]) -> bytes:
    """The start of a compound file: its signature, a header sector and directory entries with these names."""
    header = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(16) + b"\x3e\x00\x03\x00\xfe\xff\x09\x00"
    header += bytes(512 - len(header))
    entries = b""
    for name in ["Root Entry", *streams]:
        raw = name.encode("utf-16-le") + b"\x00\x00"
        entries += raw + bytes(64 - len(raw)) + struct.pack("<H", len(raw)) + bytes(62)
    return header + entries + bytes((-len(entries)) % 512)


def zip_bomb(path: str | Path, megabytes: int = 64) -> Path:
    """A package-shaped zip whose sheet part expands about a thousand times (zeros)."""
    good = formula_forms_book(Path(path).with_name("bomb-base.xlsx"))
    with zipfile.ZipFile(good) as src:
        parts = {n: src.read(n) for n in src.namelist()}
    good.unlink()
    parts["xl/worksheets/sheet2.xml"] = b"<" + b" " * (megabytes * 1024 * 1024)
    return write_zip(path, parts)


def corrupt_crc(path: str | Path) -> Path:
    """A valid workbook with one byte of a sheet part's compressed data changed (its CRC fails)."""
    path = formula_forms_book(path)
    with zipfile.ZipFile(path) as zf:
        info = zf.getinfo("xl/worksheets/sheet1.xml")
    data = bytearray(path.read_bytes())
    with path.open("rb") as fh:
        fh.seek(info.header_offset + 26)
        name_len, extra_len = struct.unpack("<HH", fh.read(4))
    start = info.header_offset + 30 + name_len + extra_len
    data[start + info.compress_size // 2] ^= 0x55
    path.write_bytes(bytes(data))
    return path


def unusable_books(folder: str | Path) -> dict[str, tuple[Path, str]]:
    """Files to refuse: case name → (path, a word the one-line message must contain)."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    out: dict[str, tuple[Path, str]] = {}

    p = folder / "old-binary.xlsx"
    p.write_bytes(_ole2(["Workbook", "\x05SummaryInformation"]))
    out["old binary workbook"] = (p, ".xls")

    p = folder / "password.xlsx"
    p.write_bytes(_ole2(["EncryptionInfo", "EncryptedPackage", "\x06DataSpaces"]))
    out["encrypted workbook"] = (p, "password")

    p = folder / "spreadsheet.ods"
    with zipfile.ZipFile(p, "w") as zf:
        zf.writestr("mimetype", "application/vnd.oasis.opendocument.spreadsheet", compress_type=zipfile.ZIP_STORED)
        zf.writestr("content.xml", "<office:document-content/>")
        zf.writestr("META-INF/manifest.xml", "<manifest:manifest/>")
    renamed = folder / "spreadsheet-renamed.xlsx"
    shutil.copy(p, renamed)
    out["OpenDocument spreadsheet"] = (p, "OpenDocument")
    out["OpenDocument renamed .xlsx"] = (renamed, "OpenDocument")

    p = folder / "applicants-csv.xlsx"
    p.write_text("Applicant,Score\nOHL-101,31\nOHL-102,27\n")
    out["CSV renamed"] = (p, "CSV")

    p = folder / "noise.xlsx"
    p.write_bytes(bytes((i * 73 + 41) % 256 for i in range(4096)))
    out["random bytes"] = (p, "not a zip")

    p = folder / "empty.xlsx"
    p.write_bytes(b"")
    out["empty file"] = (p, "empty")

    out["bad CRC"] = (corrupt_crc(folder / "bad-crc.xlsx"), "damaged")

    good = formula_forms_book(folder / "to-truncate.xlsx")
    p = folder / "truncated.xlsx"
    p.write_bytes(good.read_bytes()[: good.stat().st_size // 2])
    good.unlink()
    out["truncated zip"] = (p, "damaged")

    out["zip bomb"] = (zip_bomb(folder / "bomb.xlsx"), "zip bomb")

    p = folder / "no-workbook.xlsx"
    write_zip(p, {"[Content_Types].xml": b'<Types xmlns="http://schemas.openxmlformats.org/package/2006/'
                                         b'content-types"/>',
                  "_rels/.rels": (f'<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/'
                                  f'relationships"><Relationship Id="rId1" Type="{REL}officeDocument" '
                                  f'Target="word/document.xml"/></Relationships>').encode(),
                  "word/document.xml": b"<document/>"})
    out["no workbook part"] = (p, "not a spreadsheet")

    p = folder / "workbook-part-missing.xlsx"
    write_zip(p, {"[Content_Types].xml": b'<Types xmlns="http://schemas.openxmlformats.org/package/2006/'
                                         b'content-types"/>',
                  "_rels/.rels": (f'<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/'
                                  f'relationships"><Relationship Id="rId1" Type="{REL}officeDocument" '
                                  f'Target="xl/workbook.xml"/></Relationships>').encode()})
    out["workbook part missing"] = (p, "no workbook part")

    p = folder / "plain.zip.xlsx"
    write_zip(p, {"readme.txt": b"Osterfell Harbour Logistics"})
    out["plain zip"] = (p, "not a spreadsheet package")

    p = folder / "open-elsewhere.xlsx"
    formula_forms_book(p)
    (folder / "~$open-elsewhere.xlsx").write_bytes(b"\x0bsomeone" + bytes(40))
    out["owner file of a desktop app"] = (p, "open in another program")

    p = folder / "open-in-calc.xlsx"
    formula_forms_book(p)
    (folder / ".~lock.open-in-calc.xlsx#").write_text("someone,host,host,01.03.2026 09:30,file:///home/someone;")
    out["LibreOffice lock file"] = (p, "open in another program")
    return out


# ------------------------------------------------------------------ LibreOffice


def libreoffice_csv(soffice: str, book: str | Path, outdir: str | Path, *, timeout: float = 180) -> dict[str, list[list[str]]]:
    """Every sheet of ``book`` as LibreOffice Calc shows it (headless CSV export), sheet name → rows.

    Runs with a private user profile in ``outdir`` so it neither needs nor
    touches a desktop profile; the CSV holds the formatted values Calc displays.
    """
    import csv
    import subprocess

    book = Path(book)
    outdir = Path(outdir)
    outdir.mkdir(parents=True, exist_ok=True)
    profile = (outdir / "lo-profile").resolve().as_uri()
    # 44 = comma, 34 = double quote, 76 = UTF-8; the last field (-1) exports every sheet to NAME-SHEET.csv
    filt = 'csv:Text - txt - csv (StarCalc):44,34,76,1,,0,false,true,false,false,false,-1'
    subprocess.run([soffice, f"-env:UserInstallation={profile}", "--headless", "--norestore",
                    "--convert-to", filt, "--outdir", str(outdir), str(book)],
                   check=True, capture_output=True, timeout=timeout)
    out = {}
    for csv_path in outdir.glob(f"{book.stem}-*.csv"):
        sheet = csv_path.stem[len(book.stem) + 1:]
        with csv_path.open(newline="", encoding="utf-8") as fh:
            out[sheet] = list(csv.reader(fh))
    if not out:
        raise RuntimeError(f"LibreOffice wrote no CSV for {book.name}")
    return out


def csv_cell(rows: list[list[str]], ref: str) -> str:
    """The text of one cell (``"C2"``) in rows from :func:`libreoffice_csv` (empty when outside)."""
    import re

    m = re.fullmatch(r"([A-Z]+)([0-9]+)", ref)
    col = 0
    for ch in m.group(1):
        col = col * 26 + ord(ch) - 64
    r = int(m.group(2)) - 1
    if r >= len(rows) or col - 1 >= len(rows[r]):
        return ""
    return rows[r][col - 1]


def libreoffice_resave(soffice: str, book: str | Path, outdir: str | Path, *, timeout: float = 180) -> Path:
    """``book`` opened and saved again as .xlsx by LibreOffice Calc (headless, private profile in ``outdir``).

    Calc rewrites the whole package on saving: its own shared-string table
    (inline strings become shared ones), styles, sheet parts and relationship
    ids, and it leaves out cells whose value is empty text.
    """
    import subprocess

    book = Path(book)
    outdir = Path(outdir)
    outdir.mkdir(parents=True, exist_ok=True)
    profile = (outdir / "lo-profile").resolve().as_uri()
    subprocess.run([soffice, f"-env:UserInstallation={profile}", "--headless", "--norestore",
                    "--convert-to", "xlsx:Calc MS Excel 2007 XML", "--outdir", str(outdir), str(book)],
                   check=True, capture_output=True, timeout=timeout)
    out = outdir / (book.stem + ".xlsx")
    if not out.exists():
        raise RuntimeError(f"LibreOffice did not save {book.name} as {out}")
    return out
