"""The Python face of trueband.funcs (issue 16): a flat namespace, pandas and numpy inputs, broadcasting,
keyword-only options, result objects; the spreadsheet path unchanged.

Reference values: scipy.stats.pearsonr and its confidence_interval (Fisher z), scipy's relative_risk
(Katz log interval) and fisher_exact, pingouin.cronbach_alpha (Feldt interval, 3 decimals as pingouin
rounds it) and pingouin.intraclass_corr; data: pingouin's bundled "cronbach_alpha" and "penguins" datasets
and Shrout & Fleiss (1979), Table 2.
"""

import dataclasses
import inspect
from pathlib import Path

import numpy as np
import pandas as pd
import pingouin as pg
import pytest
from scipy import stats
from scipy.stats.contingency import relative_risk

import trueband.funcs as tf
from helpers import raises_code
from trueband.funcs import REGISTRY, call, call_column, lookup
from trueband.funcs.errors import ArgumentCountError

ROOT = Path(__file__).resolve().parents[1]

SHROUT_FLEISS = [[9, 2, 5, 8], [6, 1, 3, 2], [8, 4, 6, 8], [7, 1, 2, 6], [10, 5, 6, 9], [6, 2, 4, 7]]

pytestmark = pytest.mark.filterwarnings("ignore:The inplace keyword")  # pingouin's use of a pandas keyword


def items_frame() -> pd.DataFrame:
    """pingouin's "cronbach_alpha" dataset in wide form: 15 people x 10 items."""
    return pg.read_dataset("cronbach_alpha").pivot(index="Subj", columns="Items", values="Scores")


# ---------------------------------------------------------------- the flat namespace

@pytest.mark.parametrize("name", sorted(REGISTRY))
def test_every_registered_function_is_in_the_flat_namespace(name):
    spec = REGISTRY[name]
    assert spec.python_name in tf.__all__
    assert getattr(tf, spec.python_name).spreadsheet is spec


def test_everything_in_all_is_importable():
    for name in tf.__all__:
        assert getattr(tf, name) is not None, name
    namespace = {}
    exec("from trueband.funcs import *", namespace)  # noqa: S102 (our own module)
    assert set(tf.__all__) <= set(namespace)


def test_funcs_never_imports_pandas():
    # pandas is a test extra, not a dependency: funcs/ reads DataFrames and Series by their attributes
    for path in (ROOT / "funcs").glob("*.py"):
        text = path.read_text(encoding="utf-8")
        assert "import pandas" not in text and "from pandas" not in text, path.name


# ---------------------------------------------------------------- ranges: lists, arrays, DataFrames, Series

def test_a_dataframe_a_numpy_array_and_a_list_of_rows_give_the_same_alpha():
    frame = items_frame()
    want = pg.cronbach_alpha(frame)[0]
    assert tf.cronbach_alpha(frame) == pytest.approx(want, rel=1e-12)
    assert tf.cronbach_alpha(frame.to_numpy()) == tf.cronbach_alpha(frame)
    assert call("CRONBACH_ALPHA", frame.to_numpy().tolist()) == tf.cronbach_alpha(frame)


def test_nan_and_pandas_na_in_a_dataframe_are_blanks():
    frame = items_frame().astype(float)
    frame.iloc[2, 3] = np.nan
    frame.iloc[5, 0] = np.nan
    # listwise deletion, as pingouin's nan_policy="listwise"
    want = pg.cronbach_alpha(frame, nan_policy="listwise")[0]
    assert call("CRONBACH_ALPHA", frame) == pytest.approx(want, rel=1e-12)
    nullable = frame.astype("Int64")  # pandas' NA in a nullable integer column
    assert call("CRONBACH_ALPHA", nullable) == pytest.approx(want, rel=1e-12)


def test_series_of_labels_with_missing_values():
    a = pd.Series(["Hire", "hire", None, "Reject", "reject"])
    b = pd.Series(["hire", "Hire", "Reject", np.nan, "REJECT"])
    assert tf.cohen_kappa(a, b) == 1.0  # three complete pairs, all agreeing after case folding


def test_a_wrong_type_says_what_was_given_and_what_is_wanted():
    with raises_code("#VALUE!", "items", match=r"items must be a range of numbers \(a list of rows, a numpy array "
                                                r"or a pandas DataFrame\), got a dict"):
        call("CRONBACH_ALPHA", {"a": [1, 2]})
    with raises_code("#VALUE!", "ratings", match="range of category labels .* got a set"):
        tf.fleiss_kappa({"A", "B"})


# ---------------------------------------------------------------- elementwise functions broadcast

def test_an_array_in_gives_an_array_out_and_a_scalar_a_python_float():
    out = tf.standard_error_of_measurement(np.array([10.0, 12.0]), 0.9)
    assert isinstance(out, np.ndarray) and out.tolist() == [call("SEM", 10.0, 0.9), call("SEM", 12.0, 0.9)]
    one = tf.standard_error_of_measurement(10.0, 0.9)
    assert type(one) is float and one == call("SEM", 10.0, 0.9)


def test_a_series_in_gives_a_series_out_with_its_index():
    sd = pd.Series([10.0, 12.0, 15.0], index=["math", "verbal", "spatial"])
    out = tf.standard_error_of_measurement(sd, 0.9)
    assert isinstance(out, pd.Series) and list(out.index) == ["math", "verbal", "spatial"]
    assert out["verbal"] == call("SEM", 12.0, 0.9)
    # two arrays broadcast against each other, as numpy would
    grid = tf.standard_error_of_measurement(np.array([[10.0], [20.0]]), np.array([0.8, 0.9]))
    assert grid.shape == (2, 2) and grid[1, 0] == call("SEM", 20.0, 0.8)


def test_the_first_failing_element_is_named():
    with raises_code("#NUM!", "reliability", match=r"got 1.3 \(element 1\)"):
        tf.standard_error_of_measurement(10.0, np.array([0.9, 1.3]))


def test_integer_and_logical_results_keep_their_kinds():
    scores = pg.read_dataset("penguins")["body_mass_g"].dropna().to_numpy()
    out = tf.stanine(scores[:5], scores)
    assert out.dtype.kind == "i" and out.tolist() == [call("STANINE", x, scores) for x in scores[:5]]
    differ = tf.scores_differ(np.array([100.0, 100.0]), np.array([101.0, 140.0]), 15, 0.9)
    assert differ.dtype == bool and differ.tolist() == [False, True]


# ---------------------------------------------------------------- options by keyword in Python only

def test_options_are_keyword_only_in_python():
    assert tf.score_confidence_limit(100, 15, 0.91, part="upper") == call("SCORE_CI", 100, 15, 0.91, "upper")
    with pytest.raises(ArgumentCountError, match=r'give the options by keyword, e.g. part="upper"'):
        tf.score_confidence_limit(100, 15, 0.91, "upper")
    with pytest.raises(ArgumentCountError, match="takes 2 positional arguments"):
        tf.standard_error_of_measurement(10, 0.9, 3)


@pytest.mark.parametrize("name", sorted(REGISTRY))
def test_the_spreadsheet_path_keeps_every_argument_positional(name):
    spec = REGISTRY[name]
    # the registry's argument order is the body's, keyword-only options included
    assert [a.name for a in spec.arguments] == list(inspect.signature(spec.body).parameters)
    assert lookup(name) is spec


def test_the_spreadsheet_signatures_are_unchanged():
    # as docs/functions.md showed them before the options became keyword-only in Python
    assert REGISTRY["SCORE_CI"].signature == "SCORE_CI(score, sd, reliability, part, [confidence])"
    assert REGISTRY["ICC"].signature == "ICC(ratings, model, unit, [part], [confidence])"
    assert REGISTRY["R_PVALUE"].signature == "R_PVALUE(r, n, [tails])"
    assert call("ICC", SHROUT_FLEISS, "agreement", "single", "lower", 0.9) == REGISTRY["ICC"](
        SHROUT_FLEISS, "agreement", "single", "lower", 0.9)
    assert REGISTRY["SCORE_CI"].cell_call((100, 15, 0.91, "upper")) == call("SCORE_CI", 100, 15, 0.91, "upper")


# ---------------------------------------------------------------- call_column with Series

def test_call_column_keeps_a_series_index_and_a_list_for_lists():
    sd = pd.Series([10.0, 20.0, "x"], index=[7, 8, 9])
    out = call_column("SEM", {"sd": sd}, {"reliability": 0.75})
    assert isinstance(out, pd.Series) and list(out.index) == [7, 8, 9]
    assert out[7] == 5.0 and isinstance(out[9], tf.ArgumentTypeError)
    assert call_column("SEM", {"sd": [10.0, 20.0]}, {"reliability": 0.75}) == [5.0, 10.0]


# ---------------------------------------------------------------- result objects

def test_alpha_result_against_pingouin_and_feldts_test():
    frame = items_frame()
    res = tf.cronbach_alpha_result(frame)
    alpha, ci = pg.cronbach_alpha(frame)
    assert res.statistic == pytest.approx(alpha, rel=1e-12)
    assert res.confidence_interval() == pytest.approx(tuple(ci), abs=5e-4)  # pingouin rounds to 3 decimals
    n, k = frame.shape
    # Feldt (1965): 1/(1 - alpha) ~ F(n - 1, (n - 1)(k - 1)) when alpha = 0 (scipy's F distribution)
    assert res.pvalue == pytest.approx(stats.f.sf(1 / (1 - alpha), n - 1, (n - 1) * (k - 1)), rel=1e-12)
    assert (res.n_people, res.n_items) == (n, k)
    with pytest.raises(dataclasses.FrozenInstanceError):
        res.statistic = 0.5


def test_correlation_result_against_scipy_pearsonr():
    penguins = pg.read_dataset("penguins").dropna(subset=["flipper_length_mm", "body_mass_g"])
    x, y = penguins["flipper_length_mm"], penguins["body_mass_g"]
    ours = tf.correlation_result(x, y)
    ref = stats.pearsonr(x, y)
    assert ours.statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert ours.pvalue == pytest.approx(ref.pvalue, rel=1e-6, abs=1e-300)
    for level in (0.95, 0.8):
        assert ours.confidence_interval(level) == pytest.approx(tuple(ref.confidence_interval(level)), rel=1e-12)


def test_impact_ratio_result_against_scipy():
    ours = tf.impact_ratio_result(30, 100, 50, 100)
    ref = relative_risk(30, 100, 50, 100)  # Katz log interval
    assert ours.statistic == pytest.approx(ref.relative_risk, rel=1e-12)
    assert ours.confidence_interval(0.9) == pytest.approx(tuple(ref.confidence_interval(0.9)), rel=1e-12)
    assert ours.pvalue == pytest.approx(stats.fisher_exact([[30, 70], [50, 50]]).pvalue, rel=1e-9)
    # no focal selection: the ratio is 0 and the log interval has no finite upper limit (0, inf), the convention
    # of impact_ratio_limits and of scipy's relative_risk (which gives (0, nan))
    assert tuple(tf.impact_ratio_result(0, 100, 50, 100).confidence_interval()) == (0.0, float("inf"))


def test_icc_result_confidence_interval_against_pingouin():
    long = pd.DataFrame([(i, j, x) for i, row in enumerate(SHROUT_FLEISS) for j, x in enumerate(row)],
                        columns=["target", "rater", "rating"])
    saved = pg.options.get("round"), pg.options.get("round.column.CI95")
    pg.options["round"] = pg.options["round.column.CI95"] = None
    try:
        ref = pg.intraclass_corr(long, "target", "rater", "rating").set_index("Type").loc["ICC(A,1)"]
    finally:
        pg.options["round"], pg.options["round.column.CI95"] = saved
    res = tf.intraclass_correlation(SHROUT_FLEISS, model="agreement", unit="single")
    assert (res.statistic, res.pvalue) == pytest.approx((ref["ICC"], ref["pval"]), rel=1e-9)
    assert res.confidence_interval() == pytest.approx(tuple(ref["CI95"]), rel=1e-9)
    at_90 = tf.intraclass_correlation(SHROUT_FLEISS, model="agreement", unit="single", confidence=0.9)
    assert res.confidence_interval(0.9) == (at_90.lower, at_90.upper)
