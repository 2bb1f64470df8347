"""Raw multiple-choice answers and their key in the study: the Answers, Scored items and Options sheets.

The data are the demo's invented answers (A to D) and key, one item mis-keyed on purpose. Sources of the check
values: the scores against ``trueband.funcs.options.score_responses`` and a numpy comparison with the key; the
option statistics against the registered functions called directly on the same answers (their own tests hold
the published checks: Kelley 1939 groups, Attali & Fraenkel 2000 option–rest r); the flags against
``trueband.funcs.options.item_flags``, the Python list of every warning; the item–total r of the mis-keyed item
against ``scipy.stats.pearsonr`` (negative: the key is wrong).
"""

from __future__ import annotations

import numpy as np
import pytest
from openpyxl import load_workbook
from scipy import stats

from test_study_cut import book  # a small study's data workbook: Candidates, Setup and further sheets
from trueband.bridge.study.build import make_study
from trueband.bridge.study.demo import make_demo
from trueband.bridge.study.demo_answers import MISKEYED_ITEM, UNUSED_DISTRACTOR_ITEM, key_rows, raw_answers
from trueband.bridge.study.setup import SetupError
from trueband.bridge.study.templates import study_data_workbook
from trueband.funcs import call
from trueband.funcs.options import item_flags, score_responses

pytestmark = pytest.mark.slow  # the Options sheet calls the option functions a few hundred times

CUT = 24.0


@pytest.fixture(scope="module")
def demo():
    return make_demo()


@pytest.fixture(scope="module")
def answers(demo):
    key = key_rows(demo)[1][1:]
    return np.array(raw_answers(demo), dtype=object), key


@pytest.fixture(scope="module")
def study(tmp_path_factory, demo):
    folder = tmp_path_factory.mktemp("answers")
    data = study_data_workbook(folder / "data.xlsx", demo, cut=CUT, answers=True)
    result = make_study(data, folder / "study.xlsx")
    return result, load_workbook(result.path, data_only=True), load_workbook(result.path)


def test_the_answers_are_scored_by_live_formulas_as_score_responses_scores_them(study, answers):
    result, values, formulas = study
    assert result.recalc_report.ok, result.recalc_report.errors[:5]
    raw, key = answers
    expected = score_responses(raw.tolist(), key)
    assert np.array_equal(expected, (raw == np.array(key)[None, :]).astype(float))
    ws = values["Scored items"]
    got = np.array([[c.value for c in row] for row in ws.iter_rows(min_row=2, max_col=40)], dtype=float)
    assert np.array_equal(got, expected)
    assert "UPPER(TRIM(" in formulas["Scored items"]["A2"].value and "'Answers'!" in formulas["Scored items"]["A2"].value
    assert [c.value for c in values["Answers"][1]][1:] == key  # the key row, editable
    # the mis-keyed item's scores are the ones the (wrong) key gives, so every score follows the key
    assert got[:, MISKEYED_ITEM].sum() == (raw[:, MISKEYED_ITEM] == key[MISKEYED_ITEM]).sum()


def _option_rows(values):
    ws = values["Options"]
    rows, item = {}, None
    for row in ws.iter_rows(min_row=1, max_col=12):
        v = [c.value for c in row]
        if v[1] in ("A", "B", "C", "D") and v[2] in ("key", None, ""):
            item = v[0] or item
            rows[(item, v[1])] = v
    return rows


def test_option_statistics_are_the_functions_on_the_same_answers(study, answers):
    _, values, _ = study
    raw, key = answers
    table = [list(key)] + raw.tolist()
    rows = _option_rows(values)
    assert len(rows) == 40 * 4  # A to D offered for every item, the unchosen one included
    for item in (1, UNUSED_DISTRACTOR_ITEM + 1, 13, MISKEYED_ITEM + 1):
        for option in "ABCD":
            v = rows[(f"Q{item:02d}", option)]
            assert v[3] == pytest.approx(call("OPTION_SHARE", table, item, option), abs=1e-15)
            assert v[3] == pytest.approx(np.mean(raw[:, item - 1] == option), abs=1e-15)
            assert v[4] == pytest.approx(call("OPTION_SHARE", table, item, option, "upper", 0.27), abs=1e-15)
            assert v[5] == pytest.approx(call("OPTION_SHARE", table, item, option, "lower", 0.27), abs=1e-15)
            if v[3] > 0:
                assert v[6] == pytest.approx(call("OPTION_REST_R", table, item, option), abs=1e-14)
            else:
                assert str(v[6]).startswith("not computable")
            assert (v[2] == "key") == (option == key[item - 1])


def test_every_flag_that_applies_is_shown(study, answers):
    _, values, _ = study
    raw, key = answers
    table = [list(key)] + raw.tolist()
    words = {"unchosen_distractor": "nobody chose distractor", "distractor_positive_r": "correlates positively",
             "distractor_favoured_by_upper": "chosen more by the upper group",
             "negative_item_total": "corrected item-total r is negative", "alpha_rises_if_deleted": "alpha rises"}
    rows = _option_rows(values)
    for item in range(1, 41):
        shown = rows[(f"Q{item:02d}", "A")][11] or ""
        flags = item_flags(table, item, options="ABCD")
        for flag in flags:
            assert words[flag.code] in shown, (item, flag)
        assert shown.count(";") == len(flags) and not shown.endswith(" "), (item, shown, [f.code for f in flags])
    mis = rows[(f"Q{MISKEYED_ITEM + 1:02d}", "A")][11]
    assert "negative" in mis and "check the key" in mis and "alpha rises" in mis
    assert "nobody chose distractor" in rows[(f"Q{UNUSED_DISTRACTOR_ITEM + 1:02d}", "A")][11]


def test_the_miskeyed_item_correlates_negatively_with_the_rest(study, answers):
    result, values, _ = study
    raw, key = answers
    scored = (raw == np.array(key)[None, :]).astype(float)
    j = MISKEYED_ITEM
    r = stats.pearsonr(scored[:, j], scored.sum(axis=1) - scored[:, j])[0]
    row = _option_rows(values)[(f"Q{j + 1:02d}", "A")]
    assert row[9] == pytest.approx(r, abs=1e-12) and r < 0
    assert row[8] == pytest.approx(call("DISCRIMINATION_INDEX", scored, j + 1, 0.27), abs=1e-14) and row[8] < 0
    sheet, coord = result.cells["summary_items_flagged"]
    assert values[sheet][coord].value == values["Options"][result.cells["items_flagged"][1]].value >= 3


ROWS = [["id", "i1", "i2", "i3"], ["a", "A", "b", "C"], ["b", "B", "B", " c"], ["c", "A", "C", None],
        ["d", "C", "B", "C"], ["e", "A", "B", "D"]]


def test_a_small_keyed_study_scores_blanks_as_unanswered(tmp_path):
    key = [["Item", "i1", "i2", "i3"], ["Key", "A", "B", "C"]]
    path = book(tmp_path / "d.xlsx", ROWS, {"id column": "id", "item columns": "i1:i3", "answer key sheet": "Key"},
                {"Key": key})
    result = make_study(path, tmp_path / "s.xlsx")
    values = load_workbook(result.path, data_only=True)
    got = [[c.value for c in row] for row in values["Scored items"].iter_rows(min_row=2, max_col=3)]
    # " c" is C (trimmed, any case); a blank answer is no answer (not 0), as a blank item is in the study
    assert got == [[1, 1, 1], [0, 1, 1], [1, 0, None], [0, 1, 1], [1, 1, 0]]
    scores = [row[2].value for row in values["Bands"].iter_rows(min_row=2, max_row=6)]
    assert scores == [3, 2, 1, 2, 2]


@pytest.mark.parametrize("extra, setup, match", [
    ({}, {"answer key sheet": "Keys"}, "answer key sheet: no sheet named 'Keys'"),
    ({"Key": [["i1", "i2"], ["A", "B"]]}, {"answer key sheet": "Key"}, "item 'i3' has no key"),
    ({"Key": [["i1", "i2", "i3"], ["A", "B", "C"], ["AB", "ABC", "AB"]]}, {"answer key sheet": "Key"},
     r"sheet 'Key', cell C3: the options offered \(AB\) do not include the key C"),
])
def test_unusable_keys_are_refused_in_one_line(tmp_path, extra, setup, match):
    path = book(tmp_path / "d.xlsx", ROWS, {"item columns": "i1:i3", **setup}, extra)
    with pytest.raises(SetupError, match=match):
        make_study(path, tmp_path / "s.xlsx")
    assert not (tmp_path / "s.xlsx").exists()


def test_libreoffice_shows_and_recomputes_the_keyed_sheets(study, tmp_path, soffice):
    # Calc shows every formula cell of Options, Answers and Scored items as trueband stored it; and, recomputing
    # on loading, Calc's own IF/UPPER/TRIM scoring and the answer links give the stored values too
    from openpyxl.utils import get_column_letter

    from test_study_libreoffice import CSV_FILTER, convert, mismatched_cells, read_csv, recalc_to_csv, same, shown

    result, values, formulas = study
    sheets = ("Options", "Answers", "Scored items")
    convert(soffice, result.path, CSV_FILTER, tmp_path / "csv", tmp_path / "profile")
    checked, mismatches = mismatched_cells(result, tmp_path, sheets)
    assert checked > 2 * 400 * 40 and not mismatches, mismatches[:10]

    folder = tmp_path / "again"
    folder.mkdir()
    profile = folder / "profile"
    recalc_to_csv(soffice, result.path, folder / "csv", profile)
    wrong, count = [], 0
    for sheet in ("Answers", "Scored items"):  # standard functions only: Calc recomputes them itself
        rows = read_csv(folder, sheet)
        for r in range(2, 402):
            for c in range(1 if sheet == "Scored items" else 2, 41 + (sheet == "Answers")):
                coordinate = f"{get_column_letter(c)}{r}"
                count += 1
                if not same(values[sheet][coordinate].value, shown(rows, r, c)):
                    wrong.append((sheet, coordinate, values[sheet][coordinate].value, shown(rows, r, c)))
    assert count == 2 * 400 * 40 and not wrong, wrong[:10]
