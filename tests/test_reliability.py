"""Reliability from item data and item analysis, checked against outside values.

Sources:
* datasets bundled with pingouin (``pingouin.read_dataset``): "cronbach_alpha"
  (15 people x 10 rating items, from www.real-statistics.com), "cronbach_wide_missing"
  (12 people x 11 binary items with blanks, same origin) and "pairwise_corr"
  (Big Five scale scores of 500 people, Dolan et al. 2009);
* reference libraries: ``pingouin.cronbach_alpha`` (alpha, Feldt interval),
  pandas (correlations, variances), ``statsmodels.multivariate.factor.Factor``
  with ``method="ml"`` (an independent maximum-likelihood factor fit, BFGS on
  loadings and uniquenesses), ``sklearn.decomposition.FactorAnalysis`` (ML on
  the raw covariances by SVD iterations), ``scipy.stats.f`` (F quantiles);
* published worked values: Wuensch, K. L., "The Kuder-Richardson 20" (KR20.txt,
  East Carolina University StatHelp pages): ten students, ten 0/1 items, with
  p, q, pq, item variances and the total variance printed; the Feldt interval
  worked in R/Julia for the real-statistics data (blog r-de-r, goo.ne.jp,
  2021-10-13: n = 15, k = 10, alpha = 0.591719); Spearman–Brown examples of the
  R package CTT (Willse & Shu, ``spearman.brown`` help page) and of the Stata
  command ``sbrowni`` (Caci 1998, help page). Values worked from those inputs
  by hand are marked "worked by hand".
"""

import warnings

import numpy as np
import pandas as pd
import pingouin as pg
import pytest
from scipy import stats

from helpers import raises_code
from trueband.funcs import call
from trueband.funcs import reliability as rel


def real_statistics_ratings():
    """pingouin's "cronbach_alpha" dataset in wide form: 15 people x 10 items, no blanks."""
    long = pg.read_dataset("cronbach_alpha")
    return long.pivot(index="Subj", columns="Items", values="Scores")


def binary_with_blanks():
    """pingouin's "cronbach_wide_missing": 12 people x 11 binary items, some blanks."""
    return pg.read_dataset("cronbach_wide_missing")


def as_cells(frame: pd.DataFrame):
    """A data frame as a spreadsheet hands a range over: rows of cells, None for a blank."""
    return [[None if pd.isna(x) else float(x) for x in row] for row in frame.to_numpy()]


# Wuensch, KR20.txt: students A..J (rows) by items 1..10 (columns), 1 = correct.
WUENSCH_ITEMS = [
    [1, 1, 1, 1, 1, 1, 0, 1, 1, 0],
    [1, 0, 1, 1, 0, 1, 1, 1, 0, 1],
    [1, 1, 1, 1, 0, 1, 1, 0, 0, 1],
    [0, 0, 1, 0, 0, 0, 1, 0, 0, 0],
    [0, 0, 0, 0, 0, 1, 0, 0, 1, 0],
    [1, 1, 1, 0, 1, 1, 1, 1, 1, 1],
    [1, 1, 0, 1, 1, 1, 0, 1, 1, 1],
    [1, 1, 1, 1, 1, 1, 1, 1, 0, 1],
    [0, 1, 0, 1, 1, 1, 1, 1, 0, 1],
    [1, 1, 0, 1, 1, 0, 1, 1, 1, 0],
]
WUENSCH_P = [.7, .7, .6, .7, .6, .8, .7, .7, .5, .6]   # the page's row "p"
WUENSCH_TOTALS = [8, 7, 7, 2, 2, 9, 8, 9, 7, 7]        # the page's column "tot"
WUENSCH_TOTAL_VARIANCE = 5.84                           # the page's total variance (denominator n)


# ---------------------------------------------------------------- coefficient alpha

def test_alpha_on_real_statistics_ratings_against_pingouin():
    data = real_statistics_ratings()
    expected, _ = pg.cronbach_alpha(data)  # reference library; no blanks, so its policy does not matter
    assert call("CRONBACH_ALPHA", as_cells(data)) == pytest.approx(expected, rel=1e-12)
    # pingouin's own docstring prints 0.5917188485995826 for this dataset (psych::alpha agrees, it says)
    assert call("CRONBACH_ALPHA", as_cells(data)) == pytest.approx(0.5917188485995826, rel=1e-12)


def test_alpha_listwise_deletion_matches_pingouin_listwise():
    data = binary_with_blanks()
    expected, _ = pg.cronbach_alpha(data, nan_policy="listwise")  # reference library, like with like
    assert expected == pytest.approx(0.8016949152542373, rel=1e-12)  # printed in pingouin's docstring
    assert call("CRONBACH_ALPHA", as_cells(data)) == pytest.approx(expected, rel=1e-12)
    # pingouin's default (pairwise covariances) differs; we document listwise deletion instead
    pairwise, _ = pg.cronbach_alpha(data)
    assert abs(call("CRONBACH_ALPHA", as_cells(data)) - pairwise) > 0.05


@pytest.mark.parametrize("seed, n, k", [(1, 50, 5), (2, 500, 12), (3, 7, 2), (4, 2000, 40)])
def test_alpha_on_random_items_against_pingouin(seed, n, k):
    rng = np.random.default_rng(seed)
    common = rng.normal(size=(n, 1))
    x = np.round(3 + common + rng.normal(size=(n, k)), 0)
    expected, _ = pg.cronbach_alpha(pd.DataFrame(x))  # reference library
    assert call("CRONBACH_ALPHA", x) == pytest.approx(expected, rel=1e-11)


def test_alpha_keeps_its_digits_for_large_scores_with_small_spread():
    # Two-pass variances: adding 1e8 to every score must not change alpha (the one-pass
    # formula loses every digit here). Reference: pingouin on the unshifted data.
    rng = np.random.default_rng(5)
    x = np.round(rng.normal(size=(200, 6)) + rng.normal(size=(200, 1)), 2)
    expected, _ = pg.cronbach_alpha(pd.DataFrame(x))
    assert call("CRONBACH_ALPHA", x + 1e8) == pytest.approx(expected, rel=1e-6)


def test_alpha_may_be_negative():
    # Items that covary negatively give a negative alpha (pingouin docstring: "between negative
    # infinity and one"); reference value from pingouin on random data with reversed items.
    rng = np.random.default_rng(6)
    t = rng.normal(size=(300, 1))
    x = np.hstack([t + rng.normal(size=(300, 1)) * 0.5, -t + rng.normal(size=(300, 1)) * 0.5])
    expected, _ = pg.cronbach_alpha(pd.DataFrame(x))
    assert expected < 0
    assert call("CRONBACH_ALPHA", x) == pytest.approx(expected, rel=1e-12)


# ---------------------------------------------------------------- Feldt interval

def test_feldt_interval_against_pingouin():
    data = real_statistics_ratings()
    alpha, (low, high) = pg.cronbach_alpha(data, ci=0.95)  # reference library; it rounds limits to 3 places
    n, k = data.shape
    assert call("ALPHA_CI", alpha, n, k, "lower") == pytest.approx(low, abs=5e-4)
    assert call("ALPHA_CI", alpha, n, k, "upper") == pytest.approx(high, abs=5e-4)
    alpha, (low, high) = pg.cronbach_alpha(data, ci=0.90)
    assert call("ALPHA_CI", alpha, n, k, "lower", 0.90) == pytest.approx(low, abs=5e-4)
    assert call("ALPHA_CI", alpha, n, k, "upper", 0.90) == pytest.approx(high, abs=5e-4)


def test_feldt_interval_after_listwise_deletion_uses_the_people_kept():
    # pingouin 0.7.0 takes n before dropping incomplete rows, so its listwise interval is not
    # like with like; compare with pingouin on the complete rows themselves.
    data = binary_with_blanks().dropna()
    alpha, (low, high) = pg.cronbach_alpha(data)
    ours = call("CRONBACH_ALPHA", as_cells(binary_with_blanks()))
    assert ours == pytest.approx(alpha, rel=1e-12)
    assert call("ALPHA_CI", ours, len(data), data.shape[1], "lower") == pytest.approx(low, abs=5e-4)
    assert call("ALPHA_CI", ours, len(data), data.shape[1], "upper") == pytest.approx(high, abs=5e-4)


def test_feldt_interval_worked_example():
    # r-de-r (goo.ne.jp, 2021-10-13), real-statistics data: n 15, k 10, alpha 0.591719;
    # two-sided 95%: 0.19492168920552821 to 0.8398208740258171 (printed to 17 digits).
    assert call("ALPHA_CI", 0.591719, 15, 10, "lower") == pytest.approx(0.19492168920552821, rel=1e-10)
    assert call("ALPHA_CI", 0.591719, 15, 10, "upper") == pytest.approx(0.8398208740258171, rel=1e-10)
    # the same page's one-sided 95% limits are the two-sided 90% ones: 0.2769247403837999, 0.8123375621254263
    assert call("ALPHA_CI", 0.591719, 15, 10, "lower", 0.90) == pytest.approx(0.2769247403837999, rel=1e-10)
    assert call("ALPHA_CI", 0.591719, 15, 10, "upper", 0.90) == pytest.approx(0.8123375621254263, rel=1e-10)


@pytest.mark.parametrize("confidence", [0.5, 0.9, 0.99, 0.999999])
def test_feldt_interval_against_scipy_f(confidence):
    # Feldt, Woodruff & Salih (1987), eq. for the interval; F quantiles from scipy.stats.f (reference library).
    a, n, k = 0.82, 213, 7   # the inputs of the psyctc.org feldt1.sas example program
    df1, df2 = n - 1, (n - 1) * (k - 1)
    tail = (1 - confidence) / 2
    assert call("ALPHA_CI", a, n, k, "lower", confidence) == pytest.approx(
        1 - (1 - a) * stats.f.ppf(1 - tail, df1, df2), rel=1e-9)
    assert call("ALPHA_CI", a, n, k, "upper", confidence) == pytest.approx(
        1 - (1 - a) * stats.f.ppf(tail, df1, df2), rel=1e-9)


def test_feldt_interval_of_a_perfect_alpha_is_a_point():
    assert call("ALPHA_CI", 1.0, 30, 5, "lower") == 1.0 and call("ALPHA_CI", 1.0, 30, 5, "upper") == 1.0


# ---------------------------------------------------------------- Kuder–Richardson

def test_kr20_wuensch_worked_example():
    # Wuensch, KR20.txt: p per item, total variance 5.84 (denominator n); KR-20 from the page's
    # own intermediate values: 10/9 * (1 - sum(pq) / 5.84), with sum(pq) = 2.18 (worked by hand).
    assert np.sum(WUENSCH_ITEMS, axis=1).tolist() == WUENSCH_TOTALS  # data copied as printed
    assert np.var(WUENSCH_TOTALS) == pytest.approx(WUENSCH_TOTAL_VARIANCE, rel=1e-12)
    sum_pq = sum(p * (1 - p) for p in WUENSCH_P)
    assert sum_pq == pytest.approx(2.18, rel=1e-12)
    expected = 10 / 9 * (1 - 2.18 / 5.84)
    assert call("KR20", WUENSCH_ITEMS) == pytest.approx(expected, rel=1e-12)
    for j, p in enumerate(WUENSCH_P, start=1):
        assert call("ITEM_DIFFICULTY", WUENSCH_ITEMS, j) == pytest.approx(p, rel=1e-12)


def test_kr20_equals_alpha_on_binary_items():
    # Wuensch, KR20.txt: "the KR20 is simply Cronbach's alpha where the scores are all 0's and 1's";
    # checked on the bundled binary dataset against pingouin (listwise, like with like).
    data = binary_with_blanks()
    expected, _ = pg.cronbach_alpha(data, nan_policy="listwise")
    assert call("KR20", as_cells(data)) == pytest.approx(expected, rel=1e-12)
    assert call("KR20", WUENSCH_ITEMS) == pytest.approx(pg.cronbach_alpha(pd.DataFrame(WUENSCH_ITEMS))[0], rel=1e-12)


def test_kr21_from_the_mean_and_population_variance():
    # KR-21 (Kuder & Richardson 1937, formula 21) on the Wuensch data, worked by hand from the page's
    # total-score mean (66/10 = 6.6) and variance 5.84: 10/9 * (1 - 6.6 * 3.4 / (10 * 5.84)).
    assert call("KR21", 10, 6.6, 5.84) == pytest.approx(10 / 9 * (1 - 6.6 * 3.4 / 58.4), rel=1e-12)
    # KR-21 is at most KR-20, with equality when all items are equally difficult (Kuder & Richardson 1937)
    assert call("KR21", 10, 6.6, 5.84) <= call("KR20", WUENSCH_ITEMS)
    equal = [[1, 1, 0, 0], [1, 0, 1, 0], [0, 1, 1, 1], [0, 0, 0, 1], [1, 1, 1, 1], [0, 0, 0, 0]]
    totals = np.sum(equal, axis=1)
    assert call("KR21", 4, totals.mean(), totals.var()) == pytest.approx(call("KR20", equal), rel=1e-12)


def test_kr21_largest_possible_variance_gives_one():
    # The total of k 0/1 items with mean M has variance at most M (k - M) (Bhatia & Davis 2000
    # bound, from memory); at that bound KR-21 is 1 (worked by hand), above it the input is impossible.
    assert call("KR21", 10, 4, 24) == pytest.approx(1.0, rel=1e-12)
    with raises_code("#NUM!", "variance", match="at most"):
        call("KR21", 10, 4, 24.5)


# ---------------------------------------------------------------- split half and Spearman–Brown

@pytest.mark.parametrize("method", ["odd-even", "first-last"])
def test_split_half_against_pandas(method):
    # Reference library: pandas correlation of the half sums, stepped up by 2r / (1 + r)
    # (Spearman 1910; Brown 1910). 10 items: odd-even halves 1,3,5,7,9 / 2,4,6,8,10; first-last 1-5 / 6-10.
    data = real_statistics_ratings()[[f"Q{i}" for i in range(1, 11)]]
    cols = list(data.columns)
    a, b = (cols[0::2], cols[1::2]) if method == "odd-even" else (cols[:5], cols[5:])
    r = data[a].sum(axis=1).corr(data[b].sum(axis=1))
    assert call("SPLIT_HALF", as_cells(data), method) == pytest.approx(2 * r / (1 + r), rel=1e-12)


def test_split_half_odd_item_count_gives_the_extra_item_to_the_first_half():
    # 11 binary items, listwise: odd-even 6 / 5 items; first-last items 1-6 / 7-11 (documented convention),
    # pandas for the correlation (reference library).
    data = binary_with_blanks().dropna()
    cols = list(data.columns)
    for method, (a, b) in {"odd-even": (cols[0::2], cols[1::2]), "first-last": (cols[:6], cols[6:])}.items():
        r = data[a].sum(axis=1).corr(data[b].sum(axis=1))
        assert call("SPLIT_HALF", as_cells(binary_with_blanks()), method) == pytest.approx(2 * r / (1 + r),
                                                                                         rel=1e-12)


@pytest.mark.parametrize("reliability, factor, expected, source", [
    (0.60, 2, 0.75, "doubling a test of .60 gives .75: CTT package help, spearman.brown(0.6, 2) (value from memory)"),
    (0.70, 3, 0.875, "20 to 60 items at .70: Stata sbrowni help example (.70 20 60); value worked by hand"),
    (0.80, 0.5, 2 / 3, "halving a test of .80 gives .667 (worked by hand)"),
    (0.50, 4, 0.80, "quadrupling .50 gives .80: the inverse of CTT's spearman.brown(0.5, 0.8, 'r') example"),
    (0.0, 5, 0.0, "an unreliable test stays unreliable (definition)"),
    (1.0, 0.1, 1.0, "a perfectly reliable test stays so (definition)"),
])
def test_spearman_brown_published_examples(reliability, factor, expected, source):
    assert call("SPEARMAN_BROWN", reliability, factor) == pytest.approx(expected, rel=1e-12, abs=1e-15), source


@pytest.mark.parametrize("reliability, target, expected, source", [
    (0.50, 0.80, 4.0, "CTT package help: spearman.brown(0.5, 0.8, 'r'); Stata sbrowni .50 20 .80 -> 80 items"),
    (0.60, 0.75, 2.0, "the doubling example run backwards (from memory)"),
    (0.90, 0.80, 4 / 9, "a test above target may be shortened to 4/9 of its length (worked by hand)"),
])
def test_length_factor_published_examples(reliability, target, expected, source):
    assert call("LENGTH_FACTOR", reliability, target) == pytest.approx(expected, rel=1e-12), source


def test_length_factor_inverts_spearman_brown():
    # Spearman–Brown solved for n and applied again returns the target (definition).
    for r, t in [(0.3, 0.9), (0.75, 0.95), (0.95, 0.5), (1e-6, 0.999)]:
        assert call("SPEARMAN_BROWN", r, call("LENGTH_FACTOR", r, t)) == pytest.approx(t, rel=1e-12)


# ---------------------------------------------------------------- omega

def statsmodels_omega(x: np.ndarray) -> tuple[float, float]:
    """Omega total from statsmodels' ML one-factor fit (reference library), and its smallest uniqueness."""
    corr = np.corrcoef(x, rowvar=False)
    from statsmodels.multivariate.factor import Factor
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # its convergence notes on Heywood cases
        fit = Factor(corr=corr, n_factor=1, method="ml", nobs=len(x)).fit()
    sd = x.std(axis=0, ddof=1)
    lam = fit.loadings.ravel() * sd
    psi = fit.uniqueness * sd ** 2
    return lam.sum() ** 2 / (lam.sum() ** 2 + psi.sum()), float(fit.uniqueness.min())


def test_omega_on_real_statistics_ratings_against_statsmodels():
    data = real_statistics_ratings()
    expected, smallest = statsmodels_omega(data.to_numpy(float))
    assert smallest > 0.05  # a proper solution
    # tolerance: both fits stop at a gradient of about 1e-7; omega agrees to about 1e-6
    assert call("OMEGA", as_cells(data)) == pytest.approx(expected, abs=1e-5)


def test_omega_one_factor_fit_loadings_against_statsmodels():
    corr = np.corrcoef(real_statistics_ratings().to_numpy(float), rowvar=False)
    from statsmodels.multivariate.factor import Factor
    ref = Factor(corr=corr, n_factor=1, method="ml", nobs=15).fit()
    ours = rel.one_factor_ml(corr)
    sign = np.sign(ref.loadings.ravel() @ ours.loadings)
    assert ours.converged
    np.testing.assert_allclose(ours.loadings, sign * ref.loadings.ravel(), atol=1e-4)
    np.testing.assert_allclose(ours.uniquenesses, ref.uniqueness, atol=1e-4)


@pytest.mark.parametrize("seed", range(12))
def test_omega_on_random_one_factor_data_against_statsmodels(seed):
    rng = np.random.default_rng(seed)
    n, k = int(rng.integers(40, 400)), int(rng.integers(3, 9))
    loadings = rng.uniform(0.3, 0.8, size=k)
    x = rng.normal(size=(n, 1)) * loadings + rng.normal(size=(n, k)) * np.sqrt(1 - loadings ** 2)
    x = x * rng.uniform(0.5, 3, size=k) + 10  # items on different scales: omega of the raw sum
    expected, smallest = statsmodels_omega(x)
    assert smallest > 0.01  # proper solutions (the Heywood branch is checked on the Big Five data below)
    # tolerance: the two optimisers agree to about 2e-7 on these data
    assert call("OMEGA", x) == pytest.approx(expected, abs=1e-5)


def sklearn_omega(x: np.ndarray) -> float:
    """Omega total from scikit-learn's FactorAnalysis (reference library): ML fitted to the raw
    covariance matrix by its own SVD-based iterations, so no rescaling from correlations is involved."""
    from sklearn.decomposition import FactorAnalysis
    fit = FactorAnalysis(n_components=1, tol=1e-12, max_iter=100_000, svd_method="lapack").fit(x)
    lam = fit.components_.ravel()
    return lam.sum() ** 2 / (lam.sum() ** 2 + fit.noise_variance_.sum())


@pytest.mark.parametrize("seed", range(4))
def test_omega_on_the_raw_scale_against_scikit_learn(seed):
    rng = np.random.default_rng(seed)
    n, k = int(rng.integers(40, 400)), int(rng.integers(3, 9))
    loadings = rng.uniform(0.3, 0.8, size=k)
    x = rng.normal(size=(n, 1)) * loadings + rng.normal(size=(n, k)) * np.sqrt(1 - loadings ** 2)
    x = x * rng.uniform(0.5, 3, size=k) + 10
    # tolerance: the two fits agree to about 5e-8 here
    assert call("OMEGA", x) == pytest.approx(sklearn_omega(x), abs=1e-6)


def test_omega_on_real_statistics_ratings_against_scikit_learn():
    data = real_statistics_ratings()
    assert call("OMEGA", as_cells(data)) == pytest.approx(sklearn_omega(data.to_numpy(float)), abs=1e-6)


def test_omega_heywood_case_on_big_five_scales():
    # pingouin's "pairwise_corr" (Dolan et al. 2009): a single factor for five distinct traits
    # drives Neuroticism's uniqueness to zero in statsmodels' ML fit (reference library): a Heywood case.
    data = pg.read_dataset("pairwise_corr").drop(columns="Subject")
    _, smallest = statsmodels_omega(data.to_numpy(float))
    assert smallest < 1e-3
    with raises_code("#NUM!", "items", match="Heywood.*item 1"):
        call("OMEGA", as_cells(data))


def test_omega_at_least_alpha_for_congeneric_items():
    # For a unidimensional test alpha is a lower bound to omega (McDonald 1999, ch. 6; common practice).
    rng = np.random.default_rng(11)
    lam = np.array([0.9, 0.7, 0.5, 0.3, 0.8])
    x = rng.normal(size=(2000, 1)) * lam + rng.normal(size=(2000, 5)) * np.sqrt(1 - lam ** 2)
    assert call("OMEGA", x) > call("CRONBACH_ALPHA", x)


# ---------------------------------------------------------------- item analysis

def test_item_difficulty_is_the_item_mean_of_complete_rows():
    data = binary_with_blanks()
    complete = data.dropna()  # listwise deletion, as documented
    for j, col in enumerate(data.columns, start=1):
        assert call("ITEM_DIFFICULTY", as_cells(data), j) == pytest.approx(complete[col].mean(), rel=1e-12)


def test_item_sd_against_pandas_and_statistics_on_rating_items():
    # ITEM_SD: the n - 1 standard deviation of one item over the complete rows (listwise deletion, as
    # documented); references: pandas Series.std (ddof=1) and the standard library's statistics.stdev.
    import statistics

    data = real_statistics_ratings()
    for j, col in enumerate(data.columns, start=1):
        got = call("ITEM_SD", as_cells(data), j)
        assert got == pytest.approx(data.dropna()[col].std(ddof=1), rel=1e-12)
        assert got == pytest.approx(statistics.stdev(data.dropna()[col].tolist()), rel=1e-12)
    blanks = binary_with_blanks()
    for j, col in enumerate(blanks.columns, start=1):
        assert call("ITEM_SD", as_cells(blanks), j) == pytest.approx(blanks.dropna()[col].std(ddof=1), rel=1e-12)


def test_item_sd_needs_two_complete_rows_and_a_valid_item():
    with raises_code("#N/A", "items"):
        call("ITEM_SD", [[1, 2], [3, None]], 1)
    with raises_code("#NUM!", "item", match="between 1 and 2, got 3"):
        call("ITEM_SD", [[1, 2], [3, 4]], 3)
    assert call("ITEM_SD", [[2, 1], [2, 5], [2, 3]], 1) == 0.0  # no spread is a spread of 0, not an error


def test_item_total_against_pandas():
    # Corrected item-total correlation: the item against the sum of the other items (Crocker & Algina
    # 1986, ch. 14); reference: pandas Series.corr on the bundled ratings.
    data = real_statistics_ratings()
    for j, col in enumerate(data.columns, start=1):
        rest = data.drop(columns=col).sum(axis=1)
        assert call("ITEM_TOTAL", as_cells(data), j) == pytest.approx(data[col].corr(rest), rel=1e-12)


def test_item_total_listwise_against_pandas():
    data = binary_with_blanks()
    complete = data.dropna()
    for j, col in enumerate(data.columns, start=1):
        rest = complete.drop(columns=col).sum(axis=1)
        if complete[col].std() == 0:
            with raises_code("#DIV/0!", "items", match=f"item {j} has zero variance"):
                call("ITEM_TOTAL", as_cells(data), j)
        else:
            assert call("ITEM_TOTAL", as_cells(data), j) == pytest.approx(complete[col].corr(rest), rel=1e-12)


def test_alpha_if_deleted_against_pingouin():
    data = real_statistics_ratings()
    for j, col in enumerate(data.columns, start=1):
        expected, _ = pg.cronbach_alpha(data.drop(columns=col))  # reference library
        assert call("ALPHA_IF_DELETED", as_cells(data), j) == pytest.approx(expected, rel=1e-12)


def test_alpha_if_deleted_deletes_rows_over_the_whole_range():
    # Listwise over all items, including the one left out: compare with pingouin on the complete rows.
    data = binary_with_blanks()
    complete = data.dropna()
    for j, col in enumerate(data.columns, start=1):
        expected, _ = pg.cronbach_alpha(complete.drop(columns=col))
        assert call("ALPHA_IF_DELETED", as_cells(data), j) == pytest.approx(expected, rel=1e-12)


# ---------------------------------------------------------------- errors

def test_item_range_errors():
    with raises_code("#VALUE!", "items", match="row 2, column 1"):
        call("CRONBACH_ALPHA", [[1, 2], ["x", 3], [2, 2]])
    with raises_code("#N/A", "items", match="2 columns"):
        call("CRONBACH_ALPHA", [[1], [2], [3]])
    with raises_code("#N/A", "items", match="complete rows"):
        call("CRONBACH_ALPHA", [[1, 2], [None, 3], [2, None]])
    with raises_code("#DIV/0!", "items", match="zero variance"):
        call("CRONBACH_ALPHA", [[1, 1], [1, 1], [1, 1]])
    with raises_code("#DIV/0!", "items"):
        call("CRONBACH_ALPHA", [[0, 1], [1, 0], [0, 1]])  # the total is constant
    with raises_code("#NUM!", "items", match="only 0 and 1.*row 2, column 3"):
        call("KR20", [[1, 0, 1], [0, 1, 2], [1, 1, 1]])
    with raises_code("#DIV/0!", "items"):
        call("KR20", [[1, 1], [1, 1], [1, 1]])
    with raises_code("#N/A", "items", match="3 complete rows"):
        call("SPLIT_HALF", [[1, 2], [2, 3]])
    with raises_code("#DIV/0!", "items", match="half"):
        call("SPLIT_HALF", [[1, 2], [1, 3], [1, 4]])
    # (common practice: spreadsheet apps answer bad text with #VALUE!)
    with raises_code("#VALUE!", "method"):
        call("SPLIT_HALF", [[1, 2], [2, 3], [3, 5]], "random")
    with raises_code("#N/A", "items", match="3 columns"):
        call("OMEGA", [[1, 2], [2, 3], [3, 5], [4, 4]])
    with raises_code("#N/A", "items", match="complete rows"):
        call("OMEGA", [[1, 2, 3], [2, 3, 3], [3, 5, 4]])
    with raises_code("#DIV/0!", "items", match="item 2 has zero variance"):
        call("OMEGA", [[1, 2, 3], [2, 2, 3], [3, 2, 4], [5, 2, 1], [2, 2, 2]])
    with raises_code("#NUM!", "items", match="linearly dependent"):
        call("OMEGA", [[1, 2, 3], [2, 4, 6], [3, 5, 8], [5, 1, 6], [2, 2, 4]])


def test_item_argument_errors():
    items = [[1, 0, 1], [0, 1, 1], [1, 1, 0], [1, 1, 1]]
    with raises_code("#NUM!", "item", match="between 1 and 3, got 4"):
        call("ITEM_DIFFICULTY", items, 4)
    with raises_code("#NUM!", "item", match="whole number"):
        call("ITEM_TOTAL", items, 1.5)
    with raises_code("#VALUE!", "item"):
        call("ALPHA_IF_DELETED", items, "first")
    with raises_code("#N/A", "items", match="3 columns"):
        call("ALPHA_IF_DELETED", [[1, 0], [0, 1], [1, 1]], 1)
    with raises_code("#DIV/0!", "items", match="item 1 has zero variance"):
        call("ITEM_TOTAL", [[1, 0, 1], [1, 1, 0], [1, 1, 1]], 1)


def test_scalar_argument_errors():
    with raises_code("#NUM!", "alpha", match="at most 1, got 1.2"):
        call("ALPHA_CI", 1.2, 30, 5, "lower")
    with raises_code("#NUM!", "n_people", match="at least 2"):
        call("ALPHA_CI", 0.8, 1, 5, "lower")
    with raises_code("#NUM!", "n_items"):
        call("ALPHA_CI", 0.8, 30, 1, "upper")
    with raises_code("#VALUE!", "part"):
        call("ALPHA_CI", 0.8, 30, 5, "middle")
    with raises_code("#NUM!", "confidence"):
        call("ALPHA_CI", 0.8, 30, 5, "lower", 1.0)
    with raises_code("#NUM!", "mean", match=r"between 0 and n_items \(10\), got 11"):
        call("KR21", 10, 11, 2)
    with raises_code("#NUM!", "mean", match="got -1"):
        call("KR21", 10, -1, 2)
    with raises_code("#DIV/0!", "variance"):
        call("KR21", 10, 5, 0)
    with raises_code("#NUM!", "variance"):
        call("KR21", 10, 5, -1)
    with raises_code("#NUM!", "reliability", match="between 0 and 1, got 1.3"):
        call("SPEARMAN_BROWN", 1.3, 2)
    with raises_code("#NUM!", "length_factor", match="greater than 0"):
        call("SPEARMAN_BROWN", 0.7, 0)
    with raises_code("#NUM!", "reliability", match="greater than 0 and less than 1"):
        call("LENGTH_FACTOR", 0, 0.8)
    with raises_code("#NUM!", "target"):
        call("LENGTH_FACTOR", 0.7, 1)
    with raises_code("#VALUE!", "target", match="text"):
        call("LENGTH_FACTOR", 0.7, "high")


def test_column_path_of_the_scalar_functions_matches_single_calls():
    from trueband.funcs.registry import call_column
    rs = [0.1, 0.5, 0.9, 1.3, 0.7]
    got = call_column("SPEARMAN_BROWN", {"reliability": rs}, {"length_factor": 2})
    assert got[:3] + got[4:] == [pytest.approx(call("SPEARMAN_BROWN", r, 2)) for r in rs[:3] + rs[4:]]
    assert got[3].code == "#NUM!"
    alphas = [0.5, 0.7, 0.9]
    assert call_column("ALPHA_CI", {"alpha": alphas}, {"n_people": 50, "n_items": 8, "part": "lower"}) == \
        [pytest.approx(call("ALPHA_CI", a, 50, 8, "lower")) for a in alphas]
    people = [30, 1, 200.0, 2.5]
    got = call_column("ALPHA_CI", {"n_people": people}, {"alpha": 0.8, "n_items": 8, "part": "upper"})
    assert got[0] == pytest.approx(call("ALPHA_CI", 0.8, 30, 8, "upper"))
    assert got[2] == pytest.approx(call("ALPHA_CI", 0.8, 200, 8, "upper"))
    assert got[1].code == "#NUM!" and got[3].code == "#NUM!"  # too few people; not a whole number
    items = [10, 40, 12]
    assert call_column("KR21", {"n_items": items}, {"mean": 6, "variance": 5}) == \
        [pytest.approx(call("KR21", k, 6, 5)) for k in items]


def test_item_functions_leave_the_callers_array_alone():
    # The matrix is centred in place for speed; the caller's own array must never change (common practice).
    rng = np.random.default_rng(12)
    x = np.round(rng.normal(3, 1, size=(60, 6)))
    before = x.copy()
    for name, extra in [("CRONBACH_ALPHA", ()), ("OMEGA", ()), ("ALPHA_IF_DELETED", (2,)), ("ITEM_TOTAL", (3,)),
                        ("SPLIT_HALF", ()), ("ITEM_DIFFICULTY", (1,)), ("ITEM_SD", (2,))]:
        call(name, x, *extra)
        np.testing.assert_array_equal(x, before, err_msg=name)


def test_item_total_and_alpha_if_deleted_with_one_item_on_a_far_larger_scale():
    # The rest total is summed around the item, not taken as total minus item, so an item scored
    # in the millions does not wash out the others; reference: pandas and pingouin on the same data.
    rng = np.random.default_rng(13)
    t = rng.normal(size=(400, 1))
    x = pd.DataFrame(np.hstack([t * 1e6 + 5e7 + rng.normal(size=(400, 1)) * 1e6,
                                np.round(3 + t + rng.normal(size=(400, 4)), 1)]))
    rest = x.drop(columns=0).sum(axis=1)
    assert call("ITEM_TOTAL", x.to_numpy(), 1) == pytest.approx(x[0].corr(rest), rel=1e-9)
    assert call("ALPHA_IF_DELETED", x.to_numpy(), 1) == pytest.approx(pg.cronbach_alpha(x.drop(columns=0))[0],
                                                                     rel=1e-9)
