"""Scored items: the item scores after reverse keying (written only when some items are reverse keyed)."""

from __future__ import annotations

from typing import Iterator

from ..context import Ref, cell, fill_row, formula_text
from ..setup import StudyData

__all__ = ["SCORED_SHEET", "header", "rows"]

#: The sheet of item scores after reverse keying.
SCORED_SHEET = "Scored items"


def header(data: StudyData) -> list[str]:
    return [data.header[c] + (" (reversed)" if j in data.reverse_items else "")
            for j, c in enumerate(data.item_columns)]


def rows(data: StudyData, item_min: Ref, item_max: Ref) -> Iterator[list[str]]:
    """Each item score as in the data, reverse-keyed ones as min + max − response (``item_min``, ``item_max``:
    the Setup cells of the item scale)."""
    reverse = set(data.reverse_items)
    templates = []
    for j, c in enumerate(data.item_columns):
        response = cell(data.sheet, None, c + 1).qualified_relative()
        template = ('=IF(COUNT({x})=1,{lo}+{hi}-{x},"")' if j in reverse else '=IF(COUNT({x})=1,{x},"")')
        templates.append(formula_text(template, SCORED_SHEET, x=response, lo=item_min, hi=item_max))
    for i in range(data.n):
        r = i + 2
        yield [fill_row(t, r) for t in templates]
