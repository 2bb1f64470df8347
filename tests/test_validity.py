"""Validity coefficients, corrections and effect sizes, checked against outside values.

Sources:
* reference libraries: scipy.stats.pearsonr (p values; Fisher z confidence interval, scipy >= 1.9),
  pingouin.compute_effsize(eftype="cohen") and pingouin.convert_effsize, on data generated here and on
  pingouin's bundled penguins dataset;
* the psychmeta R package (Dahlke & Wiernik), R/estimate_artifacts.R (estimate_ut_rxxa,
  estimate_rxxi_ux_irr) and R/correct_r_internal.R (.correct_r_uvdrr, .correct_r_uvirr): their formulas,
  written in the tests below in psychmeta's algebraic form, are an independent implementation of
  Thorndike's Case II and of Hunter, Schmidt & Le's (2006) Case IV;
* the measurement and selection models themselves (Lord & Novick 1968, ch. 3; Thorndike 1949;
  Hunter, Schmidt & Le 2006): a large simulated applicant population with known true-score correlation
  and reliabilities, selected directly or indirectly, whose corrected incumbent correlations must recover
  the known applicant values within sampling error;
* values marked "from memory" are textbook values recalled, not copied from a page in hand; "worked by
  hand" values follow the cited formula.
"""

import math

import numpy as np
import pytest
from scipy import stats

from helpers import raises_code
from trueband.funcs import call

pingouin = pytest.importorskip("pingouin")


# ---------------------------------------------------------------- ceilings and Spearman's correction

def test_max_validity():
    # Spearman (1904) ceiling sqrt(rxx * ryy), worked by hand.
    assert call("MAX_VALIDITY", 0.81, 0.64) == pytest.approx(0.72, abs=1e-15)
    assert call("MAX_VALIDITY", 0.9, 1) == pytest.approx(math.sqrt(0.9), abs=1e-15)
    assert call("MAX_VALIDITY", 0, 0.8) == 0.0


@pytest.mark.parametrize("rxy, rxx, ryy, expected, source", [
    (0.30, 0.80, 0.60, 0.30 / math.sqrt(0.48), "Spearman (1904) formula, worked by hand"),
    (0.30, 1.00, 0.52, 0.416, "criterion only, ryy .52 (Viswesvaran, Ones & Schmidt 1996 ratings value, "
                              "from memory): .30 -> .416"),
    (-0.25, 0.90, 0.70, -0.25 / math.sqrt(0.63), "a negative validity keeps its sign"),
    (0.40, 1, 1, 0.40, "perfect reliabilities: no correction (definition)"),
])
def test_disattenuate(rxy, rxx, ryy, expected, source):
    assert call("DISATTENUATE", rxy, rxx, ryy) == pytest.approx(expected, abs=5e-4 if expected == 0.416 else 1e-14), \
        source


def test_disattenuate_beyond_one_is_refused_naming_the_inputs():
    # r .60 with reliabilities .50 and .50 exceeds its ceiling .50: corrected 1.2 is not a correlation.
    with raises_code("#NUM!", "rxy", match=r"rxy 0\.6, rxx 0\.5, ryy 0\.5 is 1\.2"):
        call("DISATTENUATE", 0.6, 0.5, 0.5)
    # exactly at the ceiling (up to rounding) gives 1
    assert call("DISATTENUATE", math.sqrt(0.45), 0.9, 0.5) == pytest.approx(1.0, abs=1e-15)


# ---------------------------------------------------------------- simulated populations

N_APPLICANTS = 2_000_000  # sampling error of the corrected values about 0.002
RHO_TRUE = 0.6      # true-score correlation of predictor and criterion among applicants
RXX_A = 0.8         # predictor reliability among applicants
CRITERION_ERROR = 0.6  # criterion error variance (true-score variance 1)


@pytest.fixture(scope="module")
def population():
    rng = np.random.default_rng(20061)
    t = rng.standard_normal(N_APPLICANTS)
    p = RHO_TRUE * t + math.sqrt(1 - RHO_TRUE ** 2) * rng.standard_normal(N_APPLICANTS)
    x = t + math.sqrt((1 - RXX_A) / RXX_A) * rng.standard_normal(N_APPLICANTS)
    y = p + math.sqrt(CRITERION_ERROR) * rng.standard_normal(N_APPLICANTS)
    return {"t": t, "p": p, "x": x, "y": y, "rng": rng}


def incumbents(pop, selected):
    x, y = pop["x"][selected], pop["y"][selected]
    return {
        "r": np.corrcoef(x, y)[0, 1],
        "sd_i": x.std(ddof=1),
        "sd_a": pop["x"].std(ddof=1),
        # criterion reliability among those hired: true variance over observed, error variance known by design
        "ryy_i": 1 - CRITERION_ERROR / y.var(ddof=1),
    }


def test_spearman_recovers_the_true_score_correlation(population):
    # Classical test theory (Lord & Novick 1968, ch. 3): r_xy / sqrt(rxx ryy) estimates rho_TP.
    r = np.corrcoef(population["x"], population["y"])[0, 1]
    ryy = 1 / (1 + CRITERION_ERROR)
    assert call("DISATTENUATE", r, RXX_A, ryy) == pytest.approx(RHO_TRUE, abs=0.005)


def test_case_ii_and_operational_validity_under_direct_selection(population):
    # Thorndike (1949) Case II is the model's exact correction when selection is directly on the predictor.
    cut = np.quantile(population["x"], 0.7)
    inc = incumbents(population, population["x"] > cut)
    applicants_rxy = np.corrcoef(population["x"], population["y"])[0, 1]
    applicants_rxp = np.corrcoef(population["x"], population["p"])[0, 1]   # the operational validity
    assert inc["r"] < applicants_rxy - 0.1  # the restriction is real
    assert call("RANGE_CORRECT", inc["r"], inc["sd_i"], inc["sd_a"]) == pytest.approx(applicants_rxy, abs=0.008)
    assert call("OPERATIONAL_VALIDITY", inc["r"], inc["ryy_i"], inc["sd_i"], inc["sd_a"]) == pytest.approx(
        applicants_rxp, abs=0.008)


def test_indirect_correction_recovers_the_operational_validity(population):
    # Hunter, Schmidt & Le (2006) model: selection on a variable whose effect on X and Y runs through the
    # predictor's true score T (here: top 30% on T plus noise). The target is rho_XP among applicants
    # = rho_TP * sqrt(rxx_a).
    rng = population["rng"]
    s = population["t"] + 0.5 * rng.standard_normal(N_APPLICANTS)
    inc = incumbents(population, s > np.quantile(s, 0.7))
    u_x = inc["sd_i"] / inc["sd_a"]
    target = RHO_TRUE * math.sqrt(RXX_A)
    got = call("RANGE_CORRECT_INDIRECT", inc["r"], u_x, RXX_A, inc["ryy_i"])
    assert got == pytest.approx(target, abs=0.008)
    # Case II applied to the same indirectly restricted data undercorrects (the paper's main point).
    direct = call("OPERATIONAL_VALIDITY", inc["r"], inc["ryy_i"], inc["sd_i"], inc["sd_a"])
    assert direct < target - 0.02


# ---------------------------------------------------------------- psychmeta's formulas

def psychmeta_case_ii(rxyi, ux):
    # psychmeta R/correct_r_internal.R, .correct_r_uvdrr with qxa = qyi = 1
    return rxyi / (ux * math.sqrt((1 / ux ** 2 - 1) * rxyi ** 2 + 1))


def psychmeta_case_iv(rxyi, ux, rxxa, ryyi):
    # psychmeta: estimate_ut_rxxa, estimate_rxxi_ux_irr (R/estimate_artifacts.R), .correct_r_uvirr
    # (R/correct_r_internal.R); then the operational validity rho_TPa * sqrt(rxxa).
    ut = math.sqrt((ux ** 2 - (1 - rxxa)) / rxxa)
    rxxi = 1 - (1 - rxxa) / ux ** 2
    rtpi = rxyi / (math.sqrt(rxxi) * math.sqrt(ryyi))
    rtpa = rtpi / (ut * math.sqrt((1 / ut ** 2 - 1) * rtpi ** 2 + 1))
    return rtpa * math.sqrt(rxxa)


@pytest.mark.parametrize("r, sd_i, sd_a", [(0.25, 6, 10), (0.1, 1, 3), (-0.4, 4.2, 5), (0.33, 48.19, 100.32),
                                           (0.5, 12, 9), (0.95, 1, 2)])
def test_case_ii_against_psychmeta_formula(r, sd_i, sd_a):
    assert call("RANGE_CORRECT", r, sd_i, sd_a) == pytest.approx(psychmeta_case_ii(r, sd_i / sd_a), rel=1e-13)


def test_case_ii_textbook_value():
    # r .25 in a group with half the applicants' SD: about .46 (worked by hand from Thorndike 1949, Case II).
    assert call("RANGE_CORRECT", 0.25, 5, 10) == pytest.approx(0.4588, abs=5e-5)


@pytest.mark.parametrize("r, u_x, rxx_a, ryy", [(0.25, 0.67, 0.81, 0.52), (0.3, 0.8, 0.8, 0.8), (0.2, 0.5, 0.9, 0.6),
                                                 (-0.15, 0.9, 0.7, 1.0), (0.1, 0.999, 0.85, 0.7)])
def test_case_iv_against_psychmeta_formula(r, u_x, rxx_a, ryy):
    assert call("RANGE_CORRECT_INDIRECT", r, u_x, rxx_a, ryy) == pytest.approx(
        psychmeta_case_iv(r, u_x, rxx_a, ryy), rel=1e-12)


@pytest.mark.parametrize("r, u_x", [(0.2, 0.6), (0.45, 0.85), (-0.3, 0.4)])
def test_case_iv_with_a_perfectly_reliable_predictor_is_case_ii(r, u_x):
    # Hunter, Schmidt & Le (2006): with rxx_a = 1 the true-score and observed-score u coincide, and the
    # indirect correction reduces to Case II.
    assert call("RANGE_CORRECT_INDIRECT", r, u_x, 1) == pytest.approx(call("RANGE_CORRECT", r, u_x, 1), rel=1e-13)



@pytest.mark.parametrize("rxx_a, u_x", [(0.81, 0.67), (0.8, 0.8), (0.7, 0.5584), (0.9, 1.2), (0.6, 0.5)])
def test_restricted_reliability_against_psychmeta_formula(rxx_a, u_x):
    # psychmeta R/estimate_artifacts.R, estimate_rxxi_ux_irr: 1 - (1 - rxxa) / ux^2 (may be 0 or below)
    assert call("RESTRICTED_RELIABILITY", rxx_a, u_x) == pytest.approx(1 - (1 - rxx_a) / u_x ** 2, rel=1e-13)


def test_restricted_reliability_holds_under_indirect_but_not_direct_selection(population):
    # Hunter, Schmidt & Le (2006): with selection on the true score, the error variance is the same among
    # applicants and incumbents, and the implied incumbent reliability is the actual one (true-score variance
    # over observed variance among incumbents, known by design). With direct selection on the observed score
    # the selected group's error variance shrinks too, so its actual reliability is well above the implied
    # one: the gap the study's plausibility rule looks for.
    rng, x, t = population["rng"], population["x"], population["t"]
    s = t + 0.5 * rng.standard_normal(N_APPLICANTS)
    for chosen, close in ((s > np.quantile(s, 0.7), True), (x > np.quantile(x, 0.7), False)):
        u_x = x[chosen].std(ddof=1) / x.std(ddof=1)
        actual = t[chosen].var(ddof=1) / x[chosen].var(ddof=1)
        implied = call("RESTRICTED_RELIABILITY", RXX_A, u_x)
        if close:
            assert implied == pytest.approx(actual, abs=0.01)
        else:
            assert implied < actual - 0.15


def test_restricted_reliability_refusals():
    with raises_code("#NUM!", "rxx_applicants"):
        call("RESTRICTED_RELIABILITY", 1.2, 0.5)
    with raises_code("#NUM!", "u_x"):
        call("RESTRICTED_RELIABILITY", 0.8, 0)

def test_operational_validity_order_is_reliability_then_range():
    # Hunter & Schmidt (2004), ch. 3: criterion unreliability corrected in the restricted group, then Case II.
    r, ryy, s, S = 0.25, 0.52, 6, 10
    assert call("OPERATIONAL_VALIDITY", r, ryy, s, S) == pytest.approx(
        call("RANGE_CORRECT", call("DISATTENUATE", r, 1, ryy), s, S), rel=1e-14)
    # the other order gives another number: the order matters
    assert abs(call("OPERATIONAL_VALIDITY", r, ryy, s, S)
               - call("DISATTENUATE", call("RANGE_CORRECT", r, s, S), 1, ryy)) > 0.01


# ---------------------------------------------------------------- Fisher z and the t test

def correlated_sample(n, rho, seed):
    rng = np.random.default_rng(seed)
    x = rng.standard_normal(n)
    y = rho * x + math.sqrt(1 - rho ** 2) * rng.standard_normal(n)
    return x, y


@pytest.mark.parametrize("n, rho, seed", [(4, 0.5, 1), (10, 0.3, 2), (30, -0.4, 3), (120, 0.25, 4), (2000, 0.9, 5)])
@pytest.mark.parametrize("confidence", [0.80, 0.95, 0.99])
def test_r_ci_against_scipy_pearsonr(n, rho, seed, confidence):
    # Reference library: scipy.stats.pearsonr(...).confidence_interval(), Fisher z (scipy >= 1.9).
    x, y = correlated_sample(n, rho, seed)
    res = stats.pearsonr(x, y)
    ci = res.confidence_interval(confidence_level=confidence)
    assert call("R_CI", res.statistic, n, "lower", confidence) == pytest.approx(ci.low, abs=1e-12)
    assert call("R_CI", res.statistic, n, "upper", confidence) == pytest.approx(ci.high, abs=1e-12)


@pytest.mark.parametrize("n, rho, seed", [(3, 0.5, 6), (8, 0.1, 7), (25, 0.5, 8), (60, -0.3, 9), (500, 0.05, 10)])
def test_r_pvalue_against_scipy_pearsonr(n, rho, seed):
    # Reference library: scipy.stats.pearsonr p values (two-sided; one-sided alternative "greater").
    x, y = correlated_sample(n, rho, seed)
    two = stats.pearsonr(x, y)
    greater = stats.pearsonr(x, y, alternative="greater")
    assert call("R_PVALUE", two.statistic, n) == pytest.approx(two.pvalue, rel=1e-9, abs=1e-300)
    assert call("R_PVALUE", two.statistic, n, 2) == pytest.approx(two.pvalue, rel=1e-9, abs=1e-300)
    assert call("R_PVALUE", two.statistic, n, 1) == pytest.approx(greater.pvalue, rel=1e-9, abs=1e-300)


def test_r_pvalue_textbook_critical_value():
    # r = .361 is the two-tailed .05 critical value for n = 30 (table of critical r, from memory).
    assert call("R_PVALUE", 0.361, 30) == pytest.approx(0.05, abs=0.001)
    assert call("R_PVALUE", -0.361, 30, 1) > 0.95  # one-tailed alternative is a positive correlation


def test_r_ci_and_pvalue_at_perfect_correlation():
    assert call("R_CI", 1, 10, "lower") == 1.0 and call("R_CI", -1, 10, "upper") == -1.0
    assert call("R_PVALUE", 1, 10) == 0.0


# ---------------------------------------------------------------- effect sizes

@pytest.mark.parametrize("r", [-0.95, -0.4, 0.0, 0.1, 0.5, 0.99])
def test_r_to_d_and_back_against_pingouin(r):
    # Reference library: pingouin.convert_effsize (Rosenthal 1994; equal group sizes).
    d = pingouin.convert_effsize(r, "pointbiserialr", "cohen")
    assert call("R_TO_D", r) == pytest.approx(d, rel=1e-12, abs=1e-15)
    assert call("D_TO_R", d) == pytest.approx(pingouin.convert_effsize(d, "cohen", "pointbiserialr"), rel=1e-12,
                                              abs=1e-15)
    assert call("D_TO_R", call("R_TO_D", r)) == pytest.approx(r, rel=1e-12, abs=1e-15)


def test_d_to_r_textbook_values():
    # Cohen (1988): d = .2, .5, .8 correspond to r = .100, .243, .371 (from memory).
    assert [round(call("D_TO_R", d), 3) for d in (0.2, 0.5, 0.8)] == [0.1, 0.243, 0.371]
    assert call("D_TO_R", 1e300) == pytest.approx(1.0)  # no overflow to 0 or nan


@pytest.mark.parametrize("seed, na, nb, shift", [(11, 5, 7, 0.4), (12, 40, 25, -1.0), (13, 2, 2, 3.0),
                                                   (14, 300, 310, 0.05)])
def test_cohens_d_against_pingouin(seed, na, nb, shift):
    # Reference library: pingouin.compute_effsize(eftype="cohen"), pooled SD with n - 1 denominators.
    rng = np.random.default_rng(seed)
    a = rng.normal(50 + shift * 10, 10, na)
    b = rng.normal(50, 10, nb)
    want = pingouin.compute_effsize(a, b, paired=False, eftype="cohen")
    assert call("COHENS_D", a.tolist(), b.tolist()) == pytest.approx(want, rel=1e-12)
    assert call("COHENS_D", [[x] for x in a], [list(b)]) == pytest.approx(want, rel=1e-12)  # column and row


def test_cohens_d_on_pingouins_penguins_with_blanks():
    # Open dataset shipped by pingouin: body mass by sex, with missing values left blank.
    df = pingouin.read_dataset("penguins")
    male = df.loc[df["sex"] == "male", "body_mass_g"].to_numpy(dtype=float)
    female = df.loc[df["sex"] == "female", "body_mass_g"].to_numpy(dtype=float)
    want = pingouin.compute_effsize(male, female, eftype="cohen")
    with_blanks = [None if math.isnan(v) else v for v in male] + [None, ""]
    assert call("COHENS_D", with_blanks, female.tolist()) == pytest.approx(want, rel=1e-12)


# ---------------------------------------------------------------- errors

def test_errors_name_the_argument():
    with raises_code("#NUM!", "rxx", match="greater than 0"):
        call("DISATTENUATE", 0.3, 0, 0.5)
    with raises_code("#NUM!", "ryy"):
        call("MAX_VALIDITY", 0.8, 1.2)
    with raises_code("#NUM!", "r", match="got 1.5"):
        call("RANGE_CORRECT", 1.5, 1, 2)
    with raises_code("#NUM!", "sd_restricted"):
        call("RANGE_CORRECT", 0.3, 0, 2)
    with raises_code("#NUM!", "u_x", match="too small for rxx_applicants 0.8"):
        call("RANGE_CORRECT_INDIRECT", 0.3, 0.4, 0.8)
    with raises_code("#NUM!", "u_x"):
        call("RANGE_CORRECT_INDIRECT", 0.3, 1.2, 0.8)
    with raises_code("#NUM!", "r", match="beyond ±1"):
        call("RANGE_CORRECT_INDIRECT", 0.7, 0.6, 0.8, 0.4)
    with raises_code("#NUM!", "r", match="beyond ±1"):
        call("OPERATIONAL_VALIDITY", 0.8, 0.5, 5, 10)
    with raises_code("#NUM!", "n", match="at least 4"):
        call("R_CI", 0.3, 3, "lower")
    with raises_code("#NUM!", "n", match="whole number"):
        call("R_CI", 0.3, 10.5, "upper")
    # (common practice: spreadsheet apps answer bad text with #VALUE!)
    with raises_code("#VALUE!", "part"):
        call("R_CI", 0.3, 10, "middle")
    with raises_code("#NUM!", "tails"):
        call("R_PVALUE", 0.3, 10, 3)
    with raises_code("#NUM!", "n"):
        call("R_PVALUE", 0.3, 2)
    with raises_code("#NUM!", "r"):
        call("R_TO_D", 1)
    with raises_code("#N/A", "group_b", match="at least 2"):
        call("COHENS_D", [1, 2, 3], [4, None])
    with raises_code("#DIV/0!", "group_a"):
        call("COHENS_D", [3, 3, 3], [5, 5])
    with raises_code("#VALUE!", "group_a", match="row 2"):
        call("COHENS_D", [1, "x", 3], [4, 5])


# ---------------------------------------------------------------- the study's list of people with a criterion

def test_nth_number_row_lists_the_rows_with_a_number():
    # The spreadsheet idiom SMALL(IF(ISNUMBER(column), ROW(column) - ROW(first) + 1), k) (common practice), written
    # out with numpy: the positions of the numbers, then 0 past the last one.
    rng = np.random.default_rng(3)
    values = rng.normal(3, 1, 200)
    blank = rng.random(200) < 0.6
    column = [[""] if b else [float(x)] for x, b in zip(values, blank)]
    expected = (np.flatnonzero(~blank) + 1).tolist()
    ks = list(range(1, len(expected) + 4))
    got = [call("NTH_NUMBER_ROW", column, k) for k in ks]
    assert got == expected + [0, 0, 0]
    # the whole filled-down column at once (k elementwise, the column read once) gives the same
    assert trueband_column(column, ks) == got


def trueband_column(column, ks):
    from trueband.funcs import nth_number_row
    return [int(x) for x in nth_number_row(column, np.array(ks, dtype=float))]


def test_nth_number_row_refusals():
    with raises_code("#NUM!", "k"):
        call("NTH_NUMBER_ROW", [[1.0], [2.0]], 0)
    with raises_code("#NUM!", "k"):
        call("NTH_NUMBER_ROW", [[1.0], [2.0]], 1.5)
    with raises_code("#VALUE!", "column"):
        call("NTH_NUMBER_ROW", [[1.0], ["yes"]], 1)
    assert call("NTH_NUMBER_ROW", [[""], [None]], 1) == 0   # no number at all: 0, not an error
