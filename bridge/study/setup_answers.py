"""Raw multiple-choice answers and their key: the ``answer key sheet`` setting, reading the key, scoring the rows.

The answer key sheet of the data workbook has the item headers in row 1 (as on the data sheet; a first column
headed e.g. "Item" that is not an item is ignored), the keyed option of each in row 2, and optionally in row 3
every option the item offered (e.g. ``ABCD``, or ``A, B, C, D``), so that a distractor nobody chose is seen.
Each item column is then read as answers: the study keeps them (on its Answers sheet, the key above them) and
scores them 1 for the keyed option and 0 for another, a blank staying blank (not answered), as live formulas on
the Scored items sheet. Answers are compared as text, trimmed and in capitals (``" b"`` is ``B``; the number 2
is ``2``).
"""

from __future__ import annotations

import dataclasses

import numpy as np
from openpyxl.utils import get_column_letter

from .setup_cells import cell_text

__all__ = ["ANSWER_SETTINGS", "ANSWERS_SHEET", "AnswerKey", "answer_text", "read_answer_key", "score_rows"]

#: setting -> (field name, kind, what it means), merged into :data:`.setup.SETTINGS`.
ANSWER_SETTINGS: dict[str, tuple[str, str, str]] = {
    "answer key sheet": ("answer_key_sheet", "text", "a sheet with the item headers in row 1, the keyed option in "
                                                     "row 2 and (optional) the options offered in row 3: the item "
                                                     "columns then hold raw answers (A, B, C...) (optional)"),
}

#: The study sheet of the answers with the key in its first row.
ANSWERS_SHEET = "Answers"


def answer_text(value) -> str | None:
    """An answer or option as it is compared: trimmed text in capitals; a whole number without ".0"; None blank."""
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    text = cell_text(value)
    return None if text is None else text.upper()


@dataclasses.dataclass(frozen=True)
class AnswerKey:
    """The key as read: item header -> keyed option and (when given) the options it offered."""

    sheet: str
    keys: dict
    options: dict


def read_answer_key(wb, setup, error) -> AnswerKey | None:
    """The answer key named by ``setup.answer_key_sheet`` in ``wb`` (a :class:`.data_workbook.DataWorkbook`)."""
    name = setup.answer_key_sheet
    if name is None:
        return None
    sheet = next((n for n in wb.sheetnames if n.strip().lower() == name.strip().lower()), None)
    if sheet is None:
        raise error(f"answer key sheet: no sheet named {name!r} in the data workbook (its sheets: "
                    f"{', '.join(wb.sheetnames)})")
    rows = wb.rows(sheet)
    if len(rows) < 2:
        raise error(f"answer key sheet: sheet '{sheet}' needs the item headers in row 1 and the keys in row 2")
    keys, options = {}, {}
    for c, head in enumerate(rows[0]):
        item = answer_text(head)
        key = answer_text(rows[1][c]) if c < len(rows[1]) else None
        if item is None or key is None or key in ("KEY", "KEYS", "KEYED OPTION"):
            continue  # an empty column, or the labels' column
        keys[str(head).strip().lower()] = key
        offered = answer_text(rows[2][c]) if len(rows) > 2 and c < len(rows[2]) else None
        if offered is not None:
            listed = [p.strip() for p in offered.split(",")] if "," in offered else list(offered.replace(" ", ""))
            if key not in listed:
                raise error(f"sheet '{sheet}', cell {get_column_letter(c + 1)}3: the options offered "
                            f"({offered}) do not include the key {key}")
            options[str(head).strip().lower()] = tuple(p for p in listed if p)
    if not keys:
        raise error(f"answer key sheet: sheet '{sheet}' has no item with a key (headers in row 1, keys in row 2)")
    return AnswerKey(sheet, keys, options)


def score_rows(key: AnswerKey, header: list, rows: list, item_columns: list[int], error) -> tuple[list, dict]:
    """``rows`` with each item column scored 1/0 (a blank left blank), and the columns scored: 0-based column ->
    its key. Every one of ``item_columns`` (0-based, as the Setup names them) must have a key."""
    by_name = {str(h).strip().lower(): c for c, h in enumerate(header) if h is not None}
    scored = {c: key.keys[name] for name, c in by_name.items() if name in key.keys}
    if item_columns:
        missing = [c for c in item_columns if c not in scored]
        if missing:
            raise error(f"answer key sheet: item {header[missing[0]]!r} has no key on sheet '{key.sheet}' (row 1 "
                        f"its header, row 2 its key)")
    out = []
    for row in rows:
        row = list(row)
        for c, k in scored.items():
            if c < len(row):
                a = answer_text(row[c])
                row[c] = None if a is None else float(a == k)
        out.append(tuple(row))
    return out, scored


def raw_answers(rows: list, item_columns: list[int]) -> np.ndarray:
    """The answers of the item columns as compared (object array, None for a blank)."""
    return np.array([[answer_text(row[c]) if c < len(row) else None for c in item_columns] for row in rows],
                    dtype=object)


def attach_answers(data, key: AnswerKey, scored: dict, raw_rows: list, error) -> None:
    """Keep the raw answers and the key on ``data`` (a :class:`.setup.StudyData` read from the scored rows)."""
    missing = [c for c in data.item_columns if c not in scored]
    if missing:
        raise error(f"answer key sheet: item {data.header[missing[0]]!r} has no key on sheet '{key.sheet}' (row 1 "
                    f"its header, row 2 its key)")
    data.rows = raw_rows
    data.raw_answers = raw_answers(raw_rows, data.item_columns)
    data.answer_key = tuple(scored[c] for c in data.item_columns)
    data.answer_options = tuple(key.options.get(str(data.header[c]).strip().lower()) for c in data.item_columns)
    data.notes.append(f"The item columns hold raw answers, scored against the key on sheet '{key.sheet}' (1 for "
                      f"the keyed option, 0 for another, a blank left unanswered); the key is the first row of the "
                      f"{ANSWERS_SHEET} sheet, where it can be corrected.")
