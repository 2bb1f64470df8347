"""Selection utility: what a valid test is worth in successful hires and in money.

==================  ==================================  ================================================
spreadsheet name    Python function                     what it gives
==================  ==================================  ================================================
``TAYLOR_RUSSELL``  :func:`taylor_russell`              proportion of those selected who succeed
``NAYLOR_SHINE``    :func:`naylor_shine`                mean standard criterion score of those selected
``BCG_UTILITY``     :func:`bcg_utility`                 Brogden–Cronbach–Gleser gain in money
==================  ==================================  ================================================

Caution
-------
Utility figures are estimates under stated assumptions (a linear,
bivariate-normal relation between predictor and criterion, top-down
selection, every offer accepted, the validity and the standard deviation of
performance in money taken as known). They support professional judgment
about a selection procedure; they do not replace it.

Conventions
-----------
* ``validity`` is the operational validity among applicants (corrected for
  criterion unreliability and range restriction, not for predictor
  unreliability), between −1 and 1.
* ``selection_ratio`` (those selected / applicants) and ``base_rate`` (the
  proportion who would succeed without the test) are strictly between 0
  and 1, because the normal quantile of each is needed.
* Selection is top-down on the predictor: the cut z is the normal quantile
  with ``selection_ratio`` of applicants above it.
"""

from __future__ import annotations

import numpy as np

from . import _validate as v
from ._lazy import lazy_module
from .errors import DomainError
from .registry import spreadsheet

special = lazy_module("scipy.special")

__all__ = [
    "taylor_russell",
    "naylor_shine",
    "bcg_utility",
    "upper_orthant_probability",
    "mean_selected_z",
]

_TWO_PI = 2.0 * np.pi
_LOG_SQRT_TWO_PI = 0.5 * np.log(_TWO_PI)

# 20-point Gauss-Legendre rule on (-1, 1), used by Genz's method at every correlation.
_GL_X, _GL_W = np.polynomial.legendre.leggauss(20)

#: Smallest selection ratio TAYLOR_RUSSELL accepts (its accuracy is checked down to here).
_SMALLEST_RATIO = 1e-12


def _cut(proportion):
    """The z with ``proportion`` of a standard normal above it, accurate for small proportions."""
    return -special.ndtri(proportion)


def upper_orthant_probability(h, k, rho):
    """P(X > h, Y > k) for a standard bivariate normal pair with correlation ``rho``.

    Genz, A. (2004). Numerical computation of rectangular bivariate and
    trivariate normal and t probabilities. Statistics and Computing 14,
    251-260: for |ρ| < 0.925 the Sheppard/Owen integral over θ from 0 to
    asin ρ by 20-point Gauss-Legendre quadrature; for |ρ| ≥ 0.925 Drezner and
    Wesolowsky's expansion around ρ = ±1 plus a Gauss-Legendre correction.
    Genz reports an absolute error below about 1e-15 in double precision
    (this project's tests check it against scipy's ``owens_t`` route and a
    one-dimensional adaptive quadrature). ρ = ±1 is exact (the Fréchet bounds).
    Array arguments broadcast.
    """
    h, k, rho = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in (h, k, rho)))
    out = np.empty(h.shape)
    near_one = np.abs(rho) >= 0.925
    small = ~near_one
    if small.any():
        out[small] = _orthant_small_rho(h[small], k[small], rho[small])
    if near_one.any():
        out[near_one] = _orthant_large_rho(h[near_one], k[near_one], rho[near_one])
    return np.clip(out, 0.0, 1.0) if out.ndim else float(np.clip(out, 0.0, 1.0))


def _orthant_small_rho(h, k, r):
    hk = (h * k)[:, None]
    hs = ((h * h + k * k) / 2.0)[:, None]
    half_asin = (np.arcsin(r) / 2.0)[:, None]
    sn = np.sin(half_asin * (1.0 + _GL_X))          # nodes of θ on (0, asin ρ)
    integral = np.exp((sn * hk - hs) / (1.0 - sn * sn)) @ _GL_W
    return integral * half_asin[:, 0] / _TWO_PI + special.ndtr(-h) * special.ndtr(-k)


def _orthant_large_rho(h, k, r):
    k = np.where(r < 0, -k, k)
    hk = h * k
    total = np.zeros(h.shape)
    inner = np.abs(r) < 1.0
    if inner.any():
        hi, ki, hki = h[inner], k[inner], hk[inner]
        ri = np.abs(r[inner])
        a_s = (1.0 - ri) * (1.0 + ri)
        a = np.sqrt(a_s)
        bs = (hi - ki) ** 2
        c = (4.0 - hki) / 8.0
        d = (12.0 - hki) / 16.0
        asr = -(bs / a_s + hki) / 2.0
        bvn = np.where(asr > -100.0,
                       a * np.exp(asr) * (1.0 - c * (bs - a_s) * (1.0 - d * bs / 5.0) / 3.0 + c * d * a_s * a_s / 5.0),
                       0.0)
        b = np.sqrt(bs)
        tail = np.exp(-hki / 2.0) * np.sqrt(_TWO_PI) * special.ndtr(-b / a) * b * (1.0 - c * bs * (1.0 - d * bs / 5.0) / 3.0)
        bvn = bvn - np.where(hki > -100.0, tail, 0.0)
        half_a = (a / 2.0)[:, None]
        xs = (half_a * (1.0 + _GL_X)) ** 2           # shape (m, 20)
        rs = np.sqrt(1.0 - xs)
        asr_n = -(bs[:, None] / xs + hki[:, None]) / 2.0
        cc, dd, hkk = c[:, None], d[:, None], hki[:, None]
        sp = 1.0 + cc * xs * (1.0 + dd * xs)
        ep = np.exp(-hkk * (1.0 - rs) / (2.0 * (1.0 + rs))) / rs
        terms = np.where(asr_n > -100.0, np.exp(asr_n) * (ep - sp), 0.0)
        bvn = bvn + half_a[:, 0] * (terms @ _GL_W)
        total[inner] = -bvn / _TWO_PI
    positive = r > 0
    # ρ > 0: add P(X > max(h, k)); ρ < 0 (k was negated): subtract from P(h < X < −k_original), written
    # as a difference of the smaller tails so it does not cancel.
    upper = special.ndtr(-np.maximum(h, k))
    between = np.where(h < 0, special.ndtr(k) - special.ndtr(h), special.ndtr(-h) - special.ndtr(-k))
    return np.where(positive, total + upper, np.where(h >= k, -total, between - total))


def mean_selected_z(selection_ratio):
    """Mean standard predictor score of those selected top-down: φ(z) / SR (the inverse Mills ratio).

    Computed as exp(−z²/2 − ln√(2π) − ln SR) so tiny selection ratios neither
    underflow φ(z) nor divide 0 by a tiny number.
    """
    z = _cut(selection_ratio)
    return np.exp(-0.5 * z * z - _LOG_SQRT_TWO_PI - np.log(selection_ratio))


def _validity(validity):
    v.between("validity", validity, -1.0, 1.0)


def _open_proportion(name, value):
    v.between(name, value, 0.0, 1.0, low_open=True, high_open=True)


@spreadsheet("TAYLOR_RUSSELL", returns="proportion", elementwise=True,
             reference="Taylor, H. C. & Russell, J. T. (1939). The relationship of validity coefficients to the "
                       "practical effectiveness of tests in selection: discussion and tables. Journal of Applied "
                       "Psychology 23, 565-578; Genz, A. (2004). Statistics and Computing 14, 251-260.")
def taylor_russell(validity: float, base_rate: float, selection_ratio: float) -> float:
    """Proportion of those selected who will succeed (the Taylor–Russell success ratio).

    success ratio = P(X > x_c, Y > y_c) / SR, where X (predictor) and Y
    (criterion) are standard bivariate normal with correlation ``validity``,
    x_c = Φ⁻¹(1 − SR) and y_c = Φ⁻¹(1 − base_rate).

    Computed by bivariate-normal integration (Genz 2004, absolute error of
    the joint probability about 1e-15), not looked up in the printed tables,
    so any validity, base rate and selection ratio may be used. The result is
    an estimate under the model's assumptions and supports professional
    judgment.

    Parameters
    ----------
    validity : float
        Correlation between predictor and criterion among applicants, between −1 and 1.
    base_rate : float
        Proportion of applicants who would succeed if hired at random, strictly between 0 and 1.
    selection_ratio : float
        Proportion of applicants selected, less than 1 and at least one in a million million
        (smaller ratios are refused: the success ratio would lose its accuracy, see Notes).

    Notes
    -----
    With validity 0 the result is the base rate; with validity 1 it is
    min(1, base_rate / SR), with −1 max(0, (base_rate + SR − 1) / SR).
    Accuracy: within 1e-12 of an adaptive one-dimensional quadrature of the
    same integral over validities −0.99..0.995, base rates 1e-9..0.999999
    and selection ratios 1e-12..1 − 1e-9 (checked in the tests). Because the
    joint probability is divided by SR, selection ratios below 1e-12 (one in
    a million million) are refused rather than answered with lost digits.

    Examples
    --------
    Base rate .50, selection ratio .30, validity .50 (the 1939 tables print
    .74, recalled from memory):

    >>> round(taylor_russell(0.50, 0.50, 0.30), 4)
    0.7387
    """
    _validity(validity)
    _open_proportion("base_rate", base_rate)
    v.between("selection_ratio", selection_ratio, 0.0, 1.0, low_open=True, high_open=True)
    too_small = np.asarray(selection_ratio) < _SMALLEST_RATIO
    if too_small.any():
        raise DomainError(
            f"selection_ratio must be at least one in a million million (1e-12), got "
            f"{v.show(np.asarray(selection_ratio)[too_small].flat[0])}: the success ratio of so few hires "
            "cannot be computed to full accuracy", argument="selection_ratio")
    joint = upper_orthant_probability(_cut(selection_ratio), _cut(base_rate), validity)
    # The success ratio cannot exceed base_rate/SR or 1 (Fréchet bound); rounding in the joint
    # probability is kept inside those bounds.
    upper = np.minimum(1.0, base_rate / selection_ratio)
    lower = np.maximum(0.0, (base_rate + selection_ratio - 1.0) / selection_ratio)
    return np.clip(joint / selection_ratio, lower, upper)


@spreadsheet("NAYLOR_SHINE", returns="number", elementwise=True,
             reference="Naylor, J. C. & Shine, L. C. (1965). A table for determining the increase in mean "
                       "criterion score obtained by using a selection device. Journal of Industrial Psychology 3, "
                       "33-42; Brogden, H. E. (1949). Personnel Psychology 2, 171-183.")
def naylor_shine(validity: float, selection_ratio: float) -> float:
    """Mean standard criterion score of those selected top-down on the predictor (Naylor–Shine).

    mean z_y = validity · φ(z) / SR, z = Φ⁻¹(1 − SR)

    φ(z)/SR is the mean standard predictor score of those selected (the
    ordinate over the selection ratio). The result is in standard-deviation
    units of the criterion among applicants: 0 is the average applicant. It
    is an estimate under the model's assumptions (linear regression of
    criterion on predictor) and supports professional judgment.

    Parameters
    ----------
    validity : float
        Correlation between predictor and criterion among applicants, between −1 and 1.
    selection_ratio : float
        Proportion of applicants selected, strictly between 0 and 1.

    Examples
    --------
    >>> round(naylor_shine(0.50, 0.30), 4)
    0.5795
    """
    _validity(validity)
    _open_proportion("selection_ratio", selection_ratio)
    return validity * mean_selected_z(selection_ratio)


@spreadsheet("BCG_UTILITY", returns="number", elementwise=True,
             reference="Brogden, H. E. (1949). When testing pays off. Personnel Psychology 2, 171-183; "
                       "Cronbach, L. J. & Gleser, G. C. (1965). Psychological Tests and Personnel Decisions "
                       "(2nd ed.); Cascio, W. F. (1991). Costing Human Resources (3rd ed.), ch. 9; Boudreau, J. W. "
                       "(1991). Utility analysis for decisions in human resource management. In Handbook of "
                       "Industrial and Organizational Psychology (2nd ed.), vol. 2.")
def bcg_utility(n_selected: float, tenure: float, validity: float, sd_y: float, selection_ratio: float,
                cost_per_applicant: float) -> float:
    """Brogden–Cronbach–Gleser utility: the money gained by selecting with the procedure.

    ΔU = N_s · T · r · SD_y · φ(z) / SR − N_s · C / SR

    with N_s people selected, T their average tenure, r the validity, SD_y
    the standard deviation of job performance in money per person per unit
    of time, z = Φ⁻¹(1 − SR) the top-down cut, and C the cost of assessing
    one applicant; N_s / SR is the number of applicants assessed. The gain
    is over random selection, before taxes, discounting and variable costs
    (Boudreau's adjustments are not applied). It is an estimate under the
    model's assumptions and supports professional judgment about a
    selection procedure.

    Parameters
    ----------
    n_selected : float
        Number of people selected, greater than 0.
    tenure : float
        Average time the selected stay, in the units SD_y is per (e.g. years), greater than 0.
    validity : float
        Operational validity among applicants, between −1 and 1.
    sd_y : float
        Standard deviation of performance in money per person per unit of time, greater than 0.
    selection_ratio : float
        Proportion of applicants selected, strictly between 0 and 1.
    cost_per_applicant : float
        Cost of assessing one applicant, at least 0.

    Examples
    --------
    10 hired, 2 years, validity .40, SD_y 12,000 a year, 1 in 5 selected,
    assessment 150 per applicant:

    >>> round(bcg_utility(10, 2, 0.40, 12000, 0.20, 150), 2)
    126881.72
    """
    v.positive("n_selected", n_selected)
    v.positive("tenure", tenure)
    _validity(validity)
    v.positive("sd_y", sd_y)
    _open_proportion("selection_ratio", selection_ratio)
    v.at_least("cost_per_applicant", cost_per_applicant, 0.0)
    gain = n_selected * tenure * validity * sd_y * mean_selected_z(selection_ratio)
    cost = n_selected * cost_per_applicant / selection_ratio
    return gain - cost
