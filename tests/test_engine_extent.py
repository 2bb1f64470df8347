"""ROWS, COLUMNS, COUNTBLANK and COUNTIF count a reference's whole extent (bridge/engine/extent.py).

The store reads a range only down to the last row its sheet uses; before the fix ``ROWS(A1:A10)`` and
``COLUMNS(A1:C2)`` were ``#VALUE!`` in trueband's recalculation (the library's ROWS/COLUMNS need its own
reference objects) and ``COUNTBLANK(A1:A10)`` missed the blank rows below the last used one.

* Single cells and filled-down runs against the size of the reference (a range's rows and columns are what
  the spreadsheet standard defines, ECMA-376 Part 1, 18.17.7.286 ROWS / 18.17.7.61 COLUMNS: "the number of
  rows/columns in a reference", common practice) and the blank count against counting the cells by hand.
* Against LibreOffice Calc (the ``soffice`` fixture, as in tests/test_engine_criteria.py): a workbook of such
  formulas recalculated by trueband shows the values Calc computes itself.
"""

from __future__ import annotations

import numpy as np
import pytest
from openpyxl import Workbook

from trueband.bridge.engine.eval_cell import evaluate_cell
from trueband.bridge.engine.eval_run import evaluate_run
from trueband.bridge.engine.graph import Run
from trueband.bridge.engine.store import CellStore
from trueband.bridge.engine.values import VectorUnsupported
from trueband.bridge.formulas.compile import compile_formula


def small_store() -> CellStore:
    """A1 1, A2 blank, A3 "x", B1 5, C2 "" (an empty text: blank for COUNTBLANK); nothing below row 3."""
    store = CellStore()
    store.add_sheet("S", {1: ([1, 2, 3], [1.0, None, "x"]), 2: ([1], [5.0]), 3: ([2], [""])})
    store.add_sheet("Other", {1: ([1], [2.0])})
    return store


# (formula, the value a spreadsheet app gives: counted by hand from small_store's cells)
CASES = [
    ("=ROWS(A1:A10)", 10.0), ("=COLUMNS(A1:C2)", 3.0), ("=ROWS($A$1:$A$10)", 10.0), ("=ROWS(A:A)", 1048576.0),
    ("=COLUMNS(1:1)", 16384.0), ("=ROWS(B2:D40)", 39.0), ("=COLUMNS(B2:D40)", 3.0), ("=ROWS(Other!A1:A500)", 500.0),
    ("=ROWS(A1)", 1.0), ("=COLUMNS(A1:A10)*ROWS(A1:B3)", 3.0),
    ("=COUNTBLANK(A1:A10)", 8.0),  # A2 and A4..A10
    ("=COUNTBLANK(A1:C3)", 6.0),  # nine cells less A1, A3, B1 (C2's empty text counts as blank)
    ("=COUNTBLANK(A1:C10)", 27.0), ("=COUNTBLANK(Other!A1:B100)", 199.0), ("=COUNTBLANK(A2)", 1.0),
    ('=COUNTIF(A1:A10,"")', 8.0), ('=COUNTIF(A1:A10,"x")', 1.0), ("=COUNTIF(A1:A10,1)", 1.0),
    ('=COUNTIF(A1:A10,">0")', 1.0),
]


@pytest.mark.parametrize("text,expected", CASES)
def test_single_cells_count_the_whole_reference(text, expected):
    res = evaluate_cell(compile_formula(text, 5, 6), small_store(), "S", 5, 6)
    assert res.value == expected and not res.kept, (text, res)


def test_rows_and_columns_were_value_errors_before():
    # the library's own ROWS on the engine's arrays: what the engine answered before the fix
    from trueband.bridge.formulas.library import function_table

    area = small_store().area("S", 1, 1, 10, 1)
    assert str(np.ravel(function_table()["ROWS"](area))[0]) == "#VALUE!"


@pytest.mark.parametrize("text", ["=ROWS(A{r}:C{r2})", "=COLUMNS($A$1:C{r})+ROW()", "=ROWS(A{r})*2"])
def test_runs_give_the_single_cell_values(text):
    store = small_store()
    first, last, col = 2, 30, 8
    compiled = compile_formula(text.format(r=first, r2=first + 2), first, col)
    got = evaluate_run(Run("S", col, first, last, compiled), store).values.tolist()
    want = [evaluate_cell(compiled, store, "S", r, col).value for r in range(first, last + 1)]
    assert got == want
    assert all(isinstance(x, float) for x in got)


def test_a_run_counting_cut_off_blanks_goes_cell_by_cell():
    store = small_store()
    # a whole column is still cut at the last used row (a bounded range is read whole: store.PAD_CELLS)
    compiled = compile_formula("=COUNTBLANK($A:$A)+ROW()", 2, 8)
    with pytest.raises(VectorUnsupported):
        evaluate_run(Run("S", 8, 2, 12, compiled), store)
    assert [evaluate_cell(compiled, store, "S", r, 8).value for r in (2, 3)] == [1048576.0, 1048577.0]


def test_a_reference_that_leaves_the_sheet_is_still_the_library_s():
    compiled = compile_formula("=ROWS(A1:A3)", 5, 6)  # moved up by 10 rows: off the sheet
    res = evaluate_cell(compiled, small_store(), "S", -5, 6)
    assert str(res.value).startswith("#") and not res.kept  # an error value, as before (the library's)


def libreoffice_book(path):
    wb = Workbook()
    ws = wb.active
    ws.title = "Extent"
    ws["A1"], ws["A3"], ws["B1"] = 1.0, "x", 5.0
    other = wb.create_sheet("Other")
    other["A1"] = 2.0
    row = 5
    for text, _ in CASES:
        ws.cell(row, 6, text)
        row += 1
    for r in range(5, 25):  # a filled-down run
        ws.cell(r, 8, f"=ROWS(A{r}:C{r + 2})+COLUMNS($A$1:D{r})")
    wb.save(path)
    return path


def test_libreoffice_computes_the_same_sizes_and_counts(tmp_path, soffice):
    from test_study_libreoffice import recomputed_mismatches

    from trueband.bridge.engine.recalc import recalculate

    book = libreoffice_book(tmp_path / "extent.xlsx")
    report = recalculate(book, tmp_path / "study.xlsx", all_formulas=True)  # the CSV files are named after it
    checked, mismatches = recomputed_mismatches(soffice, report.output, ("Extent",), tmp_path)
    assert not mismatches, mismatches[:10]
    assert checked.get("Extent", 0) == len(CASES) + 20
