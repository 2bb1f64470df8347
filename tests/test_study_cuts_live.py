"""Issue 17's two open points of the Cuts and Strata sheets, recalculated by trueband's engine and by LibreOffice.

- Cuts: an error in a group's impact ratio at a cut reaches that row's lowest-ratio cell and its group (the
  Impact sheet's ``LOWEST`` rule: words only when every ratio of the row is words, else MIN, which passes an
  error on). COUNT and ISNUMBER skip an error (OpenFormula 1.2, part 2, sections 6.13.9 and 6.13.14; Excel and
  LibreOffice alike), so the former formula showed "no impact ratio is computable" instead.
- Strata: the reason the exact conditional test is not computed for strata too large for it is a live formula
  on the strata's counts: the number of possible tables against ``EXACT_POOLED_MAX_TABLES``, the same count as
  ``POOLED_EXACT_P``'s (each informative stratum's focal-selected count ranges over max(0, m1 − n0) .. min(n1,
  m1), the hypergeometric support; Agresti, 2013, Categorical Data Analysis, 3rd ed., sec. 7.3.5).
"""

from __future__ import annotations

import shutil

import pytest
from openpyxl import load_workbook

from test_study_impact import CUT, K, SETUP, find_row, sheet_rows, table
from test_study_setup import write_book
from trueband.bridge.engine.recalc import recalculate
from trueband.bridge.study.build import make_study
from trueband.bridge.study.sheets import cuts
from trueband.funcs.impact_pooled import EXACT_POOLED_MAX_TABLES


def _sex_block(ws):
    """(first cut row of the groups' table, {header: column} of it, first cut row of the lowest ratio's table under
    it, {header: column} of that) of the Cuts sheet's block for 'Sex' (1-based)."""
    rows = sheet_rows(ws.parent, ws.title)
    at = find_row(rows, "Sex")
    head = find_row(rows, "Cut", start=at)
    head_b = find_row(rows, "Cut", start=head + 1)
    columns = [{h: k + 1 for k, h in enumerate(rows[x]) if isinstance(h, str)} for x in (head, head_b)]
    return head + 2, columns[0], head_b + 2, columns[1]


def _broken_ratio(path):
    """Replace the women's impact ratio at the block's third cut with ``=1/0`` (an error in one group's ratio;
    the other group is the reference); returns the rows and columns to read (the ratio's, the lowest's)."""
    wb = load_workbook(path)
    ws = wb["Cuts"]
    first, columns, first_b, columns_b = _sex_block(ws)
    ws.cell(first + 2, columns["Impact ratio: Women"]).value = "=1/0"
    wb.save(path)
    return (first + 2, first_b + 2), (columns, columns_b)


@pytest.fixture(scope="module")
def broken(tmp_path_factory):
    folder = tmp_path_factory.mktemp("cuts_error")
    header, rows = table(n=120)
    result = make_study(write_book(folder / "d.xlsx", header, rows, SETUP), folder / "study.xlsx")
    rows_at, columns = _broken_ratio(result.path)
    return result.path, rows_at, columns, folder


def test_an_error_in_a_ratio_reaches_the_lowest_ratio_with_trueband(broken):
    path, (r, rb), (columns, low), _ = broken
    recalculate(path, in_place=True, all_formulas=True)
    ws = load_workbook(path, data_only=True)["Cuts"]
    assert ws.cell(r, columns["Impact ratio: Men"]).value == "reference group"
    assert ws.cell(rb, 1).value == ws.cell(r, 1).value   # the same cut in the table of the lowest ratio
    assert ws.cell(rb, low["Lowest impact ratio"]).value == "#DIV/0!"
    assert ws.cell(rb, low["Its group"]).value == "#DIV/0!"   # not "" (ISNUMBER would hide it)
    assert ws.cell(rb, low["Fisher exact p"]).value == "#DIV/0!"
    # the rows around it still show their figures: the error stays in its row
    assert isinstance(ws.cell(rb - 1, low["Lowest impact ratio"]).value, float)
    assert ws.cell(rb - 1, low["Its group"]).value == "Women"


@pytest.mark.slow
def test_an_error_in_a_ratio_reaches_the_lowest_ratio_in_libreoffice(broken, soffice):
    from test_study_libreoffice import read_csv, recalc_to_csv, shown

    path, (r, rb), (columns, low), folder = broken
    profile = folder / "profile"
    recalc_to_csv(soffice, path, folder / "csv", profile)
    rows = read_csv(folder, "Cuts")
    assert shown(rows, r, columns["Impact ratio: Women"]) == "#DIV/0!"
    # LibreOffice computes the lowest-ratio rule itself (standard functions only): the error, not the words
    assert shown(rows, rb, low["Lowest impact ratio"]) == "#DIV/0!"
    assert shown(rows, rb, low["Its group"]) == "#DIV/0!"
    assert cuts.NO_RATIO not in {shown(rows, rb, c) for c in low.values()}


def _first_comparison(ws):
    """(first stratum row, last stratum row, the exact p's row) of the Strata sheet's first comparison (1-based)."""
    rows = sheet_rows(ws.parent, ws.title)
    head = find_row(rows, "Stratum")
    total = find_row(rows, "All strata added together", start=head)
    exact = find_row(rows, "Exact conditional p (two-sided)", start=head)
    return head + 2, total, exact + 1  # total (0-based) is the last stratum row (1-based)


def _exact_tables(strata):
    """The possible tables of the exact conditional test: each informative stratum's hypergeometric support
    (Agresti, 2013, sec. 7.3.5), counted here independently of the sheet."""
    total = 0
    for fs, fa, rs, ra in strata:
        m1 = fs + rs
        if fa and ra and m1 and fa + ra - m1:
            total += min(fa, m1) - max(0, m1 - ra) + 1
    return total


@pytest.fixture(scope="module")
def large_strata(tmp_path_factory):
    """A study whose first Strata comparison's counts are typed over with strata too large for the exact test,
    then recalculated: the reason must say so with the count; typed back small, the p value returns."""
    folder = tmp_path_factory.mktemp("strata_large")
    header, rows = table(n=120)
    result = make_study(write_book(folder / "d.xlsx", header, rows, SETUP), folder / "study.xlsx")
    wb = load_workbook(result.path)
    ws = wb["Strata"]
    first, last, exact = _first_comparison(ws)
    large = [[600_000 + k, 1_500_000, 700_000, 1_400_000 + k] for k in range(last - first + 1)]
    for r, counts in zip(range(first, last + 1), large):
        for c, v in enumerate(counts, start=2):
            ws.cell(r, c).value = v
    wb.save(result.path)
    recalculate(result.path, in_place=True, all_formulas=True)
    return result.path, exact, large, folder


def test_strata_too_large_for_the_exact_test_say_why_live(large_strata, tmp_path):
    from trueband.funcs import call
    from trueband.funcs.errors import TruebandError

    built, exact, large, _ = large_strata
    path = tmp_path / "study.xlsx"
    shutil.copyfile(built, path)  # the fixture's file stays as built for the LibreOffice test
    got = load_workbook(path, data_only=True)["Strata"].cell(exact, 2).value
    tables = _exact_tables(large)
    assert tables > EXACT_POOLED_MAX_TABLES
    assert got == (f"not computable: the strata are too large for the exact conditional test: {tables:,} possible "
                   f"tables, more than the {EXACT_POOLED_MAX_TABLES:,} it enumerates at most; read the "
                   "Cochran–Mantel–Haenszel p instead")
    with pytest.raises(TruebandError, match=f"{tables:,} possible tables"):  # the function counts the same
        call("POOLED_EXACT_P", large)
    # typed back to small strata: the p value, the function's own
    wb = load_workbook(path)
    ws = wb["Strata"]
    first, last, _ = _first_comparison(ws)
    small = [[3 + k, 10, 6, 12 + k] for k in range(last - first + 1)]
    for r, counts in zip(range(first, last + 1), small):
        for c, v in enumerate(counts, start=2):
            ws.cell(r, c).value = v
    wb.save(path)
    recalculate(path, in_place=True, all_formulas=True)
    assert load_workbook(path, data_only=True)["Strata"].cell(exact, 2).value == pytest.approx(
        call("POOLED_EXACT_P", small), rel=1e-12)


@pytest.mark.slow
def test_strata_too_large_say_why_in_libreoffice(large_strata, soffice):
    # LibreOffice computes the guard and the count itself (SUMPRODUCT, ABS, TEXT: standard functions)
    from test_study_libreoffice import read_csv, recalc_to_csv, shown

    path, exact, large, folder = large_strata
    profile = folder / "profile"
    recalc_to_csv(soffice, path, folder / "csv", profile)
    ours = load_workbook(path, data_only=True)["Strata"].cell(exact, 2).value
    assert f"{_exact_tables(large):,} possible tables" in ours
    assert shown(read_csv(folder, "Strata"), exact, 2) == ours
