"""Several predictors combined: composites, multiple regression and their subgroup differences.

=========================  ======================================  ============================================
spreadsheet name           Python function                         what it gives
=========================  ======================================  ============================================
``COMPOSITE_RELIABILITY``  :func:`composite_reliability`           Mosier (1943) reliability of a weighted sum
``COMPOSITE_VALIDITY``     :func:`composite_validity`              validity of a weighted sum (unit, regression)
``MULTIPLE_R``             :func:`multiple_r`                      multiple correlation from raw data (OLS)
``INCREMENTAL_R2``         :func:`incremental_r2`                  ΔR² of added predictors, its F and p
``ADJUSTED_R2``            :func:`adjusted_r2`                     Ezekiel/Wherry estimate of the population ρ²
``CROSS_VALIDITY``         :func:`cross_validity`                  Browne (1975) cross-validated R²
``COMPOSITE_D``            :func:`composite_d`                     Sackett & Ellingson (1997) composite d
(Python only)              :func:`incremental_validity`,           the F test as a result object; the
                           :func:`regression_weights`              least-squares (beta) weights
=========================  ======================================  ============================================

Conventions
-----------
* ``sds``, ``reliabilities``, ``validities``, ``weights``, ``ds``: one value
  per predictor (a row or a column, no blanks), in the order of the rows of
  ``correlations``.
* ``correlations``: the square matrix of the predictors' intercorrelations
  (ones on the diagonal, symmetric, a possible correlation matrix: no
  negative eigenvalue beyond rounding).
* ``weights`` apply to the **raw** scores: composite = Σ wᵢ Xᵢ. Unit weights
  (the default) on raw scores let the predictor with the larger SD count
  for more; to weight standardised scores, pass 1 for every SD.
* Raw-data functions (``MULTIPLE_R``, ``INCREMENTAL_R2``) fit ordinary least
  squares with an intercept and drop people with a blank anywhere
  (listwise); text is refused.
"""

from __future__ import annotations

import dataclasses
from typing import Literal

import numpy as np

from . import _validate as v
from ._lazy import lazy_module
from ._models import least_squares, total_sum_of_squares
from ._validate import Range
from .errors import ArgumentTypeError, DomainError, InsufficientDataError, ZeroVarianceError
from .registry import spreadsheet

special = lazy_module("scipy.special")

__all__ = [
    "composite_reliability",
    "composite_validity",
    "regression_weights",
    "multiple_r",
    "IncrementalValidity",
    "incremental_validity",
    "incremental_r2",
    "adjusted_r2",
    "cross_validity",
    "composite_d",
]

#: Eigenvalues of a correlation matrix below −this are not rounding: the matrix is impossible.
_PSD_TOLERANCE = 1e-10


# ---------------------------------------------------------------- checks

def _correlation_matrix(correlations) -> np.ndarray:
    r = v.numeric_matrix("correlations", correlations)
    k = r.shape[0]
    if r.shape[1] != k:
        raise ArgumentTypeError(f"correlations must be a square matrix, got {r.shape[0]} rows by {r.shape[1]} "
                                f"columns", argument="correlations")
    if k < 2:
        raise InsufficientDataError("correlations must be for at least 2 predictors", argument="correlations")
    if np.isnan(r).any():
        i, j = np.argwhere(np.isnan(r))[0]
        raise ArgumentTypeError(f"correlations has a blank at row {i + 1}, column {j + 1}", argument="correlations")
    v.between("correlations", r, -1.0, 1.0)
    off = np.abs(np.diag(r) - 1.0) > 1e-9
    if off.any():
        i = int(np.argmax(off))
        raise DomainError(f"correlations must have 1 on its diagonal; row {i + 1}, column {i + 1} holds "
                          f"{v.show(float(r[i, i]))}", argument="correlations")
    asym = np.abs(r - r.T) > 1e-9
    if asym.any():
        i, j = np.argwhere(asym)[0]
        raise DomainError(f"correlations must be symmetric: row {i + 1}, column {j + 1} holds {v.show(float(r[i, j]))} "
                          f"but row {j + 1}, column {i + 1} holds {v.show(float(r[j, i]))}", argument="correlations")
    r = (r + r.T) / 2.0
    low = float(np.linalg.eigvalsh(r)[0])
    if low < -_PSD_TOLERANCE:
        raise DomainError(f"correlations is not a possible correlation matrix (smallest eigenvalue "
                          f"{v.show(low)}; correlations estimated from different people can do that)",
                          argument="correlations")
    return r


def _per_predictor(name: str, value, k: int) -> np.ndarray:
    x = v.numeric_vector(name, value)
    if x.size != k:
        raise ArgumentTypeError(f"{name} must have one value per predictor ({k}, the size of correlations), got "
                                f"{x.size}", argument=name)
    if np.isnan(x).any():
        raise ArgumentTypeError(f"{name} has a blank at position {int(np.argmax(np.isnan(x))) + 1}", argument=name)
    return x


def _word(value) -> str | None:
    """``weights`` given as a word ("unit", "regression"), typed or in one cell of a range, in lower case;
    None for numbers. A workbook formula passes even a quoted word to a range argument as a one-cell range."""
    while isinstance(value, (list, tuple)) and len(value) == 1:
        value = value[0]
    if isinstance(value, np.ndarray) and value.size == 1 and value.dtype == object:
        value = value.item()
    return value.strip().lower() if isinstance(value, str) else None


def _weights(weights, k: int) -> np.ndarray:
    if _word(weights) == "unit":
        return np.ones(k)
    w = _per_predictor("weights", weights, k)
    if not (w != 0).any():
        raise ZeroVarianceError("weights are all 0; the composite has no variance", argument="weights")
    return w


def _composite_variance(name: str, a: np.ndarray, r: np.ndarray) -> float:
    """a'Ra for effective weights a = w·s; refuses a composite without variance."""
    var = float(a @ r @ a)
    if not var > 0:
        raise ZeroVarianceError(f"{name}: the weighted composite has no variance (the weights cancel through "
                                f"the correlations)", argument=name)
    return var


# ---------------------------------------------------------------- composites from summary figures

@spreadsheet("COMPOSITE_RELIABILITY", returns="coefficient",
             reference="Mosier, C. I. (1943). On the reliability of a weighted composite. Psychometrika 8, 161-168; "
                       "Nunnally, J. C. & Bernstein, I. H. (1994). Psychometric Theory (3rd ed.), ch. 7.")
def composite_reliability(sds: Range, reliabilities: Range, correlations: Range, weights: Range = "unit") -> float:
    """Reliability of a weighted sum of predictors from their SDs, reliabilities and intercorrelations (Mosier 1943).

    r_C = 1 − Σᵢ wᵢ² sᵢ² (1 − rᵢᵢ) / Σᵢ Σⱼ wᵢ wⱼ sᵢ sⱼ rᵢⱼ  (rᵢᵢ in the
    denominator taken as 1: the diagonal of the correlation matrix)

    The errors of different predictors are assumed uncorrelated.

    Parameters
    ----------
    sds : range
        Standard deviation of each predictor, greater than 0.
    reliabilities : range
        Reliability of each predictor, between 0 and 1.
    correlations : range
        The predictors' intercorrelation matrix (square, ones on the diagonal).
    weights : range, optional
        Weight of each predictor's raw score, or "unit" (the default) for 1 each.

    Notes
    -----
    With k parallel components (equal SDs, every rᵢⱼ equal to the common
    reliability) the formula gives the Spearman–Brown value for a test k
    times as long. With weights of mixed sign the result can be below 0.

    Examples
    --------
    Two tests with SDs 10 and 5, reliabilities .85 and .75, correlated .40:

    >>> round(composite_reliability([10, 5], [0.85, 0.75], [[1, 0.4], [0.4, 1]]), 6)
    0.871212
    """
    r = _correlation_matrix(correlations)
    k = r.shape[0]
    s = _per_predictor("sds", sds, k)
    v.positive("sds", s)
    rel = _per_predictor("reliabilities", reliabilities, k)
    v.reliability("reliabilities", rel)
    a = _weights(weights, k) * s
    error = float(np.sum(a * a * (1.0 - rel)))
    return 1.0 - error / _composite_variance("weights", a, r)


def regression_weights(validities, correlations) -> np.ndarray:
    """Least-squares weights of standardised predictors: β = R⁻¹ v (R the intercorrelations, v the validities).

    Examples
    --------
    >>> regression_weights([0.5, 0.3], [[1, 0.4], [0.4, 1]]).round(6).tolist()
    [0.452381, 0.119048]
    """
    r = _correlation_matrix(correlations)
    validity = _per_predictor("validities", validities, r.shape[0])
    v.between("validities", validity, -1.0, 1.0)
    if float(np.linalg.eigvalsh(r)[0]) < 1e-10:
        raise ZeroVarianceError("correlations is singular: a predictor is a weighted sum of the others, so the "
                                "regression weights are not unique", argument="correlations")
    return np.linalg.solve(r, validity)


@spreadsheet("COMPOSITE_VALIDITY", returns="correlation",
             reference="Nunnally, J. C. & Bernstein, I. H. (1994). Psychometric Theory (3rd ed.), ch. 5 (validity "
                       "of a linear composite); Cohen, J., Cohen, P., West, S. G. & Aiken, L. S. (2003). Applied "
                       "Multiple Regression/Correlation Analysis (3rd ed.), sec. 3.5 (R from correlations).")
def composite_validity(sds: Range, validities: Range, correlations: Range, weights: Range = "unit") -> float:
    """Validity of a weighted sum of predictors from their SDs, validities and intercorrelations.

    r_Cy = Σᵢ wᵢ sᵢ rᵢy / √(Σᵢ Σⱼ wᵢ wⱼ sᵢ sⱼ rᵢⱼ)

    With ``weights`` the text "regression" the weights are the least-squares
    ones (β = R⁻¹ v on standardised scores) and the result is the multiple
    correlation R = √(v' R⁻¹ v), whatever the SDs.

    Parameters
    ----------
    sds : range
        Standard deviation of each predictor, greater than 0.
    validities : range
        Correlation of each predictor with the criterion, between −1 and 1.
    correlations : range
        The predictors' intercorrelation matrix (square, ones on the diagonal).
    weights : range, optional
        Weight of each predictor's raw score, "unit" (the default) for 1 each, or "regression" for least squares.

    Notes
    -----
    Regression weights fitted in a sample overstate the validity they will
    have in new people; see ``CROSS_VALIDITY``. Validities and
    intercorrelations that no data could produce together (an impossible
    full correlation matrix) can give a result beyond ±1: ``#NUM!``.

    Examples
    --------
    >>> round(composite_validity([1, 1], [0.5, 0.3], [[1, 0.4], [0.4, 1]]), 6)
    0.478091
    >>> round(composite_validity([1, 1], [0.5, 0.3], [[1, 0.4], [0.4, 1]], "regression"), 6)
    0.511766
    """
    r = _correlation_matrix(correlations)
    k = r.shape[0]
    s = _per_predictor("sds", sds, k)
    v.positive("sds", s)
    validity = _per_predictor("validities", validities, k)
    v.between("validities", validity, -1.0, 1.0)
    if _word(weights) == "regression":
        a = regression_weights(validity, r)  # already in standard-score units
    else:
        a = _weights(weights, k) * s
    result = float(a @ validity) / np.sqrt(_composite_variance("weights", a, r))
    if abs(result) > 1.0 + 1e-12:
        raise DomainError(f"validities and correlations are inconsistent: they give a composite validity of "
                          f"{v.show(result)}, beyond ±1 (no data have these correlations together)",
                          argument="validities")
    return float(np.clip(result, -1.0, 1.0))


# ---------------------------------------------------------------- regression from raw data

def _regression_data(criterion, blocks: dict) -> tuple[np.ndarray, list[np.ndarray]]:
    y = v.numeric_vector("criterion", criterion)
    mats = []
    for name, value in blocks.items():
        m = v.numeric_matrix(name, value)
        if m.shape[0] != y.size:
            if m.shape[1] == y.size and m.shape[0] == 1:  # one predictor given as a row
                m = m.T
            else:
                raise ArgumentTypeError(f"{name} must have one row per criterion value ({y.size}), got "
                                        f"{m.shape[0]}", argument=name)
        mats.append(m)
    keep = ~np.isnan(y) & ~np.any([np.isnan(m).any(axis=1) for m in mats], axis=0)
    return y[keep], [m[keep] for m in mats]


def _r2(y: np.ndarray, x: np.ndarray, argument: str) -> float:
    if y.size <= x.shape[1] + 1:
        raise InsufficientDataError(f"the regression on {x.shape[1]} predictors needs more than {x.shape[1] + 1} "
                                    f"complete rows, got {y.size}", argument=argument)
    tss = total_sum_of_squares(y)
    if not tss > 0:
        raise ZeroVarianceError("criterion has no variance among the complete rows", argument="criterion")
    fit = least_squares(np.column_stack([np.ones(y.size), x]), y, argument=argument,
                        what="the regression")
    return max(0.0, 1.0 - fit.rss / tss)


@spreadsheet("MULTIPLE_R", returns="correlation",
             reference="Cohen, J., Cohen, P., West, S. G. & Aiken, L. S. (2003). Applied Multiple "
                       "Regression/Correlation Analysis (3rd ed.), ch. 3.")
def multiple_r(criterion: Range, predictors: Range) -> float:
    """Multiple correlation of the criterion with several predictors: √R² of the least-squares regression.

    R² = 1 − RSS / Σ(y − ȳ)², from the ordinary least-squares fit with an
    intercept.

    Parameters
    ----------
    criterion : range
        Criterion values, one per person (one column).
    predictors : range
        People × predictors range of predictor scores, same people in the same order.

    Notes
    -----
    People with a blank in the criterion or any predictor are left out
    (listwise). More complete rows than predictors + 1 are needed; a
    predictor without variance, or one that is a weighted sum of others, is
    ``#DIV/0!``. The sample R overstates the population value (see
    ``ADJUSTED_R2``, ``CROSS_VALIDITY``).

    Examples
    --------
    >>> y = [3, 5, 4, 6, 8, 7, 9, 10]
    >>> x = [[1, 2], [2, 1], [2, 3], [3, 4], [4, 3], [4, 5], [5, 6], [6, 5]]
    >>> round(multiple_r(y, x), 6)
    0.991098
    """
    y, (x,) = _regression_data(criterion, {"predictors": predictors})
    return float(np.sqrt(_r2(y, x, "predictors")))


@dataclasses.dataclass(frozen=True)
class IncrementalValidity:
    """What added predictors contribute beyond base predictors (hierarchical regression)."""

    n: int
    r2_base: float
    r2_full: float
    f: float
    df_added: int
    df_error: int
    p: float

    @property
    def delta_r2(self) -> float:
        return self.r2_full - self.r2_base


def incremental_validity(criterion, base_predictors, added_predictors) -> IncrementalValidity:
    """ΔR² of added predictors over base predictors, with its F test.

    F = (ΔR² / q) / ((1 − R²_full) / (n − k − 1)), with q added predictors,
    k predictors in all, and q and n − k − 1 degrees of freedom.

    Examples
    --------
    >>> y = [3, 5, 4, 6, 8, 7, 9, 10]
    >>> x = [[1, 2], [2, 1], [2, 3], [3, 4], [4, 3], [4, 5], [5, 6], [6, 5]]
    >>> result = incremental_validity(y, [row[:1] for row in x], [row[1:] for row in x])
    >>> round(result.delta_r2, 6), round(result.f, 6), round(result.p, 6)
    (0.009229, 2.603492, 0.167548)
    """
    y, (base, added) = _regression_data(criterion, {"base_predictors": base_predictors,
                                                    "added_predictors": added_predictors})
    k = base.shape[1] + added.shape[1]
    if y.size <= k + 1:
        raise InsufficientDataError(f"the regression on {k} predictors needs more than {k + 1} complete rows, got "
                                    f"{y.size}", argument="criterion")
    r2_base = _r2(y, base, "base_predictors")
    r2_full = max(_r2(y, np.column_stack([base, added]), "added_predictors"), r2_base)
    q, df = added.shape[1], y.size - k - 1
    if r2_full >= 1.0:
        raise ZeroVarianceError("the predictors reproduce the criterion exactly; the F test is undefined",
                                argument="criterion")
    f = (r2_full - r2_base) / q / ((1.0 - r2_full) / df)
    return IncrementalValidity(n=int(y.size), r2_base=r2_base, r2_full=r2_full, f=float(f), df_added=q,
                               df_error=df, p=float(special.fdtrc(q, df, f)))


@spreadsheet("INCREMENTAL_R2", returns="nonnegative number",
             reference="Cohen, J., Cohen, P., West, S. G. & Aiken, L. S. (2003). Applied Multiple "
                       "Regression/Correlation Analysis (3rd ed.), sec. 5.5 (hierarchical regression, the F test "
                       "of an increment); Schmidt, F. L. & Hunter, J. E. (1998). Psychological Bulletin 124, 262-274.")
def incremental_r2(criterion: Range, base_predictors: Range, added_predictors: Range, *,
                   part: Literal["delta_r2", "f", "p"] = "delta_r2") -> float:
    """Incremental validity: the R² that added predictors contribute beyond the base predictors, or its F or p.

    ΔR² = R²(base + added) − R²(base);
    F = (ΔR² / q) / ((1 − R²_full) / (n − k − 1)) with q and n − k − 1 df
    (q added predictors, k in all).

    Parameters
    ----------
    criterion : range
        Criterion values, one per person (one column).
    base_predictors : range
        People × predictors range of the predictors already in use.
    added_predictors : range
        People × predictors range of the predictors whose increment is tested.
    part : {"delta_r2", "f", "p"}, optional
        Which figure: ΔR² (default), the F statistic or its p value.

    Notes
    -----
    People with a blank anywhere are left out of both models (listwise), so
    both are fitted to the same people.

    Examples
    --------
    >>> y = [3, 5, 4, 6, 8, 7, 9, 10]
    >>> x1 = [1, 2, 2, 3, 4, 4, 5, 6]
    >>> x2 = [2, 1, 3, 4, 3, 5, 6, 5]
    >>> round(incremental_r2(y, x1, x2), 6), round(incremental_r2(y, x1, x2, part="p"), 6)
    (0.009229, 0.167548)
    """
    result = incremental_validity(criterion, base_predictors, added_predictors)
    return {"delta_r2": result.delta_r2, "f": result.f, "p": result.p}[part]


# ---------------------------------------------------------------- shrinkage

def _shrinkage_inputs(r2, n, k, min_n_over_k: int):
    v.between("r2", r2, 0.0, 1.0)
    v.integer("n", n)
    v.integer("k", k)
    v.at_least("k", k, 1)
    short = np.asarray(n) < np.asarray(k) + min_n_over_k
    if short.any():
        i = int(np.argmax(np.broadcast_to(short, np.broadcast(n, k).shape)))
        raise InsufficientDataError(
            f"n must be at least k + {min_n_over_k}, got n {v.show(float(np.broadcast_to(n, short.shape).flat[i]))} "
            f"for k {v.show(float(np.broadcast_to(k, short.shape).flat[i]))}", argument="n")


@spreadsheet("ADJUSTED_R2", returns="coefficient", elementwise=["r2", "n", "k"],
             reference="Ezekiel, M. (1930). Methods of Correlation Analysis, Wiley; Wherry, R. J. (1931). A new "
                       "formula for predicting the shrinkage of the coefficient of multiple correlation. Annals of "
                       "Mathematical Statistics 2, 440-457.")
def adjusted_r2(r2: float, n: int, k: int) -> float:
    """Adjusted R², the Ezekiel (1930) / Wherry (1931) estimate of the population squared multiple correlation.

    adjusted R² = 1 − (1 − R²) (n − 1) / (n − k − 1)

    This is the "adjusted R²" of regression software (statsmodels'
    ``rsquared_adj``), usually credited to Wherry and first given by Ezekiel.

    Parameters
    ----------
    r2 : float
        Sample squared multiple correlation, between 0 and 1.
    n : int
        Number of people, a whole number of at least k + 2.
    k : int
        Number of predictors, a whole number of at least 1.

    Notes
    -----
    It estimates how well the population regression would predict, not how
    well the sample's weights will (``CROSS_VALIDITY``). It is not truncated:
    a small R² with many predictors gives a value below 0.

    Examples
    --------
    >>> round(adjusted_r2(0.30, 100, 3), 6)
    0.278125
    """
    _shrinkage_inputs(r2, n, k, 2)
    return 1.0 - (1.0 - r2) * (n - 1.0) / (n - k - 1.0)


@spreadsheet("CROSS_VALIDITY", returns="proportion", elementwise=["r2", "n", "k"],
             reference="Browne, M. W. (1975). Predictive validity of a linear regression equation. British Journal "
                       "of Mathematical and Statistical Psychology 28, 79-87; Schmitt, N., Coyle, B. W. & Rauschenberger, "
                       "J. (1977). Psychological Bulletin 84, 751-758.")
def cross_validity(r2: float, n: int, k: int) -> float:
    """Cross-validated R² (Browne 1975): how much criterion variance the sample's regression weights will
    explain in new people.

    ρc² = ((n − k − 3) ρ⁴ + ρ²) / ((n − 2k − 2) ρ² + k),
    with ρ² estimated by the adjusted R² (``ADJUSTED_R2``, set to 0 when
    negative) and ρ⁴ by its square

    Parameters
    ----------
    r2 : float
        Sample squared multiple correlation, between 0 and 1.
    n : int
        Number of people, a whole number of at least k + 4.
    k : int
        Number of predictors, a whole number of at least 1.

    Notes
    -----
    Browne's formula assumes multivariate normal predictors and criterion.
    Browne also gave a bias-corrected estimate of ρ⁴; the square of the
    adjusted R² used here is the simpler form common in applied work
    (common practice). The result lies between 0 and 1 and is at most the
    adjusted R² (less shrinkage for large n).

    Examples
    --------
    >>> round(cross_validity(0.30, 100, 3), 6)
    0.264079
    """
    _shrinkage_inputs(r2, n, k, 4)
    rho2 = np.maximum(1.0 - (1.0 - r2) * (n - 1.0) / (n - k - 1.0), 0.0)
    # With n ≥ k + 4 and 0 ≤ ρ² ≤ 1 the denominator is at least min(k, n − k − 2) > 0, and the result at
    # most ρ² (equality at 0 and 1): no division by zero, no value outside 0..1.
    return ((n - k - 3.0) * rho2 * rho2 + rho2) / ((n - 2.0 * k - 2.0) * rho2 + k)


# ---------------------------------------------------------------- subgroup differences

@spreadsheet("COMPOSITE_D", returns="number",
             reference="Sackett, P. R. & Ellingson, J. E. (1997). The effects of forming multi-predictor composites "
                       "on group differences and adverse impact. Personnel Psychology 50, 707-721.")
def composite_d(ds: Range, mean_r: float) -> float:
    """Subgroup difference d of a unit-weighted composite of standardised predictors (Sackett & Ellingson 1997).

    d_C = Σᵢ dᵢ / √(k + k(k − 1) r̄)

    Parameters
    ----------
    ds : range
        Each predictor's standardised group difference d (at least 2 values, no blanks).
    mean_r : float
        Mean intercorrelation of the predictors, greater than −1/(k − 1) and at most 1.

    Notes
    -----
    Exact for predictors standardised within groups, with r̄ the mean of the
    within-group intercorrelations and unit weights on the standardised
    scores. Adding a predictor with a smaller d lowers the composite's d
    less than intuition suggests, and with highly intercorrelated predictors
    hardly at all.

    Examples
    --------
    A predictor with d = 1.0 and one with d = 0.0, correlated .30:

    >>> round(composite_d([1.0, 0.0], 0.3), 6)
    0.620174
    """
    d = v.numeric_vector("ds", ds)
    if np.isnan(d).any():
        raise ArgumentTypeError(f"ds has a blank at position {int(np.argmax(np.isnan(d))) + 1}", argument="ds")
    k = d.size
    if k < 2:
        raise InsufficientDataError(f"ds needs at least 2 predictors' d values, got {k}", argument="ds")
    v.between("mean_r", mean_r, -1.0 / (k - 1), 1.0, low_open=True)
    return float(d.sum() / np.sqrt(k + k * (k - 1) * mean_r))
