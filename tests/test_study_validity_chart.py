"""The Validity sheet's scatter plots at most CHART_PEOPLE people (the first with a score and a criterion value);
every figure still uses everyone. The cap is lowered here so that a small invented study crosses it.

Sources: scipy.stats.pearsonr (the validity r over everyone), numpy (the success share among everyone with a
criterion value), openpyxl's chart reader (the series' ranges).
"""

from __future__ import annotations

import numpy as np
import pytest
from openpyxl import load_workbook
from scipy import stats

from test_study_predictors import write_book
from trueband.bridge.study.build import make_study
from trueband.bridge.study.sheets import validity

N, K, CAP = 240, 10, 60


def invented(seed=5):
    rng = np.random.default_rng(seed)
    ability = rng.standard_normal(N)
    items = (rng.random((N, K)) < 1 / (1 + np.exp(-ability[:, None]))).astype(int)
    perf = np.round(3 + 0.5 * ability + rng.normal(0, 0.6, N), 2)
    perf[rng.random(N) < 0.3] = np.nan
    return items, perf


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    items, perf = invented()
    names = [f"Q{j + 1}" for j in range(K)]
    header = ["id", *names, "perf"]
    rows = [[f"A{i}", *items[i].tolist(), None if np.isnan(perf[i]) else float(perf[i])] for i in range(N)]
    setup = [("id column", "id"), ("item columns", f"Q1:Q{K}"), ("criterion column", "perf"), ("cut score", 5),
             ("success threshold", 3)]
    folder = tmp_path_factory.mktemp("chart")
    patch = pytest.MonkeyPatch()
    patch.setattr(validity, "CHART_PEOPLE", CAP)
    try:
        result = make_study(write_book(folder / "d.xlsx", header, rows, setup), folder / "s.xlsx")
    finally:
        patch.undo()
    return result, items, perf


def test_the_chart_plots_the_first_people_and_says_so_while_r_uses_everyone(built):
    result, items, perf = built
    assert result.recalc_report.ok
    score = items.sum(axis=1).astype(float)
    both = ~np.isnan(perf)
    values = load_workbook(result.path, data_only=True)
    ws = values["Validity"]
    # the list holds CAP people, live from Bands (their scores and criteria in data order)
    listed = [(ws.cell(3 + k, 16).value, ws.cell(3 + k, 17).value) for k in range(CAP + 2)]
    assert listed[:CAP] == [(score[i], perf[i]) for i in np.flatnonzero(both)[:CAP]]
    assert listed[CAP] == (None, None)
    # r and n over everyone with both (scipy)
    sheet, where = result.cells["r"]
    assert values[sheet][where].value == pytest.approx(stats.pearsonr(score[both], perf[both])[0], rel=1e-12)
    sheet, where = result.cells["n_criterion"]
    assert values[sheet][where].value == both.sum() > CAP
    # the words above the chart name the subset and the whole
    words = [c.value for row in ws.iter_rows() for c in row if isinstance(c.value, str)]
    assert any(f"first {CAP:,} of the {both.sum():,} people" in w for w in words)
    # the chart's series span the CAP rows (openpyxl's reader)
    chart = load_workbook(result.path)["Validity"]._charts[0]
    refs = [s.xVal.numRef.f for s in chart.series] + [s.yVal.numRef.f for s in chart.series]
    assert all(r.endswith(f"${CAP + 2}") for r in refs), refs
    # the Utility base rate: the share of everyone with a criterion value reaching the threshold (numpy)
    sheet, where = result.cells["base_rate"]
    assert values[sheet][where].value == pytest.approx(float((perf[both] >= 3).mean()), rel=1e-12)
