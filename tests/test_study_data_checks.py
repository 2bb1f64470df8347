"""Data a study can use but that look wrong, and group labels that differ only in case or spacing.

Each doubtful cell is reported in one line naming the sheet and the cell (on the Notes sheet and on
stderr); common codings of the hired column are understood; labels such as "Group A" and
" group a" are one group, and the Impact sheet's counts agree with an independent count made
here with pandas (strip + casefold, the convention documented in funcs/impact.py). The data are
small random tables generated in the tests; no check value is invented.
"""

from __future__ import annotations

import datetime

import numpy as np
import pandas as pd
import pytest
from openpyxl import Workbook, load_workbook

from test_study_setup import SETUP, small_table, write_book
from trueband.bridge import cli
from trueband.bridge.study.build import make_study
from trueband.bridge.study.data_workbook import read_study_data


def build(tmp_path, header, rows, setup, name="study.xlsx"):
    book = write_book(tmp_path / "d.xlsx", header, rows, setup)
    result = make_study(book, tmp_path / name)
    return result, load_workbook(result.path, data_only=True)


def sheet_text(ws) -> str:
    return " ".join(str(c.value) for row in ws.iter_rows() for c in row if c.value is not None)


def impact_table(wb) -> dict[str, tuple[int, int]]:
    """Group -> (applicants, selected) as the Impact sheet shows them."""
    ws = wb["Impact"]
    head = next(r for r in range(1, 40) if ws.cell(r, 1).value == "Group")
    out = {}
    r = head + 1
    while ws.cell(r, 1).value not in (None, ""):
        out[ws.cell(r, 1).value] = (ws.cell(r, 2).value, ws.cell(r, 3).value)
        r += 1
    return out


# ---------------------------------------------------------------- group labels

def test_labels_differing_in_case_or_spaces_are_one_group(tmp_path):
    header, rows = small_table(n=60, seed=5)
    spellings = ["Group A", "group a ", " GROUP A", "Group B", "group  b", "Group B "]
    for i, r in enumerate(rows):
        r[1] = spellings[i % 6]
    result, wb = build(tmp_path, header, rows, SETUP)
    table = impact_table(wb)
    assert sorted(table) == ["Group A", "Group B"]
    # independent count: pandas, labels stripped, inner spaces collapsed, case folded
    df = pd.DataFrame(rows, columns=header)
    df["score"] = df[[f"i{j}" for j in range(1, 7)]].sum(axis=1)
    df["key"] = df["group"].str.split().str.join(" ").str.casefold()
    for name, (applicants, selected) in table.items():
        member = df[df["key"] == name.casefold()]
        assert applicants == len(member)
        assert selected == int((member["score"] >= SETUP["cut score"]).sum())
    assert sum(a for a, _ in table.values()) == len(rows)
    text = sheet_text(wb["Impact"])
    assert "'group a ', ' GROUP A'" in text and "counted as 'Group A'" in text
    assert result.recalc_report.ok, [tuple(e) for e in result.recalc_report.errors]


def test_labels_that_look_like_conditions_are_counted_exactly(tmp_path):
    # a spreadsheet's COUNTIF reads "<40" as "less than 40" and "A*" as a wildcard
    header, rows = small_table(n=40, seed=8)
    for i, r in enumerate(rows):
        r[1] = ("<40", "40 or over", "A*", "AB")[i % 4]
    result, wb = build(tmp_path, header, rows, SETUP)
    table = impact_table(wb)
    assert {k: v[0] for k, v in table.items()} == {"<40": 10, "40 or over": 10, "A*": 10, "AB": 10}
    assert result.recalc_report.ok


def test_reference_group_setting_is_matched_like_the_labels(tmp_path):
    header, rows = small_table(n=40)
    result, wb = build(tmp_path, header, rows, {**SETUP, "reference group": " b "})
    assert "B" in impact_table(wb)
    assert wb["Impact"].cell(next(r for r in range(1, 40) if str(wb["Impact"].cell(r, 1).value).startswith(
        "Reference group")), 3).value == "B"


# ---------------------------------------------------------------- the hired column

def test_hired_codings_are_understood(tmp_path):
    header, rows = small_table(n=40)
    header = header + ["hired"]
    codes = ["Y", "n", " yes ", "NO", "TRUE", "false", 1, 0, True, False]
    hired_truth = [True, False, True, False, True, False, True, False, True, False]
    for i, r in enumerate(rows):
        r.append(codes[i % 10])
    result, wb = build(tmp_path, header, rows, {**SETUP, "hired column": "hired"})
    expected = sum(hired_truth[i % 10] for i in range(len(rows)))
    assert wb["Validity"]["A4"].value.startswith("People hired")
    assert wb["Validity"]["B4"].value == expected == 20
    assert result.problems == []


def test_unreadable_hired_value_is_reported_not_refused(tmp_path, capsys):
    header, rows = small_table(n=40)
    header = header + ["hired"]
    for i, r in enumerate(rows):
        r.append("yes" if i % 2 else "no")
    rows[6][-1] = "maybe"
    book = write_book(tmp_path / "d.xlsx", header, rows, {**SETUP, "hired column": "hired"})
    code = cli.main(["study", str(book), "-o", str(tmp_path / "s.xlsx")])
    err = capsys.readouterr().err
    assert code == cli.EXIT_OK
    line = next(x for x in err.splitlines() if "'maybe'" in x)
    assert "sheet 'Candidates', cell J8" in line and "not counted as hired" in line
    wb = load_workbook(tmp_path / "s.xlsx", data_only=True)
    assert wb["Validity"]["B4"].value == 20
    assert "cell J8" in sheet_text(wb["Notes"])


# ---------------------------------------------------------------- other doubtful cells

def test_doubtful_cells_are_reported_one_line_each(tmp_path, capsys):
    header, rows = small_table(n=40)
    rows[3][4] = 2          # a 0/1 item (cell E5) holding 2
    rows[9][0] = rows[8][0]  # the same id in A10 and A11
    rows[12][1] = None       # a blank group (B14)
    book = write_book(tmp_path / "d.xlsx", header, rows, SETUP)
    code = cli.main(["study", str(book), "-o", str(tmp_path / "s.xlsx")])
    err = [x for x in capsys.readouterr().err.splitlines() if x.startswith("data problem")]
    assert code == cli.EXIT_OK
    assert len(err) == 3, err
    assert any("cell E5" in x and "'i3'" in x and "outside the item scale 0 to 1" in x for x in err)
    assert any("cells A10, A11" in x and repr(rows[8][0]) in x for x in err)
    assert any("cell B14" in x and "blank" in x for x in err)
    study = load_workbook(tmp_path / "s.xlsx", data_only=True)
    assert "3 problem(s) were found in the data" in sheet_text(study["Summary"])
    notes = sheet_text(study["Notes"])
    assert "Problems in the data" in notes
    for cell in ("cell E5", "cells A10, A11", "cell B14"):
        assert cell in notes


def test_values_outside_a_given_scale(tmp_path):
    rng = np.random.default_rng(11)
    header = ["id", "group", *[f"L{j}" for j in range(1, 6)], "perf"]
    rows = [[f"P{i}", "AB"[i % 2], *rng.integers(1, 6, 5).tolist(), None] for i in range(30)]
    rows[4][3] = 7   # D6
    rows[7][6] = 0   # G9
    setup = {"id column": "id", "group column": "group", "item columns": "L1:L5", "cut score": 15,
             "item scale minimum": 1, "item scale maximum": 5}
    result, _ = build(tmp_path, header, rows, setup)
    outside = [x for x in result.problems if "outside the item scale 1 to 5" in x]
    assert len(outside) == 2
    assert "cell D6" in outside[0] and "7 is outside" in outside[0]
    assert "cell G9" in outside[1] and "0 is outside" in outside[1]


def test_many_problems_of_one_kind_are_capped(tmp_path):
    header, rows = small_table(n=60)
    for i, r in enumerate(rows):
        if i % 2:
            r[1] = None  # 30 blank group cells
    result, _ = build(tmp_path, header, rows, SETUP)
    blank = [x for x in result.problems if "blank" in x]
    assert len(blank) == 26 and "5 more blank group cells" in blank[-1]  # 25 listed, then the rest counted


# ---------------------------------------------------------------- the copy of the data

def test_copy_keeps_dates_header_text_and_formula_values(tmp_path):
    from trueband.bridge.engine.recalc import recalculate

    header, rows = small_table(n=30)
    wb = Workbook()
    ws = wb.active
    ws.title = "Candidates"
    ws.append([" id ", *header[1:], "applied", "total", 2026])
    for i, r in enumerate(rows):
        ws.append([*r, datetime.date(2026, 3, 1 + i), f"=SUM(C{i + 2}:H{i + 2})", f"=1/(C{i + 2}-C{i + 2})"])
        ws.cell(i + 2, 10).number_format = "dd.mm.yyyy"
    st = wb.create_sheet("Setup")
    for k, v in SETUP.items():
        st.append([k, v])
    book = tmp_path / "d.xlsx"
    wb.save(book)
    recalculate(book, in_place=True)  # the formulas get stored values, as a spreadsheet app would store
    result = make_study(book, tmp_path / "s.xlsx")
    copy = load_workbook(result.path)["Candidates"]
    assert [c.value for c in copy[1]] == [" id ", *header[1:], "applied", "total", 2026]
    assert copy["J2"].is_date and copy["J2"].number_format == "dd.mm.yyyy"
    values = load_workbook(result.path, data_only=True)["Candidates"]
    assert values["J2"].value == datetime.datetime(2026, 3, 1)
    assert [values.cell(i + 2, 11).value for i in range(30)] == [float(sum(r[2:8])) for r in rows]
    assert values["L2"].value == "#DIV/0!" and copy["L2"].data_type == "e"


def test_formulas_without_stored_values_are_reported(tmp_path):
    # openpyxl writes formulas without computing them: the study cannot know their values
    header, rows = small_table(n=30)
    header = header + ["check"]
    for i, r in enumerate(rows):
        r.append(f"=C{i + 2}*2")
    result, _ = build(tmp_path, header, rows, SETUP)
    line = next(x for x in result.problems if "without a stored value" in x)
    assert "column 'check'" in line and "30 formula cell(s)" in line and "J2, J3" in line
    assert "recalculate the data workbook first" in line


def test_numbers_and_logical_values_as_group_labels(tmp_path):
    header, rows = small_table(n=40)
    for i, r in enumerate(rows):
        r[1] = (1, 1.0, "1 ", True, "true")[i % 5]  # 1, 1.0 and "1 " are one group; TRUE and "true" another
    result, wb = build(tmp_path, header, rows, SETUP)
    assert {k: v[0] for k, v in impact_table(wb).items()} == {"1": 24, "TRUE": 16}
    assert result.recalc_report.ok


def test_many_values_outside_the_scale_are_listed_then_counted(tmp_path):
    # responses coded 0-4 while the Setup says 1-5: every 0 is outside the scale
    rng = np.random.default_rng(2)
    header = ["id", "group", *[f"L{j}" for j in range(1, 6)]]
    rows = [[f"P{i}", "AB"[i % 2], *rng.integers(0, 5, 5).tolist()] for i in range(60)]
    zeros = sum(v == 0 for r in rows for v in r[2:])
    setup = {"id column": "id", "group column": "group", "item columns": "L1:L5", "cut score": 10,
             "item scale minimum": 1, "item scale maximum": 5}
    result, _ = build(tmp_path, header, rows, setup)
    outside = [x for x in result.problems if "outside the item scale" in x]
    assert zeros > 26 and len(outside) == 26
    assert outside[-1].endswith(f"{zeros - 25} more values outside the item scale like those above (not listed)")
    first = next((i, j) for i, r in enumerate(rows) for j, v in enumerate(r[2:]) if v == 0)
    assert f"cell {'CDEFG'[first[1]]}{first[0] + 2} " in outside[0]  # listed from the top of the sheet down


def test_the_hired_codings_named_in_messages_are_the_ones_read():
    # The words shown on Setup, in the study and in messages must be exactly the codings understood.
    from trueband.bridge.study.data_checks import hired_code
    from trueband.bridge.study.setup import HIRED_CODINGS, NO_CODES, YES_CODES

    pairs = [p.strip() for p in HIRED_CODINGS.replace(" or ", ", ").split(",")]
    named = set()
    for pair in pairs:
        yes, no = pair.split("/")
        assert hired_code(yes) is True and hired_code(no.upper()) is False, pair
        named |= {yes.casefold(), no.casefold()}
    assert named == {c for c in YES_CODES | NO_CODES if not c.endswith(".0")}


def test_a_numeric_duplicate_id_is_named_as_its_cell_shows_it(tmp_path, capsys):
    # Before: "the id 7.0 appears 3 times" for cells showing 7 (numbers are read as floats).
    header, rows = small_table(n=30)
    rows[4][0], rows[5][0], rows[6][0] = 7, 7.0, " 7"
    book = write_book(tmp_path / "d.xlsx", header, rows, SETUP)
    assert cli.main(["study", str(book), "-o", str(tmp_path / "s.xlsx")]) == cli.EXIT_OK
    (line,) = [x for x in capsys.readouterr().err.splitlines() if "id column" in x]
    assert "cells A6, A7, A8" in line and "the id '7' appears 3 times" in line


# ---------------------------------------------------------------- formulas in the data (issue 16, item 8)

def _formula_items_book(tmp_path, name="d.xlsx"):
    """small_table with every item cell a formula (openpyxl stores no value for it) reading a sheet of answers."""
    header, rows = small_table(n=30)
    answers = [r[2:8] for r in rows]
    for i, r in enumerate(rows):
        r[2:8] = [f"=Answers!{col}{i + 1}" for col in "ABCDEF"]
    return write_book(tmp_path / name, header, rows, SETUP, extra_sheets={"Answers": answers}), rows, answers


def test_a_book_saved_without_stored_values_is_refused_once_naming_its_columns(tmp_path):
    from test_study_setup import refuse

    book, _, _ = _formula_items_book(tmp_path)
    before = set(tmp_path.iterdir())
    with pytest.raises(Exception) as caught:
        make_study(book, tmp_path / "study.xlsx")
    message = str(caught.value)
    assert "\n" not in message and message.count("no stored value") == 1
    assert "180 formula cell(s) in the column(s) 'i1', 'i2', 'i3', 'i4', 'i5', 'i6'" in message
    assert f"`trueband recalc {book} --all`" in message and "the d.recalc.xlsx it writes" in message
    assert set(tmp_path.iterdir()) == before
    refuse(tmp_path, book, "no stored value")


def test_the_suggested_command_makes_the_book_usable(tmp_path, capsys):
    book, rows, answers = _formula_items_book(tmp_path)
    assert cli.main(["recalc", str(book), "--all"]) == cli.EXIT_OK  # the command the refusal names
    result = make_study(tmp_path / "d.recalc.xlsx", tmp_path / "study.xlsx")
    wb = load_workbook(result.path, data_only=True)
    assert wb["Reliability"]["B3"].value == 30  # every applicant has a score
    assert not any("no stored value" in p for p in result.problems)


def test_a_sum_total_over_blank_items_is_no_score_as_on_the_item_route(tmp_path):
    header, rows = small_table(n=30)
    blank_people = (4, 11, 23)
    for i in blank_people:
        rows[i][2:8] = [None] * 6
    header = header + ["sum"]
    for i, r in enumerate(rows):
        r.append(f"=SUM(C{i + 2}:H{i + 2})")
    by_total_setup = {k: v for k, v in SETUP.items() if k != "item columns"} | {"total column": "sum"}
    for name, setup in (("items", SETUP), ("total", by_total_setup)):
        book = write_book(tmp_path / f"{name}.xlsx", header, rows, setup)
        assert cli.main(["recalc", str(book), "--all"]) == cli.EXIT_OK  # stores 0 for the blank people's SUM
    computed = tmp_path / "total.recalc.xlsx"
    assert load_workbook(computed, data_only=True)["Candidates"]["J6"].value == 0
    by_items = read_study_data(tmp_path / "items.recalc.xlsx")
    by_total = read_study_data(computed)
    # the item route (StudyData.scores: no item answered, no score) is the reference
    assert np.isnan(by_items.scores).nonzero()[0].tolist() == list(blank_people)
    assert np.isnan(by_total.scores).nonzero()[0].tolist() == list(blank_people)
    assert np.array_equal(by_total.scores[~np.isnan(by_total.scores)], by_items.scores[~np.isnan(by_items.scores)])
    assert any("3 people's total (column 'sum', first in cell J6)" in n for n in by_total.notes)
    result = make_study(computed, tmp_path / "study.xlsx")
    wb = load_workbook(result.path, data_only=True)
    assert wb["Bands"]["C6"].value in (None, "") and wb["Candidates"]["J6"].value is None
    assert wb["Reliability"]["B3"].value == 27


def test_a_shared_sum_total_over_blank_items_is_no_score(tmp_path):
    # Spreadsheet apps save a filled-down total as one shared formula (ECMA-376 Part 1, 18.3.1.40): the cells
    # below the master hold only its index, and the study reads their formula through the master's.
    import golden_books as gb

    header, rows = small_table(n=12)
    rows[5][2:8] = [None] * 6
    strings = [*header, "sum", *{r[0] for r in rows}, "A", "B", "Setting", "Value", "id column", "group column",
               "total column", "cut score"]
    strings = list(dict.fromkeys(strings))

    def text(ref, value):
        return gb.cell_xml(ref, strings.index(value), t="s")

    sheet_rows = [gb.row_xml(1, [text(f"{c}1", h) for c, h in zip("ABCDEFGHIJ", [*header, "sum"])])]
    for i, r in enumerate(rows):
        n = i + 2
        cells = [text(f"A{n}", r[0]), text(f"B{n}", r[1])]
        cells += [gb.cell_xml(f"{c}{n}", v) for c, v in zip("CDEFGH", r[2:8]) if v is not None]
        shared = ' t="shared" ref="J2:J13" si="0"' if n == 2 else ' t="shared" si="0"'
        cells.append(gb.cell_xml(f"J{n}", sum(v or 0 for v in r[2:8]), formula="SUM(C2:H2)" if n == 2 else None,
                                 f_attrs=shared))
        sheet_rows.append(gb.row_xml(n, cells))
    setup = [("id column", "id"), ("group column", "group"), ("total column", "sum"), ("cut score", 3)]
    setup_rows = [gb.row_xml(1, [text("A1", "Setting"), text("B1", "Value")])]
    for k, (name, value) in enumerate(setup, start=2):
        second = gb.cell_xml(f"B{k}", value) if isinstance(value, int) else text(f"B{k}", value)
        setup_rows.append(gb.row_xml(k, [text(f"A{k}", name), second]))
    book = gb.handmade_package(tmp_path / "shared.xlsx", [("Candidates", gb.sheet_part(sheet_rows)),
                                                          ("Setup", gb.sheet_part(setup_rows))],
                               shared_strings=strings)
    data = read_study_data(book)
    assert np.isnan(data.scores).nonzero()[0].tolist() == [5]
    assert data.scores[0] == sum(rows[0][2:8])
