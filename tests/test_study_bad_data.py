"""Data a study cannot fully use: the parts that cannot be computed say so in the cell, with the reason.

Never a crash, never an error code without a reason, never a half-written file. The data are
random tables generated here (no check value comes from them: the assertions are about which
cells are marked and why, and about the values of the functions called directly).
"""

from __future__ import annotations

import numpy as np
import pytest
from openpyxl import load_workbook

from test_study_setup import SETUP, small_table, write_book
from trueband.bridge import cli
from trueband.bridge.study.build import NOT_COMPUTABLE, make_study


def build(tmp_path, header, rows, setup, name="study.xlsx"):
    book = write_book(tmp_path / "d.xlsx", header, rows, setup)
    result = make_study(book, tmp_path / name)
    wb = load_workbook(result.path, data_only=True)
    return result, wb


def cell(result, wb, key):
    sheet, coord = result.cells[key]
    return wb[sheet][coord].value


def test_all_blank_criterion_marks_validity_not_computable(tmp_path):
    header, rows = small_table(n=40)
    for r in rows:
        r[-1] = None
    result, wb = build(tmp_path, header, rows, SETUP)
    r = cell(result, wb, "r")
    assert r.startswith(NOT_COMPUTABLE) and "'perf'" in r and "blank for everyone" in r
    for key in ("r_lower", "r_p", "operational", "taylor_russell"):
        v = cell(result, wb, key)
        assert isinstance(v, str) and v.startswith(NOT_COMPUTABLE), (key, v)
    assert cell(result, wb, "summary_r").startswith(NOT_COMPUTABLE)
    # the rest of the study is still there and computed
    assert isinstance(cell(result, wb, "alpha"), float)
    assert result.recalc_report.ok, [tuple(e) for e in result.recalc_report.errors]
    notes = " ".join(str(c.value) for row in wb["Notes"].iter_rows() for c in row if c.value)
    assert "Validity!B5" in notes


def test_one_group_only_marks_impact_not_computable(tmp_path):
    header, rows = small_table(n=40)
    for r in rows:
        r[1] = "A"
    result, wb = build(tmp_path, header, rows, SETUP)
    v = cell(result, wb, "min_ratio")
    assert v.startswith(NOT_COMPUTABLE) and "only one group ('A')" in v and "'group'" in v
    assert result.recalc_report.ok


def test_cut_that_selects_everyone(tmp_path):
    header, rows = small_table(n=40)
    result, wb = build(tmp_path, header, rows, {**SETUP, "cut score": -1})
    # every rate is 1: the ratio is 1 and Fisher's p is 1, but the z test has no variance to divide by
    assert cell(result, wb, "impact_ratio_B") == 1.0 or cell(result, wb, "impact_ratio_A") == 1.0
    zs = [v for k, v in ((k, cell(result, wb, k)) for k in ("impact_z_A", "impact_z_B") if k in result.cells)]
    assert zs and all(isinstance(z, str) and z.startswith(NOT_COMPUTABLE) for z in zs)
    assert cell(result, wb, "selection_ratio") == 1.0
    assert result.recalc_report.ok, [tuple(e) for e in result.recalc_report.errors]


def test_cut_that_selects_nobody(tmp_path):
    header, rows = small_table(n=40)
    result, wb = build(tmp_path, header, rows, {**SETUP, "cut score": 1000})
    v = cell(result, wb, "min_ratio")
    assert isinstance(v, str) and v.startswith(NOT_COMPUTABLE)
    assert result.recalc_report.ok


def test_cut_above_the_highest_possible_score_says_so_plainly(tmp_path, capsys):
    # six 0/1 items: the highest possible score is 6
    header, rows = small_table(n=40)
    book = write_book(tmp_path / "d.xlsx", header, rows, {**SETUP, "cut score": 45})
    code = cli.main(["study", str(book), "-o", str(tmp_path / "s.xlsx")])
    out = capsys.readouterr().out
    assert code == cli.EXIT_OK
    plain = "the cut score, 45, is above the highest possible score, 6 (6 items scored 0 to 1), so nobody can pass"
    assert plain in out
    wb = load_workbook(tmp_path / "s.xlsx", data_only=True)
    shown = [str(c.value) for name in ("Utility", "Impact", "Summary", "Notes") for row in wb[name].iter_rows()
             for c in row if c.value is not None]
    assert not [t for t in shown if "1e-12" in t or "selection_ratio" in t]
    assert wb["Utility"]["B13"].value == NOT_COMPUTABLE + plain + "; set a lower cut score on the Setup sheet (or --cut)"
    assert plain in " ".join(shown)


def test_cut_above_every_score_but_not_the_possible_maximum(tmp_path):
    header, rows = small_table(n=40)
    for r in rows:
        r[7] = 0  # nobody answers item 6: the highest score in the data is at most 5, the possible maximum 6
    top = max(sum(r[2:8]) for r in rows)
    result, wb = build(tmp_path, header, rows, {**SETUP, "cut score": 5.5})
    assert result.cut_message.startswith(f"nobody reaches the cut score, 5.5: the highest score in the data is {top}")
    assert cell(result, wb, "taylor_russell") == NOT_COMPUTABLE + result.cut_message


def test_optional_columns_absent(tmp_path):
    header, rows = small_table(n=40)
    setup = {"item columns": "i1:i6"}
    result, wb = build(tmp_path, header, rows, setup)
    for key in ("r", "retest_r", "icc_agreement_average", "min_ratio"):
        v = cell(result, wb, key)
        assert isinstance(v, str) and v.startswith(NOT_COMPUTABLE), (key, v)
    assert isinstance(cell(result, wb, "alpha"), float)
    assert result.recalc_report.ok


def test_constant_item_is_not_computable_for_its_correlation(tmp_path):
    header, rows = small_table(n=40)
    for r in rows:
        r[2] = 1  # everyone answers item 1 correctly
    result, wb = build(tmp_path, header, rows, SETUP)
    v = cell(result, wb, "item1_total")
    assert isinstance(v, str) and v.startswith(NOT_COMPUTABLE)
    assert isinstance(cell(result, wb, "item2_total"), float)


def test_constant_item_with_the_cheap_checks_of_large_data(tmp_path, monkeypatch):
    from trueband.bridge.study import build as study_build

    monkeypatch.setattr(study_build, "FULL_CHECK_CELLS", 0)  # behave as with a large data set
    header, rows = small_table(n=40)
    clean, _ = build(tmp_path, header, rows, SETUP, name="clean.xlsx")
    assert clean.recalc_report.ok
    for r in rows:
        r[2] = 1
    result, wb = build(tmp_path, header, rows, SETUP)
    # a column that does not vary brings back the full checks: marked cells, not error codes
    v = cell(result, wb, "item1_total")
    assert isinstance(v, str) and v.startswith(NOT_COMPUTABLE)
    assert "zero variance" in cell(result, wb, "omega")
    assert isinstance(cell(result, wb, "item2_total"), float)
    assert result.recalc_report.ok, [tuple(e) for e in result.recalc_report.errors]


def test_blank_rows_and_blank_items(tmp_path):
    header, rows = small_table(n=40)
    rows[5][2:8] = [None] * 6   # a person with no answers: no score
    rows[6][3] = None           # a person with one blank item: counted 0 in the total
    result, wb = build(tmp_path, header, rows, SETUP)
    bands = wb["Bands"]
    assert bands["C7"].value in (None, "")
    assert bands["C8"].value == sum(v for v in rows[6][2:8] if v is not None)
    assert cell(result, wb, "n_scored") == 39
    assert result.recalc_report.ok, [tuple(e) for e in result.recalc_report.errors]


def test_cli_study_prints_headlines_and_caution(tmp_path, capsys):
    header, rows = small_table(n=40)
    book = write_book(tmp_path / "d.xlsx", header, rows, SETUP)
    code = cli.main(["study", str(book), "-o", str(tmp_path / "s.xlsx")])
    out = capsys.readouterr().out
    assert code == cli.EXIT_OK
    assert "Study written" in out and "coefficient alpha" in out and "not legal findings" in out
    assert "Uniform Guidelines" in out


def test_a_headline_reason_reads_last():
    # Before: "...(Taylor–Russell): not computable: <reason> against a base rate of 0.519", the reason cut in two.
    from trueband.bridge.cli.study import headline_lines
    from trueband.bridge.study.words import NOT_COMPUTABLE

    reason = NOT_COMPUTABLE + "nobody reaches the cut score"
    (line,) = [t for t in headline_lines({"taylor_russell": reason, "base_rate": 0.519}) if "Taylor" in t]
    assert line.endswith(": " + reason) and "base rate 0.519" in line
    (line,) = [t for t in headline_lines({"taylor_russell": 0.764, "base_rate": 0.539}) if "Taylor" in t]
    assert line.endswith("0.764 against a base rate of 0.539")
