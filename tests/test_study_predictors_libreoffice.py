"""The sheets of several predictors, Combined, Fairness and DIF as LibreOffice Calc shows and computes them.

Two checks on the demo study (a test and the Work Style Questionnaire): every formula cell of the further
predictor's sheets, Combined scores, Combined, Fairness and DIF, exported by LibreOffice, equals the value
trueband stored; and with a profile that makes LibreOffice recompute on loading, its own INTERCEPT, SLOPE,
TINV, STEYX, DEVSQ, CHIINV, NORMSDIST/NORMSINV, MMULT/MINVERSE, COUNTIFS and INDEX over these sheets give
what trueband stored (cells that need a trueband function show #NAME? there and are skipped). The demo has
two demographic columns (Group, Age band): the Fairness and DIF blocks of both are covered. A third check
builds the random tables of the predictor tests with a second demographic column and a predictor given only
as a panel of ratings, and compares the same way its Reliability, Raters and Bands sheets and the blocks of
the second column (Fairness, DIF, the Items sheet's flags, the Summary's lines linking them).
"""

from __future__ import annotations

import pytest

from test_study_libreoffice import CSV_FILTER, convert, mismatched_cells, recomputed_mismatches
from trueband.bridge.study.build import make_study
from trueband.bridge.study.demo import make_demo
from trueband.bridge.study.templates import study_data_workbook

pytestmark = [pytest.mark.libreoffice, pytest.mark.slow]

MINE = ("Combined", "Fairness", "DIF", "Combined scores", "Reliability (Work Style)", "Items (Work Style)",
        "Validity (Work Style)", "Bands (Work Style)", "Scored items (Work Style)", "Fairness (Work Style)")


@pytest.fixture(scope="module")
def demo_study(tmp_path_factory):
    folder = tmp_path_factory.mktemp("lo_predictors")
    data = study_data_workbook(folder / "data.xlsx", make_demo(), cut=24)
    return make_study(data, folder / "study.xlsx"), folder


def test_libreoffice_shows_the_stored_value_of_every_formula_of_the_new_sheets(demo_study, soffice):
    result, folder = demo_study
    assert any(k.startswith("fairness_col2_") for k in result.cells)  # the Age band block is among them
    assert any(k.startswith("dif_col2") for k in result.cells)
    convert(soffice, result.path, CSV_FILTER, folder / "csv", folder / "profile")
    checked, mismatches = mismatched_cells(result, folder, MINE)
    assert checked > 400 * 6  # the questionnaire's Bands and Scored items alone
    assert not mismatches, mismatches[:10]


def test_libreoffice_recomputes_the_standard_formulas_of_the_new_sheets_alike(demo_study, tmp_path, soffice):
    result, _ = demo_study
    checked, mismatches = recomputed_mismatches(
        soffice, result.path, ("Combined", "Fairness", "Combined scores", "Fairness (Work Style)", "DIF"), tmp_path,
        close=lambda stored, theirs: isinstance(stored, float) and _close(stored, theirs))
    assert not mismatches, mismatches[:10]
    # the group lines (INTERCEPT, SLOPE, their intervals) and the listing behind them, the scores side by side
    assert checked.get("Fairness", 0) >= 3 * 5 + 4 * 100
    # each predictor's score (two predictors: no copy of a score is needed for the others' ranges)
    assert checked.get("Combined scores", 0) >= 400 * 2


def _close(ours: float, theirs: str) -> bool:
    # LibreOffice's own TINV/CHIINV/NORMSINV are iterative: agreement to 1e-9 (common practice for such checks)
    try:
        return abs(float(theirs) - ours) <= 1e-9 * max(1.0, abs(ours))
    except ValueError:
        return False


PANEL_SHEETS = ("Reliability (Panel Interview)", "Raters (Panel Interview)", "Bands (Panel Interview)",
                "Fairness (Panel Interview)", "Fairness", "DIF", "Items", "Combined", "Summary")


@pytest.fixture(scope="module")
def panel_study(tmp_path_factory):
    from test_study_predictors import write_book
    from test_study_predictors_columns import TWO_COLUMNS, with_band
    from test_study_predictors_panel import RATERS, with_panel

    folder = tmp_path_factory.mktemp("lo_panel")
    header, rows, _, _, band = with_band()
    panel_header, panel_rows, _, _ = with_panel()
    header = header + list(RATERS)
    rows = [r + p[-len(RATERS):] for r, p in zip(rows, panel_rows)]
    setup = TWO_COLUMNS + [("predictor", "Panel Interview"), ("rating columns", "I1:I3"), ("cut score", 3)]
    result = make_study(write_book(folder / "d.xlsx", header, rows, setup), folder / "study.xlsx")
    assert "fairness_col2_gap_Y" in result.cells and "p3_panel_icc" in result.cells
    return result, folder


def test_libreoffice_shows_the_panel_predictor_and_the_second_column_as_stored(panel_study, soffice):
    result, folder = panel_study
    convert(soffice, result.path, CSV_FILTER, folder / "csv", folder / "profile")
    checked, mismatches = mismatched_cells(result, folder, PANEL_SHEETS)
    assert checked > 260 * 4  # the panel's Bands alone
    assert not mismatches, mismatches[:10]


def test_libreoffice_recomputes_the_panel_scores_and_the_second_column_s_lines_alike(panel_study, tmp_path, soffice):
    result, _ = panel_study
    checked, mismatches = recomputed_mismatches(
        soffice, result.path, ("Bands (Panel Interview)", "Fairness", "Fairness (Panel Interview)"), tmp_path,
        close=lambda stored, theirs: isinstance(stored, float) and _close(stored, theirs))
    assert not mismatches, mismatches[:10]
    assert checked.get("Bands (Panel Interview)", 0) >= 260 * 2  # AVERAGE and COUNT of the ratings
    # two listings (group, band: score and criterion of each person, by INDEX) and the lines of both columns
    # (each group's line reads its block of the listing; no per-group copies)
    assert checked.get("Fairness", 0) >= 2 * (3 * 5 + 2 * 150)
