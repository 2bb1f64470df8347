"""Item bias (DIF): Mantel–Haenszel and logistic-regression DIF, checked against outside values.

Sources:
* statsmodels' ``StratifiedTable`` (``oddsratio_pooled``, ``logodds_pooled_se`` (Robins, Breslow &
  Greenland 1986), ``test_null_odds(correction=True)``): the MH common odds ratio, its log's standard error
  and the continuity-corrected MH chi-square, on one 2 × 2 table per total score built here from the data;
* statsmodels' ``Logit`` fitted to one row per person: the log-likelihoods of the nested models of
  Swaminathan & Rogers (1990), hence the 2-df and 1-df likelihood-ratio tests and Nagelkerke's (1991) R²;
* the published classification rules: ETS A/B/C (Zwick 2012, ETS RR-12-08; the interval test of
  |Δ| > 1 as in Paek & Holland 2015) and the ΔR² cut points of Zumbo & Thomas (1997) and Jodoin & Gierl
  (2001) as the difR R package prints them (R/difLogistic.r, print.Logistic);
* simulated item responses (fixed seeds) are only inputs: the oracle is the reference library.
"""

import math

import numpy as np
import pytest
from scipy import stats

from helpers import raises_code
from trueband.funcs import call
from trueband.funcs.dif import (
    LogisticDIF,
    MantelHaenszelDIF,
    ets_class,
    logistic_dif,
    mantel_haenszel_dif,
    r2_class,
)
from trueband.funcs.errors import TruebandError

sm = pytest.importorskip("statsmodels.api")
from helpers import stratified_by_total  # noqa: E402  (statsmodels' StratifiedTable per total score)


def simulate(n=1200, k=12, seed=3, shift=0.7, focal_share=0.4):
    """0/1 items from a one-factor model; item 1 harder for the focal group, item 2 with a slope difference."""
    rng = np.random.default_rng(seed)
    focal = rng.random(n) < focal_share
    theta = rng.normal(size=n) - 0.3 * focal
    difficulty = np.linspace(-1.5, 1.5, k)
    logit = 1.3 * (theta[:, None] - difficulty)
    logit[:, 0] -= shift * focal
    logit[:, 1] += 0.8 * focal * theta
    items = (rng.random((n, k)) < 1 / (1 + np.exp(-logit))).astype(float)
    groups = np.where(focal, "Focal", "Reference").astype(object)
    return items, groups


statsmodels_tables = stratified_by_total  # the shared helper (tests/helpers.py)


def test_mantel_haenszel_matches_statsmodels_stratified_table():
    items, groups = simulate()
    focal = groups == "Focal"
    results = mantel_haenszel_dif(items, groups, "Focal", "Reference")
    assert len(results) == items.shape[1]
    for j, result in enumerate(results):
        assert isinstance(result, MantelHaenszelDIF) and result.item == j + 1
        table = statsmodels_tables(items, focal, j)
        test = table.test_null_odds(correction=True)
        # statsmodels StratifiedTable: pooled odds ratio, RBG standard error, corrected MH chi-square
        assert result.odds_ratio == pytest.approx(table.oddsratio_pooled, rel=1e-12)
        assert result.delta == pytest.approx(-2.35 * math.log(table.oddsratio_pooled), rel=1e-12)
        assert result.delta_se == pytest.approx(2.35 * table.logodds_pooled_se, rel=1e-10)
        assert result.chi_square == pytest.approx(test.statistic, rel=1e-10)
        assert result.p == pytest.approx(test.pvalue, rel=1e-9, abs=1e-300)
    # the item made harder for the focal group shows it (negative D-DIF, a large category)
    assert results[0].delta < -1 and results[0].ets_class in ("B", "C")


def test_spreadsheet_functions_equal_the_all_items_results():
    items, groups = simulate(n=500, k=6, seed=11)
    rows, labels = items.tolist(), groups.tolist()
    mh = mantel_haenszel_dif(items, groups, "Focal", "Reference")
    lr = logistic_dif(items, groups, "Focal", "Reference")
    for j in range(6):
        assert call("DIF_MH_DELTA", rows, labels, j + 1, "focal", "REFERENCE") == mh[j].delta
        assert call("DIF_MH_P", rows, labels, j + 1, "Focal", "Reference") == mh[j].p
        assert call("DIF_MH_CLASS", rows, labels, j + 1, "Focal", "Reference") == mh[j].ets_class
        assert call("DIF_LR_P", rows, labels, j + 1, "Focal", "Reference") == lr[j].p
        assert call("DIF_LR_R2", rows, labels, j + 1, "Focal", "Reference") == pytest.approx(lr[j].delta_r2,
                                                                                             abs=1e-15)
        assert call("DIF_LR_CLASS", rows, labels, j + 1, "Focal", "Reference", "zumbo-thomas") == lr[j].zumbo_thomas
        assert call("DIF_LR_CLASS", rows, labels, j + 1, "Focal", "Reference") == lr[j].jodoin_gierl


def nagelkerke(llf, llnull, n):
    # Nagelkerke (1991): Cox-Snell R² over its maximum
    return (1 - math.exp(2 * (llnull - llf) / n)) / (1 - math.exp(2 * llnull / n))


@pytest.mark.parametrize("seed", [3, 8])
def test_logistic_dif_matches_statsmodels_logit(seed):
    items, groups = simulate(n=900, k=10, seed=seed)
    g = (groups == "Focal").astype(float)
    total = items.sum(axis=1)
    results = logistic_dif(items, groups, "Focal", "Reference")
    for j, result in enumerate(results):
        assert isinstance(result, LogisticDIF)
        y = items[:, j]
        fits = [sm.Logit(y, sm.add_constant(np.column_stack(cols))).fit(disp=0, tol=1e-12, maxiter=100)
                for cols in ([total], [total, g], [total, g, total * g])]
        score, uniform, full = (f.llf for f in fits)
        assert result.chi_square == pytest.approx(2 * (full - score), rel=1e-7, abs=1e-8)
        assert result.uniform_chi_square == pytest.approx(2 * (uniform - score), rel=1e-7, abs=1e-8)
        assert result.nonuniform_chi_square == pytest.approx(2 * (full - uniform), rel=1e-7, abs=1e-8)
        assert result.p == pytest.approx(stats.chi2.sf(2 * (full - score), 2), rel=1e-6, abs=1e-12)
        n, llnull = len(y), fits[0].llnull
        assert result.r2_score == pytest.approx(nagelkerke(score, llnull, n), rel=1e-9)
        assert result.delta_r2 == pytest.approx(nagelkerke(full, llnull, n) - nagelkerke(score, llnull, n),
                                                rel=1e-6, abs=1e-10)
    assert results[0].p < 0.01  # the item made harder for the focal group is found (a sanity check)


# ---------------------------------------------------------------- the published classification rules

@pytest.mark.parametrize("delta, se, p, expected, why", [
    (-0.99, 0.1, 1e-6, "A", "|D| < 1: A whatever the test says (Zwick 2012)"),
    (-2.0, 0.9, 0.20, "A", "not significantly different from 0: A (Zwick 2012)"),
    (1.0, 0.1, 0.001, "B", "|D| = 1 exactly is not below 1, significant: B"),
    (-1.49, 0.01, 1e-9, "B", "|D| < 1.5: never C"),
    (-1.5, 0.30, 1e-9, "C", "|D| = 1.5 and (1.5 - 1)/0.30 = 1.67 > 1.645, significantly beyond 1: C"),
    (-1.5, 0.31, 1e-9, "B", "(1.5 - 1)/0.31 = 1.61 < 1.645: not significantly beyond 1: B (Paek & Holland 2015)"),
    (1.8, 0.40, 1e-9, "C", "(1.8 - 1)/0.40 = 2 > 1.645 and |D| >= 1.5: C"),
])
def test_ets_rule(delta, se, p, expected, why):
    assert 1.6448 < stats.norm.ppf(0.95) < 1.6449  # the one-sided 5% point of the interval test (scipy.stats.norm)
    assert ets_class(delta, se, p) == expected, why


@pytest.mark.parametrize("delta_r2, p, zt, jg", [
    (0.02, 1e-9, "A", "A"),    # below both lower cut points
    (0.035, 1e-9, "A", "B"),   # Jodoin & Gierl moderate from 0.035
    (0.07, 1e-9, "A", "B"),    # 0.070 is still moderate (large is above it)
    (0.071, 1e-9, "A", "C"),
    (0.13, 1e-9, "B", "C"),    # Zumbo & Thomas moderate from 0.13
    (0.27, 1e-9, "C", "C"),
    (0.27, 0.06, "A", "A"),    # both conventions require the significant 2-df test
])
def test_r2_conventions(delta_r2, p, zt, jg):
    # cut points as difR prints them: Zumbo & Thomas 0 'A' 0.13 'B' 0.26 'C'; Jodoin & Gierl 0 'A' 0.035 'B' 0.07 'C'
    assert r2_class(delta_r2, p, "Zumbo-Thomas") == zt
    assert r2_class(delta_r2, p, "Jodoin-Gierl") == jg


# ---------------------------------------------------------------- conventions and refusals

def test_matching_includes_the_studied_item_and_blanks_are_listwise():
    items, groups = simulate(n=400, k=5, seed=5)
    with_blanks = items.copy().astype(object)
    with_blanks[7, 2] = None
    labels = groups.copy()
    labels[9] = None   # no group
    labels[10] = "other group"
    keep = np.ones(len(items), bool)
    keep[[7, 9, 10]] = False
    full = mantel_haenszel_dif(with_blanks.tolist(), labels.tolist(), "focal", "reference")
    trimmed = mantel_haenszel_dif(items[keep], groups[keep], "focal", "reference")
    assert full == trimmed
    # Holland & Thayer (1988): the matching total includes the studied item, so a person with total 0 has
    # a 0 on every item and the stratum of total 0 never carries information
    assert all(r.strata <= items.shape[1] - 1 for r in trimmed)


def test_labels_are_folded_as_group_key_does():
    items, groups = simulate(n=300, k=5, seed=2)
    messy = ["  FOCAL " if g == "Focal" else "reference" for g in groups]
    assert mantel_haenszel_dif(items, messy, "focal", "Reference") == mantel_haenszel_dif(items, groups, "Focal",
                                                                                          "Reference")


def test_number_labels():
    items, groups = simulate(n=300, k=5, seed=2)
    codes = [2 if g == "Focal" else 1 for g in groups]
    assert call("DIF_MH_DELTA", items.tolist(), codes, 1, 2.0, "1") == \
        call("DIF_MH_DELTA", items.tolist(), groups.tolist(), 1, "Focal", "Reference")


def test_a_degenerate_item_does_not_hide_the_others():
    items, groups = simulate(n=300, k=5, seed=4)
    items[:, 3] = 1.0  # everybody keyed
    mh = mantel_haenszel_dif(items, groups, "Focal", "Reference")
    lr = logistic_dif(items, groups, "Focal", "Reference")
    assert isinstance(mh[3], TruebandError) and mh[3].code == "#DIV/0!"
    assert isinstance(lr[3], TruebandError) and lr[3].code == "#DIV/0!"
    assert all(isinstance(r, MantelHaenszelDIF) for i, r in enumerate(mh) if i != 3)
    with raises_code("#DIV/0!", "items"):
        call("DIF_MH_P", items.tolist(), groups.tolist(), 4, "Focal", "Reference")


def test_separated_responses_are_refused():
    # Focal group: item 1 keyed exactly when the other two items are both keyed; the logistic slope of the
    # focal group runs off to infinity (quasi-complete separation), so no finite estimate exists.
    rng = np.random.default_rng(0)
    n = 200
    rest = (rng.random((n, 2)) < 0.5).astype(float)
    focal = np.arange(n) < 100
    first = np.where(focal, rest.sum(axis=1) == 2, rng.random(n) < 0.5).astype(float)
    items = np.column_stack([first, rest])
    groups = np.where(focal, "f", "r")
    with raises_code("#NUM!", "items", match="separated|converge"):
        call("DIF_LR_P", items.tolist(), groups.tolist(), 1, "f", "r")


@pytest.mark.parametrize("change, code, argument", [
    (lambda a: a.__setitem__((0, 0), 2.0), "#NUM!", "items"),
    (lambda a: a.__setitem__((0, 0), "yes"), "#VALUE!", "items"),
])
def test_item_values_other_than_0_and_1_are_refused(change, code, argument):
    items, groups = simulate(n=100, k=4, seed=1)
    cells = items.astype(object)
    change(cells)
    with raises_code(code, argument, match="row 1, column 1"):
        call("DIF_MH_DELTA", cells.tolist(), groups.tolist(), 1, "Focal", "Reference")


def test_argument_refusals():
    items, groups = simulate(n=100, k=4, seed=1)
    rows, labels = items.tolist(), groups.tolist()
    with raises_code("#NUM!", "item"):
        call("DIF_MH_DELTA", rows, labels, 5, "Focal", "Reference")
    with raises_code("#NUM!", "reference"):
        call("DIF_MH_DELTA", rows, labels, 1, "Focal", " focal ")
    with raises_code("#N/A", "focal"):
        call("DIF_MH_DELTA", rows, labels, 1, "Nobody", "Reference")
    with raises_code("#VALUE!", "groups"):
        call("DIF_MH_DELTA", rows, labels[:-1], 1, "Focal", "Reference")
    with raises_code("#VALUE!", "focal"):
        call("DIF_MH_DELTA", rows, labels, 1, [["Focal", "Reference"]], "Reference")
    with raises_code("#VALUE!", "focal"):
        call("DIF_MH_DELTA", rows, labels, 1, "", "Reference")
    # (common practice: spreadsheet apps answer bad text with #VALUE!)
    with raises_code("#VALUE!", "convention"):
        call("DIF_LR_CLASS", rows, labels, 1, "Focal", "Reference", "Cohen")
    with raises_code("#NUM!", "alpha"):
        mantel_haenszel_dif(rows, labels, "Focal", "Reference", alpha=1.5)


def test_item_dif_is_both_methods_from_one_table():
    from trueband.funcs.dif import item_dif

    items, groups = simulate(n=300, k=6, seed=6)
    both = item_dif(items, groups, "Focal", "Reference")
    assert both.mantel_haenszel == mantel_haenszel_dif(items, groups, "Focal", "Reference")
    assert both.logistic == logistic_dif(items, groups, "Focal", "Reference")
    assert (both.n_focal, both.n_reference) == ((groups == "Focal").sum(), (groups == "Reference").sum())


def test_every_form_of_a_label_column_reads_alike():
    # the label column is read once per distinct value; every range shape gives what label_vector gives
    items, groups = simulate(n=200, k=5, seed=7)
    expected = mantel_haenszel_dif(items, groups.tolist(), "Focal", "Reference")
    for form in (groups, groups.tolist(), [[g] for g in groups], [groups.tolist()], tuple(groups)):
        assert mantel_haenszel_dif(items, form, "Focal", "Reference") == expected
    labels = groups.tolist()
    labels[4] = True
    with raises_code("#VALUE!", "groups", match="row 5"):
        mantel_haenszel_dif(items, labels, "Focal", "Reference")
    labels[4] = float("inf")
    with raises_code("#NUM!", "groups", match="row 5"):
        mantel_haenszel_dif(items, [[g] for g in labels], "Focal", "Reference")


def test_the_tables_of_read_only_arrays_are_counted_once_and_match_a_fresh_count():
    # the workbook engine passes every item's cells the same read-only arrays; the tables are reused then,
    # and the results are those of lists (counted afresh each call); a writeable array is never reused
    from trueband.funcs import dif

    rng = np.random.default_rng(5)
    items = (rng.random((300, 6)) < 0.6).astype(float)
    groups = rng.integers(1, 3, (300, 1)).astype(float)
    fresh = [dif.dif_mh_delta(items.tolist(), groups.tolist(), j, 2, 1) for j in range(1, 7)]
    frozen_items, frozen_groups = items.copy(), groups.copy()
    frozen_items.flags.writeable = frozen_groups.flags.writeable = False
    got = [dif.dif_mh_delta(frozen_items, frozen_groups, j, 2, 1) for j in range(1, 7)]
    assert got == pytest.approx(fresh, rel=1e-15)
    assert dif._LAST_TABLES[0][0] is frozen_items
    assert dif.dif_mh_delta(frozen_items, frozen_groups, 1, 1, 2) == pytest.approx(-fresh[0], rel=1e-12)
    items[:, 0] = 1 - items[:, 0]  # a writeable array may change between calls: counted afresh
    flipped = dif.dif_mh_delta(items, groups, 1, 2, 1)
    assert flipped == pytest.approx(dif.dif_mh_delta(items.tolist(), groups.tolist(), 1, 2, 1), rel=1e-15)
