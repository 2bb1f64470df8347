"""Rater agreement: how far interviewers, assessors or judges agree.

======================  ================================================  ======================================
spreadsheet name        Python function                                   what it gives
======================  ================================================  ======================================
``ICC``                 :func:`intraclass_correlation_part`               one part of an intraclass correlation
                        (all parts: :func:`intraclass_correlation`;       (estimate, confidence limit or p)
                        all six forms: :func:`intraclass_correlations`)
``COHEN_KAPPA``         :func:`cohen_kappa`                               two raters, chance-corrected agreement
                                                                          (unweighted, linear or quadratic)
``FLEISS_KAPPA``        :func:`fleiss_kappa`                              several ratings per person, categories
``KRIPPENDORFF_ALPHA``  :func:`krippendorff_alpha`                        any number of raters, missing ratings,
                                                                          nominal to ratio data
``RWG``                 :func:`within_group_agreement`                    rwg of one item against a uniform null
``RWG_J``               :func:`within_group_agreement_items`              rwg(j) over several items
======================  ================================================  ======================================

Conventions
-----------
* Rating ranges have one row per person rated (applicant, target, unit) and
  one column per rater; blanks are missing ratings. For ``RWG_J`` the rows are
  the members of one group and the columns the items.
* Each function states its blank policy: ``ICC`` deletes incomplete rows
  listwise; ``COHEN_KAPPA`` drops the pairs with a blank; ``FLEISS_KAPPA``
  skips empty rows and refuses rows with fewer ratings than the others;
  ``KRIPPENDORFF_ALPHA`` uses every unit with at least two ratings; ``RWG`` and
  ``RWG_J`` use the ratings present (per item).
* Category labels may be numbers or text where the method allows it
  (``COHEN_KAPPA`` unweighted, ``FLEISS_KAPPA``, nominal
  ``KRIPPENDORFF_ALPHA``); 1 and 1.0 are one category, and text is stripped
  of surrounding spaces.
* Where a coefficient divides by a variance that is zero (every rating the
  same, say), it is undefined and the function says so (``#DIV/0!``) instead
  of returning a number.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Literal

import numpy as np

from . import _validate as v
from ._lazy import lazy_module
from ._validate import Range
from .errors import ArgumentTypeError, DomainError, InsufficientDataError, ZeroVarianceError
from .registry import spreadsheet

# scipy.stats and scipy.optimize are slow to import: load them on first use (see _lazy)
stats = lazy_module("scipy.stats")

__all__ = [
    "IntraclassCorrelation",
    "intraclass_correlation",
    "intraclass_correlation_part",
    "intraclass_correlations",
    "mean_squares",
    "cohen_kappa",
    "fleiss_kappa",
    "krippendorff_alpha",
    "within_group_agreement",
    "within_group_agreement_items",
    "uniform_null_variance",
]

_MODELS = ("oneway", "agreement", "consistency")
_EPS = float(np.finfo(float).eps)
_UNITS = ("single", "average")


# ---------------------------------------------------------------- intraclass correlation

@dataclasses.dataclass(frozen=True)
class IntraclassCorrelation:
    """An intraclass correlation with its F test and confidence limits.

    ``lower`` and ``upper`` are ``nan`` only where the F-based limits do not
    exist (see :func:`intraclass_correlation`); ``F`` is ``inf`` when the
    error mean square is zero (every rater agrees perfectly after the model's
    adjustments), in which case ``p`` is 0.
    """

    estimate: float
    lower: float
    upper: float
    F: float
    df1: int
    df2: int
    p: float
    n: int  # people rated (complete rows used)
    k: int  # raters


def mean_squares(matrix: np.ndarray) -> dict[str, float]:
    """Mean squares of the two-way layout (people × raters, one rating per cell).

    Returns ``rows`` (between people, df n − 1), ``columns`` (between raters,
    df k − 1), ``error`` (residual, df (n − 1)(k − 1)) and ``within`` (within
    people, df n(k − 1), the one-way error term). Each sum of squares is summed
    from its own deviations (two passes, no subtraction of large totals).

    >>> ms = mean_squares(np.array([[1., 2.], [3., 5.], [4., 4.]]))
    >>> {key: round(value, 10) for key, value in ms.items()}
    {'rows': 4.1666666667, 'columns': 1.5, 'error': 0.5, 'within': 0.8333333333}
    """
    n, k = matrix.shape
    x = matrix - matrix.mean()  # centring first keeps the squares small
    scale = float(np.max(np.abs(x)))
    row_means = x.mean(axis=1)
    col_means = x.mean(axis=0)
    ss_rows = k * _sum_of_products(row_means, row_means)
    ss_cols = n * _sum_of_products(col_means, col_means)
    x -= row_means[:, None]  # deviations within people, in place
    flat = x.ravel()
    ss_within = _sum_of_products(flat, flat)
    x -= col_means[None, :]  # residuals of the two-way layout, summed directly rather than by subtraction
    ss_error = _sum_of_products(flat, flat)
    # Sums of squares below the rounding floor of the data are zero in exact arithmetic (e.g. residuals
    # of ratings that differ only by a rater constant); without this, F would be a huge artefact.
    step = 8.0 * _EPS * scale
    floor = n * k * step * step
    ss_rows, ss_cols, ss_within, ss_error = (0.0 if ss <= floor < math.inf else ss
                                             for ss in (ss_rows, ss_cols, ss_within, ss_error))
    return {
        "rows": ss_rows / (n - 1),
        "columns": ss_cols / (k - 1),
        "error": ss_error / ((n - 1) * (k - 1)),
        "within": ss_within / (n * (k - 1)),
    }


def _sum_of_products(a: np.ndarray, b: np.ndarray) -> float:
    """Σ a·b of two vectors; einsum rather than BLAS dot, whose threads stall on a busy machine."""
    return float(np.einsum("i,i->", a, b))


def _f_upper(q: float, df1: float, df2: float) -> float:
    """Upper quantile F with P(F > f) = q (isf: no cancellation for small q)."""
    return float(stats.f.isf(q, df1, df2))


def _ratio(numerator: float, denominator: float) -> float:
    """numerator / denominator, nan where the denominator is zero (a limit that does not exist)."""
    return numerator / denominator if denominator != 0.0 else math.nan


def _limits_or_nan(lower: float, upper: float) -> tuple[float, float]:
    # Limits that are not finite or exceed 1 come from a degenerate approximation; they do not exist.
    ok = lambda x: math.isfinite(x) and x <= 1.0 + 1e-12  # noqa: E731
    return (min(lower, 1.0) if ok(lower) else math.nan, min(upper, 1.0) if ok(upper) else math.nan)


def intraclass_correlation(ratings, model: str, unit: str, confidence: float = 0.95) -> IntraclassCorrelation:
    """Intraclass correlation of ratings (people × raters) with F test and confidence limits.

    With the mean squares of the people × raters table, MSR (between people),
    MSC (between raters), MSE (residual) and MSW (within people), n people and
    k raters (McGraw & Wong 1996, Table 4; Shrout & Fleiss 1979):

    ====================  ====================================  ===============
    model, unit           estimate                              Shrout & Fleiss
    ====================  ====================================  ===============
    oneway, single        (MSR − MSW) / (MSR + (k − 1)MSW)      ICC(1,1)
    oneway, average       (MSR − MSW) / MSR                     ICC(1,k)
    agreement, single     (MSR − MSE) /
                          (MSR + (k − 1)MSE + k(MSC − MSE)/n)   ICC(2,1)
    agreement, average    (MSR − MSE) / (MSR + (MSC − MSE)/n)   ICC(2,k)
    consistency, single   (MSR − MSE) / (MSR + (k − 1)MSE)      ICC(3,1)
    consistency, average  (MSR − MSE) / MSR                     ICC(3,k)
    ====================  ====================================  ===============

    The F test of ICC = 0 uses F = MSR/MSW on (n − 1, n(k − 1)) degrees of
    freedom for the one-way model and F = MSR/MSE on (n − 1, (n − 1)(k − 1))
    for the two-way models. The confidence limits are the F-based limits of
    McGraw & Wong (1996), Table 7: exact for the one-way and consistency forms,
    and with Satterthwaite's approximate degrees of freedom for the agreement
    forms (the average-measure agreement limits are the single-measure limits
    stepped up by Spearman–Brown, which is the same formula).

    Parameters
    ----------
    ratings : range
        Ratings, one row per person rated and one column per rater; at least
        2 complete rows and 2 columns.
    model : {"oneway", "agreement", "consistency"}
        One-way random effects; two-way with absolute agreement; two-way
        with consistency (rater mean differences removed).
    unit : {"single", "average"}
        Reliability of one rater's rating, or of the mean of the k raters.
    confidence : float, optional
        Two-sided confidence level of the limits, strictly between 0 and 1.

    Returns
    -------
    IntraclassCorrelation
        estimate, lower, upper, F, df1, df2, p, n (complete rows used), k.

    Notes
    -----
    Missing data: rows with any blank are deleted listwise (common practice
    for ICC, and what pingouin and R's irr do); ``n`` reports the rows kept.
    Undefined cases raise: no variation at all, or a denominator that is zero
    or negative (an average-measure agreement ICC on data where the rater and
    residual variation swamps the people; or MSR = 0 for the average forms).
    In rare degenerate agreement cases the Satterthwaite limits do not exist;
    ``lower`` and ``upper`` are then ``nan`` (the spreadsheet form answers
    ``#NUM!`` for them).

    References
    ----------
    McGraw, K. O. & Wong, S. P. (1996). Forming inferences about some
    intraclass correlation coefficients. Psychological Methods 1, 30-46.
    Shrout, P. E. & Fleiss, J. L. (1979). Intraclass correlations: uses in
    assessing rater reliability. Psychological Bulletin 86, 420-428.

    Examples
    --------
    Three interviewers rate four applicants:

    >>> r = intraclass_correlation([[4, 4, 5], [2, 3, 3], [5, 5, 5], [1, 2, 2]], "agreement", "single")
    >>> round(r.estimate, 4), round(r.lower, 4), round(r.upper, 4), r.df1, r.df2
    (0.9011, 0.5118, 0.9928, 3, 6)
    """
    model = v.choice("model", model, _MODELS)
    unit = v.choice("unit", unit, _UNITS)
    confidence = v.confidence("confidence", v.number("confidence", confidence))
    return _icc_from_mean_squares(*_icc_mean_squares(ratings), model, unit, confidence)


def intraclass_correlations(ratings, confidence: float = 0.95) -> dict[str, IntraclassCorrelation]:
    """All six intraclass correlations of :func:`intraclass_correlation` from one pass over the ratings.

    Keys are the Shrout & Fleiss labels ``"ICC(1,1)"``, ``"ICC(2,1)"``,
    ``"ICC(3,1)"``, ``"ICC(1,k)"``, ``"ICC(2,k)"``, ``"ICC(3,k)"`` (one-way,
    agreement, consistency; single, average). Raises the error of the first
    form that is undefined for the ratings; use :func:`intraclass_correlation`
    for one form.

    >>> table = intraclass_correlations([[9, 2, 5, 8], [6, 1, 3, 2], [8, 4, 6, 8], [7, 1, 2, 6], [10, 5, 6, 9],
    ...                                  [6, 2, 4, 7]])
    >>> {form: round(r.estimate, 2) for form, r in table.items()}
    {'ICC(1,1)': 0.17, 'ICC(2,1)': 0.29, 'ICC(3,1)': 0.71, 'ICC(1,k)': 0.44, 'ICC(2,k)': 0.62, 'ICC(3,k)': 0.91}
    """
    confidence = v.confidence("confidence", v.number("confidence", confidence))
    ms, n, k = _icc_mean_squares(ratings)
    return {f"ICC({number},{'1' if unit == 'single' else 'k'})":
            _icc_from_mean_squares(ms, n, k, model, unit, confidence)
            for unit in _UNITS for number, model in zip("123", _MODELS)}


def _icc_mean_squares(ratings) -> tuple[dict[str, float], int, int]:
    x = v.complete_rows("ratings", v.numeric_matrix("ratings", ratings), min_rows=2, min_columns=2)
    with np.errstate(over="ignore", invalid="ignore"):
        ms = mean_squares(x)
    if not all(math.isfinite(value) for value in ms.values()):
        raise DomainError("ratings are too large for their squares to be represented", argument="ratings")
    if ms["rows"] == 0.0 and ms["within"] == 0.0:
        raise ZeroVarianceError("ratings are all the same value; the ICC is undefined", argument="ratings")
    return ms, x.shape[0], x.shape[1]


def _icc_from_mean_squares(ms: dict[str, float], n: int, k: int, model: str, unit: str,
                           confidence: float) -> IntraclassCorrelation:
    msr, msc, mse, msw = ms["rows"], ms["columns"], ms["error"], ms["within"]
    alpha = 1.0 - confidence

    if model == "oneway":
        err, df2 = msw, n * (k - 1)
    else:
        err, df2 = mse, (n - 1) * (k - 1)
    df1 = n - 1
    F = msr / err if err > 0.0 else math.inf
    p = float(stats.f.sf(F, df1, df2)) if math.isfinite(F) else 0.0

    if model in ("oneway", "consistency"):
        if unit == "single":
            denominator = msr + (k - 1) * err
            if denominator <= 0.0:  # consistency when the ratings differ only by rater
                raise ZeroVarianceError(
                    "ratings vary only between raters; the ICC is undefined", argument="ratings")
            estimate = (msr - err) / denominator
        else:
            if msr == 0.0:
                raise ZeroVarianceError(
                    "ratings do not vary between the people rated; the average-measure ICC is undefined",
                    argument="ratings")
            estimate = (msr - err) / msr
        if math.isinf(F):
            lower = upper = 1.0  # the limits as F -> infinity
        else:
            f_low = F / _f_upper(alpha / 2, df1, df2)
            f_up = F * _f_upper(alpha / 2, df2, df1)
            if unit == "single":
                lower, upper = (f_low - 1) / (f_low + k - 1), (f_up - 1) / (f_up + k - 1)
            elif f_low == 0.0:
                lower, upper = math.nan, math.nan
            else:
                lower, upper = 1 - _ratio(1.0, f_low), 1 - _ratio(1.0, f_up)
        lower, upper = _limits_or_nan(lower, upper)
        return IntraclassCorrelation(estimate, lower, upper, F, df1, df2, p, n, k)

    # Absolute agreement (two-way random).
    single_denominator = msr + (k - 1) * mse + k * (msc - mse) / n
    if single_denominator <= 0.0:
        raise ZeroVarianceError(
            "ratings leave no variance for the agreement ICC to divide by; it is undefined", argument="ratings")
    rho = (msr - mse) / single_denominator
    if unit == "single":
        estimate = rho
    else:
        average_denominator = msr + (msc - mse) / n
        if average_denominator <= 0.0:
            raise DomainError(
                "ratings vary more between raters and in the residual than between people; the average-measure "
                "agreement ICC is undefined for them (its variance estimate is not positive)", argument="ratings")
        estimate = (msr - mse) / average_denominator
    if rho >= 1.0:  # no rater or residual variation (to rounding): the limits of a perfect ICC
        lower = upper = 1.0
    else:
        a = k * rho / (n * (1 - rho))
        b = 1 + (n - 1) * a
        # products, not ** 2: a Python float power raises on overflow where a product gives inf
        am, bm = a * msc, b * mse
        nu_den = am * am / (k - 1) + bm * bm / ((n - 1) * (k - 1))
        nu = _ratio((am + bm) * (am + bm), nu_den)
        if not (math.isfinite(nu) and nu > 0):
            lower = upper = math.nan
        else:
            f_l = _f_upper(alpha / 2, n - 1, nu)
            f_u = _f_upper(alpha / 2, nu, n - 1)
            if unit == "single":
                spread = k * msc + (k * n - k - n) * mse
                lower = _ratio(n * (msr - f_l * mse), f_l * spread + n * msr)
                upper = _ratio(n * (f_u * msr - mse), spread + n * f_u * msr)
            else:  # McGraw & Wong (1996), Table 7, ICC(A,k): the single limits stepped up by Spearman-Brown
                lower = _ratio(n * (msr - f_l * mse), f_l * (msc - mse) + n * msr)
                upper = _ratio(n * (f_u * msr - mse), msc - mse + n * f_u * msr)
    lower, upper = _limits_or_nan(lower, upper)
    return IntraclassCorrelation(estimate, lower, upper, F, df1, df2, p, n, k)


@spreadsheet("ICC", returns="coefficient",
             reference="McGraw, K. O. & Wong, S. P. (1996). Forming inferences about some intraclass correlation "
                       "coefficients. Psychological Methods 1, 30-46; Shrout, P. E. & Fleiss, J. L. (1979). "
                       "Intraclass correlations: uses in assessing rater reliability. Psychological Bulletin 86, "
                       "420-428.")
def intraclass_correlation_part(ratings: Range, model: Literal["oneway", "agreement", "consistency"],
                                unit: Literal["single", "average"],
                                part: Literal["estimate", "lower", "upper", "p"] = "estimate",
                                confidence: float = 0.95) -> float:
    """Intraclass correlation of ratings (rows people, columns raters): estimate, confidence limit or p.

    One-way: (MSR − MSW)/(MSR + (k−1)MSW), or (MSR − MSW)/MSR for the average
    of k raters. Two-way agreement: (MSR − MSE)/(MSR + (k−1)MSE + k(MSC − MSE)/n),
    average (MSR − MSE)/(MSR + (MSC − MSE)/n). Two-way consistency:
    (MSR − MSE)/(MSR + (k−1)MSE), average (MSR − MSE)/MSR. See
    :func:`intraclass_correlation` for the F test and the limits.

    Parameters
    ----------
    ratings : range
        Ratings, one row per person rated and one column per rater; rows with a blank are left out (listwise).
    model : {"oneway", "agreement", "consistency"}
        One-way random (Shrout & Fleiss ICC(1,·)), two-way absolute agreement (ICC(2,·)) or two-way
        consistency (ICC(3,·)).
    unit : {"single", "average"}
        Reliability of a single rater's rating or of the mean of all the raters.
    part : {"estimate", "lower", "upper", "p"}, optional
        The coefficient (default), the lower or upper F-based confidence limit (McGraw & Wong 1996), or the
        p value of the F test of ICC = 0.
    confidence : float, optional
        Two-sided confidence level of the limits, strictly between 0 and 1; default 0.95.

    Examples
    --------
    >>> data = [[4, 4, 5], [2, 3, 3], [5, 5, 5], [1, 2, 2]]
    >>> round(intraclass_correlation_part(data, "consistency", "average"), 6)
    0.98008
    >>> round(intraclass_correlation_part(data, "oneway", "single", "lower", 0.9), 4)
    0.6614
    """
    result = intraclass_correlation(ratings, model, unit, confidence)
    value = getattr(result, part)
    if math.isnan(value):
        raise DomainError(
            f"ratings: the {part} confidence limit of this ICC does not exist for these ratings "
            "(degenerate F approximation)", argument="ratings")
    return value


# ---------------------------------------------------------------- Cohen's kappa

def _codes(labels) -> tuple[np.ndarray, int]:
    """Integer codes of category labels (numbers and text are separate categories)."""
    table: dict = {}
    codes = np.fromiter((table.setdefault((isinstance(x, str), x), len(table)) for x in labels),
                        dtype=np.int64, count=len(labels))
    return codes, len(table)


def _numeric_labels(name: str, labels: np.ndarray, rows: np.ndarray, why: str) -> np.ndarray:
    for label, row in zip(labels, rows):
        if isinstance(label, str):
            raise ArgumentTypeError(
                f"{name} holds text {v.show(label)} at row {row + 1}; {why}", argument=name)
    return labels.astype(float)


def _sum_abs_differences(a: np.ndarray, b: np.ndarray) -> float:
    """Σ_i Σ_j |a_i − b_j| in O(n log n) with sorted cumulative sums."""
    bs = np.sort(b)
    cum = np.concatenate(([0.0], np.cumsum(bs)))
    m = np.searchsorted(bs, a, side="right")
    below = a * m - cum[m]
    above = (cum[-1] - cum[m]) - a * (bs.size - m)
    return float(np.sum(below + above))


@spreadsheet("COHEN_KAPPA", returns="coefficient",
             reference="Cohen, J. (1960). A coefficient of agreement for nominal scales. Educational and "
                       "Psychological Measurement 20, 37-46; Cohen, J. (1968). Weighted kappa. Psychological "
                       "Bulletin 70, 213-220; Fleiss, J. L. & Cohen, J. (1973). Educational and Psychological "
                       "Measurement 33, 613-619.")
def cohen_kappa(rater_a: Range, rater_b: Range, weights: Literal["none", "linear", "quadratic"] = "none") -> float:
    """Cohen's kappa: chance-corrected agreement of two raters on the same people.

    κ = 1 − Σ d(a_i, b_i) / ( (1/N) Σ_i Σ_j d(a_i, b_j) ), the observed over the
    chance-expected disagreement, with d = 0/1 for "none" (which is
    (p_o − p_e)/(1 − p_e)), d = |x − y| for "linear" and d = (x − y)² for
    "quadratic" (Cohen 1968; Fleiss & Cohen 1973).

    Parameters
    ----------
    rater_a : range
        First rater's categories, one per person (a single row or column); numbers or text.
    rater_b : range
        Second rater's categories for the same people, in the same order and of the same length.
    weights : {"none", "linear", "quadratic"}, optional
        Disagreement weights; "linear" and "quadratic" need numeric, ordered categories. Default "none".

    Notes
    -----
    Pairs where either rater is blank are dropped. Weighted kappa uses the
    distances between the category values themselves, so a scale point that
    neither rater used still counts (if only 1, 2 and 5 of a 1-5 scale occur,
    2 and 5 are three steps apart, not one). With consecutive integer categories that all
    occur this equals the usual integer weights; tools that renumber only the
    observed categories give a different value when a scale point is unused.
    Kappa is undefined (``#DIV/0!``) when both raters gave everyone one and
    the same category.

    Examples
    --------
    >>> a = ["hire", "hire", "hold", "reject", "hire", "hold"]
    >>> b = ["hire", "hold", "hold", "reject", "hire", "reject"]
    >>> round(cohen_kappa(a, b), 6)
    0.5
    >>> round(cohen_kappa([1, 2, 3, 4, 5], [1, 3, 3, 5, 4], "quadratic"), 6)
    0.842105
    """
    a = v.label_vector("rater_a", rater_a)
    b = v.label_vector("rater_b", rater_b)
    if a.size != b.size:
        raise ArgumentTypeError(
            f"rater_b must have as many cells as rater_a ({a.size}), got {b.size}", argument="rater_b")
    both = np.array([x is not None and y is not None for x, y in zip(a, b)], dtype=bool)
    rows = np.flatnonzero(both)
    if rows.size < 2:
        raise InsufficientDataError(
            f"rater_a and rater_b need at least 2 people rated by both, got {rows.size}", argument="rater_a")
    a, b = a[rows], b[rows]
    n = rows.size
    if weights == "none":
        codes, c = _codes(np.concatenate([a, b]))
        ca, cb = codes[:n], codes[n:]
        observed = int(np.count_nonzero(ca != cb))
        chance_agree = int(np.dot(np.bincount(ca, minlength=c), np.bincount(cb, minlength=c)))
        expected = n * n - chance_agree  # Σ_i Σ_j [a_i ≠ b_j]
        if expected == 0:
            raise ZeroVarianceError(
                "rater_a and rater_b gave everyone the same single category; kappa is undefined", argument="rater_a")
        return 1.0 - n * observed / expected
    why = f"{weights} weighted kappa needs numeric (ordered) categories; use weights \"none\" for text"
    xa = _numeric_labels("rater_a", a, rows, why)
    xb = _numeric_labels("rater_b", b, rows, why)
    if np.all(xa == xa[0]) and np.all(xb == xa[0]):  # tested exactly: rounding must not fake a variance
        raise ZeroVarianceError(
            "rater_a and rater_b gave everyone the same single value; weighted kappa is undefined",
            argument="rater_a")
    if weights == "linear":
        observed = float(np.sum(np.abs(xa - xb)))
        expected = _sum_abs_differences(xa, xb) / n
    else:
        da, db = xa - xa.mean(), xb - xb.mean()
        observed = float(np.sum((xa - xb) ** 2))
        # Σ_i Σ_j (a_i − b_j)² / n = Σ(a − ā)² + Σ(b − b̄)² + n(ā − b̄)², from centred sums
        expected = _sum_of_products(da, da) + _sum_of_products(db, db) + n * (xa.mean() - xb.mean()) ** 2
    if not expected > 0.0:
        raise ZeroVarianceError(
            "rater_a and rater_b gave everyone the same single value; weighted kappa is undefined",
            argument="rater_a")
    return 1.0 - observed / expected


# ---------------------------------------------------------------- Fleiss' kappa

@spreadsheet("FLEISS_KAPPA", returns="coefficient",
             reference="Fleiss, J. L. (1971). Measuring nominal scale agreement among many raters. "
                       "Psychological Bulletin 76, 378-382.")
def fleiss_kappa(ratings: Range) -> float:
    """Fleiss' kappa: chance-corrected agreement when each person gets the same number of ratings.

    With N people, m ratings each and n_ij the number of ratings of person i
    in category j: P_i = (Σ_j n_ij² − m)/(m(m − 1)), P̄ = mean P_i,
    p_j = Σ_i n_ij/(N m), P̄_e = Σ_j p_j², and κ = (P̄ − P̄_e)/(1 − P̄_e).

    Parameters
    ----------
    ratings : range
        Category labels (numbers or text), one row per person rated and one column per rating; at least 2
        rows with ratings.

    Notes
    -----
    The raters need not be the same people for every row (Fleiss 1971), but
    every row must hold the same number m ≥ 2 of ratings. Rows that are
    entirely blank are skipped; a row with fewer (or more) ratings than the
    others is refused with its row number (use ``KRIPPENDORFF_ALPHA``, which
    handles missing ratings). Kappa is undefined (``#DIV/0!``) when every
    rating falls in one category.

    Examples
    --------
    >>> round(fleiss_kappa([["A", "A", "A"], ["A", "B", "B"], ["B", "B", "B"], ["C", "C", "A"]]), 6)
    0.466667
    """
    labels = v.label_matrix("ratings", ratings)
    present = np.vectorize(lambda x: x is not None, otypes=[bool])(labels)
    counts = present.sum(axis=1)
    keep = np.flatnonzero(counts > 0)
    if keep.size < 2:
        raise InsufficientDataError(f"ratings need at least 2 rows with ratings, got {keep.size}", argument="ratings")
    m = int(counts[keep[0]])
    odd = keep[counts[keep] != m]
    if odd.size:
        i = int(odd[0])
        raise InsufficientDataError(
            f"ratings row {i + 1} has {int(counts[i])} ratings where row {int(keep[0]) + 1} has {m}; Fleiss' kappa "
            "needs the same number of ratings in every row (KRIPPENDORFF_ALPHA allows missing ratings)",
            argument="ratings")
    if m < 2:
        raise InsufficientDataError("ratings need at least 2 ratings per row, got 1", argument="ratings")
    rows = np.nonzero(present)[0]
    codes, c = _codes(labels[present])
    people = keep.size
    # n_ij² summed without an N × categories table: count each (row, category) pair
    _, pair_counts = np.unique(rows * c + codes, return_counts=True)
    p_bar = (float(np.sum(pair_counts.astype(np.int64) ** 2)) - people * m) / (people * m * (m - 1))
    totals = np.bincount(codes, minlength=c).astype(float) / (people * m)
    p_e = _sum_of_products(totals, totals)
    if p_e >= 1.0:
        raise ZeroVarianceError("ratings all fall in one category; Fleiss' kappa is undefined", argument="ratings")
    return (p_bar - p_e) / (1.0 - p_e)


# ---------------------------------------------------------------- Krippendorff's alpha

#: Up to this many distinct values the coincidence matrix (values × values) is formed; beyond, its sums
#: are accumulated pair by pair so that many distinct values cost no quadratic memory.
COINCIDENCE_TABLE_MAX_VALUES = 256


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
    counts = np.bincount(units * values + codes, minlength=m.size * values).reshape(m.size, values).astype(float)
    weighted = counts / (m - 1.0)[:, None]
    # o_ck = Σ_u n_uc (n_uk − [c = k]) / (m_u − 1)
    coincidences = weighted.T @ counts
    coincidences[np.diag_indices(values)] -= weighted.sum(axis=0)
    totals = coincidences.sum(axis=0)
    d2 = _squared_differences(domain, totals, level)
    return float(np.sum(coincidences * d2)), float(totals @ d2 @ totals)


def _direct_sums(units, codes, m, x, ok, level: str):
    """The same two sums without the values × values table (many distinct values)."""
    if level == "nominal":
        values = int(codes.max()) + 1
        # Σ_{i≠j in u} [c_i ≠ c_j] = m_u² − Σ_c n_uc²
        keys, pair_counts = np.unique(units * values + codes, return_counts=True)
        same = np.bincount(keys // values, weights=pair_counts.astype(float) ** 2, minlength=m.size)
        totals = np.bincount(codes, minlength=values).astype(float)
        n = float(m.sum())
        return float(np.sum((m * m - same) / (m - 1))), n * n - _sum_of_products(totals, totals)
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
                2.0 * flat.size * _sum_of_products(centred, centred))
    filled = np.where(ok, x, 0.0)
    k = x.shape[1]
    observed = 0.0
    step = max(1, (1 << 20) // (k * k))
    for start in range(0, x.shape[0], step):
        xs, oks = filled[start:start + step], ok[start:start + step]
        d = _ratio_distance(xs[:, :, None], xs[:, None, :])
        d *= oks[:, :, None] & oks[:, None, :]
        observed += float(np.sum(d.sum(axis=(1, 2)) / (m[start:start + step] - 1)))
    distinct, counts = np.unique(x[ok], return_counts=True)
    counts = counts.astype(float)
    expected = 0.0
    step = max(1, (1 << 20) // distinct.size)
    for start in range(0, distinct.size, step):
        expected += float(counts[start:start + step] @ _ratio_distance(distinct[start:start + step, None],
                                                                       distinct[None, :]) @ counts)
    return observed, expected


@spreadsheet("KRIPPENDORFF_ALPHA", returns="coefficient",
             reference="Krippendorff, K. (2011). Computing Krippendorff's alpha-reliability. Annenberg School "
                       "for Communication, University of Pennsylvania; Krippendorff, K. (2004). Content "
                       "Analysis: An Introduction to Its Methodology (2nd ed.), ch. 11.")
def krippendorff_alpha(ratings: Range, level: Literal["nominal", "ordinal", "interval", "ratio"] = "nominal") -> float:
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
    (the ratio level then takes time quadratic in the number of distinct
    values). The units × raters layout here is the transpose of the
    krippendorff package's raters × units. Alpha is undefined (``#DIV/0!``)
    when all pairable values are equal.

    Examples
    --------
    Krippendorff (2011), reliability data with 4 observers and 12 units
    (here transposed: units as rows):

    >>> data = [[1, 1, None, 1], [2, 2, 3, 2], [3, 3, 3, 3], [3, 3, 3, 3], [2, 2, 2, 2], [1, 2, 3, 4],
    ...         [4, 4, 4, 4], [1, 1, 2, 1], [2, 2, 2, 2], [None, 5, 5, 5], [None, None, 1, 1], [None, 3, None, None]]
    >>> [round(krippendorff_alpha(data, level), 3) for level in ("nominal", "ordinal", "interval", "ratio")]
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
        if level == "ratio" and (x[ok] < 0).any():
            raise DomainError(
                f"ratings must be at least 0 at the ratio level, got {v.show(x[ok][x[ok] < 0][0])}",
                argument="ratings")
        domain, codes = np.unique(x[ok], return_inverse=True)
        codes = codes.ravel()
    else:
        x = None
        codes, _ = _codes(labels[pairable][ok])
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


# ---------------------------------------------------------------- within-group agreement

def uniform_null_variance(scale_points):
    """Variance of a discrete uniform distribution on A scale points, (A² − 1)/12.

    >>> uniform_null_variance(5)
    2.0
    """
    a = float(scale_points)  # float: the square of a huge whole number must not overflow an int conversion
    return (a * a - 1.0) / 12.0


def _scale_points(scale_points: int) -> int:
    v.at_least("scale_points", scale_points, 2)
    return scale_points


def _check_span(name: str, values: np.ndarray, scale_points: int, where: str = "") -> None:
    span = float(values.max() - values.min())
    if span > scale_points - 1:
        raise DomainError(
            f"{name}{where} run from {v.show(values.min())} to {v.show(values.max())}, wider than a "
            f"{scale_points}-point scale allows", argument=name)


@spreadsheet("RWG", returns="coefficient",
             reference="James, L. R., Demaree, R. G. & Wolf, G. (1984). Estimating within-group interrater "
                       "reliability with and without response bias. Journal of Applied Psychology 69, 85-98.")
def within_group_agreement(ratings: Range, scale_points: int) -> float:
    """Within-group agreement rwg of one item against a uniform (no agreement) null.

    rwg = 1 − s²/σ²_EU, σ²_EU = (A² − 1)/12, with s² the variance of the group
    members' ratings (denominator n − 1) and A the number of scale points.

    Parameters
    ----------
    ratings : range
        The group members' ratings of one target on one item (a single row or column); blanks are ignored;
        at least 2 ratings.
    scale_points : int
        Number of response options A of the rating scale, at least 2.

    Notes
    -----
    The sample variance (n − 1) is the one James, Demaree & Wolf (1984) use.
    When the observed variance exceeds the uniform null's, rwg would be
    negative; it is then set to 0, the truncation those authors recommend, so
    the result lies between 0 and 1. Ratings that span more than A − 1 scale
    steps cannot come from the declared scale and are refused.

    Examples
    --------
    Five interviewers rate one applicant on a 5-point scale:

    >>> round(within_group_agreement([4, 4, 5, 3, 4], 5), 6)
    0.75
    """
    a = _scale_points(scale_points)
    x = v.numeric_vector("ratings", ratings)
    x = x[~np.isnan(x)]
    if x.size < 2:
        raise InsufficientDataError(f"ratings need at least 2 ratings, got {x.size}", argument="ratings")
    _check_span("ratings", x, a)
    s2 = float(np.var(x - x.min(), ddof=1))  # shifted: within the scale's span, so no overflow
    return max(0.0, 1.0 - s2 / uniform_null_variance(a))


@spreadsheet("RWG_J", returns="coefficient",
             reference="James, L. R., Demaree, R. G. & Wolf, G. (1984). Estimating within-group interrater "
                       "reliability with and without response bias. Journal of Applied Psychology 69, 85-98.")
def within_group_agreement_items(ratings: Range, scale_points: int) -> float:
    """Within-group agreement rwg(j) over J parallel items against a uniform null.

    rwg(j) = J(1 − s̄²/σ²_EU) / (J(1 − s̄²/σ²_EU) + s̄²/σ²_EU), with s̄² the mean
    of the J item variances (each with denominator n − 1) and σ²_EU = (A² − 1)/12.

    Parameters
    ----------
    ratings : range
        One row per group member and one column per item; blanks are ignored item by item; every item needs
        at least 2 ratings.
    scale_points : int
        Number of response options A of the items' rating scale, at least 2.

    Notes
    -----
    Each item's variance uses the members who rated that item. When the mean
    observed variance reaches the uniform null's (s̄² ≥ σ²_EU) the formula is
    no longer meaningful (it turns negative or exceeds 1); rwg(j) is then set
    to 0, the truncation James, Demaree & Wolf (1984) recommend, so the result
    lies between 0 and 1.

    Examples
    --------
    >>> round(within_group_agreement_items([[4, 5, 4], [4, 4, 4], [5, 5, 4], [3, 4, 4]], 5), 6)
    0.9375
    """
    a = _scale_points(scale_points)
    x = v.numeric_matrix("ratings", ratings)
    variances = []
    for j in range(x.shape[1]):
        col = x[:, j][~np.isnan(x[:, j])]
        if col.size < 2:
            raise InsufficientDataError(
                f"ratings column {j + 1} (an item) has {col.size} ratings; each item needs at least 2",
                argument="ratings")
        _check_span("ratings", col, a, f" in column {j + 1}")
        variances.append(float(np.var(col - col.min(), ddof=1)))
    items = len(variances)
    ratio = float(np.mean(variances)) / uniform_null_variance(a)
    if ratio >= 1.0:
        return 0.0
    agreement = items * (1.0 - ratio)
    return agreement / (agreement + ratio)
