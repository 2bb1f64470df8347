"""Standard spreadsheet functions corrected in ``bridge/formulas/standard.py`` (issue 14), each case stating the
spreadsheet behaviour and where it is published; and the 1904 date system.

Sources: Microsoft's public function reference (support.microsoft.com, the page of each function, its
"Example" table), recalled from memory where marked; the OpenDocument OpenFormula standard (ISO/IEC 26300-2,
section 6 "Standard Functions"); ECMA-376 Part 1, 18.17.4.1 (the 1900 and 1904 date bases).
"""

from __future__ import annotations

import pytest

from golden_books import cell_xml, handmade_package, row_xml, sheet_part

from trueband.bridge.engine.expression import evaluate_expression
from trueband.bridge.engine.recalc import recalculate
from trueband.bridge.workbook import sheet_read
from trueband.bridge.workbook.package import open_workbook_package

CASES = [
    # FLOOR.MATH: Microsoft's FLOOR.MATH examples (from memory): -8.1,2 → -10; -5.5,2,-1 → -4; 24.3,5 → 20
    ("FLOOR.MATH(-23.5)", -24.0), ("FLOOR.MATH(-8.1,2)", -10.0), ("FLOOR.MATH(-5.5,2,-1)", -4.0),
    ("FLOOR.MATH(24.3,5)", 20.0), ("FLOOR.MATH(6.7)", 6.0), ("_xlfn.FLOOR.MATH(-23.5)", -24.0),
    # CEILING.MATH: Microsoft's CEILING.MATH examples (from memory): 24.3,5 → 25; 6.7 → 7; -8.1,2 → -8;
    # -5.5,2,-1 → -6
    ("CEILING.MATH(24.3,5)", 25.0), ("CEILING.MATH(6.7)", 7.0), ("CEILING.MATH(-8.1,2)", -8.0),
    ("CEILING.MATH(-5.5,2,-1)", -6.0), ("CEILING.MATH(-23.5)", -23.0),
    # FLOOR.PRECISE / CEILING.PRECISE / ISO.CEILING: Microsoft's examples (from memory); OpenFormula CEILING and
    # FLOOR with mode 0 round towards plus and minus infinity whatever the sign of the significance
    ("FLOOR.PRECISE(-3.2,-1)", -4.0), ("FLOOR.PRECISE(3.2,1)", 3.0), ("FLOOR.PRECISE(-3.2,1)", -4.0),
    ("FLOOR.PRECISE(3.2,-1)", 3.0), ("FLOOR.PRECISE(3.2)", 3.0), ("CEILING.PRECISE(4.3)", 5.0),
    ("CEILING.PRECISE(-4.3)", -4.0), ("CEILING.PRECISE(4.3,2)", 6.0), ("CEILING.PRECISE(4.3,-2)", 6.0),
    ("CEILING.PRECISE(-4.3,2)", -4.0), ("CEILING.PRECISE(-4.3,-2)", -4.0), ("ISO.CEILING(4.3)", 5.0),
    ("ISO.CEILING(-4.3)", -4.0), ("ISO.CEILING(4.3,2)", 6.0), ("ISO.CEILING(-4.3,-2)", -4.0),
    # ROUND family: OpenFormula ROUND rounds halves away from zero; the apps round the number as they show it,
    # to 15 significant digits (common practice; the cut-score case 0.049999999999999975 → 0.1)
    ("ROUND(0.049999999999999975,1)", 0.1), ("ROUND(1.005,2)", 1.01), ("ROUND(2.15,1)", 2.2),
    ("ROUND(-1.475,2)", -1.48), ("ROUND(21.5,-1)", 20.0), ("ROUND(626.3,-3)", 1000.0), ("ROUND(-2.5,0)", -3.0),
    # Microsoft's ROUNDUP / ROUNDDOWN examples (from memory)
    ("ROUNDUP(3.2,0)", 4.0), ("ROUNDUP(76.9,0)", 77.0), ("ROUNDUP(3.14159,3)", 3.142), ("ROUNDUP(-3.14159,1)", -3.2),
    ("ROUNDUP(31415.92654,-2)", 31500.0), ("ROUNDDOWN(3.2,0)", 3.0), ("ROUNDDOWN(76.9,0)", 76.0),
    ("ROUNDDOWN(3.14159,3)", 3.141), ("ROUNDDOWN(-3.14159,1)", -3.1), ("ROUNDDOWN(31415.92654,-2)", 31400.0),
    ("ROUNDUP(0.1+0.2,1)", 0.3),  # 0.30000000000000004 is shown as 0.3: nothing to round up
    # Microsoft's MROUND examples (from memory): 10,3 → 9; -10,-3 → -9; 1.3,0.2 → 1.4
    ("MROUND(10,3)", 9.0), ("MROUND(-10,-3)", -9.0), ("MROUND(1.3,0.2)", 1.4),
    # TRUNC: Microsoft's examples (from memory): 8.9 → 8; -8.9 → -8; 0.45 → 0
    ("TRUNC(8.9)", 8.0), ("TRUNC(-8.9)", -8.0), ("TRUNC(0.45)", 0.0),
    # N: OpenFormula N: a logical is 1 or 0; text 0 (Microsoft's N: "TRUE → 1")
    ("N(TRUE)", 1.0), ("N(FALSE)", 0.0), ('N("7")', 0.0), ("N(7)", 7.0),
    # MATCH, match type 1, in a sorted range with equal values: the apps' binary search ends on the last of
    # them (common practice); exact match (0) gives the first (Microsoft's MATCH page)
    ("MATCH(2,{1,2,2,2,3},1)", 4.0), ("MATCH(2,{1,2,2,2,3})", 4.0), ("MATCH(2,{1,2,2,2,3},0)", 2.0),
    ("MATCH(2.5,{1,2,2,3})", 3.0), ("MATCH(4,{1,3,5,7},1)", 2.0), ("MATCH(4,{7,5,3,1},-1)", 2.0),
    # a line break inside a string literal is part of the text (common practice)
    ('LEN("a\nb")', 3.0), ('"a\nb"', "a\nb"),
    # a run of unary signs applies each minus: OpenFormula 6.4.4 (prefix "-": the number of the operand, negated),
    # so a double minus turns a logical or numeric text into a number (the usual counting idiom; common practice);
    # the parser folds "--" into one unary plus, which left TRUE as TRUE and SUMPRODUCT counted nothing
    ("--TRUE", 1.0), ("--FALSE", 0.0), ('--"3"', 3.0), ("-+-2", 2.0), ("---2", -2.0), ("--2", 2.0),
    ('SUMPRODUCT(--({"A";"B";"B";"C"}="B"))', 2.0), ('SUMPRODUCT(--({1,2,3}>1),{10,20,30})', 50.0),
]


@pytest.mark.parametrize("formula, expected", CASES, ids=[c[0] for c in CASES])
def test_standard_function_as_spreadsheet_apps_give_it(formula, expected):
    got = evaluate_expression("=" + formula)
    if isinstance(expected, float):
        assert got == pytest.approx(expected, rel=1e-15, abs=1e-15)
    else:
        assert got == expected


def test_double_minus_of_text_that_is_no_number_is_value_error():
    # OpenFormula 6.4.4: the prefix minus converts its operand to a number; "abc" is not one (#VALUE!)
    from trueband.funcs.errors import TruebandError

    with pytest.raises(TruebandError) as info:
        evaluate_expression('=--"abc"')
    assert info.value.code == "#VALUE!"


def test_mround_of_opposite_signs_is_num():
    # Microsoft's MROUND example (from memory): MROUND(5,-2) is #NUM!
    from trueband.funcs.errors import TruebandError

    with pytest.raises(TruebandError) as info:
        evaluate_expression("=MROUND(5,-2)")
    assert info.value.code == "#NUM!"


def _book(tmp_path, cells, *, date1904: bool):
    path = handmade_package(tmp_path / "dates.xlsx", [("Dates", sheet_part([row_xml(1, cells)]))])
    if date1904:
        import zipfile

        with zipfile.ZipFile(path) as zf:
            parts = {n: zf.read(n) for n in zf.namelist()}
        parts["xl/workbook.xml"] = parts["xl/workbook.xml"].replace(
            b"<bookViews>", b'<workbookPr date1904="1"/><bookViews>')
        from golden_books import write_zip

        write_zip(path, parts)
    return path


@pytest.mark.parametrize("date1904, expected", [
    # ECMA-376 Part 1, 18.17.4.1: serial 1 is 1900-01-01 in the 1900 system and 1904-01-02 in the 1904 system;
    # DATE(2024,1,5) is 45296 in the 1900 system (Microsoft's DATE page counts 1900-01-01 as 1), 1,462 less in 1904
    (False, {"A1": "1900-01-01", "B1": 45296.0, "C1": 2024.0, "D1": 1900.0, "E1": "1.00", "F1": 45296.0}),
    (True, {"A1": "1904-01-02", "B1": 43834.0, "C1": 2024.0, "D1": 1904.0, "E1": "1.00", "F1": 43834.0}),
])
def test_the_1904_date_system(tmp_path, date1904, expected):
    cells = [cell_xml("A1", "x", formula='TEXT(1,"YYYY-MM-DD")', t="str"), cell_xml("B1", 0, formula="DATE(2024,1,5)"),
             cell_xml("C1", 0, formula="YEAR(B1)"), cell_xml("D1", 0, formula="YEAR(1)"),
             cell_xml("E1", "x", formula='TEXT(1,"0.00")', t="str"), cell_xml("F1", 0, formula='DATEVALUE("2024-01-05")')]
    src = _book(tmp_path, cells, date1904=date1904)
    with open_workbook_package(src) as pkg:
        assert pkg.date1904 is date1904
    report = recalculate(src, tmp_path / "out.xlsx", all_formulas=True)
    with open_workbook_package(report.output) as pkg:
        got = {c.ref: c.value for c in sheet_read.iter_cells(pkg.read(pkg.worksheets[0].part), pkg.shared_strings)}
    assert got == expected


def test_double_minus_over_a_range_in_a_recalculated_book(tmp_path):
    # the counting idiom SUMPRODUCT(--(range="B")) in a saved book (the engine's own tree, cell and filled-down
    # forms): OpenFormula 6.4.4 prefix minus on each logical; 2 of the 4 texts are "B" (counted by hand)
    words = [cell_xml(f"A{i}", w, t="inlineStr") for i, w in enumerate("ABBC", 1)]
    formulas_ = [cell_xml("B1", 0, formula='SUMPRODUCT(--(A1:A4="B"))'),
                 cell_xml("B2", 0, formula='SUMPRODUCT(--(A1:A4="B"),--(A1:A4<>""))'),
                 cell_xml("B3", 0, formula="--(A3=\"B\")"), cell_xml("B4", 0, formula="--(A4=\"B\")")]
    rows = [row_xml(i, [words[i - 1], formulas_[i - 1]]) for i in range(1, 5)]
    src = handmade_package(tmp_path / "signs.xlsx", [("Signs", sheet_part(rows))])
    report = recalculate(src, tmp_path / "out.xlsx", all_formulas=True)
    with open_workbook_package(report.output) as pkg:
        got = {c.ref: c.value for c in sheet_read.iter_cells(pkg.read(pkg.worksheets[0].part), pkg.shared_strings)}
    assert [got["B1"], got["B2"], got["B3"], got["B4"]] == [2.0, 2.0, 1.0, 0.0]
