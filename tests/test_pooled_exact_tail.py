"""POOLED_EXACT_P far in a tail (p from 1e-4 down to 1e-62), checked against an independent computation.

The reference: each stratum's conditional distribution from scipy.stats.hypergeom.logpmf (reference library),
convolved in log space (logsumexp of every pair, no threshold, no rescaling), then the two-sided p value summed
in log space over the totals no more probable than the observed one (ties within a relative 1e-7, R's
``mantelhaen.test(exact = TRUE)`` convention). Small cases only (the reference is quadratic in Python).
The first pass's threshold guessed from the normal approximation (funcs/impact_pooled.py ``_first_threshold``)
must leave the value that of the full convolution.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import special, stats

from trueband.funcs import call
from trueband.funcs import impact_pooled as pooled


def log_space_exact_p(rows) -> float:
    total = np.array([0.0])  # log P(T = low + i)
    low = 0
    for fs, fa, rs, ra in rows:
        m1 = fs + rs
        support = np.arange(max(0, m1 - ra), min(fa, m1) + 1)
        logpmf = stats.hypergeom.logpmf(support, fa + ra, fa, m1)  # scipy: population, successes, draws
        out = np.full(total.size + logpmf.size - 1, -np.inf)
        for j, lp in enumerate(logpmf):
            out[j:j + total.size] = np.logaddexp(out[j:j + total.size], total + lp)
        total, low = out, low + int(support[0])
    observed = total[sum(r[0] for r in rows) - low]
    tail = total[total <= observed + np.log1p(1e-7)]
    return float(np.exp(special.logsumexp(tail)))


def tail_strata(k: int, seed: int, ratio: float) -> list[list[int]]:
    rng = np.random.default_rng(seed)
    fa, ra = rng.integers(8, 31, k), rng.integers(8, 31, k)
    rate = rng.uniform(0.3, 0.6, k)
    return np.column_stack([rng.binomial(fa, np.minimum(rate * ratio, 1.0)), fa, rng.binomial(ra, rate),
                            ra]).tolist()


@pytest.mark.parametrize("k, ratio, seed", [(30, 0.2, 1), (30, 0.5, 2), (60, 0.6, 3), (60, 1.6, 4), (25, 0.2, 5),
                                            (80, 0.7, 6), (8, 0.1, 7), (120, 0.5, 8), (200, 0.6, 9),
                                            (150, 1.5, 10), (12, 0.4, 1)])
def test_far_tail_against_log_space_convolution_of_scipy_pmfs(k, ratio, seed):
    rows = tail_strata(k, seed, ratio)
    want = log_space_exact_p(rows)
    assert want < 1e-4  # the cases are in a tail indeed (1e-4 to 1e-62)
    assert call("POOLED_EXACT_P", rows) == pytest.approx(want, rel=1e-9, abs=0)


@pytest.mark.parametrize("k, ratio, seed", [(1000, 0.85, 1), (1000, 0.9, 2), (400, 1.25, 3), (200, 0.7, 4)])
def test_the_guessed_first_threshold_gives_the_full_convolutions_p(k, ratio, seed):
    rng = np.random.default_rng(seed)
    fa, ra = rng.integers(20, 121, k), rng.integers(20, 121, k)
    rate = rng.uniform(0.2, 0.7, k)
    rows = np.column_stack([rng.binomial(fa, rate * ratio), fa, rng.binomial(ra, rate), ra]).tolist()
    t = pooled._tables(rows)
    assert pooled._first_threshold(t) < pooled._FAST_NEGLIGIBLE  # the guessed threshold is the one in use
    full, _ = pooled._exact_p(t, pooled._NEGLIGIBLE)
    assert call("POOLED_EXACT_P", rows) == pytest.approx(full, rel=1e-10, abs=0)


def test_near_the_centre_the_first_threshold_is_the_coarse_one():
    rows = tail_strata(50, 9, 1.0)
    assert pooled._first_threshold(pooled._tables(rows)) == pooled._FAST_NEGLIGIBLE
    assert call("POOLED_EXACT_P", rows) == pytest.approx(log_space_exact_p(rows), rel=1e-9)


def test_far_beyond_the_finest_threshold_one_pass_is_enough(monkeypatch):
    # a total so far in a tail that the p value is below ~1e-290 (returned as 0): the first pass is the finest
    # one and, its bound exact, the last (a threshold a hair above 1e-300 made a second pass, twice the work)
    rows = [[2, 20, 18, 20]] * 300
    assert pooled._first_threshold(pooled._tables(rows)) == pooled._NEGLIGIBLE
    passes = []
    real = pooled._exact_p
    monkeypatch.setattr(pooled, "_exact_p", lambda t, negligible: passes.append(negligible) or real(t, negligible))
    assert call("POOLED_EXACT_P", rows) == 0.0
    assert passes == [pooled._NEGLIGIBLE]
