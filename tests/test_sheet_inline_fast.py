"""The column reader's pass for plain inline-string cells reads what the cell reader reads.

Reference: the project's general cell reader (``sheet_read.iter_cells_rowwise``), which decodes a cell's
``<is>`` as ECMA-376 Part 1, 18.3.1.53 (``is``: rich text inline) and 18.4.12 (``t``) describe; the fast
pass (``sheet_columns._INLINE_CELL``) is a speed change only, so it must agree cell for cell, style for style,
and with the pass switched off (``INLINE_PASS = False``).
"""

from __future__ import annotations

import random

import pytest

from test_sheet_xml import _sheet_from, reads_as_the_cell_reader  # the suite's sheet builder and cell-reader oracle
from trueband.bridge.workbook import sheet_columns

_TEXTS = ["in", "", " padded ", "a &amp; b &lt;c&gt;", "&quot;q&quot; &apos;", "_x0041_BC", "tab\tx", "l1\nl2",
          "cr\r\nlf", "é ü 名前", "= 1", "x'y", "50001", "#N/A", "TRUE"]


def _inline_cell(rnd, ref: str, r: int) -> str:
    """Cells the inline pass takes (styled or not, preserved space) and forms it leaves to the cell reader."""
    kind = rnd.random()
    text = rnd.choice(_TEXTS)
    s = rnd.choice(["", "", ' s="3"', ' s="0"', ' s="00"', ' s="12"'])
    if kind < 0.55:
        return f'<c r="{ref}"{s} t="inlineStr"><is><t>{text}</t></is></c>'
    if kind < 0.7:
        return f'<c r="{ref}"{s} t="inlineStr"><is><t xml:space="preserve">{text}</t></is></c>'
    if kind < 0.75:
        return f'<c r="{ref}" t="inlineStr"><is><t/></is></c>'
    if kind < 0.8:
        return f'<c r="{ref}"{s} t="inlineStr"><is><r><t>{text}</t></r><r><rPr><b/></rPr><t>b</t></r></is></c>'
    if kind < 0.85:
        return f'<c r="{ref}" t="inlineStr"><is><t>{text}</t><rPh sb="0" eb="1"><t>x</t></rPh></is></c>'
    if kind < 0.9:
        return f'<c r="{ref}"{s}><v>{r}.25</v></c>'
    if kind < 0.95:
        return f'<c r="{ref}"><f>A{r}&amp;"x"</f></c>'
    return f'<c r="{ref}"{s} t="s"><v>{r % 2}</v></c>'


@pytest.mark.parametrize("seed", range(8))
def test_inline_pass_agrees_with_the_cell_reader(seed, monkeypatch):
    rnd = random.Random(seed)
    strings = ["alpha", "b&c"]
    sheet = _sheet_from(rnd, 300, 10, 8, _inline_cell)
    got = reads_as_the_cell_reader(sheet, strings, rnd, seed, monkeypatch)
    monkeypatch.setattr(sheet_columns, "INLINE_PASS", False)
    before = sheet_columns.read_columns(sheet, strings)
    assert (before.columns, before.formulas, before.styles) == (got.columns, got.formulas, got.styles)


def test_inline_pass_takes_the_long_sheets_cells(monkeypatch):
    """The pass is used (so the agreement above is about it): no plain inline cell reaches the cell reader."""
    seen = []
    monkeypatch.setattr(sheet_columns._Collector, "add_cells", lambda self, cells: seen.extend(cells))
    sheet = _sheet_from(random.Random(1), 50, 5, 4,
                        lambda rnd, ref, r: f'<c r="{ref}" s="2" t="inlineStr"><is><t>id {r} &amp; x</t></is></c>')
    got = sheet_columns.read_columns(sheet)
    assert seen == []
    col, (rows, values) = next(iter(got.columns.items()))
    assert values[0] == f"id {rows[0]} & x" and got.styles[(rows[0], col)] == 2
    assert sum(len(r) for r, _ in got.columns.values()) == sheet.count(b"<c ") > 50
