"""More golden workbooks for the recalculation tests, built at test time.

The package layer's books (:mod:`golden_books`) cover the file forms; these
cover the evaluation itself. The data are invented demo data of Osterfell
Harbour Logistics (invented), hiring cargo dispatch coordinators.

* :func:`mixed_inputs_book` (openpyxl): filled-down standard formulas over
  inputs with blanks, text, logical values, zeros, negatives and error
  values, a running total, a cross-sheet column and a fixed-range
  aggregate — for checking the column evaluator against the per-cell one
  and against ``formulas.ExcelModel``.
* :func:`prefixed_names_book` (hand-written XML): one registered function
  written with every prefix of ``registry.NAME_PREFIXES`` and in mixed case,
  as other spreadsheet apps save functions they do not know.
* :func:`check_book` (hand-written XML): the mistakes ``trueband check`` lists.
* :func:`display_book` (openpyxl): registered and standard formulas for the
  LibreOffice display check.
"""

from __future__ import annotations

from pathlib import Path

from golden_books import cell_xml, handmade_package, row_xml, sheet_part

from trueband.funcs.registry import NAME_PREFIXES

#: Column A of the mixed-inputs book (rows 2..): numbers, a blank, text, a logical value, an error, zero.
MIXED_A = [12.5, -3.0, 0.0, None, "n/a", True, "#N/A", 7.25, 1e308, 4.0, -0.5, 2.0]
MIXED_B = [2.0, 0.0, 4.0, 5.0, 1.5, 2.0, 3.0, 0.0, 10.0, None, 8.0, "x"]
MIXED_C = ["yes", True, None, False, 1.0, "", 0.0, "no", None, True, 3.0, None]
MIXED_D = [1.0, 2.0, 3.0, None, 5.0, 6.0, 7.0, 8.0, 9.0, 10.0, "#DIV/0!", 12.0]

#: Formulas filled down the mixed-inputs book, by column (``{r}`` is the row).
MIXED_FORMULAS = {
    "F": "=A{r}+B{r}",
    "G": "=A{r}-B{r}*2",
    "H": "=A{r}/B{r}",
    "I": "=A{r}^0.5",
    "J": "=-A{r}%",
    "K": "=A{r}>B{r}",
    "L": "=A{r}=B{r}",
    "M": '=IF(A{r}>0,A{r},"not positive")',
    "N": "=IF(C{r},1,2)",
    "O": "=SUM(A{r}:D{r})",
    "P": "=AVERAGE(A{r}:D{r})",
    "Q": "=COUNT(A{r}:D{r})",
    "R": "=MIN(A{r}:D{r})",
    "S": "=MAX(A{r}:D{r})",
    "T": "=ROUND(A{r},1)",
    "U": "=ABS(A{r})",
    "V": "=SQRT(B{r})",
    "W": "=B{r}*$Z$1+Inputs!A{r}",
    "X": "=SUM($D$2:$D$13)/D{r}",
    "Y": '=ISNUMBER(A{r})&"|"&B{r}',
    "AA": "=AA{prev}+B{r}",  # a running total: each row reads the row above
    "AB": "=IF(ISERROR(H{r}),0,H{r})*2",
    "AC": '=COUNTIFS($B$2:$B$11,">=2",$D$2:$D$11,"<="&ROW())',  # engine/criteria.py: counted with numpy
    "AD": "=INDEX($A$2:$A$13,15-ROW())",  # eval_run's INDEX: whole positions at once (13, past the end: #REF!)
}


def mixed_inputs_book(path: str | Path) -> Path:
    """Rows 2..13 of inputs (:data:`MIXED_A`..``MIXED_D``) and :data:`MIXED_FORMULAS` filled down (openpyxl)."""
    import openpyxl

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Mixed"
    inputs = wb.create_sheet("Inputs")
    ws.append(["a", "b", "c", "d"])
    ws["Z1"] = 1.5
    ws["AA1"] = 0.0
    for i, row in enumerate(zip(MIXED_A, MIXED_B, MIXED_C, MIXED_D)):
        r = i + 2
        for letter, value in zip("ABCD", row):
            if value is not None:
                ws[f"{letter}{r}"] = value
        for letter, formula in MIXED_FORMULAS.items():
            ws[f"{letter}{r}"] = formula.format(r=r, prev=r - 1)
        inputs[f"A{r}"] = 100.0 + i
    wb.save(path)
    return Path(path)


def prefixed_names_book(path: str | Path) -> Path:
    """``SEM(12, 0.91)`` (3.6) written with each app prefix and letter case; B2 holds the sd, B3 the reliability.

    Row k + 2 holds the k-th form in column D, with no cached value for some and a stale
    cached ``#NAME?`` (as an app that does not know the function leaves it) for others.
    """
    forms = [f"{p.lower()}SEM(B2,B3)" for p in NAME_PREFIXES] + [f"{p}sem(B2,B3)" for p in NAME_PREFIXES]
    forms += ["Sem(B2,B3)", "sem(B2,B3)", "SEM(B2,B3)"]
    rows = [row_xml(1, [cell_xml("A1", "0", t="s")]),
            row_xml(2, [cell_xml("B2", 12)] + [cell_xml("D2", "#NAME?", formula=forms[0], t="e")]),
            row_xml(3, [cell_xml("B3", 0.91)] + [cell_xml("D3", None, formula=forms[1])])]
    for k, form in enumerate(forms[2:], start=4):
        cached = ("#NAME?", "e") if k % 2 else (None, None)
        rows.append(row_xml(k, [cell_xml(f"D{k}", cached[0], formula=form, t=cached[1])]))
    sheet = sheet_part(rows, dimension=f"A1:D{len(forms) + 1}")
    handmade_package(path, [("Sheet1", sheet)], shared_strings=["sd and reliability"])
    return Path(path)


def prefixed_forms() -> list[str]:
    """The formula texts of :func:`prefixed_names_book`, in row order from D2."""
    return ([f"{p.lower()}SEM(B2,B3)" for p in NAME_PREFIXES] + [f"{p}sem(B2,B3)" for p in NAME_PREFIXES]
            + ["Sem(B2,B3)", "sem(B2,B3)", "SEM(B2,B3)"])


def check_book(path: str | Path) -> Path:
    """A sheet with data in A1:B9 and these formulas:

    D2 ``SCORE_BNAD(B2,$B$2:$B$9,4,0.9)`` (misspelt), D3 ``SEM(4)`` (too few arguments),
    D4 ``SEM(4,0.9,1)`` (too many), D5 ``SUM(B2:B500)`` (past the used range), D6
    ``Missing!A1*2`` (no such sheet), D7 ``SEM(4,0.9)`` (fine), D8 ``SUM(B:B)`` (full column, fine).
    """
    rows = [row_xml(1, [cell_xml("A1", "0", t="s"), cell_xml("B1", "1", t="s")])]
    formulas = {2: "SCORE_BNAD(B2,$B$2:$B$9,4,0.9)", 3: "SEM(4)", 4: "SEM(4,0.9,1)", 5: "SUM(B2:B500)",
                6: "Missing!A1*2", 7: "SEM(4,0.9)", 8: "SUM(B:B)"}
    for r in range(2, 10):
        cells = [cell_xml(f"A{r}", r - 1), cell_xml(f"B{r}", 20 + r)]
        if r in formulas:
            cells.append(cell_xml(f"D{r}", 0, formula=formulas[r]))
        rows.append(row_xml(r, cells))
    handmade_package(path, [("Scores", sheet_part(rows, dimension="A1:D9"))], shared_strings=["id", "score"])
    return Path(path)


#: (cell, formula) of the display book's sheet "Bands", rows 2..7 hold scores in B and C formulas.
DISPLAY_SCORES = [31.0, 27.0, 35.0, 24.0, 29.0, 33.0]


def display_book(path: str | Path) -> Path:
    """Registered functions LibreOffice does not know, mixed with standard ones (openpyxl, no cached values).

    Sheet ``Bands``: A ids, B scores (:data:`DISPLAY_SCORES`), C ``SCORE_CI(B,sd,r,"lower")``,
    D ``_xludf.SCORE_CI(...,"upper")``, E ``SCORE_BAND(...)``, F ``ROUND(C-D,3)``,
    G ``IF(E=1,"top band","lower band")``, H ``B>30`` (logical), I ``SEM(sd, 1.2)`` (``#NUM!``).
    Sheet ``Settings``: B1 sd 4.2, B2 reliability 0.88 (name ``Reliability``).
    """
    import openpyxl
    from openpyxl.workbook.defined_name import DefinedName

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Bands"
    settings = wb.create_sheet("Settings")
    settings["A1"], settings["B1"] = "sd", 4.2
    settings["A2"], settings["B2"] = "reliability", 0.88
    dn = DefinedName("Reliability", attr_text="Settings!$B$2")
    try:
        wb.defined_names["Reliability"] = dn
    except TypeError:  # older openpyxl
        wb.defined_names.append(dn)
    ws.append(["id", "score", "lower", "upper", "band", "width", "label", "above 30", "bad"])
    for i, score in enumerate(DISPLAY_SCORES):
        r = i + 2
        ws[f"A{r}"] = f"OHL-{300 + i}"
        ws[f"B{r}"] = score
        ws[f"C{r}"] = f'=SCORE_CI(B{r},Settings!$B$1,Reliability,"lower")'
        ws[f"D{r}"] = f'=_xludf.SCORE_CI(B{r},Settings!$B$1,Reliability,"upper")'
        ws[f"E{r}"] = f"=SCORE_BAND(B{r},$B$2:$B$7,Settings!$B$1,Reliability)"
        ws[f"F{r}"] = f"=ROUND(D{r}-C{r},3)"
        ws[f"G{r}"] = f'=IF(E{r}=1,"top band","lower band")'
        ws[f"H{r}"] = f"=B{r}>30"
        ws[f"I{r}"] = "=SEM(Settings!$B$1,1.2)"
    wb.save(path)
    return Path(path)
