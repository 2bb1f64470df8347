"""LibreOffice Calc shows the values trueband stored, not values of its own.

The display book uses registered functions LibreOffice does not know
(SCORE_CI, SCORE_BAND, SEM): a cell showing a number there can only show
the value stored by ``trueband recalc``, so the check also proves the file
does not make the app recalculate on open. LibreOffice (headless, private
profile) converts the recalculated file to CSV, one file per sheet, and
every formula cell is compared with the value stored, to the 15
significant digits a spreadsheet shows.

Known difference, asserted as such: LibreOffice recomputes on load every
formula cell whose stored value is an error value, so a trueband error cell
shows LibreOffice's own error (``#NAME?`` for a function it does not know)
instead of trueband's code; it is an error either way.
"""

from __future__ import annotations

import csv
import subprocess

import pytest

import recalc_books as rb
from trueband.bridge.workbook import sheet_data, sheet_read
from trueband.bridge.engine.recalc import recalculate
from trueband.bridge.workbook.package import open_workbook_package

pytestmark = pytest.mark.libreoffice

CSV_FILTER = "csv:Text - txt - csv (StarCalc):44,34,76,1,,0,false,true,false,false,false,-1"


def shown(value) -> str:
    """A stored value as a spreadsheet displays it in General format."""
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    if isinstance(value, float):
        return format(value, ".15g")
    return str(value)


def convert_to_csv(soffice: str, book, folder) -> dict[str, list[list[str]]]:
    profile = folder / "profile"
    out = folder / "csv"
    out.mkdir()
    subprocess.run([soffice, f"-env:UserInstallation={profile.as_uri()}", "--headless", "--norestore",
                    "--convert-to", CSV_FILTER, "--outdir", str(out), str(book)],
                   check=True, capture_output=True, timeout=240)
    sheets = {}
    for path in out.glob("*.csv"):
        sheet = path.stem.split("-", 1)[1]
        with path.open(newline="", encoding="utf-8") as fh:
            sheets[sheet] = list(csv.reader(fh))
    return sheets


def test_libreoffice_shows_the_stored_values(soffice, tmp_path):
    src = rb.display_book(tmp_path / "bands.xlsx")
    out = recalculate(src, tmp_path / "recalculated.xlsx").output
    displayed = convert_to_csv(soffice, out, tmp_path)
    assert set(displayed) == {"Bands", "Settings"}
    compared = errors = 0
    with open_workbook_package(out) as pkg:
        for info in pkg.worksheets:
            grid = displayed[info.name]
            for cell in sheet_read.iter_cells(pkg.read(info.part), pkg.shared_strings):
                if cell.formula is None:
                    continue
                text = grid[cell.row - 1][cell.col - 1]
                if isinstance(cell.value, sheet_data.ErrorValue):
                    assert text.startswith(("#", "Err:")), (cell.ref, text)
                    errors += 1
                    continue
                if isinstance(cell.value, float):
                    # 15 significant digits shown; the apps round the last one differently, so one unit in it
                    assert float(text) == pytest.approx(cell.value, rel=1e-14, abs=0), (cell.ref, text, cell.value)
                else:
                    assert text == shown(cell.value), (cell.ref, text, cell.value)
                compared += 1
    assert compared == 6 * 6 and errors == 6
