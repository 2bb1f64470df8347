"""Angoff cut scores, checked against outside values.

Sources:
* the method: Angoff (1971), pp. 514-515 (each judge states, item by item, the
  probability that a minimally acceptable person answers correctly; the sum
  is that judge's minimum score) and Cizek & Bunch (2007), ch. 6 (the panel's
  cut is the mean of the judges' sums);
* the standard error: MacCann & Stanley (2004), Practical Assessment,
  Research & Evaluation 9(5), the "central limit theorem" estimate, the
  standard deviation of the judges' cuts over the square root of the number
  of judges; Brennan & Lockwood (1980) for its place as the judge facet;
* reference libraries: numpy for the direct computation on the same matrix
  and scipy.stats.sem (standard error of a mean, n − 1 denominator) for the
  standard error.

No published item-by-judge table with its printed cut was found to copy; the
numeric checks below are against the reference libraries on matrices drawn at
random, and against cases whose answer follows from the definition.
"""

import numpy as np
import pytest
from scipy import stats

from helpers import raises_code
from trueband.funcs import call


def random_panel(seed, items, judges):
    rng = np.random.default_rng(seed)
    return np.round(rng.uniform(0.2, 0.95, (items, judges)), 2)


@pytest.mark.parametrize("items, judges", [(40, 8), (10, 3), (1, 5), (25, 2), (60, 15)])
def test_cut_and_se_against_numpy_and_scipy(items, judges):
    m = random_panel(items * judges, items, judges)
    rows = m.tolist()
    # Cizek & Bunch (2007), ch. 6: mean over judges of each judge's sum; equal to the sum of the item means.
    assert call("ANGOFF_CUT", rows) == pytest.approx(m.sum(axis=0).mean(), rel=1e-13)
    assert call("ANGOFF_CUT", rows) == pytest.approx(m.mean(axis=1).sum(), rel=1e-13)
    # MacCann & Stanley (2004): SD (n - 1) of the judges' cuts over sqrt(judges); scipy.stats.sem is that.
    cuts = m.sum(axis=0)
    assert call("ANGOFF_SE", rows) == pytest.approx(stats.sem(cuts), rel=1e-12)
    assert call("ANGOFF_SE", rows) == pytest.approx(np.std(cuts, ddof=1) / np.sqrt(judges), rel=1e-12)


def test_definition_cases():
    # Angoff (1971): one judge's cut is the sum of the stated probabilities.
    assert call("ANGOFF_CUT", [[0.5]] * 40) == pytest.approx(20.0, rel=1e-15)
    assert call("ANGOFF_CUT", [0.6, 0.7, 0.8]) == pytest.approx(2.1, rel=1e-15)  # a flat list is one judge
    assert call("ANGOFF_CUT", [[1.0, 1.0]] * 12) == 12.0
    assert call("ANGOFF_CUT", [[0.0, 0.0]] * 12) == 0.0
    # Judges who imply the same cut (different items, same sum) give SE 0.
    assert call("ANGOFF_SE", [[0.4, 0.6], [0.6, 0.4]]) == 0.0
    # Worked by hand: judges' cuts 1.9, 2.3, 2.7 -> SD 0.4 -> SE 0.4 / sqrt(3).
    panel = [[0.5, 0.7, 0.9], [0.6, 0.7, 0.8], [0.8, 0.9, 1.0]]
    assert call("ANGOFF_CUT", panel) == pytest.approx(2.3, rel=1e-14)
    assert call("ANGOFF_SE", panel) == pytest.approx(0.4 / np.sqrt(3), rel=1e-13)


def test_all_blank_padding_is_ignored():
    panel = [[0.5, 0.7, None], [0.6, 0.8, ""], [None, None, None]]
    assert call("ANGOFF_CUT", panel) == pytest.approx(call("ANGOFF_CUT", [[0.5, 0.7], [0.6, 0.8]]), rel=1e-15)
    assert call("ANGOFF_SE", panel) == pytest.approx(call("ANGOFF_SE", [[0.5, 0.7], [0.6, 0.8]]), rel=1e-15)


def test_errors_name_the_argument():
    with raises_code("#N/A", "judgments", match="blank judgment at row 2, column 3"):
        call("ANGOFF_CUT", [[0.5, 0.6, 0.7], [0.5, 0.6, None], [0.5, 0.6, 0.7]])
    with raises_code("#N/A", "judgments", match="blank judgment at row 1, column 2"):
        call("ANGOFF_SE", [[0.5, None, 0.7, None], [0.5, 0.6, 0.7, None]])
    with raises_code("#NUM!", "judgments", match="between 0 and 1 .*got 70"):
        call("ANGOFF_CUT", [[70, 80], [60, 65]])
    with raises_code("#NUM!", "judgments", match="got -0.1"):
        call("ANGOFF_SE", [[0.5, -0.1], [0.6, 0.7]])
    with raises_code("#VALUE!", "judgments", match="text"):
        call("ANGOFF_CUT", [[0.5, "high"]])
    with raises_code("#N/A", "judgments", match="at least 2 judges"):
        call("ANGOFF_SE", [[0.5], [0.6]])
    with raises_code("#N/A", "judgments", match="no judgments"):
        call("ANGOFF_CUT", [[None, None]])
    with raises_code("#N/A", "judgments"):
        call("ANGOFF_CUT", [])
    with raises_code("#VALUE!", "judgments", match="blank"):
        call("ANGOFF_SE", None)
