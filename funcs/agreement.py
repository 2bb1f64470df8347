"""Rater agreement: how far interviewers, assessors or judges agree.

The intraclass correlations live in :mod:`~trueband.funcs.intraclass` and
Krippendorff's alpha in :mod:`~trueband.funcs.krippendorff` (one module per
method family); their names are importable from this module too.

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
  ``KRIPPENDORFF_ALPHA``). One policy for all three, the one group labels
  follow (:func:`trueband.funcs.impact.group_key`): text is trimmed, repeated
  spaces collapsed and letter case folded ("Hire" and "hire " are one
  category), and a number and its text are one category (1, 1.0 and "1").
* Where a coefficient divides by a variance that is zero (every rating the
  same, say), it is undefined and the function says so (``#DIV/0!``) instead
  of returning a number.
"""

from __future__ import annotations

from typing import Literal

import numpy as np

from . import _validate as v
from ._categories import category_codes
from ._numeric import centred, sum_of_products
from ._validate import Range
from .errors import ArgumentTypeError, DomainError, InsufficientDataError, ZeroVarianceError
from .intraclass import (  # noqa: F401  (re-exported: one place to import every agreement method)
    IntraclassCorrelation,
    intraclass_correlation,
    intraclass_correlation_part,
    intraclass_correlations,
    mean_squares,
)
from .krippendorff import COINCIDENCE_TABLE_MAX_VALUES, krippendorff_alpha  # noqa: F401  (re-exported)
from .registry import spreadsheet

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


# ---------------------------------------------------------------- Cohen's kappa

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


def _weighted_disagreements(xa: np.ndarray, xb: np.ndarray, weights: str) -> float:
    """Observed over chance-expected disagreement of weighted kappa, |x − y| or (x − y)² apart."""
    n = xa.size
    # kappa is unchanged by one shift and one scale of both raters' values: centred and scaled by a
    # power of two, values of 1e200 or 1e-170 neither overflow nor underflow the squares
    both = centred(np.concatenate([xa, xb]), axis=None)
    xa, xb = both[:n], both[n:]
    if weights == "linear":
        observed = float(np.sum(np.abs(xa - xb)))
        expected = _sum_abs_differences(xa, xb) / n
    else:
        da, db = xa - xa.mean(), xb - xb.mean()
        observed = float(np.sum((xa - xb) ** 2))
        # Σ_i Σ_j (a_i − b_j)² / n = Σ(a − ā)² + Σ(b − b̄)² + n(ā − b̄)², from centred sums
        expected = sum_of_products(da, da) + sum_of_products(db, db) + n * (xa.mean() - xb.mean()) ** 2
    if not expected > 0.0:
        raise ZeroVarianceError(
            "rater_a and rater_b gave everyone the same single value; weighted kappa is undefined",
            argument="rater_a")
    return observed / expected


@spreadsheet("COHEN_KAPPA", returns="coefficient",
             reference="Cohen, J. (1960). A coefficient of agreement for nominal scales. Educational and "
                       "Psychological Measurement 20, 37-46; Cohen, J. (1968). Weighted kappa. Psychological "
                       "Bulletin 70, 213-220; Fleiss, J. L. & Cohen, J. (1973). Educational and Psychological "
                       "Measurement 33, 613-619.")
def cohen_kappa(rater_a: Range, rater_b: Range, *, weights: Literal["none", "linear", "quadratic"] = "none") -> float:
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
    Pairs where either rater is blank are dropped. Text categories are
    compared trimmed and with letter case folded ("Hire" and "hire" are one
    category), and a number and its text are one category (1, 1.0 and "1"),
    the policy group labels follow (:func:`trueband.funcs.impact.group_key`).
    Weighted kappa uses the
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
    >>> round(cohen_kappa([1, 2, 3, 4, 5], [1, 3, 3, 5, 4], weights="quadratic"), 6)
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
        codes, c = category_codes(np.concatenate([a, b]))
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
    return 1.0 - _weighted_disagreements(xa, xb, weights)


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
    handles missing ratings). Text categories are compared trimmed and with
    letter case folded ("Hire" and "hire" are one category), and a number
    and its text are one category (1, 1.0 and "1"), as group labels are
    (:func:`trueband.funcs.impact.group_key`). Kappa is undefined (``#DIV/0!``) when every
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
    codes, c = category_codes(labels[present])
    people = keep.size
    # n_ij² summed without an N × categories table: count each (row, category) pair
    _, pair_counts = np.unique(rows * c + codes, return_counts=True)
    p_bar = (float(np.sum(pair_counts.astype(np.int64) ** 2)) - people * m) / (people * m * (m - 1))
    totals = np.bincount(codes, minlength=c).astype(float) / (people * m)
    p_e = sum_of_products(totals, totals)
    if p_e >= 1.0:
        raise ZeroVarianceError("ratings all fall in one category; Fleiss' kappa is undefined", argument="ratings")
    return (p_bar - p_e) / (1.0 - p_e)


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
