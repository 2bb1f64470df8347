"""Group differences read from whole columns: the values and a column of group labels side by side.

A method family of the ``validity`` topic (the catalog files these functions under it).

====================  ==========================================  ==========================================
spreadsheet name      Python function                              what it gives
====================  ==========================================  ==========================================
``SUBGROUP_SD``       :func:`subgroup_sd`                          the standard deviation of one group's values
``SUBGROUP_D``        :func:`subgroup_d`                           Cohen's d of two groups (or a limit of its
                                                                   noncentral-t interval)
====================  ==========================================  ==========================================

They give the numbers ``STDEV`` and ``COHENS_D_CI`` give on each group's
values picked out into a column of their own, without such a column: a
workbook with one row per applicant then needs no per-group copy of every
score (one formula per applicant and group), only the group column.

Caution
-------
A difference in means is a statistical indicator, not a legal finding, and
not by itself evidence that a test is unfair: read it with the test's
validity.

Conventions
-----------
* ``values``: one row or column of numbers; blanks and empty text are left
  out; other text is refused.
* ``groups``: one label per value (text or numbers), matched to ``group``
  (and ``group_a``, ``group_b``) ignoring case and spacing, as the adverse
  impact functions match labels; a blank label belongs to no group.
* A value counts for a group when its label is the group's and it is a
  number; the order of the values is kept.
"""

from __future__ import annotations

from typing import Literal

import numpy as np

from . import _validate as v
from ._models import _distinct_labels, group_label
from ._validate import Range
from .errors import ArgumentTypeError, DomainError, InsufficientDataError, ZeroVarianceError
from .impact import group_key
from .registry import spreadsheet
from .validity import cohens_d_ci

TOPIC = "validity"

__all__ = ["subgroup_sd", "subgroup_d"]


def _picked(values, groups, group, name: str) -> np.ndarray:
    """The numbers of ``values`` whose label in ``groups`` is ``group`` (argument ``name``), in their order."""
    x = v.numeric_vector("values", values)
    distinct, inverse = _distinct_labels(groups)
    if inverse.size != x.size:
        raise ArgumentTypeError(f"groups must have one label per value ({x.size}), got {inverse.size}",
                                argument="groups")
    key = group_label(name, group)
    code_of = np.array([group_key(label) == key for label in distinct], dtype=bool)
    mine = code_of[inverse] if code_of.size else np.zeros(x.size, dtype=bool)
    if not mine.any():
        raise InsufficientDataError(f"{name} {v.show(group)} has nobody in groups", argument=name)
    picked = x[mine]
    return picked[~np.isnan(picked)]


@spreadsheet("SUBGROUP_SD", returns="nonnegative number",
             reference="Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences (2nd ed.), sec. 2.2 "
                       "(the within-group standard deviation, n - 1 denominator).")
def subgroup_sd(values: Range, groups: Range, group: Range) -> float:
    """The sample standard deviation of the values of one group: STDEV of the values whose label is ``group``.

    s = √( Σ (x − x̄)² / (n − 1) ) over the group's n values

    Parameters
    ----------
    values : range
        The values (one row or column; blanks and empty text left out).
    groups : range
        One group label per value (text or numbers; a blank belongs to no group).
    group : label
        The group (matched ignoring case and spacing).

    Notes
    -----
    Two passes (the mean, then the squared deviations from it, numpy's
    ``std`` with pairwise sums), never the "computational formula"
    Σx² − n x̄², which cancels digits when the values are large and close
    together. The group needs at least 2 values.

    Examples
    --------
    >>> round(subgroup_sd([5, 6, 7, 8, 3, 4], ["a", "a", "a", "a", "b", "b"], "A"), 6)
    1.290994
    """
    x = _picked(values, groups, group, "group")
    if x.size < 2:
        raise InsufficientDataError(f"group {v.show(group)} needs at least 2 values (blanks left out), got {x.size}",
                                    argument="group")
    # numpy's two-pass standard deviation (pairwise sums), as spreadsheet STDEV over the group's own column
    # gives in the engine: a study that picked the group's values into a column shows the same float
    return float(np.std(x, ddof=1))


@spreadsheet("SUBGROUP_D", returns="number",
             reference="Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences (2nd ed.), sec. 2.2 "
                       "and 2.5; Steiger, J. H. & Fouladi, R. T. (1997). Noncentrality interval estimation and the "
                       "evaluation of statistical models. In Harlow, Mulaik & Steiger (Eds.), What If There Were No "
                       "Significance Tests?, 221-257.")
def subgroup_d(values: Range, groups: Range, group_a: Range, group_b: Range, *,
               part: Literal["estimate", "lower", "upper"] = "estimate", confidence: float = 0.95) -> float:
    """Cohen's d of group_a against group_b, both read from one column of values and one of group labels.

    d = (mean_a − mean_b) / s_pooled, s_pooled² = ((n_a − 1) s_a² + (n_b − 1) s_b²) / (n_a + n_b − 2);
    the limits invert the noncentral t distribution of the pooled-variance t statistic, as ``COHENS_D_CI``

    The same number as ``COHENS_D_CI`` (and, for the estimate, ``COHENS_D``)
    on each group's values in a column of their own.

    Parameters
    ----------
    values : range
        The values (one row or column; blanks and empty text left out).
    groups : range
        One group label per value (text or numbers; a blank belongs to no group).
    group_a : label
        The first group (positive d: it scored higher).
    group_b : label
        The second group, usually the reference group.
    part : {"estimate", "lower", "upper"}, optional
        d itself (the default), or the lower or upper limit of its interval.
    confidence : float, optional
        Two-sided confidence level, strictly between 0 and 1; default 0.95.

    Notes
    -----
    Each group needs at least 2 values; zero pooled variance is ``#DIV/0!``.
    No small-sample (Hedges g) correction.

    Examples
    --------
    >>> x = [5, 6, 7, 8, 9, 6, 7, 3, 4, 5, 6, 5, 4, 6]
    >>> g = ["a"] * 7 + ["b"] * 7
    >>> round(subgroup_d(x, g, "a", "b"), 6)
    1.735913
    >>> round(subgroup_d(x, g, "a", "b", part="lower"), 4)
    0.4582
    """
    if group_label("group_a", group_a) == group_label("group_b", group_b):
        raise DomainError(f"group_a and group_b name the same group ({v.show(group_a)})", argument="group_b")
    a = _picked(values, groups, group_a, "group_a")
    b = _picked(values, groups, group_b, "group_b")
    for name, x, label in (("group_a", a, group_a), ("group_b", b, group_b)):
        if x.size < 2:
            raise InsufficientDataError(f"{name} {v.show(label)} needs at least 2 values (blanks left out), got "
                                        f"{x.size}", argument=name)
    try:
        return cohens_d_ci(a, b, part=part, confidence=confidence)
    except ZeroVarianceError:
        raise ZeroVarianceError(f"every value of group_a {v.show(group_a)} and of group_b {v.show(group_b)} is the "
                                f"same within its group: the pooled SD is 0 and d is undefined",
                                argument="group_a") from None
