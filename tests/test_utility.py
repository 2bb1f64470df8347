"""Selection utility, checked against outside values.

Sources:
* Taylor & Russell (1939) tables, J. Applied Psychology 23, 565-578, as reprinted in Cascio, W. F. &
  Boudreau, J. W. (2008), Investing in People, Appendix A (table for a base rate of .05); printed to
  2 decimals, so the tolerance is ±0.005;
* Sheppard's closed form for the bivariate normal quadrant, P(X > 0, Y > 0) = 1/4 + asin(ρ)/(2π)
  (Sheppard 1899; any multivariate statistics text);
* reference libraries: scipy.special.owens_t (Owen 1956 route to the bivariate normal),
  scipy.stats.multivariate_normal.cdf, scipy.integrate.quad (independent one-dimensional integral),
  scipy.stats.truncnorm (mean of a truncated normal);
* values marked "from memory" are textbook values recalled, not copied from a page in hand.
"""

import math

import numpy as np
import pytest
from scipy import integrate, special, stats

from helpers import raises_code
from trueband.funcs import call
from trueband.funcs.utility import upper_orthant_probability

SELECTION_RATIOS = [0.05, 0.10, 0.20, 0.30, 0.40, 0.50, 0.60, 0.70, 0.80, 0.90, 0.95]

# Taylor & Russell (1939), base rate .05, rows r = .00, .05, .10, .15 (the first four cells of r = .15),
# reprinted in Cascio & Boudreau (2008), Investing in People, Appendix A.
TAYLOR_RUSSELL_BASE_RATE_05 = {
    0.00: [.05, .05, .05, .05, .05, .05, .05, .05, .05, .05, .05],
    0.05: [.06, .06, .06, .06, .06, .05, .05, .05, .05, .05, .05],
    0.10: [.07, .07, .07, .06, .06, .06, .06, .05, .05, .05, .05],
    0.15: [.09, .08, .07, .07],
}


@pytest.mark.parametrize("validity", sorted(TAYLOR_RUSSELL_BASE_RATE_05))
def test_taylor_russell_against_the_1939_table_for_base_rate_05(validity):
    for sr, printed in zip(SELECTION_RATIOS, TAYLOR_RUSSELL_BASE_RATE_05[validity]):
        got = call("TAYLOR_RUSSELL", validity, 0.05, sr)
        # printed to two decimals: the exact value lies within half a unit of the last digit
        assert abs(got - printed) <= 0.005 + 1e-12, (validity, sr, got, printed)


@pytest.mark.parametrize("validity, base_rate, sr, printed", [
    (0.50, 0.50, 0.30, 0.74),   # from memory: the cell the textbooks quote
    (0.50, 0.50, 0.50, 0.67),   # from memory; also Sheppard's closed form 1/2 + asin(.5)/pi = 2/3
    (0.30, 0.50, 0.50, 0.60),   # from memory; closed form 0.5970
])
def test_taylor_russell_cells_from_memory(validity, base_rate, sr, printed):
    assert call("TAYLOR_RUSSELL", validity, base_rate, sr) == pytest.approx(printed, abs=0.005)


@pytest.mark.parametrize("validity", [-0.95, -0.5, 0.0, 0.1, 0.35, 0.6, 0.9, 0.93, 0.999])
def test_taylor_russell_at_the_median_cuts_equals_sheppards_closed_form(validity):
    # Sheppard (1899): P(X > 0, Y > 0) = 1/4 + asin(rho)/(2 pi); divided by SR = 1/2.
    assert call("TAYLOR_RUSSELL", validity, 0.5, 0.5) == pytest.approx(0.5 + math.asin(validity) / math.pi,
                                                                    abs=1e-14)


def owens_t_upper_orthant(h, k, rho):
    """P(X > h, Y > k) by Owen's (1956) formula with scipy.special.owens_t (h, k nonzero)."""
    # lower orthant at (-h, -k) equals the upper orthant at (h, k)
    a, b = -h, -k
    s = math.sqrt((1 - rho) * (1 + rho))
    beta = 0.0 if a * b > 0 else 0.5
    return (0.5 * special.ndtr(a) + 0.5 * special.ndtr(b)
            - special.owens_t(a, (b - rho * a) / (a * s)) - special.owens_t(b, (a - rho * b) / (b * s)) - beta)


GRID = [(r, br, sr)
        for r in (-0.99, -0.93, -0.6, -0.2, 0.05, 0.3, 0.6, 0.8, 0.92, 0.93, 0.97, 0.995)
        for br in (0.001, 0.05, 0.3, 0.7, 0.95)
        for sr in (0.001, 0.02, 0.1, 0.3, 0.6, 0.9, 0.99)]


def test_taylor_russell_against_owens_t_route():
    # Reference library: scipy.special.owens_t, the Owen (1956) identity for the bivariate normal.
    for r, br, sr in GRID:
        h, k = stats.norm.isf(sr), stats.norm.isf(br)
        want = owens_t_upper_orthant(h, k, r) / sr
        assert call("TAYLOR_RUSSELL", r, br, sr) == pytest.approx(want, abs=1e-12), (r, br, sr)


def test_taylor_russell_against_multivariate_normal_cdf():
    # Reference library: scipy.stats.multivariate_normal.cdf, asked for abseps 1e-10; compared to 1e-6 after / SR.
    for r, br, sr in GRID[::7]:
        h, k = stats.norm.isf(sr), stats.norm.isf(br)
        want = stats.multivariate_normal.cdf([-h, -k], mean=[0, 0], cov=[[1, r], [r, 1]],
                                             abseps=1e-10, releps=1e-10) / sr
        assert call("TAYLOR_RUSSELL", r, br, sr) == pytest.approx(want, abs=1e-6), (r, br, sr)


def quad_success_ratio(r, br, sr):
    """Success ratio as a one-dimensional integral over the selected predictor scores (scipy.integrate.quad)."""
    h, k = stats.norm.isf(sr), stats.norm.isf(br)
    s = math.sqrt((1 - r) * (1 + r))
    f = lambda x: math.exp(stats.norm.logpdf(x) - math.log(sr)) * stats.norm.sf((k - r * x) / s)  # noqa: E731
    edges = sorted({h, *(p for p in (k / r - 5 * s / abs(r), k / r, k / r + 5 * s / abs(r)) if p > h)})
    edges.append(math.inf)
    return sum(integrate.quad(f, a, b, epsabs=1e-16, epsrel=1e-12, limit=500)[0] for a, b in zip(edges, edges[1:]))


@pytest.mark.slow  # seconds: the whole suite runs it, the quick loop leaves it out
@pytest.mark.parametrize("sr", [1e-12, 1e-9, 1e-5, 0.3, 1 - 1e-9])
def test_taylor_russell_accuracy_claim_against_adaptive_quadrature(sr):
    # The docstring's accuracy statement, checked over its whole stated range (scipy.integrate.quad).
    for r in (-0.99, -0.6, 0.05, 0.6, 0.92, 0.93, 0.995):
        for br in (1e-9, 0.01, 0.5, 0.999999):
            assert call("TAYLOR_RUSSELL", r, br, sr) == pytest.approx(quad_success_ratio(r, br, sr), abs=1e-12), \
                (r, br, sr)


@pytest.mark.parametrize("br, sr", [(0.3, 0.1), (0.3, 0.5), (0.6, 0.9), (0.05, 0.02)])
def test_taylor_russell_limits(br, sr):
    # Definitions: no validity gives the base rate; perfect validity the Frechet bounds.
    assert call("TAYLOR_RUSSELL", 0, br, sr) == pytest.approx(br, abs=1e-15)
    assert call("TAYLOR_RUSSELL", 1, br, sr) == pytest.approx(min(1, br / sr), abs=1e-15)
    assert call("TAYLOR_RUSSELL", -1, br, sr) == pytest.approx(max(0, (br + sr - 1) / sr), abs=1e-15)


def test_upper_orthant_broadcasts_like_single_calls():
    h = np.array([-1.0, 0.3, 2.0, 0.0])
    rho = np.array([0.2, 0.95, -0.97, 1.0])
    got = upper_orthant_probability(h, 0.4, rho)
    assert got.tolist() == [upper_orthant_probability(a, 0.4, b) for a, b in zip(h, rho)]


# ---------------------------------------------------------------- Naylor-Shine

@pytest.mark.parametrize("sr, printed", [
    (0.50, 0.798),   # Naylor & Shine (1965) table, mean standard score of those selected (from memory)
    (0.10, 1.755),   # from memory
    (0.30, 1.159),   # from memory
])
def test_mean_selected_predictor_score_published(sr, printed):
    # printed to three decimals
    assert call("NAYLOR_SHINE", 1.0, sr) == pytest.approx(printed, abs=0.0005)


@pytest.mark.parametrize("validity, sr", [(0.5, 0.3), (0.35, 0.05), (-0.2, 0.8), (0.9, 1e-6), (0.25, 0.999)])
def test_naylor_shine_against_truncated_normal_mean(validity, sr):
    # Reference library: scipy.stats.truncnorm.mean is E[Z | Z > z]; and an independent quad integral.
    z = stats.norm.isf(sr)
    assert call("NAYLOR_SHINE", validity, sr) == pytest.approx(validity * stats.truncnorm.mean(z, np.inf), rel=1e-11)
    mean_z = integrate.quad(lambda x: x * stats.norm.pdf(x), z, np.inf, epsabs=0, epsrel=1e-11)[0] / sr
    assert call("NAYLOR_SHINE", validity, sr) == pytest.approx(validity * mean_z, rel=1e-9)


# ---------------------------------------------------------------- BCG utility

def test_bcg_utility_worked_by_hand():
    # Brogden (1949) / Cronbach & Gleser (1965) as written by Cascio (1991), worked by hand (not a printed
    # example): 10 hired for 2 years, r = .40, SD_y = 12,000, SR = .20 (z = .8416, phi/SR = 1.3998),
    # 150 per applicant, 50 applicants.
    mean_z = stats.norm.pdf(stats.norm.isf(0.2)) / 0.2
    assert mean_z == pytest.approx(1.39981, abs=1e-5)
    want = 10 * 2 * 0.40 * 12000 * mean_z - 10 * 150 / 0.2
    assert call("BCG_UTILITY", 10, 2, 0.40, 12000, 0.20, 150) == pytest.approx(want, rel=1e-12)
    assert call("BCG_UTILITY", 10, 2, 0.40, 12000, 0.20, 150) == pytest.approx(126881.72, abs=0.01)


def test_bcg_utility_is_naylor_shine_in_money_less_cost():
    # Definition (Brogden 1949): gain per hire per year = SD_y * mean criterion z of those selected.
    for n, t, r, sd, sr, c in [(1, 1, 0.3, 1, 0.5, 0), (25, 3.5, 0.51, 18000, 0.1, 400), (5, 1, -0.2, 900, 0.7, 20)]:
        gain = n * t * sd * call("NAYLOR_SHINE", r, sr)
        assert call("BCG_UTILITY", n, t, r, sd, sr, c) == pytest.approx(gain - n * c / sr, rel=1e-12)


def test_bcg_with_no_validity_is_the_cost_of_assessing_everyone():
    # Common practice: a test with zero validity only costs the assessment of N_s / SR applicants.
    assert call("BCG_UTILITY", 12, 2, 0, 10000, 0.25, 80) == pytest.approx(-12 * 80 / 0.25, rel=1e-14)


# ---------------------------------------------------------------- errors

def test_errors_name_the_argument():
    with raises_code("#NUM!", "validity", match="got 1.2"):
        call("TAYLOR_RUSSELL", 1.2, 0.5, 0.3)
    with raises_code("#NUM!", "base_rate"):
        call("TAYLOR_RUSSELL", 0.3, 1, 0.3)
    with raises_code("#NUM!", "selection_ratio"):
        call("TAYLOR_RUSSELL", 0.3, 0.5, 0)
    with raises_code("#NUM!", "selection_ratio", match="1e-12"):
        call("TAYLOR_RUSSELL", 0.3, 0.5, 1e-13)
    with raises_code("#VALUE!", "base_rate", match="text"):
        call("TAYLOR_RUSSELL", 0.3, "half", 0.3)
    with raises_code("#NUM!", "selection_ratio"):
        call("NAYLOR_SHINE", 0.3, 1.0)
    with raises_code("#NUM!", "n_selected"):
        call("BCG_UTILITY", 0, 2, 0.4, 12000, 0.2, 150)
    with raises_code("#NUM!", "tenure"):
        call("BCG_UTILITY", 10, -1, 0.4, 12000, 0.2, 150)
    with raises_code("#NUM!", "sd_y"):
        call("BCG_UTILITY", 10, 2, 0.4, 0, 0.2, 150)
    with raises_code("#NUM!", "cost_per_applicant"):
        call("BCG_UTILITY", 10, 2, 0.4, 12000, 0.2, -5)
    with raises_code("#NUM!"):
        call("BCG_UTILITY", 1e300, 1e300, 0.4, 1e300, 0.2, 150)  # overflow is refused, not returned as inf
