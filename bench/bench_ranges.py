"""Benchmark: range arguments converted to floats in one numpy step, on and off.

Two measurements, each with ``bridge/formulas/library.py``'s ``FAST_RANGES`` and ``funcs/_validate.py``'s
``FAST_BLANK_TEXTS`` on and, as the reference in the same run, off (the cell-by-cell loops, as before):

* the conversion alone of one column of ``n`` numbers (``_convert_range``, fresh each time), and
  ``numeric_vector`` of a column of ``n`` cells, a third of them ``""`` (a formula's empty text);
* a study of ``n`` candidates (``impact``, as ``bench_engine.py`` builds it; not timed) recalculated in two fresh
  child processes; the two outputs must be the same in every cell (``compare_books.compare``).

    python bench/bench_ranges.py              # 5,000
    python bench/bench_ranges.py 20000
"""

from __future__ import annotations

import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from bench_engine import build
from bench_study import _peak_mb


def child(raw: str, out: str, mode: str) -> dict:
    from trueband.bridge.engine.recalc import recalculate
    from trueband.bridge.formulas import library
    from trueband.funcs import _validate

    library.FAST_RANGES = _validate.FAST_BLANK_TEXTS = mode == "on"
    c0 = time.process_time()
    report = recalculate(Path(raw), Path(out))
    return {"cpu": time.process_time() - c0, "peak_mb": _peak_mb(), "formulas": report.formulas,
            "errors": len(report.errors)}


def conversion(n: int) -> dict:
    import numpy as np

    from trueband.bridge.formulas import library
    from trueband.funcs import _validate

    column = np.array([[float(i % 41)] for i in range(n)], dtype=object)
    texts = [[""] if i % 3 == 0 else [float(i % 41)] for i in range(n)]
    got = {}
    for mode in ("on", "off"):
        library.FAST_RANGES = _validate.FAST_BLANK_TEXTS = mode == "on"
        c0 = time.process_time()
        for _ in range(20):
            library._convert_range(column)  # the cache is bypassed: each call converts afresh
        c1 = time.process_time()
        for _ in range(5):
            _validate.numeric_vector("values", texts)
        got[mode] = ((c1 - c0) / 20, (time.process_time() - c1) / 5)
    library.FAST_RANGES = _validate.FAST_BLANK_TEXTS = True
    return got


def main(argv: list[str]) -> int:
    if argv[:1] == ["--child"]:
        print(json.dumps(child(*argv[1:4])))
        return 0
    if any(a in ("-h", "--help") for a in argv):
        print(__doc__)
        return 0
    from compare_books import compare

    n = next((int(a) for a in argv if a.isdigit()), 5000)
    c = conversion(n)
    for k, what in enumerate(("_convert_range, numbers", "numeric_vector, a third \"\"")):
        print(f"one column of {n} cells, {what}: on {c['on'][k] * 1e3:.2f} ms, off {c['off'][k] * 1e3:.2f} ms, "
              f"off / on {c['off'][k] / c['on'][k]:.1f}x")
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        raw = build(tmp, n, "impact")
        got = {}
        for mode in ("on", "off"):
            out = subprocess.run([sys.executable, __file__, "--child", str(raw), str(tmp / f"{mode}.xlsx"), mode],
                                 capture_output=True, text=True)
            if out.returncode != 0:
                print(f"{mode} failed:\n{out.stderr[-2000:]}")
                return 1
            got[mode] = json.loads(out.stdout.strip().splitlines()[-1])
        on, off = got["on"], got["off"]
        print(f"recalculation of the impact study, {n} candidates ({on['formulas']} formulas, errors {on['errors']}, "
              f"{off['errors']}): on {on['cpu']:.1f} s, off {off['cpu']:.1f} s, off / on {off['cpu'] / on['cpu']:.2f}x; "
              f"peak {on['peak_mb'] or 0:.0f} / {off['peak_mb'] or 0:.0f} MB")
        total, diffs, near = compare(tmp / "on.xlsx", tmp / "off.xlsx", 0.0)
        print(f"outputs on and off: {total} cells compared, {len(diffs)} different")
        for d in diffs[:10]:
            print("   ", d)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
