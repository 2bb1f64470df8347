"""ROUND, ROUNDUP, ROUNDDOWN and TRUNC in a filled-down run (bridge/engine/eval_run.py,
``_RunEval.number_function``) give what the library path gives.

* Against the run path before (the engine's corrected ROUND, ``bridge/formulas/standard.round_shown``, called
  through the ``formulas`` library's element-by-element wrapper row by row) and the single-cell path, on random
  columns with many exact and near halves, negatives, zeros, huge numbers and now and then a text, a blank or a
  logical: the same value and type in every cell (-0.0 told from 0.0), for d from -3 to 6.
* Against LibreOffice Calc (the ``soffice`` fixture; LibreOffice recomputes every formula on loading, as in
  tests/test_study_libreoffice.py) on numbers with halves exact in binary (k/8) and decimal halves binary
  cannot hold (2.675, 1.005: both round the 15-digit decimal form, as the apps do).
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

ROWS = 60


def column(seed: int, messy: bool) -> list:
    rng = np.random.default_rng(seed)
    out = []
    for _ in range(ROWS):
        u = rng.random()
        if u < 0.25:  # exact halves at several places
            out.append(float(rng.integers(-4000, 4000)) / 2 / 10 ** int(rng.integers(0, 4)))
        elif u < 0.4:  # decimal halves binary cannot hold (2.675, -0.145, ...)
            out.append(float(f"{rng.integers(-999, 999)}.{rng.integers(0, 99):02d}5"))
        elif u < 0.5:
            out.append(float(rng.choice([0.0, -0.0, 1e20, -3.3e17, 4.5e15, 123456789012.5, 1e-300, 0.49999999999999994])))
        elif messy and u < 0.56:
            out.append(rng.choice([None, "2.5", "abc", True]))
        else:
            out.append(float(rng.normal(0, 50)))
    return [x.item() if isinstance(x, np.generic) else x for x in out]


def store_of(values: list) -> CellStore:
    store = CellStore()
    store.add_sheet("S", {1: (list(range(2, 2 + ROWS)), values), 5: ([1], [2.0])})
    return store


FORMULAS = ["=ROUND(A2,{d})", "=ROUND(A2*3,$E$1)", "=ROUND(A2/7,{d})+1", "=ROUND(A2,{d}.7)", "=ROUNDUP(A2,{d})",
            "=ROUNDDOWN(A2/3,{d})", "=TRUNC(A2,{d})", "=TRUNC(A2)", "=ROUND(A2)", "=ROUND(A2,A2)"]


def run_values(text: str, store) -> list:
    try:
        return evaluate_run(Run("S", 3, 2, 1 + ROWS, compile_formula(text, 2, 3)), store).values.tolist()
    except VectorUnsupported:  # (a huge number the library's Decimal rounding refuses: the cell path decides)
        return None


@pytest.mark.parametrize("messy", [False, True])
@pytest.mark.parametrize("seed", range(6))
def test_runs_equal_the_library_cell_by_cell(seed, messy, monkeypatch):
    store = store_of(column(seed, messy))
    for d in range(-3, 7):
        for form in FORMULAS:
            text = form.format(d=d)
            values = run_values(text, store)
            with monkeypatch.context() as m:  # the run path before the vector ROUND: the library row by row
                m.setattr(_RunEval, "number_function", lambda self, name, fn, args: None)
                before = run_values(text, store)
            assert str(values) == str(before), text  # the same values, -0.0 and 0.0 told apart
            for i, row in enumerate(range(2, 2 + ROWS)):
                if values is None:
                    break
                ref = evaluate_cell(compile_formula(text, 2, 3), store, "S", row, 3).value
                assert (type(values[i]), str(values[i])) == (type(ref), str(ref)), (text, row)


def test_the_vector_path_is_taken_for_clean_numbers():
    store = store_of([float(i) / 4 for i in range(ROWS)])
    run = Run("S", 3, 2, 1 + ROWS, compile_formula("=ROUND(A2,1)", 2, 3))
    ev = _RunEval(run, store)
    node = run.compiled.tree
    args = [ev.evaluate(a) for a in node.args]
    got = ev.number_function("ROUND", lambda *a: pytest.fail("the library was called for a clean row"), args)
    assert got is not None and got.a.dtype == float
    assert got.a[:4].tolist() == [0.0, 0.3, 0.5, 0.8]  # 0.25 -> 0.3 and 0.75 -> 0.8: halves away from zero


def libreoffice_book(path):
    rng = np.random.default_rng(11)
    wb = Workbook()
    ws = wb.active
    ws.title = "Rounds"
    for r in range(2, 2 + ROWS):
        x = float(rng.integers(-800, 800)) / 8 if r % 3 else float(rng.choice([2.675, 1.005, -0.145, 7.125]))
        ws.cell(r, 1, x)  # halves exact in binary, and decimal ones it cannot hold
        for k, text in enumerate(("ROUND(A{r},0)", "ROUND(A{r},1)", "ROUND(A{r},2)", "ROUND(A{r},-1)",
                                  "ROUNDUP(A{r},1)", "ROUNDDOWN(A{r},1)", "TRUNC(A{r},2)")):
            ws.cell(r, 3 + k, "=" + text.format(r=r))
    wb.save(path)
    return path


def test_libreoffice_rounds_the_same(tmp_path, soffice):
    from test_study_libreoffice import recomputed_mismatches

    from trueband.bridge.engine.recalc import recalculate

    book = libreoffice_book(tmp_path / "rounds.xlsx")
    report = recalculate(book, tmp_path / "study.xlsx", all_formulas=True)
    checked, mismatches = recomputed_mismatches(soffice, report.output, ("Rounds",), tmp_path)
    assert not mismatches, mismatches[:10]
    assert checked.get("Rounds", 0) >= 7 * ROWS
