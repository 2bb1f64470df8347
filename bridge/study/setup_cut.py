"""The settings and data sheets of the cut-score evidence: the judges' sheet and the experts' content ratings.

New Setup settings (all optional; a study without them builds as before):

=============================  ==============================================================
setting                        value
=============================  ==============================================================
``judges sheet``               the sheet of the standard-setting panel's judgments (blocks
                               headed Angoff, Nedelsky, Ebel counts, Ebel proportions,
                               Hofstee, Beuk, Candidate judgments; see :data:`BLOCKS`)
``standard setting method``    the method whose cut the study's cut comes from (one of
                               :data:`METHODS`)
``sem adjustment``             k: the SEM-adjusted cut is the method's cut − k × SEM
                               (default 1)
``content ratings sheet``      the sheet of the experts' essential / useful / not necessary
                               ratings, one row per item, one column per expert
``content critical value``     "exact" (binomial; default) or "normal" (approximation)
=============================  ==============================================================

Reading is strict where a wrong number would mislead (a judgment that is not a number, a method not
named in :data:`METHODS`) and lenient where a person can see the cell (an unreadable rating is left
blank and listed among the data problems, naming sheet and cell).
"""

from __future__ import annotations

import dataclasses
import math
import numbers

from openpyxl.utils import get_column_letter

from .setup_cells import cell_text

__all__ = ["CUT_SETTINGS", "METHODS", "BLOCKS", "RATINGS", "Block", "Judgments", "ContentRatings",
           "read_cut_inputs", "method_key"]

#: setting -> (field name, kind, what it means), merged into :data:`.setup.SETTINGS`.
CUT_SETTINGS: dict[str, tuple[str, str, str]] = {
    "judges sheet": ("judges_sheet", "text", "the sheet of the standard-setting judges' ratings (optional; see the "
                                              "template)"),
    "standard setting method": ("standard_setting_method", "text",
                                "how the cut was set: Angoff, yes/no Angoff, Nedelsky, Ebel, Hofstee, Beuk, "
                                "contrasting groups or borderline group (optional)"),
    "sem adjustment": ("sem_adjustment", "number", "k: the SEM-adjusted cut is the method's cut minus k SEM "
                                                   "(default 1)"),
    "content ratings sheet": ("content_sheet", "text", "the sheet of the experts' essential / useful / not "
                                                       "necessary ratings per item (optional)"),
    "content critical value": ("content_critical", "text", "exact (binomial, the default) or normal "
                                                           "(approximation) for the CVR critical value"),
}

#: The standard-setting methods: key -> the words the sheet uses.
METHODS: dict[str, str] = {
    "angoff": "Angoff (modified: judged probabilities)",
    "yes/no angoff": "Angoff (yes/no judgments)",
    "nedelsky": "Nedelsky",
    "ebel": "Ebel",
    "hofstee": "Hofstee compromise",
    "beuk": "Beuk compromise",
    "contrasting groups": "contrasting groups",
    "borderline group": "borderline group",
}

#: The blocks of the judges' sheet: title (matched case-insensitively in column A) -> what its rows hold.
BLOCKS: dict[str, str] = {
    "angoff": "one row per item, one column per judge: the probability (0 to 1) that a minimally competent "
              "candidate answers correctly, or 1/0 for yes/no judgments",
    "nedelsky": "one row per item, one column per judge: the number of options left after striking those a "
                "minimally competent candidate would rule out (the key included)",
    "ebel counts": "one row per relevance category, one column per difficulty category: the number of items",
    "ebel proportions": "the same grid: the proportion of those items a minimally competent candidate answers "
                        "correctly",
    "hofstee": "one row per judge: lowest and highest acceptable cut, lowest and highest acceptable fail rate",
    "beuk": "one row per judge: the cut and the pass rate the judge expects",
    "candidate judgments": "one row per candidate the judges know: the applicant id, qualified (yes/no), "
                           "borderline (yes/no)",
}

#: The content ratings and the words accepted for each (any case and spacing).
RATINGS = {"essential": ("essential", "e"), "useful": ("useful", "useful but not essential", "u"),
           "not necessary": ("not necessary", "n")}
_RATING_WORDS = {w: key for key, words in RATINGS.items() for w in words}
_YES, _NO = {"yes", "y", "1", "true"}, {"no", "n", "0", "false"}


def method_key(text: str | None) -> str | None:
    """The key of :data:`METHODS` for a method as a person writes it (any case, spacing, "-" or "_")."""
    if text is None:
        return None
    key = " ".join(str(text).replace("_", " ").replace("-", " ").lower().split())
    key = {"yes no angoff": "yes/no angoff", "modified angoff": "angoff", "borderline": "borderline group",
           "contrasting group": "contrasting groups"}.get(key, key)
    return key if key in METHODS else None


@dataclasses.dataclass(frozen=True)
class Block:
    """One block of the judges' sheet: its header row and its rows of values (labels in the first column)."""

    title: str
    header: tuple[str, ...]
    labels: tuple[str, ...]
    values: tuple[tuple, ...]       # one tuple per row, the cells right of the label (numbers, None for blank)
    where: str                      # "sheet 'Judges', rows 3 to 12"


@dataclasses.dataclass(frozen=True)
class Judgments:
    """The judges' sheet as read: its blocks by title (key of :data:`BLOCKS`) and the method named in Setup."""

    sheet: str
    blocks: dict
    method: str | None


@dataclasses.dataclass(frozen=True)
class ContentRatings:
    """The experts' ratings: item labels, expert names and each rating as a key of :data:`RATINGS` (None: blank)."""

    sheet: str
    items: tuple[str, ...]
    experts: tuple[str, ...]
    ratings: tuple[tuple, ...]


def _find_sheet(wb, name: str, setting: str, error) -> str:
    match = next((n for n in wb.sheetnames if n.strip().lower() == name.strip().lower()), None)
    if match is None:
        raise error(f"{setting}: no sheet named {name!r} in the data workbook (its sheets: {', '.join(wb.sheetnames)})")
    return match


def _number(cell, sheet: str, r: int, c: int, block: str, error, yes_no: bool = False):
    """A judgment as a number (None for a blank); yes/no words as 1/0 where ``yes_no``."""
    if cell is None or (isinstance(cell, str) and not cell.strip()):
        return None
    if isinstance(cell, bool):
        return float(cell)
    if isinstance(cell, numbers.Real) and math.isfinite(float(cell)):
        return float(cell)
    if yes_no and isinstance(cell, str) and cell.strip().lower() in _YES | _NO:
        return 1.0 if cell.strip().lower() in _YES else 0.0
    raise error(f"sheet '{sheet}', cell {get_column_letter(c)}{r} ({block} block): {cell!r} is not a number"
                + (" nor yes/no" if yes_no else ""))


def _blocks(rows: list[list], sheet: str, error) -> dict:
    """The blocks of the judges' sheet: a title in column A, its header on the next row, rows to the first blank."""
    blocks, r = {}, 0
    while r < len(rows):
        title = cell_text(rows[r][0]) if rows[r] else None
        key = " ".join(title.lower().split()) if title else None
        if key not in BLOCKS:
            r += 1
            continue
        if key in blocks:
            raise error(f"sheet '{sheet}', cell A{r + 1}: a second {title!r} block; each block appears once")
        header_row = rows[r + 1] if r + 1 < len(rows) else []
        header = [cell_text(h) for h in header_row]
        while header and header[-1] is None:
            header.pop()
        first = r + 2
        end = first
        while end < len(rows) and any(cell_text(x) is not None for x in rows[end]):
            end += 1
        labels, values = [], []
        for i in range(first, end):
            row = list(rows[i]) + [None] * len(header)
            labels.append(cell_text(row[0]) or f"row {i + 1}")
            yes_no = key == "candidate judgments"
            if yes_no:  # the applicant id stays as written
                labels[-1] = row[0] if row[0] is not None else labels[-1]
            values.append(tuple(_number(row[c], sheet, i + 1, c + 1, title, error, yes_no)
                                for c in range(1, max(len(header), 2))))
        if len(header) < 2 or not values:
            raise error(f"sheet '{sheet}', cell A{r + 1}: the {title!r} block needs a header row below its title "
                        f"and at least one row of values below that")
        blocks[key] = Block(key, tuple(h or f"column {get_column_letter(j + 1)}" for j, h in enumerate(header)),
                            tuple(labels), tuple(values), f"sheet '{sheet}', rows {first + 1} to {end}")
        r = end
    return blocks


def _ratings(rows: list[list], sheet: str, problems: list[str]) -> ContentRatings | None:
    if not rows:
        return None
    header = [cell_text(h) for h in rows[0]]
    while header and header[-1] is None:
        header.pop()
    experts = tuple(h or f"Expert {j}" for j, h in enumerate(header[1:], start=1))
    items, ratings = [], []
    for r, row in enumerate(rows[1:], start=2):
        row = list(row) + [None] * len(header)
        if not any(cell_text(x) is not None for x in row[:len(header)]):
            continue
        items.append(cell_text(row[0]) or f"row {r}")
        out = []
        for c in range(1, len(header)):
            text = cell_text(row[c])
            key = _RATING_WORDS.get(" ".join(text.lower().split())) if text else None
            if text is not None and key is None:
                problems.append(f"sheet '{sheet}', cell {get_column_letter(c + 1)}{r}: {row[c]!r} is not a rating "
                                f"(essential, useful or not necessary); it is left out")
            out.append(key)
        ratings.append(tuple(out))
    return ContentRatings(sheet, tuple(items), experts, tuple(ratings))


def read_cut_inputs(wb, setup, error) -> tuple[Judgments | None, ContentRatings | None, list[str]]:
    """The judges' sheet and the content ratings named by ``setup`` (a :class:`.setup.StudySetup`), read from
    ``wb`` (a :class:`.data_workbook.DataWorkbook`); ``error`` is the class of a setup the study cannot use.
    Returns them (None when not named) and the problems found (one line per cell)."""
    problems: list[str] = []
    judgments = content = None
    method = method_key(setup.standard_setting_method)
    if setup.standard_setting_method is not None and method is None:
        raise error(f"standard setting method: {setup.standard_setting_method!r} is not one of "
                    f"{', '.join(METHODS)}")
    if setup.content_critical is not None and setup.content_critical.strip().lower() not in ("exact", "normal"):
        raise error(f"content critical value: give exact or normal, got {setup.content_critical!r}")
    if setup.sem_adjustment is not None and not 0 <= setup.sem_adjustment <= 3:
        raise error(f"sem adjustment: k must be between 0 and 3 SEM, got {setup.sem_adjustment:g}")
    if setup.judges_sheet is not None:
        sheet = _find_sheet(wb, setup.judges_sheet, "judges sheet", error)
        blocks = _blocks(wb.rows(sheet), sheet, error)
        if not blocks:
            raise error(f"judges sheet: sheet '{sheet}' has no block; write a block title in column A "
                        f"({', '.join(BLOCKS)}), its header below it and the judgments below that")
        judgments = Judgments(sheet, blocks, method)
    elif method is not None:
        raise error("standard setting method: name the judges' sheet too ('judges sheet'), where the judgments are")
    if setup.content_sheet is not None:
        sheet = _find_sheet(wb, setup.content_sheet, "content ratings sheet", error)
        content = _ratings(wb.rows(sheet), sheet, problems)
        if content is None or not content.items or len(content.experts) < 1:
            raise error(f"content ratings sheet: sheet '{sheet}' needs a header row (Item, then one column per "
                        f"expert) and one row per item")
    return judgments, content, problems
