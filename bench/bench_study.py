"""Benchmark: the validation study on 5,000 and 50,000 candidates x 40 items.

Two setups per size: ``plain`` (one group column, as before issue 17) and ``impact`` (three demographic
columns, a stratum column with three sites and two stage columns: the Strata, Cuts, Stages and Groups sheets).

For each size, in a fresh child process (so peak memory is that size's alone):

* the study: reading and checking the data, building the workbook, recalculating it
  (``make_study``), with the share of each stage;
* a reference measured in the same run: the copy floor, i.e. reading the data sheet with
  openpyxl and writing it back in streaming mode, nothing else. The study necessarily does at
  least this much, so ``study / floor`` says how much the analysis itself costs.

Target (issue #6): 50,000 candidates in under 60 s and under 2 GB peak on a 2-core machine.

Measured when issue 17 added the impact setup (a 2-core machine shared with other work, so processor time is
the figure to read): 50,000 plain 62 s of processor time, 710 MB peak; 50,000 impact 104 s, 742 MB: the impact
setup is over the 60 s target. A profile at 10,000 puts most of the difference in the COUNTIFS of the Cuts,
Stages and Strata sheets, which the formulas library evaluates cell by cell (``_text2num``); a fast path for
COUNTIFS over fixed ranges in the engine (as it has for SUM, COUNT, ...) is the likely fix.
That fast path exists now (``bridge/engine/criteria.py``); with it and the study's sheets written without
character references, 5,000 impact went from 22.8 s to 15.2 s of processor time and 50,000 impact measured
67 s, 806 MB with the final code (bench/README.md, 2026-12-05): still over the target. After main's merge the
impact study writes 869,702 formulas at 50,000 (629,473 before) and measured 79 s, 860 MB (bench/README.md).
At the end of 2026-12-05, with fewer per-applicant formulas (595,064) and the build's and engine's fast paths:
60.7 s of processor time, 900 MB (bench/README.md): at the target, within this machine's noise.
The build's own speed-ups (the binder memoised by formula shape, the long sheets' rows from templates, the
intermediate package at zlib level 1, the column reader's inline-string pass) are measured against themselves
switched off by ``bench_study_build.py`` (bench/README.md, 2026-12-05, build side).

    python bench/bench_study.py            # 5,000 and 50,000
    python bench/bench_study.py 2000       # other sizes
"""

from __future__ import annotations

import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path


def _peak_mb() -> float | None:
    try:
        import resource
    except ImportError:  # Windows: no getrusage; memory is not reported there
        return None
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return peak / 1024 if sys.platform != "darwin" else peak / 2 ** 20


def write_data(path: Path, n: int, impact: bool = False):
    """The demo generator at size n, written in streaming mode (not timed); ``impact`` adds a third demographic
    column (invented, random) and names the demo's age band, sites and stages in the Setup."""
    from openpyxl import Workbook

    from trueband.bridge.study.demo import make_demo

    demo = make_demo(n)
    scores = demo.items.sum(axis=1)
    cut = float(sorted(scores)[int(0.6 * n)])
    wb = Workbook(write_only=True)
    ws = wb.create_sheet("Applicants")
    import numpy as np

    third = np.random.default_rng(7).choice(["Band 1", "Band 2", "Band 3"], n)  # invented third column
    ws.append(demo.header() + ["Region band"])
    for i, row in enumerate(demo.rows()):
        ws.append(row + [str(third[i])])
    st = wb.create_sheet("Setup")
    settings = [("item columns", "Q01:Q40"), ("id column", "Applicant"), ("group column", "Group"),
                ("rating columns", "Interview rater 1:Interview rater 3"),
                ("criterion column", "Supervisor rating"), ("retest column", "Retest score"),
                ("hired column", "Hired"), ("cut score", cut)]
    if impact:
        settings += [("group columns", "Group, Age band, Region band"), ("stratum column", "Site"),
                     ("stage columns", "Passed screen, Interviewed")]
    for key, value in settings:
        st.append([key, value])
    wb.save(path)


def copy_floor(src: Path, dst: Path) -> float:
    from openpyxl import Workbook, load_workbook

    t0 = time.perf_counter()
    rb = load_workbook(src, read_only=True, data_only=True)
    wb = Workbook(write_only=True)
    ws = wb.create_sheet("Applicants")
    for row in rb["Applicants"].iter_rows(values_only=True):
        ws.append(row)
    rb.close()
    wb.save(dst)
    return time.perf_counter() - t0


def one(n: int, impact: bool) -> dict:
    from trueband.bridge.study.build import make_study

    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        data = tmp / "data.xlsx"
        write_data(data, n, impact)
        t0, c0 = time.perf_counter(), time.process_time()
        result = make_study(data, tmp / "study.xlsx")
        total, cpu = time.perf_counter() - t0, time.process_time() - c0
        floor = copy_floor(data, tmp / "copy.xlsx")
        return {"n": n, "setup": "impact" if impact else "plain", "total": total, "cpu": cpu, **result.timings, "floor": floor, "peak_mb": _peak_mb(),
                "formulas": result.recalc_report.formulas, "errors": len(result.recalc_report.errors),
                "size_mb": (tmp / "study.xlsx").stat().st_size / 2 ** 20}


def main(argv: list[str]) -> int:
    if argv[:1] == ["--one"]:
        print(json.dumps(one(int(argv[1]), argv[2:3] == ["impact"])))
        return 0
    if any(a in ("-h", "--help") for a in argv) or not all(a.isdigit() for a in argv):
        print(__doc__)
        return 0 if argv and argv[0] in ("-h", "--help") else 2
    sizes = [int(a) for a in argv] or [5000, 50000]
    print(f"{'candidates':>10} {'setup':>6} {'cpu s':>6} {'total s':>8} {'read':>6} {'build':>6} {'recalc':>7} {'recalc %':>8} "
          f"{'build %':>7} {'floor s':>7} {'study/floor':>11} {'peak MB':>8} {'formulas':>9} {'errors':>6}")
    for n, which in ((n, w) for n in sizes for w in ("plain", "impact")):
        out = subprocess.run([sys.executable, __file__, "--one", str(n), which], capture_output=True, text=True)
        if out.returncode != 0:
            print(f"{n:>10} {which:>6} failed:\n{out.stderr[-2000:]}")
            continue
        r = json.loads(out.stdout.strip().splitlines()[-1])
        peak = f"{r['peak_mb']:.0f}" if r["peak_mb"] is not None else "n/a"
        print(f"{n:>10} {which:>6} {r['cpu']:6.1f} {r['total']:8.1f} {r['read']:6.1f} {r['build']:6.1f} {r['recalculate']:7.1f} "
              f"{100 * r['recalculate'] / r['total']:7.0f}% {100 * r['build'] / r['total']:6.0f}% "
              f"{r['floor']:7.1f} {r['total'] / r['floor']:10.1f}x {peak:>8} {r['formulas']:>9} {r['errors']:>6}")
    print("target: 50,000 candidates under 60 s and under 2,048 MB peak (cpu s: this process's processor time, "
          "which a machine shared with other work does not inflate as it does the wall-clock total)")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
