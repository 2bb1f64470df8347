"""Cell references and the size of a sheet: the one home of the grid's limits and of A1 arithmetic.

=====================  =========================================================
``MAX_ROW``            1,048,576 rows, the grid of current spreadsheet apps
``MAX_COLUMN``         16,384 columns (A to XFD)
:func:`column_index`   ``"AA"`` → 27
:func:`column_letters` 27 → ``"AA"``
:func:`split_ref`      ``"$B$7"`` → (7, 2)
:func:`range_box`      ``"C9:A1"`` → (1, 1, 9, 3)
=====================  =========================================================
"""

from __future__ import annotations

import functools
import re

__all__ = ["MAX_ROW", "MAX_COLUMN", "column_index", "column_letters", "split_ref", "range_box"]

#: Rows of a sheet (ECMA-376 Part 1, 18.3.1.73: row numbers 1 to 1,048,576).
MAX_ROW = 1_048_576
#: Columns of a sheet (A to XFD).
MAX_COLUMN = 16_384


@functools.lru_cache(maxsize=20000)
def column_index(letters: str | bytes) -> int:
    """``"A"`` → 1, ``"AA"`` → 27, ``"XFD"`` → 16384."""
    if isinstance(letters, bytes):
        letters = letters.decode("ascii")
    n = 0
    for ch in letters.upper():
        n = n * 26 + (ord(ch) - 64)
    return n


@functools.lru_cache(maxsize=20000)
def column_letters(index: int) -> str:
    """1 → ``"A"``, 27 → ``"AA"``."""
    if index < 1:
        raise ValueError(f"column index must be at least 1, got {index}")
    out = ""
    while index:
        index, rem = divmod(index - 1, 26)
        out = chr(65 + rem) + out
    return out


_REF = re.compile(r"\$?([A-Za-z]{1,3})\$?([0-9]+)\Z")


def split_ref(ref: str) -> tuple[int, int]:
    """``"B7"`` (or ``"$B$7"``) → (row 7, column 2)."""
    m = _REF.match(ref.strip())
    if not m:
        raise ValueError(f"not a cell reference: {ref!r}")
    return int(m.group(2)), column_index(m.group(1).upper())


def range_box(text: str) -> tuple[int, int, int, int]:
    """(first row, first column, last row, last column) of ``A1`` or ``A1:C9`` (either corner first);
    ``ValueError`` for anything else.

    >>> range_box("C9:A1")
    (1, 1, 9, 3)
    """
    a, _, b = text.partition(":")
    (r1, c1), (r2, c2) = split_ref(a), split_ref(b or a)
    return min(r1, r2), min(c1, c2), max(r1, r2), max(c1, c2)
