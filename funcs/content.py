"""Content evidence from subject-matter experts' ratings (Lawshe's content validity ratio).

================  ==============================  ==========================================================
spreadsheet name  Python function                 what it gives
================  ==============================  ==========================================================
``CVR``           :func:`content_validity_ratio`  (nₑ − N/2)/(N/2) for one item
``CVR_CRITICAL``  :func:`cvr_critical`            the CVR an item needs to beat chance at a one-tailed alpha
================  ==============================  ==========================================================

Each expert on a panel of N rates each item (or each task link) "essential",
"useful but not essential" or "not necessary" for the job (Lawshe, 1975);
nₑ counts the "essential" ratings. An item whose CVR reaches the critical
value is kept; Lawshe's content validity index (CVI) is the mean CVR of the
items kept (a spreadsheet AVERAGE of those CVRs).
"""

from __future__ import annotations

import math
from fractions import Fraction
from typing import Literal

import numpy as np

from . import _validate as v
from ._lazy import lazy_module
from .errors import DomainError, InsufficientDataError
from .registry import spreadsheet

special = lazy_module("scipy.special")

__all__ = ["content_validity_ratio", "cvr_critical", "MAX_PANEL"]

#: Largest panel CVR_CRITICAL takes (the exact tail is summed in whole numbers; no panel comes near this).
MAX_PANEL = 10000

_LAWSHE = "Lawshe, C. H. (1975). A quantitative approach to content validity. Personnel Psychology 28, 563-575."


@spreadsheet("CVR", returns="correlation", elementwise=["essential", "panel"], reference=_LAWSHE)
def content_validity_ratio(essential: int, panel: int) -> float:
    """Lawshe's content validity ratio of one item: how far the "essential" ratings exceed half the panel.

    CVR = (nₑ − N/2)/(N/2), from −1 (no expert rates it essential) through 0
    (exactly half do) to 1 (all do).

    Parameters
    ----------
    essential : int
        Number of experts rating the item "essential", from 0 to panel.
    panel : int
        Number of experts who rated the item, at least 1.

    Notes
    -----
    N counts the experts who rated the item; an expert who left it unrated
    is not in N for that item.

    Examples
    --------
    Eight of ten experts: (8 − 5)/5 = 0.6.

    >>> content_validity_ratio(8, 10)
    0.6
    """
    v.at_least("panel", panel, 1)
    n_e, n = np.asarray(essential, dtype=float), np.asarray(panel, dtype=float)
    bad = (n_e < 0) | (n_e > n)
    if bad.any():
        raise DomainError(f"essential must be between 0 and panel ({v.show(np.broadcast_to(n, bad.shape)[bad].flat[0])}), "
                          f"got {v.show(np.broadcast_to(n_e, bad.shape)[bad].flat[0])}", argument="essential")
    return (n_e - n / 2.0) / (n / 2.0)


@spreadsheet("CVR_CRITICAL", returns="correlation",
             reference="Ayre, C. & Scally, A. J. (2014). Critical values for Lawshe's content validity ratio: "
                       "revisiting the original methods of calculation. Measurement and Evaluation in Counseling and "
                       "Development 47, 79-86; Wilson, F. R., Pan, W. & Schumsky, D. A. (2012). Recalculation of the "
                       "critical values for Lawshe's content validity ratio. Measurement and Evaluation in "
                       "Counseling and Development 45, 197-210; " + _LAWSHE)
def cvr_critical(panel: int, *, alpha: float = 0.05, method: Literal["exact", "normal"] = "exact") -> float:
    """Critical content validity ratio for a panel: the CVR an item must reach for its "essential" ratings to beat chance.

    Under the null hypothesis each expert rates an item "essential" with
    probability ½, so nₑ ~ binomial(N, ½).

    * "exact" (default; Ayre & Scally, 2014): the smallest nₑ whose one-tailed
      probability P(X ≥ nₑ) is at most alpha, reported as its CVR
      (nₑ − N/2)/(N/2).
    * "normal" (Wilson, Pan & Schumsky, 2012): the normal approximation
      without continuity correction, CVR = z₁₋α/√N.

    Parameters
    ----------
    panel : int
        Number of experts, from 1 to 10,000.
    alpha : float, optional
        One-tailed significance level, greater than 0 and less than 0.5; default 0.05.
    method : {"exact", "normal"}, optional
        "exact" (default), the exact binomial rule; "normal", the normal
        approximation, labelled as such wherever it is shown.

    Notes
    -----
    The exact rule compares whole-number binomial sums with alpha·2ᴺ exactly,
    so a tail probability equal to alpha (e.g. 1/32 with 5 experts) counts as
    "at most alpha". A panel too small to reach alpha even when every expert
    says "essential" (fewer than 5 at alpha 0.05) gives ``#N/A``, as does a
    normal-approximation value above 1. The exact critical values are the
    CVRs of whole counts, so they do not fall steadily with N.

    Examples
    --------
    Ten experts: P(X ≥ 9) = 11/1024 ≤ 0.05 < P(X ≥ 8) = 56/1024, so nₑ = 9 and CVR = 0.8.

    >>> cvr_critical(10)
    0.8
    >>> round(cvr_critical(13, method="normal"), 3)  # 1.645/√13
    0.456
    """
    v.between("panel", panel, 1, MAX_PANEL)
    v.between("alpha", alpha, 0.0, 0.5, low_open=True, high_open=True)
    n = int(panel)
    if method == "normal":
        cvr = float(-special.ndtri(alpha)) / math.sqrt(n)
        if cvr > 1.0:
            raise InsufficientDataError(
                f"panel of {n} is too small: the normal approximation asks for a CVR of {v.show(cvr)}, above 1",
                argument="panel")
        return cvr
    limit = Fraction(alpha) * 2 ** n  # P(X >= k) <= alpha  <=>  sum_{j >= k} C(n, j) <= alpha * 2^n
    tail, k = 0, n + 1
    while k > 0 and tail + math.comb(n, k - 1) <= limit:
        k -= 1
        tail += math.comb(n, k)
    if k > n:
        raise InsufficientDataError(
            f"panel of {n} is too small: even all {n} experts rating an item essential has probability "
            f"1/{2 ** n} > alpha ({v.show(alpha)})", argument="panel")
    return (k - n / 2.0) / (n / 2.0)
