"""The sheets of several predictors, Combined, Fairness and DIF as LibreOffice Calc shows and computes them.

Two checks on the demo study (a test and the Work Style Questionnaire): every formula cell of the further
predictor's sheets, Combined scores, Combined, Fairness and DIF, exported by LibreOffice, equals the value
trueband stored; and with a profile that makes LibreOffice recompute on loading, its own INTERCEPT, SLOPE,
TINV, STEYX, DEVSQ, CHIINV, NORMSDIST/NORMSINV, MMULT/MINVERSE, COUNTIFS and INDEX over these sheets give
what trueband stored (cells that need a trueband function show #NAME? there and are skipped).
"""

from __future__ import annotations

import pytest
from openpyxl import load_workbook

from test_study_libreoffice import CSV_FILTER, RECALC_ALWAYS, convert, mismatched_cells, read_csv, same, shown
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
    convert(soffice, result.path, CSV_FILTER, folder / "csv", folder / "profile")
    checked, mismatches = mismatched_cells(result, folder, MINE)
    assert checked > 400 * 6  # the questionnaire's Bands and Scored items alone
    assert not mismatches, mismatches[:10]


def test_libreoffice_recomputes_the_standard_formulas_of_the_new_sheets_alike(demo_study, tmp_path, soffice):
    from openpyxl.formula import Tokenizer

    from trueband.funcs import REGISTRY
    from trueband.funcs.registry import normalize_name

    result, _ = demo_study
    profile = tmp_path / "profile"
    (profile / "user").mkdir(parents=True)
    (profile / "user" / "registrymodifications.xcu").write_text(RECALC_ALWAYS, encoding="utf-8")
    convert(soffice, result.path, CSV_FILTER, tmp_path / "csv", profile)

    def ours(text: str) -> bool:
        names = {normalize_name(t.value.rstrip("(")) for t in Tokenizer(text).items
                 if t.type == "FUNC" and t.subtype == "OPEN"}
        return bool(names & set(REGISTRY))

    formulas = load_workbook(result.path, data_only=False)
    values = load_workbook(result.path, data_only=True)
    checked, mismatches = {}, []
    for sheet in ("Combined", "Fairness", "Combined scores", "Fairness (Work Style)", "DIF"):
        rows = read_csv(tmp_path, sheet)
        for row in formulas[sheet].iter_rows():
            for cell in row:
                text = cell.value
                if not (isinstance(text, str) and text.startswith("=")) or ours(text):
                    continue
                theirs = shown(rows, cell.row, cell.column)
                if theirs.startswith("#") or theirs.startswith("Err:"):
                    continue  # depends on a trueband function LibreOffice does not have
                ours_value = values[sheet][cell.coordinate].value
                checked[sheet] = checked.get(sheet, 0) + 1
                if not (same(ours_value, theirs) or (isinstance(ours_value, float) and _close(ours_value, theirs))):
                    mismatches.append((sheet, cell.coordinate, text[:70], ours_value, theirs))
    assert not mismatches, mismatches[:10]
    # the group lines (INTERCEPT, SLOPE, their intervals) and the listing behind them, the scores side by side
    assert checked.get("Fairness", 0) >= 3 * 5 + 4 * 100
    assert checked.get("Combined scores", 0) >= 400 * 3


def _close(ours: float, theirs: str) -> bool:
    # LibreOffice's own TINV/CHIINV/NORMSINV are iterative: agreement to 1e-9 (common practice for such checks)
    try:
        return abs(float(theirs) - ours) <= 1e-9 * max(1.0, abs(ours))
    except ValueError:
        return False
