"""The validation-study workbook: its numbers against reference libraries and direct calls.

The study is built from the demo applicants (invented data, used here only as input: every
check value below comes from a reference library run on the same data, or from the project's
function called directly on it). Sources of the check values:

* coefficient alpha: ``pingouin.cronbach_alpha(nan_policy="listwise")``;
* ICC forms: ``pingouin.intraclass_corr`` (the six Shrout & Fleiss / McGraw & Wong forms);
* Krippendorff's alpha: the ``krippendorff`` package; Cohen's kappa: ``statsmodels``;
* correlation, its Fisher-z interval and p: ``scipy.stats.pearsonr``;
* Fisher's exact p: ``scipy.stats.fisher_exact``; pooled two-proportion z: ``statsmodels``'s
  ``proportions_ztest``;
* SEM, bands, corrections, utility: the registered functions called directly with the inputs
  computed here with numpy.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from openpyxl import load_workbook
from scipy import stats

from trueband.bridge.study.demo import make_demo
from trueband.bridge.study.build import NOT_COMPUTABLE, make_study
from trueband.bridge.study.templates import study_data_workbook
from trueband.bridge.study.sheets.validity import EXPECTANCY_ROW
from trueband.funcs import call

pingouin = pytest.importorskip("pingouin")
krippendorff = pytest.importorskip("krippendorff")

CUT = 24.0


@pytest.fixture(scope="module")
def demo():
    return make_demo()


@pytest.fixture(scope="module")
def study(tmp_path_factory, demo):
    folder = tmp_path_factory.mktemp("study")
    data = study_data_workbook(folder / "data.xlsx", demo, cut=CUT)
    result = make_study(data, folder / "study.xlsx")
    wb = load_workbook(result.path, data_only=True)
    formulas = load_workbook(result.path, data_only=False)
    return result, wb, formulas


def value(study, key):
    result, wb, _ = study
    sheet, coord = result.cells[key]
    return wb[sheet][coord].value


def formula(study, key):
    result, _, wb = study
    sheet, coord = result.cells[key]
    return wb[sheet][coord].value


@pytest.fixture(scope="module")
def arrays(demo):
    scores = demo.items.sum(axis=1).astype(float)
    perf = np.array([np.nan if p is None else p for p in demo.performance])
    return scores, perf


def test_recalculation_left_no_errors(study):
    result, _, _ = study
    assert result.recalc_report.ok, [tuple(e) for e in result.recalc_report.errors[:10]]
    # the demo's Cuts sheet has cuts so high that a group has nobody passing: the ratio's interval has no finite
    # upper limit there, and the sheet says so; the questionnaire (the demo's second predictor) has rating-scale
    # items, no retest and, among those hired, more spread than among all applicants
    assert [x for x in result.not_computable if x[0] != "Cuts" and "(Work Style)" not in x[0]] == []
    assert all("focal_selected is 0" in reason or "nobody passing" in reason
               for sheet, _, reason in result.not_computable if sheet == "Cuts")
    reasons = {reason.split(",")[0] for sheet, _, reason in result.not_computable if "(Work Style)" in sheet}
    assert reasons <= {"the items are not all scored 0/1", "no retest column was given",
                       "u_x must be greater than 0 and at most 1"}


def test_every_headline_number_is_a_formula(study):
    for key in ("alpha", "alpha_lower", "omega", "split_half", "kr20", "sem", "band_width", "r", "r_p",
                "operational", "operational_indirect", "max_validity", "min_ratio", "taylor_russell", "bcg",
                "icc_agreement_average", "krippendorff_ordinal"):
        f = formula(study, key)
        assert isinstance(f, str) and f.startswith("="), (key, f)


def test_reliability_against_pingouin(study, demo):
    alpha, (lo, hi) = pingouin.cronbach_alpha(pd.DataFrame(demo.items), nan_policy="listwise")
    assert value(study, "alpha") == pytest.approx(alpha, abs=1e-10)
    # pingouin's interval is Feldt's F interval too, printed to 3 decimals
    assert value(study, "alpha_lower") == pytest.approx(lo, abs=6e-4)
    assert value(study, "alpha_upper") == pytest.approx(hi, abs=6e-4)
    assert value(study, "kr20") == pytest.approx(alpha, abs=1e-10)  # KR-20 equals alpha for 0/1 items (Cronbach 1951)


def test_reliability_cells_equal_direct_calls(study, demo, arrays):
    scores, _ = arrays
    x = demo.items
    sd = np.std(scores, ddof=1)
    alpha = call("CRONBACH_ALPHA", x)
    assert value(study, "sd") == pytest.approx(sd, rel=1e-12)
    assert value(study, "omega") == pytest.approx(call("OMEGA", x), abs=1e-10)
    assert value(study, "split_half") == pytest.approx(call("SPLIT_HALF", x, "odd-even"), abs=1e-12)
    assert value(study, "sem") == pytest.approx(sd * np.sqrt(1 - alpha), rel=1e-10)
    assert value(study, "band_width") == pytest.approx(stats.norm.ppf(0.975) * sd * np.sqrt(2 * (1 - alpha)),
                                                       rel=1e-10)


def test_retest_correlation_against_scipy(study, demo, arrays):
    scores, _ = arrays
    rt = np.array([np.nan if v is None else v for v in demo.retest])
    ok = ~np.isnan(rt)
    res = stats.pearsonr(scores[ok], rt[ok])
    assert value(study, "n_retest") == ok.sum()
    assert value(study, "retest_r") == pytest.approx(res.statistic, abs=1e-12)
    ci = res.confidence_interval(0.95)
    assert value(study, "retest_lower") == pytest.approx(ci.low, abs=1e-10)
    assert value(study, "retest_upper") == pytest.approx(ci.high, abs=1e-10)


def test_item_analysis_against_pandas(study, demo):
    x = pd.DataFrame(demo.items)
    total = x.sum(axis=1)
    for j in (0, 12, 26, 39):
        assert value(study, f"item{j + 1}_difficulty") == pytest.approx(x[j].mean(), abs=1e-12)
        assert value(study, f"item{j + 1}_total") == pytest.approx(x[j].corr(total - x[j]), abs=1e-10)
        rest = x.drop(columns=j)
        assert value(study, f"item{j + 1}_aid") == pytest.approx(
            pingouin.cronbach_alpha(rest, nan_policy="listwise")[0], abs=1e-10)
    # the item made weak on purpose in the demo is flagged
    _, wb, _ = study
    flags = {wb["Items"].cell(r, 1).value: wb["Items"].cell(r, 6).value for r in range(7, 47)}
    assert wb["Items"]["F6"].value == "Flag"
    assert flags["Q13"].split("; ")[0] == "weak discrimination"  # and every other flag that applies
    assert flags["Q27"] == "very easy"  # made very easy on purpose in the demo
    # standard deviation of a 0/1 item: pandas' n - 1 SD
    for j in (0, 26):
        assert value(study, f"item{j + 1}_sd") == pytest.approx(x[j].std(ddof=1), abs=1e-12)


def test_rater_agreement_against_pingouin_and_krippendorff(study, demo):
    y = demo.ratings
    long = pd.DataFrame(y).reset_index().melt(id_vars="index", var_name="rater", value_name="rating")
    icc = pingouin.intraclass_corr(long, targets="index", raters="rater", ratings="rating").set_index("Type")
    pairs = {("oneway", "single"): "ICC(1,1)", ("agreement", "single"): "ICC(A,1)",
             ("consistency", "single"): "ICC(C,1)", ("oneway", "average"): "ICC(1,k)",
             ("agreement", "average"): "ICC(A,k)", ("consistency", "average"): "ICC(C,k)"}
    for (model, unit), name in pairs.items():
        assert value(study, f"icc_{model}_{unit}") == pytest.approx(icc.loc[name, "ICC"], abs=1e-10), name
        assert value(study, f"icc_{model}_{unit}_p") == pytest.approx(icc.loc[name, "pval"], abs=1e-10), name
        lo, hi = icc.loc[name, "CI95"]  # pingouin rounds its limits to 2 decimals
        assert value(study, f"icc_{model}_{unit}_lower") == pytest.approx(lo, abs=0.006), name
        assert value(study, f"icc_{model}_{unit}_upper") == pytest.approx(hi, abs=0.006), name
    for level in ("ordinal", "interval"):
        ref = krippendorff.alpha(reliability_data=y.T.astype(float), level_of_measurement=level)
        assert value(study, f"krippendorff_{level}") == pytest.approx(ref, abs=1e-10), level


def test_kappa_against_statsmodels(study, demo):
    from statsmodels.stats.inter_rater import cohens_kappa

    y = demo.ratings
    for a, b in ((0, 1), (0, 2), (1, 2)):
        table = pd.crosstab(pd.Categorical(y[:, a], categories=range(1, 6)),
                            pd.Categorical(y[:, b], categories=range(1, 6)), dropna=False).to_numpy()
        assert value(study, f"kappa_none_{a + 1}_{b + 1}") == pytest.approx(cohens_kappa(table).kappa, abs=1e-10)
        assert value(study, f"kappa_quadratic_{a + 1}_{b + 1}") == pytest.approx(
            cohens_kappa(table, wt="quadratic").kappa, abs=1e-10)


def test_validity_against_scipy_and_direct_calls(study, arrays):
    scores, perf = arrays
    ok = ~np.isnan(perf)
    res = stats.pearsonr(scores[ok], perf[ok])
    n = int(ok.sum())
    assert value(study, "n_criterion") == n
    assert value(study, "r") == pytest.approx(res.statistic, abs=1e-12)
    assert value(study, "r_p") == pytest.approx(res.pvalue, rel=1e-8)
    ci = res.confidence_interval(0.95)
    assert value(study, "r_lower") == pytest.approx(ci.low, abs=1e-10)
    assert value(study, "r_upper") == pytest.approx(ci.high, abs=1e-10)
    r = res.statistic
    sd_u, sd_r = np.std(scores, ddof=1), np.std(scores[ok], ddof=1)
    alpha = value(study, "alpha")
    assert value(study, "r_disattenuated") == pytest.approx(r / np.sqrt(0.52), rel=1e-10)
    assert value(study, "r_range") == pytest.approx(call("RANGE_CORRECT", r, sd_r, sd_u), rel=1e-10)
    # Thorndike Case II written out (Thorndike 1949; Hunter, Schmidt & Le 2006, eq. 1)
    big_u = sd_u / sd_r
    assert value(study, "r_range") == pytest.approx(big_u * r / np.sqrt(1 + r * r * (big_u ** 2 - 1)), rel=1e-10)
    assert value(study, "operational") == pytest.approx(call("OPERATIONAL_VALIDITY", r, 0.52, sd_r, sd_u), rel=1e-10)
    assert value(study, "operational_indirect") == pytest.approx(
        call("RANGE_CORRECT_INDIRECT", r, sd_r / sd_u, alpha, 0.52), rel=1e-10)
    assert value(study, "max_validity") == pytest.approx(np.sqrt(alpha * 0.52), rel=1e-10)
    slope, intercept = np.polyfit(scores[ok], perf[ok], 1)
    assert value(study, "slope") == pytest.approx(slope, rel=1e-9)
    assert value(study, "intercept") == pytest.approx(intercept, rel=1e-9)


def test_expectancy_table_counts(study, arrays):
    _, wb, _ = study
    _assert_expectancy_table(wb["Validity"], *arrays)


def _assert_expectancy_table(ws, scores, perf):
    """The Validity sheet's expectancy table against numpy over the scores and criterion values."""
    ok = ~np.isnan(perf)
    edges = [np.percentile(scores, 20 * q) for q in range(6)]  # numpy's default = the spreadsheet PERCENTILE
    threshold = np.median(perf[ok])
    for q in range(5):
        r = EXPECTANCY_ROW + 3 + q
        lo, hi = edges[q], edges[q + 1]
        inside = ok & (scores >= lo) & ((scores < hi) if q < 4 else (scores <= hi))
        assert ws.cell(r, 2).value == pytest.approx(lo) and ws.cell(r, 3).value == pytest.approx(hi)
        assert ws.cell(r, 4).value == inside.sum()
        if not inside.any():
            assert ws.cell(r, 5).value == "none" and ws.cell(r, 6).value == "none"
            continue
        assert ws.cell(r, 5).value == pytest.approx(perf[inside].mean(), rel=1e-12)
        assert ws.cell(r, 6).value == pytest.approx((perf[inside] >= threshold).mean(), rel=1e-12)


def test_intervals_past_the_possible_scores_are_cut_and_marked(study, demo, arrays):
    # An interval for a true score cannot reach past the scores the test allows (0 to k for k items scored
    # 0/1, common practice): each limit is cut there and the note column says which end was cut.
    scores, _ = arrays
    result, wb, formulas = study
    ws = wb["Bands"]
    note_col = next(c for c in range(1, 20) if str(ws.cell(1, c).value).startswith("Interval note"))
    sd, rel, k = np.std(scores, ddof=1), call("CRONBACH_ALPHA", demo.items), demo.items.shape[1]
    lower = np.array([call("SCORE_CI", s, sd, rel, "lower") for s in scores])
    upper = np.array([call("SCORE_CI", s, sd, rel, "upper") for s in scores])
    notes = [ws.cell(i + 2, note_col).value for i in range(demo.n)]
    expected = ["cut at both possible ends" if lo < 0 and up > k else "cut at the lowest possible score" if lo < 0
                else "cut at the highest possible score" if up > k else None for lo, up in zip(lower, upper)]
    assert notes == expected and any(expected)
    for i in np.flatnonzero((lower < 0) | (upper > k)):
        assert ws.cell(i + 2, 5).value == pytest.approx(max(0.0, lower[i]), rel=1e-12, abs=1e-12)
        assert ws.cell(i + 2, 6).value == pytest.approx(min(float(k), upper[i]), rel=1e-12)
    cut = int(((lower < 0) | (upper > k)).sum())
    assert any(n.startswith(f"{cut} score interval(s) on the Bands sheet reach below") for n in result.notes)


@pytest.mark.slow
def test_expectancy_table_takes_a_criterion_filled_in_later(study, demo, arrays, tmp_path):
    # the table is live: a criterion value typed into the study's copy of the data, then trueband's engine
    # recalculating every formula, changes it as numpy says (issue 16, item 8)
    from trueband.bridge.engine.recalc import recalculate
    from trueband.bridge.study.data_workbook import read_study_data
    from trueband.bridge.workbook.package import open_workbook_package
    from trueband.bridge.workbook.save import PackageChanges, save_workbook
    from trueband.bridge.workbook.sheet_edit import NewCell, add_cells
    from openpyxl.utils import get_column_letter

    result, before, _ = study
    scores, perf = arrays
    data = read_study_data(result.path.with_name("data.xlsx"))
    col = get_column_letter(data.columns["criterion"] + 1)
    top = np.flatnonzero(np.isnan(perf) & (scores >= np.percentile(scores, 80)))[0]  # no criterion, top fifth
    edited = tmp_path / "edited.xlsx"
    with open_workbook_package(result.path) as pkg:
        part = pkg.sheet(data.sheet).part
        changes = PackageChanges()
        changes.set(pkg, part, add_cells(pkg.read(part), {f"{col}{top + 2}": NewCell(value=1.0)}, replace=True))
        save_workbook(pkg, changes, output=edited)
    recalculate(edited, tmp_path / "recalculated.xlsx", all_formulas=True)
    after = load_workbook(tmp_path / "recalculated.xlsx", data_only=True)["Validity"]
    perf = perf.copy()
    perf[top] = 1.0
    _assert_expectancy_table(after, scores, perf)
    highest = EXPECTANCY_ROW + 7
    assert after.cell(highest, 4).value == before["Validity"].cell(highest, 4).value + 1  # the highest fifth gained one


def test_bands_sheet_equals_direct_calls(study, demo, arrays):
    scores, _ = arrays
    _, wb, _ = study
    ws = wb["Bands"]
    sd = np.std(scores, ddof=1)
    rel = call("CRONBACH_ALPHA", demo.items)
    k = demo.items.shape[1]  # 0/1 items: the possible scores run from 0 to k
    for i in (0, 1, 57, 200, demo.n - 1):
        r = i + 2
        assert ws.cell(r, 1).value == demo.ids[i]
        assert ws.cell(r, 3).value == scores[i]
        lower, upper = (call("SCORE_CI", scores[i], sd, rel, part) for part in ("lower", "upper"))
        assert ws.cell(r, 5).value == pytest.approx(max(0.0, lower), rel=1e-12)
        assert ws.cell(r, 6).value == pytest.approx(min(float(k), upper), rel=1e-12)
        assert ws.cell(r, 7).value == call("SCORE_BAND", scores[i], scores, sd, rel)
        assert ws.cell(r, 8).value == (1 if scores[i] >= CUT else 0)


def test_adverse_impact_against_scipy_and_statsmodels(study, demo, arrays):
    from statsmodels.stats.proportion import proportions_ztest

    scores, _ = arrays
    groups = np.array(demo.groups)
    sel = scores >= CUT
    counts = {g: (int((sel & (groups == g)).sum()), int((groups == g).sum())) for g in ("Group A", "Group B")}
    (rs, ra), (fs, fa) = counts["Group A"], counts["Group B"]
    assert fs / fa < rs / ra  # the demo's reference group is the one with the higher rate
    assert value(study, "rate_Group A") == pytest.approx(rs / ra, rel=1e-14)
    assert value(study, "impact_ratio_Group B") == pytest.approx((fs / fa) / (rs / ra), rel=1e-12)
    assert value(study, "four_fifths_Group B") == ("yes" if (fs / fa) / (rs / ra) < 0.8 else "no")
    z, _ = proportions_ztest([rs, fs], [ra, fa])  # reference minus focal: positive when the focal rate is lower
    assert value(study, "impact_z_Group B") == pytest.approx(z, rel=1e-10)
    _, p = stats.fisher_exact([[fs, fa - fs], [rs, ra - rs]])
    assert value(study, "impact_fisher_Group B") == pytest.approx(p, rel=1e-9)
    short = value(study, "impact_extra_selections_Group B")
    assert (fs + short) / fa >= 0.8 * rs / ra  # the fewest extra selections that reach four-fifths (definition)
    assert short == 0 or (fs + short - 1) / fa < 0.8 * rs / ra
    assert value(study, "min_ratio") == pytest.approx((fs / fa) / (rs / ra), rel=1e-12)


def test_utility_against_direct_calls(study, arrays):
    scores, perf = arrays
    ok = ~np.isnan(perf)
    sr = (scores >= CUT).mean()
    base = (perf[ok] >= np.median(perf[ok])).mean()
    v = value(study, "operational")
    assert value(study, "selection_ratio") == pytest.approx(sr, rel=1e-14)
    assert value(study, "base_rate") == pytest.approx(base, rel=1e-14)
    assert value(study, "taylor_russell") == pytest.approx(call("TAYLOR_RUSSELL", v, base, sr), rel=1e-9)
    assert value(study, "bcg") == pytest.approx(call("BCG_UTILITY", 20, 3, v, 19200, sr, 40), rel=1e-9)
    # Taylor-Russell by bivariate-normal integration with scipy (Taylor & Russell 1939, the definition)
    zx, zy = stats.norm.isf(sr), stats.norm.isf(base)
    mvn = stats.multivariate_normal(mean=[0, 0], cov=[[1, v], [v, 1]])
    both = 1 - stats.norm.cdf(zx) - stats.norm.cdf(zy) + mvn.cdf([zx, zy])
    assert value(study, "taylor_russell") == pytest.approx(both / sr, abs=1e-5)


def test_summary_repeats_the_detail_sheets_and_carries_the_caution(study):
    result, wb, _ = study
    for key in ("alpha", "r", "operational", "min_ratio", "taylor_russell"):
        assert value(study, f"summary_{key}") == pytest.approx(value(study, key), rel=1e-15)
    text = " ".join(str(c.value) for row in wb["Summary"].iter_rows() for c in row if isinstance(c.value, str))
    assert "not legal findings" in text and "Uniform Guidelines" in text
    notes = " ".join(str(c.value) for row in wb["Notes"].iter_rows() for c in row if isinstance(c.value, str))
    assert "not legal findings" in notes and "Cronbach" in notes and "400 rows" in notes


def test_charts_are_in_the_package(study):
    import zipfile

    result, _, _ = study
    with zipfile.ZipFile(result.path) as z:
        parts = [n for n in z.namelist() if n.startswith("xl/charts/chart")]
        xml = b"".join(z.read(n) for n in parts)
    # the four charts, the Cuts sheet's, the questionnaire's own Items, Validity and Fairness charts, and each
    # predictor's Fairness sheet a chart of one line per group: 4 + 1 + 3 + 1; and per predictor a second
    # Fairness chart for the demo's second demographic column (Age band): + 2
    assert len(parts) == 11
    for title in (b"Test score against job performance", b"Score distribution", b"four-fifths line",
                  b"Item difficulty against discrimination", b"Lowest impact ratio at each cut",
                  b"one line per group"):
        assert title in xml
    assert b'<trendlineType val="linear"' in xml
