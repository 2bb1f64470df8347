"""A predictor given only as a panel of ratings (an interview rated by three raters, no total column).

The data are the random tables of :mod:`test_study_predictors` with three invented rating columns; no
check value comes from them by hand. Sources of the check values:

* the score, each person's mean of the ratings given: ``numpy.nanmean``;
* its reliability, the ICC for the mean of k raters with absolute agreement, ICC(A,k) (McGraw & Wong 1996):
  ``pingouin.intraclass_corr`` (its two-way, absolute-agreement, average-raters row), people rated by every rater;
* its validity and its correlation with the test on Combined: ``scipy.stats.pearsonr``;
* its differential prediction: ``statsmodels`` OLS with the score × group interaction (Cleary 1968).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from openpyxl import load_workbook
from scipy import stats

from test_study_predictors import SETUP, table, write_book
from trueband.bridge.study.build import make_study
from trueband.bridge.study.data_workbook import read_study_data
from trueband.bridge.study.setup import SetupError

pingouin = pytest.importorskip("pingouin")
sm = pytest.importorskip("statsmodels.api")

RATERS = ("I1", "I2", "I3")
PANEL = SETUP + [("predictor", "Panel Interview"), ("rating columns", "I1:I3"), ("cut score", 3)]


def with_panel(n=260, seed=3):
    header, rows, test, _ = table(n)
    rng = np.random.default_rng(seed)
    latent = rng.standard_normal(n) + 0.5 * np.array([0.0 if r[-2] is None else r[-2] - 3 for r in rows])
    ratings = np.clip(np.rint(3 + 0.9 * latent[:, None] + rng.normal(0, 0.6, (n, 3)) + [0, 0.3, -0.2]), 1, 5)
    ratings[5, 1] = ratings[17, 0] = np.nan  # two people rated by two raters only
    rows = [r + [None if np.isnan(x) else float(x) for x in ratings[i]] for i, r in enumerate(rows)]
    return header + list(RATERS), rows, test, ratings


def test_rating_columns_alone_make_a_predictor_scored_by_the_raters_mean(tmp_path):
    header, rows, _, ratings = with_panel(40)
    data = read_study_data(write_book(tmp_path / "d.xlsx", header, rows, PANEL))
    panel = data.predictors[1]
    assert panel.items is None and panel.total is None
    np.testing.assert_allclose(panel.scores, np.nanmean(ratings, axis=1), rtol=1e-15)  # numpy.nanmean


def test_a_panel_with_one_rater_is_refused_naming_the_predictor(tmp_path):
    header, rows, _, _ = with_panel(40)
    setup = SETUP + [("predictor", "Panel Interview"), ("rating columns", "I1")]
    with pytest.raises(SetupError, match="predictor 'Panel Interview': rating columns: at least 2 raters"):
        read_study_data(write_book(tmp_path / "d.xlsx", header, rows, setup))


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    folder = tmp_path_factory.mktemp("panel")
    header, rows, test, ratings = with_panel()
    result = make_study(write_book(folder / "d.xlsx", header, rows, PANEL), folder / "study.xlsx")
    values = load_workbook(result.path, data_only=True)
    perf = np.array([np.nan if r[-5] is None else r[-5] for r in rows])
    groups = np.array([r[1] for r in rows])
    return result, values, test.astype(float), ratings, perf, groups


def value(built, key):
    result, values = built[0], built[1]
    sheet, coord = result.cells[key]
    return values[sheet][coord].value


@pytest.mark.slow
def test_the_panel_predictor_has_its_sheets_and_its_score_is_the_raters_mean(built):
    result, values, _, ratings, _, _ = built
    assert result.recalc_report.ok, [tuple(e) for e in result.recalc_report.errors][:5]
    for title in ("Reliability (Panel Interview)", "Raters (Panel Interview)", "Validity (Panel Interview)",
                  "Bands (Panel Interview)", "Fairness (Panel Interview)"):
        assert title in values.sheetnames
    ws = values["Bands (Panel Interview)"]
    assert ws.cell(1, 3).value == "Score (the raters' mean)" and ws.cell(1, 4).value == "Ratings given"
    got = np.array([ws.cell(i + 2, 3).value for i in range(len(ratings))], dtype=float)
    np.testing.assert_allclose(got, np.nanmean(ratings, axis=1), rtol=1e-12)  # numpy.nanmean
    assert ws.cell(7, 4).value == 2  # the person rated by two raters


@pytest.mark.slow
def test_the_panel_s_reliability_is_the_icc_of_the_raters_mean_against_pingouin(built):
    _, _, _, ratings, _, _ = built
    complete = ratings[~np.isnan(ratings).any(axis=1)]
    long = pd.DataFrame([(i, j, x) for i, row in enumerate(complete) for j, x in enumerate(row)],
                        columns=["target", "rater", "rating"])
    saved = pingouin.options.get("round")
    pingouin.options["round"] = None
    try:
        table_ = pingouin.intraclass_corr(long, "target", "rater", "rating").set_index("Type")
    finally:
        pingouin.options["round"] = saved
    row = table_.loc["ICC(A,k)"]  # two-way, absolute agreement, the mean of k raters
    assert value(built, "p3_panel_icc") == pytest.approx(row["ICC"], rel=1e-9)
    assert value(built, "p3_reliability") == pytest.approx(row["ICC"], rel=1e-9)
    # the same form as the Raters sheet's headline
    assert value(built, "p3_icc_agreement_average") == pytest.approx(row["ICC"], rel=1e-12)
    sd = np.nanstd(np.nanmean(ratings, axis=1), ddof=1)
    assert value(built, "p3_sem") == pytest.approx(sd * np.sqrt(1 - row["ICC"]), rel=1e-9)  # SEM = SD √(1 − r)


@pytest.mark.slow
def test_the_panel_s_validity_fairness_and_place_on_combined(built):
    _, _, test, ratings, perf, groups = built
    score = np.nanmean(ratings, axis=1)
    ok = ~np.isnan(perf)
    assert value(built, "p3_r") == pytest.approx(stats.pearsonr(score[ok], perf[ok])[0], rel=1e-9)  # scipy
    assert value(built, "combined_r_1_3") == pytest.approx(stats.pearsonr(test.sum(axis=1), score)[0], rel=1e-9)
    g = (groups == "B").astype(float)[ok]
    y, s = perf[ok], score[ok]
    m2 = sm.OLS(y, sm.add_constant(np.column_stack([s, g]))).fit()  # statsmodels OLS, the step-down tests
    m3 = sm.OLS(y, sm.add_constant(np.column_stack([s, g, s * g]))).fit()
    assert value(built, "p3_fairness_slope_p_B") == pytest.approx(m3.compare_f_test(m2)[1], rel=1e-9)


@pytest.mark.slow
def test_a_study_whose_only_predictor_is_a_panel(tmp_path, capsys):
    from trueband.bridge import cli

    header, rows, _, ratings = with_panel(80)
    setup = [("id column", "id"), ("group column", "group"), ("rating columns", "I1:I3"),
             ("criterion column", "perf"), ("cut score", 3), ("test name", "Interview")]
    book = write_book(tmp_path / "d.xlsx", header, rows, setup)
    assert cli.main(["study", str(book), "-o", str(tmp_path / "s.xlsx")]) == 0
    out = capsys.readouterr().out
    assert "reliability of the panel's mean rating, ICC(A,k): " in out and "coefficient alpha" not in out
    values = load_workbook(tmp_path / "s.xlsx", data_only=True)
    from trueband.bridge.study.sheets.reliability import MEASUREMENT_ROW

    used = values["Reliability"].cell(MEASUREMENT_ROW + 1, 2).value  # the reliability used for the SEM and bands
    assert used == pytest.approx(values["Raters"]["B14"].value, rel=1e-15)
    got = [values["Bands"].cell(i + 2, 3).value for i in range(len(ratings))]
    np.testing.assert_allclose(np.array(got, float), np.nanmean(ratings, axis=1), rtol=1e-12)  # numpy.nanmean
