"""A bounded reference is read to its full area, blank cells below the sheet's last used row included
(bridge/engine/store.py, ``CellStore.area`` and ``PAD_CELLS``).

Before the fix the store cut every range at the last row its sheet uses, so ``INDEX(A1:A10,7)`` on a sheet
using rows 1-3 was ``#REF!`` and two ranges of one size on sheets of different heights became arrays of
different sizes (``SUMPRODUCT``/``CORREL``/``COUNTIFS`` over them: ``#VALUE!`` or ``#N/A``). LibreOffice Calc
reads the whole reference (the blank cells are blank): the values below are counted by hand from the cells,
and the last test has LibreOffice compute the same workbook itself (the ``soffice`` fixture, as in
tests/test_engine_extent.py).
"""

from __future__ import annotations

import pytest
from openpyxl import Workbook

from trueband.bridge.engine.eval_cell import evaluate_cell
from trueband.bridge.engine.eval_run import evaluate_run
from trueband.bridge.engine.graph import Run
from trueband.bridge.engine.store import CellStore
from trueband.bridge.engine.values import VectorUnsupported
from trueband.bridge.formulas.compile import compile_formula


def two_sheets() -> CellStore:
    """S: A1..A3 = 1, 2, 3; T: A1..A5 = 1..5 (a taller sheet)."""
    store = CellStore()
    store.add_sheet("S", {1: ([1, 2, 3], [1.0, 2.0, 3.0])})
    store.add_sheet("T", {1: ([1, 2, 3, 4, 5], [1.0, 2.0, 3.0, 4.0, 5.0])})
    return store


# (formula on sheet S, the value counted by hand: a blank cell is 0 in a number context and matches "")
CASES = [
    ("=INDEX(A1:A10,7)+1", 1.0),  # A7 is blank
    ("=INDEX(A1:A10,2)+1", 3.0),
    ("=INDEX(A1:B10,9,2)+5", 5.0),
    ("=SUMPRODUCT(A1:A5,T!A1:A5)", 14.0),  # 1*1 + 2*2 + 3*3, rows 4-5 of S blank
    ("=SUMPRODUCT((A1:A6=0)*T!A1:A6)", 9.0),  # T4 + T5 where S is blank (A6 and T6 both blank: 0)
    ('=COUNTIFS(A1:A10,">1",T!A1:A10,">1")', 2.0),  # rows 2 and 3
    ('=COUNTIFS(A1:A8,">0",T!A1:A8,">0")', 3.0),
    ('=SUMIFS(T!A1:A8,A1:A8,"")', 9.0),
    # references too large to read whole (store.PAD_CELLS): paired ranges padded to the tallest read among them
    ("=SUMPRODUCT(A:A,T!A:A)", 14.0),
    ("=SUMPRODUCT(A1:A300000,T!A1:A300000)", 14.0),
    ("=CORREL(A:A,T!A:A)", 1.0),  # the pairs (1,1), (2,2), (3,3); a pair with a blank is left out
    ('=COUNTIFS(A:A,">0",T!A:A,">0")', 3.0),
    ('=SUMIFS(T!A:A,A:A,">1")', 5.0),  # T2 + T3
]


@pytest.mark.parametrize("text,expected", CASES)
def test_single_cells_read_the_whole_reference(text, expected):
    res = evaluate_cell(compile_formula(text, 20, 5), two_sheets(), "S", 20, 5)
    assert res.value == expected and not res.kept, (text, res)


def test_index_past_the_used_rows_was_a_ref_error_before():
    store = two_sheets()
    assert store.area("S", 1, 1, 10, 1).shape == (10, 1)  # was (3, 1): cut at the last used row


def test_a_whole_column_is_still_cut_at_the_last_used_row():
    store = two_sheets()
    assert store.area("S", 1, 1, 1048576, 1).shape == (3, 1)


def test_a_range_read_as_one_value_is_not_padded():
    # IF's first argument is read by implicit intersection (row 2 of A:A: 2), the others stay ranges
    res = evaluate_cell(compile_formula("=IF(A:A>1,1,0)+SUM(T!A:A)", 2, 5), two_sheets(), "S", 2, 5)
    assert res.value == 16.0 and not res.kept, res


@pytest.mark.parametrize("text", ["=INDEX($A$1:$A$10,ROW()-1)+1", "=SUMPRODUCT($A$1:$A$6,T!$A$1:$A$6)+ROW()",
                                  "=SUMPRODUCT($A:$A,T!$A:$A)+ROW()", "=CORREL($A:$A,T!$A:$A)+ROW()"])
def test_runs_give_the_single_cell_values(text):
    store = two_sheets()
    first, last, col = 2, 11, 4
    compiled = compile_formula(text, first, col)
    want = [evaluate_cell(compiled, store, "S", r, col).value for r in range(first, last + 1)]
    try:
        got = evaluate_run(Run("S", col, first, last, compiled), store).values.tolist()
    except VectorUnsupported:  # the run goes cell by cell: the values above
        got = want
    assert got == want
    assert all(isinstance(x, float) for x in want)


def libreoffice_book(path):
    wb = Workbook()
    ws = wb.active
    ws.title = "S"
    for r in (1, 2, 3):
        ws.cell(r, 1, float(r))
    other = wb.create_sheet("T")
    for r in range(1, 6):
        other.cell(r, 1, float(r))
    for i, (text, _) in enumerate(CASES):
        ws.cell(20 + i, 5, text)
    for r in range(2, 12):  # a filled-down run
        ws.cell(r, 4, f"=INDEX($A$1:$A$10,{r}-1)+1")
    wb.save(path)
    return path


def test_libreoffice_computes_the_same_values(tmp_path, soffice):
    from test_study_libreoffice import recomputed_mismatches

    from trueband.bridge.engine.recalc import recalculate

    book = libreoffice_book(tmp_path / "padding.xlsx")
    report = recalculate(book, tmp_path / "study.xlsx", all_formulas=True)
    checked, mismatches = recomputed_mismatches(soffice, report.output, ("S",), tmp_path)
    assert not mismatches, mismatches[:10]
    assert checked.get("S", 0) == len(CASES) + 10
