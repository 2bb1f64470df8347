"""Rater agreement, checked against published examples and reference libraries.

Sources:
* ICC: Shrout & Fleiss (1979), Table 2 data (6 targets x 4 judges) and their
  Tables 3-4 (mean squares and the six coefficients, two decimals; the printed
  values are recalled from memory, and pingouin agrees with them on the same
  data); pingouin.intraclass_corr (reference library) on its bundled "icc"
  dataset and on random data, including its 95% limits; scipy.stats.f for the
  test-inversion definition of the limits (McGraw & Wong 1996).
* Fleiss' kappa: Fleiss (1971), Table 1 (30 patients x 6 ratings, 5
  diagnoses; published kappa 0.430), copied as the `diagnoses` data of
  R's irr package (0.4302445 from irr's kappam.fleiss; both as carried in
  statsmodels' test suite); statsmodels.stats.inter_rater.fleiss_kappa.
* Cohen's kappa: statsmodels.stats.inter_rater.cohens_kappa and
  sklearn.metrics.cohen_kappa_score (reference libraries); the `anxiety` data
  of R's irr package with irr's kappa2 value (as carried in statsmodels' tests).
* Krippendorff's alpha: the krippendorff package (PyPI) at all four levels;
  Krippendorff (2011), "Computing Krippendorff's alpha-reliability", the
  4 observers x 12 units example (nominal alpha 0.743 published there; 0.815
  ordinal and 0.797 ratio as printed in the krippendorff package's docs
  citing that example; 0.849 interval from memory).
* rwg / rwg(j): the definitions of James, Demaree & Wolf (1984); the uniform
  null variance 2 for 5 response options and the truncation to 0 as
  documented in R's multilevel package (Bliese); worked by hand.
"""

import math

import krippendorff
import numpy as np
import pandas as pd
import pingouin
import pytest
from scipy import stats
from sklearn.metrics import cohen_kappa_score
from statsmodels.stats.inter_rater import aggregate_raters, cohens_kappa, fleiss_kappa

from helpers import raises_code
from trueband.funcs import agreement as ag
from trueband.funcs import krippendorff as kr  # the module of KRIPPENDORFF_ALPHA (its table threshold is patched below)
from trueband.funcs import call

# pingouin's own use of a pandas keyword that pandas plans to drop; not ours.
pytestmark = pytest.mark.filterwarnings("ignore:The inplace keyword")

# ---------------------------------------------------------------- shared data

# Shrout & Fleiss (1979), Table 2: 6 targets rated by 4 judges.
SHROUT_FLEISS = [
    [9, 2, 5, 8],
    [6, 1, 3, 2],
    [8, 4, 6, 8],
    [7, 1, 2, 6],
    [10, 5, 6, 9],
    [6, 2, 4, 7],
]

# Fleiss (1971), Table 1 as the rater-by-rater data of R irr's `diagnoses`
# (1 depression, 2 personality disorder, 3 schizophrenia, 4 neurosis, 5 other).
FLEISS_1971 = [
    [4, 4, 4, 4, 4, 4], [2, 2, 2, 5, 5, 5], [2, 3, 3, 3, 3, 5], [5, 5, 5, 5, 5, 5], [2, 2, 2, 4, 4, 4],
    [1, 1, 3, 3, 3, 3], [3, 3, 3, 3, 5, 5], [1, 1, 3, 3, 3, 4], [1, 1, 4, 4, 4, 4], [5, 5, 5, 5, 5, 5],
    [1, 4, 4, 4, 4, 4], [1, 2, 4, 4, 4, 4], [2, 2, 2, 3, 3, 3], [1, 4, 4, 4, 4, 4], [2, 2, 4, 4, 4, 5],
    [3, 3, 3, 3, 3, 5], [1, 1, 1, 4, 5, 5], [1, 1, 1, 1, 1, 2], [2, 2, 4, 4, 4, 4], [1, 3, 3, 5, 5, 5],
    [5, 5, 5, 5, 5, 5], [2, 4, 4, 4, 4, 4], [2, 2, 4, 5, 5, 5], [1, 1, 4, 4, 4, 4], [1, 4, 4, 4, 4, 5],
    [2, 2, 2, 2, 2, 4], [1, 1, 1, 1, 5, 5], [2, 2, 4, 4, 4, 4], [1, 3, 3, 3, 3, 3], [5, 5, 5, 5, 5, 5],
]

# R irr's `anxiety` data: 20 subjects rated by 3 raters on a 1-6 scale.
ANXIETY = np.array([
    [3, 3, 2], [3, 6, 1], [3, 4, 4], [4, 6, 4], [5, 2, 3], [5, 4, 2], [2, 2, 1], [3, 4, 6], [5, 3, 1], [2, 3, 1],
    [2, 2, 1], [6, 3, 2], [1, 3, 3], [5, 3, 3], [2, 2, 1], [2, 2, 1], [1, 1, 3], [2, 3, 3], [4, 3, 2], [3, 4, 2],
], dtype=float)

# Krippendorff (2011), section on nominal data with missing values: observers A-D (rows there) by
# 12 units, here transposed to units as rows.
KRIPPENDORFF_2011 = [
    [1, 1, None, 1], [2, 2, 3, 2], [3, 3, 3, 3], [3, 3, 3, 3], [2, 2, 2, 2], [1, 2, 3, 4],
    [4, 4, 4, 4], [1, 1, 2, 1], [2, 2, 2, 2], [None, 5, 5, 5], [None, None, 1, 1], [None, 3, None, None],
]

FORMS = [  # (model, unit, pingouin's label)
    ("oneway", "single", "ICC(1,1)"), ("agreement", "single", "ICC(A,1)"), ("consistency", "single", "ICC(C,1)"),
    ("oneway", "average", "ICC(1,k)"), ("agreement", "average", "ICC(A,k)"), ("consistency", "average", "ICC(C,k)"),
]


def long_format(matrix):
    matrix = np.asarray(matrix, dtype=float)
    n, k = matrix.shape
    return pd.DataFrame({"target": np.repeat(np.arange(n), k), "rater": np.tile(np.arange(k), n),
                         "score": matrix.ravel()})


@pytest.fixture
def pingouin_unrounded(monkeypatch):
    """pingouin.intraclass_corr indexed by form, with its confidence limits not rounded."""
    monkeypatch.setitem(pingouin.options, "round", None)
    monkeypatch.setitem(pingouin.options, "round.column.CI95", None)

    def run(matrix, nan_policy="raise"):
        return pingouin.intraclass_corr(long_format(matrix), "target", "rater", "score",
                                        nan_policy=nan_policy).set_index("Type")
    return run


# ---------------------------------------------------------------- ICC

@pytest.mark.parametrize("model, unit, published", [
    ("oneway", "single", 0.17), ("agreement", "single", 0.29), ("consistency", "single", 0.71),
    ("oneway", "average", 0.44), ("agreement", "average", 0.62), ("consistency", "average", 0.91),
])
def test_icc_shrout_fleiss_table_4(model, unit, published):
    # Shrout & Fleiss (1979), Table 4, printed to two decimals (from memory).
    assert call("ICC", SHROUT_FLEISS, model, unit) == pytest.approx(published, abs=0.005)


def test_icc_mean_squares_shrout_fleiss_table_3():
    # Shrout & Fleiss (1979), Table 3: BMS 11.24, WMS 6.26, JMS 32.49, EMS 1.02 (from memory).
    ms = ag.mean_squares(np.array(SHROUT_FLEISS, dtype=float))
    assert (ms["rows"], ms["within"], ms["columns"], ms["error"]) == pytest.approx(
        (11.24, 6.26, 32.49, 1.02), abs=0.005)


def assert_matches_pingouin(matrix, reference, confidence_tol=1e-10):
    for model, unit, form in FORMS:
        ours = ag.intraclass_correlation(matrix, model=model, unit=unit)
        row = reference.loc[form]
        assert ours.estimate == pytest.approx(row["ICC"], rel=1e-10, abs=1e-12), form
        assert ours.F == pytest.approx(row["F"], rel=1e-10), form
        assert (ours.df1, ours.df2) == (row["df1"], row["df2"]), form
        assert ours.p == pytest.approx(row["pval"], rel=1e-9, abs=1e-15), form
        assert (ours.lower, ours.upper) == pytest.approx(tuple(row["CI95"]), rel=confidence_tol, abs=1e-12), form


def test_icc_all_six_forms_in_one_pass(pingouin_unrounded):
    # intraclass_correlations against pingouin (labels: Shrout & Fleiss 2 = agreement "A", 3 = consistency "C").
    reference = pingouin_unrounded(SHROUT_FLEISS)
    table = ag.intraclass_correlations(SHROUT_FLEISS, confidence=0.95)
    for ours, theirs in [("ICC(1,1)", "ICC(1,1)"), ("ICC(2,1)", "ICC(A,1)"), ("ICC(3,1)", "ICC(C,1)"),
                         ("ICC(1,k)", "ICC(1,k)"), ("ICC(2,k)", "ICC(A,k)"), ("ICC(3,k)", "ICC(C,k)")]:
        r = table[ours]
        assert (r.estimate, r.lower, r.upper) == pytest.approx(
            (reference.loc[theirs, "ICC"], *reference.loc[theirs, "CI95"]), rel=1e-10)
    assert list(table) == ["ICC(1,1)", "ICC(2,1)", "ICC(3,1)", "ICC(1,k)", "ICC(2,k)", "ICC(3,k)"]


def test_icc_against_pingouin_on_shrout_fleiss(pingouin_unrounded):
    # Reference library: pingouin.intraclass_corr (long-format two-way ANOVA), all six forms and 95% limits.
    assert_matches_pingouin(SHROUT_FLEISS, pingouin_unrounded(SHROUT_FLEISS))


def test_icc_against_pingouin_bundled_wine_data(pingouin_unrounded):
    # Open dataset bundled with pingouin: read_dataset("icc"), 8 wines rated by 4 judges.
    data = pingouin.read_dataset("icc")
    wide = data.pivot_table(index="Wine", columns="Judge", values="Scores").to_numpy()
    reference = pingouin.intraclass_corr(data, "Wine", "Judge", "Scores").set_index("Type")
    assert_matches_pingouin(wide.tolist(), reference)


@pytest.mark.parametrize("seed, n, k", [(1, 10, 3), (2, 40, 5), (3, 7, 2), (4, 200, 8)])
def test_icc_against_pingouin_random(seed, n, k, pingouin_unrounded):
    # Reference library: pingouin on random ratings (people effect + rater effect + noise).
    rng = np.random.default_rng(seed)
    x = rng.normal(0, 1, (n, 1)) + rng.normal(0, 0.5, (1, k)) + rng.normal(0, 0.8, (n, k))
    assert_matches_pingouin(x, pingouin_unrounded(x))


def test_icc_listwise_deletion_matches_pingouin_omit(pingouin_unrounded):
    # Listwise deletion, as pingouin's nan_policy="omit" (common practice for ICC).
    rng = np.random.default_rng(11)
    x = rng.integers(1, 6, (15, 3)).astype(float)
    x[[2, 9], [0, 2]] = np.nan
    cells = [[None if math.isnan(c) else c for c in row] for row in x.tolist()]
    assert_matches_pingouin(cells, pingouin_unrounded(x, nan_policy="omit"))
    assert ag.intraclass_correlation(cells, model="agreement", unit="single").n == 13


@pytest.mark.parametrize("confidence", [0.80, 0.90, 0.99])
@pytest.mark.parametrize("model, unit", [("consistency", "single"), ("oneway", "average")])
def test_icc_limits_invert_the_f_test(model, unit, confidence):
    # McGraw & Wong (1996): the exact limits are the values rho0 at which the F test of ICC = rho0 has
    # one-sided p = (1 - confidence)/2; F = MSR/MSE scaled by (1 - rho0)/(1 + (k - 1) rho0) for single
    # measures and by (1 - rho0) for averages (scipy.stats.f as reference).
    x = np.array(SHROUT_FLEISS, dtype=float)
    n, k = x.shape
    r = ag.intraclass_correlation(x, model=model, unit=unit, confidence=confidence)
    scale = (lambda rho: (1 - rho) / (1 + (k - 1) * rho)) if unit == "single" else (lambda rho: 1 - rho)
    tail = (1 - confidence) / 2
    assert stats.f.sf(r.F * scale(r.lower), r.df1, r.df2) == pytest.approx(tail, rel=1e-9)
    assert stats.f.cdf(r.F * scale(r.upper), r.df1, r.df2) == pytest.approx(tail, rel=1e-9)


def test_icc_parts_through_the_registry():
    full = ag.intraclass_correlation(SHROUT_FLEISS, model="agreement", unit="average", confidence=0.9)
    assert call("ICC", SHROUT_FLEISS, "agreement", "average", "lower", 0.9) == full.lower
    assert call("ICC", SHROUT_FLEISS, "AGREEMENT", " Average ", "upper", 0.9) == full.upper
    assert call("ICC", SHROUT_FLEISS, "agreement", "average", "p") == full.p
    assert call("ICC", SHROUT_FLEISS, "agreement", "average", None, None) == full.estimate


def test_icc_perfect_consistency():
    # Raters differ only by a constant: consistency ICC 1 with limits 1 and p 0 (limit of F -> infinity,
    # by definition); absolute agreement stays below 1.
    x = [[1, 2, 3], [2, 3, 4], [4, 5, 6], [5, 6, 7]]
    r = ag.intraclass_correlation(x, model="consistency", unit="single")
    assert (r.estimate, r.lower, r.upper, r.p) == (1.0, 1.0, 1.0, 0.0) and math.isinf(r.F)
    assert call("ICC", x, "agreement", "single") < 1.0
    # residuals that are zero in exact arithmetic but not in floating point (means of thirds)
    r = ag.intraclass_correlation([[0, 0], [0, 0], [1, 1]], model="agreement", unit="single")
    assert (r.estimate, r.lower, r.upper, r.p) == (1.0, 1.0, 1.0, 0.0) and math.isinf(r.F)


def test_icc_errors():
    with raises_code("#DIV/0!", "ratings"):
        call("ICC", [[3, 3], [3, 3], [3, 3]], "oneway", "single")
    with raises_code("#DIV/0!", "ratings", match="between the people"):
        call("ICC", [[1, 2], [1, 2], [2, 1], [2, 1]], "consistency", "average")
    with raises_code("#DIV/0!", "ratings", match="only between raters"):
        call("ICC", [[1, 0], [1, 0]], "consistency", "single")
    with raises_code("#N/A", "ratings", match="complete rows"):
        call("ICC", [[1, 2], [None, 3]], "oneway", "single")
    with raises_code("#N/A", "ratings", match="columns"):
        call("ICC", [[1], [2], [3]], "oneway", "single")
    with raises_code("#VALUE!", "ratings", match="row 2, column 1"):
        call("ICC", [[1, 2], ["x", 3], [2, 2]], "oneway", "single")
    # (common practice: spreadsheet apps answer bad text with #VALUE!)
    with raises_code("#VALUE!", "model", match='"oneway"'):
        call("ICC", SHROUT_FLEISS, "twoway", "single")
    with raises_code("#VALUE!", "part"):
        call("ICC", SHROUT_FLEISS, "oneway", "single", "middle")
    with raises_code("#NUM!", "confidence"):
        call("ICC", SHROUT_FLEISS, "oneway", "single", "lower", 1.0)
    with raises_code("#NUM!", "confidence"):
        ag.intraclass_correlation(SHROUT_FLEISS, model="oneway", unit="single", confidence=0.0)
    # Ratings of 1e300 are computed, no longer refused (issue 16, item 3): the ICC of the same ratings
    # divided by 1e300 (the ICC is a ratio of mean squares, free of the scale).
    big = ag.intraclass_correlation([[1e300, -1e300], [2e300, 1e300], [0, 1]], model="oneway", unit="single")
    small = ag.intraclass_correlation([[1, -1], [2, 1], [0, 1e-300]], model="oneway", unit="single")
    assert big.estimate == pytest.approx(small.estimate, rel=1e-12)


# ---------------------------------------------------------------- Cohen's kappa

def table_of(a, b, categories):
    index = {c: i for i, c in enumerate(categories)}
    t = np.zeros((len(categories), len(categories)))
    for x, y in zip(a, b):
        t[index[x], index[y]] += 1
    return t


@pytest.mark.parametrize("seed", [1, 2, 3])
@pytest.mark.parametrize("weights", ["none", "linear", "quadratic"])
def test_cohen_kappa_against_statsmodels_and_sklearn(seed, weights):
    # Reference libraries: statsmodels cohens_kappa (contingency table) and sklearn cohen_kappa_score.
    rng = np.random.default_rng(seed)
    a = rng.integers(1, 6, 80)
    b = np.clip(a + rng.integers(-1, 2, 80), 1, 5)
    a[:5], b[:5] = [1, 2, 3, 4, 5], [1, 2, 3, 4, 5]  # every category occurs, so ranks equal values
    ours = call("COHEN_KAPPA", a.tolist(), b.tolist(), weights)
    wt = {"none": None, "linear": "linear", "quadratic": "quadratic"}[weights]
    sm = cohens_kappa(table_of(a, b, [1, 2, 3, 4, 5]), wt=wt, return_results=False)
    sk = cohen_kappa_score(a, b, weights=None if weights == "none" else weights)
    assert ours == pytest.approx(sm, rel=1e-12)
    assert ours == pytest.approx(sk, rel=1e-12)


def test_cohen_kappa_irr_anxiety():
    # R irr kappa2(anxiety[, 2:3]) = -0.006289308 (as carried in statsmodels' test suite).
    assert call("COHEN_KAPPA", ANXIETY[:, 1].tolist(), ANXIETY[:, 2].tolist()) == pytest.approx(
        -0.006289308, abs=5e-10)


@pytest.mark.parametrize("wt", ["linear", "quadratic"])
def test_cohen_kappa_weights_use_category_values(wt):
    # Raters 2 and 3 of irr's anxiety data never use 5 on the 1-6 scale. Our weights follow the values,
    # i.e. statsmodels cohens_kappa on the full 6 x 6 table with the empty category kept; R irr (and
    # sklearn) renumber the observed categories instead, giving 0.1459075 / 0.2520325 (irr kappa2 "equal"
    # and "squared", as carried in statsmodels' tests): a documented difference of convention.
    a, b = ANXIETY[:, 1], ANXIETY[:, 2]
    ours = call("COHEN_KAPPA", a.tolist(), b.tolist(), wt)
    assert ours == pytest.approx(cohens_kappa(table_of(a, b, [1, 2, 3, 4, 5, 6]), wt=wt,
                                              return_results=False), rel=1e-12)
    renumbered = {"linear": 0.1459075, "quadratic": 0.2520325}[wt]
    assert cohen_kappa_score(a, b, weights=wt) == pytest.approx(renumbered, abs=5e-8)
    assert abs(ours - renumbered) > 1e-3


def test_cohen_kappa_non_integer_values_against_statsmodels_weights():
    # statsmodels cohens_kappa with weights = the category values (wt="linear" uses |w_i - w_j|).
    cats = [0.5, 1.0, 2.5, 4.0]
    rng = np.random.default_rng(5)
    a = rng.choice(cats, 60)
    b = np.where(rng.random(60) < 0.6, a, rng.choice(cats, 60))
    sm = cohens_kappa(table_of(a, b, cats), weights=np.array(cats), wt="linear", return_results=False)
    assert call("COHEN_KAPPA", a.tolist(), b.tolist(), "linear") == pytest.approx(sm, rel=1e-12)


def test_cohen_kappa_text_labels_and_blanks():
    # Text categories and dropped blank pairs, against sklearn on the complete pairs.
    a = ["hire", "hire", None, "hold", "reject", "hire", "hold", "hire"]
    b = ["hire", "hold", "hold", "hold", "reject", "hire", "", "reject"]
    keep = [i for i in range(len(a)) if a[i] and b[i]]
    expected = cohen_kappa_score([a[i] for i in keep], [b[i] for i in keep])
    assert call("COHEN_KAPPA", a, b) == pytest.approx(expected, rel=1e-12)
    assert call("COHEN_KAPPA", [[x for x in a]], [[x for x in b]]) == pytest.approx(expected, rel=1e-12)  # rows


def test_cohen_kappa_errors():
    with raises_code("#VALUE!", "rater_b", match="text"):
        call("COHEN_KAPPA", [1, 2, 3], [1, "two", 3], "linear")
    with raises_code("#VALUE!", "rater_b", match="as many cells"):
        call("COHEN_KAPPA", [1, 2, 3], [1, 2])
    with raises_code("#N/A", "rater_a"):
        call("COHEN_KAPPA", [1, None, 3], [None, 2, 3])
    with raises_code("#DIV/0!", "rater_a"):
        call("COHEN_KAPPA", ["a", "a", "a"], ["a", "a", "a"])
    with raises_code("#DIV/0!", "rater_a"):
        call("COHEN_KAPPA", [2, 2, 2], [2, 2, 2], "quadratic")
    with raises_code("#DIV/0!", "rater_a"):
        call("COHEN_KAPPA", [0.1] * 3, [0.1] * 3, "quadratic")
    with raises_code("#VALUE!", "weights"):
        call("COHEN_KAPPA", [1, 2], [1, 2], "cubic")


# ---------------------------------------------------------------- Fleiss' kappa

def test_fleiss_kappa_fleiss_1971():
    # Fleiss (1971): kappa = 0.430 (published); R irr kappam.fleiss: 0.4302445; statsmodels fleiss_kappa.
    ours = call("FLEISS_KAPPA", FLEISS_1971)
    assert ours == pytest.approx(0.430, abs=5e-4)
    assert ours == pytest.approx(0.4302445, abs=5e-8)
    assert ours == pytest.approx(fleiss_kappa(aggregate_raters(np.array(FLEISS_1971))[0]), rel=1e-12)


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_fleiss_kappa_against_statsmodels_text_labels(seed):
    rng = np.random.default_rng(seed)
    truth = rng.integers(0, 4, 50)
    labels = np.array(["Group A", "Group B", "x", "y"], dtype=object)
    codes = np.where(rng.random((50, 5)) < 0.7, truth[:, None], rng.integers(0, 4, (50, 5)))
    data = labels[codes].tolist()
    assert call("FLEISS_KAPPA", data) == pytest.approx(fleiss_kappa(aggregate_raters(codes)[0]), rel=1e-12)


def test_fleiss_kappa_blank_policy():
    # Empty rows are skipped; rows with the same count of ratings in different columns are fine
    # (Fleiss 1971: the raters need not be the same); statsmodels on the category counts as reference.
    data = [[1, 1, 2, None], [None, 2, 2, 2], [None, None, None, None], [3, None, 3, 3], [1, 2, 3, None]]
    counts = np.array([[2, 1, 0], [0, 3, 0], [0, 0, 3], [1, 1, 1]])
    assert call("FLEISS_KAPPA", data) == pytest.approx(fleiss_kappa(counts), rel=1e-12)
    with raises_code("#N/A", "ratings", match="row 2 has 2 ratings"):
        call("FLEISS_KAPPA", [[1, 1, 2], [1, None, 2], [2, 2, 2]])


def test_fleiss_kappa_errors():
    with raises_code("#DIV/0!", "ratings"):
        call("FLEISS_KAPPA", [["a", "a"], ["a", "a"]])
    with raises_code("#N/A", "ratings"):
        call("FLEISS_KAPPA", [[1, 2, 1]])
    with raises_code("#N/A", "ratings", match="at least 2 ratings per row"):
        call("FLEISS_KAPPA", [[1, None], [2, None]])
    with raises_code("#VALUE!", "ratings", match="logical"):
        call("FLEISS_KAPPA", [[1, True], [2, 2]])


# ---------------------------------------------------------------- Krippendorff's alpha

def as_package_input(units_by_raters):
    """Our units x raters cells as the krippendorff package's raters x units float array."""
    return np.array([[np.nan if c is None else c for c in row] for row in units_by_raters], dtype=float).T


@pytest.mark.parametrize("level, published", [
    ("nominal", 0.743),   # Krippendorff (2011), published
    ("ordinal", 0.815),   # krippendorff package docs, same example
    ("interval", 0.849),  # from memory
    ("ratio", 0.797),     # krippendorff package docs, same example
])
def test_krippendorff_2011_example(level, published):
    ours = call("KRIPPENDORFF_ALPHA", KRIPPENDORFF_2011, level)
    assert ours == pytest.approx(published, abs=5e-4)
    reference = krippendorff.alpha(as_package_input(KRIPPENDORFF_2011), level_of_measurement=level)
    assert ours == pytest.approx(reference, rel=1e-12)


@pytest.mark.parametrize("seed", [1, 2, 3, 4])
@pytest.mark.parametrize("level", ["nominal", "ordinal", "interval", "ratio"])
def test_krippendorff_against_package_random_with_missing(seed, level):
    # Reference library: krippendorff.alpha (raters x units, so transposed) on random 1-7 ratings with
    # about a quarter missing.
    rng = np.random.default_rng(seed)
    truth = rng.integers(1, 8, (60, 1))
    x = np.clip(truth + rng.integers(-2, 3, (60, 6)), 1, 7).astype(float)
    x[rng.random(x.shape) < 0.25] = np.nan
    cells = [[None if math.isnan(c) else c for c in row] for row in x.tolist()]
    reference = krippendorff.alpha(x.T, level_of_measurement=level)
    assert call("KRIPPENDORFF_ALPHA", cells, level) == pytest.approx(reference, rel=1e-10)


@pytest.mark.parametrize("level", ["ordinal", "interval", "ratio"])
def test_krippendorff_continuous_values_against_package(level):
    # Many distinct values (no coincidence table is stored): still equal to the package.
    rng = np.random.default_rng(9)
    x = rng.gamma(3.0, 1.0, (40, 1)) + rng.gamma(1.0, 0.5, (40, 4))
    x[rng.random(x.shape) < 0.2] = np.nan
    assert call("KRIPPENDORFF_ALPHA", x, level) == pytest.approx(
        krippendorff.alpha(x.T, level_of_measurement=level), rel=1e-10)


def test_krippendorff_nominal_text_labels():
    labels = {1: "very low", 2: "low", 3: "mid", 4: "high", 5: "very high"}
    text = [[None if c is None else labels[c] for c in row] for row in KRIPPENDORFF_2011]
    assert call("KRIPPENDORFF_ALPHA", text) == pytest.approx(call("KRIPPENDORFF_ALPHA", KRIPPENDORFF_2011), rel=1e-15)


def test_krippendorff_errors():
    with raises_code("#DIV/0!", "ratings"):
        call("KRIPPENDORFF_ALPHA", [[1, 1], [1, 1], [1, None]])
    with raises_code("#N/A", "ratings"):
        call("KRIPPENDORFF_ALPHA", [[1, None], [None, 2]])
    with raises_code("#NUM!", "ratings", match="at least 0"):
        call("KRIPPENDORFF_ALPHA", [[1, -2], [3, 3]], "ratio")
    with raises_code("#VALUE!", "ratings", match="text"):
        call("KRIPPENDORFF_ALPHA", [[1, "b"], [3, 3]], "interval")
    with raises_code("#VALUE!", "level"):
        call("KRIPPENDORFF_ALPHA", [[1, 2], [3, 3]], "cardinal")


# ---------------------------------------------------------------- rwg and rwg(j)

def test_uniform_null_variance():
    # James, Demaree & Wolf (1984): sigma^2_EU = (A^2 - 1)/12; 2 for five options (R multilevel's ranvar=2).
    assert ag.uniform_null_variance(5) == 2.0
    # by definition: variance of the discrete uniform on 1..A (scipy.stats.randint as reference)
    for a in (2, 3, 7, 9):
        assert ag.uniform_null_variance(a) == pytest.approx(stats.randint(1, a + 1).var(), rel=1e-14)


def test_rwg_worked_by_hand():
    # Worked by hand from the definition: ratings 4,4,5,3,4 have s^2 = 0.5 (n - 1); 1 - 0.5/2 = 0.75.
    assert call("RWG", [4, 4, 5, 3, 4], 5) == pytest.approx(0.75, rel=1e-14)
    assert call("RWG", [[4, None, 4, 5, 3, 4]], 5) == pytest.approx(0.75, rel=1e-14)  # a row, with a blank
    assert call("RWG", [3, 3, 3], 5) == 1.0  # full agreement (by definition)
    # 7-point scale: sigma^2 = 4; ratings 5, 6, 6, 7 have s^2 = 2/3, rwg = 1 - 1/6 (worked by hand)
    assert call("RWG", [5, 6, 6, 7], 7) == pytest.approx(1 - 1 / 6, rel=1e-14)


def test_rwg_truncates_negative_values_to_zero():
    # Split ratings 1 and 5 have s^2 = 16/3 > 2; rwg is set to 0 (James et al. 1984 recommendation,
    # as documented in R's multilevel package).
    assert call("RWG", [1, 5, 1, 5], 5) == 0.0


def test_rwg_j_by_definition():
    # James, Demaree & Wolf (1984): rwg(j) = J(1 - q)/(J(1 - q) + q), q = mean item variance / sigma^2_EU.
    rng = np.random.default_rng(4)
    x = np.clip(4 + rng.integers(-1, 2, (8, 6)), 1, 5).astype(float)
    q = x.var(axis=0, ddof=1).mean() / 2.0
    assert call("RWG_J", x.tolist(), 5) == pytest.approx(6 * (1 - q) / (6 * (1 - q) + q), rel=1e-14)
    # one item: rwg(j) reduces to rwg
    assert call("RWG_J", [[4], [4], [5], [3], [4]], 5) == pytest.approx(call("RWG", [4, 4, 5, 3, 4], 5), rel=1e-14)


def test_rwg_j_blanks_per_item_and_truncation():
    data = [[4, 5], [4, None], [5, 5], [3, 4]]
    q = (np.var([4, 4, 5, 3], ddof=1) + np.var([5, 5, 4], ddof=1)) / 2 / 2.0
    assert call("RWG_J", data, 5) == pytest.approx(2 * (1 - q) / (2 * (1 - q) + q), rel=1e-14)
    # mean variance at or above the null: truncated to 0 (James et al. 1984, as in R's multilevel docs)
    assert call("RWG_J", [[1, 1], [5, 5], [1, 5], [5, 1]], 5) == 0.0


def test_rwg_errors():
    with raises_code("#NUM!", "ratings", match="wider than a 5-point scale"):
        call("RWG", [1, 6, 3], 5)
    with raises_code("#NUM!", "ratings", match="column 2"):
        call("RWG_J", [[1, 1], [2, 7]], 5)
    with raises_code("#NUM!", "scale_points"):
        call("RWG", [1, 1], 1)
    with raises_code("#NUM!", "scale_points", match="whole number"):
        call("RWG", [1, 1], 4.5)
    with raises_code("#N/A", "ratings"):
        call("RWG", [3, None], 5)
    with raises_code("#N/A", "ratings", match="column 2"):
        call("RWG_J", [[3, 3], [4, None]], 5)
    with raises_code("#VALUE!", "ratings", match="single row or column"):
        call("RWG", [[1, 2], [3, 4]], 5)


@pytest.mark.parametrize("level", ["nominal", "ordinal", "interval", "ratio"])
@pytest.mark.parametrize("continuous", [False, True])
def test_krippendorff_table_and_pairwise_sums_agree(level, continuous, monkeypatch):
    # The coincidence matrix and the table-free sums are two routes to the same alpha; both against the
    # krippendorff package.
    rng = np.random.default_rng(21)
    x = rng.gamma(3.0, 1.0, (50, 1)) + rng.gamma(1.0, 0.5, (50, 5))
    if not continuous:
        x = np.round(x)
    x[rng.random(x.shape) < 0.3] = np.nan
    reference = krippendorff.alpha(x.T, level_of_measurement=level)
    monkeypatch.setattr(kr, "COINCIDENCE_TABLE_MAX_VALUES", 10**9)
    table = call("KRIPPENDORFF_ALPHA", x, level)
    monkeypatch.setattr(kr, "COINCIDENCE_TABLE_MAX_VALUES", 0)
    direct = call("KRIPPENDORFF_ALPHA", x, level)
    assert table == pytest.approx(reference, rel=1e-10)
    assert direct == pytest.approx(reference, rel=1e-10)


def test_rwg_extreme_but_valid_inputs():
    # Huge equal ratings still agree perfectly; a huge scale makes the uniform null variance overwhelm
    # any observed variance (rwg -> 1, by definition).
    assert call("RWG", [1e308, 1e308], 5) == 1.0
    assert call("RWG", [1, 2, 3], 1e300) == 1.0
    assert call("RWG_J", [[1e300, 1e300], [1e300, 1e300]], 5) == 1.0


# ---------------------------------------------------------------- one policy for text categories (issue 16, item 4)

# The same decisions written with different letter case and spacing: a data-entry slip, not another category
# (the project's policy for group labels, funcs.impact.group_key, common practice). Folded, the two raters agree
# on every person, so each coefficient is 1 (by definition of perfect agreement).
HIRE_A = ["Hire", "hire", "Reject", "reject", "Hire", " Reject"]
HIRE_B = ["hire", "Hire ", "reject", "REJECT", "hire", "Reject"]


def test_letter_case_does_not_split_categories_in_cohens_kappa():
    assert call("COHEN_KAPPA", HIRE_A, HIRE_B) == 1.0
    # against scikit-learn on the folded labels: the same value with the labels written one way
    folded = cohen_kappa_score([x.strip().lower() for x in HIRE_A], [x.strip().lower() for x in HIRE_B])
    mixed = [["Hire", "hire"], ["Reject", "reject"], ["hire", "Hire"], ["hire", "reject"], ["REJECT", "reject"]]
    ours = call("COHEN_KAPPA", [r[0] for r in mixed], [r[1] for r in mixed])
    ref = cohen_kappa_score([r[0].lower() for r in mixed], [r[1].lower() for r in mixed])
    assert folded == 1.0 and ours == pytest.approx(ref, abs=1e-12)


def test_letter_case_does_not_split_categories_in_fleiss_kappa_and_krippendorff():
    rows = [[a, b] for a, b in zip(HIRE_A, HIRE_B)]
    assert call("FLEISS_KAPPA", rows) == 1.0
    assert call("KRIPPENDORFF_ALPHA", rows) == 1.0
    # a real disagreement survives folding: the krippendorff package on the folded labels as codes
    rows[0][1] = "REJECT"
    codes = {"hire": 0.0, "reject": 1.0}
    reference = krippendorff.alpha(np.array([[codes[a.strip().lower()] for a, _ in rows],
                                             [codes[b.strip().lower()] for _, b in rows]]),
                                   level_of_measurement="nominal")
    assert call("KRIPPENDORFF_ALPHA", rows) == pytest.approx(reference, abs=1e-12)


def test_a_number_and_its_text_are_one_category():
    # documented policy (group_key): 1, 1.0 and "1" are one category in every kappa and in nominal alpha
    assert call("COHEN_KAPPA", [1, 2, "1", 2.0], ["1", 2, 1.0, "2"]) == 1.0
    assert call("FLEISS_KAPPA", [[1, "1"], [2, "2 "], ["1", 1.0]]) == 1.0
    assert call("KRIPPENDORFF_ALPHA", [[1, "1"], [2, "2"], ["1", 1.0]]) == 1.0


# ---------------------------------------------------------------- ICC documentation (issue 16, item 5)

def test_icc_documents_its_p_value_degrees_of_freedom_and_the_unbounded_average_agreement_form():
    for doc in (ag.intraclass_correlation.__doc__, ag.intraclass_correlation_part.__doc__):
        assert "McGraw & Wong (1996)" in doc and "(n − 1, (n − 1)(k − 1))" in doc and "pingouin" in doc
        assert "no" in doc and "lower bound" in doc


def test_icc_average_agreement_has_no_lower_bound(pingouin_unrounded):
    # 4 people, 2 raters who disagree more than the people differ: ICC(A,k) far below -1, as pingouin gives it
    data = [[5, 2], [1, 5], [4, 1], [1, 2]]
    ours = call("ICC", data, "agreement", "average")
    assert ours < -100
    assert ours == pytest.approx(pingouin_unrounded(data).loc["ICC(A,k)", "ICC"], rel=1e-9)
