"""Several predictors in one study; the Combined, Fairness and DIF sheets; clearing a setting.

The data are random tables generated here (a 0/1 test, a 1-5 questionnaire with a reverse-keyed item, a
criterion, two groups); no check value comes from them by hand. Sources of the check values:

* coefficient alpha: ``pingouin.cronbach_alpha`` (listwise);
* multiple R, adjusted R², the F test of an increment: ``statsmodels`` OLS (``rsquared``, ``rsquared_adj``,
  ``compare_f_test`` of the nested models);
* the step-down tests of differential prediction: ``statsmodels`` OLS with the score × group interaction
  and ``compare_f_test`` (Cleary 1968; Lautenschlager & Mendoza 1986);
* each group's line and the slope's interval: ``scipy.stats.linregress`` and the t quantile of
  ``scipy.stats.t``;
* Mantel–Haenszel DIF: ``statsmodels.stats.contingency_tables.StratifiedTable`` (pooled odds ratio,
  ``test_null_odds(correction=True)``); logistic-regression DIF: ``statsmodels`` Logit likelihoods
  (Swaminathan & Rogers 1990, the 2-df test);
* composite reliability (Mosier 1943), composite validity and the composite d (Sackett & Ellingson 1997):
  the formulas written out here with numpy, from the sheet's own inputs;
* Browne's (1975) cross-validated R²: the formula written out here from statsmodels' adjusted R².
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from openpyxl import Workbook, load_workbook
from scipy import stats

from trueband.bridge import cli
from trueband.bridge.study.build import make_study
from trueband.bridge.study.data_workbook import read_study_data
from trueband.bridge.study.setup import SetupError

sm = pytest.importorskip("statsmodels.api")
pingouin = pytest.importorskip("pingouin")
from helpers import stratified_by_total  # noqa: E402  (statsmodels' StratifiedTable per total score)

N = 260
TEST = [f"T{j}" for j in range(1, 9)]
QUEST = [f"W{j}" for j in range(1, 7)]


def write_book(path, header, rows, setup_rows):
    wb = Workbook()
    ws = wb.active
    ws.title = "Candidates"
    ws.append(header)
    for r in rows:
        ws.append(r)
    st = wb.create_sheet("Setup")
    st.append(["Setting", "Value"])
    for k, v in setup_rows:
        st.append([k, v])
    wb.save(path)
    return path


def table(n=N, seed=11):
    rng = np.random.default_rng(seed)
    group_b = np.arange(n) % 2 == 1
    ability = rng.standard_normal(n) - 0.4 * group_b
    trait = rng.standard_normal(n)
    difficulty = np.linspace(-1.2, 1.2, len(TEST))
    test = (rng.random((n, len(TEST))) < 1 / (1 + np.exp(-1.5 * (ability[:, None] - difficulty)))).astype(int)
    test[group_b, 2] = (rng.random(int(group_b.sum())) < 0.3).astype(int)  # an item that behaves differently
    quest = np.clip(np.rint(3 + 0.8 * trait[:, None] + 0.7 * rng.standard_normal((n, len(QUEST)))), 1, 5).astype(int)
    quest[:, 1] = 6 - quest[:, 1]  # W2 is worded the other way round
    perf = 3 + 0.4 * ability + 0.3 * trait + 0.6 * rng.standard_normal(n)
    has = rng.random(n) < 0.75
    header = ["id", "group", *TEST, *QUEST, "perf", "retest"]
    rows = []
    for i in range(n):
        rows.append([f"C{i}", "B" if group_b[i] else "A", *test[i].tolist(), *quest[i].tolist(),
                     round(float(perf[i]), 2) if has[i] else None, float(test[i].sum() + i % 3 - 1) if i % 4 == 0 else None])
    return header, rows, test, quest


SETUP = [("id column", "id"), ("group column", "group"), ("item columns", "T1:T8"), ("criterion column", "perf"),
         ("retest column", "retest"), ("cut score", 4), ("test name", "Reasoning Test"), ("reference group", "A"),
         ("predictor", "Work Questionnaire"), ("item columns", "W1:W6"), ("reverse keyed items", "W2"),
         ("item scale minimum", 1), ("item scale maximum", 5), ("cut score", 18)]


# ---------------------------------------------------------------- reading the Setup sheet

def test_a_further_predictor_has_its_own_settings_and_never_the_test_s_retest(tmp_path):
    header, rows, _, _ = table(40)
    data = read_study_data(write_book(tmp_path / "d.xlsx", header, rows, SETUP))
    assert data.setup.retest == "retest" and data.setup.test_name == "Reasoning Test"
    (q,) = data.predictors
    assert q.setup.test_name == "Work Questionnaire" and q.setup.retest is None and q.retest is None
    assert q.setup.cut == 18 and q.setup.items == ("W1:W6",) and q.reverse_items == [1]
    assert q.groups == data.groups and q.criterion is not None
    assert "retest" not in q.setup.source


def test_a_setting_in_no_block_is_the_study_s_and_the_first_predictor_s(tmp_path):
    # the single-predictor Setup reads exactly as before: no 'predictor' row, one predictor
    header, rows, _, _ = table(40)
    data = read_study_data(write_book(tmp_path / "d.xlsx", header, rows, SETUP[:8]))
    assert data.predictors == [] and data.setup.predictors == () and data.setup.retest == "retest"


def test_a_predictor_row_before_any_predictor_setting_names_the_first_predictor(tmp_path):
    header, rows, _, _ = table(40)
    setup = [("predictor", "Reasoning"), ("item columns", "T1:T8"), ("criterion column", "perf")]
    data = read_study_data(write_book(tmp_path / "d.xlsx", header, rows, setup))
    assert data.setup.test_name == "Reasoning" and data.predictors == []


@pytest.mark.parametrize("extra, match", [
    ([("criterion column", "perf")], r"cell A\d+: 'criterion column' is a setting of the whole study"),
    ([("item columns", "W1:W3"), ("predictor", " reasoning  TEST"), ("item columns", "W4:W6")],
     "two predictors are called"),
    ([("total column", "retest")], "column 'retest' .* already has the role 'retest column'"),
    ([("item columns", "W1:W3")], None),
])
def test_predictor_blocks_refuse_what_does_not_belong(tmp_path, extra, match):
    header, rows, _, _ = table(40)
    setup = SETUP[:8] + [("predictor", "Q")] + extra
    book = write_book(tmp_path / "d.xlsx", header, rows, setup)
    if match is None:
        assert read_study_data(book).predictors[0].item_columns == [10, 11, 12]
        return
    with pytest.raises(SetupError, match=match):
        read_study_data(book)


def test_a_predictor_without_scores_is_named_in_the_message(tmp_path):
    header, rows, _, _ = table(40)
    book = write_book(tmp_path / "d.xlsx", header, rows, SETUP[:8] + [("predictor", "Q"), ("cut score", 3)])
    with pytest.raises(SetupError, match="predictor 'Q': no test score"):
        read_study_data(book)


def test_the_word_none_clears_a_setting_of_the_setup_sheet(tmp_path):
    header, rows, _, _ = table(40)
    book = write_book(tmp_path / "d.xlsx", header, rows, SETUP)
    data = read_study_data(book, {"retest": "none", "cut": "NONE", "reverse": "none"})
    assert data.setup.retest is None and data.retest is None and data.setup.cut is None
    assert "retest" not in data.setup.source


def test_the_command_line_reads_none_and_help_says_how(capsys):
    from trueband.bridge.cli.study import _overrides

    with pytest.raises(SystemExit):
        cli.main(["study", "--help"])
    text = " ".join(capsys.readouterr().out.split())
    assert "none to clear a setting" in text and "--retest none" in text and "'predictor | NAME'" in text
    args = type("Args", (), {"retest": "none", "cut": "none", "items": "none", "group": "g"})()
    assert _overrides(args) == {"retest": "none", "cut": "none", "items": "none", "group": "g"}


def test_a_number_option_refuses_a_word_other_than_none(capsys):
    with pytest.raises(SystemExit):
        cli.main(["study", "x.xlsx", "--cut", "high"])
    assert "expected a number or none" in capsys.readouterr().err


# ---------------------------------------------------------------- the built study (seconds: slow)

@pytest.fixture(scope="module")
def built(tmp_path_factory):
    folder = tmp_path_factory.mktemp("predictors")
    header, rows, test, quest = table()
    result = make_study(write_book(folder / "d.xlsx", header, rows, SETUP), folder / "study.xlsx")
    values = load_workbook(result.path, data_only=True)
    formulas = load_workbook(result.path, data_only=False)
    perf = np.array([np.nan if r[-2] is None else r[-2] for r in rows])
    groups = np.array([r[1] for r in rows])
    scored = quest.astype(float).copy()
    scored[:, 1] = 6 - scored[:, 1]
    return result, values, formulas, test.astype(float), scored, perf, groups


def value(built, key):
    result, values = built[0], built[1]
    sheet, coord = result.cells[key]
    return values[sheet][coord].value


@pytest.mark.slow
def test_the_study_builds_every_predictor_without_errors(built):
    result, values = built[0], built[1]
    assert result.recalc_report.ok, [tuple(e) for e in result.recalc_report.errors][:5]
    # the predictor's name in every title, shortened to whole words so that "Scored items (...)" fits 31
    for title in ("Reliability (Work)", "Items (Work)", "Validity (Work)", "Bands (Work)", "Scored items (Work)",
                  "Fairness (Work)", "Combined", "Fairness", "DIF", "Combined scores"):
        assert title in values.sheetnames
    assert "DIF (Work)" not in values.sheetnames  # rating-scale items: no DIF


@pytest.mark.slow
def test_each_predictor_has_its_own_reliability(built):
    _, _, _, test, scored, _, _ = built
    # pingouin.cronbach_alpha, listwise
    for key, x in (("alpha", test), ("p2_alpha", scored)):
        assert value(built, key) == pytest.approx(pingouin.cronbach_alpha(pd.DataFrame(x))[0], rel=1e-9)
    assert str(value(built, "p2_retest_r")).startswith("not computable: no retest column")
    assert isinstance(value(built, "retest_r"), float)


@pytest.mark.slow
def test_each_predictor_has_its_own_validity(built):
    _, _, _, test, scored, perf, _ = built
    for key, x in (("r", test.sum(axis=1)), ("p2_r", scored.sum(axis=1))):
        ok = ~np.isnan(perf)
        assert value(built, key) == pytest.approx(stats.pearsonr(x[ok], perf[ok])[0], rel=1e-9)


def _ols(y, x):
    ok = ~np.isnan(y) & ~np.isnan(x).any(axis=1)
    return sm.OLS(y[ok], sm.add_constant(x[ok])).fit(), int(ok.sum())


@pytest.mark.slow
def test_combined_regression_against_statsmodels(built):
    _, _, _, test, scored, perf, _ = built
    x = np.column_stack([test.sum(axis=1), scored.sum(axis=1)])
    full, n = _ols(perf, x)
    assert value(built, "combined_n") == n
    assert value(built, "multiple_r") == pytest.approx(np.sqrt(full.rsquared), rel=1e-9)
    assert value(built, "adjusted_r2") == pytest.approx(full.rsquared_adj, rel=1e-9)
    rho2, k = max(full.rsquared_adj, 0.0), 2
    browne = ((n - k - 3) * rho2 ** 2 + rho2) / ((n - 2 * k - 2) * rho2 + k)  # Browne (1975), rho2 = adjusted R²
    assert value(built, "cross_validity") == pytest.approx(browne, rel=1e-9)
    for i in range(2):
        base, _ = _ols(perf, x[:, [1 - i]])
        f, p, _ = full.compare_f_test(base)
        assert value(built, f"incremental_delta_r2_{i + 1}") == pytest.approx(full.rsquared - base.rsquared, rel=1e-9)
        assert value(built, f"incremental_f_{i + 1}") == pytest.approx(f, rel=1e-9)
        assert value(built, f"incremental_p_{i + 1}") == pytest.approx(p, rel=1e-9)


@pytest.mark.slow
def test_composite_figures_against_the_published_formulas(built):
    result, values, _, test, scored, perf, groups = built
    x = np.column_stack([test.sum(axis=1), scored.sum(axis=1)])
    sds = x.std(axis=0, ddof=1)
    r12 = np.corrcoef(x.T)[0, 1]
    rel = np.array([value(built, "alpha"), value(built, "p2_alpha")])
    assert value(built, "combined_r_1_2") == pytest.approx(r12, rel=1e-9)
    # Mosier (1943): 1 - sum w²s²(1 - r_ii) / var(composite), unit weights on raw scores
    var_c = sds[0] ** 2 + sds[1] ** 2 + 2 * sds[0] * sds[1] * r12
    mosier = 1 - (sds ** 2 * (1 - rel)).sum() / var_c
    assert value(built, "composite_reliability") == pytest.approx(mosier, rel=1e-9)
    v = np.array([value(built, "r"), value(built, "p2_r")])
    assert value(built, "composite_validity") == pytest.approx((sds * v).sum() / np.sqrt(var_c), rel=1e-9)
    # Sackett & Ellingson (1997): d_C = sum d / sqrt(k + k(k - 1) mean r); d with the pooled SD (Cohen 1988)
    ds = []
    for j in range(2):
        a, b = x[groups == "A", j], x[groups == "B", j]
        pooled = np.sqrt(((a.size - 1) * a.var(ddof=1) + (b.size - 1) * b.var(ddof=1)) / (a.size + b.size - 2))
        ds.append((a.mean() - b.mean()) / pooled)
        assert value(built, f"d_{j + 1}_B") == pytest.approx(ds[-1], rel=1e-9)
    d_c = sum(ds) / np.sqrt(2 + 2 * r12)
    assert value(built, "composite_d_B") == pytest.approx(d_c, rel=1e-9)
    # the predicted impact ratio: normal scores, the reference group's rate at the first predictor's cut
    p_ref = float((x[groups == "A", 0] >= 4).mean())
    expected = stats.norm.sf(stats.norm.isf(p_ref) + d_c) / p_ref
    assert value(built, "composite_impact_B") == pytest.approx(expected, rel=1e-9)


@pytest.mark.slow
def test_fairness_step_down_tests_against_statsmodels(built):
    _, _, _, test, _, perf, groups = built
    score = test.sum(axis=1)
    g = (groups == "B").astype(float)
    ok = ~np.isnan(perf)
    y, s, g = perf[ok], score[ok], g[ok]
    m1 = sm.OLS(y, sm.add_constant(s)).fit()
    m2 = sm.OLS(y, sm.add_constant(np.column_stack([s, g]))).fit()
    m3 = sm.OLS(y, sm.add_constant(np.column_stack([s, g, s * g]))).fit()
    assert value(built, "fairness_slope_p_B") == pytest.approx(m3.compare_f_test(m2)[1], rel=1e-9)
    assert value(built, "fairness_intercept_p_B") == pytest.approx(m2.compare_f_test(m1)[1], rel=1e-9)
    focal = stats.linregress(s[g == 1], y[g == 1])
    gap = (m1.params[0] + m1.params[1] * 4) - (focal.intercept + focal.slope * 4)
    assert value(built, "fairness_gap_B") == pytest.approx(gap, rel=1e-9)
    assert isinstance(value(built, "p2_fairness_gap_B"), float)  # the questionnaire's own Fairness sheet


@pytest.mark.slow
def test_fairness_lines_and_their_intervals_against_scipy(built):
    _, values, _, test, _, perf, groups = built
    ws = values["Fairness"]
    score = test.sum(axis=1)
    for name in ("A", "B"):
        ok = ~np.isnan(perf) & (groups == name)
        line = stats.linregress(score[ok], perf[ok])
        r = next(k for k in range(1, ws.max_row + 1) if ws.cell(k, 1).value == name
                 and isinstance(ws.cell(k, 4).value, float))
        half = stats.t.ppf(0.975, ok.sum() - 2) * line.stderr
        got = [ws.cell(r, c).value for c in (2, 3, 4, 5, 6)]
        assert got == pytest.approx([ok.sum(), line.intercept, line.slope, line.slope - half, line.slope + half],
                                    rel=1e-9)


@pytest.mark.slow
def test_the_fairness_sheet_never_says_no_bias_and_carries_the_power_caution(built):
    _, values = built[0], built[1]
    for title in ("Fairness", "Fairness (Work)", "DIF"):
        text = " ".join(str(c.value) for row in values[title].iter_rows() for c in row if c.value is not None)
        assert "no bias" not in text.lower() and "not biased" not in text.lower()
    fairness = " ".join(str(c.value) for row in values["Fairness"].iter_rows() for c in row if c.value)
    assert "Aguinis, Culpepper & Pierce" in fairness and "not legal findings" in fairness


@pytest.mark.slow
def test_dif_against_statsmodels(built):
    _, _, _, test, _, _, groups = built
    total = test.sum(axis=1)
    focal = groups == "B"
    for j in (1, 3):
        x = test[:, j - 1]
        st = stratified_by_total(test, focal, j - 1)  # statsmodels StratifiedTable: the MH odds ratio
        assert value(built, f"dif_B_{j}_delta") == pytest.approx(-2.35 * np.log(st.oddsratio_pooled), rel=1e-9)
        assert value(built, f"dif_B_{j}_mh_p") == pytest.approx(st.test_null_odds(correction=True).pvalue, rel=1e-9)
        # Swaminathan & Rogers (1990): the 2-df likelihood-ratio test of group and score x group
        g = focal.astype(float)
        small = sm.Logit(x, sm.add_constant(total)).fit(disp=0)
        big = sm.Logit(x, sm.add_constant(np.column_stack([total, g, total * g]))).fit(disp=0)
        assert value(built, f"dif_B_{j}_lr_p") == pytest.approx(stats.chi2.sf(2 * (big.llf - small.llf), 2),
                                                                rel=1e-6)
    assert value(built, "dif_B_3_mh_class") in ("B", "C")  # the item made to behave differently


@pytest.mark.slow
def test_items_sheet_flags_the_dif_category(built):
    result, values = built[0], built[1]
    ws = values["Items"]
    assert ws.cell(6, 7).value.startswith("DIF")
    flags = [ws.cell(7 + j, 7).value for j in range(len(TEST))]
    assert set(flags) <= {"A", "B", "C: review"} and flags[2] in ("B", "C: review")


@pytest.mark.slow
def test_summary_lists_the_combined_figures(built):
    assert value(built, "summary_multiple_r") == pytest.approx(value(built, "multiple_r"), rel=1e-15)
    assert value(built, "summary_cross_validity") == pytest.approx(value(built, "cross_validity"), rel=1e-15)


@pytest.mark.slow
def test_a_study_of_one_predictor_without_groups_has_the_sheets_it_always_had(tmp_path):
    header, rows, _, _ = table(40)
    setup = [("id column", "id"), ("item columns", "T1:T8"), ("criterion column", "perf"), ("cut score", 4)]
    result = make_study(write_book(tmp_path / "d.xlsx", header, rows, setup), tmp_path / "s.xlsx")
    names = load_workbook(result.path, read_only=True).sheetnames
    # no sheet of several predictors, fairness or item bias; the sheets it always had, in order (a cut score
    # also brings the Cut score sheet)
    assert not {"Combined", "Fairness", "DIF", "Combined scores"} & set(names)
    always = ["Summary", "Reliability", "Items", "Raters", "Validity", "Bands", "Impact", "Utility", "Notes", "Setup",
              "Candidates"]
    assert [n for n in names if n in always] == always
    assert set(names) - set(always) <= {"Cut score"}


@pytest.mark.slow
def test_small_groups_are_stated_not_compared(tmp_path):
    header, rows, _, _ = table(40)
    result = make_study(write_book(tmp_path / "d.xlsx", header, rows, SETUP), tmp_path / "s.xlsx")
    values = load_workbook(result.path, data_only=True)
    assert str(value((result, values), "fairness")).startswith("not computable: differential prediction needs")
    assert str(value((result, values), "dif")).startswith("not computable: DIF needs at least two groups with 100")


@pytest.mark.slow
def test_three_predictors_without_criterion_or_groups_say_what_is_not_computable(tmp_path):
    # a total column as a predictor of its own; without a criterion and groups the Combined sheet keeps the
    # intercorrelations and the composite's reliability, and says why the rest is not computable
    header, rows, test, scored = table(60)
    setup = [("id column", "id"), ("item columns", "T1:T8"), ("cut score", 4), ("predictor", "Q"),
             ("item columns", "W1:W6"), ("predictor", "R"), ("total column", "retest")]
    result = make_study(write_book(tmp_path / "d.xlsx", header, rows, setup), tmp_path / "s.xlsx")
    assert result.recalc_report.ok, [tuple(e) for e in result.recalc_report.errors][:5]
    values = load_workbook(result.path, data_only=True)
    assert {"Reliability (Q)", "Bands (R)", "Combined", "Combined scores"} <= set(values.sheetnames)
    assert "Fairness" not in values.sheetnames and "multiple_r" not in result.cells
    x = test.sum(axis=1).astype(float)
    q = quest_scores(rows)
    assert value((result, values), "combined_r_1_2") == pytest.approx(np.corrcoef(x, q)[0, 1], rel=1e-9)
    reasons = {reason for sheet, _, reason in result.not_computable if sheet == "Combined"}
    assert "it needs every predictor's observed validity, which is not computable" in reasons
    assert "needs a group column with at least two groups" in reasons


def quest_scores(rows):
    return np.array([sum(r[2 + len(TEST):2 + len(TEST) + len(QUEST)]) for r in rows], dtype=float)
