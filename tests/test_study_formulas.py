"""Study formulas are written from cell handles, never from cell addresses typed by hand.

Every sheet module in ``bridge/study/sheets/`` hands :class:`Ref` handles to ``ctx.formula`` (which writes
the formula and its Python check from one list of arguments) or ``ctx.text``; a string in those modules
that looks like formula text and holds an A1-style address (``"=DISATTENUATE(B5,1,B9)"``, ``f"=SUM(C{r})"``)
fails here.
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

import numpy as np
import pytest

from trueband.bridge.study.context import A1_ADDRESS, HandTypedAddress, StudyContext, cell
from trueband.bridge.study.grid import Grid

SHEETS = Path(__file__).resolve().parents[1] / "bridge" / "study" / "sheets"

#: Formula text: starts with "=", or calls an upper-case function.
_FORMULA_LIKE = re.compile(r"^=|\b[A-Z][A-Z0-9_.]*\(")
#: In an f-string (placeholders shown as {}): a column letter with a row placeholder, C{} or $C${}.
_ROW_PLACEHOLDER = re.compile(r"(?<![A-Za-z0-9_])\$?[A-Z]{1,3}\$?\{\}")


def _strings(tree: ast.AST):
    """(line, text) of each string literal; an f-string's placeholders are shown as {}."""
    inside_fstring = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.JoinedStr):
            text = "".join(v.value if isinstance(v, ast.Constant) else "{}" for v in node.values)
            inside_fstring.update(id(v) for v in node.values)
            yield node.lineno, text
    for node in ast.walk(tree):
        if isinstance(node, ast.Constant) and isinstance(node.value, str) and id(node) not in inside_fstring:
            yield node.lineno, node.value


def hand_typed_addresses(source: str, name: str = "<source>") -> list[str]:
    """Each formula-like string literal of ``source`` that holds a cell address, as 'name:line: text'."""
    found = []
    for line, text in _strings(ast.parse(source)):
        if not _FORMULA_LIKE.search(text):
            continue
        if A1_ADDRESS.search(text) or _ROW_PLACEHOLDER.search(text):
            found.append(f"{name}:{line}: {text!r}")
    return sorted(found)


def test_no_sheet_module_types_a_cell_address():
    modules = sorted(SHEETS.glob("*.py"))
    assert len(modules) >= 10
    found = [hit for path in modules for hit in hand_typed_addresses(path.read_text(), path.name)]
    assert found == []


@pytest.mark.parametrize("source", [
    'ctx.put(g, 16, 2, "=DISATTENUATE(B5,1,B9)", check)',
    "g.set(r, 6, f'=IF(D{r}<$F$2,\"weak discrimination\",\"\")')",
    "row.append(f'=SUM({src}!A{r}:K{r})')",
    'g.set(r, 2, f"=INDEX({bands_c},O{3 + k})")',
    "text = 'IF(E5>$B$10,1,0)'",
])
def test_the_scan_finds_a_hand_typed_address(source):
    assert len(hand_typed_addresses(source)) == 1


@pytest.mark.parametrize("source", [
    'ctx.formula(g, 16, 2, "DISATTENUATE", r, 1, ryy, style="coef", key="r_disattenuated")',
    "ctx.text('=IF({total}<{weak},\"weak discrimination\",\"\")', SHEET, total=total, weak=weak)",
    'g.set(1, 1, "Two-way, absolute agreement, single rater — ICC(A,1)")',
    'g.freeze_panes = "A2"',   # not formula text
])
def test_the_scan_passes_handles_and_plain_text(source):
    assert hand_typed_addresses(source) == []


class _Data:
    """Just what StudyContext reads of the study data."""
    setup = None
    notes: list = []


def _context() -> StudyContext:
    return StudyContext(_Data(), full_checks=True)


def test_formula_and_check_come_from_one_list_of_arguments():
    ctx = _context()
    g = Grid("Validity")
    r = cell("Validity", 5, 2, value=0.3, name="r")
    ryy = cell("Validity", 9, 2, value=0.52, name="ryy")
    setup_cell = cell("Setup", 4, 2, value=0.95, name="confidence")
    written = ctx.formula(g, 16, 2, "DISATTENUATE", r, 1, ryy, key="r_disattenuated")
    assert g.cells[(16, 2)][0] == "=DISATTENUATE(B5,1,B9)"
    assert written.value == pytest.approx(0.3 / np.sqrt(0.52))
    assert ctx.cells["r_disattenuated"] == ("Validity", "B16")
    ctx.formula(g, 6, 3, "R_CI", r, cell("Validity", 3, 2, value=50), "lower", setup_cell)
    assert g.cells[(6, 3)][0] == "=R_CI(B5,B3,\"lower\",'Setup'!$B$4)"


def test_a_value_not_computable_carries_through_with_its_name():
    ctx = _context()
    g = Grid("Validity")
    r = cell("Validity", 5, 2, value=ValueError("no"), name="r")
    written = ctx.formula(g, 16, 2, "DISATTENUATE", r, 1, 0.52)
    assert g.cells[(16, 2)][0] == "not computable: it needs r, which is not computable"
    assert isinstance(written.value, Exception)
    assert ctx.not_computable == [("Validity", "B16", "it needs r, which is not computable")]


def test_formula_refuses_an_address_typed_by_hand():
    ctx = _context()
    g = Grid("Validity")
    with pytest.raises(HandTypedAddress):
        ctx.formula(g, 16, 2, "DISATTENUATE", "B5", 1, 0.52)
    with pytest.raises(HandTypedAddress):
        ctx.text("=B5/{sd}", "Validity", sd=cell("Validity", 11, 2))
    with pytest.raises(HandTypedAddress):
        ctx.expression(g, 13, 2, "$B$12/{sd}", None, sd=cell("Validity", 11, 2))
    assert g.cells == {}
