"""Krippendorff's alpha: agreement of any number of raters, with missing ratings, at any level of measurement.

======================  ================================================  ======================================
spreadsheet name        Python function                                   what it gives
======================  ================================================  ======================================
``KRIPPENDORFF_ALPHA``  :func:`krippendorff_alpha`                        any number of raters, missing ratings,
                                                                          nominal to ratio data
======================  ================================================  ======================================

A method family of rater agreement (the registry files it under the topic
``agreement``; the names here are importable from :mod:`trueband.funcs.agreement`
as well). Rating ranges have one row per unit (person rated) and one column
per rater; blanks are missing ratings and units with fewer than two ratings
are not pairable. Text categories follow the project's one policy
(:mod:`trueband.funcs._categories`: trimmed, case folded, the number 1 and
the text "1" one category).
"""

from __future__ import annotations

from typing import Literal

import numpy as np

from . import _validate as v
from ._categories import category_codes
from ._lazy import lazy_module
from ._budget import check_cost, check_time
from ._numeric import centred, power_of_two, sum_of_products
from ._validate import Range
from .errors import DomainError, InsufficientDataError, ZeroVarianceError
from .registry import spreadsheet

# scipy.stats is slow to import: load it on first use (see _lazy)
stats = lazy_module("scipy.stats")

#: The catalog topic of these functions (a family of rater agreement).
TOPIC = "agreement"

__all__ = ["krippendorff_alpha", "COINCIDENCE_TABLE_MAX_VALUES"]


# ---------------------------------------------------------------- Krippendorff's alpha

#: Up to this many distinct values the coincidence matrix (values × values) is formed; beyond, its sums
#: are accumulated pair by pair so that many distinct values cost no quadratic memory.
COINCIDENCE_TABLE_MAX_VALUES = 256
#: Ratio level without the table: pairs of raters are compared directly up to this many raters (columns),
#: and pairs of distinct values up to this many distinct values; beyond, both sums come from the
#: quadrature of :func:`_ratio_pair_sums`, whose cost grows linearly with the ratings.
RATIO_DIRECT_MAX_RATERS = 64
RATIO_DIRECT_MAX_VALUES = 4096
#: Cells handled at once by the chunked loops (bounds their memory to a few tens of MB).
_CHUNK_CELLS = 1 << 20
#: Step of the trapezoid rule in s = ln t (see :func:`_ratio_pair_sums`): measured against the direct
#: sums, a relative error of about 1e-16 at 0.25 (1e-14 at 0.3, 5e-11 at 0.4).
_QUADRATURE_STEP = 0.25
#: The quadrature spans ln(largest / smallest positive rating); beyond this (a spread of about 1e-300)
#: the direct sums are used.
_QUADRATURE_MAX_LOG_SPREAD = 690.0


def _ratio_distance(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    s = x + y
    d = np.divide(x - y, s, out=np.zeros(np.broadcast(x, y).shape), where=s != 0)  # 0 and 0: same value
    return d * d


def _squared_differences(domain: np.ndarray, totals: np.ndarray, level: str) -> np.ndarray:
    """δ²_ck for every pair of values (Krippendorff 2011), values sorted ascending."""
    if level == "nominal":
        return 1.0 - np.eye(totals.size)
    if level == "ordinal":
        rank = np.cumsum(totals) - totals / 2.0  # Σ_{g<c} n_g + n_c/2: differences are the ordinal δ
        return (rank[:, None] - rank[None, :]) ** 2
    if level == "interval":
        return (domain[:, None] - domain[None, :]) ** 2
    return _ratio_distance(domain[:, None], domain[None, :])


def _coincidence_sums(units: np.ndarray, codes: np.ndarray, m: np.ndarray, domain, level: str):
    """Σ o_ck δ²_ck and Σ n_c n_k δ²_ck from the coincidence matrix itself."""
    values = int(codes.max()) + 1
    coincidences = np.zeros((values, values))
    # units × values counts, a block of units at a time (many units would make the full table large)
    step = max(1, _CHUNK_CELLS // values)
    bounds = np.searchsorted(units, np.arange(0, m.size + step, step))
    for lo in range(0, m.size, step):
        check_time()
        a, b = bounds[lo // step], bounds[lo // step + 1]
        block = m[lo:lo + step]
        counts = np.bincount((units[a:b] - lo) * values + codes[a:b],
                             minlength=block.size * values).reshape(block.size, values).astype(float)
        weighted = counts / (block - 1.0)[:, None]
        # o_ck = Σ_u n_uc (n_uk − [c = k]) / (m_u − 1)
        coincidences += weighted.T @ counts
        coincidences[np.diag_indices(values)] -= weighted.sum(axis=0)
    totals = coincidences.sum(axis=0)
    d2 = _squared_differences(domain, totals, level)
    return float(np.sum(coincidences * d2)), float(totals @ d2 @ totals)


def _ratio_pair_sums(x: np.ndarray, starts: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """Σ_{i,j} w_i w_j ((x_i − x_j)/(x_i + x_j))² over the ordered pairs within each group, in time linear in x.

    ``x`` (ratings ≥ 0, largest about 1) holds the groups one after another, each starting at
    ``starts``. For a + b > 0, ((a − b)/(a + b))² = ∫₀^∞ t (a − b)² e^(−t(a+b)) dt, and within a
    group Σ_ij ω_i ω_j (x_i − x_j)² = 2 W Σ_i ω_i (x_i − m)² with ω_i = w_i e^(−t x_i), W = Σ ω_i
    and m = Σ ω_i x_i / W (two passes, no cancellation). With t = e^s the integrand in s is
    t² · 2 W Σ ω_i (x_i − m)² = 2 W Σ ω_i (y_i − μ)² (y = t x, μ = t m), analytic in the strip
    |Im s| < π/2 and decaying fast at both ends, so the trapezoid rule of step h converges
    geometrically, with an error of order exp(−2π(π/2 − δ)/h)/δ² for any 0 < δ < π/2 (Trefethen &
    Weideman 2014, SIAM Review 56, 385–458); at h = 0.25 it is at rounding level (tests compare it
    with the direct sums). The range covers every pair: below s = −ln(2 max) − 20 a pair keeps less than e^−40 of its
    value, above s = ln(45 / smallest positive) less than 46 e^−45. A pair of zeros adds nothing, as
    its δ² = 0; a zero and a positive value add 1.
    """
    positive = x[x > 0]
    if positive.size == 0:
        return np.zeros(starts.size)
    s_lo = -np.log(2.0 * positive.max()) - 20.0
    s_hi = np.log(45.0) - np.log(positive.min())
    nodes = np.exp(np.arange(s_lo, s_hi + _QUADRATURE_STEP, _QUADRATURE_STEP))
    check_cost(12.0 * nodes.size * x.size, f"comparing {x.size} ratings at the ratio level")
    group = np.repeat(np.arange(starts.size), np.diff(np.append(starts, x.size)))
    total = np.zeros(starts.size)
    step = max(1, _CHUNK_CELLS // max(1, x.size))
    for lo in range(0, nodes.size, step):
        check_time()
        y = np.minimum(nodes[lo:lo + step, None] * x[None, :], 1e3)  # e^−1000 is 0 in floating point
        omega = weights * np.exp(-y)
        w = np.add.reduceat(omega, starts, axis=1)
        mean = np.divide(np.add.reduceat(omega * y, starts, axis=1), w, out=np.zeros_like(w), where=w > 0)
        y -= mean[:, group]
        total += np.sum(2.0 * w * np.add.reduceat(omega * y * y, starts, axis=1), axis=0)
    # a group of equal values has no pairs that differ: exactly 0, not the rounding of y − μ
    constant = np.minimum.reduceat(x, starts) == np.maximum.reduceat(x, starts)
    total[constant] = 0.0
    return total * _QUADRATURE_STEP


def _direct_sums(units, codes, m, x, ok, level: str):
    """The same two sums without the values × values table (many distinct values)."""
    if level == "nominal":
        values = int(codes.max()) + 1
        # Σ_{i≠j in u} [c_i ≠ c_j] = m_u² − Σ_c n_uc²
        keys, pair_counts = np.unique(units * values + codes, return_counts=True)
        same = np.bincount(keys // values, weights=pair_counts.astype(float) ** 2, minlength=m.size)
        totals = np.bincount(codes, minlength=values).astype(float)
        n = float(m.sum())
        return float(np.sum((m * m - same) / (m - 1))), n * n - sum_of_products(totals, totals)
    if level == "ordinal":
        x = x.copy()
        x[ok] = stats.rankdata(x[ok], method="average")  # ordinal δ = difference of mid-ranks
    if level in ("interval", "ordinal"):
        # Σ_{i≠j in u} (x_i − x_j)² = 2 m_u Σ_i (x_i − x̄_u)²,
        # Σ_c Σ_k n_c n_k (c − k)² = 2 n Σ (x − x̄)²
        means = np.where(ok, x, 0.0).sum(axis=1) / m
        dev = np.where(ok, x - means[:, None], 0.0)
        flat = x[ok]
        centred = flat - flat.mean()
        return (float(np.sum(2.0 * m * np.einsum("ij,ij->i", dev, dev) / (m - 1))),
                2.0 * flat.size * sum_of_products(centred, centred))
    return _ratio_observed(x, ok, m), _ratio_expected(x[ok])


def _quadrature_fits(values: np.ndarray) -> bool:
    positive = values[values > 0]
    return positive.size == 0 or float(np.log(positive.max()) - np.log(positive.min())) <= _QUADRATURE_MAX_LOG_SPREAD


def _ratio_observed(x: np.ndarray, ok: np.ndarray, m: np.ndarray) -> float:
    """Σ_u Σ_{i≠j in u} δ²(x_i, x_j) / (m_u − 1) at the ratio level."""
    k = x.shape[1]
    if k > RATIO_DIRECT_MAX_RATERS and _quadrature_fits(x[ok]):
        units = np.nonzero(ok)[0]  # row-major: each unit's ratings follow one another
        starts = np.searchsorted(units, np.arange(m.size))
        return float(np.sum(_ratio_pair_sums(x[ok], starts, np.ones(units.size)) / (m - 1)))
    check_cost(3.0 * x.shape[0] * k * k, f"comparing the pairs of {k} raters")
    filled = np.where(ok, x, 0.0)
    observed = 0.0
    step = max(1, _CHUNK_CELLS // (k * k))
    for start in range(0, x.shape[0], step):
        check_time()
        xs, oks = filled[start:start + step], ok[start:start + step]
        d = _ratio_distance(xs[:, :, None], xs[:, None, :])
        d *= oks[:, :, None] & oks[:, None, :]
        observed += float(np.sum(d.sum(axis=(1, 2)) / (m[start:start + step] - 1)))
    return observed


def _ratio_expected(flat: np.ndarray) -> float:
    """Σ_c Σ_k n_c n_k δ²_ck at the ratio level, over the distinct values c, k."""
    distinct, counts = np.unique(flat, return_counts=True)
    counts = counts.astype(float)
    if distinct.size > RATIO_DIRECT_MAX_VALUES and _quadrature_fits(distinct):
        return float(_ratio_pair_sums(distinct, np.zeros(1, dtype=np.intp), counts)[0])
    check_cost(3.0 * distinct.size * distinct.size, f"comparing {distinct.size} distinct values")
    expected = 0.0
    step = max(1, _CHUNK_CELLS // distinct.size)
    for start in range(0, distinct.size, step):
        check_time()
        expected += float(counts[start:start + step] @ _ratio_distance(distinct[start:start + step, None],
                                                                       distinct[None, :]) @ counts)
    return expected


def _rescale(x: np.ndarray, ok: np.ndarray, level: str) -> None:
    """Check ratio-level ratings and rescale the present ones in place, leaving alpha unchanged.

    Alpha is unchanged by a shift (interval) and by a scale (interval, ratio): centred and scaled by a
    power of two, ratings of 1e200 or 1e-170 neither overflow nor underflow the squares.
    """
    if level == "ratio" and (x[ok] < 0).any():
        raise DomainError(f"ratings must be at least 0 at the ratio level, got {v.show(x[ok][x[ok] < 0][0])}",
                          argument="ratings")
    if level == "interval":
        x[ok] = centred(x[ok], axis=None)
    elif level == "ratio":
        x[ok] *= power_of_two(np.max(x[ok]))


@spreadsheet("KRIPPENDORFF_ALPHA", returns="coefficient",
             reference="Krippendorff, K. (2011). Computing Krippendorff's alpha-reliability. Annenberg School "
                       "for Communication, University of Pennsylvania; Krippendorff, K. (2004). Content "
                       "Analysis: An Introduction to Its Methodology (2nd ed.), ch. 11.")
def krippendorff_alpha(ratings: Range, *, level: Literal["nominal", "ordinal", "interval", "ratio"] = "nominal") -> float:
    """Krippendorff's alpha: agreement of any number of raters, with missing ratings.

    α = 1 − D_o/D_e = 1 − (n − 1) · Σ_c Σ_k o_ck δ²_ck / Σ_c Σ_k n_c n_k δ²_ck, where
    o_ck is the coincidence matrix (each ordered pair of values c, k within a
    unit with m_u ratings counts 1/(m_u − 1)), n_c = Σ_k o_ck the value totals
    and n the number of pairable values. δ² is 0/1 (nominal), (c − k)²
    (interval), ((c − k)/(c + k))² (ratio), and for ordinal
    (Σ_{g=c..k} n_g − (n_c + n_k)/2)².

    Parameters
    ----------
    ratings : range
        One row per unit (person rated) and one column per rater; blanks are missing ratings. Numbers or
        text at the nominal level, numbers otherwise (at least 0 at the ratio level).
    level : {"nominal", "ordinal", "interval", "ratio"}, optional
        Level of measurement, which sets the difference function δ²; default "nominal".

    Notes
    -----
    Units with fewer than two ratings are not pairable and are left out, as
    Krippendorff (2011) prescribes. The coincidence matrix is formed with
    numpy (o = Nᵀ diag(1/(m_u − 1)) N minus its diagonal correction, N the
    units × values counts) when there are at most
    ``COINCIDENCE_TABLE_MAX_VALUES`` distinct values; with more (continuous
    data), the same two sums are accumulated without the table: unit by unit
    for the observed part and from the value totals for the expected part
    (variances at the interval and ordinal levels; at the ratio level an
    exact quadrature, linear in the ratings: see ``_ratio_pair_sums``). The units × raters layout here is the transpose of the
    krippendorff package's raters × units. Alpha is undefined (``#DIV/0!``)
    when all pairable values are equal.

    Text categories (nominal level) are compared trimmed and with letter
    case folded ("Hire" and "hire" are one category), and a number and its
    text are one category (1, 1.0 and "1"), as group labels are
    (:func:`trueband.funcs.impact.group_key`); the other levels take numbers only.

    Examples
    --------
    Krippendorff (2011), reliability data with 4 observers and 12 units
    (here transposed: units as rows):

    >>> data = [[1, 1, None, 1], [2, 2, 3, 2], [3, 3, 3, 3], [3, 3, 3, 3], [2, 2, 2, 2], [1, 2, 3, 4],
    ...         [4, 4, 4, 4], [1, 1, 2, 1], [2, 2, 2, 2], [None, 5, 5, 5], [None, None, 1, 1], [None, 3, None, None]]
    >>> [round(krippendorff_alpha(data, level=level), 3) for level in ("nominal", "ordinal", "interval", "ratio")]
    [0.743, 0.815, 0.849, 0.797]
    """
    numeric = level != "nominal" or (isinstance(ratings, np.ndarray) and ratings.dtype.kind in "fiu")
    if numeric:
        x = v.numeric_matrix("ratings", ratings)  # a numeric array takes the fast path, text is refused
        present = ~np.isnan(x)
    else:
        labels = v.label_matrix("ratings", ratings)
        present = np.vectorize(lambda cell: cell is not None, otypes=[bool])(labels)
    per_unit = present.sum(axis=1)
    pairable = per_unit >= 2
    m = per_unit[pairable].astype(float)
    if m.sum() < 2:
        raise InsufficientDataError("ratings need at least one row (unit) with 2 or more ratings", argument="ratings")
    ok = present[pairable]
    units = np.nonzero(ok)[0]
    if numeric:
        x = x[pairable]
        _rescale(x, ok, level)
        domain, codes = np.unique(x[ok], return_inverse=True)
        codes = codes.ravel()
    else:
        x = None
        codes, _ = category_codes(labels[pairable][ok])
        domain = None
    if int(codes.max()) + 1 <= COINCIDENCE_TABLE_MAX_VALUES:
        observed, expected = _coincidence_sums(units, codes, m, domain, level)
    else:
        observed, expected = _direct_sums(units, codes, m, x, ok, level)
    if not expected > 0.0:
        raise ZeroVarianceError(
            "ratings: every pairable rating has the same value; Krippendorff's alpha is undefined",
            argument="ratings")
    return 1.0 - (m.sum() - 1.0) * observed / expected
