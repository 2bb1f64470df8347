"""The fast conversion of range arguments (``bridge/formulas/library.py``): the same result as the cell-by-cell
loop it skips (the reference here is that loop itself, ``FAST_RANGES = False``), for every mix of cell types."""

from __future__ import annotations

import math
import random
import statistics

import numpy as np
import pytest
import schedula
from formulas.functions import Error

from trueband.bridge.formulas import library
from trueband.funcs.errors import ArgumentTypeError

CELLS = [1.5, -2.0, 3, 0, float("inf"), 2 ** 70, np.float64(0.25), np.int64(7), True, False, None,
         schedula.EMPTY, "", "x", "empty", Error.errors["#DIV/0!"], Error.errors["#N/A"]]


def convert(arr: np.ndarray, fast: bool, monkeypatch):
    monkeypatch.setattr(library, "FAST_RANGES", fast)
    return library._convert_range(np.atleast_2d(np.asarray(arr, dtype=object)))


def same(a, b) -> bool:
    if isinstance(a, library.PassError) or isinstance(b, library.PassError):
        return type(a) is type(b) and a.value is b.value
    if isinstance(a, np.ndarray) or isinstance(b, np.ndarray):
        return (isinstance(a, np.ndarray) and isinstance(b, np.ndarray) and a.shape == b.shape
                and np.array_equal(a, b, equal_nan=True) and not a.flags.writeable and not b.flags.writeable)
    return repr(a) == repr(b) and [[type(x) for x in r] for r in a] == [[type(x) for x in r] for r in b]


@pytest.mark.parametrize("seed", range(40))
def test_fast_conversion_equals_the_cell_by_cell_loop(seed, monkeypatch):
    rng = random.Random(seed)
    pool = (CELLS if seed % 2 else [1.5, -2.0, 3, np.float64(0.25), None, schedula.EMPTY] if seed % 4
            else [1.5, -2.0, 3, 0, 2 ** 70, np.float64(0.25), float("inf")])  # numbers only: the fast step
    rows, cols = rng.randint(1, 6), rng.randint(1, 4)
    cells = np.empty((rows, cols), dtype=object)
    for i in range(rows):
        for j in range(cols):
            cells[i, j] = rng.choice(pool)
    assert same(convert(cells, True, monkeypatch), convert(cells, False, monkeypatch))


def test_clean_range_is_a_read_only_float_array(monkeypatch):
    for cells in (np.array([[1, None], [schedula.EMPTY, 2.5]], dtype=object),
                  np.array([[1, np.float64(-3.0)], [0, 2.5]], dtype=object)):
        out = convert(cells, True, monkeypatch)
        assert isinstance(out, np.ndarray) and out.dtype == float and not out.flags.writeable
        assert out[0, 0] == 1.0 and out[1, 1] == 2.5 and out.shape == (2, 2)
    assert math.isnan(convert(np.array([[None]], dtype=object), True, monkeypatch)[0, 0])


def test_a_whole_number_beyond_float_range_behaves_as_before(monkeypatch):
    cells = np.array([[1.0, 10 ** 400]], dtype=object)
    # a value no sheet can hold (cells are read as floats): the fast step leaves it to the loop, unchanged
    with pytest.raises(OverflowError):
        convert(cells, False, monkeypatch)
    with pytest.raises(OverflowError):
        convert(cells, True, monkeypatch)


def test_a_text_spelled_like_the_blank_is_not_a_blank(monkeypatch):
    # schedula.EMPTY is a str subclass: a cell holding the text "empty" must stay a text, as before
    out = convert(np.array([[1.0, "empty"]], dtype=object), True, monkeypatch)
    assert not isinstance(out, np.ndarray)
    assert out == convert(np.array([[1.0, "empty"]], dtype=object), False, monkeypatch)


def test_registered_function_through_the_fast_path(monkeypatch):
    # the value checked against Python's statistics module (the sample SD), blanks left out
    monkeypatch.setattr(library, "FAST_RANGES", True)
    values = [3.0, 7.5, None, 1.25, 9.0, 4.0]
    arg = library.range_argument(np.array([[v] for v in values], dtype=object))
    assert isinstance(arg, np.ndarray)
    from trueband.funcs._validate import numeric_vector
    got = numeric_vector("values", arg)
    clean = got[~np.isnan(got)]
    assert float(np.std(clean, ddof=1)) == pytest.approx(statistics.stdev([v for v in values if v is not None]),
                                                        rel=1e-15)
    with pytest.raises(ArgumentTypeError):
        numeric_vector("values", library.range_argument(np.array([[1.0], [True]], dtype=object)))
