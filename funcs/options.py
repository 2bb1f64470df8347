"""Item analysis from raw multiple-choice answers and a key: option shares, option–rest correlations, D, flags.

=========================  ====================================  ==================================================
spreadsheet name           Python function                        what it gives
=========================  ====================================  ==================================================
``OPTION_SHARE``           :func:`option_share`                   share choosing an option: all, upper or lower group
``OPTION_REST_R``          :func:`option_rest_correlation`        point-biserial of choosing an option with the rest score
``DISCRIMINATION_INDEX``   :func:`discrimination_index`           Kelley's D: upper-group minus lower-group p
(Python only)              :func:`score_responses`                0/1 scores from answers and a key
(Python only)              :func:`item_flags`                     every warning that applies to an item
=========================  ====================================  ==================================================

Conventions
-----------
* A ``responses`` range has the **key in its first row** (the correct option
  of each item) and one row per candidate below it, one column per item.
  Options are labels: text ("A", "b ") or numbers (1, 2.0); text is compared
  without regard to case or surrounding spaces, and a number matches the
  text that shows it ("2" and 2 are one option).
* A blank answer is an omission: it scores 0 (wrong) and is no option. A
  blank in the key is refused (``#N/A``): the item cannot be scored.
* Upper and lower groups are the ``fraction`` (default 27%, Kelley 1939) of
  candidates with the highest and the lowest number-correct totals over all
  items. Candidates tied at a group's edge share its remaining places
  equally (fractional weights), so a group holds exactly fraction × N
  candidates and the result does not depend on the order of the rows.
* The rest score of an item is the number correct on the other items.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Literal, Sequence

import numpy as np

from . import _validate as v
from . import reliability
from ._validate import Label, Range
from .errors import DomainError, InsufficientDataError, TruebandError, ZeroVarianceError
from .registry import spreadsheet

__all__ = [
    "score_responses",
    "option_share",
    "option_rest_correlation",
    "discrimination_index",
    "group_weights",
    "item_flags",
    "ItemFlag",
]

_KELLEY = ("Kelley, T. L. (1939). The selection of upper and lower groups for the validation of test items. "
           "Journal of Educational Psychology 30, 17-24")
_CROCKER = "Crocker, L. & Algina, J. (1986). Introduction to Classical and Modern Test Theory, ch. 14"


# ---------------------------------------------------------------- answers and key

def _option_text(value) -> str | None:
    """One answer or option as the text it is compared by (None for a blank)."""
    if value is None:
        return None
    if isinstance(value, str):
        return value.strip().upper() or None
    return v.show(value)  # a number as it shows: 2.0 -> "2"


def _answers(name: str, value) -> np.ndarray:
    """The range as option texts (None for a blank), read as :func:`_validate.label_matrix` reads it.

    A range of answers holds few distinct texts (A, B, C, D), so each distinct text is read once and the rest
    looked up: a sheet of 40 items' option statistics reads the same 16,000 answers a few hundred times.
    """
    cells = v._as_rows(name, value, "a range of category labels")
    texts: dict = {}

    def read(cell):
        if cell.__class__ is not str:
            return _option_text(v.label_matrix(name, [[cell]])[0, 0])
        texts[cell] = _option_text(cell.strip() or None)
        return texts[cell]

    try:
        flat = [texts[c] if c.__class__ is str and c in texts else (None if c is None else read(c))
                for c in cells.ravel().tolist()]
    except TruebandError:  # a refused cell: the full reading names its row and column
        v.label_matrix(name, value)
        raise
    out = np.empty(len(flat), dtype=object)
    out[:] = flat
    return out.reshape(cells.shape)


def _key_and_answers(responses) -> tuple[np.ndarray, np.ndarray]:
    table = _answers("responses", responses)
    if table.shape[0] < 2:
        raise InsufficientDataError("responses needs the key in its first row and at least one candidate below it",
                                    argument="responses")
    key, answers = table[0], table[1:]
    blank = [j for j, k in enumerate(key) if k is None]
    if blank:
        raise InsufficientDataError(f"responses has no key for item {blank[0] + 1} (its first row is blank there)",
                                    argument="responses")
    return key, answers


def score_responses(answers, key) -> np.ndarray:
    """0/1 scores of raw answers against a key: 1 where the answer is the keyed option, else 0 (blanks too).

    Parameters
    ----------
    answers : range
        One row per candidate, one column per item: the options chosen.
    key : range
        One row (or column) with the keyed option of each item; no blanks.

    Examples
    --------
    >>> score_responses([["A", "c"], ["B", None], [" a", "C"]], ["A", "C"]).tolist()
    [[1.0, 1.0], [0.0, 0.0], [1.0, 1.0]]
    """
    table = _answers("answers", answers)
    keys = _answers("key", key).ravel()
    if keys.size != table.shape[1]:
        raise DomainError(f"key must have one option per item ({table.shape[1]}), got {keys.size}", argument="key")
    if any(k is None for k in keys):
        raise InsufficientDataError("key has a blank; every item needs its keyed option", argument="key")
    return (table == keys[None, :]).astype(float)


def group_weights(total: np.ndarray, fraction: float) -> tuple[np.ndarray, np.ndarray]:
    """Weights (0 to 1) of each candidate in the upper and the lower group; each group's weights sum to fraction × N.

    Candidates strictly beyond the group's edge score weigh 1; those at the
    edge share the places left equally.

    >>> [w.tolist() for w in group_weights(np.array([1.0, 2.0, 2.0, 3.0]), 0.25)]
    [[0.0, 0.0, 0.0, 1.0], [1.0, 0.0, 0.0, 0.0]]
    """
    size = fraction * total.size
    if size < 1:
        raise InsufficientDataError(f"fraction × candidates is {v.show(size)}: each group needs at least one "
                                    f"candidate (more candidates or a larger fraction)", argument="fraction")

    def top(t: np.ndarray) -> np.ndarray:
        edge = np.sort(t)[::-1][math.ceil(size - 1e-9) - 1]
        above, at = np.sum(t > edge), np.sum(t == edge)
        return np.where(t > edge, 1.0, np.where(t == edge, (size - above) / at, 0.0))

    return top(total), top(-total)


def _item(answers: np.ndarray, item) -> int:
    return v.column_index("item", item, answers.shape[1])


def _fraction(fraction) -> None:
    v.between("fraction", fraction, 0.0, 0.5, low_open=True)


# ---------------------------------------------------------------- spreadsheet functions

@spreadsheet("OPTION_SHARE", returns="proportion", reference=_KELLEY + "; " + _CROCKER + " (distractor analysis).")
def option_share(responses: Range, item: int, option: Label, *,
                 part: Literal["all", "upper", "lower"] = "all", fraction: float = 0.27) -> float:
    """Share of candidates choosing one option of one item: all of them, or the upper or lower group.

    share = Σ wᵢ·[answerᵢ = option] / Σ wᵢ, with wᵢ = 1 for "all" and the
    group weights (see the module notes) for "upper" and "lower".

    Parameters
    ----------
    responses : range
        The key in the first row, then one row per candidate; one column per item.
    item : int
        Column number of the item within the range, from 1.
    option : label
        The option, as text ("B") or a number (2).
    part : {"all", "upper", "lower"}, optional
        Everyone (default), or the upper or lower group by number-correct total.
    fraction : float, optional
        Size of each group as a share of the candidates, greater than 0 and at
        most 0.5; default 0.27 (Kelley, 1939).

    Notes
    -----
    Blank answers count in the denominator (an omission is a choice of no
    option). The keyed option's overall share is the item's difficulty p.

    Examples
    --------
    >>> data = [["A", "B"], ["A", "B"], ["C", "B"], ["A", "A"], ["B", "A"]]
    >>> option_share(data, 1, "A")
    0.5
    >>> option_share(data, 1, "A", part="upper", fraction=0.5)  # the top scorer, and two tied sharing one place
    0.75
    """
    key, answers = _key_and_answers(responses)
    j = _item(answers, item)
    _fraction(fraction)
    chose = answers[:, j] == _option_text(option)
    if part == "all":
        return float(chose.mean())
    total = (answers == key[None, :]).sum(axis=1).astype(float)
    upper, lower = group_weights(total, fraction)
    w = upper if part == "upper" else lower
    return float(np.sum(w * chose) / np.sum(w))


@spreadsheet("OPTION_REST_R", returns="correlation",
             reference="Attali, Y. & Fraenkel, T. (2000). The point-biserial as a discrimination index for "
                       "distractors in multiple-choice items: deficiencies in usage and an alternative. Journal of "
                       "Educational Measurement 37, 77-86; " + _CROCKER + ".")
def option_rest_correlation(responses: Range, item: int, option: Label) -> float:
    """Option–rest point-biserial: the correlation of choosing an option with the number correct on the other items.

    r = corr([answerᵢ = option], restᵢ), Pearson (a point-biserial, since one
    variable is 0/1), with restᵢ the number correct on every item but this one.
    For the keyed option it is the corrected item–total correlation; a
    distractor should correlate negatively.

    Parameters
    ----------
    responses : range
        The key in the first row, then one row per candidate (at least 3); one column per item (at least 2).
    item : int
        Column number of the item within the range, from 1.
    option : label
        The option, as text ("B") or a number (2).

    Notes
    -----
    An option chosen by everyone or by no one, or a rest score with no
    spread, gives ``#DIV/0!``. Leaving the item out of the total keeps a
    keyed option from correlating with itself (Attali & Fraenkel, 2000).

    Examples
    --------
    >>> data = [["A", "B", "C"], ["A", "B", "C"], ["C", "B", "A"], ["A", "A", "C"], ["B", "A", "A"]]
    >>> round(option_rest_correlation(data, 1, "A"), 6)
    0.707107
    """
    key, answers = _key_and_answers(responses)
    j = _item(answers, item)
    if answers.shape[0] < 3 or answers.shape[1] < 2:
        raise InsufficientDataError(f"responses needs at least 3 candidates and 2 items, got "
                                    f"{answers.shape[0]} and {answers.shape[1]}", argument="responses")
    chose = (answers[:, j] == _option_text(option)).astype(float)
    scored = (answers == key[None, :]).astype(float)
    rest = scored.sum(axis=1) - scored[:, j]  # whole numbers: the subtraction is exact
    a, b = chose - chose.mean(), rest - rest.mean()
    if not (a @ a > 0):
        raise ZeroVarianceError(f"option {v.show(option)} of item {j + 1} is chosen by everyone or by no one; "
                                f"the correlation is undefined", argument="option")
    if not (b @ b > 0):
        raise ZeroVarianceError("responses: the rest score has zero variance; the correlation is undefined",
                                argument="responses")
    return float(np.clip((a @ b) / math.sqrt((a @ a) * (b @ b)), -1.0, 1.0))


@spreadsheet("DISCRIMINATION_INDEX", returns="correlation", reference=_KELLEY + "; " + _CROCKER + ".")
def discrimination_index(items: Range, item: int, *, fraction: float = 0.27) -> float:
    """Discrimination index D: the item's proportion correct in the upper group minus that in the lower group.

    D = p_upper − p_lower, the groups being the ``fraction`` of candidates
    with the highest and the lowest total scores (the item included), ties at
    a group's edge sharing its places (see the module notes).

    Parameters
    ----------
    items : range
        Scored items, 0 or 1 only, one row per candidate and one column per
        item. Rows with a blank are left out (listwise deletion, as the other
        item statistics).
    item : int
        Column number of the item within the range, from 1.
    fraction : float, optional
        Size of each group as a share of the candidates, greater than 0 and at
        most 0.5; default 0.27 (Kelley, 1939).

    Notes
    -----
    D runs from −1 to 1; a negative D (the lower group does better) usually
    means a wrong key. Ebel's rule of thumb (common practice): D ≥ 0.40 very
    good, 0.30-0.39 good, 0.20-0.29 marginal, below 0.20 poor.

    Examples
    --------
    >>> data = [[1, 1, 1], [1, 1, 0], [1, 0, 0], [0, 0, 0]]
    >>> discrimination_index(data, 2, fraction=0.25)
    1.0
    """
    matrix = v.numeric_matrix("items", items)
    bad = ~np.isnan(matrix) & (matrix != 0.0) & (matrix != 1.0)
    if bad.any():
        r, c = np.argwhere(bad)[0]
        raise DomainError(f"items must hold only 0 and 1 (scored right/wrong items); found {v.show(matrix[r, c])} "
                          f"at row {r + 1}, column {c + 1}", argument="items")
    j = v.column_index("item", item, matrix.shape[1])
    _fraction(fraction)
    x = v.complete_rows("items", matrix, min_rows=2)
    upper, lower = group_weights(x.sum(axis=1), fraction)
    return float(np.sum(upper * x[:, j]) / np.sum(upper) - np.sum(lower * x[:, j]) / np.sum(lower))


# ---------------------------------------------------------------- flags

@dataclasses.dataclass(frozen=True)
class ItemFlag:
    """One warning about an item: a short code, the option it concerns (if any) and a sentence for the sheet."""

    code: str
    option: str | None
    message: str


def _item_level_flags(scored: np.ndarray, j: int) -> list[ItemFlag]:
    flags = []
    try:
        r = reliability.item_total_correlation(scored, j + 1)
    except ZeroVarianceError:
        return [ItemFlag("no_spread", None, "everyone scored the same on this item; it cannot discriminate")]
    if r < 0:
        flags.append(ItemFlag("negative_item_total", None,
                              f"corrected item-total r is negative ({r:.2f}): check the key"))
    if scored.shape[1] >= 3:
        try:
            without, alpha = reliability.alpha_if_deleted(scored, j + 1), reliability.cronbach_alpha(scored)
        except TruebandError:  # a total with no spread: alpha is undefined either way
            return flags
        if without > alpha:
            flags.append(ItemFlag("alpha_rises_if_deleted", None,
                                  f"alpha rises from {alpha:.3f} to {without:.3f} without this item"))
    return flags


def item_flags(responses, item: int, *, options: Sequence | None = None, fraction: float = 0.27) -> list[ItemFlag]:
    """Every warning that applies to one item, in a fixed order (not only the first).

    * ``unchosen_distractor``: a distractor nobody chose (only for the options
      listed in ``options``; an option nobody chose does not appear in the data);
    * ``distractor_positive_r``: a distractor whose option–rest correlation is
      positive (stronger candidates choose it: check the key);
    * ``distractor_favoured_by_upper``: a distractor chosen more often by the
      upper group than by the lower group (check the key);
    * ``no_spread``: everyone scored the same on the item;
    * ``negative_item_total``: the corrected item–total correlation is
      negative (check the key);
    * ``alpha_rises_if_deleted``: coefficient alpha of the other items is
      higher than alpha with this item (needs at least 3 items).

    Parameters
    ----------
    responses : range
        The key in the first row, then one row per candidate (at least 3); one column per item.
    item : int
        Column number of the item, from 1.
    options : sequence, optional
        Every option the item offered (e.g. "ABCD"); without it, distractors
        are the options someone chose.
    fraction : float, optional
        Size of the upper and lower groups; default 0.27.

    Examples
    --------
    A mis-keyed item (the key says "B", the strong candidates answer "A"):

    >>> data = [["B", "A", "A"], ["A", "A", "A"], ["A", "A", "B"], ["A", "B", "A"], ["B", "B", "B"], ["B", "B", "B"]]
    >>> [f.code for f in item_flags(data, 1, options="ABC")]
    ['unchosen_distractor', 'distractor_positive_r', 'distractor_favoured_by_upper', 'negative_item_total', 'alpha_rises_if_deleted']
    """
    key, answers = _key_and_answers(responses)
    j = _item(answers, item)
    _fraction(fraction)
    if answers.shape[0] < 3:
        raise InsufficientDataError(f"responses needs at least 3 candidates, got {answers.shape[0]}",
                                    argument="responses")
    scored = (answers == key[None, :]).astype(float)
    seen = sorted({a for a in answers[:, j] if a is not None})
    listed = [_option_text(o) for o in options] if options is not None else []
    distractors = [o for o in dict.fromkeys([*listed, *seen]) if o is not None and o != key[j]]
    upper, lower = group_weights(scored.sum(axis=1), fraction)
    flags, positive, favoured = [], [], []
    for o in distractors:
        chose = answers[:, j] == o
        if not chose.any():
            flags.append(ItemFlag("unchosen_distractor", o, f"nobody chose distractor {o}"))
            continue
        rest = scored.sum(axis=1) - scored[:, j]
        if chose.all() or np.all(rest == rest[0]):
            continue
        r = float(np.corrcoef(chose.astype(float), rest)[0, 1])
        if r > 0:
            positive.append(ItemFlag("distractor_positive_r", o,
                                     f"distractor {o} correlates positively with the rest of the test "
                                     f"(r = {r:.2f}): check the key"))
        up, low = np.sum(upper * chose) / np.sum(upper), np.sum(lower * chose) / np.sum(lower)
        if up > low:
            favoured.append(ItemFlag("distractor_favoured_by_upper", o,
                                     f"distractor {o} is chosen more by the upper group ({up:.2f}) than by the "
                                     f"lower group ({low:.2f}): check the key"))
    return flags + positive + favoured + _item_level_flags(scored, j)
