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
from statsmodels.stats.contingency_tables import StratifiedTable  # noqa: E402

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
    private = sorted({n.attr for n in ast.walk(tree) if isinstance(n, ast.Attribute) and n.attr.startswith("_")})
    assert private == []
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
        tables = []
        for s in np.unique(total):
            at = total == s
            t = np.array([[((x == 1) & at & ~focal).sum(), ((x == 0) & at & ~focal).sum()],
                          [((x == 1) & at & focal).sum(), ((x == 0) & at & focal).sum()]], float)
            if t.sum(axis=0).all() and t.sum(axis=1).all():
                tables.append(t)
        st = StratifiedTable(tables)  # statsmodels: the Mantel–Haenszel pooled odds ratio and its test
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
    ws = built[1]["Items"]
    assert ws.cell(6, 7).value == "DIF by group (worst ETS category, see DIF)"
    assert ws.cell(6, 8).value == "DIF by band (worst ETS category, see DIF)"
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
