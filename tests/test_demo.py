"""``trueband demo``: the invented scenario, written into a new folder, never over anything.

The demo data is invented (Osterfell Harbour Logistics); the checks here are about the
command and about the structure the generator promises (a reliable but imperfect test, a
modest validity, range restriction, a group difference), measured with reference libraries.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from openpyxl import load_workbook

from trueband.bridge import cli
from trueband.bridge.cli.study import DEMO_FILES
from trueband.bridge.study.demo import ORGANISATION, make_demo

pytestmark = pytest.mark.slow  # every test here takes seconds: the quick loop leaves the file out

pingouin = pytest.importorskip("pingouin")


def test_demo_is_reproducible_and_has_the_promised_structure():
    a, b = make_demo(), make_demo()
    assert np.array_equal(a.items, b.items) and a.performance == b.performance and a.groups == b.groups
    assert not np.array_equal(make_demo(seed=1).items, a.items)
    assert a.n == 400 and a.items.shape == (400, 40) and set(np.unique(a.items)) == {0, 1}
    assert set(np.unique(a.ratings)) <= {1, 2, 3, 4, 5}
    alpha = pingouin.cronbach_alpha(pd.DataFrame(a.items))[0]
    assert 0.8 < alpha < 0.9
    score = a.items.sum(axis=1)
    perf = np.array([np.nan if p is None else p for p in a.performance])
    rated = ~np.isnan(perf)
    r = np.corrcoef(score[rated], perf[rated])[0, 1]
    assert 0.2 < r < 0.4
    assert np.std(score[rated]) < 0.8 * np.std(score)  # range restriction among those hired
    hired = np.array(a.hired) == "yes"
    assert rated.sum() < hired.sum() and not (rated & ~hired).any()  # a few hires have no rating yet
    groups = np.array(a.groups)
    assert set(groups) == {"Group A", "Group B"}
    d = (score[groups == "Group A"].mean() - score[groups == "Group B"].mean()) / np.std(score, ddof=1)
    assert 0.25 < d < 0.8


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    target = tmp_path_factory.mktemp("demo") / "out"
    code = cli.main(["demo", str(target)])
    return code, target


def test_demo_writes_every_file_and_the_study(demo_run, capsys):
    code, target = demo_run
    assert code == cli.EXIT_OK
    for rel in DEMO_FILES.values():
        assert (target / rel).is_file(), rel
    assert not [p for p in target.parent.iterdir() if p.name.startswith(".trueband")]
    wb = load_workbook(target / DEMO_FILES["study"], data_only=True)
    assert {"Summary", "Reliability", "Items", "Raters", "Validity", "Bands", "Impact", "Utility", "Notes",
            "Setup", "Applicants"} <= set(wb.sheetnames)
    assert ORGANISATION in wb["Summary"]["A1"].value
    # the templates and demo sheets were recalculated: their formulas carry values
    scoring = load_workbook(target / DEMO_FILES["scoring"], data_only=True)["Scoring"]
    assert isinstance(scoring["C3"].value, float)
    impact = load_workbook(target / DEMO_FILES["impact"], data_only=True)["Adverse impact"]
    assert isinstance(impact["D7"].value, float)
    data = load_workbook(target / DEMO_FILES["data"], data_only=True)["Setup"]
    assert data["F5"].value == pytest.approx(wb["Reliability"]["B10"].value, rel=1e-12)


def test_demo_output_names_files_figures_and_caution(tmp_path, capsys):
    code = cli.main(["demo", str(tmp_path / "again")])
    out = capsys.readouterr().out
    assert code == cli.EXIT_OK
    for word in ("osterfell-study.xlsx", "osterfell-applicants.xlsx", "templates/", "coefficient alpha",
                 "observed validity", "impact ratio", "not legal findings", "Uniform Guidelines"):
        assert word in out, word


def test_demo_never_overwrites(tmp_path, capsys):
    target = tmp_path / "busy"
    target.mkdir()
    (target / "mine.txt").write_text("keep")
    code = cli.main(["demo", str(target)])
    err = capsys.readouterr().err
    assert code == cli.EXIT_FAILED
    assert "not an empty folder" in err and "nothing was written" in err
    assert [p.name for p in target.iterdir()] == ["mine.txt"]
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".trueband")]


def test_demo_default_folder_is_new(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "trueband-demo").mkdir()
    (tmp_path / "trueband-demo" / "old.txt").write_text("old")
    assert cli.main(["demo"]) == cli.EXIT_OK
    assert (tmp_path / "trueband-demo-2" / DEMO_FILES["study"]).is_file()
    assert (tmp_path / "trueband-demo" / "old.txt").read_text() == "old"
