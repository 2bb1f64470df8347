"""The study in print (issue 20): the print pass's choices, and LibreOffice's PDF export of the demo study and of
its ``recalc --values`` copy read back with poppler's ``pdftotext -bbox-layout`` (see ``print_check.py``): no text
over text, every printed cell's text whole, no more pages than the README states. Each check is shown to fail
on a small workbook made to break it."""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
from openpyxl import Workbook, load_workbook
from openpyxl.styles import Alignment

from trueband.bridge.study import charts, printing
from trueband.bridge.study.grid import HEADER_FILL, INK, INPUT_FILL, Grid
from trueband.bridge.study.setup import SetupError

sys.path.insert(0, str(Path(__file__).parent))
from print_check import (cut_cells, first_column_copy, found, overlaps, page_sheets, pdf_pages,  # noqa: E402
                         printed_texts, sideways_pages, split_rows, to_pdf)

ROOT = Path(__file__).resolve().parents[1]


# ---------------------------------------------------------------- the print pass, without LibreOffice

@pytest.mark.parametrize("currency, expected", [("EUR", '#,##0 "EUR"'), ("usd", '#,##0 "usd"'), ("$", '"$"#,##0'),
                                                ("€", '"€"#,##0'), (" GBP ", '#,##0 "GBP"')])
def test_money_format_shows_the_currency(currency, expected):
    assert printing.money_format(currency) == expected


@pytest.mark.parametrize("currency", ['"', "", "a;b", "TOOLONGCODE", "[$]"])
def test_money_format_refuses_what_would_break_the_format(currency):
    with pytest.raises(SetupError, match="currency"):
        printing.money_format(currency, "Setup!B30")


def _lightness(hex_colour: str) -> float:
    """CIE 1976 L* of an sRGB colour (sRGB transfer function of IEC 61966-2-1; D65 white)."""
    def linear(v):
        v /= 255
        return v / 12.92 if v <= 0.04045 else ((v + 0.055) / 1.055) ** 2.4
    r, g, b = (linear(int(hex_colour[k:k + 2], 16)) for k in (0, 2, 4))
    y = 0.2126 * r + 0.7152 * g + 0.0722 * b
    return 116 * y ** (1 / 3) - 16 if y > 216 / 24389 else y * 24389 / 27


def test_palette_reads_in_grey_print():
    # each pair that shares a page differs by at least 10 in CIE L* (a step readers tell apart in grey; common
    # practice), and the chart series differ by dashes and markers too
    for group in ((INK, HEADER_FILL, INPUT_FILL, "FFFFFF"), charts.SERIES_COLOURS,
                  (charts.BELOW_CUT, charts.AT_OR_ABOVE_CUT)):
        values = sorted(_lightness(c) for c in group)
        assert all(b - a >= 10 for a, b in zip(values, values[1:])), (group, values)
    assert len(set(charts.SERIES_DASHES)) == len(charts.SERIES_DASHES)
    assert len(set(charts.SERIES_MARKERS)) == len(charts.SERIES_MARKERS)
    assert _lightness("FFFFFF") == pytest.approx(100, abs=1e-6) and _lightness("000000") == 0


def test_lay_out_widens_a_cut_label_and_wraps_a_long_one():
    g = Grid("Sheet")
    g.widths.update({1: 10, 2: 12})
    g.set(1, 1, "Reference group (edit to compare)")
    g.set(1, 2, 0.5)
    g.set(2, 1, "word " * 40)
    g.set(2, 2, 0.5)
    printing._lay_out_grid(g, "T", "2026-01-01", '#,##0 "USD"')
    assert g.widths[1] >= len("Reference group (edit to compare)") * printing.CHAR_UNITS
    assert (2, 1) in g.wrapped and (1, 1) not in g.wrapped
    assert g.heights[2] >= 3 * printing.LINE_PT  # 200 characters in a column of 64 units: at least 3 lines


def test_lay_out_moves_a_chart_off_text_and_breaks_before_a_block_that_would_not_fit():
    g = Grid("Sheet")
    for r in range(1, 30):
        g.set(r, 1, f"row {r}")
    for r in range(32, 60):
        g.set(r, 1, f"second table {r}")
    chart = charts.item_map(charts.Reference(range_string="'Sheet'!$B$1:$B$3"),
                            charts.Reference(range_string="'Sheet'!$C$1:$C$3"))
    g.charts.append((chart, "A5"))
    printing._lay_out_grid(g, "T", "2026-01-01", '#,##0 "USD"')
    anchor_row = int(re.sub(r"[A-Z]+", "", g.charts[0][1]))
    assert anchor_row >= 60  # below the text it covered (both tables have text in column A)
    assert g.page.scale >= printing.MIN_SCALE
    assert g.page.breaks  # three blocks of about 29 rows and a chart do not fit on one page


def test_lay_out_keeps_chart_data_columns_out_of_print():
    g = Grid("Sheet")
    g.set(1, 1, "label")
    g.set(1, 2, 1.0)
    g.set(1, 20, "chart data")  # after a gap of more than three empty columns
    printing._lay_out_grid(g, "T", "2026-01-01", '#,##0 "USD"')
    assert g.page.area == "A1:B1"


# ---------------------------------------------------------------- LibreOffice's PDF

def _stated_pages() -> tuple[int, int]:
    """The page counts the README states for the demo study and its values copy."""
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    m = re.search(r"prints on at most (\d+) pages \(LibreOffice's PDF export\); its `recalc --values` copy on at "
                  r"most (\d+)", text)
    assert m, "the README states the demo study's page count"
    return int(m.group(1)), int(m.group(2))


def _fixture_book(path: Path) -> Path:
    """A small workbook made to break each check: a label cut by its neighbour, a wrapped header in a row too
    low for it (it covers the next row), a row wider than a page, and five pages of rows."""
    wb = Workbook()
    ws = wb.active
    ws.title = "Broken"
    ws.column_dimensions["A"].width = 10
    ws["A1"] = "Reference group (edit to compare with another)"
    ws["B1"] = 0.25
    ws["A3"] = "Difficulty (proportion correct) of the item among all applicants"
    ws["A3"].alignment = Alignment(wrap_text=True, vertical="top")
    ws.row_dimensions[3].height = 15
    ws["A4"] = "firstdatarow"
    for c in range(1, 31):  # a header row of 30 columns: wider than a page, so split sideways
        ws.cell(6, c, f"head{c}")
    for r in range(10, 260):
        ws.cell(r, 1, r)
    ws.oddHeader.right.text = "&A"
    numbers = wb.create_sheet("Numbers")  # a table whose right-hand columns hold numbers only: split sideways
    for r in range(1, 6):
        numbers.cell(r, 1, f"label {r}")
        for c in range(2, 31):
            numbers.cell(r, c, 12345.678 + c)
    numbers.oddHeader.right.text = "&A"
    wb.save(path)
    return path


@pytest.fixture(scope="module")
def fixture_pages(tmp_path_factory, soffice):
    folder = tmp_path_factory.mktemp("print_fixture")
    book = _fixture_book(folder / "broken.xlsx")
    pdf = to_pdf(soffice, book, folder, folder / "profile")
    first = first_column_copy(book, folder / "broken-first.xlsx")
    return book, pdf_pages(pdf), pdf_pages(to_pdf(soffice, first, folder / "first", folder / "profile"))


def test_the_checks_fail_on_a_broken_workbook(fixture_pages):
    book, pages, first_column = fixture_pages
    assert page_sheets(pages)[0] == "Broken"
    cut = cut_cells(book, pages)
    assert ("Broken", "A1", "(edit") in cut or ("Broken", "A1", "group") in cut, cut
    found = overlaps(pages)
    assert any("firstdatarow" in (a, b) for _, a, b in found), found
    assert len(pages) > 3  # over a limit of 3 pages
    assert ("Broken", 6) in split_rows(book, pages)  # its right-hand columns printed on a further page
    # a table of numbers split sideways: its rows have one text cell each, so split_rows cannot see it; the page
    # count against its first column's alone does
    assert not [row for sheet, row in split_rows(book, pages) if sheet == "Numbers"]
    sideways = sideways_pages(pages, first_column)
    assert sideways["Numbers"][0] > sideways["Numbers"][1] == 1, sideways
    assert "Broken" in sideways


@pytest.fixture(scope="module")
def demo_pdfs(tmp_path_factory, soffice):
    if shutil.which("pdftotext") is None:
        pytest.skip("pdftotext (poppler-utils) is not installed")
    from trueband.bridge.study.build import make_study

    folder = tmp_path_factory.mktemp("print_demo")
    study = make_study(ROOT / "workbooks" / "demo" / "osterfell-applicants.xlsx", folder / "study.xlsx").path
    values = folder / "values.xlsx"
    subprocess.run([sys.executable, "-m", "trueband.bridge", "recalc", str(study), "--values", "-o", str(values)],
                   check=True, capture_output=True, timeout=900)
    profile = folder / "profile"
    out = {}
    for name, book in (("study", study), ("values", values)):
        first = first_column_copy(book, folder / f"{name}-first.xlsx")
        out[name] = (book, pdf_pages(to_pdf(soffice, book, folder / name, profile)))
        out[f"{name}-first"] = (first, pdf_pages(to_pdf(soffice, first, folder / f"{name}-first", profile)))
    return out


@pytest.mark.parametrize("which", ["study", "values"])
def test_demo_prints_without_text_over_text(demo_pdfs, which):
    _, pages = demo_pdfs[which]
    assert overlaps(pages) == []


@pytest.mark.parametrize("which", ["study", "values"])
def test_demo_prints_every_cell_whole(demo_pdfs, which):
    book, pages = demo_pdfs[which]
    assert cut_cells(book, pages) == []


@pytest.mark.parametrize("which", ["study", "values"])
def test_demo_pages_within_the_readme(demo_pdfs, which):
    book, pages = demo_pdfs[which]
    limit = _stated_pages()[0 if which == "study" else 1]
    assert len(pages) <= limit
    printed = set(page_sheets(pages))
    wb = load_workbook(book, read_only=True)
    # the per-applicant sheets are out of the default print; every analysis sheet prints
    assert not printed & {"Bands", "Scored items", "Applicants"}
    assert {"Summary", "Reliability", "Items", "Validity", "Impact", "Notes"} <= printed
    wb.close()


@pytest.mark.parametrize("which", ["study", "values"])
def test_demo_tables_are_not_split_sideways(demo_pdfs, which):
    # issue 20: every analysis sheet of the demo prints across one page (Impact, Cuts and Content did not: their
    # tables are now stacked in two); a sheet on more pages than its first column alone has columns sideways
    book, pages = demo_pdfs[which]
    assert split_rows(book, pages) == []
    assert sideways_pages(pages, demo_pdfs[f"{which}-first"][1]) == {}


def test_values_copy_prints_its_notice_whole(demo_pdfs):
    # issue 20: the values notice was one long cell outside the print range; now its lines are inside it, and
    # every word of them is printed on its sheet's pages
    from trueband.bridge.engine.values_mode import NOTICE_OPENING

    book, pages = demo_pdfs["values"]
    texts = {(sheet, cell): text for sheet, cell, text in printed_texts(book)}
    words: dict[str, set[str]] = {}
    for name, page in zip(page_sheets(pages), pages):
        words.setdefault(name, set()).update(w[4] for w in page["words"])
    opened = [(sheet, cell) for (sheet, cell), text in texts.items() if text.startswith(NOTICE_OPENING)]
    assert {"Summary", "Reliability", "Validity", "Impact", "Notes"} <= {sheet for sheet, _ in opened}
    for sheet, cell in opened:
        col, row = re.fullmatch(r"([A-Z]+)(\d+)", cell).groups()
        row = int(row)
        lines = []
        while (sheet, f"{col}{row}") in texts:
            lines.append(texts[(sheet, f"{col}{row}")])
            row += 1
        assert " ".join(lines).endswith("then trueband recalc."), (sheet, cell)  # every line is printed
        missing = [w for w in " ".join(lines).split() if not found(w, words.get(sheet, set()))]
        assert missing == [], (sheet, cell, missing)


def test_demo_pages_carry_header_and_footer(demo_pdfs):
    _, pages = demo_pdfs["study"]
    first = " ".join(w[4] for w in pages[0]["words"])
    assert "Validation study:" in first and f"Page 1 of {len(pages)}" in first and "trueband" in first
    assert re.search(r"Built \d{4}-\d{2}-\d{2}", first)


# ---------------------------------------------------------------- the currency setting and the print setup of a study

def _small_study(tmp_path, **more):
    from test_study_setup import SETUP, small_table, write_book
    from trueband.bridge.study.build import build_study

    header, rows = small_table()
    book = write_book(tmp_path / "data.xlsx", header, rows, {**SETUP, **more})
    return build_study(read_study_data(book), tmp_path / "study.xlsx").path


def _money_formats(path):
    wb = load_workbook(path)
    return {ws["B16"].number_format for ws in [wb["Utility"]]}


def read_study_data(book):
    from trueband.bridge.study.data_workbook import read_study_data as read
    return read(book)


def test_money_shows_the_currency_setting_and_usd_by_default(tmp_path):
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    assert _money_formats(_small_study(tmp_path / "a")) == {'#,##0 "USD"'}
    assert _money_formats(_small_study(tmp_path / "b", currency="€")) == {'"€"#,##0'}


def test_a_bad_currency_names_the_setting(tmp_path):
    with pytest.raises(SetupError, match="currency"):
        _small_study(tmp_path, currency='E"UR')


def test_study_sheets_print_with_header_footer_and_the_data_out_of_print(tmp_path):
    wb = load_workbook(_small_study(tmp_path))
    summary = wb["Summary"]
    assert summary.page_setup.orientation == "landscape" and summary.page_setup.scale >= printing.MIN_SCALE
    assert summary.oddFooter.center.text == "Page &P of &N" and summary.oddHeader.right.text == "&A"
    assert summary.oddHeader.left.text.startswith("Validation study")
    for title in ("Candidates", "Bands"):
        assert wb[title].print_area == f"'{title}'!$AMJ$1"


def test_a_sheet_wider_than_a_page_repeats_its_label_column():
    g = Grid("Sheet")
    g.set(1, 1, "label")
    for c in range(2, 40):
        g.set(1, c, 1.0)  # 38 columns of numbers: wider than a page at the lowest scale
    printing._lay_out_grid(g, "T", "2026-01-01", '#,##0 "USD"')
    assert g.page.label_column and g.page.scale == printing.MIN_SCALE
    narrow = Grid("Narrow")
    narrow.set(1, 1, "label")
    narrow.set(1, 2, 1.0)
    printing._lay_out_grid(narrow, "T", "2026-01-01", '#,##0 "USD"')
    assert not narrow.page.label_column


# ---------------------------------------------------------------- the templates and the charts take the study's palette

def _fills_and_inks(path):
    wb = load_workbook(path)
    fills, inks, inputs = set(), set(), []
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for c in row:
                if c.fill is not None and c.fill.fill_type == "solid":
                    fills.add(str(c.fill.fgColor.rgb)[-6:].upper())
                    if str(c.fill.fgColor.rgb)[-6:].upper() == INPUT_FILL:
                        inputs.append(c)
                if c.font is not None and c.font.color is not None and isinstance(c.font.color.rgb, str):
                    inks.add(c.font.color.rgb[-6:].upper())
    return fills, inks, inputs


@pytest.mark.parametrize("make", ["study_data_workbook", "scoring_template", "impact_template"])
def test_templates_use_the_study_palette(tmp_path, make):
    from trueband.bridge.study import templates
    from trueband.bridge.study.grid import CAUTION_INK
    from trueband.bridge.study.demo import make_demo

    path = tmp_path / "t.xlsx"
    if make == "study_data_workbook":
        templates.study_data_workbook(path, make_demo(60), answers=True)
    else:
        getattr(templates, make)(path)
    fills, inks, inputs = _fills_and_inks(path)
    # no pale yellow or pale blue of the office suites' conventions: only the palette's header and input fills
    assert fills and fills <= {HEADER_FILL, INPUT_FILL}, fills
    assert inks <= {INK, CAUTION_INK}, inks
    assert inputs and all(c.border.left.style == "dashed" for c in inputs)  # marked in grey print too


def test_the_cuts_chart_draws_four_fifths_as_the_palettes_dashed_dark_line():
    import numpy as np
    from openpyxl.chart import ScatterChart
    from xml.etree import ElementTree
    from trueband.bridge.study.sheets import cuts

    g = Grid(cuts.SHEET)
    chart = ScatterChart()
    cuts._line(g, chart, 10, np.array([20.0, 30.0, 40.0]))
    xml = chart._write()
    text = xml if isinstance(xml, str) else ElementTree.tostring(xml).decode()
    assert "C00000" not in text.upper() and "FF0000" not in text.upper()  # not a warning red
    assert f'val="{INK}"' in text and 'prstDash val="dash"' in text, text


def test_a_sheet_too_wide_narrows_empty_columns_and_wraps_labels_but_keeps_built_texts():
    g = Grid("Wide")
    g.set(1, 1, "label")
    for c in range(2, 30):
        if c != 5:  # column E stays empty: a gap between tables
            g.set(2, c, "=1+1", "coef")
    g.set(3, 2, "a label with several words", None)  # cut by the next cell: wraps when its column narrows
    g.set(3, 3, 1.0)
    g.set(4, 6, '=A1&" ("&B1&")"')  # a formula that builds a text: narrowed no further than its estimated text
    g.widths[6] = 16.0
    g.set(5, 7, '=IF(A1>0,"a very long reading of the steps that runs far","short")')  # wraps: a cell to its right
    g.set(5, 8, 2.0)
    printing._lay_out_grid(g, "T", "2026-01-01", '#,##0 "USD"')
    assert g.widths[5] == printing.EMPTY_COLUMN_UNITS
    assert (3, 2) in g.wrapped and g.widths[2] < len("a label with several words") * printing.CHAR_UNITS
    assert g.widths[6] >= len("0.0000 (0.0000)") * printing.CHAR_UNITS
    assert (5, 7) in g.wrapped and g.heights[5] >= 2 * printing.LINE_PT  # its longest branch measured
    assert g.heights[3] >= 2 * printing.LINE_PT  # the wrapped label gets its lines


@pytest.mark.parametrize("formula, expected", [
    ('=IF(A1<0.0005,"p < 0.001","p = "&TEXT(A1,"0.000"))', "p < 0.001"),  # the longest branch
    ('="Step: "&IF(A1>0,"the lines differ","they meet")', "Step: the lines differ"),
    ('=MID(IF(A1<0,"; weak","")&IF(B1<0,"; hard",""),3,400)', "; weak; hard"),  # a part of a built text
    ('=IF(A1=B1,"",IF(C1<2,"not computable: too few",C1/2))', None),  # a number, or a reason in its place
    ('=SUM(A1:A4)', None),
    ('plain text', None),
])
def test_built_text_estimates_a_formulas_text_from_its_literals(formula, expected):
    assert printing.built_text(formula) == expected


def test_a_linked_long_text_wraps_and_a_too_wide_sheet_narrows_column_a():
    # the linked reading: the Summary shows Fairness!B4, a text too long for a page at the lowest scale
    reading = "No detectable difference between the lines " * 8
    source, summary = Grid("Fairness"), Grid("Summary")
    source.set(4, 2, "=IF(A1>0,1,2)")
    source.values[(4, 2)] = reading  # what StudyContext.put computed when the study was built
    summary.set(3, 1, "Reading of the steps")
    summary.set(3, 2, "='Fairness'!B4")
    printing._link_values({"Fairness": source, "Summary": summary})
    printing._lay_out_grid(summary, "T", "2026-01-01", '#,##0 "USD"')
    assert (3, 2) in summary.wrapped and summary.heights[3] >= 3 * printing.LINE_PT
    wide = Grid("Wide")
    wide.widths[1] = 60.0
    for r in range(1, 4):
        wide.set(r, 1, "a row label of many words that makes column A wide")
        for c in range(2, 16):
            wide.set(r, c, 1.0)
    printing._lay_out_grid(wide, "T", "2026-01-01", '#,##0 "USD"')
    assert wide.widths[1] < 60.0 and (1, 1) in wide.wrapped and not wide.page.label_column


def test_the_printed_width_counts_whole_columns():
    # a text alone at the right of a row runs on into an empty column; LibreOffice prints that column whole, so
    # the scale must fit the whole columns (before: the Summary, Cut score and Reliability sheets of the demo
    # printed a few letters of their last column on a page of their own)
    g = Grid("Sheet")
    g.widths.update({1: 64.0, 2: 24.0, 3: 16.0, 4: 24.0})
    for r in range(1, 4):
        g.set(r, 1, f"a label of row {r}")
        for c in (2, 3, 4):
            g.set(r, c, 0.5)
    g.set(2, 5, "95% interval")  # runs on over the empty columns to its right
    printing._lay_out_grid(g, "T", "2026-01-01", '#,##0 "USD"')
    last = re.fullmatch(r"A1:([A-Z]+)\d+", g.page.area).group(1)
    printed = sum(g.widths.get(c, 8.43) for c in range(1, printing.column_index_from_string(last) + 1))
    assert printed * printing.UNIT_PT * g.page.scale / 100 <= printing.PRINT_WIDTH_PT + 0.5
    assert g.widths[6] < 8.43  # the empty column the text runs into is narrowed to the text's end
