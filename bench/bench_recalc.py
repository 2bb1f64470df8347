"""Benchmark of ``trueband recalc`` against references measured in the same run.

For each size (rows of the scoring workbook of ``make_scoring_book.py``) it
times, on the same machine and in the same run:

(a) the I/O floor: read the cells with the package's column reader, compute
    the same columns with numpy, write the values into the package with the
    same patcher and writer, nothing else; run as a new process (Python
    start-up and the imports of numpy and the package code included, as
    they are in (b)), its in-process time printed beside it;
(b) ``trueband recalc`` as a command (a new process: start-up and imports
    included), on the standard twin with ``--all`` and on the twin that uses
    the registered function SCORE_CI (default selection), with its peak
    memory;
(c) LibreOffice Calc headless converting the standard twin xlsx → xlsx (it
    recalculates on the way: the file stores no values);
(e) ``trueband recalc --all`` on the standard twin saved as desktop apps save
    it: ``\r\n`` after the XML declaration of every part (its time and peak
    memory over (b)'s: the target is within 1.1x);
(d) ``formulas.ExcelModel`` load + calculate of the standard twin, skipped
    where a linear extrapolation from the largest size measured so far
    says it would take over five minutes (printed as skipped, with the
    estimate, which is a lower bound: its time grows faster than linearly).

It prints a table and the ratios the targets are stated in. Not a test:
nothing here asserts a time.

Usage::

    python bench/bench_recalc.py [--sizes 1000,10000,50000,1048576] [--folder DIR] [--skip-libreoffice]
                                 [--skip-excel-model]
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parent))
import make_scoring_book  # noqa: E402

EXCEL_MODEL_LIMIT = 300.0  # seconds
ITEMS = 10


def io_floor(src: Path, dst: Path) -> float:
    """(a): read, compute with numpy, patch and write; returns seconds (in this process)."""
    import gc

    from trueband.bridge.workbook import sheet_columns, sheet_patch
    from trueband.bridge.workbook.save import PackageChanges, save_workbook
    from trueband.bridge.workbook.package import open_workbook_package

    gc.disable()  # as recalc does: millions of short-lived objects, no cycles
    started = time.perf_counter()
    with open_workbook_package(src) as pkg:
        info = pkg.worksheets[0]
        xml = pkg.read(info.part)
        cols = sheet_columns.read_column_arrays(xml, pkg.shared_strings).columns
        x = np.column_stack([cols[2 + k].numbers[1:] for k in range(ITEMS)])  # rows 2.. (row 1 is the header)
        n = x.shape[0]
        total = x.sum(axis=1)
        mean, sd = total.mean(), total.std(ddof=1)
        z = (total - mean) / sd
        decision = np.where(z >= 1, "shortlist", "review")
        lower = total - 1.959963984540054 * sd * np.sqrt(1 - 0.8)
        letters = [make_scoring_book._letters(2 + ITEMS + k) for k in range(4)]
        stats = make_scoring_book._letters(2 + ITEMS + 5)
        # cells keyed and handed over as recalc does (bytes references, the part in pieces)
        values = {f"{stats}1".encode(): float(mean), f"{stats}2".encode(): float(sd)}
        for col, column in zip(letters, (total, z, decision, lower)):
            values.update(zip([b"%s%d" % (col.encode(), r) for r in range(2, n + 2)], column.tolist()))
        changes = PackageChanges()
        changes.set(pkg, info.part, sheet_patch.patch_values(xml, values, consume=True, pieces=True))
        save_workbook(pkg, changes, output=dst, overwrite=True)
    assert n == len(total)
    return time.perf_counter() - started


def io_floor_process(src: Path, dst: Path) -> tuple[float, float]:
    """(a) as a command: a new process that imports numpy and the package code, then runs :func:`io_floor`.
    Returns (whole process, in-process) seconds, comparable with (b), which is a new process too."""
    code = ("import sys\n"
            f"sys.path.insert(0, {str(Path(__file__).parent)!r})\n"
            "import bench_recalc\n"
            "from pathlib import Path\n"
            "print(bench_recalc.io_floor(Path(sys.argv[1]), Path(sys.argv[2])))\n")
    seconds, proc = timed([sys.executable, "-c", code, str(src), str(dst)])
    if proc.returncode != 0:
        raise RuntimeError(f"the I/O floor failed: {proc.stderr[-2000:]}")
    return seconds, float(proc.stdout.strip().splitlines()[-1])


def same_sheets(a: Path, b: Path) -> bool:
    """Whether two outputs hold the same worksheet bytes (the floor computes what recalc computes)."""
    import zipfile

    with zipfile.ZipFile(a) as za, zipfile.ZipFile(b) as zb:
        return za.read("xl/worksheets/sheet1.xml") == zb.read("xl/worksheets/sheet1.xml")


def with_crlf_declarations(src: Path, dst: Path) -> Path:
    """(e)'s book: ``src`` with ``\r\n`` after the XML declaration of every XML part, as desktop apps write it."""
    import re
    import zipfile

    with zipfile.ZipFile(src) as a, zipfile.ZipFile(dst, "w", zipfile.ZIP_DEFLATED) as b:
        for info in a.infolist():
            data = a.read(info)
            if info.filename.endswith((".xml", ".rels")):
                data = re.sub(rb"\A(<\?xml[^>]*\?>)\r?\n?", rb"\1\r\n", data, count=1)
            b.writestr(info, data)
    return dst


def timed(cmd: list[str], **kw) -> tuple[float, subprocess.CompletedProcess]:
    started = time.perf_counter()
    proc = subprocess.run(cmd, capture_output=True, text=True, **kw)
    return time.perf_counter() - started, proc


def trueband_recalc(src: Path, dst: Path, *, all_formulas: bool) -> tuple[float, float | None, str]:
    """(b) in a child process that reports its own peak memory."""
    # Linux keeps a process's ru_maxrss across fork and exec (a child starts with its parent's peak), so the
    # child reads its own high-water mark from /proc where there is one.
    code = ("import resource, sys, time\n"
            "from trueband.bridge import cli\n"
            "rc = cli.main(sys.argv[1:])\n"
            "try:\n"
            "    kb = next(int(l.split()[1]) for l in open('/proc/self/status') if l.startswith('VmHWM:'))\n"
            "except OSError:\n"
            "    kb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss\n"
            "    kb = kb / 1024.0 if sys.platform == 'darwin' else kb\n"
            "print('PEAK_MB', kb / 1024.0, file=sys.stderr)\n"
            "sys.exit(rc)\n")
    args = ["recalc", str(src), "-o", str(dst)] + (["--all"] if all_formulas else [])
    try:
        import resource  # noqa: F401
        cmd = [sys.executable, "-c", code, *args]
    except ImportError:
        cmd = [sys.executable, "-m", "trueband.bridge", *args]
    seconds, proc = timed(cmd)
    if proc.returncode not in (0, 1):
        raise RuntimeError(f"trueband recalc failed: {proc.stderr}")
    peak = None
    summary = ""
    for line in proc.stderr.splitlines():
        if line.startswith("PEAK_MB"):
            peak = float(line.split()[1])
        elif "formula cells evaluated" in line:
            summary = line
    return seconds, peak, summary


def libreoffice(src: Path, folder: Path) -> float | None:
    """(c): soffice headless xlsx → xlsx, with a private profile (created by a first, untimed run)."""
    soffice = shutil.which("soffice") or shutil.which("libreoffice")
    if soffice is None:
        return None
    profile = folder / "lo-profile"
    out = folder / "lo-out"
    out.mkdir(exist_ok=True)
    cmd = [soffice, f"-env:UserInstallation={profile.as_uri()}", "--headless", "--norestore",
           "--convert-to", "xlsx", "--outdir", str(out), str(src)]
    seconds, proc = timed(cmd, timeout=3600)
    if proc.returncode != 0:
        raise RuntimeError(f"LibreOffice failed: {proc.stderr}")
    return seconds


def excel_model(src: Path) -> float:
    """(d) in a child process (its memory is freed afterwards)."""
    code = ("import sys, time, formulas\n"
            "t = time.perf_counter()\n"
            "xl = formulas.ExcelModel().loads(sys.argv[1]).finish()\n"
            "xl.calculate()\n"
            "print(time.perf_counter() - t)\n")
    seconds, proc = timed([sys.executable, "-c", code, str(src)], timeout=3600)
    if proc.returncode != 0:
        raise RuntimeError(f"ExcelModel failed: {proc.stderr[-2000:]}")
    return seconds


def in_process_seconds(summary: str) -> float:
    """The seconds in a summary line such as ``... 0 errors, 1.71 s → out.xlsx``."""
    import re
    m = re.search(r"([0-9.]+) s(?: |$)", summary)
    return float(m.group(1)) if m else float("nan")


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description="Time trueband recalc against its references.")
    p.add_argument("--sizes", default="1000,10000,50000,1048576")
    p.add_argument("--folder", type=Path, default=None, help="working folder (default: a temporary one)")
    p.add_argument("--skip-libreoffice", action="store_true")
    p.add_argument("--skip-excel-model", action="store_true")
    p.add_argument("--json", type=Path, help="also write the results here")
    a = p.parse_args(argv)
    sizes = [int(s) for s in a.sizes.split(",")]
    folder = a.folder or Path(tempfile.mkdtemp(prefix="trueband-bench-"))
    folder.mkdir(parents=True, exist_ok=True)
    if not a.skip_libreoffice and (shutil.which("soffice") or shutil.which("libreoffice")):
        warm = make_scoring_book.write_book(folder / "warm.xlsx", 10)
        libreoffice(warm, folder)  # creates the profile: not part of any timing
    rows = []
    excel_rate = None  # seconds per row of the largest ExcelModel run so far
    for n in sizes:
        std = make_scoring_book.write_book(folder / f"standard-{n}.xlsx", n)
        reg = make_scoring_book.write_book(folder / f"registered-{n}.xlsx", n, registered=True)
        r = {"rows": n}
        r["floor"], r["floor_in_process"] = io_floor_process(std, folder / f"floor-{n}.xlsx")
        r["recalc"], r["recalc_peak_mb"], r["recalc_summary"] = trueband_recalc(std, folder / f"recalc-{n}.xlsx",
                                                                                all_formulas=True)
        r["recalc_registered"], r["registered_peak_mb"], _ = trueband_recalc(reg, folder / f"recalc-reg-{n}.xlsx",
                                                                             all_formulas=False)
        crlf = with_crlf_declarations(std, folder / f"crlf-{n}.xlsx")
        r["recalc_crlf"], r["crlf_peak_mb"], _ = trueband_recalc(crlf, folder / f"recalc-crlf-{n}.xlsx",
                                                                 all_formulas=True)
        r["same_as_floor"] = same_sheets(folder / f"floor-{n}.xlsx", folder / f"recalc-{n}.xlsx")
        r["libreoffice"] = None if a.skip_libreoffice else libreoffice(std, folder)
        estimate = None if excel_rate is None else excel_rate * n
        if a.skip_excel_model:
            r["excel_model"], r["excel_model_estimate"] = None, float("nan")
        elif estimate is not None and estimate > EXCEL_MODEL_LIMIT:
            r["excel_model"], r["excel_model_estimate"] = None, estimate
        else:
            r["excel_model"] = excel_model(std)
            excel_rate = r["excel_model"] / n
        rows.append(r)
        print(json.dumps(r), file=sys.stderr, flush=True)
        for f in folder.glob(f"*-{n}.xlsx"):
            f.unlink()
    print()
    print(f"trueband recalc benchmark, {ITEMS} items; seconds (same machine, same run); {os.cpu_count()} cores")
    head = (f"{'rows':>9} {'floor (a)':>10} {'a in-proc':>10} {'recalc (b)':>11} {'b in-proc':>10} "
            f"{'b, SCORE_CI':>12} {'peak MB':>8} {'LibreOffice (c)':>16} {'ExcelModel (d)':>16} {'b/a':>6} "
            f"{'c/b':>6} {'d/b':>8} {'b = a':>6}")
    print(head)
    for r in rows:
        lo = r["libreoffice"]
        em = r["excel_model"]
        em_text = f"{em:.1f}" if em is not None else f"skip (>{r['excel_model_estimate']:.0f})"
        d_ratio = (f"{em / r['recalc']:.0f}" if em is not None else f">{r['excel_model_estimate'] / r['recalc']:.0f}")
        lo_text = "-" if lo is None else f"{lo:.2f}"
        c_ratio = "-" if lo is None else f"{lo / r['recalc']:.2f}"
        peak = r["recalc_peak_mb"] or 0
        inproc = in_process_seconds(r["recalc_summary"])
        print(f"{r['rows']:>9} {r['floor']:>10.2f} {r['floor_in_process']:>10.2f} {r['recalc']:>11.2f} "
              f"{inproc:>10.2f} {r['recalc_registered']:>12.2f} {peak:>8.0f} {lo_text:>16} {em_text:>16} "
              f"{r['recalc'] / r['floor']:>6.2f} {c_ratio:>6} {d_ratio:>8} {'yes' if r['same_as_floor'] else 'NO':>6}")
    print("a and b are each a whole command (a new process: start-up and imports included); 'in-proc' is the")
    print("work itself (b: as the command's summary line reports it). b/a: recalc over the I/O floor (target ≤ 2);")
    print("c/b: LibreOffice over recalc (target ≥ 1 at 10k and 50k);")
    print("d/b: ExcelModel over recalc (target ≥ 100 at 10k; '>' marks a skipped run's linear lower bound).")
    print("b = a: recalc wrote the same sheet bytes as the floor (the same values, computed two ways).")
    print()
    print("(e) the same book with CRLF after each part's XML declaration (as desktop apps save it), recalc --all:")
    print(f"{'rows':>9} {'e seconds':>10} {'e peak MB':>10} {'e/b time':>9} {'e/b memory':>11}  (target ≤ 1.1)")
    for r in rows:
        mem = (f"{r['crlf_peak_mb'] / r['recalc_peak_mb']:.2f}" if r["crlf_peak_mb"] and r["recalc_peak_mb"]
               else "-")
        print(f"{r['rows']:>9} {r['recalc_crlf']:>10.2f} {r['crlf_peak_mb'] or 0:>10.0f} "
              f"{r['recalc_crlf'] / r['recalc']:>9.2f} {mem:>11}")
    if a.json:
        a.json.write_text(json.dumps(rows, indent=2))
    if a.folder is None:
        shutil.rmtree(folder, ignore_errors=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
