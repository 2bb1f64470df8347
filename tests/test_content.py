"""Lawshe's content validity ratio and its critical values.

Sources:
* Lawshe (1975), Personnel Psychology 28, 563-575: CVR = (nₑ − N/2)/(N/2).
* Ayre & Scally (2014), Measurement and Evaluation in Counseling and Development 47, 79-86, table of
  exact one-tailed critical values at alpha = 0.05 (N, N critical, CVR critical). The values below are
  as that table prints them (from memory: the article itself could not be retrieved here); every one is
  also recomputed with scipy.stats.binom, the reference library, in the test.
* Lawshe (1975), Table 1, minimum CVR at one-tailed p = .05 for N = 5, 6, 7, 8, 9, 10, 15, 20, 25, 30, 40:
  .99 .99 .99 .75 .78 .62 .49 .42 .37 .33 .29 (from memory; the same values as an open-source R copy
  of the table reads them, a function CVRcut_Lawshe found through the project's code search, whose repository
  the index does not name). Lawshe's values for N >= 10 are not the CVR of a whole number of essential ratings;
  read as "the fewest essential ratings whose CVR reaches the value", they give the exact binomial rule's count
  at every N but 9, where .78 is .778 rounded up (see ``test_lawshe_table``).
* A search of the project's page, code and documentation corpora (Dec 2026) found Ayre & Scally (2014) itself
  (title, abstract) but not the text of its table; the values below stay marked "from memory".
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


# Lawshe (1975), Table 1 (from memory, and as an R copy of the table reads it): N, minimum CVR
LAWSHE = [(5, 0.99), (6, 0.99), (7, 0.99), (8, 0.75), (9, 0.78), (10, 0.62), (15, 0.49), (20, 0.42), (25, 0.37),
          (30, 0.33), (40, 0.29)]


def _fewest(panel, cvr):
    """The fewest essential ratings whose CVR reaches ``cvr`` (hand-checkable: CVR = (k − N/2)/(N/2))."""
    return next(k for k in range(panel + 1) if (k - panel / 2) / (panel / 2) >= cvr - 1e-12)


@pytest.mark.parametrize("panel, printed", LAWSHE)
def test_lawshe_table(panel, printed):
    # How Lawshe's table differs from CVR_CRITICAL (the exact rule of Ayre & Scally 2014), and why:
    exact = call("CVR_CRITICAL", panel)
    k_exact = _fewest(panel, exact)
    assert stats.binom.sf(k_exact - 1, panel, 0.5) <= 0.05 < stats.binom.sf(k_exact - 2, panel, 0.5)  # scipy
    if panel <= 7:
        # .99 stands for 1: every expert must say essential, as the exact rule asks (k = N)
        assert exact == 1.0 and k_exact == panel and _fewest(panel, printed) == panel
    elif panel == 9:
        # .78 is .778 = (8 − 4.5)/4.5 rounded up: read literally it asks for 9 experts, the exact rule for 8
        assert exact == pytest.approx(0.778, abs=0.0005) and _fewest(panel, printed) == 9 and k_exact == 8
    else:
        # the same count of essential ratings; Lawshe's value lies between the CVR of one fewer and that count
        # (for N >= 10 it is not itself a CVR a panel can reach), so the printed value is lower than CVR_CRITICAL
        assert _fewest(panel, printed) == k_exact
        assert (k_exact - 1 - panel / 2) / (panel / 2) < printed <= exact
        assert printed < exact or panel == 8


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
