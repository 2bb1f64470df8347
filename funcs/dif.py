"""Item bias: differential item functioning (DIF) of 0/1 items between two groups.

=================  ==========================================  =============================================
spreadsheet name   Python function                             what it gives
=================  ==========================================  =============================================
``DIF_MH_DELTA``   :func:`dif_mh_delta`                        MH D-DIF = −2.35 ln α_MH (ETS delta scale)
``DIF_MH_P``       :func:`dif_mh_p`                            p of the MH chi-square (continuity corrected)
``DIF_MH_CLASS``   :func:`dif_mh_class`                        ETS category "A", "B" or "C"
``DIF_LR_P``       :func:`dif_lr_p`                            p of the 2-df likelihood-ratio test
``DIF_LR_R2``      :func:`dif_lr_r2`                           Nagelkerke ΔR² of group and score × group
``DIF_LR_CLASS``   :func:`dif_lr_class`                        "A"/"B"/"C" by Zumbo–Thomas or Jodoin–Gierl
(Python only)      :func:`item_dif`, :func:`mantel_haenszel_dif`, every item's results in one pass
                   :func:`logistic_dif`
=================  ==========================================  =============================================

**Caution.** A DIF flag says that people of the two groups with the same
total score answer an item differently more often than chance explains. It
is a reason to review the item's content, not a finding that the item is
biased, and an item without a flag is not thereby shown to be fair: the
tests have little power in small groups.

Conventions
-----------
* ``items``: a people × items range of 0/1 scores (1 = keyed response).
  A person with a blank item score, a blank group label or a label of
  neither group is left out (listwise). Any value other than 0 and 1 is
  refused (``#NUM!``), naming the cell.
* ``groups``: one label per person (text or a number); labels name the same
  group when they differ only in letter case or spacing, as everywhere in
  trueband (:func:`~trueband.funcs.impact.group_key`). ``focal`` and
  ``reference`` are single labels; the focal group is the one whose
  treatment is under examination.
* ``item``: the item's 1-based column number within ``items``.
* Matching: people are matched on their total score over all the items in
  ``items``, **including the studied item** (Holland & Thayer 1988 show that
  the MH procedure needs the studied item in the matching score for its
  null hypothesis to agree with the Rasch model's; Zwick 2012 keeps that
  rule). The same total is the matching variable of the logistic models
  (Swaminathan & Rogers 1990). Every score level is its own stratum; there
  is no purification step.
* Signs: a negative MH D-DIF means the item is harder for the focal group
  than for reference-group people of the same total score.
* Group sizes: no minimum is enforced beyond what the statistics need (both
  groups present and at least one informative stratum). Zwick (2012)
  reviews the minimum sizes used in practice (hundreds per group); below
  them the tests seldom detect anything.
"""

from __future__ import annotations

import dataclasses
from typing import Literal

import numpy as np

from . import _validate as v
from ._lazy import lazy_module
from ._models import group_label, logistic_fit, two_groups
from ._validate import Range
from .errors import DomainError, InsufficientDataError, TruebandError, ZeroVarianceError
from .registry import spreadsheet

special = lazy_module("scipy.special")

__all__ = [
    "DifData",
    "MantelHaenszelDIF",
    "LogisticDIF",
    "ItemDIF",
    "item_dif",
    "dif_data",
    "mantel_haenszel_dif",
    "logistic_dif",
    "ets_class",
    "r2_class",
    "R2_CONVENTIONS",
    "dif_mh_delta",
    "dif_mh_p",
    "dif_mh_class",
    "dif_lr_p",
    "dif_lr_r2",
    "dif_lr_class",
]

#: The ETS delta scale: MH D-DIF = −2.35 ln α_MH (Holland & Thayer 1988).
DELTA_SCALE = 2.35

#: ΔR² cut points (negligible below the first, large above the second) of the two published conventions.
R2_CONVENTIONS = {"Zumbo-Thomas": (0.13, 0.26), "Jodoin-Gierl": (0.035, 0.070)}

_MH_REFERENCE = ("Holland, P. W. & Thayer, D. T. (1988). Differential item performance and the Mantel-Haenszel "
                 "procedure. In H. Wainer & H. I. Braun (Eds.), Test Validity, 129-145; Mantel, N. & Haenszel, W. "
                 "(1959). Journal of the National Cancer Institute 22, 719-748")
_ETS_REFERENCE = ("Zwick, R. (2012). A review of ETS differential item functioning assessment procedures. ETS "
                  "Research Report RR-12-08; Paek, I. & Holland, P. W. (2015). Psychometrika 80, 406-411 (the "
                  "interval test of |D| > 1); Robins, J., Breslow, N. & Greenland, S. (1986). Biometrics 42, 311-323 "
                  "(variance of ln α_MH)")
_LR_REFERENCE = ("Swaminathan, H. & Rogers, H. J. (1990). Detecting differential item functioning using logistic "
                 "regression procedures. Journal of Educational Measurement 27, 361-370; Nagelkerke, N. J. D. "
                 "(1991). Biometrika 78, 691-692")
_R2_REFERENCE = ("Zumbo, B. D. & Thomas, D. R. (1997). A measure of effect size for a model-based approach for "
                 "studying DIF. University of Northern British Columbia; Jodoin, M. G. & Gierl, M. J. (2001). "
                 "Evaluating type I error and power rates using an effect size measure with the logistic "
                 "regression procedure for DIF detection. Applied Measurement in Education 14, 329-349")


# ---------------------------------------------------------------- the count tables

@dataclasses.dataclass(frozen=True)
class DifData:
    """Counts by total score (0..k) for each group, and keyed responses by item, score and group.

    ``people[g, s]``: people of group g (0 reference, 1 focal) with total s;
    ``keyed[j, g, s]``: how many of them gave item j its keyed response (1).
    """

    people: np.ndarray
    keyed: np.ndarray
    n_focal: int
    n_reference: int

    @property
    def n_items(self) -> int:
        return self.keyed.shape[0]


def _binary_items(items) -> tuple[np.ndarray, bool]:
    """The item matrix, and whether it holds any blank; any value other than 0 and 1 is refused."""
    x = v.numeric_matrix("items", items)
    other = (x != 0) & (x != 1)  # blanks (nan) too: two passes over the data, not three, when all is clean
    if not other.any():
        return x, False
    blank = np.isnan(x)
    bad = other & ~blank
    if bad.any():
        r, c = np.argwhere(bad)[0]
        raise DomainError(f"items must hold 0/1 scores only; found {v.show(float(x[r, c]))} at row {r + 1}, "
                          f"column {c + 1}", argument="items")
    return x, True


def dif_data(items, groups, focal, reference) -> DifData:
    """The tables every DIF statistic here is computed from, for all items at once.

    One pass over the data: each (person, item) score is counted into its
    (item, group, total score) cell by a single ``numpy.bincount``.
    """
    x, has_blanks = _binary_items(items)
    codes = two_groups(groups, focal, reference, x.shape[0])
    keep = codes >= 0
    if has_blanks:
        keep &= ~np.isnan(x).any(axis=1)
    if not keep.all():
        x, codes = x[keep], codes[keep]
    n_focal, n_reference = int(codes.sum()), int((codes == 0).sum())
    for n, name in ((n_focal, "focal"), (n_reference, "reference")):
        if n < 2:
            raise InsufficientDataError(f"the {name} group needs at least 2 people with complete item scores, "
                                        f"got {n}", argument=name)
    k = x.shape[1]
    cell = codes * (k + 1) + x.sum(axis=1).astype(np.int64)   # group g, total s -> g·(k + 1) + s
    people = np.bincount(cell, minlength=2 * (k + 1))
    # (cell, item) -> cell·k + item, counted with the scores as weights: keyed responses per cell and item
    keyed = np.bincount(((cell * k)[:, None] + np.arange(k)).ravel(), weights=x.ravel(),
                        minlength=2 * (k + 1) * k).reshape(2 * (k + 1), k)
    return DifData(people=people.reshape(2, k + 1).astype(float),
                   keyed=keyed.T.reshape(k, 2, k + 1), n_focal=n_focal, n_reference=n_reference)


# ---------------------------------------------------------------- Mantel–Haenszel

@dataclasses.dataclass(frozen=True)
class MantelHaenszelDIF:
    """One item's Mantel–Haenszel results (see :func:`mantel_haenszel_dif`)."""

    item: int              # 1-based
    odds_ratio: float      # α_MH: odds of the keyed response, reference over focal, at equal total score
    delta: float           # MH D-DIF = −2.35 ln α_MH
    delta_se: float        # 2.35 · SE(ln α_MH), Robins–Breslow–Greenland
    chi_square: float      # MH chi-square with continuity correction, 1 df
    p: float
    ets_class: str         # "A", "B" or "C"
    strata: int            # score levels that carried information


def ets_class(delta: float, delta_se: float, p: float, *, alpha: float = 0.05) -> str:
    """The ETS category of an item from its MH D-DIF, the D-DIF's standard error and the MH chi-square's p.

    * **A** (negligible): |D| < 1, or D not significantly different from 0
      (MH chi-square p ≥ alpha);
    * **C** (large): |D| ≥ 1.5 and |D| significantly greater than 1:
      (|D| − 1) / SE(D) > z₁₋α (a one-sided test of the interval null
      |Δ| ≤ 1, Paek & Holland 2015);
    * **B** (moderate): otherwise.

    Zwick (2012) states the rule with alpha = 0.05. The significance part of
    A uses the MH chi-square (continuity corrected), as ETS practice does
    (from memory).

    Examples
    --------
    >>> ets_class(-0.8, 0.2, 0.001), ets_class(-1.2, 0.2, 0.001), ets_class(-1.7, 0.2, 0.001)
    ('A', 'B', 'C')
    >>> ets_class(-1.6, 0.5, 0.001)   # |D| ≥ 1.5 but not significantly beyond 1
    'B'
    """
    size = abs(delta)
    if size < 1.0 or not p < alpha:
        return "A"
    if size >= 1.5 and (size - 1.0) / delta_se > -special.ndtri(alpha):
        return "C"
    return "B"


def _mantel_haenszel_one(j: int, a, b, c, d, alpha: float) -> MantelHaenszelDIF:
    """a, b: reference keyed / not keyed; c, d: focal keyed / not keyed; one entry per score level."""
    n_ref, n_foc = a + b, c + d
    m1, m0 = a + c, b + d
    t = n_ref + n_foc
    # A stratum with one group absent, or where everybody (or nobody) gave the keyed response, adds nothing to
    # the odds ratio's sums and has zero variance: it carries no information and is dropped.
    use = (n_ref > 0) & (n_foc > 0) & (m1 > 0) & (m0 > 0)
    if not use.any():
        raise ZeroVarianceError(f"item {j + 1} of items has no score level where both groups are present and the item's "
                                f"responses vary; the MH statistics are undefined", argument="items")
    a, b, c, d, t, n_ref, n_foc, m1, m0 = (q[use] for q in (a, b, c, d, t, n_ref, n_foc, m1, m0))
    r, s = a * d / t, b * c / t
    sum_r, sum_s = r.sum(), s.sum()
    if sum_r == 0 or sum_s == 0:
        raise DomainError(f"item {j + 1} of items: the MH common odds ratio is {'0' if sum_r == 0 else 'infinite'} (at every "
                          f"matched score one group always or never gives the keyed response)", argument="items")
    odds = sum_r / sum_s
    pp, qq = (a + d) / t, (b + c) / t
    var_log = ((pp * r).sum() / (2 * sum_r ** 2) + (pp * s + qq * r).sum() / (2 * sum_r * sum_s)
               + (qq * s).sum() / (2 * sum_s ** 2))
    expected = n_ref * m1 / t
    variance = n_ref * n_foc * m1 * m0 / (t * t * (t - 1.0))
    # The continuity correction as published (and as statsmodels computes it): when |ΣA − ΣE(A)| < ½ the
    # statistic is (½ − |ΣA − ΣE(A)|)², small and far from significant, not clipped to 0.
    deviation = abs(a.sum() - expected.sum()) - 0.5
    chi2 = deviation * deviation / variance.sum()
    p = float(special.chdtrc(1.0, chi2))
    delta = -DELTA_SCALE * float(np.log(odds))
    se = DELTA_SCALE * float(np.sqrt(var_log))
    return MantelHaenszelDIF(item=j + 1, odds_ratio=float(odds), delta=delta, delta_se=se, chi_square=float(chi2),
                             p=p, ets_class=ets_class(delta, se, p, alpha=alpha), strata=int(use.sum()))


def mantel_haenszel_dif(items, groups, focal, reference, *, alpha: float = 0.05
                        ) -> tuple[MantelHaenszelDIF | TruebandError, ...]:
    """Mantel–Haenszel DIF statistics of every item, from one tabulation of the data.

    For item j, at each total score s (a stratum), with A/B the reference
    group's keyed/other responses, C/D the focal group's and T the stratum's
    size:

    * α_MH = Σ (A·D/T) / Σ (B·C/T), the common odds ratio (reference odds over
      focal odds), and MH D-DIF = −2.35 ln α_MH;
    * χ²_MH = (|Σ A − Σ E(A)| − ½)² / Σ Var(A), with E(A) = n_R·m₁/T and
      Var(A) = n_R·n_F·m₁·m₀ / (T²(T − 1)); 1 df;
    * SE(D) = 2.35 · SE(ln α_MH), the Robins–Breslow–Greenland (1986)
      variance (equal to Phillips & Holland's 1987, from memory);
    * the ETS category from :func:`ets_class`.

    Strata where one group is absent or where the item's responses do not
    vary carry no information and are dropped.

    Parameters
    ----------
    items, groups, focal, reference
        As in the module's conventions.
    alpha : float, optional
        Significance level of the ETS rule's tests; default 0.05 (Zwick 2012).

    Returns
    -------
    tuple
        One entry per item: its :class:`MantelHaenszelDIF`, or the
        :class:`~trueband.funcs.errors.TruebandError` that item raises (an item
        everybody answered alike, a zero or infinite odds ratio), so one
        degenerate item does not hide the others.

    Examples
    --------
    400 simulated people, 5 items; item 1 is made harder for group "b":

    >>> import numpy as np
    >>> rng = np.random.default_rng(7)
    >>> groups = np.where(rng.random(400) < 0.5, "a", "b").tolist()
    >>> latent = rng.normal(size=(400, 1)) + rng.normal(size=(400, 5))
    >>> latent[:, 0] -= 0.8 * (np.array(groups) == "b")
    >>> items = (latent > [-1, -0.5, 0, 0.5, 1]).astype(int)
    >>> [r.ets_class for r in mantel_haenszel_dif(items, groups, "b", "a")]
    ['C', 'A', 'A', 'A', 'A']
    """
    v.between("alpha", alpha, 0.0, 1.0, low_open=True, high_open=True)
    return _mantel_haenszel_all(dif_data(items, groups, focal, reference), alpha)


def _mantel_haenszel_all(data: DifData, alpha: float) -> tuple:
    out: list = []
    for j in range(data.n_items):
        a, c = data.keyed[j, 0], data.keyed[j, 1]
        b, d = data.people[0] - a, data.people[1] - c
        try:
            out.append(_mantel_haenszel_one(j, a, b, c, d, alpha))
        except TruebandError as exc:
            out.append(exc)
    return tuple(out)


# ---------------------------------------------------------------- logistic regression

@dataclasses.dataclass(frozen=True)
class LogisticDIF:
    """One item's logistic-regression DIF results (see :func:`logistic_dif`)."""

    item: int                      # 1-based
    chi_square: float              # 2-df likelihood ratio: score → score + group + score × group
    p: float
    r2_score: float                # Nagelkerke R² of the score-only model
    r2_full: float                 # Nagelkerke R² of the full model
    uniform_chi_square: float      # 1 df: score → score + group
    nonuniform_chi_square: float   # 1 df: score + group → score + group + score × group
    zumbo_thomas: str              # "A", "B" or "C"
    jodoin_gierl: str

    @property
    def delta_r2(self) -> float:
        """Nagelkerke ΔR² of group and score × group over the score alone."""
        return self.r2_full - self.r2_score

    @property
    def uniform_p(self) -> float:
        return float(special.chdtrc(1.0, self.uniform_chi_square))

    @property
    def nonuniform_p(self) -> float:
        return float(special.chdtrc(1.0, self.nonuniform_chi_square))


def r2_class(delta_r2: float, p: float, convention: str, *, alpha: float = 0.05) -> str:
    """The DIF category of an item from its Nagelkerke ΔR² and the 2-df test's p, under a published convention.

    With (low, high) = (0.13, 0.26) for Zumbo & Thomas (1997) or
    (0.035, 0.070) for Jodoin & Gierl (2001):

    * **A** (negligible): ΔR² < low, or the 2-df test not significant (p ≥ alpha);
    * **C** (large): ΔR² > high and significant;
    * **B** (moderate): otherwise (low ≤ ΔR² ≤ high, significant).

    Both papers require the significant chi-square beside the effect size.
    The cut points are those difR prints for the two conventions; which band
    a value exactly at a cut point belongs to is stated as recalled (from
    memory).

    Examples
    --------
    >>> r2_class(0.05, 0.001, "Jodoin-Gierl"), r2_class(0.05, 0.001, "Zumbo-Thomas")
    ('B', 'A')
    >>> r2_class(0.30, 0.20, "Zumbo-Thomas")
    'A'
    """
    low, high = R2_CONVENTIONS[convention]
    if delta_r2 < low or not p < alpha:
        return "A"
    return "C" if delta_r2 > high else "B"


def _nagelkerke(ll_model: float, ll_null: float, n: float) -> float:
    # R²_CS = 1 − exp(2(LL₀ − LL)/n), scaled by its maximum 1 − exp(2LL₀/n); expm1 keeps small values exact.
    return float(np.expm1(2.0 * (ll_null - ll_model) / n) / np.expm1(2.0 * ll_null / n))


def _logistic_one(j: int, design, trials, successes, alpha: float) -> LogisticDIF:
    n, keyed = trials.sum(), successes.sum()
    if keyed == 0 or keyed == n:
        raise ZeroVarianceError(f"item {j + 1} of items was answered alike by everybody analysed; its DIF is undefined",
                                argument="items")
    rate = keyed / n
    ll_null = float(keyed * np.log(rate) + (n - keyed) * np.log1p(-rate))
    what = f"the logistic DIF model of item {j + 1}"
    fits = [logistic_fit(design[:, :p], successes, trials, argument="items", what=what) for p in (2, 3, 4)]
    score, uniform, full = (f.log_likelihood for f in fits)
    # The nested models' likelihoods can only rise; a last-digit dip is rounding, not evidence.
    chi2 = max(2.0 * (full - score), 0.0)
    p = float(special.chdtrc(2.0, chi2))
    r2_score, r2_full = _nagelkerke(score, ll_null, n), _nagelkerke(full, ll_null, n)
    delta = r2_full - r2_score
    return LogisticDIF(item=j + 1, chi_square=chi2, p=p, r2_score=r2_score, r2_full=r2_full,
                       uniform_chi_square=max(2.0 * (uniform - score), 0.0),
                       nonuniform_chi_square=max(2.0 * (full - uniform), 0.0),
                       zumbo_thomas=r2_class(delta, p, "Zumbo-Thomas", alpha=alpha),
                       jodoin_gierl=r2_class(delta, p, "Jodoin-Gierl", alpha=alpha))


def _cell_design(data: DifData):
    """One row per occupied (group, score) cell: [1, z, g, z·g], z the standardised total score."""
    g, s = np.nonzero(data.people > 0)
    trials = data.people[g, s]
    # Standardising the score changes no likelihood; it keeps Newton's steps well scaled.
    mean = (trials * s).sum() / trials.sum()
    sd = np.sqrt((trials * (s - mean) ** 2).sum() / trials.sum())
    if sd == 0:
        raise ZeroVarianceError("everybody analysed has the same total score; DIF cannot be matched on it",
                                argument="items")
    z = (s - mean) / sd
    return np.column_stack([np.ones_like(z), z, g, z * g]).astype(float), trials, g, s


def logistic_dif(items, groups, focal, reference, *, alpha: float = 0.05
                 ) -> tuple[LogisticDIF | TruebandError, ...]:
    """Logistic-regression DIF of every item (Swaminathan & Rogers 1990), from one tabulation of the data.

    For each item, three nested logistic models of the keyed response on the
    total score S and group G (1 focal, 0 reference):

    1. logit P = b₀ + b₁S
    2. logit P = b₀ + b₁S + b₂G                (uniform DIF)
    3. logit P = b₀ + b₁S + b₂G + b₃S·G        (non-uniform DIF)

    χ² = 2(LL₃ − LL₁) with 2 df tests both kinds of DIF at once; the 1-df
    steps (2 against 1, 3 against 2) are kept too. The effect size is
    ΔR² = R²₃ − R²₁ with Nagelkerke's (1991) R² = (1 − e^{2(LL₀−LL)/n}) /
    (1 − e^{2LL₀/n}), LL₀ the intercept-only model's log-likelihood; it is
    classified under both published conventions (:func:`r2_class`):
    Zumbo & Thomas (1997) and Jodoin & Gierl (2001).

    The models are fitted by Newton–Raphson on the counts of each
    (score, group) cell: the same likelihood as one row per person.

    Parameters
    ----------
    items, groups, focal, reference
        As in the module's conventions.
    alpha : float, optional
        Significance level of the 2-df test in the classifications; default 0.05.

    Returns
    -------
    tuple
        One entry per item: its :class:`LogisticDIF`, or the
        :class:`~trueband.funcs.errors.TruebandError` that item raises (no
        variation, separated responses, no convergence).

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(7)
    >>> groups = np.where(rng.random(400) < 0.5, "a", "b").tolist()
    >>> latent = rng.normal(size=(400, 1)) + rng.normal(size=(400, 5))
    >>> latent[:, 0] -= 0.8 * (np.array(groups) == "b")
    >>> items = (latent > [-1, -0.5, 0, 0.5, 1]).astype(int)
    >>> first = logistic_dif(items, groups, "b", "a")[0]
    >>> round(first.chi_square, 4), round(first.delta_r2, 4), first.zumbo_thomas, first.jodoin_gierl
    (20.0803, 0.0387, 'A', 'B')
    """
    v.between("alpha", alpha, 0.0, 1.0, low_open=True, high_open=True)
    return _logistic_all(dif_data(items, groups, focal, reference), alpha)


def _logistic_all(data: DifData, alpha: float) -> tuple:
    design, trials, g, s = _cell_design(data)
    out: list = []
    for j in range(data.n_items):
        try:
            out.append(_logistic_one(j, design, trials, data.keyed[j, g, s], alpha))
        except TruebandError as exc:
            out.append(exc)
    return tuple(out)


@dataclasses.dataclass(frozen=True)
class ItemDIF:
    """Both DIF methods for every item, from one tabulation (see :func:`item_dif`)."""

    mantel_haenszel: tuple   # of MantelHaenszelDIF or TruebandError, one per item
    logistic: tuple          # of LogisticDIF or TruebandError, one per item
    n_focal: int
    n_reference: int


def item_dif(items, groups, focal, reference, *, alpha: float = 0.05) -> ItemDIF:
    """Mantel–Haenszel and logistic-regression DIF of every item, the data tabulated once.

    The same results as :func:`mantel_haenszel_dif` and :func:`logistic_dif`
    (see them for the statistics), with the group sizes actually analysed.

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(7)
    >>> groups = np.where(rng.random(400) < 0.5, "a", "b").tolist()
    >>> latent = rng.normal(size=(400, 1)) + rng.normal(size=(400, 5))
    >>> latent[:, 0] -= 0.8 * (np.array(groups) == "b")
    >>> items = (latent > [-1, -0.5, 0, 0.5, 1]).astype(int)
    >>> result = item_dif(items, groups, "b", "a")
    >>> result.n_focal + result.n_reference, result.mantel_haenszel[0].ets_class, result.logistic[0].jodoin_gierl
    (400, 'C', 'B')
    """
    v.between("alpha", alpha, 0.0, 1.0, low_open=True, high_open=True)
    data = dif_data(items, groups, focal, reference)
    return ItemDIF(mantel_haenszel=_mantel_haenszel_all(data, alpha), logistic=_logistic_all(data, alpha),
                   n_focal=data.n_focal, n_reference=data.n_reference)


# ---------------------------------------------------------------- spreadsheet functions

#: The tables of the last spreadsheet call over read-only arrays, one tuple (items, groups, focal key,
#: reference key, tables) replaced whole (a reader sees one call's entry, never a mix). A workbook's
#: recalculation hands every item's cells the same read-only arrays of the same ranges, so the tables are
#: counted once per range, not once per cell (a study's DIF sheet has seven cells per item).
_LAST_TABLES: list = [None]


def _tables(items, groups, focal, reference) -> DifData:
    """:func:`dif_data`, reused while the same read-only arrays come again (kept alive in the entry, so their
    ids cannot pass to other arrays)."""
    if not all(isinstance(a, np.ndarray) and not a.flags.writeable for a in (items, groups)):
        return dif_data(items, groups, focal, reference)
    keys = (group_label("focal", focal), group_label("reference", reference))
    last = _LAST_TABLES[0]
    if last is not None and last[0] is items and last[1] is groups and last[2] == keys:
        return last[3]
    data = dif_data(items, groups, focal, reference)
    _LAST_TABLES[0] = (items, groups, keys, data)
    return data


def _one_item(items, groups, item, focal, reference, method: str):
    """One item's result by the named method (computed for that item only)."""
    data = _tables(items, groups, focal, reference)
    j = v.column_index("item", item, data.n_items)
    if method == "mh":
        a, c = data.keyed[j, 0], data.keyed[j, 1]
        return _mantel_haenszel_one(j, a, data.people[0] - a, c, data.people[1] - c, 0.05)
    design, trials, g, s = _cell_design(data)
    return _logistic_one(j, design, trials, data.keyed[j, g, s], 0.05)


_ARGS_DOC = """
    Parameters
    ----------
    items : range
        People × items range of 0/1 item scores (one row per person); blanks leave the person out.
    groups : range
        One group label per person (one column, same rows as items); labels are matched ignoring case and spacing.
    item : int
        The studied item's column number within items, from 1.
    focal : range
        Label of the focal group (one cell: text or a number).
    reference : range
        Label of the reference group (one cell: text or a number).
"""

_EXAMPLE = """400 simulated people, 5 items; item 1 is made harder for group "b":

    >>> import numpy as np
    >>> rng = np.random.default_rng(7)
    >>> groups = np.where(rng.random(400) < 0.5, "a", "b").tolist()
    >>> latent = rng.normal(size=(400, 1)) + rng.normal(size=(400, 5))
    >>> latent[:, 0] -= 0.8 * (np.array(groups) == "b")
    >>> items = (latent > [-1, -0.5, 0, 0.5, 1]).astype(int).tolist()"""


def _shared_arguments(body):
    """Write the five shared arguments and the example data into the docstring before the registry reads it."""
    body.__doc__ = body.__doc__.replace("{args}", _ARGS_DOC.strip("\n")[4:]).replace("{example}", _EXAMPLE)
    return body


@spreadsheet("DIF_MH_DELTA", returns="number", reference=_MH_REFERENCE + ".")
@_shared_arguments
def dif_mh_delta(items: Range, groups: Range, item: int, focal: Range, reference: Range) -> float:
    """Mantel–Haenszel D-DIF of an item: −2.35 ln α_MH, negative when the item is harder for the focal group.

    α_MH = Σ_s (A_s D_s / T_s) / Σ_s (B_s C_s / T_s) over the total-score
    strata s (A, B: reference group keyed / other; C, D: focal group; T: all),
    strata without information dropped; see the module's conventions for the
    matching (studied item included) and blanks.

    {args}

    Notes
    -----
    |D| below 1 is negligible on the ETS scale; 1.5 and above is large
    (``DIF_MH_CLASS`` adds the significance tests). A zero or infinite odds
    ratio (one group always or never keyed at every matched score) is
    ``#NUM!``; an item with no informative stratum is ``#DIV/0!``.

    Examples
    --------
    {example}
    >>> round(dif_mh_delta(items, groups, 1, "b", "a"), 6)
    -3.069214
    """
    return _one_item(items, groups, item, focal, reference, "mh").delta


@spreadsheet("DIF_MH_P", returns="probability", reference=_MH_REFERENCE + ".")
@_shared_arguments
def dif_mh_p(items: Range, groups: Range, item: int, focal: Range, reference: Range) -> float:
    """p value of an item's Mantel–Haenszel chi-square (1 df, with continuity correction).

    χ²_MH = (|Σ A_s − Σ E(A_s)| − ½)² / Σ Var(A_s), E(A_s) = n_Rs m_1s / T_s,
    Var(A_s) = n_Rs n_Fs m_1s m_0s / (T_s² (T_s − 1)), over the informative
    total-score strata; the statistic of
    ``statsmodels.stats.contingency_tables.StratifiedTable.test_null_odds(correction=True)``.

    {args}

    Examples
    --------
    {example}
    >>> round(dif_mh_p(items, groups, 1, "b", "a"), 8)
    3.406e-05
    """
    return _one_item(items, groups, item, focal, reference, "mh").p


@spreadsheet("DIF_MH_CLASS", returns="text", reference=_ETS_REFERENCE + ".")
@_shared_arguments
def dif_mh_class(items: Range, groups: Range, item: int, focal: Range, reference: Range) -> str:
    """ETS DIF category of an item: "A" negligible, "B" moderate, "C" large (Mantel–Haenszel, alpha 0.05).

    A: |D| < 1 or the MH chi-square not significant; C: |D| ≥ 1.5 and
    (|D| − 1)/SE(D) > 1.645 (|D| significantly beyond 1); B: otherwise. D is
    MH D-DIF (``DIF_MH_DELTA``), SE(D) = 2.35 times the Robins–Breslow–
    Greenland standard error of ln α_MH.

    {args}

    Notes
    -----
    A category is a prompt for review of the item's content, not a finding of
    bias; an "A" from a small group is not evidence that the item is fair.

    Examples
    --------
    {example}
    >>> dif_mh_class(items, groups, 1, "b", "a"), dif_mh_class(items, groups, 2, "b", "a")
    ('C', 'A')
    """
    return _one_item(items, groups, item, focal, reference, "mh").ets_class


@spreadsheet("DIF_LR_P", returns="probability", reference=_LR_REFERENCE + ".")
@_shared_arguments
def dif_lr_p(items: Range, groups: Range, item: int, focal: Range, reference: Range) -> float:
    """p value of an item's 2-df logistic-regression DIF test (Swaminathan & Rogers 1990).

    χ² = 2 (LL_full − LL_score), where the score model is logit P = b₀ + b₁S
    and the full model adds the group G and S × G (S the total score
    including the item, G 1 for the focal group); chi-square with 2 df.

    {args}

    Notes
    -----
    Separated responses (no finite estimate) and non-convergence are
    ``#NUM!``; an item everybody answered alike is ``#DIV/0!``.

    Examples
    --------
    {example}
    >>> round(dif_lr_p(items, groups, 1, "b", "a"), 8)
    4.361e-05
    """
    return _one_item(items, groups, item, focal, reference, "lr").p


@spreadsheet("DIF_LR_R2", returns="proportion", reference=_LR_REFERENCE + "; " + _R2_REFERENCE + ".")
@_shared_arguments
def dif_lr_r2(items: Range, groups: Range, item: int, focal: Range, reference: Range) -> float:
    """Nagelkerke ΔR² of an item's logistic DIF: what group and score × group add to the total score.

    ΔR² = R²_N(score + group + score × group) − R²_N(score), with Nagelkerke's
    R²_N = (1 − e^(2(LL₀ − LL)/n)) / (1 − e^(2LL₀/n)). Two published
    conventions read it: Zumbo & Thomas (1997), negligible below 0.13 and
    large above 0.26; Jodoin & Gierl (2001), negligible below 0.035 and large
    above 0.070 (``DIF_LR_CLASS``).

    {args}

    Examples
    --------
    {example}
    >>> round(dif_lr_r2(items, groups, 1, "b", "a"), 6)
    0.038705
    """
    return _one_item(items, groups, item, focal, reference, "lr").delta_r2


@spreadsheet("DIF_LR_CLASS", returns="text", reference=_R2_REFERENCE + "; " + _LR_REFERENCE + ".")
@_shared_arguments
def dif_lr_class(items: Range, groups: Range, item: int, focal: Range, reference: Range, *,
                 convention: Literal["Zumbo-Thomas", "Jodoin-Gierl"] = "Jodoin-Gierl") -> str:
    """Logistic DIF category of an item, "A", "B" or "C", by ΔR² and the 2-df test under a published convention.

    A: ΔR² below the lower cut point or the 2-df test not significant at
    0.05; C: ΔR² above the upper cut point and significant; B: otherwise.
    Cut points: Zumbo & Thomas (1997) 0.13 and 0.26; Jodoin & Gierl (2001)
    0.035 and 0.070.

    {args}
    convention : {"Zumbo-Thomas", "Jodoin-Gierl"}, optional
        Which published cut points; default "Jodoin-Gierl" (the stricter one).

    Examples
    --------
    {example}
    >>> [dif_lr_class(items, groups, 1, "b", "a", convention=c) for c in ("Zumbo-Thomas", "Jodoin-Gierl")]
    ['A', 'B']
    """
    result = _one_item(items, groups, item, focal, reference, "lr")
    return result.zumbo_thomas if convention == "Zumbo-Thomas" else result.jodoin_gierl
