"""The study as a real spreadsheet app shows it: LibreOffice Calc, headless, to CSV and to PDF.

What the reviewer sees must be what trueband computed: every formula cell of every analysis
sheet, exported by LibreOffice, equals the value stored by the recalculation; and the PDF
carries the four charts. Runs with a private LibreOffice profile so it never touches a user's.
"""

from __future__ import annotations

import csv
import math
import re
import shutil
import subprocess
from pathlib import Path

import pytest
from openpyxl import load_workbook

from trueband.bridge.study.demo import make_demo
from trueband.bridge.study.build import ANALYSIS_SHEETS, make_study
from trueband.bridge.study.templates import study_data_workbook

pytestmark = [pytest.mark.libreoffice, pytest.mark.slow]

# all sheets (-1), raw values rather than as formatted (token 9 false), UTF-8 (76)
CSV_FILTER = "csv:Text - txt - csv (StarCalc):44,34,76,1,,0,false,true,false,false,false,-1"


def convert(soffice: str, src: Path, target: str, outdir: Path, profile: Path):
    outdir.mkdir(exist_ok=True)
    subprocess.run([soffice, f"-env:UserInstallation={profile.as_uri()}", "--headless", "--convert-to", target,
                    "--outdir", str(outdir), str(src)], check=True, capture_output=True, timeout=300)


@pytest.fixture(scope="module")
def exported(tmp_path_factory, soffice):
    folder = tmp_path_factory.mktemp("lo")
    data = study_data_workbook(folder / "data.xlsx", make_demo(), cut=24)
    result = make_study(data, folder / "study.xlsx")
    profile = folder / "profile"
    convert(soffice, result.path, CSV_FILTER, folder / "csv", profile)
    convert(soffice, result.path, "pdf", folder / "pdf", profile)
    return result, folder


def read_csv(folder: Path, sheet: str) -> list[list[str]]:
    path = folder / "csv" / f"study-{sheet}.csv"
    with open(path, newline="", encoding="utf-8") as f:
        return list(csv.reader(f))


def shown(rows, r: int, c: int) -> str:
    return rows[r - 1][c - 1] if r - 1 < len(rows) and c - 1 < len(rows[r - 1]) else ""


def same(ours, theirs: str) -> bool:
    if ours is None or ours == "":
        return theirs == ""
    if isinstance(ours, bool):
        return theirs.upper() == ("TRUE" if ours else "FALSE")
    if isinstance(ours, (int, float)):
        try:  # a percent-formatted cell exports as "78.18...%" even as raw values
            x = float(theirs[:-1]) / 100 if theirs.endswith("%") else float(theirs)
        except ValueError:
            return False
        return math.isclose(x, float(ours), rel_tol=1e-12, abs_tol=1e-13)
    return theirs == str(ours)


def mismatched_cells(result, folder, sheets):
    """(checked, mismatches) over every formula cell of ``sheets``: stored value against LibreOffice's export."""
    formulas = load_workbook(result.path, data_only=False)
    values = load_workbook(result.path, data_only=True)
    checked = 0
    mismatches = []
    for sheet in sheets:
        rows = read_csv(folder, sheet)
        for row in formulas[sheet].iter_rows():
            for cell in row:
                if isinstance(cell.value, str) and cell.value.startswith("="):
                    ours = values[sheet][cell.coordinate].value
                    theirs = shown(rows, cell.row, cell.column)
                    checked += 1
                    if not same(ours, theirs):
                        mismatches.append((sheet, cell.coordinate, cell.value[:60], ours, theirs))
    return checked, mismatches


def test_libreoffice_shows_a_rating_scale_study_with_reverse_keyed_items(tmp_path, soffice):
    # rating-scale items with two reverse-keyed ones: the Scored items sheet and the item statistics
    from test_study_likert import SETUP as LIKERT_SETUP, likert_table
    from test_study_setup import write_book

    header, rows, _ = likert_table(n=120)
    for i, r in enumerate(rows):  # group labels that differ only in case or spacing, and one like a condition
        r[1] = ("A", " a", "b ", "<40")[i % 4]
    result = make_study(write_book(tmp_path / "d.xlsx", header, rows, LIKERT_SETUP), tmp_path / "study.xlsx")
    convert(soffice, result.path, CSV_FILTER, tmp_path / "csv", tmp_path / "profile")
    checked, mismatches = mismatched_cells(result, tmp_path,
                                           ("Items", "Reliability", "Bands", "Impact", "Scored items"))
    assert checked > 8 * 120
    assert not mismatches, mismatches[:10]


#: A private profile whose setting makes LibreOffice recompute every formula of an .xlsx on loading
#: (the default shows the stored values): OOXMLRecalcMode 0 is "always recalculate".
RECALC_ALWAYS = """<?xml version="1.0" encoding="UTF-8"?>
<oor:items xmlns:oor="http://openoffice.org/2001/registry" xmlns:xs="http://www.w3.org/2001/XMLSchema"
 xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance">
<item oor:path="/org.openoffice.Office.Calc/Formula/Load"><prop oor:name="OOXMLRecalcMode" oor:op="fuse">
<value>0</value></prop></item>
</oor:items>
"""


def recalc_to_csv(soffice: str, book: Path, outdir: Path, profile: Path):
    """Every sheet of ``book`` as CSV in ``outdir``, LibreOffice recomputing every formula on loading (a private
    ``profile`` holding RECALC_ALWAYS)."""
    (profile / "user").mkdir(parents=True, exist_ok=True)
    (profile / "user" / "registrymodifications.xcu").write_text(RECALC_ALWAYS, encoding="utf-8")
    convert(soffice, book, CSV_FILTER, outdir, profile)


def recomputed_mismatches(soffice: str, book: Path, sheets, folder: Path, close=None):
    """LibreOffice's own recomputation of the standard formulas of ``sheets`` against the stored values.

    A private profile makes LibreOffice recompute every formula on loading (RECALC_ALWAYS); a formula that
    calls a trueband function is skipped, and so is a cell whose recomputed value is an error (it reads a
    trueband result LibreOffice does not have). ``close(stored, shown)`` may accept a near value. Returns
    (cells compared per sheet, mismatches as (sheet, cell, formula, stored, shown)).
    """
    from openpyxl.formula import Tokenizer

    from trueband.funcs import REGISTRY
    from trueband.funcs.registry import normalize_name

    profile = folder / "profile"
    recalc_to_csv(soffice, book, folder / "csv", profile)

    def ours(text: str) -> bool:
        names = {normalize_name(t.value.rstrip("(")) for t in Tokenizer(text).items
                 if t.type == "FUNC" and t.subtype == "OPEN"}
        return bool(names & set(REGISTRY))

    formulas = load_workbook(book, data_only=False)
    values = load_workbook(book, data_only=True)
    checked, mismatches = {}, []
    for sheet in sheets:
        shown_rows = read_csv(folder, sheet)
        for row in formulas[sheet].iter_rows():
            for cell in row:
                text = cell.value
                if not (isinstance(text, str) and text.startswith("=")) or ours(text):
                    continue
                theirs = shown(shown_rows, cell.row, cell.column)
                if theirs.startswith("#") or theirs.startswith("Err:"):
                    continue  # depends on a trueband function LibreOffice does not have
                stored = values[sheet][cell.coordinate].value
                checked[sheet] = checked.get(sheet, 0) + 1
                if not (same(stored, theirs) or (close is not None and close(stored, theirs))):
                    mismatches.append((sheet, cell.coordinate, text[:70], stored, theirs))
    return checked, mismatches


def test_libreoffice_recomputes_the_standard_formulas_to_the_same_values(tmp_path, soffice):
    # LibreOffice's own COUNTIFS, SUM, IF... (it does not know trueband's functions: those cells show
    # #NAME? and are skipped) over messy group labels, reverse-keyed items and a y/n hired column must
    # give what trueband stored: the Python counts and the sheet's formulas agree in a spreadsheet app too
    from test_study_likert import SETUP as LIKERT_SETUP, likert_table
    from test_study_setup import write_book

    header, rows, _ = likert_table(n=120)
    header = header + ["hired", "perf"]
    hired = ("Y", "n", " yes", "NO", 1, 0)
    for i, r in enumerate(rows):
        r[1] = ("A", " a", "b ", "<40", "A*")[i % 5]
        r.append(hired[i % 6])
        r.append(round(2 + 0.1 * sum(r[2:10]) % 3, 1) if hired[i % 6] in ("Y", " yes", 1) else None)
    setup = {**LIKERT_SETUP, "hired column": "hired", "criterion column": "perf"}
    result = make_study(write_book(tmp_path / "d.xlsx", header, rows, setup), tmp_path / "study.xlsx")
    checked, mismatches = recomputed_mismatches(soffice, result.path, ("Impact", "Bands", "Scored items", "Validity",
                                                                       "Reliability", "Utility"), tmp_path)
    assert not mismatches, mismatches[:10]
    assert checked.get("Scored items", 0) == 120 * 8 and checked.get("Bands", 0) >= 3 * 120
    assert checked.get("Impact", 0) >= 2 * 4  # Applicants and Selected of each group, at least
    impact = read_csv(tmp_path, "Impact")
    groups = {}
    for r in impact:  # the group table's rows (the table of tests under it names the groups again: not read)
        if r and r[0] in ("A", "b", "<40", "A*"):
            groups.setdefault(r[0], r[1])
    assert groups == {"A": "48", "b": "24", "<40": "24", "A*": "24"}
    assert shown(read_csv(tmp_path, "Validity"), 4, 2) == "60"  # half of the rows are coded as hired


def test_libreoffice_shows_the_computed_value_of_every_formula_cell(exported):
    result, folder = exported
    present = load_workbook(result.path, read_only=True).sheetnames  # Options only with raw answers
    checked, mismatches = mismatched_cells(result, folder, [s for s in ANALYSIS_SHEETS if s in present])
    assert checked > 3000  # the Bands sheet alone has 400 rows of formulas
    assert not mismatches, mismatches[:10]


def test_headline_values_appear_in_the_export(exported):
    result, folder = exported
    values = load_workbook(result.path, data_only=True)
    for key in ("alpha", "r", "operational", "min_ratio", "icc_agreement_average", "taylor_russell"):
        sheet, coord = result.cells[key]
        ours = values[sheet][coord].value
        assert isinstance(ours, float), (key, ours)
        col, row = re.match(r"([A-Z]+)(\d+)", coord).groups()
        from openpyxl.utils import column_index_from_string

        assert same(ours, shown(read_csv(folder, sheet), int(row), column_index_from_string(col))), key


def test_pdf_has_the_chart_pages(exported):
    _, folder = exported
    pdf = folder / "pdf" / "study.pdf"
    if shutil.which("pdftotext") is None:
        pytest.skip("pdftotext (poppler-utils) is not installed")
    info = subprocess.run(["pdfinfo", str(pdf)], capture_output=True, text=True, check=True).stdout
    pages = int(re.search(r"Pages:\s+(\d+)", info).group(1))
    assert pages >= 10
    found = {}
    for page in range(1, pages + 1):
        text = subprocess.run(["pdftotext", "-f", str(page), "-l", str(page), str(pdf), "-"], capture_output=True,
                              text=True, check=True).stdout
        flat = " ".join(text.split())
        for title in ("Test score against job performance", "Score distribution (cut at 24)",
                      "Selection rate by group against the four-fifths line", "Item difficulty against discrimination"):
            if title in flat:
                found.setdefault(title, page)
    assert len(found) == 4, found
    # a chart page is drawn, not blank: render the scatter's page and count dark pixels
    if shutil.which("pdftoppm"):
        page = found["Test score against job performance"]
        out = folder / "page"
        subprocess.run(["pdftoppm", "-f", str(page), "-l", str(page), "-r", "40", "-gray", str(pdf), str(out)],
                       check=True)
        image = next(folder.glob("page*.pgm"))
        raw = image.read_bytes()
        pixels = raw[raw.index(b"255\n") + 4:]
        dark = sum(1 for b in pixels if b < 128)
        assert dark > 500
