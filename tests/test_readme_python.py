"""The README's "From Python and notebooks" example runs as written and prints what the README shows."""

import doctest
import re
from pathlib import Path

import pandas as pd
import pingouin as pg
import pytest

ROOT = Path(__file__).resolve().parents[1]


def notebook_block() -> str:
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    section = readme.split("## From Python and notebooks", 1)[1].split("\n## ", 1)[0]
    blocks = re.findall(r"```pycon\n(.*?)```", section, re.S)
    assert len(blocks) == 1, "the section has one pycon block"
    return blocks[0]


def test_readme_notebook_example_prints_what_the_readme_shows():
    test = doctest.DocTestParser().get_doctest(notebook_block(), {}, "README", "README.md", 0)
    runner = doctest.DocTestRunner(optionflags=doctest.NORMALIZE_WHITESPACE)
    runner.run(test)
    assert runner.failures == 0 and runner.tries >= 8


def test_readme_notebook_alpha_against_pingouin():
    # the README's alpha (0.92 on 7 complete rows) is pingouin's listwise alpha on the same data
    namespace = {}
    exec(notebook_block().split(">>> res =")[0].replace(">>> ", "").replace("... ", ""), namespace)  # noqa: S102
    items: pd.DataFrame = namespace["items"]
    assert round(pg.cronbach_alpha(items, nan_policy="listwise")[0], 2) == pytest.approx(0.92)
