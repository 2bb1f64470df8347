"""The study's build speed-ups give the same text as before.

The reference here is the project's own earlier output, not an outside source: these are speed changes
only, so the check is that the memoised binder (``calc_binding.bind_for_calc``, one binding per formula
shape) writes exactly what the plain binder (``bind_plain``, every call found in the one text) writes,
and that the long sheets' row writer (``long_sheets.rows_xml``) writes exactly what its earlier loop
(copied below verbatim as ``_rows_xml_before``) wrote.
"""

from __future__ import annotations

import datetime
import math
from xml.sax.saxutils import escape

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from openpyxl.utils import get_column_letter

from trueband.bridge.formulas import calc_binding
from trueband.bridge.formulas.calc_binding import bind_for_calc, bind_for_calc_xml, bind_plain, bind_sheet_xml
from trueband.bridge.study import long_sheets
from trueband.bridge.workbook.sheet_data import ErrorValue
from trueband.funcs.registry import REGISTRY, spreadsheet

FORMULAS = [
    '=IF(A2="","",SCORE_CI(A2,$C$4,$C$3,"lower"))',
    '=ROUND(sem(12, 0.91), 2) & "SEM(1,2)"',
    "=_xludf.SEM(B2,B3)+SUM('SEM(x'!A1:A3)",
    "=LOG10(A12)+KR_20(B2:C9)+KR20(B2:C9)+kr_21(40,12.5,30)",
    "=KR_20 (B2:C9)+LOG10 (3)+ATAN2(1,2)",
    "=1SEM(2)+A1SEM(3)+SEM1(4)+SEM_2(5)",
    "='Sheet 2 (1)'!$A$1+SEM('It''s 3'!B7:B99,0.85)",
    "=Sheet1!SEM(1)+$SEM(2)+.SEM(3)+x.SEM(4)",
    '=SEM(B2,0.9)&"row 12 (SEM(3))"&\'Q1 ("x")\'!A1',
    "=CRONBACH_ALPHA(Items!$B$2:$AO$5001)*100+1E+3-2.5e-7",
    "=IF(ISNUMBER(Bands!C123456),SCORE_BAND(Bands!C123456,Setup!$B$9,0.9,\"lower\"),\"\")",
    '=_xlfn._xlws.SEM(A1,0.9)+_XLUDF.sem(A2,0.8)+_xlfn.STDEV.S(A1:A9)',
    "=ÉSEM(1)+SEMé(2)+é1(3)+A١(4)+SEM(٣)",
    "=SUM(A2:A9)", "=A2+B2", "=2", "=", "", "SEM(", "=SEM(\"unterminated", "=SEM('x",
    "=SEM(A2, 0.9) + SEM(A3, 0.9) + SEM(A2, 0.9)",
    "=\tSEM\t(A2,\n0.9)",
]


def test_memoised_binder_equals_the_plain_one_on_chosen_formulas():
    for formula in FORMULAS:
        for row in (2, 17, 50001):
            text = formula.replace("2", str(row)) if row != 2 else formula
            assert bind_for_calc(text) == bind_plain(text), text
            assert bind_for_calc(text[1:]) == bind_plain(text[1:]), text
            assert bind_for_calc_xml(text[1:]) == escape(bind_plain(text[1:])), text
    # what the plain binder does on them (as the binder's doctests state): the memo changes nothing of it
    assert bind_for_calc("=LOG10(A12)+KR_20(B2:C9)") == "=LOG10(A12)+_xludf.KR_20(B2:C9)"
    assert bind_for_calc("=1SEM(2)+SEM1(4)+SEM(5)") == "=1SEM(2)+SEM1(4)+_xludf.SEM(5)"
    assert bind_for_calc('=SEM(B7,0.9)&"SEM(7)"') == '=_xludf.SEM(B7,0.9)&"SEM(7)"'


def test_filled_down_rows_bind_as_before():
    template = '=IF(OR(A{r}="",\'Bands sheet\'!$C$4=""),"",SCORE_CI(A{r},$C$4,$C$3,"lower")+LOG10(B{r}))'
    for r in [*range(2, 300), 9999, 100000, 1048576]:
        text = template.format(r=r)
        assert bind_for_calc(text) == bind_plain(text)
        assert bind_for_calc_xml(text) == escape(bind_plain(text))


_TOKENS = st.sampled_from([
    "SEM", "sem", "_xludf.SEM", "SCORE_CI", "KR_20", "KR20", "LOG10", "ATAN2", "SUM", "IF", "A", "B12", "$C$4",
    "Setup!", "'Q 1'!", "'It''s 2'!", '"', "'", "(", ")", " (", ",", "0.9", "12", "7", "1E+3", "+", "&", "\t",
    "é", "٣", ".", "$", "!", ":", "_", "x1", "1x", '"SEM(1)"', "\x00", "<", ">", "<>", "&", "&amp;",
])


@settings(max_examples=400, deadline=None)
@given(st.lists(_TOKENS, max_size=25))
def test_memoised_binder_equals_the_plain_one_on_drawn_texts(tokens):
    text = "".join(tokens)
    assert bind_for_calc(text) == bind_plain(text)
    assert bind_for_calc_xml(text) == escape(bind_plain(text))
    assert bind_sheet_xml(f"<c><f>{escape(text.replace(chr(0), ''))}</f></c>") == \
        f"<c><f>{bind_plain(escape(text.replace(chr(0), '')))}</f></c>"


def test_memo_follows_the_registry():
    text = "=SPW_MEMO_PROBE(A2)+SEM(A2,0.9)"
    assert bind_for_calc(text) == "=SPW_MEMO_PROBE(A2)+_xludf.SEM(A2,0.9)"

    def probe(x: float) -> float:
        """A test stand-in.

        Parameters
        ----------
        x : float
            A number.
        """
        return x

    spreadsheet("SPW_MEMO_PROBE", returns="number", reference="none: a test stand-in")(probe)
    try:
        assert bind_for_calc(text.replace("A2", "A3")) == "=_xludf.SPW_MEMO_PROBE(A3)+_xludf.SEM(A3,0.9)"
    finally:
        REGISTRY.pop("SPW_MEMO_PROBE")
    assert bind_for_calc(text.replace("A2", "A4")) == "=SPW_MEMO_PROBE(A4)+_xludf.SEM(A4,0.9)"


def test_memo_switched_off_binds_plainly(monkeypatch):
    monkeypatch.setattr(calc_binding, "MEMO", False)
    assert bind_for_calc("=SEM(A2,0.9)") == "=_xludf.SEM(A2,0.9)"


def _text_before(value: str) -> str:
    value = long_sheets._ILLEGAL.sub("", value)
    space = ' xml:space="preserve"' if value != value.strip() else ""
    return f"<is><t{space}>{escape(value)}</t></is>"


def _rows_xml_before(rows, first_row, *, formulas, styles=None):
    """``long_sheets.rows_xml`` as it was before the build's speed work (verbatim, with the plain binder)."""
    letters: list[str] = []
    for r, row in enumerate(rows, start=first_row):
        while len(letters) < len(row):
            letters.append(get_column_letter(len(letters) + 1))
        parts = [f'<row r="{r}">']
        for c, value in enumerate(row):
            if value is None:
                continue
            ref = f"{letters[c]}{r}"
            if styles and (r, c) in styles:
                ref += f'" s="{styles[(r, c)]}'  # the attribute rides on the reference
            if isinstance(value, bool):
                parts.append(f'<c r="{ref}" t="b"><v>{int(value)}</v></c>')
            elif isinstance(value, int):
                parts.append(f'<c r="{ref}"><v>{value}</v></c>')
            elif isinstance(value, float):
                if math.isfinite(value):
                    parts.append(f'<c r="{ref}"><v>{value!r}</v></c>')
            elif isinstance(value, ErrorValue):  # a formula's error result in the source stays an error
                parts.append(f'<c r="{ref}" t="e"><v>{escape(str(value))}</v></c>')
            elif isinstance(value, str):
                if formulas and value.startswith("="):
                    parts.append(f'<c r="{ref}"><f>{escape(bind_plain(value[1:]))}</f></c>')
                elif value:
                    parts.append(f'<c r="{ref}" t="inlineStr">{_text_before(value)}</c>')
            elif isinstance(value, (datetime.datetime, datetime.date, datetime.time)):
                parts.append(f'<c r="{ref}" t="inlineStr">{_text_before(value.isoformat())}</c>')
            else:
                parts.append(f'<c r="{ref}" t="inlineStr">{_text_before(str(value))}</c>')
        parts.append("</row>")
        yield "".join(parts)


class _Odd(str):
    """A str subclass that is not an error value."""


def _mixed_rows(n: int) -> list[list]:
    rows = []
    for r in range(n):
        rows.append([
            r, float(r) / 7, True, False, None, "", " padded ", "a<b & c>d\x01", ErrorValue("#N/A"), ErrorValue("=x"),
            f"=IF(A{r + 2}>0,SEM(B{r + 2},0.9),\"\")", f"=A{r + 2}&\"<&>\"", "=", float("nan"), float("inf"),
            -float("inf"), np.float64(1.5), np.int64(3), datetime.date(2026, 1, r % 28 + 1),
            datetime.datetime(2026, 1, 2, 3, 4, 5), datetime.time(7, 8), _Odd("=SEM(A1,0.9)"), _Odd("odd"), 2 ** 70,
            1e300, -0.0, [1, 2], "=LOG10(A2)+KR_20(B2:C9)",
        ][: 5 + r % 24])
    return rows


def test_rows_xml_writes_what_it_wrote_before():
    rows = _mixed_rows(60)
    styles = {(2 + r, c): 3 + c for r in range(0, 60, 3) for c in range(0, 28, 2)}
    for formulas in (True, False):
        for style in (None, styles):
            before = list(_rows_xml_before(rows, 2, formulas=formulas, styles=style))
            after = list(long_sheets.rows_xml(rows, 2, formulas=formulas, styles=style))
            assert after == before
            assert any("_xludf.SEM(" in row for row in after) == formulas


def _filled_down(r: int) -> list:
    """A row of the kind the Bands and Scored items sheets fill down: formulas and text, numbers only in them."""
    return [f"=A{r}", f'=IF(B{r}="","",SCORE_CI(B{r},$C$4,$C$3,"lower"))', None, "",
            f"=IF(ISNUMBER(D{r}),ROUND(SEM(D{r},0.9),2),\"n/a {r}\")", f"id {r}", f" {r} ", "12", f"=LOG10(E{r})+KR_20(F{r}:G{r})",
            f"='Sheet {r % 3}'!A{r}*1.5E+3", "a<b & c", f"x\x01{r}", f"y\x02{r}", f"z\ufdd0{r}", f"=1SEM({r})",
            f"=SUM(A{r}:A{r + 9})&\"SEM({r})\"", "\x03ctl", f"tab\t{r}", "=", f"={r}"][: 6 + r % 15]


class _Columns(dict):
    """Styles by whole columns and single cells, as the Bands sheet's (a Mapping that is costly to count)."""

    def __contains__(self, key):
        return key[1] % 3 == 0 or dict.__contains__(self, key)

    def __getitem__(self, key):
        return dict.get(self, key, 7 + key[1])

    def __bool__(self):
        return True


def test_rows_from_templates_equal_the_cell_by_cell_rows(monkeypatch):
    rows = [_filled_down(r) for r in range(2, 400)] + _mixed_rows(30) + [[], [None], [""], ["=A1"]] * 3
    single = _Columns({(5, 1): 3, (77, 4): 2, (78, 4): 2})
    for formulas in (True, False):
        for styles in (None, {(2 + r, c): 3 for r in range(0, 400, 7) for c in range(0, 20, 2)}, single):
            before = list(_rows_xml_before(rows, 2, formulas=formulas, styles=styles))
            assert list(long_sheets.rows_xml(rows, 2, formulas=formulas, styles=styles)) == before
            monkeypatch.setattr(long_sheets, "ROW_MEMO", False)
            assert list(long_sheets.rows_xml(rows, 2, formulas=formulas, styles=styles)) == before
            monkeypatch.setattr(long_sheets, "ROW_MEMO", True)


def test_filled_down_rows_share_one_template(monkeypatch):
    made = []
    row_xml = long_sheets._row_xml
    monkeypatch.setattr(long_sheets, "_row_xml", lambda *a: made.append(a[2]) or row_xml(*a))
    rows = [[f"=A{r}+SEM(B{r},0.9)", f"id {r}"] for r in range(2, 1000)]
    out = list(long_sheets.rows_xml(rows, 2, formulas=True))
    assert made == ["\ufdd0"]  # one template, no row written cell by cell
    assert out[997] == '<row r="999"><c r="A999"><f>A999+_xludf.SEM(B999,0.9)</f></c>' \
                       '<c r="B999" t="inlineStr"><is><t>id 999</t></is></c></row>'


@settings(max_examples=300, deadline=None)
@given(st.lists(st.lists(st.one_of(st.none(), st.lists(_TOKENS, max_size=8).map("".join), st.integers(-10 ** 20, 10 ** 20),
                                   st.floats(), st.booleans()), max_size=6), min_size=1, max_size=6),
       st.integers(1, 1048000), st.booleans())
def test_rows_from_templates_equal_the_cell_by_cell_rows_on_drawn_rows(rows, first, formulas):
    rows = rows + [[("=" + v) if isinstance(v, str) else v for v in row] for row in rows]
    styles = {(first + 1, 0): 4, (first, 2): 5}
    for style in (None, styles):
        assert list(long_sheets.rows_xml(rows, first, formulas=formulas, styles=style)) == \
            list(_rows_xml_before(rows, first, formulas=formulas, styles=style))
