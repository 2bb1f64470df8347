"""Adverse impact: comparing the selection rates of two applicant groups.

====================  ==========================================  ===========================================
spreadsheet name      Python function                              what it gives
====================  ==========================================  ===========================================
``SELECTION_RATE``    :func:`selection_rate`                       selected / applicants
``IMPACT_RATIO``      :func:`impact_ratio`                         focal rate / reference rate
``FOUR_FIFTHS``       :func:`four_fifths`                          TRUE when the impact ratio is below 4/5
``IMPACT_Z``          :func:`impact_z`                             pooled two-proportion z (> 0: focal lower)
``IMPACT_FISHER``     :func:`impact_fisher`                        two-sided Fisher exact p
``IMPACT_EXTRA_SELECTIONS``  :func:`impact_extra_selections`                     extra focal selections to reach a ratio
(Python only)         :func:`group_key`, :func:`tally_groups`      which group a label names; counts by group
====================  ==========================================  ===========================================

**Caution.** Adverse impact figures are statistical indicators, not legal
findings; defer to the employment law that applies where you hire and to
qualified professional advice. Whether a selection procedure has adverse
impact in law, and what follows from it, is decided under that law.

Conventions
-----------
* The four counts are separate named arguments, never a table whose
  orientation could be misread: ``focal_selected``, ``focal_applicants``
  (the group whose rate is under examination) and ``ref_selected``,
  ``ref_applicants`` (the group it is compared with; under the Uniform
  Guidelines normally the group with the highest selection rate).
* Counts are whole numbers, at least 0, with selected at most applicants
  (``#NUM!`` otherwise). A count of applicants that is divided by must be
  greater than 0 (``#DIV/0!``), and so must a reference selection rate that
  is divided by.
* The four-fifths comparison and the extra selections to a target are computed in exact integer
  arithmetic, so a ratio of exactly 0.8 is never pushed across the line by
  floating-point error.
* Group labels: wherever trueband counts people by group from a column of
  labels (the validation study, :func:`tally_groups`), two labels name the
  same group when they differ only in letter case or in spaces around or
  between words: ``"Group A"``, ``"group a"`` and ``" Group  A "`` are one
  group (:func:`group_key`: spaces trimmed and collapsed, then Unicode case
  folding). A blank label belongs to no group. Numbers are labels too
  (``2`` and ``2.0`` are one group).
"""

from __future__ import annotations

import dataclasses
from collections import Counter
from fractions import Fraction

import numpy as np

from . import _validate as v
from ._lazy import lazy_module
from .errors import ArgumentTypeError, DomainError, ZeroVarianceError
from .registry import spreadsheet

# scipy.stats and scipy.optimize are slow to import: load them on first use (see _lazy)
stats = lazy_module("scipy.stats")

__all__ = [
    "selection_rate",
    "impact_ratio",
    "four_fifths",
    "impact_z",
    "impact_fisher",
    "impact_extra_selections",
    "EXACT_TEST_MAX_APPLICANTS",
    "CAUTION",
    "group_key",
    "tally_groups",
    "GroupTally",
]

#: The caution shown wherever impact figures are shown (catalog, README, reports).
CAUTION = ("Adverse impact figures are statistical indicators, not legal findings; defer to the employment law "
           "that applies where you hire and to qualified professional advice.")

_CAUTION_REFERENCE = ("Equal Employment Opportunity Commission et al. (1978). Uniform Guidelines on Employee "
                      "Selection Procedures, 29 CFR 1607.4(D) and 1607.16(R)")

#: Largest total of applicants IMPACT_FISHER accepts: far beyond any real applicant pool, and within
#: the sizes where the hypergeometric sums were checked against scipy.stats.fisher_exact (whose own
#: odds-ratio step overflows 64-bit integers near 10**12).
EXACT_TEST_MAX_APPLICANTS = 10**9


# ---------------------------------------------------------------- validation

def _count(name: str, value):
    """A count of people: a whole number, at least 0 (a Python int, or a float array on the column path)."""
    value = v.integer(name, value)
    v.at_least(name, value, 0)
    return value


def _at_most(name: str, value, limit_name: str, limit):
    bad = np.asarray(value) > np.asarray(limit)
    if bad.any():
        i = np.flatnonzero(np.broadcast_to(bad, np.broadcast(value, limit).shape))[0]
        got = np.broadcast_to(value, bad.shape).flat[i]
        cap = np.broadcast_to(limit, bad.shape).flat[i]
        raise DomainError(f"{name} must be at most {limit_name} ({v.show(cap)}), got {v.show(got)}", argument=name)


def _not_zero(name: str, value, why: str):
    if (np.asarray(value) == 0).any():
        raise ZeroVarianceError(f"{name} is 0; {why}", argument=name)


def _group(selected_name: str, selected, applicants_name: str, applicants):
    selected = _count(selected_name, selected)
    applicants = _count(applicants_name, applicants)
    _at_most(selected_name, selected, applicants_name, applicants)
    return selected, applicants


def _four_counts(focal_selected, focal_applicants, ref_selected, ref_applicants):
    fs, fa = _group("focal_selected", focal_selected, "focal_applicants", focal_applicants)
    rs, ra = _group("ref_selected", ref_selected, "ref_applicants", ref_applicants)
    _not_zero("focal_applicants", fa, "a selection rate needs at least one applicant")
    _not_zero("ref_applicants", ra, "a selection rate needs at least one applicant")
    return fs, fa, rs, ra


def _reference_rate_not_zero(ref_selected):
    _not_zero("ref_selected", ref_selected,
              "the reference group's selection rate is 0, so a ratio to it is undefined")


def _exact(x):
    """Counts as Python integers (object arrays on the column path): products cannot round or overflow."""
    if isinstance(x, np.ndarray):
        return np.array([int(t) for t in x.ravel()], dtype=object).reshape(x.shape)
    return int(x)


def _as_float(x):
    return np.asarray(x, dtype=float) if isinstance(x, np.ndarray) else float(x)


# ---------------------------------------------------------------- rates and ratios

#: The four counts, which the column path may vary row by row.
_COUNTS = ["focal_selected", "focal_applicants", "ref_selected", "ref_applicants"]


@spreadsheet("SELECTION_RATE", returns="proportion", elementwise=["selected", "applicants"],
             reference=_CAUTION_REFERENCE + " (selection rate: the number selected divided by the number "
                                            "of applicants).")
def selection_rate(selected: int, applicants: int) -> float:
    """Selection rate of a group: the share of its applicants who were selected.

    rate = selected / applicants

    A statistical indicator, not a legal finding; defer to the employment law
    that applies where you hire and to qualified professional advice.

    Parameters
    ----------
    selected : int
        Number of the group's applicants who were selected (hired, passed);
        a whole number from 0 to ``applicants``.
    applicants : int
        Number of the group's applicants; a whole number greater than 0
        (0 gives ``#DIV/0!``).

    Examples
    --------
    48 of 80 applicants selected:

    >>> selection_rate(48, 80)
    0.6
    """
    selected, applicants = _group("selected", selected, "applicants", applicants)
    _not_zero("applicants", applicants, "a selection rate needs at least one applicant")
    return _as_float(selected) / _as_float(applicants)


@spreadsheet("IMPACT_RATIO", returns="nonnegative number", elementwise=_COUNTS,
             reference=_CAUTION_REFERENCE + "; Questions and Answers on the Uniform Guidelines (1979), "
                                            "44 FR 11996, Q&A 11-12.")
def impact_ratio(focal_selected: int, focal_applicants: int, ref_selected: int, ref_applicants: int) -> float:
    """Impact ratio: the focal group's selection rate divided by the reference group's.

    ratio = (focal_selected / focal_applicants) / (ref_selected / ref_applicants)

    Below 1 the focal group is selected less often. A statistical indicator,
    not a legal finding; defer to the employment law that applies where you
    hire and to qualified professional advice.

    Parameters
    ----------
    focal_selected : int
        Focal group applicants selected; a whole number from 0 to ``focal_applicants``.
    focal_applicants : int
        Focal group applicants; a whole number greater than 0.
    ref_selected : int
        Reference group applicants selected; a whole number from 1 to ``ref_applicants``.
    ref_applicants : int
        Reference group applicants; a whole number greater than 0.

    Notes
    -----
    Boundary cases: a reference group with nobody selected has rate 0 and the
    ratio is undefined (``#DIV/0!``, naming ``ref_selected``); zero applicants
    in either group is ``#DIV/0!`` too; selected above applicants, a negative
    or a fractional count is ``#NUM!``. A ratio above 1 means the focal group
    has the higher rate; the Uniform Guidelines compare each group with the
    group with the highest rate, so pick the reference group accordingly.

    The ratio is computed as one correctly rounded division of the exact
    integers focal_selected · ref_applicants / (focal_applicants · ref_selected).

    Examples
    --------
    12 of 40 against 48 of 80 (rates 30% and 60%):

    >>> impact_ratio(12, 40, 48, 80)
    0.5
    >>> impact_ratio(36, 100, 45, 100)
    0.8
    """
    fs, fa, rs, ra = _four_counts(focal_selected, focal_applicants, ref_selected, ref_applicants)
    _reference_rate_not_zero(rs)
    fs, fa, rs, ra = (_exact(x) for x in (fs, fa, rs, ra))
    # One correctly rounded division of exact integers: 36/100 against 45/100 gives 0.8, not the
    # 0.7999999999999999 of dividing two rounded rates. Cannot overflow: the ratio is at most ref_applicants.
    ratio = (fs * ra) / (fa * rs)
    return ratio.astype(float) if isinstance(ratio, np.ndarray) else ratio


@spreadsheet("FOUR_FIFTHS", returns="boolean", elementwise=_COUNTS,
             reference=_CAUTION_REFERENCE + " (the four-fifths rule of thumb); Questions and Answers on the "
                                            "Uniform Guidelines (1979), Q&A 11-12.")
def four_fifths(focal_selected: int, focal_applicants: int, ref_selected: int, ref_applicants: int) -> bool:
    """TRUE when the focal group's selection rate is below four-fifths of the reference group's.

    flag = focal rate < 4/5 · reference rate, evaluated exactly as
    5 · focal_selected · ref_applicants < 4 · ref_selected · focal_applicants

    The Uniform Guidelines, 29 CFR 1607.4(D): "A selection rate for any race,
    sex, or ethnic group which is less than four-fifths (4/5) (or eighty
    percent) of the rate for the group with the highest rate will generally be
    regarded by the Federal enforcement agencies as evidence of adverse
    impact". The rule is a rule of thumb: the same section says smaller
    differences may still matter where they are significant in statistical
    and practical terms, and larger ones may not where the numbers are small.
    A statistical indicator, not a legal finding; defer to the employment law
    that applies where you hire and to qualified professional advice.

    Parameters
    ----------
    focal_selected : int
        Focal group applicants selected; a whole number from 0 to ``focal_applicants``.
    focal_applicants : int
        Focal group applicants; a whole number greater than 0.
    ref_selected : int
        Reference group applicants selected; a whole number from 1 to ``ref_applicants``.
    ref_applicants : int
        Reference group applicants; a whole number greater than 0.

    Notes
    -----
    Boundary: a ratio of exactly 0.80 is not *less than* four-fifths, so the
    result is FALSE. The comparison is made on the integer counts, so
    36 of 100 against 45 of 100 (0.36 / 0.45, which is 0.7999999999999999 in
    floating point) is exactly 4/5 and FALSE. A reference rate of 0 is
    ``#DIV/0!``, as in :func:`impact_ratio`.

    Examples
    --------
    >>> four_fifths(45, 100, 60, 100), four_fifths(48, 100, 60, 100), four_fifths(51, 100, 60, 100)
    (True, False, False)
    """
    fs, fa, rs, ra = _four_counts(focal_selected, focal_applicants, ref_selected, ref_applicants)
    _reference_rate_not_zero(rs)
    fs, fa, rs, ra = (_exact(x) for x in (fs, fa, rs, ra))
    below = 5 * fs * ra < 4 * rs * fa
    return below.astype(bool) if isinstance(below, np.ndarray) else bool(below)


# ---------------------------------------------------------------- significance tests

@spreadsheet("IMPACT_Z", returns="number", elementwise=_COUNTS,
             reference="Fleiss, J. L., Levin, B. & Paik, M. C. (2003). Statistical Methods for Rates and "
                       "Proportions (3rd ed.), ch. 3 (pooled two-proportion z); Morris, S. B. & Lobsenz, R. E. "
                       "(2000). Significance tests and confidence intervals for the adverse impact ratio. "
                       "Personnel Psychology 53, 89-111.")
def impact_z(focal_selected: int, focal_applicants: int, ref_selected: int, ref_applicants: int) -> float:
    """Pooled two-proportion z statistic for the difference in selection rates.

    z = (p_ref − p_focal) / √( p̄ · (1 − p̄) · (1/focal_applicants + 1/ref_applicants) ),
    with p̄ = (focal_selected + ref_selected) / (focal_applicants + ref_applicants)

    Sign convention: z is positive when the focal group's rate is lower (the
    direction of adverse impact), i.e. the negative of the usual
    "first minus second" order of general-purpose libraries when the focal
    group is given first. A statistical indicator, not a legal finding; defer to the employment law that applies where you hire
    and to qualified professional advice.

    Parameters
    ----------
    focal_selected : int
        Focal group applicants selected; a whole number from 0 to ``focal_applicants``.
    focal_applicants : int
        Focal group applicants; a whole number greater than 0.
    ref_selected : int
        Reference group applicants selected; a whole number from 0 to ``ref_applicants``.
    ref_applicants : int
        Reference group applicants; a whole number greater than 0.

    Notes
    -----
    When nobody or everybody was selected the pooled rate is 0 or 1, its
    variance is zero and z is undefined: ``#DIV/0!``. No continuity
    correction is applied. The normal approximation is poor for small counts;
    use :func:`impact_fisher` there.

    Examples
    --------
    >>> round(impact_z(12, 40, 48, 80), 6)
    3.098387
    """
    fs, fa, rs, ra = _four_counts(focal_selected, focal_applicants, ref_selected, ref_applicants)
    fs, fa, rs, ra = (_as_float(x) for x in (fs, fa, rs, ra))
    selected = fs + rs
    rejected = (fa - fs) + (ra - rs)
    for count, what in ((selected, "nobody was selected (focal_selected and ref_selected are both 0)"),
                        (rejected, "everybody was selected (focal_selected = focal_applicants and "
                                   "ref_selected = ref_applicants)")):
        if (np.asarray(count) == 0).any():
            raise ZeroVarianceError(f"{what}: the pooled selection rate has zero variance and z is undefined",
                                    argument="ref_selected")
    total = fa + ra
    pooled, pooled_rest = selected / total, rejected / total  # 1 − p̄ from counts, not by subtraction
    # Rates rather than products of counts: no overflow for very large counts.
    return (rs / ra - fs / fa) / np.sqrt(pooled * pooled_rest * (1.0 / fa + 1.0 / ra))


def _fisher_two_sided(a: int, focal: int, selected: int, total: int) -> float:
    """Two-sided Fisher exact p for a focal-group selected count ``a`` (hypergeometric, margins fixed)."""
    dist = stats.hypergeom(total, selected, focal)  # X = selected among the focal applicants
    low, high = max(0, focal - (total - selected)), min(selected, focal)
    if low == high:
        return 1.0
    mode = ((focal + 1) * (selected + 1)) // (total + 2)
    # Tables as probable as the observed one within a relative 1e-14 count as "as extreme": ties in exact
    # arithmetic that floating point splits (scipy's tolerance; R's 1e-7 would also take in tables that
    # are truly, if barely, more probable).
    limit = dist.pmf(a) * (1.0 + 1e-14)

    def at_most_limit(k: int) -> bool:
        return dist.pmf(k) <= limit

    if a == mode or at_most_limit(mode):
        return 1.0  # the observed table is (within the tolerance) the most probable one: every table counts
    if a < mode:
        # smallest k in (mode, high] with pmf(k) <= pmf(a): the pmf falls monotonically from the mode
        lo, hi = mode, high + 1
        while hi - lo > 1:
            mid = (lo + hi) // 2
            if at_most_limit(mid):
                hi = mid
            else:
                lo = mid
        p = dist.cdf(a) + (dist.sf(hi - 1) if hi <= high else 0.0)
    else:
        # largest k in [low, mode) with pmf(k) <= pmf(a)
        lo, hi = low - 1, mode
        while hi - lo > 1:
            mid = (lo + hi) // 2
            if at_most_limit(mid):
                lo = mid
            else:
                hi = mid
        p = dist.sf(a - 1) + (dist.cdf(lo) if lo >= low else 0.0)
    return min(1.0, float(p))


@spreadsheet("IMPACT_FISHER", returns="probability",
             reference="Fisher, R. A. (1935). The logic of inductive inference. Journal of the Royal Statistical "
                       "Society 98, 39-82; Agresti, A. (2013). Categorical Data Analysis (3rd ed.), sec. 3.5 "
                       "(two-sided p by summing the probabilities of tables no more probable than the one "
                       "observed).")
def impact_fisher(focal_selected: int, focal_applicants: int, ref_selected: int, ref_applicants: int) -> float:
    """Two-sided Fisher exact test p-value for a difference in selection rates.

    With both groups' applicant counts and the total selected held fixed, the
    number of focal selections X is hypergeometric; the p-value is

    p = Σ P(X = k) over every k with P(X = k) ≤ P(X = focal_selected)

    (the "probability" two-sided definition of R's ``fisher.test`` and
    ``scipy.stats.fisher_exact``; probabilities within a relative 1e-14 of
    the observed one count as ties, scipy's tolerance, where R uses 1e-7).
    It is not twice the one-sided p, and no mid-p correction is applied. A statistical indicator, not a legal finding;
    defer to the employment law that applies where you hire and to qualified
    professional advice.

    Parameters
    ----------
    focal_selected : int
        Focal group applicants selected; a whole number from 0 to ``focal_applicants``.
    focal_applicants : int
        Focal group applicants; a whole number greater than 0.
    ref_selected : int
        Reference group applicants selected; a whole number from 0 to ``ref_applicants``.
    ref_applicants : int
        Reference group applicants; a whole number greater than 0.

    Notes
    -----
    The test is two-sided: it does not say which group fared worse (see
    :func:`impact_ratio` or the sign of :func:`impact_z`). When nobody or
    everybody was selected there is only one possible table and p = 1. The
    applicants may total at most :data:`EXACT_TEST_MAX_APPLICANTS` (10⁹).
    Computed with scipy's hypergeometric distribution: a bisection finds
    where the far tail's probabilities fall to the observed one, then two
    tail sums.

    Examples
    --------
    >>> round(impact_fisher(12, 40, 48, 80), 6)
    0.003409
    """
    fs, fa, rs, ra = _four_counts(focal_selected, focal_applicants, ref_selected, ref_applicants)
    if fa + ra > EXACT_TEST_MAX_APPLICANTS:
        name = "focal_applicants" if fa >= ra else "ref_applicants"
        raise DomainError(f"{name} is too large for the exact test: focal_applicants + ref_applicants must be at "
                          f"most {EXACT_TEST_MAX_APPLICANTS:,}, got {fa + ra:,}", argument=name)
    return _fisher_two_sided(int(fs), int(fa), int(fs + rs), int(fa + ra))


# ---------------------------------------------------------------- extra selections to a target ratio

def _exact_target(target) -> Fraction:
    # The decimal the user typed: 0.8 means 4/5 exactly, not the binary double just above it.
    return Fraction(repr(float(target)))


def _extra_selections(fs: int, fa: int, rs: int, ra: int, target: Fraction) -> int:
    # Smallest total focal selections n with (n / fa) / (rs / ra) >= target, i.e. n >= target·rs·fa / ra.
    num, den = target.numerator * rs * fa, target.denominator * ra
    needed = -((-num) // den)  # ceiling division on integers
    if needed > fa:
        best = Fraction(fa * ra, fa * rs)
        raise DomainError(
            f"target {v.show(float(target))} cannot be reached: even selecting all {fa} focal applicants gives "
            f"an impact ratio of {v.show(float(best))}", argument="target")
    return max(0, needed - fs)


@spreadsheet("IMPACT_EXTRA_SELECTIONS", returns="integer", elementwise=_COUNTS + ["target"],
             reference=_CAUTION_REFERENCE + " (four-fifths rule; 1607.4D also weighs whether a difference rests on "
                                            "a few selections); Roth, P. L., Bobko, P. & Switzer, F. S. (2006). "
                                            "Modeling the behavior of the 4/5ths rule for determining adverse "
                                            "impact: reasons for caution. Journal of Applied Psychology 91, "
                                            "507-522 (how few selections move the ratio across 0.80).")
def impact_extra_selections(focal_selected: int, focal_applicants: int, ref_selected: int, ref_applicants: int,
                     *, target: float = 0.8) -> int:
    """Smallest number of additional focal selections that lifts the impact ratio to a target.

    extra = max(0, ⌈target · ref_rate · focal_applicants⌉ − focal_selected),
    ref_rate = ref_selected / ref_applicants, computed in exact rational arithmetic

    The focal applicants and the reference group's rate are held fixed: the
    extra selections come from focal applicants not yet selected, and the
    reference group's counts do not change. A statistical indicator, not a
    legal finding; defer to the employment law that applies where you hire
    and to qualified professional advice.

    Parameters
    ----------
    focal_selected : int
        Focal group applicants selected; a whole number from 0 to ``focal_applicants``.
    focal_applicants : int
        Focal group applicants; a whole number greater than 0.
    ref_selected : int
        Reference group applicants selected; a whole number from 1 to ``ref_applicants``.
    ref_applicants : int
        Reference group applicants; a whole number greater than 0.
    target : float, optional
        Impact ratio to reach, greater than 0; default 0.8 (four-fifths).
        Values above 1 ask for a focal rate above the reference rate.

    Notes
    -----
    A ratio equal to the target counts as reaching it (so with target 0.8 the
    result is the number of selections after which :func:`four_fifths` turns
    FALSE). The target is taken as the decimal it prints as: 0.8 is exactly
    4/5. The result is 0 when the ratio already reaches the target. When
    even selecting every focal applicant cannot reach the target the result
    is ``#NUM!`` (naming ``target``), not a number larger than the group. A
    reference rate of 0 is ``#DIV/0!``, as in :func:`impact_ratio`.

    Examples
    --------
    12 of 40 against 48 of 80: 80% of the reference rate is 48% of 40
    applicants, 19.2, so 20 selections, 8 more:

    >>> impact_extra_selections(12, 40, 48, 80)
    8
    >>> impact_extra_selections(12, 40, 48, 80, target=0.5)
    0
    """
    fs, fa, rs, ra = _four_counts(focal_selected, focal_applicants, ref_selected, ref_applicants)
    _reference_rate_not_zero(rs)
    v.positive("target", target)
    fs, fa, rs, ra = (_exact(x) for x in (fs, fa, rs, ra))
    if not isinstance(target, np.ndarray) and not any(isinstance(x, np.ndarray) for x in (fs, fa, rs, ra)):
        return _extra_selections(fs, fa, rs, ra, _exact_target(target))
    # column path: the same exact computation, one row at a time
    cols = np.broadcast_arrays(*(np.asarray(x, dtype=object) for x in (fs, fa, rs, ra, target)))
    out = np.empty(cols[0].shape, dtype=object)
    for i in np.ndindex(out.shape):
        a, b, c, d, t = (col[i] for col in cols)
        out[i] = _extra_selections(int(a), int(b), int(c), int(d), _exact_target(t))
    return out


# ---------------------------------------------------------------- counting by group

def group_key(label) -> str | None:
    """The group a label names: surrounding and repeated spaces removed, case folded; None for a blank.

    Labels that differ only in letter case or spacing name one group (a data
    entry slip, not a different group of people). A whole-number float is the
    same label as the integer (``2.0`` is ``"2"``); logical values are refused.

    Examples
    --------
    >>> group_key("  Group  A ") == group_key("group a")
    True
    >>> group_key(2.0), group_key(" "), group_key(None)
    ('2', None, None)
    """
    if label is None:
        return None
    if isinstance(label, (bool, np.bool_)):
        raise ArgumentTypeError(f"a group label must be text or a number, got {label!r}", argument="groups")
    if isinstance(label, (float, np.floating)):
        if label != label:  # NaN: a blank cell
            return None
        if float(label).is_integer():
            label = int(label)
    text = " ".join(str(label).split())
    return text.casefold() or None


@dataclasses.dataclass(frozen=True)
class GroupTally:
    """People counted by group: ``names`` in sorted order, ``applicants[name]`` and ``selected[name]``,
    ``merged[name]`` the distinct raw labels (as written) counted as that group when there is more than
    one, and ``blank`` the number of blank labels (counted in no group)."""

    names: tuple[str, ...]
    applicants: dict[str, int]
    selected: dict[str, int]
    merged: dict[str, tuple[str, ...]]
    blank: int
    label_of: dict[str, str]   # group key -> the name shown

    def name(self, label) -> str | None:
        """The group name shown for a raw label (None for a blank or an unseen label)."""
        key = group_key(label)
        return None if key is None else self.label_of.get(key)


def tally_groups(labels, selected=None) -> GroupTally:
    """Count applicants (and, with ``selected``, the selected) by group, merging labels as :func:`group_key` does.

    Parameters
    ----------
    labels : sequence
        One group label per applicant (text or a number; ``None`` or blank
        text for no group).
    selected : sequence of bool, optional
        Whether each applicant was selected; same length as ``labels``.

    Notes
    -----
    Each group is shown under the spelling of its label that occurs most
    often (trimmed; on a tie, the one seen first), so a group keeps the name
    most of its rows use.

    Examples
    --------
    >>> t = tally_groups(["A", "a ", "B", None], [True, False, True, True])
    >>> t.names, t.applicants, t.selected, t.merged, t.blank
    (('A', 'B'), {'A': 2, 'B': 1}, {'A': 1, 'B': 1}, {'A': ('A', 'a ')}, 1)
    """
    labels = list(labels)
    sel = [False] * len(labels) if selected is None else [bool(x) for x in selected]
    if len(sel) != len(labels):
        raise ArgumentTypeError(f"selected must have one entry per label ({len(labels)}), got {len(sel)}",
                                argument="selected")
    spellings: dict[str, Counter] = {}
    raw: dict[str, list[str]] = {}
    keys = []
    for label in labels:
        key = group_key(label)
        keys.append(key)
        if key is None:
            continue
        shown = label if isinstance(label, str) else str(int(label)) if (
            isinstance(label, (float, np.floating)) and float(label).is_integer()) else str(label)
        spellings.setdefault(key, Counter())[" ".join(shown.split())] += 1
        seen = raw.setdefault(key, [])
        if shown not in seen:
            seen.append(shown)
    # Counter.most_common keeps first-seen order among equal counts
    label_of = {key: c.most_common(1)[0][0] for key, c in spellings.items()}
    applicants: dict[str, int] = {}
    chosen: dict[str, int] = {}
    for key, s in zip(keys, sel):
        if key is None:
            continue
        name = label_of[key]
        applicants[name] = applicants.get(name, 0) + 1
        chosen[name] = chosen.get(name, 0) + int(s)
    names = tuple(sorted(applicants, key=lambda n: (n.casefold(), n)))
    merged = {label_of[k]: tuple(v) for k, v in raw.items() if len(v) > 1}
    return GroupTally(names=names, applicants={n: applicants[n] for n in names},
                      selected={n: chosen[n] for n in names}, merged=merged,
                      blank=sum(k is None for k in keys), label_of=label_of)
