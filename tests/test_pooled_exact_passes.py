"""POOLED_EXACT_P's coarse first pass (issue 17: speed) gives the p value of the full convolution.

The exact conditional test is checked against brute-force enumeration in exact fractions in
tests/test_pooled.py; here the fast path (probabilities below 1e-20 of the largest dropped, kept only when
its a-posteriori error bound is small) is compared with the full convolution (down to 1e-300, the method
before the change) on many strata, from p near 1 to p far in a tail, and the bound is checked to hold.
"""

from __future__ import annotations

import numpy as np
import pytest

from trueband.funcs import call
from trueband.funcs import impact_pooled as pooled


def strata(k, seed, ratio):
    rng = np.random.default_rng(seed)
    fa = rng.integers(20, 121, k)
    ra = rng.integers(20, 121, k)
    rate = rng.uniform(0.2, 0.7, k)
    return np.column_stack([rng.binomial(fa, rate * ratio), fa, rng.binomial(ra, rate), ra]).tolist()


@pytest.mark.parametrize("k, ratio", [(1000, 1.0), (1000, 0.97), (1000, 0.93), (300, 0.85), (40, 0.9), (5, 1.0)])
@pytest.mark.parametrize("seed", [1, 2])
def test_the_fast_pass_gives_the_full_convolutions_p(k, ratio, seed):
    rows = strata(k, seed, ratio)
    full, _ = pooled._exact_p(pooled._tables(rows), pooled._NEGLIGIBLE)
    assert call("POOLED_EXACT_P", rows) == pytest.approx(full, rel=1e-10, abs=0)


@pytest.mark.parametrize("seed", range(4))
def test_the_error_bound_of_the_first_pass_holds(seed):
    rows = strata(600, seed, 0.98)
    t = pooled._tables(rows)
    fast, bound = pooled._exact_p(t, pooled._FAST_NEGLIGIBLE)
    full, _ = pooled._exact_p(t, pooled._NEGLIGIBLE)
    assert np.isfinite(bound)
    assert abs(fast - full) <= bound * full + 1e-15 * full
