"""``trueband fill`` and ``trueband bands``: new cells added, nothing else changed, values computed.

Checked against: the input package (every untouched part byte-identical),
openpyxl (a reference library reading the filled file), an independent
computation of fixed score bands from their definition (Cascio, Outtz,
Zedeck & Goldstein, 1991: bands of width z·SED counted from the top score,
z from scipy.stats.norm), and LibreOffice Calc (the values it shows).
"""

from __future__ import annotations

import math
import zipfile

import openpyxl
import pytest
from scipy import stats

import golden_books as gb
from trueband.bridge.cli import fill as cf
from trueband.bridge.engine import fill as fill_engine
from trueband.bridge.cli import EXIT_FAILED, EXIT_OK, CommandError, main
from trueband.bridge.workbook.sheet_read import iter_cells
from trueband.bridge.workbook.package import open_workbook_package

SD, RELIABILITY = 4.2, 0.88  # Settings!B1 and B2 of the features book


def fixed_bands(scores, sd, reliability, confidence=0.95):
    """Band numbers from the definition: band 1 holds every score within z·SED of the top score, band 2
    starts at the highest score below band 1, and so on (Cascio et al., 1991)."""
    width = stats.norm.ppf(0.5 + confidence / 2) * sd * math.sqrt(2 * (1 - reliability))
    band_of = {}
    remaining = sorted(set(scores), reverse=True)
    band = 0
    while remaining:
        band += 1
        top = remaining[0]
        inside = [s for s in remaining if s >= top - width]
        for s in inside:
            band_of[s] = band
        remaining = [s for s in remaining if s < top - width]
    return [band_of[s] for s in scores]


@pytest.fixture
def features(tmp_path):
    return gb.features_book(tmp_path / "features.xlsx")


def cells(path, sheet):
    with open_workbook_package(path) as pkg:
        return {c.ref: c for c in iter_cells(pkg.sheet_xml(sheet), pkg.shared_strings)}


def test_plan_finds_the_table_rows_and_the_neighbouring_header_style(features):
    with open_workbook_package(features) as pkg:
        plan = fill_engine.plan_fill(pkg, "applicants", "F", header="Band")
        header_styles = {c.ref: c.style for c in iter_cells(pkg.sheet_xml("Applicants"), pkg.shared_strings)
                         if c.row == 1}
    assert (plan.sheet, plan.first, plan.last, plan.header_ref) == ("Applicants", 2, 7, "F1")
    assert plan.header_style == header_styles["D1"] != 0  # the nearest styled header (E1 is empty)
    assert plan.range == "Applicants!F2:F7" and plan.rows == 6


def test_plan_stops_at_the_first_empty_row(tmp_path):
    rows = [gb.row_xml(1, [gb.cell_xml("A1", "id", t="str"), gb.cell_xml("B1", "score", t="str", s=1)])]
    rows += [gb.row_xml(r, [gb.cell_xml(f"A{r}", r), gb.cell_xml(f"B{r}", 20 + r)]) for r in range(2, 6)]
    rows += [gb.row_xml(8, [gb.cell_xml("A8", "notes", t="str")])]
    path = gb.handmade_package(tmp_path / "table.xlsx", [("Scores", gb.sheet_part(rows))])
    with open_workbook_package(path) as pkg:
        plan = fill_engine.plan_fill(pkg, "Scores", "C", header="Double")
        assert (plan.first, plan.last, plan.header_style) == (2, 5, 1)
        explicit = fill_engine.plan_fill(pkg, "Scores", "C", rows=(3, 9), header="x")
        assert (explicit.first, explicit.last, explicit.header_ref) == (3, 9, "C2")


def test_fill_adds_only_the_new_cells(features):
    with open_workbook_package(features) as pkg:
        plan = fill_engine.plan_fill(pkg, "Applicants", "F", header="Band")
        changes = fill_engine.fill_changes(pkg, plan, "=SCORE_BAND(C{row},$C$2:$C$7,Settings!$B$1,Reliability)", header="Band")
        sheet_part = pkg.sheet("Applicants").part
        assert set(changes.replace) == {sheet_part, "xl/workbook.xml"}  # workbook: fullCalcOnLoad removed
        assert not changes.add and not changes.remove
        new = changes.replace[sheet_part]
        old = pkg.read(sheet_part)
        strings = pkg.shared_strings
    before, after = {c.ref: c for c in iter_cells(old, strings)}, {c.ref: c for c in iter_cells(new, strings)}
    assert {r: c for r, c in after.items() if r in before} == before
    added = sorted(set(after) - set(before), key=lambda r: (int(r[1:]), r[0]))
    assert added == ["F1", "F2", "F3", "F4", "F5", "F6", "F7"]
    assert after["F1"].value == "Band" and after["F1"].style == before["D1"].style
    assert after["F5"].formula.text == "_xludf.SCORE_BAND(C5,$C$2:$C$7,Settings!$B$1,Reliability)"  # the form Calc binds to the add-in


def test_fill_command_end_to_end(features, capsys):
    code = main(["fill", str(features), "--sheet", "Applicants", "--column", "F", "--header", "Band",
                 "--formula", "=SCORE_BAND(C{row}, $C$2:$C$7, Settings!$B$1, Reliability)"])
    assert code == EXIT_OK, capsys.readouterr().err
    out = features.with_name("features.filled.xlsx")
    scores = [a[2] for a in gb.APPLICANTS]
    wb = openpyxl.load_workbook(out, data_only=True)  # reference library
    assert [wb["Applicants"][f"F{r}"].value for r in range(2, 8)] == fixed_bands(scores, SD, RELIABILITY)
    assert openpyxl.load_workbook(out)["Applicants"]["F2"].value == "=_xludf.SCORE_BAND(C2, $C$2:$C$7, Settings!$B$1, Reliability)"
    with zipfile.ZipFile(features) as a, zipfile.ZipFile(out) as b:
        assert a.namelist() == b.namelist()
        for name in a.namelist():
            if name not in ("xl/worksheets/sheet1.xml", "xl/workbook.xml"):
                assert a.read(name) == b.read(name), name
    assert "filled Applicants!F2:F7 (6 rows)" in capsys.readouterr().err


def test_fill_reads_semicolons_as_typed_in_a_spreadsheet_app_and_allows_one_formula_on_request(features, capsys):
    # Spreadsheet apps show ';' between arguments in many language settings; files store ',' (ECMA-376 Part 1,
    # 18.17: the formula grammar's list separator is ',').
    code = main(["fill", str(features), "--sheet", "Applicants", "--column", "F",
                 "--formula", "=SEM(C{row}; 0.9)", "--rows", "2:3"])
    assert code == EXIT_OK, capsys.readouterr().err
    out = features.with_name("features.filled.xlsx")
    c = cells(out, "Applicants")
    assert c["F3"].formula.text == "_xludf.SEM(C3, 0.9)" and c["F3"].value == pytest.approx(c["C3"].value * 0.1 ** 0.5)
    code = main(["fill", str(out), "--in-place", "--sheet", "Applicants", "--column", "G",
                 "--formula", "=SEM($C$2, 0.9)", "--same-formula"])
    assert code == EXIT_OK, capsys.readouterr().err
    c = cells(out, "Applicants")
    assert {c[f"G{r}"].formula.text for r in range(2, 8)} == {"_xludf.SEM($C$2, 0.9)"}


def test_bands_command_builds_the_formula(features, capsys):
    code = main(["bands", str(features), "--scores", "Applicants!C2:C7", "--sd", "Settings!B1",
                 "--reliability", "0.88", "--confidence", "0.9"])
    assert code == EXIT_OK, capsys.readouterr().err
    assert not features.with_name("features.filled.xlsx").exists()  # bands has its own default output
    c = cells(features.with_name("features.bands.xlsx"), "Applicants")
    assert c["F1"].value == "Score band"  # the first empty column; the default header
    assert c["F2"].formula.text == "_xludf.SCORE_BAND(C2,$C$2:$C$7,Settings!$B$1,0.88,0.9)"
    scores = [a[2] for a in gb.APPLICANTS]
    assert [c[f"F{r}"].value for r in range(2, 8)] == [float(b) for b in fixed_bands(scores, SD, RELIABILITY, 0.9)]


def test_quoted_words_that_are_allowed_pass_in_any_case(features, capsys):
    code = main(["fill", str(features), "--sheet", "Applicants", "--column", "F", "--rows", "2:3",
                 "--formula", '=SCORE_CI(C{row}, 4, 0.9, "Lower")'])
    assert code == EXIT_OK, capsys.readouterr().err
    c = cells(features.with_name("features.filled.xlsx"), "Applicants")
    assert c["F2"].value == pytest.approx(c["C2"].value - stats.norm.ppf(0.975) * 4 * 0.1 ** 0.5)


def test_bands_after_fill_writes_its_own_file_and_names_do_not_stack(features, capsys):
    fill = ["--sheet", "Applicants", "--column", "F", "--formula", "=SEM(C{row}, 0.9)"]
    assert main(["fill", str(features), *fill]) == EXIT_OK, capsys.readouterr().err
    assert main(["bands", str(features), "--scores", "Applicants!C2:C7", "--sd", "4.2",
                 "--reliability", "0.88"]) == EXIT_OK, capsys.readouterr().err
    filled = features.with_name("features.filled.xlsx")
    assert cells(features.with_name("features.bands.xlsx"), "Applicants")["F1"].value == "Score band"
    # filling the filled book counts up instead of writing features.filled.filled.xlsx
    assert main(["fill", str(filled), *fill[:3], "G", *fill[4:]]) == EXIT_OK, capsys.readouterr().err
    again = features.with_name("features.filled-2.xlsx")
    assert cells(again, "Applicants")["G2"].formula.text == "_xludf.SEM(C2, 0.9)"
    assert main(["fill", str(again), *fill[:3], "H", *fill[4:]]) == EXIT_OK, capsys.readouterr().err
    assert sorted(p.name for p in features.parent.iterdir()) == [
        "features.bands.xlsx", "features.filled-2.xlsx", "features.filled-3.xlsx", "features.filled.xlsx",
        "features.xlsx"]


def test_fill_in_place_with_backup(features):
    original = features.read_bytes()
    code = main(["bands", str(features), "--scores", "Applicants!C2:C7", "--sd", "4.2", "--reliability", "0.88",
                 "--into", "G", "--in-place", "--backup"])
    assert code == EXIT_OK
    assert features.with_name("features.backup.xlsx").read_bytes() == original
    c = cells(features, "Applicants")
    assert c["G2"].formula.text == "_xludf.SCORE_BAND(C2,$C$2:$C$7,4.2,0.88)" and c["G2"].value == 1.0
    assert sorted(p.name for p in features.parent.iterdir()) == ["features.backup.xlsx", "features.xlsx"]


def test_fill_drops_the_calculation_chain(tmp_path):
    path = gb.formula_forms_book(tmp_path / "forms.xlsx")
    with open_workbook_package(path) as pkg:
        plan = fill_engine.plan_fill(pkg, "Scores", "G", header="Twice")
        changes = fill_engine.fill_changes(pkg, plan, "=B{row}*2", header="Twice")
        assert "xl/calcChain.xml" in changes.remove
        assert (plan.first, plan.last) == (2, 11)


@pytest.mark.parametrize("argv, words", [
    (["--sheet", "Pool", "--column", "F", "--formula", "=C{row}"], ["Pool", "Applicants", "Settings"]),
    (["--sheet", "Applicants", "--column", "C", "--formula", "=C{row}"],
     ["Applicants", "C2", "not empty", "--replace"]),
    (["--sheet", "Applicants", "--column", "F9", "--formula", "=C{row}"], ["--column", "F9"]),
    (["--sheet", "Applicants", "--column", "F", "--formula", "=C{row}", "--rows", "9:2"], ["--rows", "9:2"]),
    (["--sheet", "Applicants", "--column", "F", "--formula", "  "], ["--formula"]),
    # The formula is checked before anything is written, as `trueband check` checks a saved one.
    (["--sheet", "Applicants", "--column", "F", "--formula", "=SME(C{row}, 0.9)"],
     ["unknown function SME (did you mean SEM?)", "nothing was written"]),
    (["--sheet", "Applicants", "--column", "F", "--formula", "=SEM(C{row})"],
     ["SEM takes 2 arguments, got 1: SEM(sd, reliability)"]),
    (["--sheet", "Applicants", "--column", "F", "--formula", "=C2*2"], ["has no {row}", "6 rows", "--same-formula"]),
    (["--sheet", "Applicants", "--column", "F", "--formula", "=SEM(C{row}, 0.9"],
     ["'=SEM(C{row}, 0.9' as written in row 2, 'SEM(C2, 0.9': the '(' at character 4 is never closed",
      "nothing was written"]),
    (["--sheet", "Applicants", "--column", "F", "--formula", "=SEM(Sheet9!C{row}, 0.9)"],
     ["refers to a sheet that does not exist: 'Sheet9'", "Applicants", "nothing was written"]),
    (["--sheet", "Applicants", "--column", "F", "--formula", "=SEM(C{row};0,9)"], ["';'", "decimals"]),
    (["--sheet", "Applicants", "--column", "F", "--formula", "=C{row}+*2"], ["--formula", "stops at character"]),
    # Quoted words are checked against the argument's words before any cell is written (not a column of #NUM!).
    (["--sheet", "Applicants", "--column", "F", "--formula", '=SCORE_CI(C{row}, 5, 0.9, "top")'],
     ['SCORE_CI: part must be one of "lower", "upper", got "top"', "nothing was written"]),
    (["--sheet", "Applicants", "--column", "F", "--formula", '=IF(C{row}>0; SCORE_CI(C{row}; 5; 0.9; "lowr"); 0)'],
     ["SCORE_CI", "part", '"lower", "upper"', '"lowr"']),
])
def test_fill_mistakes_are_one_line_and_write_nothing(features, argv, words, capsys):
    before = sorted(p.name for p in features.parent.iterdir())
    assert main(["fill", str(features), *argv]) == EXIT_FAILED
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1
    for word in words:
        assert word in err
    assert sorted(p.name for p in features.parent.iterdir()) == before


@pytest.mark.parametrize("argv, words", [
    (["--scores", "C2:C7", "--sd", "4", "--reliability", "0.9"], ["--scores", "SHEET!"]),
    (["--scores", "Applicants!C2:D7", "--sd", "4", "--reliability", "0.9"], ["single column"]),
    (["--scores", "Applicants!C2:C7", "--sd", "4", "--reliability", "1.3"], ["reliability", "1.3"]),
    (["--scores", "Applicants!C2:C7", "--sd", "-2", "--reliability", "0.9"], ["sd", "-2"]),
    (["--scores", "Applicants!C2:C7", "--sd", "four", "--reliability", "0.9"], ["--sd", "four"]),
    (["--scores", "Applicants!C2:C7", "--sd", "4", "--reliability", "0.9", "--confidence", "1"], ["confidence"]),
])
def test_bands_mistakes_are_one_line(features, argv, words, capsys):
    assert main(["bands", str(features), *argv]) == EXIT_FAILED
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1
    for word in words:
        assert word in err


def test_bands_formula_quotes_sheet_names():
    formula, sheet, r1, r2 = fill_engine.bands_formula("'Pool 2026'!H401:H2", "'Pool 2026'!K1", "K2")
    assert (sheet, r1, r2) == ("Pool 2026", 2, 401)
    assert formula == "=SCORE_BAND(H{row},$H$2:$H$401,'Pool 2026'!$K$1,$K$2)"
    with pytest.raises(CommandError):
        cf.parse_column("XFE")


@pytest.mark.libreoffice
def test_libreoffice_shows_the_filled_bands(features, tmp_path, soffice):
    assert main(["bands", str(features), "--scores", "Applicants!C2:C7", "--sd", "Settings!B1",
                 "--reliability", "Settings!B2"]) == EXIT_OK
    shown = gb.libreoffice_csv(soffice, features.with_name("features.bands.xlsx"), tmp_path / "csv")["Applicants"]
    scores = [a[2] for a in gb.APPLICANTS]
    assert [gb.csv_cell(shown, f"F{r}") for r in range(2, 8)] == [str(b) for b in fixed_bands(scores, SD, RELIABILITY)]
    assert gb.csv_cell(shown, "F1") == "Score band"


def test_plan_skips_a_title_above_the_table(tmp_path):
    rows = [gb.row_xml(1, ['<c r="A1" t="inlineStr"><is><t>Osterfell Harbour Logistics: applicants</t></is></c>'])]
    rows += [gb.row_xml(3, [gb.cell_xml("A3", "id", t="str"), gb.cell_xml("B3", "score", t="str", s=1)])]
    rows += [gb.row_xml(r, [gb.cell_xml(f"A{r}", r), gb.cell_xml(f"B{r}", 20 + r)]) for r in range(4, 9)]
    path = gb.handmade_package(tmp_path / "titled.xlsx", [("Scores", gb.sheet_part(rows))])
    with open_workbook_package(path) as pkg:
        plan = fill_engine.plan_fill(pkg, "Scores", "C", header="Band")
    assert (plan.header_ref, plan.first, plan.last, plan.header_style) == ("C3", 4, 8, 1)
