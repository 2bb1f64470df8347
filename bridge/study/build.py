"""Writing the validation-study workbook.

:func:`make_study` reads a data workbook (:mod:`.study_setup`), writes a new
workbook with a copy of the data and the analysis sheets, recalculates it with
:func:`trueband.bridge.engine.recalc.recalculate` so every cell carries its value, and
only then moves it to the output path (a failure at any point leaves no file).

Every number on the analysis sheets is a live formula over the copy of the
data: the registered functions (``=CRONBACH_ALPHA(...)``) or standard
spreadsheet functions (``=STDEV(...)``). Before a formula is written, the same
function is called here on the same data; when it cannot be computed (an
all-blank criterion, one group only, a cut that passes everyone...) the cell
gets the text ``not computable: <reason>`` instead of a formula that would
only show an error code.

Sheets: Summary, Reliability, Items, Raters, Validity, Bands, Impact, Utility,
Notes, Setup (the settings used; the numbers on it are inputs the formulas
read), and the copy of the data sheet under its own name.
"""

from __future__ import annotations

import dataclasses
import datetime
import math
import os
import tempfile
import textwrap
import time
from pathlib import Path
from typing import Any, Callable, Mapping

import numpy as np
from openpyxl import Workbook
from openpyxl.cell import WriteOnlyCell
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter

from trueband.funcs import call, lookup
from trueband.funcs.errors import InsufficientDataError, TruebandError, UnknownFunctionError

from . import charts
from . import long_sheets as study_xml
from .words import CAUTION, NOT_COMPUTABLE
from .setup import HIRED_CODINGS, SETTINGS, SETUP_SHEET, SetupError, StudyData, read_study_data

__all__ = ["StudyError", "StudyResult", "build_study", "make_study", "CAUTION", "ANALYSIS_SHEETS"]

ANALYSIS_SHEETS = ("Summary", "Reliability", "Items", "Raters", "Validity", "Bands", "Impact", "Utility", "Notes")

#: The sheet of item scores after reverse keying (written only when some items are reverse keyed).
SCORED_SHEET = "Scored items"

#: Up to this many cells in the item (or rating) range, every range function is called once while the
#: study is built, to mark what cannot be computed; above it only cheap numpy checks are made.
FULL_CHECK_CELLS = 400_000


class StudyError(Exception):
    """The study cannot be built; nothing was written."""


# ---------------------------------------------------------------- cell styles

_STYLES: dict[str, dict[str, Any]] = {
    "title": {"font": Font(bold=True, size=14)},
    "heading": {"font": Font(bold=True, size=11)},
    "header": {"font": Font(bold=True), "fill": PatternFill("solid", fgColor="DDE4EE"),
               "alignment": Alignment(wrap_text=True, vertical="top")},
    "label": {},
    # long text is split into lines over several rows (see Grid.para): apps do not all grow a row
    # to fit wrapped text when they open a file
    "wrap": {"alignment": Alignment(vertical="top")},
    "caution": {"font": Font(bold=True, color="7A2E00")},
    "na": {"font": Font(italic=True, color="9C0006")},
    "coef": {"number_format": "0.000"},
    "p": {"number_format": "0.0000"},
    "count": {"number_format": "0"},
    "score": {"number_format": "0.0"},
    "pct": {"number_format": "0.0%"},
    "money": {"number_format": "#,##0"},
    "input": {"fill": PatternFill("solid", fgColor="FFF2CC"), "number_format": "General"},
    "input_coef": {"fill": PatternFill("solid", fgColor="FFF2CC"), "number_format": "0.000"},
    "input_money": {"fill": PatternFill("solid", fgColor="FFF2CC"), "number_format": "#,##0"},
}


def quote(sheet: str) -> str:
    return "'" + sheet.replace("'", "''") + "'"


def cell_ref(sheet: str, col: int, row: int) -> str:
    """Absolute reference like 'Sheet'!$C$5 (col 1-based)."""
    return f"{quote(sheet)}!${get_column_letter(col)}${row}"


def range_ref(sheet: str, col1: int, row1: int, col2: int, row2: int) -> str:
    return f"{quote(sheet)}!${get_column_letter(col1)}${row1}:${get_column_letter(col2)}${row2}"


class Grid:
    """A small sheet composed cell by cell, streamed out in row order when the workbook is written."""

    def __init__(self, title: str):
        self.title = title
        self.cells: dict[tuple[int, int], tuple[Any, str | None]] = {}
        self.widths: dict[int, float] = {}
        self.charts: list[tuple[Any, str]] = []
        self.freeze: str | None = None
        self.landscape = True  # printed landscape, one page wide
        self.print_area: str | None = None

    def set(self, row: int, col: int, value, style: str | None = None):
        self.cells[(row, col)] = (value, style)

    def ref(self, row: int, col: int) -> str:
        return cell_ref(self.title, col, row)

    def para(self, row: int, col: int, text: str, style: str | None = "wrap", width: int = 118) -> int:
        """Write ``text`` as lines of at most ``width`` characters down from ``row``; returns the lines used."""
        lines = textwrap.wrap(text, width) or [""]
        for k, line in enumerate(lines):
            if (row + k, col) in self.cells:
                raise AssertionError(f"{self.title}!{get_column_letter(col)}{row + k} is taken")
            self.set(row + k, col, line, style)
        return len(lines)

    def write(self, wb: Workbook):
        ws = wb.create_sheet(self.title)
        for col, width in self.widths.items():
            ws.column_dimensions[get_column_letter(col)].width = width
        if self.freeze:
            ws.freeze_panes = self.freeze
        if self.landscape:
            ws.page_setup.orientation = "landscape"
            ws.page_setup.fitToWidth = 1
            ws.page_setup.fitToHeight = 0
            ws.sheet_properties.pageSetUpPr.fitToPage = True
        if self.print_area:
            ws.print_area = self.print_area
        if self.cells:
            n_rows = max(r for r, _ in self.cells)
            n_cols = max(c for _, c in self.cells)
            for r in range(1, n_rows + 1):
                row = []
                for c in range(1, n_cols + 1):
                    entry = self.cells.get((r, c))
                    row.append(None if entry is None else _styled(ws, *entry))
                while row and row[-1] is None:
                    row.pop()
                ws.append(row)
        for chart, anchor in self.charts:
            ws.add_chart(chart, anchor)
        return ws


def _styled(ws, value, style):
    if style is None:
        return value
    cell = WriteOnlyCell(ws, value=value)
    for attr, val in _STYLES[style].items():
        setattr(cell, attr, val)
    return cell


# ---------------------------------------------------------------- the study

@dataclasses.dataclass
class StudyResult:
    """Where the study went and where its headline numbers are (sheet, coordinate)."""

    path: Path
    cells: dict[str, tuple[str, str]]
    not_computable: list[tuple[str, str, str]]   # (sheet, coordinate, reason)
    recalc_report: Any = None
    timings: dict[str, float] = dataclasses.field(default_factory=dict)
    notes: list[str] = dataclasses.field(default_factory=list)
    problems: list[str] = dataclasses.field(default_factory=list)  # doubtful data cells, one line each
    cut_message: str | None = None  # why nobody passes the cut, when nobody does


class _Unavailable(TruebandError):
    """A value that depends on another that could not be computed."""

    code = "#N/A"


class _Builder:
    def __init__(self, data: StudyData):
        self.d = data
        self.s = data.setup
        self.grids: dict[str, Grid] = {}
        self.values: dict[str, Any] = {}
        self.cells: dict[str, tuple[str, str]] = {}
        self.not_computable: list[tuple[str, str, str]] = []
        self.notes: list[str] = list(data.notes)
        n = data.n
        self.first, self.last = 2, n + 1
        self.data_sheet = data.sheet
        self.scores = data.scores
        self.has_score = ~np.isnan(self.scores)
        self.guard_score = not self.has_score.all()
        self.criterion_list = None
        # with large data the expensive range functions are not called twice (here and in the
        # recalculation); cheap numpy checks find the cases they would refuse
        self.full_checks = (data.n * max(len(data.item_columns), len(data.rating_columns), 1) <= FULL_CHECK_CELLS
                            or _degenerate(data.items) or _degenerate(data.ratings))

    # -- helpers

    def grid(self, title: str) -> Grid:
        g = Grid(title)
        self.grids[title] = g
        return g

    def value(self, key: str):
        if key not in self.values or isinstance(self.values[key], Exception):
            raise _Unavailable(f"it needs {key.replace('_', ' ')}, which is not computable")
        return self.values[key]

    def put(self, g: Grid, row: int, col: int, formula: str, check: Callable | None = None, *,
            style: str | None = None, key: str | None = None):
        """Write a formula after checking, with the same function on the same data, that it is computable."""
        if check is not None:
            try:
                result = check()
            except UnknownFunctionError:
                result = None  # a function this installation lacks: the formula says which
            except TruebandError as exc:
                reason = exc.message
                g.set(row, col, NOT_COMPUTABLE + reason, "na")
                self.not_computable.append((g.title, f"{get_column_letter(col)}{row}", reason))
                if key:
                    self.values[key] = exc
                    self.cells[key] = (g.title, f"{get_column_letter(col)}{row}")
                return
            if key:
                self.values[key] = result
        g.set(row, col, formula, style)
        if key:
            self.cells[key] = (g.title, f"{get_column_letter(col)}{row}")

    def _cut_message(self, cut: float) -> str | None:
        """Why nobody passes the cut (above the highest possible score, or above every score), or None."""
        d = self.d
        s = self.scores[self.has_score]
        if not s.size or (s >= cut).any():
            return None
        again = "; set a lower cut score on the Setup sheet (or --cut)"
        if d.total is None and d.items is not None and d.item_scale is not None:
            lo, hi = d.item_scale
            k = d.items.shape[1]
            whence = "" if d.item_scale_given or d.binary_items else ", the range found in the data"
            if cut > k * hi:
                return (f"the cut score, {cut:g}, is above the highest possible score, {k * hi:g} ({k} items scored "
                        f"{lo:g} to {hi:g}{whence}), so nobody can pass{again}")
        return f"nobody reaches the cut score, {cut:g}: the highest score in the data is {s.max():g}{again}"

    def passes(self):
        """Raise the plain reason when nobody reaches the cut (the checks of cut-dependent figures call it)."""
        if self.cut_message:
            raise InsufficientDataError(self.cut_message)

    def heavy(self, check: Callable) -> Callable | None:
        """A check over a whole item or rating range: run it only while the data are small."""
        return check if self.full_checks else None

    def na(self, g: Grid, row: int, col: int, reason: str, key: str | None = None):
        g.set(row, col, NOT_COMPUTABLE + reason, "na")
        self.not_computable.append((g.title, f"{get_column_letter(col)}{row}", reason))
        if key:
            self.values[key] = InsufficientDataError(reason)
            self.cells[key] = (g.title, f"{get_column_letter(col)}{row}")

    def data_col(self, col0: int) -> str:
        return get_column_letter(col0 + 1)

    def data_range(self, cols0: list[int]) -> str:
        return range_ref(self.data_sheet, cols0[0] + 1, self.first, cols0[-1] + 1, self.last)

    def items_ref(self) -> str:
        """The item scores the statistics use: the data's item columns, or the Scored items sheet."""
        d = self.d
        if d.reverse_items:
            return range_ref(SCORED_SHEET, 1, self.first, len(d.item_columns), self.last)
        return self.data_range(d.item_columns)

    def scored_rows(self):
        """The Scored items rows: each item score as in the data, reverse-keyed ones as min + max − response."""
        d = self.d
        data_q = quote(d.sheet)
        lo, hi = (self.setup_ref("item_min"), self.setup_ref("item_max"))
        letters = [self.data_col(c) for c in d.item_columns]
        reverse = set(d.reverse_items)
        for i in range(d.n):
            r = i + 2
            yield [f'=IF(COUNT({data_q}!{x}{r})=1,{lo}+{hi}-{data_q}!{x}{r},"")' if j in reverse
                   else f'=IF(COUNT({data_q}!{x}{r})=1,{data_q}!{x}{r},"")' for j, x in enumerate(letters)]

    def setup_ref(self, field: str) -> str:
        return cell_ref(SETUP_SHEET, 2, self.setup_rows[field])

    def bands_range(self, letter: str) -> str:
        return f"{quote('Bands')}!${letter}${self.first}:${letter}${self.last}"

    # -- plan

    def plan(self):
        self.check_layout()
        self.setup_sheet()
        self.reliability_sheet()
        self.bands_sheet_plan()
        self.items_sheet()
        self.raters_sheet()
        self.validity_sheet()
        self.impact_sheet()
        self.utility_sheet()
        self.summary_sheet()
        self.notes_sheet()

    def check_layout(self):
        d = self.d
        for role, cols in (("item columns", d.item_columns), ("rating columns", d.rating_columns)):
            for a, b in zip(cols, cols[1:]):
                if b != a + 1:
                    raise SetupError(f"{role}: the columns must stand side by side on sheet '{d.sheet}'; "
                                     f"{d.header[b]!r} does not follow {d.header[a]!r}")
        taken = {t.lower() for t in ANALYSIS_SHEETS} | {SETUP_SHEET.lower(), SCORED_SHEET.lower()}
        if d.sheet.lower() in taken:
            raise SetupError(f"the data sheet is called '{d.sheet}', a name the study uses for one of its own "
                             f"sheets; rename it (e.g. 'Candidates')")

    # -- Setup: the settings used, numbers as inputs

    def setup_sheet(self):
        g = self.grid(SETUP_SHEET)
        g.widths.update({1: 24, 2: 30, 3: 70})
        for c, h in enumerate(("Setting", "Value", "What it means"), start=1):
            g.set(1, c, h, "header")
        s, d = self.s, self.d
        cut = s.cut
        if cut is None:
            cut = float(np.nanmedian(self.scores))
            self.notes.append(f"No cut score was given; the study uses the median score, {cut:g}. Set 'cut score' on "
                              f"the Setup sheet (or --cut) to study your own cut.")
        self.cut = cut
        self.cut_message = self._cut_message(cut)
        if self.cut_message:
            self.notes.append("Cut score: " + self.cut_message + ".")
        self.setup_rows: dict[str, int] = {}
        row = 2
        for key, (field, kind, meaning) in SETTINGS.items():
            value = getattr(s, field)
            if field == "data_sheet":
                value = d.sheet
            elif field == "cut":
                value = cut
            elif kind == "columns":
                value = ", ".join(value) if value else None
            elif field == "success" and value is None and d.criterion is not None and not np.isnan(d.criterion).all():
                value = f"=MEDIAN({self.bands_range('I')})"
                meaning += "; here the median criterion value (a formula)"
            style = "input" if kind == "number" else None
            g.set(row, 1, key)
            g.set(row, 2, value, style)
            g.set(row, 3, meaning, "wrap")
            self.setup_rows[field] = row
            row += 1
        g.para(row + 1, 1, "The numbers above are inputs: change them here and recalculate (trueband recalc) to "
                          "update the study. Changing a column name here does not re-map the study; run "
                          "trueband study again for that.")
        self.confidence_ref = g.ref(self.setup_rows["confidence"], 2)
        self.cut_ref = g.ref(self.setup_rows["cut"], 2)
        self.ryy_ref = g.ref(self.setup_rows["criterion_reliability"], 2)
        self.success_ref = g.ref(self.setup_rows["success"], 2)
        crit = d.criterion
        if s.success is not None:
            self.success = s.success
        elif crit is not None and not np.isnan(crit).all():
            self.success = float(np.nanmedian(crit))
        else:
            self.success = None

    # -- Reliability

    def reliability_sheet(self):
        g = self.grid("Reliability")
        g.widths.update({1: 58, 2: 14, 3: 14, 4: 60})
        d = self.d
        g.set(1, 1, f"Reliability of {self.s.test_name}", "title")
        conf = self.s.confidence
        score_rng = self.bands_range("C")
        self.score_range = score_rng
        x = d.items
        s = self.scores[self.has_score]
        g.set(3, 1, "People with a score")
        self.put(g, 3, 2, f"=COUNT({score_rng})", lambda: int(s.size), style="count", key="n_scored")
        g.set(4, 1, "Mean score")
        self.put(g, 4, 2, f"=AVERAGE({score_rng})", lambda: float(np.mean(s)), style="score", key="mean")
        g.set(5, 1, "Standard deviation of scores (n − 1)")

        def sd_check():
            if s.size < 2:
                raise InsufficientDataError("fewer than 2 people have a score")
            sd = float(np.std(s, ddof=1))
            if sd == 0:
                raise InsufficientDataError("every person has the same score")
            return sd

        self.put(g, 5, 2, f"=STDEV({score_rng})", sd_check, style="score", key="sd")
        self.sd_ref = g.ref(5, 2)
        row = 7
        g.set(row, 1, "Internal consistency", "heading")
        g.set(row, 2, "Estimate", "header")
        g.set(row, 3, f"{conf:.0%} CI lower", "header")
        g.set(row, 4, f"{conf:.0%} CI upper", "header")
        if x is not None:
            items_rng = self.items_ref()
            self.items_range = items_rng
            complete = ~np.isnan(x).any(axis=1)
            xc = x[complete]
            k = x.shape[1]
            g.set(8, 1, "Items")
            g.set(8, 2, k, "count")
            self.k_ref = g.ref(8, 2)
            g.set(9, 1, "People with every item answered (used by the item statistics)")
            self.put(g, 9, 2, f"=COUNTIF({self.bands_range('D')},{self.k_ref})", lambda: int(complete.sum()),
                     style="count", key="n_complete")
            n_ref = g.ref(9, 2)
            g.set(10, 1, "Coefficient alpha (Cronbach)")
            self.put(g, 10, 2, f"=CRONBACH_ALPHA({items_rng})", lambda: call("CRONBACH_ALPHA", x),
                     style="coef", key="alpha")
            for col, part in ((3, "lower"), (4, "upper")):
                self.put(g, 10, col, f'=ALPHA_CI(B10,{n_ref},{self.k_ref},"{part}",{self.confidence_ref})',
                         lambda part=part: call("ALPHA_CI", self.value("alpha"), int(complete.sum()), k, part, conf),
                         style="coef", key=f"alpha_{part}")
            binary = bool(np.isin(xc, (0.0, 1.0)).all()) if xc.size else False
            g.set(11, 1, "KR-20 (items scored 0/1)")
            if binary:
                # the alias: "KR20(" reads as the cell KR20 followed by a bracket in spreadsheet apps
                self.put(g, 11, 2, f"=KR_20({items_rng})", self.heavy(lambda: call("KR20", x)), style="coef",
                         key="kr20")
            else:
                self.na(g, 11, 2, "the items are not all scored 0/1", key="kr20")
            g.set(12, 1, "Split-half, odd against even items, Spearman–Brown stepped up")
            self.put(g, 12, 2, f'=SPLIT_HALF({items_rng},"odd-even")', self.heavy(lambda: call("SPLIT_HALF", x, "odd-even")),
                     style="coef", key="split_half")
            g.set(13, 1, "Omega total (McDonald), one-factor model")
            self.put(g, 13, 2, f"=OMEGA({items_rng})", self.heavy(lambda: call("OMEGA", x)), style="coef", key="omega")
            rel_formula, rel_key = "=B10", "alpha"
        else:
            self.items_range = None
            for r, label in ((10, "Coefficient alpha (Cronbach)"), (11, "KR-20"), (12, "Split-half"), (13, "Omega")):
                g.set(r, 1, label)
                self.na(g, r, 2, "no item columns were given (only a total), so internal consistency needs items",
                        key={10: "alpha", 11: "kr20", 12: "split_half", 13: "omega"}[r])
            rel_formula, rel_key = None, None
        g.set(15, 1, "Test–retest", "heading")
        g.set(16, 1, "People who sat the test twice")
        g.set(17, 1, "Test–retest correlation")
        if d.retest is not None:
            rt = d.retest
            both = self.has_score & ~np.isnan(rt)
            rt_rng = self.data_range([d.columns["retest"]])
            self.put(g, 16, 2, f"=SUMPRODUCT(ISNUMBER({score_rng})*ISNUMBER({rt_rng}))", lambda: int(both.sum()),
                     style="count", key="n_retest")

            def retest_r():
                if both.sum() < 3:
                    raise InsufficientDataError(f"fewer than 3 people have both a score and a retest score "
                                                f"(column {self.s.retest!r})")
                a, b = self.scores[both], rt[both]
                if np.std(a) == 0 or np.std(b) == 0:
                    raise InsufficientDataError("the scores or the retest scores do not vary")
                return float(np.corrcoef(a, b)[0, 1])

            self.put(g, 17, 2, f"=CORREL({score_rng},{rt_rng})", retest_r, style="coef", key="retest_r")
            for col, part in ((3, "lower"), (4, "upper")):
                self.put(g, 17, col, f'=R_CI(B17,B16,"{part}",{self.confidence_ref})',
                         lambda part=part: call("R_CI", self.value("retest_r"), int(both.sum()), part, conf),
                         style="coef", key=f"retest_{part}")
        else:
            self.na(g, 16, 2, "no retest column was given", key="n_retest")
            self.na(g, 17, 2, "no retest column was given", key="retest_r")
        g.set(19, 1, "Measurement error", "heading")
        g.set(20, 1, "Reliability used for the SEM, intervals and bands (edit to use another)")
        if rel_formula:
            self.put(g, 20, 2, rel_formula, lambda: self.value(rel_key), style="input_coef", key="reliability")
        elif d.retest is not None and isinstance(self.values.get("retest_r"), float):
            self.put(g, 20, 2, "=B17", lambda: self.value("retest_r"), style="input_coef", key="reliability")
        else:
            self.na(g, 20, 2, "no reliability estimate: give item columns or a retest column", key="reliability")
        self.rel_ref = g.ref(20, 2)
        g.set(21, 1, "Standard error of measurement (SEM)")
        self.put(g, 21, 2, f"=SEM(B5,B20)", lambda: call("SEM", self.value("sd"), self.value("reliability")),
                 style="coef", key="sem")
        g.set(22, 1, "Standard error of the difference between two scores (SED)")
        self.put(g, 22, 2, f"=SED(B5,B20)", lambda: call("SED", self.value("sd"), self.value("reliability")),
                 style="coef", key="sed")
        g.set(23, 1, f"Band width: scores closer than this are not reliably different ({conf:.0%})")
        self.put(g, 23, 2, f"=BAND_WIDTH(B5,B20,{self.confidence_ref})",
                 lambda: call("BAND_WIDTH", self.value("sd"), self.value("reliability"), conf),
                 style="coef", key="band_width")
        g.para(25, 1, "Alpha, KR-20, split-half and omega estimate internal consistency from one sitting; the SEM "
                     "and bands use the reliability in B20. Intervals: Feldt's F-based limits for alpha, Fisher's z "
                     "for the retest correlation.")

    # -- Bands (one row per person); written in streaming mode

    def bands_sheet_plan(self):
        d = self.d
        self.bands_header = ["Applicant", "Group", "Score", "Items answered" if d.items is not None else "Has a score",
                             "CI lower", "CI upper", "Band", "At or above cut (1 = yes)"]
        if d.criterion is not None:
            self.bands_header += ["Criterion", "Score of people with a criterion value"]
        # the study's reading of two label columns, as numbers the counts can match exactly (a
        # spreadsheet's COUNTIF would treat a label such as "<40" or "A*" as a condition)
        self.group_numbers = {name: k + 1 for k, name in enumerate(d.group_tally.names)} if d.group_tally else {}
        self.group_col = self.hired_col = None
        if d.group_tally is not None:
            self.bands_header.append("Group number (as counted on Impact)")
            self.group_col = get_column_letter(len(self.bands_header))
        if d.hired is not None:
            self.bands_header.append("Hired (1 = yes, as read from the hired column)")
            self.hired_col = get_column_letter(len(self.bands_header))
        can_band = isinstance(self.values.get("sem"), float)
        self.bands_can = can_band
        if not can_band:
            self.notes.append("Confidence intervals and bands are not computable: " + (
                self.values.get("sem").message if isinstance(self.values.get("sem"), TruebandError) else "no SEM"))
        self.bands_band_check = None
        if can_band:
            try:
                call("SCORE_BAND", float(self.scores[self.has_score][0]), self.scores[self.has_score],
                     self.value("sd"), self.value("reliability"), self.s.confidence)
            except UnknownFunctionError:
                pass
            except TruebandError as exc:
                self.bands_can = False
                self.notes.append(f"Bands are not computable: {exc.message}")

    def bands_rows(self):
        """The Bands sheet's rows below its header: formulas as text starting with '='."""
        d, s = self.d, self.s
        data_q = quote(d.sheet)
        id_col = d.columns.get("id")
        grp_col = d.columns.get("group")
        hired_codes = d.hired_codes
        if d.items is not None:
            a, b = self.data_col(d.item_columns[0]), self.data_col(d.item_columns[-1])
            if d.reverse_items:  # the scores after reverse keying
                a, b = "A", get_column_letter(len(d.item_columns))
        else:
            t = self.data_col(d.columns["total"])
        crit = self.data_col(d.columns["criterion"]) if d.criterion is not None else None
        sd, rel, conf, cut = self.sd_ref, self.rel_ref, self.confidence_ref, self.cut_ref
        last = self.last
        guard = self.guard_score
        na_band = NOT_COMPUTABLE + "no SEM (see Reliability)"
        for i in range(d.n):
            r = i + 2
            row: list[Any] = []
            row.append(f"={data_q}!{self.data_col(id_col)}{r}" if id_col is not None else d.ids[i])
            # the group as counted: labels differing only in case or spacing are one group (see Impact)
            row.append(d.groups[i] if grp_col is not None else None)
            if d.items is not None:
                src = quote(SCORED_SHEET) if d.reverse_items else data_q
                row.append(f'=IF(D{r}=0,"",SUM({src}!{a}{r}:{b}{r}))' if guard else f"=SUM({src}!{a}{r}:{b}{r})")
                row.append(f"=COUNT({src}!{a}{r}:{b}{r})")
            else:
                row.append(f'=IF(COUNT({data_q}!{t}{r})=1,{data_q}!{t}{r},"")' if guard else f"={data_q}!{t}{r}")
                row.append(f"=COUNT({data_q}!{t}{r})")
            if self.bands_can:
                lo = f'SCORE_CI(C{r},{sd},{rel},"lower",{conf})'
                hi = f'SCORE_CI(C{r},{sd},{rel},"upper",{conf})'
                band = f"SCORE_BAND(C{r},$C$2:$C${last},{sd},{rel},{conf})"
                if guard:
                    lo, hi, band = (f'IF(COUNT(C{r})=0,"",{x})' for x in (lo, hi, band))
                row += ["=" + lo, "=" + hi, "=" + band]
            else:
                row += [na_band, None, None]
            row.append(f'=IF(COUNT(C{r})=0,"",IF(C{r}>={cut},1,0))' if guard else f"=IF(C{r}>={cut},1,0)")
            if crit is not None:
                # COUNT(x)=1 rather than ISNUMBER(x): the same test, and the recalculation computes it
                # for the whole column at once
                row.append(f'=IF(COUNT({data_q}!{crit}{r})=1,{data_q}!{crit}{r},"")')
                row.append(f'=IF(COUNT(C{r},I{r})=2,C{r},"")')
            if self.group_col is not None:
                row.append(self.group_numbers.get(d.groups[i]))
            if hired_codes is not None:
                row.append(None if hired_codes[i] is None else int(hired_codes[i]))
            yield row

    # -- Items

    def items_sheet(self):
        g = self.grid("Items")
        g.widths.update({1: 18, 2: 16, 3: 14, 4: 16, 5: 16, 6: 34})
        d = self.d
        g.set(1, 1, "Item analysis", "title")
        if d.items is None:
            self.na(g, 3, 1, "no item columns were given")
            return
        x = d.items
        rng = self.items_range
        binary = d.binary_items
        g.set(2, 1, "Flag an item when its corrected item–total correlation is below", "label")
        g.set(2, 6, 0.2, "input_coef")
        if binary:
            g.set(3, 1, "or fewer than this proportion answer it correctly", "label")
            g.set(3, 6, 0.2, "input_coef")
            g.set(4, 1, "or more than this proportion answer it correctly", "label")
            g.set(4, 6, 0.9, "input_coef")
            mean_head = "Difficulty (proportion correct)"
        else:
            lo, hi = d.item_scale
            g.set(3, 1, "or its mean lies within this share of the scale's range from either end", "label")
            g.set(3, 6, 0.1, "input_coef")
            g.set(4, 1, "or its standard deviation is below (scale points)", "label")
            g.set(4, 6, round((hi - lo) / 8, 4), "input_coef")
            given = "from Setup" if d.item_scale_given else "the lowest and highest response in the data"
            g.set(5, 1, f"Item scale: lowest and highest response ({given})", "label")
            if d.item_scale_given:
                g.set(5, 6, f"={self.setup_ref('item_min')}", "score")
                g.set(5, 7, f"={self.setup_ref('item_max')}", "score")
            else:
                g.set(5, 6, lo, "input")
                g.set(5, 7, hi, "input")
            mean_head = "Mean item score"
        head = ("Item", mean_head, "Standard deviation", "Corrected item–total r", "Alpha if deleted", "Flag")
        for c, h in enumerate(head, start=1):
            g.set(6, c, h, "header")
        alpha_ref = cell_ref("Reliability", 2, 10)
        first = 7
        complete = x[~np.isnan(x).any(axis=1)]
        if complete.shape[0] >= 2:
            item_var = complete.var(axis=0)
            rest_var = (complete.sum(axis=1, keepdims=True) - complete).var(axis=0)
            suspect = (item_var <= 1e-12 * max(1.0, float(item_var.max()))) | (rest_var <= 1e-12)
        else:
            suspect = np.ones(x.shape[1], dtype=bool)
        reverse = set(d.reverse_items)
        for j in range(x.shape[1]):
            r = first + j
            name = d.header[d.item_columns[j]]
            g.set(r, 1, name + (" (reversed)" if j in reverse else ""))
            # with large data only the items numpy finds degenerate are checked by calling the function
            check = self.full_checks or bool(suspect[j])
            for c, fn, part in ((2, "ITEM_DIFFICULTY", "difficulty"), (3, "ITEM_SD", "sd"),
                                (4, "ITEM_TOTAL", "total"), (5, "ALPHA_IF_DELETED", "aid")):
                self.put(g, r, c, f"={fn}({rng},{j + 1})", (lambda j=j, fn=fn: call(fn, x, j + 1)) if check else None,
                         style="coef", key=f"item{j + 1}_{part}")
            ok = not any(isinstance(self.values.get(f"item{j + 1}_{p}"), Exception)
                         for p in ("difficulty", "sd", "total", "aid"))
            if ok and isinstance(self.values.get("alpha"), float):
                last_flag = f'IF(E{r}>{alpha_ref},"alpha rises without it","")'
                if binary:
                    g.set(r, 6, f'=IF(D{r}<$F$2,"weak discrimination",IF(B{r}<$F$3,"very hard",'
                                f'IF(B{r}>$F$4,"very easy",{last_flag})))')
                else:
                    span = "($G$5-$F$5)"
                    g.set(r, 6, f'=IF(D{r}<$F$2,"weak discrimination",IF((B{r}-$F$5)/{span}<$F$3,'
                                f'"mean near the bottom of the scale",IF(($G$5-B{r})/{span}<$F$3,'
                                f'"mean near the top of the scale",IF(C{r}<$F$4,"little spread",{last_flag}))))')
            else:
                g.set(r, 6, "see the statistics to the left", "na")
        self.item_rows = (first, first + x.shape[1] - 1)
        scale = (0.0, 1.0) if binary else d.item_scale
        g.charts.append((charts.item_map(charts.area("Items", "B", first, "B", self.item_rows[1]),
                                         charts.area("Items", "D", first, "D", self.item_rows[1]),
                                         binary=binary, scale=scale),
                         "H6"))  # beside the table: below it, a page break would cut it in two
        if binary:
            text = ("Difficulty is the proportion answering the item correctly; the corrected item–total r "
                    "correlates the item with the total of the other items.")
        else:
            text = ("The items are rating-scale (polytomous) items: the mean and standard deviation describe where "
                    "the answers lie on the scale and how much they spread; the corrected item–total r correlates "
                    "the item with the total of the other items.")
        if reverse:
            text += (f" Reverse-keyed items are scored minimum + maximum − response (scale {d.item_scale[0]:g} to "
                     f"{d.item_scale[1]:g}; the scores are on the '{SCORED_SHEET}' sheet) before every statistic.")
        g.para(first + x.shape[1] + 1, 1, text + " Flags are prompts for review by a test developer, not verdicts; "
                                                 "the thresholds above are common practice and can be edited.")

    # -- Raters

    def raters_sheet(self):
        g = self.grid("Raters")
        g.widths.update({1: 52, 2: 14, 3: 14, 4: 14, 5: 14})
        d = self.d
        g.set(1, 1, "Rater agreement (interview ratings)", "title")
        if d.ratings is None:
            self.na(g, 3, 1, "no rating columns were given", key="icc_agreement_average")
            return
        y = d.ratings
        m = y.shape[1]
        rng = self.data_range(d.rating_columns)
        complete = ~np.isnan(y).any(axis=1)
        g.set(3, 1, "Raters")
        g.set(3, 2, m, "count")
        g.set(4, 1, "People rated by every rater (used by the ICC)")
        cols = "*".join(f"ISNUMBER({self.data_range([c])})" for c in d.rating_columns)
        self.put(g, 4, 2, f"=SUMPRODUCT({cols})", lambda: int(complete.sum()), style="count", key="n_rated")
        for j, c in enumerate(d.rating_columns):
            g.set(5 + j, 1, f"Mean rating, {d.header[c]}")
            col_rng = self.data_range([c])
            self.put(g, 5 + j, 2, f"=AVERAGE({col_rng})", lambda j=j: float(np.nanmean(y[:, j])) if
                     (~np.isnan(y[:, j])).any() else _raise(f"rater column {d.header[c]!r} is blank"), style="coef")
        row = 6 + m
        g.set(row, 1, "Intraclass correlation (McGraw & Wong, 1996)", "heading")
        for c, h in enumerate(("Estimate", f"{self.s.confidence:.0%} CI lower", f"{self.s.confidence:.0%} CI upper",
                               "p (ICC = 0)"), start=2):
            g.set(row, c, h, "header")
        forms = (("oneway", "single", "One-way, single rater — ICC(1)"),
                 ("agreement", "single", "Two-way, absolute agreement, single rater — ICC(A,1)"),
                 ("consistency", "single", "Two-way, consistency, single rater — ICC(C,1)"),
                 ("oneway", "average", f"One-way, mean of {m} raters — ICC(k)"),
                 ("agreement", "average", f"Two-way, absolute agreement, mean of {m} raters — ICC(A,k)"),
                 ("consistency", "average", f"Two-way, consistency, mean of {m} raters — ICC(C,k)"))
        conf_ref = self.confidence_ref
        for i, (model, unit, label) in enumerate(forms):
            r = row + 1 + i
            g.set(r, 1, label)
            for c, part in ((2, "estimate"), (3, "lower"), (4, "upper"), (5, "p")):
                check = (lambda model=model, unit=unit, part=part: call("ICC", y, model, unit, part,
                                                                         self.s.confidence))
                self.put(g, r, c, f'=ICC({rng},"{model}","{unit}","{part}",{conf_ref})',
                         check if part == "estimate" else self.heavy(check),
                         style="p" if part == "p" else "coef", key=f"icc_{model}_{unit}_{part}")
        for model, unit, _ in forms:
            self.values[f"icc_{model}_{unit}"] = self.values.get(f"icc_{model}_{unit}_estimate")
            if f"icc_{model}_{unit}_estimate" in self.cells:
                self.cells[f"icc_{model}_{unit}"] = self.cells[f"icc_{model}_{unit}_estimate"]
        row += 8
        finite = y[~np.isnan(y)]
        ordinal = bool(finite.size and np.all(finite == np.round(finite)) and np.unique(finite).size <= 10)
        g.set(row, 1, "Agreement on the rating scale", "heading")
        g.set(row, 2, "Estimate", "header")
        row += 1
        levels = ("ordinal", "interval") if ordinal else ("interval",)
        for level in levels:
            g.set(row, 1, f"Krippendorff's alpha, {level} (uses every rating, missing ones allowed)")
            self.put(g, row, 2, f'=KRIPPENDORFF_ALPHA({rng},"{level}")',
                     self.heavy(lambda level=level: call("KRIPPENDORFF_ALPHA", y, level)), style="coef",
                     key=f"krippendorff_{level}")
            row += 1
        if ordinal:
            for a in range(m):
                for b in range(a + 1, m):
                    ra, rb = self.data_range([d.rating_columns[a]]), self.data_range([d.rating_columns[b]])
                    names = f"{d.header[d.rating_columns[a]]} and {d.header[d.rating_columns[b]]}"
                    for weights, what in (("none", "Cohen's kappa"), ("quadratic", "Quadratic-weighted kappa")):
                        g.set(row, 1, f"{what}, {names}")
                        self.put(g, row, 2, f'=COHEN_KAPPA({ra},{rb},"{weights}")',
                                 self.heavy(lambda a=a, b=b, weights=weights:
                                            call("COHEN_KAPPA", y[:, [a]], y[:, [b]], weights)),
                                 style="coef", key=f"kappa_{weights}_{a + 1}_{b + 1}")
                        row += 1
        else:
            g.set(row, 1, "Cohen's kappa is left out: the ratings are not on a short whole-number scale")
            row += 1
        g.para(row + 1, 1, "The ICC asks whether raters order and place people alike (agreement counts rater leniency "
                          "as error, consistency does not); kappa and Krippendorff's alpha ask whether raters give "
                          "the same scale points. Use the average-rater forms when the interview score is the mean "
                          "of the panel.")

    # -- Validity

    def validity_sheet(self):
        g = self.grid("Validity")
        g.widths.update({1: 62, 2: 14, 3: 14, 4: 14, 5: 14, 6: 16})
        d, s = self.d, self.s
        g.set(1, 1, "Criterion-related validity", "title")
        if d.criterion is None:
            self.na(g, 3, 1, "no criterion column was given", key="r")
            return
        crit = d.criterion
        both = self.has_score & ~np.isnan(crit)
        n = int(both.sum())
        S, C = self.scores, crit
        crit_rng, sh_rng, score_rng = self.bands_range("I"), self.bands_range("J"), self.score_range
        g.set(3, 1, "People with a test score and a criterion value")
        self.put(g, 3, 2, f"=COUNT({sh_rng})", lambda: n, style="count", key="n_criterion")
        if d.hired is not None:
            g.set(4, 1, "People hired (hired column)")
            self.put(g, 4, 2, f"=SUM({self.bands_range(self.hired_col)})", lambda: int(d.hired.sum()), style="count")
            g.set(4, 3, f"({HIRED_CODINGS} in column {self.s.hired!r}, read into Bands column "
                        f"{self.hired_col})")

        def r_check():
            if n < 3:
                raise InsufficientDataError(
                    f"fewer than 3 people have both a score and a criterion value (column {s.criterion!r} on sheet "
                    f"'{d.sheet}'{' is blank for everyone' if np.isnan(crit).all() else ''})")
            a, b = S[both], C[both]
            if np.std(a) == 0:
                raise InsufficientDataError("the people with a criterion value all have the same test score")
            if np.std(b) == 0:
                raise InsufficientDataError("every criterion value is the same")
            return float(np.corrcoef(a, b)[0, 1])

        conf = s.confidence
        g.set(5, 1, "Observed validity: correlation of score and criterion (r)")
        self.put(g, 5, 2, f"=CORREL({sh_rng},{crit_rng})", r_check, style="coef", key="r")
        g.set(5, 3, f"{conf:.0%} CI lower", "header")
        g.set(5, 4, f"{conf:.0%} CI upper", "header")
        g.set(5, 5, "p (two-sided)", "header")
        for col, part in ((3, "lower"), (4, "upper")):
            self.put(g, 6, col, f'=R_CI(B5,B3,"{part}",{self.confidence_ref})',
                     lambda part=part: call("R_CI", self.value("r"), n, part, conf), style="coef", key=f"r_{part}")
        self.put(g, 6, 5, "=R_PVALUE(B5,B3)", lambda: call("R_PVALUE", self.value("r"), n), style="p", key="r_p")
        g.set(6, 1, "  interval (Fisher z) and p (t test of r = 0)")
        g.set(8, 1, "Inputs to the corrections", "heading")
        g.set(9, 1, "Criterion reliability (from Setup)")
        g.set(9, 2, f"={self.ryy_ref}", "coef")
        self.values["ryy"] = s.criterion_reliability
        g.set(10, 1, "Test reliability among all applicants (from Reliability)")
        self.put(g, 10, 2, f"={self.rel_ref}", lambda: self.value("reliability"), style="coef", key="rxx")
        g.set(11, 1, "SD of scores, all applicants")
        self.put(g, 11, 2, f"=STDEV({score_rng})", lambda: self.value("sd"), style="coef", key="sd_all")

        def sd_h():
            if n < 2:
                raise InsufficientDataError("fewer than 2 people have a criterion value")
            return float(np.std(S[both], ddof=1))

        g.set(12, 1, "SD of scores, people with a criterion value (restricted group)")
        self.put(g, 12, 2, f"=STDEV({sh_rng})", sd_h, style="coef", key="sd_restricted")
        g.set(13, 1, "Ratio of the two SDs, u")
        self.put(g, 13, 2, "=B12/B11", lambda: self.value("sd_restricted") / self.value("sd_all"), style="coef",
                 key="u")
        g.set(15, 1, "Corrected validity", "heading")
        ryy = s.criterion_reliability
        g.set(16, 1, "Corrected for criterion unreliability (Spearman)")
        self.put(g, 16, 2, "=DISATTENUATE(B5,1,B9)", lambda: call("DISATTENUATE", self.value("r"), 1, ryy),
                 style="coef", key="r_disattenuated")
        g.set(17, 1, "Corrected for direct range restriction on the test (Thorndike Case II)")
        self.put(g, 17, 2, "=RANGE_CORRECT(B5,B12,B11)",
                 lambda: call("RANGE_CORRECT", self.value("r"), self.value("sd_restricted"), self.value("sd_all")),
                 style="coef", key="r_range")
        g.set(18, 1, "Operational validity: criterion unreliability, then direct range restriction")
        self.put(g, 18, 2, "=OPERATIONAL_VALIDITY(B5,B9,B12,B11)",
                 lambda: call("OPERATIONAL_VALIDITY", self.value("r"), ryy, self.value("sd_restricted"),
                              self.value("sd_all")), style="coef", key="operational")
        g.set(19, 1, "Operational validity under indirect range restriction (Hunter, Schmidt & Le, 2006)")
        self.put(g, 19, 2, "=RANGE_CORRECT_INDIRECT(B5,B13,B10,B9)",
                 lambda: call("RANGE_CORRECT_INDIRECT", self.value("r"), self.value("u"), self.value("rxx"), ryy),
                 style="coef", key="operational_indirect")
        g.set(20, 1, "Maximum possible observed validity, √(test reliability × criterion reliability)")
        self.put(g, 20, 2, "=MAX_VALIDITY(B10,B9)", lambda: call("MAX_VALIDITY", self.value("rxx"), ryy),
                 style="coef", key="max_validity")
        g.set(21, 1, "Fitted line: criterion = intercept + slope × score")
        g.set(21, 3, "slope", "header")
        g.set(21, 5, "intercept", "header")
        def line(part):
            self.value("r")
            slope, intercept = np.polyfit(S[both], C[both], 1)
            return float(slope if part == "slope" else intercept)

        self.put(g, 22, 3, f"=SLOPE({crit_rng},{sh_rng})", lambda: line("slope"), style="coef", key="slope")
        self.put(g, 22, 5, f"=INTERCEPT({crit_rng},{sh_rng})", lambda: line("intercept"), style="coef",
                 key="intercept")
        # expectancy table by score quintile of all applicants
        row = 24
        g.set(row, 1, "Expectancy table: criterion by score fifth (quintile) of all applicants", "heading")
        g.set(row + 1, 1, "Success means a criterion value at or above (Setup: success threshold)")
        g.set(row + 1, 2, f"={self.success_ref}", "coef")
        head = ("Score fifth", "Scores from", "up to (below)", "People with a criterion value", "Mean criterion",
                "Share successful")
        for c, h in enumerate(head, start=1):
            g.set(row + 2, c, h, "header")
        self.expectancy_rows = (row + 3, row + 7)
        have_r = isinstance(self.values.get("r"), float)
        # the people with a criterion value, listed in P:Q (the chart's data): ranges of numbers only, so
        # the conditional counts below never compare text with numbers
        listed = np.flatnonzero(both) + 2
        end = 2 + len(listed)
        ps, pc = f"$P$3:$P${end}", f"$Q$3:$Q${end}"
        self.criterion_list = (f"{quote('Validity')}!{ps}", f"{quote('Validity')}!{pc}") if have_r else None
        for q in range(5):
            r = row + 3 + q
            g.set(r, 1, ("lowest", "second", "middle", "fourth", "highest")[q] + " fifth")
            if not have_r:
                self.na(g, r, 2, "validity is not computable (see B5)")
                continue
            g.set(r, 2, f"=MIN({score_rng})" if q == 0 else f"=PERCENTILE({score_rng},{q / 5})", "score")
            if q < 4:
                g.set(r, 3, f"=PERCENTILE({score_rng},{(q + 1) / 5})", "score")
                cond = f'{ps},">="&B{r},{ps},"<"&C{r}'
            else:
                g.set(r, 3, f"=MAX({score_rng})", "score")
                cond = f'{ps},">="&B{r},{ps},"<="&C{r}'
            g.set(r, 4, f"=COUNTIFS({cond})", "count")
            g.set(r, 5, f'=IF(D{r}=0,"none",AVERAGEIFS({pc},{cond}))', "coef")
            g.set(r, 6, f'=IF(D{r}=0,"none",COUNTIFS({cond},{pc},">="&$B${row + 1})/D{r})', "pct")
        g.para(row + 9, 1, "Fifths are cut at the 20th, 40th, 60th and 80th percentiles of all applicants' scores; a "
                          "score on a cut point belongs to the higher fifth. Rising shares down the table are what a "
                          "valid test shows. Validity figures are statistical indicators, not legal findings.")
        # scatter data: the people with a criterion value
        if have_r:
            rows = listed
            g.set(2, 15, "Row on Bands", "header")
            g.set(2, 16, "Score", "header")
            g.set(2, 17, "Criterion", "header")
            # one formula filled down (the row number beside it differs), not one formula per person
            bands_c = f"{quote('Bands')}!$C$1:$C${self.last}"
            bands_i = f"{quote('Bands')}!$I$1:$I${self.last}"
            for k, r in enumerate(rows):
                g.set(3 + k, 15, int(r))
                g.set(3 + k, 16, f"=INDEX({bands_c},O{3 + k})")
                g.set(3 + k, 17, f"=INDEX({bands_i},O{3 + k})")
            g.charts.append((charts.score_vs_criterion(charts.area("Validity", "P", 3, "P", end),
                                                       charts.area("Validity", "Q", 3, "Q", end),
                                                       x_title="Test score", y_title=s.criterion or "Criterion"),
                             "A36"))
            g.print_area = "A1:F56"  # the chart's data (columns P:Q) is not printed

    # -- Impact

    def impact_sheet(self):
        g = self.grid("Impact")
        g.widths.update({1: 22, 2: 13, 3: 13, 4: 13, 5: 15, 6: 15, 7: 11, 8: 11, 9: 13, 10: 16})
        d, s = self.d, self.s
        g.set(1, 1, "Adverse impact at the cut score", "title")
        cut_row = 2 + g.para(2, 1, CAUTION, "caution")
        self.impact_cut = f"$B${cut_row}"
        g.set(cut_row, 1, "Cut score (from Setup)")
        g.set(cut_row, 2, f"={self.cut_ref}", "score")
        g.set(cut_row + 1, 1, "Selected = score at or above the cut")
        S = self.scores
        cut = self.cut
        sel_all = self.has_score & (S >= cut)
        self.impact_rows = None
        row = cut_row + 3
        groups = list(d.group_tally.names) if d.group_tally is not None else []
        grp_ok = True
        if "group" not in d.columns:
            self.na(g, row, 1, "no group column was given", key="min_ratio")
            grp_ok = False
        elif len(groups) < 2:
            only = f"only one group ({groups[0]!r})" if groups else "no group labels"
            self.na(g, row, 1, f"column {s.group!r} on sheet '{d.sheet}' holds {only}; impact compares groups",
                    key="min_ratio")
            grp_ok = False
        if grp_ok:
            self._impact_table(g, row, groups, sel_all, chart_row=row + len(groups) + 10)
            self._distribution(g, row + len(groups) + 10, col="E")  # beside the rates chart, on the same page
        else:
            self._distribution(g, row + 3)

    def _impact_table(self, g: Grid, row: int, groups: list[str], sel_all, chart_row: int):
        d, s = self.d, self.s
        from trueband.funcs.impact import tally_groups

        # people with a score, counted by group as the Python functions count them (labels merged as
        # funcs.impact.group_key does); the sheet's COUNTIFS count the same rows by group number
        scored = np.flatnonzero(self.has_score)
        tally = tally_groups([d.groups[i] for i in scored], [bool(sel_all[i]) for i in scored])
        counts = {name: (tally.selected.get(name, 0), tally.applicants.get(name, 0)) for name in groups}
        rates = {k: (sel / app if app else 0.0) for k, (sel, app) in counts.items()}
        ref = s.reference_group
        if ref is not None:
            ref = d.group_tally.name(ref)
            if ref is None:
                raise SetupError(f"reference group: no group {s.reference_group!r} in column {s.group!r} on sheet "
                                 f"'{d.sheet}' (groups: {', '.join(groups)})")
        if ref is None:
            ref = max(groups, key=lambda k: (rates[k], counts[k][1]))
            self.notes.append(f"Reference group for impact: {ref}, the group with the highest selection rate at the cut "
                              f"when the study was built.")
        self.reference = ref
        g.set(row - 1, 1, "Reference group (edit to compare with another)")
        g.set(row - 1, 3, ref, "input")
        ref_name = f"$C${row - 1}"
        head = ("Group", "Applicants", "Selected", "Selection rate", "Impact ratio (rate ÷ reference rate)",
                "Below four-fifths?", "z", "Fisher exact p", "Shortfall (selections to reach 4/5)",
                "Four-fifths of the highest rate")
        for c, h in enumerate(head, start=1):
            g.set(row, c, h, "header")
        first, last = row + 1, row + len(groups)
        self.impact_rows = (first, last)
        grp_rng, sel_rng = self.bands_range(self.group_col), self.bands_range("H")
        rs, ra = counts[ref]
        ref_sel = f"INDEX($C${first}:$C${last},MATCH({ref_name},$A${first}:$A${last},0))"
        ref_app = f"INDEX($B${first}:$B${last},MATCH({ref_name},$A${first}:$A${last},0))"
        for i, name in enumerate(groups):
            r = first + i
            fs, fa = counts[name]
            g.set(r, 1, name)
            number = self.group_numbers[name]
            g.set(r, 2, f'=COUNTIFS({grp_rng},{number},{sel_rng},">=0")', "count")
            g.set(r, 3, f"=COUNTIFS({grp_rng},{number},{sel_rng},1)", "count")
            self.put(g, r, 4, f"=SELECTION_RATE(C{r},B{r})", lambda fs=fs, fa=fa: call("SELECTION_RATE", fs, fa),
                     style="coef", key=f"rate_{name}")
            g.set(r, 10, f"=0.8*MAX($D${first}:$D${last})", "coef")
            if name == ref:
                for c in range(5, 10):
                    g.set(r, c, "reference group" if c == 5 else "")
                continue
            for c, fn, style in ((5, "IMPACT_RATIO", "coef"), (6, "FOUR_FIFTHS", None), (7, "IMPACT_Z", "coef"),
                                 (8, "IMPACT_FISHER", "p"), (9, "IMPACT_SHORTFALL", "count")):
                text = f"{fn}(C{r},B{r},{ref_sel},{ref_app})"
                if fn == "FOUR_FIFTHS":
                    # shown as yes/no: spreadsheet apps show a stored TRUE/FALSE of a function they do not
                    # know as an error, while stored text shows as it is
                    text = f'IF({text},"yes","no")'

                def check(fn=fn, fs=fs, fa=fa):
                    if fn != "IMPACT_FISHER":  # Fisher's p is defined (1) when nobody passes; the rest are not
                        self.passes()
                    return call(fn, fs, fa, rs, ra)

                self.put(g, r, c, "=" + text, check, style=style,
                         key=f"{fn.lower()}_{name}")
        ratio_rng = f"E{first}:E{last}"
        g.set(last + 2, 1, "Lowest impact ratio")
        ratios = [self.values.get(f"impact_ratio_{k}") for k in groups if k != ref]
        if all(isinstance(x, float) for x in ratios):
            self.put(g, last + 2, 5, f"=MIN({ratio_rng})", lambda: min(ratios), style="coef", key="min_ratio")
            g.set(last + 3, 1, "Groups below four-fifths")
            g.set(last + 3, 5, f'=COUNTIF(F{first}:F{last},"yes")', "count")
            self.cells["n_below"] = ("Impact", f"E{last + 3}")
        else:
            self.na(g, last + 2, 5, self.cut_message or "an impact ratio is not computable (see the table)",
                    key="min_ratio")
        at = last + 5
        at += g.para(at, 1, f"Applicants and Selected count the rows of the Bands sheet by group number (Bands column "
                            f"{self.group_col}: group 1 is the first row of this table, and so on); people with a "
                            f"blank group are in no group.", width=150)
        merged = [f"{', '.join(repr(x) for x in raw)} counted as {name!r}"
                  for name, raw in d.group_tally.merged.items()]
        if merged:
            at += g.para(at, 1, "Labels that differ only in letter case or spacing are one group: "
                                + "; ".join(merged) + ".", width=150)
        if d.group_tally.blank:
            g.para(at, 1, f"{d.group_tally.blank} row(s) have a blank group (listed on Notes).", width=150)
        g.charts.append((charts.selection_rates(charts.area("Impact", "A", first, "A", last),
                                                charts.area("Impact", "D", row, "D", last),
                                                charts.area("Impact", "J", row, "J", last)), f"A{chart_row}"))
        g.charts[-1][0].width = 11.5

    def _distribution(self, g: Grid, chart_row: int, col: str = "A"):
        """The score distribution table (columns L:P, not printed) and its chart at ``chart_row``."""
        S = self.scores[self.has_score]
        row, c0 = 5, 12
        g.set(row, c0, "Score distribution (the data of the chart)", "heading")
        for c, h in enumerate(("Score", "from", "below (upper end, not included)", "Below the cut",
                               "At or above the cut"), start=c0):
            g.set(row + 1, c, h, "header")
        for c in range(c0, c0 + 5):
            g.widths[c] = 12
        lo, hi = float(S.min()), float(S.max())
        integer = bool(np.all(S == np.round(S))) and hi - lo <= 120
        if integer:
            edges = [(v, v + 1.0, f"{v:g}") for v in np.arange(lo, hi + 1)]
        else:
            width = (hi - lo) / 25 if hi > lo else 1.0
            edges = [(lo + j * width, lo + (j + 1) * width + (width * 1e-9 if j == 24 else 0.0),
                      f"{lo + j * width:.4g}–{lo + (j + 1) * width:.4g}") for j in range(25)]
        score_rng, cut = self.score_range, self.impact_cut
        first = row + 2
        L, M, N, O, P = (get_column_letter(c0 + k) for k in range(5))
        Q = get_column_letter(c0 + 5)
        g.set(row + 1, c0 + 5, "Scoring at least 'from'", "header")
        g.set(row - 1, c0, "Applicants at or above the cut")
        g.set(row - 1, c0 + 3, f'=COUNTIF({score_rng},">="&{cut})', "count")
        at_cut = f"${O}${row - 1}"
        # one count per bin edge (counts of "at least x"); a bin is the difference of two: one pass
        # over the scores per edge instead of four
        for j, (a, b, label) in enumerate(edges):
            r = first + j
            nxt = f"{Q}{r + 1}" if j < len(edges) - 1 else "0"
            g.set(r, c0, label)
            g.set(r, c0 + 1, float(a))
            g.set(r, c0 + 2, float(b))
            g.set(r, c0 + 3, f"=IF({N}{r}<={cut},{Q}{r}-{nxt},IF({M}{r}>={cut},0,{Q}{r}-{at_cut}))", "count")
            g.set(r, c0 + 4, f"={Q}{r}-{nxt}-{O}{r}", "count")
            g.set(r, c0 + 5, f'=COUNTIF({score_rng},">="&{M}{r})', "count")
        last = first + len(edges) - 1
        self.distribution_rows = (first, last)
        g.charts.append((charts.score_distribution(charts.area("Impact", L, first, L, last),
                                                   charts.area("Impact", O, row + 1, O, last),
                                                   charts.area("Impact", P, row + 1, P, last),
                                                   cut_text=f"cut at {self.cut:g}"), f"{col}{chart_row}"))
        g.charts[-1][0].width = 14
        g.print_area = f"A1:J{chart_row + 21}"

    # -- Utility

    def utility_sheet(self):
        g = self.grid("Utility")
        g.widths.update({1: 70, 2: 16})
        d, s = self.d, self.s
        g.set(1, 1, "Selection utility", "title")
        g.para(2, 1, "Yellow cells are inputs: replace them with your own figures.")
        g.set(4, 1, "Validity used (operational validity from the Validity sheet)")
        v_key = "operational" if isinstance(self.values.get("operational"), float) else "r"
        if isinstance(self.values.get(v_key), float):
            src = "B18" if v_key == "operational" else "B5"
            self.put(g, 4, 2, f"=Validity!{src}", lambda: self.value(v_key), style="input_coef", key="validity_used")
        else:
            self.na(g, 4, 2, "no validity estimate (see the Validity sheet)", key="validity_used")
        S = self.scores
        sel_rng = self.bands_range("H")
        sr = float((S[self.has_score] >= self.cut).mean())
        g.set(5, 1, "Selection ratio: share of applicants at or above the cut")
        self.put(g, 5, 2, f"=COUNTIF({sel_rng},1)/COUNT({sel_rng})", lambda: sr, style="coef", key="selection_ratio")
        g.set(6, 1, "Base rate: share of people with a criterion value who reach the success threshold")
        if d.criterion is not None and self.success is not None and (~np.isnan(d.criterion)).any():
            c = d.criterion[~np.isnan(d.criterion)]
            base = float((c >= self.success).mean())
            crit_rng = self.criterion_list[1] if self.criterion_list else self.bands_range("I")
            self.put(g, 6, 2, f'=COUNTIF({crit_rng},">="&{self.success_ref})/COUNT({crit_rng})', lambda: base,
                     style="input_coef", key="base_rate")
        else:
            self.na(g, 6, 2, "no criterion values", key="base_rate")
        inputs = ((7, "People hired a year with the test", 20, "input"),
                  (8, "Average tenure of those hired, years", 3, "input"),
                  (9, "SD of yearly job performance in money (a common rule of thumb: 40% of pay)", 19200,
                   "input_money"),
                  (10, "Testing cost per applicant", 40, "input_money"))
        for r, label, value, style in inputs:
            g.set(r, 1, label)
            g.set(r, 2, value, style)
        g.set(12, 1, "Results", "heading")
        g.set(13, 1, "Success rate among those selected (Taylor–Russell)")
        self.put(g, 13, 2, "=TAYLOR_RUSSELL(B4,B6,B5)",
                 lambda: self.passes() or call("TAYLOR_RUSSELL", self.value("validity_used"), self.value("base_rate"),
                              self.value("selection_ratio")), style="pct", key="taylor_russell")
        g.set(14, 1, "Gain in success rate over hiring without the test")
        self.put(g, 14, 2, "=B13-B6", lambda: self.value("taylor_russell") - self.value("base_rate"), style="pct",
                 key="success_gain")
        g.set(15, 1, "Mean standard criterion score of those selected (Naylor–Shine)")
        self.put(g, 15, 2, "=NAYLOR_SHINE(B4,B5)",
                 lambda: self.passes() or call("NAYLOR_SHINE", self.value("validity_used"), self.value("selection_ratio")),
                 style="coef", key="naylor_shine")
        g.set(16, 1, "Money gain over the tenure of one year's hires, less testing cost (Brogden–Cronbach–Gleser)")
        self.put(g, 16, 2, "=BCG_UTILITY(B7,B8,B4,B9,B5,B10)",
                 lambda: self.passes() or call("BCG_UTILITY", 20, 3, self.value("validity_used"), 19200,
                              self.value("selection_ratio"), 40), style="money", key="bcg")
        g.para(18, 1, "Utility figures rest on assumptions (validity, performance value, tenure) that the inputs "
                     "state; treat them as orders of magnitude, not forecasts.")

    # -- Summary

    def summary_sheet(self):
        g = self.grid("Summary")
        g.landscape = True
        g.widths.update({1: 62, 2: 16, 3: 16, 4: 16})
        s, d = self.s, self.d
        who = " — ".join(x for x in (s.organisation, s.job_title) if x)
        g.set(1, 1, f"Validation study: {s.test_name}" + (f" ({who})" if who else ""), "title")
        first_row = 3 + g.para(2, 1, CAUTION, "caution")
        rows: list[tuple[str, str | None, str, str | None]] = [
            ("The people", None, "", None),
            ("Applicants with a test score", "n_scored", "count", None),
            ("People with a job-performance value", "n_criterion", "count", None),
            ("Is the test consistent?", None, "", None),
            ("Reliability (coefficient alpha)", "alpha", "coef", "alpha_lower/alpha_upper"),
            ("Standard error of measurement, in score points", "sem", "coef", None),
            ("Scores closer than this are not reliably different (band width)", "band_width", "coef", None),
            ("Do the interviewers agree?", None, "", None),
            ("Agreement of the mean panel rating, ICC(A,k)", "icc_agreement_average", "coef", None),
            ("Does the score predict job performance?", None, "", None),
            ("Observed validity (correlation with the criterion)", "r", "coef", "r_lower/r_upper"),
            ("p value of the observed validity", "r_p", "p", None),
            ("Operational validity (criterion unreliability and range restriction corrected)", "operational",
             "coef", None),
            ("Does the cut screen out a group?", None, "", None),
            ("Cut score", None, "score", None),
            ("Lowest impact ratio (below 0.80 fails the four-fifths rule of thumb)", "min_ratio", "coef", None),
            ("What is the test worth?", None, "", None),
            ("Success rate among those selected (Taylor–Russell)", "taylor_russell", "pct", "base_rate"),
            ("Money gain from one year's hires (Brogden–Cronbach–Gleser; inputs on Utility)", "bcg", "money", None),
        ]
        r = first_row
        for label, key, style, extra in rows:
            if key is None and not style:
                g.set(r, 1, label, "heading")
                r += 1
                continue
            g.set(r, 1, label)
            if label == "Cut score":
                g.set(r, 2, f"={self.cut_ref}", "score")
                self.cells["cut"] = ("Summary", f"B{r}")
            elif key in self.cells:
                sheet, coord = self.cells[key]
                self._summary_value(g, r, 2, key, f"={quote(sheet)}!{coord}", style)
                if extra and "/" in extra:
                    lo, hi = extra.split("/")
                    for col, k2 in ((3, lo), (4, hi)):
                        if k2 in self.cells:
                            sh2, c2 = self.cells[k2]
                            self._summary_value(g, r, col, k2, f"={quote(sh2)}!{c2}", style)
                    g.set(r, 5, f"{s.confidence:.0%} interval")
                elif extra and extra in self.cells:
                    sh2, c2 = self.cells[extra]
                    g.set(r, 3, f"={quote(sh2)}!{c2}", style)
                    g.set(r, 4, "(base rate)")
            else:
                self.na(g, r, 2, "not part of this study (see Notes)")
            r += 1
        r += 1 + g.para(r + 1, 1, "Every number is a formula: click it to see how it was computed. The sheets "
                                 "Reliability, Items, Raters, Validity, Bands, Impact and Utility hold the detail; "
                                 "Notes lists the methods and references.")
        if d.problems:
            g.para(r + 1, 1, f"{len(d.problems)} problem(s) were found in the data (values outside the item scale, "
                             f"duplicate ids, blank groups and the like); the Notes sheet lists each cell.", "caution")
        self.summary_last = r + 1

    def _summary_value(self, g, r, c, key, formula, style):
        value = self.values.get(key)
        if isinstance(value, TruebandError):
            g.set(r, c, NOT_COMPUTABLE + value.message, "na")
        else:
            g.set(r, c, formula, style)
        self.cells[f"summary_{key}"] = ("Summary", f"{get_column_letter(c)}{r}")

    # -- Notes

    def notes_sheet(self):
        from trueband.funcs import __version__

        g = self.grid("Notes")
        g.widths.update({1: 120})
        d, s = self.d, self.s
        lines: list[tuple[str, str | None]] = [
            ("Notes: methods, references, data and cautions", "title"),
            ("Cautions", "heading"),
            (CAUTION, "caution"),
            ("Validity evidence from one local study is one line of evidence; a small criterion sample gives wide "
             "intervals, and corrections rest on the reliability and applicant-SD inputs stated on the sheets.",
             "wrap"),
            ("The data", "heading"),
            (f"Source: {d.path.name}, sheet '{d.sheet}', {d.n} rows of candidates "
             f"({len(d.item_columns)} item columns, {len(d.rating_columns)} rating columns).", "wrap"),
            (f"Built by trueband {__version__} on {datetime.date.today().isoformat()}; the values were computed by "
             f"trueband's recalculation and are stored with the formulas.", "wrap"),
        ]
        lines += [(n, "wrap") for n in self.notes]
        if d.problems:
            lines.append(("Problems in the data (check these cells)", "heading"))
            lines += [(n, "wrap") for n in d.problems]
        lines += [
            ("Conventions", "heading"),
            ("A person's score is the sum of their item scores (a blank item counts 0); a person with no item "
             "answered has no score. The item statistics use only people who answered every item (listwise "
             "deletion).", "wrap"),
            ("Item statistics are those of the scores after reverse keying (minimum + maximum of the item scale − "
             "response for the reverse-keyed items); the flags of 0/1 items use the proportion correct, those of "
             "rating-scale items the mean's place on the scale and the standard deviation.", "wrap"),
            ("Standard deviations use the n − 1 denominator (STDEV). Intervals are two-sided at the confidence on the "
             "Setup sheet.", "wrap"),
            ("Range restriction: the restricted group is the people with a criterion value; the unrestricted group "
             "is every applicant with a score.", "wrap"),
            ("Group labels that differ only in letter case or spacing ('Group A', ' group a') are one group; a "
             "blank group label puts the person in no group. Labels are matched through a group number on the Bands "
             "sheet, so a label such as '<40' is counted as written.", "wrap"),
            ("Adverse impact compares each group's selection rate at the cut with the reference group's rate. The "
             "four-fifths rule of thumb is that of the Uniform Guidelines, 29 CFR 1607.4(D); z is the pooled "
             "two-proportion z test (positive when the group's rate is lower); Fisher p is two-sided.", "wrap"),
            ("Methods and references", "heading"),
        ]
        used = ["CRONBACH_ALPHA", "ALPHA_CI", "KR20", "SPLIT_HALF", "OMEGA", "SEM", "SED", "BAND_WIDTH",
                "SCORE_CI", "SCORE_BAND", "ITEM_DIFFICULTY", "ITEM_SD", "ITEM_TOTAL", "ALPHA_IF_DELETED", "ICC",
                "KRIPPENDORFF_ALPHA", "COHEN_KAPPA", "R_CI", "R_PVALUE", "DISATTENUATE", "RANGE_CORRECT",
                "OPERATIONAL_VALIDITY", "RANGE_CORRECT_INDIRECT", "MAX_VALIDITY", "SELECTION_RATE", "IMPACT_RATIO",
                "FOUR_FIFTHS", "IMPACT_Z", "IMPACT_FISHER", "IMPACT_SHORTFALL", "TAYLOR_RUSSELL", "NAYLOR_SHINE",
                "BCG_UTILITY"]
        for name in used:
            try:
                spec = lookup(name)
                lines.append((f"{name}: {spec.description} — {spec.reference}", "wrap"))
            except UnknownFunctionError:
                lines.append((f"{name}: not available in this installation", "na"))
        lines.append(("Criterion reliability default 0.52: Viswesvaran, C., Ones, D. S. & Schmidt, F. L. (1996). "
                      "Comparative analysis of the reliability of job performance ratings. Journal of Applied "
                      "Psychology 81, 557-574.", "wrap"))
        if self.not_computable:
            lines.append(("Not computable here", "heading"))
            for sheet, coord, reason in self.not_computable:
                lines.append((f"{sheet}!{coord}: {reason}", "wrap"))
        row = 1
        for text, style in lines:
            if style in ("wrap", "caution"):
                row += g.para(row, 1, text, style)
            else:
                g.set(row, 1, text, style)
                row += 1

    # -- writing

    def workbook(self) -> Workbook:
        wb = Workbook(write_only=True)
        for title in ANALYSIS_SHEETS:
            if title == "Bands":
                ws = wb.create_sheet("Bands")
                for c, w in enumerate((14, 12, 9, 10, 10, 10, 8, 12, 11, 14), start=1):
                    ws.column_dimensions[get_column_letter(c)].width = w
                ws.freeze_panes = "A2"
                ws.print_title_rows = "1:1"
                ws.page_setup.fitToWidth = 1
                ws.page_setup.fitToHeight = 0
                ws.sheet_properties.pageSetUpPr.fitToPage = True
                ws.append([_styled(ws, h, "header") for h in self.bands_header])
                continue  # the rows are spliced in by study_xml after saving
            self.grids[title].write(wb)
        self.grids[SETUP_SHEET].write(wb)
        if self.d.reverse_items:
            ws = wb.create_sheet(SCORED_SHEET)
            ws.freeze_panes = "A2"
            ws.append([_styled(ws, self.d.header[c] + (" (reversed)" if j in self.d.reverse_items else ""),
                               "header") for j, c in enumerate(self.d.item_columns)])
        ws = wb.create_sheet(self.d.sheet)
        ws.freeze_panes = "A2"
        # the header as written in the source (not trimmed), and the source's number formats (dates stay dates)
        ws.append([_styled(ws, h, "header") for h in (self.d.raw_header or self.d.header)])
        style_of: dict[str, int] = {}
        for code in sorted(set(self.d.formats.values())):
            cell = WriteOnlyCell(ws)
            cell.number_format = code
            style_of[code] = cell.style_id
        self.copy_styles = _CopyStyles(self.d.formats, style_of)
        return wb

    def save(self, path: Path):
        """Write the workbook, then splice in the rows of the two long sheets (see :mod:`.study_xml`)."""
        self.workbook().save(path)
        d = self.d
        last = d.n + 1
        rows = {"Bands": lambda: study_xml.rows_xml(self.bands_rows(), 2, formulas=True),
                d.sheet: lambda: study_xml.rows_xml(d.rows, 2, formulas=False, styles=self.copy_styles)}
        corners = {"Bands": f"{get_column_letter(len(self.bands_header))}{last}",
                   d.sheet: f"{get_column_letter(max(1, len(d.header)))}{last}"}
        if d.reverse_items:
            rows[SCORED_SHEET] = lambda: study_xml.rows_xml(self.scored_rows(), 2, formulas=True)
            corners[SCORED_SHEET] = f"{get_column_letter(len(d.item_columns))}{last}"
        study_xml.splice_rows(path, rows, corners)


class _CopyStyles(Mapping):
    """(sheet row, 0-based column) -> style index of the copy, looked up through the source's formats
    (no second per-cell table: a source may style every cell)."""

    def __init__(self, formats: Mapping[tuple[int, int], str], style_of: Mapping[str, int]):
        self.formats, self.style_of = formats, style_of

    def __getitem__(self, key):
        return self.style_of[self.formats[key]]

    def __contains__(self, key):
        return key in self.formats

    def __iter__(self):
        return iter(self.formats)

    def __len__(self):
        return len(self.formats)


def _degenerate(x: np.ndarray | None) -> bool:
    """Too few complete rows, or a column that does not vary: the range functions may refuse these."""
    if x is None:
        return False
    complete = x[~np.isnan(x).any(axis=1)]
    return complete.shape[0] < 3 or bool((np.ptp(complete, axis=0) == 0).any())


def _raise(message: str):
    raise InsufficientDataError(message)


def build_study(data: StudyData, path: str | Path) -> StudyResult:
    """Write the (not yet recalculated) study workbook for checked ``data`` to ``path``."""
    builder = _Builder(data)
    builder.plan()
    builder.save(Path(path))
    return StudyResult(path=Path(path), cells=builder.cells, not_computable=builder.not_computable,
                       notes=builder.notes, problems=list(data.problems), cut_message=builder.cut_message)


def make_study(data_path: str | Path, out_path: str | Path, overrides: Mapping[str, Any] | None = None, *,
               overwrite: bool = False, progress=None) -> StudyResult:
    """Read, check, build and recalculate; the output appears only when it is complete."""
    out = Path(out_path)
    src = Path(data_path)
    if out.suffix.lower() != ".xlsx":
        raise StudyError(f"the study is an .xlsx workbook; give an output name ending in .xlsx, got {out.name}")
    if out.exists() and not overwrite:
        raise StudyError(f"{out} already exists; give another name or --overwrite")
    if out.resolve() == src.resolve():
        raise StudyError("the study must be a new workbook, not the data workbook itself")
    if not out.parent.exists():
        raise StudyError(f"the folder {out.parent} does not exist")
    try:
        from ..engine.recalc import recalculate
    except ImportError as exc:
        raise StudyError(f"the workbook recalculation engine is not available ({exc})") from None
    timings = {}
    t0 = time.perf_counter()
    data = read_study_data(src, overrides)
    timings["read"] = time.perf_counter() - t0
    fd, raw_name = tempfile.mkstemp(prefix=".trueband-study-", suffix=".xlsx", dir=out.parent)
    os.close(fd)
    raw = Path(raw_name)
    fd, done_name = tempfile.mkstemp(prefix=".trueband-study-", suffix=".xlsx", dir=out.parent)
    os.close(fd)
    done = Path(done_name)
    try:
        t0 = time.perf_counter()
        result = build_study(data, raw)
        timings["build"] = time.perf_counter() - t0
        t0 = time.perf_counter()
        done.unlink()
        try:
            report = recalculate(raw, done, progress=progress)
        except Exception as exc:  # the engine's own failures end the command cleanly; nothing is kept
            raise StudyError(f"the recalculation of the new study failed ({type(exc).__name__}: {exc})") from exc
        timings["recalculate"] = time.perf_counter() - t0
        os.replace(done, out)
    finally:
        for p in (raw, done):
            try:
                p.unlink()
            except FileNotFoundError:
                pass
    result.path = out
    result.recalc_report = report
    result.timings = timings
    return result
