"""Reading formula text: names that begin like TRUE/FALSE, ';' typed between arguments, messages with the
position where reading stopped, and "did you mean" from both function families (names within a slip or two) (`trueband eval`, cells).

Kelley's estimate (Kelley 1947, T = r x + (1 - r) mean) is the reference value of the cells; the registry's
own call is checked against it in tests/test_scores.py.
"""

from __future__ import annotations

import pytest

import golden_books as gb
from trueband.bridge.cli import EXIT_CELL_ERRORS, EXIT_FAILED, EXIT_OK, main
from trueband.bridge.formulas.compile import FormulaSyntaxError, compile_formula
from trueband.bridge.formulas.text import TypedFormulaError, typed_formula
from trueband.bridge.engine.recalc import recalculate
from trueband.bridge.workbook.sheet_read import iter_cells
from trueband.bridge.workbook.package import open_workbook_package
from trueband.funcs import call


@pytest.mark.parametrize("text", ["TRUE_SCORE(A1, 100, 0.9)", "_xludf.TRUE_SCORE(A1,100,0.9)",
                                  "TRUE_SCORE_CI(A1, 100, 15, 0.9, \"lower\")"])
def test_names_that_begin_with_true_are_read_as_names(text):
    # The formulas library reads "TRUE" of "TRUE_SCORE" as the logical constant (before this fix: "Not a
    # valid formula: %s"); a name character after TRUE/FALSE makes it a name (ECMA-376 Part 1, 18.17.2).
    tree = compile_formula(text, 2, 2).tree
    assert tree.kind == "fn" and tree.name.endswith(text.split("(")[0].upper())


@pytest.mark.parametrize("text, value", [("TRUE", True), ("FALSE", False), ("IF(TRUE, 1, 2)", 1.0),
                                         ("TRUE()", None), ("NOT(FALSE)", None)])
def test_the_logical_constants_still_read_as_before(text, value):
    tree = compile_formula(text, 1, 1).tree
    if value is None:
        assert tree.kind == "fn"
    elif tree.kind == "lit":
        assert tree.value is value
    else:
        assert tree.args[1].value == value


@pytest.mark.parametrize("argv, out", [
    (["TRUE_SCORE(130, 100, 0.9)"], call("TRUE_SCORE", 130, 100, 0.9)),
    (['TRUE_SCORE_CI(130, 100, 15, 0.9, "upper")'], call("TRUE_SCORE_CI", 130, 100, 15, 0.9, "upper")),
    (["SEM(10; 0.9)"], call("SEM", 10, 0.9)),
    (['IF("a;b"="a;b"; TRUE_SCORE(70; 100; 0.9); 0)'], call("TRUE_SCORE", 70, 100, 0.9)),
])
def test_eval_reads_true_score_and_semicolons(argv, out, capsys):
    assert main(["eval", *argv]) == EXIT_OK
    assert float(capsys.readouterr().out.strip()) == pytest.approx(out, rel=1e-12)


@pytest.mark.parametrize("formula, words", [
    ("SEM(10;0,9)", ["uses both ';' and ','", "0.9, not 0,9"]),
    ("SEM(10, 0.9", ["'=SEM(10, 0.9'", "the '(' at character 5 is never closed"]),
    ("SEM(10; 0.9", ["'=SEM(10; 0.9'", "the '(' at character 5 is never closed"]),  # shown as typed
    ("SEM(10, 0.9))", ["'=SEM(10, 0.9))'", "the ')' at character 14 closes no '('"]),  # counted in the formula shown
    ("1+*2", ["'=1+*2'", "stops at character"]),
])
def test_eval_of_an_unreadable_formula_is_one_line_with_the_formula(formula, words, capsys):
    assert main(["eval", formula]) == EXIT_FAILED
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "%s" not in err
    for word in words:
        assert word in err


def test_eval_of_a_misspelt_name_suggests_both_families(capsys):
    assert main(["eval", "SME(10, 0.9)"]) == EXIT_CELL_ERRORS
    assert "unknown function SME (did you mean SEM?)" in capsys.readouterr().err


def test_file_formulas_with_semicolons_get_a_hint_not_a_rewrite():
    # Inside a file ';' is never an argument separator (ECMA-376 Part 1, 18.17), so it is not rewritten there.
    with pytest.raises(FormulaSyntaxError, match="the ';' at character 7 is not an argument separator in a file"):
        compile_formula("SEM(A1;0.9)", 1, 2)
    with pytest.raises(FormulaSyntaxError, match="character 15"):
        compile_formula("=TRUE_SCORE(A1;25;0.8)", 1, 2)


def test_typed_separators_leave_strings_sheet_names_and_arrays_alone():
    assert typed_formula("='a;b'!A1&\";\"") == "='a;b'!A1&\";\""
    assert typed_formula("=SUM({1,2;3,4};5)") == "=SUM({1,2;3,4},5)"
    with pytest.raises(TypedFormulaError):
        typed_formula("=SEM(1,2;3)")


def test_true_score_cells_recalculate(tmp_path):
    rows = [gb.row_xml(1, [gb.cell_xml("A1", 130), gb.cell_xml("B1", formula="TRUE_SCORE(A1,100,0.9)"),
                           gb.cell_xml("C1", formula='_xludf.TRUE_SCORE_CI(A1,100,15,0.9,"lower")')])]
    src = gb.handmade_package(tmp_path / "kelley.xlsx", [("Scores", gb.sheet_part(rows))])
    out = tmp_path / "kelley.out.xlsx"
    report = recalculate(src, out)
    assert report.ok
    with open_workbook_package(out) as pkg:
        got = {c.ref: c.value for c in iter_cells(pkg.sheet_xml("Scores"), pkg.shared_strings)}
    assert got["B1"] == pytest.approx(127.0, rel=1e-14)  # Kelley (1947): .9 * 130 + .1 * 100
    assert got["C1"] == pytest.approx(call("TRUE_SCORE_CI", 130, 100, 15, 0.9, "lower"), rel=1e-14)


def test_recalc_names_the_close_functions_of_an_unknown_one(tmp_path):
    # Before: "SME is not a function trueband or the formula engine knows", with no suggestion (check had one).
    rows = [gb.row_xml(r, [gb.cell_xml(f"A{r}", 10 + r), gb.cell_xml(f"B{r}", formula=f"SME(A{r},0.9)")])
            for r in (1, 2, 3)]
    src = gb.handmade_package(tmp_path / "typo.xlsx", [("Scores", gb.sheet_part(rows))])
    report = recalculate(src, tmp_path / "typo.out.xlsx")
    assert [(e.sheet, e.cell) for e in report.errors] == [("Scores", "B1"), ("Scores", "B2"), ("Scores", "B3")]
    assert {e.code for e in report.errors} == {"#NAME?"}
    assert all("(did you mean SEM?)" in e.message for e in report.errors)
