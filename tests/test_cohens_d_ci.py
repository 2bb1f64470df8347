"""COHENS_D_CI: Cohen's d with its noncentral-t confidence interval, checked against outside values.

Sources:
* the estimate: pingouin.compute_effsize(eftype="cohen") (reference library; pooled SD, n − 1 denominators);
* the limits: their defining property, P(T ≤ t) = 1 − α/2 (lower) and α/2 (upper) for the noncentral t with
  n_a + n_b − 2 degrees of freedom (Steiger & Fouladi 1997), with the distribution function computed
  independently of scipy's noncentral t by numerical integration over the chi-square mixing variable,
  P(T ≤ t | λ) = ∫ Φ(t √(v/df) − λ) f_χ²(v; df) dv (scipy.integrate.quad, scipy.stats.norm and chi2);
* large samples: the normal approximation of Hedges & Olkin (1985, ch. 5), SE² = (n_a + n_b)/(n_a n_b) +
  d² / (2(n_a + n_b)), which the exact limits approach.
"""

import math

import numpy as np
import pingouin as pg
import pytest
from scipy import integrate, stats

from helpers import raises_code
from trueband.funcs import call


def noncentral_t_cdf(t, df, ncp):
    def integrand(v):
        return stats.norm.cdf(t * math.sqrt(v / df) - ncp) * stats.chi2.pdf(v, df)

    value, _ = integrate.quad(integrand, 0, np.inf, epsabs=1e-13, epsrel=1e-11, limit=200)
    return value


def groups(seed, na, nb, shift):
    rng = np.random.default_rng(seed)
    return rng.normal(50 + shift, 10, na).round(1).tolist(), rng.normal(50, 10, nb).round(1).tolist()


@pytest.mark.parametrize("seed, na, nb, shift", [(1, 8, 11, 5), (2, 25, 25, -3), (3, 40, 12, 9), (4, 5, 5, 0)])
@pytest.mark.parametrize("confidence", [0.9, 0.95])
def test_limits_have_the_defining_coverage(seed, na, nb, shift, confidence):
    a, b = groups(seed, na, nb, shift)
    d = call("COHENS_D_CI", a, b, "estimate")
    assert d == pytest.approx(pg.compute_effsize(a, b, eftype="cohen"), rel=1e-12)  # pingouin (reference library)
    assert d == call("COHENS_D", a, b)
    scale = math.sqrt(na * nb / (na + nb))
    t, df, alpha = d * scale, na + nb - 2, 1 - confidence
    lower = call("COHENS_D_CI", a, b, "lower", confidence)
    upper = call("COHENS_D_CI", a, b, "upper", confidence)
    assert lower < d < upper
    assert noncentral_t_cdf(t, df, lower * scale) == pytest.approx(1 - alpha / 2, abs=1e-9)
    assert noncentral_t_cdf(t, df, upper * scale) == pytest.approx(alpha / 2, abs=1e-9)


def test_large_samples_approach_the_normal_approximation():
    a, b = groups(7, 3000, 2500, 4)
    d = call("COHENS_D", a, b)
    se = math.sqrt((3000 + 2500) / (3000 * 2500) + d * d / (2 * (3000 + 2500)))  # Hedges & Olkin (1985)
    z = stats.norm.ppf(0.975)
    assert call("COHENS_D_CI", a, b, "lower") == pytest.approx(d - z * se, abs=2e-3)
    assert call("COHENS_D_CI", a, b, "upper") == pytest.approx(d + z * se, abs=2e-3)


def test_swapping_the_groups_mirrors_the_interval():
    a, b = groups(9, 12, 15, 6)
    assert call("COHENS_D_CI", b, a, "lower") == pytest.approx(-call("COHENS_D_CI", a, b, "upper"), rel=1e-9)


def test_far_apart_groups_still_give_limits():
    # t near 24 with 6 degrees of freedom, where scipy's nctdtr returns nan at some points: the limits come from
    # the survival function and bracket d.
    a, b = [0, 1] * 2, [10, 11] * 2
    d = call("COHENS_D_CI", a, b, "estimate")
    assert call("COHENS_D_CI", a, b, "lower") < d < call("COHENS_D_CI", a, b, "upper") < 0


@pytest.mark.parametrize("args, code, argument", [
    # (common practice: spreadsheet apps answer bad text with #VALUE!)
    (([1, 2, 3], [4, 5, 6], "middle"), "#VALUE!", "part"),
    (([1, 2, 3], [4, 5, 6], "lower", 0), "#NUM!", "confidence"),
    (([1], [4, 5, 6], "lower"), "#N/A", "scores_a"),
    (([1, 2, 3], [4, "x", 6], "lower"), "#VALUE!", "scores_b"),
    (([2, 2, 2], [4, 4], "upper"), "#DIV/0!", "scores_a"),
])
def test_bad_input_is_refused(args, code, argument):
    with raises_code(code, argument):
        call("COHENS_D_CI", *args)


def test_blanks_are_ignored():
    assert call("COHENS_D_CI", [1, None, 3, 4], [2, 2.5, None, 1], "upper") == call(
        "COHENS_D_CI", [1, 3, 4], [2, 2.5, 1], "upper")
