"""An error in an impact ratio cell shows as that error in the lowest ratio and the cells after it, not as the
words "not computable (see the table)".

Why: COUNT ignores error values in a range and ISNUMBER of an error is FALSE (OpenFormula 1.2, part 2, COUNT and
ISNUMBER; Excel and LibreOffice Calc alike), so a guard written with them turned an error among the ratios into
words. In an app without trueband's functions the ratio cells are #NAME?; the lowest ratio then said "an impact
ratio of this table is not computable", which is not what happened (LibreOffice showed exactly that, see
tests/test_study_libreoffice.py::test_libreoffice_recomputes_the_standard_formulas_to_the_same_values). MIN over
a range passes an error on (same sources), so the lowest ratio counts the words among the ratios (ISTEXT) and
otherwise takes MIN, and the cells after it test ISTEXT instead of ISNUMBER. Checked here with trueband's engine;
that LibreOffice test checks LibreOffice.
"""

from __future__ import annotations

from openpyxl import load_workbook

from test_study_impact import SETUP, find_row, sheet_rows, table
from test_study_setup import write_book
from trueband.bridge.engine.recalc import recalculate
from trueband.bridge.study.build import make_study
from trueband.bridge.study.sheets.impact import RATIO_MISSING, RATIO_MISSING_ALL


def test_an_error_among_the_ratios_shows_as_that_error_not_as_not_computable(tmp_path):
    header, rows = table(n=160)
    result = make_study(write_book(tmp_path / "d.xlsx", header, rows, SETUP), tmp_path / "study.xlsx")
    sheet, coord = result.cells["Sex:min_ratio"]
    wb = load_workbook(result.path)
    values = load_workbook(result.path, data_only=True)[sheet]
    ws = wb[sheet]
    lowest = ws[coord]
    # the table's last group rows are just above the lowest ratio (one blank row between); take a group's ratio
    broken = next(ws.cell(r, lowest.column) for r in (lowest.row - 2, lowest.row - 3)
                  if isinstance(values.cell(r, lowest.column).value, float))
    broken.value = "=NA()"   # as an app without trueband's functions would show it (there: #NAME?)
    wb.save(result.path)
    recalculate(result.path, in_place=True, all_formulas=True)

    after = load_workbook(result.path, data_only=True)
    impact = after[sheet]
    assert impact[coord].value == "#N/A"   # was: "not computable: " + RATIO_MISSING
    rows_ = sheet_rows(after, sheet)
    top = find_row(rows_, "The lowest impact ratios")
    sex = find_row(rows_, "Sex", start=top)
    eth = find_row(rows_, "Ethnicity", start=top)
    assert rows_[sex][1] == "#N/A" and rows_[sex][2] == "#N/A"   # its group: was "" (ISNUMBER of an error)
    # the other column is untouched: its lowest ratio and group are still figures and a label
    assert isinstance(rows_[eth][1], float) and rows_[eth][2] in ("X", "Y", "Z")
    for key in ("min_ratio", "min_ratio_where"):   # the lowest of all columns and where: was words and ""
        s, c = result.cells[key]
        assert after[s][c].value == "#N/A", key
    shown = {str(v) for r in rows_ for v in r if v is not None}
    assert not any(RATIO_MISSING in v or RATIO_MISSING_ALL in v for v in shown)
