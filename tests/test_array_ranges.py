"""Array formulas as other writers store them, and sheets that list a cell twice (issue 14, items 2a, 6 and 9).

Checked against openpyxl (a reference library: it writes the array formulas, ``ArrayFormula``, and
reads back each cell's value and type, ``data_type`` "e" for an error cell) and the format:
ECMA-376 Part 1, 18.3.1.40 ``f`` (an array formula's ``ref`` is the range its result fills; the other
cells of the range hold values only), 18.3.1.4 ``c`` (``t="e"`` an error value, ``t="str"`` a text
result). Spreadsheet apps fill the positions of an array range beyond the result's size with
``#N/A`` (common practice, as desktop apps show it).
"""

from __future__ import annotations

import zipfile

import openpyxl
import pytest
from openpyxl.worksheet.formula import ArrayFormula

import golden_books as gb
from trueband.bridge.cli import EXIT_FAILED, main
from trueband.bridge.engine.recalc import recalculate
from trueband.bridge.workbook import sheet_columns, sheet_edit, sheet_patch
from trueband.bridge.workbook.sheet_data import ErrorValue, SheetXmlError
from trueband.bridge.workbook.sheet_patch import CellUpdate


def _openpyxl_book(path):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Data"
    for i, v in enumerate([1, 2, 3, 4]):
        ws.cell(1, i + 1, v)
    ws["F1"] = ArrayFormula("F1:F4", "=TRANSPOSE(A1:D1)")  # F2:F4 are not written at all
    ws["G1"] = ArrayFormula("G1:G4", "=TRANSPOSE(A1:B1)")  # a result of 2 in a range of 4: #N/A beyond it
    ws["H1"] = "=ISERROR(G3)"
    wb.save(path)
    return path


def test_an_array_range_whose_other_cells_are_absent_is_written_in(tmp_path):
    # issue 14 item 2a: "cells not found in the sheet: F2, F3, F4" stopped the whole workbook
    src = _openpyxl_book(tmp_path / "arrays.xlsx")
    with zipfile.ZipFile(src) as z:
        before = z.read("xl/worksheets/sheet1.xml")
    assert b'r="F2"' not in before
    report = recalculate(src, tmp_path / "out.xlsx", all_formulas=True)
    ws = openpyxl.load_workbook(report.output, data_only=True)["Data"]  # reference reader
    assert [ws.cell(r, 6).value for r in range(1, 5)] == [1, 2, 3, 4]  # TRANSPOSE of 1..4, down a column
    with zipfile.ZipFile(report.output) as z:
        after = z.read("xl/worksheets/sheet1.xml")
    # the new cells sit in row and column order and the rest of the part is as it was
    assert after.index(b'<c r="F2">') < after.index(b'<c r="G2"') < after.index(b'<c r="F3">')
    head, tail = before.split(b"<sheetData>")[0], before.split(b"</sheetData>")[1]
    assert after.split(b"</sheetData>")[1] == tail
    # only the dimension's range changes, in whatever form the writer gave the element (openpyxl writes
    # <dimension ref="A1:H1"/> with lxml and <dimension ref="A1:H1" /> without)
    assert b'<dimension ref="A1:H1"' in head
    assert after.split(b"<sheetData>")[0] == head.replace(b'<dimension ref="A1:H1"', b'<dimension ref="A1:H4"')


def test_positions_beyond_an_array_result_are_error_cells(tmp_path):
    # issue 14 item 6: the #N/A beyond the result was written as the text "#N/A", so ISERROR was no longer TRUE
    src = _openpyxl_book(tmp_path / "arrays.xlsx")
    report = recalculate(src, tmp_path / "out.xlsx", all_formulas=True)
    ws = openpyxl.load_workbook(report.output, data_only=True)["Data"]
    assert [ws.cell(r, 7).value for r in range(1, 5)] == [1, 2, "#N/A", "#N/A"]
    assert [ws.cell(r, 7).data_type for r in range(1, 5)] == ["n", "n", "e", "e"]
    assert ws["H1"].value is True  # ISERROR(G3)
    again = recalculate(report.output, tmp_path / "again.xlsx", all_formulas=True)  # and it reads back as an error
    ws = openpyxl.load_workbook(again.output, data_only=True)["Data"]
    assert ws["G3"].data_type == "e" and ws["H1"].value is True


def test_text_in_an_array_range_keeps_its_form():
    # a desktop app writes the text of an array range's other cells as t="str" values: patched in that form,
    # only the value changes
    xml = gb.sheet_part([gb.row_xml(1, ['<c r="A1" t="str"><f t="array" ref="A1:A2">B1:B2</f><v>x</v></c>']),
                         gb.row_xml(2, ['<c r="A2" t="str"><v>y</v></c>'])])
    patched = sheet_patch.patch_values(xml, {"A1": "p", "A2": "q"})
    assert patched == xml.replace(b"<v>x</v>", b"<v>p</v>").replace(b"<v>y</v>", b"<v>q</v>")
    assert sheet_patch.patch_sheet(xml, {"A2": CellUpdate(ErrorValue("#N/A"))}) == xml.replace(
        b'<c r="A2" t="str"><v>y</v></c>', b'<c r="A2" t="e"><v>#N/A</v></c>')


def test_patch_or_add_values_adds_only_what_is_missing():
    xml = gb.sheet_part([gb.row_xml(1, [gb.cell_xml("A1", 1, formula="1"), gb.cell_xml("C1", 3)])],
                        dimension="A1:C1")
    out = sheet_edit.patch_or_add_values(xml, {"A1": 2.0, "B1": ErrorValue("#N/A"), "A2": "t"})
    assert b'<c r="A1"><f>1</f><v>2</v></c><c r="B1" t="e"><v>#N/A</v></c><c r="C1"><v>3</v></c>' in out
    assert b'<row r="2"><c r="A2" t="inlineStr"><is><t>t</t></is></c></row>' in out
    with pytest.raises(SheetXmlError, match="cells not found"):
        sheet_patch.patch_values(xml, {"B1": 1.0})  # the plain patcher still refuses


def _with_a_cell_twice(src, dst):
    with zipfile.ZipFile(src) as a, zipfile.ZipFile(dst, "w") as b:
        for name in a.namelist():
            data = a.read(name)
            if name == "xl/worksheets/sheet1.xml":
                data = data.replace(b'<c r="B1" t="n"><v>2</v></c>', b'<c r="B1" t="n"><v>2</v></c>'
                                                                    b'<c r="B1" t="n"><v>5</v></c>')
            b.writestr(name, data)
    return dst


@pytest.mark.parametrize("command", [["recalc", "--all"], ["check"]])
def test_a_sheet_that_lists_a_cell_twice_is_refused_in_one_line(tmp_path, capsys, command):
    # issue 14 item 9: the second B1 was taken silently (ECMA-376 Part 1, 18.3.1.4: a cell is one c element)
    bad = _with_a_cell_twice(_openpyxl_book(tmp_path / "arrays.xlsx"), tmp_path / "twice.xlsx")
    assert main([command[0], str(bad), *command[1:]]) == EXIT_FAILED
    err = capsys.readouterr().err.strip()
    assert "\n" not in err and "sheet 'Data'" in err and "cell B1 is listed twice" in err
    assert "fault in trueband" not in err


def test_the_column_reader_names_a_cell_listed_twice_in_any_pass():
    rows = [gb.row_xml(1, [gb.cell_xml("A1", 1), gb.cell_xml("B1", 2, formula="A1*2")]),
            gb.row_xml(2, [gb.cell_xml("A2", 1), '<c r="A2" t="inlineStr"><is><t>x</t></is></c>'])]
    with pytest.raises(SheetXmlError, match="cell A2 is listed twice"):
        sheet_columns.read_column_arrays(gb.sheet_part(rows))
    rows[1] = gb.row_xml(2, [gb.cell_xml("B2", 1, formula="1"), gb.cell_xml("B2", 1, formula="2")])
    with pytest.raises(SheetXmlError, match="cell B2 is listed twice"):
        sheet_columns.read_column_arrays(gb.sheet_part(rows))
