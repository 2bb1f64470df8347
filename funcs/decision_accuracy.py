"""Measurement error and decision accuracy at a cut score.

==============================  =============================================  ==============================================
spreadsheet name                Python function                                what it gives
==============================  =============================================  ==============================================
``CSEM_BINOMIAL``               :func:`binomial_csem`                          Lord's √(x(n − x)/(n − 1)), Keats-adjusted
``DECISION_CONSISTENCY``        :func:`decision_consistency`                   same pass/fail on two sittings, normal model
``CLASSIFICATION_ACCURACY``     :func:`classification_accuracy`                observed against true pass/fail, normal model
``DECISION_CONSISTENCY_BB``     :func:`decision_consistency_beta_binomial`     Huynh's beta-binomial agreement and kappa
``CLASSIFICATION_ACCURACY_BB``  :func:`classification_accuracy_beta_binomial`  observed against true pass/fail, beta-binomial
==============================  =============================================  ==============================================

Two models, for two purposes
----------------------------
* The **normal model** (Peng & Subkoviak, 1980) treats scores on two
  parallel sittings as bivariate normal with the observed mean and SD and
  correlation equal to the reliability; true scores have the observed mean
  and SD × √reliability and correlate √reliability with observed scores.
  It needs only the mean, SD, reliability and cut, so it serves as a
  **quick screen**. Bivariate normal probabilities are computed exactly
  through Owen's T function (Owen, 1956), not by numerical integration.
* The **beta-binomial model** (Keats & Lord, 1962; Huynh, 1976) suits
  number-correct scores on n right/wrong items: each person's true
  proportion correct θ follows a beta distribution whose two parameters
  come from the mean and variance through KR-21, and the number correct on
  a sitting is binomial(n, θ) given θ. It is the **headline** method for a
  test scored by counting right answers.

Conventions
-----------
* A candidate passes at a score **at or above** the cut.
* Normal model: with ``continuity`` TRUE (the default) whole-number scores
  pass at cut − 0.5 (the continuity rule of Subkoviak 1988 and Peng &
  Subkoviak 1980: a score of cut − 1 fails, a score of cut passes); with
  FALSE the cut is used as it is (for scores on a continuous scale). The
  true-score scale uses the same cut.
* Beta-binomial model: ``sd`` is the standard deviation of the number-correct
  scores with denominator n (as the project's ``KR21``); the cut is a whole
  number of items; a true score passes when θ ≥ cut / n_items, the observed
  cut expressed as a proportion correct (Hanson & Brennan, 1990).
"""

from __future__ import annotations

from typing import Literal

import numpy as np

from . import _validate as v
from ._lazy import lazy_module
from .errors import ArgumentTypeError, DomainError, ZeroVarianceError
from .registry import spreadsheet

special = lazy_module("scipy.special")

__all__ = [
    "binomial_csem",
    "decision_consistency",
    "classification_accuracy",
    "decision_consistency_beta_binomial",
    "classification_accuracy_beta_binomial",
    "beta_binomial_parameters",
    "bivariate_normal_cdf",
    "MAX_ITEMS",
]

#: Largest number of items the beta-binomial functions take: the joint distribution of two sittings has
#: (n + 1)² cells, so the work grows with the square of the length (no hiring test comes near this).
MAX_ITEMS = 2000

_PENG = ("Peng, C.-Y. J. & Subkoviak, M. J. (1980). A note on Huynh's normal approximation procedure for "
         "estimating criterion-referenced reliability. Journal of Educational Measurement 17, 359-368; "
         "Subkoviak, M. J. (1988). A practitioner's guide to computation and interpretation of reliability "
         "indices for mastery tests. Journal of Educational Measurement 25, 47-55; Owen, D. B. (1956). Tables "
         "for computing bivariate normal probabilities. Annals of Mathematical Statistics 27, 1075-1090.")
_HUYNH = ("Huynh, H. (1976). On the reliability of decisions in domain-referenced testing. Journal of "
          "Educational Measurement 13, 253-264; Keats, J. A. & Lord, F. M. (1962). A theoretical distribution "
          "for mental test scores. Psychometrika 27, 59-72.")
_ACCURACY_BB = ("Hanson, B. A. & Brennan, R. L. (1990). An investigation of classification consistency indexes "
                "estimated under alternative strong true score models. Journal of Educational Measurement 27, "
                "345-359; Livingston, S. A. & Lewis, C. (1995). Estimating the consistency and accuracy of "
                "classifications based on test scores. Journal of Educational Measurement 32, 179-197; "
                + _HUYNH)


# ---------------------------------------------------------------- conditional SEM

@spreadsheet("CSEM_BINOMIAL", returns="nonnegative number", elementwise=["score", "n_items"],
             reference="Lord, F. M. (1955). Estimating test reliability. Educational and Psychological Measurement "
                       "15, 325-336; Lord, F. M. (1957). Do tests of the same length have the same standard errors "
                       "of measurement? Educational and Psychological Measurement 17, 510-521; Keats, J. A. (1957). "
                       "Estimation of error variances of test scores. Psychometrika 22, 29-41.")
def binomial_csem(score: float, n_items: int, *, reliability: float = None, kr21: float = None) -> float:
    """Conditional standard error of measurement at one number-correct score (Lord's binomial model).

    CSEM(x) = √( x(n − x) / (n − 1) ), with x the number-correct score and n
    the number of items (Lord, 1955). Keats' (1957) adjustment, when both
    ``reliability`` and ``kr21`` are given, scales it so that its average
    over the group matches the SEM of the reliability used:

    CSEM*(x) = CSEM(x) · √( (1 − reliability) / (1 − KR-21) ).

    Parameters
    ----------
    score : float
        Number-correct score (or a cut score) from 0 to n_items; it need not
        be whole (an Angoff cut such as 27.4 is allowed).
    n_items : int
        Number of right/wrong items, at least 2.
    reliability : float, optional
        Reliability of the scores (KR-20 or alpha), between 0 and 1; leave out
        (with kr21) for Lord's unadjusted CSEM.
    kr21 : float, optional
        KR-21 of the same scores, at least 0 and less than 1; given together
        with reliability.

    Notes
    -----
    The binomial model treats the items as a random sample from a domain of
    items, so the CSEM is largest at n/2 and 0 at 0 and n. Averaged over a
    group, the squared CSEM equals the squared SEM implied by KR-21 (Lord,
    1955); Keats' factor makes that average the squared SEM implied by the
    reliability given instead. Giving only one of reliability and kr21 is
    refused.

    Examples
    --------
    A score of 30 on 40 items: √(30 · 10 / 39).

    >>> round(binomial_csem(30, 40), 6)
    2.773501
    >>> round(binomial_csem(30, 40, reliability=0.9, kr21=0.85), 6)
    2.264554
    """
    v.at_least("n_items", n_items, 2)
    n = np.asarray(n_items, dtype=float)
    x = np.asarray(score, dtype=float)
    bad = (x < 0) | (x > n)
    if bad.any():
        raise DomainError(f"score must be between 0 and n_items ({v.show(np.broadcast_to(n, bad.shape)[bad].flat[0])}), "
                          f"got {v.show(np.broadcast_to(x, bad.shape)[bad].flat[0])}", argument="score")
    csem = np.sqrt(x * (n - x) / (n - 1.0))
    if reliability is None and kr21 is None:
        return csem
    for name, given, other in (("reliability", reliability, kr21), ("kr21", kr21, reliability)):
        if given is None:
            raise ArgumentTypeError(
                f"{name} is blank; Keats' adjustment needs both reliability and kr21 (leave both out for "
                f"Lord's unadjusted CSEM)", argument=name)
    v.reliability("reliability", reliability)
    v.between("kr21", kr21, 0.0, 1.0, high_open=True)
    return csem * np.sqrt((1.0 - reliability) / (1.0 - kr21))


# ---------------------------------------------------------------- normal model

def bivariate_normal_cdf(h, k, rho):
    """P(Z₁ < h, Z₂ < k) for standard normals with correlation rho, through Owen's T function.

    Φ₂(h, k; ρ) = ½Φ(h) + ½Φ(k) − T(h, aₕ) − T(k, aₖ) − β, with
    aₕ = (k − ρh)/(h√(1 − ρ²)), aₖ = (h − ρk)/(k√(1 − ρ²)), and β = ½ when
    hk < 0 or (hk = 0 and h + k < 0), else 0 (Owen, 1956, eq. 3.1). For
    −1 < ρ < 1; h or k equal to 0 is taken as the limit.

    >>> round(float(bivariate_normal_cdf(0.0, 0.0, 0.5)), 12)  # ¼ + arcsin(½)/(2π) = 1/3
    0.333333333333
    """
    h, k, rho = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in (h, k, rho)))
    s = np.sqrt((1.0 - rho) * (1.0 + rho))
    with np.errstate(divide="ignore", invalid="ignore"):
        a_h = np.where(h == 0.0, np.where(k - rho * h >= 0, np.inf, -np.inf), (k - rho * h) / (h * s))
        a_k = np.where(k == 0.0, np.where(h - rho * k >= 0, np.inf, -np.inf), (h - rho * k) / (k * s))
    # T(0, ±∞) = ±¼; both arguments zero is the orthant case ¼ + arcsin(ρ)/(2π)
    t_h = np.where(np.isinf(a_h), np.sign(a_h) * special.ndtr(-np.abs(h)) / 2.0, special.owens_t(h, np.nan_to_num(a_h)))
    t_k = np.where(np.isinf(a_k), np.sign(a_k) * special.ndtr(-np.abs(k)) / 2.0, special.owens_t(k, np.nan_to_num(a_k)))
    beta = np.where((h * k < 0) | ((h * k == 0) & (h + k < 0)), 0.5, 0.0)
    out = 0.5 * special.ndtr(h) + 0.5 * special.ndtr(k) - t_h - t_k - beta
    both_zero = (h == 0.0) & (k == 0.0)
    out = np.where(both_zero, 0.25 + np.arcsin(rho) / (2.0 * np.pi), out)
    return out if out.ndim else float(out)


def _normal_inputs(mean, sd, reliability, cut, continuity: bool):
    v.positive("sd", sd)
    return (np.asarray(cut, dtype=float) - (0.5 if continuity else 0.0) - mean) / sd


@spreadsheet("DECISION_CONSISTENCY", returns="coefficient", elementwise=True, reference=_PENG)
def decision_consistency(mean: float, sd: float, reliability: float, cut: float, *,
                         part: Literal["agreement", "kappa"] = "agreement", continuity: bool = True) -> float:
    """Decision consistency at a cut under the normal model: the share classified alike on two sittings, or its kappa.

    Scores X₁, X₂ on two parallel sittings are bivariate normal with mean μ,
    SD σ and correlation ρ (the reliability); with h = (c − μ)/σ and c the
    cut (cut − 0.5 under the continuity rule),

    p₀ = P(both pass) + P(both fail) = 1 − 4·T(h, a),  a = √((1 − ρ)/(1 + ρ)),
    p_c = Φ(h)² + Φ(−h)²,  kappa = (p₀ − p_c)/(1 − p_c) = 1 − 2·T(h, a)/(Φ(h)Φ(−h)),

    T being Owen's T function (P(both fail) = Φ₂(h, h; ρ) = Φ(h) − 2T(h, a)).

    Parameters
    ----------
    mean : float
        Mean observed score.
    sd : float
        Standard deviation of observed scores, greater than 0.
    reliability : float
        Reliability of the scores (the correlation between sittings), between 0 and 1.
    cut : float
        The cut score: a candidate passes at or above it.
    part : {"agreement", "kappa"}, optional
        "agreement" (default), the proportion classified the same on both
        sittings; or "kappa", that agreement corrected for chance.
    continuity : bool, optional
        TRUE (default): whole-number scores, passing at cut − 0.5; FALSE: the cut as given.

    Notes
    -----
    A quick screen (Peng & Subkoviak, 1980): number-correct scores are
    discrete and bounded, so prefer ``DECISION_CONSISTENCY_BB`` for them.
    Kappa is undefined (``#DIV/0!``) when the model puts practically everyone
    on one side of the cut.

    Examples
    --------
    A cut at the mean (continuity off) with reliability 0.5: p₀ = ½ + arcsin(ρ)/π = 2/3, kappa = 1/3.

    >>> round(decision_consistency(50, 10, 0.5, 50, continuity=False), 12)
    0.666666666667
    >>> round(decision_consistency(50, 10, 0.5, 50, part="kappa", continuity=False), 12)
    0.333333333333
    """
    v.reliability("reliability", reliability)
    h = _normal_inputs(mean, sd, reliability, cut, continuity)
    rho = np.asarray(reliability, dtype=float)
    t = special.owens_t(h, np.sqrt((1.0 - rho) / (1.0 + rho)))
    if part == "agreement":
        return 1.0 - 4.0 * t
    spread = special.ndtr(h) * special.ndtr(-h)  # (1 - p_c) / 2
    if (np.asarray(spread) <= 0).any():
        raise ZeroVarianceError("kappa is undefined: the model puts everyone on one side of the cut "
                                "(cut far from the mean)", argument="cut")
    return 1.0 - 2.0 * t / spread


@spreadsheet("CLASSIFICATION_ACCURACY", returns="proportion", elementwise=True, reference=_PENG)
def classification_accuracy(mean: float, sd: float, reliability: float, cut: float, *,
                            part: Literal["accuracy", "false_pass", "false_fail"] = "accuracy",
                            continuity: bool = True) -> float:
    """Classification accuracy at a cut under the normal model: observed against true pass/fail.

    Observed scores X are normal with mean μ and SD σ; true scores T normal
    with mean μ and SD σ√ρ, correlating √ρ with X (ρ the reliability). The
    same cut c (cut − 0.5 under the continuity rule) applies to both. With
    h = (c − μ)/σ, k = h/√ρ and b = √((1 − ρ)/ρ):

    accuracy = 1 − 2·T(h, b),
    false_pass = P(X ≥ c, T < c) = ½(Φ(k) − Φ(h)) + T(h, b),
    false_fail = P(X < c, T ≥ c) = ½(Φ(h) − Φ(k)) + T(h, b),

    from Φ₂(h, k; √ρ) = ½Φ(h) + ½Φ(k) − T(h, b) (Owen, 1956).

    Parameters
    ----------
    mean : float
        Mean observed score.
    sd : float
        Standard deviation of observed scores, greater than 0.
    reliability : float
        Reliability of the scores, greater than 0 and at most 1.
    cut : float
        The cut score: a candidate passes at or above it.
    part : {"accuracy", "false_pass", "false_fail"}, optional
        "accuracy" (default), the proportion whose observed and true
        classifications agree; "false_pass", the proportion who pass but whose
        true score is below the cut; "false_fail", the proportion who fail
        but whose true score is at or above it.
    continuity : bool, optional
        TRUE (default): whole-number scores, passing at cut − 0.5; FALSE: the cut as given.

    Notes
    -----
    The three parts add up: accuracy + false_pass + false_fail = 1. A quick
    screen; prefer ``CLASSIFICATION_ACCURACY_BB`` for number-correct scores.

    Examples
    --------
    A cut at the mean with reliability 0.5: h = 0, b = 1, accuracy = 1 − 2·T(0, 1) = 1 − arctan(1)/π = 0.75.

    >>> round(classification_accuracy(50, 10, 0.5, 50, continuity=False), 12)
    0.75
    """
    v.reliability("reliability", reliability, allow_zero=False)
    h = _normal_inputs(mean, sd, reliability, cut, continuity)
    rho = np.asarray(reliability, dtype=float)
    t = special.owens_t(h, np.sqrt((1.0 - rho) / rho))
    if part == "accuracy":
        return 1.0 - 2.0 * t
    k = h / np.sqrt(rho)
    # Φ(k) − Φ(h) written with the upper tail where h > 0, so that far-off cuts keep their digits
    gap = np.where(h > 0, special.ndtr(-h) - special.ndtr(-k), special.ndtr(k) - special.ndtr(h))
    return (0.5 * gap if part == "false_pass" else -0.5 * gap) + t


# ---------------------------------------------------------------- beta-binomial model

def beta_binomial_parameters(mean, sd, n_items: int) -> tuple[float, float, float]:
    """The beta distribution of true proportion correct from the mean, SD and length: (a, b, KR-21).

    KR-21 = n/(n − 1) · (1 − M(n − M)/(n s²)), a = M(1/KR-21 − 1),
    b = (n − M)(1/KR-21 − 1) (Keats & Lord, 1962; Huynh, 1976), with M the
    mean and s² the variance (denominator n) of the number-correct scores.
    Refuses inputs for which the parameters do not exist (KR-21 ≤ 0, or a
    variance as large as M(n − M)).

    >>> [round(x, 6) for x in beta_binomial_parameters(28, 6, 40)]
    [7.608696, 3.26087, 0.786325]
    """
    v.between("n_items", n_items, 2, MAX_ITEMS)
    n = float(n_items)
    v.between("mean", mean, 0.0, n, low_open=True, high_open=True)
    v.positive("sd", sd)
    ceiling = mean * (n - mean)
    if not sd < np.sqrt(ceiling):  # compared before squaring: a huge sd must not overflow
        raise DomainError(f"sd must be less than √(mean·(n_items − mean)) = {v.show(np.sqrt(ceiling))} for scores "
                          f"from 0 to n_items, got {v.show(sd)}", argument="sd")
    variance = float(sd) ** 2
    if not variance > 0:
        raise DomainError(f"sd is too small for the beta-binomial model, got {v.show(sd)}", argument="sd")
    kr21 = n / (n - 1.0) * (1.0 - ceiling / (n * variance))
    if not kr21 > 0:
        raise DomainError(f"sd is too small for the beta-binomial model: KR-21 from these figures is "
                          f"{v.show(kr21)}, and it must be greater than 0", argument="sd")
    excess = 1.0 / kr21 - 1.0
    if not excess > 0:  # sd within rounding of its ceiling: KR-21 of 1, no beta distribution
        raise DomainError(f"sd must be less than √(mean·(n_items − mean)) = {v.show(np.sqrt(ceiling))}, got "
                          f"{v.show(sd)}", argument="sd")
    return mean * excess, (n - mean) * excess, kr21


def _cut_items(cut: int, n_items: int) -> None:
    v.between("cut", cut, 1, n_items)


def _marginal(n: int, a: float, b: float) -> np.ndarray:
    """P(X = x), x = 0..n, for the beta-binomial(n, a, b) distribution (on the log scale until the end)."""
    x = np.arange(n + 1, dtype=float)
    log_choose = special.gammaln(n + 1.0) - special.gammaln(x + 1.0) - special.gammaln(n - x + 1.0)
    return np.exp(log_choose + special.betaln(a + x, b + n - x) - special.betaln(a, b))


@spreadsheet("DECISION_CONSISTENCY_BB", returns="coefficient", reference=_HUYNH)
def decision_consistency_beta_binomial(mean: float, sd: float, n_items: int, cut: int, *,
                                       part: Literal["agreement", "kappa"] = "agreement") -> float:
    """Decision consistency at a cut under Huynh's beta-binomial model: agreement of two sittings, or its kappa.

    True proportion correct θ ~ beta(a, b) with a, b from the mean, SD and
    KR-21 (see :func:`beta_binomial_parameters`); the number correct on each
    of two sittings is binomial(n, θ) given θ, so the pair follows Huynh's
    (1976) bivariate beta-binomial distribution

    f(x, y) = C(n, x) C(n, y) B(a + x + y, b + 2n − x − y) / B(a, b).

    p₀ = Σ f(x, y) over pairs on the same side of the cut c (both ≥ c or both
    < c); p_c = P(X ≥ c)² + P(X < c)² from the beta-binomial marginal; kappa
    = (p₀ − p_c)/(1 − p_c).

    Parameters
    ----------
    mean : float
        Mean number-correct score, greater than 0 and less than n_items.
    sd : float
        Standard deviation of the number-correct scores (denominator n, as a
        spreadsheet's STDEV.P), greater than 0.
    n_items : int
        Number of right/wrong items, from 2 to 2000.
    cut : int
        The cut: a whole number of items from 1 to n_items; a candidate passes at or above it.
    part : {"agreement", "kappa"}, optional
        "agreement" (default), the proportion classified the same on two
        sittings; or "kappa", that agreement corrected for chance.

    Notes
    -----
    The moment (KR-21) estimates are Huynh's (1976); they exist only when
    KR-21 > 0. The model assumes the items are equally difficult on average
    for each person (a binomial error model); with items of very unequal
    difficulty KR-21 understates reliability and the indices are somewhat
    low (Huynh, 1976). Kappa is undefined (``#DIV/0!``) when the model puts
    everyone on one side of the cut.

    Examples
    --------
    A 40-item test, mean 28, SD 6, cut 30:

    >>> round(decision_consistency_beta_binomial(28, 6, 40, 30), 6)
    0.793502
    >>> round(decision_consistency_beta_binomial(28, 6, 40, 30, part="kappa"), 6)
    0.581177
    """
    a, b, _ = beta_binomial_parameters(mean, sd, n_items)
    _cut_items(cut, n_items)
    n, c = int(n_items), int(cut)
    x = np.arange(n + 1, dtype=float)
    log_choose = special.gammaln(n + 1.0) - special.gammaln(x + 1.0) - special.gammaln(n - x + 1.0)
    same = 0.0
    for start in range(0, n + 1, 256):  # rows of the (n + 1)² table in blocks, to bound memory
        rows = x[start:start + 256, None]
        log_f = (log_choose[start:start + 256, None] + log_choose[None, :]
                 + special.betaln(a + rows + x, b + 2.0 * n - rows - x) - special.betaln(a, b))
        f = np.exp(log_f)
        passes = rows[:, 0] >= c
        same += f[passes][:, c:].sum() + f[~passes][:, :c].sum()
    p0 = min(same, 1.0)
    if part == "agreement":
        return p0
    marginal = _marginal(n, a, b)
    fail = marginal[:c].sum()
    pass_ = marginal[c:].sum()
    chance = fail * fail + pass_ * pass_
    if not 1.0 - chance > 0:
        raise ZeroVarianceError("kappa is undefined: the model puts everyone on one side of the cut",
                                argument="cut")
    return (p0 - chance) / (1.0 - chance)


@spreadsheet("CLASSIFICATION_ACCURACY_BB", returns="proportion", reference=_ACCURACY_BB)
def classification_accuracy_beta_binomial(mean: float, sd: float, n_items: int, cut: int, *,
                                          part: Literal["accuracy", "false_pass", "false_fail"] = "accuracy"
                                          ) -> float:
    """Classification accuracy at a cut under the beta-binomial model: observed against true pass/fail.

    True proportion correct θ ~ beta(a, b) (from the mean, SD and KR-21);
    observed number correct X ~ binomial(n, θ). A candidate passes at X ≥ c
    and truly belongs above the cut when θ ≥ τ = c/n. Given X = x, θ is
    beta(a + x, b + n − x), so with Iτ the regularized incomplete beta function

    false_pass = Σ_{x ≥ c} P(X = x) · Iτ(a + x, b + n − x),
    false_fail = Σ_{x < c} P(X = x) · (1 − Iτ(a + x, b + n − x)),
    accuracy = 1 − false_pass − false_fail,

    P(X = x) being the beta-binomial marginal.

    Parameters
    ----------
    mean : float
        Mean number-correct score, greater than 0 and less than n_items.
    sd : float
        Standard deviation of the number-correct scores (denominator n), greater than 0.
    n_items : int
        Number of right/wrong items, from 2 to 2000.
    cut : int
        The cut: a whole number of items from 1 to n_items; a candidate passes at or above it.
    part : {"accuracy", "false_pass", "false_fail"}, optional
        "accuracy" (default); "false_pass", passing with a true score below the
        cut; "false_fail", failing with a true score at or above it.

    Notes
    -----
    This is the two-parameter beta true-score model of Keats & Lord (1962)
    and Huynh (1976) applied to accuracy as in Hanson & Brennan (1990) and
    Livingston & Lewis (1995) (their method with the actual test length and a
    beta on [0, 1]); it is computed exactly, with no numerical integration.
    The true cut τ = c/n is the observed cut as a proportion correct; other
    authors use (c − ½)/n, which counts slightly more false passes.

    Examples
    --------
    >>> round(classification_accuracy_beta_binomial(28, 6, 40, 30), 6)
    0.847622
    """
    a, b, _ = beta_binomial_parameters(mean, sd, n_items)
    _cut_items(cut, n_items)
    n, c = int(n_items), int(cut)
    x = np.arange(n + 1, dtype=float)
    marginal = _marginal(n, a, b)
    tau = c / n
    below = special.betainc(a + x, b + n - x, tau)   # P(θ < τ | X = x)
    above = special.betaincc(a + x, b + n - x, tau)  # its complement, without cancellation
    false_pass = float(np.sum(marginal[c:] * below[c:]))
    false_fail = float(np.sum(marginal[:c] * above[:c]))
    if part == "false_pass":
        return false_pass
    if part == "false_fail":
        return false_fail
    return float(np.sum(marginal[c:] * above[c:]) + np.sum(marginal[:c] * below[:c]))
