"""COUNTIF and COUNTIFS over number-only ranges, counted with numpy instead of cell by cell.

The ``formulas`` library evaluates a criteria function cell by cell (each cell of each range converted,
compared and type-checked in Python), which on a study of 50,000 candidates was the largest part of the
recalculation. :func:`count_if` counts the same thing from the store's dense column arrays, but only in
the cases whose meaning is plain and the same in the library and in the spreadsheet apps:

* every range is a reference (no name) to cells holding numbers or blanks only: a text, logical or error
  anywhere in a range sends the call to the library (text criteria, wildcards, numeric text, errors);
* every criterion is one number (not a logical), or a text of an operator ``=``, ``<``, ``>``, ``<=``,
  ``>=`` (or none) followed by a plain decimal number (``">="&B3`` with B3 a number gives such a text);
  ``"<>…"`` is left to the library (the apps count blanks as different, the library does not), and so is
  any other text (``""``, ``"="``, dates, words, wildcards);
* the ranges of COUNTIFS have the same shape (else the library answers).

A blank cell never meets a numeric criterion (in the apps and in the library), so the ranges are read
only down to the last row the sheet uses. Anything outside these cases returns None and the library
decides, so the values are those of the reference path (``tests/test_engine_criteria.py`` compares both,
and LibreOffice).
"""

from __future__ import annotations

import operator
import re

import numpy as np

from ..workbook.cells import MAX_COLUMN, MAX_ROW

__all__ = ["COUNT_FUNCTIONS", "parse_criterion", "count_if", "count_if_rows"]

#: The criteria functions counted here (with their ``_xlfn.`` forms, which they do not have, left out).
COUNT_FUNCTIONS = frozenset({"COUNTIF", "COUNTIFS"})

#: The operators in the order the library tries them (the longest first), with their comparisons.
_OPERATORS = ((">=", operator.ge), ("<=", operator.le), ("<", operator.lt), (">", operator.gt),
              ("=", operator.eq))
_DECIMAL = re.compile(r"-?[0-9]+(?:\.[0-9]+)?")

#: Ranges wider than this are left to the library (the store reads a column at a time).
_MAX_COLUMNS = 256


def parse_criterion(value):
    """A criterion as (comparison, number), or None when it is not one of the plain numeric forms.

    >>> parse_criterion(">="+"12.5")[1], parse_criterion(3.0)[1], parse_criterion("<>1"), parse_criterion(True)
    (12.5, 3.0, None, None)
    """
    if isinstance(value, np.ndarray):
        if value.size != 1:
            return None
        value = value.ravel()[0]
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, bool):
        return None
    if isinstance(value, (int, float)):
        value = float(value)
        return (operator.eq, value) if np.isfinite(value) else None
    if not isinstance(value, str) or value.startswith("<>"):
        return None
    compare, rest = operator.eq, value
    for text, fn in _OPERATORS:
        if value.startswith(text) and value != text:
            compare, rest = fn, value[len(text):]
            break
    if not _DECIMAL.fullmatch(rest):
        return None
    return compare, float(rest)


def _ranges(nodes, store, sheet: str, row: int, col: int):
    """The dense number arrays of the range arguments (trimmed to a common height), or None."""
    dense_of = getattr(store, "dense", None)
    if dense_of is None:
        return None
    shapes, blocks = set(), []
    for node in nodes:
        if node.kind != "ref" or node.ref.name is not None:
            return None
        r1, c1, r2, c2 = node.ref.area(row, col)
        if r1 < 1 or c1 < 1 or r2 > MAX_ROW or c2 > MAX_COLUMN or c2 - c1 >= _MAX_COLUMNS:
            return None
        shapes.add((r2 - r1, c2 - c1))
        block = dense_of(node.ref.sheet or sheet, r1, c1, r2, c2)
        if block is None:
            return None
        blocks.append(block)
    if len(shapes) != 1:
        return None
    height = min(b.shape[0] for b in blocks)
    return [b[:height] for b in blocks]


def _count(blocks, criteria, masks: dict) -> float:
    hit = None
    for k, (block, (compare, number)) in enumerate(zip(blocks, criteria)):
        key = (k, compare, number)
        mask = masks.get(key)
        if mask is None:
            with np.errstate(invalid="ignore"):
                mask = masks[key] = compare(block, number)  # NaN (a blank) never meets a criterion
        hit = mask if hit is None else hit & mask
    return float(np.count_nonzero(hit))


def count_if(name: str, nodes, evaluate, store, sheet: str, row: int, col: int):
    """The value of ``COUNTIF(range, criterion)`` / ``COUNTIFS(range1, criterion1, ...)`` at one cell, or None
    when the library must decide. ``evaluate`` gives a criterion node's value as the reference path does."""
    if name not in COUNT_FUNCTIONS or len(nodes) < 2 or len(nodes) % 2 or (name == "COUNTIF" and len(nodes) != 2):
        return None
    blocks = _ranges(nodes[0::2], store, sheet, row, col)
    if blocks is None:
        return None
    criteria = [parse_criterion(evaluate(node)) for node in nodes[1::2]]
    if any(c is None for c in criteria):
        return None
    return _count(blocks, criteria, {})


def count_if_rows(name: str, nodes, values, store, sheet: str, first: int, col: int, n: int):
    """The counts of a filled-down run whose ranges do not move (their rows fixed), or None when the library
    must decide. ``values`` gives each criterion node's per-row values (a list of ``n``)."""
    if name not in COUNT_FUNCTIONS or len(nodes) < 2 or len(nodes) % 2 or (name == "COUNTIF" and len(nodes) != 2):
        return None
    if any(node.kind != "ref" or node.ref.name is not None or not node.ref.rows_fixed for node in nodes[0::2]):
        return None
    blocks = _ranges(nodes[0::2], store, sheet, first, col)
    if blocks is None:
        return None
    parsed: dict = {}
    per_row = []
    for node in nodes[1::2]:
        column = values(node)
        if column is None:
            return None
        row_criteria = []
        for v in column:
            key = (type(v), v) if not isinstance(v, np.ndarray) else None
            c = parsed.get(key) if key is not None else None
            if c is None:
                c = parse_criterion(v)
                if c is None:
                    return None
                if key is not None:
                    parsed[key] = c
            row_criteria.append(c)
        per_row.append(row_criteria)
    masks: dict = {}
    return np.array([_count(blocks, [rc[i] for rc in per_row], masks) for i in range(n)])
