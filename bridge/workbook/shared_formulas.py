"""Shared formulas: translating the master's text to each cell, and rewriting them as ordinary formulas.

A shared formula (ECMA-376 Part 1, 18.3.1.40) stores its text once, on the
master cell; each other cell of the group holds only the group's ``si`` and
reads as the master's formula with its relative references moved.
"""

from __future__ import annotations

import re
from typing import Sequence

from .cells import MAX_COLUMN, MAX_ROW, column_index, column_letters
from .sheet_patch import CellUpdate, patch_sheet
from .sheet_read import iter_cells

__all__ = ["translate_formula", "unshare_formulas"]

_FORMULA_TOKEN = re.compile(r"""
    (?P<string>"(?:[^"]|"")*")
   |(?P<quoted>'(?:[^']|'')*'!)
   |(?P<bracket>\[[^\]]*\])
   |(?P<error>\#[A-Z0-9/]+[!?]|\#N/A)
   |(?P<func>[A-Za-z_\\][A-Za-z0-9_.]*(?=\s*\())
   |(?P<sheet>[A-Za-z_\\][A-Za-z0-9_.]*!)
   |(?P<colrange>(?<![A-Za-z0-9_.$])\$?[A-Za-z]{1,3}:\$?[A-Za-z]{1,3}(?![A-Za-z0-9_.(!]))
   |(?P<rowrange>(?<![A-Za-z0-9_.$:])\$?[0-9]+:\$?[0-9]+(?![A-Za-z0-9_.(]))
   |(?P<cell>(?<![A-Za-z0-9_.$])\$?[A-Za-z]{1,3}\$?[0-9]+(?![A-Za-z0-9_.(!]))
   |(?P<name>[A-Za-z_\\][A-Za-z0-9_.]*)
   |(?P<number>[0-9]+\.?[0-9]*(?:[eE][+-]?[0-9]+)?)
""", re.X)
_CELL_PARTS = re.compile(r"(\$?)([A-Za-z]{1,3})(\$?)([0-9]+)")


def _shift_col(absolute: str, letters: str, dc: int) -> str | None:
    if absolute:
        return "$" + letters.upper()
    c = column_index(letters.upper()) + dc
    return column_letters(c) if 1 <= c <= MAX_COLUMN else None


def _shift_row(absolute: str, digits: str, dr: int) -> str | None:
    if absolute:
        return "$" + digits
    r = int(digits) + dr
    return str(r) if 1 <= r <= MAX_ROW else None


def translate_formula(text: str, rows: int, cols: int) -> str:
    """A formula as it reads when copied ``rows`` down and ``cols`` right (relative references move).

    This is how the dependents of a shared formula read (ECMA-376 Part 1,
    18.3.1.40: the master's formula with its relative references offset to
    each cell). A reference moved off the sheet becomes ``#REF!``. Text in
    quotes, sheet names, function names and defined names are kept.

    >>> translate_formula("SCORE_BAND(B2,$B$2:$B$9,Settings!$B$1,Reliability)", 3, 0)
    'SCORE_BAND(B5,$B$2:$B$9,Settings!$B$1,Reliability)'
    >>> translate_formula('SUM(A:A,2:2)&"A1"', 1, 1)
    'SUM(B:B,3:3)&"A1"'
    """
    out: list[str] = []
    pos = 0
    for m in _FORMULA_TOKEN.finditer(text):
        kind = m.lastgroup
        if kind not in ("cell", "colrange", "rowrange"):
            continue
        token = m.group(0)
        if kind == "cell":
            p = _CELL_PARTS.fullmatch(token)
            c = _shift_col(p.group(1), p.group(2), cols)
            r = _shift_row(p.group(3), p.group(4), rows)
            new = "#REF!" if c is None or r is None else f"{c}{r}"
        elif kind == "colrange":
            ends = []
            for part in token.split(":"):
                ends.append(_shift_col("$" if part.startswith("$") else "", part.lstrip("$"), cols))
            new = "#REF!" if None in ends else ":".join(ends)
        else:
            ends = []
            for part in token.split(":"):
                ends.append(_shift_row("$" if part.startswith("$") else "", part.lstrip("$"), rows))
            new = "#REF!" if None in ends else ":".join(ends)
        out.append(text[pos:m.start()])
        out.append(new)
        pos = m.end()
    out.append(text[pos:])
    return "".join(out)


class _AnyStrings:
    """A stand-in shared-string table for reads that only look at formula cells."""

    def __getitem__(self, index):
        return ""


def unshare_formulas(xml: bytes, shared_strings: Sequence[str] = (), groups=None) -> bytes:
    """Rewrite shared formulas as one ordinary formula per cell (each with its own text); values are kept.

    Parameters
    ----------
    xml : bytes
        The worksheet part.
    shared_strings : sequence of str
    groups : collection of int, optional
        The ``si`` indexes to rewrite; default every shared formula of the sheet.

    Notes
    -----
    LibreOffice Calc (7.x) recomputes shared formulas when it opens a file
    instead of showing their cached values, so a shared formula that calls a
    function Calc does not have shows ``#NAME?`` there even with a correct
    cached value. Written as ordinary formulas, the cells show the values
    stored with them. Only the cells of the groups named change.
    """
    masters: dict[int, tuple[str, int, int]] = {}
    updates: dict[str, CellUpdate] = {}
    # Formula cells never hold shared strings (a text result is t="str"), so other cells' strings are not needed.
    for cell in iter_cells(xml, shared_strings if shared_strings else _AnyStrings()):
        f = cell.formula
        if f is None or f.kind != "shared" or f.shared_index is None:
            continue
        if groups is not None and f.shared_index not in groups:
            continue
        if f.text is not None:
            masters[f.shared_index] = (f.text, cell.row, cell.col)
            text = f.text
        else:
            master = masters.get(f.shared_index)
            if master is None:
                continue  # a dependent before its master: malformed; left as it is
            text = translate_formula(master[0], cell.row - master[1], cell.col - master[2])
        updates[cell.ref] = CellUpdate(cell.value, formula=text)
    return patch_sheet(xml, updates) if updates else xml
