"""Krippendorff's alpha at the ratio level without a square over distinct values or raters (issue 15).

The quadrature of ``funcs/krippendorff.py`` (``_ratio_pair_sums``) replaces the pairwise sums when there
are many raters or many distinct values. It is checked against the krippendorff package (PyPI; a
reference library, raters x units, hence the transposes), against Krippendorff (2011)'s worked example
as printed in that package's docs (ratio 0.797), and against the direct pairwise sums it replaces, on
data small enough for those, by forcing the quadrature with the module's thresholds.
"""

from __future__ import annotations

import krippendorff
import numpy as np
import pytest

from trueband.funcs import call
from trueband.funcs import krippendorff as kr

# Krippendorff (2011), reliability data with 4 observers and 12 units (units as rows here)
KRIPPENDORFF_2011 = [[1, 1, None, 1], [2, 2, 3, 2], [3, 3, 3, 3], [3, 3, 3, 3], [2, 2, 2, 2], [1, 2, 3, 4],
                     [4, 4, 4, 4], [1, 1, 2, 1], [2, 2, 2, 2], [None, 5, 5, 5], [None, None, 1, 1],
                     [None, 3, None, None]]


@pytest.fixture
def quadrature_always(monkeypatch):
    """Every ratio-level sum through the quadrature (no coincidence table, no direct pairs)."""
    monkeypatch.setattr(kr, "COINCIDENCE_TABLE_MAX_VALUES", 0)
    monkeypatch.setattr(kr, "RATIO_DIRECT_MAX_RATERS", 0)
    monkeypatch.setattr(kr, "RATIO_DIRECT_MAX_VALUES", 0)


def test_worked_example_through_the_quadrature(quadrature_always):
    ours = call("KRIPPENDORFF_ALPHA", KRIPPENDORFF_2011, "ratio")
    assert ours == pytest.approx(0.797, abs=5e-4)  # krippendorff package docs, Krippendorff (2011) example
    data = np.array([[np.nan if c is None else c for c in row] for row in KRIPPENDORFF_2011], dtype=float)
    assert ours == pytest.approx(krippendorff.alpha(data.T, level_of_measurement="ratio"), rel=1e-12)


@pytest.mark.parametrize("seed", [1, 2, 3])
@pytest.mark.parametrize("spread", ["gamma", "wide", "with zeros"])
def test_quadrature_against_the_package(quadrature_always, seed, spread):
    rng = np.random.default_rng(seed)
    if spread == "gamma":
        x = rng.gamma(3.0, 1.0, (50, 1)) + rng.gamma(1.0, 0.5, (50, 6))
    elif spread == "wide":  # ratings over twelve orders of magnitude
        x = np.exp(rng.uniform(-14, 14, (50, 1)) + rng.normal(0, 1, (50, 6)))
    else:
        x = rng.integers(0, 5, (50, 6)).astype(float) * rng.gamma(2.0, 1.0, (50, 1))
    x[rng.random(x.shape) < 0.2] = np.nan
    reference = krippendorff.alpha(x.T, level_of_measurement="ratio")
    assert call("KRIPPENDORFF_ALPHA", x, "ratio") == pytest.approx(reference, rel=1e-11, abs=1e-13)


def test_quadrature_against_the_direct_sums_on_many_values():
    # 6,000 distinct values and 100 raters: above both thresholds, so the quadrature is used; the direct
    # sums (the former method, quadratic) are computed here as the reference
    rng = np.random.default_rng(7)
    x = rng.gamma(3.0, 1.0, (60, 1)) + rng.gamma(1.0, 0.5, (60, 100))
    x[rng.random(x.shape) < 0.1] = np.nan
    ok = ~np.isnan(x)
    m = ok.sum(axis=1).astype(float)
    flat = x[ok]
    observed = 0.0
    for row, present, mu in zip(x, ok, m):
        v = row[present]
        observed += float(kr._ratio_distance(v[:, None], v[None, :]).sum()) / (mu - 1)
    expected = float(kr._ratio_distance(flat[:, None], flat[None, :]).sum())
    direct = 1.0 - (m.sum() - 1.0) * observed / expected
    assert np.unique(flat).size > kr.RATIO_DIRECT_MAX_VALUES and x.shape[1] > kr.RATIO_DIRECT_MAX_RATERS
    assert call("KRIPPENDORFF_ALPHA", x, "ratio") == pytest.approx(direct, rel=1e-12)


def test_all_zero_but_one_unit_and_equal_values(quadrature_always):
    # 0 and a positive value differ by 1 at the ratio level, two zeros by 0 (Krippendorff 2011)
    data = [[0, 0], [0, 0], [3, 3]]
    assert call("KRIPPENDORFF_ALPHA", data, "ratio") == pytest.approx(
        krippendorff.alpha(np.array(data, dtype=float).T, level_of_measurement="ratio"), rel=1e-12)
    from helpers import raises_code

    with raises_code("#DIV/0!", "ratings"):
        call("KRIPPENDORFF_ALPHA", [[2, 2], [2, 2]], "ratio")
