"""Very large, very small and offset data (issue 16, item 3): scale-free statistics computed, not refused.

Each check computes the statistic on data multiplied by 1e200 or 1e-170 (or shifted by a common offset)
and compares it with a reference library on the plain data: a scale-free statistic (alpha, a correlation,
an ICC, kappa, Krippendorff's alpha, Cohen's d) is the same number for both. Data: the Shrout & Fleiss
(1979) Table 2 ratings, pingouin's "cronbach_alpha" dataset, R irr's `anxiety` ratings and pingouin's
"penguins" dataset, all shipped with or copied from their packages.
"""

import krippendorff
import numpy as np
import pandas as pd
import pingouin as pg
import pytest
from scipy import stats
from sklearn.metrics import cohen_kappa_score

from trueband.funcs import call

# Shrout & Fleiss (1979), Table 2: 6 targets rated by 4 judges.
SHROUT_FLEISS = np.array([[9, 2, 5, 8], [6, 1, 3, 2], [8, 4, 6, 8], [7, 1, 2, 6], [10, 5, 6, 9], [6, 2, 4, 7]],
                         dtype=float)

# R irr's `anxiety` data (Gamer et al., irr package): 20 subjects rated by 3 raters on a 1-6 scale; raters 1, 2.
ANXIETY_1 = [3, 3, 3, 4, 5, 5, 2, 3, 5, 2, 2, 6, 1, 5, 2, 2, 1, 2, 4, 3]
ANXIETY_2 = [3, 6, 4, 6, 2, 4, 2, 4, 3, 3, 2, 3, 3, 3, 2, 2, 1, 3, 3, 4]

SCALES = [1e200, 1e-170]

# pingouin's own use of a pandas keyword that pandas plans to drop; not ours.
pytestmark = pytest.mark.filterwarnings("ignore:The inplace keyword")


def items_wide() -> np.ndarray:
    """pingouin's "cronbach_alpha" dataset in wide form: 15 people x 10 items."""
    long = pg.read_dataset("cronbach_alpha")
    return long.pivot(index="Subj", columns="Items", values="Scores").to_numpy(float)


def icc_reference(x: np.ndarray, form: str) -> float:
    """pingouin.intraclass_corr's estimate, not rounded (pingouin rounds its tables by default)."""
    long = pd.DataFrame([(i, j, x[i, j]) for i in range(x.shape[0]) for j in range(x.shape[1])],
                        columns=["target", "rater", "rating"])
    saved = pg.options.get("round")
    pg.options["round"] = None
    try:
        table = pg.intraclass_corr(long, targets="target", raters="rater", ratings="rating").set_index("Type")
    finally:
        pg.options["round"] = saved
    return float(table.loc[form, "ICC"])


@pytest.mark.parametrize("scale", SCALES)
def test_cohens_d_of_huge_and_tiny_scores_against_pingouin(scale):
    # the case: COHENS_D([[1e155],[2e155]], [[3e155],[5e155]]) gave -0.0 (the pooled variance overflowed)
    want = pg.compute_effsize([1, 2], [3, 5], paired=False, eftype="cohen")  # -2.236...
    assert call("COHENS_D", [[1e155], [2e155]], [[3e155], [5e155]]) == pytest.approx(want, rel=1e-14)
    penguins = pg.read_dataset("penguins").dropna(subset=["body_mass_g"])
    male = penguins.loc[penguins.sex == "male", "body_mass_g"].to_numpy(float)
    female = penguins.loc[penguins.sex == "female", "body_mass_g"].to_numpy(float)
    want = pg.compute_effsize(male, female, paired=False, eftype="cohen")
    assert call("COHENS_D", male * scale, female * scale) == pytest.approx(want, rel=1e-12)


@pytest.mark.parametrize("offset", [1e9, 1e14])
def test_cohens_d_keeps_its_digits_under_a_common_offset(offset):
    # whole numbers plus an offset are exact floats (below 2**53); d is free of the offset
    a, b = np.array([1.0, 2, 4, 7, 8]), np.array([3.0, 5, 6, 9, 9, 12])
    want = pg.compute_effsize(a, b, paired=False, eftype="cohen")
    assert call("COHENS_D", a + offset, b + offset) == pytest.approx(want, rel=1e-13)


@pytest.mark.parametrize("scale", SCALES)
def test_alpha_and_item_statistics_of_huge_and_tiny_scores(scale):
    x = items_wide()
    big = (x * scale).tolist()
    alpha = pg.cronbach_alpha(pd.DataFrame(x))[0]
    assert call("CRONBACH_ALPHA", big) == pytest.approx(alpha, rel=1e-12)
    # item-total: scipy's Pearson r of item 1 against the sum of the others
    assert call("ITEM_TOTAL", big, 1) == pytest.approx(stats.pearsonr(x[:, 0], x[:, 1:].sum(axis=1))[0], rel=1e-12)
    # alpha if item 1 is deleted: pingouin's alpha of the other items
    assert call("ALPHA_IF_DELETED", big, 1) == pytest.approx(pg.cronbach_alpha(pd.DataFrame(x[:, 1:]))[0],
                                                              rel=1e-12)
    # split half (odd-even): scipy's r of the half sums, stepped up by Spearman-Brown
    r = stats.pearsonr(x[:, 0::2].sum(axis=1), x[:, 1::2].sum(axis=1))[0]
    assert call("SPLIT_HALF", big) == pytest.approx(2 * r / (1 + r), rel=1e-12)
    # the item SD scales with the scores: numpy's SD of the plain item times the scale
    assert call("ITEM_SD", big, 1) == pytest.approx(np.std(x[:, 0], ddof=1) * scale, rel=1e-12)
    # omega: the same computation on the plain data (ML fits stop at a gradient of about 1e-7)
    assert call("OMEGA", big) == pytest.approx(call("OMEGA", x.tolist()), abs=1e-6)


def test_alpha_of_whole_numbers_with_a_common_offset():
    # the case: whole numbers near 3e13 (exact floats) were refused as zero variance
    x = items_wide()
    alpha = pg.cronbach_alpha(pd.DataFrame(x))[0]
    assert call("CRONBACH_ALPHA", (x + 3e13).tolist()) == pytest.approx(alpha, rel=1e-12)
    assert call("ITEM_TOTAL", (x + 3e13).tolist(), 2) == pytest.approx(
        stats.pearsonr(x[:, 1], np.delete(x, 1, axis=1).sum(axis=1))[0], rel=1e-12)
    assert call("ICC", (SHROUT_FLEISS + 3e13).tolist(), "agreement", "single") == pytest.approx(
        icc_reference(SHROUT_FLEISS, "ICC(A,1)"), rel=1e-12)


@pytest.mark.parametrize("scale", SCALES)
@pytest.mark.parametrize("model, unit, form", [("oneway", "single", "ICC(1,1)"), ("agreement", "single", "ICC(A,1)"),
                                                ("consistency", "average", "ICC(C,k)")])
def test_icc_of_huge_and_tiny_ratings_against_pingouin(scale, model, unit, form):
    ours = call("ICC", (SHROUT_FLEISS * scale).tolist(), model, unit)
    assert ours == pytest.approx(icc_reference(SHROUT_FLEISS, form), rel=1e-12)


@pytest.mark.parametrize("scale", SCALES)
@pytest.mark.parametrize("level", ["interval", "ratio"])
def test_krippendorff_of_huge_and_tiny_ratings_against_the_krippendorff_package(scale, level):
    want = krippendorff.alpha(SHROUT_FLEISS.T, level_of_measurement=level)  # the package takes raters x units
    assert call("KRIPPENDORFF_ALPHA", (SHROUT_FLEISS * scale).tolist(), level) == pytest.approx(want, rel=1e-12)


@pytest.mark.parametrize("scale", SCALES)
@pytest.mark.parametrize("weights", ["linear", "quadratic"])
def test_weighted_kappa_of_huge_and_tiny_values_against_scikit_learn(scale, weights):
    # every value 1-6 occurs for rater 1, so scikit-learn's renumbered categories are the values' distances
    want = cohen_kappa_score(ANXIETY_1, ANXIETY_2, weights=weights, labels=[1, 2, 3, 4, 5, 6])
    ours = call("COHEN_KAPPA", [x * scale for x in ANXIETY_1], [x * scale for x in ANXIETY_2], weights)
    assert ours == pytest.approx(want, rel=1e-12)


def test_subnormal_scores_are_scaled_without_an_infinite_factor():
    # Shrout & Fleiss ratings times 2**-1040 (subnormal, still exact: they need few bits): alpha as pingouin's
    tiny = SHROUT_FLEISS * 2.0 ** -1040
    assert call("CRONBACH_ALPHA", tiny.tolist()) == pytest.approx(
        pg.cronbach_alpha(pd.DataFrame(SHROUT_FLEISS))[0], rel=1e-12)
