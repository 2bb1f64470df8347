"""COUNTIF and COUNTIFS counted with numpy instead of cell by cell.

The ``formulas`` library evaluates a criteria function cell by cell (each cell of each range converted,
compared and type-checked in Python), which on a study of 50,000 candidates was the largest part of the
recalculation. :func:`count_if` counts the same thing from the store's dense arrays of each range (numbers,
and the texts by position; kept until a write into the range), in the cases whose meaning is plain:

* every range is a reference (no name) to cells holding numbers, texts or blanks: a logical or an error
  anywhere in a range sends the call to the library;
* every criterion is one number (not a logical); or a text of an operator ``=``, ``<``, ``>``, ``<=``, ``>=``
  (or none) followed by a plain decimal number (``">="&B3`` with B3 a number gives such a text); or a plain
  text (no operator, wildcard, ``~`` or ``#``, and not a number or date the library reads it as), which
  equals a text cell whatever the letter case and never a number or a blank. ``"<>…"`` is left to the
  library (the apps count blanks as different, the library does not), and so is any other text (``""``,
  ``"="``, wildcards, dates);
* the ranges of COUNTIFS have the same shape (else the library answers).

Under a numeric criterion a text cell counts as the number (or date) the library's own ``_text2num`` makes
of it, once per distinct text, as the library does per cell. A blank cell meets none of these criteria (in
the apps and in the library), so the ranges are read only down to the last row the sheet uses. Anything else
returns None and the library decides, so the values are those of the reference path
(``tests/test_engine_criteria.py`` compares both, and LibreOffice).
"""

from __future__ import annotations

import operator
import re

import numpy as np
from formulas.functions import _text2num

from ..workbook.cells import MAX_COLUMN, MAX_ROW

__all__ = ["COUNT_FUNCTIONS", "AGGREGATE_FUNCTIONS", "parse_criterion", "count_if", "count_if_rows", "aggregate_if"]

#: The criteria functions counted here (with their ``_xlfn.`` forms, which they do not have, left out).
COUNT_FUNCTIONS = frozenset({"COUNTIF", "COUNTIFS"})

#: AVERAGEIFS and SUMIFS: the cells to aggregate are chosen as COUNTIFS chooses them, then given to the
#: library's own accumulator (the same values in the same order, so the same sum or mean to the last bit).
AGGREGATE_FUNCTIONS = frozenset({"AVERAGEIFS", "SUMIFS"})

#: The operators in the order the library tries them (the longest first), with their comparisons.
_OPERATORS = ((">=", operator.ge), ("<=", operator.le), ("<", operator.lt), (">", operator.gt),
              ("=", operator.eq))
_DECIMAL = re.compile(r"-?[0-9]+(?:\.[0-9]+)?")
#: Texts left to the library as criteria: wildcards and their escape, operators, errors.
_NOT_PLAIN_TEXT = re.compile(r"[*?~=<>#]")
#: The kind of a text criterion (equality whatever the letter case), in place of a comparison.
TEXT = "text"

#: Ranges wider than this are left to the library (the store reads a column at a time).
_MAX_COLUMNS = 256


def parse_criterion(value):
    """A criterion as (comparison, number) or (TEXT, the text casefolded), or None when it is none of the plain
    forms (the library then decides).

    >>> parse_criterion(">="+"12.5")[1], parse_criterion(3.0)[1], parse_criterion("North")[1], parse_criterion("<>1")
    (12.5, 3.0, 'north', None)
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
    if _DECIMAL.fullmatch(rest):
        return compare, float(rest)
    if compare is not operator.eq or not rest or _NOT_PLAIN_TEXT.search(rest):
        return None
    # the library reads a text criterion as a number or a date when it can (its _text2num): those are left to it
    converted = _text2num(rest)
    return (TEXT, rest.casefold()) if isinstance(converted, str) else None


def _ranges(nodes, store, sheet: str, row: int, col: int):
    """The dense arrays of the range arguments, (numbers, texts) each, trimmed to a common height; or None."""
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
    height = min(num.shape[0] for num, _ in blocks)
    return [(num[:height], [t for t in texts if t[0] < height]) for num, texts in blocks]


def _mask(block, criterion) -> np.ndarray:
    """Where a range meets a criterion, as the library decides it cell by cell."""
    num, texts = block
    compare, target = criterion
    if compare is TEXT:  # a text equals a text whatever its letter case; numbers and blanks never do
        out = np.zeros(num.shape, dtype=bool)
        for i, j, v in texts:
            out[i, j] = v.casefold() == target
        return out
    if texts:  # a numeric criterion reads a text cell as the number or date the library makes of it
        num = num.copy()
        converted = {}
        for i, j, v in texts:
            x = converted.get(v)
            if x is None:
                x = converted[v] = _text2num(v)
            if isinstance(x, (int, float)) and not isinstance(x, bool):
                num[i, j] = x
    with np.errstate(invalid="ignore"):
        return compare(num, target)  # NaN (a blank, or a text that is no number) never meets it


def _count(blocks, criteria, masks: dict) -> float:
    return float(np.count_nonzero(_hits(blocks, criteria, masks)))


def _hits(blocks, criteria, masks: dict) -> np.ndarray:
    hit = None
    for k, (block, criterion) in enumerate(zip(blocks, criteria)):
        key = (k, *criterion)
        mask = masks.get(key)
        if mask is None:
            mask = masks[key] = _mask(block, criterion)
        hit = mask if hit is None else hit & mask
    return hit


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
    """The values of a filled-down COUNTIF/COUNTIFS (or AVERAGEIFS/SUMIFS) run whose ranges do not move (their
    rows fixed), or None when the library must decide. ``values`` gives each criterion node's per-row values
    (a list of ``n``)."""
    aggregate = name in AGGREGATE_FUNCTIONS
    if aggregate:
        if len(nodes) < 3 or len(nodes) % 2 == 0:
            return None
        target, ranges, criteria_nodes = nodes[0], nodes[1::2], nodes[2::2]
    elif name in COUNT_FUNCTIONS and len(nodes) >= 2 and not len(nodes) % 2 and (name == "COUNTIFS" or len(nodes) == 2):
        target, ranges, criteria_nodes = None, nodes[0::2], nodes[1::2]
    else:
        return None
    every = ranges if target is None else [target, *ranges]
    if any(node.kind != "ref" or node.ref.name is not None or not node.ref.rows_fixed for node in every):
        return None
    blocks = _ranges(ranges, store, sheet, first, col)
    if blocks is None:
        return None
    cells = None
    if aggregate:
        areas = {((node.ref.sheet or sheet).casefold(), *node.ref.area(first, col)[::2]) for node in every}
        widths = {node.ref.area(first, col)[3] - node.ref.area(first, col)[1] for node in every}
        if len(areas) != 1 or len(widths) != 1:
            return None
        r1, c1, r2, c2 = target.ref.area(first, col)
        if r1 == r2 and c1 == c2:
            return None
        cells = store.area(target.ref.sheet or sheet, r1, c1, r2, c2)  # the range as the library receives it
        if cells.shape[1] != blocks[0][0].shape[1] or cells.shape[0] < blocks[0][0].shape[0]:
            return None
    per_row = []
    parsed: dict = {}
    for node in criteria_nodes:
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
    if not aggregate:
        return np.array([_count(blocks, [rc[i] for rc in per_row], masks) for i in range(n)])
    out = np.empty(n)
    accumulate = _accumulator(name)
    for i in range(n):
        x = _aggregate(accumulate, cells, _hits(blocks, [rc[i] for rc in per_row], masks))
        if x is None:
            return None
        out[i] = x
    return out


def _aggregate(accumulate, cells: np.ndarray, hit: np.ndarray) -> float | None:
    """The library's accumulator over the chosen cells, when it gives a finite number (else None)."""
    if cells.shape[0] > hit.shape[0]:  # rows below the last one used: blank, never chosen
        hit = np.vstack([hit, np.zeros((cells.shape[0] - hit.shape[0], hit.shape[1]), dtype=bool)])
    try:
        out = accumulate(np.asarray(cells)[hit])
    except Exception:  # the library's own answer (an error value) comes from its own path
        return None
    if isinstance(out, np.ndarray) and out.size == 1:
        out = out.ravel()[0]
    if isinstance(out, (float, np.floating)) and np.isfinite(out):
        return float(out)
    return None


def _accumulator(name: str):
    if name == "AVERAGEIFS":
        from formulas.functions.stat import xaverage  # the library's statistics module (AVERAGEIFS is in it)
        return xaverage
    from formulas.functions.math import xsum
    return xsum


def aggregate_if(name: str, nodes, evaluate, store, sheet: str, row: int, col: int):
    """The value of ``AVERAGEIFS(range, criteria_range1, criterion1, ...)`` or ``SUMIFS(...)`` at one cell, or
    None when the library must decide (as :func:`count_if`; besides, every range on one sheet over the same
    rows, and a result that is a finite number: an error or an empty average is the library's to give)."""
    if name not in AGGREGATE_FUNCTIONS or len(nodes) < 3 or len(nodes) % 2 == 0:
        return None
    areas = set()
    for node in [nodes[0], *nodes[1::2]]:
        if node.kind != "ref" or node.ref.name is not None:
            return None
        r1, c1, r2, c2 = node.ref.area(row, col)
        areas.add(((node.ref.sheet or sheet).casefold(), r1, r2, c2 - c1))
    if len(areas) != 1:
        return None
    blocks = _ranges(nodes[1::2], store, sheet, row, col)
    if blocks is None:
        return None
    criteria = [parse_criterion(evaluate(node)) for node in nodes[2::2]]
    if any(c is None for c in criteria):
        return None
    hit = _hits(blocks, criteria, {})
    values = evaluate(nodes[0])  # the range to aggregate as the library receives it
    if not isinstance(values, np.ndarray) or values.ndim != 2 or values.shape[1] != hit.shape[1] or \
            values.shape[0] < hit.shape[0]:
        return None
    return _aggregate(_accumulator(name), values, hit)
