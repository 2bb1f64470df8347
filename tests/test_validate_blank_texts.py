"""``numeric_matrix``'s one-step reading of numbers mixed with blank texts (a formula's ``""``): the same result,
or the same error and message, as the cell-by-cell check it skips (``FAST_BLANK_TEXTS = False``, the reference)."""

from __future__ import annotations

import random
import statistics

import numpy as np
import pytest

from trueband.funcs import _validate
from trueband.funcs.errors import TruebandError

CELLS = [1.5, -2.0, 3, 0, None, "", "  ", "", float("inf"), float("nan"), 2 ** 70, 10 ** 400, "x", " 1", True]


def outcome(value, fast: bool, monkeypatch, vector: bool = False):
    monkeypatch.setattr(_validate, "FAST_BLANK_TEXTS", fast)
    try:
        got = (_validate.numeric_vector if vector else _validate.numeric_matrix)("scores", value)
    except TruebandError as exc:
        return ("error", type(exc).__name__, exc.message)
    return ("value", got.shape, got.dtype, got.tobytes())


@pytest.mark.parametrize("seed", range(60))
def test_fast_reading_equals_the_cell_by_cell_check(seed, monkeypatch):
    rng = random.Random(seed)
    pool = CELLS if seed % 3 == 0 else [1.5, -2.0, 3, 0, None, "", "  ", float("nan")]  # most: clean ranges
    rows, cols = rng.randint(1, 8), rng.randint(1, 3)
    grid = [[rng.choice(pool) for _ in range(cols)] for _ in range(rows)]
    assert outcome(grid, True, monkeypatch) == outcome(grid, False, monkeypatch)
    column = [row[0] for row in grid]  # a flat list is one column
    assert outcome(column, True, monkeypatch, True) == outcome(column, False, monkeypatch, True)


def test_the_fast_step_is_taken_and_right(monkeypatch):
    # the mean of the numbers, blanks and "" left out, against Python's statistics module
    cells = [[4.0], [""], [7.5], [None], [" "], [1.25]]
    assert _validate._numbers_and_blank_texts([c[0] for c in cells]) is not None
    got = _validate.numeric_matrix("scores", cells)
    assert float(np.nanmean(got)) == pytest.approx(statistics.mean([4.0, 7.5, 1.25]), rel=1e-15)
    assert np.isnan(got[[1, 3, 4], 0]).all()
    assert _validate._numbers_and_blank_texts([1.0, "x"]) is None  # a real text: the check names it


def test_a_text_among_numbers_is_still_named(monkeypatch):
    with pytest.raises(TruebandError, match=r"text .*x.* at row 3, column 1"):
        _validate.numeric_matrix("scores", [[1.0], [""], ["x"]])
    with pytest.raises(TruebandError, match="infinite value at row 2, column 1"):
        _validate.numeric_matrix("scores", [[""], [float("inf")]])
