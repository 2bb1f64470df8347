"""Model fitting shared by the fairness, item-bias and composite modules (private).

* :func:`least_squares`: ordinary least squares through numpy's SVD solver,
  with the residual sum of squares computed from the residuals themselves
  (never as Σy² − b'X'y, which cancels catastrophically).
* :func:`logistic_fit`: maximum-likelihood logistic regression on binomial
  counts (cells of people who share their predictor values) by
  Newton–Raphson (iteratively reweighted least squares) with step halving.
  Fitting counts instead of one row per person gives the same likelihood,
  the same coefficients and the same log-likelihood as the person-level
  fit, at a fraction of the cost.
* :func:`two_groups`: which rows of a label column belong to the focal and
  the reference group, labels merged as :func:`~trueband.funcs.impact.group_key` does.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from . import _validate as v
from .errors import ArgumentTypeError, DomainError, InsufficientDataError, TruebandError, ZeroVarianceError
from .impact import group_key

#: Newton–Raphson stops when the log-likelihood changes by less than this (relative) and the step is tiny.
_LOGIT_TOLERANCE = 1e-10
_LOGIT_MAX_ITERATIONS = 100
#: A fitted linear predictor beyond ±30 (a probability within 1e-13 of 0 or 1) in a cell that holds people
#: means the coefficients run off to infinity: the data are (quasi-)separated and no finite estimate exists.
_SEPARATION_LOGIT = 30.0


@dataclasses.dataclass(frozen=True)
class LeastSquares:
    coefficients: np.ndarray
    rss: float          # residual sum of squares
    df_residual: int
    xtx_inverse: np.ndarray


def least_squares(x: np.ndarray, y: np.ndarray, *, argument: str, what: str) -> LeastSquares:
    """OLS of y on the columns of x (x holds its own intercept column); refuses a rank-deficient x."""
    n, p = x.shape
    if n <= p:
        raise InsufficientDataError(f"{argument}: {what} needs more than {p} complete rows, got {n}",
                                    argument=argument)
    # Scale the columns to unit length before the solve: the rank decision is then about the shape of the
    # data, not the units the scores happen to be in.
    scale = np.sqrt(np.einsum("ij,ij->j", x, x))
    if (scale == 0).any():
        raise ZeroVarianceError(f"{argument}: {what} has a predictor that is 0 for everyone", argument=argument)
    xs = x / scale
    coef, _, rank, sv = np.linalg.lstsq(xs, y, rcond=None)
    if rank < p or sv[-1] <= sv[0] * 1e-10:
        raise ZeroVarianceError(
            f"{argument}: {what} cannot be estimated: its predictors are collinear (a predictor with no "
            f"variance, or one that is a weighted sum of others)", argument=argument)
    resid = y - xs @ coef
    inverse = np.linalg.inv(xs.T @ xs) / np.outer(scale, scale)
    return LeastSquares(coefficients=coef / scale, rss=float(resid @ resid), df_residual=n - p,
                        xtx_inverse=inverse)


def total_sum_of_squares(y: np.ndarray) -> float:
    """Σ(y − ȳ)², two passes."""
    d = y - y.mean()
    return float(d @ d)


@dataclasses.dataclass(frozen=True)
class LogisticFit:
    coefficients: np.ndarray
    log_likelihood: float
    iterations: int


def _log_likelihood(eta, successes, failures) -> float:
    # log p = −log(1 + e^−η), log(1 − p) = −log(1 + e^η): logaddexp keeps both finite for any η.
    return float(-(successes @ np.logaddexp(0.0, -eta)) - failures @ np.logaddexp(0.0, eta))


def logistic_fit(x: np.ndarray, successes: np.ndarray, trials: np.ndarray, *, argument: str,
                 what: str) -> LogisticFit:
    """Maximum-likelihood logistic regression of successes out of trials on the columns of x.

    Raises DomainError when the iterations do not converge or the data are
    separated (no finite maximum-likelihood estimate), ZeroVarianceError when
    the design is singular.
    """
    failures = trials - successes
    p = x.shape[1]
    if np.linalg.matrix_rank(x[trials > 0]) < p:
        raise ZeroVarianceError(f"{argument}: {what} cannot be estimated: its predictors are collinear among the "
                                f"people analysed", argument=argument)
    beta = np.zeros(p)
    mean = successes.sum() / trials.sum()
    beta[0] = np.log(mean) - np.log1p(-mean)  # x[:, 0] is the intercept: start at the overall rate
    eta = x @ beta
    ll = _log_likelihood(eta, successes, failures)
    for iteration in range(1, _LOGIT_MAX_ITERATIONS + 1):
        prob = 0.5 * (1.0 + np.tanh(0.5 * eta))  # the logistic function without overflow
        weight = trials * prob * (1.0 - prob)
        gradient = x.T @ (successes - trials * prob)
        hessian = (x * weight[:, None]).T @ x
        try:
            step = np.linalg.solve(hessian, gradient)
        except np.linalg.LinAlgError:
            raise DomainError(f"{argument}: {what} did not converge: the information matrix became singular "
                              f"(the data are separated)", argument=argument) from None
        for _ in range(30):  # step halving: never accept a step that lowers the likelihood
            trial_eta = x @ (beta + step)
            trial_ll = _log_likelihood(trial_eta, successes, failures)
            if trial_ll >= ll - 1e-12 * abs(ll):
                break
            step = step / 2.0
        beta, eta, change, ll = beta + step, trial_eta, trial_ll - ll, trial_ll
        if abs(change) <= _LOGIT_TOLERANCE * (abs(ll) + 1.0) and np.max(np.abs(step)) < 1e-6:
            break
    else:
        raise DomainError(f"{argument}: {what} did not converge in {_LOGIT_MAX_ITERATIONS} iterations",
                          argument=argument)
    if np.max(np.abs(eta[trials > 0])) > _SEPARATION_LOGIT:
        raise DomainError(f"{argument}: {what} has no finite estimate: the responses are separated (within a "
                          f"group, everyone above some score answers one way and everyone below it the other)",
                          argument=argument)
    return LogisticFit(coefficients=beta, log_likelihood=ll, iterations=iteration)


# ---------------------------------------------------------------- two groups from a label column

def group_label(name: str, value) -> str:
    """A single focal or reference label (text or a number) as its group key."""
    cells = v.label_matrix(name, value)
    if cells.size != 1:
        raise ArgumentTypeError(f"{name} must be a single label, got a range of {cells.shape[0]} rows by "
                                f"{cells.shape[1]} columns", argument=name)
    key = group_key(cells[0, 0])
    if key is None:
        raise ArgumentTypeError(f"{name} is blank; it must name a group", argument=name)
    return key


def two_groups(groups, focal, reference, n_rows: int) -> np.ndarray:
    """Per row: 1 for the focal group, 0 for the reference group, −1 for anyone else (blank or another group)."""
    distinct, inverse = _distinct_labels(groups)
    if inverse.size != n_rows:
        raise ArgumentTypeError(f"groups must have one label per row ({n_rows}), got {inverse.size}",
                                argument="groups")
    focal_key, reference_key = group_label("focal", focal), group_label("reference", reference)
    if focal_key == reference_key:
        raise DomainError(f"focal and reference name the same group ({v.show(focal)})", argument="reference")
    keys = [group_key(label) for label in distinct]
    code_of = np.array([1 if key == focal_key else 0 if key == reference_key else -1 for key in keys],
                       dtype=np.int64)
    codes = code_of[inverse]
    for code, name, value in ((1, "focal", focal), (0, "reference", reference)):
        if not (codes == code).any():
            raise InsufficientDataError(f"{name} group {v.show(value)} has nobody in groups", argument=name)
    return codes


def _column_cells(groups) -> list | None:
    """The cells of a one-row or one-column range as a flat list, without a Python step per cell; None for
    anything else (the general path then reads or refuses it)."""
    if isinstance(groups, np.ndarray):
        if groups.ndim == 1 or (groups.ndim == 2 and 1 in groups.shape):
            return groups.ravel().tolist()
        return None
    if not isinstance(groups, (list, tuple)) or not groups:
        return None
    kinds = set(map(type, groups))
    if not kinds & {list, tuple, np.ndarray}:
        return list(groups)
    if kinds <= {list, tuple} and set(map(len, groups)) == {1}:
        return [row[0] for row in groups]
    if len(groups) == 1 and isinstance(groups[0], (list, tuple)):
        return list(groups[0])
    return None


def _distinct_labels(groups) -> tuple[list, np.ndarray]:
    """The distinct labels of a label column (read as :func:`_validate.label_vector` reads them) and, per row,
    the index of its label.

    Each distinct cell value is read once, not each of 100,000 cells; any cell the fast path cannot take
    (a logical value, something unhashable) sends the whole column through ``label_vector``, which also
    gives the messages their row numbers.
    """
    flat = _column_cells(groups)
    if flat is not None and not set(map(type, flat)) & {bool, np.bool_, list, tuple, dict, np.ndarray}:
        try:
            distinct = dict.fromkeys(flat)  # 1 and 1.0 are one key here, as label_vector makes them
        except TypeError:  # an unhashable cell: the general path reports it
            distinct = None
        if distinct is not None:
            position = {label: i for i, label in enumerate(distinct)}
            inverse = np.fromiter(map(position.__getitem__, flat), dtype=np.int64, count=len(flat))
            try:
                return v.label_vector("groups", list(distinct)).tolist(), inverse
            except TruebandError:
                pass  # read again cell by cell, so the message names the cell's row
    labels = v.label_vector("groups", groups).tolist()
    position = {}
    for label in labels:
        position.setdefault(label, len(position))
    return list(position), np.fromiter(map(position.__getitem__, labels), dtype=np.int64, count=len(labels))
