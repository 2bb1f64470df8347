"""Functions that depend on a range's extent rather than its values: ``ROWS``, ``COLUMNS``, ``COUNTBLANK``,
``COUNTIF``.

The store reads a range only down to the last row its sheet uses (and a very wide range only up to its last
used column; :meth:`~.store.CellStore.area`), so that ``A:A`` does not become a million cells. The library's
``ROWS`` and ``COLUMNS`` need its own reference objects and answer ``#VALUE!`` for the engine's arrays, and a
count of blank cells over the trimmed array misses the blank rows cut off. Spreadsheet apps count the whole
reference (LibreOffice Calc: ``ROWS(A1:A10)`` is 10, ``COUNTBLANK(A1:A10)`` counts the rows below the last
used one too), so these calls are answered from the reference's area in the formula:

* ``ROWS(ref)`` and ``COLUMNS(ref)``: the area's height and width (a reference that leaves the sheet, a
  name, or any other argument goes to the library, as before);
* ``COUNTBLANK(ref)`` and ``COUNTIF(ref, criterion)``: the library's count over the cells read, plus, for the
  cells cut off (all blank), that many times what the same function gives for one blank cell.

:func:`extent_size` and :func:`add_cut_off_blanks` are used by the single-cell path (:mod:`.eval_cell`); a
filled-down run (:mod:`.eval_run`) takes the same sizes and leaves a count with cells cut off to the single-cell
path, so both give the same values (``tests/test_engine_extent.py``, also against LibreOffice).
"""

from __future__ import annotations

import numpy as np

from ..workbook.cells import MAX_COLUMN, MAX_ROW
from .values import EMPTY

__all__ = ["EXTENT_FUNCTIONS", "extent_size", "blank_cells_cut_off", "add_cut_off_blanks", "pad_paired_ranges"]

#: The functions whose value depends on a reference's extent: ROWS and COLUMNS (the size), and the counts
#: in which a blank cell can count.
EXTENT_FUNCTIONS = frozenset({"ROWS", "COLUMNS", "COUNTBLANK", "COUNTIF"})


def _area(node, row: int, col: int):
    """The area (r1, c1, r2, c2) of a reference node on the sheet, or None (not a plain reference, or off it)."""
    if node.kind != "ref" or node.ref.name is not None:
        return None
    r1, c1, r2, c2 = node.ref.area(row, col)
    if r1 < 1 or c1 < 1 or r2 > MAX_ROW or c2 > MAX_COLUMN:
        return None
    return r1, c1, r2, c2


def extent_size(name: str, nodes, row: int, col: int) -> float | None:
    """``ROWS(ref)`` / ``COLUMNS(ref)`` from the reference's area at (row, col); None when the library decides."""
    if name not in ("ROWS", "COLUMNS") or len(nodes) != 1:
        return None
    area = _area(nodes[0], row, col)
    if area is None:
        return None
    r1, c1, r2, c2 = area
    return float(r2 - r1 + 1 if name == "ROWS" else c2 - c1 + 1)


def blank_cells_cut_off(name: str, nodes, first_value, row: int, col: int) -> int:
    """How many cells of the first argument of ``COUNTBLANK``/``COUNTIF`` the store did not read (cut off below
    the sheet's last used row or right of its last used column: blank), given the array it read."""
    if name not in ("COUNTBLANK", "COUNTIF") or not nodes or not isinstance(first_value, np.ndarray):
        return 0
    area = _area(nodes[0], row, col)
    if area is None or first_value.ndim != 2:
        return 0
    r1, c1, r2, c2 = area
    return (r2 - r1 + 1) * (c2 - c1 + 1) - int(first_value.size)


def _number(x):
    if isinstance(x, np.ndarray):
        if x.size != 1:
            return None
        x = x.ravel()[0]
    if isinstance(x, np.generic):
        x = x.item()
    return x if isinstance(x, (int, float)) and not isinstance(x, bool) else None


def add_cut_off_blanks(fn, args: list, result, missing: int):
    """``result`` (the library's count over the cells read) plus ``missing`` times the count of one blank cell
    under the same criterion; ``result`` unchanged when nothing was cut off or either count is not a number."""
    if missing <= 0:
        return result
    counted = _number(result)
    blank = np.empty((1, 1), dtype=object)
    blank[0, 0] = EMPTY
    one = _number(fn(blank, *args[1:]))
    if counted is None or one is None:
        return result
    return float(counted + missing * one)


def pad_paired_ranges(nodes, args: list, row: int, col: int, single=()) -> list:
    """The arguments of a call with the ranges of one full size brought to one height.

    A reference larger than the store reads whole (``A:A``; :data:`~.store.PAD_CELLS`) is cut at the last row
    its sheet uses, so ``SUMPRODUCT(A:A,Other!A:A)`` on sheets of different heights would pair arrays of
    different heights (the library: ``#VALUE!``). Ranges whose references have the same full size are padded
    with blank cells to the tallest array read among them (never past the reference's own height), so no more
    cells are made than the tallest sheet uses; the positions in ``single`` (read as one value by implicit
    intersection) and anything else are unchanged.
    """
    groups: dict[tuple, list[int]] = {}
    for i, (node, value) in enumerate(zip(nodes, args)):
        ok = i not in single and isinstance(value, np.ndarray) and value.ndim == 2
        area = _area(node, row, col) if ok else None
        if area is not None:
            r1, c1, r2, c2 = area
            groups.setdefault((r2 - r1 + 1, c2 - c1 + 1), []).append(i)
    out = list(args)
    for (height, width), members in groups.items():
        tallest = max(out[i].shape[0] for i in members)
        if len(members) < 2 or tallest > height:
            continue
        for i in members:
            a = out[i]
            if a.shape[0] < tallest and a.shape[1] == width:
                padded = np.empty((tallest, width), dtype=object)
                padded[:] = EMPTY
                padded[:a.shape[0]] = a
                out[i] = padded
    return out
