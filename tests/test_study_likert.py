"""Rating-scale (Likert, polytomous) items in the study: reverse keying, item statistics, flags, chart.

The responses are random data generated here (a latent trait, 1-5 answers, two items worded in
reverse). Check values come from reference libraries run on the same data after reversing the
two items independently here (6 - response on a 1-5 scale):

* coefficient alpha and alpha if an item is deleted: ``pingouin.cronbach_alpha``;
* item mean and standard deviation (n - 1): pandas ``DataFrame.mean`` / ``std``;
* corrected item-total correlation: ``scipy.stats.pearsonr`` of the item with the sum of the
  other items (Henrysson, 1963: the item is left out of the total).
"""

from __future__ import annotations

import zipfile

import numpy as np
import pandas as pd
import pytest
from openpyxl import load_workbook
from scipy import stats

from test_study_setup import refuse, write_book
from trueband.bridge import cli
from trueband.bridge.study.build import make_study

pingouin = pytest.importorskip("pingouin")

K = 8
REVERSED = (3, 6)  # items L3 and L6 are worded in reverse


def likert_table(n=200, seed=21):
    rng = np.random.default_rng(seed)
    theta = rng.standard_normal(n)
    latent = 0.8 * theta[:, None] + 0.6 * rng.standard_normal((n, K))
    answers = np.clip(np.rint(3 + 1.1 * latent), 1, 5).astype(int)
    answers[:, 6] = np.clip(np.rint(5.3 + 0.6 * theta + 0.3 * rng.standard_normal(n)), 1, 5)  # L7: mostly 5s
    answers[:, 7] = rng.integers(1, 6, n)                                          # L8: unrelated to the rest
    for j in REVERSED:
        answers[:, j - 1] = 6 - answers[:, j - 1]  # as a respondent answers a reverse-worded item
    header = ["id", "group", *[f"L{j}" for j in range(1, K + 1)]]
    rows = [[f"R{i}", "AB"[i % 2], *answers[i].tolist()] for i in range(n)]
    return header, rows, answers


SETUP = {"id column": "id", "group column": "group", "item columns": "L1:L8", "cut score": 26,
         "reverse keyed items": "L3, L6", "item scale minimum": 1, "item scale maximum": 5}


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    folder = tmp_path_factory.mktemp("likert")
    header, rows, answers = likert_table()
    result = make_study(write_book(folder / "d.xlsx", header, rows, SETUP), folder / "s.xlsx")
    scored = pd.DataFrame(answers.astype(float), columns=header[2:])
    for j in REVERSED:
        scored[f"L{j}"] = 6 - scored[f"L{j}"]
    return result, load_workbook(result.path, data_only=True), scored


def flag_column(ws) -> int:
    return next(c for c in range(1, 10) if ws.cell(6, c).value == "Flag")


def value(result, wb, key):
    sheet, coord = result.cells[key]
    return wb[sheet][coord].value


def test_reverse_keyed_study_has_no_errors_and_scores_the_reversed_items(built):
    result, wb, scored = built
    assert result.recalc_report.ok, [tuple(e) for e in result.recalc_report.errors]
    bands = wb["Bands"]
    assert [bands.cell(r, 3).value for r in range(2, 12)] == scored.sum(axis=1).tolist()[:10]
    sheet = wb["Scored items"]
    assert sheet["C1"].value == "L3 (reversed)" and sheet["A1"].value == "L1"
    assert [sheet.cell(r, 3).value for r in range(2, 7)] == scored["L3"].tolist()[:5]


def test_alpha_and_item_statistics_against_pingouin_pandas_and_scipy(built):
    result, wb, scored = built
    assert value(result, wb, "alpha") == pytest.approx(pingouin.cronbach_alpha(scored)[0], abs=1e-10)
    for j in range(K):
        name = f"L{j + 1}"
        rest = scored.drop(columns=name)
        assert value(result, wb, f"item{j + 1}_difficulty") == pytest.approx(scored[name].mean(), abs=1e-12)
        assert value(result, wb, f"item{j + 1}_sd") == pytest.approx(scored[name].std(ddof=1), abs=1e-12)
        r = stats.pearsonr(scored[name], rest.sum(axis=1)).statistic
        assert value(result, wb, f"item{j + 1}_total") == pytest.approx(r, abs=1e-10)
        assert value(result, wb, f"item{j + 1}_aid") == pytest.approx(pingouin.cronbach_alpha(rest)[0], abs=1e-10)
    # reversing matters: without it the reverse-worded items correlate negatively with the rest
    assert all(value(result, wb, f"item{j}_total") > 0.3 for j in REVERSED)


def test_flags_fit_rating_scale_items(built):
    _, wb, _ = built
    ws = wb["Items"]
    flags = {ws.cell(r, 1).value: ws.cell(r, flag_column(ws)).value for r in range(7, 7 + K)}
    assert not any(f in ("very easy", "very hard") for f in flags.values()), flags
    assert flags["L7"].split("; ")[0] == "mean near the top of the scale"  # every flag that applies is shown
    assert flags["L8"].split("; ")[0] == "weak discrimination"
    assert flags["L1"] in ("", None) and flags["L3 (reversed)"] in ("", None)  # no flag: an empty text


def test_item_chart_spans_the_item_scale(built):
    result, _, _ = built
    with zipfile.ZipFile(result.path) as z:
        xml = b"".join(z.read(n) for n in z.namelist() if n.startswith("xl/charts/chart"))
    assert b"Item mean against discrimination" in xml
    chart = xml[xml.index(b"Item mean against discrimination"):]
    assert b'<c:min val="1"' in chart or b'<min val="1"' in chart
    assert b'<c:max val="5"' in chart or b'<max val="5"' in chart


def test_likert_items_without_reverse_keying_are_not_flagged_as_proportions(tmp_path):
    header, rows, _ = likert_table(seed=4)
    setup = {k: v for k, v in SETUP.items() if k not in ("reverse keyed items",)}
    result = make_study(write_book(tmp_path / "d.xlsx", header, rows, setup), tmp_path / "s.xlsx")
    ws = load_workbook(result.path, data_only=True)["Items"]
    flags = [ws.cell(r, flag_column(ws)).value for r in range(7, 7 + K)]
    assert "very easy" not in flags
    # the two reverse-worded items, left unreversed, correlate negatively with the rest
    for f in (flags[2], flags[5]):  # every flag that applies: weak, and negative (check the key)
        assert f.split("; ")[:2] == ["weak discrimination", "negative item–total r: check the key"], f


def test_reverse_option_on_the_command_line(tmp_path, capsys):
    header, rows, answers = likert_table(n=80)
    setup = {"id column": "id", "group column": "group", "item columns": "L1:L8", "cut score": 26}
    book = write_book(tmp_path / "d.xlsx", header, rows, setup)
    code = cli.main(["study", str(book), "-o", str(tmp_path / "s.xlsx"), "--reverse", "L3,L6", "--item-min", "1",
                     "--item-max", "5"])
    assert code == cli.EXIT_OK, capsys.readouterr()
    bands = load_workbook(tmp_path / "s.xlsx", data_only=True)["Bands"]
    expected = answers.sum(axis=1) - answers[:, 2] - answers[:, 5] + (6 - answers[:, 2]) + (6 - answers[:, 5])
    assert [bands.cell(r, 3).value for r in range(2, 82)] == expected.astype(float).tolist()


@pytest.mark.parametrize("changes, match", [
    ({"item scale minimum": None, "item scale maximum": None}, r"reverse keyed items: give the item scale"),
    ({"item scale maximum": None}, r"give both 'item scale minimum' and 'item scale maximum'"),
    ({"item scale minimum": 5, "item scale maximum": 1}, r"the minimum \(5\) must be below the maximum \(1\)"),
    ({"reverse keyed items": "id"}, r"column 'id' on sheet 'Candidates' is not one of the item columns"),
    ({"reverse keyed items": "L9"}, r"reverse keyed items: no column headed 'L9'"),
])
def test_bad_reverse_settings_are_refused(tmp_path, changes, match):
    header, rows, _ = likert_table(n=40)
    setup = {k: v for k, v in {**SETUP, **changes}.items() if v is not None}
    refuse(tmp_path, write_book(tmp_path / "d.xlsx", header, rows, setup), match)


def test_intervals_are_cut_at_the_scale_given_on_setup(built):
    # Possible scores run from 8 × 1 to 8 × 5 (the item scale given on Setup; common practice): the limits are
    # cut there by formulas that read the Setup cells, and the note column says which end was cut.
    result, wb, scored = built
    ws, formulas = wb["Bands"], load_workbook(result.path)["Bands"]
    note_col = next(c for c in range(1, 20) if str(ws.cell(1, c).value).startswith("Interval note"))
    assert "'Setup'!" in formulas.cell(2, 5).value and formulas.cell(2, 5).value.startswith("=MAX(MIN(8*")
    scores = scored.sum(axis=1).to_numpy()
    sd = np.std(scores, ddof=1)
    rel = pingouin.cronbach_alpha(scored)[0]
    z = stats.norm.ppf(0.975)
    half = z * sd * np.sqrt(1 - rel)
    assert ((scores - half < 8) | (scores + half > 40)).sum() > 0  # some intervals reach past 8 or 40 here
    for i, s in enumerate(scores):
        lower, upper = max(8.0, s - half), min(40.0, s + half)
        assert ws.cell(i + 2, 5).value == pytest.approx(lower, rel=1e-9)
        assert ws.cell(i + 2, 6).value == pytest.approx(upper, rel=1e-9)
        want = ("cut at the lowest possible score" if s - half < 8 else
                "cut at the highest possible score" if s + half > 40 else None)
        assert ws.cell(i + 2, note_col).value == want
