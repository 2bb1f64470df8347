"""Reading a validation-study data workbook: its sheets as grids of stored values, its Setup, its data.

:func:`read_study_data` reads the Setup sheet (:mod:`.setup`), applies the command line's overrides, reads
the data sheet and checks it (:mod:`.data_checks`); nothing is written before all of that succeeded.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any, Mapping

from .data_checks import check_data, item_columns, note_uncached
from .predictor_data import further_predictors
from .setup_answers import attach_answers, read_answer_key, score_rows
from .setup_cut import read_cut_inputs
from .setup import SETUP_SHEET, SetupError, StudyData, cell_text, read_setup_sheet, setup_from_values

__all__ = ["DataWorkbook", "read_study_data"]

_MAX_INPUT_BYTES = 2_000_000_000  # uncompressed; a larger package is refused before it is read

class DataWorkbook:
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
        formula cells without a stored value. The formula texts, ``(row, col)`` → text, are kept in
        :attr:`formulas`."""
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
        self.formulas = _formula_texts(sc.formulas, cols)
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


def read_study_data(path: str | Path, overrides: Mapping[str, Any] | None = None) -> StudyData:
    """Read and check a data workbook: its Setup sheet, ``overrides`` on top, then every named column.

    Raises :class:`SetupError` with a message naming the setting, column and sheet.
    """
    path = Path(path)
    wb = DataWorkbook(path)
    try:
        values, where = read_setup_sheet(wb)
        setup = setup_from_values(values, where).merged(dict(overrides or {}))
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
        formulas = wb.formulas
        cut_inputs = read_cut_inputs(wb, setup, SetupError)
        answer_key = read_answer_key(wb, setup, SetupError)
    finally:
        wb.close()
    header = [cell_text(h) for h in grid[0]] if grid else []
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
    raw_rows = rows
    if answer_key is not None:  # raw answers: the checks read them scored 1/0
        rows, scored = score_rows(answer_key, header, rows, item_columns(setup, header, sheet), SetupError)
    data = check_data(setup, path, sheet, header, rows, uncached=uncached, formulas=formulas,
                      blank=lambda r, c: _blank_cell(grid, r, c))
    if answer_key is not None:
        attach_answers(data, answer_key, scored, raw_rows, SetupError)
    data.predictors = further_predictors(data, header, rows)
    data.raw_header = list(grid[0][:width])
    # the copy's rows stand in the same sheet rows as the source's (from row 2)
    data.formats = {(r, c - 1): f for (r, c), f in formats.items() if 2 <= r <= len(rows) + 1 and c <= width}
    note_uncached(data, uncached, width)
    data.judgments, data.content_ratings = cut_inputs[:2]
    data.problems.extend(cut_inputs[2])
    return data


def _formula_texts(found, cols) -> dict[tuple[int, int], str]:
    """(row, col) → formula text of each formula cell in ``cols``; a cell sharing a master's formula gets the
    master's text moved to it, as the spreadsheet app reads it."""
    from ..workbook.shared_formulas import translate_formula

    masters = {f.shared_index: (r, c, f.text) for r, c, f in found if f.kind == "shared" and f.is_master and f.text}
    out = {}
    for r, c, f in found:
        if c not in cols:
            continue
        if f.text:
            out[(r, c)] = f.text
        elif f.kind == "shared" and f.shared_index in masters:
            mr, mc, text = masters[f.shared_index]
            out[(r, c)] = translate_formula(text, r - mr, c - mc)
    return out


def _blank_cell(grid: list[list], row: int, col: int) -> bool:
    """Whether sheet cell (row, col), 1-based, is blank (empty, empty text, or beyond the cells written)."""
    if row < 1 or col < 1 or row > len(grid) or col > len(grid[row - 1]):
        return True
    value = grid[row - 1][col - 1]
    return value is None or (isinstance(value, str) and not value.strip())

