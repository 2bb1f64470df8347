"""Benchmark: the study build's speed-ups, against the same code with them switched off, in the same run.

The speed-ups switched off for the reference (module flags, so both runs are the same code otherwise):
the binder's memo by formula shape (``formulas/calc_binding.MEMO``), the column reader's pass for plain
inline-string cells (``workbook/sheet_columns.INLINE_PASS``), the long sheets' rows written from a template
per row shape (``study/long_sheets.ROW_MEMO``) and zlib's fastest level for the study's intermediate package
(``study/long_sheets.LEVEL``, 6 in the reference as before). The cell-by-cell row writer's own reordering
(the common cell types first) has no switch: both runs use its present form.

Two studies per size, as ``bench_study.py`` (``impact``: three demographic columns, sites, stages) and
``bench_study_battery.py`` (``battery``: three predictors) write them; each run in a fresh child process
(so peak memory is that run's alone), reference and current one after the other. Read the processor time
(``cpu s``): the machine may be shared, which inflates the wall clock.

    python bench/bench_study_build.py              # 5,000 candidates
    python bench/bench_study_build.py 5000 20000   # other sizes
    python bench/bench_study_build.py --build 20000   # reading and building only (no recalculation)
"""

from __future__ import annotations

import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))

from bench_study import _peak_mb  # noqa: E402


def _switch_off() -> None:
    from trueband.bridge.formulas import calc_binding
    from trueband.bridge.study import long_sheets
    from trueband.bridge.workbook import sheet_columns

    calc_binding.MEMO = False
    sheet_columns.INLINE_PASS = False
    long_sheets.LEVEL = 6
    long_sheets.ROW_MEMO = False


def one(n: int, which: str, reference: bool, data: Path, build_only: bool = False) -> dict:
    from trueband.bridge.study.build import build_study, make_study
    from trueband.bridge.study.data_workbook import read_study_data

    if reference:
        _switch_off()
    with tempfile.TemporaryDirectory() as tmp:
        t0, c0 = time.perf_counter(), time.process_time()
        if build_only:  # the part the speed-ups are in, without the recalculation's noise
            read = read_study_data(data)
            t1 = time.perf_counter()
            build_study(read, Path(tmp) / "raw.xlsx")
            t2 = time.perf_counter()
            return {"cpu": time.process_time() - c0, "total": t2 - t0, "read": t1 - t0, "build": t2 - t1,
                    "recalculate": 0.0, "peak_mb": _peak_mb(), "formulas": 0, "errors": 0}
        result = make_study(data, Path(tmp) / "study.xlsx")
        return {"cpu": time.process_time() - c0, "total": time.perf_counter() - t0, **result.timings,
                "peak_mb": _peak_mb(), "formulas": result.recalc_report.formulas,
                "errors": len(result.recalc_report.errors)}


def _data(n: int, which: str, folder: Path) -> Path:
    path = folder / f"{which}-{n}.xlsx"
    if which == "impact":
        from bench_study import write_data

        write_data(path, n, True)
    else:
        from bench_study_battery import write_data

        write_data(path, n, True)
    return path


def main(argv: list[str]) -> int:
    if argv[:1] == ["--one"]:
        print(json.dumps(one(int(argv[1]), argv[2], argv[3] == "reference", Path(argv[4]), argv[5:6] == ["build"])))
        return 0
    build_only = argv[:1] == ["--build"]
    argv = argv[1:] if build_only else argv
    if any(a in ("-h", "--help") for a in argv) or not all(a.isdigit() for a in argv):
        print(__doc__)
        return 0 if argv and argv[0] in ("-h", "--help") else 2
    sizes = [int(a) for a in argv] or [5000]
    print(f"{'candidates':>10} {'study':>8} {'run':>9} {'cpu s':>7} {'wall s':>7} {'read':>6} {'build':>6} "
          f"{'recalc':>7} {'peak MB':>8} {'formulas':>9} {'errors':>6}")
    with tempfile.TemporaryDirectory() as tmp:
        for n in sizes:
            for which in ("impact", "battery"):
                data = _data(n, which, Path(tmp))
                got = {}
                for run in ("reference", "current"):
                    out = subprocess.run([sys.executable, __file__, "--one", str(n), which, run, str(data),
                                          *(["build"] if build_only else [])], capture_output=True, text=True)
                    if out.returncode != 0:
                        print(f"{n:>10} {which:>8} {run:>9} failed:\n{out.stderr[-2000:]}")
                        continue
                    r = got[run] = json.loads(out.stdout.strip().splitlines()[-1])
                    peak = f"{r['peak_mb']:.0f}" if r["peak_mb"] is not None else "n/a"
                    print(f"{n:>10} {which:>8} {run:>9} {r['cpu']:7.1f} {r['total']:7.1f} {r['read']:6.1f} "
                          f"{r['build']:6.1f} {r['recalculate']:7.1f} {peak:>8} {r['formulas']:>9} {r['errors']:>6}")
                if len(got) == 2:
                    print(f"{'':>10} {which:>8} reference / current: processor time "
                          f"{got['reference']['cpu'] / got['current']['cpu']:.2f}x, build (wall) "
                          f"{got['reference']['build'] / got['current']['build']:.2f}x")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
