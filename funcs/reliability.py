"""Reliability from item data, and item analysis.

Item ranges hold one row per person and one column per item.

======================  ==========================================  ==========================================
spreadsheet name        Python function                              what it gives
======================  ==========================================  ==========================================
``CRONBACH_ALPHA``      :func:`cronbach_alpha`                       k/(k − 1) · (1 − Σ item variances / total variance)
``ALPHA_CI``            :func:`alpha_confidence_limit`               Feldt's F-based limit for alpha
``KR20``                :func:`kuder_richardson_20`                  alpha for 0/1 items, Σ p·q form
``KR21``                :func:`kuder_richardson_21`                  KR-20 with equal item difficulties, from the mean
``SPLIT_HALF``          :func:`split_half`                           half-test correlation stepped up by Spearman–Brown
``SPEARMAN_BROWN``      :func:`spearman_brown`                       reliability of a test n times as long
``LENGTH_FACTOR``       :func:`length_factor`                        n needed to reach a target reliability
``OMEGA``               :func:`omega_total`                          McDonald's omega total, one-factor ML model
``ITEM_DIFFICULTY``     :func:`item_difficulty`                      mean item score (proportion correct for 0/1)
``ITEM_SD``             :func:`item_standard_deviation`              standard deviation of one item's scores
``ITEM_TOTAL``          :func:`item_total_correlation`               item against the total of the other items
``ALPHA_IF_DELETED``    :func:`alpha_if_deleted`                     alpha of the other items
======================  ==========================================  ==========================================

Conventions
-----------
* Blanks: every function taking an item range uses **listwise deletion**: a
  person with a blank on any item of the range is left out, so all the
  statistics of one range rest on the same people. Text, logical values and
  infinities in an item range are refused, naming the cell.
* Variances are computed in two passes (centre, then sum squares), never with
  the one-pass "sum of squares minus square of sum" formula, which loses all
  digits when scores are large and their spread small. Each item is first
  shifted by its first score (a correctly rounded subtraction, so a common
  offset such as 3e13 costs no digits and an item of equal scores has
  deviations of exactly 0), and the deviations are scaled by a power of two
  when they are very large or very small (scores of 1e200 or 1e-170), which
  leaves every coefficient here unchanged (:func:`trueband.funcs._numeric.centred`).
  Where a variance denominator matters it is stated; in ratios of variances
  (alpha, KR-20) it cancels.
* A total score (or half score, or item) with zero variance gives ``#DIV/0!``.
  "Zero" allows for rounding: a spread (root mean square deviation) smaller
  than 64 machine epsilons times the number of items summed times the
  largest absolute deviation is rounding noise, not spread (the total of two
  items that always add up to the same score, say).
* Too few complete rows or items gives ``#N/A``.
"""

from __future__ import annotations

import dataclasses
from typing import Literal

import numpy as np

from . import _validate as v
from ._lazy import lazy_module
from ._numeric import centred
from ._validate import Range
from .errors import DomainError, InsufficientDataError, ZeroVarianceError
from .registry import spreadsheet

# scipy.stats and scipy.optimize are slow to import: load them on first use (see _lazy)
linalg = lazy_module("scipy.linalg")
optimize = lazy_module("scipy.optimize")
stats = lazy_module("scipy.stats")

__all__ = [
    "cronbach_alpha",
    "alpha_confidence_limit",
    "kuder_richardson_20",
    "kuder_richardson_21",
    "split_half",
    "spearman_brown",
    "length_factor",
    "omega_total",
    "one_factor_ml",
    "OneFactorFit",
    "item_difficulty",
    "item_standard_deviation",
    "item_total_correlation",
    "alpha_if_deleted",
]

#: Rounding noise allowance: a sum of ``terms`` scores of size M carries an error of about
#: terms·eps·M per person; a spread within 64 times that is taken to be no spread at all.
_NOISE = 64 * np.finfo(float).eps


def _is_noise(ss, n: int, terms: int, magnitude) -> np.ndarray:
    """True where a sum of squared deviations over n people is rounding noise, not spread."""
    return ~(np.asarray(ss) > n * (_NOISE * terms * np.asarray(magnitude)) ** 2)


#: Lower bound for unique variances on the correlation scale in the factor fit (as R's factanal).
UNIQUENESS_FLOOR = 0.005


# ---------------------------------------------------------------- shared steps

def _items(name: str, items, *, min_people: int = 2, min_items: int = 2) -> np.ndarray:
    """The complete rows of an item range as a float array (listwise deletion)."""
    matrix = v.numeric_matrix(name, items)
    return v.complete_rows(name, matrix, min_rows=min_people, min_columns=min_items)


def _magnitude(c: np.ndarray, axis=None):
    """The largest absolute deviation (per item with ``axis=0``), for the rounding-noise allowance."""
    return np.maximum(c.max(axis=axis), -c.min(axis=axis))


def _centred(x: np.ndarray, source) -> np.ndarray:
    """Deviations from the item means, offset-free and scaled (the first pass of the two-pass variances)."""
    # x is the fresh array numeric_matrix built unless it shares the caller's memory: centre it in place then
    fresh = not (isinstance(source, np.ndarray) and np.may_share_memory(x, source))
    return centred(x, in_place=fresh)


def _alpha(item_ss_sum: float, total_ss: float, n: int, k: int, magnitude: float, name: str,
           what: str = "total score") -> float:
    """Coefficient alpha from sums of squared deviations (the variance denominators cancel)."""
    if _is_noise(total_ss, n, k, magnitude):
        raise ZeroVarianceError(f"{name}: the {what} has zero variance; alpha is undefined", argument=name)
    return k / (k - 1) * (1.0 - item_ss_sum / total_ss)


def _correlation(a: np.ndarray, b: np.ndarray, terms: tuple[int, int], magnitudes: tuple[float, float],
                 name: str, what_a: str, what_b: str) -> float:
    """Pearson correlation of two score vectors (sums of ``terms`` centred items whose largest
    absolute deviations are ``magnitudes``), refusing a constant one."""
    a = a - a.mean()
    b = b - b.mean()
    ss_a, ss_b = a @ a, b @ b
    for ss, what, m, magnitude in ((ss_a, what_a, terms[0], magnitudes[0]), (ss_b, what_b, terms[1], magnitudes[1])):
        if _is_noise(ss, a.size, m, magnitude):
            raise ZeroVarianceError(f"{name}: {what} has zero variance; the correlation is undefined",
                                    argument=name)
    r = (a @ b) / np.sqrt(ss_a * ss_b)
    return float(np.clip(r, -1.0, 1.0))


def _at_most(name: str, value, high: float):
    arr = np.asarray(value)
    bad = arr > high
    if bad.any():
        raise DomainError(f"{name} must be at most {v.show(high)}, got {v.show(arr[bad].flat[0])}", argument=name)
    return value


# ---------------------------------------------------------------- coefficient alpha

@spreadsheet("CRONBACH_ALPHA", returns="coefficient",
             reference="Cronbach, L. J. (1951). Coefficient alpha and the internal structure of tests. "
                       "Psychometrika 16, 297-334.")
def cronbach_alpha(items: Range) -> float:
    """Coefficient alpha, the internal-consistency reliability of the sum of the items.

    alpha = k/(k − 1) · (1 − Σ s²ᵢ / s²ₓ), with k items, s²ᵢ the variance of
    item i and s²ₓ the variance of the total score (the same denominator for
    both, so which one does not matter).

    Parameters
    ----------
    items : range
        Item scores, one row per person and one column per item; at least 2
        complete rows and 2 items. Rows with a blank are left out (listwise
        deletion); text is refused.

    Notes
    -----
    Alpha is at most 1 and may be negative (items that covary negatively on
    balance). A total score with zero variance gives ``#DIV/0!``.
    Listwise deletion matches ``pingouin.cronbach_alpha(..., nan_policy="listwise")``
    and R's ``psych::alpha(use="complete.obs")``; pingouin's default uses
    pairwise covariances instead.

    Examples
    --------
    >>> round(cronbach_alpha([[1, 2, 2], [2, 3, 3], [3, 3, 4], [4, 5, 4]]), 6)
    0.948529
    """
    x = _items("items", items)
    n, k = x.shape
    c = _centred(x, items)
    total = c.sum(axis=1)
    return _alpha(np.einsum("ij,ij->", c, c), total @ total, n, k, _magnitude(c), "items")


@spreadsheet("ALPHA_CI", returns="coefficient", elementwise=["alpha", "n_people", "n_items", "confidence"],
             reference="Feldt, L. S. (1965). The approximate sampling distribution of Kuder-Richardson "
                       "reliability coefficient twenty. Psychometrika 30, 357-370; Feldt, L. S., Woodruff, D. J. & "
                       "Salih, F. A. (1987). Statistical inference for coefficient alpha. Applied Psychological "
                       "Measurement 11, 93-103.")
def alpha_confidence_limit(alpha: float, n_people: int, n_items: int, *, part: Literal["lower", "upper"],
                           confidence: float = 0.95) -> float:
    """Lower or upper confidence limit for coefficient alpha, by Feldt's F distribution.

    (1 − alpha_population)/(1 − alpha) follows an F distribution with
    df₁ = n − 1 and df₂ = (n − 1)(k − 1), so with a = 1 − confidence

    lower = 1 − (1 − alpha) · F(1 − a/2; df₁, df₂),
    upper = 1 − (1 − alpha) · F(a/2; df₁, df₂),

    F(q; …) being the q-quantile.

    Parameters
    ----------
    alpha : float
        The sample coefficient alpha, at most 1 (it may be negative).
    n_people : int
        Number of people alpha was computed from (after any listwise deletion), at least 2.
    n_items : int
        Number of items, at least 2.
    part : {"lower", "upper"}
        Which limit.
    confidence : float, optional
        Two-sided confidence level, strictly between 0 and 1; default 0.95.

    Notes
    -----
    The interval assumes people are sampled at random and item scores are
    normal with equal error variances (Feldt et al., 1987); it is the
    interval pingouin and R's psych report.

    Examples
    --------
    >>> round(alpha_confidence_limit(0.8, 100, 10, part="lower"), 6), round(alpha_confidence_limit(0.8, 100, 10, part="upper"), 6)
    (0.736048, 0.853692)
    """
    _at_most("alpha", alpha, 1.0)
    v.at_least("n_people", n_people, 2)
    v.at_least("n_items", n_items, 2)
    v.confidence("confidence", confidence)
    tail = (1.0 - np.asarray(confidence, dtype=float)) / 2.0
    df1 = np.asarray(n_people, dtype=float) - 1.0
    df2 = df1 * (np.asarray(n_items, dtype=float) - 1.0)
    # Upper-tail quantile by isf and lower-tail by ppf: neither loses digits as confidence nears 1.
    q = stats.f.isf(tail, df1, df2) if part == "lower" else stats.f.ppf(tail, df1, df2)
    return 1.0 - (1.0 - alpha) * q


# ---------------------------------------------------------------- Kuder–Richardson

@spreadsheet("KR20", returns="coefficient", aliases=["KR_20"],
             reference="Kuder, G. F. & Richardson, M. W. (1937). The theory of the estimation of test "
                       "reliability. Psychometrika 2, 151-160, formula 20.")
def kuder_richardson_20(items: Range) -> float:
    """Kuder–Richardson formula 20: the reliability of a test of right/wrong (0/1) items.

    KR-20 = k/(k − 1) · (1 − Σ pᵢqᵢ / σ²ₓ), with pᵢ the proportion scoring 1
    on item i, qᵢ = 1 − pᵢ, and σ²ₓ the variance of the total score with
    denominator n (the same denominator as pᵢqᵢ). It is coefficient alpha for
    0/1 items, exactly.

    In a workbook cell write ``=KR_20(...)``: spreadsheet apps read ``KR20``
    as the address of the cell in column KR, row 20.

    Parameters
    ----------
    items : range
        Item scores, 0 or 1 only, one row per person and one column per item;
        at least 2 complete rows and 2 items. Rows with a blank are left out
        (listwise deletion); any other value is refused.

    Notes
    -----
    Some textbooks and spreadsheet recipes divide Σpq by the total-score
    variance with denominator n − 1 (VAR.S), which mixes denominators and
    gives a slightly larger value than this (and than alpha).

    Examples
    --------
    >>> round(kuder_richardson_20([[1, 1, 1], [1, 1, 0], [1, 0, 0], [0, 0, 0], [1, 1, 1]]), 6)
    0.794118
    """
    matrix = v.numeric_matrix("items", items)
    bad = ~np.isnan(matrix) & (matrix != 0.0) & (matrix != 1.0)
    if bad.any():
        r, c = np.argwhere(bad)[0]
        raise DomainError(
            f"items must hold only 0 and 1 (right/wrong items) for KR-20; found {v.show(matrix[r, c])} at row "
            f"{r + 1}, column {c + 1} (use CRONBACH_ALPHA for other item scores)", argument="items")
    x = v.complete_rows("items", matrix, min_rows=2, min_columns=2)
    n, k = x.shape
    p = x.mean(axis=0)
    sum_pq = np.sum(p * (1.0 - p))
    total = x.sum(axis=1)
    total_var = np.mean((total - total.mean()) ** 2)  # denominator n, as p·q
    if not total_var > 0:  # sums of 0/1 are exact: no rounding noise to allow for
        raise ZeroVarianceError("items: the total score has zero variance; KR-20 is undefined", argument="items")
    return k / (k - 1) * (1.0 - sum_pq / total_var)


@spreadsheet("KR21", returns="coefficient", elementwise=["n_items", "mean", "variance"], aliases=["KR_21"],
             reference="Kuder, G. F. & Richardson, M. W. (1937). The theory of the estimation of test "
                       "reliability. Psychometrika 2, 151-160, formula 21.")
def kuder_richardson_21(n_items: int, mean: float, variance: float) -> float:
    """Kuder–Richardson formula 21: KR-20 assuming every 0/1 item is equally difficult.

    KR-21 = k/(k − 1) · (1 − M(k − M) / (k · s²)), with k items, M the mean
    total score and s² the variance of total scores.

    In a workbook cell write ``=KR_21(...)`` (``KR21`` reads as a cell address).

    Parameters
    ----------
    n_items : int
        Number of 0/1 items, at least 2.
    mean : float
        Mean total score (number right), between 0 and n_items.
    variance : float
        Variance of the total scores with denominator n (a spreadsheet's
        VAR.P), greater than 0 and at most mean · (n_items − mean).

    Notes
    -----
    The denominator n makes KR-21 the equal-difficulty case of KR-20 as
    computed by :func:`kuder_richardson_20`; KR-21 is then at most KR-20. A
    variance above mean · (n_items − mean) is impossible for scores from 0 to
    n_items with that mean and is refused. Giving the n − 1 variance (VAR.S)
    raises the value slightly.

    Examples
    --------
    A 40-item test with mean 28 and variance 36:

    >>> round(kuder_richardson_21(40, 28, 36), 6)
    0.786325
    """
    v.at_least("n_items", n_items, 2)
    k, m, s2 = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in (n_items, mean, variance)))
    bad = (m < 0) | (m > k)
    if bad.any():
        raise DomainError(f"mean must be between 0 and n_items ({v.show(k[bad].flat[0])}), "
                          f"got {v.show(m[bad].flat[0])}", argument="mean")
    v.at_least("variance", variance, 0.0)
    v.nonzero_variance("variance", variance, "value")
    highest = m * (k - m)
    bad = s2 > highest
    if bad.any():
        raise DomainError(
            f"variance must be at most mean·(n_items − mean) = {v.show(highest[bad].flat[0])} for "
            f"{v.show(k[bad].flat[0])} items scored 0/1, got {v.show(s2[bad].flat[0])}", argument="variance")
    return k / (k - 1.0) * (1.0 - highest / (k * s2))


# ---------------------------------------------------------------- split halves and test length

@spreadsheet("SPLIT_HALF", returns="coefficient",
             reference="Spearman, C. (1910). Correlation calculated from faulty data. British Journal of "
                       "Psychology 3, 271-295; Brown, W. (1910). Some experimental results in the correlation of "
                       "mental abilities. British Journal of Psychology 3, 296-322.")
def split_half(items: Range, *, method: Literal["odd-even", "first-last"] = "odd-even") -> float:
    """Split-half reliability: the correlation of two half-test scores, stepped up by Spearman–Brown.

    r_SB = 2r / (1 + r), with r the Pearson correlation between the sums of
    the two halves.

    Parameters
    ----------
    items : range
        Item scores, one row per person and one column per item; at least 3
        complete rows and 2 items. Rows with a blank are left out (listwise
        deletion); text is refused.
    method : {"odd-even", "first-last"}, optional
        How the items are halved: "odd-even" (default) puts items 1, 3, 5, …
        against 2, 4, 6, …; "first-last" puts the first items against the
        last ones.

    Notes
    -----
    With an odd number of items k the half holding item 1 gets the extra
    item: "odd-even" takes (k + 1)/2 odd-numbered items, "first-last" takes
    items 1 to (k + 1)/2 as the first half. The step-up still doubles the
    length (factor 2), as is usual, although the halves differ by one item.
    Halves correlating exactly −1 give ``#NUM!``; a half with zero variance
    gives ``#DIV/0!``.

    Examples
    --------
    >>> round(split_half([[1, 2, 2, 1], [2, 3, 3, 3], [3, 3, 4, 2], [4, 5, 4, 5]]), 6)
    0.899302
    """
    c = _centred(_items("items", items, min_people=3), items)
    k = c.shape[1]
    if method == "odd-even":
        first, second = c[:, 0::2].sum(axis=1), c[:, 1::2].sum(axis=1)
    else:
        cut = (k + 1) // 2
        first, second = c[:, :cut].sum(axis=1), c[:, cut:].sum(axis=1)
    halves = (k + 1) // 2, k // 2
    magnitude = _magnitude(c)
    r = _correlation(first, second, halves, (magnitude, magnitude), "items",
                     "the first half-test score", "the second half-test score")
    if r <= -1.0:
        raise DomainError("items: the half-test scores correlate -1; the stepped-up coefficient is undefined",
                          argument="items")
    return 2.0 * r / (1.0 + r)


@spreadsheet("SPEARMAN_BROWN", returns="coefficient", elementwise=True,
             reference="Spearman, C. (1910). British Journal of Psychology 3, 271-295; Brown, W. (1910). "
                       "British Journal of Psychology 3, 296-322.")
def spearman_brown(reliability: float, length_factor: float) -> float:
    """Predicted reliability of a test lengthened (or shortened) by a factor, with parallel items.

    ρ* = n·ρ / (1 + (n − 1)·ρ)

    Parameters
    ----------
    reliability : float
        Reliability of the present test, between 0 and 1.
    length_factor : float
        New length divided by present length (2 doubles the test, 0.5 halves it); greater than 0.

    Examples
    --------
    Doubling a test of reliability 0.60:

    >>> round(spearman_brown(0.6, 2), 12)
    0.75
    """
    v.reliability("reliability", reliability)
    v.positive("length_factor", length_factor)
    # written as 1 − ρ + nρ: positive for ρ in [0, 1], and no overflow from (n − 1)
    return length_factor * reliability / ((1.0 - reliability) + length_factor * reliability)


@spreadsheet("LENGTH_FACTOR", returns="nonnegative number", elementwise=True,
             reference="Spearman, C. (1910). British Journal of Psychology 3, 271-295; Brown, W. (1910). "
                       "British Journal of Psychology 3, 296-322 (the prophecy formula solved for length).")
def length_factor(reliability: float, target: float) -> float:
    """Factor by which a test must be lengthened to reach a target reliability (Spearman–Brown).

    n = target · (1 − ρ) / (ρ · (1 − target))

    A factor below 1 means the test could be shortened. Multiply by the
    present number of items for the number needed (rounding up is the usual
    practice).

    Parameters
    ----------
    reliability : float
        Reliability of the present test, greater than 0 and less than 1.
    target : float
        Reliability wanted, greater than 0 and less than 1.

    Examples
    --------
    From 0.50 to 0.80 takes four times the length:

    >>> round(length_factor(0.5, 0.8), 12)
    4.0
    """
    v.reliability("reliability", reliability, allow_zero=False, allow_one=False)
    v.reliability("target", target, allow_zero=False, allow_one=False)
    r, t = np.asarray(reliability, dtype=float), np.asarray(target, dtype=float)
    # in numpy floats: a product that underflows to 0 gives inf (refused as #NUM!), not a Python exception
    return (t * (1.0 - r)) / (r * (1.0 - t))


# ---------------------------------------------------------------- omega

@dataclasses.dataclass(frozen=True)
class OneFactorFit:
    """A one-factor model fitted to a correlation matrix (helper result of :func:`one_factor_ml`)."""

    loadings: np.ndarray      # λ on the correlation scale, signed so that Σλ ≥ 0
    uniquenesses: np.ndarray  # ψ on the correlation scale, within [UNIQUENESS_FLOOR, 1]
    discrepancy: float        # the ML discrepancy at the solution (0 for a perfect fit)
    converged: bool           # the optimality conditions hold to 1e-6
    iterations: int


def one_factor_ml(corr: np.ndarray) -> OneFactorFit:
    """Maximum-likelihood one-factor model of a positive-definite correlation matrix R.

    Minimises the ML discrepancy F = log|Σ| + tr(RΣ⁻¹) − log|R| − p over
    Σ = λλ' + Ψ. For given unique variances Ψ the best λ is Ψ^½·v·√(θ − 1),
    with θ, v the largest eigenvalue and its vector of Ψ^-½ R Ψ^-½, and F is
    Σ (θⱼ − log θⱼ − 1) over the other eigenvalues (Jöreskog, 1967; the same
    objective and gradient as R's ``factanal``). F is minimised over Ψ by
    L-BFGS-B with every unique variance in [0.005, 1].
    """
    p = corr.shape[0]
    start = np.clip((1.0 - 0.5 / p) / np.diag(np.linalg.inv(corr)), UNIQUENESS_FLOOR, 1.0)

    def parts(psi):
        # one eigen-decomposition gives the discrepancy, its gradient and the loadings
        s = 1.0 / np.sqrt(psi)
        # scipy's LAPACK syevd: numpy's eigh was up to a hundred times slower on these small
        # matrices when the machine's cores were busy (BLAS threads waiting on each other)
        values, vectors = linalg.eigh(corr * s[:, None] * s[None, :], driver="evd")  # ascending
        rest = values[:-1]
        f = float(np.sum(rest - np.log(rest)) - (p - 1))
        lam = np.sqrt(psi) * vectors[:, -1] * np.sqrt(max(values[-1] - 1.0, 0.0))
        misfit = lam * lam + psi - 1.0  # diag(λλ' + Ψ − R), diag(R) = 1
        return f, misfit / (psi * psi), lam, misfit

    def optimality_gap(psi, misfit):
        # The optimality conditions: a zero gradient where ψ is free, a gradient pushing outwards
        # where ψ sits on a bound. Judged on the diagonal misfit (the gradient times ψ²), which is
        # free of scale, and whatever the line search reported.
        gap = np.where(psi <= UNIQUENESS_FLOOR, np.minimum(misfit, 0.0),
                       np.where(psi >= 1.0, np.maximum(misfit, 0.0), misfit))
        return float(np.max(np.abs(gap))) if np.all(np.isfinite(gap)) else np.inf

    best = None
    # A second start from the middle of the box rescues the rare stall where the two largest
    # eigenvalues meet (the objective has a kink there and the line search stops).
    for first in (start, np.full(p, 0.5)):
        result = optimize.minimize(lambda psi: parts(psi)[:2], first, jac=True, method="L-BFGS-B",
                                   bounds=[(UNIQUENESS_FLOOR, 1.0)] * p,
                                   options={"maxiter": 2000, "ftol": 1e-15, "gtol": 1e-9})
        psi = np.clip(result.x, UNIQUENESS_FLOOR, 1.0)
        f, _, lam, misfit = parts(psi)
        fit = OneFactorFit(lam if lam.sum() >= 0 else -lam, psi, f,
                           optimality_gap(psi, misfit) <= 1e-6, int(result.nit))
        if best is None or (not fit.converged, fit.discrepancy) < (not best.converged, best.discrepancy):
            best = fit
        if fit.converged:
            break
    return best


@spreadsheet("OMEGA", returns="coefficient",
             reference="McDonald, R. P. (1999). Test Theory: A Unified Treatment, ch. 6 (omega, eq. 6.20b); "
                       "Joreskog, K. G. (1967). Some contributions to maximum likelihood factor analysis. "
                       "Psychometrika 32, 443-482.")
def omega_total(items: Range) -> float:
    """McDonald's omega total: reliability of the item sum under a one-factor model.

    omega = (Σ λᵢ)² / ((Σ λᵢ)² + Σ ψᵢ), with λᵢ the loading and ψᵢ the unique
    variance of item i in a one-factor model of the item covariances, on the
    items' own scales (the reliability of the plain sum of the items).

    Parameters
    ----------
    items : range
        Item scores, one row per person and one column per item; at least 3
        items and more complete rows than items. Rows with a blank are left
        out (listwise deletion); text is refused.

    Notes
    -----
    Estimator: maximum-likelihood factor analysis of the item correlation
    matrix (Jöreskog, 1967; as R's ``factanal``), fitted with
    ``scipy.optimize.minimize`` (L-BFGS-B); ML is scale-free, so loadings and
    unique variances on the items' scales are the correlation-scale ones
    times each item's standard deviation (and its square). The denominator
    is the model-implied variance of the sum, not the observed one.

    Heywood cases: unique variances are kept at or above 0.005 of each item's
    variance. If the best fit puts an item on that floor (a Heywood case: the
    item would need a communality of 1 or more) the one-factor model does not
    describe the data properly and ``#NUM!`` is returned, naming the items;
    so is a fit that does not converge. Items with zero variance give
    ``#DIV/0!``; linearly dependent items (a singular correlation matrix)
    give ``#NUM!``.

    Examples
    --------
    >>> data = [[3, 3, 4, 3], [2, 2, 3, 2], [3, 2, 3, 2], [1, 1, 1, 1], [4, 5, 5, 3], [3, 3, 5, 4], [4, 3, 3, 3], [4, 4, 3, 3]]
    >>> round(omega_total(data), 4)
    0.921
    """
    x = v.numeric_matrix("items", items)
    if x.shape[1] < 3:
        raise InsufficientDataError(
            f"items needs at least 3 columns for a one-factor model, got {x.shape[1]}", argument="items")
    x = v.complete_rows("items", x, min_rows=x.shape[1] + 1, min_columns=3)
    c = _centred(x, items)  # one scale for every item: omega depends on the items' relative scales
    ss = np.einsum("ij,ij->j", c, c)
    flat = _is_noise(ss, x.shape[0], 1, _magnitude(c, axis=0))
    if flat.any():
        cols = [str(j + 1) for j in np.flatnonzero(flat)]
        which = f"item {cols[0]} has" if len(cols) == 1 else f"items {', '.join(cols)} have"
        raise ZeroVarianceError(f"items: {which} zero variance; omega is undefined", argument="items")
    sd = np.sqrt(ss)  # common factor sqrt(n - 1) omitted: omega is free of the scale of every item
    corr = (c.T @ c) / np.outer(sd, sd)
    np.fill_diagonal(corr, 1.0)
    if np.linalg.eigvalsh(corr)[0] <= 1e-10:
        raise DomainError("items are linearly dependent (their correlation matrix is singular); "
                          "omega is undefined", argument="items")
    fit = one_factor_ml(corr)
    if not fit.converged:
        raise DomainError("items: the one-factor model did not converge; omega is not available",
                          argument="items")
    heywood = fit.uniquenesses <= UNIQUENESS_FLOOR * (1.0 + 1e-6)
    if heywood.any():
        cols = [str(j + 1) for j in np.flatnonzero(heywood)]
        which = f"item {cols[0]} has its" if len(cols) == 1 else f"items {', '.join(cols)} have their"
        raise DomainError(
            f"items: Heywood case in the one-factor model ({which} unique variance at the floor "
            f"{UNIQUENESS_FLOOR}); omega is not trustworthy for these data", argument="items")
    lam = fit.loadings * sd
    psi = fit.uniquenesses * sd * sd
    common = lam.sum() ** 2
    return common / (common + psi.sum())


# ---------------------------------------------------------------- item analysis

def _rest_total(x: np.ndarray, j: int) -> np.ndarray:
    """Row sums over every column but j: summed around it, not total minus item (no cancellation
    when item j is much larger than the rest), and without copying the matrix."""
    return x[:, :j].sum(axis=1) + x[:, j + 1:].sum(axis=1)


def _item_and_rows(items, item, *, min_people: int, min_items: int):
    matrix = v.numeric_matrix("items", items)
    j = v.column_index("item", item, matrix.shape[1])
    return v.complete_rows("items", matrix, min_rows=min_people, min_columns=min_items), j


@spreadsheet("ITEM_DIFFICULTY", returns="number",
             reference="Crocker, L. & Algina, J. (1986). Introduction to Classical and Modern Test Theory, "
                       "ch. 14 (item difficulty p).")
def item_difficulty(items: Range, item: int) -> float:
    """Item difficulty: the mean score on one item (for 0/1 items, the proportion answering right).

    p = Σ xᵢⱼ / n over the n people with complete rows

    Parameters
    ----------
    items : range
        Item scores, one row per person and one column per item; at least 1
        complete row. Rows with a blank anywhere are left out (listwise
        deletion, so every item statistic of the range uses the same people);
        text is refused.
    item : int
        Column number of the item within the range, from 1.

    Notes
    -----
    A blank is missing, not wrong: to count an omitted answer as wrong,
    score it 0 before analysis.

    Examples
    --------
    >>> item_difficulty([[1, 0], [1, 1], [0, 1], [1, 1]], 1)
    0.75
    """
    x, j = _item_and_rows(items, item, min_people=1, min_items=1)
    return float(x[:, j].mean())


@spreadsheet("ITEM_SD", returns="nonnegative number",
             reference="Crocker, L. & Algina, J. (1986). Introduction to Classical and Modern Test Theory, "
                       "ch. 14 (item variance); the n - 1 denominator as in STDEV.")
def item_standard_deviation(items: Range, item: int) -> float:
    """Standard deviation of the scores on one item, over the same people as the other item statistics.

    s = √( Σ (xᵢⱼ − x̄ⱼ)² / (n − 1) ) over the n people with complete rows

    For rating-scale (Likert) items it says how much the answers spread; for
    0/1 items it is √(p(1 − p) · n/(n − 1)).

    Parameters
    ----------
    items : range
        Item scores, one row per person and one column per item; at least 2
        complete rows. Rows with a blank anywhere are left out (listwise
        deletion, as every item statistic of the range); text is refused.
    item : int
        Column number of the item within the range, from 1.

    Notes
    -----
    The n − 1 (sample) denominator, as the spreadsheet's STDEV; over the
    complete rows only, so it can differ from STDEV of the item's column
    when other items have blanks.

    Examples
    --------
    >>> round(item_standard_deviation([[1, 2], [3, 4], [5, 1], [4, 4]], 1), 6)
    1.707825
    """
    x, j = _item_and_rows(items, item, min_people=2, min_items=1)
    c, scale = centred(x[:, j], axis=None, with_scale=True)  # scaled: scores of 1e200 do not overflow the squares
    return float(np.sqrt(c @ c / (x.shape[0] - 1)) / scale)


@spreadsheet("ITEM_TOTAL", returns="correlation",
             reference="Crocker, L. & Algina, J. (1986). Introduction to Classical and Modern Test Theory, "
                       "ch. 14 (corrected item-total correlation); Henrysson, S. (1963). Correction of item-total "
                       "correlations in item analysis. Psychometrika 28, 211-218.")
def item_total_correlation(items: Range, item: int) -> float:
    """Corrected item–total correlation: one item against the total of the other items.

    r = corr(xⱼ, Σ_{i≠j} xᵢ), Pearson; the item is left out of the total so it
    is not correlated with itself (for 0/1 items this is the corrected
    point-biserial).

    Parameters
    ----------
    items : range
        Item scores, one row per person and one column per item; at least 3
        complete rows and 2 items. Rows with a blank are left out (listwise
        deletion); text is refused.
    item : int
        Column number of the item within the range, from 1.

    Notes
    -----
    An item, or a rest total, with zero variance gives ``#DIV/0!``.

    Examples
    --------
    >>> round(item_total_correlation([[1, 2, 2], [2, 3, 3], [3, 3, 4], [4, 5, 4]], 1), 6)
    0.992278
    """
    x, j = _item_and_rows(items, item, min_people=3, min_items=2)
    c = _centred(x, items)
    rest = _rest_total(c, j)
    return _correlation(c[:, j], rest, (1, x.shape[1] - 1), (_magnitude(c[:, j]), _magnitude(c)), "items",
                        f"item {j + 1}", f"the total of the items other than {j + 1}")


@spreadsheet("ALPHA_IF_DELETED", returns="coefficient",
             reference="Cronbach, L. J. (1951). Psychometrika 16, 297-334; Crocker, L. & Algina, J. (1986). "
                       "Introduction to Classical and Modern Test Theory, ch. 14.")
def alpha_if_deleted(items: Range, item: int) -> float:
    """Coefficient alpha of the test with one item left out.

    alpha₋ⱼ = (k − 1)/(k − 2) · (1 − Σ_{i≠j} s²ᵢ / s²₋ⱼ), with s²₋ⱼ the
    variance of the total of the other k − 1 items.

    Parameters
    ----------
    items : range
        Item scores, one row per person and one column per item; at least 2
        complete rows and 3 items. Rows with a blank are left out (listwise
        deletion, over all the items of the range, including the one left
        out); text is refused.
    item : int
        Column number of the item to leave out, from 1.

    Examples
    --------
    >>> round(alpha_if_deleted([[1, 2, 2], [2, 3, 3], [3, 3, 4], [4, 5, 4]], 1), 6)
    0.846154
    """
    x, j = _item_and_rows(items, item, min_people=2, min_items=3)
    n, k = x.shape
    c = _centred(x, items)
    item_ss = np.einsum("ij,ij->j", c, c)
    rest = _rest_total(c, j)
    return _alpha(np.delete(item_ss, j).sum(), rest @ rest, n, k - 1, _magnitude(c), "items",
                  f"total of the items other than {j + 1}")
