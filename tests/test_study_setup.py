"""Reading a study's data workbook: column roles, settings, and the clear refusals.

Every refusal must name the setting, the column and the sheet, and nothing may be written
(no output and no temporary file left in the output folder). The data here are small random
tables generated in the test; no value is checked against invented numbers.
"""

from pathlib import Path

import numpy as np
import pytest
from openpyxl import Workbook

from trueband.bridge import cli
from trueband.bridge.study.build import StudyError, make_study
from trueband.bridge.study.data_workbook import read_study_data
from trueband.bridge.study.setup import SetupError


def write_book(path: Path, header, rows, setup: dict | None = None, sheet: str = "Candidates",
               extra_sheets: dict | None = None) -> Path:
    wb = Workbook()
    ws = wb.active
    ws.title = sheet
    if header is not None:
        ws.append(list(header))
    for row in rows:
        ws.append(list(row))
    if setup is not None:
        st = wb.create_sheet("Setup")
        st.append(["Setting", "Value"])
        for k, v in setup.items():
            st.append([k, v])
    for name, cells in (extra_sheets or {}).items():
        extra = wb.create_sheet(name)
        for row in cells:
            extra.append(row)
    wb.save(path)
    return path


def small_table(n=30, k=6, seed=3):
    rng = np.random.default_rng(seed)
    theta = rng.standard_normal(n)
    items = (rng.random((n, k)) < 1 / (1 + np.exp(-(theta[:, None] - rng.normal(0, 1, k))))).astype(int)
    header = ["id", "group", *[f"i{j}" for j in range(1, k + 1)], "perf"]
    rows = []
    for i in range(n):
        perf = float(np.round(3 + 0.5 * theta[i] + rng.normal(0, 0.5), 1)) if i % 3 else None
        rows.append([f"P{i}", "A" if i % 2 else "B", *items[i].tolist(), perf])
    return header, rows


SETUP = {"id column": "id", "group column": "group", "item columns": "i1:i6", "criterion column": "perf",
         "cut score": 3}


def no_files_left(folder: Path, before: set):
    assert set(folder.iterdir()) == before, "something was written"


def refuse(tmp_path, book: Path, match: str, overrides=None):
    before = set(tmp_path.iterdir())
    out = tmp_path / "study.xlsx"
    with pytest.raises((SetupError, StudyError), match=match):
        make_study(book, out, overrides)
    no_files_left(tmp_path, before)


def test_setup_sheet_is_read_with_spans_and_lists(tmp_path):
    header, rows = small_table()
    book = write_book(tmp_path / "d.xlsx", header, rows, {**SETUP, "item columns": "i1:i3, i4, i5:i6"})
    data = read_study_data(book)
    assert data.item_columns == [2, 3, 4, 5, 6, 7]
    assert data.sheet == "Candidates" and data.n == 30
    assert data.setup.cut == 3.0
    assert np.isnan(data.criterion[0]) and data.criterion[1] == rows[1][-1]
    assert data.scores.tolist() == [float(sum(r[2:8])) for r in rows]


def test_options_override_the_setup_sheet(tmp_path):
    header, rows = small_table()
    book = write_book(tmp_path / "d.xlsx", header, rows, SETUP)
    data = read_study_data(book, {"items": ("i1:i4",), "cut": 2.0})
    assert data.item_columns == [2, 3, 4, 5]
    assert data.setup.cut == 2.0
    assert data.setup.source["cut"] == "command line"


def test_options_alone_without_setup_sheet(tmp_path):
    header, rows = small_table()
    book = write_book(tmp_path / "d.xlsx", header, rows)
    data = read_study_data(book, {"items": ("I1:I6",), "group": "GROUP"})  # headers match in any case
    assert len(data.item_columns) == 6 and data.columns["group"] == 1


@pytest.mark.parametrize("setup, match", [
    ({**SETUP, "item columns": "i1:i9"}, r"item columns: no column headed 'i9' in row 1 of sheet 'Candidates'"),
    ({**SETUP, "criterion column": "performance"}, r"criterion column: no column headed 'performance'.*'Candidates'"),
    ({**SETUP, "cut scor": 3}, r"sheet 'Setup', cell A7: unknown setting 'cut scor'"),
    ({**SETUP, "cut score": "high"}, r"sheet 'Setup', cell B6: cut score must be a number, got 'high'"),
    ({**SETUP, "data sheet": "Applicants"}, r"no sheet named 'Applicants'.*its sheets: Candidates, Setup"),
    ({**SETUP, "item columns": "i6:i1"}, r"runs backwards"),
    ({**SETUP, "item columns": "i1, i3"}, r"side by side on sheet 'Candidates'; 'i3' does not follow 'i1'"),
    ({**SETUP, "group column": "i1"}, r"two roles"),
    ({**SETUP, "confidence": 1.5}, r"confidence must be between 0 and 1"),
    ({k: v for k, v in SETUP.items() if k != "item columns"}, r"no test score: give 'item columns'"),
])
def test_bad_setup_names_the_setting_column_and_sheet(tmp_path, setup, match):
    header, rows = small_table()
    refuse(tmp_path, write_book(tmp_path / "d.xlsx", header, rows, setup), match)


def test_text_in_a_score_column_names_the_cell(tmp_path):
    header, rows = small_table()
    rows[4][3] = "x"
    refuse(tmp_path, write_book(tmp_path / "d.xlsx", header, rows, SETUP),
           r"sheet 'Candidates', cell D6 \(column 'i2', item columns\) holds 'x'")


def test_text_in_the_criterion_column_names_the_cell(tmp_path):
    header, rows = small_table()
    rows[1][-1] = "good"
    refuse(tmp_path, write_book(tmp_path / "d.xlsx", header, rows, SETUP),
           r"cell I3 \(column 'perf', criterion column\) holds 'good'")


def test_empty_sheet_and_header_only(tmp_path):
    refuse(tmp_path, write_book(tmp_path / "e.xlsx", None, [], SETUP), r"sheet 'Candidates' is empty")
    header, _ = small_table()
    refuse(tmp_path, write_book(tmp_path / "h.xlsx", header, [], SETUP), r"header row but no data rows")


def test_all_blank_items_are_refused(tmp_path):
    header, rows = small_table()
    for r in rows:
        r[2:8] = [None] * 6
    refuse(tmp_path, write_book(tmp_path / "d.xlsx", header, rows, SETUP), r"the item columns hold no scores")


def test_an_all_blank_total_column_is_refused_in_one_line(tmp_path):
    header, rows = small_table()
    header.append("Knowledge total")
    for r in rows:
        r.append(None)
    setup = {**SETUP, "total column": "Knowledge total"}
    refuse(tmp_path, write_book(tmp_path / "t.xlsx", header, rows, setup),
           r"column 'Knowledge total' holds no scores \(every cell is blank\)")


def test_data_sheet_named_like_an_analysis_sheet(tmp_path):
    header, rows = small_table()
    book = write_book(tmp_path / "d.xlsx", header, rows, {**SETUP, "data sheet": "Summary"}, sheet="Summary")
    refuse(tmp_path, book, r"a name the study uses")


def test_not_a_workbook(tmp_path):
    fake = tmp_path / "d.xlsx"
    fake.write_text("id,score\n1,2\n")
    refuse(tmp_path, fake, r"d.xlsx is not an \.xlsx or \.xlsm workbook")
    csv = tmp_path / "d.csv"
    csv.write_text("id,score\n")
    refuse(tmp_path, csv, r"not an \.xlsx workbook")


def test_existing_output_is_not_overwritten(tmp_path):
    header, rows = small_table()
    book = write_book(tmp_path / "d.xlsx", header, rows, SETUP)
    out = tmp_path / "study.xlsx"
    out.write_bytes(b"keep me")
    with pytest.raises(StudyError, match="already exists"):
        make_study(book, out)
    assert out.read_bytes() == b"keep me"


def test_cli_reports_one_line_and_exit_2(tmp_path, capsys):
    header, rows = small_table()
    book = write_book(tmp_path / "d.xlsx", header, rows, SETUP)
    code = cli.main(["study", str(book), "-o", str(tmp_path / "s.xlsx"), "--criterion", "rating"])
    err = capsys.readouterr().err
    assert code == cli.EXIT_FAILED
    assert "no column headed 'rating'" in err and "nothing was written" in err
    assert not (tmp_path / "s.xlsx").exists()


def test_a_missing_column_lists_whole_headings_and_the_closest_one(tmp_path):
    # Before: the list of headings was cut at 300 characters, mid-word. Headings are never cut now.
    header, rows = small_table()
    extra = [f"dispatch exercise part {j} rating" for j in range(1, 40)]
    header = [*header, *extra]
    rows = [[*r, *([3] * len(extra))] for r in rows]
    book = write_book(tmp_path / "d.xlsx", header, rows, {**SETUP, "criterion column": "Perf."})
    with pytest.raises(SetupError) as info:
        make_study(book, tmp_path / "study.xlsx")
    message = str(info.value)
    assert "did you mean 'perf'?" in message
    listed = message.split("(its columns: ", 1)[1].rstrip(")")
    shown, more = listed.rsplit(" and ", 1)
    names = shown.split(", ")
    assert names == header[:len(names)] and more == f"{len(header) - len(names)} more"
