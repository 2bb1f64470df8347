"""Benchmark: the recalculation of a built study with the engine's array fast paths on and off.

For each size and setup (``impact``: bench_study.py's three demographic columns, strata and stages; ``battery``:
bench_study_battery.py's three predictors) the study workbook is built once (not timed), then recalculated in
two fresh child processes: with ``bridge/engine/fast_paths.py`` on (``ENABLED``) and, as the reference measured in
the same run, off (COUNT in runs, CHOOSE, SLOPE/INTERCEPT/STEYX/CORREL/RSQ through the library cell by cell). It
prints each child's processor time and peak memory and ``off / on``; the two outputs must be the same in every
cell (``bench/compare_books.py``).

    python bench/bench_engine.py                 # 5,000, both setups
    python bench/bench_engine.py 20000 impact    # one size, one setup
"""

from __future__ import annotations

import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from bench_study import _peak_mb


def build(folder: Path, n: int, setup: str) -> Path:
    import bench_study
    import bench_study_battery

    from trueband.bridge.study.build import build_study
    from trueband.bridge.study.data_workbook import read_study_data

    data = folder / f"data-{setup}.xlsx"
    if setup == "impact":
        bench_study.write_data(data, n, True)
    else:
        bench_study_battery.write_data(data, n, True)
    raw = folder / f"raw-{setup}.xlsx"
    build_study(read_study_data(data), raw)
    return raw


def child(raw: str, out: str, mode: str) -> dict:
    from trueband.bridge.engine import fast_paths
    from trueband.bridge.engine.recalc import recalculate

    fast_paths.ENABLED = mode == "on"
    c0 = time.process_time()
    report = recalculate(Path(raw), Path(out))
    return {"cpu": time.process_time() - c0, "peak_mb": _peak_mb(), "formulas": report.formulas,
            "errors": len(report.errors)}


def main(argv: list[str]) -> int:
    if argv[:1] == ["--child"]:
        print(json.dumps(child(*argv[1:4])))
        return 0
    if any(a in ("-h", "--help") for a in argv):
        print(__doc__)
        return 0
    sizes = [int(a) for a in argv if a.isdigit()] or [5000]
    setups = [a for a in argv if a in ("impact", "battery")] or ["impact", "battery"]
    print(f"{'candidates':>10} {'setup':>8} {'on cpu s':>8} {'off cpu s':>9} {'off/on':>7} {'on MB':>6} {'off MB':>6} "
          f"{'formulas':>9} {'errors':>6}")
    for n in sizes:
        for setup in setups:
            with tempfile.TemporaryDirectory() as tmp:
                tmp = Path(tmp)
                raw = build(tmp, n, setup)
                got = {}
                for mode in ("on", "off"):
                    out = subprocess.run([sys.executable, __file__, "--child", str(raw), str(tmp / f"{mode}.xlsx"), mode],
                                         capture_output=True, text=True)
                    if out.returncode != 0:
                        print(f"{n:>10} {setup:>8} {mode} failed:\n{out.stderr[-2000:]}")
                        break
                    got[mode] = json.loads(out.stdout.strip().splitlines()[-1])
                else:
                    on, off = got["on"], got["off"]
                    print(f"{n:>10} {setup:>8} {on['cpu']:8.1f} {off['cpu']:9.1f} {off['cpu'] / on['cpu']:6.2f}x "
                          f"{on['peak_mb'] or 0:6.0f} {off['peak_mb'] or 0:6.0f} {on['formulas']:>9} {on['errors']:>6}")
    print("processor time of the recalculation alone (the build is not timed); read the ratio on a shared machine")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
