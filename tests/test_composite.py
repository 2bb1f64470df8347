"""Combined predictors: composite reliability and validity, multiple regression, shrinkage, composite d.

Sources:
* statsmodels OLS: ``rsquared``, ``rsquared_adj``, ``compare_f_test`` (the F test of an increment), on the
  Longley (1967) data shipped with statsmodels, whose R² NIST certifies in its Statistical Reference
  Datasets (0.995479004577296, from memory), and on simulated data (fixed seeds, inputs only);
* classical test theory (Lord & Novick 1968, ch. 3): for components with known true-score covariance and
  independent errors, the composite's reliability is var(true composite) / var(observed composite), the
  value Mosier's (1943) formula must give; with parallel components it is the Spearman–Brown value
  (Spearman 1910; Brown 1910);
* the definition of a composite's validity: the correlation (numpy.corrcoef) of the weighted sum with the
  criterion in the same data; with least-squares weights, statsmodels' multiple R;
* Browne (1975): the expected squared validity of sample regression weights in the population, estimated
  here by Monte Carlo from a known population;
* Sackett & Ellingson (1997): two predictors with d = 1.0 and 0.0 correlated .30 give a composite d of .62
  (their worked example, from memory); pingouin.compute_effsize on simulated groups for the general formula.
"""

import math

import numpy as np
import pytest

from helpers import raises_code
from trueband.funcs import call
from trueband.funcs.composite import incremental_validity, regression_weights

sm = pytest.importorskip("statsmodels.api")


def correlation_of(cov):
    sd = np.sqrt(np.diag(cov))
    return cov / np.outer(sd, sd), sd


# ---------------------------------------------------------------- composite reliability (Mosier 1943)

@pytest.mark.parametrize("k, rho", [(2, 0.6), (3, 0.5), (5, 0.8)])
def test_parallel_components_give_spearman_brown(k, rho):
    # Spearman (1910), Brown (1910): k parallel parts of reliability rho -> k·rho / (1 + (k - 1)·rho)
    corr = np.full((k, k), rho)
    np.fill_diagonal(corr, 1.0)
    got = call("COMPOSITE_RELIABILITY", [[7.0] * k], [[rho] * k], corr.tolist())
    assert got == pytest.approx(k * rho / (1 + (k - 1) * rho), rel=1e-13)


@pytest.mark.parametrize("weights", [None, [1.0, 2.0, 0.5], [2.0, -1.0, 1.0]])
def test_mosier_equals_true_over_observed_variance(weights):
    # Lord & Novick (1968): observed = true + independent error, so rel(composite) = w'Σ_T w / w'Σ_X w.
    true_cov = np.array([[64.0, 20.0, 12.0], [20.0, 25.0, 6.0], [12.0, 6.0, 16.0]])
    error_var = np.array([16.0, 9.0, 4.0])
    observed = true_cov + np.diag(error_var)
    corr, sd = correlation_of(observed)
    rel = np.diag(true_cov) / np.diag(observed)
    w = np.ones(3) if weights is None else np.array(weights)
    expected = w @ true_cov @ w / (w @ observed @ w)
    args = [sd.tolist(), rel.tolist(), corr.tolist()] + ([] if weights is None else [weights])
    assert call("COMPOSITE_RELIABILITY", *args) == pytest.approx(expected, rel=1e-13)


def test_composite_reliability_worked_by_hand():
    # Mosier (1943) formula, worked by hand: SDs 10 and 5, reliabilities .85 and .75, r .40
    # error 100·.15 + 25·.25 = 21.25; composite variance 100 + 25 + 2·10·5·.4 = 165
    assert call("COMPOSITE_RELIABILITY", [10, 5], [0.85, 0.75], [[1, 0.4], [0.4, 1]]) == pytest.approx(
        1 - 21.25 / 165, rel=1e-14)


# ---------------------------------------------------------------- composite validity

def sample(seed=0, n=250, k=3):
    rng = np.random.default_rng(seed)
    x = rng.normal(size=(n, k)) @ np.array([[1.0, 0.3, 0.2], [0.0, 1.0, 0.4], [0.0, 0.0, 1.0]])[:k, :k] * [5, 2, 9][:k]
    y = x @ np.array([0.2, 0.5, 0.05])[:k] + rng.normal(0, 3, n)
    return x, y


def summary(x, y):
    corr = np.corrcoef(x, rowvar=False)
    validity = np.array([np.corrcoef(x[:, i], y)[0, 1] for i in range(x.shape[1])])
    return x.std(axis=0, ddof=1), validity, corr


@pytest.mark.parametrize("weights", [None, [1.0, 3.0, -0.5]])
def test_composite_validity_is_the_correlation_of_the_weighted_sum(weights):
    x, y = sample()
    sd, validity, corr = summary(x, y)
    w = np.ones(3) if weights is None else np.array(weights)
    expected = np.corrcoef(x @ w, y)[0, 1]  # numpy.corrcoef of the composite itself
    args = [sd.tolist(), validity.tolist(), corr.tolist()] + ([] if weights is None else [weights])
    assert call("COMPOSITE_VALIDITY", *args) == pytest.approx(expected, rel=1e-12)


def test_regression_weighted_validity_is_statsmodels_multiple_r():
    x, y = sample(seed=5)
    sd, validity, corr = summary(x, y)
    fit = sm.OLS(y, sm.add_constant(x)).fit()
    assert call("COMPOSITE_VALIDITY", sd.tolist(), validity.tolist(), corr.tolist(), " Regression ") == \
        pytest.approx(math.sqrt(fit.rsquared), rel=1e-12)
    # standardised OLS slopes are the beta weights R⁻¹v (statsmodels on z-scores)
    z = (x - x.mean(axis=0)) / x.std(axis=0, ddof=1)
    zy = (y - y.mean()) / y.std(ddof=1)
    assert regression_weights(validity, corr) == pytest.approx(sm.OLS(zy, z).fit().params, rel=1e-10)


def test_impossible_correlations_are_refused():
    with raises_code("#NUM!", "correlations", match="eigenvalue"):
        call("COMPOSITE_VALIDITY", [1, 1, 1], [0.3, 0.3, 0.3], [[1, 0.9, -0.9], [0.9, 1, 0.9], [-0.9, 0.9, 1]])
    with raises_code("#NUM!", "validities", match="beyond"):
        call("COMPOSITE_VALIDITY", [1, 1], [0.9, -0.9], [[1, 0.9], [0.9, 1]], "regression")
    with raises_code("#NUM!", "correlations", match="symmetric"):
        call("COMPOSITE_RELIABILITY", [1, 1], [0.8, 0.8], [[1, 0.2], [0.3, 1]])
    with raises_code("#NUM!", "correlations", match="diagonal"):
        call("COMPOSITE_RELIABILITY", [1, 1], [0.8, 0.8], [[0.9, 0.2], [0.2, 1]])
    with raises_code("#VALUE!", "correlations", match="square"):
        call("COMPOSITE_RELIABILITY", [1, 1], [0.8, 0.8], [[1, 0.2, 0.1], [0.2, 1, 0.1]])
    with raises_code("#VALUE!", "sds"):
        call("COMPOSITE_RELIABILITY", [1, 1, 1], [0.8, 0.8], [[1, 0.2], [0.2, 1]])
    with raises_code("#NUM!", "reliabilities"):
        call("COMPOSITE_RELIABILITY", [1, 1], [0.8, 1.2], [[1, 0.2], [0.2, 1]])
    with raises_code("#NUM!", "sds"):
        call("COMPOSITE_RELIABILITY", [1, 0], [0.8, 0.8], [[1, 0.2], [0.2, 1]])
    with raises_code("#DIV/0!", "weights"):
        call("COMPOSITE_RELIABILITY", [1, 1], [0.8, 0.8], [[1, 0.2], [0.2, 1]], [0, 0])
    with raises_code("#DIV/0!", "weights"):  # a composite that is 0 for everyone: X1 − X2 with r = 1
        call("COMPOSITE_RELIABILITY", [1, 1], [0.8, 0.8], [[1, 1], [1, 1]], [1, -1])
    with raises_code("#VALUE!", "weights"):
        call("COMPOSITE_RELIABILITY", [1, 1], [0.8, 0.8], [[1, 0.2], [0.2, 1]], "regression")


# ---------------------------------------------------------------- regression from raw data

def longley():
    data = pytest.importorskip("statsmodels.datasets.longley").load_pandas()
    return data.endog.to_numpy(), data.exog.to_numpy()


def test_multiple_r_on_longley():
    y, x = longley()
    fit = sm.OLS(y, sm.add_constant(x)).fit()
    got = call("MULTIPLE_R", y.tolist(), x.tolist())
    assert got ** 2 == pytest.approx(fit.rsquared, rel=1e-10)               # statsmodels
    assert got ** 2 == pytest.approx(0.995479004577296, abs=1e-9)           # NIST StRD certified R² (from memory)


def test_multiple_r_drops_incomplete_rows():
    x, y = sample(seed=9, n=60)
    cells, crit = x.astype(object), y.astype(object)
    cells[4, 1], crit[10] = None, ""
    keep = np.ones(60, bool)
    keep[[4, 10]] = False
    fit = sm.OLS(y[keep], sm.add_constant(x[keep])).fit()
    assert call("MULTIPLE_R", crit.tolist(), cells.tolist()) == pytest.approx(math.sqrt(fit.rsquared), rel=1e-12)


def test_incremental_r2_against_statsmodels_compare_f_test():
    x, y = sample(seed=2, n=80)
    full = sm.OLS(y, sm.add_constant(x)).fit()
    base = sm.OLS(y, sm.add_constant(x[:, :1])).fit()
    f, p, df = full.compare_f_test(base)
    result = incremental_validity(y, x[:, :1], x[:, 1:])
    assert result.delta_r2 == pytest.approx(full.rsquared - base.rsquared, rel=1e-10)
    assert (result.f, result.p, result.df_added, result.df_error) == pytest.approx((f, p, df, full.df_resid),
                                                                                   rel=1e-9)
    args = (y.tolist(), x[:, :1].tolist(), x[:, 1:].tolist())
    assert call("INCREMENTAL_R2", *args) == result.delta_r2
    assert call("INCREMENTAL_R2", *args, "F") == result.f
    assert call("INCREMENTAL_R2", *args, "p") == result.p


def test_regression_refusals():
    y, x = longley()
    with raises_code("#N/A", "predictors"):
        call("MULTIPLE_R", y[:7].tolist(), x[:7].tolist())
    collinear = np.column_stack([x[:, :2], x[:, 0] + x[:, 1]])
    with raises_code("#DIV/0!", "predictors", match="collinear"):
        call("MULTIPLE_R", y.tolist(), collinear.tolist())
    with raises_code("#VALUE!", "predictors"):
        call("MULTIPLE_R", y.tolist(), x[:-1].tolist())
    with raises_code("#DIV/0!", "criterion"):
        call("MULTIPLE_R", [5.0] * len(y), x.tolist())
    with raises_code("#VALUE!", "part"):
        call("INCREMENTAL_R2", y.tolist(), x[:, :1].tolist(), x[:, 1:].tolist(), 3)


# ---------------------------------------------------------------- shrinkage

def test_adjusted_r2_is_statsmodels_rsquared_adj():
    y, x = longley()
    fit = sm.OLS(y, sm.add_constant(x)).fit()
    assert call("ADJUSTED_R2", fit.rsquared, len(y), x.shape[1]) == pytest.approx(fit.rsquared_adj, rel=1e-12)


def test_cross_validity_formula_worked_by_hand():
    # Browne (1975) with rho² = adjusted R²: R² .30, n 100, k 3 -> rho² = 1 - .7·99/96 = .278125;
    # n - k - 3 = 94, n - 2k - 2 = 92
    rho2 = 1 - 0.7 * 99 / 96
    expected = (94 * rho2 ** 2 + rho2) / (92 * rho2 + 3)
    assert call("CROSS_VALIDITY", 0.30, 100, 3) == pytest.approx(expected, rel=1e-14)
    assert call("CROSS_VALIDITY", 1.0, 50, 4) == pytest.approx(1.0, rel=1e-14)
    assert call("CROSS_VALIDITY", 0.02, 30, 5) == 0.0  # adjusted R² below 0 is taken as 0


def test_cross_validity_estimates_the_population_validity_of_sample_weights():
    # Browne (1975): E[ρc²] over samples, from a known population, by Monte Carlo.
    rng = np.random.default_rng(12)
    k, n, reps = 3, 60, 3000
    sxx = np.full((k, k), 0.3) + 0.7 * np.eye(k)
    sxy = np.array([0.35, 0.25, 0.15])
    chol = np.linalg.cholesky(np.block([[sxx, sxy[:, None]], [sxy[None, :], np.ones((1, 1))]]))
    true, estimated = [], []
    for _ in range(reps):
        data = rng.normal(size=(n, k + 1)) @ chol.T
        x, y = data[:, :k], data[:, k]
        design = np.column_stack([np.ones(n), x])
        b = np.linalg.lstsq(design, y, rcond=None)[0][1:]
        r2 = 1 - np.sum((y - design @ np.linalg.lstsq(design, y, rcond=None)[0]) ** 2) / np.sum((y - y.mean()) ** 2)
        true.append((b @ sxy) ** 2 / (b @ sxx @ b))
        estimated.append(call("CROSS_VALIDITY", r2, n, k))
    assert np.mean(estimated) == pytest.approx(np.mean(true), abs=0.015)
    assert np.mean(estimated) < sxy @ np.linalg.solve(sxx, sxy)  # below the population ρ²: shrinkage


@pytest.mark.parametrize("name, args, code, argument", [
    ("ADJUSTED_R2", (0.3, 4, 3), "#N/A", "n"),
    ("ADJUSTED_R2", (1.3, 40, 3), "#NUM!", "r2"),
    ("ADJUSTED_R2", (0.3, 40.5, 3), "#NUM!", "n"),
    ("ADJUSTED_R2", (0.3, 40, 0), "#NUM!", "k"),
    ("CROSS_VALIDITY", (0.3, 6, 3), "#N/A", "n"),
])
def test_shrinkage_refusals(name, args, code, argument):
    with raises_code(code, argument):
        call(name, *args)


# ---------------------------------------------------------------- composite d (Sackett & Ellingson 1997)

def test_composite_d_worked_example():
    # Sackett & Ellingson (1997): d 1.0 and 0.0, r .30 -> .62 (from memory); r 0 -> .71
    assert call("COMPOSITE_D", [1.0, 0.0], 0.3) == pytest.approx(0.62, abs=0.005)
    assert call("COMPOSITE_D", [1.0, 0.0], 0.0) == pytest.approx(1 / math.sqrt(2), rel=1e-14)


def test_composite_d_on_simulated_groups():
    pingouin = pytest.importorskip("pingouin")
    rng = np.random.default_rng(21)
    k, r, ds, n = 3, 0.4, np.array([1.0, 0.5, 0.2]), 200_000
    cov = np.full((k, k), r) + (1 - r) * np.eye(k)
    chol = np.linalg.cholesky(cov)
    high = rng.normal(size=(n, k)) @ chol.T + ds
    low = rng.normal(size=(n, k)) @ chol.T
    observed = pingouin.compute_effsize(high.sum(axis=1), low.sum(axis=1), eftype="cohen")
    assert call("COMPOSITE_D", ds.tolist(), r) == pytest.approx(observed, abs=0.01)


def test_composite_d_refusals():
    with raises_code("#N/A", "ds"):
        call("COMPOSITE_D", [0.8], 0.3)
    with raises_code("#NUM!", "mean_r"):
        call("COMPOSITE_D", [0.8, 0.2, 0.1], -0.5)  # below -1/(k - 1): impossible for 3 predictors
    with raises_code("#VALUE!", "ds"):
        call("COMPOSITE_D", [0.8, None], 0.3)


@pytest.mark.parametrize("word", ["regression", "unit"])
def test_weights_word_in_one_cell_of_a_range_reads_as_typed(word):
    # a workbook formula hands COMPOSITE_VALIDITY(...,"regression") to the range argument as a one-cell range;
    # it must read as the word, not as text among numbers (found building the study's Combined sheet)
    args = ([10, 5], [0.5, 0.3], [[1, 0.4], [0.4, 1]])
    assert call("COMPOSITE_VALIDITY", *args, [[word]]) == pytest.approx(call("COMPOSITE_VALIDITY", *args, word),
                                                                        rel=1e-15)
    assert call("COMPOSITE_RELIABILITY", [10, 5], [0.85, 0.75], args[2], [["unit"]]) == pytest.approx(
        call("COMPOSITE_RELIABILITY", [10, 5], [0.85, 0.75], args[2]), rel=1e-15)
