"""One impact comparison with its uncertainty, checked against outside values.

Sources:
* IMPACT_RATIO_CI: scipy.stats.contingency.relative_risk(...).confidence_interval() (the Katz log method,
  reference library) and statsmodels.stats.proportion.confint_proportions_2indep(compare="ratio", method="log")
  (reference library: it computes ratio · exp(∓ z √(1/x1 − 1/n1 + 1/x2 − 1/n2)), the same formula); scipy's
  own docstring example (10 of 75 against 12 of 225: ratio 2.5, interval 1.1261564003469628 to
  5.549850800541033), a published worked example of the log interval;
* IMPACT_ODDS_RATIO: statsmodels.stats.contingency_tables.Table2x2.oddsratio (reference library) and its
  definition in exact fractions;
* IMPACT_FLIP: a one-by-one search with scipy.stats.fisher_exact (reference library);
* IMPACT_SMALL_NUMBERS: expected counts from scipy.stats.contingency.expected_freq (reference library) against
  Cochran's (1954) threshold of 5;
* passing_counts: a plain Python count of the rule "score at or above the cut".
"""

import math
from fractions import Fraction

import numpy as np
import pytest
from scipy import stats
from scipy.stats.contingency import expected_freq, relative_risk
from statsmodels.stats.contingency_tables import Table2x2
from statsmodels.stats.proportion import confint_proportions_2indep

from helpers import raises_code
from trueband.funcs import call, catalog
from trueband.funcs import impact_intervals as ii
from trueband.funcs.registry import call_column


def random_tables(seed, n, max_applicants=60, min_selected=0):
    rng = np.random.default_rng(seed)
    for _ in range(n):
        fa, ra = (int(x) for x in rng.integers(1, max_applicants + 1, 2))
        yield int(rng.integers(0, fa + 1)), fa, int(rng.integers(min(min_selected, ra), ra + 1)), ra


# ---------------------------------------------------------------- IMPACT_RATIO_CI

def test_scipy_docstring_example_of_the_log_interval():
    # scipy.stats.contingency.relative_risk docstring: 10 of 75 against 12 of 225, relative risk 2.5,
    # ConfidenceInterval(low=1.1261564003469628, high=5.549850800541033).
    assert call("IMPACT_RATIO_CI", 10, 75, 12, 225, "estimate") == 2.5
    assert call("IMPACT_RATIO_CI", 10, 75, 12, 225, "lower") == pytest.approx(1.1261564003469628, rel=1e-14)
    assert call("IMPACT_RATIO_CI", 10, 75, 12, 225, "upper") == pytest.approx(5.549850800541033, rel=1e-14)


@pytest.mark.parametrize("confidence", [0.8, 0.9, 0.95, 0.99, 0.999])
def test_ratio_interval_matches_scipy_and_statsmodels(confidence):
    for fs, fa, rs, ra in random_tables(17, 60, min_selected=1):
        if fs == 0 or (fs == fa and rs == ra):
            continue
        ref = relative_risk(fs, fa, rs, ra).confidence_interval(confidence)  # scipy (reference library)
        low, upp = confint_proportions_2indep(fs, fa, rs, ra, compare="ratio", method="log",
                                              alpha=1 - confidence)  # statsmodels (reference library)
        got_low = call("IMPACT_RATIO_CI", fs, fa, rs, ra, "lower", confidence)
        got_high = call("IMPACT_RATIO_CI", fs, fa, rs, ra, "upper", confidence)
        assert got_low == pytest.approx(ref.low, rel=1e-12) and got_low == pytest.approx(low, rel=1e-12)
        assert got_high == pytest.approx(ref.high, rel=1e-12) and got_high == pytest.approx(upp, rel=1e-12)


def test_estimate_is_the_impact_ratio_and_lies_inside():
    for fs, fa, rs, ra in random_tables(3, 80, min_selected=1):
        if fs == 0 or (fs == fa and rs == ra):
            continue
        est = call("IMPACT_RATIO_CI", fs, fa, rs, ra, "estimate")
        assert est == call("IMPACT_RATIO", fs, fa, rs, ra) == float(Fraction(fs * ra, fa * rs))
        assert call("IMPACT_RATIO_CI", fs, fa, rs, ra, "lower") < est < call("IMPACT_RATIO_CI", fs, fa, rs, ra,
                                                                              "upper")


def test_zero_focal_selections_lower_limit_zero_upper_refused():
    # scipy returns ConfidenceInterval(low=0.0, high=nan) when the exposed count is 0 (the epitools convention).
    assert relative_risk(0, 30, 10, 40).confidence_interval().low == 0.0
    assert call("IMPACT_RATIO_CI", 0, 30, 10, 40, "lower") == 0.0
    assert call("IMPACT_RATIO_CI", 0, 30, 10, 40, "estimate") == 0.0
    with raises_code("#NUM!", "focal_selected"):
        call("IMPACT_RATIO_CI", 0, 30, 10, 40, "upper")
    assert ii.impact_ratio_result(0, 30, 10, 40).confidence_interval() == ii.ConfidenceInterval(0.0, math.inf)


def test_other_zero_cells():
    with raises_code("#DIV/0!", "ref_selected"):  # the ratio itself is undefined, as IMPACT_RATIO
        call("IMPACT_RATIO_CI", 3, 30, 0, 40, "lower")
    with raises_code("#DIV/0!", "focal_selected"):  # everybody selected: zero-width interval refused
        call("IMPACT_RATIO_CI", 30, 30, 40, 40, "lower")
    # A whole group selected in one group only is an ordinary case (scipy gives the same limits).
    ref = relative_risk(30, 30, 20, 40).confidence_interval()
    assert call("IMPACT_RATIO_CI", 30, 30, 20, 40, "upper") == pytest.approx(ref.high, rel=1e-13)


@pytest.mark.parametrize("args, code, argument", [
    ((5, 4, 3, 10, "lower"), "#NUM!", "focal_selected"),
    ((-1, 4, 3, 10, "lower"), "#NUM!", "focal_selected"),
    ((1.5, 4, 3, 10, "lower"), "#NUM!", "focal_selected"),
    ((0, 0, 3, 10, "lower"), "#DIV/0!", "focal_applicants"),
    # (common practice: spreadsheet apps answer bad text with #VALUE!)
    ((1, 4, 3, 10, "middle"), "#VALUE!", "part"),
    ((1, 4, 3, 10, "lower", 1.0), "#NUM!", "confidence"),
    ((1, 4, 3, 10, "lower", "x"), "#VALUE!", "confidence"),
])
def test_ratio_interval_refuses_bad_input(args, code, argument):
    with raises_code(code, argument):
        call("IMPACT_RATIO_CI", *args)


def test_ratio_interval_column_path_equals_single_calls():
    fs = [12, 0, 30, 5, 7]
    got = call_column("IMPACT_RATIO_CI", {"focal_selected": fs},
                      {"focal_applicants": 40, "ref_selected": 48, "ref_applicants": 80, "part": "upper"})
    for x, g in zip(fs, got):
        if x == 0:
            assert g.code == "#NUM!"
        else:
            assert g == pytest.approx(relative_risk(x, 40, 48, 80).confidence_interval().high, rel=1e-13)
    low, high = ii.impact_ratio_limits(np.array(fs), 40, 48, 80, 0.9)
    for x, lo, hi in zip(fs, low, high):
        if x:
            ref = relative_risk(x, 40, 48, 80).confidence_interval(0.9)
            assert (lo, hi) == pytest.approx((ref.low, ref.high), rel=1e-13)
        else:
            assert (lo, hi) == (0.0, math.inf)


# ---------------------------------------------------------------- IMPACT_ODDS_RATIO

def test_odds_ratio_matches_statsmodels_and_the_definition():
    for fs, fa, rs, ra in random_tables(5, 80, min_selected=1):
        if fs == fa or rs == 0:
            continue
        exact = Fraction(fs, fa - fs) / Fraction(rs, ra - rs) if rs < ra else Fraction(0)
        got = call("IMPACT_ODDS_RATIO", fs, fa, rs, ra)
        assert got == float(exact)
        if fs and rs < ra:  # statsmodels Table2x2 (reference library), rows focal/reference, columns selected/not
            table = Table2x2(np.array([[fs, fa - fs], [rs, ra - rs]], dtype=float))
            assert got == pytest.approx(table.oddsratio, rel=1e-13)


def test_odds_ratio_zero_cells():
    assert call("IMPACT_ODDS_RATIO", 0, 10, 5, 10) == 0.0
    assert call("IMPACT_ODDS_RATIO", 3, 10, 10, 10) == 0.0  # reference odds infinite
    with raises_code("#DIV/0!", "focal_selected"):
        call("IMPACT_ODDS_RATIO", 10, 10, 5, 10)
    with raises_code("#DIV/0!", "ref_selected"):
        call("IMPACT_ODDS_RATIO", 3, 10, 0, 10)


# ---------------------------------------------------------------- IMPACT_FLIP

def _fisher_p(fs, fa, rs, ra):
    return stats.fisher_exact([[fs, fa - fs], [rs, ra - rs]])[1]  # scipy (reference library)


def _flip_one_by_one(fs, fa, rs, ra, alpha):
    now = _fisher_p(fs, fa, rs, ra) < alpha
    step = (1 if fs * ra < rs * fa else -1) if now else -1
    k, a = 0, fs
    while 0 <= a + step <= fa:
        a += step
        k += 1
        if (_fisher_p(a, fa, rs, ra) < alpha) != now:
            return k
    return None


@pytest.mark.slow  # seconds: the whole suite runs it, the quick loop leaves it out
@pytest.mark.parametrize("alpha", [0.05, 0.01])
def test_flip_matches_a_one_by_one_search_with_scipy(alpha):
    checked = 0
    for fs, fa, rs, ra in random_tables(11, 90, max_applicants=90):
        want = _flip_one_by_one(fs, fa, rs, ra, alpha)
        if want is None:
            with raises_code("#NUM!", "focal_selected"):
                call("IMPACT_FLIP", fs, fa, rs, ra, alpha)
        else:
            assert call("IMPACT_FLIP", fs, fa, rs, ra, alpha) == want, (fs, fa, rs, ra)
            checked += 1
    assert checked > 50


@pytest.mark.parametrize("counts", [(300, 1500, 700, 2500), (600, 2000, 500, 2000), (40, 400, 900, 3000)])
def test_flip_beyond_the_one_by_one_range(counts):
    # Flip counts above 32 use the doubling search: check it against the one-by-one search (scipy's Fisher p).
    fs, fa, rs, ra = counts
    want = _flip_one_by_one(fs, fa, rs, ra, 0.05)
    assert want is not None and want > 32
    assert call("IMPACT_FLIP", fs, fa, rs, ra) == want


def test_flip_worked_example():
    # 12 of 40 against 48 of 80: Fisher p = 0.0034 (scipy); 16 of 40 gives p >= 0.05, 15 of 40 does not.
    assert _fisher_p(15, 40, 48, 80) < 0.05 <= _fisher_p(16, 40, 48, 80)
    assert call("IMPACT_FLIP", 12, 40, 48, 80) == 4


def test_flip_refusals():
    with raises_code("#NUM!", "focal_selected"):  # not significant and nothing to remove
        call("IMPACT_FLIP", 0, 3, 1, 3)
    with raises_code("#NUM!", "alpha"):
        call("IMPACT_FLIP", 1, 3, 1, 3, 0)


# ---------------------------------------------------------------- small numbers

def test_small_numbers_thresholds_against_expected_frequencies():
    for fs, fa, rs, ra in random_tables(23, 200, max_applicants=80):
        table = np.array([[fs, fa - fs], [rs, ra - rs]])
        if table.sum(axis=0).min() == 0:
            expected_min = 0.0
        else:
            expected_min = expected_freq(table).min()  # scipy (reference library)
        want = fa < 30 or ra < 30 or expected_min < 5  # 30: common practice; 5: Cochran (1954)
        assert call("IMPACT_SMALL_NUMBERS", fs, fa, rs, ra) is bool(want), (fs, fa, rs, ra)
        s = ii.small_numbers(fs, fa, rs, ra)
        assert s.min_expected == pytest.approx(expected_min, abs=1e-12)
        assert s.any is bool(want)


def test_small_numbers_options_and_column():
    assert call("IMPACT_SMALL_NUMBERS", 20, 40, 30, 40, 50) is True
    assert call("IMPACT_SMALL_NUMBERS", 20, 40, 30, 40, 10, 1) is False
    got = call_column("IMPACT_SMALL_NUMBERS", {"focal_applicants": [12, 120]},
                      {"focal_selected": 2, "ref_selected": 48, "ref_applicants": 80})
    assert got == [True, False]


# ---------------------------------------------------------------- every cut

def test_passing_counts_against_a_plain_count():
    rng = np.random.default_rng(8)
    scores = rng.integers(0, 30, 500).astype(float)
    scores[rng.random(500) < 0.05] = np.nan
    labels = rng.choice(["Men", "men ", "Women", "", None], 500).tolist()
    pc = ii.passing_counts(scores, labels)
    assert pc.groups == ("Men", "Women")
    for i, cut in enumerate(pc.cuts):
        for j, name in enumerate(pc.groups):
            want = sum(1 for s, g in zip(scores, labels)
                       if not np.isnan(s) and g and g.strip().lower() == name.lower() and s >= cut)
            assert pc.passing[i, j] == want
    fs, fa, rs, ra = pc.counts("Women", "Men")
    assert fa == sum(1 for s, g in zip(scores, labels) if not np.isnan(s) and g == "Women")
    # The whole column of cuts at once, the lowest cut (everybody passes: no interval) left out.
    low, high = ii.impact_ratio_limits(fs[1:], fa, rs[1:], ra)
    assert low.shape == high.shape == (pc.cuts.size - 1,)
    k = pc.cuts.size // 2
    ref = relative_risk(int(fs[k]), fa, int(rs[k]), ra).confidence_interval()
    assert (low[k - 1], high[k - 1]) == pytest.approx((ref.low, ref.high), rel=1e-13)


# ---------------------------------------------------------------- catalog

def test_new_impact_entries_carry_the_caution():
    # Issue requirement (common practice in the trade): impact figures are indicators, not legal findings.
    for entry in catalog():
        if entry["topic"] in ("impact_intervals", "impact_pooled"):
            assert "not legal findings" in entry["caution"], entry["name"]
