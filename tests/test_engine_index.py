"""INDEX(range, k) in a filled-down run (bridge/engine/eval_run.py, ``_RunEval.index_rows``) gives what the
library gives row by row.

* Against the run path before (the ``formulas`` library's INDEX called for each row) and the single-cell path,
  on random one-column and one-row ranges of numbers, texts, logicals, blanks and errors, with positions that
  are whole and in the range, 0, negative, fractional, past the end, blank or text: the same value and type in
  every cell.
* Against LibreOffice Calc (the ``soffice`` fixture, as in tests/test_study_libreoffice.py) on a column of
  numbers and texts read at whole positions.
"""

from __future__ import annotations

import numpy as np
import pytest
from openpyxl import Workbook

from trueband.bridge.engine.eval_cell import evaluate_cell
from trueband.bridge.engine.eval_run import _RunEval, evaluate_run
from trueband.bridge.engine.graph import Run
from trueband.bridge.engine.store import CellStore
from trueband.bridge.engine.values import VectorUnsupported
from trueband.bridge.formulas.compile import compile_formula

ROWS = 40


def store_of(seed: int, messy: bool) -> CellStore:
    rng = np.random.default_rng(seed)
    cells = []
    for _ in range(12):  # the range read: A2:A13 (and row 20, B20:M20)
        u = rng.random()
        cells.append(None if u < 0.15 else str(rng.choice(["Band 1", "x"])) if u < 0.3 else
                     bool(u < 0.35) if messy and u < 0.4 else float(rng.integers(-5, 50)) / 4)
    positions = []
    for _ in range(ROWS):  # column D: the positions
        u = rng.random()
        positions.append(float(rng.integers(1, 13)) if u < 0.75 or not messy else
                         rng.choice([None, 0.0, -1.0, 2.5, 13.0, 40.0, "3", "a", True]))
    positions = [x.item() if isinstance(x, np.generic) else x for x in positions]
    store = CellStore()
    sheet = {1: (list(range(2, 14)), cells), 4: (list(range(2, 2 + ROWS)), positions)}
    for j, v in enumerate(cells):
        sheet[2 + j] = sheet.get(2 + j, ([], []))
        if 2 + j != 4:
            sheet[2 + j] = (sheet[2 + j][0] + [20], sheet[2 + j][1] + [v])
    store.add_sheet("S", sheet)
    return store


FORMULAS = ["=INDEX($A$2:$A$13,D2)", "=INDEX($A$2:$A$13,D2)&\"\"", "=INDEX($B$20:$M$20,D2)",
            "=INDEX($A$2:$A$13,D2+1)", "=INDEX($A$2:$A$2,D2)"]


def run_values(text, store):
    try:
        return evaluate_run(Run("S", 16, 2, 1 + ROWS, compile_formula(text, 2, 16)), store).values.tolist()
    except VectorUnsupported:
        return None


@pytest.mark.parametrize("messy", [False, True])
@pytest.mark.parametrize("seed", range(8))
def test_runs_equal_the_library(seed, messy, monkeypatch):
    store = store_of(seed, messy)
    for text in FORMULAS:
        values = run_values(text, store)
        with monkeypatch.context() as m:  # the run path before: the library's INDEX row by row
            m.setattr(_RunEval, "index_rows", lambda self, fn, args: None)
            before = run_values(text, store)
        assert str([(type(v), v) for v in values or []]) == str([(type(v), v) for v in before or []]), text
        for i, row in enumerate(range(2, 2 + ROWS)):
            if values is None:
                break
            ref = evaluate_cell(compile_formula(text, 2, 16), store, "S", row, 16).value
            assert (type(values[i]), str(values[i])) == (type(ref), str(ref)), (text, row)


def test_the_vector_path_is_taken_for_whole_positions():
    store = store_of(1, messy=False)
    run = Run("S", 16, 2, 1 + ROWS, compile_formula("=INDEX($A$2:$A$13,D2)", 2, 16))
    ev = _RunEval(run, store)
    args = [ev.evaluate(a) for a in run.compiled.tree.args]
    got = ev.index_rows(lambda *a: pytest.fail("the library was called for a whole position"), args)
    assert got is not None and len(got.a) == ROWS


def libreoffice_book(path):
    rng = np.random.default_rng(3)
    wb = Workbook()
    ws = wb.active
    ws.title = "Picks"
    for r in range(2, 14):
        ws.cell(r, 1, float(rng.integers(0, 40)) / 4 if r % 4 else f"Band {r}")
    for r in range(2, 2 + ROWS):
        ws.cell(r, 4, int(rng.integers(1, 13)))
        ws.cell(r, 6, f"=INDEX($A$2:$A$13,D{r})")
    wb.save(path)
    return path


def test_libreoffice_picks_the_same(tmp_path, soffice):
    from test_study_libreoffice import recomputed_mismatches

    from trueband.bridge.engine.recalc import recalculate

    book = libreoffice_book(tmp_path / "picks.xlsx")
    report = recalculate(book, tmp_path / "study.xlsx", all_formulas=True)
    checked, mismatches = recomputed_mismatches(soffice, report.output, ("Picks",), tmp_path)
    assert not mismatches, mismatches[:10]
    assert checked.get("Picks", 0) >= ROWS
