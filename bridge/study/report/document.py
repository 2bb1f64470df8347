"""Writing the report document (Office Open XML word-processing, through python-docx) from a read study."""

from __future__ import annotations

import datetime as _dt
from pathlib import Path

from docx import Document
from docx.enum.section import WD_ORIENT
from docx.enum.text import WD_ALIGN_PARAGRAPH
from docx.oxml import OxmlElement
from docx.oxml.ns import qn
from docx.shared import Cm, Pt, RGBColor

from ..words import CAUTION
from .plan import PLACEHOLDER_MARK, SECTIONS, Section, section_of
from .charts import StudyChart
from .layout import column_widths, narrow_margins, needs_landscape, orient, repeat_header
from .read import Figure, Heading, Paragraph, StudyContent, Table

__all__ = ["compose", "validity_not_established"]

#: the report's own colours: dark slate text accents and a light warm grey for the author's parts
_ACCENT = RGBColor(0x2F, 0x3E, 0x4E)
_CAUTION = RGBColor(0x6B, 0x2A, 0x0B)
_SHADE = "EDE8E0"


def _shade(paragraph, fill: str = _SHADE) -> None:
    ppr = paragraph._p.get_or_add_pPr()
    shd = OxmlElement("w:shd")
    shd.set(qn("w:val"), "clear")
    shd.set(qn("w:color"), "auto")
    shd.set(qn("w:fill"), fill)
    ppr.append(shd)


def _field(run, instruction: str) -> None:
    fld = OxmlElement("w:fldSimple")
    fld.set(qn("w:instr"), instruction)
    inner = OxmlElement("w:r")
    text = OxmlElement("w:t")
    text.text = "1"
    inner.append(text)
    fld.append(inner)
    run._r.addnext(fld)


def _header_footer(doc, title: str, built: str, version: str) -> None:
    section = doc.sections[0]
    header = section.header.paragraphs[0]
    header.text = title
    header.runs[0].font.size = Pt(8)
    footer = section.footer.paragraphs[0]
    footer.alignment = WD_ALIGN_PARAGRAPH.CENTER
    run = footer.add_run(f"built {built} by trueband {version} · page ")
    run.font.size = Pt(8)
    _field(run, "PAGE")
    # fields are inserted after their run: write the rest as further runs in order
    tail = footer.add_run(" of ")
    tail.font.size = Pt(8)
    _field(tail, "NUMPAGES")


def _widths(table, widths) -> None:
    """Fixed column widths (Writer and Word both honour the grid and the cells' widths together)."""
    table.autofit = False
    for column, width in zip(table.columns, widths):
        column.width = width
    for row in table.rows:
        for cell, width in zip(row.cells, widths):
            cell.width = width


def _placeholder(doc, text: str) -> None:
    p = doc.add_paragraph()
    mark = p.add_run(PLACEHOLDER_MARK + " ")
    mark.bold = True
    p.add_run(text).italic = True
    _shade(p)


def _caution(doc, text: str) -> None:
    p = doc.add_paragraph()
    run = p.add_run(text)
    run.bold = True
    run.font.color.rgb = _CAUTION


def _figures_table(doc, rows: list[tuple[str, list[Figure]]]) -> None:
    rows = [(label, figures) for label, figures in rows if figures]
    if not rows:
        return
    table = doc.add_table(rows=1, cols=3)
    table.style = "Table Grid"
    for cell, text in zip(table.rows[0].cells, ("Figure", "Value", "Study cell")):
        cell.text = text
        cell.paragraphs[0].runs[0].bold = True
    for label, figures in rows:
        cells = table.add_row().cells
        cells[0].text = label
        if len(figures) == 3:   # an estimate and its interval
            cells[1].text = f"{figures[0].text} [{figures[1].text}, {figures[2].text}]"
        else:
            cells[1].text = "; ".join(f.text for f in figures)
        cells[2].text = ", ".join(f.where for f in figures)
    _widths(table, (Cm(8.0), Cm(4.5), Cm(4.5)))
    doc.add_paragraph()


def _sheet_table(doc, sheet: str, block: Table) -> None:
    rows = block.first_row, block.last_row
    caption = doc.add_paragraph(f"Study sheet {sheet}, rows {rows[0]}–{rows[1]}: a number's cell is its column "
                                "letter and row number.")
    caption.runs[0].font.size = Pt(8)
    table = doc.add_table(rows=1, cols=len(block.columns) + 1)
    table.style = "Table Grid"
    header = table.rows[0].cells
    header[0].text = "row"
    for cell, letter in zip(header[1:], block.columns):
        cell.text = letter
    for r, texts in block.rows:
        cells = table.add_row().cells
        cells[0].text = str(r)
        for cell, text in zip(cells[1:], texts):
            cell.text = text
    _widths(table, column_widths(block, doc.sections[-1].orientation == WD_ORIENT.LANDSCAPE))
    repeat_header(table)
    narrow_margins(table)
    for row in table.rows:
        for cell in row.cells:
            for p in cell.paragraphs:
                for run in p.runs:
                    run.font.size = Pt(7.5)
    doc.add_paragraph()


#: what the report says where a chart is not drawn because matplotlib is missing
CHARTS_EXTRA = 'pip install "trueband[charts]"'


def _has_points(chart: StudyChart) -> bool:
    return any(isinstance(v, (int, float)) and not isinstance(v, bool) for s in chart.series for v in s.y)


def _chart(doc, chart: StudyChart, draw) -> None:
    """The chart drawn as an image with its caption, or (``draw`` None, or nothing to draw) where it is."""
    where = f"the chart on sheet {chart.sheet} at cell {chart.anchor}"
    if draw is not None and _has_points(chart):
        from io import BytesIO

        doc.add_picture(BytesIO(draw(chart)), width=Cm(16.0))
        doc.paragraphs[-1].alignment = WD_ALIGN_PARAGRAPH.CENTER
        caption = doc.add_paragraph(f"Figure: {chart.title}. Drawn for this report from {where}, with the values "
                                    f"stored in its cells ({chart.sources()}).")
        caption.runs[0].font.size = Pt(8)
        return
    why = (f"not drawn here: install the charts extra ({CHARTS_EXTRA}) and write the report again, or open "
           "the study to see it" if draw is None else "not drawn: its cells hold no numbers")
    p = doc.add_paragraph()
    p.add_run(f"Chart “{chart.title}”: ").bold = True
    p.add_run(f"{where}, rows {chart.row} onward; its data: {chart.sources()}. The chart is {why}.")
    _shade(p, "F2F2F2")


def _sheet(doc, content: StudyContent, title: str, draw=None) -> None:
    # a sheet with a table too wide for a portrait page is printed on landscape pages, whole
    orient(doc, any(needs_landscape(b) for b in content.sheets[title].blocks if isinstance(b, Table)))
    doc.add_heading(f"Study sheet: {title}", level=2)
    charts = [c for c in content.charts if c.sheet == title]
    for block in content.sheets[title].blocks:
        start = block.first_row if isinstance(block, Table) else block.row
        while charts and start and charts[0].row <= start:
            _chart(doc, charts.pop(0), draw)
        if isinstance(block, Heading):
            doc.add_heading(block.text, level=3)
        elif isinstance(block, Paragraph):
            if block.text == CAUTION:
                continue   # said once at the start and once under Cautions
            if block.caution:
                _caution(doc, block.text)
            else:
                doc.add_paragraph(block.text)
        elif isinstance(block, Table):
            _sheet_table(doc, title, block)
    for chart in charts:
        _chart(doc, chart, draw)


def validity_not_established(content: StudyContent) -> str | None:
    """The sentence to print when the observed validity's interval includes zero, else None."""
    for label, figures in content.summary:
        if label.startswith("Observed validity") and len(figures) == 3:
            values = [f.value for f in figures]
            if all(isinstance(v, (int, float)) for v in values) and values[1] <= 0 <= values[2]:
                return (f"The observed validity's interval includes zero ({figures[0].text}, interval "
                        f"{figures[1].text} to {figures[2].text}; {figures[0].where}): these data do not establish "
                        "that the test predicts the criterion locally. The utility figures below are conditional on "
                        "a validity the data do not establish.")
    return None


def _section(doc, content: StudyContent, section: Section, shown: set[str], draw=None) -> None:
    orient(doc, False)
    doc.add_heading(section.heading, level=1)
    if section.intro:
        doc.add_paragraph(section.intro)
    if section.caution and any(section_of(t) == section.heading for t in content.order):
        _caution(doc, section.caution)
    if section.heading == "Utility" or section.heading == "Validity and its corrections":
        warning = validity_not_established(content)
        if warning:
            _caution(doc, warning)
    if section.summary_heading:
        rows, inside = [], False
        for label, figures in content.summary:
            if not figures:
                inside = label == section.summary_heading
            elif inside:
                rows.append((label, figures))
        _figures_table(doc, rows)
    for text in section.placeholders:
        _placeholder(doc, text)
    titles = [t for t in content.order if t not in shown and t != "Summary" and t != "Notes"
              and section_of(t) == section.heading]
    for title in titles:
        shown.add(title)
        _sheet(doc, content, title, draw)


def _notes(doc, content: StudyContent, part: str) -> None:
    """The Notes sheet's cautions (part "cautions") or its methods and references (part "references")."""
    if "Notes" not in content.sheets:
        return
    in_refs = False
    for block in content.sheets["Notes"].blocks:
        if isinstance(block, Heading):
            in_refs = block.text.lower().startswith("methods and references")
            if (part == "references") == in_refs:
                doc.add_heading(block.text, level=2)
            continue
        if (part == "references") != in_refs or (isinstance(block, Paragraph) and block.text == CAUTION):
            continue
        if isinstance(block, Paragraph):
            doc.add_paragraph(block.text)
        else:
            _sheet_table(doc, "Notes", block)


def compose(content: StudyContent, out: Path, *, version: str, charts: bool = True) -> None:
    """Write the report for ``content`` to ``out`` (a .docx); its charts drawn when ``charts`` and matplotlib is
    installed, else said where they are."""
    from . import draw as drawing

    draw = drawing.draw if charts and drawing.available() else None
    doc = Document()
    sec = doc.sections[0]
    sec.orientation = WD_ORIENT.PORTRAIT
    sec.page_width, sec.page_height = Cm(21.0), Cm(29.7)
    for side in ("left_margin", "right_margin", "top_margin", "bottom_margin"):
        setattr(sec, side, Cm(2.0))
    doc.styles["Normal"].font.size = Pt(10)
    test = content.settings.get("test name") or "the selection procedure"
    who = " — ".join(str(x) for x in (content.settings.get("organisation"), content.settings.get("job title")) if x)
    title = f"Validation report: {test}" + (f" ({who})" if who else "")
    built = _dt.date.today().isoformat()
    _header_footer(doc, title, built, version)
    heading = doc.add_heading(title, level=0)
    for run in heading.runs:
        run.font.color.rgb = _ACCENT
    doc.add_paragraph(f"Written by trueband {version} on {built} from the study workbook {content.path.name}. "
                      "Every number below is read from that workbook; its cell is given beside it (for example "
                      "Validity!B5) so that a reviewer can trace it.")
    _caution(doc, CAUTION)
    doc.add_heading("Key figures", level=1)
    warning = validity_not_established(content)
    if warning:
        _caution(doc, warning)
    _figures_table(doc, content.summary)
    shown: set[str] = set()
    for section in SECTIONS:
        if section.heading == "Further analyses":
            rest = [t for t in content.order if t not in shown and t not in ("Summary", "Notes")]
            if not rest:
                continue
        if section.heading == "Cautions and limits":
            orient(doc, False)
            doc.add_heading(section.heading, level=1)
            _caution(doc, CAUTION)
            _notes(doc, content, "cautions")
            sheets = list(dict.fromkeys(c.sheet for c in content.charts))
            if sheets:
                doc.add_paragraph("The study's charts are on its sheets " + ", ".join(sheets) + (
                    "; they are drawn above from the values stored in their cells (the study's own charts follow "
                    "the cells when the workbook is recalculated)." if draw is not None else
                    f"; they are not drawn in this report (install the charts extra: {CHARTS_EXTRA}); open the "
                    "workbook to see them."))
            if content.data_sheets:
                doc.add_paragraph("The candidates' data are in the study's sheets " + ", ".join(content.data_sheets)
                                  + "; they are not printed here.")
            continue
        if section.heading == "References":
            orient(doc, False)
            doc.add_heading(section.heading, level=1)
            _notes(doc, content, "references")
            continue
        _section(doc, content, section, shown, draw)
    doc.save(str(out))
