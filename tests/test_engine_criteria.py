"""COUNTIF / COUNTIFS (and AVERAGEIFS / SUMIFS) counted with numpy (bridge/engine/criteria.py) give what the reference path gives.

* Against the engine's reference path (the ``formulas`` library's COUNTIF/COUNTIFS, cell by cell) on random
  small sheets of numbers, blanks and now and then a text or an error, with criteria of every form (numbers,
  operators, ``&``-built criteria, ``"<>"``, text, wildcards): the same value for every cell, as single
  cells and as filled-down runs.
* Against LibreOffice Calc (the ``soffice`` fixture; LibreOffice recomputes every formula on loading, as in
  tests/test_study_libreoffice.py): a workbook of such formulas recalculated by trueband shows the values
  LibreOffice computes itself.
"""

from __future__ import annotations

import numpy as np
import pytest
from openpyxl import Workbook

from trueband.bridge.engine.criteria import aggregate_if, count_if, count_if_rows, parse_criterion
from trueband.bridge.engine.eval_cell import _CellEval, evaluate_cell
from trueband.bridge.engine.eval_run import evaluate_run
from trueband.bridge.engine.graph import Run
from trueband.bridge.engine.store import CellStore
from trueband.bridge.engine.values import VectorUnsupported
from trueband.bridge.formulas.compile import compile_formula


class LibraryOnly:
    """The same store without the dense ranges: the criteria functions then go to the library."""

    def __init__(self, store):
        self._store = store

    def __getattr__(self, name):
        if name == "dense":
            raise AttributeError(name)
        return getattr(self._store, name)


def random_sheet(seed: int, rows: int = 30, messy: bool = False) -> dict:
    """Columns A..C of numbers (whole and decimal, negative too), site names and blanks; E1..E3 criteria
    cells; with ``messy`` numeric text, wildcard-like text and logicals here and there."""
    rng = np.random.default_rng(seed)
    columns = {}
    for c in (1, 2, 3):
        values = []
        for _ in range(rows):
            u = rng.random()
            if u < 0.12:
                values.append(None)
            elif messy and u < 0.16:
                values.append(str(rng.choice(["5", "abc", "A*", "", "-1.5"])))
            elif u < 0.22:  # site names: texts in every sheet, messy or not
                values.append(str(rng.choice(["North", "north", "South", "East "])))
            elif messy and u < 0.25:
                values.append(bool(rng.random() < 0.5))
            else:
                values.append(float(rng.integers(-3, 6)) if rng.random() < 0.7 else float(rng.integers(-30, 60)) / 10)
        columns[c] = (list(range(2, rows + 2)), values)
    columns[5] = ([1, 2, 3], [2.0, 1.5, "x"])
    return columns


FORMULAS = [
    "=COUNTIF(A2:A31,2)", "=COUNTIF(A2:A31,\">=1\")", "=COUNTIF(A2:A31,\"<0\")", "=COUNTIF(A2:A31,\"=3\")",
    "=COUNTIF(A2:A31,\">-1.5\")", "=COUNTIF(A2:A31,\"<=2.5\")", "=COUNTIF(A2:A31,\"<>2\")", "=COUNTIF(A2:A31,\"\")",
    "=COUNTIF(A2:A31,\"abc\")", "=COUNTIF(A2:A31,\"A*\")", "=COUNTIF(A2:A31,\"5\")", "=COUNTIF(A2:A31,E1)",
    "=COUNTIF(A2:A31,\">=\"&E2)", "=COUNTIF(A2:A31,E3)", "=COUNTIF(A2:B31,\">0\")", "=COUNTIF(A:A,\">=0\")",
    "=COUNTIFS(A2:A31,\">=0\",B2:B31,2)", "=COUNTIFS(A2:A31,E1,B2:B31,\"<\"&E2,C2:C31,\">=-1\")",
    "=COUNTIFS(A2:A31,\">=0\",B2:B20,2)", "=COUNTIFS(A2:B31,\">=0\",B2:C31,\"<3\")", "=COUNTIFS(A2:A31,TRUE)",
    "=COUNTIFS($A$2:$A$31,\">=1\",$C$2:$C$31,\"<=\"&E2)", "=COUNTIF(A2:A31,\"NORTH\")",
    "=COUNTIFS(A2:A31,\"north\",B2:B31,\">=0\")", "=COUNTIFS(A2:A31,\"South\",B2:B31,\"East \")",
    "=COUNTIF(A2:A31,\"=North\")", "=COUNTIF(A2:A31,\">North\")", "=COUNTIF(A2:A31,\"East\")",
    "=AVERAGEIFS(C2:C31,A2:A31,\">=0\")", "=AVERAGEIFS(C2:C31,A2:A31,\"north\",B2:B31,\"<\"&E2)",
    "=SUMIFS(C2:C31,A2:A31,\">=1\",B2:B31,\"<=3\")", "=AVERAGEIFS(B2:C31,A2:B31,\">0\")",
    "=AVERAGEIFS(C2:C31,A2:A31,\">99\")", "=SUMIFS(C2:C31,A3:A32,\">=0\")", "=AVERAGEIFS(C2:C31,A2:A31,\"<>1\")",
]


def stores(seed: int, messy: bool):
    store = CellStore()
    store.add_sheet("S", random_sheet(seed, messy=messy))
    return store, LibraryOnly(store)


@pytest.mark.parametrize("messy", [False, True])
@pytest.mark.parametrize("seed", range(12))
def test_single_cells_equal_the_library(seed, messy):
    fast, library = stores(seed, messy)
    for text in FORMULAS:
        compiled = compile_formula(text, 40, 8)
        ours = evaluate_cell(compiled, fast, "S", 40, 8)
        ref = evaluate_cell(compiled, library, "S", 40, 8)
        assert (type(ours.value), str(ours.value), ours.kept) == (type(ref.value), str(ref.value), ref.kept), text


RUN_FORMULAS = [
    "=COUNTIFS($A$2:$A$31,A2,$B$2:$B$31,\">=0\")",  # the criterion moves with the row (a number or blank)
    "=COUNTIF($B$2:$B$31,\">=\"&C2)",               # an &-built criterion per row
    "=COUNTIFS($A$2:$A$31,\">=0\",$C$2:$C$31,\"<\"&$E$2)",  # the same for every row
    "=SUMIFS($C$2:$C$31,$B$2:$B$31,\">=\"&ROW()/10)",
    "=AVERAGEIFS($C$2:$C$31,$A$2:$A$31,\">=-5\",$B$2:$B$31,\"<=\"&(ROW()+5))",
]


@pytest.mark.parametrize("messy", [False, True])
@pytest.mark.parametrize("seed", range(8))
def test_filled_down_runs_equal_the_library_cell_by_cell(seed, messy):
    fast, library = stores(seed, messy)
    for text in RUN_FORMULAS:
        compiled = compile_formula(text, 2, 8)
        try:
            values = evaluate_run(Run("S", 8, 2, 31, compiled), fast).values.tolist()
        except VectorUnsupported:
            continue  # the recalculation then goes cell by cell (the other test)
        for i, row in enumerate(range(2, 32)):
            ref = evaluate_cell(compile_formula(text, 2, 8), library, "S", row, 8).value
            assert (type(values[i]), values[i]) == (type(ref), ref), (text, row)


def test_fast_path_is_taken_for_the_plain_numeric_forms_only():
    store, _ = stores(1, messy=False)
    cases = {"=COUNTIF(A2:A31,\">=\"&E2)": True, "=COUNTIFS(A2:A31,2,B2:B31,\"<1\")": True,
             "=COUNTIF(A2:A31,\"<>2\")": False, "=COUNTIF(A2:A31,\"abc\")": True, "=COUNTIF(A2:A31,E3)": True,
             "=COUNTIF(A2:A31,\"A*\")": False, "=COUNTIF(A2:A31,\"\")": False, "=COUNTIF(A2:A31,\">North\")": False,
             "=COUNTIFS(A2:A31,1,B2:B20,1)": False, "=COUNTIF(A2:A31,TRUE)": False}
    cases.update({"=AVERAGEIFS(C2:C31,A2:A31,\">=0\")": True, "=SUMIFS(C2:C31,A2:A31,1,B2:B31,\"<3\")": True,
                  "=SUMIFS(C2:C31,A3:A32,\">=0\")": False, "=AVERAGEIFS(C2:C31,A2:A31,\">99\")": False})
    for text, taken in cases.items():
        node = compile_formula(text, 40, 8).tree
        fast = aggregate_if if node.name in ("AVERAGEIFS", "SUMIFS") else count_if
        got = fast(node.name, node.args, _CellEval(store, "S", 40, 8).evaluate, store, "S", 40, 8)
        assert (got is not None) == taken, text
    messy, _ = stores(3, messy=True)
    node = compile_formula("=COUNTIF(A2:A31,1)", 40, 8).tree
    assert count_if("COUNTIF", node.args, lambda n: 1.0, messy, "S", 40, 8) is None  # a logical in the range


def test_run_path_is_taken_for_counts_and_aggregates():
    from trueband.bridge.engine.eval_run import _RunEval

    store, _ = stores(2, messy=False)
    for text in RUN_FORMULAS[2:]:  # (the criteria of the first two read cells that may hold text or blanks)
        run = Run("S", 8, 2, 31, compile_formula(text, 2, 8))
        node = run.compiled.tree
        got = count_if_rows(node.name, node.args, _RunEval(run, store).per_row, store, "S", 2, 8, 30)
        assert got is not None and got.shape == (30,), text


def test_parse_criterion():
    assert parse_criterion(">=12.5") == parse_criterion(">=" + "12.5")
    assert parse_criterion("=-3")[1] == -3.0 and parse_criterion("7")[1] == 7.0
    assert parse_criterion("North") == parse_criterion("=NORTH") == ("text", "north")
    for text in ("<>1", "", "=", ">=", "1e5", " 5", "5 ", "A*", "a~*", "1/2/2020", "#N/A", ">abc", True, None):
        assert parse_criterion(text) is None, text


def test_writes_drop_the_dense_ranges_they_touch():
    store = CellStore()
    store.add_sheet("S", {1: ([1, 2, 3], [1.0, 2.0, 3.0])})
    assert store.dense("S", 1, 1, 3, 1)[0].ravel().tolist() == [1.0, 2.0, 3.0]
    store.write("S", 1, 2, np.array([9.0]))
    assert store.dense("S", 1, 1, 3, 1)[0].ravel().tolist() == [1.0, 9.0, 3.0]
    store.write("S", 1, 3, np.array(["text"], dtype=object))
    assert store.dense("S", 1, 1, 3, 1)[1] == [(2, 0, "text")]
    store.write("S", 1, 1, np.array([True], dtype=object))
    assert store.dense("S", 1, 1, 3, 1) is None


def libreoffice_book(path, seed: int = 5):
    sheet = random_sheet(seed)
    wb = Workbook()
    ws = wb.active
    ws.title = "Counts"
    for c, (rows, values) in sheet.items():
        for r, v in zip(rows, values):
            if v is not None:
                ws.cell(r, c, v)
    ws["E3"] = 3  # a number criterion cell (LibreOffice and the library treat a text one differently)
    for i, text in enumerate(t for t in FORMULAS if all(s not in t for s in ('"<>', '""', '"abc"', '"A*"', "TRUE",
                                                                              "B2:B20", "E3", '">99"', "A3:A32"))):
        ws.cell(40 + i, 8, text)
    for k, text in enumerate(RUN_FORMULAS):
        for r in range(2, 32):
            if k == 1 and not isinstance(ws.cell(r, 3).value, float):
                continue  # ">="&"North" and ">=" (a blank): text comparisons, left to the library (not checked here)
            if k == 0 and ws.cell(r, 1).value is None:
                # a blank criterion cell: the apps count it as 0 (Microsoft's COUNTIFS reference says so, and
                # LibreOffice does), the formulas library as matching nothing; that path is not the fast one
                continue
            ws.cell(r, 10 + k, text.replace("A2", f"A{r}").replace("C2,", f"C{r},").replace("&C2", f"&C{r}"))
    wb.save(path)
    return path


def test_libreoffice_computes_the_same_counts(tmp_path, soffice):
    from test_study_libreoffice import recomputed_mismatches

    from trueband.bridge.engine.recalc import recalculate

    book = libreoffice_book(tmp_path / "counts.xlsx")
    report = recalculate(book, tmp_path / "study.xlsx", all_formulas=True)  # the CSV files are named after it
    checked, mismatches = recomputed_mismatches(soffice, report.output, ("Counts",), tmp_path)
    assert not mismatches, mismatches[:10]
    assert checked.get("Counts", 0) >= 15 + 30 + 2 * 20
