"""The Items sheet shows every flag that applies to an item, not only the first (issue 19).

A right/wrong test with one item scored the wrong way round (its 1s and 0s swapped, as a wrong key would):
its corrected item–total r is negative and alpha rises without it. The checks compute those with pandas
(corrected item–total r: the item against the total of the others) and pingouin (Cronbach's alpha), the
reference libraries, and the thresholds are the sheet's defaults (0.2; 0.2 and 0.9, common practice).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pingouin
import pytest
from openpyxl import load_workbook

from test_study_cut import book
from trueband.bridge.study.build import make_study
from trueband.bridge.study.sheets.items import NEGATIVE_FLAG

K, MISKEYED = 10, 3


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    rng = np.random.default_rng(11)
    theta = rng.standard_normal(200)
    items = (rng.random((200, K)) < 1 / (1 + np.exp(-(1.5 * theta[:, None] - rng.normal(0, 0.7, K))))).astype(int)
    items[:, MISKEYED] = 1 - items[:, MISKEYED]
    rows = [["id", *[f"i{j}" for j in range(1, K + 1)]]] + [[f"P{i}", *map(int, items[i])] for i in range(200)]
    folder = tmp_path_factory.mktemp("flags")
    result = make_study(book(folder / "d.xlsx", rows, {"id column": "id", "item columns": f"i1:i{K}"}),
                        folder / "s.xlsx")
    ws = load_workbook(result.path, data_only=True)["Items"]
    flags = {ws.cell(r, 1).value: ws.cell(r, 6).value or "" for r in range(7, 7 + K)}
    return pd.DataFrame(items), flags


def _expected(x: pd.DataFrame, j: int) -> list[str]:
    alpha = pingouin.cronbach_alpha(x)[0]
    r = x[j].corr(x.drop(columns=j).sum(axis=1))
    p = x[j].mean()
    out = []
    if r < 0.2:
        out.append("weak discrimination")
    if r < 0:
        out.append(NEGATIVE_FLAG)
    if p < 0.2:
        out.append("very hard")
    if p > 0.9:
        out.append("very easy")
    if pingouin.cronbach_alpha(x.drop(columns=j))[0] > alpha:
        out.append("alpha rises without it")
    return out


def test_the_miskeyed_item_shows_every_flag(built):
    x, flags = built
    shown = flags[f"i{MISKEYED + 1}"]
    assert shown.split("; ")[:2] == ["weak discrimination", NEGATIVE_FLAG]
    assert "alpha rises without it" in shown and not shown.endswith((" ", ";"))


def test_every_item_shows_exactly_the_flags_that_apply(built):
    x, flags = built
    for j in range(K):
        shown = flags[f"i{j + 1}"]
        assert (shown.split("; ") if shown else []) == _expected(x, j), (j, shown)
