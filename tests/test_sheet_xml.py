"""Reading and patching worksheet XML, checked against openpyxl (a reference library) and the format.

Sources: ECMA-376 Part 1, 18.3.1.4 ``c`` (cell: ``r``, ``s``, ``t`` = b, e, inlineStr,
n, s, str), 18.3.1.40 ``f`` (formula: ``t`` = normal, array, shared; ``si``, ``ref``),
18.3.1.35 ``dimension``; openpyxl reads the same files for the cross-checks.
"""

from __future__ import annotations

import importlib
import pkgutil
import random
import re

import openpyxl
import pytest

import golden_books as gb
import trueband.bridge.workbook
from trueband.bridge.workbook import shared_formulas, sheet_columns, sheet_data, sheet_edit, sheet_patch, sheet_read
from trueband.bridge.workbook.cells import column_letters, split_ref
from trueband.bridge.workbook.sheet_data import ErrorValue, SheetXmlError
from trueband.bridge.workbook.sheet_edit import NewCell
from trueband.bridge.workbook.sheet_patch import CellUpdate, patch_sheet
from trueband.bridge.workbook.sheet_read import iter_cells
from trueband.bridge.workbook.package import open_workbook_package


@pytest.fixture
def forms(tmp_path):
    path = gb.formula_forms_book(tmp_path / "forms.xlsx")
    with open_workbook_package(path) as pkg:
        yield path, pkg.sheet_xml("Scores"), pkg.shared_strings


def cells_of(xml, strings=()):
    return {c.ref: c for c in iter_cells(xml, strings)}


def columns_from_cells(cells_read) -> sheet_columns.SheetColumns:
    """What the column reader should give, built from the cell reader's cells."""
    columns: dict[int, tuple[list[int], list[object]]] = {}
    formulas = []
    styles = {}
    for c in cells_read:
        if c.style:
            styles[(c.row, c.col)] = c.style
        if c.formula is not None:
            formulas.append((c.row, c.col, c.formula))
        if c.value is None and c.formula is None:
            continue
        entry = columns.setdefault(c.col, ([], []))
        entry[0].append(c.row)
        entry[1].append(c.value)
    return sheet_columns.SheetColumns(dict(sorted(columns.items())), formulas, styles)


def test_values_types_and_styles(forms):
    _, xml, strings = forms
    c = cells_of(xml, strings)
    assert c["A1"].value == "Applicant" and c["A1"].type == "s" and c["A1"].style == 1
    assert c["A2"].value == "OHL-100" and c["A2"].type == "inlineStr"
    assert c["B2"].value == 31.0 and c["B2"].style == 2 and (c["B2"].row, c["B2"].col) == (2, 2)
    assert c["B4"].value is None and c["B4"].style == 2  # an empty styled cell
    assert c["B6"].value == "absent"
    assert c["D5"].value == "#DIV/0!" and isinstance(c["D5"].value, ErrorValue) and c["D5"].type == "e"
    assert not isinstance(c["B6"].value, ErrorValue)
    assert c["D10"].value == "Group A" and c["D10"].type == "str"
    assert c["D11"].value is True and c["D11"].type == "b"
    assert c["E3"].value == " padded "
    assert c["E4"].value == "Cargo dispatch"


def test_cell_without_reference_is_placed_by_position(forms):
    _, xml, strings = forms
    c = cells_of(xml, strings)
    assert c["E2"].value == "no reference" and (c["E2"].row, c["E2"].col) == (2, 5)
    # the cells after it are neither lost nor repeated
    refs = [x.ref for x in iter_cells(xml, strings)]
    assert len(refs) == len(set(refs))
    assert refs.index("E2") == refs.index("D2") + 1 and refs.index("F2") == refs.index("E2") + 1


def test_formula_info(forms):
    _, xml, strings = forms
    c = cells_of(xml, strings)
    master = c["C2"].formula
    assert master.kind == "shared" and master.is_master and master.shared_index == 0 and master.ref == "C2:C9"
    assert master.text == "SCORE_BAND(B2,$B$2:$B$9,Settings!$B$1,Reliability)"
    for r in range(3, 10):
        dep = c[f"C{r}"].formula
        assert dep.kind == "shared" and not dep.is_master and dep.shared_index == 0 and dep.text is None
    assert c["D2"].formula.text == "_xludf.SEM(Settings!B1,Reliability)"
    assert c["D3"].formula.text == "sem(12,0.91)"
    assert c["D4"].formula.text == "SUM(B:B)"
    assert c["D8"].formula.kind == "array" and c["D8"].formula.ref == "D8:D9" and c["D8"].value == 62.0
    assert c["D9"].formula is None and c["D9"].value == 54.0
    assert c["D10"].formula.text == 'IF(B2>30,"Group A","Group B")'  # &gt; unescaped
    assert c["B2"].formula is None


def test_reader_agrees_with_openpyxl_on_the_features_book(tmp_path):
    path = gb.features_book(tmp_path / "features.xlsx")
    formulas = openpyxl.load_workbook(path)  # reference library
    cached = openpyxl.load_workbook(path, data_only=True)
    with open_workbook_package(path) as pkg:
        for info in pkg.worksheets:
            ours = cells_of(pkg.read(info.part), pkg.shared_strings)
            theirs = {c.coordinate: c for row in formulas[info.name].iter_rows() for c in row if c.value is not None}
            assert set(ours) >= set(theirs)
            for ref, cell in theirs.items():
                mine = ours[ref]
                if mine.formula is not None:
                    text = cell.value if isinstance(cell.value, str) else cell.value.text
                    assert "=" + mine.formula.text == text, ref
                    assert mine.value == cached[info.name][ref].value, ref
                else:
                    assert mine.value == cell.value, ref


def _sheet_from(rnd, rows: int, columns: int, most: int, cell) -> bytes:
    """A sheet of ``rows`` rows, each with up to ``most`` of the first ``columns`` - 1 columns, cells made by ``cell``."""
    out = []
    for r in range(1, rows + 1):
        refs = [f"{column_letters(col)}{r}" for col in sorted(rnd.sample(range(1, columns), rnd.randint(0, most)))]
        out.append(gb.row_xml(r, [cell(rnd, ref, r) for ref in refs]))
    return gb.sheet_part(out)


def _random_cell(rnd, ref: str, r: int) -> str:
    kind = rnd.random()
    if kind < 0.4:
        return gb.cell_xml(ref, rnd.choice([0, 1, -2.5, 1e-300, 12345678901234567, 0.1 + 0.2]))
    if kind < 0.55:
        return gb.cell_xml(ref, rnd.choice(["x", "a&b", "<t>"]), t="str", formula="T(\"x\")")
    if kind < 0.65:
        return gb.cell_xml(ref, rnd.choice([True, False]), t="b", s=rnd.randint(0, 2))
    if kind < 0.75:
        return gb.cell_xml(ref, rnd.choice(sheet_data.ERROR_CODES[:7]), t="e")
    if kind < 0.85:
        return f'<c r="{ref}" s="1" t="inlineStr"><is><t>in {r}</t></is></c>'
    if kind < 0.95:
        return gb.cell_xml(ref, 3, formula=f"SUM(A{r}:B{r})", s=2)
    return f'<c s="2" r="{ref}" t="n"><v>{r}</v></c>'  # attributes in another order


def _random_sheet(rnd, rows=300):
    return _sheet_from(rnd, rows, 30, 8, _random_cell)


def test_fast_reader_matches_the_row_aware_reader():
    rnd = random.Random(11)
    for _ in range(5):
        xml = _random_sheet(rnd)
        assert list(iter_cells(xml)) == list(sheet_read.iter_cells_rowwise(xml, ()))


def test_chunked_reading_matches_one_piece(monkeypatch):
    xml = _random_sheet(random.Random(3), rows=2000)
    whole = list(iter_cells(xml))
    monkeypatch.setattr(sheet_data, "CHUNK_BYTES", 1000)
    assert list(iter_cells(xml)) == whole


def test_random_sheet_against_openpyxl(tmp_path):
    xml = _random_sheet(random.Random(5))
    path = gb.handmade_package(tmp_path / "random.xlsx", [("Data", xml)])
    ws = openpyxl.load_workbook(path, data_only=True)["Data"]  # reference library: cached values
    theirs = {c.coordinate: c.value for row in ws.iter_rows() for c in row if c.value is not None}
    ours = {c.ref: c.value for c in iter_cells(xml) if c.value is not None}
    assert ours.keys() == theirs.keys()
    for ref, value in theirs.items():
        assert ours[ref] == value or (isinstance(value, int) and ours[ref] == float(value)), ref


def test_prefixed_namespace_sheet():
    xml = (b'<x:worksheet xmlns:x="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'
           b'<x:dimension ref="A1:B1"/><x:sheetData><x:row r="1"><x:c r="A1"><x:v>4</x:v></x:c>'
           b'<x:c r="B1"><x:f>A1*2</x:f><x:v>8</x:v></x:c></x:row></x:sheetData></x:worksheet>')
    c = cells_of(xml)
    assert c["A1"].value == 4.0 and c["B1"].formula.text == "A1*2" and c["B1"].value == 8.0
    assert sheet_read.dimension(xml) == "A1:B1"
    patched = patch_sheet(xml, {"B1": CellUpdate(9.5)})
    assert b"<x:c r=\"B1\"><x:f>A1*2</x:f><x:v>9.5</x:v></x:c>" in patched


def test_dimension_and_used_range(forms):
    _, xml, strings = forms
    assert sheet_read.dimension(xml) == "A1:F11"
    assert sheet_read.used_range(xml, strings) == (1, 1, 11, 6)
    assert sheet_read.dimension(gb.sheet_part([])) is None
    assert sheet_read.used_range(gb.sheet_part([])) is None


def test_bad_shared_string_index_names_the_cell():
    xml = gb.sheet_part([gb.row_xml(3, [gb.cell_xml("C3", 7, t="s")])])
    with pytest.raises(SheetXmlError, match="C3"):
        list(iter_cells(xml, ["only one"]))


@pytest.mark.parametrize("ref, expected", [("A1", (1, 1)), ("$B$7", (7, 2)), ("XFD1048576", (1048576, 16384)),
                                           ("aa10", (10, 27))])
def test_split_ref(ref, expected):
    # ECMA-376 Part 1, 18.18.62 ST_Ref; the last column is XFD (16,384) and the last row 1,048,576
    assert split_ref(ref) == expected
    assert column_letters(expected[1]) == re.sub(r"[$0-9]", "", ref).upper()


# ------------------------------------------------------------------ patching


def _outside(xml: bytes, refs) -> bytes:
    """The XML with the listed cell elements cut out (what must stay byte-identical)."""
    for ref in refs:
        xml = re.sub(rb'<c r="' + ref.encode() + rb'"[^>]*?(?:/>|>.*?</c>)', b"", xml, count=1, flags=re.S)
    return xml


def test_patch_writes_values_beside_kept_formulas(forms):
    _, xml, strings = forms
    updates = {"C2": CellUpdate(3), "C3": CellUpdate(1.25), "D3": CellUpdate(3.6),
               "D10": CellUpdate("Group B"), "D11": CellUpdate(False), "D5": CellUpdate.error("#DIV/0!"),
               "D2": CellUpdate(ErrorValue("#NUM!"))}
    new = patch_sheet(xml, updates)
    assert _outside(new, updates) == _outside(xml, updates)
    before, after = cells_of(xml, strings), cells_of(new, strings)
    for ref in after:
        if ref not in updates:
            assert after[ref] == before[ref]
    assert after["C2"].value == 3.0 and after["C2"].formula == before["C2"].formula  # shared master kept
    assert after["C3"].value == 1.25 and after["C3"].formula == before["C3"].formula
    assert after["D3"].value == 3.6 and after["D3"].type == "n"  # was t="e": the attribute is dropped
    assert after["D10"].value == "Group B" and after["D10"].type == "str"
    assert after["D11"].value is False and after["D11"].type == "b"
    assert after["D2"].value == "#NUM!" and after["D2"].type == "e"
    assert b'<c r="C2"><f t="shared" ref="C2:C9" si="0">' in new


def test_patched_file_reads_back_in_openpyxl(forms, tmp_path):
    path, xml, _ = forms
    new = patch_sheet(xml, {"D3": CellUpdate(3.6), "D10": CellUpdate("Group B"), "D11": CellUpdate(False)})
    with open_workbook_package(path) as pkg:
        parts = {n: (new if n == "xl/worksheets/sheet1.xml" else pkg.read(n)) for n in pkg.entry_names}
    out = gb.write_zip(tmp_path / "patched.xlsx", parts)
    ws = openpyxl.load_workbook(out, data_only=True)["Scores"]  # reference library
    assert (ws["D3"].value, ws["D10"].value, ws["D11"].value) == (3.6, "Group B", False)
    assert openpyxl.load_workbook(out)["Scores"]["D3"].value == "=sem(12,0.91)"


@pytest.mark.parametrize("value, text", [(0.1 + 0.2, b"0.30000000000000004"), (1e-300, b"1e-300"), (5.0, b"5"),
                                         (-0.0, b"0"), (123456789012345680.0, b"1.2345678901234568e+17"), (7, b"7")])
def test_numbers_are_written_so_they_read_back_exactly(value, text):
    xml = gb.sheet_part([gb.row_xml(1, [gb.cell_xml("A1", None, formula="1")])])
    new = patch_sheet(xml, {"A1": CellUpdate(value)})
    assert b"<v>" + text + b"</v>" in new
    assert cells_of(new)["A1"].value == float(value)


def test_non_finite_values_are_refused():
    xml = gb.sheet_part([gb.row_xml(1, [gb.cell_xml("A1", None, formula="1")])])
    with pytest.raises(SheetXmlError, match="A1"):
        patch_sheet(xml, {"A1": CellUpdate(float("nan"))})


def test_text_is_escaped():
    xml = gb.sheet_part([gb.row_xml(1, [gb.cell_xml("A1", None, formula='"x"')])])
    new = patch_sheet(xml, {"A1": CellUpdate('a<b & "c"\x01')})
    assert cells_of(new)["A1"].value == 'a<b & "c"\x01'


def test_drop_formula_keeps_the_value(forms):
    _, xml, strings = forms
    new = patch_sheet(xml, {"D4": CellUpdate(179.0, drop_formula=True), "D10": CellUpdate("Group A", drop_formula=True)})
    c = cells_of(new, strings)
    assert c["D4"].formula is None and c["D4"].value == 179.0
    assert c["D10"].formula is None and c["D10"].value == "Group A" and c["D10"].type == "inlineStr"


def test_dropping_a_shared_master_alone_is_refused(forms):
    _, xml, strings = forms
    with pytest.raises(SheetXmlError, match="C2.*C3|shared formula"):
        patch_sheet(xml, {"C2": CellUpdate(1, drop_formula=True)})
    whole = {f"C{r}": CellUpdate(1, drop_formula=True) for r in range(2, 10)}
    c = cells_of(patch_sheet(xml, whole), strings)
    assert all(c[f"C{r}"].formula is None for r in range(2, 10))


def test_restoring_a_raw_formula_element(forms):
    _, xml, _ = forms
    dropped = patch_sheet(xml, {"D8": CellUpdate(62, drop_formula=True)})
    back = patch_sheet(dropped, {"D8": CellUpdate(62.0, formula_xml=b'<f t="array" ref="D8:D9">B2:B3*2</f>')})
    assert back == xml.replace(b"<v>62</v>", b"<v>62</v>")  # the element and value as they were


def test_patching_a_missing_cell_is_refused(forms):
    _, xml, _ = forms
    with pytest.raises(SheetXmlError, match="Z99"):
        patch_sheet(xml, {"Z99": CellUpdate(1)})


# ------------------------------------------------------------------ adding cells


def test_add_cells_in_column_order_and_new_rows(forms):
    _, xml, strings = forms
    new = sheet_edit.add_cells(xml, {"G1": NewCell("Band", style=1), "G3": NewCell(formula="=C3+1", value=2.0),
                             "B4": NewCell(30.0), "A13": NewCell("end"), "C12": NewCell(formula="1+1")})
    c = cells_of(new, strings)
    assert c["G1"].value == "Band" and c["G1"].style == 1
    assert c["G3"].formula.text == "C3+1" and c["G3"].value == 2.0
    assert c["B4"].value == 30.0 and c["B4"].style == 2  # an empty styled cell takes the value, keeps its style
    assert c["A13"].value == "end" and c["C12"].formula.text == "1+1"
    order = [(x.row, x.col) for x in iter_cells(new, strings)]
    assert order == sorted(order)
    assert sheet_read.dimension(new) == "A1:G13"
    for ref, cell in cells_of(xml, strings).items():
        if ref != "B4":
            assert c[ref] == cell


def test_add_cells_refuses_a_filled_cell(forms):
    _, xml, strings = forms
    with pytest.raises(SheetXmlError, match="C3"):
        sheet_edit.add_cells(xml, {"C3": NewCell(1.0)})
    assert cells_of(sheet_edit.add_cells(xml, {"C3": NewCell(1.0)}, replace=True), strings)["C3"].value == 1.0


def test_add_cells_to_an_empty_sheet_and_openpyxl_reads_it(tmp_path):
    xml = gb.sheet_part([]).replace(b"<sheetData></sheetData>", b"<sheetData/>")
    new = sheet_edit.add_cells(xml, {"B2": NewCell(formula="SEM(12,0.91)", value=3.6), "A1": NewCell("SEM")})
    path = gb.handmade_package(tmp_path / "added.xlsx", [("Only", new)])
    wb = openpyxl.load_workbook(path)  # reference library
    assert wb["Only"]["A1"].value == "SEM" and wb["Only"]["B2"].value == "=SEM(12,0.91)"
    assert openpyxl.load_workbook(path, data_only=True)["Only"]["B2"].value == 3.6
    assert wb["Only"].calculate_dimension() == "A1:B2"


# ------------------------------------------------------------------ shared formulas written out


@pytest.mark.parametrize("formula, origin, target", [
    ("=A1+$A$1+A$1+$A1", "C3", "D5"),
    ("=SCORE_BAND(B2,$B$2:$B$9,Settings!$B$1,Reliability)", "C2", "C9"),
    ("=SUM(B:B)+SUM(2:2)", "D4", "E6"),
    ("=LOG10(A1)+1E5", "B1", "B4"),
    ("='Pool 2026'!B2*Settings!C3&\"A1\"", "A1", "C2"),
    ("=IF(B2>30,\"Group A\",\"Group B\")", "D10", "D12"),
])
def test_translate_formula_against_openpyxl(formula, origin, target):
    from openpyxl.formula.translate import Translator  # reference library

    dr = split_ref(target)[0] - split_ref(origin)[0]
    dc = split_ref(target)[1] - split_ref(origin)[1]
    assert "=" + shared_formulas.translate_formula(formula[1:], dr, dc) == Translator(formula, origin=origin).translate_formula(target)


def test_unshare_writes_each_cell_its_own_formula(forms):
    _, xml, strings = forms
    new = shared_formulas.unshare_formulas(xml, strings)
    before, after = cells_of(xml, strings), cells_of(new, strings)
    for r in range(2, 10):
        f = after[f"C{r}"].formula
        assert f.kind == "normal" and f.text == f"SCORE_BAND(B{r},$B$2:$B$9,Settings!$B$1,Reliability)"
        assert after[f"C{r}"].value == before[f"C{r}"].value
    for ref in before:
        if not ref.startswith("C") or ref == "C1":
            assert after[ref] == before[ref]
    assert shared_formulas.unshare_formulas(xml, strings, groups={7}) == xml


def test_column_reader_agrees_with_the_cell_reader(forms):
    _, xml, strings = forms
    rnd = random.Random(21)
    for sheet in [xml, *(_random_sheet(rnd) for _ in range(3))]:
        strings_here = strings if sheet is xml else ()
        expected = columns_from_cells(list(sheet_read.iter_cells_rowwise(sheet, strings_here)))
        got = sheet_columns.read_columns(sheet, strings_here)
        assert got.columns == expected.columns
        assert got.formulas == expected.formulas
        assert got.styles == expected.styles
    cols = sheet_columns.read_columns(xml, strings)
    assert cols.value(2, 2) == 31.0 and cols.value(4, 2) is None and cols.value(99, 2) is None
    assert cols.columns[2][0] == [1, 2, 3, 5, 6, 7, 8, 9]  # B4 is an empty styled cell: not a value


def _regular_cell(rnd, ref: str, r: int) -> str:
    """A cell in the forms the fast paths take (the reference first), of every kind."""
    kind = rnd.random()
    s = rnd.choice([None, None, 1, 2])
    if kind < 0.3:
        return gb.cell_xml(ref, rnd.choice([0, 1, -2.5, 1e-300, 12345678901234567, 0.1 + 0.2]), s=s)
    if kind < 0.35:
        return gb.cell_xml(ref, rnd.randint(0, 2), t="s", s=s)  # a shared string
    if kind < 0.4:
        return gb.cell_xml(ref, rnd.choice([True, False]), t="b", s=s)
    if kind < 0.45:
        return gb.cell_xml(ref, rnd.choice(sheet_data.ERROR_CODES[:7]), t="e")
    if kind < 0.5:
        return f'<c r="{ref}" t="n"><v>{r}.5</v></c>'
    if kind < 0.55:
        return f'<c r="{ref}" s="1"/>' if s else f'<c r="{ref}"><v></v></c>'  # empty
    if kind < 0.6:
        return f'<c r="{ref}" t="inlineStr"><is><t>in {r}</t></is></c>'
    if kind < 0.72:
        return gb.cell_xml(ref, rnd.choice([None, 3, 0.25]), formula=f"SUM(A{r}:B{r})", s=s)
    if kind < 0.78:
        return gb.cell_xml(ref, rnd.choice(["x", "a&b", ""]), t="str", formula='T("a&b")')
    if kind < 0.82:
        return gb.cell_xml(ref, "#DIV/0!", t="e", formula="1/0")
    if kind < 0.86:
        return gb.cell_xml(ref, 7, formula=f"A{r}*2", f_attrs=f' t="shared" ref="{ref}:{ref}" si="{r}"')
    if kind < 0.9:
        return gb.cell_xml(ref, 7, f_attrs=' t="shared" si="3"')  # a dependent
    if kind < 0.93:
        return gb.cell_xml(ref, 4, formula="A1:A2*2", f_attrs=f' t="array" ref="{ref}"')
    if kind < 0.96:
        return f'<c r="{ref}"><f></f><v>1</v></c>'
    return f'<c r="{ref}" t="str"><f>A1&amp;"&lt;"</f><v>x</v><extLst><ext uri="u"/></extLst></c>'


def _regular_sheet(rnd, rows=400):
    return _sheet_from(rnd, rows, 12, 9, _regular_cell)


@pytest.mark.parametrize("seed", range(6))
def test_fast_column_reader_agrees_with_the_cell_reader(seed, monkeypatch):
    rnd = random.Random(seed)
    strings = ["alpha", "b&c", "gamma"]
    reads_as_the_cell_reader(_regular_sheet(rnd), strings, rnd, seed, monkeypatch)


def reads_as_the_cell_reader(sheet, strings, rnd, seed, monkeypatch):
    """The column reader's columns, formulas and styles equal the cell reader's (odd seeds: small chunks)."""
    expected = columns_from_cells(list(sheet_read.iter_cells_rowwise(sheet, strings)))
    if seed % 2:
        monkeypatch.setattr(sheet_data, "CHUNK_BYTES", rnd.randint(200, 5000))
    got = sheet_columns.read_columns(sheet, strings)
    assert got.columns == expected.columns
    assert got.formulas == expected.formulas
    assert got.styles == expected.styles
    return got


@pytest.mark.parametrize("seed", range(6))
def test_value_patcher_agrees_with_the_general_patcher(seed, monkeypatch):
    rnd = random.Random(100 + seed)
    sheet = _regular_sheet(rnd)
    formula_cells = [c.ref for c in iter_cells(sheet, ("",) * 3) if c.formula is not None]
    chosen = rnd.sample(formula_cells, len(formula_cells) // 2)
    values = {ref: rnd.choice([1.0, -0.0, 2.5e-7, 1e16, 123456789012345678.0, "text & <more>", "", True, False,
                               ErrorValue("#N/A"), None]) for ref in chosen}
    expected = sheet_patch._patch_cells(sheet, {ref: CellUpdate(v) for ref, v in values.items()})
    if seed % 2:
        monkeypatch.setattr(sheet_data, "CHUNK_BYTES", rnd.randint(200, 5000))
    assert sheet_patch.patch_values(sheet, values) == expected
    assert patch_sheet(sheet, {ref: CellUpdate(v) for ref, v in values.items()}) == expected


def test_column_reader_names_a_bad_number():
    xml = gb.sheet_part([gb.row_xml(1, [gb.cell_xml("A1", 1)]), gb.row_xml(2, ['<c r="A2"><v>1,5</v></c>'])])
    with pytest.raises(SheetXmlError, match="A2"):
        sheet_columns.read_columns(xml)


def test_unshare_without_the_shared_strings(forms):
    _, xml, strings = forms
    assert shared_formulas.unshare_formulas(xml) == shared_formulas.unshare_formulas(xml, strings)


def test_pretty_printed_sheet(tmp_path):
    xml = b"""<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">
  <sheetData>
    <row r="1">
      <c r="A1">
        <v>4</v>
      </c>
      <c r="B1">
        <f>A1*2</f>
        <v>8</v>
      </c>
      <c r="C1" t="inlineStr">
        <is><t>four</t></is>
      </c>
    </row>
  </sheetData>
</worksheet>"""
    c = cells_of(xml)
    assert (c["A1"].value, c["B1"].value, c["B1"].formula.text, c["C1"].value) == (4.0, 8.0, "A1*2", "four")
    patched = cells_of(patch_sheet(xml, {"B1": CellUpdate(9.0), "A1": CellUpdate(5.0)}))
    assert (patched["A1"].value, patched["B1"].value, patched["B1"].formula.text) == (5.0, 9.0, "A1*2")
    path = gb.handmade_package(tmp_path / "pretty.xlsx", [("P", xml)])
    assert openpyxl.load_workbook(path, data_only=True)["P"]["A1"].value == 4  # reference library agrees
    assert sheet_columns.read_columns(xml).columns == columns_from_cells(list(iter_cells(xml))).columns


def test_formula_cells_without_values_are_kept_as_empty_cells():
    # A column of formulas as a library writes them (no cached values, no attributes): the cells are
    # there (they count for the used range) but empty, as the cell reader says.
    rows = [gb.row_xml(r, [gb.cell_xml(f"A{r}", r), gb.cell_xml(f"B{r}", formula=f"A{r}*2")]) for r in range(1, 30)]
    xml = gb.sheet_part(rows)
    expected = columns_from_cells(list(sheet_read.iter_cells_rowwise(xml, ())))
    got = sheet_columns.read_columns(xml)
    assert got.columns == expected.columns
    assert got.columns[2] == (list(range(1, 30)), [None] * 29)
    assert got.formulas == expected.formulas
    arrays = sheet_columns.read_column_arrays(xml).columns[2]
    assert arrays.rows.tolist() == list(range(1, 30)) and not arrays.others


# ------------------------------------------------------------------ irregular but valid XML (checked against a parser)
#
# Forms any XML writer may produce (XML 1.0, 5th edition: 2.10 white space, 3.1 start tags with
# whitespace around "=" and single- or double-quoted attribute values, 3.1 end tags "</c >",
# 4.1 character references, 2.7 CDATA sections, 2.5 comments, 2.6 processing instructions;
# Namespaces in XML 1.0, 6: any prefix bound to the namespace). The reference is
# xml.etree.ElementTree (the standard library's XML parser) reading the same bytes.

from xml.etree import ElementTree as ET  # noqa: E402

MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
_ESCAPE = re.compile(r"_x([0-9A-Fa-f]{4})_")


def parser_cells(xml: bytes, strings=()):
    """ref → (value, type, style, formula (text, kind, si, ref) or None), read with ElementTree."""
    root = ET.fromstring(xml)
    q = lambda t: f"{{{MAIN}}}{t}"  # noqa: E731
    out = {}
    for c in root.find(q("sheetData")).iter(q("c")):
        t, s = c.get("t", "n"), int(c.get("s", "0"))
        f, v, inline = c.find(q("f")), c.find(q("v")), c.find(q("is"))
        formula = None
        if f is not None:
            kind = f.get("t", "normal")
            text = _ESCAPE.sub(lambda m: chr(int(m.group(1), 16)), f.text) if f.text else None
            formula = (text if text is not None or kind == "shared" else "", kind,
                       None if f.get("si") is None else int(f.get("si")), f.get("ref"))
        value = None
        if inline is not None:
            value = "".join(x.text or "" for x in inline.iter(q("t")))
        elif v is not None and v.text:
            raw = v.text
            value = {"n": lambda: float(raw), "s": lambda: strings[int(raw)], "b": lambda: raw.strip() in ("1", "true"),
                     "e": lambda: raw}.get(t, lambda: _ESCAPE.sub(lambda m: chr(int(m.group(1), 16)), raw))()
        out[c.get("r")] = (value, t, s, formula)
    return out


def reader_cells(xml: bytes, strings=()):
    return {c.ref: (c.value, c.type, c.style, None if c.formula is None else c.formula[:4])
            for c in iter_cells(xml, strings)}


def column_cells(xml: bytes, strings=()):
    """The column reader's view in the same shape (values by cell; formulas; styles)."""
    got = sheet_columns.read_columns(xml, strings)
    values = {(r, c): v for c, (rows, vals) in got.columns.items() for r, v in zip(rows, vals)}
    formulas = {(r, c): f[:4] for r, c, f in got.formulas}
    return values, formulas, got.styles


def expected_columns(cells):
    values, formulas, styles = {}, {}, {}
    for ref, (value, _, style, formula) in cells.items():
        r, c = split_ref(ref)
        if value is not None or formula is not None:
            values[(r, c)] = value
        if formula is not None:
            formulas[(r, c)] = formula
        if style:
            styles[(r, c)] = style
    return values, formulas, styles


_BASE_ROWS = [
    '<row r="1"><c r="A1" t="s"><v>0</v></c><c r="B1" s="1"><v>4</v></c><c r="C1"><f>B1*2</f><v>8</v></c>'
    '<c r="D1" t="str"><f>T("x")</f><v>x</v></c></row>',
    '<row r="2"><c r="A2" t="inlineStr"><is><t>OHL-7</t></is></c><c r="B2"><v>0.5</v></c>'
    '<c r="C2"><f t="shared" ref="C2:C3" si="0">B2+1</f><v>1.5</v></c><c r="D2" t="e"><f>1/0</f><v>#DIV/0!</v></c>'
    '</row>',
    '<row r="3"><c r="B3"><v>7</v></c><c r="C3"><f t="shared" si="0"/><v>8</v></c><c r="D3" t="b"><v>1</v></c></row>',
]


def _sheet(rows, root_attrs=f'xmlns="{MAIN}"', head='<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'):
    return (head + f"<worksheet {root_attrs}><dimension ref=\"A1:D3\"/><sheetData>" + "".join(rows)
            + "</sheetData></worksheet>")


def _single_quotes(text):
    return re.sub(r' ([A-Za-z:]+)="([^"]*)"', r" \1='\2'", text)


IRREGULAR_FORMS = {
    "space before > in end tags": lambda s: s.replace("</c>", "</c >").replace("</v>", "</v\t>"),
    "space before > in start tags": lambda s: s.replace('">', '" >').replace("<v>", "<v >").replace("<is>", "<is >"),
    "newlines and tabs between attributes": lambda s: s.replace(' s="', '\n\ts="').replace(' t="', '\r\n t="'),
    "whitespace around =": lambda s: s.replace(' r="', ' r = "'),
    "single-quoted attributes": _single_quotes,
    "mixed quotes": lambda s: s.replace('r="D2"', "r='D2'").replace('t="s"', "t='s'"),
    "character references": lambda s: s.replace('r="B3"', 'r="&#66;3"').replace("<v>7</v>", "<v>&#55;</v>")
    .replace("<f>B1*2</f>", "<f>B1&#42;2</f>"),
    "CDATA sections": lambda s: s.replace('<f>T("x")</f>', '<f><![CDATA[T("x")]]></f>')
    .replace("<t>OHL-7</t>", "<t><![CDATA[OHL-]]>7</t>"),
    "comments": lambda s: s.replace('<row r="2">', '<!-- <c r="A9"><v>9</v></c> --><row r="2"><!--x-->')
    .replace("</row>", "<!-- end --></row>", 1),
    "processing instructions": lambda s: s.replace('<row r="3">', '<?app keep?><row r="3">'),
    "another prefix for the main namespace": lambda s: s.replace('<row r="3"><c r="B3"><v>7</v></c>',
                                                                 f'<row r="3"><x:c xmlns:x="{MAIN}" r="B3"><x:v>7</x:v></x:c>'),
    "empty elements": lambda s: s.replace('<c r="B2"><v>0.5</v></c>', '<c r="B2"><v>0.5</v></c><c r="E2"></c >'),
}


def _corpus():
    base = _sheet(_BASE_ROWS)
    for name, change in IRREGULAR_FORMS.items():
        text = change(base)
        assert text != base, name
        yield name, text.encode("utf-8")
    yield "both prefixes bound", _sheet(_BASE_ROWS, f'xmlns="{MAIN}" xmlns:x="{MAIN}"').replace(
        "<dimension", "<x:dimension").encode()
    latin = _sheet(_BASE_ROWS, head='<?xml version="1.0" encoding="ISO-8859-1"?>\n').replace("OHL-7", "Ærø-7")
    yield "ISO-8859-1 encoding", latin.encode("latin-1")
    yield "UTF-16", _sheet(_BASE_ROWS, head='<?xml version="1.0" encoding="UTF-16"?>\n').encode("utf-16")


CORPUS = dict(_corpus())
STRINGS = ["Applicant"]


@pytest.mark.parametrize("name", list(CORPUS))
def test_readers_agree_with_an_xml_parser_on_irregular_forms(name):
    xml = CORPUS[name]
    expected = parser_cells(xml, STRINGS)
    assert len(expected) >= 11, name  # the corpus case keeps every cell of the base sheet
    assert reader_cells(xml, STRINGS) == expected
    assert column_cells(xml, STRINGS) == expected_columns(expected)


@pytest.mark.parametrize("name", list(CORPUS))
def test_patchers_agree_with_an_xml_parser_on_irregular_forms(name):
    xml = CORPUS[name]
    before = parser_cells(xml, STRINGS)
    for patch in (lambda x: sheet_patch.patch_values(x, {"C1": 9.0, "D2": ErrorValue("#N/A")}),
                  lambda x: patch_sheet(x, {"C1": CellUpdate(9.0), "D2": CellUpdate(ErrorValue("#N/A"))})):
        after = parser_cells(patch(xml), STRINGS)  # well-formed, and every other cell as it was
        assert after.pop("C1") == (9.0, "n", 0, ("B1*2", "normal", None, None))
        assert after.pop("D2") == ("#N/A", "e", 0, ("1/0", "normal", None, None))
        assert after == {k: v for k, v in before.items() if k not in ("C1", "D2")}
    dropped = parser_cells(patch_sheet(xml, {"D1": CellUpdate("x", drop_formula=True)}), STRINGS)
    assert dropped.pop("D1") == ("x", "inlineStr", 0, None)
    assert dropped == {k: v for k, v in before.items() if k != "D1"}
    added = parser_cells(sheet_edit.add_cells(xml, {"E1": NewCell(value=2.0), "A4": NewCell(formula="B3")}), STRINGS)
    assert added.pop("E1") == (2.0, "n", 0, None) and added.pop("A4") == (None, "n", 0, ("B3", "normal", None, None))
    assert added == before


def test_end_tag_with_space_does_not_lose_the_next_cell():
    # issue 10 item 8: "<c ...></c >" made the patcher take the next cell into the first one
    xml = _sheet(['<row r="1"><c r="A1"><f>1+1</f><v>2</v></c ><c r="B1"><f>A1*2</f><v>4</v></c></row>']).encode()
    patched = sheet_patch.patch_values(xml, {"A1": 3.0})
    assert parser_cells(patched) == {"A1": (3.0, "n", 0, ("1+1", "normal", None, None)),
                                     "B1": (4.0, "n", 0, ("A1*2", "normal", None, None))}


def test_single_quoted_reference_names_the_right_cell():
    # issue 10 item 8: r='D2' was read as another cell
    xml = _sheet(["<row r='2'><c r='D2'><f>SEM(12,0.9)</f><v>3.79</v></c></row>"]).encode()
    assert list(reader_cells(xml)) == ["D2"] and list(sheet_columns.read_columns(xml).columns) == [4]


def test_a_document_type_declaration_is_refused_in_one_line():
    xml = ('<?xml version="1.0"?>\n<!DOCTYPE worksheet [<!ENTITY a "x">]>' + _sheet(_BASE_ROWS, head="")).encode()
    with pytest.raises(SheetXmlError, match="document type") as info:
        list(iter_cells(xml, STRINGS))
    assert "\n" not in str(info.value)


def test_malformed_xml_on_the_parser_path_is_one_line():
    xml = _sheet(["<row r='1'><c r='A1'><v>1</v></row>"]).encode()  # </c> missing
    with pytest.raises(SheetXmlError, match="not well-formed") as info:
        sheet_columns.read_columns(xml)
    assert "\n" not in str(info.value)


def test_regular_forms_stay_on_the_fast_path(monkeypatch):
    calls = []
    for info in pkgutil.iter_modules(trueband.bridge.workbook.__path__):  # every module that calls the parser path
        module = importlib.import_module(f"trueband.bridge.workbook.{info.name}")
        if hasattr(module, "rewrite_in_regular_form"):
            monkeypatch.setattr(module, "rewrite_in_regular_form", lambda xml: calls.append(1) or xml)
    rnd = random.Random(5)
    for sheet in [_regular_sheet(rnd), _sheet(_BASE_ROWS).encode()]:  # both with an XML declaration
        assert sheet.startswith(b"<?xml")
        list(iter_cells(sheet, ("a", "b", "c")))
        sheet_columns.read_columns(sheet, ("a", "b", "c"))
        sheet_read.dimension(sheet)
        formula_cell = next(c.ref for c in iter_cells(sheet, ("a", "b", "c")) if c.formula is not None)
        sheet_patch.patch_values(sheet, {formula_cell: 2.0})
        patch_sheet(sheet, {formula_cell: CellUpdate(3.0, formula="1+2")})
        sheet_edit.remove_cells(sheet_edit.add_cells(sheet, {"XFD1": NewCell(value=1.0)}), ["XFD1"])
    assert calls == []


def test_check_and_recalc_on_a_sheet_with_single_quoted_attributes(tmp_path, capsys):
    # issue 10 item 8: check named the wrong cell and recalc ended in a traceback
    from trueband.bridge.cli import main

    xml = _sheet(["<row r='1'><c r='A1'><v>12</v></c></row>",
                  "<row r='2'><c r='D2'><f>SEM(A1,0.91)</f><v>0</v></c ></row>"]).encode()
    path = gb.handmade_package(tmp_path / "quoted.xlsx", [("Bands", xml)])
    assert main(["check", str(path)]) == 0
    assert "Bands!D2  SEM" in capsys.readouterr().out
    assert main(["recalc", str(path)]) == 0
    got = openpyxl.load_workbook(tmp_path / "quoted.recalc.xlsx", data_only=True)["Bands"]  # reference reader
    # SEM = SD·√(1 − r), Lord & Novick (1968), from memory
    assert got["D2"].value == pytest.approx(12 * (1 - 0.91) ** 0.5) and got["A1"].value == 12


def test_cells_and_rows_without_references_can_be_patched_and_added_to():
    # ECMA-376 Part 1, 18.3.1.4 and 18.3.1.73: r is optional on c and row (the position gives it);
    # patching such a cell used to fail with "cells not found", adding to such rows was refused
    xml = _sheet(['<row><c t="inlineStr"><is><t>OHL-1</t></is></c><c><f>SEM(12,0.9)</f><v>1</v></c></row>',
                  '<row><c><v>5</v></c></row>']).encode()
    patched_xml = patch_sheet(xml, {"B1": CellUpdate(3.79)})
    patched = ET.fromstring(patched_xml)
    q = f"{{{MAIN}}}"
    rows = patched.find(q + "sheetData").findall(q + "row")
    # the patched cell is spliced in with its reference; every other byte is as written (issue 14 item 1)
    assert [c.get("r") for c in rows[0]] == [None, "B1"] and rows[0][1].find(q + "v").text == "3.79"
    assert patched_xml == xml.replace(b"<c><f>SEM(12,0.9)</f><v>1</v></c>", b'<c r="B1"><f>SEM(12,0.9)</f><v>3.79</v></c>')
    assert rows[0][1].find(q + "f").text == "SEM(12,0.9)" and rows[1][0].find(q + "v").text == "5"
    added = parser_cells(sheet_edit.add_cells(xml, {"B2": NewCell(value=7.0)}))
    assert added["B2"] == (7.0, "n", 0, None) and added["A2"] == (5.0, "n", 0, None)
    assert reader_cells(xml) == {"A1": ("OHL-1", "inlineStr", 0, None), "B1": (1.0, "n", 0, ("SEM(12,0.9)", "normal",
                                                                                             None, None)),
                                 "A2": (5.0, "n", 0, None)}


_RANDOM_CHANGES = [
    _single_quotes,
    lambda s: s.replace("</c>", "</c >"),
    lambda s: s.replace("</row>", "</row><!-- row end -->"),
    lambda s: s.replace(' r="', ' r = "'),
    lambda s: s.replace(' s="', '\n\t s="'),
    lambda s: s.replace("<v>", "<v ><![CDATA[]]>"),
]


@pytest.mark.parametrize("seed", range(8))
def test_readers_and_patcher_agree_with_a_parser_on_random_irregular_sheets(seed, monkeypatch):
    rnd = random.Random(300 + seed)
    strings = ["alpha", "b&c", "gamma"]
    text = _regular_sheet(rnd, rows=150).decode()
    for change in rnd.sample(_RANDOM_CHANGES, rnd.randint(1, 3)):
        text = change(text)
    xml = text.encode()
    expected = parser_cells(xml, strings)
    if seed % 2:
        monkeypatch.setattr(sheet_data, "CHUNK_BYTES", rnd.randint(200, 5000))
    assert reader_cells(xml, strings) == expected
    assert column_cells(xml, strings) == expected_columns(expected)
    formula_cells = [ref for ref, cell in expected.items() if cell[3] is not None]
    chosen = rnd.sample(formula_cells, len(formula_cells) // 3)
    patched = sheet_patch.patch_values(xml, {ref: 0.5 for ref in chosen})
    after = parser_cells(patched, strings)
    if chosen:  # every byte outside the patched cells kept (issue 14 item 1)
        cut_before, cut_after = xml, patched
        for ref in chosen:
            cut_before, cut_after = _cut_cell(cut_before, ref), _cut_cell(cut_after, ref)
        assert cut_after == cut_before
    for ref in chosen:
        value, _, style, formula = after.pop(ref)
        assert (value, style, formula) == (0.5, expected[ref][2], expected[ref][3])
    assert after == {ref: cell for ref, cell in expected.items() if ref not in chosen}


# ------------------------------------------------------------------ line ends and whitespace as desktop apps write them
#
# Desktop spreadsheet apps write "?>\r\n" after the XML declaration of every part, and some writers put line
# ends between tags or inside text (a header or footer, a formula). XML 1.0 (5th edition), 2.11: a parser
# reads "\r\n" and a lone "\r" as "\n"; 2.10: whitespace between the elements of a cell or row is not a value.
# These are the regular form: read and patched by the fast paths, every byte outside the patched cells kept.

def _crlf_head(s: bytes) -> bytes:
    return s.replace(b"?>\n", b"?>\r\n", 1)


CRLF_FORMS = {
    "CRLF after the declaration": _crlf_head,
    "CRLF and tabs between rows and cells": lambda s: _crlf_head(s).replace(b"</row>", b"</row>\r\n")
    .replace(b"</c><c", b"</c>\r\n\t<c").replace(b'<sheetData>', b"\r\n  <sheetData>\r\n"),
    "line ends inside text": lambda s: _crlf_head(s).replace(b"<t>in ", b"<t>in\r\n", 7).replace(b"a&amp;b", b"a\rb", 5)
    .replace(b'T("a&amp;b")', b'T("a\r\n&amp;b")', 5),
    "whitespace-only text": lambda s: s.replace(b"<t>in ", b'<t xml:space="preserve"> \r\n\t</t><t>', 5)
    .replace(b"<v>x</v>", b"<v>\r\n </v>", 5),
    "header, footer and validation message with line ends": lambda s: _crlf_head(s).replace(
        b"</sheetData>", b'</sheetData><dataValidations count="1"><dataValidation type="whole" error="Too low.  '
                         b'Re-enter." sqref="A1"><formula1>1</formula1></dataValidation></dataValidations>', 1)
    .replace(b"</worksheet>", b'<headerFooter><oddHeader>&amp;CPage\r\n&amp;P</oddHeader></headerFooter></worksheet>'
                              b"\r\n", 1),
}


def _crlf_sheet(name: str, seed: int) -> bytes:
    sheet = _regular_sheet(random.Random(seed), rows=120)
    xml = CRLF_FORMS[name](sheet)
    assert xml != sheet, name
    return xml


@pytest.mark.parametrize("name", list(CRLF_FORMS))
def test_line_ends_and_whitespace_stay_on_the_fast_path(name, monkeypatch):
    # issue 14 item 1: a part with "\r" went through the parser, which wrote the whole part again
    calls = []
    for info in pkgutil.iter_modules(trueband.bridge.workbook.__path__):
        module = importlib.import_module(f"trueband.bridge.workbook.{info.name}")
        if hasattr(module, "rewrite_in_regular_form"):
            monkeypatch.setattr(module, "rewrite_in_regular_form", lambda xml: calls.append(1) or xml)
    xml = _crlf_sheet(name, 7)
    strings = ("a", "b", "c")
    list(iter_cells(xml, strings))
    sheet_columns.read_columns(xml, strings)
    sheet_read.dimension(xml)
    formula_cell = next(c.ref for c in iter_cells(xml, strings) if c.formula is not None)
    sheet_patch.patch_values(xml, {formula_cell: 2.0})
    patch_sheet(xml, {formula_cell: CellUpdate(3.0, formula="1+2")})
    sheet_edit.remove_cells(sheet_edit.add_cells(xml, {"XFD1": NewCell(value=1.0)}), ["XFD1"])
    assert calls == []


@pytest.mark.parametrize("seed", range(3))
@pytest.mark.parametrize("name", list(CRLF_FORMS))
def test_line_ends_and_whitespace_read_as_a_parser_reads_them(name, seed, monkeypatch):
    xml = _crlf_sheet(name, 20 + seed)
    strings = ["alpha", "b&c", "gamma"]
    expected = parser_cells(xml, strings)  # ElementTree, the standard library's XML parser
    if seed % 2:
        monkeypatch.setattr(sheet_data, "CHUNK_BYTES", random.Random(seed).randint(200, 5000))
    assert reader_cells(xml, strings) == expected
    assert column_cells(xml, strings) == expected_columns(expected)


@pytest.mark.parametrize("seed", range(3))
@pytest.mark.parametrize("name", list(CRLF_FORMS))
def test_line_ends_and_whitespace_are_kept_byte_for_byte_by_the_patchers(name, seed):
    rnd = random.Random(40 + seed)
    xml = _crlf_sheet(name, 40 + seed)
    strings = ["alpha", "b&c", "gamma"]
    formula_cells = [c.ref for c in iter_cells(xml, strings) if c.formula is not None]
    chosen = rnd.sample(formula_cells, len(formula_cells) // 2)
    values = {ref: rnd.choice([1.0, 2.5e-7, "text & <more>", "", True, ErrorValue("#N/A")]) for ref in chosen}
    expected = sheet_patch._patch_cells(xml, {ref: CellUpdate(v) for ref, v in values.items()})
    patched = sheet_patch.patch_values(xml, values)
    assert patched == expected  # the fast and the general patcher write the same bytes
    assert _outside(patched, chosen) == _outside(xml, chosen)  # every byte outside the patched cells kept
    before, after = parser_cells(xml, strings), parser_cells(patched, strings)
    for ref in chosen:
        assert after.pop(ref)[0] == values[ref] or (values[ref] == "" and after.get(ref) is None)
    assert after == {k: v for k, v in before.items() if k not in chosen}
    # cells added and taken out again: the part comes back byte for byte (the dimension set back as it was)
    added = sheet_edit.add_cells(xml, {"XFD2": NewCell(value="new"), "A999": NewCell(formula="1+1")})
    assert sheet_edit.remove_cells(added, ["XFD2", "A999"], empty_rows=[999]) == xml or \
        sheet_read.dimension(xml) is None


def test_a_carriage_return_in_text_is_written_escaped_and_read_back():
    # issue 14 item 5: ECMA-376 Part 1, 22.9.2.19 ST_Xstring escapes a carriage return as _x000D_; written raw,
    # a parser reads it as a line feed (XML 1.0, 2.11)
    from trueband.bridge.workbook import xml_text

    for text in ["a\r\nb", "\r", "x\ry", "_x000D_ literal", "tab\tand\nline"]:
        raw = xml_text.escape_text(text)
        assert b"\r" not in raw
        assert xml_text.unescape_xml(raw) == text
        assert ET.fromstring(b"<t>" + raw + b"</t>").text == raw.decode()  # a parser keeps the escape as text
    assert xml_text.escape_text("a\r\nb") == b"a_x000D_\nb"
    xml = _sheet(['<row r="1"><c r="A1" t="str"><f>CHAR(13)</f><v>0</v></c></row>']).encode()
    patched = sheet_patch.patch_values(xml, {"A1": "line\r\nnext"})
    assert b"line_x000D_\nnext" in patched
    assert reader_cells(patched)["A1"][0] == "line\r\nnext"
    assert parser_cells(patched)["A1"][0] == "line\r\nnext"  # ElementTree, the format's escape decoded
    path_text = sheet_edit.add_cells(xml, {"B1": NewCell(value="p\rq")})
    assert reader_cells(path_text)["B1"][0] == "p\rq" and b"<t>p_x000D_q</t>" in path_text


def _cut_cell(xml: bytes, ref: str) -> bytes:
    """The part without the cell element ``ref`` written in any of the forms of :data:`IRREGULAR_FORMS`."""
    return re.sub(rb"<(?:\w+:)?c\s+r\s*=\s*[\"']" + ref.encode() + rb"[\"'][^>]*?(?:/>|>.*?</(?:\w+:)?c\s*>)", b"",
                  xml, count=1, flags=re.S)


@pytest.mark.parametrize("name", [n for n in CORPUS if n not in ("ISO-8859-1 encoding", "UTF-16")])
def test_the_parser_path_keeps_every_byte_outside_the_patched_cells(name):
    # issue 14 item 1: a part that needs the parser was written again whole (<x/> became <x></x>, comments
    # dropped, quotes changed); now the cells patched are spliced back into the bytes as they were
    xml = CORPUS[name]
    outside = _cut_cell(_cut_cell(xml, "C1"), "D2")
    assert outside != xml
    for patched in (sheet_patch.patch_values(xml, {"C1": 9.0, "D2": ErrorValue("#N/A")}),
                    patch_sheet(xml, {"C1": CellUpdate(9.0), "D2": CellUpdate(ErrorValue("#N/A"))})):
        assert _cut_cell(_cut_cell(patched, "C1"), "D2") == outside
        after = parser_cells(patched, STRINGS)  # and it reads as it should (ElementTree)
        assert after["C1"][0] == 9.0 and after["D2"][:2] == ("#N/A", "e")
    assert sheet_edit.remove_cells(xml, ["C1"]) == _cut_cell(xml, "C1")
