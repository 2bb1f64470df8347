"""Adverse impact pooled across strata (the Mantel-Haenszel family), checked against outside values.

Sources:
* statsmodels.stats.contingency_tables.StratifiedTable (reference library): oddsratio_pooled,
  logodds_pooled_se and oddsratio_pooled_confint (Robins-Breslow-Greenland), test_null_odds(correction=True
  and False) (CMH), test_equal_odds(adjust=True and False) (Breslow-Day, with and without Tarone);
* the Penicillin and Rabbits data of Agresti (1990, pp. 231-237), printed with R's mantelhaen.test example
  (its comments: "p = 0.047" for the classical test, "p - 0.040" for the exact conditional test, "p = 0.020"
  for the one-sided exact test of a higher cure rate for immediate injection); the array and the comments were
  checked against a copy of R's example file (repository migue/r-ide, .../bison/mantelhaen.test.R, found by
  search); R's printed output of mantelhaen.test(Rabbits) and mantelhaen.test(Rabbits, exact = TRUE),
  checked in several independent copies found by search: "Mantel-Haenszel X-squared = 3.9286, df = 1, p-value
  = 0.04747", "95 percent confidence interval: 1.026713 47.725133", "common odds ratio 7", and for the exact
  test "S = 16, p = 0.03994";
* the Berkeley graduate admissions of Bickel, Hammel & O'Connell (1975, Science 187, 398-404), the classic
  reversal within strata; department counts from memory, checked here against the published totals (1,198 of
  2,691 men and 557 of 1,835 women admitted; the men's total as R's UCBAdmissions help page states it, "2691
  male applicants, of whom 1198 (44.5%) were admitted", checked by search); R's mantelhaen.test example says of
  them "no evidence for association between admission and gender when adjusted for department" and that the
  homogeneous odds ratio assumption "may be violated" (Woolf p = 0.003);
* Breslow-Day on Agresti's AZT data (AZT use and AIDS symptoms by race; Agresti, An Introduction to
  Categorical Data Analysis, 2nd ed., 2007, section 4.4.3 as the worked R code found by search labels it):
  DescTools::BreslowDayTest on the array c(14, 32, 93, 81, 11, 12, 52, 43) gives p = 0.2382 (that code's
  comment, found by search); Agresti's printed statistic 1.39 on 1 df is from memory;
* the exact conditional test: scipy.stats.fisher_exact for one stratum (reference library) and, for several,
  the conditional distribution enumerated by brute force in exact rational arithmetic (math.comb and
  fractions), independent of the convolution.
"""

import itertools
import math
from fractions import Fraction

import numpy as np
import pytest
from scipy import stats
from statsmodels.stats.contingency_tables import StratifiedTable

from helpers import raises_code
from trueband.funcs import call
from trueband.funcs import impact_pooled as ip

RABBITS = [  # penicillin level 1/8, 1/4, 1/2, 1, 4: immediate injection (focal) cured, of; delayed cured, of
    [0, 6, 0, 5], [3, 6, 0, 6], [6, 6, 2, 6], [5, 6, 6, 6], [2, 2, 5, 5]]

BERKELEY = [  # departments A-F: women admitted, women applied; men admitted, men applied
    [89, 108, 512, 825], [17, 25, 353, 560], [202, 593, 120, 325],
    [131, 375, 138, 417], [94, 393, 53, 191], [24, 341, 22, 373]]


def stratified(rows) -> StratifiedTable:
    rows = np.asarray(rows, dtype=float)
    t = np.empty((2, 2, len(rows)))
    t[0, 0], t[0, 1] = rows[:, 0], rows[:, 1] - rows[:, 0]
    t[1, 0], t[1, 1] = rows[:, 2], rows[:, 3] - rows[:, 2]
    return StratifiedTable(t)


def random_strata(seed, k, size=40, informative=True):
    rng = np.random.default_rng(seed)
    rows = []
    while len(rows) < k:
        fa, ra = (int(x) for x in rng.integers(2, size + 1, 2))
        rate = rng.uniform(0.1, 0.9)
        row = [int(rng.binomial(fa, rate * rng.uniform(0.5, 1))), fa, int(rng.binomial(ra, rate)), ra]
        a, b, c, d = row[0], fa - row[0], row[2], ra - row[2]
        if not informative or min(a + c, b + d) > 0 and min(a, b, c, d) > 0:
            rows.append(row)
    return rows


# ---------------------------------------------------------------- against statsmodels

@pytest.mark.parametrize("seed, k", [(1, 2), (2, 5), (3, 12), (4, 40)])
def test_mantel_haenszel_matches_statsmodels(seed, k):
    rows = random_strata(seed, k)
    ref = stratified(rows)
    mh = ip.mantel_haenszel(rows)
    assert mh.odds_ratio == pytest.approx(ref.oddsratio_pooled, rel=1e-12)
    assert mh.log_standard_error == pytest.approx(ref.logodds_pooled_se, rel=1e-12)
    for confidence in (0.9, 0.95, 0.99):
        low, high = ref.oddsratio_pooled_confint(alpha=1 - confidence)
        assert call("POOLED_ODDS_RATIO", rows, "lower", confidence) == pytest.approx(low, rel=1e-12)
        assert call("POOLED_ODDS_RATIO", rows, "upper", confidence) == pytest.approx(high, rel=1e-12)
    for correction in (True, False):
        test = ref.test_null_odds(correction=correction)
        got = ip.mantel_haenszel(rows, correction=correction)
        if correction and got.statistic == 0:
            continue
        assert got.statistic == pytest.approx(test.statistic, rel=1e-11)
        assert call("POOLED_IMPACT_P", rows, correction) == pytest.approx(test.pvalue, rel=1e-9, abs=1e-15)


@pytest.mark.parametrize("seed, k", [(5, 2), (6, 4), (7, 10), (8, 30)])
def test_breslow_day_matches_statsmodels(seed, k):
    rows = random_strata(seed, k)
    ref = stratified(rows)
    for tarone in (True, False):
        test = ref.test_equal_odds(adjust=tarone)
        got = ip.breslow_day(rows, tarone=tarone)
        assert got.statistic == pytest.approx(test.statistic, rel=1e-9, abs=1e-12)
        assert got.df == k - 1
        assert got.p_value == pytest.approx(test.pvalue, rel=1e-8, abs=1e-14)
    assert call("POOLED_HOMOGENEITY_P", rows) == pytest.approx(ref.test_equal_odds(adjust=True).pvalue, rel=1e-8)


def test_correction_is_not_applied_below_one_half():
    # R's mantelhaen.test takes off 0.5 only when |sum(a - E a)| >= 0.5; here the difference is 0.25.
    rows = [[1, 2, 1, 2], [1, 4, 1, 2]]
    mh = ip.mantel_haenszel(rows, correction=True)
    assert mh.statistic == pytest.approx(ip.mantel_haenszel(rows, correction=False).statistic, rel=1e-15)
    assert stratified(rows).test_null_odds(correction=False).statistic == pytest.approx(mh.statistic, rel=1e-12)


# ---------------------------------------------------------------- published examples

def test_penicillin_and_rabbits():
    # R's mantelhaen.test example (Agresti 1990): classical test p = 0.047, exact conditional test p = 0.040
    # (the example's comments); R's printed output (found by search, see above): X-squared = 3.9286,
    # p-value = 0.04747, common odds ratio 7 with the 95 percent interval 1.026713 to 47.725133 (the
    # Robins-Breslow-Greenland variance), exact conditional test S = 16, p = 0.03994.
    mh = ip.mantel_haenszel(RABBITS)
    assert mh.statistic == pytest.approx(3.9286, abs=5e-5)
    assert call("POOLED_IMPACT_P", RABBITS) == pytest.approx(0.04747, abs=5e-6)
    assert call("POOLED_EXACT_P", RABBITS) == pytest.approx(0.03994, abs=5e-6)
    assert sum(r[0] for r in RABBITS) == 16   # R's S: immediate injections cured, over every level
    assert call("POOLED_ODDS_RATIO", RABBITS) == pytest.approx(7.0, rel=1e-12)
    assert call("POOLED_ODDS_RATIO", RABBITS, "lower") == pytest.approx(1.026713, abs=5e-7)
    assert call("POOLED_ODDS_RATIO", RABBITS, "upper") == pytest.approx(47.725133, abs=5e-7)
    # The first and last levels cure nobody and everybody: they carry no information and are left out.
    assert (mh.strata_used, mh.strata_dropped) == (3, 2)
    assert call("POOLED_EXACT_P", RABBITS) == call("POOLED_EXACT_P", RABBITS[1:4])
    ref = stratified(RABBITS[1:4])  # statsmodels (reference library) on the informative levels
    assert mh.odds_ratio == pytest.approx(ref.oddsratio_pooled, rel=1e-13)
    assert call("POOLED_ODDS_RATIO", RABBITS, "upper") == pytest.approx(ref.oddsratio_pooled_confint()[1], rel=1e-12)


def test_berkeley_admissions_reverse_within_departments():
    totals = np.sum(BERKELEY, axis=0)
    assert totals.tolist() == [557, 1835, 1198, 2691]  # the published totals (Bickel et al. 1975)
    crude = call("IMPACT_RATIO", *totals.tolist())
    assert crude < 0.8  # pooled over departments women are admitted at about 68% of the men's rate
    pooled = call("POOLED_ODDS_RATIO", BERKELEY)
    assert pooled > 1  # within departments the odds favour women slightly: the aggregate reverses
    assert pooled == pytest.approx(stratified(BERKELEY).oddsratio_pooled, rel=1e-13)
    assert call("POOLED_IMPACT_P", BERKELEY) > 0.05  # "no evidence for association ... adjusted for department"
    assert call("POOLED_HOMOGENEITY_P", BERKELEY) < 0.01  # the odds ratios differ: show the departments


def test_penicillin_and_rabbits_one_sided_exact_p_checks_the_enumeration():
    # R's mantelhaen.test example: the one-sided exact conditional test (a higher cure rate for immediate
    # injection) gives "p = 0.020". The brute-force enumeration that checks POOLED_EXACT_P below gives that value
    # for the upper tail, and the two-sided value p = 0.040 as POOLED_EXACT_P does: the enumeration is itself
    # checked against the published example.
    dist = _conditional_distribution(RABBITS)
    observed = sum(r[0] for r in RABBITS)
    upper = float(sum(p for t, p in dist.items() if t >= observed))
    assert upper == pytest.approx(0.020, abs=5e-4)
    assert _brute_force_exact_p(RABBITS) == pytest.approx(0.040, abs=5e-4)
    assert call("POOLED_EXACT_P", RABBITS) == pytest.approx(_brute_force_exact_p(RABBITS), rel=1e-9)


def test_breslow_day_on_agresti_azt_data():
    # rows: AZT yes with symptoms, AZT yes; AZT no with symptoms, AZT no (White, then Black), from R's
    # array(c(14, 32, 93, 81, 11, 12, 52, 43), dim = c(2, 2, 2)) with dimnames azt, symptoms, race.
    azt = [[14, 107, 32, 113], [11, 63, 12, 55]]
    plain = ip.breslow_day(azt, tarone=False)   # DescTools' default (no Tarone correction): p = 0.2382
    assert plain.p_value == pytest.approx(0.2382, abs=5e-5)
    assert plain.statistic == pytest.approx(1.39, abs=5e-3)   # Agresti's 1.39 (from memory)
    # with two strata Tarone's correction changes nothing visible; the sheet's function uses it
    assert call("POOLED_HOMOGENEITY_P", azt) == pytest.approx(0.2382, abs=5e-5)


# ---------------------------------------------------------------- exact conditional test

def _brute_force_exact_p(rows):
    """Enumerate every combination of focal-selected counts with the strata margins fixed (exact fractions)."""
    dist = _conditional_distribution(rows)
    observed = dist[sum(r[0] for r in rows)]
    return float(sum(p for p in dist.values() if p <= observed))


def _conditional_distribution(rows):
    """The distribution of the total focal-selected count given every stratum's margins (exact fractions)."""
    supports = []
    for fs, fa, rs, ra in rows:
        m1 = fs + rs
        ks = range(max(0, m1 - ra), min(fa, m1) + 1)
        total = math.comb(fa + ra, m1)
        supports.append([(k, Fraction(math.comb(fa, k) * math.comb(ra, m1 - k), total)) for k in ks])
    dist = {}
    for combo in itertools.product(*supports):
        t = sum(k for k, _ in combo)
        p = Fraction(1)
        for _, q in combo:
            p *= q
        dist[t] = dist.get(t, 0) + p
    return dist


@pytest.mark.parametrize("seed", range(8))
def test_exact_conditional_test_against_brute_force_enumeration(seed):
    rows = random_strata(100 + seed, 3, size=9, informative=False)
    try:
        want = _brute_force_exact_p(rows)
    except KeyError:
        pytest.skip("no stratum varies")
    assert call("POOLED_EXACT_P", rows) == pytest.approx(want, rel=1e-9)


def test_exact_conditional_test_with_one_stratum_is_fisher():
    rng = np.random.default_rng(4)
    for _ in range(40):
        fa, ra = (int(x) for x in rng.integers(2, 80, 2))
        fs, rs = int(rng.integers(0, fa + 1)), int(rng.integers(0, ra + 1))
        if fs + rs in (0, fa + ra):
            continue
        want = stats.fisher_exact([[fs, fa - fs], [rs, ra - rs]])[1]  # scipy (reference library)
        assert call("POOLED_EXACT_P", [[fs, fa, rs, ra]]) == pytest.approx(want, rel=1e-9)


def test_exact_p_far_in_the_tail_and_with_many_strata():
    # 300 strata, each 10 of 20 focal against 2 of 20 reference selected: p far below any level, still a number.
    p = call("POOLED_EXACT_P", [[10, 20, 2, 20]] * 300)
    assert 0 <= p < 1e-100
    # A balanced set: every stratum at its expected count gives p = 1.
    assert call("POOLED_EXACT_P", [[5, 10, 5, 10]] * 200) == pytest.approx(1.0, abs=1e-12)


# ---------------------------------------------------------------- the strata range

@pytest.mark.parametrize("strata, code, match", [
    ([[1, 2, 3]], "#VALUE!", "4 columns"),
    ([[1, 4, 2, 5], [1, None, 2, 5]], "#VALUE!", "row 2"),
    ([[1, 4, 2, 5], [-1, 4, 2, 5]], "#NUM!", "row 2"),
    ([[1, 4, 2, 5], [1.5, 4, 2, 5]], "#NUM!", "whole number"),
    ([[1, 4, 6, 5]], "#NUM!", "reference selected in row 1"),
    ([[5, 4, 2, 5]], "#NUM!", "focal selected in row 1"),
    ([[1, 4, "x", 5]], "#VALUE!", "text"),
    ([[None, None, None, None]], "#N/A", "no rows"),
    ([[0, 4, 0, 5], [4, 4, 5, 5], [0, 0, 3, 5]], "#N/A", "no stratum carries information"),
])
@pytest.mark.parametrize("name", ["POOLED_IMPACT_P", "POOLED_ODDS_RATIO", "POOLED_EXACT_P", "POOLED_HOMOGENEITY_P"])
def test_strata_range_is_checked(name, strata, code, match):
    with raises_code(code, "strata", match=match):
        call(name, strata)


def test_blank_rows_are_skipped_and_uninformative_strata_change_nothing():
    rows = random_strata(9, 4)
    padded = [rows[0], [None] * 4, rows[1], [0, 7, 0, 3], rows[2], [0, 0, 4, 9], rows[3], [None] * 4]
    for name in ("POOLED_IMPACT_P", "POOLED_ODDS_RATIO", "POOLED_EXACT_P", "POOLED_HOMOGENEITY_P"):
        assert call(name, padded) == pytest.approx(call(name, rows), rel=1e-14)


def test_pooled_zero_cells():
    with raises_code("#DIV/0!", "strata"):  # every focal applicant selected in every stratum
        call("POOLED_ODDS_RATIO", [[4, 4, 2, 5], [3, 3, 1, 5]])
    zero = [[0, 4, 2, 5], [0, 3, 1, 5]]  # no focal selection anywhere: OR 0, lower 0, no finite upper limit
    assert call("POOLED_ODDS_RATIO", zero) == 0.0
    assert call("POOLED_ODDS_RATIO", zero, "lower") == 0.0
    with raises_code("#NUM!", "strata"):
        call("POOLED_ODDS_RATIO", zero, "upper")
    with raises_code("#N/A", "strata", match="at least 2"):
        call("POOLED_HOMOGENEITY_P", [[1, 4, 2, 5]])


def test_one_stratum_gives_the_sample_odds_ratio():
    assert call("POOLED_ODDS_RATIO", [[12, 40, 48, 80]]) == pytest.approx(call("IMPACT_ODDS_RATIO", 12, 40, 48, 80),
                                                                         rel=1e-15)
