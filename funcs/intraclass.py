"""Intraclass correlations: how far raters agree on numeric ratings of the same people.

======================  ================================================  ======================================
spreadsheet name        Python function                                   what it gives
======================  ================================================  ======================================
``ICC``                 :func:`intraclass_correlation_part`               one part of an intraclass correlation
                        (all parts: :func:`intraclass_correlation`;       (estimate, confidence limit or p)
                        all six forms: :func:`intraclass_correlations`)
======================  ================================================  ======================================

A method family of rater agreement (the registry files it under the topic
``agreement``; every name here is importable from :mod:`trueband.funcs.agreement`
as well). Rating ranges have one row per person rated and one column per rater;
rows with a blank are deleted listwise.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Literal

import numpy as np

from . import _validate as v
from ._lazy import lazy_module
from ._numeric import centred, sum_of_products
from ._validate import Range
from .errors import DomainError, ZeroVarianceError
from .registry import spreadsheet
from .results import ConfidenceInterval

# scipy.stats is slow to import: load it on first use (see _lazy)
stats = lazy_module("scipy.stats")

#: The catalog topic of these functions (a family of rater agreement).
TOPIC = "agreement"

__all__ = [
    "IntraclassCorrelation",
    "intraclass_correlation",
    "intraclass_correlation_part",
    "intraclass_correlations",
    "mean_squares",
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
    model: str = "agreement"
    unit: str = "single"
    mean_squares: dict = dataclasses.field(default_factory=dict, repr=False, compare=False)

    @property
    def statistic(self) -> float:
        """The estimate (the name scipy.stats results use)."""
        return self.estimate

    @property
    def pvalue(self) -> float:
        """The p value of the F test of ICC = 0 (the name scipy.stats results use)."""
        return self.p

    def confidence_interval(self, confidence_level: float = 0.95) -> ConfidenceInterval:
        """The F-based limits at another level (``lower`` and ``upper`` are at the level of the call).

        >>> r = intraclass_correlation([[4, 4, 5], [2, 3, 3], [5, 5, 5], [1, 2, 2]], model="agreement", unit="single")
        >>> [round(x, 4) for x in r.confidence_interval(0.95)] == [round(r.lower, 4), round(r.upper, 4)]
        True
        """
        level = v.confidence("confidence_level", v.number("confidence_level", confidence_level))
        again = _icc_from_mean_squares(self.mean_squares, self.n, self.k, self.model, self.unit, level)
        if math.isnan(again.lower) or math.isnan(again.upper):
            raise DomainError("the confidence limits of this ICC do not exist for these ratings (degenerate F "
                              "approximation)", argument="confidence_level")
        return ConfidenceInterval(again.lower, again.upper)


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
    # shifted by the first rating (a correctly rounded subtraction: a common offset costs no digits),
    # then centred: the squares stay small
    x = matrix - matrix.flat[0]
    x -= x.mean()
    scale = float(np.max(np.abs(x)))
    row_means = x.mean(axis=1)
    col_means = x.mean(axis=0)
    ss_rows = k * sum_of_products(row_means, row_means)
    ss_cols = n * sum_of_products(col_means, col_means)
    x -= row_means[:, None]  # deviations within people, in place
    flat = x.ravel()
    ss_within = sum_of_products(flat, flat)
    x -= col_means[None, :]  # residuals of the two-way layout, summed directly rather than by subtraction
    ss_error = sum_of_products(flat, flat)
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


def intraclass_correlation(ratings, *, model: str, unit: str, confidence: float = 0.95) -> IntraclassCorrelation:
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
    Rows with any blank are deleted listwise (as pingouin and R's irr); ``n``
    reports the rows kept. Undefined cases raise: no variation at all, or a
    denominator that is zero or negative (rater and residual variation
    swamping the people in ICC(A,k); MSR = 0 for the average forms). Where the
    Satterthwaite limits do not exist (rare degenerate agreement cases)
    ``lower`` and ``upper`` are ``nan`` (``#NUM!`` in a sheet).

    The p value's degrees of freedom follow McGraw & Wong (1996), as pingouin:
    (n − 1, n(k − 1)) one-way, (n − 1, (n − 1)(k − 1)) for both two-way models;
    software with another convention for the agreement forms gives a slightly
    different p on the same data. Every form is at most 1; the average-measure
    forms, ICC(A,k) most of all, have no lower bound: −100 or lower when the
    people hardly differ (the ratings do not tell them apart; not an error).

    References
    ----------
    McGraw, K. O. & Wong, S. P. (1996). Forming inferences about some
    intraclass correlation coefficients. Psychological Methods 1, 30-46.
    Shrout, P. E. & Fleiss, J. L. (1979). Intraclass correlations: uses in
    assessing rater reliability. Psychological Bulletin 86, 420-428.

    Examples
    --------
    Three interviewers rate four applicants:

    >>> r = intraclass_correlation([[4, 4, 5], [2, 3, 3], [5, 5, 5], [1, 2, 2]], model="agreement", unit="single")
    >>> round(r.estimate, 4), round(r.lower, 4), round(r.upper, 4), r.df1, r.df2
    (0.9011, 0.5118, 0.9928, 3, 6)
    """
    model = v.choice("model", model, _MODELS)
    unit = v.choice("unit", unit, _UNITS)
    confidence = v.confidence("confidence", v.number("confidence", confidence))
    return _icc_from_mean_squares(*_icc_mean_squares(ratings), model, unit, confidence)


def intraclass_correlations(ratings, *, confidence: float = 0.95) -> dict[str, IntraclassCorrelation]:
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
    # centred and scaled by a power of two (ratings of 1e200 or 1e-170): every ICC, F and limit is a
    # ratio of mean squares, so the scale cancels
    x = centred(x, axis=None, in_place=not np.may_share_memory(x, ratings) if isinstance(ratings, np.ndarray)
                else True)
    with np.errstate(over="ignore", invalid="ignore"):
        ms = mean_squares(x)
    if not all(math.isfinite(value) for value in ms.values()):  # not reached after the scaling; kept as a guard
        raise DomainError("ratings are too large to compute their mean squares", argument="ratings")
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
        return IntraclassCorrelation(estimate, lower, upper, F, df1, df2, p, n, k, model, unit, ms)

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
    return IntraclassCorrelation(estimate, lower, upper, F, df1, df2, p, n, k, model, unit, ms)


@spreadsheet("ICC", returns="coefficient",
             reference="McGraw, K. O. & Wong, S. P. (1996). Forming inferences about some intraclass correlation "
                       "coefficients. Psychological Methods 1, 30-46; Shrout, P. E. & Fleiss, J. L. (1979). "
                       "Intraclass correlations: uses in assessing rater reliability. Psychological Bulletin 86, "
                       "420-428.")
def intraclass_correlation_part(ratings: Range, *, model: Literal["oneway", "agreement", "consistency"],
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

    Notes
    -----
    The p value's degrees of freedom follow McGraw & Wong (1996), as pingouin:
    (n − 1, n(k − 1)) one-way, (n − 1, (n − 1)(k − 1)) for both two-way models;
    software with another convention for the agreement forms gives a slightly
    different p. The average-measure estimates, ICC(A,k) most of all, have no
    lower bound (see :func:`intraclass_correlation`).

    Examples
    --------
    >>> data = [[4, 4, 5], [2, 3, 3], [5, 5, 5], [1, 2, 2]]
    >>> round(intraclass_correlation_part(data, model="consistency", unit="average"), 6)
    0.98008
    >>> round(intraclass_correlation_part(data, model="oneway", unit="single", part="lower", confidence=0.9), 4)
    0.6614
    """
    result = intraclass_correlation(ratings, model=model, unit=unit, confidence=confidence)
    value = getattr(result, part)
    if math.isnan(value):
        raise DomainError(
            f"ratings: the {part} confidence limit of this ICC does not exist for these ratings "
            "(degenerate F approximation)", argument="ratings")
    return value
