"""Writing packages: untouched entries byte-identical, atomic output, crash safety, locked files.

What is checked and against what: entry bytes and metadata against the input
zip read with the standard library's ``zipfile``; the written file against
openpyxl (a reference library) and LibreOffice Calc (the ``soffice``
fixture: the values it displays); crash safety by killing a child process
part-way through a write (``TRUEBAND_TEST_WRITE_HOOK``).
"""

from __future__ import annotations

import hashlib
import os
import signal
import subprocess
import sys
import time
import zipfile
from pathlib import Path

import openpyxl
import pytest

import golden_books as gb
from trueband.bridge.workbook import save as sw
from trueband.bridge.workbook.save import OutputRefused, PackageChanges, save_workbook
from trueband.bridge.workbook.shared_formulas import unshare_formulas
from trueband.bridge.workbook.sheet_patch import CellUpdate, patch_sheet
from trueband.bridge.workbook.package import WorkbookLocked, open_workbook_package


def digest(path: Path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def band_changes(pkg) -> PackageChanges:
    """Cached values for the six SCORE_BAND cells of the features book."""
    part = pkg.sheet("Applicants").part
    changes = PackageChanges()
    changes.set(pkg, part, patch_sheet(pkg.read(part), {f"D{r}": CellUpdate(float(r % 3 + 1)) for r in range(2, 8)}))
    changes.keep_cached_values(pkg)
    return changes


@pytest.fixture(params=[".xlsx", ".xlsm"])
def features(request, tmp_path):
    return gb.features_book(tmp_path / f"features{request.param}", macros=request.param == ".xlsm")


def test_untouched_entries_keep_bytes_order_and_metadata(features):
    with open_workbook_package(features) as pkg:
        changes = band_changes(pkg)
        out = save_workbook(pkg, changes)
    assert out == features.with_name(f"features.recalc{features.suffix}")
    with zipfile.ZipFile(features) as a, zipfile.ZipFile(out) as b:
        assert a.namelist() == b.namelist()
        changed = {"xl/worksheets/sheet1.xml", "xl/workbook.xml"}
        for old, new in zip(a.infolist(), b.infolist()):
            assert (old.filename, old.date_time, old.compress_type, old.external_attr) == \
                   (new.filename, new.date_time, new.compress_type, new.external_attr)
            if old.filename not in changed:
                assert a.read(old) == b.read(new), old.filename
        # the chart, image, comment, vba part, pivot-like part are among the identical ones
        assert {"xl/charts/chart1.xml", "xl/media/image1.png", "xl/comments1.xml", gb.EXTRA_PART} <= \
            set(a.namelist()) - changed
        assert b.read("xl/workbook.xml") == a.read("xl/workbook.xml").replace(b' fullCalcOnLoad="1"', b"")
    wb = openpyxl.load_workbook(out, data_only=True, keep_vba=True)  # reference library
    assert [wb["Applicants"][f"D{r}"].value for r in range(2, 8)] == [r % 3 + 1 for r in range(2, 8)]


def test_keep_cached_values_leaves_workbook_part_alone_when_not_needed(tmp_path):
    path = gb.formula_forms_book(tmp_path / "forms.xlsx")
    with open_workbook_package(path) as pkg:
        changes = PackageChanges()
        changes.keep_cached_values(pkg)
        assert changes.empty
    path = gb.formula_forms_book(tmp_path / "forms-full.xlsx", full_calc_on_load=True)
    with open_workbook_package(path) as pkg:
        changes = PackageChanges()
        changes.keep_cached_values(pkg)
        assert changes.replace[pkg.workbook_part] == pkg.workbook_xml.replace(b' fullCalcOnLoad="1"', b"")


def test_dropping_the_calculation_chain(tmp_path):
    path = gb.formula_forms_book(tmp_path / "forms.xlsx")
    with open_workbook_package(path) as pkg:
        changes = PackageChanges()
        changes.drop_calc_chain(pkg)
        out = save_workbook(pkg, changes)
    with zipfile.ZipFile(out) as zf:
        assert "xl/calcChain.xml" not in zf.namelist()
        assert b"calcChain" not in zf.read("xl/_rels/workbook.xml.rels")
        assert b"calcChain" not in zf.read("[Content_Types].xml")
    with open_workbook_package(out) as pkg:
        assert pkg.calc_chain_part is None
    openpyxl.load_workbook(out)  # reference library opens it


def test_output_rules(features):
    with open_workbook_package(features) as pkg:
        changes = band_changes(pkg)
        with pytest.raises(OutputRefused, match="is the input"):
            save_workbook(pkg, changes, output=features)
        first = save_workbook(pkg, changes)
        with pytest.raises(OutputRefused, match="exists already"):
            save_workbook(pkg, changes)
        assert save_workbook(pkg, changes, overwrite=True) == first
        with pytest.raises(OutputRefused, match=r"\.xlsx or \.xlsm"):
            save_workbook(pkg, changes, output=features.with_name("out.csv"))
        if features.suffix == ".xlsm":
            with pytest.raises(OutputRefused, match="macros"):
                save_workbook(pkg, changes, output=features.with_name("out.xlsx"))
        with pytest.raises(OutputRefused, match="not both"):
            save_workbook(pkg, changes, output=first, in_place=True)
    assert sorted(p.name for p in features.parent.iterdir() if p.name.startswith(".~")) == []


def test_in_place_with_backup(features):
    original = features.read_bytes()
    with open_workbook_package(features) as pkg:
        out = save_workbook(pkg, band_changes(pkg), in_place=True, backup=True)
    assert out == features
    backup = features.with_name(f"features.backup{features.suffix}")
    assert backup.read_bytes() == original
    assert features.read_bytes() != original
    with open_workbook_package(features) as pkg:
        assert b"<v>3</v>" in pkg.read(pkg.sheet("Applicants").part)
    with open_workbook_package(features) as pkg:  # a second backup does not overwrite the first
        save_workbook(pkg, band_changes(pkg), in_place=True, backup=True)
    assert backup.read_bytes() == original
    assert features.with_name(f"features.backup-2{features.suffix}").exists()


@pytest.mark.parametrize("name, tag, expected", [
    ("t.xlsx", "filled", "t.filled.xlsx"),  # a plain input: unchanged names
    ("t.xlsm", "recalc", "t.recalc.xlsm"),
    ("t.filled.xlsx", "filled", "t.filled-2.xlsx"),  # the same word is not written twice: it counts up
    ("t.filled-2.xlsx", "filled", "t.filled-3.xlsx"),
    ("t.Recalc.xlsm", "recalc", "t.recalc-2.xlsm"),
    ("t.filled.xlsx", "bands", "t.filled.bands.xlsx"),  # another command's word is added as usual
    ("scores.2026.xlsx", "filled", "scores.2026.filled.xlsx"),
])
def test_default_output_names_do_not_stack(tmp_path, name, tag, expected):
    assert sw.default_output_path(tmp_path / name, tag) == tmp_path / expected


def test_a_backup_of_a_backup_is_numbered_not_stacked(tmp_path):
    assert sw.backup_path_for(tmp_path / "ip.xlsx") == tmp_path / "ip.backup.xlsx"
    (tmp_path / "ip.backup.xlsx").write_bytes(b"first")
    assert sw.backup_path_for(tmp_path / "ip.xlsx") == tmp_path / "ip.backup-2.xlsx"
    # in place on the backup itself: numbered from ip, never ip.backup.backup.xlsx
    assert sw.backup_path_for(tmp_path / "ip.backup.xlsx") == tmp_path / "ip.backup-2.xlsx"
    (tmp_path / "ip.backup-2.xlsx").write_bytes(b"second")
    assert sw.backup_path_for(tmp_path / "ip.backup-2.xlsx") == tmp_path / "ip.backup-3.xlsx"


def test_in_place_on_a_backup_keeps_the_next_numbered_backup(features):
    backup = features.with_name(f"features.backup{features.suffix}")
    backup.write_bytes(features.read_bytes())
    original = backup.read_bytes()
    with open_workbook_package(backup) as pkg:
        save_workbook(pkg, band_changes(pkg), in_place=True, backup=True)
    assert features.with_name(f"features.backup-2{features.suffix}").read_bytes() == original
    assert not features.with_name(f"features.backup.backup{features.suffix}").exists()


def test_locked_destination_is_retried_then_reported(features, monkeypatch):
    original = digest(features)
    calls = []

    def refuse(src, dst):
        calls.append(dst)
        raise PermissionError(13, "The process cannot access the file because it is being used by another process")

    monkeypatch.setattr(sw.os, "replace", refuse)
    monkeypatch.setattr(sw, "_REPLACE_WAIT", 0.0)
    with open_workbook_package(features) as pkg:
        with pytest.raises(WorkbookLocked, match="open in another program") as info:
            save_workbook(pkg, band_changes(pkg), in_place=True)
    assert "\n" not in str(info.value)
    assert len(calls) == sw._REPLACE_RETRIES
    assert digest(features) == original
    assert [p for p in features.parent.iterdir() if p.name.startswith(sw.TEMP_PREFIX)] == []


def test_failed_verification_leaves_nothing(features, monkeypatch):
    original = digest(features)

    def broken(path, *a, **k):
        Path(path).write_bytes(b"not a zip")

    monkeypatch.setattr(sw, "write_package", lambda pkg, changes, dest, **k: broken(dest))
    with open_workbook_package(features) as pkg:
        with pytest.raises(Exception, match="writing failed, nothing was changed"):
            save_workbook(pkg, band_changes(pkg), in_place=True)
    assert digest(features) == original
    assert sorted(p.name for p in features.parent.iterdir()) == [features.name]


# ------------------------------------------------------------------ killing a writer part-way

CHILD = """
import sys
from trueband.bridge.workbook.package import open_workbook_package
from trueband.bridge.workbook.save import PackageChanges, save_workbook
from trueband.bridge.workbook.shared_formulas import unshare_formulas
from trueband.bridge.workbook.sheet_patch import CellUpdate, patch_sheet
path, mode = sys.argv[1], sys.argv[2]
pkg = open_workbook_package(path)
part = pkg.sheet("Applicants").part
changes = PackageChanges()
changes.set(pkg, part, patch_sheet(pkg.read(part), {"D2": CellUpdate(1.0)}))
save_workbook(pkg, changes, in_place=(mode == "in-place"))
"""


def _child(features: Path, mode: str, hook: str) -> subprocess.Popen:
    env = {**os.environ, "TRUEBAND_TEST_WRITE_HOOK": hook}
    return subprocess.Popen([sys.executable, "-c", CHILD, str(features), mode], env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)


def _wait_for(marker: Path, proc: subprocess.Popen, seconds: float = 120) -> None:
    deadline = time.monotonic() + seconds
    while not marker.exists():
        if proc.poll() is not None:
            raise AssertionError(f"the writer ended early: {proc.stderr.read().decode()}")
        if time.monotonic() > deadline:
            proc.kill()
            raise AssertionError("the writer never reached the pause")
        time.sleep(0.05)


@pytest.mark.parametrize("mode", ["in-place", "new file"])
def test_killed_writer_leaves_input_intact_and_no_output(tmp_path, mode):
    (tmp_path / "book").mkdir()
    features = gb.features_book(tmp_path / "book" / "features.xlsx")
    original = digest(features)
    marker = tmp_path / "paused"
    proc = _child(features, mode, f"pause:5:{marker}")
    _wait_for(marker, proc)
    proc.kill()  # no clean-up code runs: the hardest case
    proc.wait(timeout=60)
    assert digest(features) == original
    names = sorted(p.name for p in features.parent.iterdir())
    leftovers = [n for n in names if n != features.name]
    # nothing under an output name; at most the hidden temporary file, which the next run clears (its
    # writer is gone: see tests/test_safe_files.py for the rules)
    assert all(n.startswith(sw.TEMP_PREFIX) and n.endswith(".tmp") for n in leftovers) and len(leftovers) == 1
    stale = features.parent / leftovers[0]
    with open_workbook_package(features) as pkg:
        save_workbook(pkg, PackageChanges(), in_place=(mode == "in-place"))
    assert not stale.exists()


def test_abrupt_exit_mid_write_leaves_input_intact(tmp_path):
    (tmp_path / "book").mkdir()
    features = gb.features_book(tmp_path / "book" / "features.xlsx")
    original = digest(features)
    proc = _child(features, "in-place", "exit:3")
    proc.wait(timeout=120)
    assert proc.returncode == 3
    assert digest(features) == original
    assert not features.with_name("features.recalc.xlsx").exists()


#: The command as `python -m trueband.bridge` runs it, after setting Python's own Ctrl-C handler. A Python
#: started with SIGINT ignored (a shell's background job, some CI runners) keeps it ignored, and Ctrl-C
#: would then do nothing; setting the handler here makes the test independent of what it inherits.
CTRL_C_CHILD = ("import signal, sys; signal.signal(signal.SIGINT, signal.default_int_handler); "
                "from trueband.bridge.cli import main; sys.exit(main(sys.argv[1:]))")


@pytest.mark.skipif(sys.platform == "win32", reason="sends SIGINT, as Ctrl-C does in a POSIX terminal")
def test_ctrl_c_mid_write_cleans_up_and_exits_130(tmp_path):
    (tmp_path / "book").mkdir()
    forms = gb.formula_forms_book(tmp_path / "book" / "forms.xlsx")
    from trueband.bridge.cli import EXIT_INTERRUPTED
    from trueband.bridge.engine import values_mode
    from trueband.bridge.workbook.save import PackageChanges as PC

    with open_workbook_package(forms) as pkg:  # a values-mode file, so `trueband restore` has work to do
        changes = PC()
        values_mode.replace_with_values(pkg, changes)
        values_book = save_workbook(pkg, changes, tag="values")
    original = digest(values_book)
    marker = tmp_path / "paused"
    env = {**os.environ, "TRUEBAND_TEST_WRITE_HOOK": f"pause:2:{marker}"}
    proc = subprocess.Popen([sys.executable, "-c", CTRL_C_CHILD, "restore", str(values_book), "--in-place"],
                            env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    _wait_for(marker, proc)
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == EXIT_INTERRUPTED, err.decode()
    assert "interrupted" in err.decode()
    assert digest(values_book) == original
    assert sorted(p.name for p in values_book.parent.iterdir()) == sorted([forms.name, values_book.name])


# ------------------------------------------------------------------ LibreOffice shows the written values


@pytest.mark.libreoffice
def test_libreoffice_shows_the_cached_values(tmp_path, soffice):
    path = gb.formula_forms_book(tmp_path / "forms.xlsx", full_calc_on_load=True)
    updates = {"C2": CellUpdate(2), "C3": CellUpdate(3), "D2": CellUpdate(1.45), "D3": CellUpdate(3.6),
               "F2": CellUpdate(8.4)}
    with open_workbook_package(path) as pkg:
        part = pkg.sheet("Scores").part
        kept = PackageChanges()
        # Calc recomputes shared formulas on opening, so the SCORE_BAND group is written as ordinary formulas
        xml = unshare_formulas(pkg.read(part), pkg.shared_strings)
        kept.set(pkg, part, patch_sheet(xml, updates))
        kept.keep_cached_values(pkg)
        out = save_workbook(pkg, kept)
    shown = gb.libreoffice_csv(soffice, out, tmp_path / "csv")["Scores"]
    assert [gb.csv_cell(shown, r) for r in ("C2", "C3", "D2", "D3", "F2")] == ["2", "3", "1.45", "3.6", "8.4"]
    assert gb.csv_cell(shown, "D4") == "179" and gb.csv_cell(shown, "A2") == "OHL-100"
    assert [gb.csv_cell(shown, f"C{r}") for r in range(4, 10)] == ["1"] * 6  # the cached values of the group


@pytest.mark.libreoffice
def test_libreoffice_recomputes_shared_formulas(tmp_path, soffice):
    # Why unshare_formulas exists: Calc recomputes a shared formula on opening, ignoring its cached value
    # (observed with LibreOffice 7.4), so a shared SCORE_BAND group shows #NAME? in Calc however well it is cached.
    rows = [gb.row_xml(r, [gb.cell_xml(f"A{r}", r), gb.cell_xml(f"B{r}", 5 + r, formula="A1*0" if r == 1 else None,
                                                                 f_attrs=' t="shared" ref="B1:B3" si="0"' if r == 1
                                                                 else ' t="shared" si="0"')]) for r in (1, 2, 3)]
    path = gb.handmade_package(tmp_path / "shared.xlsx", [("S", gb.sheet_part(rows))])
    shown = gb.libreoffice_csv(soffice, path, tmp_path / "csv")["S"]
    assert [gb.csv_cell(shown, f"B{r}") for r in (1, 2, 3)] == ["0", "0", "0"]  # not the cached 6, 7, 8
    with open_workbook_package(path) as pkg:
        changes = PackageChanges()
        changes.set(pkg, "xl/worksheets/sheet1.xml", unshare_formulas(pkg.read("xl/worksheets/sheet1.xml")))
        out = save_workbook(pkg, changes)
    shown = gb.libreoffice_csv(soffice, out, tmp_path / "csv2")["S"]
    assert [gb.csv_cell(shown, f"B{r}") for r in (1, 2, 3)] == ["6", "7", "8"]


def test_an_output_open_in_another_program_is_not_replaced(features):
    with open_workbook_package(features) as pkg:
        first = save_workbook(pkg, band_changes(pkg))
        before = digest(first)
        lock = first.with_name(f".~lock.{first.name}#")
        lock.write_text("someone,host,host,01.03.2026 09:30,file:///home/someone;")
        with pytest.raises(WorkbookLocked, match="open in another program"):
            save_workbook(pkg, band_changes(pkg), overwrite=True)
    assert digest(first) == before


def test_a_part_given_in_pieces_is_written_as_the_joined_bytes(features, tmp_path):
    """A large sheet is handed over as a list of pieces; the file must be the same as with one joined copy."""
    with open_workbook_package(features) as pkg:
        part = pkg.sheet("Applicants").part
        new = patch_sheet(pkg.read(part), {f"D{r}": CellUpdate(float(r)) for r in range(2, 8)})
        outputs = []
        for data in (new, [new[:100], new[100:101], b"", new[101:]]):
            changes = PackageChanges()
            changes.set(pkg, part, data)
            outputs.append(save_workbook(pkg, changes, output=tmp_path / f"out{len(outputs)}{features.suffix}"))
        assert Path(outputs[0]).read_bytes() == Path(outputs[1]).read_bytes()
        same = pkg.read(part)
        changes = PackageChanges()
        changes.set(pkg, part, [same[:7], same[7:]])  # the original bytes in pieces: nothing to replace
        assert part not in changes.replace
        changes.set(pkg, part, [new[:50], new[50:]])
        assert changes.current(pkg, part) == new  # read back joined


def test_package_edits_on_parts_written_with_single_quotes(tmp_path):
    # Other writers may quote attributes with ' (XML 1.0, 3.1); the edits must find them too.
    import re
    from xml.etree import ElementTree as ET  # the standard library's parser is the reference

    path = gb.formula_forms_book(tmp_path / "forms.xlsx", full_calc_on_load=True)
    with zipfile.ZipFile(path) as zf:
        parts = {n: zf.read(n) for n in zf.namelist()}
    for name in ("xl/workbook.xml", "xl/_rels/workbook.xml.rels", "[Content_Types].xml"):
        parts[name] = re.sub(rb' ([A-Za-z:]+)="([^"]*)"', rb" \1 = '\2'", parts[name])
    quoted = gb.write_zip(tmp_path / "quoted.xlsx", parts)
    with open_workbook_package(quoted) as pkg:
        changes = PackageChanges()
        changes.drop_calc_chain(pkg)
        changes.keep_cached_values(pkg)
        out = save_workbook(pkg, changes)
    with zipfile.ZipFile(out) as zf:
        rels = ET.fromstring(zf.read("xl/_rels/workbook.xml.rels"))
        types = ET.fromstring(zf.read("[Content_Types].xml"))
        calc = ET.fromstring(zf.read("xl/workbook.xml")).find(f"{{{gb.NS}}}calcPr")
    assert [r.get("Type") for r in rels if r.get("Type", "").endswith("/calcChain")] == []
    assert [o.get("PartName") for o in types if o.get("PartName") == "/xl/calcChain.xml"] == []
    assert calc.get("fullCalcOnLoad") is None and calc.get("calcId") == "191029"
