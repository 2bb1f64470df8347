"""Adverse impact, one comparison: the impact ratio's interval, the odds ratio, the flip count, small numbers.

========================  ==========================================  ===========================================
spreadsheet name          Python function                              what it gives
========================  ==========================================  ===========================================
``IMPACT_RATIO_CI``       :func:`impact_ratio_ci`                      impact ratio or a limit (log method)
``IMPACT_ODDS_RATIO``     :func:`impact_odds_ratio`                    focal odds of selection / reference odds
``IMPACT_FLIP``           :func:`impact_flip`                          focal selections that flip Fisher's verdict
``IMPACT_SMALL_NUMBERS``  :func:`impact_small_numbers`                 TRUE when a small-numbers caution applies
(Python only)             :func:`impact_ratio_result`                  :class:`ImpactRatio`: estimate, SE, interval
(Python only)             :func:`small_numbers`                        :class:`SmallNumbers`: which cautions apply
(Python only)             :func:`passing_counts`                       :class:`PassingCounts`: per cut and group
========================  ==========================================  ===========================================

**Caution.** Adverse impact figures are statistical indicators, not legal
findings; defer to the employment law that applies where you hire and to
qualified professional advice.

Conventions
-----------
* The four counts are separate named arguments, as in :mod:`.impact`:
  ``focal_selected``, ``focal_applicants`` (the group under examination) and
  ``ref_selected``, ``ref_applicants`` (the group it is compared with).
  Whole numbers, at least 0, selected at most applicants (``#NUM!``);
  applicants greater than 0 (``#DIV/0!``).
* Intervals are two-sided, at ``confidence`` (default 0.95), strictly
  between 0 and 1.
* Zero cells: no count is ever adjusted (no 0.5 added). Where a method's
  formula divides by a zero count the function says so instead (see each
  function's Notes); an interval that is unbounded above has no finite upper
  limit (``#NUM!`` in a sheet, ``inf`` from the Python result objects).
"""

from __future__ import annotations

import dataclasses
import math
from typing import Literal

import numpy as np

from . import _validate as v
from .errors import DomainError, ZeroVarianceError
# The four-count checks and exact-integer helpers are shared with the impact module (one set of messages).
from .impact import (CAUTION, _as_float, _exact, _fisher_two_sided, _four_counts, _reference_rate_not_zero,
                     group_key, impact_fisher, tally_groups)
from .registry import spreadsheet
from .results import ConfidenceInterval
from .scores import two_sided_z

__all__ = [
    "impact_ratio_ci",
    "impact_ratio_result",
    "impact_ratio_limits",
    "ImpactRatio",
    "impact_odds_ratio",
    "impact_flip",
    "impact_small_numbers",
    "small_numbers",
    "SmallNumbers",
    "SMALL_GROUP_APPLICANTS",
    "MIN_EXPECTED_COUNT",
    "passing_counts",
    "PassingCounts",
    "CAUTION",
]

_COUNTS = ["focal_selected", "focal_applicants", "ref_selected", "ref_applicants"]

_MORRIS_LOBSENZ = ("Morris, S. B. & Lobsenz, R. E. (2000). Significance tests and confidence intervals for the "
                   "adverse impact ratio. Personnel Psychology 53, 89-111; Katz, D., Baptista, J., Azen, S. P. & "
                   "Pike, M. C. (1978). Obtaining confidence intervals for the risk ratio in cohort studies. "
                   "Biometrics 34, 469-474.")


# ---------------------------------------------------------------- the impact ratio's interval

def _log_ratio_se(fs, fa, rs, ra):
    """√(1/fs − 1/fa + 1/rs − 1/ra), written as (fa − fs)/(fs·fa) + ...: no cancellation when fs is near fa."""
    fs, fa, rs, ra = (_as_float(x) for x in (fs, fa, rs, ra))
    return np.sqrt((fa - fs) / (fs * fa) + (ra - rs) / (rs * ra))


def _ratio(fs, fa, rs, ra):
    fs, fa, rs, ra = (_exact(x) for x in (fs, fa, rs, ra))
    ratio = (fs * ra) / (fa * rs)  # one correctly rounded division of exact integers, as IMPACT_RATIO
    return ratio.astype(float) if isinstance(ratio, np.ndarray) else ratio


def impact_ratio_limits(focal_selected, focal_applicants, ref_selected, ref_applicants, confidence=0.95):
    """Both log-method limits of the impact ratio for arrays of counts (the per-cut path), as ``(low, high)``.

    The same formula and checks as :func:`impact_ratio_ci`, except that a zero
    ``focal_selected`` gives low 0 and high ``inf`` instead of an error, so a
    whole column of cuts computes at once. A row where everybody in both groups
    is selected (the lowest cut) is refused as there: leave it out.

    Examples
    --------
    >>> low, high = impact_ratio_limits(np.array([12, 0]), 40, 48, 80)
    >>> np.round(low, 6).tolist(), np.round(high, 6).tolist()
    ([0.301433, 0.0], [0.829372, inf])
    """
    fs, fa, rs, ra = _four_counts(*(np.asarray(x, dtype=float) for x in (
        focal_selected, focal_applicants, ref_selected, ref_applicants)))
    _reference_rate_not_zero(rs)
    z = two_sided_z(confidence)
    _refuse_zero_width(fs, fa, rs, ra)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = fs * ra / (fa * rs)
        half = z * _log_ratio_se(np.where(fs == 0, 1.0, fs), fa, rs, ra)
        low = np.where(fs == 0, 0.0, ratio * np.exp(-half))
        high = np.where(fs == 0, np.inf, ratio * np.exp(half))
    return low, high


def _refuse_zero_width(fs, fa, rs, ra):
    if ((np.asarray(fs) == np.asarray(fa)) & (np.asarray(rs) == np.asarray(ra))).any():
        raise ZeroVarianceError(
            "every applicant in both groups was selected (focal_selected = focal_applicants and ref_selected = "
            "ref_applicants): the log method's standard error is 0 and it gives no interval",
            argument="focal_selected")


@dataclasses.dataclass(frozen=True)
class ImpactRatio:
    """An impact ratio with its exact test and what its log-method interval needs.

    ``statistic`` is the focal rate over the reference rate; ``pvalue`` Fisher's
    exact two-sided test of equal selection rates (as ``IMPACT_FISHER``);
    ``log_standard_error`` the standard error of the ratio's natural log
    (``inf`` when ``focal_selected`` is 0, where the log is −∞).
    """

    statistic: float
    pvalue: float
    log_standard_error: float
    focal_selected: int
    focal_applicants: int
    ref_selected: int
    ref_applicants: int

    def confidence_interval(self, confidence_level: float = 0.95) -> ConfidenceInterval:
        """Two-sided log-method interval: ratio · exp(∓ z · log_standard_error); (0, inf) when the ratio is 0."""
        low, high = impact_ratio_limits(self.focal_selected, self.focal_applicants, self.ref_selected,
                                        self.ref_applicants, confidence_level)
        return ConfidenceInterval(float(low), float(high))


def impact_ratio_result(focal_selected: int, focal_applicants: int, ref_selected: int,
                        ref_applicants: int) -> ImpactRatio:
    """The impact ratio with Fisher's exact test and its log-method confidence interval.

    IR = (focal_selected/focal_applicants)/(ref_selected/ref_applicants), as
    ``IMPACT_RATIO``; the p value is ``IMPACT_FISHER``'s; the interval
    (:meth:`ImpactRatio.confidence_interval`) is ``IMPACT_RATIO_CI``'s log
    method (Morris & Lobsenz, 2000; Katz et al., 1978), with (0, inf) when no
    focal applicant was selected. Statistical indicators to support
    professional judgment, not legal findings.

    Examples
    --------
    >>> r = impact_ratio_result(12, 40, 48, 80)
    >>> r.statistic, round(r.log_standard_error, 6)
    (0.5, 0.258199)
    >>> ci = r.confidence_interval(0.95)
    >>> round(ci.low, 6), round(ci.high, 6)
    (0.301433, 0.829372)
    """
    fs, fa, rs, ra = _four_counts(focal_selected, focal_applicants, ref_selected, ref_applicants)
    _reference_rate_not_zero(rs)
    _refuse_zero_width(fs, fa, rs, ra)
    se = math.inf if fs == 0 else float(_log_ratio_se(fs, fa, rs, ra))
    pvalue = impact_fisher(int(fs), int(fa), int(rs), int(ra))
    return ImpactRatio(_ratio(fs, fa, rs, ra), pvalue, se, int(fs), int(fa), int(rs), int(ra))


@spreadsheet("IMPACT_RATIO_CI", returns="nonnegative number", elementwise=_COUNTS + ["confidence"],
             reference=_MORRIS_LOBSENZ)
def impact_ratio_ci(focal_selected: int, focal_applicants: int, ref_selected: int, ref_applicants: int, *,
                    part: Literal["estimate", "lower", "upper"], confidence: float = 0.95) -> float:
    """Impact ratio or one limit of its two-sided confidence interval by the log method.

    ln(limit) = ln(IR) ∓ z · √(1/focal_selected − 1/focal_applicants + 1/ref_selected − 1/ref_applicants),
    IR = (focal_selected / focal_applicants) / (ref_selected / ref_applicants),
    z the two-sided normal quantile of ``confidence``

    The interval of Morris & Lobsenz (2000) for the adverse impact ratio, the
    log (Katz et al., 1978) interval for a ratio of two independent
    proportions: the same numbers as ``scipy.stats.contingency.relative_risk``
    and statsmodels' ``confint_proportions_2indep(compare="ratio",
    method="log")``. A statistical indicator, not a legal finding; defer to
    the employment law that applies where you hire and to qualified
    professional advice.

    Parameters
    ----------
    focal_selected : int
        Focal group applicants selected; a whole number from 0 to ``focal_applicants``.
    focal_applicants : int
        Focal group applicants; a whole number greater than 0.
    ref_selected : int
        Reference group applicants selected; a whole number from 1 to ``ref_applicants``.
    ref_applicants : int
        Reference group applicants; a whole number greater than 0.
    part : {"estimate", "lower", "upper"}
        The impact ratio itself (the same number as ``IMPACT_RATIO``), or the lower or upper limit.
    confidence : float, optional
        Two-sided confidence level, strictly between 0 and 1; default 0.95.

    Notes
    -----
    Zero cells, with no 0.5 added anywhere (the convention of scipy and R's
    epitools): ``ref_selected`` 0 leaves the ratio undefined (``#DIV/0!``, as
    ``IMPACT_RATIO``); ``focal_selected`` 0 gives a ratio of 0, whose lower
    limit is 0 and which has no finite upper limit (``#NUM!``, naming
    ``focal_selected``); everybody in both groups selected gives a standard
    error of 0 and a zero-width interval, which is refused (``#DIV/0!``).
    A whole group selected in one group only is fine. The interval is
    asymptotic: with few selections (see ``IMPACT_SMALL_NUMBERS``) its
    coverage is only approximate.

    Examples
    --------
    12 of 40 against 48 of 80: ratio 0.5, 95% interval about 0.30 to 0.83:

    >>> round(impact_ratio_ci(12, 40, 48, 80, part="lower"), 6)
    0.301433
    >>> round(impact_ratio_ci(12, 40, 48, 80, part="upper", confidence=0.9), 6)
    0.764565
    """
    fs, fa, rs, ra = _four_counts(focal_selected, focal_applicants, ref_selected, ref_applicants)
    _reference_rate_not_zero(rs)
    v.confidence("confidence", confidence)
    if part == "estimate":
        return _ratio(fs, fa, rs, ra)
    if part == "upper" and (np.asarray(fs) == 0).any():
        raise DomainError("focal_selected is 0: the impact ratio is 0 and its log-method interval has no finite "
                          "upper limit", argument="focal_selected")
    low, high = impact_ratio_limits(fs, fa, rs, ra, confidence)
    return low if part == "lower" else high


# ---------------------------------------------------------------- odds ratio

@spreadsheet("IMPACT_ODDS_RATIO", returns="nonnegative number", elementwise=_COUNTS,
             reference="Agresti, A. (2013). Categorical Data Analysis (3rd ed.), sec. 2.4 (the odds ratio); "
                       "Morris, S. B. & Lobsenz, R. E. (2000). Personnel Psychology 53, 89-111.")
def impact_odds_ratio(focal_selected: int, focal_applicants: int, ref_selected: int, ref_applicants: int) -> float:
    """Odds ratio of selection: the focal group's odds of being selected over the reference group's.

    OR = (focal_selected / focal_rejected) / (ref_selected / ref_rejected),
    rejected = applicants − selected; computed as the exact integer quotient
    focal_selected · ref_rejected / (focal_rejected · ref_selected)

    Below 1 the focal group's odds of selection are lower. The odds ratio is
    what the Mantel–Haenszel family pools across strata (``POOLED_ODDS_RATIO``).
    A statistical indicator, not a legal finding; defer to the employment law
    that applies where you hire and to qualified professional advice.

    Parameters
    ----------
    focal_selected : int
        Focal group applicants selected; a whole number from 0 to ``focal_applicants`` − 1.
    focal_applicants : int
        Focal group applicants; a whole number greater than 0.
    ref_selected : int
        Reference group applicants selected; a whole number from 1 to ``ref_applicants``.
    ref_applicants : int
        Reference group applicants; a whole number greater than 0.

    Notes
    -----
    Zero cells, with no 0.5 added (the sample odds ratio, so that it agrees
    with the counts shown beside it): every focal applicant selected makes
    the focal odds infinite (``#DIV/0!``, naming ``focal_selected``); nobody
    in the reference group selected makes the reference odds 0 (``#DIV/0!``,
    naming ``ref_selected``). Nobody in the focal group selected, or everybody
    in the reference group, gives 0.

    Examples
    --------
    12 of 40 (odds 12/28) against 48 of 80 (odds 48/32):

    >>> round(impact_odds_ratio(12, 40, 48, 80), 12)
    0.285714285714
    """
    fs, fa, rs, ra = _four_counts(focal_selected, focal_applicants, ref_selected, ref_applicants)
    if (np.asarray(fs) == np.asarray(fa)).any():
        raise ZeroVarianceError("focal_selected equals focal_applicants: every focal applicant was selected, so "
                                "the focal odds of selection are infinite and the odds ratio is undefined",
                                argument="focal_selected")
    if (np.asarray(rs) == 0).any():
        raise ZeroVarianceError("ref_selected is 0: the reference group's odds of selection are 0, so the odds "
                                "ratio is undefined", argument="ref_selected")
    fs, fa, rs, ra = (_exact(x) for x in (fs, fa, rs, ra))
    ratio = (fs * (ra - rs)) / ((fa - fs) * rs)
    return ratio.astype(float) if isinstance(ratio, np.ndarray) else ratio


# ---------------------------------------------------------------- how many selections flip Fisher's verdict

#: Changes tried one at a time before the search gallops (doubling, then halving).
_FLIP_LINEAR_STEPS = 32


def _first_true(predicate, limit: int) -> int | None:
    """Smallest k in 1..limit with predicate(k), or None: one by one up to _FLIP_LINEAR_STEPS, then by doubling
    to a k where it holds and halving back to where it starts (exact when it changes once beyond that)."""
    for k in range(1, min(limit, _FLIP_LINEAR_STEPS) + 1):
        if predicate(k):
            return k
    low = _FLIP_LINEAR_STEPS  # predicate false here
    if limit <= low:
        return None
    high = low
    while True:
        high = min(2 * high, limit)
        if predicate(high):
            break
        if high == limit:
            return None
        low = high
    while high - low > 1:
        mid = (low + high) // 2
        if predicate(mid):
            high = mid
        else:
            low = mid
    return high


def _flip_count(fs: int, fa: int, rs: int, ra: int, alpha: float) -> int:
    """IMPACT_FLIP's search (see its Notes), on validated counts."""
    def significant(a: int) -> bool:
        return _fisher_two_sided(a, fa, a + rs, fa + ra) < alpha

    now = significant(fs)
    step = (1 if fs * ra < rs * fa else -1) if now else -1
    limit = fa - fs if step > 0 else fs

    def flipped(k: int) -> bool:
        return significant(fs + step * k) != now

    if now:
        # Toward the reference rate p rises to about 1 at parity and falls again beyond it: search up to the
        # first count at or past parity (one crossing there), and one by one after it (rarely reached).
        parity = min(limit, -((-abs(rs * fa - fs * ra)) // ra))
        k = _first_true(flipped, parity)
        if k is None:
            k = next((j for j in range(parity + 1, limit + 1) if flipped(j)), None)
    else:
        k = _first_true(flipped, limit)
    if k is None:
        change = "adding" if step > 0 else "removing"
        verdict = "significant" if now else "not significant"
        raise DomainError(f"focal_selected: no number of focal selections flips the verdict: {change} up to "
                          f"{limit} leaves the Fisher test {verdict} at alpha {v.show(alpha)}",
                          argument="focal_selected")
    return k


@spreadsheet("IMPACT_FLIP", returns="positive integer",
             reference="29 CFR 1607.4(D) (1978) (differences based on small numbers); Waisome v. Port Authority "
                       "of New York & New Jersey, 948 F.2d 1370 (2d Cir. 1991) (a significant difference that two "
                       "more selections would remove); Morris, S. B. & Lobsenz, R. E. (2000). Personnel Psychology "
                       "53, 89-111 (the instability of significance tests with small samples).")
def impact_flip(focal_selected: int, focal_applicants: int, ref_selected: int, ref_applicants: int, *,
                alpha: float = 0.05) -> int:
    """How many focal selections would have to change to flip the Fisher exact test's verdict at ``alpha``.

    significant now (p < alpha): the smallest k ≥ 1 such that k more focal
    selections (k fewer when the focal rate is above the reference rate)
    give p ≥ alpha; not significant now: the smallest k ≥ 1 such that k fewer
    focal selections give p < alpha. p is the two-sided Fisher exact p of
    ``IMPACT_FISHER``; the focal applicants and the reference group's counts
    stay as they are.

    A small number says the verdict rests on a few people (the Uniform
    Guidelines' concern with differences "based on small numbers",
    29 CFR 1607.4(D)). A statistical indicator, not a legal finding; defer to
    the employment law that applies where you hire and to qualified
    professional advice.

    Parameters
    ----------
    focal_selected : int
        Focal group applicants selected; a whole number from 0 to ``focal_applicants``.
    focal_applicants : int
        Focal group applicants; a whole number greater than 0.
    ref_selected : int
        Reference group applicants selected; a whole number from 0 to ``ref_applicants``.
    ref_applicants : int
        Reference group applicants; a whole number greater than 0.
    alpha : float, optional
        Significance level, strictly between 0 and 1; default 0.05. Significant means p < alpha.

    Notes
    -----
    The flip rule: when the test is significant the selections move the focal
    rate toward the reference rate (added when the focal rate is lower, the
    adverse-impact case; removed when it is higher); when it is not, focal
    selections are removed (toward a significant deficit of the focal
    group). When no number of changes within the focal group flips the
    verdict (all focal applicants selected, or none left to remove) the result
    is ``#NUM!`` naming ``focal_selected``. Changes are tried one by one up
    to 32, then by doubling and halving, which finds the smallest count when
    the verdict changes once in the range searched (toward the reference
    rate the search stops at the first count past parity, where p is near 1;
    the tests check it against a one-by-one search). The applicants may
    total at most 10⁹, as for ``IMPACT_FISHER``.

    Examples
    --------
    12 of 40 against 48 of 80 (p = 0.0034): how many more focal selections
    make the difference not significant at 0.05?

    >>> impact_flip(12, 40, 48, 80)
    4
    """
    fs, fa, rs, ra = _four_counts(focal_selected, focal_applicants, ref_selected, ref_applicants)
    v.between("alpha", alpha, 0.0, 1.0, low_open=True, high_open=True)
    impact_fisher(fs, fa, rs, ra)  # the exact test's own size check, with its message
    return _flip_count(int(fs), int(fa), int(rs), int(ra), float(alpha))


# ---------------------------------------------------------------- small numbers

#: A group with fewer applicants than this is "small" (common practice: no peer-reviewed threshold was found; the
#: Uniform Guidelines, 29 CFR 1607.4(D), warn about "small numbers" without a figure).
SMALL_GROUP_APPLICANTS = 30

#: The smallest expected count of a 2 x 2 table under which the normal approximation (z, chi-square) is trusted:
#: Cochran, W. G. (1954). Some methods for strengthening the common chi-square tests. Biometrics 10, 417-451;
#: restated by Campbell, I. (2007). Chi-squared and Fisher-Irwin tests of two-by-two tables with small sample
#: recommendations. Statistics in Medicine 26, 3661-3675.
MIN_EXPECTED_COUNT = 5


@dataclasses.dataclass(frozen=True)
class SmallNumbers:
    """Which small-numbers cautions apply to one comparison.

    ``small_focal_group`` / ``small_reference_group``: fewer applicants than the
    threshold; ``min_expected``: the smallest of the four expected counts
    (selected and not selected, per group) if both groups had the pooled
    selection rate; ``few_expected``: that count below its threshold.
    """

    small_focal_group: bool
    small_reference_group: bool
    min_expected: float
    few_expected: bool

    @property
    def any(self) -> bool:
        return self.small_focal_group or self.small_reference_group or self.few_expected


def _expected_minimum(fs, fa, rs, ra):
    fs, fa, rs, ra = (_as_float(x) for x in (fs, fa, rs, ra))
    total, selected = fa + ra, fs + rs
    rejected = total - selected
    return np.minimum(np.minimum(fa, ra) * selected, np.minimum(fa, ra) * rejected) / total


def small_numbers(focal_selected: int, focal_applicants: int, ref_selected: int, ref_applicants: int, *,
                  min_group: int = SMALL_GROUP_APPLICANTS, min_expected: float = MIN_EXPECTED_COUNT) -> SmallNumbers:
    """Which small-numbers cautions apply (see :func:`impact_small_numbers` for the thresholds and sources).

    Examples
    --------
    >>> s = small_numbers(2, 12, 48, 80)
    >>> s.small_focal_group, round(s.min_expected, 4), s.few_expected, s.any
    (True, 5.4783, False, True)
    """
    fs, fa, rs, ra = _four_counts(focal_selected, focal_applicants, ref_selected, ref_applicants)
    v.at_least("min_group", min_group, 0)
    v.at_least("min_expected", min_expected, 0)
    expected = float(_expected_minimum(fs, fa, rs, ra))
    return SmallNumbers(fa < min_group, ra < min_group, expected, expected < min_expected)


@spreadsheet("IMPACT_SMALL_NUMBERS", returns="boolean", elementwise=_COUNTS,
             reference="29 CFR 1607.4(D) (1978) (differences based on small numbers); Cochran, W. G. (1954). Some "
                       "methods for strengthening the common chi-square tests. Biometrics 10, 417-451 (expected "
                       "counts of at least 5).")
def impact_small_numbers(focal_selected: int, focal_applicants: int, ref_selected: int, ref_applicants: int, *,
                         min_group: int = SMALL_GROUP_APPLICANTS,
                         min_expected: float = MIN_EXPECTED_COUNT) -> bool:
    """TRUE when a comparison rests on small numbers: a small group, or few expected selections or rejections.

    flag = focal_applicants < min_group or ref_applicants < min_group or
    min over both groups of (applicants · pooled rate, applicants · (1 − pooled rate)) < min_expected,
    pooled rate = (focal_selected + ref_selected) / (focal_applicants + ref_applicants)

    The Uniform Guidelines (29 CFR 1607.4(D)) say greater differences "may not
    constitute adverse impact where the differences are based on small
    numbers", without a figure. The expected-count threshold 5 is Cochran's
    (1954) rule for the normal (z, chi-square) approximation of a 2 × 2
    table, restated by Campbell (2007, Statistics in Medicine 26, 3661-3675);
    below it rely on the exact test (``IMPACT_FISHER``). The group-size
    threshold 30 is common practice: no peer-reviewed figure was found. A
    statistical indicator, not a legal finding; defer to the employment law
    that applies where you hire and to qualified professional advice.

    Parameters
    ----------
    focal_selected : int
        Focal group applicants selected; a whole number from 0 to ``focal_applicants``.
    focal_applicants : int
        Focal group applicants; a whole number greater than 0.
    ref_selected : int
        Reference group applicants selected; a whole number from 0 to ``ref_applicants``.
    ref_applicants : int
        Reference group applicants; a whole number greater than 0.
    min_group : int, optional
        Fewest applicants a group may have without the caution, at least 0; default 30 (common practice).
    min_expected : float, optional
        Smallest expected count without the caution, at least 0; default 5 (Cochran, 1954).

    Examples
    --------
    2 of 12 against 48 of 80: the focal group has 12 applicants:

    >>> impact_small_numbers(2, 12, 48, 80), impact_small_numbers(20, 120, 48, 80)
    (True, False)
    """
    fs, fa, rs, ra = _four_counts(focal_selected, focal_applicants, ref_selected, ref_applicants)
    v.at_least("min_group", min_group, 0)
    v.at_least("min_expected", min_expected, 0)
    flag = (np.asarray(fa) < min_group) | (np.asarray(ra) < min_group) | (
        _expected_minimum(fs, fa, rs, ra) < min_expected)
    return flag if isinstance(flag, np.ndarray) and flag.ndim else bool(flag)


# ---------------------------------------------------------------- counts at every cut

@dataclasses.dataclass(frozen=True)
class PassingCounts:
    """People at or above each cut, by group: ``passing[i, j]`` for ``cuts[i]`` and ``groups[j]``, out of
    ``applicants[j]``; ``left_out`` counts the rows with a blank score or a blank label."""

    cuts: np.ndarray
    groups: tuple[str, ...]
    applicants: np.ndarray
    passing: np.ndarray
    left_out: int

    def counts(self, focal: str, reference: str) -> tuple[np.ndarray, int, np.ndarray, int]:
        """(focal_selected per cut, focal_applicants, ref_selected per cut, ref_applicants) for two groups."""
        i, j = self.groups.index(focal), self.groups.index(reference)
        return self.passing[:, i], int(self.applicants[i]), self.passing[:, j], int(self.applicants[j])


def passing_counts(scores, groups, *, cuts=None) -> PassingCounts:
    """How many of each group score at or above every cut (the per-cut table, computed with numpy).

    passing[cut, group] = #{people of the group with score ≥ cut}

    Parameters
    ----------
    scores : sequence of float
        One test score per person; ``None`` or ``nan`` for no score.
    groups : sequence
        One group label per person (merged by case and spacing as :func:`.impact.group_key` does; blank for none).
    cuts : sequence of float, optional
        The cuts; default every distinct score, ascending.

    Notes
    -----
    A person with no score or no group is left out (listwise). Selected means
    a score at or above the cut, the study's convention. The counts feed the
    array functions directly, e.g. :func:`impact_ratio_limits`.

    Examples
    --------
    >>> pc = passing_counts([1, 2, 3, 3, 4, None], ["A", "a", "B", "B", "A", "B"])
    >>> pc.cuts.tolist(), pc.groups, pc.applicants.tolist(), pc.passing.tolist(), pc.left_out
    ([1.0, 2.0, 3.0, 4.0], ('A', 'B'), [3, 2], [[3, 2], [2, 2], [1, 2], [1, 0]], 1)
    """
    x = v.numeric_vector("scores", scores)
    labels = list(groups)
    if len(labels) != x.size:
        raise DomainError(f"groups must have one label per score ({x.size}), got {len(labels)}", argument="groups")
    keys = [group_key(label) for label in labels]
    keep = ~np.isnan(x) & np.array([k is not None for k in keys], dtype=bool)
    tally = tally_groups([lab for lab, k in zip(labels, keep) if k])
    names = tally.names
    index = {name: j for j, name in enumerate(names)}
    code = np.array([index[tally.label_of[k]] for k, kept in zip(keys, keep) if kept], dtype=np.int64)
    kept_scores = x[keep]
    cut_values = np.unique(kept_scores) if cuts is None else v.numeric_vector("cuts", cuts)
    if np.isnan(cut_values).any():
        raise DomainError("cuts holds a blank", argument="cuts")
    passing = np.empty((cut_values.size, len(names)), dtype=np.int64)
    applicants = np.bincount(code, minlength=len(names))
    for j in range(len(names)):
        s = np.sort(kept_scores[code == j])
        passing[:, j] = s.size - np.searchsorted(s, cut_values, side="left")  # scores >= cut
    return PassingCounts(cut_values, names, applicants, passing, int((~keep).sum()))
