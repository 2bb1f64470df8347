"""Differential prediction: does one regression line predict the criterion equally well for two groups?

==========================  ==========================================  ========================================
spreadsheet name            Python function                             what it gives
==========================  ==========================================  ========================================
``PREDICTION_SLOPE_P``      :func:`prediction_slope_p`                  p of the score × group term (slopes)
``PREDICTION_INTERCEPT_P``  :func:`prediction_intercept_p`              p of the group term, common slope
``PREDICTION_GAP``          :func:`prediction_gap`                      common line − focal line at a score
(Python only)               :func:`differential_prediction`             every line with its intervals, the tests
==========================  ==========================================  ========================================

**Caution.** These tests have little power in samples of the size of most
local validation studies (Aguinis, Culpepper & Pierce 2010): a
non-significant slope or intercept difference is not evidence that the test
predicts alike for both groups. Report the lines and their intervals, not
only the p values.

The model (Cleary 1968), with S the test score, G = 1 for the focal group and
0 for the reference group, and Y the criterion:

    Y = b₀ + b₁S + b₂G + b₃S·G + e

The step-down order (Lautenschlager & Mendoza 1986; Aguinis, Culpepper &
Pierce 2010) first tests the slopes (b₃ = 0: the F test of adding S·G to
b₀ + b₁S + b₂G), then, in the model without the interaction, the intercepts
(b₂ = 0: the F test of adding G to b₀ + b₁S). Each is a nested-model F test
with 1 numerator degree of freedom, equal to the square of the coefficient's
t statistic. When the slopes differ, the intercept test compares the lines
where the score is 0 only, and the gap at the cut score is the figure to read.

Conventions
-----------
* ``scores`` and ``criterion``: one column each, same rows as ``groups``.
  A person with a blank score, a blank criterion, a blank group label or a
  label of neither group is left out (listwise); text in a numeric range is
  refused.
* ``groups``, ``focal``, ``reference``: as in :mod:`~trueband.funcs.dif`
  (labels matched ignoring case and spacing; ``focal`` and ``reference`` are
  single labels, text or numbers).
* The common line is the regression of the criterion on the score among the
  people of the two groups together (the line a selection rule would use).
* Each group needs at least 3 people and some spread of scores; each line's
  intervals use that group's own residual variance (n − 2 df).
"""

from __future__ import annotations

import dataclasses

import numpy as np

from . import _validate as v
from ._lazy import lazy_module
from ._models import least_squares, two_groups
from ._validate import Range
from .errors import ArgumentTypeError, InsufficientDataError, ZeroVarianceError
from .registry import spreadsheet

special = lazy_module("scipy.special")

__all__ = [
    "RegressionLine",
    "FTest",
    "DifferentialPrediction",
    "differential_prediction",
    "prediction_slope_p",
    "prediction_intercept_p",
    "prediction_gap",
]

_REFERENCE = ("Cleary, T. A. (1968). Test bias: prediction of grades of Negro and White students in integrated "
              "colleges. Journal of Educational Measurement 5, 115-124; Lautenschlager, G. J. & Mendoza, J. L. "
              "(1986). A step-down hierarchical multiple regression analysis for examining hypotheses about test "
              "bias in prediction. Applied Psychological Measurement 10, 133-139; Aguinis, H., Culpepper, S. A. & "
              "Pierce, C. A. (2010). Revival of test bias research in preemployment testing. Journal of Applied "
              "Psychology 95, 648-680")


@dataclasses.dataclass(frozen=True)
class RegressionLine:
    """A least-squares line criterion = intercept + slope · score, fitted to one group (or both together)."""

    group: str
    n: int
    intercept: float
    slope: float
    intercept_se: float
    slope_se: float
    residual_sd: float     # √(RSS / (n − 2))
    score_mean: float
    score_ss: float        # Σ(score − mean)²

    @property
    def df(self) -> int:
        return self.n - 2

    def predict(self, score: float) -> float:
        """The line's predicted criterion at a score."""
        return self.intercept + self.slope * score

    def _half_width(self, se: float, confidence: float) -> float:
        v.confidence("confidence", confidence)
        return float(special.stdtrit(self.df, 0.5 + confidence / 2.0)) * se

    def intercept_interval(self, confidence: float = 0.95) -> tuple[float, float]:
        """t interval of the intercept (n − 2 df)."""
        h = self._half_width(self.intercept_se, confidence)
        return self.intercept - h, self.intercept + h

    def slope_interval(self, confidence: float = 0.95) -> tuple[float, float]:
        """t interval of the slope (n − 2 df)."""
        h = self._half_width(self.slope_se, confidence)
        return self.slope - h, self.slope + h

    def mean_interval(self, score: float, confidence: float = 0.95) -> tuple[float, float]:
        """t interval of the mean criterion predicted at a score: ŷ ± t · s · √(1/n + (score − mean)²/SS)."""
        se = self.residual_sd * np.sqrt(1.0 / self.n + (score - self.score_mean) ** 2 / self.score_ss)
        h = self._half_width(float(se), confidence)
        y = self.predict(score)
        return y - h, y + h


@dataclasses.dataclass(frozen=True)
class FTest:
    """A nested-model F test: statistic, its degrees of freedom and its p value."""

    f: float
    df_effect: int
    df_error: int
    p: float


@dataclasses.dataclass(frozen=True)
class DifferentialPrediction:
    """The lines and the step-down tests of :func:`differential_prediction`."""

    focal: RegressionLine
    reference: RegressionLine
    common: RegressionLine
    omnibus: FTest      # common line against separate lines (2 df): any difference at all
    slopes: FTest       # adding score × group to score + group
    intercepts: FTest   # adding group to score (common slope)

    def gap(self, score: float) -> float:
        """Common line minus the focal group's line at a score (> 0: the common line over-predicts the focal group)."""
        return self.common.predict(score) - self.focal.predict(score)

    def reference_gap(self, score: float) -> float:
        """Common line minus the reference group's line at a score."""
        return self.common.predict(score) - self.reference.predict(score)


def _line(name: str, x: np.ndarray, y: np.ndarray) -> RegressionLine:
    if x.size < 3:
        raise InsufficientDataError(f"groups: the {name} group needs at least 3 people with a score and a criterion, "
                                    f"got {x.size}", argument="groups")
    mean = x.mean()
    ss = float(((x - mean) ** 2).sum())
    if not ss > 0:
        raise ZeroVarianceError(f"scores: every person of the {name} group has the same score; its line is undefined",
                                argument="scores")
    fit = least_squares(np.column_stack([np.ones_like(x), x]), y, argument="criterion",
                        what=f"the {name} group's line")
    s2 = fit.rss / fit.df_residual
    return RegressionLine(group=name, n=int(x.size), intercept=float(fit.coefficients[0]),
                          slope=float(fit.coefficients[1]), intercept_se=float(np.sqrt(s2 * fit.xtx_inverse[0, 0])),
                          slope_se=float(np.sqrt(s2 * fit.xtx_inverse[1, 1])), residual_sd=float(np.sqrt(s2)),
                          score_mean=float(mean), score_ss=ss)


def _f_test(rss_small: float, rss_big: float, df_effect: int, df_error: int) -> FTest:
    # RSS can only fall when terms are added; a last-digit rise is rounding.
    f = max(rss_small - rss_big, 0.0) / df_effect / (rss_big / df_error) if rss_big > 0 else np.inf
    if not np.isfinite(f):
        raise ZeroVarianceError("the criterion is predicted without error by the separate lines; the F tests are "
                                "undefined", argument="criterion")
    return FTest(f=float(f), df_effect=df_effect, df_error=df_error, p=float(special.fdtrc(df_effect, df_error, f)))


def _data(scores, criterion, groups, focal, reference):
    x = v.numeric_vector("scores", scores)
    y = v.numeric_vector("criterion", criterion)
    if y.size != x.size:
        raise ArgumentTypeError(f"criterion must have one value per score ({x.size}), got {y.size}",
                                argument="criterion")
    codes = two_groups(groups, focal, reference, x.size)
    keep = (codes >= 0) & ~np.isnan(x) & ~np.isnan(y)
    return x[keep], y[keep], codes[keep].astype(float)


def differential_prediction(scores, criterion, groups, focal, reference) -> DifferentialPrediction:
    """Regression lines of the criterion on the score for the focal group, the reference group and both,
    with the step-down tests of slopes and intercepts (Cleary 1968; Lautenschlager & Mendoza 1986).

    Parameters
    ----------
    scores, criterion, groups, focal, reference
        As in the module's conventions.

    Returns
    -------
    DifferentialPrediction
        ``focal``, ``reference`` and ``common`` lines (:class:`RegressionLine`,
        with intervals), and the F tests ``omnibus`` (2 df: separate lines
        against the common line), ``slopes`` and ``intercepts``.

    Examples
    --------
    >>> scores = [10, 12, 14, 16, 18, 20, 10, 12, 14, 16, 18, 20]
    >>> rating = [3.0, 3.4, 3.5, 4.1, 4.2, 4.8, 2.9, 3.0, 3.6, 3.7, 4.2, 4.3]
    >>> groups = ["a"] * 6 + ["b"] * 6
    >>> result = differential_prediction(scores, rating, groups, "b", "a")
    >>> round(result.focal.slope, 6), round(result.common.slope, 6), round(result.slopes.p, 4)
    (0.152857, 0.162143, 0.444)
    >>> round(result.gap(15), 6)
    0.108333
    """
    x, y, g = _data(scores, criterion, groups, focal, reference)
    focal_line = _line("focal", x[g == 1], y[g == 1])
    reference_line = _line("reference", x[g == 0], y[g == 0])
    common = _line("common", x, y)
    n = x.size
    one = np.ones_like(x)
    what = "the differential-prediction model"
    common_slope = least_squares(np.column_stack([one, x, g]), y, argument="scores", what=what)
    full = least_squares(np.column_stack([one, x, g, x * g]), y, argument="scores", what=what)
    rss_common = common.residual_sd ** 2 * common.df
    return DifferentialPrediction(
        focal=focal_line, reference=reference_line, common=common,
        omnibus=_f_test(rss_common, full.rss, 2, n - 4),
        slopes=_f_test(common_slope.rss, full.rss, 1, n - 4),
        intercepts=_f_test(rss_common, common_slope.rss, 1, n - 3))


_ARGS_DOC = """Parameters
    ----------
    scores : range
        Test scores, one per person (one column or row); blanks leave the person out.
    criterion : range
        Criterion values (e.g. performance ratings), same people in the same order.
    groups : range
        One group label per person; labels are matched ignoring case and spacing.
    focal : range
        Label of the focal group (one cell: text or a number).
    reference : range
        Label of the reference group (one cell: text or a number)."""

_EXAMPLE = """>>> scores = [10, 12, 14, 16, 18, 20, 10, 12, 14, 16, 18, 20]
    >>> rating = [3.0, 3.4, 3.5, 4.1, 4.2, 4.8, 2.9, 3.0, 3.6, 3.7, 4.2, 4.3]
    >>> groups = ["a"] * 6 + ["b"] * 6"""


def _shared_arguments(body):
    """Write the shared arguments and example data into the docstring before the registry reads it."""
    body.__doc__ = body.__doc__.replace("{args}", _ARGS_DOC).replace("{example}", _EXAMPLE)
    return body


@spreadsheet("PREDICTION_SLOPE_P", returns="probability", reference=_REFERENCE + ".")
@_shared_arguments
def prediction_slope_p(scores: Range, criterion: Range, groups: Range, focal: Range, reference: Range) -> float:
    """p value of the slope difference between two groups' regression lines (the score × group term).

    F = (RSS₂ − RSS₃) / (RSS₃ / (n − 4)) with 1 and n − 4 df, where model 2 is
    criterion = b₀ + b₁·score + b₂·group and model 3 adds b₃·score·group (the
    first step of the step-down tests). Low power in small samples: a large p
    is not evidence of equal slopes.

    {args}

    Examples
    --------
    {example}
    >>> round(prediction_slope_p(scores, rating, groups, "b", "a"), 6)
    0.443978
    """
    return differential_prediction(scores, criterion, groups, focal, reference).slopes.p


@spreadsheet("PREDICTION_INTERCEPT_P", returns="probability", reference=_REFERENCE + ".")
@_shared_arguments
def prediction_intercept_p(scores: Range, criterion: Range, groups: Range, focal: Range,
                           reference: Range) -> float:
    """p value of the intercept difference between two groups, in the model with a common slope (no interaction).

    F = (RSS₁ − RSS₂) / (RSS₂ / (n − 3)) with 1 and n − 3 df, where model 1 is
    criterion = b₀ + b₁·score and model 2 adds b₂·group: the second step of
    the step-down tests, to be read when the slopes do not differ. Low power
    in small samples: a large p is not evidence of equal intercepts.

    {args}

    Examples
    --------
    {example}
    >>> round(prediction_intercept_p(scores, rating, groups, "b", "a"), 6)
    0.020523
    """
    return differential_prediction(scores, criterion, groups, focal, reference).intercepts.p


@spreadsheet("PREDICTION_GAP", returns="number", reference=_REFERENCE + ".")
@_shared_arguments
def prediction_gap(scores: Range, criterion: Range, groups: Range, focal: Range, reference: Range,
                   score: float) -> float:
    """Common line's prediction minus the focal group's own line's prediction at a score.

    gap = (a_common + b_common · score) − (a_focal + b_focal · score)

    Positive: the common line over-predicts the focal group's criterion at
    that score (the focal group does less well than the line used for
    everybody says); negative: it under-predicts. The common line is fitted
    to the people of both groups together.

    {args}
    score : float
        The score at which the lines are compared (usually the cut score).

    Examples
    --------
    {example}
    >>> round(prediction_gap(scores, rating, groups, "b", "a", 15), 6)
    0.108333
    """
    return differential_prediction(scores, criterion, groups, focal, reference).gap(score)
