"""A figure that is not computable for one reference group says so in words, live: switching the Impact sheet's
reference cell to a group for which it is not computable (nobody of the group selected or passing a stage, too
few scores for d) and back recalculates the words into figures and the figures into words, on Impact, Stages
and Groups (issue 17). Recalculated by trueband's engine and, for the formulas' IF guards, by LibreOffice Calc.

Sources of the check values, named beside each check: counts from pandas on the same rows (an independent
count); the impact ratio's log interval: statsmodels ``confint_proportions_2indep(compare="ratio",
method="log")``; Fisher's p: ``scipy.stats.fisher_exact``; d: pingouin ``compute_effsize(eftype="cohen")``;
Strata's pooled figures: statsmodels ``StratifiedTable`` on the strata that carry information (Mantel–Haenszel
odds ratio and interval, CMH test, Breslow–Day with Tarone's adjustment); the exact conditional test: the
convolution of the strata's hypergeometric distributions (Agresti, 2013, sec. 7.3.5) from ``scipy.stats.hypergeom``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from openpyxl import load_workbook
from scipy import stats

from test_study_impact import CUT, K, SETUP, counts, find_row, sheet_rows, table
from test_study_impact_reference import edit_references
from test_study_setup import write_book
from trueband.bridge.study.build import make_study
from trueband.bridge.study.words import NOT_COMPUTABLE

sm_proportion = pytest.importorskip("statsmodels.stats.proportion")
sm_contingency = pytest.importorskip("statsmodels.stats.contingency_tables")
pingouin = pytest.importorskip("pingouin")


def guard_table(n=200):
    """The random candidates plus two small Ethnicity groups: U, one person who passes everything (the highest
    selection rate, so U is the default reference: too few scores for d), and V, three people who score 0 and
    pass no stage (nobody of V is selected or passes the screen)."""
    header, rows = table(n=n, seed=5)
    for i in range(1):
        rows.append([f"U{i}", "Men", "U", "North", *[1] * K, 4.0, "yes", "yes", "yes"])
    for i in range(3):
        rows.append([f"V{i}", "Women", "V", "South", *[0] * K, 2.0 + i, "no", "no", "no"])
    return header, rows


def frame(header, rows):
    df = pd.DataFrame(rows, columns=header)
    df["score"] = df[[f"i{j}" for j in range(1, K + 1)]].sum(axis=1)
    df["passed"] = df["score"] >= CUT
    return df


def block(rows, column, first_header, start=0):
    """The rows of ``column``'s block whose first cell is one of its groups (from the header ``first_header``)."""
    at = find_row(rows, column, start=start)
    head = find_row(rows, first_header, start=at)
    out = []
    for r in rows[head + 1:]:
        if not r or r[0] in (None, "") and (len(r) < 2 or r[1] in (None, "")):
            break
        out.append(r)
    return out


def impact_rows(wb):
    rows = sheet_rows(wb, "Impact")
    at = find_row(rows, "Demographic column: Ethnicity")
    head = find_row(rows, "Group", start=at)
    table_ = {}
    for r in rows[head + 1:]:
        if r[0] in (None, ""):
            break
        table_[r[0]] = dict(zip(rows[head], r))
    # the tests and further figures of the same groups: the second table, under the first (issue 20)
    tests = find_row(rows, "Group", start=head + 1)
    for r in rows[tests + 1:tests + 1 + len(table_)]:
        table_[r[0]].update((h, v) for h, v in zip(rows[tests], r) if h != "Group")
    return table_


def check_impact(wb, df, reference):
    got = impact_rows(wb)
    rs, ra = counts(df, "Ethnicity", reference)
    assert got[reference]["Impact ratio (rate ÷ reference rate)"] == "reference group"
    for focal in sorted(set(df["Ethnicity"]) - {reference}):
        fs, fa = counts(df, "Ethnicity", focal)
        row = got[focal]
        # Fisher's p is defined whatever the reference: scipy
        assert row["Fisher exact p"] == pytest.approx(stats.fisher_exact([[fs, fa - fs], [rs, ra - rs]]).pvalue,
                                                      rel=1e-9)
        # IMPACT_FLIP's rule (its Notes): not significant, and not even with nobody of the group selected: no flip
        fisher = [stats.fisher_exact([[a, fa - a], [rs, ra - rs]]).pvalue for a in (fs, 0)]   # scipy
        flip = row["Selections that flip the exact test"]
        if min(fisher) >= 0.05:
            assert flip == NOT_COMPUTABLE + ("the exact test is not significant at 0.05 and stays so even with "
                                             "nobody of the group selected, so no number of selections flips it")
        else:
            assert isinstance(flip, int) and flip >= 1
        if rs == 0:
            reason = NOT_COMPUTABLE + "nobody in the reference group is selected, so a ratio to its rate (0) is " \
                                      "undefined"
            for h in ("Impact ratio (rate ÷ reference rate)", "Below four-fifths?", "Impact ratio, lower limit",
                      "Impact ratio, upper limit", "Odds ratio of selection", "Extra selections to reach four-fifths"):
                assert row[h] == reason, (focal, h)
            continue
        assert row["Impact ratio (rate ÷ reference rate)"] == pytest.approx((fs / fa) / (rs / ra), rel=1e-12)
        if fs == 0:   # V against a reference that selects: the upper limit is infinite, said in words
            assert row["Impact ratio, upper limit"] == NOT_COMPUTABLE + ("nobody in the group is selected, so the "
                                                                         "upper limit is infinite")
        else:
            low, high = sm_proportion.confint_proportions_2indep(fs, fa, rs, ra, method="log", compare="ratio")
            assert row["Impact ratio, lower limit"] == pytest.approx(low, rel=1e-9)     # statsmodels
            assert row["Impact ratio, upper limit"] == pytest.approx(high, rel=1e-9)
        if fs == fa:   # U (everybody selected): its odds are infinite
            assert row["Odds ratio of selection"] == NOT_COMPUTABLE + ("everybody in the group is selected, so its "
                                                                       "odds are infinite")
    lowest = [r for r in sheet_rows(wb, "Impact") if r[0] == "Lowest impact ratio"][1][4]
    if rs == 0:
        assert lowest == NOT_COMPUTABLE + "an impact ratio of this table is not computable (see the table)"
    else:
        ratios = [(lambda fs, fa: (fs / fa) / (rs / ra))(*counts(df, "Ethnicity", g))
                  for g in set(df["Ethnicity"]) - {reference}]
        assert lowest == pytest.approx(min(ratios), rel=1e-12, abs=1e-15)


def check_stages(wb, df, reference):
    rows = sheet_rows(wb, "Stages")
    at = find_row(rows, "Ethnicity")
    head = find_row(rows, "Stage", start=at)
    screen = {r[1]: r for r in rows[head + 1:head + 1 + df["Ethnicity"].nunique()]}
    assert rows[head + 1][0].startswith("Screen")
    passed = df["Screen"] == "yes"
    rs, ra = int((passed & (df["Ethnicity"] == reference)).sum()), int((df["Ethnicity"] == reference).sum())
    assert screen[reference][5] == "reference group"
    for focal in sorted(set(df["Ethnicity"]) - {reference}):
        member = df["Ethnicity"] == focal
        fs, fa = int((passed & member).sum()), int(member.sum())
        if rs == 0:
            assert screen[focal][5] == NOT_COMPUTABLE + ("nobody in the reference group passed the stage, so a "
                                                         "ratio to its rate (0) is undefined")
        else:
            assert screen[focal][5] == pytest.approx((fs / fa) / (rs / ra), rel=1e-12)
        assert screen[focal][10] == pytest.approx(stats.fisher_exact(
            [[fs, fa - fs], [rs, ra - rs]]).pvalue, rel=1e-9)   # scipy, whatever the reference


def check_groups(wb, df, reference):
    rows = sheet_rows(wb, "Groups")
    at = find_row(rows, "Ethnicity")
    head = find_row(rows, "Group", start=at)
    by = {r[0]: r for r in rows[head + 1:head + 1 + df["Ethnicity"].nunique()]}
    assert by[reference][4] == "reference group"
    ref_scores = df[df["Ethnicity"] == reference]["score"].to_numpy(float)
    for focal in sorted(set(df["Ethnicity"]) - {reference}):
        mine = df[df["Ethnicity"] == focal]["score"].to_numpy(float)
        if len(ref_scores) < 2:
            assert by[focal][4] == NOT_COMPUTABLE + "the reference group has fewer than 2 score values"
        elif len(mine) < 2:
            assert by[focal][4] == NOT_COMPUTABLE + "the group has fewer than 2 score values"
        else:
            assert by[focal][4] == pytest.approx(pingouin.compute_effsize(mine, ref_scores, eftype="cohen"),
                                                 rel=1e-9)


def exact_conditional_p(tables):
    """The exact conditional test of a common odds ratio of 1 (Agresti, 2013, sec. 7.3.5): the sum of the focal
    group's selections has the convolution of the strata's hypergeometric distributions (scipy); two-sided by
    probability ordering, ties within a relative 1e-7 (R's mantelhaen.test(exact = TRUE) convention)."""
    dist, offset, observed = np.array([1.0]), 0, 0
    for fs, fa, rs, ra in tables:
        chosen = fs + rs
        low, high = max(0, chosen - ra), min(fa, chosen)
        pmf = stats.hypergeom(fa + ra, chosen, fa).pmf(np.arange(low, high + 1))   # scipy
        dist, offset, observed = np.convolve(dist, pmf), offset + low, observed + fs
    at = dist[observed - offset]
    return min(1.0, float(dist[dist <= at * (1 + 1e-7)].sum() / dist.sum()))


#: The reasons Strata gives, in its words (checked to be the ones whose condition holds).
NO_INFORMATION = NOT_COMPUTABLE + (
    "no stratum carries information: in each, one of the two groups has no applicants (a stratum where a group "
    "has no applicants carries none for the Mantel–Haenszel figures), or nobody or everybody is selected")
NO_DISCORDANT = NOT_COMPUTABLE + (
    "in every stratum that carries information everybody of the group is selected or nobody of the reference "
    "group is (the sum of b·c/n is 0), so the pooled odds ratio is undefined")
ZERO_UPPER = NOT_COMPUTABLE + (
    "nobody of the group is selected in any stratum where somebody of the reference group is not (the sum of "
    "a·d/n is 0): the pooled odds ratio is 0, so its interval has no finite upper limit")
TOO_FEW = NOT_COMPUTABLE + (
    "the homogeneity test needs at least 2 strata that carry information (a stratum where one group has no "
    "applicants, or where nobody or everybody is selected, carries none)")
UNTESTED = NOT_COMPUTABLE + "the homogeneity test is not computable (see above)"


def check_stratum_row(row, fs, fa, rs, ra):
    """One stratum's impact ratio, odds ratio and Fisher's p, or the Impact sheet's guard words."""
    people = "applicants with a score"
    first = (NOT_COMPUTABLE + f"the group has no {people}" if fa == 0 else
             NOT_COMPUTABLE + f"the reference group has no {people}" if ra == 0 else None)
    ratio, odds, fisher = row[5:8]
    if first is not None:
        assert ratio == odds == fisher == first
        return
    assert fisher == pytest.approx(stats.fisher_exact([[fs, fa - fs], [rs, ra - rs]]).pvalue, rel=1e-9)   # scipy
    if rs == 0:
        undefined = NOT_COMPUTABLE + "nobody in the reference group is selected, so a ratio to its rate (0) is " \
                                     "undefined"
        assert ratio == odds == undefined
        return
    assert ratio == pytest.approx((fs / fa) / (rs / ra), rel=1e-12)
    if fs == fa:
        assert odds == NOT_COMPUTABLE + "everybody in the group is selected, so its odds are infinite"
    else:   # statsmodels Table2x2 (shift_zeros=False: no 0.5 added, as IMPACT_ODDS_RATIO)
        table_ = sm_contingency.Table2x2(np.array([[fs, fa - fs], [rs, ra - rs]]), shift_zeros=False)
        assert odds == pytest.approx(table_.oddsratio, rel=1e-12, abs=1e-15)


def check_pooled(by, four):
    """The pooled figures of one comparison (``by``: label -> shown value) against statsmodels' StratifiedTable
    on the strata that carry information (both groups have applicants, somebody but not everybody selected)."""
    used = [t for t in four if t[1] > 0 and t[3] > 0 and t[0] + t[2] > 0 and t[1] - t[0] + t[3] - t[2] > 0]
    assert by["Strata carrying information"] == len(used)
    labels = ("Mantel–Haenszel common odds ratio (group over reference)", "  lower limit", "  upper limit",
              "Cochran–Mantel–Haenszel p (continuity corrected)", "Exact conditional p (two-sided)",
              "Breslow–Day p (do the strata's odds ratios agree?)")
    estimate, lower, upper, cmh, exact, homogeneity = (by[k] for k in labels)
    if not used:
        assert estimate == lower == upper == cmh == exact == homogeneity == NO_INFORMATION
        return None
    st = sm_contingency.StratifiedTable([np.array([[a, b - a], [c, d - c]]) for a, b, c, d in used])
    # statsmodels; R's mantelhaen.test (as POOLED_IMPACT_P, see test_pooled) takes off 0.5 only when
    # |sum(a - E a)| >= 0.5, statsmodels always: without the correction below that
    delta = abs(sum(a - b * (a + c) / (b + d) for a, b, c, d in used))
    assert cmh == pytest.approx(st.test_null_odds(correction=delta >= 0.5).pvalue, rel=1e-9)
    assert exact == pytest.approx(exact_conditional_p(used), rel=1e-9)                  # scipy hypergeom
    r_sum = sum(a * (d - c) / (b + d) for a, b, c, d in used)
    s_sum = sum((b - a) * c / (b + d) for a, b, c, d in used)
    if s_sum == 0:
        assert estimate == lower == upper == NO_DISCORDANT
    else:
        assert estimate == pytest.approx(st.oddsratio_pooled, rel=1e-12, abs=1e-15)      # statsmodels
        if r_sum == 0:
            assert lower == 0 and upper == ZERO_UPPER
        else:
            low, high = st.oddsratio_pooled_confint()                                     # statsmodels
            assert (lower, upper) == (pytest.approx(low, rel=1e-9), pytest.approx(high, rel=1e-9))
    if len(used) < 2:
        assert homogeneity == TOO_FEW
    elif s_sum == 0:
        assert homogeneity == NO_DISCORDANT
    elif r_sum > 0:   # statsmodels, Tarone-adjusted as POOLED_HOMOGENEITY_P
        assert homogeneity == pytest.approx(st.test_equal_odds(adjust=True).pvalue, rel=1e-9)
    else:
        assert homogeneity == ZERO_UPPER.removesuffix(", so its interval has no finite upper limit") \
            + ", so no table shares it and the test is undefined"
    return homogeneity


def check_strata(wb, df, column, reference):
    """Every comparison of ``column`` on Strata, with the reference group the Impact cell names now."""
    from trueband.bridge.study.words import POOLING_REFUSED

    rows = sheet_rows(wb, "Strata")
    sites = sorted(set(df["Site"]), key=str.casefold)
    focals = [r[1] for r in rows if r and r[0] == "Group" and r[3] == reference and r[1] in set(df[column])]
    assert sorted(focals) == sorted(set(df[column]) - {reference})
    for focal in focals:
        at = next(i for i, r in enumerate(rows) if r and r[0] == "Group" and r[1] == focal and r[3] == reference)
        four = [[*counts(df[df["Site"] == s], column, focal), *counts(df[df["Site"] == s], column, reference)]
                for s in sites]
        got = rows[at + 2:at + 2 + len(sites)]
        assert [r[0] for r in got] == sites and [r[1:5] for r in got] == four   # pandas counts
        for r, t in zip(got, four):
            check_stratum_row(r, *t)
        below = rows[at + 2 + len(sites):at + 2 + len(sites) + 14]
        by = {r[0]: r[1] for r in below if r and r[0]}
        p = check_pooled(by, four)
        # the refusal's lines: below the headline's row, up to the first empty one (empty when not refused)
        refusal = []
        for r in below[next(i for i, r in enumerate(below) if r and r[0] == "Pooled odds ratio to report") + 1:]:
            if not r or r[0] in (None, ""):
                break
            refusal.append(r[0])
        refusal = " ".join(refusal)
        if isinstance(p, float):
            refused = p < 0.05
            assert by["One pooled figure supported?"] == ("no: read the strata" if refused else "yes")
            assert by["Pooled odds ratio to report"] == ("not supported: the strata differ" if refused
                                                         else by["Mantel–Haenszel common odds ratio (group over "
                                                                 "reference)"])
            assert refusal == (POOLING_REFUSED if refused else "")
        else:
            assert by["One pooled figure supported?"] == by["Pooled odds ratio to report"] == UNTESTED
            assert refusal == ""


def check_all(wb, df, reference):
    check_impact(wb, df, reference)
    check_stages(wb, df, reference)
    check_groups(wb, df, reference)
    check_strata(wb, df, "Ethnicity", reference)
    check_strata(wb, df, "Sex", "Men")


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    folder = tmp_path_factory.mktemp("guards")
    header, rows = guard_table()
    setup = {k: v for k, v in SETUP.items()}
    result = make_study(write_book(folder / "d.xlsx", header, rows, setup), folder / "study.xlsx")
    return result, frame(header, rows)


def test_switching_to_and_from_a_reference_for_which_figures_are_not_computable(study):
    result, df = study
    assert result.recalc_report.ok
    wb = load_workbook(result.path, data_only=True)
    # built: U (one person, everybody selected) has the highest rate, the default reference: d is not computable
    assert [r[2] for r in sheet_rows(wb, "Impact") if r[0] == "Reference group (edit to compare with another)"] \
        == ["Men", "U"]
    check_all(wb, df, "U")
    for reference in ("V", "X", "U"):   # nobody of V selected or passing; X ordinary; back to U
        report = edit_references(result.path, {"Sex": "Men", "Ethnicity": reference})
        errors = [tuple(e)[:3] for e in report.errors]   # Strata's figures too are guarded live
        assert not errors, (reference, errors[:8])
        check_all(load_workbook(result.path, data_only=True), df, reference)


@pytest.mark.slow
def test_libreoffice_shows_the_same_words_after_the_switch(tmp_path, soffice):
    # LibreOffice evaluates IF lazily: a guard that holds gives its words even though the other branch calls a
    # trueband function it does not know; the words must be the ones trueband's engine stored
    from test_study_impact import libreoffice_mismatches
    from test_study_libreoffice import read_csv, shown as shown_csv

    header, rows = guard_table(n=120)
    result = make_study(write_book(tmp_path / "d.xlsx", header, rows, SETUP), tmp_path / "study.xlsx")
    report = edit_references(result.path, {"Sex": "Men", "Ethnicity": "V"})
    sheets = ("Impact", "Stages", "Groups", "Strata")
    assert not [tuple(e)[:3] for e in report.errors]
    checked, mismatches = libreoffice_mismatches(soffice, result.path, sheets, tmp_path)
    assert not mismatches, mismatches[:10]
    formulas = load_workbook(result.path, data_only=False)
    values = load_workbook(result.path, data_only=True)
    words = {}
    for sheet in sheets:
        csv_rows = read_csv(tmp_path, sheet)
        for row in formulas[sheet].iter_rows():
            for c in row:
                ours = values[sheet][c.coordinate].value
                # (the flip count's guard calls IMPACT_FISHER, which LibreOffice lacks: not compared)
                if isinstance(c.value, str) and c.value.startswith("=") and isinstance(ours, str) \
                        and ours.startswith(NOT_COMPUTABLE) and "IMPACT_FISHER(0," not in c.value:
                    assert shown_csv(csv_rows, c.row, c.column) == ours, (sheet, c.coordinate)
                    words[sheet] = words.get(sheet, 0) + 1
    assert sum(words.values()) >= 10 and words.get("Strata", 0) >= 10, words
