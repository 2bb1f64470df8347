"""The engine's array fast paths (bridge/engine/fast_paths.py) give the library path's values.

* ``COUNT`` in filled-down runs (``IF(COUNT(A2)=1,A2,"")``, the study's Bands columns): against the same run
  with the fast paths switched off (``fast_paths.ENABLED``: the library's COUNT row by row) and against the
  single-cell path, on random columns of numbers, blanks, texts (``"1"`` too, which the library counts),
  logicals and errors: the same value and type in every cell.
* ``CHOOSE(k, range, ...)`` with one position: against the library's own CHOOSE on random ranges (the same
  value and type in every position, a blank's ``#VALUE!`` included) and, in formulas, against the off switch.
* ``SLOPE``, ``INTERCEPT``, ``STEYX``, ``CORREL``, ``RSQ`` over ranges of numbers and blanks: bit for bit the
  library's value (the same arithmetic on the same pairs), on random ranges; texts, logicals or errors in a
  range, too few pairs and ranges of other sizes left to the library.
* Against LibreOffice Calc (the ``soffice`` fixture, as in tests/test_engine_criteria.py): a workbook of such
  formulas recalculated by trueband shows the values Calc computes itself (to 1e-12 relative).
"""

from __future__ import annotations

import contextlib

import numpy as np
import pytest
from openpyxl import Workbook

from trueband.bridge.engine import fast_paths
from trueband.bridge.engine.eval_cell import evaluate_cell
from trueband.bridge.engine.eval_run import evaluate_run
from trueband.bridge.engine.graph import Run
from trueband.bridge.engine.store import CellStore
from trueband.bridge.engine.values import EMPTY, NA_ERROR, VectorUnsupported
from trueband.bridge.formulas.compile import compile_formula
from trueband.bridge.formulas.library import function_table

ROWS = 60


@contextlib.contextmanager
def fast_paths_off():
    fast_paths.ENABLED = False
    try:
        yield
    finally:
        fast_paths.ENABLED = True


def random_store(seed: int, messy: bool | str, blanks: float = 0.15) -> CellStore:
    """Columns A..D, rows 2..ROWS+1: numbers with blanks; ``messy`` adds texts ("1", "x", ""), and unless it is
    ``"texts"`` logicals and errors."""
    rng = np.random.default_rng(seed)
    sheet = {}
    for c in (1, 2, 3, 4):
        values = []
        for _ in range(ROWS):
            u = rng.random()
            if u < blanks:
                values.append(None)
            elif messy and u < blanks + 0.06:
                values.append(str(rng.choice(["1", "x", ""])))
            elif messy is True and u < blanks + 0.09:
                values.append(bool(u < blanks + 0.075))
            elif messy is True and u < blanks + 0.11:
                values.append("#N/A")
            else:
                values.append(float(rng.normal(10, 3)) if c != 4 else float(rng.integers(1, 4)))
        sheet[c] = (list(range(2, ROWS + 2)), values)
    sheet[5] = ([1, 2, 3], [2.0, 1.0, "x"])
    store = CellStore()
    store.add_sheet("S", {c: (rows, [_value(v) for v in vals]) for c, (rows, vals) in sheet.items()})
    return store


def _value(v):
    from trueband.bridge.workbook.sheet_data import ErrorValue

    return ErrorValue(v) if isinstance(v, str) and v.startswith("#") else v


def same(a, b) -> bool:
    return type(a) is type(b) and (a == b or str(a) == str(b))


COUNT_FORMULAS = ['=IF(COUNT(A2)=1,A2,"")', '=IF(COUNT(A2,B2)=2,A2,"")', "=COUNT(A2,B2,C2)", "=COUNT(A2:C2)",
                  "=COUNT(A2,$E$1:$E$3)", "=COUNT(A2,7)", "=COUNT(A2)&\"|\"", "=COUNT(A2+1,B2)"]


def run_values(text: str, store):
    run = Run("S", 8, 2, ROWS + 1, compile_formula(text, 2, 8))
    try:
        return evaluate_run(run, store).values.tolist()
    except VectorUnsupported:
        return None


@pytest.mark.parametrize("seed", range(4))
@pytest.mark.parametrize("messy", [False, "texts", True])
@pytest.mark.parametrize("text", COUNT_FORMULAS)
def test_count_in_runs_gives_the_library_values(text, messy, seed):
    store = random_store(seed, messy)
    fast = run_values(text, store)
    with fast_paths_off():
        slow = run_values(text, store)
    compiled = compile_formula(text, 2, 8)
    cells = [evaluate_cell(compiled, store, "S", r, 8).value for r in range(2, ROWS + 2)]
    assert fast is not None
    assert slow is None or all(same(a, b) for a, b in zip(fast, slow)), text
    assert all(same(a, b) or (a == b and {type(a), type(b)} == {int, float}) for a, b in zip(fast, cells)), text


@pytest.mark.parametrize("messy", [False, "texts"])
def test_count_takes_the_column_path_for_numbers_texts_and_blanks(messy):
    # the fast path, not the row-by-row library: a COUNT whose rows are numbers, texts and blanks leaves no row
    store = random_store(1, messy=messy)
    calls = []
    real = fast_paths.count_rows

    def spy(*a):
        got = real(*a)
        calls.append(got is not None and not got[1].any())
        return got

    fast_paths.count_rows = spy
    try:
        run_values('=IF(COUNT(A2,B2)=2,A2,"")', store)
    finally:
        fast_paths.count_rows = real
    assert calls == [True]


def random_choices(rng, shape, k: int) -> list:
    pool = [1.5, -2.0, 0.0, "x", "", True, False, EMPTY, NA_ERROR, float("inf"), 3.25]
    out = []
    for _ in range(k):
        a = np.empty(shape, dtype=object)
        a.ravel()[:] = [pool[i] for i in rng.integers(0, len(pool), a.size)]
        out.append(a)
    return out


@pytest.mark.parametrize("seed", range(6))
def test_choose_gives_the_library_choose(seed):
    rng = np.random.default_rng(seed)
    library = function_table()["CHOOSE"]
    for shape in ((7, 1), (1, 5), (3, 4)):
        choices = random_choices(rng, shape, 3)
        for index in (1.0, 2.0, 3.0, 2.7, np.full((1, 1), 3.0, dtype=object), np.int64(2), np.full((1, 1), 1)):
            ours = fast_paths.choose_cell(index, choices)
            theirs = library(index, *choices)
            assert ours is not None and ours.shape == theirs.shape and type(ours) is type(theirs)
            assert all(same(a, b) for a, b in zip(ours.ravel().tolist(), theirs.ravel().tolist()))
    choices = random_choices(rng, (4, 1), 2)
    for index in (0.0, 3.0, -1.0, "2", True, EMPTY, NA_ERROR, float("nan")):  # the library decides these
        assert fast_paths.choose_cell(index, choices) is None
    assert fast_paths.choose_cell(1.0, [choices[0], np.empty((3, 1), dtype=object)]) is None


CHOOSE_FORMULAS = ["=SUMPRODUCT(CHOOSE($E$1,A2:A61,B2:B61))", "=SUMPRODUCT(CHOOSE(MATCH(2,$E$1:$E$2,0),A2:A61,B2:B61))", "=SUMPRODUCT(CHOOSE(2,A2:A61,B2:B61,C2:C61))",
                   "=COUNT(CHOOSE($E$2,A2:A61,B2:B61))", "=SUMPRODUCT(CHOOSE(3,A2:A61,B2:B61))"]


@pytest.mark.parametrize("seed", range(3))
@pytest.mark.parametrize("text", CHOOSE_FORMULAS)
def test_choose_in_formulas_gives_the_off_switch_values(text, seed):
    store = random_store(seed, messy=seed == 2, blanks=0.0 if seed == 0 else 0.1)
    compiled = compile_formula(text, 3, 10)
    fast = evaluate_cell(compiled, store, "S", 3, 10)
    with fast_paths_off():
        slow = evaluate_cell(compiled, store, "S", 3, 10)
    assert same(fast.value, slow.value) and fast.kept == slow.kept, (text, fast, slow)


PAIRS = ["SLOPE", "INTERCEPT", "STEYX", "CORREL", "RSQ"]
RANGES = [("A2:A61", "B2:B61"), ("$A$2:$A$61", "C2:C61"), ("A2:B31", "C2:D31"), ("A2:A61", "A2:A61"),
          ("A2:A61", "D2:D61"), ("A2:A61", "B2:B60"), ("A2:A3", "B2:B3"), ("A2:A11", "B30:B39")]


@pytest.mark.parametrize("seed", range(8))
@pytest.mark.parametrize("name", PAIRS)
def test_pair_statistics_are_the_library_s_to_the_last_bit(name, seed):
    messy = (False, False, False, False, True, True, "texts", "texts")[seed]
    store = random_store(seed, messy=messy, blanks=(0.0, 0.1, 0.3, 0.6, 0.1, 0.2, 0.0, 0.2)[seed])
    taken = 0
    for y, x in RANGES:
        compiled = compile_formula(f"={name}({y},{x})", 70, 10)
        fast = evaluate_cell(compiled, store, "S", 70, 10)
        with fast_paths_off():
            slow = evaluate_cell(compiled, store, "S", 70, 10)
        assert same(fast.value, slow.value) and fast.kept == slow.kept, (name, y, x, fast, slow)
        taken += fast_paths.pair_statistic(name, compiled.tree.args, store, "S", 70, 10) is not None
    if messy is not True:
        assert taken >= 4  # the ranges of numbers, texts and blanks take the fast path
    else:
        assert taken <= 2  # texts, logicals and errors: the library's


def test_pair_statistics_leave_too_few_pairs_and_constants_to_the_library():
    store = CellStore()
    store.add_sheet("S", {1: ([1, 2, 3, 4], [1.0, 2.0, None, 4.0]), 2: ([1, 2, 3, 4], [5.0, 5.0, 5.0, None]),
                          3: ([1, 2, 3, 4], [1.0, None, 2.0, 3.0])})
    for name in PAIRS:
        for text in (f"={name}(A1:A4,B1:B4)", f"={name}(A1:A4,C1:C4)", f"={name}(B1:B4,A1:A4)"):
            compiled = compile_formula(text, 6, 6)
            assert fast_paths.pair_statistic(name, compiled.tree.args, store, "S", 6, 6) is None, text


def libreoffice_book(path):
    rng = np.random.default_rng(3)
    wb = Workbook()
    ws = wb.active
    ws.title = "Fast"
    ws["E1"], ws["E2"] = 2, 1
    for r in range(2, ROWS + 2):
        for c in (1, 2, 3):
            u = rng.random()
            if c == 3 or u > 0.15:  # column C has no blanks (Calc's CHOOSE of a blank is no error)
                ws.cell(r, c, float(np.round(rng.normal(10, 3), 6)))
            elif u > 0.08:  # a text: left out of COUNT and of the pairs, as a blank is
                ws.cell(r, c, "x" if u > 0.11 else "not computable")
        ws.cell(r, 8, '=IF(COUNT(A{0},B{0})=2,A{0},"")'.format(r))
        ws.cell(r, 9, "=COUNT(A{0}:C{0})".format(r))
    row = 2
    for name in PAIRS:
        for y, x in (("A2:A61", "B2:B61"), ("A2:A61", "C2:C61"), ("C2:C61", "B2:B61")):
            ws.cell(row, 11, f"={name}({y},{x})")
            row += 1
    ws.cell(row, 11, "=SUMPRODUCT(CHOOSE(E2,C2:C61,C2:C61))")
    ws.cell(row + 1, 11, "=SUMPRODUCT(CHOOSE(1,C2:C61,A2:A61))")
    wb.save(path)
    return path


def test_libreoffice_computes_the_same_values(tmp_path, soffice):
    from test_study_libreoffice import recomputed_mismatches

    from trueband.bridge.engine.recalc import recalculate

    book = libreoffice_book(tmp_path / "fast.xlsx")
    report = recalculate(book, tmp_path / "study.xlsx", all_formulas=True)  # the CSV files are named after it
    checked, mismatches = recomputed_mismatches(soffice, report.output, ("Fast",), tmp_path)
    assert not mismatches, mismatches[:10]
    assert checked.get("Fast", 0) >= 2 * ROWS + 15 + 2
