"""``trueband report``: the validation report written from a saved study.

What the report must do is read, never recompute: each number it prints must be the value the study
workbook stores in the cell it names. So the checks compare the report with the study as openpyxl reads
it (an independent reader of the workbook), and the study's own numbers are checked against reference
libraries in ``test_study.py``. The section headings follow 29 CFR 1607.15B (the Uniform Guidelines'
documentation of a criterion-related validity study); the test checks each heading of the plan is present.
"""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
from docx import Document
from openpyxl import load_workbook
from trueband.bridge.cli import main
from trueband.bridge.study.build import make_study
from trueband.bridge.study.demo import make_demo
from trueband.bridge.study.report import (
    PLACEHOLDER_MARK,
    SECTIONS,
    ReportError,
    write_report,
)
from trueband.bridge.study.report.document import validity_not_established
from trueband.bridge.study.report.read import Figure, StudyContent, format_value
from trueband.bridge.study.grid import P_FORMAT
from trueband.bridge.study.templates import study_data_workbook

#: the most pages the demo's report may take (stated in the README)
DEMO_REPORT_PAGES = 60


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    folder = tmp_path_factory.mktemp("report")
    data = study_data_workbook(folder / "data.xlsx", make_demo(), cut=24.0)
    return make_study(data, folder / "study.xlsx").path


@pytest.fixture(scope="module")
def report(study):
    out = study.with_name("report.docx")
    write_report(study, out, version="test")
    return out


def _texts(path: Path) -> list[str]:
    doc = Document(str(path))
    out = [p.text for p in doc.paragraphs]
    for table in doc.tables:
        for row in table.rows:
            out.append(" | ".join(c.text for c in row.cells))
    return out


def test_every_section_heading_is_there(report):
    doc = Document(str(report))
    headings = [p.text for p in doc.paragraphs if p.style.name.startswith("Heading 1")]
    expected = [s.heading for s in SECTIONS if s.heading != "Further analyses"]
    assert [h for h in headings if h in expected] == expected
    assert "Key figures" in headings


def test_every_key_figure_is_the_value_stored_in_the_cell_it_names(report, study):
    wb = load_workbook(study, data_only=True)
    doc = Document(str(report))
    key_table = doc.tables[0]
    assert key_table.rows[0].cells[2].text == "Study cell"
    checked = 0
    for row in key_table.rows[1:]:
        label, shown, where = (c.text for c in row.cells)
        first = where.split(",")[0].strip()
        sheet, address = first.split("!")
        cell = wb[sheet][address]
        expected = format_value(cell.value, cell.number_format)
        assert shown.startswith(expected), (label, shown, expected, first)
        checked += 1
    assert checked >= 10


def test_sheet_tables_carry_row_numbers_and_values_of_the_study(report, study):
    wb = load_workbook(study, data_only=True)
    doc = Document(str(report))
    compared = 0
    for table in doc.tables[1:]:
        letters = [c.text for c in table.rows[0].cells]
        if letters[0] != "row":
            continue
        for row in table.rows[1:]:
            r = int(row.cells[0].text)
            for letter, cell in zip(letters[1:], row.cells[1:]):
                stored = wb[_sheet_of(doc, table)][f"{letter}{r}"]
                if isinstance(stored.value, (int, float)):
                    assert cell.text == format_value(stored.value, stored.number_format)
                    compared += 1
    assert compared > 100


def _sheet_of(doc, table) -> str:
    """The study sheet a table came from, read from its caption (the paragraph just before it)."""
    previous = table._tbl.getprevious()
    text = "".join(t.text or "" for t in previous.iter() if t.tag.endswith("}t"))
    return re.match(r"Study sheet (.+?), rows", text).group(1)


def test_every_part_for_the_author_is_marked_and_shaded(report):
    doc = Document(str(report))
    marked = [p for p in doc.paragraphs if PLACEHOLDER_MARK in p.text]
    assert len(marked) == sum(len(s.placeholders) for s in SECTIONS)
    for p in marked:
        assert p.text.startswith(PLACEHOLDER_MARK)
        assert p._p.pPr.find("{http://schemas.openxmlformats.org/wordprocessingml/2006/main}shd") is not None


def test_the_caution_and_no_candidate_rows(report):
    texts = "\n".join(_texts(report))
    assert "statistical indicators to support professional judgment, not legal findings" in texts
    assert "they are not printed here" in texts
    # no candidate's row: none of the demo's applicant ids appears
    assert not any(candidate in texts for candidate in make_demo().ids)


def test_validity_interval_that_includes_zero_is_said_before_utility():
    def row(value, text, address):
        return Figure("Validity", address, value, text)

    content = StudyContent(Path("x.xlsx"))
    content.summary = [("Observed validity (correlation with the criterion)",
                        [row(0.108, "0.108", "B5"), row(-0.049, "-0.049", "C6"), row(0.260, "0.260", "D6")])]
    warning = validity_not_established(content)
    assert warning and "do not establish" in warning and "Validity!B5" in warning
    content.summary[0][1][1] = row(0.02, "0.020", "C6")
    assert validity_not_established(content) is None


@pytest.mark.parametrize("value, fmt, shown", [
    (0.00004, "0.0000", "< 0.0001"), (0.0001, "0.0000", "0.0001"),
    (0.00004, P_FORMAT, "< 0.0001"), (0.0123, P_FORMAT, "0.0123"), (0.5, "0.0%", "50.0%"),
    (613478.4, "#,##0", "613,478"), (0.85123, "0.000", "0.851"), (400, "0", "400"), ("none", "General", "none")])
def test_format_value(value, fmt, shown):
    assert format_value(value, fmt) == shown


def test_a_study_saved_without_values_is_refused_in_one_line(study, tmp_path, capsys):
    copy = tmp_path / "edited.xlsx"
    load_workbook(study).save(copy)   # openpyxl keeps the formulas and drops their values
    with pytest.raises(ReportError, match="never recalculated"):
        write_report(copy, tmp_path / "r.docx", version="test")
    assert main(["report", str(copy), "-o", str(tmp_path / "r.docx")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "trueband recalc" in err[0]
    assert not (tmp_path / "r.docx").exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["edited.xlsx"]   # no temporary copy left


def test_command_refuses_to_overwrite_and_writes_beside_the_study(study, tmp_path, capsys):
    local = tmp_path / "s.xlsx"
    shutil.copy(study, local)
    assert main(["report", str(local)]) == 0
    assert (tmp_path / "s-report.docx").is_file()
    assert main(["report", str(local)]) == 2
    assert "--overwrite" in capsys.readouterr().err
    assert main(["report", str(local), "--overwrite"]) == 0


def test_report_turns_into_pdf_in_writer_with_headings_numbers_and_marks(report, study, soffice, tmp_path):
    if shutil.which("pdftotext") is None:
        pytest.fail("pdftotext (poppler-utils) is required; .ci/run installs it")
    profile = (tmp_path / "profile").as_uri()
    subprocess.run([soffice, f"-env:UserInstallation={profile}", "--headless", "--norestore",
                    "--convert-to", "pdf", "--outdir", str(tmp_path), str(report)],
                   check=True, capture_output=True, timeout=180)
    pdf = tmp_path / "report.pdf"
    text = subprocess.run(["pdftotext", str(pdf), "-"], check=True, capture_output=True, text=True).stdout
    flat = " ".join(text.split())
    for section in SECTIONS:
        if section.heading != "Further analyses":
            assert section.heading in flat
    assert flat.count(PLACEHOLDER_MARK) == sum(len(s.placeholders) for s in SECTIONS)
    wb = load_workbook(study, data_only=True)
    alpha = wb["Reliability"]["B10"]
    assert format_value(alpha.value, alpha.number_format) in flat
    pages = int(re.search(r"Pages:\s+(\d+)", subprocess.run(["pdfinfo", str(pdf)], capture_output=True,
                                                               text=True, check=True).stdout).group(1))
    assert pages <= DEMO_REPORT_PAGES
    assert f"of {pages}" in flat   # the footer's page count
    # Writer draws every chart image (pdfimages lists each picture once; its transparency mask is an "smask" row)
    listed = subprocess.run(["pdfimages", "-list", str(pdf)], check=True, capture_output=True, text=True).stdout
    images = [line for line in listed.splitlines()[2:] if line.split()[2] == "image"]
    assert len(images) == len(_study_charts(study))
    # no table runs off the page: every word Writer placed lies inside its page, short of the right margin's middle
    boxes = subprocess.run(["pdftotext", "-bbox", str(pdf), "-"], check=True, capture_output=True, text=True).stdout
    for page in re.finditer(r'<page width="([0-9.]+)" height="([0-9.]+)">(.*?)</page>', boxes, re.S):
        width = float(page.group(1))
        for word in re.finditer(r'<word xMin="([0-9.]+)" yMin="[0-9.]+" xMax="([0-9.]+)"[^>]*>([^<]*)<', page.group(3)):
            assert float(word.group(2)) <= width - 28.0, (word.group(3), width)   # 28 pt = 1 cm of the 2 cm margin


def test_report_module_loads_python_docx_only_when_writing():
    code = ("import sys, trueband.bridge.study.report as r; "
            "print('docx' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "False"


def test_p_values_below_0_0001_show_as_such_in_libreoffice(soffice, tmp_path):
    # The study's p format must display "< 0.0001" in a real spreadsheet app, not 0.0000: LibreOffice
    # Calc renders it here (CSV export writes cells as shown).
    from openpyxl import Workbook

    wb = Workbook()
    ws = wb.active
    for r, value in enumerate((0.00001, 0.0, 0.04567, 0.5), start=1):
        ws.cell(r, 1, value).number_format = P_FORMAT
    book = tmp_path / "p.xlsx"
    wb.save(book)
    profile = (tmp_path / "profile").as_uri()
    subprocess.run([soffice, f"-env:UserInstallation={profile}", "--headless", "--norestore",
                    "--convert-to", "csv:Text - txt - csv (StarCalc):44,34,76,1,,0,false,true,true",
                    "--outdir", str(tmp_path), str(book)],
                   check=True, capture_output=True, timeout=180)
    shown = (tmp_path / "p.csv").read_text(encoding="utf-8").splitlines()
    assert shown == ["< 0.0001", "< 0.0001", "0.0457", "0.5000"]


def test_the_summary_says_live_that_local_validity_is_not_established(tmp_path):
    # A criterion unrelated to the test (invented noise): the observed validity's interval includes 0, and the
    # Summary's line above the utility figures says so; with the demo's criterion (interval above 0) it is empty.
    # The interval itself is scipy's Fisher-z interval (checked in test_study.py); here only its reading.
    import numpy as np

    from test_study_predictors import table, write_book
    from trueband.bridge.study.words import VALIDITY_NOT_ESTABLISHED

    header, rows, _, _ = table(60)
    rng = np.random.default_rng(5)
    k = header.index("perf")
    for r in rows:
        r[k] = round(float(rng.standard_normal()), 2) if r[k] is not None else None
    setup = [("id column", "id"), ("group column", "group"), ("item columns", "T1:T8"), ("criterion column", "perf")]
    result = make_study(write_book(tmp_path / "d.xlsx", header, rows, setup), tmp_path / "s.xlsx")
    values = load_workbook(result.path, data_only=True)
    low = values[result.cells["r_lower"][0]][result.cells["r_lower"][1]].value
    high = values[result.cells["r_upper"][0]][result.cells["r_upper"][1]].value
    assert low <= 0 <= high
    sheet, where = result.cells["validity_not_established"]
    assert values[sheet][where].value == VALIDITY_NOT_ESTABLISHED
    assert "IF(AND(" in load_workbook(result.path)[sheet][where].value   # a live formula, not a typed text


# --- the charts -------------------------------------------------------------------------------------------------

def _study_charts(study: Path) -> list[tuple[str, str]]:
    """(sheet, the first series' y or value cells) of every chart in the study, as openpyxl's own chart reader (an
    independent reader of the chart parts) finds them."""
    wb = load_workbook(study)
    out = []
    for ws in wb.worksheets:
        for chart in ws._charts:
            first = chart.series[0]
            ref = (first.yVal if first.yVal is not None else first.val).numRef.f
            out.append((ws.title, ref.replace("'", "").replace("$", "")))
    return out


def test_every_chart_of_the_study_is_drawn_with_a_caption_naming_its_cells(report, study):
    charts = _study_charts(study)
    assert len(charts) >= 6   # the demo's item maps, validity scatters, impact bars, score distribution, cuts, fairness
    doc = Document(str(report))
    assert len(doc.inline_shapes) == len(charts)
    captions = [p.text for p in doc.paragraphs if p.text.startswith("Figure: ")]
    assert len(captions) == len(charts)
    for sheet, cells in charts:
        assert any(f"on sheet {sheet} at cell" in c and cells in c for c in captions), (sheet, cells)


def test_the_chart_of_cuts_carries_the_four_fifths_line_and_reads_the_stored_values(study):
    from trueband.bridge.study.report.read import read_study
    from trueband.bridge.study.workbook import ANALYSIS_SHEETS

    content = read_study(study, ANALYSIS_SHEETS)
    cuts = [c for c in content.charts if c.sheet == "Cuts"]
    assert len(cuts) == 1
    line = [s for s in cuts[0].series if s.kind == "line"]
    assert len(line) == 1 and list(line[0].y) == [0.8, 0.8]
    wb = load_workbook(study, data_only=True)
    scatter = next(c for c in content.charts if c.sheet == "Validity")
    first, last = scatter.series[0].y_cells.split("!")[1].split(":")
    assert list(scatter.series[0].y) == [row[0].value for row in wb["Validity"][f"{first}:{last}"]]


@pytest.mark.slow
def test_without_matplotlib_the_report_says_where_each_chart_is(study, tmp_path, monkeypatch, capsys):
    from trueband.bridge.study.report import CHARTS_NOTE

    monkeypatch.setitem(sys.modules, "matplotlib", None)   # import matplotlib now raises ImportError
    out = tmp_path / "plain.docx"
    assert main(["report", str(study), "-o", str(out)]) == 0
    assert capsys.readouterr().err.count(CHARTS_NOTE) == 1
    doc = Document(str(out))
    assert len(doc.inline_shapes) == 0
    notes = [p.text for p in doc.paragraphs if p.text.startswith("Chart “")]
    charts = _study_charts(study)
    assert len(notes) == len(charts)
    for sheet, cells in charts:
        assert any(f"on sheet {sheet} at cell" in n and cells in n and "trueband[charts]" in n for n in notes)


# --- every sheet the study composed, every figure traced to its cell ---------------------------------------------

def _report_cells(doc) -> dict[tuple[str, int, str], str]:
    """(sheet, row, column letter) -> the text the report prints there, from the report's sheet tables."""
    out = {}
    for table in doc.tables:
        letters = [c.text for c in table.rows[0].cells]
        if letters[0] != "row":
            continue
        sheet = _sheet_of(doc, table)
        for row in table.rows[1:]:
            for letter, cell in zip(letters[1:], row.cells[1:]):
                out[(sheet, int(row.cells[0].text), letter)] = cell.text
    return out


def _main_block(ws) -> dict[tuple[int, int], object]:
    """The cells of the sheet's main block of columns (A up to the first column empty on the whole sheet)."""
    cells = {(c.row, c.column): c for row in ws.iter_rows() for c in row if c.value is not None}
    used = {k for _, k in cells}
    width = 1
    while width + 1 in used:
        width += 1
    return {key: c for key, c in cells.items() if key[1] <= width}


def test_every_composed_sheet_is_cited_and_every_number_and_reason_traced_to_its_cell(report, study):
    # Generic over the study's sheets: a sheet or row another part of the study adds is checked without a change
    # here. The report must show every number of each analysis sheet's main block at its row and column, and
    # every "not computable" reason in the cell it qualifies.
    from openpyxl.utils import get_column_letter
    from trueband.bridge.study.report.read import PER_CANDIDATE
    from trueband.bridge.study.workbook import ANALYSIS_SHEETS

    doc = Document(str(report))
    headings = {p.text for p in doc.paragraphs if p.style.name.startswith("Heading")}
    shown = _report_cells(doc)
    wb = load_workbook(study, data_only=True)
    ids = set(make_demo().ids)
    composed = [t for t in wb.sheetnames if t.split(" (")[0] in ANALYSIS_SHEETS
                and t.split(" (")[0] not in PER_CANDIDATE + ("Summary", "Notes")]
    assert {"Impact", "Strata", "Cuts", "Stages", "Groups", "Combined", "Fairness", "DIF", "Cut score",
            "Standard setting", "Content"} <= set(composed)
    numbers = reasons = 0
    for title in composed:
        assert f"Study sheet: {title}" in headings, title
        block = _main_block(wb[title])
        candidate_rows = {r for (r, _), c in block.items() if str(c.value) in ids}
        for (r, k), c in block.items():
            if r in candidate_rows:
                continue
            where = (title, r, get_column_letter(k))
            if isinstance(c.value, (int, float)) and not isinstance(c.value, bool):
                assert shown.get(where) == format_value(c.value, c.number_format), where
                numbers += 1
            elif isinstance(c.value, str) and c.value.startswith("not computable"):
                assert shown.get(where) == c.value, where
                reasons += 1
    assert numbers > 500
    # each sheet's own cautions (bold lines in the study's caution colour) are printed in its part of the report
    from trueband.bridge.study.report.read import Paragraph, read_study
    from trueband.bridge.study.words import CAUTION

    text = _body_text(doc)
    content = read_study(study, ANALYSIS_SHEETS)
    cautions = [(t, b.text) for t in composed for b in content.sheets[t].blocks
                if isinstance(b, Paragraph) and b.caution and b.text != CAUTION]
    assert cautions
    for title, caution in cautions:
        start = text.index(f"Study sheet: {title}\n")
        end = text.find("Study sheet: ", start + 1)
        assert caution in text[start:end if end > 0 else None], (title, caution[:60])


@pytest.mark.slow
def test_the_options_sheet_of_a_study_with_raw_answers_is_reported(tmp_path):
    data = study_data_workbook(tmp_path / "answers.xlsx", make_demo(), cut=24.0, answers=True)
    study = make_study(data, tmp_path / "study.xlsx").path
    out = write_report(study, tmp_path / "r.docx", version="test", charts=False)
    headings = [p.text for p in Document(str(out)).paragraphs if p.style.name.startswith("Heading")]
    assert "Study sheet: Options" in headings
    assert headings.index("Reliability") < headings.index("Study sheet: Options") < headings.index(
        "Validity and its corrections")


# --- what the numbers do not support -----------------------------------------------------------------------------

#: sentences a report must never write from a test that found nothing: absence of evidence is not evidence of absence
NEVER_SAID = ("no adverse impact", "no bias", "not biased", "unbiased", "free of bias", "is fair",
              "no evidence of adverse", "no evidence of bias", "no disparate", "proves")


def _body_text(doc) -> str:
    """The document's text in reading order (paragraphs and table cells as they come)."""
    ns = "{http://schemas.openxmlformats.org/wordprocessingml/2006/main}"
    parts = []
    for p in doc.element.body.iter(ns + "p"):
        parts.append("".join(t.text or "" for t in p.iter(ns + "t")))
    return "\n".join(parts)


@pytest.mark.slow
def test_a_study_with_null_validity_and_no_impact_says_what_the_numbers_do_not_support(tmp_path):
    # Invented data: the criterion is noise unrelated to the test, and the two groups are dealt alternately down the
    # ranking of scores, so their pass rates at the cut are nearly equal. The report must say, before any utility
    # figure, that the validity is not established, and must not turn the non-significant impact and fairness tests
    # into "no adverse impact" or "no bias".
    import numpy as np

    from test_study_predictors import table, write_book
    from trueband.bridge.study.report.plan import FAIRNESS_NOT_SHOWN, IMPACT_NOT_SHOWN
    from trueband.bridge.study.report.read import read_study
    from trueband.bridge.study.workbook import ANALYSIS_SHEETS

    header, rows, test, _ = table(80)
    rng = np.random.default_rng(7)
    k_perf, k_group = header.index("perf"), header.index("group")
    order = np.argsort(-test.sum(axis=1), kind="stable")
    for rank, i in enumerate(order):
        rows[i][k_group] = "A" if rank % 2 == 0 else "B"
        if rows[i][k_perf] is not None:
            rows[i][k_perf] = round(float(3 + 0.6 * rng.standard_normal()), 2)
    setup = [("id column", "id"), ("group column", "group"), ("item columns", "T1:T8"),
             ("criterion column", "perf"), ("cut score", 4), ("test name", "Reasoning Test")]
    study = make_study(write_book(tmp_path / "d.xlsx", header, rows, setup), tmp_path / "s.xlsx").path
    out = write_report(study, tmp_path / "r.docx", version="test", charts=False)
    content = read_study(study, ANALYSIS_SHEETS)
    warning = validity_not_established(content)
    assert warning is not None   # the interval of the noise criterion's r includes 0
    lowest = next(figures[0].value for label, figures in content.summary if label.startswith("Lowest impact ratio"))
    assert lowest >= 0.8   # no comparison below four-fifths: the case where "no adverse impact" would tempt

    text = _body_text(Document(str(out)))
    lowered = text.lower()
    for phrase in NEVER_SAID:
        assert phrase not in lowered, phrase
    assert IMPACT_NOT_SHOWN in text and FAIRNESS_NOT_SHOWN in text
    # the warning comes before the first utility figure, in the key figures and again in the Utility section
    utility_labels, inside = [], False
    for label, figures in content.summary:
        if not figures:
            inside = label == "What is the test worth?"
        elif inside:
            utility_labels.append(label)
    assert utility_labels
    first_utility = min(text.index(label) for label in utility_labels if label in text)
    assert text.index(warning) < first_utility
    utility_section = text.index("\nUtility\n")
    assert text.index(warning, utility_section) < text.index("Study sheet: Utility", utility_section)


def test_a_live_sentence_on_the_summary_does_not_end_the_rows_of_its_heading(report, study):
    # The Summary's live line above the utility figures (a formula in column A) once read as a heading, so the
    # Utility section lost its key figures. Every figure row under "What is the test worth?" opens that section.
    from trueband.bridge.study.report.read import read_study
    from trueband.bridge.study.workbook import ANALYSIS_SHEETS

    content = read_study(study, ANALYSIS_SHEETS)
    assert not any(label.startswith("=") for label, _ in content.summary)
    labels = [label for label, figures in content.summary]
    start = labels.index("What is the test worth?")
    assert content.summary[start + 1][1], "the first row under the utility heading has its figures"
    text = _body_text(Document(str(report)))
    utility = text.index("\nUtility\n")
    assert content.summary[start + 1][0] in text[utility:text.index("Study sheet: Utility", utility)]


def test_table_columns_are_fitted_into_the_page_and_wide_tables_go_landscape():
    # A4 with 2 cm margins (ISO 216): 17 cm between the margins upright, 25.7 cm on its side.
    from docx.shared import Cm

    from trueband.bridge.study.report.layout import column_widths, needs_landscape, usable_width
    from trueband.bridge.study.report.read import Table

    def block(n_cols, text):
        rows = tuple((r, (f"label of row {r} that is rather long",) + (text,) * (n_cols - 1)) for r in range(3, 9))
        return Table(3, 8, tuple("ABCDEFGHIJKLMNOPQRST"[:n_cols]), rows)

    narrow, wide = block(3, "0.123"), block(15, "Selections that flip the exact test")
    assert not needs_landscape(narrow) and needs_landscape(wide)
    assert usable_width(False) == pytest.approx(17.0) and usable_width(True) == pytest.approx(25.7)
    for table, landscape in ((narrow, False), (wide, True), (wide, False)):
        widths = column_widths(table, landscape)
        assert len(widths) == len(table.columns) + 1
        assert sum(widths) <= Cm(usable_width(landscape)) + len(widths)   # EMU rounding, one per column
        assert min(widths) > 0
