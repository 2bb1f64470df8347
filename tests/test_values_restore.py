"""``--values`` (formulas replaced by values, kept in a hidden sheet) and ``trueband restore``.

Checked against: the original package (byte comparison of every part after a
round trip), openpyxl (a reference library: sheet states, formulas and values
as another reader sees them) and LibreOffice Calc (values shown without the
formulas).
"""

from __future__ import annotations

import zipfile

import openpyxl
import pytest

import golden_books as gb
from trueband.bridge.engine import values_mode as vm
from trueband.bridge.formulas.names import uses_registered_function
from trueband.bridge.cli import EXIT_FAILED, EXIT_OK, main
from trueband.bridge.workbook.save import PackageChanges, save_workbook
from trueband.bridge.workbook.cells import split_ref
from trueband.bridge.workbook.sheet_read import iter_cells
from trueband.bridge.workbook.package import UnusableWorkbook, open_workbook_package

REGISTERED_CELLS = {f"C{r}" for r in range(2, 10)} | {"D2", "D3"}


def values_book(path, values=None):
    with open_workbook_package(path) as pkg:
        changes = PackageChanges()
        records = vm.replace_with_values(pkg, changes, values)
        out = save_workbook(pkg, changes, tag="values")
    return out, records


@pytest.fixture
def forms(tmp_path):
    return gb.formula_forms_book(tmp_path / "forms.xlsx")


@pytest.mark.parametrize("formula, expected", [
    ("SEM(12,0.91)", True), ("sem(12,0.91)", True), ("_xludf.SCORE_BAND(B2,B2:B9,4,0.9)", True),
    ("ROUND(_xlfn.SEM(B1,B2),2)", True), ("SUM(A1:A9)", False), ('"SEM(" & A1', False), ("SEMX(1)", False),
    ("Settings!SEM", False),
])
def test_which_formulas_use_registered_functions(formula, expected):
    assert uses_registered_function(formula) is expected


def test_registered_formulas_become_values_and_are_recorded(forms):
    out, records = values_book(forms, {"Scores": {"D2": 1.5}})
    assert {r.cell for r in records} == REGISTERED_CELLS
    with open_workbook_package(out) as pkg:
        assert [(s.name, s.state) for s in pkg.sheets][-1] == (vm.FORMULA_SHEET, "hidden")
        cells = {c.ref: c for c in iter_cells(pkg.sheet_xml("Scores"), pkg.shared_strings)}
        for ref in REGISTERED_CELLS:
            assert cells[ref].formula is None, ref
        assert cells["D2"].value == 1.5  # the fresh value given
        assert cells["C2"].value == 2.0 and cells["D3"].value == "#NAME?"  # the cached ones otherwise
        for ref in ("D4", "D5", "D6", "D8", "D10", "F2"):  # standard functions stay formulas
            assert cells[ref].formula is not None, ref
        assert pkg.calc_chain_part is None and "xl/calcChain.xml" not in pkg.entry_names
        stored = vm.read_records(pkg.read(pkg.sheet(vm.FORMULA_SHEET).part))
    assert stored == records
    master = next(r for r in records if r.cell == "C2")
    assert master.element == b'<f t="shared" ref="C2:C9" si="0">SCORE_BAND(B2,$B$2:$B$9,Settings!$B$1,Reliability)</f>'
    assert next(r for r in records if r.cell == "C5").element == b'<f t="shared" si="0"/>'


def test_values_book_as_openpyxl_reads_it(forms):
    out, _ = values_book(forms)
    wb = openpyxl.load_workbook(out)  # reference library
    assert wb.sheetnames == ["Scores", "Settings", vm.FORMULA_SHEET]
    assert wb[vm.FORMULA_SHEET].sheet_state == "hidden"
    assert wb["Scores"]["C2"].value == 2 and wb["Scores"]["D4"].value == "=SUM(B:B)"
    hidden = wb[vm.FORMULA_SHEET]
    assert [hidden.cell(1, c).value for c in range(1, 5)] == ["sheet", "cell", "formula", "formula element"]
    rows = {(hidden.cell(r, 1).value, hidden.cell(r, 2).value): hidden.cell(r, 3).value
            for r in range(2, hidden.max_row + 1)}
    assert rows[("Scores", "D2")] == "=_xludf.SEM(Settings!B1,Reliability)"


def test_round_trip_restores_every_part(forms):
    out, _ = values_book(forms)
    with open_workbook_package(out) as pkg:
        changes = PackageChanges()
        report = vm.restore_formulas(pkg, changes)
        back = save_workbook(pkg, changes, tag="restored")
    assert report.restored == len(REGISTERED_CELLS) and report.skipped == []
    with zipfile.ZipFile(forms) as a, zipfile.ZipFile(back) as b:
        # the calculation chain is gone for good (apps rebuild it); everything else is as it was, byte for byte
        assert b.namelist() == [n for n in a.namelist() if n != "xl/calcChain.xml"]
        for name in b.namelist():
            if name in ("xl/_rels/workbook.xml.rels", "[Content_Types].xml"):
                continue
            assert a.read(name) == b.read(name), name
        assert b"calcChain" not in b.read("xl/_rels/workbook.xml.rels")


def test_restore_keeps_values_computed_meanwhile(forms):
    out, _ = values_book(forms, {"Scores": {"C2": 3.0, "D3": 3.6}})
    with open_workbook_package(out) as pkg:
        changes = PackageChanges()
        vm.restore_formulas(pkg, changes)
        back = save_workbook(pkg, changes, tag="restored")
    with open_workbook_package(back) as pkg:
        cells = {c.ref: c for c in iter_cells(pkg.sheet_xml("Scores"), pkg.shared_strings)}
    assert cells["C2"].value == 3.0 and cells["C2"].formula.is_master
    assert cells["D3"].value == 3.6 and cells["D3"].formula.text == "sem(12,0.91)"


def test_a_second_values_run_adds_to_the_records(forms, tmp_path):
    out, first = values_book(forms)
    # a new registered formula typed in after the first run
    with open_workbook_package(out) as pkg:
        from trueband.bridge.workbook.sheet_edit import NewCell, add_cells
        changes = PackageChanges()
        part = pkg.sheet("Settings").part
        changes.set(pkg, part, add_cells(pkg.read(part), {"C5": NewCell(formula="SED(4.2,0.88)", value=2.0)}))
        typed = save_workbook(pkg, changes, output=tmp_path / "typed.xlsx")
    again, second = values_book(typed)
    with open_workbook_package(again) as pkg:
        stored = vm.read_records(pkg.read(pkg.sheet(vm.FORMULA_SHEET).part))
        assert [s.name for s in pkg.sheets].count(vm.FORMULA_SHEET) == 1
    assert [(r.sheet, r.cell) for r in second] == [("Settings", "C5")]
    assert stored == first + second


def test_restore_reports_cells_it_cannot_put_back(forms, tmp_path):
    out, _ = values_book(forms)
    with open_workbook_package(out) as pkg:  # the user typed a formula into D2 meanwhile
        from trueband.bridge.workbook.sheet_patch import CellUpdate, patch_sheet
        changes = PackageChanges()
        part = pkg.sheet("Scores").part
        changes.set(pkg, part, patch_sheet(pkg.read(part), {"D2": CellUpdate(7.0, formula="3+4")}))
        edited = save_workbook(pkg, changes, output=tmp_path / "edited.xlsx")
    code = main(["restore", str(edited)])
    assert code == 1
    with open_workbook_package(tmp_path / "edited.restored.xlsx") as pkg:
        cells = {c.ref: c for c in iter_cells(pkg.sheet_xml("Scores"), pkg.shared_strings)}
        assert cells["D2"].formula.text == "3+4" and cells["D3"].formula.text == "sem(12,0.91)"
        assert vm.FORMULA_SHEET not in [s.name for s in pkg.sheets]


def test_restore_command(forms, capsys):
    out, _ = values_book(forms)
    assert main(["restore", str(out)]) == EXIT_OK
    assert "restored 10 formula(s)" in capsys.readouterr().err
    restored = out.with_name("forms.values.restored.xlsx")
    with open_workbook_package(restored) as pkg:
        assert [s.name for s in pkg.sheets] == ["Scores", "Settings"]
    assert main(["restore", str(out)]) == EXIT_FAILED  # the output exists now
    assert "exists already" in capsys.readouterr().err
    assert main(["restore", str(out), "--in-place", "--backup"]) == EXIT_OK
    assert out.with_name("forms.values.backup.xlsx").exists()
    with open_workbook_package(out) as pkg:
        assert vm.FORMULA_SHEET not in [s.name for s in pkg.sheets]


def test_restore_without_formula_sheet_is_one_line(forms, capsys):
    with pytest.raises(UnusableWorkbook, match="no sheet trueband_formulas"):
        with open_workbook_package(forms) as pkg:
            vm.restore_formulas(pkg, PackageChanges())
    before = sorted(p.name for p in forms.parent.iterdir())
    assert main(["restore", str(forms)]) == EXIT_FAILED
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "no replaced formulas" in err
    assert sorted(p.name for p in forms.parent.iterdir()) == before


def test_local_names_are_renumbered_when_a_middle_sheet_goes():
    wb = (b'<workbook><definedNames><definedName name="A" localSheetId="0">S!$A$1</definedName>'
          b'<definedName name="B" localSheetId="1">T!$A$1</definedName>'
          b'<definedName name="C" localSheetId="2">U!$A$1</definedName></definedNames></workbook>')
    assert vm._renumber_local_names(wb, 1) == (
        b'<workbook><definedNames><definedName name="A" localSheetId="0">S!$A$1</definedName>'
        b'<definedName name="C" localSheetId="1">U!$A$1</definedName></definedNames></workbook>')


def test_xlsm_keeps_its_macro_part_through_values_and_restore(tmp_path):
    path = gb.features_book(tmp_path / "features.xlsm", macros=True)
    out, records = values_book(path)
    assert {r.cell for r in records} == {f"D{r}" for r in range(2, 8)}
    assert out.suffix == ".xlsm"
    with zipfile.ZipFile(out) as zf:
        assert zf.read("xl/vbaProject.bin") == gb.VBA_BYTES
        assert zf.read(gb.EXTRA_PART) == gb.EXTRA_PART_BYTES


@pytest.mark.libreoffice
def test_libreoffice_shows_values_of_a_values_book(forms, tmp_path, soffice):
    out, _ = values_book(forms, {"Scores": {f"C{r}": float(r % 2 + 1) for r in range(2, 10)} | {"D3": 3.6}})
    shown = gb.libreoffice_csv(soffice, out, tmp_path / "csv")
    scores = shown["Scores"]
    assert [gb.csv_cell(scores, f"C{r}") for r in range(2, 10)] == [str(r % 2 + 1) for r in range(2, 10)]
    assert gb.csv_cell(scores, "D2") == "1.45" and gb.csv_cell(scores, "D3") == "3.6"


# ------------------------------------------------------------------ restore after another program saved the file


def _formulas(path, sheet):
    """Every formula of a sheet as openpyxl (a reference reader) sees it, shared formulas translated."""
    ws = openpyxl.load_workbook(path)[sheet]
    return {c.coordinate: c.value for row in ws.iter_rows() for c in row
            if isinstance(c.value, str) and c.value.startswith("=")}


@pytest.fixture
def demo_scoring(tmp_path):
    """The demo's scoring sheet (invented data), written as `trueband demo` writes it."""
    from trueband.bridge.study.demo import make_demo
    from trueband.bridge.study.templates import scoring_template

    demo = make_demo()
    return scoring_template(tmp_path / "scoring.xlsx", ids=demo.ids, responses=demo.items.tolist(),
                            title="Scoring sheet: Dispatch Knowledge Test (demo)")


def _values_file(path):
    from trueband.bridge.engine.recalc import recalculate

    return recalculate(path, values=True).output


@pytest.mark.libreoffice
def test_restore_after_libreoffice_saved_the_values_file(demo_scoring, tmp_path, soffice, capsys):
    # reproduces issue 10 item 3: Calc rewrote the hidden sheet with shared strings and left out the cells
    # whose value was empty text; restore ended in a traceback (SheetXmlError about a shared string)
    values = _values_file(demo_scoring)
    saved = gb.libreoffice_resave(soffice, values, tmp_path / "calc")
    assert main(["restore", str(saved), "-o", str(tmp_path / "back.xlsx")]) == EXIT_OK
    assert "restored 1501 formula(s)" in capsys.readouterr().err  # 500 rows x 3 trueband columns + C3
    assert openpyxl.load_workbook(tmp_path / "back.xlsx").sheetnames == ["Scoring"]
    before, after = _formulas(demo_scoring, "Scoring"), _formulas(tmp_path / "back.xlsx", "Scoring")
    assert after == before
    assert _notices(saved) and _notices(tmp_path / "back.xlsx") == []  # Calc kept the notice; restore took it out
    # Calc shows the restored cells with the values they had in the values file
    frozen = gb.libreoffice_csv(soffice, saved, tmp_path / "csv1")["Scoring"]
    shown = gb.libreoffice_csv(soffice, tmp_path / "back.xlsx", tmp_path / "csv2")["Scoring"]
    for ref in ("C3", "AQ8", "AR8", "AS8", "AS407"):
        assert gb.csv_cell(shown, ref) == gb.csv_cell(frozen, ref) != "", ref


@pytest.mark.slow  # seconds: the whole suite runs it, the quick loop leaves it out
def test_restore_after_openpyxl_saved_the_values_file(demo_scoring, tmp_path):
    values = _values_file(demo_scoring)
    wb = openpyxl.load_workbook(values)  # another writer: its own shared strings, styles and parts
    wb.save(tmp_path / "resaved.xlsx")
    assert main(["restore", str(tmp_path / "resaved.xlsx"), "-o", str(tmp_path / "back.xlsx")]) == EXIT_OK
    assert _formulas(tmp_path / "back.xlsx", "Scoring") == _formulas(demo_scoring, "Scoring")
    assert _notices(tmp_path / "back.xlsx") == []


def test_restored_shared_group_does_not_take_a_shared_index_in_use(forms, tmp_path):
    out, _ = values_book(forms)
    # an app saved the file and numbered a shared formula of its own 0, the index the recorded group had
    with open_workbook_package(out) as pkg:
        from trueband.bridge.workbook.sheet_edit import NewCell, add_cells
        from trueband.bridge.workbook.sheet_patch import CellUpdate, patch_sheet
        changes = PackageChanges()
        part = pkg.sheet("Scores").part
        xml = add_cells(pkg.read(part), {"G2": NewCell(value=1.0), "G3": NewCell(value=1.0)})
        xml = patch_sheet(xml, {"G2": CellUpdate(62.0, formula_xml=b'<f t="shared" ref="G2:G3" si="0">B2*2</f>'),
                                "G3": CellUpdate(54.0, formula_xml=b'<f t="shared" si="0"/>')})
        changes.set(pkg, part, xml)
        edited = save_workbook(pkg, changes, output=tmp_path / "edited.xlsx")
    assert main(["restore", str(edited)]) == EXIT_OK
    got = _formulas(tmp_path / "edited.restored.xlsx", "Scores")
    assert got["G3"] == "=B3*2"
    assert got["C3"] == "=SCORE_BAND(B3,$B$2:$B$9,Settings!$B$1,Reliability)"
    assert got["C9"] == "=SCORE_BAND(B9,$B$2:$B$9,Settings!$B$1,Reliability)"


def test_restore_of_an_unreadable_record_sheet_is_one_line(forms, tmp_path, capsys):
    out, _ = values_book(forms)
    with open_workbook_package(out) as pkg:  # a record cell points at a shared string the file does not have
        changes = PackageChanges()
        part = pkg.sheet(vm.FORMULA_SHEET).part
        xml = pkg.read(part).replace(b'<c r="A2" t="inlineStr"><is><t>Scores</t></is></c>',
                                     b'<c r="A2" t="s"><v>999</v></c>', 1)
        assert xml != pkg.read(part)
        changes.set(pkg, part, xml)
        broken = save_workbook(pkg, changes, output=tmp_path / "broken.xlsx")
    assert main(["restore", str(broken)]) == EXIT_FAILED
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "trueband_formulas" in err and "A2" in err
    assert not (tmp_path / "broken.restored.xlsx").exists()


# ------------------------------------------------------------------ workbook.xml from other writers


def _rewrite_part(src, dst, name, change):
    with zipfile.ZipFile(src) as zf:
        parts = {n: zf.read(n) for n in zf.namelist()}
    new = change(parts[name])
    assert new != parts[name]
    parts[name] = new
    return gb.write_zip(dst, parts)


def test_values_mode_when_each_sheet_binds_the_relationship_prefix(forms, tmp_path):
    # issue 10 item 8: openpyxl with lxml installed declares xmlns:r on each <sheet>, not on the root;
    # the <sheet r:id=...> appended for the hidden sheet had an unbound prefix and the write failed
    decl = f'xmlns:r="{gb.NS_R}"'.encode()
    book = _rewrite_part(forms, tmp_path / "per-sheet.xlsx", "xl/workbook.xml",
                         lambda wb: wb.replace(b" " + decl, b"", 1).replace(b"<sheet ", b"<sheet " + decl + b" "))
    out, records = values_book(book)
    assert len(records) == len(REGISTERED_CELLS)
    wb = openpyxl.load_workbook(out)  # reference reader
    assert wb.sheetnames[-1] == vm.FORMULA_SHEET and wb[vm.FORMULA_SHEET].sheet_state == "hidden"
    with open_workbook_package(out) as pkg:
        changes = PackageChanges()
        assert vm.restore_formulas(pkg, changes).restored == len(REGISTERED_CELLS)
        back = save_workbook(pkg, changes, tag="restored")
    with zipfile.ZipFile(book) as a, zipfile.ZipFile(back) as b:
        assert a.read("xl/workbook.xml") == b.read("xl/workbook.xml")


def test_values_mode_on_a_workbook_written_by_openpyxl(tmp_path, capsys):
    # With lxml installed (the second CI run) openpyxl writes the per-sheet declarations of the test above.
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Bands"
    ws["A1"], ws["A2"], ws["B1"] = 4.2, 0.88, "=SEM(A1,A2)"
    wb.create_sheet("Notes")["A1"] = "Osterfell Harbour Logistics"
    wb.save(tmp_path / "written.xlsx")
    assert main(["recalc", "--values", str(tmp_path / "written.xlsx")]) == EXIT_OK
    got = openpyxl.load_workbook(tmp_path / "written.recalc.xlsx")
    assert got.sheetnames == ["Bands", "Notes", vm.FORMULA_SHEET]
    # SEM = SD·√(1 − r), Lord & Novick (1968), from memory
    assert got["Bands"]["B1"].value == pytest.approx(4.2 * (1 - 0.88) ** 0.5)


def test_restore_takes_out_a_hidden_sheet_entry_written_with_single_quotes(forms, tmp_path):
    out, _ = values_book(forms)
    edited = _rewrite_part(out, tmp_path / "quoted.xlsx", "xl/workbook.xml",
                           lambda wb: wb.replace(f'name="{vm.FORMULA_SHEET}"'.encode(),
                                                 f"name = '{vm.FORMULA_SHEET}'".encode()))
    assert main(["restore", str(edited)]) == EXIT_OK
    back = openpyxl.load_workbook(tmp_path / "quoted.restored.xlsx")
    assert back.sheetnames == ["Scores", "Settings"]


# ------------------------------------------------------------------ the notice on every sheet of a --values file


def _notices(path):
    """(sheet, first cell, text) of every values notice, as openpyxl (a reference reader) sees them: the cell that
    opens it and its lines in the cells under it, joined."""
    wb = openpyxl.load_workbook(path)
    found = []
    for ws in wb.worksheets:
        if ws.title == vm.FORMULA_SHEET:
            continue
        for row in ws.iter_rows():
            for c in row:
                if isinstance(c.value, str) and c.value.startswith(vm.NOTICE_OPENING):
                    found.append((ws.title, c.coordinate, " ".join(_lines_from(ws, c.row, c.column))))
    return found


def _lines_from(ws, row, col):
    """The notice's lines: the text cells from (row, col) down, until an empty cell."""
    lines = []
    while isinstance(ws.cell(row, col).value, str) and ws.cell(row, col).value:
        lines.append(ws.cell(row, col).value)
        row += 1
    return lines


def test_every_sheet_of_a_values_file_says_its_values_are_fixed(forms, tmp_path):
    # issue 10 item 2: after an input was edited in a spreadsheet app the file mixed new and frozen figures
    # without saying so; now each sheet carries a notice with the time, the fixed cells and the inputs
    from trueband.bridge.engine.recalc import recalculate

    out = recalculate(forms, tmp_path / "values.xlsx", values=True).output
    notices = _notices(out)
    assert sorted(s for s, _, _ in notices) == ["Scores", "Settings"]  # every sheet but the hidden one, once
    text = notices[0][2]
    assert "Scores!C2:C9" in text and "Scores!D2:D3" in text  # the cells holding fixed values
    assert "Settings!B1 = 4.2" in text and "Settings!B2 = 0.88" in text  # inputs with their values then
    assert "trueband restore" in text and " UTC" in text
    # nothing the file held is overwritten: every cell of the original reads the same but the replaced ones
    before, after = openpyxl.load_workbook(forms, data_only=True), openpyxl.load_workbook(out, data_only=True)
    for ws in before.worksheets:
        for row in ws.iter_rows():
            for c in row:
                if c.value is not None:
                    assert after[ws.title][c.coordinate].value == c.value or ws.title == "Scores" and \
                        c.coordinate in REGISTERED_CELLS, (ws.title, c.coordinate)
    # and the places chosen are empty cells that no formula reads (Scores!D4 is SUM(B:B): not column B)
    for sheet, cell, _ in notices:
        assert before[sheet][cell].value is None
        assert not cell.startswith("B")


def test_the_notice_avoids_cells_formulas_read_and_merged_cells(tmp_path):
    from trueband.bridge.engine.recalc import recalculate

    title = gb.row_xml(1, ['<c r="A1" t="inlineStr"><is><t>Dispatch scores</t></is></c>'])
    data = [gb.row_xml(r, [gb.cell_xml(f"A{r}", r * 3), gb.cell_xml(f"B{r}", 0, formula=f"SEM(A{r},0.9)")])
            for r in range(3, 6)]
    counting = gb.row_xml(7, [gb.cell_xml("A7", 0, formula="COUNTA(2:2)")])  # reads all of row 2
    xml = gb.sheet_part([title, *data, counting], after='<mergeCells count="1"><mergeCell ref="A8:D8"/></mergeCells>')
    book = gb.handmade_package(tmp_path / "reads.xlsx", [("Scores", xml)])
    out = recalculate(book, values=True).output
    [(sheet, cell, _)] = _notices(out)
    row, col = split_ref(cell)
    assert row != 2 and not (row == 8 and col <= 4), cell  # not where COUNTA(2:2) reads, not in A8:D8
    assert openpyxl.load_workbook(book)["Scores"][cell].value is None
    assert openpyxl.load_workbook(out, data_only=True)["Scores"]["A7"].value == 0  # COUNTA(2:2) still 0


def test_restore_takes_the_notices_out(forms, tmp_path):
    from trueband.bridge.engine.recalc import recalculate

    out = recalculate(forms, tmp_path / "values.xlsx", values=True).output
    assert main(["restore", str(out)]) == EXIT_OK
    assert _notices(tmp_path / "values.restored.xlsx") == []


def test_an_edited_notice_is_left_and_reported(forms, tmp_path, capsys):
    from trueband.bridge.engine.recalc import recalculate

    out = recalculate(forms, tmp_path / "values.xlsx", values=True).output
    sheet, cell, _ = next(n for n in _notices(out) if n[0] == "Settings")
    with open_workbook_package(out) as pkg:
        from trueband.bridge.workbook.sheet_patch import CellUpdate, patch_sheet
        changes = PackageChanges()
        part = pkg.sheet("Settings").part
        changes.set(pkg, part, patch_sheet(pkg.read(part), {cell: CellUpdate(vm.NOTICE_OPENING + " seen, K.")}))
        edited = save_workbook(pkg, changes, output=tmp_path / "edited.xlsx")
    assert main(["restore", str(edited)]) == 1
    assert f"Settings!{cell}: not restored (the values notice was edited" in capsys.readouterr().out
    assert [(s, c) for s, c, _ in _notices(tmp_path / "edited.restored.xlsx")] == [("Settings", cell)]


@pytest.mark.libreoffice
def test_libreoffice_shows_the_notice_on_every_sheet(demo_scoring, tmp_path, soffice):
    from trueband.bridge.study.templates import impact_template

    impact = impact_template(tmp_path / "impact.xlsx", groups=[("Group A", 40, 20), ("Group B", 30, 9)])
    for book in (demo_scoring, impact):
        values = _values_file(book)
        expected = _notices(values)
        assert expected, book.name
        shown = gb.libreoffice_csv(soffice, values, tmp_path / ("csv-" + book.stem))
        wb = openpyxl.load_workbook(values)
        for sheet, cell, text in expected:  # each line of the notice in its cell
            row, col = split_ref(cell)
            lines = _lines_from(wb[sheet], row, col)
            assert " ".join(lines) == text
            for k, line in enumerate(lines):
                assert gb.csv_cell(shown[sheet], f"{openpyxl.utils.get_column_letter(col)}{row + k}") == line, \
                    (book.name, sheet, cell, k)


def test_restore_checks_each_recorded_formula_element(forms, tmp_path, capsys):
    out, _ = values_book(forms)
    with open_workbook_package(out) as pkg:  # records edited by hand or written under another prefix
        changes = PackageChanges()
        part = pkg.sheet(vm.FORMULA_SHEET).part
        xml = pkg.read(part)
        new = xml.replace(b"<t>&lt;f&gt;sem(12,0.91)&lt;/f&gt;</t>", b"<t>&lt;f&gt;sem(12,</t>", 1).replace(
            b"<t>&lt;f&gt;_xludf.SEM(Settings!B1,Reliability)&lt;/f&gt;</t>",
            b"<t>&lt;x:f&gt;_xludf.SEM(Settings!B1,Reliability)&lt;/x:f&gt;</t>", 1)
        assert new.count(b"&lt;x:f") == 1 and b"sem(12,</t>" in new
        changes.set(pkg, part, new)
        edited = save_workbook(pkg, changes, output=tmp_path / "edited.xlsx")
    assert main(["restore", str(edited)]) == 1
    assert "Scores!D3: not restored (the recorded formula element was edited)" in capsys.readouterr().out
    got = _formulas(tmp_path / "edited.restored.xlsx", "Scores")  # openpyxl parses the restored sheet
    assert got["D2"] == "=_xludf.SEM(Settings!B1,Reliability)" and "D3" not in got


def test_the_notice_stays_out_of_named_areas_and_filters(tmp_path):
    from trueband.bridge.engine.recalc import recalculate

    title = gb.row_xml(1, ['<c r="A1" t="inlineStr"><is><t>Dispatch scores</t></is></c>'])
    data = [gb.row_xml(r, [gb.cell_xml(f"A{r}", r * 3), gb.cell_xml(f"B{r}", 0, formula=f"SEM(A{r},0.9)")])
            for r in range(3, 6)]
    xml = gb.sheet_part([title, *data], after='<autoFilter ref="A3:B6"/>')
    book = gb.handmade_package(tmp_path / "kept.xlsx", [("Scores", xml)],
                               defined_names=[("Pool", "Scores!$A$2:$D$2", None)])
    out = recalculate(book, values=True).output
    [(_, cell, _)] = _notices(out)
    row, col = split_ref(cell)
    assert row != 2 and not (3 <= row <= 6 and col <= 2), cell  # not in the named area nor the filter's


def test_recalc_and_values_on_cells_written_without_references(tmp_path):
    # r is optional on a cell (ECMA-376 Part 1, 18.3.1.4); recalc ended in a traceback ("cells not found")
    xml = gb.sheet_part(['<row r="1"><c r="A1"><v>12</v></c><c><f>SEM(A1,0.91)</f><v>1</v></c></row>'])
    book = gb.handmade_package(tmp_path / "positions.xlsx", [("Bands", xml)])
    assert main(["recalc", str(book)]) == EXIT_OK
    assert main(["recalc", "--values", str(book), "-o", str(tmp_path / "values.xlsx")]) == EXIT_OK
    sem = 12 * (1 - 0.91) ** 0.5  # SEM = SD·√(1 − r), Lord & Novick (1968), from memory
    assert openpyxl.load_workbook(tmp_path / "positions.recalc.xlsx", data_only=True)["Bands"]["B1"].value == \
        pytest.approx(sem)
    got = openpyxl.load_workbook(tmp_path / "values.xlsx")["Bands"]["B1"].value  # a value now, not a formula
    assert got == pytest.approx(sem)
    assert main(["restore", str(tmp_path / "values.xlsx")]) == EXIT_OK
    assert _formulas(tmp_path / "values.restored.xlsx", "Bands") == {"B1": "=SEM(A1,0.91)"}


@pytest.mark.libreoffice
def test_libreoffice_prints_every_line_of_the_notice(demo_scoring, tmp_path, soffice):
    # what Calc draws, not only what the cells hold: every line of the notice, whole, on the printed pages (issue 20:
    # it was one long cell, cut at the page's edge; now lines as wide as the printed columns)
    import shutil
    import subprocess

    if shutil.which("pdftotext") is None:
        pytest.skip("pdftotext (poppler-utils) is not installed")
    values = _values_file(demo_scoring)
    profile = (tmp_path / "lo-profile").resolve().as_uri()
    subprocess.run([soffice, f"-env:UserInstallation={profile}", "--headless", "--norestore", "--convert-to", "pdf",
                    "--outdir", str(tmp_path), str(values)], check=True, capture_output=True, timeout=180)
    printed = subprocess.run(["pdftotext", "-layout", str(tmp_path / (values.stem + ".pdf")), "-"],
                             capture_output=True, text=True, check=True).stdout
    wb = openpyxl.load_workbook(values)
    for sheet, cell, _ in _notices(values):
        row, col = split_ref(cell)
        for line in _lines_from(wb[sheet], row, col):
            assert " ".join(line.split()) in {" ".join(x.split()) for x in printed.splitlines()} or \
                " ".join(line.split()) in " ".join(printed.split()), (sheet, line)


def test_a_sheet_without_a_safe_cell_gets_no_notice_and_the_summary_says_so(tmp_path, capsys):
    scores = gb.sheet_part([gb.row_xml(1, [gb.cell_xml("A1", 12), gb.cell_xml("B1", 0, formula="SEM(A1,0.9)")])])
    count = gb.sheet_part([gb.row_xml(1, [gb.cell_xml("A1", 2, formula="COUNTA(Scores!A:XFD)")])])  # every cell
    book = gb.handmade_package(tmp_path / "full.xlsx", [("Scores", scores), ("Count", count)])
    assert main(["recalc", "--values", str(book)]) == EXIT_OK
    assert "no free cell for the values notice on Scores" in capsys.readouterr().err
    assert [s for s, _, _ in _notices(tmp_path / "full.recalc.xlsx")] == ["Count"]
    got = openpyxl.load_workbook(tmp_path / "full.recalc.xlsx", data_only=True)
    assert got["Scores"]["B1"].value == pytest.approx(12 * (1 - 0.9) ** 0.5) and got["Count"]["A1"].value == 2


def test_a_hand_edited_record_does_not_break_a_second_values_run(forms, tmp_path, capsys):
    out, _ = values_book(forms)
    with open_workbook_package(out) as pkg:  # a record's cell edited by hand, and a new formula typed in
        from trueband.bridge.workbook.sheet_edit import NewCell, add_cells
        changes = PackageChanges()
        part = pkg.sheet(vm.FORMULA_SHEET).part
        xml = pkg.read(part).replace(b"<t>D3</t>", b"<t>somewhere</t>", 1)
        assert b"somewhere" in xml
        changes.set(pkg, part, xml)
        settings = pkg.sheet("Settings").part
        changes.set(pkg, settings, add_cells(pkg.read(settings), {"C5": NewCell(formula="SED(4.2,0.88)", value=2.0)}))
        edited = save_workbook(pkg, changes, output=tmp_path / "edited.xlsx")
    assert main(["recalc", "--values", str(edited)]) == EXIT_OK
    assert main(["restore", str(tmp_path / "edited.recalc.xlsx")]) == 1
    assert "Scores!somewhere: not restored (the record does not name a cell)" in capsys.readouterr().out


def test_the_notice_never_takes_an_empty_styled_cell_and_restore_gives_back_every_byte(tmp_path, capsys):
    # issue 14 item 8: --values put its notice into <c r="C1" s="2"></c> and restore then removed that cell and its
    # style. A part as a desktop app saves it (CRLF after the declaration), every row holding data so the notice
    # goes beside the used range, where C1 is an empty styled cell.
    from trueband.funcs import call

    sem = call("SEM", 12.0, 0.91)  # the value recalc writes, so that the restored cells hold the same bytes
    rows = [gb.row_xml(1, [gb.cell_xml("A1", 12), gb.cell_xml("B1", 0.91), '<c r="C1" s="1"></c>'])]
    rows += [gb.row_xml(r, [gb.cell_xml(f"A{r}", r), gb.cell_xml(f"B{r}", sem, formula="SEM(A1,B1)")])
             for r in range(2, 10)]
    xml = gb.sheet_part(rows, dimension="A1:C9").replace(b"?>\n", b"?>\r\n", 1)
    book = gb.handmade_package(tmp_path / "styled.xlsx", [("Scores", xml)])
    assert main(["recalc", "--values", str(book), "-o", str(tmp_path / "values.xlsx")]) == EXIT_OK
    [(sheet, cell, _)] = _notices(tmp_path / "values.xlsx")
    assert cell != "C1"
    with zipfile.ZipFile(tmp_path / "values.xlsx") as z:
        values_xml = z.read("xl/worksheets/sheet1.xml")
    assert b'<c r="C1" s="1"></c>' in values_xml and values_xml.startswith(xml[:60])  # untouched, CRLF kept
    assert main(["restore", str(tmp_path / "values.xlsx"), "-o", str(tmp_path / "back.xlsx")]) == EXIT_OK
    with zipfile.ZipFile(book) as a, zipfile.ZipFile(tmp_path / "back.xlsx") as b:
        assert b.read("xl/worksheets/sheet1.xml") == a.read("xl/worksheets/sheet1.xml")  # every byte, style and all


def test_the_notice_prints_in_lines_inside_the_print_range_and_restore_gives_back_every_byte(tmp_path):
    # issue 20: the notice was one unwrapped long cell beside a study sheet's print range, so it never printed. Now
    # its lines are as wide as the printed columns, in new rows under the print range, which is extended over them;
    # restore takes the rows out and puts the print range back, byte for byte (the workbook part with it).
    from trueband.funcs import call

    sem = call("SEM", 12.0, 0.91)
    rows = [gb.row_xml(1, ['<c r="A1" t="inlineStr"><is><t>Dispatch scores</t></is></c>'])]
    rows += [gb.row_xml(r, [gb.cell_xml(f"A{r}", r), gb.cell_xml(f"B{r}", sem, formula="SEM(12,0.91)"),
                            gb.cell_xml(f"C{r}", r)]) for r in range(2, 12)]
    rows += [gb.row_xml(20, [gb.cell_xml("K20", 1)])]  # chart data beyond the printed columns
    cols = '<cols><col min="1" max="1" width="30" customWidth="1"/><col min="2" max="3" width="15" customWidth="1"/></cols>'
    xml = gb.sheet_part(rows, dimension="A1:K20").replace(b"<sheetData>", cols.encode() + b"<sheetData>", 1)
    book = gb.handmade_package(tmp_path / "printed.xlsx", [("Scores", xml)],
                               defined_names=[("_xlnm.Print_Area", "Scores!$A$1:$C$11", 0)])
    assert main(["recalc", "--values", str(book), "-o", str(tmp_path / "values.xlsx")]) == EXIT_OK
    wb = openpyxl.load_workbook(tmp_path / "values.xlsx")
    [(sheet, cell, text)] = _notices(tmp_path / "values.xlsx")
    row, col = split_ref(cell)
    ws = wb["Scores"]
    lines = _lines_from(ws, row, col)
    assert (row, col) == (13, 1) and len(lines) > 3  # under the print range, one empty row between, in column A
    assert max(len(line) for line in lines) <= 60 / 0.95  # as wide as columns A:C (60 units), not one long cell
    assert text.startswith(vm.NOTICE_OPENING) and text.endswith("then trueband recalc.")
    assert ws.print_area == f"'Scores'!$A$1:$C${row + len(lines) - 1}" or \
        ws.print_area == f"Scores!$A$1:$C${row + len(lines) - 1}"  # the print range takes in every line
    assert main(["restore", str(tmp_path / "values.xlsx"), "-o", str(tmp_path / "back.xlsx")]) == EXIT_OK
    with zipfile.ZipFile(book) as a, zipfile.ZipFile(tmp_path / "back.xlsx") as b:
        for name in ("xl/worksheets/sheet1.xml", "xl/workbook.xml"):
            assert b.read(name) == a.read(name), name  # every byte: the rows gone, the print range as it was


def test_a_second_values_run_rewrites_the_notice_lines_and_keeps_the_first_print_range(tmp_path):
    rows = [gb.row_xml(r, [gb.cell_xml(f"A{r}", r), gb.cell_xml(f"B{r}", 0, formula="SEM(A1,0.91)")])
            for r in range(1, 6)]
    book = gb.handmade_package(tmp_path / "book.xlsx", [("Scores", gb.sheet_part(rows))],
                               defined_names=[("_xlnm.Print_Area", "Scores!$A$1:$B$5", 0)])
    assert main(["recalc", "--values", str(book), "-o", str(tmp_path / "once.xlsx")]) == EXIT_OK
    assert main(["recalc", "--values", str(tmp_path / "once.xlsx"), "-o", str(tmp_path / "twice.xlsx")]) == EXIT_OK
    assert len(_notices(tmp_path / "twice.xlsx")) == 1  # the first run's lines taken out, not left above the new
    assert main(["restore", str(tmp_path / "twice.xlsx"), "-o", str(tmp_path / "back.xlsx")]) == EXIT_OK
    with zipfile.ZipFile(book) as a, zipfile.ZipFile(tmp_path / "back.xlsx") as b:
        assert b.read("xl/workbook.xml") == a.read("xl/workbook.xml")
    assert _notices(tmp_path / "back.xlsx") == []
