"""The function table the workbook evaluator uses, and its number-only aggregates.

Sources of the check values: the ``formulas`` package (the reference
library), whose own table and functions are compared with ours name by name
and value by value.
"""

from __future__ import annotations

import importlib
import subprocess
import sys

import numpy as np
import pytest

import formulas
from formulas.functions import SUBMODULES
from trueband.bridge.formulas import library as ff
from trueband.bridge.formulas.names import standard_names
from trueband.bridge.formulas.standard import STANDARD_CORRECTIONS
from trueband.bridge.engine.eval_cell import RANGE_AGGREGATES, range_aggregate
from trueband.bridge.formulas.compile import compile_formula
from trueband.bridge.engine.store import CellStore
from trueband.funcs.registry import REGISTRY


def test_the_library_defines_each_name_in_one_module():
    # The lazy table loads the library's modules in its own order; that is only the same table as the
    # library's if no name is defined twice (the library's get_functions lets a later module win).
    seen: dict[str, str] = {}
    for module in SUBMODULES:
        for name in importlib.import_module(module, "formulas.functions").FUNCTIONS:
            assert name not in seen, (name, seen.get(name), module)
            seen[name] = module


def test_lazy_table_gives_the_library_functions_and_ours():
    table = ff.FunctionTable()
    library = formulas.get_functions()
    registered = {key for name, spec in REGISTRY.items() for key in (name, *spec.aliases)}
    for name in standard_names():
        if name in registered:
            continue
        if name in STANDARD_CORRECTIONS:  # corrected where the library differs from the apps (issue 14)
            assert table[name] is STANDARD_CORRECTIONS[name], name
            continue
        assert table[name] is library[name], name
    for name in REGISTRY:  # a registered function wins over a standard one of the same name
        assert table[name].spreadsheet is REGISTRY[name], name
    assert "NO.SUCH.FUNCTION" not in table
    assert table["NO.SUCH.FUNCTION"] is ff.NOT_IMPLEMENTED
    assert "SUM" in table and "STDEV" in table


def test_a_workbook_without_statistics_functions_does_not_load_scipy_stats(tmp_path):
    import openpyxl

    src = tmp_path / "plain.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    for r in range(1, 6):
        ws.cell(r, 1, r)
        ws.cell(r, 2, f"=IF(A{r}>2,SQRT(A{r}),SUM(A$1:A{r}))")
    ws["C1"] = "=AVERAGE(A1:A5)+STDEV(A1:A5)"  # number-only ranges: computed without the statistics module
    wb.save(src)
    code = ("import sys\n"
            "from trueband.bridge.engine.recalc import recalculate\n"
            f"r = recalculate({str(src)!r}, {str(tmp_path / 'out.xlsx')!r})\n"
            "assert r.ok, r.errors\n"
            "print(sorted(m for m in sys.modules if m in ('scipy.stats', 'formulas.functions.stat')))\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]", out.stdout


def _store(columns: dict[int, list]) -> CellStore:
    store = CellStore()
    store.add_sheet("S", {c: ([r for r, v in enumerate(vals, 1) if v is not None],
                              [v for v in vals if v is not None]) for c, vals in columns.items()})
    return store


def _library_value(name: str, store: CellStore, areas):
    fn = formulas.get_functions()[name]
    args = [store.area("S", *a) for a in areas]
    out = fn(*args)
    if isinstance(out, np.ndarray):
        out = out.ravel()[0]
    return out.item() if isinstance(out, np.generic) else out


NUMBERS = {1: [3.5, None, -2.0, 10.25, 7.0, None, 1e-3], 2: [1.0, 2.0, None, None, 4.5, 8.0, 0.0]}


@pytest.mark.parametrize("name", sorted(RANGE_AGGREGATES))
@pytest.mark.parametrize("formula,areas", [
    ("A1:A7", [(1, 1, 7, 1)]),                 # one column with blanks
    ("A1:B7", [(1, 1, 7, 2)]),                 # two columns, read row by row
    ("A1:A7,B2:B6", [(1, 1, 7, 1), (2, 2, 6, 2)]),  # two ranges
])
def test_range_aggregates_equal_the_library(name, formula, areas):
    store = _store(NUMBERS)
    node = compile_formula(f"={name}({formula})", 10, 3).tree
    ours = range_aggregate(name, node.args, store, "S", 10, 3)
    theirs = _library_value(name, store, [(a[0], a[1], a[2], a[3]) for a in areas])
    assert ours is not None
    assert ours == theirs, (name, ours, theirs)


@pytest.mark.parametrize("values", [
    [1.0, "text", 3.0],      # text in the range: the library decides
    [1.0, True, 3.0],        # a logical
])
def test_range_aggregates_leave_mixed_ranges_to_the_library(values):
    store = _store({1: values})
    node = compile_formula("=AVERAGE(A1:A3)", 10, 3).tree
    assert range_aggregate("AVERAGE", node.args, store, "S", 10, 3) is None


def test_range_aggregates_leave_edge_cases_to_the_library():
    store = _store({1: [5.0, None, None]})
    for name in ("STDEV", "VAR.S"):  # one number: the library's #DIV/0!
        node = compile_formula(f"={name}(A1:A3)", 10, 3).tree
        assert range_aggregate(name, node.args, store, "S", 10, 3) is None
    node = compile_formula("=AVERAGE(B1:B3)", 10, 3).tree  # no numbers at all
    assert range_aggregate("AVERAGE", node.args, store, "S", 10, 3) is None
    node = compile_formula("=SUM(A1:A3,2)", 10, 3).tree  # a scalar argument
    assert range_aggregate("SUM", node.args, store, "S", 10, 3) is None
