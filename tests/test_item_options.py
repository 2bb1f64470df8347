"""Item analysis from raw answers and a key: scoring, option shares, option–rest r, D and flags.

Sources: Kelley (1939), Journal of Educational Psychology 30, 17-24 (upper and lower 27% groups, D);
Crocker & Algina (1986), ch. 14 (distractor analysis, D = p_upper − p_lower); Attali & Fraenkel
(2000), Journal of Educational Measurement 37, 77-86 (option–rest point-biserial). Reference
libraries: scipy.stats.pointbiserialr for the point-biserial, numpy for shares, and the project's
ITEM_TOTAL / ALPHA_IF_DELETED / CRONBACH_ALPHA (themselves checked against pingouin) for the flags.
Small constructed cases whose answers follow by hand are said to be so.
"""

import numpy as np
import pytest
from scipy import stats

from helpers import raises_code
from trueband.funcs import call
from trueband.funcs.options import item_flags, score_responses


def random_answers(seed, people=80, items=6):
    rng = np.random.default_rng(seed)
    ability = rng.normal(size=people)
    key = list("ABCDAB")[:items]
    rows = []
    for a in ability:
        row = []
        for j in range(items):
            right = rng.random() < 1 / (1 + np.exp(-(a + 0.3 * j - 0.5)))
            row.append(key[j] if right else rng.choice([o for o in "ABCD" if o != key[j]]))
        rows.append(row)
    return [key] + rows


def test_scoring_against_a_key():
    # constructed: case and spaces do not matter; a blank is wrong; 2 and "2" are one option
    assert score_responses([["A", "c"], ["B", None], [" a", "C"]], ["A", "C"]).tolist() == [[1, 1], [0, 0], [1, 1]]
    assert score_responses([[2, "1"], ["2", 1.0]], [2, 1]).tolist() == [[1, 1], [1, 1]]
    with raises_code("#N/A", "key"):
        score_responses([["A"]], [None])


@pytest.mark.parametrize("seed", [1, 2])
def test_overall_share_and_option_rest_r_against_numpy_and_scipy(seed):
    data = random_answers(seed)
    key, answers = np.array(data[0], dtype=object), np.array(data[1:], dtype=object)
    scored = (answers == key).astype(float)
    for j in range(answers.shape[1]):
        rest = scored.sum(axis=1) - scored[:, j]
        for option in "ABCD":
            chose = answers[:, j] == option
            assert call("OPTION_SHARE", data, j + 1, option) == pytest.approx(chose.mean(), rel=1e-15)  # numpy
            if 0 < chose.sum() < chose.size:
                want = stats.pointbiserialr(chose, rest).statistic  # scipy
                assert call("OPTION_REST_R", data, j + 1, option) == pytest.approx(want, abs=1e-12)
        # the keyed option's option-rest r is the corrected item-total r (ITEM_TOTAL on the scored items)
        assert call("OPTION_REST_R", data, j + 1, key[j]) == pytest.approx(call("ITEM_TOTAL", scored.tolist(), j + 1),
                                                                           abs=1e-12)


def test_group_shares_and_d_without_ties():
    # constructed: 10 candidates with distinct totals 0..9 on a 9-item test; fraction 0.3 -> 3 per group
    n = 10
    items = np.array([[1 if j < i else 0 for j in range(9)] for i in range(n)], dtype=float)
    items[:, 8] = [0, 1, 0, 0, 1, 0, 1, 1, 0, 1]
    # the totals are still distinct: upper = the 3 highest totals, lower = the 3 lowest (by hand from the rows)
    totals = items.sum(axis=1)
    order = np.argsort(totals)
    lower, upper = order[:3], order[-3:]
    want = items[upper, 8].mean() - items[lower, 8].mean()
    assert call("DISCRIMINATION_INDEX", items.tolist(), 9, 0.3) == pytest.approx(want, abs=1e-15)
    key = ["A"] * 9
    data = [key] + [["A" if x else "B" for x in row] for row in items]
    assert call("OPTION_SHARE", data, 9, "A", "upper", 0.3) == pytest.approx(items[upper, 8].mean(), abs=1e-15)
    assert call("OPTION_SHARE", data, 9, "A", "lower", 0.3) == pytest.approx(items[lower, 8].mean(), abs=1e-15)


def test_ties_at_the_edge_share_the_places():
    # constructed: totals 3, 2, 2, 0 and half the group size 2: the top scorer plus half of each tied one
    items = [[1, 1, 1], [1, 1, 0], [0, 1, 1], [0, 0, 0]]
    # item 1 in the upper group: (1 + 0.5*1 + 0.5*0) / 2 = 0.75; in the lower: (0 + 0.5*1 + 0.5*0) / 2 = 0.25
    assert call("DISCRIMINATION_INDEX", items, 1, 0.5) == pytest.approx(0.5, abs=1e-15)
    # the answer does not depend on the order of the rows
    assert call("DISCRIMINATION_INDEX", items[::-1], 1, 0.5) == pytest.approx(0.5, abs=1e-15)


def test_discrimination_refusals():
    with raises_code("#NUM!", "items"):
        call("DISCRIMINATION_INDEX", [[1, 2], [0, 1]], 1)
    with raises_code("#N/A", "fraction"):
        call("DISCRIMINATION_INDEX", [[1, 0], [0, 1]], 1, 0.27)  # 0.54 of a candidate per group
    with raises_code("#NUM!", "fraction"):
        call("DISCRIMINATION_INDEX", [[1, 0], [0, 1]], 1, 0.6)


def test_a_miskeyed_item_shows_every_flag():
    # constructed: key says B, but the strongest candidates answer A; nobody answers C
    data = [["B", "A", "A"], ["A", "A", "A"], ["A", "A", "B"], ["A", "B", "A"], ["B", "B", "B"], ["B", "B", "B"]]
    codes = [f.code for f in item_flags(data, 1, options="ABC")]
    assert codes == ["unchosen_distractor", "distractor_positive_r", "distractor_favoured_by_upper",
                     "negative_item_total", "alpha_rises_if_deleted"]
    # without the list of options an option nobody chose cannot be known
    assert "unchosen_distractor" not in [f.code for f in item_flags(data, 1)]
    # a sound item has no flags
    good = [list("AAAA"), list("AAAA"), list("AAAB"), list("AABA"), list("ABAA"), list("BBBA"), list("CBBB"),
            list("BCBB")]
    assert [f.code for f in item_flags(good, 1)] == []


def test_option_refusals():
    data = [["A", "B"], ["A", "B"], ["C", "B"], ["A", "A"]]
    with raises_code("#N/A", "responses"):
        call("OPTION_SHARE", [["A", None], ["A", "B"]], 1, "A")
    with raises_code("#NUM!", "item"):
        call("OPTION_SHARE", data, 3, "A")
    with raises_code("#DIV/0!", "option"):
        call("OPTION_REST_R", data, 2, "D")
    with raises_code("#VALUE!", "option"):
        call("OPTION_SHARE", data, 1, True)


def test_answers_are_read_as_label_matrix_reads_them():
    # the answer reading looks up each distinct text once (speed); it must read every cell as the general
    # label reader does (trimmed, capitals, 2 and 2.0 one option, blank and spaces blank) and name a refused
    # cell by its row and column (constructed case, checked by hand)
    from trueband.funcs import _validate
    from trueband.funcs.errors import ArgumentTypeError
    from trueband.funcs.options import _answers, _option_text

    cells = [["A", 2, " b"], [None, 2.0, "  "], ["c", 1, "B"], ["a ", "2", None]]
    expected = [[_option_text(x) for x in row] for row in _validate.label_matrix("responses", cells)]
    assert _answers("responses", cells).tolist() == expected == [["A", "2", "B"], [None, "2", None],
                                                                  ["C", "1", "B"], ["A", "2", None]]
    with pytest.raises(ArgumentTypeError, match="row 2, column 3"):
        _answers("responses", [["A", "B", "C"], ["A", "B", True]])
