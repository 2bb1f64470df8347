"""Alpha within a group, the retest gain and the retesters' selection, checked against outside values.

Sources:
* Lakens, D. (2013). Calculating and reporting effect sizes. Frontiers in Psychology 4, 863: the worked
  example of two movies rated by the same ten people (means 8.7 and 7.7, SDs 0.82 and 0.95,
  t(9) = 4.74, d_av = 1.13, d_z = 1.50) (the ratings from memory; the printed summaries agree with them);
* reference libraries: scipy.stats.ttest_rel (its confidence_interval), pingouin.compute_effsize(paired=True,
  eftype="cohen") (d_av), pingouin.cronbach_alpha (listwise, with its Feldt interval) on a subset;
* the selection model (Campbell & Kenny 1999): a simulated group that all failed the first sitting.
"""

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from helpers import raises_code
from trueband.funcs import call

pingouin = pytest.importorskip("pingouin")

# Lakens (2013), the movie ratings (from memory; means, SDs and t as printed there)
MOVIE_1 = [9, 7, 8, 9, 8, 9, 9, 10, 9, 9]
MOVIE_2 = [9, 6, 7, 8, 7, 9, 8, 8, 8, 7]


def column(values):
    return [[x] for x in values]


def test_retest_gain_lakens_example():
    first, second = column(MOVIE_2), column(MOVIE_1)
    # Lakens (2013): mean difference 1.0, d_av 1.13, d_z = 1.50 (gain / SD of the differences)
    assert call("RETEST_GAIN", first, second, "gain") == pytest.approx(1.0, abs=1e-14)
    assert call("RETEST_GAIN", first, second, "standardized") == pytest.approx(1.13, abs=0.005)
    gain, sd = call("RETEST_GAIN", first, second, "gain"), call("RETEST_GAIN", first, second, "sd")
    assert gain / sd == pytest.approx(1.50, abs=0.005)
    # t(9) = 4.74 (Lakens 2013) from the gain, its SD and n
    assert gain / (sd / np.sqrt(10)) == pytest.approx(4.74, abs=0.005)


def test_retest_gain_against_scipy_and_pingouin():
    rng = np.random.default_rng(7)
    a = rng.normal(50, 10, 80)
    b = 0.8 * a + rng.normal(14, 6, 80)
    a[3] = np.nan   # an unpaired person is skipped
    b[10] = np.nan
    keep = ~np.isnan(a) & ~np.isnan(b)
    ci = stats.ttest_rel(b[keep], a[keep]).confidence_interval(0.90)   # scipy, paired t interval
    first, second = column([None if np.isnan(x) else x for x in a]), column([None if np.isnan(x) else x for x in b])
    assert call("RETEST_GAIN", first, second, "lower", 0.90) == pytest.approx(ci.low, rel=1e-12)
    assert call("RETEST_GAIN", first, second, "upper", 0.90) == pytest.approx(ci.high, rel=1e-12)
    # pingouin's paired Cohen d is the mean difference over the root mean of the two variances (d_av)
    assert call("RETEST_GAIN", first, second, "standardized") == pytest.approx(
        pingouin.compute_effsize(b[keep], a[keep], paired=True, eftype="cohen"), rel=1e-12)


def test_retest_gain_refusals():
    with raises_code("#N/A", "second"):
        call("RETEST_GAIN", column([1, 2, 3]), column([4, None, None]), "gain")
    with raises_code("#DIV/0!", "second"):
        call("RETEST_GAIN", column([1, 2, 3]), column([2, 3, 4]), "lower")
    with raises_code("#VALUE!", "second"):
        call("RETEST_GAIN", column([1, 2, 3]), column([2, 3]), "gain")
    with raises_code("#VALUE!", "part"):
        call("RETEST_GAIN", column([1, 2, 3]), column([2, 3, 5]), "median")


def test_retest_selection_of_people_who_all_failed():
    # Campbell & Kenny (1999): people chosen for a low first score regress toward the mean at a second
    # sitting even without any practice effect. Simulated: true score T, two parallel sittings, no gain.
    rng = np.random.default_rng(70)
    t = rng.normal(50, 8, 900)
    x1, x2 = t + rng.normal(0, 5, 900), t + rng.normal(0, 5, 900)
    cut = np.quantile(x1, 0.4)
    failed = x1 < cut
    retest = np.where(failed, x2, np.nan)
    first, second = column(x1), column([None if np.isnan(x) else x for x in retest])
    assert call("RETEST_SELECTION", first, second, cut, "below cut") == 1.0
    expected = (x1[failed].mean() - x1.mean()) / x1.std(ddof=1)   # the definition, worked with numpy
    assert call("RETEST_SELECTION", first, second, cut, "first difference") == pytest.approx(expected, rel=1e-12)
    assert expected < -0.5
    # the whole "gain" here is regression toward the mean: clearly positive with no practice effect at all
    assert call("RETEST_GAIN", first, second, "lower") > 0


def test_alpha_among_equals_pingouin_on_the_subset():
    rng = np.random.default_rng(11)
    trait = rng.standard_normal(300)
    items = (trait[:, None] + rng.standard_normal((300, 8)) > 0).astype(float)
    hired = rng.random(300) < 0.3
    items[5, 2] = np.nan
    among = column([float(i) if h else "" for i, h in enumerate(hired)])
    rows = [[None if np.isnan(x) else x for x in row] for row in items]
    frame = pd.DataFrame(items[hired])
    alpha, ci = pingouin.cronbach_alpha(frame, nan_policy="listwise", ci=0.9)   # pingouin gives its interval to 3 decimals
    assert call("ALPHA_AMONG", rows, among) == pytest.approx(alpha, rel=1e-12)
    assert call("ALPHA_AMONG", rows, among, "lower", 0.9) == pytest.approx(ci[0], abs=1e-3)
    assert call("ALPHA_AMONG", rows, among, "upper", 0.9) == pytest.approx(ci[1], abs=1e-3)


def test_alpha_among_refusals():
    items = [[1, 2], [2, 3], [3, 5]]
    with raises_code("#VALUE!", "among"):
        call("ALPHA_AMONG", items, column([1, 1]))
    with raises_code("#N/A", "among"):
        call("ALPHA_AMONG", items, column([1, "", ""]))
    with raises_code("#VALUE!", "among"):
        call("ALPHA_AMONG", items, column([1, "yes", 1]))
