"""Cut scores from expert judgments (test-centred standard setting).

==============  ==============================  ==================================================
spreadsheet     Python function                  what it gives
==============  ==============================  ==================================================
``ANGOFF_CUT``  :func:`angoff_cut`               Σ over items of the judges' mean probability
``ANGOFF_SE``   :func:`angoff_standard_error`    SD of the judges' implied cuts / √(judges)
==============  ==============================  ==================================================

The other standard-setting methods (Nedelsky, Ebel, Hofstee, Beuk,
contrasting groups, borderline group) are in :mod:`standard_setting`.

Conventions
-----------
* ``judgments`` is a range with one row per item and one column per judge;
  each cell is the judged probability (0 to 1) that a minimally competent
  candidate answers the item correctly. Percentages (70 for 70%) are
  refused rather than guessed at: enter 0.70.
* Blanks: rows or columns that are entirely blank (the padding of a range
  selected too large) are ignored. Any other blank is refused (``#N/A``,
  with its row and column): a missing judgment is not a zero, and averaging
  each item over whichever judges answered it would make the judges'
  implied cuts, and so the standard error, refer to different tests.
* The cut is on the raw-score scale of the items judged (number correct);
  rounding it to a whole score, and in which direction, is a policy decision
  left to the user.
"""

from __future__ import annotations

import numpy as np

from . import _validate as v
from ._validate import Range
from .errors import DomainError, InsufficientDataError
from .registry import spreadsheet

__all__ = ["angoff_cut", "angoff_standard_error", "judgment_matrix", "panel_matrix"]

_ANGOFF = ("Angoff, W. H. (1971). Scales, norms, and equivalent scores. In R. L. Thorndike (Ed.), "
           "Educational Measurement (2nd ed.), 508-600, pp. 514-515; Cizek, G. J. & Bunch, M. B. (2007). "
           "Standard Setting: A Guide to Establishing and Evaluating Performance Standards on Tests, ch. 6.")


def panel_matrix(name: str, value, what: str = "judgment") -> np.ndarray:
    """An items × judges matrix with all-blank padding rows and columns dropped and any other blank refused.

    Shared by every method that takes one row per item and one column per
    judge (Angoff here, Nedelsky in :mod:`standard_setting`).
    """
    m = v.numeric_matrix(name, value)
    blank = np.isnan(m)
    m = m[~blank.all(axis=1)][:, ~blank.all(axis=0)]  # drop all-blank padding rows and columns
    if m.size == 0:
        raise InsufficientDataError(f"{name} holds no {what}s (every cell is blank)", argument=name)
    holes = np.argwhere(np.isnan(m))
    if len(holes):
        # report the position within the range as given, not within the trimmed matrix
        rows = np.flatnonzero(~blank.all(axis=1))
        cols = np.flatnonzero(~blank.all(axis=0))
        r, c = rows[holes[0][0]], cols[holes[0][1]]
        raise InsufficientDataError(
            f"{name} has a blank {what} at row {r + 1}, column {c + 1}; every judge must rate every item",
            argument=name)
    return m


def judgment_matrix(name: str, judgments) -> np.ndarray:
    """The items × judges matrix of probabilities, with the blank policy of this module applied."""
    m = panel_matrix(name, judgments)
    bad = (m < 0) | (m > 1)
    if bad.any():
        raise DomainError(
            f"{name} must hold probabilities between 0 and 1 (enter 70% as 0.7), got {v.show(m[bad][0])}",
            argument=name)
    return m


@spreadsheet("ANGOFF_CUT", returns="nonnegative number", reference=_ANGOFF)
def angoff_cut(judgments: Range) -> float:
    """Angoff cut score: the expected number-correct score of a minimally competent candidate.

    cut = Σᵢ (1/J) Σⱼ pᵢⱼ, the sum over the items i of the judges' mean
    probability pᵢⱼ; with every cell filled this equals the mean over the J
    judges of each judge's implied cut Σᵢ pᵢⱼ.

    Parameters
    ----------
    judgments : range
        One row per item, one column per judge; probabilities from 0 to 1
        that a minimally competent candidate answers the item correctly.
        All-blank rows and columns are ignored; any other blank is ``#N/A``.

    Notes
    -----
    One judge (a single column) is allowed: the cut is that judge's sum.
    The result is not rounded.

    Examples
    --------
    Three items, two judges:

    >>> round(angoff_cut([[0.6, 0.8], [0.5, 0.7], [0.9, 0.9]]), 12)
    2.2
    """
    m = judgment_matrix("judgments", judgments)
    return float(m.mean(axis=1).sum())


@spreadsheet("ANGOFF_SE", returns="nonnegative number",
             reference="Brennan, R. L. & Lockwood, R. E. (1980). A comparison of the Nedelsky and Angoff cutting "
                       "score procedures using generalizability theory. Applied Psychological Measurement 4, "
                       "219-240; MacCann, R. G. & Stanley, G. (2004). Estimating the standard error of the judging "
                       "in a modified-Angoff standards setting procedure. Practical Assessment, Research & "
                       "Evaluation 9(5); Cizek & Bunch (2007), Standard Setting, ch. 6.")
def angoff_standard_error(judgments: Range) -> float:
    """Standard error of the Angoff cut score across judges.

    cⱼ = Σᵢ pᵢⱼ (judge j's implied cut), SE = s_c / √J, with s_c the standard
    deviation of the J judges' cuts using the n − 1 denominator

    The judges are treated as a random sample from the population of
    qualified judges; the SE describes how much the cut would move with
    another panel of the same size. It is the judge facet only, the
    "central limit theorem" estimate; a generalizability analysis
    (Brennan & Lockwood 1980) also separates item and judge-by-item variance.

    Parameters
    ----------
    judgments : range
        One row per item, one column per judge (at least 2 judges);
        probabilities from 0 to 1. All-blank rows and columns are ignored;
        any other blank is ``#N/A``.

    Notes
    -----
    A common reading (common practice): cut ± 2·SE as the range a second
    panel would likely give. Judges who all imply the same cut give SE 0.

    Examples
    --------
    Judges' cuts 1.9, 2.3 and 2.7: SD 0.4, SE 0.4/√3:

    >>> round(angoff_standard_error([[0.5, 0.7, 0.9], [0.6, 0.7, 0.8], [0.8, 0.9, 1.0]]), 12)
    0.230940107676
    """
    m = judgment_matrix("judgments", judgments)
    judges = m.shape[1]
    if judges < 2:
        raise InsufficientDataError(
            f"judgments needs at least 2 judges (columns) for a standard error across judges, got {judges}",
            argument="judgments")
    cuts = m.sum(axis=0)
    return float(np.std(cuts, ddof=1) / np.sqrt(judges))
