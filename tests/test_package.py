"""Opening workbook packages: what is read, and every unusable file refused in one line.

Sources: the package layout is ECMA-376 Part 1 (SpreadsheetML: workbook,
sheets, shared strings, defined names with localSheetId) and Part 2 (Open
Packaging Conventions: relationships, content types); the OLE2 compound-file
signature D0 CF 11 E0 A1 B1 1A E1 and the EncryptionInfo / EncryptedPackage
streams of an encrypted package are from the published compound-file and
Office-document cryptography specifications (common practice to test for);
the OpenDocument ``mimetype`` entry is OASIS OpenDocument 1.2 Part 3, 3.3.
openpyxl (a reference library) reads the same files for cross-checks.
"""

from __future__ import annotations

import zipfile

import openpyxl
import pytest

import golden_books as gb
from trueband.bridge.workbook import package as xp
from trueband.bridge.cli import EXIT_FAILED, main
from trueband.bridge.workbook.package import UnusableWorkbook, WorkbookLocked, open_workbook_package
from trueband.bridge.workbook.shared_strings import parse_shared_strings


@pytest.fixture
def forms(tmp_path):
    return gb.formula_forms_book(tmp_path / "forms.xlsx")


def test_sheets_parts_and_order(forms):
    with open_workbook_package(forms) as pkg:
        assert [(s.name, s.part, s.state, s.index) for s in pkg.sheets] == [
            ("Scores", "xl/worksheets/sheet1.xml", "visible", 0),
            ("Settings", "xl/worksheets/sheet2.xml", "visible", 1)]
        assert pkg.workbook_part == "xl/workbook.xml"
        assert pkg.workbook_xml == zipfile.ZipFile(forms).read("xl/workbook.xml")
        assert pkg.entry_names == zipfile.ZipFile(forms).namelist()
        assert pkg.calc_chain_part == "xl/calcChain.xml"
        assert not pkg.is_macro_enabled
        assert pkg.sheet("scores").name == "Scores"  # sheet names match case-insensitively
        with pytest.raises(KeyError, match="'Scores', 'Settings'"):
            pkg.sheet("Summary")


def test_sheet_states_against_openpyxl(tmp_path):
    sheet = gb.sheet_part([gb.row_xml(1, [gb.cell_xml("A1", 1)])])
    path = gb.handmade_package(tmp_path / "states.xlsx", [("Shown", sheet), ("Tucked", sheet), ("Locked", sheet)],
                               states={"Tucked": "hidden", "Locked": "veryHidden"})
    with open_workbook_package(path) as pkg:
        ours = {s.name: s.state for s in pkg.sheets}
    wb = openpyxl.load_workbook(path)  # reference library
    assert ours == {ws.title: ws.sheet_state for ws in wb.worksheets}


def test_shared_strings_flatten_rich_text_and_unescape(forms):
    with open_workbook_package(forms) as pkg:
        strings = pkg.shared_strings
    assert strings[:len(gb.SHARED)] == gb.SHARED
    assert strings[gb.SHARED.index("R&D <lab>")] == "R&D <lab>"
    assert strings[-1] == "Cargo dispatch"  # two bold/plain runs joined, the phonetic guide dropped
    # openpyxl (reference library) shows the same text in the cells that use them
    wb = openpyxl.load_workbook(forms)
    assert wb["Scores"]["E4"].value == "Cargo dispatch"
    assert wb["Settings"]["B3"].value == "R&D <lab>"


def test_shared_string_escapes():
    xml = (b'<sst xmlns="x"><si><t>a_x000D_b</t></si><si><t>_x005F_x0041_</t></si><si><t/></si>'
           b'<si><t xml:space="preserve">  two  </t></si><si><t>&#8211;&amp;&quot;</t></si></sst>')
    # ECMA-376 Part 1, 22.9.2.19 ST_Xstring: _xHHHH_ escapes a character; _x005F_ escapes the underscore
    assert parse_shared_strings(xml) == ["a\rb", "_x0041_", "", "  two  ", "\u2013&\""]


def test_defined_names_with_sheet_scope(forms):
    with open_workbook_package(forms) as pkg:
        assert pkg.names == {"Reliability": "Settings!$B$2", "Scores!Cut": "Settings!$B$1", "Cut": "Settings!$B$2"}
        # a formula on Scores sees its own Cut; any other sheet sees the global one
        assert pkg.defined_name("cut", "Scores").text == "Settings!$B$1"
        assert pkg.defined_name("Cut", "Settings").text == "Settings!$B$2"
        assert pkg.defined_name("Cut").text == "Settings!$B$2"
        assert pkg.defined_name("Nowhere") is None


def test_features_book_entries_and_names(tmp_path):
    path = gb.features_book(tmp_path / "features.xlsx")
    with open_workbook_package(path) as pkg:
        assert gb.EXTRA_PART in pkg.entry_names
        assert pkg.read(gb.EXTRA_PART) == gb.EXTRA_PART_BYTES
        assert any(n.startswith("xl/charts/") for n in pkg.entry_names)
        assert any(n.startswith("xl/media/") for n in pkg.entry_names)
        assert pkg.names["Applicants!Pool"] == "Applicants!$C$2:$C$7"
        assert pkg.calc_properties.get("fullCalcOnLoad") == "1"  # the library asks for a recalculation on open
        assert not pkg.is_macro_enabled


def test_xlsm_is_recognised(tmp_path):
    path = gb.features_book(tmp_path / "features.xlsm", macros=True)
    with open_workbook_package(path) as pkg:
        assert pkg.is_macro_enabled
        assert pkg.read("xl/vbaProject.bin") == gb.VBA_BYTES


@pytest.fixture(scope="module")
def unusable(tmp_path_factory):
    return gb.unusable_books(tmp_path_factory.mktemp("unusable"))


CASES = ["old binary workbook", "encrypted workbook", "OpenDocument spreadsheet", "OpenDocument renamed .xlsx",
         "CSV renamed", "random bytes", "empty file", "bad CRC", "truncated zip", "zip bomb", "no workbook part",
         "workbook part missing", "plain zip", "owner file of a desktop app", "LibreOffice lock file"]


def test_every_case_is_built(unusable):
    assert sorted(unusable) == sorted(CASES)


@pytest.mark.parametrize("case", CASES)
def test_unusable_file_gives_one_clear_line(unusable, case):
    path, word = unusable[case]
    with pytest.raises(UnusableWorkbook) as info:
        open_workbook_package(path)
    message = str(info.value)
    assert "\n" not in message and len(message) < 300
    assert word in message
    assert path.name in message


def test_encrypted_and_old_binary_are_told_apart(unusable):
    with pytest.raises(UnusableWorkbook, match="password"):
        open_workbook_package(unusable["encrypted workbook"][0])
    with pytest.raises(UnusableWorkbook) as info:
        open_workbook_package(unusable["old binary workbook"][0])
    assert "password" not in str(info.value)


def test_lock_files_give_the_locked_error_and_can_be_ignored(unusable):
    for case in ("owner file of a desktop app", "LibreOffice lock file"):
        path = unusable[case][0]
        with pytest.raises(WorkbookLocked):
            open_workbook_package(path)
        with open_workbook_package(path, check_lock=False) as pkg:
            assert pkg.sheets[0].name == "Scores"


@pytest.mark.parametrize("command", [["restore"], ["fill", "--sheet", "Scores", "--column", "L", "--formula", "=1"],
                                     ["bands", "--scores", "Scores!B2:B9", "--sd", "4", "--reliability", "0.9"]])
@pytest.mark.parametrize("case", ["old binary workbook", "encrypted workbook", "CSV renamed", "zip bomb",
                                  "bad CRC", "LibreOffice lock file"])
def test_commands_refuse_unusable_files_writing_nothing(unusable, case, command, capsys):
    path, word = unusable[case]
    before = sorted(p.name for p in path.parent.iterdir())
    code = main([command[0], str(path), *command[1:]])
    err = capsys.readouterr().err.strip()
    assert code == EXIT_FAILED
    assert len(err.splitlines()) == 1 and word in err
    assert sorted(p.name for p in path.parent.iterdir()) == before


def test_bomb_limits_are_configurable(unusable, monkeypatch):
    bomb = unusable["zip bomb"][0]
    with open_workbook_package(bomb, max_ratio=5000) as pkg:
        assert len(pkg.read("xl/worksheets/sheet2.xml")) == 64 * 1024 ** 2 + 1
    monkeypatch.setenv("TRUEBAND_MAX_RATIO", "5000")
    open_workbook_package(bomb).close()
    monkeypatch.setenv("TRUEBAND_MAX_RATIO", "400")
    monkeypatch.setenv("TRUEBAND_MAX_UNCOMPRESSED", "1000")
    with pytest.raises(UnusableWorkbook, match="over the limit"):
        open_workbook_package(unusable["old binary workbook"][0].parent / "open-in-calc.xlsx", check_lock=False)


def test_default_limits_admit_a_full_height_sheet():
    # A 1,048,576-row sheet of ~15 cells a row is about 1 GB of XML (measured with the sheet generator used for
    # the reader's speed check: 56 MB per 100,000 rows); real sheet XML compresses 5-50 times (common practice).
    assert xp.DEFAULT_MAX_TOTAL >= 1048576 * 15 * 37 * 2
    assert xp.DEFAULT_MAX_RATIO >= 100


@pytest.mark.slow  # seconds: the whole suite runs it, the quick loop leaves it out
def test_realistic_large_sheet_is_not_taken_for_a_bomb(tmp_path):
    import random

    rnd = random.Random(7)
    rows = [gb.row_xml(r, [gb.cell_xml(f"{c}{r}", rnd.randint(0, 40)) for c in "ABCDEFGHIJ"]
                       + [gb.cell_xml(f"K{r}", None, formula=f"SUM(A{r}:J{r})")]) for r in range(1, 60001)]
    path = gb.handmade_package(tmp_path / "tall.xlsx", [("Items", gb.sheet_part(rows))])
    with zipfile.ZipFile(path) as zf:
        info = zf.getinfo("xl/worksheets/sheet1.xml")
    assert info.file_size > xp.RATIO_FLOOR  # large enough for the ratio rule to apply
    with open_workbook_package(path) as pkg:
        assert pkg.sheets[0].name == "Items"


def test_damaged_large_part_fails_when_read(tmp_path, monkeypatch):
    path = gb.corrupt_crc(tmp_path / "crc.xlsx")
    monkeypatch.setattr(xp, "_check_zip", lambda *a: None)  # as for a file too large to test on opening
    with open_workbook_package(path) as pkg:
        with pytest.raises(UnusableWorkbook, match="damaged"):
            pkg.read("xl/worksheets/sheet1.xml")


def test_large_part_that_inflates_past_its_declared_size_is_refused(tmp_path, monkeypatch):
    # The one-call inflate of large parts stops at the declared size, as the zip module's reader does, so an
    # entry whose central directory understates its size cannot fill the memory. (Random bytes: the ratio
    # check on opening does not apply.)
    import os

    data = os.urandom(3 * xp.WHOLE_READ_SIZE)
    path = tmp_path / "liar.xlsx"
    gb.handmade_package(path, [("S", gb.sheet_part([]))])
    with zipfile.ZipFile(path, "a", zipfile.ZIP_DEFLATED) as zf:
        zf.writestr("xl/media/blob.bin", data)
    raw = bytearray(path.read_bytes())
    at = raw.rindex(b"PK\x01\x02")  # the blob's central directory record, written last
    assert raw[at + 46:at + 46 + 17] == b"xl/media/blob.bin"
    raw[at + 24:at + 28] = (2 * xp.WHOLE_READ_SIZE).to_bytes(4, "little")  # declared uncompressed size
    path.write_bytes(bytes(raw))
    monkeypatch.setattr(xp, "_check_zip", lambda *a: None)  # as for a file too large to test on opening
    with open_workbook_package(path) as pkg:
        with pytest.raises(UnusableWorkbook, match="declared size"):
            pkg.read("xl/media/blob.bin")


def test_missing_file_and_folder(tmp_path):
    with pytest.raises(UnusableWorkbook, match="does not exist"):
        open_workbook_package(tmp_path / "absent.xlsx")
    with pytest.raises(UnusableWorkbook, match="folder"):
        open_workbook_package(tmp_path)


def test_doctype_in_a_part_is_refused(tmp_path):
    path = gb.formula_forms_book(tmp_path / "forms.xlsx")
    with zipfile.ZipFile(path) as zf:
        parts = {n: zf.read(n) for n in zf.namelist()}
    parts["xl/workbook.xml"] = parts["xl/workbook.xml"].replace(
        b"<workbook", b'<!DOCTYPE workbook [<!ENTITY a "aaaa">]><workbook', 1)
    gb.write_zip(tmp_path / "dtd.xlsx", parts)
    with pytest.raises(UnusableWorkbook, match="not well-formed|document type"):
        open_workbook_package(tmp_path / "dtd.xlsx")


_SST_FORMS = {
    "single quotes": "<si><t xml:space='preserve'> Dock 4 </t></si>",
    "end tag with space": "<si><t>Quay</t ></si ><si><t>crane</t></si>",
    "CDATA": "<si><t><![CDATA[R&D <lab>]]></t></si>",
    "comment": "<!-- <si><t>not a string</t></si> --><si><t>Berth</t></si>",
    "character reference": "<si><t>&#79;HL</t></si>",
    "rich text with a phonetic guide": "<si><r><t>Car</t></r><r ><t>go</t></r><rPh sb='0' eb='1'><t>KA</t></rPh></si>",
}


@pytest.mark.parametrize("form", list(_SST_FORMS))
def test_shared_strings_in_irregular_forms_agree_with_openpyxl(form, tmp_path):
    # XML 1.0 (3.1 quotes and end tags, 2.7 CDATA, 2.5 comments, 4.1 character references); openpyxl,
    # a reference library with its own XML parser, reads the same strings
    body = _SST_FORMS[form] + "<si><t>last</t></si>"
    sst = (f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<sst xmlns="{gb.NS}">{body}</sst>').encode()
    from xml.etree import ElementTree as ET
    count = sum(1 for el in ET.fromstring(sst) if el.tag.endswith("}si"))
    sheet = gb.sheet_part([gb.row_xml(1, [gb.cell_xml(f"{chr(65 + i)}1", i, t="s") for i in range(count)])])
    path = gb.handmade_package(tmp_path / "sst.xlsx", [("Words", sheet)], shared_strings=sst)
    ws = openpyxl.load_workbook(path)["Words"]
    with open_workbook_package(path) as pkg:
        assert pkg.shared_strings == [ws.cell(1, i + 1).value or "" for i in range(count)]
        assert pkg.shared_strings[-1] == "last"
