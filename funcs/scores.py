"""Measurement error and score interpretation.

==================  ==========================================  ==============================
spreadsheet name    Python function                              what it gives
==================  ==========================================  ==============================
``SEM``             :func:`standard_error_of_measurement`        sd·√(1 − r)
``SED``             :func:`standard_error_of_difference`         SEM·√2
``SCORE_CI``        :func:`score_confidence_limit`               score ± z·SEM
``TRUE_SCORE``      :func:`estimated_true_score`                 Kelley's regressed estimate
``TRUE_SCORE_CI``   :func:`true_score_confidence_limit`          Kelley estimate ± z·sd·√(r(1 − r))
``BAND_WIDTH``      :func:`band_width`                           z·SED
``BAND_FLOOR``      :func:`band_floor`                           top score − z·SED (sliding band)
``SCORES_DIFFER``   :func:`scores_differ`                        |a − b| > z·SED
``SCORE_BAND``      :func:`score_band`                           fixed SED band number from the top
``PERCENTILE_RANK`` :func:`percentile_rank`                      100·(below + ½·equal)/N
``T_SCORE``         :func:`t_score`                              50 + 10·z
``STANINE``         :func:`stanine`                              stanine from the percentile rank
``STEN``            :func:`sten`                                 sten from z
==================  ==========================================  ==============================

Conventions
-----------
* ``sd`` is the standard deviation of observed scores in the group the
  reliability was estimated in; the functions do not care which denominator
  gave it (n or n − 1), but it must be the same group.
* ``confidence`` is two-sided: 0.95 uses the exact normal quantile
  z = 1.959963984540054, not a rounded 1.96 or 2.
* Range arguments of scores (``scores``) ignore blanks (applicants with no
  score) and refuse text.
"""

from __future__ import annotations

from typing import Literal

import numpy as np

from . import _validate as v
from ._lazy import lazy_module
from ._validate import Range
from .errors import InsufficientDataError
from .registry import spreadsheet

special = lazy_module("scipy.special")

__all__ = [
    "standard_error_of_measurement",
    "standard_error_of_difference",
    "score_confidence_limit",
    "estimated_true_score",
    "true_score_confidence_limit",
    "band_width",
    "band_floor",
    "scores_differ",
    "score_band",
    "percentile_rank",
    "t_score",
    "stanine",
    "sten",
    "two_sided_z",
]

_SQRT2 = np.sqrt(2.0)

#: Cumulative percentages at the upper edge of stanines 1..8 (4-7-12-17-20-17-12-7-4).
STANINE_EDGES = np.array([4.0, 11.0, 23.0, 40.0, 60.0, 77.0, 89.0, 96.0])


def two_sided_z(confidence):
    """The normal quantile z with P(−z < Z < z) = confidence.

    >>> print(round(float(two_sided_z(0.95)), 12))
    1.95996398454
    """
    v.confidence("confidence", confidence)
    # ndtri(1 - a/2) written as -ndtri(a/2): no cancellation for confidence near 1.
    return -special.ndtri((1.0 - np.asarray(confidence, dtype=float)) / 2.0)


def _sd_reliability(sd, reliability):
    v.at_least("sd", sd, 0.0)
    v.reliability("reliability", reliability)


@spreadsheet("SEM", returns="nonnegative number", elementwise=True,
             reference="Lord, F. M. & Novick, M. R. (1968). Statistical Theories of Mental Test Scores, eq. 3.8.4; "
                       "AERA, APA & NCME (2014). Standards for Educational and Psychological Testing, ch. 2.")
def standard_error_of_measurement(sd: float, reliability: float) -> float:
    """Standard error of measurement, the spread of observed scores around a true score.

    SEM = sd · √(1 − reliability)

    Parameters
    ----------
    sd : float
        Standard deviation of observed scores, at least 0.
    reliability : float
        Reliability of the scores, between 0 and 1.

    Examples
    --------
    An IQ-type scale (sd 15) with reliability 0.91 has SEM 4.5:

    >>> round(standard_error_of_measurement(15, 0.91), 12)
    4.5
    """
    _sd_reliability(sd, reliability)
    return sd * np.sqrt(1.0 - reliability)


@spreadsheet("SED", returns="nonnegative number", elementwise=True,
             reference="Gulliksen, H. (1950). Theory of Mental Tests, ch. 4; "
                       "Cascio, W. F., Outtz, J., Zedeck, S. & Goldstein, I. L. (1991). Personnel Psychology 44, 233-264.")
def standard_error_of_difference(sd: float, reliability: float) -> float:
    """Standard error of the difference between two people's scores on the same test.

    SED = SEM · √2 = sd · √(2(1 − reliability))

    Parameters
    ----------
    sd : float
        Standard deviation of observed scores, at least 0.
    reliability : float
        Reliability of the scores, between 0 and 1.

    Examples
    --------
    >>> round(standard_error_of_difference(15, 0.91), 10)
    6.3639610307
    """
    _sd_reliability(sd, reliability)
    return sd * np.sqrt(1.0 - reliability) * _SQRT2


@spreadsheet("SCORE_CI", returns="number", elementwise=True,
             reference="Harvill, L. M. (1991). Standard error of measurement. Educational Measurement: "
                       "Issues and Practice 10(2), 33-41.")
def score_confidence_limit(score: float, sd: float, reliability: float, *, part: Literal["lower", "upper"],
                           confidence: float = 0.95) -> float:
    """Lower or upper confidence limit around an observed score.

    limit = score ∓ z · SEM, with z the two-sided normal quantile of ``confidence``

    Parameters
    ----------
    score : float
        The observed score.
    sd : float
        Standard deviation of observed scores, at least 0.
    reliability : float
        Reliability of the scores, between 0 and 1.
    part : {"lower", "upper"}
        Which limit.
    confidence : float, optional
        Two-sided confidence level, strictly between 0 and 1; default 0.95.

    Examples
    --------
    >>> round(score_confidence_limit(100, 15, 0.91, part="upper"), 6)
    108.819838
    """
    half = two_sided_z(confidence) * standard_error_of_measurement.spreadsheet.body(sd, reliability)
    return score - half if part == "lower" else score + half


@spreadsheet("TRUE_SCORE", returns="number", elementwise=True,
             reference="Kelley, T. L. (1947). Fundamentals of Statistics, p. 409; "
                       "Lord & Novick (1968), eq. 3.7.2.")
def estimated_true_score(score: float, mean: float, reliability: float) -> float:
    """Kelley's regressed estimate of the true score.

    T̂ = mean + reliability · (score − mean)

    Parameters
    ----------
    score : float
        The observed score.
    mean : float
        Mean observed score of the group.
    reliability : float
        Reliability of the scores, between 0 and 1.

    Examples
    --------
    >>> round(estimated_true_score(130, 100, 0.9), 10)
    127.0
    """
    v.reliability("reliability", reliability)
    return mean + reliability * (score - mean)


@spreadsheet("TRUE_SCORE_CI", returns="number", elementwise=True,
             reference="Lord & Novick (1968), sec. 3.8 (standard error of estimation); "
                       "Dudek, F. J. (1979). Psychological Bulletin 86, 335-337.")
def true_score_confidence_limit(score: float, mean: float, sd: float, reliability: float,
                                *, part: Literal["lower", "upper"], confidence: float = 0.95) -> float:
    """Confidence limit for the true score, centred on Kelley's estimate.

    limit = T̂ ∓ z · sd · √(reliability · (1 − reliability))

    Parameters
    ----------
    score : float
        The observed score.
    mean : float
        Mean observed score of the group.
    sd : float
        Standard deviation of observed scores, at least 0.
    reliability : float
        Reliability of the scores, between 0 and 1.
    part : {"lower", "upper"}
        Which limit.
    confidence : float, optional
        Two-sided confidence level, strictly between 0 and 1; default 0.95.

    Examples
    --------
    >>> round(true_score_confidence_limit(130, 100, 15, 0.9, part="lower"), 6)
    118.180162
    """
    _sd_reliability(sd, reliability)
    centre = mean + reliability * (score - mean)
    half = two_sided_z(confidence) * sd * np.sqrt(reliability * (1.0 - reliability))
    return centre - half if part == "lower" else centre + half


@spreadsheet("BAND_WIDTH", returns="nonnegative number", elementwise=True,
             reference="Cascio, Outtz, Zedeck & Goldstein (1991). Statistical implications of six methods of "
                       "test score use in personnel selection. Human Performance 4, 233-264.")
def band_width(sd: float, reliability: float, *, confidence: float = 0.95) -> float:
    """Width of a score band: the smallest difference that is reliably a difference.

    width = z · SED = z · sd · √(2(1 − reliability))

    Parameters
    ----------
    sd : float
        Standard deviation of observed scores, at least 0.
    reliability : float
        Reliability of the scores, between 0 and 1.
    confidence : float, optional
        Two-sided confidence level, strictly between 0 and 1; default 0.95.

    Examples
    --------
    >>> round(band_width(10, 0.9), 6)
    8.765225
    """
    return two_sided_z(confidence) * standard_error_of_difference.spreadsheet.body(sd, reliability)


@spreadsheet("BAND_FLOOR", returns="number", elementwise=True,
             reference="Cascio, Outtz, Zedeck & Goldstein (1991). Statistical implications of six methods of "
                       "test score use in personnel selection. Human Performance 4, 233-264 (sliding bands).")
def band_floor(top_score: float, sd: float, reliability: float, *, confidence: float = 0.95) -> float:
    """Lowest score of the band that starts at the top remaining score (a sliding band's floor).

    floor = top_score − z · SED = top_score − z · sd · √(2(1 − reliability))

    Scores from the floor up to the top score do not differ reliably from the
    top score (the band is closed, as in :func:`scores_differ`). In a sliding
    band the top is the highest score not yet chosen: as the top scorers are
    chosen the top, and with it the floor, moves down.

    Parameters
    ----------
    top_score : float
        The highest score still in contention.
    sd : float
        Standard deviation of observed scores, at least 0.
    reliability : float
        Reliability of the scores, between 0 and 1.
    confidence : float, optional
        Two-sided confidence level, strictly between 0 and 1; default 0.95.

    Notes
    -----
    Choosing within a band by anything other than score is a policy
    decision, not a neutral one; in the US, adjusting scores or cut-offs by
    race, colour, religion, sex or national origin is unlawful (Civil Rights
    Act of 1991, section 106, 42 U.S.C. 2000e-2(l)).

    Examples
    --------
    Top score 92, sd 10, reliability 0.9: 92 − 1.96 · √2 · 10 · √0.1.

    >>> round(band_floor(92, 10, 0.9), 6)
    83.234775
    """
    return top_score - band_width.spreadsheet.body(sd, reliability, confidence=confidence)


@spreadsheet("SCORES_DIFFER", returns="boolean", elementwise=True,
             reference="Cascio, Outtz, Zedeck & Goldstein (1991), Human Performance 4, 233-264.")
def scores_differ(score_a: float, score_b: float, sd: float, reliability: float,
                  *, confidence: float = 0.95) -> bool:
    """TRUE when two scores on the same test differ by more than the band width.

    differ = |score_a − score_b| > z · SED

    A difference exactly equal to the band width is not a difference (the
    band is closed), matching :func:`score_band`.

    Parameters
    ----------
    score_a : float
        First observed score.
    score_b : float
        Second observed score.
    sd : float
        Standard deviation of observed scores, at least 0.
    reliability : float
        Reliability of the scores, between 0 and 1.
    confidence : float, optional
        Two-sided confidence level, strictly between 0 and 1; default 0.95.

    Examples
    --------
    >>> scores_differ(100, 92, 10, 0.9), scores_differ(100, 91, 10, 0.9)
    (False, True)
    """
    return np.abs(score_a - score_b) > band_width.spreadsheet.body(sd, reliability, confidence=confidence)


def _scores(name, scores):
    values = v.numeric_vector(name, scores)
    values = values[~np.isnan(values)]
    if values.size == 0:
        raise InsufficientDataError(f"{name} holds no scores (every cell is blank)", argument=name)
    return values


def band_lower_limits(scores: np.ndarray, width: float) -> np.ndarray:
    """Lower limits of the fixed bands, from the top band down (helper of :func:`score_band`)."""
    ordered = np.unique(scores)  # ascending
    limits = []
    top_index = ordered.size - 1
    while top_index >= 0:
        lower = ordered[top_index] - width
        limits.append(lower)
        # the next band starts at the highest score below this band's lower limit
        top_index = int(np.searchsorted(ordered, lower, side="left")) - 1
    return np.array(limits)


@spreadsheet("SCORE_BAND", returns="positive integer", elementwise=["score"],
             reference="Cascio, Outtz, Zedeck & Goldstein (1991), Human Performance 4, 233-264 (fixed bands); "
                       "Aguinis, H. (Ed.) (2004). Test-Score Banding in Human Resource Selection.")
def score_band(score: float, scores: Range, sd: float, reliability: float, *, confidence: float = 0.95) -> int:
    """Fixed score band of a score among all scores, counted from the top (1 = highest band).

    Band 1 holds every score within one band width (z·SED) of the highest
    score, the width included; band 2 starts at the highest score below
    band 1 and holds every score within one band width of it; and so on.

    Parameters
    ----------
    score : float
        The score to place; normally one of ``scores``.
    scores : range
        All the scores that are banded (one row or column; blanks ignored).
    sd : float
        Standard deviation of observed scores, at least 0.
    reliability : float
        Reliability of the scores, between 0 and 1.
    confidence : float, optional
        Two-sided confidence level, strictly between 0 and 1; default 0.95.

    Notes
    -----
    A score above the highest of ``scores`` is in band 1; one below the
    lowest band's lower limit gets the next band number after the last.

    Examples
    --------
    Band width 8.765 (sd 10, reliability 0.9):

    >>> [score_band(s, [100, 95, 91.3, 91, 85, 70], 10, 0.9) for s in (100, 91.3, 91, 70)]
    [1, 1, 2, 3]
    """
    values = _scores("scores", scores)
    limits = band_lower_limits(values, band_width.spreadsheet.body(sd, reliability, confidence=confidence))
    # limits decrease; the band is 1 + the number of lower limits above the score
    return 1 + np.searchsorted(-limits, -np.asarray(score), side="right")


def _percentile_rank(score, values):
    ordered = np.sort(values)
    below = np.searchsorted(ordered, score, side="left")
    equal = np.searchsorted(ordered, score, side="right") - below
    return 100.0 * (below + 0.5 * equal) / ordered.size


@spreadsheet("PERCENTILE_RANK", returns="percent", elementwise=["score"],
             reference="Crocker, L. & Algina, J. (1986). Introduction to Classical and Modern Test Theory, "
                       "ch. 19 (mid-point percentile rank).")
def percentile_rank(score: float, scores: Range) -> float:
    """Percentile rank of a score in a group, mid-point convention.

    PR = 100 · (number below + ½ · number equal) / N

    Parameters
    ----------
    score : float
        The score to rank.
    scores : range
        The group's scores (one row or column; blanks ignored).

    Examples
    --------
    >>> percentile_rank(3, [1, 2, 3, 4])
    62.5
    """
    return _percentile_rank(score, _scores("scores", scores))


@spreadsheet("T_SCORE", returns="number", elementwise=True,
             reference="McCall, W. A. (1939). Measurement; Crocker & Algina (1986), ch. 19.")
def t_score(score: float, mean: float, sd: float) -> float:
    """Linear T score (mean 50, standard deviation 10).

    T = 50 + 10 · (score − mean) / sd

    Parameters
    ----------
    score : float
        The observed score.
    mean : float
        Mean of the norm group.
    sd : float
        Standard deviation of the norm group, greater than 0.

    Examples
    --------
    >>> t_score(115, 100, 15)
    60.0
    """
    v.positive("sd", sd)
    return 50.0 + 10.0 * (score - mean) / sd


@spreadsheet("STANINE", returns="positive integer", elementwise=["score"],
             reference="Angoff, W. H. (1971). Scales, norms, and equivalent scores. In R. L. Thorndike (Ed.), "
                       "Educational Measurement (2nd ed.), 508-600 (4-7-12-17-20-17-12-7-4 percent).")
def stanine(score: float, scores: Range) -> int:
    """Stanine (1 to 9) of a score, from its mid-point percentile rank in the group.

    Stanine k holds percentile ranks from the cumulative edge below it up to,
    but not including, its own upper edge: 4, 11, 23, 40, 60, 77, 89, 96.
    A rank exactly on an edge goes to the higher stanine.

    Parameters
    ----------
    score : float
        The score to place.
    scores : range
        The group's scores (one row or column; blanks ignored).

    Examples
    --------
    >>> [stanine(s, list(range(1, 101))) for s in (1, 50, 100)]
    [1, 5, 9]
    """
    rank = _percentile_rank(score, _scores("scores", scores))
    return 1 + np.searchsorted(STANINE_EDGES, rank, side="right")


@spreadsheet("STEN", returns="positive integer", elementwise=True,
             reference="Canfield, A. A. (1951). The 'sten' scale: a modified C-scale. Educational and "
                       "Psychological Measurement 11, 295-297.")
def sten(score: float, mean: float, sd: float) -> int:
    """Sten (standard ten, 1 to 10) of a score: bands half a standard deviation wide.

    sten = floor(6 + 2 · (score − mean) / sd), kept within 1..10; the mean is the
    boundary between stens 5 and 6, and a z exactly on a boundary goes to the
    higher sten (common practice for half-open bands).

    Parameters
    ----------
    score : float
        The observed score.
    mean : float
        Mean of the norm group.
    sd : float
        Standard deviation of the norm group, greater than 0.

    Examples
    --------
    >>> [sten(s, 0, 1) for s in (-3, -0.25, 0, 0.49, 2.5)]
    [1, 5, 6, 6, 10]
    """
    v.positive("sd", sd)
    z = (score - mean) / sd
    return np.clip(np.floor(6.0 + 2.0 * z), 1, 10)
