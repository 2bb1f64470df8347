"""Live trueband cells in LibreOffice Calc: 10,000 ``=SEM(A1;0.9)`` cells recomputed.

Builds the add-in (``trueband addin``) into a temporary folder, starts a headless Calc with it
as a bundled extension and a fresh profile, and times full recomputations (``calculateAll``) of
a sheet of 10,000 numbers with, in turn, 10,000 ``=SEM(An;0.9)`` cells and 10,000 cells of the
same arithmetic with built-in operators (``=An*SQRT(1-0.9)``), in the same Calc session. Prints
the fastest of several runs of each, their difference per cell, and the ratio; and, in this
process, the per-call time of ``call`` and of the add-in's path (``cell_call``) with the body
alone for reference. Target: the SEM sheet under 0.2 s.

Run with LibreOffice and python3-uno installed: ``python bench/bench_addin.py [--cells N] [--repeat R] [--thin]``.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import timeit
import zipfile
from pathlib import Path

from trueband.bridge.addin import extension as calc_addin
from trueband.funcs.registry import REGISTRY, call

HERE = Path(__file__).resolve().parent
DRIVER = HERE.parent / "tests" / "addin_uno_driver.py"


def calc_times(n: int, repeat: int, **options) -> dict[str, list[float]]:
    soffice = shutil.which("soffice") or shutil.which("libreoffice")
    if soffice is None:
        raise SystemExit("LibreOffice (soffice) is not installed")
    python = "/usr/bin/python3" if Path("/usr/bin/python3").exists() else "python3"
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        unpacked = folder / "extensions" / "trueband"
        unpacked.mkdir(parents=True)
        with zipfile.ZipFile(calc_addin.write_extension(folder / "trueband.oxt", **options)) as z:
            z.extractall(unpacked)
        numbers = [[0, f"A{r}", 5.0 + (r % 97) / 10] for r in range(1, n + 1)]
        steps = [{"new": True}, {"set": numbers},
                 {"fill": {"sheet": 0, "column": "B", "rows": [1, n], "formula": "=SEM(A{row};0.9)"}},
                 {"read": [[0, "B1"]]},
                 {"time_recalc": repeat},
                 {"fill": {"sheet": 0, "column": "B", "rows": [1, n], "formula": "=A{row}*SQRT(1-0.9)"}},
                 {"time_recalc": repeat},
                 {"fill": {"sheet": 0, "column": "B", "rows": [1, n], "formula": "=SEM(A{row};0.9)"}},
                 {"time_recalc": repeat}]
        job = {"soffice": soffice, "profile": (folder / "profile").as_uri(),
               "bundled": (folder / "extensions").as_uri(), "steps": steps}
        done = subprocess.run([python, str(DRIVER)], input=json.dumps(job), capture_output=True, text=True,
                              timeout=1200)
        if done.returncode != 0:
            raise SystemExit(done.stderr[-2000:])
        out = json.loads(done.stdout.strip().splitlines()[-1])
    first = out[3][0]
    if not isinstance(first, float) or abs(first - call("SEM", 5.1, 0.9)) > 1e-12:
        raise SystemExit(f"the SEM cells did not compute (B1 shows {first!r})")
    return {"sem": out[4] + out[8], "arithmetic": out[6]}


def per_call(number: int = 100_000) -> dict[str, float]:
    fn = REGISTRY["SEM"]
    fast = fn.cell_call
    args = (12.0, 0.9)
    return {
        "call": min(timeit.repeat(lambda: call("SEM", *args), number=number, repeat=3)) / number,
        "cell_call": min(timeit.repeat(lambda: fast(args), number=number, repeat=3)) / number,
        "body": min(timeit.repeat(lambda: fn.body(*args), number=number, repeat=3)) / number,
    }


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cells", type=int, default=10_000)
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--thin", action="store_true",
                        help="the thin add-in, calling a trueband serve started here (try --cells 1000)")
    args = parser.parse_args(argv)
    if args.thin:
        from trueband.bridge.http.server import serving_in_background
        from trueband.bridge.http import create_app

        with serving_in_background(create_app()) as url:
            t = calc_times(args.cells, args.repeat, mode="thin", server_url=url)
    else:
        t = calc_times(args.cells, args.repeat)
    sem, arithmetic = min(t["sem"]), min(t["arithmetic"])
    print(f"LibreOffice, {'thin' if args.thin else 'full'} mode, {args.cells:,} cells, full recomputation (fastest of {len(t['sem'])} / {args.repeat}):")
    print(f"  =SEM(An;0.9)         {sem:8.3f} s   ({sem / args.cells * 1e6:.1f} µs a cell)   target < 0.2 s")
    print(f"  =An*SQRT(1-0.9)      {arithmetic:8.3f} s   ({arithmetic / args.cells * 1e6:.1f} µs a cell)")
    print(f"  ratio SEM / built-in {sem / arithmetic:8.1f}×   (difference {(sem - arithmetic) / args.cells * 1e6:.1f} µs a cell)")
    p = per_call()
    print("In this process, one SEM call:")
    for key, value in p.items():
        print(f"  {key:<10} {value * 1e6:6.2f} µs")
    print(f"Python {sys.version.split()[0]} here; LibreOffice's Python runs the add-in ({os.cpu_count()} cores)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
