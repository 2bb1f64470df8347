"""Estimates with their confidence intervals and p values, as result objects (the scipy.stats style).

The spreadsheet functions return one number each (a cell holds one value,
and ``part`` chooses it); from Python one call gives the whole result:

===========================  ==========================  =================================================
Python function              result                      interval and p value
===========================  ==========================  =================================================
:func:`cronbach_alpha_result`  :class:`AlphaResult`      Feldt's F interval; F test of alpha = 0
:func:`correlation_result`   :class:`CorrelationResult`  Fisher z interval; t test of r = 0
``impact_ratio_result``      ``ImpactRatio``             log (Katz) interval; Fisher's exact test (``impact_intervals``)
``intraclass_correlation``   ``IntraclassCorrelation``   McGraw & Wong F limits and test (module ``intraclass``)
===========================  ==========================  =================================================

Each result is a frozen dataclass with ``statistic`` (the estimate), ``pvalue``
and ``confidence_interval(confidence_level=0.95)``, which returns a
:class:`ConfidenceInterval` ``(low, high)``. The intervals and tests are
those of the spreadsheet functions named in each docstring, so a sheet and a
notebook give the same numbers.
"""

from __future__ import annotations

import dataclasses
from typing import NamedTuple

import numpy as np

from . import _validate as v
from ._numeric import centred
from .errors import InsufficientDataError, ZeroVarianceError
from .reliability import alpha_confidence_limit, cronbach_alpha
from .validity import correlation_confidence_limit, correlation_p_value

__all__ = [
    "ConfidenceInterval",
    "AlphaResult",
    "cronbach_alpha_result",
    "CorrelationResult",
    "correlation_result",
]


class ConfidenceInterval(NamedTuple):
    """Lower and upper limits of a two-sided confidence interval."""

    low: float
    high: float


def _level(confidence_level) -> float:
    return v.confidence("confidence_level", v.number("confidence_level", confidence_level))


# ---------------------------------------------------------------- coefficient alpha

@dataclasses.dataclass(frozen=True)
class AlphaResult:
    """Coefficient alpha with Feldt's interval and test (see :func:`cronbach_alpha_result`)."""

    statistic: float  # coefficient alpha
    pvalue: float     # one-sided F test of alpha = 0 against alpha > 0
    n_people: int     # complete rows used (listwise deletion)
    n_items: int

    def confidence_interval(self, confidence_level: float = 0.95) -> ConfidenceInterval:
        """Feldt's two-sided interval, as the spreadsheet's ``ALPHA_CI``."""
        level = _level(confidence_level)
        args = (self.statistic, self.n_people, self.n_items)
        return ConfidenceInterval(alpha_confidence_limit(*args, part="lower", confidence=level),
                                  alpha_confidence_limit(*args, part="upper", confidence=level))


def cronbach_alpha_result(items) -> AlphaResult:
    """Coefficient alpha of item scores, with Feldt's confidence interval and F test.

    The estimate is :func:`~trueband.funcs.reliability.cronbach_alpha`
    (``CRONBACH_ALPHA``). Feldt (1965): (1 − alpha_population)/(1 − alpha)
    follows F(n − 1, (n − 1)(k − 1)); the interval is ``ALPHA_CI``'s, and the p
    value tests alpha = 0 against alpha > 0: p = P(F ≥ 1/(1 − alpha)).

    Parameters
    ----------
    items : range
        Item scores, one row per person and one column per item (a list of rows, a numpy array or a
        pandas DataFrame); rows with a blank (None, NaN) are left out (listwise deletion).

    Returns
    -------
    AlphaResult
        ``statistic``, ``pvalue``, ``n_people``, ``n_items`` and ``confidence_interval(confidence_level=0.95)``.

    References
    ----------
    Feldt, L. S. (1965). The approximate sampling distribution of Kuder-Richardson reliability
    coefficient twenty. Psychometrika 30, 357-370.

    Examples
    --------
    >>> res = cronbach_alpha_result([[1, 2, 2], [2, 3, 3], [3, 3, 4], [4, 5, 4]])
    >>> round(res.statistic, 6), [round(x, 4) for x in res.confidence_interval()]
    (0.948529, [0.6604, 0.9965])
    """
    from scipy import stats  # slow to import: on first use

    alpha = cronbach_alpha(items)
    x = v.complete_rows("items", v.numeric_matrix("items", items), min_rows=2, min_columns=2)
    n, k = x.shape
    df1, df2 = n - 1, (n - 1) * (k - 1)
    pvalue = 0.0 if alpha >= 1.0 else float(stats.f.sf(1.0 / (1.0 - alpha), df1, df2))
    return AlphaResult(alpha, pvalue, n, k)


# ---------------------------------------------------------------- Pearson correlation

@dataclasses.dataclass(frozen=True)
class CorrelationResult:
    """A Pearson correlation with its Fisher z interval and t test (see :func:`correlation_result`)."""

    statistic: float  # Pearson r
    pvalue: float     # two-sided t test of r = 0
    n: int            # pairs used (pairs with a blank left out)

    def confidence_interval(self, confidence_level: float = 0.95) -> ConfidenceInterval:
        """Fisher's z interval, as the spreadsheet's ``R_CI``."""
        level = _level(confidence_level)
        return ConfidenceInterval(
            correlation_confidence_limit(self.statistic, self.n, part="lower", confidence=level),
            correlation_confidence_limit(self.statistic, self.n, part="upper", confidence=level))


def correlation_result(x, y) -> CorrelationResult:
    """Pearson correlation of two score lists (a predictor and a criterion), with interval and p value.

    r = Σ(x − x̄)(y − ȳ) / √(Σ(x − x̄)² Σ(y − ȳ)²); the p value is the two-sided
    t test (t = r√(n − 2)/√(1 − r²) on n − 2 degrees of freedom, ``R_PVALUE``)
    and the interval Fisher's z (``R_CI``).

    Parameters
    ----------
    x : range
        Scores on one variable, one row or column (a list, numpy array or pandas Series).
    y : range
        Scores on the other variable for the same people, in the same order and of the same length.

    Notes
    -----
    Pairs where either score is blank (None, NaN) are left out; at least 4
    complete pairs are needed (Fisher's interval uses n − 3). A constant x or
    y gives ``ZeroVarianceError``. The scores are centred and scaled before
    the sums of squares, so scores of 1e200 or with a common offset lose no digits.

    References
    ----------
    Fisher, R. A. (1921). On the "probable error" of a coefficient of correlation deduced from a
    small sample. Metron 1, 3-32.

    Examples
    --------
    >>> res = correlation_result([1, 2, 3, 4, 5, 6], [2, 1, 4, 3, 6, 5])
    >>> round(res.statistic, 6), round(res.pvalue, 6), [round(b, 4) for b in res.confidence_interval()]
    (0.828571, 0.041563, [0.0519, 0.9807])
    """
    a = v.numeric_vector("x", x)
    b = v.numeric_vector("y", y)
    if a.size != b.size:
        raise InsufficientDataError(f"y must have as many scores as x ({a.size}), got {b.size}", argument="y")
    keep = ~(np.isnan(a) | np.isnan(b))
    n = int(keep.sum())
    if n < 4:
        raise InsufficientDataError(f"x and y need at least 4 complete pairs, got {n}", argument="x")
    ca, cb = centred(a[keep], axis=None), centred(b[keep], axis=None)
    ss_a, ss_b = ca @ ca, cb @ cb
    for ss, name in ((ss_a, "x"), (ss_b, "y")):
        if not ss > 0:  # a constant column centres to exactly 0 (see _numeric.centred)
            raise ZeroVarianceError(f"{name} has zero variance; the correlation is undefined", argument=name)
    r = float(np.clip((ca @ cb) / np.sqrt(ss_a * ss_b), -1.0, 1.0))
    return CorrelationResult(r, correlation_p_value(r, n, tails=2), n)
