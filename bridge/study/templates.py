"""Workbooks that users copy and fill: the study data layout, a scoring sheet and an adverse-impact sheet.

==============================  =========================================================
function                        workbook
==============================  =========================================================
:func:`study_data_workbook`     the data layout of ``trueband study``: a sheet of
                                candidates and a ``Setup`` sheet of settings, with a
                                few check formulas beside the settings
:func:`scoring_template`        item responses in, each person's total, confidence
                                interval and score band out
:func:`impact_template`         applicants and selections per group in; selection
                                rates, impact ratios, four-fifths flags, z, Fisher p
                                and the extra selections to reach four-fifths out
==============================  =========================================================

Each can be written empty (a template) or filled (the demo). The formulas use
the registered functions and standard spreadsheet functions, guarded so that
empty rows show nothing; ``trueband recalc`` (or ``trueband demo``) fills in
their values. Every template carries the project's caution where its numbers
are.
"""

from __future__ import annotations

from pathlib import Path
from typing import Sequence

from openpyxl import Workbook
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter
from openpyxl.worksheet.datavalidation import DataValidation

from ..formulas.calc_binding import bind_workbook
from . import templates_predictors
from .demo import DemoData
from .grid import CAUTION_INK, HEADER_FILL, INPUT_BORDER, INPUT_FILL, INK, P_FORMAT
from .demo_cut import setup_values as cut_setup_values
from .demo_answers import KEY_SHEET
from .templates_cut import add_answer_key, add_cut_sheets, answer_rows
from .words import CAUTION
from . import templates_impact
from .setup import DEFAULT_CRITERION_RELIABILITY, SETTINGS, SETUP_SHEET

__all__ = ["study_data_workbook", "scoring_template", "impact_template", "SCORING_LAYOUT", "IMPACT_LAYOUT"]

_BOLD = Font(bold=True)
# the study's palette (grid.py): the same header and input cells as the study it builds
_HEADER_FILL = PatternFill("solid", fgColor=HEADER_FILL)
_INPUT_FILL = PatternFill("solid", fgColor=INPUT_FILL)
_WRAP = Alignment(wrap_text=True, vertical="top")
_CAUTION_FONT = Font(bold=True, color=CAUTION_INK)


def _header(ws, row: int, values: Sequence[str], col: int = 1):
    for j, v in enumerate(values):
        c = ws.cell(row, col + j, v)
        c.font, c.fill, c.alignment = _BOLD, _HEADER_FILL, _WRAP


def _mark_inputs(ws):
    """The dashed border on every input cell (filled by another module too), so it reads in grey print."""
    for row in ws.iter_rows():
        for c in row:
            if c.fill is not None and c.fill.fill_type == "solid" and str(c.fill.fgColor.rgb)[-6:] == INPUT_FILL:
                c.border = INPUT_BORDER


def _caution(ws, cell: str, width_cols: int = 8):
    ws[cell] = CAUTION
    ws[cell].font, ws[cell].alignment = _CAUTION_FONT, _WRAP
    row = ws[cell].row
    ws.merge_cells(start_row=row, start_column=ws[cell].column, end_row=row,
                   end_column=ws[cell].column + width_cols - 1)
    ws.row_dimensions[row].height = 48


# ---------------------------------------------------------------- the study data layout

def _setup_checks(st, n_items: int, n_raters: int, last: int):
    """Checks beside the settings (columns E:F are not read as settings): what has been entered, and alpha."""
    first_item, last_item = get_column_letter(3), get_column_letter(2 + n_items)
    items = f"Applicants!${first_item}$2:${last_item}${last}"
    crit = get_column_letter(3 + n_items + n_raters)
    _header(st, 1, ["Check", "Value"], col=5)
    checks = [
        ("Applicants entered", f"=COUNTA(Applicants!$A$2:$A${last})"),
        ("Item responses entered", f"=COUNT({items})"),
        ("People with a supervisor rating", f"=COUNT(Applicants!${crit}$2:${crit}${last})"),
        ("Coefficient alpha, preview", f'=IF(COUNTA(Applicants!$A$2:$A${last})<2,"enter data",'
                                       f"CRONBACH_ALPHA({items}))"),
    ]
    for r, (label, formula) in enumerate(checks, start=2):
        st.cell(r, 5, label)
        st.cell(r, 6, formula).number_format = "0.000" if "ALPHA" in formula else "0"
    st.column_dimensions["E"].width = 32
    st.column_dimensions["F"].width = 14


def study_data_workbook(path: str | Path, demo: DemoData | None = None, *, n_items: int = 40, n_raters: int = 3,
                        cut: float | None = None, capacity: int = 5000, answers: bool = False) -> Path:
    """The data workbook of a validation study: 'Applicants' and 'Setup'.

    With ``demo`` the Applicants sheet holds the demo applicants and the Setup
    sheet names the demo's columns; without it the headers and settings are in
    place for ``n_items`` items and ``n_raters`` raters, and the rows are empty.
    The check formulas beside the settings count what has been entered and
    preview coefficient alpha over the first ``capacity`` rows. With ``answers`` (and ``demo``) the item
    columns hold the demo's raw answers (A to D) and an answer key sheet scores them (:mod:`.demo_answers`).
    """
    path = Path(path)
    if demo is not None:
        n_items, n_raters = len(demo.item_names), len(demo.rater_names)
        item_names, rater_names = list(demo.item_names), list(demo.rater_names)
        header = demo.header()
    else:
        item_names = [f"Q{j:02d}" for j in range(1, n_items + 1)]
        rater_names = [f"Interview rater {j}" for j in range(1, n_raters + 1)]
        header = ["Applicant", "Group", *item_names, *rater_names, "Supervisor rating", "Retest score", "Hired"]
    wb = Workbook()
    ws = wb.active
    ws.title = "Applicants"
    _header(ws, 1, header)
    ws.freeze_panes = "C2"
    for c in range(1, len(header) + 1):
        ws.column_dimensions[get_column_letter(c)].width = 6 if 3 <= c <= 2 + n_items else 12
    if demo is not None:
        for row in (answer_rows(demo) if answers else demo.rows()):
            ws.append(row)
        last = demo.n + 1
    else:
        last = capacity + 1
    hired_col = get_column_letter(header.index("Hired") + 1)
    dv = DataValidation(type="list", formula1='"yes,no"', allow_blank=True)
    dv.add(f"{hired_col}2:{hired_col}{max(last, capacity + 1)}")
    ws.add_data_validation(dv)
    templates_impact.stage_lists(ws, header, max(last, capacity + 1))

    st = wb.create_sheet(SETUP_SHEET)
    _header(st, 1, ["Setting", "Value", "What it means"])
    values = {
        "data sheet": "Applicants", "id column": "Applicant", "group column": "Group",
        "item columns": f"{item_names[0]}:{item_names[-1]}", "total column": None,
        "rating columns": f"{rater_names[0]}:{rater_names[-1]}", "criterion column": "Supervisor rating",
        "retest column": "Retest score", "hired column": "Hired", "cut score": cut,
        "confidence": 0.95, "criterion reliability": DEFAULT_CRITERION_RELIABILITY, "success threshold": None,
        "reference group": None,
        "test name": "Dispatch Knowledge Test" if demo is not None else "the test",
        "job title": "cargo dispatch coordinator" if demo is not None else None,
        "organisation": "Osterfell Harbour Logistics" if demo is not None else None,
        **templates_impact.setup_values(demo),
    }
    values.update(cut_setup_values(demo))  # the judges' and content sheets (demo_cut)
    if answers and demo is not None:
        values["answer key sheet"] = KEY_SHEET
    for r, (key, (_, kind, meaning)) in enumerate(SETTINGS.items(), start=2):
        st.cell(r, 1, key)
        c = st.cell(r, 2, values.get(key))
        c.fill, c.border = _INPUT_FILL, INPUT_BORDER
        st.cell(r, 3, meaning).alignment = _WRAP
    st.column_dimensions["A"].width = 24
    st.column_dimensions["B"].width = 34
    st.column_dimensions["C"].width = 62
    _setup_checks(st, n_items, n_raters, last)
    more = templates_predictors.write_block(st, len(SETTINGS) + 2, demo, _INPUT_FILL)  # a further predictor
    _mark_inputs(st)
    st.cell(len(SETTINGS) + 3 + more, 1, "Fill the Applicants sheet (one row per candidate; leave the supervisor "
                                         "rating blank for people not hired), name your columns above, then run: "
                                         "trueband study THIS_FILE.xlsx -o study.xlsx").alignment = _WRAP
    st.cell(len(SETTINGS) + 4 + more, 1, templates_predictors.HOW_TO).alignment = _WRAP
    _caution(st, f"A{len(SETTINGS) + 6 + more}", 3)
    add_cut_sheets(wb, demo, cut)  # the judges' sheet and the experts' content ratings (templates_cut)
    if answers and demo is not None:
        add_answer_key(wb, demo)
    bind_workbook(wb)  # registered calls as _xludf.NAME(, the form LibreOffice binds to the add-in
    wb.save(path)
    return path


# ---------------------------------------------------------------- the scoring sheet

#: Where the scoring template keeps its inputs and table (1-based rows).
SCORING_LAYOUT = {"reliability": "C3", "sd": "C4", "confidence": "C5", "header_row": 7, "first_row": 8}


def scoring_template(path: str | Path, *, n_items: int = 40, capacity: int = 500,
                     ids: Sequence | None = None, responses: Sequence[Sequence] | None = None,
                     title: str = "Scoring sheet") -> Path:
    """A scoring sheet: item responses in; total, 95% interval and score band out.

    Inputs at the top: the reliability (by default coefficient alpha of the
    responses entered, a formula the user may overwrite with a published
    value), the standard deviation of the totals and the confidence level.
    ``ids``/``responses`` prefill rows (the demo); the sheet has room for
    ``capacity`` people (or as many as are prefilled).
    """
    path = Path(path)
    n = len(responses) if responses is not None else 0
    rows = max(capacity, n)
    wb = Workbook()
    ws = wb.active
    ws.title = "Scoring"
    first = SCORING_LAYOUT["first_row"]
    last = first + rows - 1
    a, z = get_column_letter(2), get_column_letter(1 + n_items)
    tc = 2 + n_items  # total column
    T = get_column_letter(tc)
    items = f"${a}${first}:${z}${last}"
    totals = f"${T}${first}:${T}${last}"
    ws["A1"] = title
    ws["A1"].font = Font(bold=True, size=14, color=INK)
    ws["A3"], ws["A4"], ws["A5"] = "Reliability", "Standard deviation of the totals", "Confidence level"
    ws["C3"] = f'=IF(COUNT({totals})<3,"enter responses",CRONBACH_ALPHA({items}))'
    ws["C4"] = f'=IF(COUNT({totals})<2,"enter responses",STDEV({totals}))'
    ws["C5"] = 0.95
    for ref, fmt in (("C3", "0.000"), ("C4", "0.00"), ("C5", "0%")):
        ws[ref].fill, ws[ref].border, ws[ref].number_format = _INPUT_FILL, INPUT_BORDER, fmt
    ws["E3"] = "The reliability defaults to coefficient alpha of the responses below; type a published value over it " \
               "if you have one. Blank items count 0 in the total; an empty row shows nothing."
    ws["E3"].alignment = _WRAP
    ws.merge_cells(start_row=3, start_column=5, end_row=5, end_column=min(20, tc + 3))
    _header(ws, SCORING_LAYOUT["header_row"],
            ["Applicant", *[f"Q{j:02d}" for j in range(1, n_items + 1)], "Total", "CI lower", "CI upper", "Band"])
    ws.freeze_panes = f"B{first}"
    ws.column_dimensions["A"].width = 14
    for c in range(2, tc):
        ws.column_dimensions[get_column_letter(c)].width = 5
    for c in range(tc, tc + 4):
        ws.column_dimensions[get_column_letter(c)].width = 10
    rel, sd, conf = "$C$3", "$C$4", "$C$5"
    for i in range(rows):
        r = first + i
        if ids is not None and i < len(ids):
            ws.cell(r, 1, ids[i])
        if responses is not None and i < n:
            for j, value in enumerate(responses[i]):
                ws.cell(r, 2 + j, value)
        ws.cell(r, tc, f'=IF(COUNT({a}{r}:{z}{r})=0,"",SUM({a}{r}:{z}{r}))')
        guard = f'IF(OR({T}{r}="",NOT(ISNUMBER({rel})),NOT(ISNUMBER({sd}))),"",'
        ws.cell(r, tc + 1, f'={guard}SCORE_CI({T}{r},{sd},{rel},"lower",{conf}))').number_format = "0.0"
        ws.cell(r, tc + 2, f'={guard}SCORE_CI({T}{r},{sd},{rel},"upper",{conf}))').number_format = "0.0"
        ws.cell(r, tc + 3, f"={guard}SCORE_BAND({T}{r},{totals},{sd},{rel},{conf}))")
    _caution(ws, f"A{last + 2}", 10)
    bind_workbook(wb)  # registered calls as _xludf.NAME(, the form LibreOffice binds to the add-in
    wb.save(path)
    return path


# ---------------------------------------------------------------- the adverse-impact sheet

#: Where the impact template keeps its table.
IMPACT_LAYOUT = {"reference": "B4", "header_row": 6, "first_row": 7}


def impact_template(path: str | Path, *, capacity: int = 8,
                    groups: Sequence[tuple[str, int, int]] | None = None, reference: str | None = None,
                    title: str = "Adverse impact at a cut score or band") -> Path:
    """An adverse-impact sheet: applicants and selections per group in; rates and impact statistics out.

    ``groups`` prefills rows as (group, applicants, selected). The reference
    group defaults to the one with the highest selection rate (a formula); type
    a group's name over it to compare with another.
    """
    path = Path(path)
    groups = list(groups or [])
    rows = max(capacity, len(groups))
    wb = Workbook()
    ws = wb.active
    ws.title = "Adverse impact"
    ws["A1"] = title
    ws["A1"].font = Font(bold=True, size=14, color=INK)
    _caution(ws, "A2", 10)
    first = IMPACT_LAYOUT["first_row"]
    last = first + rows - 1
    ws["A4"] = "Reference group"
    ws["B4"] = (f'=IF(COUNT($D${first}:$D${last})=0,"",INDEX($A${first}:$A${last},'
                f"MATCH(MAX($D${first}:$D${last}),$D${first}:$D${last},0)))")
    ws["B4"].fill, ws["B4"].border = _INPUT_FILL, INPUT_BORDER
    ws["D4"] = "(the group with the highest selection rate unless you type a name)"
    _header(ws, IMPACT_LAYOUT["header_row"],
            ["Group", "Applicants", "Selected", "Selection rate", "Impact ratio", "Below four-fifths", "z",
             "Fisher exact p", "Extra selections to reach four-fifths"])
    ref_sel = f"INDEX($C${first}:$C${last},MATCH($B$4,$A${first}:$A${last},0))"
    ref_app = f"INDEX($B${first}:$B${last},MATCH($B$4,$A${first}:$A${last},0))"
    for i in range(rows):
        r = first + i
        if i < len(groups):
            name, applicants, selected = groups[i]
            ws.cell(r, 1, name)
            ws.cell(r, 2, applicants)
            ws.cell(r, 3, selected)
        for c in (1, 2, 3):
            ws.cell(r, c).fill, ws.cell(r, c).border = _INPUT_FILL, INPUT_BORDER
        ws.cell(r, 4, f'=IF(OR(A{r}="",B{r}=""),"",SELECTION_RATE(C{r},B{r}))').number_format = "0.000"
        skip = f'IF(OR(A{r}="",B{r}="",$B$4="",A{r}=$B$4),"",'
        for c, fn, fmt in ((5, "IMPACT_RATIO", "0.000"), (6, "FOUR_FIFTHS", "General"), (7, "IMPACT_Z", "0.000"),
                           (8, "IMPACT_FISHER", P_FORMAT), (9, "IMPACT_EXTRA_SELECTIONS", "0")):
            call = f"{fn}(C{r},B{r},{ref_sel},{ref_app})"
            if fn == "FOUR_FIFTHS":  # yes/no text: apps show a stored TRUE/FALSE of an unknown function as an error
                call = f'IF({call},"yes","no")'
            ws.cell(r, c, f"={skip}{call})").number_format = fmt
    ws.column_dimensions["A"].width = 18
    for c in range(2, 10):
        ws.column_dimensions[get_column_letter(c)].width = 14
    ws.cell(last + 2, 1, "Impact ratio: the group's selection rate over the reference group's. Below four-fifths: "
                         "yes when the ratio is under 0.8, the rule of thumb of 29 CFR 1607.4(D). z: pooled two-"
                         "proportion test, positive when the group's rate is lower. Extra selections: the fewest "
                         "more selections from the group that bring the ratio to 0.8.").alignment = _WRAP
    ws.merge_cells(start_row=last + 2, start_column=1, end_row=last + 2, end_column=9)
    ws.row_dimensions[last + 2].height = 60
    bind_workbook(wb)  # registered calls as _xludf.NAME(, the form LibreOffice binds to the add-in
    wb.save(path)
    return path
