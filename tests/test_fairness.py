"""Differential prediction (Cleary 1968; step-down per Lautenschlager & Mendoza 1986), checked against statsmodels.

Sources:
* statsmodels OLS with the formula interface: ``y ~ x``, ``y ~ x + g``, ``y ~ x * g``; the nested-model F
  tests from ``compare_f_test`` (and the coefficient t tests they equal), each group's line from its own
  OLS fit (``params``, ``bse``, ``conf_int``, ``get_prediction(...).conf_int()``);
* data: the Spector & Mazzeo (1980) teaching-method data shipped with statsmodels
  (``statsmodels.datasets.spector``: TUCE score predicted from GPA, PSI = 1 for the new method), and
  simulated scores (fixed seed) as inputs only.
"""

import numpy as np
import pandas as pd
import pytest

from helpers import raises_code
from trueband.funcs import call
from trueband.funcs.fairness import differential_prediction

smf = pytest.importorskip("statsmodels.formula.api")


def simulated(seed=1, n=300):
    rng = np.random.default_rng(seed)
    g = rng.random(n) < 0.35
    x = rng.normal(50, 10, n) - 4 * g
    y = 1.0 + 0.05 * x - 0.3 * g + 0.02 * g * (x - 50) + rng.normal(0, 0.6, n)
    return x, y, np.where(g, "Group B", "Group A")


def spector():
    data = pytest.importorskip("statsmodels.datasets.spector").load_pandas().data
    return data["GPA"].to_numpy(), data["TUCE"].to_numpy(), data["PSI"].to_numpy()


def check_against_statsmodels(x, y, labels, focal, reference):
    frame = pd.DataFrame({"x": x, "y": y, "g": (labels == focal).astype(float)})
    line = smf.ols("y ~ x", frame).fit()
    common_slope = smf.ols("y ~ x + g", frame).fit()
    full = smf.ols("y ~ x * g", frame).fit()
    result = differential_prediction(x.tolist(), y.tolist(), labels.tolist(), focal, reference)

    f, p, df = full.compare_f_test(common_slope)
    assert (result.slopes.f, result.slopes.p) == pytest.approx((f, p), rel=1e-9)
    assert result.slopes.p == pytest.approx(full.pvalues["x:g"], rel=1e-9)  # F(1, ·) = t²
    assert (result.slopes.df_effect, result.slopes.df_error) == (1, full.df_resid)
    f, p, df = common_slope.compare_f_test(line)
    assert (result.intercepts.f, result.intercepts.p) == pytest.approx((f, p), rel=1e-9)
    assert result.intercepts.p == pytest.approx(common_slope.pvalues["g"], rel=1e-9)
    f, p, df = full.compare_f_test(line)
    assert (result.omnibus.f, result.omnibus.p, result.omnibus.df_effect) == pytest.approx((f, p, 2), rel=1e-9)

    for mine, rows in ((result.focal, frame.g == 1), (result.reference, frame.g == 0), (result.common, frame.g >= 0)):
        own = smf.ols("y ~ x", frame[rows]).fit()
        assert (mine.intercept, mine.slope) == pytest.approx(tuple(own.params), rel=1e-10)
        assert (mine.intercept_se, mine.slope_se) == pytest.approx(tuple(own.bse), rel=1e-9)
        ci = own.conf_int(alpha=0.10)
        assert mine.intercept_interval(0.90) == pytest.approx(tuple(ci.iloc[0]), rel=1e-9)
        assert mine.slope_interval(0.90) == pytest.approx(tuple(ci.iloc[1]), rel=1e-9)
        at = float(np.median(x))
        band = own.get_prediction(pd.DataFrame({"x": [at]})).conf_int(alpha=0.05)[0]
        assert mine.mean_interval(at) == pytest.approx(tuple(band), rel=1e-9)
    cut = float(np.percentile(x, 40))
    gap = line.predict(pd.DataFrame({"x": [cut]}))[0] - smf.ols("y ~ x", frame[frame.g == 1]).fit().predict(
        pd.DataFrame({"x": [cut]}))[0]
    assert result.gap(cut) == pytest.approx(gap, rel=1e-9, abs=1e-12)
    return result


def test_simulated_groups_against_statsmodels():
    x, y, labels = simulated()
    check_against_statsmodels(x, y, labels, "Group B", "Group A")


def test_spector_mazzeo_data_against_statsmodels():
    # Spector & Mazzeo (1980), shipped with statsmodels: does GPA predict TUCE alike with and without PSI?
    gpa, tuce, psi = spector()
    check_against_statsmodels(gpa, tuce, psi, 1.0, 0.0)


def test_spreadsheet_functions_equal_the_python_result():
    x, y, labels = simulated(seed=4, n=120)
    result = differential_prediction(x, y, labels, "group b", "GROUP A")
    args = (x.tolist(), y.tolist(), labels.tolist(), "Group B", "Group A")
    assert call("PREDICTION_SLOPE_P", *args) == result.slopes.p
    assert call("PREDICTION_INTERCEPT_P", *args) == result.intercepts.p
    assert call("PREDICTION_GAP", *args, 45) == result.gap(45)
    # the sign convention of the issue: positive when the common line over-predicts the focal group
    assert result.gap(45) == result.common.predict(45) - result.focal.predict(45)


def test_people_outside_the_two_groups_and_blanks_are_left_out():
    x, y, labels = simulated(seed=2, n=80)
    cells_x, cells_y, cells_g = x.astype(object), y.astype(object), labels.astype(object)
    cells_x[3], cells_y[5], cells_g[7], cells_g[9] = None, "", None, "Group C"
    keep = np.ones(80, bool)
    keep[[3, 5, 7, 9]] = False
    assert differential_prediction(cells_x.tolist(), cells_y.tolist(), cells_g.tolist(), "Group B", "Group A") == \
        differential_prediction(x[keep], y[keep], labels[keep], "Group B", "Group A")


def test_refusals():
    x, y, labels = simulated(seed=3, n=40)
    args = [x.tolist(), y.tolist(), labels.tolist(), "Group B", "Group A"]
    with raises_code("#VALUE!", "criterion"):
        call("PREDICTION_SLOPE_P", args[0], args[1][:-1], *args[2:])
    with raises_code("#VALUE!", "scores"):
        call("PREDICTION_SLOPE_P", ["a"] + args[0][1:], *args[1:])
    with raises_code("#N/A", "focal"):
        call("PREDICTION_SLOPE_P", *args[:3], "Group Z", "Group A")
    with raises_code("#NUM!", "reference"):
        call("PREDICTION_SLOPE_P", *args[:3], "Group B", "group b")
    flat = list(args[0])
    for i, label in enumerate(args[2]):
        if label == "Group B":
            flat[i] = 50.0
    with raises_code("#DIV/0!", "scores"):
        call("PREDICTION_SLOPE_P", flat, *args[1:])
    few = [label if label == "Group A" or i < 2 else "Group C" for i, label in enumerate(args[2])]
    few = ["Group B" if i < 2 else label for i, label in enumerate(few)]
    with raises_code("#N/A", "groups"):
        call("PREDICTION_GAP", args[0], args[1], few, "Group B", "Group A", 50)
    with raises_code("#VALUE!", "score"):
        call("PREDICTION_GAP", *args, "high")
