"""trueband recalc: values, error codes, cycles, untouched parts, exit codes.

Sources of the check values:
* standard functions: ``formulas.ExcelModel`` (the reference library: the
  same parser and functions run through its own workbook model), on the
  mixed-inputs book;
* registered functions: the functions' own definitions, recomputed here with
  numpy and scipy.stats.norm (reference library) — SEM = sd·√(1 − r)
  (Lord & Novick 1968, eq. 3.8.4), score limits score ∓ z·SEM (Harvill 1991);
  the fixed score bands through ``trueband.funcs.call`` (tested against its
  sources in tests/test_scores.py);
* the column evaluator against the per-cell evaluator, cell by cell.
"""

from __future__ import annotations

import math
import os
import subprocess
import sys
import zipfile

import numpy as np
import pytest
from scipy import stats

import golden_books as gb
import recalc_books as rb
from trueband.bridge import cli
from trueband.bridge.workbook import sheet_columns, sheet_data, sheet_read
from trueband.bridge.workbook.cells import column_letters
from trueband.bridge.engine.eval_cell import evaluate_cell
from trueband.bridge.engine.eval_run import evaluate_run
from trueband.bridge.engine.values import VectorUnsupported
from trueband.bridge.engine.model import load_model
from trueband.bridge.engine.recalc import recalculate
from trueband.bridge.workbook.package import open_workbook_package
from trueband.funcs import call


def cells_of(path, sheet=None) -> dict:
    """{(sheet, ref): (value, formula text)} of every cell in a workbook, read with the package reader."""
    out = {}
    with open_workbook_package(path) as pkg:
        for info in pkg.worksheets:
            if sheet is not None and info.name != sheet:
                continue
            for c in sheet_read.iter_cells(pkg.read(info.part), pkg.shared_strings):
                out[(info.name, c.ref)] = (c.value, c.formula.text if c.formula else None)
    return out


def entries(path) -> dict[str, bytes]:
    with zipfile.ZipFile(path) as z:
        return {n: z.read(n) for n in z.namelist()}


def same_value(ours, theirs) -> bool:
    if isinstance(ours, sheet_data.ErrorValue) or isinstance(theirs, sheet_data.ErrorValue):
        return str(ours) == str(theirs)
    if isinstance(ours, bool) or isinstance(theirs, bool):
        return ours is theirs or ours == theirs and type(ours) is type(theirs)
    if isinstance(ours, float) and isinstance(theirs, (int, float)):
        return ours == float(theirs)
    return ours == theirs


# ---------------------------------------------------------------- standard functions

@pytest.fixture(scope="module")
def mixed(tmp_path_factory):
    folder = tmp_path_factory.mktemp("mixed")
    src = rb.mixed_inputs_book(folder / "mixed.xlsx")
    report = recalculate(src, folder / "out.xlsx", all_formulas=True)
    return src, report


def test_standard_functions_match_excel_model(mixed):
    # Reference library: formulas.ExcelModel evaluates the same file with its own workbook model.
    import formulas
    from formulas.functions import XlError

    src, report = mixed
    ours = cells_of(report.output)
    solution = formulas.ExcelModel().loads(str(src)).finish().calculate()
    compared = 0
    for key, ranges in solution.items():
        if "!" not in key or ":" in key:
            continue
        sheet, ref = key.split("!")
        sheet = sheet.split("]")[1].strip("'")
        match = [k for k in ours if k[0].upper() == sheet and k[1] == ref and ours[k][1] is not None]
        if not match:
            continue
        value, _ = ours[match[0]]
        theirs = ranges.value[0, 0]
        if isinstance(theirs, np.generic):
            theirs = theirs.item()
        if ref == "T10":
            # ROUND(1e308, 1): the library multiplies first and overflows (#VALUE!); spreadsheet apps give the
            # number itself, as trueband's corrected ROUND does (tests/test_standard_corrections.py)
            assert value == 1e308, (ref, value)
        elif isinstance(theirs, complex):
            # The library gives a complex number for a negative number to a fractional power, where
            # spreadsheet apps show #NUM! (common practice: Excel and LibreOffice both do); so do we.
            assert str(value) == "#NUM!", (ref, value)
        elif isinstance(theirs, XlError):
            assert str(value) == str(theirs), (ref, value, theirs)
        else:
            assert same_value(value, theirs), (ref, value, theirs)
        compared += 1
    assert compared == len(rb.MIXED_FORMULAS) * len(rb.MIXED_A)


def test_column_evaluation_equals_cell_evaluation(mixed):
    """Every filled-down run: the array path gives exactly what the per-cell path gives, cell by cell."""
    _, report = mixed
    with open_workbook_package(report.output) as pkg:
        model = load_model(pkg)  # inputs and formula results as recalculated
    vectorised = 0
    for run in model.runs:
        if run.size == 1:
            continue
        try:
            column = evaluate_run(run, model.store).values.tolist()
        except VectorUnsupported:
            continue
        vectorised += 1
        for i, row in enumerate(range(run.first, run.last + 1)):
            cell = evaluate_cell(run.compiled, model.store, run.sheet, row, run.col).value
            a, b = column[i], cell
            assert type(a) is type(b) and (str(a) == str(b) if not isinstance(a, float) else
                                           (a == b or (math.isnan(a) and math.isnan(b)))), \
                (run.address(row), run.compiled.key, a, b)
    assert vectorised == len(rb.MIXED_FORMULAS)
    # in a recalculation, the running total (each row reads the row above) goes cell by cell, in order
    serial = [run for run in model.runs if run.size > 1 and not model.graph.is_vector_group([run.index])]
    assert [(run.sheet, run.col) for run in serial] == [("Mixed", 27)]


def test_running_total_is_ordered_by_cell(mixed):
    _, report = mixed
    ours = cells_of(report.output, "Mixed")
    total = 0.0
    for i, b in enumerate(rb.MIXED_B):
        r = i + 2
        if isinstance(b, str):
            assert str(ours[("Mixed", f"AA{r}")][0]) == "#VALUE!"
            break
        total += b or 0.0
        assert ours[("Mixed", f"AA{r}")][0] == pytest.approx(total, abs=0)


# ---------------------------------------------------------------- registered functions

def test_score_limits_down_a_column(tmp_path):
    src = rb.display_book(tmp_path / "bands.xlsx")
    report = recalculate(src, tmp_path / "out.xlsx")
    ours = cells_of(report.output, "Bands")
    z = stats.norm.isf(0.025)  # reference library
    sem = 4.2 * math.sqrt(1 - 0.88)
    for i, score in enumerate(rb.DISPLAY_SCORES):
        r = i + 2
        assert ours[("Bands", f"C{r}")][0] == pytest.approx(score - z * sem, rel=1e-14)
        assert ours[("Bands", f"D{r}")][0] == pytest.approx(score + z * sem, rel=1e-14)
        band = call("SCORE_BAND", score, [[s] for s in rb.DISPLAY_SCORES], 4.2, 0.88)
        assert ours[("Bands", f"E{r}")][0] == band
        assert ours[("Bands", f"F{r}")][0] == round(2 * z * sem, 3)
        assert ours[("Bands", f"G{r}")][0] == ("top band" if band == 1 else "lower band")
        assert ours[("Bands", f"H{r}")][0] is (score > 30)
        assert str(ours[("Bands", f"I{r}")][0]) == "#NUM!"
    # I2:I7 fail inside SEM: each is listed with its function and message
    bad = [e for e in report.errors if e.cell.startswith("I")]
    assert len(bad) == 6 and all(e.function == "SEM" and e.code == "#NUM!" and "reliability" in e.message
                                 for e in bad)
    assert len(report.errors) == 6 and report.vectorised >= 6 * 7


def test_every_app_prefix_and_letter_case(tmp_path):
    src = rb.prefixed_names_book(tmp_path / "prefixed.xlsx")
    report = recalculate(src, tmp_path / "out.xlsx")
    ours = cells_of(report.output)
    forms = rb.prefixed_forms()
    for k, form in enumerate(forms, start=2):
        value, text = ours[("Sheet1", f"D{k}")]
        assert text == form
        assert value == pytest.approx(12 * math.sqrt(1 - 0.91), rel=1e-14), form  # SEM definition
    assert report.ok and report.evaluated == len(forms)


def test_shared_formula_master_and_dependents(tmp_path):
    # C2 holds the master of SEM(B2,$E$1) shared over C2:C6; C3:C6 only point at it (si="0").
    rows = [gb.row_xml(1, [gb.cell_xml("E1", 0.84)])]
    sds = [3.0, 4.5, 6.0, 0.0, 12.0]
    for i, sd in enumerate(sds):
        r = i + 2
        f = (gb.cell_xml("C2", 0, formula="SEM(B2,$E$1)", f_attrs=' t="shared" ref="C2:C6" si="0"') if r == 2
             else gb.cell_xml(f"C{r}", 0, f_attrs=' t="shared" si="0"'))
        rows.append(gb.row_xml(r, [gb.cell_xml(f"B{r}", sd), f]))
    src = gb.handmade_package(tmp_path / "shared.xlsx", [("Sheet1", gb.sheet_part(rows))])
    report = recalculate(src, tmp_path / "out.xlsx")
    ours = cells_of(report.output)
    for i, sd in enumerate(sds):
        assert ours[("Sheet1", f"C{i + 2}")][0] == pytest.approx(sd * math.sqrt(1 - 0.84), rel=1e-14, abs=0)
    # the group calls a registered function, so it is written one formula per cell (LibreOffice recomputes
    # shared formulas on opening and would show #NAME? instead of the stored values)
    assert [ours[("Sheet1", f"C{r}")][1] for r in range(2, 7)] == [f"SEM(B{r},$E$1)" for r in range(2, 7)]
    assert b'si="0"' not in entries(report.output)["xl/worksheets/sheet1.xml"]
    assert report.vectorised == 5


# ---------------------------------------------------------------- the golden books of the package layer

@pytest.fixture()
def forms_book(tmp_path):
    return gb.formula_forms_book(tmp_path / "forms.xlsx")


def test_formula_forms_values(forms_book, tmp_path):
    report = recalculate(forms_book, tmp_path / "out.xlsx")
    ours = cells_of(report.output)
    # D2: _xludf.SEM through a cross-sheet reference and a global defined name
    assert ours[("Scores", "D2")][0] == pytest.approx(4.2 * math.sqrt(1 - 0.88), rel=1e-14)
    assert ours[("Scores", "D3")][0] == pytest.approx(12 * math.sqrt(1 - 0.91), rel=1e-14)
    # C2:C9 SCORE_BAND over a range holding the text "absent": refused with the cell named
    for r in range(2, 10):
        assert str(ours[("Scores", f"C{r}")][0]) == "#VALUE!"
    messages = {e.cell: e.message for e in report.errors}
    assert 'found text "absent" at row 5, column 1' in messages["C2"]
    assert "score is blank" in messages["C4"]
    # formulas without registered functions and with cached values are not evaluated
    assert report.evaluated == 10 and report.formulas == 19


def test_formula_forms_all(forms_book, tmp_path):
    report = recalculate(forms_book, tmp_path / "out.xlsx", all_formulas=True)
    ours = cells_of(report.output)
    assert ours[("Scores", "D4")][0] == 31 + 27 + 35 + 24 + 29 + 33  # SUM(B:B), text and blank skipped
    assert str(ours[("Scores", "D5")][0]) == "#DIV/0!"
    assert report.cycles == [["Scores!D6", "Scores!D7"]]
    # a circular reference that no trueband result feeds keeps the values the file holds, listed (issue 14)
    assert ours[("Scores", "D6")][0] == ours[("Scores", "D7")][0] == 0
    assert {(k.sheet, k.cell) for k in report.kept} >= {("Scores", "D6"), ("Scores", "D7")}
    assert (ours[("Scores", "D8")][0], ours[("Scores", "D9")][0]) == (62.0, 54.0)  # {=B2:B3*2}
    assert ours[("Scores", "D10")][0] == "Group A" and ours[("Scores", "D11")][0] is True
    assert ours[("Scores", "F2")][0] == pytest.approx(8.4)  # Cut local to Scores (Settings!B1), not the global
    assert {e.cell for e in report.errors} >= {"D5"}


def test_untouched_entries_and_cells_stay_byte_identical(forms_book, tmp_path):
    report = recalculate(forms_book, tmp_path / "out.xlsx")
    before, after = entries(forms_book), entries(report.output)
    assert list(before) == list(after)
    changed = [n for n in before if before[n] != after[n]]
    assert changed == ["xl/worksheets/sheet1.xml"]
    # in the patched sheet, a formula that was not evaluated keeps its bytes
    d10 = b'<c r="D10" t="str"><f>IF(B2&gt;30,"Group A","Group B")</f><v>Group A</v></c>'
    assert d10 in before["xl/worksheets/sheet1.xml"] and d10 in after["xl/worksheets/sheet1.xml"]


def test_forced_recalculation_on_open_is_switched_off(tmp_path):
    src = gb.formula_forms_book(tmp_path / "forms.xlsx", full_calc_on_load=True)
    report = recalculate(src, tmp_path / "out.xlsx")
    before, after = entries(src), entries(report.output)
    assert b'fullCalcOnLoad="1"' in before["xl/workbook.xml"]
    assert after["xl/workbook.xml"] == before["xl/workbook.xml"].replace(b' fullCalcOnLoad="1"', b"")


@pytest.mark.parametrize("macros", [False, True])
def test_features_book_keeps_every_other_part(tmp_path, macros):
    src = gb.features_book(tmp_path / ("features.xlsm" if macros else "features.xlsx"), macros=macros)
    out = tmp_path / ("out.xlsm" if macros else "out.xlsx")
    report = recalculate(src, out)
    before, after = entries(src), entries(out)
    assert list(before) == list(after)
    changed = {n for n in before if before[n] != after[n]}
    # the sheet with the evaluated cells, and the workbook part losing fullCalcOnLoad (xlsxwriter sets it)
    assert changed == {"xl/worksheets/sheet1.xml", "xl/workbook.xml"}
    for part in ("xl/charts/chart1.xml", "xl/drawings/drawing1.xml", "xl/media/image1.png", "xl/comments1.xml",
                 gb.EXTRA_PART, "xl/styles.xml", "xl/worksheets/sheet2.xml") + (("xl/vbaProject.bin",) if macros else ()):
        assert before[part] == after[part], part
    sheet_before, sheet_after = before["xl/worksheets/sheet1.xml"], after["xl/worksheets/sheet1.xml"]
    for tag in (b"<dataValidations", b"<conditionalFormatting", b"<drawing", b"<legacyDrawing"):
        i = sheet_before.index(tag)
        j = sheet_after.index(tag)
        assert sheet_before[i:] == sheet_after[j:]  # everything after sheetData is unchanged
    ours = cells_of(out, "Applicants")
    scores = [[a[2]] for a in gb.APPLICANTS]
    for i, (_, _, score) in enumerate(gb.APPLICANTS):
        assert ours[("Applicants", f"D{i + 2}")][0] == call("SCORE_BAND", score, scores, 4.2, 0.88)
    assert report.ok


# ---------------------------------------------------------------- the command

def run_cli(*argv) -> int:
    return cli.main(list(map(str, argv)))


def test_exit_status_and_table(forms_book, tmp_path, capsys):
    assert run_cli("recalc", forms_book, "-o", tmp_path / "out.xlsx") == cli.EXIT_CELL_ERRORS
    out, err = capsys.readouterr()
    assert "Scores!C2" in out and "SCORE_BAND" in out and "#VALUE!" in out
    assert "10 of 19 formula cells evaluated, 8 errors" in err and "\r" not in err  # no bar when not a terminal
    clean = gb.features_book(tmp_path / "features.xlsx")
    assert run_cli("recalc", clean) == cli.EXIT_OK
    assert (tmp_path / "features.recalc.xlsx").exists()


def test_unusable_workbooks_exit_2_and_write_nothing(tmp_path, capsys):
    folder = tmp_path / "bad"
    folder.mkdir()
    books = gb.unusable_books(folder)
    for name, (path, words) in books.items():
        listing = sorted(p.name for p in folder.iterdir())
        assert run_cli("recalc", path) == cli.EXIT_FAILED, name
        err = capsys.readouterr().err
        assert len(err.strip().splitlines()) == 1, (name, err)
        assert sorted(p.name for p in folder.iterdir()) == listing, name


def test_in_place_with_backup(forms_book, tmp_path):
    original = forms_book.read_bytes()
    report = recalculate(forms_book, in_place=True, backup=True)
    assert report.output == forms_book
    assert (tmp_path / "forms.backup.xlsx").read_bytes() == original
    assert str(cells_of(forms_book)[("Scores", "C2")][0]) == "#VALUE!"


def test_killed_in_place_run_leaves_the_input(forms_book):
    # The package layer's write hook ends the process abruptly after the first entry is written.
    original = forms_book.read_bytes()
    env = dict(os.environ, TRUEBAND_TEST_WRITE_HOOK="exit:1")
    proc = subprocess.run([sys.executable, "-m", "trueband.bridge", "recalc", str(forms_book), "--in-place"],
                          env=env, capture_output=True, timeout=120)
    assert proc.returncode != 0
    assert forms_book.read_bytes() == original
    # only the writer's own temporary file can be left behind (removed by a later run once stale)
    from trueband.bridge.workbook.save import TEMP_PREFIX
    assert all(p.name.startswith(TEMP_PREFIX) for p in forms_book.parent.iterdir() if p.name != forms_book.name)


def test_values_mode_keeps_formulas_for_restore(tmp_path):
    src = rb.display_book(tmp_path / "bands.xlsx")
    out = tmp_path / "values.xlsx"
    report = recalculate(src, out, values=True)
    ours = cells_of(out)
    value, formula = ours[("Bands", "C2")]
    assert formula is None and value == pytest.approx(31 - stats.norm.isf(0.025) * 4.2 * math.sqrt(0.12))
    assert ours[("Bands", "F2")][1] == "ROUND(D2-C2,3)"  # standard formulas stay formulas
    assert report.values_mode


@pytest.mark.parametrize("book", ["mixed", "forms"])
def test_reading_and_patching_in_pieces_gives_the_same_bytes(tmp_path, monkeypatch, book):
    """Large sheets are read and patched a piece at a time; the output must not depend on the pieces."""
    src = (rb.mixed_inputs_book(tmp_path / "in.xlsx") if book == "mixed"
           else gb.formula_forms_book(tmp_path / "in.xlsx"))
    whole = recalculate(src, tmp_path / "whole.xlsx", all_formulas=True)
    monkeypatch.setattr(sheet_data, "CHUNK_BYTES", 700)  # a piece every few rows
    pieces = recalculate(src, tmp_path / "pieces.xlsx", all_formulas=True)
    assert entries(whole.output) == entries(pieces.output)
    assert [tuple(e) for e in whole.errors] == [tuple(e) for e in pieces.errors]


def test_alias_names_work_in_cells_and_an_existing_output_is_kept(tmp_path):
    # KR20 reads as the cell KR20 in spreadsheet apps (common practice), so cells use the alias KR_20.
    import openpyxl

    book = tmp_path / "items.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    items = [[1, 0, 1, 1], [1, 1, 1, 0], [0, 0, 1, 0], [1, 1, 1, 1], [0, 0, 0, 1], [1, 0, 1, 1]]
    for row in items:
        ws.append(row)
    ws["F1"] = "=KR_20(A1:D6)"
    ws["F2"] = "=_xludf.kr_21(4, 2.5, 1.2)"
    wb.save(book)
    out = tmp_path / "out.xlsx"
    report = recalculate(book, out)
    assert report.ok
    got = openpyxl.load_workbook(out, data_only=True).active
    assert got["F1"].value == pytest.approx(call("KR20", items), rel=1e-15)
    assert got["F2"].value == pytest.approx(call("KR21", 4, 2.5, 1.2), rel=1e-15)
    before = out.read_bytes()
    assert cli.main(["recalc", str(book), "-o", str(out)]) == 2  # never overwrite unless asked
    assert out.read_bytes() == before
    assert cli.main(["recalc", str(book), "-o", str(out), "--overwrite"]) == 0


def _runs_one_by_one(formula_cells):
    """The run finder written the plain way, a cell at a time in document order (the reference for
    model._formula_runs, which takes filled-down stretches a block at a time)."""
    from trueband.bridge.formulas.compile import KeyTemplate

    runs, open_runs, shared, templates = [], {}, {}, {}
    for row, col, f in formula_cells:
        if f.kind == "dataTable":
            continue
        array_ref = None
        if f.kind == "shared" and f.text is None:
            if f.shared_index not in shared:
                continue
            text, mr, mc, key = shared[f.shared_index]
            at = (mr, mc)
        else:
            text = "=" + (f.text or "")
            last = templates.get(col)
            template = last[1] if last is not None and last[0] == row - 1 and last[1].text_at(row) == text \
                else KeyTemplate(text, row, col)
            templates[col] = (row, template)
            key, at = template.key, (row, col)
            if f.kind == "shared" and f.shared_index is not None:
                shared[f.shared_index] = (text, row, col, key)
            if f.kind == "array":
                array_ref = f.ref or f"{column_letters(col)}{row}"
        cur = open_runs.get(col)
        if cur is not None and cur[2] == row - 1 and cur[3] == key and array_ref is None and cur[6] is None:
            cur[2] = row
        else:
            cur = [col, row, row, key, text, at, array_ref]
            runs.append(cur)
            open_runs[col] = cur
    return runs


@pytest.mark.parametrize("seed", range(8))
def test_run_finder_agrees_with_the_one_by_one_reference(seed):
    import random

    from trueband.bridge.engine.model import _formula_runs
    from trueband.bridge.workbook.sheet_data import Formula

    rnd = random.Random(seed)
    cells = []
    si = 0
    for row in range(1, 400):
        for col in range(1, 6):
            k = rnd.random()
            if k < 0.15:
                continue  # a gap in the column
            if k < 0.55:  # the column's usual filled-down formula
                f = Formula(f"A{row}*{col}+$B$1", "normal", None, None, False, b"")
            elif k < 0.62:
                f = Formula(f"A{row + 1}*{col}", "normal", None, None, False, b"")  # another form
            elif k < 0.7:
                f = Formula("SUM($A$1:$A$9)", "normal", None, None, False, b"")  # no moving references
            elif k < 0.78:
                si += 1
                f = Formula(f"C{row}-1", "shared", si, f"{column_letters(col)}{row}", True, b"")
            elif k < 0.9:
                f = Formula(None, "shared", rnd.randint(0, si + 1), None, False, b"")  # may precede its master
            elif k < 0.95:
                f = Formula(f"A{row}:A{row + 1}*2", "array", None, f"{column_letters(col)}{row}", False,
                            b"")
            else:
                f = Formula("", "dataTable", None, None, False, b"")
            cells.append((row, col, f))
    expected = _runs_one_by_one(cells)
    runs, _ = _formula_runs(cells)
    assert runs == expected
    # the same cells as the column reader gives them: ordinary formulas in blocks, the rest one by one
    plain = [c for c in cells if c[2].kind == "normal"]
    half = len(plain) // 2
    blocks = [(np.array([r for r, _, _ in part]), np.array([c for _, c, _ in part], dtype=np.int16),
               [f.text for _, _, f in part]) for part in (plain[:half], plain[half:])]
    sheet = sheet_columns.SheetArrays({}, blocks, [c for c in cells if c[2].kind != "normal"], {})
    assert sheet.formulas == cells
    runs, _ = _formula_runs(sheet)
    assert runs == expected
