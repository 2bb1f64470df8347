"""The Bands sheet: the sliding band beside the applicants' rows, its caution, and how the sheet prints.

Sources of the check values:
* the sliding band's floor: top score − z·SD·√(2(1 − reliability)) (Cascio, Outtz, Zedeck & Goldstein 1991,
  Human Performance 4, 233-264), written out here with ``scipy.stats.norm.ppf`` for z and numpy for the SD;
  the top score of each step, the next lower distinct score (the definition of a sliding band, same source);
* the caution: Civil Rights Act of 1991, section 106 (42 U.S.C. 2000e-2(l)), which makes adjusting scores or
  cut-offs by group unlawful in the US;
* the number format "0.00" of the interval limits and the header row's height are this project's printing
  choices (common practice: two decimals for a score interval).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from openpyxl import load_workbook
from scipy import stats

from test_study_cut import book, candidates
from trueband.bridge.study.build import make_study
from trueband.bridge.study.sheets.bands import INTERVAL_FORMAT, SLIDING_STEPS


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    folder = tmp_path_factory.mktemp("bands")
    rows = candidates(n=60, k=12, seed=3)
    path = book(folder / "d.xlsx", rows, {"id column": "id", "item columns": "i1:i12", "group column": "group"})
    result = make_study(path, folder / "s.xlsx")
    scores = np.array([r[-1] for r in rows[1:]], dtype=float)
    return result, load_workbook(result.path, data_only=True), load_workbook(result.path), scores


def _at(wb, result, key):
    sheet, coord = result.cells[key]
    return wb[sheet][coord]


def test_sliding_band_on_bands_without_a_cut(built):
    # no cut score in this study: the Cut score sheet is not written, the sliding band is on Bands all the same
    result, values, formulas, scores = built
    assert "Cut score" not in values.sheetnames
    rel = values[result.cells["reliability"][0]][result.cells["reliability"][1]].value
    half = stats.norm.ppf(0.975) * scores.std(ddof=1) * math.sqrt(2 * (1 - rel))
    distinct = np.unique(scores)[::-1]
    for step in range(1, SLIDING_STEPS + 1):
        floor = _at(values, result, f"band_floor_{step}")
        assert floor.parent.title == "Bands"
        assert floor.value == pytest.approx(distinct[step - 1] - half, rel=1e-12)
        top = floor.parent.cell(floor.row, floor.column - 1).value
        assert top == distinct[step - 1]
        people = floor.parent.cell(floor.row, floor.column + 1).value
        assert people == int(((scores >= floor.value) & (scores <= top)).sum())
        assert formulas["Bands"][floor.coordinate].value.startswith("=")
    # Notes lists the function the sheet uses, with or without a Cut score sheet
    assert any(isinstance(c, str) and "BAND_FLOOR" in c for row in values["Notes"].iter_rows(values_only=True)
               for c in row)


def test_the_caution_and_the_fixed_bands_note_are_beside_the_band(built):
    result, values, _, _ = built
    ws = values["Bands"]
    first = len([c for c in next(ws.iter_rows(max_row=1, values_only=True)) if c is not None])
    text = " ".join(c for row in ws.iter_rows(min_col=first + 1, max_row=40, values_only=True) for c in row
                    if isinstance(c, str))
    assert "Civil Rights Act of 1991, section 106" in text and "not a neutral one" in text
    assert "Fixed bands" in text and "Sliding band" in text


def test_interval_limits_show_two_decimals_and_keep_every_digit(built):
    result, values, formulas, _ = built
    ws = values["Bands"]
    header = [c.value for c in ws[1]]
    lower, upper = header.index("CI lower") + 1, header.index("CI upper") + 1
    limits = [ws.cell(r, c) for r in range(2, 62) for c in (lower, upper)]
    assert all(c.number_format == INTERVAL_FORMAT for c in limits)
    # the stored value is not rounded: never rounding inside the math
    assert any(abs(c.value * 100 - round(c.value * 100)) > 1e-6 for c in limits)
    floor = _at(formulas, result, "band_floor_1")
    assert floor.number_format == "0.0"


def test_every_header_fits_its_row(built):
    result, _, formulas, _ = built
    ws = formulas["Bands"]
    height = ws.row_dimensions[1].height
    assert height is not None
    for cell in ws[1]:
        if cell.value is None:
            continue
        width = ws.column_dimensions[cell.column_letter].width
        assert width and math.ceil(len(cell.value) / (width - 1)) * 15 <= height, (cell.value, width, height)


def test_no_sliding_band_when_the_bands_are_not_computable(tmp_path):
    # every person the same score: no SD, no SEM, no band; the sheet says so in its rows and adds no side block
    rows = [["id", "total"]] + [[f"P{i}", 10.0] for i in range(20)]
    result = make_study(book(tmp_path / "d.xlsx", rows, {"id column": "id", "total column": "total"}),
                        tmp_path / "s.xlsx")
    assert not [k for k in result.cells if k.startswith("band_floor")]
    ws = load_workbook(result.path)["Bands"]
    assert ws.max_column == len([c for c in ws[1] if c.value is not None])


def test_band_styles_answer_per_cell_without_counting(monkeypatch):
    # the row writer tests "styles and (row, column) in styles" for every cell: truth must not count the cells
    # (50,000 rows x two interval columns each time); membership covers whole columns of the people's rows
    from trueband.bridge.study.sheets.bands import BandStyles

    styles = BandStyles({4: 7, 5: 7}, {(3, 12): 9}, last=10 ** 12)
    monkeypatch.setattr(BandStyles, "__len__", lambda self: (_ for _ in ()).throw(AssertionError("counted")))
    assert styles
    assert (2, 4) in styles and styles[(10 ** 12, 5)] == 7 and styles[(3, 12)] == 9
    assert (1, 4) not in styles and (10 ** 12 + 1, 4) not in styles and (2, 6) not in styles
    assert not BandStyles({}, {}, last=5)
