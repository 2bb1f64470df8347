"""Benchmark: the validation study of a battery of three predictors on 50,000 candidates.

The predictors: the demo's 40-item 0/1 knowledge test, its 12-statement questionnaire (three statements
reverse keyed) and an interview total (the mean of the three raters, given as a total column), each with its
own cut; with a group column and a criterion, so the study writes every sheet: each predictor's Reliability,
Items, Validity, Bands and Fairness, the test's DIF, and Combined.

For each size, in a fresh child process (so peak memory is that size's alone), the battery and, as the
reference measured in the same run, the study of the test alone on the same data: ``battery / one`` says
what the two further predictors cost.

Target (issue 18, within issue #6's): 50,000 candidates in under 60 s and under 2 GB peak on a 2-core machine.

    python bench/bench_study_battery.py            # 5,000 and 50,000
    python bench/bench_study_battery.py 2000       # other sizes
"""

from __future__ import annotations

import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from bench_study import _peak_mb

_ONE = [("item columns", "Q01:Q40"), ("id column", "Applicant"), ("group column", "Group"),
        ("criterion column", "Supervisor rating"), ("retest column", "Retest score"), ("hired column", "Hired")]


def write_data(path: Path, n: int, battery: bool):
    """The demo generator at size n with an interview total column, written in streaming mode (not timed)."""
    from openpyxl import Workbook

    from trueband.bridge.study.demo import make_demo

    demo = make_demo(n)
    cut = float(sorted(demo.items.sum(axis=1))[int(0.6 * n)])
    interview = demo.ratings.mean(axis=1)
    wb = Workbook(write_only=True)
    ws = wb.create_sheet("Applicants")
    ws.append(demo.header() + ["Interview total"])
    for row, total in zip(demo.rows(), interview.tolist()):
        ws.append(row + [total])
    st = wb.create_sheet("Setup")
    for key, value in _ONE + [("cut score", cut), ("test name", "Knowledge test")]:
        st.append([key, value])
    if battery:
        for key, value in (("predictor", "Questionnaire"), ("item columns", "W01:W12"),
                           ("reverse keyed items", "W03, W07, W10"), ("item scale minimum", 1),
                           ("item scale maximum", 5), ("cut score", 40),
                           ("predictor", "Interview"), ("total column", "Interview total"), ("cut score", 3)):
            st.append([key, value])
    wb.save(path)


def one(n: int, battery: bool) -> dict:
    from trueband.bridge.study.build import make_study

    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        data = tmp / "data.xlsx"
        write_data(data, n, battery)
        t0, c0 = time.perf_counter(), time.process_time()
        result = make_study(data, tmp / "study.xlsx")
        total, cpu = time.perf_counter() - t0, time.process_time() - c0
        return {"n": n, "total": total, "cpu": cpu, **result.timings, "peak_mb": _peak_mb(),
                "formulas": result.recalc_report.formulas, "errors": len(result.recalc_report.errors),
                "size_mb": (tmp / "study.xlsx").stat().st_size / 2 ** 20}


def _child(n: int, battery: bool) -> dict | None:
    out = subprocess.run([sys.executable, __file__, "--one", str(n), "battery" if battery else "single"],
                         capture_output=True, text=True)
    if out.returncode != 0:
        print(f"{n:>10} failed:\n{out.stderr[-2000:]}")
        return None
    return json.loads(out.stdout.strip().splitlines()[-1])


def main(argv: list[str]) -> int:
    if argv[:1] == ["--one"]:
        print(json.dumps(one(int(argv[1]), argv[2] == "battery")))
        return 0
    if any(a in ("-h", "--help") for a in argv) or not all(a.isdigit() for a in argv):
        print(__doc__)
        return 0 if argv and argv[0] in ("-h", "--help") else 2
    sizes = [int(a) for a in argv] or [5000, 50000]
    print(f"{'candidates':>10} {'cpu s':>6} {'one cpu':>7} {'cpu ratio':>9} {'total s':>8} {'read':>6} {'build':>6} {'recalc':>7} {'one s':>7} "
          f"{'battery/one':>11} {'peak MB':>8} {'one MB':>7} {'formulas':>9} {'errors':>6}")
    for n in sizes:
        r, ref = _child(n, True), _child(n, False)
        if r is None or ref is None:
            continue
        peak = f"{r['peak_mb']:.0f}" if r["peak_mb"] is not None else "n/a"
        ref_peak = f"{ref['peak_mb']:.0f}" if ref["peak_mb"] is not None else "n/a"
        print(f"{n:>10} {r['cpu']:6.1f} {ref['cpu']:7.1f} {r['cpu'] / ref['cpu']:8.1f}x {r['total']:8.1f} {r['read']:6.1f} {r['build']:6.1f} {r['recalculate']:7.1f} "
              f"{ref['total']:7.1f} {r['total'] / ref['total']:10.1f}x {peak:>8} {ref_peak:>7} {r['formulas']:>9} "
              f"{r['errors']:>6}")
    print("target: three predictors on 50,000 candidates under 60 s and under 2,048 MB peak (cpu s: the child's "
          "processor time, which a machine shared with other work does not inflate as it does the wall-clock total)")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
