"""Benchmark: the Validity sheet's live list of people with a criterion (NTH_NUMBER_ROW filled down), 50,000 rows.

The list is one formula shape filled down (``=NTH_NUMBER_ROW(Data!$B$2:$B$N, A2)`` beside the ordinals k), so
the engine evaluates it as a run: the column is read once and the body runs on the array of k. Reference measured
in the same run: the same number of filled-down ``=INDEX(Data!$B$2:$B$N, A2)`` cells, the form the list had
before it was live (typed row numbers, one INDEX per person). Not a test: nothing here asserts a time.

    python bench/bench_criterion_list.py            # 50,000 rows, half with a criterion
    python bench/bench_criterion_list.py 10000
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

import numpy as np
from openpyxl import Workbook

from _timing import best_time
from trueband.bridge.engine.recalc import recalculate


def _book(path: Path, n: int, function: str) -> Path:
    rng = np.random.default_rng(1)
    wb = Workbook()
    data = wb.active
    data.title = "Data"
    data.append(["id", "criterion"])
    for i in range(n):
        data.append([i, round(float(rng.normal(3, 1)), 2) if rng.random() < 0.5 else None])
    listed = wb.create_sheet("List")
    listed.append(["k", "row"])
    for k in range(1, n // 2 + 1):
        listed.append([k, f"={function}(Data!$B$2:$B${n + 1},A{k + 1})"])
    wb.save(path)
    return path


def main() -> None:
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 50_000
    with tempfile.TemporaryDirectory() as folder:
        folder = Path(folder)
        live = _book(folder / "live.xlsx", n, "NTH_NUMBER_ROW")
        reference = _book(folder / "index.xlsx", n, "INDEX")
        t_live, _ = best_time(lambda: recalculate(live, folder / "live.out.xlsx", all_formulas=True,
                                                  overwrite=True), 2)
        t_ref, _ = best_time(lambda: recalculate(reference, folder / "index.out.xlsx", all_formulas=True,
                                                 overwrite=True), 2)
    print(f"{n:,} rows, {n // 2:,} list cells: NTH_NUMBER_ROW run {t_live:.2f} s, INDEX reference {t_ref:.2f} s, "
          f"ratio {t_live / t_ref:.2f}")


if __name__ == "__main__":
    main()
