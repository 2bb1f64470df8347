"""Registered function calls written so that LibreOffice Calc binds them to trueband's add-in.

Calc reads a function it does not know from an xlsx file as an unknown name, and LibreOffice
7.4 does not bind a plain ``SEM(...)`` in an xlsx to an add-in. It does bind
``_xludf.SEM(...)``: ``_xludf`` is the add-in's service name (see :mod:`trueband.bridge.addin.extension`), and
``_xludf.`` is also the prefix other spreadsheet apps give to functions they do not know.
``trueband recalc`` reads both forms. The workbooks trueband writes (templates, the study)
therefore carry the prefix:

==========================  ==================================================================
function                    what
==========================  ==================================================================
:func:`bind_for_calc`       one formula's registered calls prefixed (strings and quoted sheet
                            names untouched, already prefixed calls left as they are); bound
                            once per formula shape (see below)
:func:`bind_for_calc_xml`   the same, XML-escaped for an ``<f>`` element
:func:`bind_sheet_xml`      the same for every ``<f>`` element of a sheet part's XML
:func:`bind_workbook`       the same for every formula cell of an openpyxl workbook
==========================  ==================================================================

A study writes hundreds of thousands of filled-down formulas that differ only in their numbers
(``=SCORE_CI(A2,...)``, ``=SCORE_CI(A3,...)``). :func:`bind_for_calc` therefore binds each formula
*shape* once: every run of digits that cannot be part of a called name (its word is not followed by
an opening bracket) is taken out, the rest is bound by :func:`bind_plain` (memoised), and the digits
are put back. Which names get the prefix depends only on the called names, which keep their digits
(``LOG10(``, ``KR_20(``), so the result is the same text :func:`bind_plain` gives
(``tests/test_calc_binding_memo.py`` checks both on many formulas). ``MEMO = False`` switches the
memo off (the benchmarks' reference run).
"""

from __future__ import annotations

import functools
import re
from xml.sax.saxutils import escape

from trueband.funcs.registry import ALIASES, REGISTRY

from .names import is_registered

__all__ = ["PREFIX", "MEMO", "bind_for_calc", "bind_for_calc_xml", "bind_plain", "bind_sheet_xml", "bind_workbook"]

PREFIX = "_xludf."

_QUOTED = re.compile(r"""("(?:[^"]|"")*"|'(?:[^']|'')*')""")
_F_ELEMENT = re.compile(r"(<f(?:\s[^>]*)?>)([^<]+)(</f>)")


# A name followed by an opening bracket and not preceded by a letter, digit, _, ., $ or ! (so
# neither part of a longer name, nor already prefixed, nor a sheet-qualified reference).
_CALL = re.compile(r"(?<![\w.$!])([A-Za-z_][A-Za-z0-9_]*)(?=\s*\()")


def _prefix(match: re.Match) -> str:
    name = match.group(1)
    return PREFIX + name if is_registered(name) else name


#: Whether :func:`bind_for_calc` binds each formula shape once (False: every formula by :func:`bind_plain`).
MEMO = True

# A run of ASCII digits whose word (the rest of the run of word characters) is not followed by an
# opening bracket: row numbers and constants, never a digit of a called name. A hole is written as
# NUL, which an XML part cannot hold (a formula with one is bound plainly).
_HOLE = re.compile(r"([0-9]+)(?!\w*\s*\()")
_NUL = "\x00"


@functools.lru_cache(maxsize=8192)
def _bound_shape(shape: str, registry_size: int, alias_count: int, xml: bool) -> tuple[str, ...]:
    """The pieces of :func:`bind_plain` of a shape between its holes, XML-escaped with ``xml`` (the sizes key the
    memo to the registry)."""
    bound = bind_plain(shape)
    return tuple((escape(bound) if xml else bound).split(_NUL))


def _by_shape(formula: str, xml: bool) -> str:
    if "(" not in formula or not MEMO or _NUL in formula:
        bound = bind_plain(formula)
        return escape(bound) if xml else bound
    parts = _HOLE.split(formula)  # text, digits, text, digits, ..., text
    parts[::2] = _bound_shape(_NUL.join(parts[::2]), len(REGISTRY), len(ALIASES), xml)
    return "".join(parts)


def bind_for_calc(formula: str) -> str:
    """``formula`` with each call of a registered function written ``_xludf.NAME(``.

    >>> bind_for_calc('=IF(A2="","",SCORE_CI(A2,$C$4,$C$3,"lower"))')
    '=IF(A2="","",_xludf.SCORE_CI(A2,$C$4,$C$3,"lower"))'
    >>> bind_for_calc('=ROUND(sem(12, 0.91), 2) & "SEM(1,2)"')
    '=ROUND(_xludf.sem(12, 0.91), 2) & "SEM(1,2)"'
    >>> bind_for_calc("=_xludf.SEM(B2,B3)+SUM('SEM(x'!A1:A3)")
    "=_xludf.SEM(B2,B3)+SUM('SEM(x'!A1:A3)"
    """
    return _by_shape(formula, False)


def bind_for_calc_xml(formula: str) -> str:
    """:func:`bind_for_calc` written as the text of an ``<f>`` element (``&``, ``<``, ``>`` escaped).

    >>> bind_for_calc_xml('IF(A2<>"",SEM(A2,0.9),"a&b")')
    'IF(A2&lt;&gt;"",_xludf.SEM(A2,0.9),"a&amp;b")'
    """
    return _by_shape(formula, True)


def bind_plain(formula: str) -> str:
    """:func:`bind_for_calc` without the memo: the calls found and prefixed in this one text.

    >>> bind_plain('=LOG10(A2)+KR_20(B2:C9)')
    '=LOG10(A2)+_xludf.KR_20(B2:C9)'
    """
    if "(" not in formula:
        return formula
    if '"' not in formula and "'" not in formula:
        return _CALL.sub(_prefix, formula)
    parts = _QUOTED.split(formula)
    for i in range(0, len(parts), 2):  # even pieces are outside quotes
        parts[i] = _CALL.sub(_prefix, parts[i])
    return "".join(parts)


def bind_sheet_xml(xml: str) -> str:
    """Every ``<f>`` element of a sheet part (XML text) through :func:`bind_for_calc`.

    >>> bind_sheet_xml('<c r="B2"><f>SEM(A2,0.9)</f><v>1</v></c><c r="B3"><f t="shared" si="0">A2+1</f></c>')
    '<c r="B2"><f>_xludf.SEM(A2,0.9)</f><v>1</v></c><c r="B3"><f t="shared" si="0">A2+1</f></c>'
    """
    return _F_ELEMENT.sub(lambda m: m.group(1) + bind_for_calc(m.group(2)) + m.group(3), xml)


def bind_workbook(wb) -> None:
    """Every formula cell of an openpyxl workbook through :func:`bind_for_calc`, in place."""
    for ws in wb.worksheets:
        for cell in list(ws._cells.values()):  # the cells that exist (iter_rows would create the empty ones)
            if cell.data_type == "f" and isinstance(cell.value, str):
                cell.value = bind_for_calc(cell.value)
