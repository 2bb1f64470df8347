"""The workbook templates: filled with random data generated here, recalculated, checked.

Check values come from reference libraries on the same data (pingouin's alpha, scipy's
Fisher exact test, statsmodels' two-proportion z test) or from the registered functions
called directly; the templates must give the same numbers through their formulas.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from openpyxl import load_workbook
from scipy import stats

from trueband.bridge.engine.recalc import recalculate
from trueband.bridge.study.build import make_study
from trueband.bridge.study.data_workbook import read_study_data
from trueband.bridge.study.templates import IMPACT_LAYOUT, SCORING_LAYOUT, impact_template, scoring_template, study_data_workbook
from trueband.bridge.study.demo import make_demo
from trueband.funcs import call

pingouin = pytest.importorskip("pingouin")


def recalculated(path):
    report = recalculate(path, in_place=True)
    return report, load_workbook(path, data_only=True), load_workbook(path, data_only=False)


def random_items(n=60, k=12, seed=11):
    rng = np.random.default_rng(seed)
    theta = rng.standard_normal(n)
    return (rng.random((n, k)) < 1 / (1 + np.exp(-1.5 * (theta[:, None] - rng.normal(0, 1, k))))).astype(int)


def test_scoring_template_totals_intervals_and_bands(tmp_path):
    x = random_items()
    ids = [f"C{i}" for i in range(len(x))]
    path = scoring_template(tmp_path / "s.xlsx", n_items=x.shape[1], capacity=100, ids=ids, responses=x.tolist())
    report, wb, fwb = recalculated(path)
    assert report.ok, [tuple(e) for e in report.errors[:5]]
    ws = wb["Scoring"]
    rel = ws[SCORING_LAYOUT["reliability"]].value
    sd = ws[SCORING_LAYOUT["sd"]].value
    assert "CRONBACH_ALPHA" in fwb["Scoring"][SCORING_LAYOUT["reliability"]].value
    assert rel == pytest.approx(pingouin.cronbach_alpha(pd.DataFrame(x))[0], abs=1e-10)  # no blanks: policies agree
    totals = x.sum(axis=1)
    assert sd == pytest.approx(np.std(totals, ddof=1), rel=1e-12)
    tc = 2 + x.shape[1]
    first = SCORING_LAYOUT["first_row"]
    for i in range(len(x)):
        r = first + i
        assert ws.cell(r, tc).value == totals[i]
        assert ws.cell(r, tc + 1).value == pytest.approx(call("SCORE_CI", totals[i], sd, rel, "lower"), rel=1e-12)
        assert ws.cell(r, tc + 2).value == pytest.approx(call("SCORE_CI", totals[i], sd, rel, "upper"), rel=1e-12)
        assert ws.cell(r, tc + 3).value == call("SCORE_BAND", totals[i], totals, sd, rel)
    # rows left empty show nothing
    assert ws.cell(first + len(x), tc).value in (None, "")
    assert ws.cell(first + len(x), tc + 3).value in (None, "")


def test_scoring_template_with_a_typed_reliability(tmp_path):
    x = random_items(n=30, k=8, seed=5)
    path = scoring_template(tmp_path / "s.xlsx", n_items=8, capacity=40, responses=x.tolist())
    wb = load_workbook(path)
    wb["Scoring"]["C3"] = 0.9  # a published reliability typed over the alpha formula
    wb.save(path)
    report, values, _ = recalculated(path)
    assert report.ok
    totals = x.sum(axis=1)
    sd = np.std(totals, ddof=1)
    first = SCORING_LAYOUT["first_row"]
    band_col = 2 + 8 + 3  # id, 8 items, total, lower, upper, band
    assert values["Scoring"].cell(first, band_col).value == call("SCORE_BAND", totals[0], totals, sd, 0.9)


def test_empty_scoring_template_recalculates_to_blanks(tmp_path):
    path = scoring_template(tmp_path / "s.xlsx", capacity=50)
    report, wb, _ = recalculated(path)
    assert report.ok
    assert wb["Scoring"]["C3"].value == "enter responses"
    assert wb["Scoring"].cell(SCORING_LAYOUT["first_row"], 42).value in (None, "")
    texts = [c.value for row in wb["Scoring"].iter_rows() for c in row if isinstance(c.value, str)]
    assert any("not legal findings" in t for t in texts)


@pytest.mark.parametrize("groups", [
    [("Group A", 120, 60), ("Group B", 80, 24), ("Group C", 40, 15)],
    [("Men", 200, 50), ("Women", 150, 45)],
])
def test_impact_template_against_scipy_and_statsmodels(tmp_path, groups):
    from statsmodels.stats.proportion import proportions_ztest

    path = impact_template(tmp_path / "i.xlsx", groups=groups)
    report, wb, _ = recalculated(path)
    assert report.ok, [tuple(e) for e in report.errors[:5]]
    ws = wb["Adverse impact"]
    rates = {g: s / a for g, a, s in groups}
    ref = max(rates, key=rates.get)
    assert ws[IMPACT_LAYOUT["reference"]].value == ref
    _, ra, rs = next(g for g in groups if g[0] == ref)
    for i, (name, fa, fs) in enumerate(groups):
        r = IMPACT_LAYOUT["first_row"] + i
        assert ws.cell(r, 4).value == pytest.approx(fs / fa, rel=1e-14)
        if name == ref:
            assert ws.cell(r, 5).value in (None, "")
            continue
        ratio = (fs / fa) / (rs / ra)
        assert ws.cell(r, 5).value == pytest.approx(ratio, rel=1e-12)
        assert ws.cell(r, 6).value == ("yes" if ratio < 0.8 else "no")
        z, _ = proportions_ztest([rs, fs], [ra, fa])
        assert ws.cell(r, 7).value == pytest.approx(z, rel=1e-10)
        assert ws.cell(r, 8).value == pytest.approx(stats.fisher_exact([[fs, fa - fs], [rs, ra - rs]])[1], rel=1e-9)
        short = ws.cell(r, 9).value
        assert (fs + short) / fa >= 0.8 * rs / ra  # the fewest extra selections that reach four-fifths
        assert short == 0 or (fs + short - 1) / fa < 0.8 * rs / ra
    assert ws.cell(IMPACT_LAYOUT["first_row"] + len(groups), 4).value in (None, "")


def test_impact_template_with_a_chosen_reference_group(tmp_path):
    groups = [("Group A", 120, 60), ("Group B", 80, 24)]
    path = impact_template(tmp_path / "i.xlsx", groups=groups)
    wb = load_workbook(path)
    wb["Adverse impact"]["B4"] = "Group B"
    wb.save(path)
    report, values, _ = recalculated(path)
    assert report.ok
    assert values["Adverse impact"]["E7"].value == pytest.approx((60 / 120) / (24 / 80), rel=1e-12)


def test_study_data_template_is_read_by_the_study(tmp_path):
    blank = study_data_workbook(tmp_path / "blank.xlsx", capacity=200)
    report, wb, _ = recalculated(blank)
    assert report.ok
    assert wb["Setup"]["F5"].value == "enter data"
    # the blank layout names every column the study needs
    with pytest.raises(Exception, match="no data rows"):
        read_study_data(blank)
    filled = study_data_workbook(tmp_path / "filled.xlsx", make_demo(80, seed=9), cut=20)
    report, wb, _ = recalculated(filled)
    assert report.ok
    data = read_study_data(filled)
    assert wb["Setup"]["F5"].value == pytest.approx(call("CRONBACH_ALPHA", data.items), abs=1e-12)
    assert wb["Setup"]["F2"].value == 80
    result = make_study(filled, tmp_path / "study.xlsx")
    assert result.recalc_report.ok
