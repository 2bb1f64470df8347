"""Fairness and DIF for every demographic column; the command line's settings for every predictor.

The data are the random tables of :mod:`test_study_predictors` with a second demographic column, ``band``
(two groups, X and Y, drawn independently of the first column); no check value comes from them by hand.
Sources of the check values (as for the first column in :mod:`test_study_predictors`):

* the step-down tests of differential prediction by the second column: ``statsmodels`` OLS with the
  score × group interaction and ``compare_f_test`` of the nested models (Cleary 1968);
* the group's own line against the common line at the cut: ``scipy.stats.linregress`` and ``statsmodels`` OLS;
* Mantel–Haenszel DIF by the second column: ``statsmodels.stats.contingency_tables.StratifiedTable``
  (pooled odds ratio, ``test_null_odds(correction=True)``); logistic-regression DIF: ``statsmodels`` Logit
  likelihoods (Swaminathan & Rogers 1990, the 2-df test).
"""

from __future__ import annotations

import numpy as np
import pytest
from openpyxl import load_workbook
from scipy import stats

from test_study_predictors import SETUP, TEST, table, write_book
from trueband.bridge import cli
from trueband.bridge.cli.common import CommandError
from trueband.bridge.cli.study import _overrides
from trueband.bridge.study.build import make_study
from trueband.bridge.study.data_workbook import read_study_data
from trueband.bridge.study.setup import SetupError

sm = pytest.importorskip("statsmodels.api")
from helpers import stratified_by_total  # noqa: E402  (statsmodels' StratifiedTable per total score)

#: the first predictor's settings and the study's, with a second demographic column and its reference group
TWO_COLUMNS = SETUP[:8] + [("group columns", "group, band"), ("reference groups", "band: X")] + SETUP[8:]


def with_band(n=260, seed=5, share_x=0.45):
    header, rows, test, quest = table(n)
    rng = np.random.default_rng(seed)
    band = np.where(rng.random(n) < share_x, "X", "Y")
    return header + ["band"], [r + [b] for r, b in zip(rows, band)], test, quest, band


# ---------------------------------------------------------------- the command line, for every predictor

def parse(argv):
    return _overrides(cli.build_parser().parse_args(["study", "d.xlsx", *argv]))


def test_options_after_predictor_set_that_predictor_and_none_clears_for_it_alone():
    got = parse(["--cut", "4", "--predictor", "Work Questionnaire", "--cut", "40", "--retest", "none", "--items",
                 "W1:W6", "--predictor", "Reasoning Test", "--test-name", "Reasoning"])
    assert got == {"cut": 4.0, "predictor_options": {
        "Work Questionnaire": {"cut": 40.0, "retest": "none", "items": ("W1:W6",)},
        "Reasoning Test": {"test_name": "Reasoning"}}}


@pytest.mark.parametrize("argv, message", [
    (["--predictor", "Q", "--cut", "high"], "argument --cut (predictor 'Q'): expected a number or none, got 'high'"),
    (["--predictor", "Q", "--cut", "3", "--cut", "4"], "argument --cut (predictor 'Q'): given twice"),
    (["--predictor", " "], "argument --predictor: give the predictor's name"),
])
def test_a_wrong_predictor_option_is_one_line_naming_option_and_predictor(argv, message, capsys):
    with pytest.raises(SystemExit):
        parse(argv)
    err = capsys.readouterr().err.strip().splitlines()[-1]
    assert message in err


def test_a_study_wide_option_after_predictor_is_refused_naming_both():
    with pytest.raises(CommandError, match=r"^--criterion after --predictor 'Q': it is a setting of the "
                                                       r"whole study; give it before the first --predictor$"):
        parse(["--predictor", "Q", "--criterion", "perf"])


def test_the_settings_reach_each_predictor_and_none_clears_its_own(tmp_path):
    header, rows, _, _ = table(40)
    book = write_book(tmp_path / "d.xlsx", header, rows, SETUP)
    data = read_study_data(book, parse(["--predictor", "work  questionnaire", "--cut", "20", "--reverse", "none",
                                        "--predictor", "Reasoning Test", "--retest", "none", "--cut", "5"]))
    (q,) = data.predictors
    assert q.setup.cut == 20 and q.reverse_items == [] and q.setup.source["cut"] == "command line"
    assert data.setup.cut == 5 and data.setup.retest is None and data.retest is None
    # a setting not given for a predictor stays as the Setup sheet gave it
    assert q.setup.item_min == 1 and q.setup.items == ("W1:W6",)


def test_a_predictor_option_can_give_a_further_predictor_a_setting_the_sheet_did_not(tmp_path):
    header, rows, _, _ = table(40)
    book = write_book(tmp_path / "d.xlsx", header, rows, SETUP)
    data = read_study_data(book, parse(["--predictor", "Work Questionnaire", "--items", "W1:W5"]))
    assert data.predictors[0].item_columns == [10, 11, 12, 13, 14]


def test_an_unknown_predictor_name_is_one_line_naming_it(tmp_path):
    header, rows, _, _ = table(40)
    book = write_book(tmp_path / "d.xlsx", header, rows, SETUP)
    with pytest.raises(SetupError, match=r"^--predictor 'Interview': no predictor of that name on the Setup sheet "
                                         r"\(its predictors: 'Reasoning Test', 'Work Questionnaire'\)$"):
        read_study_data(book, parse(["--predictor", "Interview", "--cut", "3"]))


def test_help_says_how_to_set_a_further_predictor(capsys):
    with pytest.raises(SystemExit):
        cli.main(["study", "--help"])
    text = " ".join(capsys.readouterr().out.split())
    assert "--predictor NAME" in text and "up to the next --predictor" in text
    assert "none clears a setting for that predictor alone" in text



def test_the_scoping_uses_argparse_s_public_interface_only():
    # the predictor options were once made scoped by changing the class of the Actions found through the parser's
    # private table; nothing of argparse's starting with an underscore may be read or written, no class swapped
    import ast
    import inspect

    from trueband.bridge.cli import study

    tree = ast.parse(inspect.getsource(study))
    attributes = {n.attr for n in ast.walk(tree) if isinstance(n, ast.Attribute)}
    assert sorted(a for a in attributes if a.startswith("_") and not a.endswith("__")) == []
    assert "__class__" not in attributes and "__dict__" not in attributes
    assert "_option_string_actions" not in inspect.getsource(study)


def test_the_predictor_options_table_is_the_setup_s_predictor_settings():
    from trueband.bridge.cli.study import _OPTIONS, _PREDICTOR_OPTIONS
    from trueband.bridge.study.setup_predictors import PREDICTOR_FIELDS

    assert sorted(_OPTIONS[opt] for opt in _PREDICTOR_OPTIONS) == sorted(PREDICTOR_FIELDS)


def test_every_option_of_the_table_is_declared_and_reaches_its_setting():
    # each option of _OPTIONS (study-wide or a predictor's, before any --predictor) parses into its Setup field;
    # an option added to the table without a declaration (or declared under another name) fails here
    from trueband.bridge.cli.study import _OPTIONS

    for opt, field in _OPTIONS.items():
        got = parse(["--" + opt.replace("_", "-"), "0.5"])
        assert list(got) == [field] and got[field] in ("0.5", 0.5, ("0.5",)), opt


@pytest.mark.parametrize("option", ["--confidence", "--reference-groups", "--stratum"])
def test_any_study_wide_option_after_predictor_is_refused(option):
    with pytest.raises(CommandError, match=rf"^{option} after --predictor 'Q': it is a setting of the whole study"):
        parse(["--predictor", "Q", "--cut", "3", option, "0.9"])


@pytest.mark.parametrize("argv, message", [
    (["--item-min", "low"], "argument --item-min: expected a number or none, got 'low'"),
    (["--confidence", "high"], "argument --confidence: expected a number or none, got 'high'"),
])
def test_a_wrong_number_before_any_predictor_is_one_line_naming_the_option(argv, message, capsys):
    with pytest.raises(SystemExit):
        parse(argv)
    assert capsys.readouterr().err.strip().splitlines()[-1].endswith(message)


def test_help_groups_the_predictor_options_after_predictor(capsys):
    with pytest.raises(SystemExit):
        cli.main(["study", "--help"])
    text = capsys.readouterr().out
    group = text[text.index("predictor options:"):]
    for option in ("--predictor NAME", "--items", "--reverse", "--item-min", "--item-max", "--total", "--ratings",
                   "--retest", "--cut", "--test-name"):
        assert option in group, option
    assert "--criterion" not in group and "--confidence" not in group

# ---------------------------------------------------------------- Fairness and DIF by every column (slow)

@pytest.fixture(scope="module")
def built(tmp_path_factory):
    folder = tmp_path_factory.mktemp("columns")
    header, rows, test, quest, band = with_band()
    result = make_study(write_book(folder / "d.xlsx", header, rows, TWO_COLUMNS), folder / "study.xlsx")
    values = load_workbook(result.path, data_only=True)
    perf = np.array([np.nan if r[-3] is None else r[-3] for r in rows])
    return result, values, test.astype(float), perf, band


def value(built, key):
    result, values = built[0], built[1]
    sheet, coord = result.cells[key]
    return values[sheet][coord].value


@pytest.mark.slow
def test_fairness_by_the_second_column_against_statsmodels(built):
    result, values, test, perf, band = built
    assert result.recalc_report.ok, [tuple(e) for e in result.recalc_report.errors][:5]
    score = test.sum(axis=1)
    g = (band == "Y").astype(float)  # X is the reference group named on Setup (the smaller group)
    ok = ~np.isnan(perf)
    y, s, g = perf[ok], score[ok], g[ok]
    # statsmodels OLS: the nested models of the step-down tests (Cleary 1968)
    m1 = sm.OLS(y, sm.add_constant(s)).fit()
    m2 = sm.OLS(y, sm.add_constant(np.column_stack([s, g]))).fit()
    m3 = sm.OLS(y, sm.add_constant(np.column_stack([s, g, s * g]))).fit()
    assert value(built, "fairness_col2_slope_p_Y") == pytest.approx(m3.compare_f_test(m2)[1], rel=1e-9)
    assert value(built, "fairness_col2_intercept_p_Y") == pytest.approx(m2.compare_f_test(m1)[1], rel=1e-9)
    focal = stats.linregress(s[g == 1], y[g == 1])  # scipy: the focal group's own line
    gap = (m1.params[0] + m1.params[1] * 4) - (focal.intercept + focal.slope * 4)
    assert value(built, "fairness_col2_gap_Y") == pytest.approx(gap, rel=1e-9)
    # the first column's figures keep their keys; the questionnaire's sheet has the second column too
    assert isinstance(value(built, "fairness_gap_B"), float)
    assert isinstance(value(built, "p2_fairness_col2_gap_Y"), float)


@pytest.mark.slow
def test_the_fairness_sheet_names_each_column_and_its_reference_group(built):
    values = built[1]
    text = [str(c.value) for row in values["Fairness"].iter_rows() for c in row if c.value is not None]
    assert "Groups of column 'group'" in text and "Groups of column 'band'" in text
    ws = values["Fairness"]
    refs = {ws.cell(r, 1).value: ws.cell(r, 2).value for r in range(1, ws.max_row + 1)
            if str(ws.cell(r, 1).value).startswith("Reference group of")}
    assert refs == {"Reference group of 'group' (the group each other group is compared with)": "A",
                    "Reference group of 'band' (the group each other group is compared with)": "X"}
    assert "Y compared with X (column 'band')" in text
    assert "no bias" not in " ".join(text).lower()
    assert len(ws._charts) == 2  # one chart of the group lines per column


@pytest.mark.slow
def test_dif_by_the_second_column_against_statsmodels(built):
    _, _, test, _, band = built
    total = test.sum(axis=1)
    focal = band == "Y"
    for j in (2, 5):
        x = test[:, j - 1]
        st = stratified_by_total(test, focal, j - 1)  # statsmodels StratifiedTable: the MH odds ratio
        assert value(built, f"dif_col2_Y_{j}_delta") == pytest.approx(-2.35 * np.log(st.oddsratio_pooled), rel=1e-9)
        assert value(built, f"dif_col2_Y_{j}_mh_p") == pytest.approx(st.test_null_odds(correction=True).pvalue,
                                                                     rel=1e-9)
        g = focal.astype(float)  # statsmodels Logit: the 2-df likelihood-ratio test (Swaminathan & Rogers 1990)
        small = sm.Logit(x, sm.add_constant(total)).fit(disp=0)
        big = sm.Logit(x, sm.add_constant(np.column_stack([total, g, total * g]))).fit(disp=0)
        assert value(built, f"dif_col2_Y_{j}_lr_p") == pytest.approx(stats.chi2.sf(2 * (big.llf - small.llf), 2),
                                                                     rel=1e-6)
    assert isinstance(value(built, "dif_B_3_delta"), float)  # the first column's keys as before


@pytest.mark.slow
def test_the_items_sheet_has_a_dif_flag_column_per_demographic_column(built):
    from trueband.bridge.study.sheets.dif import flag_header

    ws = built[1]["Items"]
    assert ws.cell(6, 7).value == flag_header("group") and ws.cell(6, 8).value == flag_header("band")
    assert "column 'band'" in ws.cell(6, 8).value
    for col in (7, 8):
        assert {ws.cell(7 + j, col).value for j in range(len(TEST))} <= {"A", "B", "C: review"}


@pytest.mark.slow
def test_a_column_with_a_small_group_says_so_naming_the_column(tmp_path):
    # band X is about 10% of 260 people: about 20 with a criterion value, fewer than DIF's 100
    header, rows, _, _, _ = with_band(share_x=0.1)
    result = make_study(write_book(tmp_path / "d.xlsx", header, rows, TWO_COLUMNS), tmp_path / "s.xlsx")
    values = load_workbook(result.path, data_only=True)
    got = str(value((result, values), "dif_col2"))
    assert got.startswith("not computable: DIF needs at least two groups with 100") and got.endswith("(column 'band')")
    reasons = [reason for sheet, _, reason in result.not_computable if sheet == "DIF"]
    assert any("(column 'band')" in r for r in reasons)
    assert isinstance(value((result, values), "dif_B_3_delta"), float)  # the first column is compared as before


# ---------------------------------------------------------------- the Summary's fairness and DIF lines

#: Words the study never uses of a group comparison: a test that finds no difference cannot show there is none
#: (Aguinis, Culpepper & Pierce 2010); a DIF flag is a reason for review, not a finding (Zwick 2012).
NEVER = ("no bias", "unbiased", "free of bias", "not biased")

#: (slope p, intercept p, confidence) -> the start of the reading the step-down rule gives (Lautenschlager &
#: Mendoza 1986: the slopes first; the intercepts only when the slopes do not differ), written out by hand
READINGS = [
    ((0.012, 0.30, 0.95), "slopes differ (p = 0.012, below the 0.05 level): "),
    ((0.0001, 0.0001, 0.95), "slopes differ (p < 0.001, below the 0.05 level): "),
    ((0.40, 0.0301, 0.95), "intercepts differ (p = 0.030, below the 0.05 level): the slopes do not differ"),
    ((0.02, 0.004, 0.99), "intercepts differ (p = 0.004, below the 0.01 level): "),
    ((0.3581, 0.448, 0.95), "no difference detected at this sample size (slopes p = 0.358, intercepts p = 0.448; "
                            "level 0.05): this does not show the absence of bias"),
    ((0.07, 0.2, 0.9), "slopes differ (p = 0.070, below the 0.1 level): "),
]


def _reading_book(path):
    """A workbook of the reading formula over typed p values and confidence levels (one case a row)."""
    from openpyxl import Workbook

    from trueband.bridge.study.context import cell, formula_text
    from trueband.bridge.study.sheets.fairness import reading_formula

    wb = Workbook()
    ws = wb.active
    ws.title = "Readings"
    for r, ((sp, ip, conf), _) in enumerate(READINGS, start=1):
        ws.cell(r, 1, sp), ws.cell(r, 2, ip), ws.cell(r, 3, conf)
        template, places = reading_formula(*(cell("Readings", r, c) for c in (1, 2, 3)))
        ws.cell(r, 4, "=" + formula_text(template, "Readings", **places))
    wb.save(path)
    return path


def test_the_reading_formula_says_the_step_down_result_in_cautious_words(tmp_path):
    # trueband's own engine evaluates the formula (every branch); its words are the hand-written ones above,
    # and the same as reading_words gives (what the study checks each cell with)
    from trueband.bridge.engine.recalc import recalculate
    from trueband.bridge.study.sheets.fairness import reading_words

    report = recalculate(_reading_book(tmp_path / "study-in.xlsx"), tmp_path / "study.xlsx", all_formulas=True)
    assert report.ok
    ws = load_workbook(tmp_path / "study.xlsx", data_only=True)["Readings"]
    for r, (args, start) in enumerate(READINGS, start=1):
        got = ws.cell(r, 4).value
        assert got.startswith(start) and got == reading_words(*args)
        assert not any(word in got.lower() for word in NEVER)


@pytest.mark.slow
@pytest.mark.libreoffice
def test_libreoffice_reads_the_step_down_result_alike(tmp_path, soffice):
    from test_study_libreoffice import recomputed_mismatches
    from trueband.bridge.engine.recalc import recalculate

    recalculate(_reading_book(tmp_path / "in.xlsx"), tmp_path / "study.xlsx", all_formulas=True)
    checked, mismatches = recomputed_mismatches(soffice, tmp_path / "study.xlsx", ("Readings",), tmp_path / "lo")
    assert checked == {"Readings": len(READINGS)} and not mismatches, mismatches


def _sheet_text(ws) -> str:
    return " ".join(str(c.value) for row in ws.iter_rows() for c in row if isinstance(c.value, str)).lower()


@pytest.mark.slow
def test_the_summary_reads_each_column_s_differential_prediction_from_the_fairness_sheets(built):
    from trueband.bridge.study.sheets.fairness import reading_words

    result, values, test, perf, band = built
    formulas = load_workbook(result.path)
    readings = [k for k in result.cells if k.startswith("summary_") and "_reading_" in k]
    # two predictors (the test, the questionnaire) by two columns (group, band), one focal group each
    assert sorted(readings) == ["summary_fairness_col2_reading_Y", "summary_fairness_reading_B",
                                "summary_p2_fairness_col2_reading_Y", "summary_p2_fairness_reading_B"]
    for key in readings:
        own = key[len("summary_"):]
        sheet, coord = result.cells[own]
        assert sheet.startswith("Fairness")
        # a link to the Fairness sheet's cell, which says what its own p values and the Setup's level give
        assert formulas["Summary"][result.cells[key][1]].value == f"='{sheet}'!{coord}"
        p_slope, p_intercept = (value(built, own.replace("reading_", part)) for part in ("slope_p_", "intercept_p_"))
        assert value(built, key) == value(built, own) == reading_words(p_slope, p_intercept, 0.95)
    # the second column's reading from statsmodels' own step-down tests (OLS, compare_f_test; Cleary 1968)
    score, ok = test.sum(axis=1), ~np.isnan(perf)
    y, s, g = perf[ok], score[ok], (band == "Y").astype(float)[ok]
    m1 = sm.OLS(y, sm.add_constant(s)).fit()
    m2 = sm.OLS(y, sm.add_constant(np.column_stack([s, g]))).fit()
    m3 = sm.OLS(y, sm.add_constant(np.column_stack([s, g, s * g]))).fit()
    expected = reading_words(m3.compare_f_test(m2)[1], m2.compare_f_test(m1)[1], 0.95)
    assert value(built, "summary_fairness_col2_reading_Y") == expected
    labels = {formulas["Summary"].cell(int(result.cells[k][1][1:]), 1).value for k in readings}
    assert "Reasoning Test: Y compared with X, differential prediction (Fairness sheet)" in labels


@pytest.mark.slow
def test_the_summary_counts_each_column_s_dif_items_as_the_dif_sheet_categorises_them(built):
    result, values = built[0], built[1]
    formulas = load_workbook(result.path)
    for col, focal in (("", "B"), ("col2_", "Y")):
        worst = []
        for j in range(1, len(TEST) + 1):
            got = value(built, f"dif_{col}{focal}_{j}_mh_class")  # the DIF sheet's own ETS category
            worst.append("C: review" if got == "C" else got)
            assert value(built, f"dif_flag_{col}{j}") == worst[-1]  # the Items flag, found by its column's key
        for word, letter in (("C: review", "c"), ("B", "b")):
            key = f"dif_{col}count_{letter}"
            assert value(built, f"summary_{key}") == value(built, key) == worst.count(word)
            sheet, coord = result.cells[key]
            assert formulas["Summary"][result.cells[f"summary_{key}"][1]].value == f"='{sheet}'!{coord}"
    # T3 was made to behave differently for group B (see test_study_predictors.table): category C by 'group'
    assert value(built, "dif_flag_3") == "C: review" and value(built, "summary_dif_count_c") >= 1


@pytest.mark.slow
def test_no_sheet_says_the_groups_are_shown_to_be_treated_alike(built):
    values = built[1]
    for name in ("Summary", "Fairness", "Fairness (Work)", "DIF", "Items"):
        text = _sheet_text(values[name])
        assert not any(word in text for word in NEVER), name
    summary = _sheet_text(values["Summary"])
    assert "groups of 'group'" in summary and "groups of 'band'" in summary
    for key in [k for k in built[0].cells if k.startswith("summary_") and "_reading_" in k]:
        got = value(built, key)
        assert got.startswith(("slopes differ (p", "intercepts differ (p", "no difference detected at this sample "
                                                                          "size"))
        assert got.startswith("no difference") == got.endswith("this does not show the absence of bias")


#: the first demographic column ('band', its group X about 5% of the people) too small for Fairness and DIF; the
#: second ('group') compared
SMALL_FIRST = [("id column", "id"), ("group column", "band"), ("item columns", "T1:T8"), ("criterion column", "perf"),
               ("retest column", "retest"), ("cut score", 4), ("test name", "Reasoning Test"),
               ("group columns", "band, group"), ("reference groups", "band: Y; group: A")] + SETUP[8:]


@pytest.fixture(scope="module")
def small_first(tmp_path_factory):
    folder = tmp_path_factory.mktemp("small_first")
    header, rows, _, _, _ = with_band(share_x=0.05)
    result = make_study(write_book(folder / "d.xlsx", header, rows, SMALL_FIRST), folder / "study.xlsx")
    return result, load_workbook(result.path, data_only=True)


@pytest.mark.slow
def test_items_names_the_column_of_its_dif_flags_when_the_first_is_not_computed(small_first):
    from trueband.bridge.study.sheets.dif import flag_header

    result, values = small_first
    assert result.recalc_report.ok
    ws = values["Items"]
    # the only DIF column on Items is the second demographic column's, and its header says so
    assert ws.cell(6, 7).value == flag_header("group") == ("DIF by column 'group' (worst ETS category over its "
                                                           "focal groups; see DIF)")
    assert ws.cell(6, 8).value is None
    # its cells are keyed by their column (col2), not by their place; the first column has none
    assert [result.cells[f"dif_flag_col2_{j}"] for j in range(1, len(TEST) + 1)] == [
        ("Items", f"G{6 + j}") for j in range(1, len(TEST) + 1)]
    assert not any(k.startswith("dif_flag_") and not k.startswith("dif_flag_col2_") for k in result.cells)
    assert value(small_first, "dif_flag_col2_3") == "C: review"  # T3, made to differ for group B


@pytest.mark.slow
def test_the_summary_says_why_a_column_is_not_compared_and_reads_the_other(small_first):
    result, values = small_first
    fairness, dif = str(value(small_first, "summary_fairness")), str(value(small_first, "summary_dif"))
    assert fairness == ("not computable: differential prediction needs at least two groups with 20 or more people "
                        "who have a score and a criterion value (column 'band')")
    assert dif == ("not computable: DIF needs at least two groups with 100 or more people who answered every item "
                   "(column 'band')")
    assert value(small_first, "summary_dif_col2_count_c") == value(small_first, "dif_col2_count_c") >= 1
    assert value(small_first, "summary_fairness_col2_reading_B") == value(small_first, "fairness_col2_reading_B")
    assert not any(word in _sheet_text(values["Summary"]) for word in NEVER)
