"""Issue 20: a demographic column with more than ``cuts.GROUPS_SIDE_BY_SIDE`` groups (a race/ethnicity column
commonly has 5 to 7) gets stacked tables on the Cuts sheet (the passing counts, the pass rates, the impact ratios;
each one group wide per column), and the sheet prints one page wide.

Every group's figures are checked against numpy counts of the invented data (the four-fifths rule's ratio of pass
rates: Uniform Guidelines, 29 CFR 1607.4(D)) and Fisher's exact p against scipy.stats.fisher_exact; the lowest
ratio reads every group's ratio (Impact's LOWEST rule). Printing is checked in LibreOffice's PDF with
``tests/print_check.py``'s ``sideways_pages`` as ``tests/test_print_pdf.py`` does.
"""

from __future__ import annotations

import shutil

import numpy as np
import pandas as pd
import pytest
from openpyxl import load_workbook
from scipy import stats

from test_study_impact import find_row, sheet_rows
from test_study_setup import write_book
from trueband.bridge.study.build import make_study
from trueband.bridge.study.sheets import cuts

GROUPS = ("A", "B", "C", "D", "E", "F")
K = 6
SETUP = {"id column": "id", "group columns": "Sex, Ethnicity", "item columns": f"i1:i{K}", "cut score": 3,
         "criterion column": "perf",
         "reference groups": "Sex: Men; Ethnicity: A"}


def _data(n=240, seed=5):
    """Invented applicants: sex, an ethnicity of six groups, six items (group F scores a little lower) and a
    criterion (with it the lowest ratio's table carries the selection ratio and the expected success rate)."""
    rng = np.random.default_rng(seed)
    sex = np.where(rng.random(n) < 0.5, "Women", "Men")
    eth = rng.choice(GROUPS, n, p=[0.3, 0.2, 0.15, 0.15, 0.1, 0.1])
    theta = rng.standard_normal(n) - 0.5 * (eth == "F")
    items = (rng.random((n, K)) < 1 / (1 + np.exp(-theta[:, None]))).astype(int)
    perf = np.round(3 + 0.4 * theta + rng.normal(0, 0.5, n), 1)
    header = ["id", "Sex", "Ethnicity", *[f"i{j}" for j in range(1, K + 1)], "perf"]
    rows = [[f"P{i}", sex[i], eth[i], *items[i].tolist(), float(perf[i])] for i in range(n)]
    return header, rows


def _block(rows, heading):
    """{cut: {header: value}} of every table of the Cuts block under ``heading`` (the stacked tables of the same
    cuts joined), and the number of tables."""
    at = find_row(rows, heading)
    end = next((i for i in range(at + 1, len(rows)) if rows[i] and rows[i][0] == "Four-fifths line (the chart's)"
                or (rows[i] and rows[i][0] in ("Sex", "Ethnicity") and i > at)), len(rows))
    out: dict[float, dict] = {}
    tables = 0
    for h in range(at, end):
        if not rows[h] or rows[h][0] != "Cut":
            continue
        tables += 1
        header = rows[h]
        for r in rows[h + 1:end]:
            if not r or not isinstance(r[0], (int, float)):
                break
            out.setdefault(r[0], {}).update({k: v for k, v in zip(header[1:], r[1:]) if isinstance(k, str)})
    return out, tables


@pytest.fixture(scope="module")
def wide(tmp_path_factory):
    folder = tmp_path_factory.mktemp("cuts_wide")
    header, rows = _data()
    result = make_study(write_book(folder / "d.xlsx", header, rows, SETUP), folder / "study.xlsx")
    df = pd.DataFrame(rows, columns=header)
    df["score"] = df[[f"i{j}" for j in range(1, K + 1)]].sum(axis=1)
    return result.path, load_workbook(result.path, data_only=True), df, folder


def test_six_groups_stack_and_every_figure_matches_numpy_and_scipy(wide):
    _, wb, df, _ = wide
    rows = sheet_rows(wb, "Cuts")
    got, tables = _block(rows, "Ethnicity")
    assert tables == 4   # counts, rates, ratios and the lowest ratio's table: each a landscape page wide
    # no table of 3 x 6 columns: each header row of the block holds one kind of figure
    for r in rows[find_row(rows, "Ethnicity"):]:
        if r and r[0] == "Cut":
            kinds = {h.split(":")[0] for h in r[1:] if isinstance(h, str) and ":" in h and h.split(":")[1].strip()
                     in GROUPS}
            assert len(kinds) <= 1, r
    cuts_expected = sorted(set(df["score"]))[1:]
    assert sorted(got) == cuts_expected
    n = {g: int((df["Ethnicity"] == g).sum()) for g in GROUPS}
    for cut, row in got.items():
        passing = {g: int(((df["Ethnicity"] == g) & (df["score"] >= cut)).sum()) for g in GROUPS}
        assert row["Selection ratio"] == pytest.approx(float((df["score"] >= cut).mean()), rel=1e-12)
        ratios = {}
        for g in GROUPS:
            assert row[f"Passing: {g}"] == passing[g]
            assert row[f"Pass rate: {g}"] == pytest.approx(passing[g] / n[g], rel=1e-12)
            if g == "A":
                assert row[f"Impact ratio: {g}"] == "reference group"
            elif passing["A"] == 0:
                assert row[f"Impact ratio: {g}"] == cuts.NOBODY_PASSES
            else:
                ratios[g] = (passing[g] / n[g]) / (passing["A"] / n["A"])
                assert row[f"Impact ratio: {g}"] == pytest.approx(ratios[g], rel=1e-12)
        if not ratios:
            assert row["Lowest impact ratio"] == cuts.NO_RATIO
            continue
        low = min(ratios, key=ratios.get)   # over all six groups, across the stacked tables
        assert row["Lowest impact ratio"] == pytest.approx(ratios[low], rel=1e-12)
        assert row["Its group"] == low
        fs, fa, rs, ra = passing[low], n[low], passing["A"], n["A"]
        assert row["Fisher exact p"] == pytest.approx(
            stats.fisher_exact([[fs, fa - fs], [rs, ra - rs]]).pvalue, rel=1e-9)


def test_a_column_of_few_groups_keeps_one_table_side_by_side(wide):
    _, wb, _, _ = wide
    got, tables = _block(sheet_rows(wb, "Cuts"), "Sex")
    assert tables == 2
    assert all({"Passing: Women", "Pass rate: Women", "Impact ratio: Women", "Lowest impact ratio"} <= set(r)
               for r in got.values())


@pytest.mark.slow
def test_six_groups_print_one_page_wide(wide, soffice):
    from print_check import first_column_copy, page_sheets, pdf_pages, sideways_pages, to_pdf

    if shutil.which("pdftotext") is None:
        pytest.skip("pdftotext (poppler-utils) is not installed")
    path, _, _, folder = wide
    profile = folder / "profile"
    pages = pdf_pages(to_pdf(soffice, path, folder / "pdf", profile))
    first = first_column_copy(path, folder / "first.xlsx")
    first_pages = pdf_pages(to_pdf(soffice, first, folder / "first", profile))
    assert "Cuts" in page_sheets(pages)
    assert "Cuts" not in sideways_pages(pages, first_pages)


@pytest.mark.slow
def test_libreoffice_recomputes_the_six_groups_cuts_alike(wide, soffice):
    # every formula of the Cuts sheet in standard functions only (the passing counts' COUNTIFS, the reference's
    # MATCH, the links), recomputed by LibreOffice on loading, against the value trueband stored; LibreOffice has
    # no trueband functions (#NAME? there and in the cells reading them), so those are left out
    from types import SimpleNamespace

    from test_study_libreoffice import mismatched_cells, recalc_to_csv

    path, _, _, folder = wide
    profile = folder / "recalc-profile"
    recalc_to_csv(soffice, path, folder / "csv", profile)
    _, mismatches = mismatched_cells(SimpleNamespace(path=path), folder, ("Cuts",))
    wrong = [m for m in mismatches if "_xludf." not in m[2] and m[4] != "#NAME?"]
    assert not wrong, wrong[:10]
    counted = [m for m in mismatches if m[2].startswith("=COUNTIFS(")]
    assert not counted, counted[:10]
    formulas = load_workbook(path)["Cuts"]
    assert sum(str(c.value).startswith("=COUNTIFS(") for row in formulas.iter_rows() for c in row) > 6 * 5
