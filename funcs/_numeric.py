"""Numerically careful building blocks shared by the topic modules.

* :func:`centred`: deviations from the mean, free of the data's offset and
  scaled by a power of two, so that sums of squares neither overflow (scores
  of 1e200), underflow (scores of 1e-170) nor lose digits to a common offset
  (whole numbers near 3e13).
* :func:`power_of_two` the scale used: multiplying by a power of two is exact,
  so a scale-free statistic (alpha, a correlation, d, an ICC, kappa) computed
  from the scaled numbers is the statistic of the data.
* :func:`sum_of_products`: Σ a·b with einsum (BLAS dot threads stall on a busy machine).
"""

from __future__ import annotations

import numpy as np

__all__ = ["centred", "power_of_two", "sum_of_products", "TOO_LARGE"]

#: Beyond this magnitude (2**500, about 3e150) squares and sums of squares could overflow: the
#: numbers are scaled first.
TOO_LARGE = 2.0 ** 500

#: Below this magnitude (2**-500, about 3e-151) squares could underflow to zero.
_TOO_SMALL = 2.0 ** -500


def power_of_two(magnitude) -> np.ndarray | float:
    """The power of two s with magnitude·s in [0.5, 1); 1 where magnitude is 0 or not finite.

    >>> power_of_two(3.0), power_of_two(0.0)
    (0.25, 1.0)
    """
    m = np.asarray(magnitude, dtype=float)
    usable = np.isfinite(m) & (m > 0)
    # within ±1000: the factor itself must be a finite normal number (a subnormal magnitude such as
    # 1e-310 is then scaled to about 2**-29, still far from underflow when squared)
    exponent = np.clip(np.frexp(np.where(usable, m, 1.0))[1], -1000, 1000)
    s = np.ldexp(1.0, -exponent)
    s = np.where(usable, s, 1.0)
    return float(s) if s.ndim == 0 else s


def _needs_scale(m) -> bool:
    m = np.asarray(m)
    return bool(((m > TOO_LARGE) | ((m < _TOO_SMALL) & (m > 0))).any())


def centred(x: np.ndarray, *, axis: int | None = 0, per_column: bool = False, in_place: bool = False,
            with_scale: bool = False):
    """Deviations of x from its mean (per column with ``axis=0``, overall with ``axis=None``), rescaled.

    Three steps, each with a reason:

    1. the first value is subtracted first: that subtraction is correctly rounded relative to the
       spread, so a common offset (3e13 + small whole numbers) costs no digits and a column of
       equal values becomes exactly 0 (then no rounding noise fakes a variance);
    2. the mean of those differences is subtracted (the two-pass variance);
    3. the deviations are multiplied by a power of two so the largest is near 1 (overall, or per
       column with ``per_column``): sums of squares of them neither overflow nor underflow, and
       scale-free statistics are unchanged. Numbers beyond about 1e150 are scaled before step 1 too.

    ``in_place`` reuses ``x`` (a fresh array of the caller's) instead of copying it. With
    ``with_scale`` the factor applied is returned too (deviations = result / factor).

    >>> centred(np.array([[3e13 + 1, 1.0], [3e13 + 3, 1.0]])).tolist()
    [[-1.0, 0.0], [1.0, 0.0]]
    """
    if not in_place:
        x = np.array(x, dtype=float)
    scale = 1.0
    big = np.max(np.abs(x)) if x.size else 0.0
    if big > TOO_LARGE:
        scale = power_of_two(big)
        x *= scale
    first = x[:1] if axis == 0 else x.flat[0]
    x -= first.copy() if axis == 0 else first
    x -= x.mean(axis=axis, keepdims=axis is not None)
    spread = np.max(np.abs(x), axis=0 if per_column else None) if x.size else 0.0
    if per_column or _needs_scale(spread):
        factor = power_of_two(spread)
        x *= factor
        scale = scale * factor
    return (x, scale) if with_scale else x


def sum_of_products(a: np.ndarray, b: np.ndarray) -> float:
    """Σ a·b of two vectors; einsum rather than BLAS dot, whose threads stall on a busy machine."""
    return float(np.einsum("i,i->", a, b))
