"""Issue 14: one cell never stops a workbook, and a formula the engine cannot evaluate keeps the value the file
holds (listed in the report), unless a trueband result feeds it.

The books are hand-written XML (as desktop apps save them); the data are invented.
"""

from __future__ import annotations

import zipfile

import pytest

from golden_books import cell_xml, handmade_package, row_xml, sheet_part

from trueband.bridge.engine import eval_cell
from trueband.bridge.engine.recalc import recalculate
from trueband.bridge.workbook import sheet_read
from trueband.bridge.workbook.package import open_workbook_package


def values_of(path) -> dict[tuple[str, str], object]:
    with open_workbook_package(path, check_lock=False) as pkg:
        return {(info.name, c.ref): c.value for info in pkg.worksheets
                for c in sheet_read.iter_cells(pkg.read(info.part), pkg.shared_strings)}


def sheet_bytes(path, part="xl/worksheets/sheet1.xml") -> bytes:
    with zipfile.ZipFile(path) as zf:
        return zf.read(part)


def book(tmp_path, rows, *, sheets=None, name="book.xlsx"):
    parts = [("Data", sheet_part(rows))] + list(sheets or [])
    return handmade_package(tmp_path / name, parts)


def test_unknown_function_keeps_its_stored_value_and_is_listed(tmp_path):
    # MYMACRO is a macro function (VBA): no engine can evaluate it; the app's value stays, and B1 reads it
    src = book(tmp_path, [row_xml(1, [cell_xml("A1", 42, formula="MYMACRO()"), cell_xml("B1", 43, formula="A1+1"),
                                      cell_xml("C1", 7, formula="SUBTOTAL(9,A1:B1)+Tbl[Total]")])])
    before = sheet_bytes(src)
    report = recalculate(src, tmp_path / "out.xlsx", all_formulas=True)
    got = values_of(report.output)
    assert got[("Data", "A1")] == 42 and got[("Data", "B1")] == 43
    assert got[("Data", "C1")] == 7  # a structured reference the parser cannot read: kept too
    assert {(k.sheet, k.cell) for k in report.kept} == {("Data", "A1"), ("Data", "C1")}
    assert not report.errors
    assert "kept 2 stored values it cannot evaluate: cells Data!A1, Data!C1" in report.summary()
    assert b'<c r="A1"><f>MYMACRO()</f><v>42</v></c>' in before
    assert b'<c r="A1"><f>MYMACRO()</f><v>42</v></c>' in sheet_bytes(report.output)


def test_a_cell_fed_by_a_trueband_result_is_an_error_not_a_stale_value(tmp_path):
    # A1 is a trueband result; B1 applies a macro function to it: its stored value may be stale, so #NAME?
    src = book(tmp_path, [row_xml(1, [cell_xml("A1", 1.0, formula="SEM(10,0.91)"),
                                      cell_xml("B1", 5, formula="MYMACRO(A1)"),
                                      cell_xml("C1", 9, formula="MYMACRO(2)")])])
    report = recalculate(src, tmp_path / "out.xlsx")
    got = values_of(report.output)
    assert got[("Data", "A1")] == pytest.approx(3.0)  # SEM = 10 * sqrt(1 - 0.91)
    assert str(got[("Data", "B1")]) == "#NAME?"
    assert [(e.cell, e.code) for e in report.errors] == [("B1", "#NAME?")]
    assert "MYMACRO" in report.errors[0].message
    assert got[("Data", "C1")] == 9 and not report.kept  # not needed, not evaluated


def test_no_stored_value_gives_the_error_and_a_line(tmp_path):
    src = book(tmp_path, [row_xml(1, [cell_xml("A1", formula="MYMACRO()")])])
    report = recalculate(src, tmp_path / "out.xlsx")
    assert str(values_of(report.output)[("Data", "A1")]) == "#NAME?"
    assert [(e.cell, e.code) for e in report.errors] == [("A1", "#NAME?")] and not report.kept


def test_three_d_reference_keeps_its_stored_value(tmp_path):
    other = [(f"S{i}", sheet_part([row_xml(1, [cell_xml("A1", i)])])) for i in (2, 3)]
    src = book(tmp_path, [row_xml(1, [cell_xml("A1", 5, formula="SUM(S2:S3!A1)")])], sheets=other)
    report = recalculate(src, tmp_path / "out.xlsx", all_formulas=True)
    assert values_of(report.output)[("Data", "A1")] == 5
    assert [(k.sheet, k.cell) for k in report.kept] == [("Data", "A1")]


@pytest.mark.parametrize("cell, expected", [
    # an ordinary formula reads a range where one value is wanted by implicit intersection: in column F
    # neither row range has a cell, so #VALUE!; in column B both give B1 (common practice: the spreadsheet
    # apps' implicit intersection, as the vendor's function reference describes it)
    ("F1", "#VALUE!"),
    ("B3", False),
])
def test_ranges_of_different_sizes_in_an_ordinary_formula(tmp_path, cell, expected):
    rows = [row_xml(1, [cell_xml("A1", 1), cell_xml("B1", 2), cell_xml("C1", 3), cell_xml("D1", 4)])]
    target = cell_xml(cell, 0, formula="A1:D1<>B1:C1")
    if cell == "F1":
        rows[0] = rows[0].replace("</row>", target + "</row>")
    else:
        rows.append(row_xml(3, [target]))
    src = book(tmp_path, rows)
    report = recalculate(src, tmp_path / "out.xlsx", all_formulas=True)
    got = values_of(report.output)[("Data", cell)]
    assert (str(got) if isinstance(got, str) else got) == expected


def test_ranges_of_different_sizes_in_an_array_formula(tmp_path):
    # {=A1:D1<>B1:C1} over F1:I1: A1<>B1, B1<>C1, then #N/A where the smaller range has no cell (common
    # practice: array arithmetic of the spreadsheet apps)
    rows = [row_xml(1, [cell_xml("A1", 1), cell_xml("B1", 2), cell_xml("C1", 2), cell_xml("D1", 4),
                        cell_xml("F1", 0, formula="A1:D1<>B1:C1", t=None, f_attrs=' t="array" ref="F1:I1"'),
                        cell_xml("G1", 0), cell_xml("H1", 0), cell_xml("I1", 0)])]
    src = book(tmp_path, rows)
    report = recalculate(src, tmp_path / "out.xlsx", all_formulas=True)
    got = values_of(report.output)
    assert [got[("Data", c)] for c in ("F1", "G1")] == [True, False]
    assert [str(got[("Data", c)]) for c in ("H1", "I1")] == ["#N/A", "#N/A"]


def test_any_fault_of_one_cell_is_that_cell_error(tmp_path, monkeypatch):
    def broken(*args, **kwargs):
        raise RuntimeError("a fault deep in the evaluator")

    src = book(tmp_path, [row_xml(1, [cell_xml("A1", 2), cell_xml("B1", 1, formula="A1*2"),
                                      cell_xml("C1", 1, formula="A1+1")])])
    real = eval_cell._CellEval.operator

    def operator(self, node):
        if node.name == "*":
            broken()
        return real(self, node)

    monkeypatch.setattr(eval_cell._CellEval, "operator", operator)
    monkeypatch.setattr("trueband.bridge.engine.recalc.evaluate_run", broken)
    report = recalculate(src, tmp_path / "out.xlsx", all_formulas=True)
    got = values_of(report.output)
    assert str(got[("Data", "B1")]) == "#VALUE!" and got[("Data", "C1")] == 3
    assert [(e.cell, e.code) for e in report.errors] == [("B1", "#VALUE!")]
    assert "RuntimeError" in report.errors[0].message


def test_positions_beyond_an_array_result_are_the_error_na_not_text(tmp_path):
    # {=A1:A2*2} over C1:C3: the third cell is #N/A, an error value (t="e"), so ISNA reads it as one
    rows = [row_xml(1, [cell_xml("A1", 1), cell_xml("C1", 0, formula="A1:A2*2", f_attrs=' t="array" ref="C1:C3"')]),
            row_xml(2, [cell_xml("A2", 2), cell_xml("C2", 0)]), row_xml(3, [cell_xml("C3", 0)])]
    report = recalculate(book(tmp_path, rows), tmp_path / "out.xlsx", all_formulas=True)
    got = values_of(report.output)
    assert [got[("Data", c)] for c in ("C1", "C2")] == [2, 4]
    assert repr(got[("Data", "C3")]) == "ErrorValue('#N/A')"
    assert b'<c r="C3" t="e"><v>#N/A</v></c>' in sheet_bytes(report.output)


def test_a_sheet_local_name_read_from_another_sheet(tmp_path):
    # =Defines!Rate reads the name local to Defines (the parser drops the sheet; the engine keeps it)
    defines = ("Defines", sheet_part([row_xml(1, [cell_xml("A1", 0.25)])]))
    src = handmade_package(tmp_path / "names.xlsx",
                           [("Data", sheet_part([row_xml(1, [cell_xml("A1", 0, formula="Defines!Rate*4")])])), defines],
                           defined_names=[("Rate", "Defines!$A$1", 1)])
    report = recalculate(src, tmp_path / "out.xlsx", all_formulas=True)
    assert values_of(report.output)[("Data", "A1")] == 1.0 and not report.kept and not report.errors


def test_an_undefined_name_keeps_the_stored_value(tmp_path):
    src = book(tmp_path, [row_xml(1, [cell_xml("A1", "#NAME?", formula="SLOPE(A2:A3,Nowhere)", t="e")])])
    report = recalculate(src, tmp_path / "out.xlsx", all_formulas=True)
    assert str(values_of(report.output)[("Data", "A1")]) == "#NAME?"
    assert [k.reason for k in report.kept] == ["the name NOWHERE is not defined in the workbook"]


def test_implicit_intersection_in_ordinary_formulas(tmp_path):
    # Implicit intersection (common practice; Microsoft's "Implicit intersection operator: @" page describes
    # it): a range where one value is wanted reads the cell in the formula's row (or column); SUM's argument
    # A1:A5*B1:B5 is such a place outside an array formula, so in row 7 it is #VALUE!, while SUMPRODUCT and an
    # array formula take whole arrays (1*2 + 2*3 + 3*4 + 4*5 + 5*6 = 70).
    rows = [row_xml(r, [cell_xml(f"A{r}", r), cell_xml(f"B{r}", r + 1)]) for r in range(1, 6)]
    rows.append(row_xml(7, [cell_xml("C7", 0, formula="SUM(A1:A5*B1:B5)"),
                            cell_xml("D7", 0, formula="SUMPRODUCT(A1:A5*B1:B5)"),
                            cell_xml("E7", 0, formula="SUM(A1:A5*B1:B5)", f_attrs=' t="array" ref="E7"')]))
    rows[2] = rows[2].replace("</row>", cell_xml("C3", "x", formula='A:A&"/"&B:B', t="str")
                              + cell_xml("D3", 0, formula="ROUND(A:A*1.4,0)") + cell_xml("E3", 0, formula="B1:B5")
                              + cell_xml("F3", 0, formula="SUM(A1:A5*B1:B5)") + "</row>")
    report = recalculate(book(tmp_path, rows), tmp_path / "out.xlsx", all_formulas=True)
    got = values_of(report.output)
    assert str(got[("Data", "C7")]) == "#VALUE!"
    assert got[("Data", "D7")] == got[("Data", "E7")] == 70
    assert got[("Data", "C3")] == "3/4"
    assert got[("Data", "D3")] == 4  # ROUND(3 * 1.4, 0)
    assert got[("Data", "E3")] == 4  # B3
    assert got[("Data", "F3")] == 12  # A3 * B3
