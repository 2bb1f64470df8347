"""Standard setting: cut scores from judges' ratings of items, of the score scale, or of candidates.

==========================  ======================================  ==================================================
spreadsheet name            Python function                          what it gives
==========================  ======================================  ==================================================
``NEDELSKY_CUT``            :func:`nedelsky_cut`                     mean over judges of Σ 1/(options left)
``EBEL_CUT``                :func:`ebel_cut`                         Σ over the grid of items × judged proportion
``HOFSTEE_CUT``             :func:`hofstee_cut`                      the judges' line meeting the fail-rate curve
``BEUK_CUT``                :func:`beuk_cut`                         the line of slope s_pass/s_cut through the means
``CONTRASTING_GROUPS_CUT``  :func:`contrasting_groups_cut`           the score misclassifying fewest known candidates
``BORDERLINE_CUT``          :func:`borderline_cut`                   median score of the borderline group
==========================  ======================================  ==================================================

The Angoff methods are in :mod:`cutscores`.

Conventions
-----------
* A candidate passes at a score **at or above** the cut; the fail rate at a
  cut k is the share of scores below k, the pass rate the share at or above.
* Cuts are on the raw-score scale of the scores or items given and are not
  rounded: rounding, and in which direction, is a policy decision.
* Score ranges (``scores``) ignore blanks. A flag range (``qualified``,
  ``borderline``) holds TRUE/FALSE or 1/0 per candidate, in the same order
  as ``scores``; a candidate with a blank score or a blank flag is left out.
* Judges' ranges with one row per item and one column per judge ignore
  all-blank padding rows and columns and refuse any other blank (as the
  Angoff functions do): a missing rating is not a zero.
"""

from __future__ import annotations

import math
import numbers
from typing import Literal

import numpy as np

from . import _validate as v
from ._validate import Range
from .cutscores import panel_matrix
from .errors import ArgumentTypeError, DomainError, InsufficientDataError
from .registry import spreadsheet

__all__ = [
    "nedelsky_cut",
    "ebel_cut",
    "hofstee_cut",
    "beuk_cut",
    "contrasting_groups_cut",
    "borderline_cut",
    "fail_rate_crossing",
]

_CIZEK = "Cizek, G. J. & Bunch, M. B. (2007). Standard Setting: A Guide to Establishing and Evaluating Performance " \
         "Standards on Tests"


# ---------------------------------------------------------------- shared steps

def _scores(name: str, value, *, at_least: int = 1) -> np.ndarray:
    x = v.numeric_vector(name, value)
    x = x[~np.isnan(x)]
    if x.size < at_least:
        raise InsufficientDataError(f"{name} needs at least {at_least} scores, got {x.size}", argument=name)
    return x


def _flag(name: str, cell, position: int) -> float:
    """TRUE/FALSE (or 1/0, or the words) as 1.0/0.0; a blank as nan."""
    if cell is None or (isinstance(cell, str) and cell.strip() == "") or (isinstance(cell, float) and math.isnan(cell)):
        return math.nan
    if isinstance(cell, (bool, np.bool_)):
        return float(cell)
    if isinstance(cell, numbers.Real) and v.to_float(cell) in (0.0, 1.0):
        return v.to_float(cell)
    if isinstance(cell, str) and cell.strip().upper() in ("TRUE", "FALSE"):
        return float(cell.strip().upper() == "TRUE")
    raise ArgumentTypeError(f"{name} must hold TRUE/FALSE or 1/0; found {v.show(cell)} at position {position}",
                            argument=name)


def _scores_and_flags(scores, flags, flag_name: str) -> tuple[np.ndarray, np.ndarray]:
    """Scores and a same-length flag column, candidates with a blank in either left out."""
    x = v.numeric_vector("scores", scores)
    cells = v._as_rows(flag_name, flags)
    if cells.shape[0] != 1 and cells.shape[1] != 1:
        raise ArgumentTypeError(f"{flag_name} must be a single row or column, got {cells.shape[0]} rows by "
                                f"{cells.shape[1]} columns", argument=flag_name)
    f = np.array([_flag(flag_name, c, i + 1) for i, c in enumerate(cells.ravel())], dtype=float)
    if f.size != x.size:
        raise ArgumentTypeError(f"{flag_name} must have one entry per score: {f.size} entries for {x.size} scores",
                                argument=flag_name)
    keep = ~np.isnan(x) & ~np.isnan(f)
    return x[keep], f[keep] == 1.0


def fail_rate_crossing(scores: np.ndarray, k0: float, f0: float, slope: float) -> float:
    """The lowest k at which the observed fail rate F(k) reaches the line through (k0, f0) of the given slope (≤ 0).

    F(k) = #(scores < k)/n is a non-decreasing step function and the line
    f(k) = f0 + slope·(k − k0) does not rise, so F − f is non-decreasing and
    the crossing is k* = inf{k : F(k) ≥ f(k)}. On a flat step the crossing is
    where the line meets the step; where the line passes through a jump it
    is the score at the jump. Returns −inf when the line is never above F.

    >>> fail_rate_crossing(np.array([1.0, 2.0, 3.0, 4.0]), 0.0, 1.0, -0.25)  # meets the step 1/2 at k = 2
    2.0
    """
    u, counts = np.unique(scores, return_counts=True)
    level = np.concatenate(([0.0], np.cumsum(counts) / scores.size))  # F on (left_j, right_j]
    left = np.concatenate(([-np.inf], u))
    right = np.concatenate((u, [np.inf]))
    if slope < 0:
        start = k0 + (level - f0) / slope  # the line is at or below level_j from here on
    else:
        start = np.where(level >= f0, -np.inf, np.inf)
    reached = np.flatnonzero(start <= right)
    j = reached[0]  # the last step (level 1 everywhere to the right) always meets a line that is finite there
    return float(max(start[j], left[j]))


# ---------------------------------------------------------------- item-centred methods

@spreadsheet("NEDELSKY_CUT", returns="nonnegative number",
             reference="Nedelsky, L. (1954). Absolute grading standards for objective tests. Educational and "
                       "Psychological Measurement 14, 3-19; " + _CIZEK + ", ch. 5.")
def nedelsky_cut(options_left: Range) -> float:
    """Nedelsky cut score: the expected number correct of a minimally competent candidate who guesses among the options left.

    Each judge strikes out, item by item, the options a minimally competent
    candidate would recognise as wrong; rᵢⱼ options are left. Such a
    candidate's chance on the item is 1/rᵢⱼ, judge j's cut is Σᵢ 1/rᵢⱼ, and
    the panel's cut is the mean over judges, Σᵢ (1/J) Σⱼ 1/rᵢⱼ.

    Parameters
    ----------
    options_left : range
        One row per item, one column per judge: the number of options left
        (whole numbers, at least 1, the key included). All-blank rows and
        columns are ignored; any other blank is ``#N/A``.

    Notes
    -----
    Nedelsky (1954) also proposed moving the cut by a multiple of the
    judges' standard deviation; that adjustment is left to the user. The
    cut is not rounded.

    Examples
    --------
    Two items, two judges: (1/2 + 1/4)/2 + (1/1 + 1/2)/2 = 1.125.

    >>> nedelsky_cut([[2, 4], [1, 2]])
    1.125
    """
    m = panel_matrix("options_left", options_left, "count")
    bad = (m < 1) | (m != np.round(m))
    if bad.any():
        raise DomainError(f"options_left must hold whole numbers of at least 1 (the key is always left), "
                          f"got {v.show(m[bad][0])}", argument="options_left")
    return float((1.0 / m).mean(axis=1).sum())


@spreadsheet("EBEL_CUT", returns="nonnegative number",
             reference="Ebel, R. L. (1972). Essentials of Educational Measurement (2nd ed.), pp. 492-494; "
                       + _CIZEK + ", ch. 5.")
def ebel_cut(counts: Range, judged_p: Range) -> float:
    """Ebel cut score: the number of items in each relevance × difficulty cell times the judged proportion correct, summed.

    The judges sort the items into a grid (e.g. essential / important /
    acceptable / questionable relevance by easy / medium / hard) and state,
    for each cell, the proportion of its items a minimally competent
    candidate would answer correctly: cut = Σ_cells nₖ·pₖ.

    Parameters
    ----------
    counts : range
        The grid of the number of items in each cell (whole numbers, at least
        0); a blank cell holds no items.
    judged_p : range
        The same grid: the judged proportion correct (0 to 1) for each cell.
        It may be blank only where the cell holds no items.

    Notes
    -----
    The grid is the panel's consensus (or the judges' mean per cell); any
    shape of grid is accepted, the two ranges must have the same shape. The
    cut is on the number-correct scale; divide by Σ nₖ for a proportion.

    Examples
    --------
    Ten essential items at 0.9 and twenty useful ones at 0.6: 9 + 12 = 21.

    >>> round(ebel_cut([[10, 20]], [[0.9, 0.6]]), 12)
    21.0
    """
    n = v.numeric_matrix("counts", counts)
    p = v.numeric_matrix("judged_p", judged_p)
    if n.shape != p.shape:
        raise ArgumentTypeError(f"judged_p must have the shape of counts ({n.shape[0]} by {n.shape[1]}), got "
                                f"{p.shape[0]} by {p.shape[1]}", argument="judged_p")
    n = np.where(np.isnan(n), 0.0, n)
    bad = (n < 0) | (n != np.round(n))
    if bad.any():
        raise DomainError(f"counts must hold whole numbers of items (at least 0), got {v.show(n[bad][0])}",
                          argument="counts")
    if n.sum() == 0:
        raise InsufficientDataError("counts holds no items (every cell is 0 or blank)", argument="counts")
    holes = np.argwhere((n > 0) & np.isnan(p))
    if len(holes):
        r, c = holes[0]
        raise InsufficientDataError(f"judged_p is blank at row {r + 1}, column {c + 1}, where counts has "
                                    f"{v.show(n[r, c])} items", argument="judged_p")
    bad = ~np.isnan(p) & ((p < 0) | (p > 1))
    if bad.any():
        raise DomainError(f"judged_p must hold proportions between 0 and 1 (enter 70% as 0.7), got "
                          f"{v.show(p[bad][0])}", argument="judged_p")
    return float(np.sum(np.where(n > 0, n * np.nan_to_num(p), 0.0)))


# ---------------------------------------------------------------- compromise methods

@spreadsheet("HOFSTEE_CUT", returns="number",
             reference="Hofstee, W. K. B. (1983). The case for compromise in educational selection and grading. "
                       "In S. B. Anderson & J. S. Helmick (Eds.), On Educational Testing, 109-127; "
                       + _CIZEK + ", ch. 11.")
def hofstee_cut(scores: Range, k_min: float, k_max: float, f_min: float, f_max: float) -> float:
    """Hofstee compromise cut: where the line from (k_min, f_max) to (k_max, f_min) meets the observed fail-rate curve.

    The judges state the lowest and highest acceptable cut (k_min, k_max)
    and the lowest and highest acceptable fail rate (f_min, f_max), usually
    as the means over judges. The line
    f(k) = f_max − (f_max − f_min)(k − k_min)/(k_max − k_min) falls across
    that rectangle; the fail-rate curve F(k) = #(scores < k)/n rises. The
    cut is their crossing, k* = inf{k : F(k) ≥ f(k)}.

    Parameters
    ----------
    scores : range
        The candidates' scores (a row or column; blanks ignored), at least 1.
    k_min : float
        Lowest acceptable cut score.
    k_max : float
        Highest acceptable cut score, greater than k_min.
    f_min : float
        Lowest acceptable fail rate, a proportion from 0 to 1.
    f_max : float
        Highest acceptable fail rate, greater than f_min and at most 1.

    Notes
    -----
    The fail-rate curve is the empirical step function (no smoothing or
    interpolation): on a flat step the cut is where the line meets it; where
    the line passes through a jump the cut is the score at the jump. When
    the line does not meet the curve inside the rectangle (the fail rate at
    k_min is already at least f_max, or at k_max still below f_min) the
    judgments and the data disagree and ``#NUM!`` is returned, saying which;
    choosing a cut then is for the panel.

    Examples
    --------
    Scores 1 to 10; line from (3, 0.6) to (7, 0.2): it meets the step F = 0.4
    (scores 1-4 below the cut) at k = 5.

    >>> round(hofstee_cut(list(range(1, 11)), 3, 7, 0.2, 0.6), 12)
    5.0
    """
    x = _scores("scores", scores)
    v.between("f_min", f_min, 0.0, 1.0)
    v.between("f_max", f_max, 0.0, 1.0)
    if not k_max > k_min:
        raise DomainError(f"k_max must be greater than k_min ({v.show(k_min)}), got {v.show(k_max)}",
                          argument="k_max")
    if not f_max > f_min:
        raise DomainError(f"f_max must be greater than f_min ({v.show(f_min)}), got {v.show(f_max)}",
                          argument="f_max")
    slope = -(f_max - f_min) / (k_max - k_min)
    cut = fail_rate_crossing(x, k_min, f_max, slope)
    if cut < k_min:
        raise DomainError(f"f_max is exceeded already at k_min: {v.show(np.mean(x < k_min))} of the scores are "
                          f"below {v.show(k_min)}, more than {v.show(f_max)}; the line does not meet the "
                          f"fail-rate curve within the judges' limits", argument="f_max")
    if cut > k_max:
        raise DomainError(f"f_min is not reached even at k_max: only {v.show(np.mean(x < k_max))} of the scores "
                          f"are below {v.show(k_max)}, less than {v.show(f_min)}; the line does not meet the "
                          f"fail-rate curve within the judges' limits", argument="f_min")
    return cut


def _judges(judged_cuts, judged_pass_rates) -> tuple[np.ndarray, np.ndarray]:
    k = v.numeric_vector("judged_cuts", judged_cuts)
    p = v.numeric_vector("judged_pass_rates", judged_pass_rates)
    if k.size != p.size:
        raise ArgumentTypeError(f"judged_pass_rates must have one entry per judge: {p.size} entries for "
                                f"{k.size} cuts", argument="judged_pass_rates")
    padding = np.isnan(k) & np.isnan(p)
    k, p = k[~padding], p[~padding]
    for name, values in (("judged_cuts", k), ("judged_pass_rates", p)):
        if np.isnan(values).any():
            raise InsufficientDataError(f"{name} is blank for judge {int(np.flatnonzero(np.isnan(values))[0]) + 1}; "
                                        f"every judge gives both a cut and a pass rate", argument=name)
    if k.size < 2:
        raise InsufficientDataError(f"judged_cuts needs at least 2 judges, got {k.size}", argument="judged_cuts")
    bad = (p < 0) | (p > 1)
    if bad.any():
        raise DomainError(f"judged_pass_rates must hold proportions between 0 and 1 (enter 70% as 0.7), got "
                          f"{v.show(p[bad][0])}", argument="judged_pass_rates")
    return k, p


@spreadsheet("BEUK_CUT", returns="number",
             reference="Beuk, C. H. (1984). A method for reaching a compromise between absolute and relative "
                       "standards in examinations. Journal of Educational Measurement 21, 147-152; "
                       + _CIZEK + ", ch. 11.")
def beuk_cut(scores: Range, judged_cuts: Range, judged_pass_rates: Range) -> float:
    """Beuk compromise cut: where the line through the judges' mean cut and pass rate meets the observed pass-rate curve.

    Each judge states a cut kⱼ and the pass rate pⱼ they expect. With means
    k̄, p̄ and standard deviations s_k, s_p across judges, the line through
    (k̄, p̄) with slope s_p/s_k on the pass-rate scale (−s_p/s_k on the
    fail-rate scale) meets the observed pass-rate curve P(k) = #(scores ≥ k)/n:
    the cut is k* = inf{k : p̄ + (s_p/s_k)(k − k̄) ≥ P(k)}. The more the judges
    agree on one of the two standards, the less the compromise moves it.

    Parameters
    ----------
    scores : range
        The candidates' scores (a row or column; blanks ignored), at least 1.
    judged_cuts : range
        Each judge's cut score, one per judge (at least 2 judges).
    judged_pass_rates : range
        Each judge's expected pass rate (0 to 1), in the same order as judged_cuts.

    Notes
    -----
    The standard deviations' denominator cancels in their ratio. Judges who
    all give the same cut (s_k = 0) make the line vertical: the cut is k̄.
    Judges who all give the same pass rate (s_p = 0) make it horizontal: the
    cut gives that pass rate as nearly as the scores allow. The pass-rate
    curve is the empirical step function; where the line passes through a
    jump the cut is the score at the jump. Rows blank in both judges' ranges
    are ignored; a judge with only one of the two is ``#N/A``.

    Examples
    --------
    Scores 1 to 10; judges (6, 0.6) and (8, 0.4): means (7, 0.5), slope
    0.1/1, line p = 0.5 + 0.1·(k − 7). It passes through the jump of the
    pass-rate curve at 6 (from 0.5 at k = 6 to 0.4 just above), so the cut is 6.

    >>> beuk_cut(list(range(1, 11)), [6, 8], [0.6, 0.4])
    6.0
    """
    x = _scores("scores", scores)
    k, p = _judges(judged_cuts, judged_pass_rates)
    k_bar, p_bar = k.mean(), p.mean()
    s_k, s_p = np.std(k), np.std(p)
    if s_k == 0:
        return float(k_bar)
    slope = -s_p / s_k  # on the fail-rate scale
    cut = fail_rate_crossing(x, k_bar, 1.0 - p_bar, slope)
    if not math.isfinite(cut):
        raise DomainError("judged_pass_rates are all 1: every cut up to the lowest score passes everyone, so the "
                          "compromise has no finite cut", argument="judged_pass_rates")
    return cut


# ---------------------------------------------------------------- candidate-centred methods

@spreadsheet("CONTRASTING_GROUPS_CUT", returns="number",
             reference="Livingston, S. A. & Zieky, M. J. (1982). Passing Scores: A Manual for Setting Standards of "
                       "Performance on Educational and Occupational Tests, ch. 5; Berk, R. A. (1976). Determination "
                       "of optimal cutting scores in criterion-referenced measurement. Journal of Experimental "
                       "Education 45, 4-9; " + _CIZEK + ", ch. 8.")
def contrasting_groups_cut(scores: Range, qualified: Range, *,
                           rule: Literal["misclassifications", "midpoint"] = "misclassifications") -> float:
    """Contrasting-groups cut: the score that best separates candidates judged qualified from those judged not.

    With rule "misclassifications" (the default) the cut is the observed
    score c minimising the number misclassified, #(not qualified with score
    ≥ c) + #(qualified with score < c) (Berk, 1976); with "midpoint" it is
    the midpoint of the two groups' mean scores.

    Parameters
    ----------
    scores : range
        The candidates' scores, a row or column.
    qualified : range
        TRUE (or 1) for a candidate judged qualified, FALSE (or 0) for one
        judged not, in the same order as scores; at least one of each.
        Candidates with a blank score or judgment are left out.
    rule : {"misclassifications", "midpoint"}, optional
        How the cut is chosen; see above.

    Notes
    -----
    The candidate cuts under "misclassifications" are the observed scores
    (a cut at the lowest passes everyone). Ties: the lowest of the scores
    with the fewest misclassifications, so the cut is no higher than the
    judgments require. The judgments should be made without knowing the
    scores. With small groups the count is noisy; Livingston & Zieky (1982)
    advise smoothing the two distributions first.

    Examples
    --------
    >>> contrasting_groups_cut([3, 4, 5, 6, 7, 8], [0, 0, 1, 0, 1, 1])
    5.0
    >>> contrasting_groups_cut([3, 4, 5, 6, 7, 8], [0, 0, 1, 0, 1, 1], rule="midpoint")
    5.5
    """
    x, q = _scores_and_flags(scores, qualified, "qualified")
    if q.all() or not q.any():
        raise InsufficientDataError(
            f"qualified needs at least one qualified and one not qualified candidate, got {int(q.sum())} "
            f"qualified of {q.size}", argument="qualified")
    if rule == "midpoint":
        return float((x[q].mean() + x[~q].mean()) / 2.0)
    cuts = np.unique(x)
    # for each candidate cut c: the unqualified at or above c pass wrongly, the qualified below c fail wrongly
    false_pass = x[~q].size - np.searchsorted(np.sort(x[~q]), cuts, side="left")
    false_fail = np.searchsorted(np.sort(x[q]), cuts, side="left")
    return float(cuts[np.argmin(false_pass + false_fail)])


@spreadsheet("BORDERLINE_CUT", returns="number",
             reference="Zieky, M. J. & Livingston, S. A. (1977). Manual for Setting Standards on the Basic Skills "
                       "Assessment Tests; Livingston, S. A. & Zieky, M. J. (1982). Passing Scores, ch. 5; "
                       + _CIZEK + ", ch. 8.")
def borderline_cut(scores: Range, borderline: Range) -> float:
    """Borderline-group cut: the median score of the candidates judged borderline.

    Judges who know the candidates' work (not their scores) name those who
    are just at the edge of acceptable; the cut is the median of their scores.

    Parameters
    ----------
    scores : range
        The candidates' scores, a row or column.
    borderline : range
        TRUE (or 1) for a candidate judged borderline, FALSE (or 0) otherwise,
        in the same order as scores; at least one borderline candidate.
        Candidates with a blank score or judgment are left out.

    Notes
    -----
    The median of an even number of scores is the mean of the middle two.

    Examples
    --------
    >>> borderline_cut([10, 12, 15, 18, 20], [0, 1, 1, 1, 0])
    15.0
    """
    x, b = _scores_and_flags(scores, borderline, "borderline")
    if not b.any():
        raise InsufficientDataError("borderline marks no candidate as borderline (TRUE or 1)", argument="borderline")
    return float(np.median(x[b]))
