"""Adverse impact pooled across strata (sites, years, job groups): the Mantel–Haenszel family.

========================  ==========================================  ===========================================
spreadsheet name          Python function                              what it gives
========================  ==========================================  ===========================================
``POOLED_IMPACT_P``       :func:`pooled_impact_p`                      Cochran–Mantel–Haenszel test p
``POOLED_ODDS_RATIO``     :func:`pooled_odds_ratio`                    Mantel–Haenszel common odds ratio or a limit
``POOLED_HOMOGENEITY_P``  :func:`pooled_homogeneity_p`                 Breslow–Day test (Tarone) p
``POOLED_EXACT_P``        :func:`pooled_exact_p`                       exact conditional test p
(Python only)             :func:`mantel_haenszel`                      :class:`MantelHaenszel`: OR, SE, CMH, p
(Python only)             :func:`breslow_day`                          :class:`BreslowDay`: statistic, df, p
(Python only)             :func:`strata_counts`                        the checked strata range as an array
========================  ==========================================  ===========================================

**Caution.** Adverse impact figures are statistical indicators, not legal
findings; defer to the employment law that applies where you hire and to
qualified professional advice. A pooled figure summarises strata only when
their odds ratios agree: when the homogeneity test rejects, show the strata,
not one pooled number (the aggregate can even reverse within strata).

The strata range
----------------
One row per stratum, four columns: focal selected, focal applicants,
reference selected, reference applicants (the order of the four counts of
``IMPACT_RATIO``). Each stratum is the 2 × 2 table

=========  ==================  ==========================
group      selected            not selected
=========  ==================  ==========================
focal      a = focal selected  b = focal applicants − a
reference  c = ref selected    d = ref applicants − c
=========  ==================  ==========================

with n = a + b + c + d. Counts are whole numbers, at least 0, selected at most
applicants (``#NUM!`` naming the row and column). A row left wholly blank is
skipped (a range may be drawn taller than the data); a row blank in some
cells only is refused (``#VALUE!``). A range that is not four columns wide is
refused (``#VALUE!``).

A stratum carries no information about the comparison when one of its
margins is 0: no focal applicants, no reference applicants, nobody selected
or everybody selected. Its table is the only one possible given its margins,
so it adds nothing to the Mantel–Haenszel sums, to the CMH statistic
(observed = expected, variance 0), to the exact conditional distribution or
to the Breslow–Day statistic. Such strata are left out of every figure here
(and of the Breslow–Day degrees of freedom); a range with no informative
stratum is ``#N/A``.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Literal

import numpy as np

from ._budget import check_cost, check_time
from . import _validate as v
from ._lazy import lazy_module
from ._validate import Range
from .errors import ArgumentTypeError, DomainError, InsufficientDataError, ZeroVarianceError
from .impact import CAUTION
from .impact_intervals import ConfidenceInterval
from .registry import spreadsheet
from .scores import two_sided_z

special = lazy_module("scipy.special")

__all__ = [
    "pooled_impact_p",
    "pooled_odds_ratio",
    "pooled_homogeneity_p",
    "pooled_exact_p",
    "mantel_haenszel",
    "MantelHaenszel",
    "breslow_day",
    "BreslowDay",
    "strata_counts",
    "EXACT_POOLED_MAX_TABLES",
    "CAUTION",
]

_COLUMNS = ("focal selected", "focal applicants", "reference selected", "reference applicants")

#: Largest number of possible tables (summed over strata) the exact conditional test enumerates.
EXACT_POOLED_MAX_TABLES = 2_000_000

_MH_REFERENCE = ("Mantel, N. & Haenszel, W. (1959). Statistical aspects of the analysis of data from retrospective "
                 "studies of disease. Journal of the National Cancer Institute 22, 719-748")


# ---------------------------------------------------------------- the strata range

def _bad_cell(mask: np.ndarray) -> tuple[int, int]:
    r, c = np.argwhere(mask)[0]
    return int(r), int(c)


def strata_counts(strata) -> np.ndarray:
    """The strata range checked and as a (strata × 4) float array of whole numbers, wholly blank rows dropped.

    Examples
    --------
    >>> strata_counts([[3, 10, 6, 10], [None, None, None, None], [0, 5, 2, 8]]).tolist()
    [[3.0, 10.0, 6.0, 10.0], [0.0, 5.0, 2.0, 8.0]]
    """
    m = v.numeric_matrix("strata", strata)
    if m.shape[1] != 4:
        raise ArgumentTypeError(f"strata must have 4 columns ({', '.join(_COLUMNS)}), got {m.shape[1]}",
                                argument="strata")
    blank = np.isnan(m)
    rows = np.flatnonzero(~blank.all(axis=1))
    if blank.any():
        partial = blank & ~blank.all(axis=1, keepdims=True)
        if partial.any():
            r, c = _bad_cell(partial)
            raise ArgumentTypeError(f"strata has a blank {_COLUMNS[c]} in row {r + 1}; fill the row or clear all "
                                    "four cells", argument="strata")
        m = m[rows]
    if m.shape[0] == 0:
        raise InsufficientDataError("strata holds no rows with counts", argument="strata")
    for mask, rule in ((m < 0, "at least 0"), (m != np.round(m), "a whole number")):
        if mask.any():
            r, c = _bad_cell(mask)
            raise DomainError(f"strata: the {_COLUMNS[c]} in row {rows[r] + 1} must be {rule}, got "
                              f"{v.show(m[r, c])}", argument="strata")
    over = m[:, [0, 2]] > m[:, [1, 3]]
    if over.any():
        r, c = _bad_cell(over)
        raise DomainError(f"strata: the {_COLUMNS[2 * c]} in row {rows[r] + 1} ({v.show(m[r, 2 * c])}) must be at "
                          f"most the {_COLUMNS[2 * c + 1]} ({v.show(m[r, 2 * c + 1])})", argument="strata")
    return m


@dataclasses.dataclass(frozen=True)
class _Tables:
    """The informative strata as cell and margin arrays."""

    a: np.ndarray
    b: np.ndarray
    c: np.ndarray
    d: np.ndarray
    dropped: int

    @property
    def n(self):
        return self.a + self.b + self.c + self.d

    @property
    def focal(self):
        return self.a + self.b

    @property
    def selected(self):
        return self.a + self.c


def _tables(strata) -> _Tables:
    m = strata_counts(strata)
    a, b = m[:, 0], m[:, 1] - m[:, 0]
    c, d = m[:, 2], m[:, 3] - m[:, 2]
    informative = (a + b > 0) & (c + d > 0) & (a + c > 0) & (b + d > 0)
    if not informative.any():
        raise InsufficientDataError(
            "strata: no stratum carries information (each lacks focal or reference applicants, or selected "
            "everybody or nobody)", argument="strata")
    keep = informative if not informative.all() else slice(None)
    return _Tables(a[keep], b[keep], c[keep], d[keep], int((~informative).sum()))


# ---------------------------------------------------------------- Mantel-Haenszel and CMH

@dataclasses.dataclass(frozen=True)
class MantelHaenszel:
    """The Mantel–Haenszel common odds ratio and the Cochran–Mantel–Haenszel test.

    ``odds_ratio`` Σ(a·d/n) / Σ(b·c/n); ``log_standard_error`` the
    Robins–Breslow–Greenland (1986) standard error of its log; ``statistic``
    the CMH chi-square (1 df) and ``p_value`` its two-sided p;
    ``correction`` whether the continuity correction was applied;
    ``strata_used`` and ``strata_dropped`` the informative strata and those
    without information.
    """

    odds_ratio: float
    log_standard_error: float
    statistic: float
    p_value: float
    correction: bool
    strata_used: int
    strata_dropped: int

    def confidence_interval(self, confidence_level: float = 0.95) -> ConfidenceInterval:
        """Two-sided interval exp(ln OR ∓ z · SE); (0, inf) when the odds ratio is 0."""
        v.confidence("confidence_level", confidence_level)
        if self.odds_ratio == 0:
            return ConfidenceInterval(0.0, math.inf)
        half = float(two_sided_z(confidence_level)) * self.log_standard_error
        return ConfidenceInterval(self.odds_ratio * math.exp(-half), self.odds_ratio * math.exp(half))


def _rbg_log_se(t: _Tables, r_sum: float, s_sum: float) -> float:
    """Robins, Breslow & Greenland (1986) variance of ln OR_MH, from P = (a+d)/n, Q = (b+c)/n, R = ad/n, S = bc/n."""
    n = t.n
    p, q = (t.a + t.d) / n, (t.b + t.c) / n
    r, s = t.a * t.d / n, t.b * t.c / n
    var = (np.sum(p * r) / (2 * r_sum ** 2) + np.sum(p * s + q * r) / (2 * r_sum * s_sum)
           + np.sum(q * s) / (2 * s_sum ** 2))
    return float(np.sqrt(var))


def _cmh(t: _Tables, correction: bool) -> tuple[float, float]:
    n = t.n
    expected = t.focal * t.selected / n
    # Hypergeometric variance n1·n0·m1·m0 / (n²(n − 1)); every informative stratum has n >= 2.
    variance = t.focal * (t.c + t.d) * t.selected * (t.b + t.d) / (n * n * (n - 1.0))
    delta = abs(float(np.sum(t.a) - np.sum(expected)))
    # Continuity correction as R's mantelhaen.test: 0.5 taken off only when |delta| >= 0.5.
    shift = 0.5 if correction and delta >= 0.5 else 0.0
    statistic = (delta - shift) ** 2 / float(np.sum(variance))
    return statistic, float(special.chdtrc(1.0, statistic))


def mantel_haenszel(strata, *, correction: bool = True) -> MantelHaenszel:
    """Mantel–Haenszel common odds ratio with its standard error, and the CMH test (see :func:`pooled_odds_ratio`
    and :func:`pooled_impact_p` for formulas and conventions).

    Examples
    --------
    >>> mh = mantel_haenszel([[10, 40, 20, 40], [5, 30, 15, 35]])
    >>> round(mh.odds_ratio, 6), round(mh.p_value, 6)
    (0.304348, 0.002356)
    >>> ci = mh.confidence_interval(0.95)
    >>> round(ci.low, 6), round(ci.high, 6)
    (0.145935, 0.634719)
    """
    t = _tables(strata)
    n = t.n
    r_sum, s_sum = float(np.sum(t.a * t.d / n)), float(np.sum(t.b * t.c / n))
    if s_sum == 0:
        raise ZeroVarianceError(
            "strata: in every informative stratum every focal applicant was selected or no reference applicant "
            "was, so Σ b·c/n is 0 and the pooled odds ratio is undefined", argument="strata")
    se = math.inf if r_sum == 0 else _rbg_log_se(t, r_sum, s_sum)
    statistic, p = _cmh(t, correction)
    return MantelHaenszel(r_sum / s_sum, se, statistic, p, correction, int(t.a.size), t.dropped)


@spreadsheet("POOLED_IMPACT_P", returns="probability",
             reference=_MH_REFERENCE + "; Cochran, W. G. (1954). Some methods for strengthening the common "
                                       "chi-square tests. Biometrics 10, 417-451; Agresti, A. (2013). Categorical "
                                       "Data Analysis (3rd ed.), sec. 6.4.")
def pooled_impact_p(strata: Range, *, correction: bool = True) -> float:
    """Cochran–Mantel–Haenszel test p that focal and reference odds of selection do not differ within strata.

    CMH = (|Σ(a − E a)| − ½)² / Σ Var a,  E a = n1·m1/n,  Var a = n1·n0·m1·m0 / (n²(n − 1)),
    p = P(χ²₁ ≥ CMH), per stratum n1 focal and n0 reference applicants, m1
    selected and m0 not selected, a focal selected

    The test that the common odds ratio is 1, for selection data gathered in
    strata (sites, years, job groups) that must not be added together. It is
    two-sided. A statistical indicator, not a legal finding; defer to the
    employment law that applies where you hire and to qualified professional
    advice.

    Parameters
    ----------
    strata : range
        One row per stratum: focal selected, focal applicants, reference selected, reference applicants.
    correction : bool, optional
        Apply the continuity correction (½); default TRUE.

    Notes
    -----
    The correction is taken off only when |Σ(a − E a)| ≥ ½ (as R's
    ``mantelhaen.test``); below that the uncorrected statistic is used, so the
    corrected statistic never exceeds the uncorrected one. Strata without
    information are left out (see the module's notes on the strata range).
    The chi-square approximation wants enough people overall; with few, use
    ``POOLED_EXACT_P``.

    Examples
    --------
    >>> round(pooled_impact_p([[10, 40, 20, 40], [5, 30, 15, 35]]), 6)
    0.002356
    """
    t = _tables(strata)
    return _cmh(t, bool(correction))[1]


@spreadsheet("POOLED_ODDS_RATIO", returns="nonnegative number",
             reference=_MH_REFERENCE + "; Robins, J., Breslow, N. & Greenland, S. (1986). Estimators of the "
                                       "Mantel-Haenszel variance consistent in both sparse data and large-strata "
                                       "limiting models. Biometrics 42, 311-323.")
def pooled_odds_ratio(strata: Range, *, part: Literal["estimate", "lower", "upper"] = "estimate",
                      confidence: float = 0.95) -> float:
    """Mantel–Haenszel common odds ratio of selection (focal over reference) across strata, or a confidence limit.

    OR_MH = Σ(a·d/n) / Σ(b·c/n);  limits exp(ln OR_MH ∓ z · SE), SE² the
    Robins–Breslow–Greenland (1986) variance
    Σ P·R / (2(ΣR)²) + Σ(P·S + Q·R) / (2 ΣR ΣS) + Σ Q·S / (2(ΣS)²),
    P = (a + d)/n, Q = (b + c)/n, R = a·d/n, S = b·c/n

    Below 1 the focal group's odds of selection are lower within strata. A
    statistical indicator, not a legal finding; defer to the employment law
    that applies where you hire and to qualified professional advice.

    Parameters
    ----------
    strata : range
        One row per stratum: focal selected, focal applicants, reference selected, reference applicants.
    part : {"estimate", "lower", "upper"}, optional
        The pooled odds ratio (default) or the lower or upper limit of its two-sided interval.
    confidence : float, optional
        Two-sided confidence level, strictly between 0 and 1; default 0.95.

    Notes
    -----
    Zero cells, with no 0.5 added: when Σ b·c/n is 0 (in every informative
    stratum every focal applicant was selected or no reference applicant was)
    the odds ratio is undefined (``#DIV/0!``); when Σ a·d/n is 0 it is 0, its
    lower limit 0 and its upper limit not finite (``#NUM!``). A single
    stratum gives the sample odds ratio (``IMPACT_ODDS_RATIO``). Before
    reporting one pooled figure check ``POOLED_HOMOGENEITY_P``.

    Examples
    --------
    >>> data = [[10, 40, 20, 40], [5, 30, 15, 35]]
    >>> round(pooled_odds_ratio(data), 6), round(pooled_odds_ratio(data, part="upper"), 6)
    (0.304348, 0.634719)
    """
    v.confidence("confidence", confidence)
    mh = mantel_haenszel(strata)
    if part == "estimate":
        return mh.odds_ratio
    if part == "upper" and mh.odds_ratio == 0:
        raise DomainError("strata: the pooled odds ratio is 0 (no stratum has a focal selection and a reference "
                          "rejection), so its interval has no finite upper limit", argument="strata")
    ci = mh.confidence_interval(confidence)
    return ci.low if part == "lower" else ci.high


# ---------------------------------------------------------------- Breslow-Day

@dataclasses.dataclass(frozen=True)
class BreslowDay:
    """Breslow–Day test that the strata share one odds ratio: ``statistic`` (chi-square, ``df`` = informative
    strata − 1), ``p_value``, and whether Tarone's (1985) adjustment was applied (``tarone``)."""

    statistic: float
    df: int
    p_value: float
    tarone: bool


def _fitted_focal_selected(t: _Tables, psi: float) -> np.ndarray:
    """The focal-selected cell of each stratum's table with its margins and odds ratio psi.

    Solves (1 − ψ)x² + (n0 − m1 + ψ(n1 + m1))x − ψ·n1·m1 = 0 for the root within the
    margins; x = C/q with q = −(B + √(B² − 4AC))/2 is that root and stays accurate as ψ → 1 (A → 0).
    """
    n1, m1 = t.focal, t.selected
    n0 = t.c + t.d
    a_, b_, c_ = 1.0 - psi, n0 - m1 + psi * (n1 + m1), -psi * n1 * m1
    q = -(b_ + np.sqrt(b_ * b_ - 4.0 * a_ * c_)) / 2.0  # B > 0 here: n0 − m1 + ψ(n1 + m1) > n0 − m1 + m1 ≥ 0
    return c_ / q


def breslow_day(strata, *, tarone: bool = True) -> BreslowDay:
    """Breslow–Day homogeneity test of the odds ratios (see :func:`pooled_homogeneity_p`).

    Examples
    --------
    >>> bd = breslow_day([[10, 40, 20, 40], [5, 30, 15, 35], [12, 20, 10, 25]])
    >>> round(bd.statistic, 6), bd.df, round(bd.p_value, 6)
    (8.095256, 2, 0.017464)
    """
    t = _tables(strata)
    if t.a.size < 2:
        raise InsufficientDataError(
            f"strata: the homogeneity test needs at least 2 informative strata, got {t.a.size}", argument="strata")
    mh = mantel_haenszel(strata)
    psi = mh.odds_ratio
    if psi == 0:
        raise ZeroVarianceError("strata: the pooled odds ratio is 0, so no table with it has positive cells and "
                                "the Breslow-Day test is undefined", argument="strata")
    fitted = _fitted_focal_selected(t, psi)
    n1, m1, n0 = t.focal, t.selected, t.c + t.d
    cells = (fitted, n1 - fitted, m1 - fitted, n0 - m1 + fitted)
    variance = 1.0 / sum(1.0 / x for x in cells)
    statistic = float(np.sum((t.a - fitted) ** 2 / variance))
    if tarone:
        statistic -= float(np.sum(t.a) - np.sum(fitted)) ** 2 / float(np.sum(variance))
    df = int(t.a.size - 1)
    return BreslowDay(statistic, df, float(special.chdtrc(df, max(statistic, 0.0))), bool(tarone))


@spreadsheet("POOLED_HOMOGENEITY_P", returns="probability",
             reference="Breslow, N. E. & Day, N. E. (1980). Statistical Methods in Cancer Research, vol. 1, IARC, "
                       "sec. 4.4; Tarone, R. E. (1985). On heterogeneity tests based on efficient scores. "
                       "Biometrika 72, 91-95.")
def pooled_homogeneity_p(strata: Range) -> float:
    """Breslow–Day test p, with Tarone's adjustment, that the strata share one odds ratio of selection.

    BD = Σ (a − â)² / V̂ − (Σa − Σâ)² / ΣV̂,  p = P(χ²_(K−1) ≥ BD),
    â the focal-selected cell of the table with the stratum's margins and
    odds ratio OR_MH (``POOLED_ODDS_RATIO``), V̂ = 1 / (1/â + 1/b̂ + 1/ĉ + 1/d̂),
    K the number of informative strata

    A small p says the odds ratios differ between strata: one pooled figure
    does not describe them (the aggregate can even reverse within strata), so
    show the strata. A statistical indicator, not a legal finding; defer to
    the employment law that applies where you hire and to qualified
    professional advice.

    Parameters
    ----------
    strata : range
        One row per stratum: focal selected, focal applicants, reference selected, reference applicants.

    Notes
    -----
    Tarone's (1985) term is subtracted because OR_MH is not the efficient
    estimate the original statistic assumes; with it the statistic is
    asymptotically chi-square (statsmodels' ``test_equal_odds(adjust=True)``).
    Needs at least 2 informative strata (``#N/A``); a pooled odds ratio of 0
    or an undefined one is ``#DIV/0!``. Like every chi-square test of sparse
    tables, it is approximate when strata are small.

    Examples
    --------
    >>> round(pooled_homogeneity_p([[10, 40, 20, 40], [5, 30, 15, 35], [12, 20, 10, 25]]), 6)
    0.017464
    """
    return breslow_day(strata).p_value


# ---------------------------------------------------------------- exact conditional test

#: Relative tolerance under which two probabilities of the conditional distribution count as tied (R's
#: mantelhaen.test uses the same 1e-7: the convolution's rounding is far larger than Fisher's single sum's).
_TIE = 1e-7

#: Probabilities below this fraction of the largest are dropped while convolving (they cannot reach a p value
#: printed to 15 digits unless the p value itself is below about 1e-290, which is then returned as 0).
_NEGLIGIBLE = 1e-300


#: The first pass's threshold: probabilities below this fraction of the largest are dropped while convolving.
#: Each dropped probability changes a final (rescaled) probability by at most itself, so the p value's relative
#: error is at most (the sum of the probabilities dropped) x (support of the total) / P(observed), checked after
#: each pass; when the bound is above _FAST_ERROR the distribution is built again with the threshold that
#: bound asks for (or _NEGLIGIBLE when the observed total was dropped).
_FAST_NEGLIGIBLE = 1e-20

#: Largest bound on the first pass's relative error of the p value that is accepted (else the second pass).
_FAST_ERROR = 1e-12


def _stratum_pmfs(t: _Tables, negligible: float = _NEGLIGIBLE):
    """Each stratum's hypergeometric pmf of its focal-selected count (margins fixed), scaled to a maximum of 1,
    trimmed of ends below ``negligible``: a list of (lowest count, pmf), and the sum of the probabilities
    dropped."""
    n1, n0, m1 = t.focal, t.c + t.d, t.selected
    low = np.maximum(0.0, m1 - n0)
    high = np.minimum(n1, m1)
    sizes = (high - low + 1).astype(np.int64)
    if int(sizes.sum()) > EXACT_POOLED_MAX_TABLES:
        raise DomainError(f"strata are too large for the exact conditional test: {int(sizes.sum()):,} possible "
                          f"tables, at most {EXACT_POOLED_MAX_TABLES:,}; use POOLED_IMPACT_P", argument="strata")
    owner = np.repeat(np.arange(sizes.size), sizes)
    starts = np.concatenate(([0], np.cumsum(sizes)[:-1]))
    x = low[owner] + (np.arange(owner.size) - starts[owner])
    gl = special.gammaln
    # log C(n1, x) + log C(n0, m1 − x), the constant log C(n, m1) left out: each pmf is rescaled below.
    logp = (-gl(x + 1) - gl(n1[owner] - x + 1) - gl(m1[owner] - x + 1) - gl(n0[owner] - m1[owner] + x + 1))
    peak = np.maximum.reduceat(logp, starts)
    p = np.exp(logp - peak[owner])  # each stratum's largest is exactly 1
    kept = np.flatnonzero(p >= negligible)
    first = np.minimum.reduceat(kept, np.searchsorted(owner[kept], np.arange(sizes.size)))
    last = np.maximum.reduceat(kept, np.searchsorted(owner[kept], np.arange(sizes.size)))
    pmfs = [(int(low[k]) + int(first[k] - starts[k]), p[first[k]:last[k] + 1]) for k in range(sizes.size)]
    # a stratum's pmf is unimodal: what lies outside [first, last] is what is below the threshold
    return pmfs, float(np.sum(p[p < negligible]))


def _convolve_all(pmfs, negligible: float = _NEGLIGIBLE):
    """The distribution of the sum, as (lowest total, pmf scaled to a maximum of 1, probabilities dropped):
    pairwise convolutions (a balanced tree costs far less than adding one stratum at a time to a growing
    array), each trimmed of probabilities below ``negligible`` of its largest; and the sum of those dropped."""
    items = [(low, pmf) for low, pmf in pmfs if pmf.size > 1]
    offset = sum(low for low, pmf in pmfs if pmf.size == 1)
    dropped = 0.0
    if not items:
        return offset, np.ones(1), dropped
    while len(items) > 1:
        merged = []
        for (low_a, a), (low_b, b) in zip(items[0::2], items[1::2]):
            check_time()  # a caller's budget (the HTTP bridge): checked between convolutions...
            check_cost(float(a.size) * b.size, "the exact test's convolution")  # ...and before a long one
            dist = np.convolve(a, b)
            dist *= 1.0 / dist.max()
            keep = np.flatnonzero(dist >= negligible)
            dropped += float(np.sum(dist[:keep[0]]) + np.sum(dist[keep[-1] + 1:]))
            merged.append((low_a + low_b + int(keep[0]), dist[keep[0]:keep[-1] + 1]))
        if len(items) % 2:
            merged.append(items[-1])
        items = merged
    low, dist = items[0]
    return offset + low, dist / dist.max(), dropped


def _exact_p(t: _Tables, negligible: float) -> tuple[float, float]:
    """(p, a bound on its relative error from the dropped probabilities) with the threshold ``negligible``."""
    pmfs, dropped = _stratum_pmfs(t, negligible)
    offset, dist, more = _convolve_all(pmfs, negligible)
    observed = int(np.sum(t.a)) - offset
    if observed < 0 or observed >= dist.size:
        # the observed total lies where the probabilities were dropped as negligible
        return 0.0, (math.inf if negligible > _NEGLIGIBLE else 0.0)
    at = dist[observed]
    tail = np.sum(dist[dist <= at * (1.0 + _TIE)])
    # each dropped probability (rescaled, as the arrays are) changes any final one by at most itself
    error = (dropped + more + negligible) * dist.size / at if negligible > _NEGLIGIBLE else 0.0
    return float(min(1.0, tail / np.sum(dist))), error


def _first_threshold(t: _Tables) -> float:
    """The first pass's threshold: _FAST_NEGLIGIBLE, or, when the observed total lies far in a tail, a finer one
    that keeps it: ln P(observed)/P(mode) is close to -z^2/2 with z the total's standardised distance from
    its mean (exact hypergeometric means and variances); a margin of 15 % and 1e-20 more, at least 1e-300.
    A guess for speed only (one pass instead of two): a wrong guess costs a further pass, never accuracy."""
    n1, n0, m1 = t.focal, t.c + t.d, t.selected
    n = n1 + n0
    variance = float(np.sum(n1 * n0 * m1 * (n - m1) / (n * n * (n - 1.0))))
    if variance <= 0:
        return _FAST_NEGLIGIBLE
    log_ratio = -0.5 * (float(np.sum(t.a)) - float(np.sum(n1 * m1 / n))) ** 2 / variance
    if log_ratio > -20.0:
        return _FAST_NEGLIGIBLE
    exponent = 1.15 * log_ratio + math.log(_FAST_NEGLIGIBLE)
    # at the finest threshold exactly (not exp(log(1e-300)), a hair above it, which the passes take for coarser)
    return _NEGLIGIBLE if exponent <= math.log(_NEGLIGIBLE) + 1e-9 else math.exp(exponent)


@spreadsheet("POOLED_EXACT_P", returns="probability",
             reference="Mehta, C. R., Patel, N. R. & Gray, R. (1985). Computing an exact confidence interval for "
                       "the common odds ratio in several 2x2 contingency tables. Journal of the American Statistical "
                       "Association 80, 969-973; Agresti, A. (2013). Categorical Data Analysis (3rd ed.), sec. 7.3.5 "
                       "(exact conditional test of conditional independence).")
def pooled_exact_p(strata: Range) -> float:
    """Exact conditional test p that the common odds ratio of selection is 1 (the exact counterpart of CMH).

    T = Σ a (focal selected, summed over strata); with every stratum's margins
    fixed and odds ratio 1, each a is hypergeometric and T has the
    convolution of those distributions;
    p = Σ P(T = t) over every t with P(T = t) ≤ P(T = T_observed)

    Two-sided by the probability ordering of Fisher's exact test
    (``IMPACT_FISHER``); with one stratum it is Fisher's p. A statistical
    indicator, not a legal finding; defer to the employment law that applies
    where you hire and to qualified professional advice.

    Parameters
    ----------
    strata : range
        One row per stratum: focal selected, focal applicants, reference selected, reference applicants.

    Notes
    -----
    Probabilities within a relative 1e-7 of the observed one count as ties
    (R's ``mantelhaen.test(exact = TRUE)`` convention). The distribution is
    built by direct convolution in floating point, dropping probabilities
    below a threshold of the largest: first 1e-20 (or, when the normal
    approximation puts the observed total far in a tail, the finer threshold
    that keeps it), then, when a bound on the
    error this can cause in p (the sum of the probabilities dropped times the
    support, over the observed probability) is above 1e-12 of p,
    again with the smaller threshold the bound asks for, down to 1e-300; so
    a p value below about 1e-290 is returned as 0. The work grows with the number of strata times the spread of the
    total (``bench/bench_impact.py`` times 1,000 strata of 40-240 applicants; a p value far in a tail needs the
    finer passes and takes longest),
    far more than ``POOLED_IMPACT_P``. The strata may hold at most 2,000,000 possible tables in all
    (``#NUM!`` beyond; use ``POOLED_IMPACT_P``). Strata without information
    are left out (they have one possible table).

    Examples
    --------
    >>> round(pooled_exact_p([[10, 40, 20, 40], [5, 30, 15, 35]]), 6)
    0.001593
    """
    t = _tables(strata)
    # a fast pass with a coarse threshold; when its error bound is not negligible (the observed total far in a
    # tail), the distribution is built again keeping everything down to 1e-300 of the largest. When the normal
    # approximation already puts the observed total far in a tail, the first pass starts with the threshold
    # it would need (a guess only: the error bound below decides, as for any pass)
    negligible = _first_threshold(t)
    p, error = _exact_p(t, negligible)
    while error > _FAST_ERROR:
        # the threshold that would have met the bound, with room for the longer arrays it keeps
        negligible = max(_NEGLIGIBLE, min(negligible * 1e-20, negligible * _FAST_ERROR / error / 1e4)) \
            if math.isfinite(error) else _NEGLIGIBLE
        p, error = _exact_p(t, negligible)
    return p
