"""Issue 15: every command that writes keeps the input's permissions and leaves no copies behind.

The rules are those of ``bridge/workbook/files.py`` (the one safe writer): temporary files readable by the
owner only, the result with the permission bits of the input (or of the file it replaces), symbolic links
followed, what is not a regular file refused in one line, a failed backup leaving nothing, and what a
killed run left removed by the next run of any command in that folder. Permission bits are POSIX
(``stat.S_IMODE``); on Windows those tests are skipped. What "intact" means is checked against the input's
own bytes (sha256) and the standard library's ``zipfile``.
"""

from __future__ import annotations

import errno
import hashlib
import os
import random
import stat
import subprocess
import sys
import time
import zipfile
from pathlib import Path

import pytest

import golden_books as gb
from trueband.bridge.cli import main
from trueband.bridge.workbook import files
from trueband.bridge.workbook.files import TEMP_PREFIX, NotARegularFile, remove_stale_temporaries, replacing
from trueband.bridge.workbook.package import open_workbook_package
from trueband.bridge.workbook.save import PackageChanges, save_workbook

posix_only = pytest.mark.skipif(sys.platform == "win32", reason="POSIX permission bits, links and named pipes")


def digest(path: Path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def mode_of(path: Path) -> int:
    return stat.S_IMODE(os.stat(path).st_mode)


def temporaries(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.startswith(TEMP_PREFIX))


@pytest.fixture
def book(tmp_path):
    (tmp_path / "book").mkdir()
    return gb.features_book(tmp_path / "book" / "features.xlsx")


# ---------------------------------------------------------------- permissions

@posix_only
@pytest.mark.parametrize("bits", [0o600, 0o640, 0o604])
def test_in_place_keeps_the_permission_bits(book, bits):
    os.chmod(book, bits)
    assert main(["recalc", str(book), "--in-place"]) in (0, 1)
    assert mode_of(book) == bits
    assert temporaries(book.parent) == []


@posix_only
@pytest.mark.skipif(not hasattr(os, "geteuid") or os.geteuid() != 0, reason="only root may give a file away")
def test_in_place_keeps_the_owner_where_the_process_may_set_it(book):
    # issue 15: a 0600 input owned by another user came back 0644 and owned by root
    os.chown(book, 12345, 12346)
    os.chmod(book, 0o600)
    assert main(["recalc", str(book), "--in-place"]) in (0, 1)
    st = os.stat(book)
    assert (st.st_uid, st.st_gid, stat.S_IMODE(st.st_mode)) == (12345, 12346, 0o600)


@posix_only
def test_a_new_output_beside_a_private_input_is_private(book):
    os.chmod(book, 0o600)
    assert main(["recalc", str(book)]) in (0, 1)
    assert mode_of(book.with_name("features.recalc.xlsx")) == 0o600


@posix_only
def test_a_backup_has_the_inputs_bits_too(book):
    os.chmod(book, 0o600)
    assert main(["recalc", str(book), "--in-place", "--backup"]) in (0, 1)
    assert mode_of(book.with_name("features.backup.xlsx")) == 0o600 and mode_of(book) == 0o600


@posix_only
def test_the_temporary_file_is_private_while_it_is_written(book, tmp_path):
    os.chmod(book, 0o644)
    marker = tmp_path / "paused"
    env = {**os.environ, "TRUEBAND_TEST_WRITE_HOOK": f"pause:3:{marker}"}
    proc = subprocess.Popen([sys.executable, "-m", "trueband.bridge", "recalc", str(book), "--in-place"], env=env,
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    try:
        deadline = time.monotonic() + 120
        while not marker.exists():
            assert proc.poll() is None, proc.stderr.read().decode()
            assert time.monotonic() < deadline, "the writer never reached the pause"
            time.sleep(0.05)
        (temp,) = temporaries(book.parent)
        assert mode_of(book.parent / temp) == 0o600  # while the final file will be 0644
    finally:
        proc.kill()
        proc.wait(timeout=60)


def test_the_addin_file_is_written_through_the_safe_writer(tmp_path):
    from trueband.bridge.addin.extension import write_extension

    out = write_extension(tmp_path / "trueband.oxt")
    assert zipfile.ZipFile(out).testzip() is None
    assert temporaries(tmp_path) == []


# ---------------------------------------------------------------- links and files that are not regular

@posix_only
def test_in_place_through_a_symbolic_link_replaces_the_target(book, tmp_path):
    link = tmp_path / "link.xlsx"
    link.symlink_to(book)
    original = digest(book)
    os.chmod(book, 0o600)
    assert main(["recalc", str(link), "--in-place"]) in (0, 1)
    assert link.is_symlink() and link.resolve() == book.resolve()
    assert digest(book) != original  # the real file was recalculated...
    assert mode_of(book) == 0o600     # ...and kept its bits
    assert temporaries(tmp_path) == [] and temporaries(book.parent) == []


@posix_only
def test_a_named_pipe_is_refused_in_one_line_without_waiting(tmp_path):
    pipe = tmp_path / "pipe.xlsx"
    os.mkfifo(pipe)
    # a subprocess with a bound: formerly it waited for ever for a writer to open the pipe
    done = subprocess.run([sys.executable, "-m", "trueband.bridge", "recalc", str(pipe)], capture_output=True,
                          text=True, timeout=120)
    assert done.returncode == 2
    assert len(done.stderr.strip().splitlines()) == 1 and "named pipe" in done.stderr


@posix_only
def test_an_output_that_is_not_a_regular_file_is_refused(book, tmp_path):
    pipe = tmp_path / "out.xlsx"
    os.mkfifo(pipe)
    assert main(["recalc", str(book), "--output", str(pipe), "--overwrite"]) == 2
    assert stat.S_ISFIFO(os.stat(pipe).st_mode)


def test_regular_file_names_what_it_refuses(tmp_path):
    with pytest.raises(NotARegularFile, match="is a folder"):
        files.regular_file(tmp_path, "the output")
    assert files.regular_file(tmp_path / "missing.xlsx") == tmp_path / "missing.xlsx"


# ---------------------------------------------------------------- a failed backup leaves nothing

def test_disk_full_during_the_backup_leaves_no_backup_and_the_input_intact(book, monkeypatch):
    original = digest(book)
    real_copy = files.shutil.copyfileobj

    def disk_full(src, dst, length=0):
        dst.write(src.read(1000))  # part of it, as a full disk does
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(files.shutil, "copyfileobj", disk_full)
    with open_workbook_package(book) as pkg:
        with pytest.raises(Exception, match="the backup features.backup.xlsx could not be written") as info:
            save_workbook(pkg, PackageChanges(), in_place=True, backup=True)
    monkeypatch.setattr(files.shutil, "copyfileobj", real_copy)
    assert "\n" not in str(info.value)
    assert digest(book) == original
    assert sorted(p.name for p in book.parent.iterdir()) == [book.name]


# ---------------------------------------------------------------- what killed runs leave

def _gone_pid() -> int:
    proc = subprocess.Popen([sys.executable, "-c", "pass"])
    proc.wait(timeout=60)
    return proc.pid


@posix_only
def test_the_next_run_removes_what_a_gone_writer_left_and_nothing_else(book):
    folder = book.parent
    dead = _gone_pid()
    left_file = folder / f"{TEMP_PREFIX}{dead}-0123456789ab-features.xlsx.tmp"
    left_file.write_bytes(b"a copy of applicant data")
    left_folder = folder / f"{TEMP_PREFIX}{dead}-0123456789ab-demo.tmp"
    (left_folder / "templates").mkdir(parents=True)
    (left_folder / "templates" / "x.xlsx").write_bytes(b"data")
    sleeper = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(120)"])
    try:
        live = folder / f"{TEMP_PREFIX}{sleeper.pid}-0123456789ab-features.xlsx.tmp"
        live.write_bytes(b"another run, still writing")
        mine = folder / "my.~trueband-notes.tmp"  # not our prefix: never touched
        mine.write_bytes(b"x")
        assert main(["recalc", str(book), "--output", str(folder / "other.xlsx")]) in (0, 1)  # any command
        assert not left_file.exists() and not left_folder.exists()
        assert live.exists() and mine.exists()
    finally:
        sleeper.kill()
        sleeper.wait(timeout=60)
    assert remove_stale_temporaries(folder) == [live]


def test_a_failed_write_removes_its_temporary_file(tmp_path):
    target = tmp_path / "out.bin"
    with pytest.raises(RuntimeError):
        with replacing(target) as temp:
            temp.write_bytes(b"half")
            raise RuntimeError("stopped")
    assert list(tmp_path.iterdir()) == []


def _kill_child(book: Path, delay: float) -> None:
    proc = subprocess.Popen([sys.executable, "-m", "trueband.bridge", "recalc", str(book), "--in-place"],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        proc.wait(timeout=delay)
    except subprocess.TimeoutExpired:
        proc.kill()  # no clean-up code runs: the hardest case
        proc.wait(timeout=60)


@pytest.mark.slow
@posix_only
def test_kill_loop_input_intact_or_fully_replaced_and_no_temporary_after_the_next_run(tmp_path):
    # Bounded: 8 kills at random moments over the span of one run. After each, the input is either its
    # own bytes or a complete workbook (zipfile's CRC check passes, the same parts); after the next run
    # of a command in that folder no temporary file remains.
    (tmp_path / "book").mkdir()
    book = gb.features_book(tmp_path / "book" / "features.xlsx")
    os.chmod(book, 0o600)
    with zipfile.ZipFile(book) as z:
        parts = sorted(z.namelist())
    started = time.monotonic()
    _kill_child(book, 120)  # one whole run, to learn how long one takes here
    span = time.monotonic() - started
    rng = random.Random(15)
    for _ in range(8):
        before = digest(book)
        _kill_child(book, rng.uniform(0.0, span))
        if digest(book) != before:  # replaced: then completely
            with zipfile.ZipFile(book) as z:
                assert z.testzip() is None and sorted(z.namelist()) == parts
        assert mode_of(book) == 0o600
        assert main(["recalc", str(book), "--output", str(tmp_path / "book" / "next.xlsx"), "--overwrite"]) in (0, 1)
        assert temporaries(book.parent) == []


# ---------------------------------------------------------------- a malformed sheet is a problem with the file

@pytest.mark.parametrize("damage", [
    lambda xml: xml[: len(xml) // 2],                                   # cut short
    lambda xml: xml.replace(b'<c r="A2"', b'<c r="2A"', 1),             # a cell address that is none
    lambda xml: xml.replace(b"<sheetData>", b'<sheetData><row r="x">', 1),  # a row number that is none
])
def test_bands_words_a_malformed_sheet_as_a_problem_with_the_file(book, capsys, damage):
    with zipfile.ZipFile(book) as z:
        data = {n: z.read(n) for n in z.namelist()}
    bad = book.with_name("bad.xlsx")
    with zipfile.ZipFile(bad, "w") as z:
        for name, part in data.items():
            z.writestr(name, damage(part) if name == "xl/worksheets/sheet1.xml" else part)
    assert main(["bands", str(bad), "--scores", "Applicants!C2:C7", "--sd", "5", "--reliability", "0.9"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1
    assert "the workbook cannot be read" in err and "fault in trueband" not in err


# ---------------------------------------------------------------- the study and the demo

@pytest.mark.slow
@posix_only
def test_a_study_takes_the_data_workbooks_bits_and_leaves_no_temporary(tmp_path):
    from trueband.bridge.study.build import make_study
    from trueband.bridge.study.demo import make_demo
    from trueband.bridge.study.templates import study_data_workbook

    data = study_data_workbook(tmp_path / "data.xlsx", make_demo(60))
    os.chmod(data, 0o600)
    dead = _gone_pid()
    left = tmp_path / f"{TEMP_PREFIX}{dead}-0123456789ab-study-raw.tmp"  # what a killed study left
    left.write_bytes(b"a copy of applicant data")
    result = make_study(data, tmp_path / "study.xlsx")
    assert mode_of(result.path) == 0o600
    assert temporaries(tmp_path) == []


@posix_only
def test_replacing_keeps_the_bits_of_the_file_it_replaces_and_a_new_file_gets_the_umasks(tmp_path):
    # the add-in file, the study's long sheets: no input to copy from, so the replaced file's bits
    target = tmp_path / "trueband.oxt"
    target.write_bytes(b"old")
    os.chmod(target, 0o640)
    with replacing(target) as temp:
        assert mode_of(temp) == 0o600
        temp.write_bytes(b"new")
    assert target.read_bytes() == b"new" and mode_of(target) == 0o640
    fresh = tmp_path / "fresh.oxt"
    old_mask = os.umask(0o027)
    try:
        with replacing(fresh) as temp:
            temp.write_bytes(b"x")
    finally:
        os.umask(old_mask)
    assert mode_of(fresh) == 0o640  # 0666 less the umask 027, as any new file


@posix_only
def test_a_temporary_folder_is_private_until_it_is_put_in_place(tmp_path):
    final = tmp_path / "demo"
    with files.temporary_folder(tmp_path, "demo") as work:
        assert mode_of(work) == 0o700 and work.name.startswith(TEMP_PREFIX)
        (work / "a.xlsx").write_bytes(b"x")
        files.apply_permissions(work, None)
        os.replace(work, final)
    assert (final / "a.xlsx").exists() and mode_of(final) & 0o700 == 0o700
    assert temporaries(tmp_path) == []
    with pytest.raises(RuntimeError):
        with files.temporary_folder(tmp_path, "demo") as work:
            (work / "b.xlsx").write_bytes(b"applicant data")
            raise RuntimeError("the demo failed part-way")
    assert temporaries(tmp_path) == []
