"""Reliability within a group of the applicants, and what a second sitting shows.

A method family of the ``reliability`` topic (the catalog files these functions under it).

======================  ==========================================  ==========================================
spreadsheet name        Python function                              what it gives
======================  ==========================================  ==========================================
``ALPHA_AMONG``         :func:`alpha_among`                          alpha (or a Feldt limit) of the people
                                                                     marked by a number in another column
``RETEST_GAIN``         :func:`retest_gain`                          mean gain at a second sitting: mean, SD,
                                                                     t interval, standardized gain
``RETEST_SELECTION``    :func:`retest_selection`                     are the retesters a selected group?
======================  ==========================================  ==========================================

Caution
-------
A second sitting taken only by people who failed the first is a selected
group: their test–retest correlation is restricted in range, and their mean
gain mixes the practice effect with regression toward the mean (Campbell &
Kenny 1999). These are statistical indicators, not legal findings.

Conventions
-----------
* Pairs: a person counts in ``RETEST_GAIN`` and ``RETEST_SELECTION`` when
  both sittings hold a number; blanks (and empty text) elsewhere are skipped.
* ``ALPHA_AMONG`` uses the people whose ``among`` cell holds a number
  (empty text or a blank leaves a person out), then listwise deletion over
  the items, as ``CRONBACH_ALPHA``.
"""

from __future__ import annotations

import math
from typing import Literal

import numpy as np

from . import _validate as v
from ._lazy import lazy_module
from ._validate import Range
from .errors import ArgumentTypeError, InsufficientDataError, ZeroVarianceError
from .registry import spreadsheet
from .reliability import alpha_confidence_limit, cronbach_alpha

stats = lazy_module("scipy.stats")

TOPIC = "reliability"

__all__ = ["alpha_among", "retest_gain", "retest_selection"]


def _same_length(name: str, values: np.ndarray, other: str, n: int) -> None:
    if values.size != n:
        raise ArgumentTypeError(f"{name} must have one cell per row of {other} ({n}), got {values.size}",
                                argument=name)


@spreadsheet("ALPHA_AMONG", returns="coefficient",
             reference="Cronbach, L. J. (1951). Coefficient alpha and the internal structure of tests. "
                       "Psychometrika 16, 297-334; Feldt, L. S., Woodruff, D. J. & Salih, F. A. (1987). "
                       "Applied Psychological Measurement 11, 93-103.")
def alpha_among(items: Range, among: Range, *, part: Literal["estimate", "lower", "upper"] = "estimate",
                confidence: float = 0.95) -> float:
    """Coefficient alpha of the people marked in ``among`` (e.g. those hired), or a Feldt limit of it.

    alpha = k/(k − 1) · (1 − Σ s²ᵢ / s²ₓ) over the rows whose ``among`` cell
    holds a number; the limits are Feldt's F-based limits (``ALPHA_CI``) with
    the number of those rows that answered every item.

    Parameters
    ----------
    items : range
        Item scores, one row per person, one column per item (at least 2 items).
    among : range
        One column with a cell per row of ``items``: a number marks a person
        of the group (e.g. the criterion value, present only for those hired);
        a blank or empty text leaves the person out. Other text is refused.
    part : {"estimate", "lower", "upper"}, optional
        Alpha itself (default) or a confidence limit.
    confidence : float, optional
        Two-sided confidence level of the limits, strictly between 0 and 1; default 0.95.

    Notes
    -----
    For 0/1 items alpha equals KR-20. Used beside the indirect range-restriction
    correction: the restricted group's own reliability, against the one that
    correction implies (``RESTRICTED_RELIABILITY``).

    Examples
    --------
    >>> items = [[1, 2, 2], [2, 3, 3], [9, 9, 1], [3, 3, 4], [4, 5, 4]]
    >>> round(alpha_among(items, [[1], [1], [""], [1], [1]]), 6)
    0.948529
    """
    x = v.numeric_matrix("items", items)
    mark = v.numeric_vector("among", among)
    _same_length("among", mark, "items", x.shape[0])
    v.confidence("confidence", confidence)
    chosen = x[~np.isnan(mark)]
    if chosen.shape[0] < 2:
        raise InsufficientDataError(f"among marks {chosen.shape[0]} people; alpha needs at least 2", argument="among")
    alpha = cronbach_alpha(chosen)
    if part == "estimate":
        return alpha
    n = int((~np.isnan(chosen).any(axis=1)).sum())
    return float(alpha_confidence_limit(alpha, n, chosen.shape[1], part=part, confidence=confidence))


def _pairs(first, second) -> tuple[np.ndarray, np.ndarray]:
    a = v.numeric_vector("first", first)
    b = v.numeric_vector("second", second)
    _same_length("second", b, "first", a.size)
    both = ~np.isnan(a) & ~np.isnan(b)
    return a[both], b[both]


@spreadsheet("RETEST_GAIN", returns="number",
             reference="Student (1908); Lakens, D. (2013). Calculating and reporting effect sizes to facilitate "
                       "cumulative science. Frontiers in Psychology 4, 863 (d_av); Hausknecht, J. P., Halpert, "
                       "J. A., Di Paolo, N. T. & Moriarty Gerrard, M. O. (2007). Retesting in selection: a "
                       "meta-analysis of coaching and practice effects for tests of cognitive ability. Journal of "
                       "Applied Psychology 92, 373-385.")
def retest_gain(first: Range, second: Range, *,
                part: Literal["gain", "sd", "lower", "upper", "standardized"] = "gain",
                confidence: float = 0.95) -> float:
    """Mean gain from the first to the second sitting (the practice effect), its SD, interval or standardized size.

    With dᵢ = secondᵢ − firstᵢ over the n people with both scores:
    gain = mean(d); sd = SD of d (n − 1); limits = gain ∓ t(n − 1) · sd / √n
    (the paired t interval); standardized = gain / √((s²₁ + s²₂) / 2), the
    mean difference over the average of the two sittings' variances (d_av,
    Lakens 2013, eq. 10), which does not depend on the retest correlation.

    Parameters
    ----------
    first : range
        Scores at the first sitting, one column.
    second : range
        Scores at the second sitting, one cell per cell of ``first`` (blank: did not retest).
    part : {"gain", "sd", "lower", "upper", "standardized"}, optional
        Which figure; default the mean gain.
    confidence : float, optional
        Two-sided confidence level of the limits, strictly between 0 and 1; default 0.95.

    Notes
    -----
    At least 2 pairs are needed. A standardized gain with both sittings'
    scores constant, and limits when every gain is the same, give ``#DIV/0!``
    (the interval would have no width). When the retesters were selected
    (e.g. all failed the first sitting) the gain includes regression toward
    the mean: it is not the practice effect alone (see ``RETEST_SELECTION``).

    Examples
    --------
    >>> round(retest_gain([10, 12, 9, 14], [12, 13, 12, 15], part="gain"), 6)
    1.75
    """
    v.confidence("confidence", confidence)
    a, b = _pairs(first, second)
    n = a.size
    if n < 2:
        raise InsufficientDataError(f"first and second hold {n} pairs of scores; at least 2 are needed", argument="second")
    d = b - a
    gain = float(np.mean(d))
    if part == "gain":
        return gain
    sd = float(np.std(d, ddof=1))
    if part == "sd":
        return sd
    if part == "standardized":
        spread = math.sqrt((np.var(a, ddof=1) + np.var(b, ddof=1)) / 2.0)
        if spread == 0:
            raise ZeroVarianceError("first and second: the scores of both sittings do not vary", argument="first")
        return gain / spread
    if sd == 0:
        raise ZeroVarianceError("second: every retester gained the same, so the interval has no width", argument="second")
    half = float(stats.t.isf((1.0 - confidence) / 2.0, n - 1)) * sd / math.sqrt(n)
    return gain - half if part == "lower" else gain + half


@spreadsheet("RETEST_SELECTION", returns="number",
             reference="Campbell, D. T. & Kenny, D. A. (1999). A Primer on Regression Artifacts. Guilford; "
                       "Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences (2nd ed.), ch. 2.")
def retest_selection(first: Range, second: Range, cut: float, *,
                     part: Literal["below cut", "first difference"] = "below cut") -> float:
    """How far the people who sat the test twice are a selected group of the applicants.

    below cut: the share of the retesters whose first score is below ``cut``
    (those who failed the first sitting). first difference: (mean first score
    of the retesters − mean score of everyone in ``first``) / SD of everyone
    in ``first`` (n − 1), the retesters' standardized distance from all
    applicants at the first sitting.

    Parameters
    ----------
    first : range
        Every applicant's first-sitting score, one column (blanks skipped).
    second : range
        Second-sitting scores, one cell per cell of ``first`` (blank: did not retest).
    cut : float
        The cut score: a first score below it failed.
    part : {"below cut", "first difference"}, optional
        Which figure; default the share below the cut.

    Notes
    -----
    The farther a selected group's mean lies from the population mean, the
    more its retest mean regresses toward it, and the more its test–retest
    correlation is restricted in range (Campbell & Kenny 1999). The study
    cautions when the share below the cut is at least 0.8 or the first
    difference is at least 0.5 in size (a "medium" difference, Cohen 1988):
    the thresholds are this tool's, stated where they are used.

    Examples
    --------
    >>> retest_selection([10, 12, 9, 14, 20, 22], [12, 13, 12, None, None, None], 15)
    1.0
    """
    v.number("cut", cut)
    a, b = _pairs(first, second)
    if a.size < 1:
        raise InsufficientDataError("second: nobody has a score at both sittings", argument="second")
    if part == "below cut":
        return float(np.mean(a < cut))
    everyone = v.numeric_vector("first", first)
    everyone = everyone[~np.isnan(everyone)]
    if everyone.size < 2:
        raise InsufficientDataError("first holds fewer than 2 scores", argument="first")
    sd = float(np.std(everyone, ddof=1))
    if sd == 0:
        raise ZeroVarianceError("first: every first-sitting score is the same", argument="first")
    return (float(np.mean(a)) - float(np.mean(everyone))) / sd
