"""The reference group is one live choice (issue 17): editing the Impact sheet's reference cell of a demographic
column and recalculating changes every impact sheet (Impact, Strata, Cuts, Stages, Groups, Summary).

The edited workbook is recalculated by trueband's engine and, for the standard formulas (COUNTIFS, INDEX/MATCH,
MIN, IF...), by LibreOffice Calc. Sources of the check values, named beside each check:

* counts: pandas on the same rows (an independent count);
* the impact ratio's log interval: statsmodels ``confint_proportions_2indep(compare="ratio", method="log")``;
* z: statsmodels ``proportions_ztest`` (pooled); Fisher's p: ``scipy.stats.fisher_exact``;
* the Mantel–Haenszel odds ratio, its interval, the CMH test and Breslow–Day (Tarone): statsmodels
  ``StratifiedTable``;
* d: pingouin ``compute_effsize(eftype="cohen")``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from openpyxl import load_workbook
from scipy import stats

from test_study_impact import cut_table, CUT, K, SETUP, counts, find_row, sheet_rows, table
from test_study_setup import write_book
from trueband.bridge.engine.recalc import recalculate
from trueband.bridge.study.build import make_study

sm_proportion = pytest.importorskip("statsmodels.stats.proportion")
sm_contingency = pytest.importorskip("statsmodels.stats.contingency_tables")
pingouin = pytest.importorskip("pingouin")

#: the new reference groups: Women instead of Men (given in the setup), Z instead of the highest rate
NEW = {"Sex": "Women", "Ethnicity": "Z"}
LABEL = "Reference group (edit to compare with another)"


def edit_references(path, new=NEW):
    """Write the new reference groups into the Impact sheet's cells (as a user would), save, recalculate."""
    wb = load_workbook(path)
    ws = wb["Impact"]
    column = None
    for row in ws.iter_rows(min_col=1, max_col=3):
        text = row[0].value
        if isinstance(text, str) and text.startswith("Demographic column: "):
            column = text.removeprefix("Demographic column: ")
        elif text == LABEL:
            row[2].value = new[column]
    wb.save(path)
    report = recalculate(path, in_place=True, all_formulas=True)
    return report


@pytest.fixture(scope="module")
def edited(tmp_path_factory):
    folder = tmp_path_factory.mktemp("reference")
    header, rows = table()
    result = make_study(write_book(folder / "d.xlsx", header, rows, SETUP), folder / "study.xlsx")
    report = edit_references(result.path)
    df = pd.DataFrame(rows, columns=header)
    df["score"] = df[[f"i{j}" for j in range(1, K + 1)]].sum(axis=1)
    df["passed"] = df["score"] >= CUT
    return result, report, load_workbook(result.path, data_only=True), df


def shown(edited, key):
    result, _, wb, _ = edited
    sheet, coord = result.cells[key]
    return wb[sheet][coord].value


def test_the_edited_workbook_recalculates_cleanly(edited):
    _, report, _, _ = edited
    assert report.ok, [tuple(e) for e in report.errors][:5]


def impact_row(wb, column, group):
    """The Impact table row of ``group`` in ``column``'s table, as {header: value}."""
    rows = sheet_rows(wb, "Impact")
    at = find_row(rows, f"Demographic column: {column}")
    head = find_row(rows, "Group", start=at)
    row = rows[find_row(rows, group, start=head)]
    # the tests and further figures of the same groups: the second table, under the first (issue 20)
    tests = find_row(rows, "Group", start=head + 1)
    more = rows[find_row(rows, group, start=tests)]
    return {**dict(zip(rows[head], row)), **{h: v for h, v in zip(rows[tests], more) if h != "Group"}}


def test_impact_tables_compare_with_the_new_reference(edited):
    _, _, wb, df = edited
    for column in ("Sex", "Ethnicity"):
        reference = NEW[column]
        rs, ra = counts(df, column, reference)
        mine = impact_row(wb, column, reference)
        assert mine["Impact ratio (rate ÷ reference rate)"] == "reference group"
        assert mine["Fisher exact p"] is None   # the reference row's other figures are empty text
        for focal in sorted(set(df[column]) - {reference}):
            fs, fa = counts(df, column, focal)
            got = impact_row(wb, column, focal)   # the old reference's row too: it now has figures
            assert got["Impact ratio (rate ÷ reference rate)"] == pytest.approx((fs / fa) / (rs / ra), rel=1e-12)
            # statsmodels: the log interval of a ratio of two independent proportions
            low, high = sm_proportion.confint_proportions_2indep(fs, fa, rs, ra, method="log", compare="ratio")
            assert got["Impact ratio, lower limit"] == pytest.approx(low, rel=1e-9)
            assert got["Impact ratio, upper limit"] == pytest.approx(high, rel=1e-9)
            assert got["Fisher exact p"] == pytest.approx(
                stats.fisher_exact([[fs, fa - fs], [rs, ra - rs]]).pvalue, rel=1e-9)   # scipy
            z = sm_proportion.proportions_ztest([rs, fs], [ra, fa])[0]   # statsmodels, pooled
            assert got["z: gap in standard deviations"] == pytest.approx(z, rel=1e-9)
            assert got["Below four-fifths?"] == ("yes" if (fs / fa) / (rs / ra) < 0.8 else "no")


def test_the_summary_names_the_lowest_ratio_with_the_new_references(edited):
    _, _, _, df = edited
    ratios = []
    for column, reference in NEW.items():
        rs, ra = counts(df, column, reference)
        for focal in sorted(set(df[column]) - {reference}):
            fs, fa = counts(df, column, focal)
            ratios.append(((fs / fa) / (rs / ra), focal, column))
    low = min(ratios)
    assert shown(edited, "summary_min_ratio_where") == f"{low[1]} ({low[2]})"
    assert shown(edited, "min_ratio") == pytest.approx(low[0], rel=1e-12)
    assert shown(edited, "summary_n_below") == sum(1 for r, _, _ in ratios if r < 0.8)


def test_strata_pool_the_new_comparisons_against_statsmodels(edited):
    _, _, wb, df = edited
    rows = sheet_rows(wb, "Strata")
    at = find_row(rows, "Group")
    # the first comparison of Sex is now Men against Women
    assert rows[at][1] == "Men" and rows[at][3] == "Women"
    four = []
    for s in sorted(set(df["Site"]), key=str.casefold):
        here = df[df["Site"] == s]
        four.append([*counts(here, "Sex", "Men"), *counts(here, "Sex", "Women")])
    assert [r[1:5] for r in rows[at + 2:at + 5]] == four   # pandas counts, in the order of the sheet
    st = sm_contingency.StratifiedTable([np.array([[a, b - a], [c, d - c]]) for a, b, c, d in four])
    assert shown(edited, "pooled_odds_ratio") == pytest.approx(st.oddsratio_pooled, rel=1e-9)
    low, high = st.oddsratio_pooled_confint()
    assert shown(edited, "pooled_or_lower") == pytest.approx(low, rel=1e-9)
    assert shown(edited, "pooled_or_upper") == pytest.approx(high, rel=1e-9)
    assert shown(edited, "pooled_p") == pytest.approx(st.test_null_odds(correction=True).pvalue, rel=1e-9)
    assert shown(edited, "homogeneity_p") == pytest.approx(st.test_equal_odds(adjust=True).pvalue, rel=1e-9)
    # Ethnicity's comparisons: every group but Z, in the table's order, against Z
    groups = [r[1] for r in rows if r and r[0] == "Group" and r[3] == "Z"]
    assert groups == ["X", "Y"]
    # every comparison of both columns, stratum by stratum and pooled, with the verdict and headline (statsmodels
    # StratifiedTable, scipy: see check_strata)
    from test_study_impact_guards import check_strata
    for column, reference in NEW.items():
        check_strata(wb, df, column, reference)


def test_the_refusal_to_pool_follows_the_switched_reference(tmp_path):
    # strata that disagree (Simpson): built with one reference and switched to the other, the verdict, headline
    # and refusal paragraph are recalculated live from the Breslow-Day p (statsmodels StratifiedTable agrees)
    from test_study_impact_guards import check_strata

    header, rows = table(n=900, seed=3, simpson=True)
    result = make_study(write_book(tmp_path / "d.xlsx", header, rows, {**SETUP, "group columns": "Sex"}),
                        tmp_path / "s.xlsx")
    df = pd.DataFrame(rows, columns=header)
    df["passed"] = df[[f"i{j}" for j in range(1, K + 1)]].sum(axis=1) >= CUT
    wb = load_workbook(result.path, data_only=True)
    built = [r[2] for r in sheet_rows(wb, "Impact") if r[0] == LABEL][0]
    other = ({"Men", "Women"} - {built}).pop()
    for reference in (built, other):
        if reference == other:
            book = load_workbook(result.path)   # one column: its table has no "Demographic column" heading
            for r in book["Impact"].iter_rows(min_col=1, max_col=3):
                if r[0].value == LABEL:
                    r[2].value = other
            book.save(result.path)
            assert recalculate(result.path, in_place=True, all_formulas=True).ok
            wb = load_workbook(result.path, data_only=True)
        check_strata(wb, df, "Sex", reference)
        sheet, coord = result.cells["summary_pooled_headline"]
        assert wb[sheet][coord].value == "not supported: the strata differ"


def _cut_block(rows, column):
    """(the block's heading row, its header, its cut rows): the two tables of ``column``'s block joined."""
    at = next(i for i, r in enumerate(rows) if r and r[0] == column)
    header, block = cut_table(rows, at)
    return rows[at], header, block


#: The two cuts the Cuts test checks (each a distinct score above the lowest: one row each per column)
TWO_CUTS = (3, 5)


def lowest_as_the_sheet_picks(ratios: dict, order: list):
    """The sheet's rule for a cut's lowest ratio and its group: MIN of the row's ratios, and the group of the first
    ratio equal to it by MATCH(lowest, ratios, 0), i.e. on a tie the first of the tied groups in the order of the
    Impact table's column A (the order of the Cuts sheet's ratio columns)."""
    low = min(ratios.values())
    return low, next(g for g in order if g in ratios and ratios[g] == low)


@pytest.mark.parametrize("column", ["Sex", "Ethnicity"])
def test_cuts_at_two_cuts_against_statsmodels_and_scipy(edited, column):
    _, _, wb, df = edited
    rows = sheet_rows(wb, "Cuts")
    heading, header, cut_rows = _cut_block(rows, column)
    assert NEW[column] in heading   # the block shows the reference group it reads
    reference = NEW[column]
    groups = sorted(set(df[column]))
    order = [h.removeprefix("Impact ratio: ") for h in header if isinstance(h, str) and h.startswith("Impact ratio: ")]
    impact = sheet_rows(wb, "Impact")
    first = find_row(impact, "Group", start=find_row(impact, f"Demographic column: {column}")) + 1
    assert order == [r[0] for r in impact[first:first + len(groups)]]   # the Impact table's order
    n = {g: int((df[column] == g).sum()) for g in groups}
    block = cut_rows   # the block ends at its first row without a cut
    picked = [r for r in block if r[0] in TWO_CUTS]
    # exactly the rows meant: one per cut, in order (the block's cuts are the distinct scores above the lowest)
    assert [r[0] for r in picked] == list(TWO_CUTS)
    assert [r[0] for r in block] == sorted(set(df["score"]))[1:]
    for r in picked:
        cut = r[0]
        passing = {g: int(((df[column] == g) & (df["score"] >= cut)).sum()) for g in groups}
        assert r[header.index(f"Impact ratio: {reference}")] == "reference group"
        ratios = {g: (passing[g] / n[g]) / (passing[reference] / n[reference]) for g in groups if g != reference}
        low_ratio, low = lowest_as_the_sheet_picks(ratios, order)
        assert r[header.index("Lowest impact ratio")] == pytest.approx(low_ratio, rel=1e-12)
        assert r[header.index("Its group")] == low
        fs, fa, rs, ra = passing[low], n[low], passing[reference], n[reference]
        lo, hi = sm_proportion.confint_proportions_2indep(fs, fa, rs, ra, method="log", compare="ratio")
        assert r[header.index("Lower limit")] == pytest.approx(lo, rel=1e-9)      # statsmodels
        assert r[header.index("Upper limit")] == pytest.approx(hi, rel=1e-9)
        assert r[header.index("z: gap in standard deviations")] == pytest.approx(
            sm_proportion.proportions_ztest([rs, fs], [ra, fa])[0], rel=1e-9)       # statsmodels
        assert r[header.index("Fisher exact p")] == pytest.approx(
            stats.fisher_exact([[fs, fa - fs], [rs, ra - rs]]).pvalue, rel=1e-9)    # scipy


def tie_table():
    """Y (twice over) and X with the same scores (so the same pass rate at every cut: their ratios tie); Z, the
    reference, scoring higher."""
    scores = [0, 1, 2, 3, 3, 4, 4, 5, 5, 6, 6, 7, 8, 2, 3, 4, 5, 6, 3, 4]
    header = ["id", "Sex", "Ethnicity", *[f"i{j}" for j in range(1, K + 1)]]
    rows = []
    for group, shift, times in (("Y", 0, 2), ("X", 0, 1), ("Z", 2, 1)):
        for i, s in enumerate(scores * times):
            s = min(K, s + shift)
            rows.append([f"{group}{i}", "Women" if i % 2 else "Men", group, *([1] * s + [0] * (K - s))])
    return header, rows


def test_a_tie_for_the_lowest_ratio_names_the_first_group_of_the_impact_table(tmp_path):
    header, rows = tie_table()
    setup = {"id column": "id", "group columns": "Sex, Ethnicity", "item columns": f"i1:i{K}", "cut score": 4,
             "reference groups": "Sex: Men; Ethnicity: Z"}
    result = make_study(write_book(tmp_path / "d.xlsx", header, rows, setup), tmp_path / "study.xlsx")
    assert recalculate(result.path, in_place=True, all_formulas=True).ok
    wb = load_workbook(result.path, data_only=True)
    rows_ = sheet_rows(wb, "Cuts")
    _, head_row, cut_rows = _cut_block(rows_, "Ethnicity")
    order = [h.removeprefix("Impact ratio: ") for h in head_row if isinstance(h, str)
             and h.startswith("Impact ratio: ")]
    assert sorted(order) == ["X", "Y", "Z"] and order == [r[0] for r in sheet_rows(wb, "Impact") if r[0] in (
        "X", "Y", "Z")][:3]   # the Impact table's order (its second table, under it, has the same order)
    df = pd.DataFrame(rows, columns=header)
    df["score"] = df[[f"i{j}" for j in range(1, K + 1)]].sum(axis=1)
    n = {g: int((df["Ethnicity"] == g).sum()) for g in "XYZ"}
    tied = 0
    for r in cut_rows:
        passing = {g: int(((df["Ethnicity"] == g) & (df["score"] >= r[0])).sum()) for g in "XYZ"}
        if passing["Z"] == 0:
            continue
        ratios = {g: (passing[g] / n[g]) / (passing["Z"] / n["Z"]) for g in "XY"}
        assert ratios["X"] == ratios["Y"]   # the tie the data were made for
        low_ratio, low = lowest_as_the_sheet_picks(ratios, order)
        assert low == order[0] and r[head_row.index("Its group")] == low   # the first of the tied groups
        assert r[head_row.index("Lowest impact ratio")] == pytest.approx(low_ratio, rel=1e-12)
        tied += 1
    assert tied >= 5


def test_stages_compare_with_the_new_reference(edited):
    _, _, wb, df = edited
    rows = sheet_rows(wb, "Stages")
    at = find_row(rows, "Stage")
    screen = df["Screen"] == "yes"
    block = {r[1]: r for r in rows[at + 1:at + 3]}
    assert block["Women"][5] == "reference group"
    men, women = (((df["Sex"] == g) & screen).sum() for g in ("Men", "Women"))
    n_men, n_women = ((df["Sex"] == g).sum() for g in ("Men", "Women"))
    assert block["Men"][5] == pytest.approx((men / n_men) / (women / n_women), rel=1e-12)
    assert block["Men"][10] == pytest.approx(stats.fisher_exact(
        [[men, n_men - men], [women, n_women - women]]).pvalue, rel=1e-9)   # scipy


def test_groups_d_from_the_new_reference_against_pingouin(edited):
    _, _, wb, df = edited
    rows = sheet_rows(wb, "Groups")
    at = find_row(rows, "Group")
    by = {r[0]: r for r in rows[at + 1:at + 3]}
    assert by["Women"][4] == "reference group"
    men, women = (df[df["Sex"] == g]["score"].to_numpy(float) for g in ("Men", "Women"))
    assert by["Men"][4] == pytest.approx(pingouin.compute_effsize(men, women, eftype="cohen"), rel=1e-9)


def test_no_sheet_keeps_the_old_reference_in_its_words(edited):
    # the reference group is read from Impact's cell: no sheet says "reference group: Men" any more
    _, _, wb, _ = edited
    for sheet in ("Strata", "Cuts", "Stages", "Groups"):
        text = " ".join(str(c) for r in wb[sheet].iter_rows(values_only=True) for c in r if c is not None)
        assert "reference group: Men" not in text and "compared with Men" not in text
        assert "when the study was built; the lowest" not in text


def test_libreoffice_recomputes_the_edited_workbook_to_the_same_values(tmp_path, soffice):
    # LibreOffice's own COUNTIFS, INDEX/MATCH, MIN, IF... recomputed from the edited reference cells: the same
    # values trueband's engine stored (cells calling trueband's functions, or reading one, are skipped)
    from test_study_impact import libreoffice_mismatches

    header, rows = table(n=200, seed=5)
    result = make_study(write_book(tmp_path / "d.xlsx", header, rows, SETUP), tmp_path / "study.xlsx")
    assert edit_references(result.path).ok
    checked, mismatches = libreoffice_mismatches(soffice, result.path, ("Impact", "Strata", "Cuts", "Stages",
                                                                        "Groups"), tmp_path)
    assert not mismatches, mismatches[:10]
    for sheet in ("Impact", "Strata", "Cuts", "Stages", "Groups"):
        assert checked.get(sheet, 0) >= 10, (sheet, checked)


def test_a_reference_that_is_no_group_is_said_beside_the_cell(tmp_path):
    header, rows = table(n=120)
    result = make_study(write_book(tmp_path / "d.xlsx", header, rows, SETUP), tmp_path / "study.xlsx")
    wb = load_workbook(result.path, data_only=True)
    text = " ".join(str(c) for r in wb["Notes"].iter_rows(values_only=True) for c in r if c is not None)
    assert "Edit that cell and recalculate" in text   # Notes says the reference group is live
    beside = [r[9] for r in sheet_rows(wb, "Impact") if r[0] == LABEL]
    assert beside == [None, None]   # empty text while the cells name groups
    edit_references(result.path, {"Sex": "men ", "Ethnicity": "X"})   # not as written in column A
    wb = load_workbook(result.path, data_only=True)
    beside = [r[9] for r in sheet_rows(wb, "Impact") if r[0] == LABEL]
    assert beside[0].startswith("not one of the groups below") and beside[1] in (None, "")


def how_chosen(wb):
    """{column: (the reference cell, the words beside it)} on Impact, and the Notes lines that read them."""
    out, column = {}, "Sex"
    for r in sheet_rows(wb, "Impact"):
        if isinstance(r[0], str) and r[0].startswith("Demographic column: "):
            column = r[0].removeprefix("Demographic column: ")
        elif r[0] == LABEL:
            out[column] = (r[2], r[3])
    notes = [str(r[0]) for r in sheet_rows(wb, "Notes") if r and r[0] is not None]
    return out, notes


def test_the_words_beside_the_reference_cell_and_on_notes_follow_an_edit(tmp_path):
    from trueband.bridge.study.words import REFERENCE_BY_RATE, REFERENCE_CHOSEN, REFERENCE_GIVEN

    header, rows = table(n=120)
    result = make_study(write_book(tmp_path / "d.xlsx", header, rows, SETUP), tmp_path / "study.xlsx")
    df = pd.DataFrame(rows, columns=header)
    df["score"] = df[[f"i{j}" for j in range(1, K + 1)]].sum(axis=1)
    df["passed"] = df["score"] >= CUT
    rate = {g: counts(df, "Ethnicity", g)[0] / counts(df, "Ethnicity", g)[1] for g in "XYZ"}   # pandas
    highest = max(rate, key=rate.get)
    lower = min(rate, key=rate.get)
    assert rate[lower] < rate[highest]

    def check(sex, sex_words, ethnicity, ethnicity_words):
        wb = load_workbook(result.path, data_only=True)
        shown_, notes = how_chosen(wb)
        assert shown_ == {"Sex": (sex, sex_words), "Ethnicity": (ethnicity, ethnicity_words)}
        for words in (f"{sex} {sex_words}", f"{ethnicity} {ethnicity_words}"):
            assert words in notes   # Notes reads the same cells
        text = " ".join(notes)
        assert "when the study was built" not in text.split("Reference group for impact")[1]

    assert recalculate(result.path, in_place=True, all_formulas=True).ok
    check("Men", REFERENCE_GIVEN, highest, REFERENCE_BY_RATE)          # as built: the defaults
    assert edit_references(result.path, {"Sex": "Women", "Ethnicity": lower}).ok
    check("Women", "(chosen here; the setup gave Men)", lower, REFERENCE_CHOSEN)
    assert edit_references(result.path, {"Sex": "Men", "Ethnicity": highest}).ok
    check("Men", REFERENCE_GIVEN, highest, REFERENCE_BY_RATE)          # back to the defaults
