"""Reading a validation-study data workbook: which column is which, and the data itself.

A data workbook has one sheet of candidates (a header row, then one row per
person) and, optionally, a sheet named ``Setup`` whose rows are
``setting | value`` pairs (column A the setting, column B its value; anything
to the right is ignored, and the settings end at the first empty row). Command-line options override the setup sheet.

=======================  ====================================================
setting                  value
=======================  ====================================================
``data sheet``           the sheet of candidates (default: the first sheet
                         that is not ``Setup``)
``id column``            header of the candidate id column
``group column``         header of the applicant-group column (impact analysis)
``item columns``         item response columns: ``Q01:Q40`` (a span from one
                         header to another) or ``Q01, Q02, Q03`` (a list)
``reverse keyed items``  items scored in reverse (score = minimum + maximum
                         of the item scale − response); needs the item scale
``item scale minimum``,  the lowest and highest response an item allows
``item scale maximum``   (e.g. 1 and 5); values outside it are reported
``total column``         a test total, when there are no item columns (or to
                         use instead of their sum)
``rating columns``       interview or assessor ratings, one column per rater
``criterion column``     job performance, blank for people not hired
``retest column``        a second sitting of the test (optional)
``hired column``         yes/no, y/n, hired/not hired, 1/0, TRUE/FALSE or
                         T/F, any case (optional)
``cut score``            the cut for the adverse-impact analysis
``confidence``           confidence level of every interval (default 0.95)
``criterion reliability``  reliability of the criterion (default 0.52)
``success threshold``    criterion value that counts as success (default:
                         the median criterion value)
``reference group``      the group others are compared with (default: the
                         group with the highest selection rate)
``test name``, ``job title``, ``organisation``  words for the titles
=======================  ====================================================

A setup the study cannot use is a :class:`SetupError` whose message names the
setting, the column and the sheet; nothing is written before the whole setup
and every data cell it names have been read and checked. Data the study can use
but that look wrong (an item value outside the item scale, a duplicate id, a
blank group, a hired value that is no yes/no coding, a formula without a stored
value) are listed in :attr:`StudyData.problems`, one line per cell naming the
sheet and cell; the study shows them on its Notes sheet and the command prints
them.

Group labels are matched as :func:`trueband.funcs.impact.group_key` does:
labels that differ only in letter case or spacing are one group.
"""

from __future__ import annotations

import dataclasses
import difflib
import math
import numbers
from pathlib import Path
from typing import Any, Iterable, Mapping

import numpy as np
from openpyxl.utils import get_column_letter

__all__ = ["SetupError", "StudySetup", "StudyData", "SETTINGS", "read_study_data", "normalise_key",
           "SETUP_SHEET", "DEFAULT_CRITERION_RELIABILITY"]

SETUP_SHEET = "Setup"

#: Interrater reliability of supervisory ratings of overall job performance, .52
#: (Viswesvaran, Ones & Schmidt, 1996, J. Applied Psychology 81, 557-574), the usual default.
DEFAULT_CRITERION_RELIABILITY = 0.52

#: setting -> (field name, kind, what it means); kinds: column, columns, number, text
#: Codings of the hired column, compared after trimming and case folding (common practice).
YES_CODES = frozenset({"yes", "y", "true", "t", "1", "1.0", "hired"})
NO_CODES = frozenset({"no", "n", "false", "f", "0", "0.0", "not hired"})
#: The codings in words, for the Setup help, the study and the messages.
HIRED_CODINGS = "yes/no, y/n, hired/not hired, 1/0, TRUE/FALSE or T/F"


SETTINGS: dict[str, tuple[str, str, str]] = {
    "data sheet": ("data_sheet", "text", "the sheet that holds one row per candidate, headers in row 1"),
    "id column": ("id", "column", "header of the candidate id column"),
    "group column": ("group", "column", "header of the applicant-group column used for adverse impact"),
    "item columns": ("items", "columns", "item response columns, e.g. Q01:Q40 (a span) or Q01, Q02 (a list)"),
    "reverse keyed items": ("reverse", "columns", "items scored in reverse: score = scale minimum + maximum − "
                                                  "response, e.g. Q03, Q07 (optional; needs the item scale)"),
    "item scale minimum": ("item_min", "number", "lowest response an item allows, e.g. 1 (optional)"),
    "item scale maximum": ("item_max", "number", "highest response an item allows, e.g. 5 (optional)"),
    "total column": ("total", "column", "a test total to use instead of summing the items (optional)"),
    "rating columns": ("ratings", "columns", "interview ratings, one column per rater (optional)"),
    "criterion column": ("criterion", "column", "job performance; blank for people not hired"),
    "retest column": ("retest", "column", "score on a second sitting of the test (optional)"),
    "hired column": ("hired", "column", "was the person hired: " + HIRED_CODINGS + " (optional)"),
    "cut score": ("cut", "number", "scores at or above the cut pass (adverse impact and utility)"),
    "confidence": ("confidence", "number", "confidence level of every interval, e.g. 0.95"),
    "criterion reliability": ("criterion_reliability", "number",
                              "reliability of the criterion; 0.52 is the published average for supervisor ratings"),
    "success threshold": ("success", "number", "criterion value that counts as success (default: the median)"),
    "reference group": ("reference_group", "text", "group the others are compared with (default: highest rate)"),
    "test name": ("test_name", "text", "name of the test, for titles"),
    "job title": ("job_title", "text", "the job, for titles"),
    "organisation": ("organisation", "text", "the employer, for titles"),
}

_NUMERIC_ROLES = ("items", "total", "ratings", "criterion", "retest")
_MAX_INPUT_BYTES = 2_000_000_000  # uncompressed; a larger package is refused before it is read


class SetupError(Exception):
    """The data workbook or its setup cannot be used; the message says why."""


def normalise_key(key: str) -> str:
    return " ".join(str(key).replace("_", " ").replace("-", " ").lower().split())


@dataclasses.dataclass(frozen=True)
class StudySetup:
    """Which columns play which role, and the study's settings (as given; not yet checked)."""

    data_sheet: str | None = None
    id: str | None = None
    group: str | None = None
    items: tuple[str, ...] = ()
    reverse: tuple[str, ...] = ()
    item_min: float | None = None
    item_max: float | None = None
    total: str | None = None
    ratings: tuple[str, ...] = ()
    criterion: str | None = None
    retest: str | None = None
    hired: str | None = None
    cut: float | None = None
    confidence: float = 0.95
    criterion_reliability: float = DEFAULT_CRITERION_RELIABILITY
    success: float | None = None
    reference_group: str | None = None
    test_name: str = "the test"
    job_title: str = ""
    organisation: str = ""
    source: Mapping[str, str] = dataclasses.field(default_factory=dict)  # field -> where it was given

    def merged(self, overrides: Mapping[str, Any]) -> "StudySetup":
        """This setup with the non-empty ``overrides`` (field name -> value) applied."""
        changes, source = {}, dict(self.source)
        for name, value in overrides.items():
            if value is None or value == () or value == "":
                continue
            changes[name] = value
            source[name] = "command line"
        return dataclasses.replace(self, **changes, source=source)


@dataclasses.dataclass
class StudyData:
    """The checked data: arrays in row order (blank = nan for numbers, None for labels)."""

    setup: StudySetup
    path: Path
    sheet: str
    header: list[str]
    rows: list[tuple]              # every data row as read (values), for the copy
    columns: dict[str, int]        # role -> 0-based column (single-column roles)
    item_columns: list[int]
    rating_columns: list[int]
    ids: list[Any]
    groups: list[str | None]
    items: np.ndarray | None       # n x k floats, nan for blank
    total: np.ndarray | None
    ratings: np.ndarray | None
    criterion: np.ndarray | None
    retest: np.ndarray | None
    hired: np.ndarray | None       # bool, or None when no hired column (an unreadable value counts False)
    hired_codes: list | None = None  # each row's reading of the hired cell: True, False, or None (blank, unreadable)
    notes: list[str] = dataclasses.field(default_factory=list)
    problems: list[str] = dataclasses.field(default_factory=list)   # one line per doubtful cell
    raw_header: list = dataclasses.field(default_factory=list)      # row 1 as written, for the copy
    formats: dict = dataclasses.field(default_factory=dict)         # (sheet row, 0-based col) -> number format
    groups_raw: list = dataclasses.field(default_factory=list)      # the group cells as written
    group_tally: Any = None                                         # funcs.impact.GroupTally of the groups
    reverse_items: list[int] = dataclasses.field(default_factory=list)  # 0-based positions among the items
    item_scale: tuple[float, float] | None = None                   # (min, max) given, or read from the data
    item_scale_given: bool = False
    raw_items: np.ndarray | None = None                             # the responses before reverse keying

    @property
    def binary_items(self) -> bool:
        """The items are scored 0/1: given so, or (nearly) every answer is 0 or 1 (see :func:`_item_scale`)."""
        return self.items is not None and self.item_scale == (0.0, 1.0)

    @property
    def n(self) -> int:
        return len(self.rows)

    def letter(self, role: str) -> str:
        return get_column_letter(self.columns[role] + 1)

    @property
    def scores(self) -> np.ndarray:
        """Each person's test score: the total column, or the sum of the items (blank items count 0;
        a person with no item answered has no score)."""
        if self.total is not None:
            return self.total
        answered = (~np.isnan(self.items)).sum(axis=1)
        s = np.nansum(self.items, axis=1)
        return np.where(answered > 0, s, np.nan)


# ---------------------------------------------------------------- reading the workbook

class _Book:
    """The sheets of a workbook package as grids of cached values, read with the package layer
    (:mod:`..workbook.package`, :mod:`..workbook.sheet_columns`): a formula cell gives its stored value, as a
    spreadsheet app shows it; dates are their serial numbers."""

    def __init__(self, path: Path):
        from ..workbook.package import UnusableWorkbook, open_workbook_package

        if not path.exists():
            raise SetupError(f"{path} does not exist")
        if path.suffix.lower() not in (".xlsx", ".xlsm"):
            raise SetupError(f"{path.name} is not an .xlsx workbook (save it as .xlsx first)")
        try:
            self.pkg = open_workbook_package(path, check_lock=False, max_total=_MAX_INPUT_BYTES)
        except UnusableWorkbook as exc:
            raise SetupError(str(exc)) from None
        self.sheetnames = [s.name for s in self.pkg.worksheets]

    def close(self):
        self.pkg.close()

    def rows(self, name: str, *, max_col: int | None = None) -> list[list]:
        """Every row from row 1 to the last one with a cell, each as long as the widest row."""
        return self.sheet(name, max_col=max_col)[0]

    def sheet(self, name: str, *, max_col: int | None = None):
        """``(rows, formats, uncached)``: the rows as :meth:`rows` gives them; ``formats`` maps
        ``(row, col)`` (1-based) to the number format of each cell that has one other than General
        (dates keep their date format in the study's copy); ``uncached`` lists ``(row, col)`` of the
        formula cells without a stored value."""
        from ..workbook.sheet_columns import read_columns
        from ..workbook.sheet_data import SheetXmlError

        try:
            sc = read_columns(self.pkg.sheet_xml(name), self.pkg.shared_strings)
        except SheetXmlError as exc:
            raise SetupError(f"sheet '{name}' cannot be read: {exc}") from None
        cols = {c: v for c, v in sc.columns.items() if max_col is None or c <= max_col}
        styles = self.number_formats()
        formats = {rc: styles[s] for rc, s in sc.styles.items() if s in styles and rc[1] in cols}
        uncached = [(r, c) for r, c, _ in sc.formulas if c in cols and sc.value(r, c) is None]
        return self._grid(cols), formats, uncached

    def number_formats(self) -> dict[int, str]:
        """Style index -> number format code, for the styles whose format is not General."""
        if hasattr(self, "_formats"):
            return self._formats
        from openpyxl.styles.numbers import BUILTIN_FORMATS

        from ..workbook.package import UnusableWorkbook

        self._formats: dict[int, str] = {}
        part = next((r["part"] for r in self.pkg.workbook_rels if r.get("Type", "").endswith("/styles")
                     and "part" in r), None)
        if part is None or part not in self.pkg:
            return self._formats
        try:
            root = self.pkg.xml(part)
        except UnusableWorkbook:  # an unreadable styles part only costs the copy its number formats
            return self._formats

        def local(el):
            return el.tag.rsplit("}", 1)[-1]

        custom = {}
        for el in root:
            if local(el) == "numFmts":
                for f in el:
                    try:
                        custom[int(f.get("numFmtId"))] = f.get("formatCode") or ""
                    except (TypeError, ValueError):
                        pass
            elif local(el) == "cellXfs":
                for i, xf in enumerate(x for x in el if local(x) == "xf"):
                    try:
                        fid = int(xf.get("numFmtId", "0"))
                    except ValueError:
                        continue
                    code = custom.get(fid, BUILTIN_FORMATS.get(fid))
                    if code is None and 14 <= fid <= 22:
                        code = "yyyy-mm-dd"
                    if code and code != "General":
                        self._formats[i] = code
        return self._formats

    @staticmethod
    def _grid(cols) -> list[list]:
        if not cols:
            return []
        n_rows = max(rows[-1] for rows, _ in cols.values() if rows)
        width = max(cols)
        grid = [[None] * width for _ in range(n_rows)]
        for c, (rows, values) in cols.items():
            j = c - 1
            for r, v in zip(rows, values):
                grid[r - 1][j] = v
        return grid


def _cell_text(value) -> str | None:
    if value is None:
        return None
    if isinstance(value, float) and value.is_integer():
        value = int(value)
    text = str(value).strip()
    return text or None


def _read_setup_sheet(wb: _Book) -> tuple[dict[str, Any], dict[str, str]]:
    """Settings from the Setup sheet: field -> raw value, field -> 'Setup!B7'."""
    sheet = next((n for n in wb.sheetnames if n.strip().lower() == SETUP_SHEET.lower()), None)
    if sheet is None:
        return {}, {}
    values, where = {}, {}
    started = False
    for r, row in enumerate(wb.rows(sheet, max_col=2), start=1):
        key = _cell_text(row[0]) if row else None
        if key is None:
            if started:
                break  # the settings end at the first empty row; notes may follow
            continue
        started = True
        norm = normalise_key(key)
        if norm in ("setting", "settings", "key"):
            continue  # a header row
        if norm not in SETTINGS:
            known = ", ".join(repr(k) for k in SETTINGS)
            raise SetupError(f"sheet '{sheet}', cell A{r}: unknown setting {key!r}; the settings are {known}")
        value = row[1] if len(row) > 1 else None
        if isinstance(value, str):
            value = value.strip() or None
        if value is None:
            continue
        field = SETTINGS[norm][0]
        values[field] = value
        where[field] = f"sheet '{sheet}', cell B{r}"
    return values, where


def _parse_columns(spec) -> tuple[str, ...]:
    if isinstance(spec, (list, tuple)):
        return tuple(str(s).strip() for s in spec if str(s).strip())
    return tuple(p.strip() for p in str(spec).split(",") if p.strip())


def _setup_from_values(values: Mapping[str, Any], where: Mapping[str, str]) -> StudySetup:
    kwargs: dict[str, Any] = {}
    by_field = {f: (k, kind) for k, (f, kind, _) in SETTINGS.items()}
    for field, raw in values.items():
        key, kind = by_field[field]
        if kind == "columns":
            kwargs[field] = _parse_columns(raw)
        elif kind == "number":
            if isinstance(raw, bool) or not isinstance(raw, numbers.Real):
                try:
                    raw = float(str(raw).strip())
                except ValueError:
                    raise SetupError(f"{where.get(field, key)}: {key} must be a number, got {raw!r}") from None
            if not math.isfinite(float(raw)):
                raise SetupError(f"{where.get(field, key)}: {key} must be a finite number, got {raw!r}")
            kwargs[field] = float(raw)
        else:
            kwargs[field] = _cell_text(raw)
    return StudySetup(**kwargs, source=dict(where))


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
    text = _cell_text(cell)
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
        elif code is None and _cell_text(cell) is not None:
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
    from trueband.funcs.impact import group_key

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
            spelled = {_cell_text(data.ids[i]) for i in rows}
            how = "" if len(spelled) == 1 else " (letter case and spacing aside)"
            shown = _cell_text(data.ids[rows[0]])  # as the cell shows it: 7, not 7.0
            lines.append(f"sheet '{data.sheet}', cells {cells} (id column): the id {shown!r} appears "
                         f"{len(rows)} times{how}; each row is counted as a person of its own")
    return lines


def read_study_data(path: str | Path, overrides: Mapping[str, Any] | None = None) -> StudyData:
    """Read and check a data workbook: its Setup sheet, ``overrides`` on top, then every named column.

    Raises :class:`SetupError` with a message naming the setting, column and sheet.
    """
    path = Path(path)
    wb = _Book(path)
    try:
        values, where = _read_setup_sheet(wb)
        setup = _setup_from_values(values, where).merged(dict(overrides or {}))
        sheet = setup.data_sheet
        if sheet is None:
            others = [n for n in wb.sheetnames if n.strip().lower() != SETUP_SHEET.lower()]
            if not others:
                raise SetupError(f"{path.name} has no data sheet (only a '{SETUP_SHEET}' sheet)")
            sheet = others[0]
        match = next((n for n in wb.sheetnames if n.lower() == sheet.lower()), None)
        if match is None:
            raise SetupError(f"data sheet: no sheet named {sheet!r} in {path.name} (its sheets: "
                             f"{', '.join(wb.sheetnames)})")
        sheet = match
        grid, formats, uncached = wb.sheet(sheet)
    finally:
        wb.close()
    header = [_cell_text(h) for h in grid[0]] if grid else []
    if not any(header):
        raise SetupError(f"sheet '{sheet}' is empty: row 1 must hold the column headers")
    while header and header[-1] is None:
        header.pop()
    width = len(header)
    rows = [tuple(row[:width]) for row in grid[1:]]
    while rows and all(c is None or (isinstance(c, str) and not c.strip()) for c in rows[-1]):
        rows.pop()
    if not rows:
        raise SetupError(f"sheet '{sheet}' has a header row but no data rows below it")
    data = _check(setup, path, sheet, header, rows)
    data.raw_header = list(grid[0][:width])
    # the copy's rows stand in the same sheet rows as the source's (from row 2)
    data.formats = {(r, c - 1): f for (r, c), f in formats.items() if 2 <= r <= len(rows) + 1 and c <= width}
    _note_uncached(data, uncached, width)
    return data


#: Problems of one kind listed cell by cell up to this many; the rest are counted in one more line.
MAX_LINES_PER_PROBLEM = 25


def _report(data: StudyData, kind: str, lines: list[str], count: int | None = None) -> None:
    """Add the first lines of one kind of problem; ``count`` is how many there are (default: the lines)."""
    count = len(lines) if count is None else count
    data.problems.extend(lines[:MAX_LINES_PER_PROBLEM])
    if count > MAX_LINES_PER_PROBLEM:
        data.problems.append(f"sheet '{data.sheet}': {count - MAX_LINES_PER_PROBLEM} more {kind} like those "
                             f"above (not listed)")


def _note_uncached(data: StudyData, uncached, width: int) -> None:
    by_col: dict[int, list[int]] = {}
    for r, c in uncached:
        if r >= 2 and c <= width:
            by_col.setdefault(c, []).append(r)
    lines = []
    for c, rs in sorted(by_col.items()):
        name = data.header[c - 1]
        cells = ", ".join(f"{get_column_letter(c)}{r}" for r in rs[:5]) + (", ..." if len(rs) > 5 else "")
        lines.append(f"sheet '{data.sheet}', column {name!r}: {len(rs)} formula cell(s) without a stored value "
                     f"({cells}) are blank in the study; recalculate the data workbook first (trueband recalc or "
                     f"save it from a spreadsheet app)")
    data.problems.extend(lines)


def _check(setup: StudySetup, path: Path, sheet: str, header, rows) -> StudyData:
    index, dupes = _header_index(header, sheet)
    if not setup.items and setup.total is None:
        raise SetupError(f"no test score: give 'item columns' (or 'total column') on the {SETUP_SHEET} sheet "
                         f"or with --items / --total")
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

    items = matrix(item_cols, "item columns") if item_cols else None
    reverse = _reverse_items(setup, item_cols, index, dupes, header, sheet)
    total = _numeric(rows, columns["total"], "total column", sheet, header) if "total" in columns else None
    ratings = matrix(rating_cols, "rating columns") if rating_cols else None
    criterion = _numeric(rows, columns["criterion"], "criterion column", sheet, header) if "criterion" in columns else None
    retest = _numeric(rows, columns["retest"], "retest column", sheet, header) if "retest" in columns else None
    hired, hired_codes, hired_problems = (_flags(rows, columns["hired"], sheet, header) if "hired" in columns
                                          else (None, None, []))
    ids = [row[columns["id"]] for row in rows] if "id" in columns else list(range(1, len(rows) + 1))
    raw_groups = [row[columns["group"]] for row in rows] if "group" in columns else [None] * len(rows)
    from trueband.funcs.impact import tally_groups

    # a label as the cell shows it: 2.0 is "2", a logical value is TRUE/FALSE, text keeps its spaces
    labels = [("TRUE" if g else "FALSE") if isinstance(g, bool) else g if isinstance(g, str) else _cell_text(g)
              for g in raw_groups]
    tally = tally_groups(labels) if "group" in columns else None
    groups = [tally.name(g) for g in labels] if tally is not None else [None] * len(rows)

    data = StudyData(setup=setup, path=path, sheet=sheet, header=list(header), rows=rows, columns=columns,
                     item_columns=item_cols, rating_columns=rating_cols, ids=ids, groups=groups, items=items,
                     total=total, ratings=ratings, criterion=criterion, retest=retest, hired=hired,
                     hired_codes=hired_codes, groups_raw=raw_groups, group_tally=tally, raw_items=items)
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
    scores = data.scores
    if np.isnan(scores).all():
        what = f"column {setup.total!r}" if total is not None else "the item columns"
        raise SetupError(f"sheet '{sheet}': {what} hold no scores (every cell is blank); if they hold formulas, "
                         f"recalculate the data workbook first (trueband recalc)")
    if tally is not None and tally.merged:
        for name, spellings in tally.merged.items():
            data.notes.append(f"Group labels {', '.join(repr(x) for x in spellings)} (column {setup.group!r}) differ "
                              f"only in letter case or spacing and are counted as one group, {name!r}.")
    if items is not None and np.isnan(items).any():
        data.notes.append(f"{int(np.isnan(items).any(axis=1).sum())} people left at least one item blank: a blank "
                          f"item counts 0 in the total and the person is left out of the item statistics")
    return data
