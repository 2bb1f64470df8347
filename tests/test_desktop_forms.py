"""Package forms seen in workbooks saved by desktop spreadsheet apps (issue 14: never stop on a valid file).

Sources: ECMA-376 Part 1, 18.2.19 ``sheet`` (``r:id`` names the sheet's part) and 18.4.9 ``sst``; files of the
format's 2006 beta (namespace ``http://schemas.microsoft.com/office/excel/2006/2``) call a shared-string item
``sstItem`` (seen in the corpus ``../shared/corpus/desktop-saved``, Apache POI's test file saved by Excel 2007
beta). ElementTree, the standard library's XML parser, reads every file here.
"""

from __future__ import annotations

import zipfile

import pytest

import golden_books as gb
from trueband.bridge.engine.recalc import recalculate
from trueband.bridge.workbook.package import UnusableWorkbook, open_workbook_package
from trueband.bridge.workbook.shared_strings import parse_shared_strings


def _rewrite(src, dst, name, change):
    with zipfile.ZipFile(src) as a, zipfile.ZipFile(dst, "w") as b:
        for entry in a.namelist():
            data = a.read(entry)
            b.writestr(entry, change(data) if entry == name else data)
    return dst


def _book(tmp_path):
    rows = [gb.row_xml(1, [gb.cell_xml("A1", 0, t="s"), gb.cell_xml("B1", 2, formula="1+1")])]
    return gb.handmade_package(tmp_path / "book.xlsx", [("Data", gb.sheet_part(rows)), ("Other", gb.sheet_part([]))],
                               shared_strings=["Applicant"], defined_names=[("Cut", "Other!$A$1", 1)])


def test_a_sheet_entry_without_a_relationship_is_kept_and_skipped(tmp_path):
    # a macro sheet kept by its writer as <sheet ... r:id=""/>, with no part: the workbook is still valid
    src = _book(tmp_path)
    bad = _rewrite(src, tmp_path / "macro.xlsx", "xl/workbook.xml",
                   lambda wb: wb.replace(b"</sheets>", b'<sheet name="Module1" sheetId="9" state="veryHidden" r:id=""/>'
                                                       b"</sheets>"))
    with open_workbook_package(bad) as pkg:
        assert [(s.name, s.kind, s.part) for s in pkg.sheets][-1] == ("Module1", "without a part", "")
        assert [s.name for s in pkg.worksheets] == ["Data", "Other"]
    report = recalculate(bad, tmp_path / "out.xlsx", all_formulas=True)
    assert report.ok
    with zipfile.ZipFile(bad) as a, zipfile.ZipFile(report.output) as b:
        assert a.read("xl/workbook.xml") == b.read("xl/workbook.xml")
    broken = _rewrite(src, tmp_path / "broken.xlsx", "xl/workbook.xml", lambda wb: wb.replace(b'r:id="rId2"',
                                                                                              b'r:id="rId77"'))
    with pytest.raises(UnusableWorkbook, match="missing relationship 'rId77'"):  # a named one that is missing: refused
        open_workbook_package(broken)


@pytest.mark.parametrize("prefix", ["", "x:"])
def test_shared_string_items_of_the_2006_beta_are_read(prefix):
    ns = b"http://schemas.microsoft.com/office/excel/2006/2"
    p = prefix.encode()
    xml = (b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\r\n<' + p + b"sst xmlns" + (b":x" if p else b"")
           + b'="' + ns + b'" count="2"><' + p + b"sstItem><" + p + b"t>Lorem</" + p + b"t></" + p + b"sstItem><" + p
           + b"sstItem><" + p + b"t>a &amp; b</" + p + b"t></" + p + b"sstItem></" + p + b"sst>")
    assert parse_shared_strings(xml) == ["Lorem", "a & b"]
    assert parse_shared_strings(xml.replace(b"Lorem", b"Lor&#101;m")) == ["Lorem", "a & b"]  # through the parser
