"""Validity coefficients, their corrections, and effect sizes.

==========================  ============================================  ======================================
spreadsheet name            Python function                               what it gives
==========================  ============================================  ======================================
``MAX_VALIDITY``            :func:`maximum_validity`                      the ceiling √(rxx · ryy)
``DISATTENUATE``            :func:`disattenuated_correlation`             Spearman: rxy / √(rxx · ryy)
``RANGE_CORRECT``           :func:`range_corrected_correlation`           Thorndike Case II (direct selection)
``RANGE_CORRECT_INDIRECT``  :func:`indirect_range_corrected_validity`     Hunter, Schmidt & Le (2006), Case IV
``OPERATIONAL_VALIDITY``    :func:`operational_validity`                  criterion reliability, then Case II
``RESTRICTED_RELIABILITY``  :func:`restricted_reliability`                the test reliability among incumbents
                                                                          that the indirect correction implies
``R_CI``                    :func:`correlation_confidence_limit`          Fisher z confidence limit
``R_PVALUE``                :func:`correlation_p_value`                   t test of ρ = 0, n − 2 df
``R_TO_D``                  :func:`correlation_to_d`                      d = 2r / √(1 − r²)
``D_TO_R``                  :func:`d_to_correlation`                      r = d / √(d² + 4)
``COHENS_D``                :func:`cohens_d`                              mean difference over the pooled SD
``COHENS_D_CI``             :func:`cohens_d_ci`                           d or a noncentral-t confidence limit
``NTH_NUMBER_ROW``          :func:`nth_number_row`                        where the k-th number of a column is
                                                                          (the study's list of people with a
                                                                          criterion value)
==========================  ============================================  ======================================

Caution
-------
Validity coefficients and their corrections are estimates that support
professional judgment; they do not replace it. A corrected validity is an
estimate under the stated assumptions of its correction (normality,
linearity, the selection model, reliabilities from the right group), and is
only as good as the reliabilities and standard deviations fed into it.

Conventions
-----------
* ``r``, ``rxy``: an observed Pearson correlation, between −1 and 1.
* Reliabilities that a correction divides by (``rxx``, ``ryy``,
  ``rxx_applicants``) must be greater than 0 and at most 1; pass 1 for a
  measure treated as perfectly reliable.
* A correction whose result would fall outside −1..1 (sampling error in
  small studies, or a reliability that is too low, can do that) raises
  :class:`~trueband.funcs.errors.DomainError` naming the inputs instead of
  returning an impossible correlation or silently clipping it. Results within
  1e-12 of ±1 (rounding) are returned as ±1.
* Sample sizes ``n`` are whole numbers.
"""

from __future__ import annotations

import math
from typing import Literal

import numpy as np

from . import _validate as v
from ._lazy import lazy_module
from ._numeric import centred
from ._validate import Range
from .errors import DomainError, InsufficientDataError, ZeroVarianceError
from .registry import spreadsheet
from .scores import two_sided_z

special = lazy_module("scipy.special")
optimize = lazy_module("scipy.optimize")
stats = lazy_module("scipy.stats")

__all__ = [
    "maximum_validity",
    "disattenuated_correlation",
    "range_corrected_correlation",
    "indirect_range_corrected_validity",
    "operational_validity",
    "restricted_reliability",
    "correlation_confidence_limit",
    "correlation_p_value",
    "correlation_to_d",
    "d_to_correlation",
    "cohens_d",
    "cohens_d_ci",
    "case_ii",
    "nth_number_row",
]

#: Rounding allowance at ±1 for corrected correlations.
_ROUNDING = 1e-12


def _correlation(name, value):
    return v.between(name, value, -1.0, 1.0)


def _divisor_reliability(name, value):
    return v.reliability(name, value, allow_zero=False)


def _first_where(mask, **arrays):
    """The values of ``arrays`` at the first position where ``mask`` holds (for messages)."""
    shape = np.broadcast_shapes(np.shape(mask), *(np.shape(a) for a in arrays.values()))
    i = int(np.argmax(np.broadcast_to(mask, shape).ravel()))
    return {k: np.broadcast_to(np.asarray(a, dtype=float), shape).ravel()[i] for k, a in arrays.items()}


def _within_one(corrected, argument: str, what: str, **inputs):
    """Refuse a corrected correlation beyond ±1; return it with rounding excursions set to ±1."""
    c = np.asarray(corrected, dtype=float)
    bad = ~(np.abs(c) <= 1.0 + _ROUNDING)  # also catches nan
    if bad.any():
        at = _first_where(bad, corrected=c, **inputs)
        given = ", ".join(f"{k} {v.show(float(x))}" for k, x in at.items() if k != "corrected")
        raise DomainError(
            f"{what} for {given} is {v.show(float(at['corrected']))}, beyond ±1: the observed {argument} exceeds "
            f"what the reliabilities allow (sampling error, or reliabilities that are too low)", argument=argument)
    return np.clip(c, -1.0, 1.0) if c.ndim else float(np.clip(c, -1.0, 1.0))


def case_ii(r, sd_restricted, sd_unrestricted):
    """Thorndike's Case II on already-validated inputs (shared by the corrections).

    R = r·U / √(1 + r²(U² − 1)), U = sd_unrestricted / sd_restricted, computed as
    r·S / hypot(s·√(1 − r²), r·S) with both SDs scaled by the larger one so no
    ratio overflows or underflows and the denominator is never 0.
    """
    big = np.maximum(sd_restricted, sd_unrestricted)
    s = sd_restricted / big
    S = sd_unrestricted / big
    rs = r * S
    return rs / np.hypot(s * np.sqrt((1.0 - r) * (1.0 + r)), rs)


@spreadsheet("MAX_VALIDITY", returns="correlation", elementwise=True,
             reference="Spearman, C. (1904). The proof and measurement of association between two things. "
                       "American Journal of Psychology 15, 72-101; Nunnally, J. C. & Bernstein, I. H. (1994). "
                       "Psychometric Theory (3rd ed.), ch. 6.")
def maximum_validity(rxx: float, ryy: float) -> float:
    """Ceiling on the observed validity set by the reliabilities of predictor and criterion.

    max r = √(rxx · ryy)

    An observed correlation above this ceiling points to sampling error or
    to reliabilities that were underestimated (or estimated in another group).

    Parameters
    ----------
    rxx : float
        Reliability of the predictor, between 0 and 1.
    ryy : float
        Reliability of the criterion, between 0 and 1.

    Examples
    --------
    A test with reliability .81 against a rating with reliability .52:

    >>> round(maximum_validity(0.81, 0.52), 6)
    0.648999
    """
    v.reliability("rxx", rxx)
    v.reliability("ryy", ryy)
    return np.sqrt(rxx) * np.sqrt(ryy)


@spreadsheet("DISATTENUATE", returns="correlation", elementwise=True,
             reference="Spearman, C. (1904). American Journal of Psychology 15, 72-101 (correction for "
                       "attenuation); Hunter, J. E. & Schmidt, F. L. (2004). Methods of Meta-Analysis "
                       "(2nd ed.), ch. 3.")
def disattenuated_correlation(rxy: float, rxx: float, ryy: float) -> float:
    """Correlation corrected for unreliability in one or both measures (Spearman's correction).

    ρ = rxy / √(rxx · ryy)

    Pass 1 for a measure that is treated as perfectly reliable (for example
    ``rxx = 1`` to correct for criterion unreliability only, the usual step
    in estimating a predictor's operational validity). Corrected validities
    are estimates under stated assumptions, to support professional judgment.

    Parameters
    ----------
    rxy : float
        Observed correlation, between −1 and 1.
    rxx : float
        Reliability of the first measure, greater than 0 and at most 1.
    ryy : float
        Reliability of the second measure, greater than 0 and at most 1.

    Notes
    -----
    If the corrected value exceeds 1 in magnitude (beyond a rounding
    allowance of 1e-12) the function raises ``DomainError`` (``#NUM!``)
    naming rxy, rxx and ryy: a correlation cannot exceed 1, and such a result
    means the observed correlation is above its ceiling √(rxx · ryy)
    (sampling error, or reliabilities that are too low). It is not clipped
    to 1, which would hide the problem.

    Examples
    --------
    >>> round(disattenuated_correlation(0.30, 1, 0.52), 6)
    0.416025
    """
    _correlation("rxy", rxy)
    _divisor_reliability("rxx", rxx)
    _divisor_reliability("ryy", ryy)
    # √rxx·√ryy rather than √(rxx·ryy): the product of two tiny reliabilities would underflow to 0.
    corrected = rxy / (np.sqrt(rxx) * np.sqrt(ryy))
    return _within_one(corrected, "rxy", "the disattenuated correlation", rxy=rxy, rxx=rxx, ryy=ryy)


@spreadsheet("RANGE_CORRECT", returns="correlation", elementwise=True,
             reference="Thorndike, R. L. (1949). Personnel Selection, pp. 169-176 (Case II); Pearson, K. (1903). "
                       "Philosophical Transactions A 200, 1-66; Sackett, P. R. & Yang, H. (2000). Journal of "
                       "Applied Psychology 85, 112-118.")
def range_corrected_correlation(r: float, sd_restricted: float, sd_unrestricted: float) -> float:
    """Correlation corrected for direct range restriction on the predictor (Thorndike's Case II).

    R = r · U / √(1 + r² (U² − 1)),  U = sd_unrestricted / sd_restricted

    Use it when people were selected directly on the predictor itself (top
    down or with a cut score on this test). Where selection was on something
    else related to the predictor, use ``RANGE_CORRECT_INDIRECT``. The result
    is an estimate under the assumptions of linearity and equal residual
    variance (homoscedasticity) of the criterion on the predictor; it supports
    professional judgment and does not replace it.

    Parameters
    ----------
    r : float
        Correlation observed in the restricted group (e.g. those hired), between −1 and 1.
    sd_restricted : float
        Predictor standard deviation in the restricted group, greater than 0.
    sd_unrestricted : float
        Predictor standard deviation in the unrestricted group (e.g. all applicants), greater than 0.

    Notes
    -----
    U below 1 (a restricted group more variable than the reference group)
    is allowed: the same formula then estimates the correlation in the
    narrower group. The result always lies within −1..1.

    Examples
    --------
    Observed r = .25 among those hired, predictor SD 6 among them and 10
    among all applicants:

    >>> round(range_corrected_correlation(0.25, 6, 10), 6)
    0.395285
    """
    _correlation("r", r)
    v.positive("sd_restricted", sd_restricted)
    v.positive("sd_unrestricted", sd_unrestricted)
    return case_ii(r, sd_restricted, sd_unrestricted)


@spreadsheet("RANGE_CORRECT_INDIRECT", returns="correlation", elementwise=True,
             reference="Hunter, J. E., Schmidt, F. L. & Le, H. (2006). Implications of direct and indirect range "
                       "restriction for meta-analysis methods and findings. Journal of Applied Psychology 91, "
                       "594-612; Le, H. & Schmidt, F. L. (2006). Psychological Methods 11, 416-438.")
def indirect_range_corrected_validity(r: float, u_x: float, rxx_applicants: float, *, ryy: float = 1.0) -> float:
    """Operational validity among applicants under indirect range restriction (Hunter, Schmidt & Le 2006).

    The result is corrected for range restriction and for criterion
    unreliability but not for predictor unreliability: it is the validity of
    the observed predictor scores among applicants. Corrected validities are
    estimates under stated assumptions, to support professional judgment.

    The steps (Hunter, Schmidt & Le 2006, the Case IV procedure):

    1. true-score restriction ratio: u_T = √((u_x² − (1 − rxx_a)) / rxx_a);
    2. predictor reliability among incumbents: rxx_i = 1 − (1 − rxx_a) / u_x²;
    3. correct the observed r for unreliability in both measures within the
       restricted group: ρ_TP,i = r / √(rxx_i · ryy);
    4. Case II on true scores with U_T = 1 / u_T:
       ρ_TP,a = U_T ρ_TP,i / √((U_T² − 1) ρ_TP,i² + 1);
    5. re-attenuate by the predictor's applicant reliability:
       ρ_XP,a = ρ_TP,a · √rxx_a.

    Parameters
    ----------
    r : float
        Correlation observed among incumbents, between −1 and 1.
    u_x : float
        Ratio of the incumbents' predictor SD to the applicants' predictor SD, greater than 0 and at most 1.
    rxx_applicants : float
        Reliability of the predictor among applicants, greater than 0 and at most 1.
    ryy : float, optional
        Reliability of the criterion among incumbents, greater than 0 and at most 1; default 1.

    Notes
    -----
    The model assumes that selection acted on the predictor's true score
    (or on a variable whose effect runs wholly through it) and that the
    predictor's error variance is the same among applicants and incumbents
    (which gives steps 1 and 2). Step 2 needs u_x² > 1 − rxx_a; otherwise
    the incumbents' reliability would be zero or negative and the function
    raises ``DomainError`` naming u_x and rxx_applicants. A step-3 value
    beyond ±1 raises ``DomainError`` naming r. Compare step 2 with the
    incumbents' own reliability before using the result
    (``RESTRICTED_RELIABILITY`` states the rule the validation study uses). The equation numbers of the
    paper are not cited here because they could not be checked against the
    printed article; the steps are identified by their content. The formulas
    of steps 1 and 2 also appear in Schmidt & Hunter (2015), Methods of
    Meta-Analysis (3rd ed.), p. 127, as cited by the psychmeta R package,
    whose implementation the tests compare against.

    Examples
    --------
    >>> round(indirect_range_corrected_validity(0.25, 0.67, 0.81, ryy=0.52), 6)
    0.604843
    """
    _correlation("r", r)
    v.between("u_x", u_x, 0.0, 1.0, low_open=True)
    _divisor_reliability("rxx_applicants", rxx_applicants)
    _divisor_reliability("ryy", ryy)
    # u_x² − (1 − rxx_a): the incumbents' true-score variance in applicant units, shared by steps 1 and 2.
    true_part = u_x * u_x - (1.0 - rxx_applicants)
    bad = ~(np.asarray(true_part) > 0)
    if bad.any():
        at = _first_where(bad, u_x=u_x, rxx_applicants=rxx_applicants)
        raise DomainError(
            f"u_x {v.show(float(at['u_x']))} is too small for rxx_applicants {v.show(float(at['rxx_applicants']))}: "
            f"u_x² must exceed 1 − rxx_applicants, or the predictor's reliability among incumbents is zero or "
            f"negative", argument="u_x")
    u_t = np.sqrt(true_part / rxx_applicants)                      # step 1
    rxx_incumbents = true_part / (u_x * u_x)                       # step 2, = 1 − (1 − rxx_a)/u_x²
    rho_i = _within_one(r / (np.sqrt(rxx_incumbents) * np.sqrt(ryy)), "r",   # step 3
                        "the correlation corrected for both reliabilities among incumbents",
                        r=r, u_x=u_x, rxx_applicants=rxx_applicants, ryy=ryy)
    rho_a = case_ii(rho_i, u_t, 1.0)                               # step 4, U_T = 1/u_T
    return rho_a * np.sqrt(rxx_applicants)                         # step 5


@spreadsheet("OPERATIONAL_VALIDITY", returns="correlation", elementwise=True,
             reference="Hunter, J. E. & Schmidt, F. L. (2004). Methods of Meta-Analysis (2nd ed.), ch. 3 "
                       "(criterion reliability from the restricted group is applied before the range correction); "
                       "Schmidt, F. L., Hunter, J. E. & Urry, V. W. (1976). Journal of Applied Psychology 61, "
                       "473-485; Sackett, P. R. & Yang, H. (2000). Journal of Applied Psychology 85, 112-118.")
def operational_validity(r: float, ryy: float, sd_restricted: float, sd_unrestricted: float) -> float:
    """Operational validity: corrected for criterion unreliability, then for direct range restriction.

    ρ_i = r / √ryy, then R = ρ_i · U / √(1 + ρ_i² (U² − 1)),  U = sd_unrestricted / sd_restricted

    The predictor's own unreliability is not corrected: decisions are made on
    observed scores. Corrected validities are estimates under stated
    assumptions, to support professional judgment.

    Parameters
    ----------
    r : float
        Correlation observed in the restricted group (those hired), between −1 and 1.
    ryy : float
        Reliability of the criterion in the restricted group, greater than 0 and at most 1.
    sd_restricted : float
        Predictor standard deviation among those hired, greater than 0.
    sd_unrestricted : float
        Predictor standard deviation among applicants, greater than 0.

    Notes
    -----
    Order: criterion reliability is usually estimated among incumbents
    (supervisor ratings exist only for those hired), so the unreliability
    correction is made first, within the restricted group where that
    reliability belongs, and the range-restriction correction second
    (Hunter & Schmidt 2004, ch. 3; Schmidt, Hunter & Urry 1976; Sackett &
    Yang 2000). Doing it the other way round would apply an incumbent
    reliability to an applicant correlation. A value beyond ±1 after the
    first step raises ``DomainError`` naming r.

    Examples
    --------
    >>> round(operational_validity(0.25, 0.52, 6, 10), 6)
    0.524488
    """
    _correlation("r", r)
    _divisor_reliability("ryy", ryy)
    v.positive("sd_restricted", sd_restricted)
    v.positive("sd_unrestricted", sd_unrestricted)
    rho_i = _within_one(r / np.sqrt(ryy), "r", "the correlation corrected for criterion unreliability",
                        r=r, ryy=ryy)
    return case_ii(rho_i, sd_restricted, sd_unrestricted)


@spreadsheet("RESTRICTED_RELIABILITY", returns="coefficient", elementwise=True,
             reference="Hunter, J. E., Schmidt, F. L. & Le, H. (2006). Implications of direct and indirect range "
                       "restriction for meta-analysis methods and findings. Journal of Applied Psychology 91, "
                       "594-612; Schmidt, F. L. & Hunter, J. E. (2015). Methods of Meta-Analysis (3rd ed.), p. 127.")
def restricted_reliability(rxx_applicants: float, u_x: float) -> float:
    """The predictor's reliability among incumbents that the indirect range-restriction correction implies.

    rxx_i = 1 − (1 − rxx_a) / u_x²

    This is step 2 of ``RANGE_CORRECT_INDIRECT``: the model of Hunter,
    Schmidt & Le (2006) takes the predictor's error variance to be the same
    among applicants and incumbents, so the incumbents' reliability follows
    from the applicants' reliability and the SD ratio. Put it beside the
    reliability computed among the incumbents themselves: a value far below
    it (or at or below 0) means the model does not fit the data, and the
    indirect correction then gives an inflated validity (the correction
    divides the observed r by √rxx_i).

    Parameters
    ----------
    rxx_applicants : float
        Reliability of the predictor among applicants, between 0 and 1.
    u_x : float
        Ratio of the incumbents' predictor SD to the applicants' predictor SD, greater than 0.

    Notes
    -----
    The result is at most 1 and may be 0 or negative (u_x² ≤ 1 − rxx_a): it
    is returned, not refused, because showing it is the point: it says why
    the indirect correction is not computable. u_x above 1 (incumbents more
    variable than applicants) is allowed.

    The rule the validation study applies (this tool's, built on the model's
    stated assumption; not printed in Hunter, Schmidt & Le 2006, Le & Schmidt
    2006 or Schmidt, Oh & Le 2006): ``RANGE_CORRECT_INDIRECT`` is shown only
    when this implied reliability is above 0 and not below the lower
    confidence limit (Feldt) of the incumbents' own alpha (``ALPHA_AMONG``);
    otherwise the equal-error-variance assumption is contradicted by the data
    (selection directly on the test does that) and the cell says "not
    computable" with the reason.

    Examples
    --------
    Applicant reliability .81 and u_x = .67:

    >>> round(restricted_reliability(0.81, 0.67), 6)
    0.576743
    """
    v.reliability("rxx_applicants", rxx_applicants)
    v.positive("u_x", u_x)
    with np.errstate(over="ignore", divide="ignore"):
        implied = 1.0 - (1.0 - np.asarray(rxx_applicants, dtype=float)) / np.square(np.asarray(u_x, dtype=float))
    if not np.isfinite(implied).all():
        raise DomainError("u_x is too small: (1 − rxx_applicants) / u_x² is beyond the number range",
                          argument="u_x")
    return implied if implied.ndim else float(implied)


def _sample_size(name, n, low):
    v.integer(name, n)
    v.at_least(name, n, low)


@spreadsheet("R_CI", returns="correlation", elementwise=["r", "n", "confidence"],
             reference="Fisher, R. A. (1921). On the 'probable error' of a coefficient of correlation deduced from "
                       "a small sample. Metron 1, 3-32; Cohen, J., Cohen, P., West, S. G. & Aiken, L. S. (2003). "
                       "Applied Multiple Regression/Correlation Analysis (3rd ed.), sec. 2.8.")
def correlation_confidence_limit(r: float, n: float, *, part: Literal["lower", "upper"],
                                 confidence: float = 0.95) -> float:
    """Lower or upper confidence limit of a correlation by Fisher's z transformation.

    limit = tanh(atanh(r) ∓ z / √(n − 3)), z the two-sided normal quantile of ``confidence``

    Parameters
    ----------
    r : float
        Observed correlation, between −1 and 1.
    n : float
        Number of people (pairs of scores), a whole number of at least 4.
    part : {"lower", "upper"}
        Which limit.
    confidence : float, optional
        Two-sided confidence level, strictly between 0 and 1; default 0.95.

    Notes
    -----
    The interval is that of ``scipy.stats.pearsonr(...).confidence_interval()``
    (Fisher z with standard error 1/√(n − 3)). For r = ±1 both limits equal r.

    Examples
    --------
    >>> round(correlation_confidence_limit(0.30, 100, part="lower"), 6)
    0.110068
    """
    _correlation("r", r)
    _sample_size("n", n, 4)
    half = two_sided_z(confidence) / np.sqrt(n - 3.0)
    z = np.arctanh(r)  # ±inf at r = ±1, and tanh(±inf ∓ half) = ±1
    return np.tanh(z - half) if part == "lower" else np.tanh(z + half)


@spreadsheet("R_PVALUE", returns="probability", elementwise=["r", "n"],
             reference="Fisher, R. A. (1915). Biometrika 10, 507-521 (distribution of r); Cohen, Cohen, West & "
                       "Aiken (2003). Applied Multiple Regression/Correlation Analysis (3rd ed.), sec. 2.8.")
def correlation_p_value(r: float, n: float, *, tails: int = 2) -> float:
    """p value of the test that the population correlation is zero (t test with n − 2 df).

    t = r √(n − 2) / √(1 − r²);  p = 2 · P(T > |t|) for two tails, P(T > t) for one tail

    Parameters
    ----------
    r : float
        Observed correlation, between −1 and 1.
    n : float
        Number of people (pairs of scores), a whole number of at least 3.
    tails : int, optional
        1 or 2; default 2. The one-tailed test has the alternative that the
        correlation is positive (a predictor expected to predict performance
        positively), so a negative r gives p above 0.5.

    Notes
    -----
    Same p values as ``scipy.stats.pearsonr`` (``alternative="two-sided"`` or
    ``"greater"``). r = ±1 gives p = 0 for the two-tailed test.

    Examples
    --------
    >>> round(correlation_p_value(0.30, 30), 6)
    0.107246
    """
    _correlation("r", r)
    _sample_size("n", n, 3)
    v.between("tails", tails, 1, 2)
    df = n - 2.0
    t = r * np.sqrt(df) / np.sqrt((1.0 - r) * (1.0 + r))  # (1 − r)(1 + r): no cancellation near ±1
    if tails == 2:
        return 2.0 * special.stdtr(df, -np.abs(t))
    return special.stdtr(df, -t)


@spreadsheet("R_TO_D", returns="number", elementwise=True,
             reference="Rosenthal, R. (1994). Parametric measures of effect size. In H. Cooper & L. V. Hedges "
                       "(Eds.), The Handbook of Research Synthesis, 231-244; Cohen, J. (1988). Statistical Power "
                       "Analysis for the Behavioral Sciences (2nd ed.), eq. 2.2.6.")
def correlation_to_d(r: float) -> float:
    """Standardised mean difference d equivalent to a point-biserial correlation, equal group sizes.

    d = 2r / √(1 − r²)

    Parameters
    ----------
    r : float
        Correlation, strictly between −1 and 1.

    Notes
    -----
    The formula assumes two groups of equal size; it is the inverse of
    ``D_TO_R`` (the same convention as ``pingouin.convert_effsize`` without
    group sizes).

    Examples
    --------
    >>> round(correlation_to_d(0.5), 6)
    1.154701
    """
    v.between("r", r, -1.0, 1.0, low_open=True, high_open=True)
    return 2.0 * r / np.sqrt((1.0 - r) * (1.0 + r))


@spreadsheet("D_TO_R", returns="correlation", elementwise=True,
             reference="Rosenthal (1994), in Cooper & Hedges (Eds.), The Handbook of Research Synthesis; "
                       "Cohen (1988), eq. 2.2.7.")
def d_to_correlation(d: float) -> float:
    """Point-biserial correlation equivalent to a standardised mean difference d, equal group sizes.

    r = d / √(d² + 4)

    Parameters
    ----------
    d : float
        Standardised mean difference, any finite number.

    Notes
    -----
    Equal group sizes assumed; the inverse of ``R_TO_D``. Computed as
    d / hypot(d, 2) so a very large d gives r near 1 instead of overflowing.

    Examples
    --------
    >>> round(d_to_correlation(0.8), 6)
    0.371391
    """
    return d / np.hypot(d, 2.0)


def _group(name, values):
    x = v.numeric_vector(name, values)
    x = x[~np.isnan(x)]
    if x.size < 2:
        raise InsufficientDataError(f"{name} needs at least 2 scores (blanks ignored), got {x.size}", argument=name)
    return x


@spreadsheet("COHENS_D", returns="number",
             reference="Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences (2nd ed.), "
                       "sec. 2.2 and 2.5 (pooled within-group SD).")
def cohens_d(group_a: Range, group_b: Range) -> float:
    """Cohen's d: the difference between two group means over their pooled standard deviation.

    d = (mean_a − mean_b) / s_pooled,  s_pooled² = ((n_a − 1) s_a² + (n_b − 1) s_b²) / (n_a + n_b − 2)

    Parameters
    ----------
    group_a : range
        Scores of the first group (one row or column; blanks ignored).
    group_b : range
        Scores of the second group (one row or column; blanks ignored).

    Notes
    -----
    Variances use n − 1 denominators; each group needs at least 2 scores;
    text in either range is refused. Positive d means group_a scored higher.
    Pooled variance 0 (every score in both groups the same within its group)
    raises ``ZeroVarianceError``. Means and squared deviations are computed
    in two passes (no raw sums of squares), after shifting both groups by one
    of the scores and scaling them by a power of two, which leaves d
    unchanged: a common offset (scores near 1e14) costs no digits and scores
    of 1e155 or 1e-170 neither overflow nor underflow.

    Examples
    --------
    >>> round(cohens_d([5, 6, 7, 8], [3, 4, 5, 6]), 6)
    1.549193
    """
    return _pooled_d(_group("group_a", group_a), _group("group_b", group_b), "group_a", "group_b")


def _pooled_d(a: np.ndarray, b: np.ndarray, name_a: str, name_b: str) -> float:
    # d is unchanged by one shift and one scale of both groups: centred together (shifted by one score,
    # a correctly rounded subtraction, so a common offset costs no digits) and scaled by a power of two
    # (scores of 1e155 would overflow the squares)
    both = centred(np.concatenate([a, b]), axis=None)
    a, b = both[:a.size], both[a.size:]
    difference = a.mean() - b.mean()
    # deviations from each group's first score, then its mean: a group of equal scores gives exactly 0
    da, db = a - a[0], b - b[0]
    da -= da.mean()
    db -= db.mean()
    pooled = (da @ da + db @ db) / (a.size + b.size - 2)
    if not pooled > 0:
        raise ZeroVarianceError(f"{name_a} and {name_b} have zero pooled variance; d is undefined", argument=name_a)
    return float(difference / np.sqrt(pooled))


def _noncentrality_limit(t: float, df: float, cdf_target: float) -> float:
    """The noncentrality λ with P(T_df,λ ≤ t) = cdf_target (the cdf falls as λ grows, so the root is unique)."""
    if t < 0:
        # P(T ≤ t | λ) = 1 − P(T ≤ −t | −λ): solve on the positive side, where scipy's noncentral t stays
        # finite (for t < 0 and a large positive λ it returns nan instead of a number near 0).
        return -_noncentrality_limit(-t, df, 1.0 - cdf_target)
    def unreachable():
        return DomainError(f"scores_a and scores_b differ by too many standard deviations for the noncentral t "
                           f"interval (t = {v.show(t)} with {v.show(df)} degrees of freedom)", argument="scores_a")

    def gap(ncp):
        # Through the survival function: scipy's nctdtr returns nan at some points where the cdf is near 1.
        value = (1.0 - cdf_target) - float(stats.nct.sf(t, df, ncp))
        if not math.isfinite(value):
            raise unreachable()
        return value

    step = 2.0 + abs(t) / math.sqrt(df) * 4.0
    for _ in range(12):  # widen until the root is bracketed
        low, high = t - step, t + step
        if gap(low) >= 0 and gap(high) <= 0:
            return float(optimize.brentq(gap, low, high, xtol=1e-13, rtol=1e-15, maxiter=200))
        step *= 2.0
    raise unreachable()


@spreadsheet("COHENS_D_CI", returns="number",
             reference="Hedges, L. V. & Olkin, I. (1985). Statistical Methods for Meta-Analysis, ch. 5; Steiger, "
                       "J. H. & Fouladi, R. T. (1997). Noncentrality interval estimation and the evaluation of "
                       "statistical models. In Harlow, Mulaik & Steiger (Eds.), What If There Were No Significance "
                       "Tests?, 221-257; Cumming, G. & Finch, S. (2001). A primer on the understanding, use, and "
                       "calculation of confidence intervals that are based on central and noncentral "
                       "distributions. Educational and Psychological Measurement 61, 532-574.")
def cohens_d_ci(scores_a: Range, scores_b: Range, *, part: Literal["estimate", "lower", "upper"],
                confidence: float = 0.95) -> float:
    """Cohen's d of two groups' scores or one limit of its confidence interval from the noncentral t distribution.

    d = (mean_a − mean_b) / s_pooled (as ``COHENS_D``);  t = d · √(n_a n_b / (n_a + n_b)), df = n_a + n_b − 2;
    lower limit λ_L / √(n_a n_b / (n_a + n_b)) with P(T_df,λ_L ≤ t) = 1 − α/2, upper λ_U with
    P(T_df,λ_U ≤ t) = α/2, α = 1 − confidence

    The two-sided interval that inverts the noncentral t distribution of the
    pooled-variance t statistic (exact under normality with equal variances),
    the construction of Steiger & Fouladi (1997) and Cumming & Finch (2001).
    The Uniform Guidelines' documentation asks for means and standard
    deviations by group; d with its interval puts a group difference in
    standard deviation units.

    Parameters
    ----------
    scores_a : range
        Scores of the first group (one row or column; blanks ignored); at least 2 scores.
    scores_b : range
        Scores of the second group (one row or column; blanks ignored); at least 2 scores.
    part : {"estimate", "lower", "upper"}
        d itself (the same number as ``COHENS_D``), or the lower or upper limit.
    confidence : float, optional
        Two-sided confidence level, strictly between 0 and 1; default 0.95.

    Notes
    -----
    Positive d means scores_a scored higher. Variances use n − 1
    denominators; no small-sample (Hedges g) correction is applied to d or to
    the limits. Zero pooled variance is ``#DIV/0!``. Each limit is the root
    of the noncentral t distribution (scipy's ``nct``) found by
    Brent's method to about 1e-13.

    Examples
    --------
    >>> a, b = [5, 6, 7, 8, 9, 6, 7], [3, 4, 5, 6, 5, 4, 6]
    >>> round(cohens_d_ci(a, b, part="estimate"), 6)
    1.735913
    >>> round(cohens_d_ci(a, b, part="lower"), 4), round(cohens_d_ci(a, b, part="upper"), 4)
    (0.4582, 2.9636)
    """
    a, b = _group("scores_a", scores_a), _group("scores_b", scores_b)
    v.confidence("confidence", confidence)
    d = _pooled_d(a, b, "scores_a", "scores_b")
    if part == "estimate":
        return d
    scale = math.sqrt(a.size * b.size / (a.size + b.size))
    alpha = 1.0 - confidence
    target = 1.0 - alpha / 2.0 if part == "lower" else alpha / 2.0
    return _noncentrality_limit(d * scale, float(a.size + b.size - 2), target) / scale


@spreadsheet("NTH_NUMBER_ROW", returns="integer", elementwise=["k"],
             reference="OASIS (2011). Open Document Format for Office Applications (OpenDocument) Version 1.2, "
                       "Part 2: Recalculated Formula (OpenFormula) Format (SMALL, ISNUMBER): the idiom "
                       "SMALL(IF(ISNUMBER(column), ROW(column) - ROW(first) + 1), k) as one function (common "
                       "practice).")
def nth_number_row(column: Range, k: float) -> float:
    """Position (1-based, within ``column``) of the k-th cell of ``column`` that holds a number; 0 if there is none.

    Filled down with k = 1, 2, … it lists the rows of the people who have a value (e.g. a criterion), so a list
    built from it follows the data when a value is added or removed. The column is read once for a whole
    filled-down run of cells (k is elementwise).

    Parameters
    ----------
    column : range
        One column (or row); numbers count, blanks and empty text do not; other text is refused.
    k : float
        Which number: a whole number, at least 1.

    Notes
    -----
    Returns 0, not an error, when the column holds fewer than k numbers: a list longer than the numbers shows
    nothing there instead of an error.

    Examples
    --------
    >>> nth_number_row([[4.0], [""], [2.5], [None], [7.0]], 2)
    3
    >>> nth_number_row([[4.0], [""], [2.5], [None], [7.0]], 4)
    0
    """
    values = v.numeric_vector("column", column)
    v.integer("k", k)
    v.at_least("k", k, 1)
    positions = np.flatnonzero(~np.isnan(values)) + 1
    wanted = np.asarray(k, dtype=float)
    found = wanted <= positions.size  # compared as floats: a k beyond any column is simply not found
    kk = np.where(found, wanted, 1).astype(np.int64)
    out = np.where(found, positions[kk - 1] if positions.size else 0, 0)
    return out if out.ndim else int(out)
