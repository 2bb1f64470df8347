"""Checking the data a study reads: which column is which, the numbers in them, and the doubtful cells.

A column the setup names that is missing, a text in a number column, a reverse-keyed item that is no item...
is a :class:`.setup.SetupError` naming the setting, the column and the sheet. Cells the study can use but
that look wrong (an item value outside the item scale, a duplicate id, a blank group, a hired value that is
no yes/no coding, a formula without a stored value) become lines of :attr:`.setup.StudyData.problems`.
"""

from __future__ import annotations

import difflib
import math
import numbers
from pathlib import Path
from typing import Iterable

import numpy as np
from openpyxl.utils import get_column_letter

from trueband.funcs.impact import group_key, tally_groups

from . import setup_impact
from .setup import (HIRED_CODINGS, NO_CODES, SETUP_SHEET, YES_CODES, SetupError, StudyData, StudySetup,
                    cell_text)

__all__ = ["check_data", "note_uncached", "hired_code", "whole_names", "MAX_LINES_PER_PROBLEM"]


def _header_index(header: list[str], sheet: str):
    index: dict[str, int] = {}
    dupes: set[str] = set()
    for i, h in enumerate(header):
        if h is None:
            continue
        key = h.lower()
        if key in index:
            dupes.add(key)
        index.setdefault(key, i)
    return index, dupes


def whole_names(names: list[str], budget: int = 300) -> str:
    """``names`` joined by commas, as many whole names as fit in about ``budget`` characters, then how many more.

    >>> whole_names(["id", "group", "a long heading"], budget=12)
    'id, group and 1 more'
    """
    shown, used = [], 0
    for n in names:
        if shown and used + len(n) > budget:
            break
        shown.append(n)
        used += len(n) + 2
    rest = len(names) - len(shown)
    return ", ".join(shown) + (f" and {rest} more" if rest else "")


def _resolve(name: str, setting: str, index, dupes, header, sheet: str) -> int:
    key = name.strip().lower()
    if key in dupes:
        raise SetupError(f"{setting}: sheet '{sheet}' has more than one column headed {name!r}; rename one")
    if key not in index:
        names = [str(h) for h in header if h]
        close = difflib.get_close_matches(key, [n.strip().lower() for n in names], n=1, cutoff=0.6)
        hint = next((f"; did you mean {n!r}?" for n in names if close and n.strip().lower() == close[0]), "")
        raise SetupError(f"{setting}: no column headed {name!r} in row 1 of sheet '{sheet}'{hint} "
                         f"(its columns: {whole_names(names)})")
    return index[key]


def _resolve_many(specs: Iterable[str], setting: str, index, dupes, header, sheet: str) -> list[int]:
    out: list[int] = []
    for spec in specs:
        if ":" in spec:
            first, last = (p.strip() for p in spec.split(":", 1))
            a = _resolve(first, setting, index, dupes, header, sheet)
            b = _resolve(last, setting, index, dupes, header, sheet)
            if b < a:
                raise SetupError(f"{setting}: {spec!r} runs backwards on sheet '{sheet}' ({last!r} comes before "
                                 f"{first!r})")
            out.extend(range(a, b + 1))
        else:
            out.append(_resolve(spec, setting, index, dupes, header, sheet))
    if len(set(out)) != len(out):
        raise SetupError(f"{setting}: a column is named twice")
    return out


def _numeric(rows, col: int, setting: str, sheet: str, header) -> np.ndarray:
    out = np.empty(len(rows), dtype=float)
    for i, row in enumerate(rows):
        cell = row[col] if col < len(row) else None
        if cell is None or (isinstance(cell, str) and not cell.strip()):
            out[i] = np.nan
        elif isinstance(cell, numbers.Real) and not isinstance(cell, bool):
            x = float(cell)
            if not math.isfinite(x):
                raise SetupError(f"sheet '{sheet}', cell {get_column_letter(col + 1)}{i + 2} ({header[col]}, "
                                 f"{setting}): {cell!r} is not a finite number")
            out[i] = x
        else:
            what = "a logical value" if isinstance(cell, bool) else f"{cell!r}"
            raise SetupError(f"sheet '{sheet}', cell {get_column_letter(col + 1)}{i + 2} (column {header[col]!r}, "
                             f"{setting}) holds {what}; this column must hold numbers or blanks")
    return out


def hired_code(cell) -> bool | None:
    """True / False for a yes / no coding of the hired column, None for a blank or anything else."""
    if isinstance(cell, bool):
        return cell
    text = cell_text(cell)
    if text is None:
        return None
    key = " ".join(text.split()).casefold()
    return True if key in YES_CODES else False if key in NO_CODES else None


def _flags(rows, col: int, sheet: str, header) -> tuple[np.ndarray, list, list[str]]:
    """The hired flags (a blank is not hired), each cell's :func:`hired_code`, and one line per value that is
    no yes/no coding."""
    out = np.zeros(len(rows), dtype=bool)
    codes, bad = [], []
    for i, row in enumerate(rows):
        cell = row[col] if col < len(row) else None
        code = hired_code(cell)
        codes.append(code)
        if code:
            out[i] = True
        elif code is None and cell_text(cell) is not None:
            bad.append(f"sheet '{sheet}', cell {get_column_letter(col + 1)}{i + 2} (column {header[col]!r}, hired "
                       f"column): {cell!r} is not a yes/no coding ({HIRED_CODINGS}); the person is "
                       f"not counted as hired")
    return out, codes, bad


def _reverse_items(setup: StudySetup, item_cols, index, dupes, header, sheet: str) -> list[int]:
    """Positions (among the item columns) of the reverse-keyed items, checked."""
    if (setup.item_min is None) != (setup.item_max is None):
        raise SetupError("item scale: give both 'item scale minimum' and 'item scale maximum' (or --item-min and "
                         "--item-max), or neither")
    if setup.item_min is not None and not setup.item_min < setup.item_max:
        raise SetupError(f"item scale: the minimum ({setup.item_min:g}) must be below the maximum "
                         f"({setup.item_max:g})")
    if not setup.reverse:
        return []
    if not item_cols:
        raise SetupError("reverse keyed items: there are no item columns to reverse")
    if setup.item_min is None:
        raise SetupError("reverse keyed items: give the item scale ('item scale minimum' and 'item scale maximum' "
                         "on the Setup sheet, or --item-min and --item-max): a reversed score is minimum + maximum "
                         "- response")
    cols = _resolve_many(setup.reverse, "reverse keyed items", index, dupes, header, sheet)
    out = []
    for c in cols:
        if c not in item_cols:
            raise SetupError(f"reverse keyed items: column {header[c]!r} on sheet '{sheet}' is not one of the item "
                             f"columns")
        out.append(item_cols.index(c))
    return sorted(out)


def _item_scale(data: StudyData) -> None:
    """The item scale: as given; else 0/1 when (nearly) every answer is 0 or 1; else the observed range."""
    s, x = data.setup, data.items
    if s.item_min is not None:
        data.item_scale, data.item_scale_given = (float(s.item_min), float(s.item_max)), True
        return
    answered = x[~np.isnan(x)]
    if not answered.size:
        return
    binary = np.isin(answered, (0.0, 1.0))
    # a few stray values among 0/1 answers are slips (a 2, an 11), not a wider scale (common practice)
    if binary.mean() >= 0.99 and np.unique(answered[binary]).size == 2:
        data.item_scale = (0.0, 1.0)
        if not binary.all():
            data.notes.append("The items are scored 0/1 (every answer but a few is 0 or 1); the other values are "
                              "listed as problems. Set 'item scale minimum' and 'item scale maximum' for another "
                              "scale.")
        return
    data.item_scale = (float(answered.min()), float(answered.max()))
    data.notes.append(f"Item scale taken from the data: responses run from {answered.min():g} to "
                      f"{answered.max():g}. Set 'item scale minimum' and 'item scale maximum' on the Setup sheet "
                      f"to have responses outside the scale reported.")


def _outside_scale(data: StudyData) -> tuple[list[str], int]:
    """Lines for the first values outside the item scale, and how many there are."""
    if data.item_scale is None:
        return [], 0
    lo, hi = data.item_scale
    x = data.raw_items
    with np.errstate(invalid="ignore"):
        bad = (x < lo) | (x > hi)
    lines = []
    where = np.argwhere(bad)  # row by row, as a reader goes down the sheet
    for i, j in where[:MAX_LINES_PER_PROBLEM]:
        c = data.item_columns[j]
        lines.append(f"sheet '{data.sheet}', cell {get_column_letter(c + 1)}{i + 2} (item {data.header[c]!r}): "
                     f"{x[i, j]:g} is outside the item scale {lo:g} to {hi:g}; the study uses it as it stands "
                     f"(correct it and run the study again)")
    return lines, len(where)


def _duplicate_ids(data: StudyData) -> list[str]:
    if "id" not in data.columns:
        return []
    first: dict[str, list[int]] = {}
    for i, v in enumerate(data.ids):
        key = group_key(v) if not isinstance(v, bool) else str(v)
        if key is not None:
            first.setdefault(key, []).append(i)
    col = get_column_letter(data.columns["id"] + 1)
    lines = []
    for key, rows in first.items():
        if len(rows) > 1:
            cells = ", ".join(f"{col}{i + 2}" for i in rows)
            spelled = {cell_text(data.ids[i]) for i in rows}
            how = "" if len(spelled) == 1 else " (letter case and spacing aside)"
            shown = cell_text(data.ids[rows[0]])  # as the cell shows it: 7, not 7.0
            lines.append(f"sheet '{data.sheet}', cells {cells} (id column): the id {shown!r} appears "
                         f"{len(rows)} times{how}; each row is counted as a person of its own")
    return lines



#: Problems of one kind listed cell by cell up to this many; the rest are counted in one more line.
MAX_LINES_PER_PROBLEM = 25


def _report(data: StudyData, kind: str, lines: list[str], count: int | None = None) -> None:
    """Add the first lines of one kind of problem; ``count`` is how many there are (default: the lines)."""
    count = len(lines) if count is None else count
    data.problems.extend(lines[:MAX_LINES_PER_PROBLEM])
    if count > MAX_LINES_PER_PROBLEM:
        data.problems.append(f"sheet '{data.sheet}': {count - MAX_LINES_PER_PROBLEM} more {kind} like those "
                             f"above (not listed)")


def _uncached_by_column(uncached, width: int) -> dict[int, list[int]]:
    """0-based column → sheet rows of its formula cells without a stored value (below the header)."""
    by_col: dict[int, list[int]] = {}
    for r, c in uncached:
        if r >= 2 and c <= width:
            by_col.setdefault(c - 1, []).append(r)
    return by_col


def _recalc_hint(path: Path) -> str:
    from ..workbook.save import default_output_path

    shown = f'"{path}"' if " " in str(path) else str(path)  # the path as the study was given it
    return (f"compute them with `trueband recalc {shown} --all` and run the study on the "
            f"{default_output_path(path).name} it writes (or open the workbook in a spreadsheet app and save it)")


def _refuse_uncached(uncached, used: list[int], header, sheet: str, path: Path) -> None:
    """One refusal naming every column the study reads whose formula cells have no stored value."""
    by_col = _uncached_by_column(uncached, len(header))
    bad = [c for c in sorted(by_col) if c in used]
    if not bad:
        return
    n = sum(len(by_col[c]) for c in bad)
    names = whole_names([repr(header[c]) for c in bad])
    raise SetupError(f"sheet '{sheet}': {n} formula cell(s) in the column(s) {names} have no stored value (the "
                     f"workbook was saved without computing its formulas), so the study cannot read them; "
                     f"{_recalc_hint(path)}")


def note_uncached(data: StudyData, uncached, width: int) -> None:
    """One line for the formula cells without a stored value in columns the study does not read (the study's
    copy shows them blank); those in the columns it reads were refused by :func:`check_data`."""
    by_col = _uncached_by_column(uncached, width)
    if not by_col:
        return
    cols = sorted(by_col)
    rows = [(c, r) for c in cols for r in by_col[c]]
    cells = ", ".join(f"{get_column_letter(c + 1)}{r}" for c, r in rows[:5]) + (", ..." if len(rows) > 5 else "")
    which = (f"column {data.header[cols[0]]!r}" if len(cols) == 1 else
             f"columns {whole_names([repr(data.header[c]) for c in cols])}")
    data.problems.append(f"sheet '{data.sheet}', {which}: {len(rows)} formula cell(s) without a stored value "
                         f"({cells}) are blank in the study's copy of the data; recalculate the data workbook "
                         f"first ({_recalc_hint(data.path)})")


#: A formula reading more cells than this is not searched for blanks (a whole-column SUM, say).
_MOST_CELLS_SEARCHED = 100_000


def _reads_only_blanks(text: str, row: int, col: int, sheet: str, blank, compiled: dict) -> bool:
    """Whether the formula ``text`` in sheet cell (row, col), 1-based, reads cells of its own sheet only, all blank."""
    from ..formulas.compile import FormulaSyntaxError, compile_formula, formula_key

    key = formula_key(text, row, col)[0]
    if key not in compiled:
        try:
            compiled[key] = compile_formula(text, row, col)
        except FormulaSyntaxError:
            compiled[key] = None
    found = compiled[key]
    if found is None or not found.refs:
        return False
    areas = []
    for ref in found.refs:
        if ref.name is not None or (ref.sheet is not None and ref.sheet.strip("'").lower() != sheet.lower()):
            return False
        r1, c1, r2, c2 = ref.area(row, col)
        if (r2 - r1 + 1) * (c2 - c1 + 1) > _MOST_CELLS_SEARCHED:
            return False
        areas.append((r1, c1, r2, c2))
    return all(blank(r, c) for r1, c1, r2, c2 in areas for r in range(r1, r2 + 1) for c in range(c1, c2 + 1))


def _totals_over_blanks(rows: list, col: int, sheet: str, formulas, blank) -> tuple[list, list[int]]:
    """``rows`` with the total (0-based column ``col``) made blank where it is a formula that shows 0 and reads
    only blank cells (``=SUM(C2:H2)`` of a person who answered nothing), and the indexes of those rows.

    Such a person has no score, as on the item route; the stored 0 would count them as scoring 0."""
    out, emptied, compiled = list(rows), [], {}
    for i, row in enumerate(rows):
        text = formulas.get((i + 2, col + 1))
        value = row[col] if col < len(row) else None
        if text is None or isinstance(value, bool) or not isinstance(value, numbers.Real) or value != 0:
            continue
        if _reads_only_blanks(text, i + 2, col + 1, sheet, blank, compiled):
            out[i] = tuple(None if j == col else v for j, v in enumerate(row))
            emptied.append(i)
    return out, emptied


def check_data(setup: StudySetup, path: Path, sheet: str, header, rows, *, uncached=(), formulas=None,
               blank=None) -> StudyData:
    """The data of ``rows`` (below ``header``) as the setup reads them, checked; problems listed.

    ``uncached`` lists (row, col) of formula cells without a stored value (a column the study reads that has
    any is refused, in one line); ``formulas`` maps (row, col) to the formula text of the sheet's formula
    cells and ``blank(row, col)`` says whether a sheet cell is blank (both 1-based), so that a total that is a
    formula over blank cells only counts as no score."""
    index, dupes = _header_index(header, sheet)
    setup = setup_impact.normalise(setup)  # the first of several group columns is the group column
    if not setup.items and setup.total is None and not setup.ratings:  # ratings alone: the panel's mean
        raise SetupError(f"no test score: give 'item columns' (or 'total column', or 'rating columns' for a panel "
                         f"of ratings) on the {SETUP_SHEET} sheet or with --items / --total / --ratings")
    columns: dict[str, int] = {}
    for role in ("id", "group", "total", "criterion", "retest", "hired"):
        name = getattr(setup, role)
        if name:
            columns[role] = _resolve(name, f"{role} column", index, dupes, header, sheet)
    item_cols = _resolve_many(setup.items, "item columns", index, dupes, header, sheet) if setup.items else []
    rating_cols = _resolve_many(setup.ratings, "rating columns", index, dupes, header, sheet) if setup.ratings else []
    used = list(columns.values()) + item_cols + rating_cols
    if len(set(used)) != len(used):
        raise SetupError(f"a column of sheet '{sheet}' is given two roles; each column has one role")
    _refuse_uncached(uncached, used, header, sheet, path)
    if setup.items and len(item_cols) < 2:
        raise SetupError(f"item columns: at least 2 item columns are needed on sheet '{sheet}', got {len(item_cols)}")
    if setup.ratings and len(rating_cols) < 2:
        raise SetupError(f"rating columns: at least 2 raters are needed for agreement, got {len(rating_cols)}")
    if not 0 < setup.confidence < 1:
        raise SetupError(f"confidence must be between 0 and 1 (e.g. 0.95), got {setup.confidence}")
    if not 0 < setup.criterion_reliability <= 1:
        raise SetupError(f"criterion reliability must be greater than 0 and at most 1, got "
                         f"{setup.criterion_reliability}")

    def matrix(cols, setting):
        return np.column_stack([_numeric(rows, c, setting, sheet, header) for c in cols])

    emptied: list[int] = []
    if "total" in columns and formulas and blank is not None:
        rows, emptied = _totals_over_blanks(rows, columns["total"], sheet, formulas, blank)
    items = matrix(item_cols, "item columns") if item_cols else None
    reverse = _reverse_items(setup, item_cols, index, dupes, header, sheet)
    total = _numeric(rows, columns["total"], "total column", sheet, header) if "total" in columns else None
    ratings = matrix(rating_cols, "rating columns") if rating_cols else None
    criterion = (_numeric(rows, columns["criterion"], "criterion column", sheet, header) if "criterion" in columns
                 else None)
    retest = _numeric(rows, columns["retest"], "retest column", sheet, header) if "retest" in columns else None
    hired, hired_codes, hired_problems = (_flags(rows, columns["hired"], sheet, header) if "hired" in columns
                                          else (None, None, []))
    ids = [row[columns["id"]] for row in rows] if "id" in columns else list(range(1, len(rows) + 1))
    raw_groups = [row[columns["group"]] for row in rows] if "group" in columns else [None] * len(rows)
    # a label as the cell shows it: 2.0 is "2", a logical value is TRUE/FALSE, text keeps its spaces
    labels = [("TRUE" if g else "FALSE") if isinstance(g, bool) else g if isinstance(g, str) else cell_text(g)
              for g in raw_groups]
    tally = tally_groups(labels) if "group" in columns else None
    groups = [tally.name(g) for g in labels] if tally is not None else [None] * len(rows)

    data = StudyData(setup=setup, path=path, sheet=sheet, header=list(header), rows=rows, columns=columns,
                     item_columns=item_cols, rating_columns=rating_cols, ids=ids, groups=groups, items=items,
                     total=total, ratings=ratings, criterion=criterion, retest=retest, hired=hired,
                     hired_codes=hired_codes, group_tally=tally, raw_items=items)
    if items is not None:
        _item_scale(data)
        _report(data, "values outside the item scale", *_outside_scale(data))
        if reverse:
            lo, hi = data.item_scale
            data.reverse_items = reverse
            data.items = items.copy()
            data.items[:, reverse] = lo + hi - items[:, reverse]
    _report(data, "duplicate ids", _duplicate_ids(data))
    if tally is not None:
        g = get_column_letter(columns["group"] + 1)
        _report(data, "blank group cells", [
            f"sheet '{sheet}', cell {g}{i + 2} (column {header[columns['group']]!r}, group column): blank; the person "
            f"is left out of the adverse-impact counts" for i, x in enumerate(groups) if x is None])
    _report(data, "hired values", hired_problems)
    data.impact = setup_impact.read_impact_data(
        data, lambda name, setting: _resolve(name, setting, index, dupes, header, sheet), used,
        lambda kind, lines: _report(data, kind, lines), hired_code)
    scores = data.scores
    if np.isnan(scores).all():
        what = (f"column {setup.total!r} holds" if total is not None else "the item columns hold" if items is not None
                else "the rating columns hold")
        raise SetupError(f"sheet '{sheet}': {what} no scores (every cell is blank); if they hold formulas, "
                         f"recalculate the data workbook first (trueband recalc)")
    if tally is not None and tally.merged:
        for name, spellings in tally.merged.items():
            data.notes.append(f"Group labels {', '.join(repr(x) for x in spellings)} (column {setup.group!r}) differ "
                              f"only in letter case or spacing and are counted as one group, {name!r}.")
    if emptied:
        where = f"{get_column_letter(columns['total'] + 1)}{emptied[0] + 2}"
        data.notes.append(f"{len(emptied)} people's total (column {header[columns['total']]!r}, first in cell "
                          f"{where}) is a formula that reads only blank cells and shows 0: they have no score, as "
                          f"when every item is left blank, and their total is blank in the study's copy of the data.")
    if items is not None and np.isnan(items).any():
        data.notes.append(f"{int(np.isnan(items).any(axis=1).sum())} people left at least one item blank: a blank "
                          f"item counts 0 in the total and the person is left out of the item statistics")
    return data



def item_columns(setup: StudySetup, header, sheet: str) -> list[int]:
    """The 0-based columns the Setup's ``item columns`` name (checked as :func:`check_data` checks them)."""
    if not setup.items:
        return []
    index, dupes = _header_index(header, sheet)
    return _resolve_many(setup.items, "item columns", index, dupes, header, sheet)
