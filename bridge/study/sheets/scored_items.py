"""Scored items: the item scores after reverse keying, or of raw answers against their key (written only then).

With raw answers the study also writes the Answers sheet: the key in row 1 (editable), and below it each
candidate's answers linked from the data copy, in the same rows; the option functions read that range (key
first), and the Scored items formulas compare each answer with the key above it.
"""

from __future__ import annotations

from typing import Iterator

from ..context import Ref, cell, fill_row, formula_text
from ..setup import StudyData
from ..setup_answers import ANSWERS_SHEET

__all__ = ["SCORED_SHEET", "ANSWERS_SHEET", "header", "rows", "answers_header", "answers_rows"]

#: The sheet of item scores after reverse keying.
SCORED_SHEET = "Scored items"


def header(data: StudyData) -> list[str]:
    return [data.header[c] + (" (reversed)" if j in data.reverse_items else "")
            for j, c in enumerate(data.item_columns)]


def rows(data: StudyData, item_min: Ref, item_max: Ref) -> Iterator[list[str]]:
    """Each item score as in the data, reverse-keyed ones as min + max − response (``item_min``, ``item_max``:
    the Setup cells of the item scale)."""
    if data.answer_key is not None:
        yield from _keyed_rows(data)
        return
    reverse = set(data.reverse_items)
    templates = []
    for j, c in enumerate(data.item_columns):
        response = cell(data.sheet, None, c + 1).qualified_relative()
        template = ('=IF(COUNT({x})=1,{lo}+{hi}-{x},"")' if j in reverse else '=IF(COUNT({x})=1,{x},"")')
        templates.append(formula_text(template, SCORED_SHEET, x=response, lo=item_min, hi=item_max))
    for i in range(data.n):
        r = i + 2
        yield [fill_row(t, r) for t in templates]


# ---------------------------------------------------------------- raw answers and their key

def answers_header(data: StudyData) -> list[str]:
    """Row 1 of the Answers sheet: a label, then the key of each item (as text; edit it to re-key)."""
    return ["Key (edit to re-key) →", *data.answer_key]


def answers_rows(data: StudyData) -> Iterator[list[str]]:
    """Each candidate's id and answers, linked from the data copy (a blank stays blank, not 0)."""
    id_col = data.columns.get("id")
    templates = []
    for c in data.item_columns:
        answer = cell(data.sheet, None, c + 1).qualified_relative()
        templates.append(formula_text('=IF({x}="","",{x})', ANSWERS_SHEET, x=answer))
    person = (formula_text("={x}", ANSWERS_SHEET, x=cell(data.sheet, None, id_col + 1).qualified_relative())
              if id_col is not None else None)
    for i in range(data.n):
        r = i + 2
        yield [fill_row(person, r) if person else data.ids[i], *(fill_row(t, r) for t in templates)]


def _keyed_rows(data: StudyData) -> Iterator[list[str]]:
    """1 where the answer (Answers sheet) is the key above it, 0 for another answer, blank for no answer."""
    templates = []
    for j in range(len(data.item_columns)):
        answer = cell(ANSWERS_SHEET, None, j + 2).qualified_relative()
        key = Ref(ANSWERS_SHEET, 1, j + 2, prefix="quoted", absolute=True)
        templates.append(formula_text('=IF({x}="","",IF(UPPER(TRIM({x}))=UPPER({key}),1,0))', SCORED_SHEET,
                                      x=answer, key=key))
    for i in range(data.n):
        r = i + 2
        yield [fill_row(t, r) for t in templates]
