"""The study's sheet parts are written in the regular form (bridge/workbook/xml_form.py), so the recalculation
reads and patches them with its fast patterns instead of sending each through the XML parser (speed: the
parser path was about a quarter of a study's time). openpyxl writes characters beyond ASCII as character
references (``&#215;``), a form the fast readers leave to the parser; the study writes them as UTF-8.
Checked: every sheet part of a built study passes the pre-scan, and reads back (openpyxl, an independent
reader) with the same texts."""

from __future__ import annotations

import zipfile

from openpyxl import load_workbook

from trueband.bridge.study.build import make_study
from trueband.bridge.study.demo import make_demo
from trueband.bridge.study.templates import study_data_workbook
from trueband.bridge.workbook.xml_form import why_irregular


def test_study_sheets_are_in_the_regular_form(tmp_path):
    data = study_data_workbook(tmp_path / "data.xlsx", make_demo(80), cut=24)
    result = make_study(data, tmp_path / "study.xlsx")
    with zipfile.ZipFile(result.path) as z:
        sheets = {n: z.read(n) for n in z.namelist() if n.startswith("xl/worksheets/") and n.endswith(".xml")}
    assert sheets and {n: why_irregular(x) for n, x in sheets.items()} == dict.fromkeys(sheets)
    assert any("×".encode() in x for x in sheets.values())  # a character beyond ASCII, written as UTF-8
    texts = [c.value for ws in load_workbook(result.path, read_only=True).worksheets for row in ws.iter_rows()
             for c in row if isinstance(getattr(c, "value", None), str)]
    assert any("×" in t for t in texts) and not any("&#" in t for t in texts)
