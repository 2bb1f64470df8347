"""Lawshe's content validity ratio and its critical values.

Sources:
* Lawshe (1975), Personnel Psychology 28, 563-575: CVR = (nₑ − N/2)/(N/2).
* Ayre & Scally (2014), Measurement and Evaluation in Counseling and Development 47, 79-86, table of
  exact one-tailed critical values at alpha = 0.05 (N, N critical, CVR critical). The values below are
  as that table prints them (from memory: the article itself could not be retrieved here); every one is
  also recomputed with scipy.stats.binom, the reference library, in the test.
* Wilson, Pan & Schumsky (2012), same journal 45, 197-210, normal approximation z/√N: 0.456 for N = 13
  at one-tailed alpha 0.05, as quoted from their table by later users of it (bio-protocol r8758338);
  scipy.stats.norm for the quantile otherwise.
"""

import math

import pytest
from scipy import stats

from helpers import raises_code
from trueband.funcs import call

# Ayre & Scally (2014), table: N, minimum number of "essential" ratings, CVR critical (alpha 0.05 one-tailed)
AYRE_SCALLY = [(5, 5, 1.0), (6, 6, 1.0), (7, 7, 1.0), (8, 7, 0.750), (9, 8, 0.778), (10, 9, 0.800),
               (11, 9, 0.636), (12, 10, 0.667), (13, 10, 0.538), (14, 11, 0.571), (15, 12, 0.600),
               (16, 12, 0.500), (17, 13, 0.529), (18, 13, 0.444), (19, 14, 0.474), (20, 15, 0.500),
               (25, 18, 0.440), (30, 20, 0.333), (35, 23, 0.314), (40, 26, 0.300)]


@pytest.mark.parametrize("panel, n_critical, cvr", AYRE_SCALLY)
def test_exact_critical_values(panel, n_critical, cvr):
    got = call("CVR_CRITICAL", panel)
    assert got == pytest.approx(cvr, abs=0.0005)  # the table prints three decimals
    assert got == pytest.approx((n_critical - panel / 2) / (panel / 2), rel=1e-15)
    # scipy.stats.binom: n_critical is the smallest count with P(X >= count) <= 0.05
    assert stats.binom.sf(n_critical - 1, panel, 0.5) <= 0.05 < stats.binom.sf(n_critical - 2, panel, 0.5)


@pytest.mark.parametrize("panel", [5, 9, 17, 60, 150])
@pytest.mark.parametrize("alpha", [0.01, 0.025, 0.05, 0.1])
def test_exact_rule_against_scipy(panel, alpha):
    counts = [k for k in range(panel + 1) if stats.binom.sf(k - 1, panel, 0.5) <= alpha * (1 + 1e-12)]
    if not counts:
        with raises_code("#N/A", "panel"):
            call("CVR_CRITICAL", panel, alpha)
        return
    k = min(counts)
    assert call("CVR_CRITICAL", panel, alpha) == pytest.approx((k - panel / 2) / (panel / 2), rel=1e-15)


def test_a_tail_equal_to_alpha_counts_as_significant():
    # 5 experts all essential: P = 1/32 exactly; at alpha = 1/32 that is "at most alpha"
    assert call("CVR_CRITICAL", 5, 1 / 32) == 1.0
    with raises_code("#N/A", "panel"):
        call("CVR_CRITICAL", 5, 0.03)
    with raises_code("#N/A", "panel"):
        call("CVR_CRITICAL", 4)  # 1/16 > 0.05 (Ayre & Scally's table starts at 5)


def test_normal_approximation():
    # Wilson, Pan & Schumsky (2012): 0.456 for 13 experts at one-tailed 0.05
    assert call("CVR_CRITICAL", 13, 0.05, "normal") == pytest.approx(0.456, abs=0.0005)
    for panel, alpha in [(10, 0.05), (25, 0.01), (40, 0.1)]:
        assert call("CVR_CRITICAL", panel, alpha, "normal") == pytest.approx(
            stats.norm.isf(alpha) / math.sqrt(panel), rel=1e-13)  # scipy
    with raises_code("#N/A", "panel"):
        call("CVR_CRITICAL", 2, 0.05, "normal")


def test_cvr_formula():
    # Lawshe (1975): −1 with none, 0 with half, +1 with all
    assert call("CVR", 0, 10) == -1.0 and call("CVR", 5, 10) == 0.0 and call("CVR", 10, 10) == 1.0
    assert call("CVR", 8, 10) == pytest.approx(0.6, rel=1e-15)
    assert call("CVR", 7, 9) == pytest.approx((7 - 4.5) / 4.5, rel=1e-15)
    with raises_code("#NUM!", "essential"):
        call("CVR", 11, 10)
    with raises_code("#NUM!", "panel"):
        call("CVR", 0, 0)
    with raises_code("#NUM!", "alpha"):
        call("CVR_CRITICAL", 10, 0.5)
