"""The study's adverse-impact sheets (issue 17): several demographic columns, strata, every cut, stages, groups.

The data are random tables generated here (no value is checked against invented numbers). Sources of the
check values, named beside each check:

* counts, rates, means and SDs: pandas on the same rows (an independent count);
* the impact ratio's log interval: statsmodels ``confint_proportions_2indep(compare="ratio", method="log")``;
* the odds ratio: ``scipy.stats.contingency.odds_ratio(kind="sample")``; Fisher's p: ``scipy.stats.fisher_exact``;
  z: statsmodels ``proportions_ztest`` (pooled);
* Mantel–Haenszel odds ratio, its interval, the CMH test and Breslow–Day (Tarone): statsmodels
  ``StratifiedTable``; the exact conditional p: the registered ``POOLED_EXACT_P`` called on the pandas counts
  (it is checked against brute-force enumeration in tests/test_pooled.py);
* d: pingouin ``compute_effsize(eftype="cohen")``; its interval: the registered ``COHENS_D_CI`` on the pandas
  groups (checked against published values in tests/test_cohens_d_ci.py).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from openpyxl import load_workbook
from scipy import stats

from test_study_setup import write_book
from trueband.bridge import cli
from trueband.bridge.study.build import make_study
from trueband.bridge.study.setup import SetupError
from trueband.funcs import call

sm_proportion = pytest.importorskip("statsmodels.stats.proportion")
sm_contingency = pytest.importorskip("statsmodels.stats.contingency_tables")
pingouin = pytest.importorskip("pingouin")

CUT = 4
K = 8


def table(n=360, seed=11, simpson=False):
    """Random candidates: sex, ethnicity, site, items, a criterion and two stages; with ``simpson`` the sites
    differ so that the odds ratios of women against men disagree between sites."""
    rng = np.random.default_rng(seed)
    sex = np.where(rng.random(n) < 0.5, "Women", "Men")
    eth = rng.choice(["X", "Y", "Z"], n, p=[0.5, 0.3, 0.2])
    site = rng.choice(["North", "South", "East"], n)
    shift = np.zeros(n)
    if simpson:  # women do better at North, worse at South
        shift = np.where((site == "North") & (sex == "Women"), 1.2, 0.0) - np.where(
            (site == "South") & (sex == "Women"), 1.2, 0.0)
    theta = rng.standard_normal(n) + shift - 0.3 * (eth == "Z")
    items = (rng.random((n, K)) < 1 / (1 + np.exp(-theta[:, None]))).astype(int)
    perf = np.round(3 + 0.4 * theta + rng.normal(0, 0.5, n), 1)
    screen = rng.random(n) < 0.75
    interview = screen & (rng.random(n) < 0.6)
    hired = interview & (rng.random(n) < 0.5)
    header = ["id", "Sex", "Ethnicity", "Site", *[f"i{j}" for j in range(1, K + 1)], "perf", "Screen",
              "Interview", "Hired"]
    rows = [[f"P{i}", sex[i], eth[i], site[i], *items[i].tolist(), float(perf[i]) if i % 4 else None,
             "yes" if screen[i] else "no", "yes" if interview[i] else "no", "yes" if hired[i] else "no"]
            for i in range(n)]
    return header, rows


SETUP = {"id column": "id", "group columns": "Sex, Ethnicity", "item columns": f"i1:i{K}",
         "criterion column": "perf", "cut score": CUT, "stratum column": "Site",
         "stage columns": "Screen, Interview", "hired column": "Hired", "reference groups": "Sex: Men"}


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    folder = tmp_path_factory.mktemp("impact")
    header, rows = table()
    result = make_study(write_book(folder / "d.xlsx", header, rows, SETUP), folder / "study.xlsx")
    df = pd.DataFrame(rows, columns=header)
    df["score"] = df[[f"i{j}" for j in range(1, K + 1)]].sum(axis=1)
    df["passed"] = df["score"] >= CUT
    return result, load_workbook(result.path, data_only=True), df


def shown(built, key):
    result, wb, _ = built
    sheet, coord = result.cells[key]
    return wb[sheet][coord].value


def sheet_rows(wb, name):
    return [list(r) for r in wb[name].iter_rows(values_only=True)]


def find_row(rows, first, start=0, col=0):
    return next(i for i in range(start, len(rows)) if rows[i] and len(rows[i]) > col and rows[i][col] == first)


def cut_table(rows, at=0):
    """(header, rows) of the Cuts block whose first "Cut" header is at or after ``at``: its table of the groups'
    counts, rates and ratios joined with the table of the lowest ratio under it (the same cuts in the same order;
    two tables so that each prints across a page, issue 20)."""
    head = find_row(rows, "Cut", start=at)
    block = []
    for r in rows[head + 1:]:
        if not r or not isinstance(r[0], (int, float)):
            break
        block.append(r)
    head_b = find_row(rows, "Cut", start=head + 1 + len(block))
    lower = rows[head_b + 1:head_b + 1 + len(block)]
    assert [r[0] for r in lower] == [r[0] for r in block]   # the same cuts
    return list(rows[head]) + list(rows[head_b][1:]), [list(a) + list(b[1:]) for a, b in zip(block, lower)]


def counts(df, column, group):
    member = df[df[column] == group]
    return int(member["passed"].sum()), len(member)


def test_the_study_has_the_new_sheets_and_recalculates_cleanly(built):
    result, wb, _ = built
    assert {"Impact", "Strata", "Cuts", "Stages", "Groups"} <= set(wb.sheetnames)
    assert result.recalc_report.ok, [tuple(e) for e in result.recalc_report.errors][:5]


def test_one_impact_table_per_column_against_scipy_and_statsmodels(built):
    _, wb, df = built
    # Sex: reference Men as given; Ethnicity: the highest rate, said so on the sheet
    rates = {g: counts(df, "Ethnicity", g)[0] / counts(df, "Ethnicity", g)[1] for g in ("X", "Y", "Z")}
    eth_ref = max(rates, key=rates.get)
    rows = sheet_rows(wb, "Impact")
    text = " ".join(str(c) for r in rows for c in r if c is not None)
    assert "Demographic column: Sex" in text and "Demographic column: Ethnicity" in text
    assert "(the group with the highest selection rate" in text
    for column, reference, prefix in (("Sex", "Men", ""), ("Ethnicity", eth_ref, "Ethnicity:")):
        rs, ra = counts(df, column, reference)
        for focal in sorted(set(df[column]) - {reference}):
            fs, fa = counts(df, column, focal)
            assert shown(built, f"{prefix}impact_ratio_{focal}") == pytest.approx((fs / fa) / (rs / ra), rel=1e-12)
            # statsmodels: log interval of the ratio of two independent proportions (Katz et al., 1978)
            low, high = sm_proportion.confint_proportions_2indep(fs, fa, rs, ra, method="log", compare="ratio")
            assert shown(built, f"{prefix}impact_ratio_ci_lower_{focal}") == pytest.approx(low, rel=1e-9)
            assert shown(built, f"{prefix}impact_ratio_ci_upper_{focal}") == pytest.approx(high, rel=1e-9)
            odds = stats.contingency.odds_ratio([[fs, fa - fs], [rs, ra - rs]], kind="sample").statistic
            assert shown(built, f"{prefix}impact_odds_ratio_{focal}") == pytest.approx(odds, rel=1e-12)
            assert shown(built, f"{prefix}impact_fisher_{focal}") == pytest.approx(
                stats.fisher_exact([[fs, fa - fs], [rs, ra - rs]]).pvalue, rel=1e-9)
            z = sm_proportion.proportions_ztest([rs, fs], [ra, fa])[0]  # positive when the focal rate is lower
            assert shown(built, f"{prefix}impact_z_{focal}") == pytest.approx(z, rel=1e-9)
            assert shown(built, f"{prefix}impact_flip_{focal}") == call("IMPACT_FLIP", fs, fa, rs, ra)
            small = call("IMPACT_SMALL_NUMBERS", fs, fa, rs, ra)
            assert shown(built, f"{prefix}impact_small_numbers_{focal}") == ("yes" if small else "no")
    assert "Shortfall" not in text and "Extra selections to reach four-fifths" in text


def test_the_lowest_ratio_is_named_with_its_group_and_column(built):
    _, wb, df = built
    ratios = []
    for column in ("Sex", "Ethnicity"):
        groups = sorted(set(df[column]))
        c = {g: counts(df, column, g) for g in groups}
        reference = "Men" if column == "Sex" else max(groups, key=lambda g: c[g][0] / c[g][1])
        for g in groups:
            if g != reference:
                ratios.append(((c[g][0] / c[g][1]) / (c[reference][0] / c[reference][1]), g, column))
    low = min(ratios)
    assert shown(built, "min_ratio") == pytest.approx(low[0], rel=1e-12)
    assert shown(built, "min_ratio_where") == f"{low[1]} ({low[2]})"
    below = sum(1 for r, _, _ in ratios if r < 0.8)
    assert shown(built, "n_below") == below
    assert shown(built, "summary_min_ratio_where") == f"{low[1]} ({low[2]})"
    assert shown(built, "summary_n_below") == below


def strata_counts(df, focal, reference, column="Sex"):
    out = []
    for s in sorted(set(df["Site"]), key=str.casefold):
        here = df[df["Site"] == s]
        out.append([*counts(here, column, focal), *counts(here, column, reference)])
    return out


def test_strata_against_statsmodels_stratified_table(built):
    _, wb, df = built
    four = strata_counts(df, "Women", "Men")
    tables = [np.array([[a, b - a], [c, d - c]]) for a, b, c, d in four]
    st = sm_contingency.StratifiedTable(tables)
    assert shown(built, "pooled_odds_ratio") == pytest.approx(st.oddsratio_pooled, rel=1e-9)
    low, high = st.oddsratio_pooled_confint()
    assert shown(built, "pooled_or_lower") == pytest.approx(low, rel=1e-9)
    assert shown(built, "pooled_or_upper") == pytest.approx(high, rel=1e-9)
    assert shown(built, "pooled_p") == pytest.approx(st.test_null_odds(correction=True).pvalue, rel=1e-9)
    assert shown(built, "homogeneity_p") == pytest.approx(st.test_equal_odds(adjust=True).pvalue, rel=1e-9)
    assert shown(built, "pooled_exact_p") == pytest.approx(call("POOLED_EXACT_P", four), rel=1e-12)
    # the per-stratum rows: pandas counts in the order of the sheet
    rows = sheet_rows(wb, "Strata")
    at = find_row(rows, "Stratum")
    assert [r[1:5] for r in rows[at + 1:at + 4]] == four
    assert shown(built, "pooled_headline") == pytest.approx(st.oddsratio_pooled, rel=1e-9) \
        if st.test_equal_odds(adjust=True).pvalue >= 0.05 else "not supported: the strata differ"


def test_strata_that_disagree_get_no_pooled_headline(tmp_path):
    header, rows = table(n=900, seed=3, simpson=True)
    result = make_study(write_book(tmp_path / "d.xlsx", header, rows, {**SETUP, "group columns": "Sex"}),
                        tmp_path / "s.xlsx")
    wb = load_workbook(result.path, data_only=True)
    df = pd.DataFrame(rows, columns=header)
    df["passed"] = df[[f"i{j}" for j in range(1, K + 1)]].sum(axis=1) >= CUT
    four = strata_counts(df, "Women", "Men")
    st = sm_contingency.StratifiedTable([np.array([[a, b - a], [c, d - c]]) for a, b, c, d in four])
    assert st.test_equal_odds(adjust=True).pvalue < 0.05  # statsmodels agrees the strata differ
    sheet, coord = result.cells["pooled_headline"]
    assert wb[sheet][coord].value == "not supported: the strata differ"
    assert wb[sheet][result.cells["pooling_supported"][1]].value == "no: read the strata"
    text = " ".join(str(c) for r in wb["Strata"].iter_rows(values_only=True) for c in r if c is not None)
    assert "Simpson's paradox" in text and "one pooled figure is not supported" in text
    sheet, coord = result.cells["summary_pooled_headline"]
    assert wb[sheet][coord].value == "not supported: the strata differ"


def test_stages_pass_rates_among_those_who_reached_each_stage(built):
    _, wb, df = built
    rows = sheet_rows(wb, "Stages")
    text = " ".join(str(c) for r in rows for c in r if c is not None)
    assert "Connecticut v. Teal" in text
    screen, interview, hired = (df[c] == "yes" for c in ("Screen", "Interview", "Hired"))
    at = find_row(rows, "Stage")
    expected = []
    for stage, reached, passed in (("Screen", pd.Series(True, index=df.index), screen),
                                   ("Interview", screen, screen & interview),
                                   ("Whole process (hired ÷ applied)", pd.Series(True, index=df.index), hired)):
        for g in ("Men", "Women"):
            member = df["Sex"] == g
            expected.append([int((member & reached).sum()), int((member & passed).sum())])
    got = [r[2:4] for r in rows[at + 1:at + 10] if r[1] in ("Men", "Women")][:6]
    assert got == expected
    # the stage's ratio: the registered function on the pandas counts
    men, women = expected[2], expected[3]
    i = next(k for k in range(at, len(rows)) if rows[k][1] == "Women" and k > at + 2)
    assert rows[i][5] == pytest.approx((women[1] / women[0]) / (men[1] / men[0]), rel=1e-12)


def test_groups_means_sds_and_d_against_pandas_and_pingouin(built):
    _, wb, df = built
    rows = sheet_rows(wb, "Groups")
    at = find_row(rows, "Group")
    by = {r[0]: r for r in rows[at + 1:at + 3]}
    men, women = (df[df["Sex"] == g]["score"].to_numpy(float) for g in ("Men", "Women"))
    assert by["Women"][1] == len(women)
    assert by["Women"][2] == pytest.approx(women.mean(), rel=1e-12)
    assert by["Women"][3] == pytest.approx(women.std(ddof=1), rel=1e-12)
    assert by["Women"][4] == pytest.approx(pingouin.compute_effsize(women, men, eftype="cohen"), rel=1e-9)
    assert by["Women"][5] == pytest.approx(call("COHENS_D_CI", women, men, "lower"), rel=1e-9)
    crit = df[df["Sex"] == "Women"]["perf"].dropna().to_numpy(float)
    assert by["Women"][7] == len(crit) and by["Women"][8] == pytest.approx(crit.mean(), rel=1e-12)


def test_cuts_have_one_row_per_distinct_score(built):
    _, wb, df = built
    rows = sheet_rows(wb, "Cuts")
    cuts = sorted(set(df["score"]))[1:]  # the lowest score passes everybody: left out
    header, got = cut_table(rows)
    assert [r[0] for r in got] == cuts
    low_col = header.index("Lowest impact ratio")
    for r in got:
        passing = {g: int(((df["Sex"] == g) & (df["score"] >= r[0])).sum()) for g in ("Women", "Men")}
        assert r[header.index("Passing: Women")] == passing["Women"]
        n = {g: int((df["Sex"] == g).sum()) for g in ("Women", "Men")}
        if passing["Men"]:
            ratio = (passing["Women"] / n["Women"]) / (passing["Men"] / n["Men"])
            assert r[low_col] == pytest.approx(ratio, rel=1e-12)
            fs, fa, rs, ra = passing["Women"], n["Women"], passing["Men"], n["Men"]
            assert r[header.index("Fisher exact p")] == pytest.approx(
                stats.fisher_exact([[fs, fa - fs], [rs, ra - rs]]).pvalue, rel=1e-9)
    assert wb["Cuts"]._charts == [] or True  # charts are not read back by openpyxl; the PDF test sees them


def test_a_study_without_the_new_settings_has_the_sheets_it_had(tmp_path):
    header, rows = table(n=120)
    setup = {"id column": "id", "group column": "Sex", "item columns": f"i1:i{K}", "cut score": CUT}
    result = make_study(write_book(tmp_path / "d.xlsx", header, rows, setup), tmp_path / "s.xlsx")
    wb = load_workbook(result.path, read_only=True)
    # none of the impact settings' sheets; the sheets such a study had before them, in their order (other
    # features may add theirs: DIF for 0/1 items with groups, Cut score when a cut is given)
    assert not {"Strata", "Cuts", "Stages", "Groups"} & set(wb.sheetnames)
    before = ["Summary", "Reliability", "Items", "Raters", "Validity", "Bands", "Impact", "Utility", "Notes", "Setup",
              "Candidates"]
    assert [name for name in wb.sheetnames if name in before] == before
    assert result.recalc_report.ok
    assert shown((result, load_workbook(result.path, data_only=True), None), "min_ratio_where").endswith("(Sex)")


@pytest.mark.parametrize("change, message", [
    ({"reference groups": "Region: North"}, "not one of the demographic columns"),
    ({"reference groups": "Sex: Nobody"}, "no group 'Nobody' in column 'Sex'"),
    ({"reference groups": "Sex Men"}, "write each as 'column: group'"),
    ({"stratum column": "Sex"}, "given two roles"),
    ({"stage columns": "Screen, Screen"}, "named twice"),
    ({"stage columns": "Nothing"}, "no column headed 'Nothing'"),
])
def test_bad_impact_settings_are_refused_with_the_setting_named(tmp_path, change, message):
    header, rows = table(n=60)
    with pytest.raises(SetupError, match=message):
        make_study(write_book(tmp_path / "d.xlsx", header, rows, {**SETUP, **change}), tmp_path / "s.xlsx")
    assert not (tmp_path / "s.xlsx").exists()


def test_command_line_takes_several_group_columns_strata_and_stages(tmp_path, capsys):
    header, rows = table(n=150)
    book = write_book(tmp_path / "d.xlsx", header, rows, {"id column": "id", "item columns": f"i1:i{K}",
                                                           "cut score": CUT})
    code = cli.main(["study", str(book), "-o", str(tmp_path / "s.xlsx"), "--group", "Sex,Ethnicity",
                     "--stratum", "Site", "--stages", "Screen,Interview", "--reference-groups", "Sex: Women"])
    assert code == 0
    wb = load_workbook(tmp_path / "s.xlsx", read_only=True)
    assert {"Strata", "Stages", "Groups", "Cuts"} <= set(wb.sheetnames)
    ws = wb["Impact"]
    text = " ".join(str(c) for r in ws.iter_rows(values_only=True) for c in r if c is not None)
    assert "Demographic column: Ethnicity" in text and "(as given in the setup)" in text
    line = next(x for x in capsys.readouterr().out.splitlines() if "lowest impact ratio" in x)
    assert "(Sex)" in line or "(Ethnicity)" in line  # the group and column of the lowest ratio


def test_the_extra_selections_figure_is_cited_to_the_regulation_and_peer_reviewed_work():
    # issue 17: cited to 29 CFR 1607.4(D) and the peer-reviewed literature, not to a practitioner handbook
    # tied to a commercial product (the reference named one before)
    from trueband.funcs import lookup

    reference = lookup("IMPACT_EXTRA_SELECTIONS").reference
    assert "1607.4(D)" in reference and "Journal of Applied Psychology" in reference
    assert "Biddle" not in reference and "Gower" not in reference


# ---------------------------------------------------------------- LibreOffice Calc

NEW_SHEETS = ("Impact", "Strata", "Cuts", "Stages", "Groups")


def test_libreoffice_shows_the_stored_value_of_every_formula_of_the_new_sheets(tmp_path, soffice):
    # what a reviewer opens: every formula cell of the new sheets as LibreOffice Calc shows it (its CSV export)
    # equals the value trueband's recalculation stored
    from test_study_libreoffice import CSV_FILTER, convert, mismatched_cells

    header, rows = table(n=200, seed=5)
    result = make_study(write_book(tmp_path / "d.xlsx", header, rows, SETUP), tmp_path / "study.xlsx")
    convert(soffice, result.path, CSV_FILTER, tmp_path / "csv", tmp_path / "profile")
    checked, mismatches = mismatched_cells(result, tmp_path, NEW_SHEETS)
    assert checked > 500
    assert not mismatches, mismatches[:10]


def test_libreoffice_recomputes_the_new_sheets_standard_formulas_to_the_same_values(tmp_path, soffice):
    # LibreOffice's own COUNTIFS (with several conditions), INDEX/MATCH, MIN, SUM, COUNTIF, AVERAGE, STDEV
    # and IF, recomputed on opening: the same values trueband stored (cells that call trueband's functions
    # show #NAME? there and are skipped, as are cells that depend on them)
    header, rows = table(n=200, seed=5)
    result = make_study(write_book(tmp_path / "d.xlsx", header, rows, SETUP), tmp_path / "study.xlsx")
    checked, mismatches = libreoffice_mismatches(soffice, result.path, (*NEW_SHEETS, "Bands"), tmp_path)
    assert not mismatches, mismatches[:10]
    # the per-group score columns of Bands, the counts of every sheet
    assert checked.get("Bands", 0) >= 200 * 5
    for sheet in NEW_SHEETS:
        assert checked.get(sheet, 0) >= 10, (sheet, checked)


def libreoffice_mismatches(soffice, book, sheets, folder):
    """LibreOffice's recomputation (on opening) of the standard formulas of ``sheets`` against the values trueband
    stored: cells that call a trueband function, or read (through any chain) a cell that does, are skipped
    (LibreOffice cannot compute them). Returns (cells compared per sheet, mismatches)."""
    from openpyxl.formula import Tokenizer

    from test_study_libreoffice import read_csv, recalc_to_csv, same
    from test_study_libreoffice import shown as shown_csv
    from trueband.funcs import REGISTRY
    from trueband.funcs.registry import normalize_name

    profile = folder / "profile"
    recalc_to_csv(soffice, book, folder / "csv", profile)
    formulas = load_workbook(book, data_only=False)
    values = load_workbook(book, data_only=True)
    csv_rows = {}

    def csv(sheet):
        if sheet not in csv_rows:
            csv_rows[sheet] = read_csv(folder, sheet)
        return csv_rows[sheet]

    tainted_memo: dict = {}

    def tainted(sheet, coordinate) -> bool:
        """The cell calls a trueband function, or reads a cell that does (LibreOffice cannot compute it)."""
        key = (sheet, coordinate)
        if key in tainted_memo:
            return tainted_memo[key]
        tainted_memo[key] = False
        text = formulas[sheet][coordinate].value
        result_ = False
        if isinstance(text, str) and text.startswith("="):
            items = Tokenizer(text).items
            names = {normalize_name(t.value.rstrip("(")) for t in items if t.type == "FUNC" and t.subtype == "OPEN"}
            result_ = bool(names & set(REGISTRY))
            for t in items:
                if result_ or t.type != "OPERAND" or t.subtype != "RANGE":
                    continue
                where, _, rng = t.value.rpartition("!")
                other = where.strip("'").replace("''", "'") if where else sheet
                if other not in formulas.sheetnames:
                    continue
                cells = formulas[other][rng.replace("$", "")]
                cells = [cells] if not isinstance(cells, tuple) else [c for r in cells for c in (
                    r if isinstance(r, tuple) else (r,))]
                result_ = any(tainted(other, c.coordinate) for c in cells)
        tainted_memo[key] = result_
        return result_

    checked, mismatches = {}, []
    for sheet in sheets:
        for row in formulas[sheet].iter_rows():
            for c in row:
                text = c.value
                if not (isinstance(text, str) and text.startswith("=")) or tainted(sheet, c.coordinate):
                    continue
                theirs = shown_csv(csv(sheet), c.row, c.column)
                checked[sheet] = checked.get(sheet, 0) + 1
                if not same(values[sheet][c.coordinate].value, theirs):
                    mismatches.append((sheet, c.coordinate, text[:70], values[sheet][c.coordinate].value, theirs))
    return checked, mismatches


def test_the_groups_sheet_reads_whole_columns_and_needs_no_per_group_copies(built):
    # Bands carries no per-group copy of the scores or the criterion (once one formula per person and group);
    # Groups reads the whole columns beside the group numbers, so every figure is computed at any size.
    # Reference: pandas (mean, SD with n - 1, count) and pingouin.compute_effsize (d) on the same data.
    result, wb, df = built
    header = next(wb["Bands"].iter_rows(values_only=True))
    assert not any(str(h).startswith(("Score if", "Criterion if")) for h in header if h)
    rows_ = sheet_rows(wb, "Groups")
    heading = find_row(rows_, "Ethnicity")
    reference = rows_[heading][4]  # the Impact sheet's reference group, linked beside the heading
    at = find_row(rows_, "Group", heading)
    by = {r[0]: r for r in rows_[at + 1:at + 4]}
    for name in ("X", "Z"):
        crit = df[df["Ethnicity"] == name]["perf"].dropna().to_numpy(float)
        assert by[name][7] == len(crit)
        assert by[name][9] == pytest.approx(crit.std(ddof=1), rel=1e-12)
    focal = next(g for g in ("X", "Y", "Z") if g != reference)
    f, r = (df[df["Ethnicity"] == g]["perf"].dropna().to_numpy(float) for g in (focal, reference))
    assert by[focal][10] == pytest.approx(pingouin.compute_effsize(f, r, eftype="cohen"), rel=1e-9)
    assert by[reference][10] == "reference group"
    formulas = load_workbook(result.path)["Groups"]
    texts = [c.value for r in formulas.iter_rows() for c in r if isinstance(c.value, str) and c.value.startswith("=")]
    assert any("SUBGROUP_D(" in t for t in texts) and any("SUBGROUP_SD(" in t for t in texts)
    assert not any(str(c).startswith("not computable") for r in rows_ for c in r if c is not None
                   and str(c).startswith("not computable: with"))


def test_the_standard_deviations_convention_names_its_cases_and_what_is_from_memory():
    # Castaneda v. Partida, 430 U.S. 482 (decided March 23, 1977) and Hazelwood School District v. United States,
    # 433 U.S. 299 (decided June 27, 1977): the reporter citations and years checked against the published
    # opinions (openjurist.org/430/us/482; case-law.vlex.com, 433 U.S. 299); the peer-reviewed review of
    # Hazelwood's binomial test, Meier, Sacks & Zabell (1984), American Bar Foundation Research Journal 9(1),
    # 139-186, checked against its published abstract. The footnote numbers and the exact phrase were not found
    # by search: the words say they are cited from memory.
    from trueband.bridge.study.words import IMPACT_Z_WORDS

    assert "Castaneda v. Partida, 430 U.S. 482 (1977)" in IMPACT_Z_WORDS
    assert "Hazelwood School District v. United States, 433 U.S. 299 (1977)" in IMPACT_Z_WORDS
    assert "American Bar Foundation Research Journal 9, 139-186" in IMPACT_Z_WORDS
    assert "n.17 and 433 U.S. at 308 n.14, are cited from memory" in IMPACT_Z_WORDS
    assert "common practice" in IMPACT_Z_WORDS and "not a legal test" in IMPACT_Z_WORDS


def test_the_ratio_interval_cites_the_peer_reviewed_article_it_follows():
    # Morris, S. B. & Lobsenz, R. E. (2000). Significance tests and confidence intervals for the adverse impact
    # ratio. Personnel Psychology 53, 89-111: journal, volume and pages checked against the published abstract,
    # which recommends reporting "an estimate of the adverse impact ratio along with a confidence interval"; the
    # log form of the interval is that of Katz et al. (1978), checked numerically against statsmodels and scipy in
    # tests/test_impact_intervals.py.
    from trueband.funcs import lookup

    reference = lookup("IMPACT_RATIO_CI").reference
    assert "Morris" in reference and "Lobsenz" in reference and "2000" in reference
    assert "Personnel Psychology" in reference and "53" in reference and "89-111" in reference
