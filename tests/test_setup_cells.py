"""The one cell-text helper of the study's setup modules (``bridge/study/setup_cells.py``).

The cases are what a spreadsheet cell shows (common practice): a whole number stored as 2.0 shows "2", text
is trimmed, an empty or blank cell is no text.
"""

import ast
from pathlib import Path

import pytest

from trueband.bridge.study import setup, setup_answers, setup_cells, setup_cut

STUDY = Path(setup.__file__).parent


@pytest.mark.parametrize("value, text", [(None, None), ("", None), ("   ", None), (" Angoff ", "Angoff"),
                                         (2.0, "2"), (2.5, "2.5"), (7, "7"), (-0.0, "0")])
def test_cell_text(value, text):
    assert setup_cells.cell_text(value) == text


@pytest.mark.parametrize("value, text", [(" b", "B"), (2.0, "2"), (True, "TRUE"), (False, "FALSE"), ("", None),
                                         (None, None)])
def test_answer_text_reads_through_cell_text(value, text):
    assert setup_answers.answer_text(value) == text


def test_one_home():
    # setup.py re-exports the helper (other modules import it from there); setup_cut uses the same function
    assert setup.cell_text is setup_cells.cell_text
    assert setup_cut.cell_text is setup_cells.cell_text
    # no setup module but setup_cells defines a function that turns 2.0 into "2" by itself
    for path in STUDY.glob("setup*.py"):
        if path.name == "setup_cells.py":
            continue
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.FunctionDef):
                body = ast.unparse(node)
                assert not ("is_integer()" in body and ".strip()" in body), f"{path.name}: {node.name} copies cell_text"
