"""Compare every cell (formula and stored value) of the workbooks of two folders: a speed change must not
change a built study.

    trueband demo /tmp/before      # with the code before the change
    trueband demo /tmp/after       # with the code after it
    python bench/compare_books.py /tmp/before /tmp/after

Prints each workbook's count of cells compared and the first differences; exits 1 when any differ.
Values are compared exactly (a float must be the same float), except that a float differing by less
than ``--rel`` (relative; default 0, i.e. exact) is reported apart, as rounding.
"""

from __future__ import annotations

import argparse
import math
import sys
from pathlib import Path

from openpyxl import load_workbook


def cells(path: Path, data_only: bool) -> dict:
    wb = load_workbook(path, data_only=data_only, read_only=True)
    out = {}
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for c in row:
                if c.value is not None and hasattr(c, "coordinate"):
                    out[(ws.title, c.coordinate)] = c.value
    wb.close()
    return out


def compare(a: Path, b: Path, rel: float) -> tuple[int, list, list]:
    """(cells compared, differences, float differences within ``rel``)."""
    diffs, near, total = [], [], 0
    for data_only in (False, True):
        ca, cb = cells(a, data_only), cells(b, data_only)
        for key in sorted(set(ca) | set(cb)):
            total += 1
            x, y = ca.get(key), cb.get(key)
            if x == y or (isinstance(x, float) and isinstance(y, float) and math.isnan(x) and math.isnan(y)):
                continue
            entry = ("value" if data_only else "formula", *key, x, y)
            if isinstance(x, float) and isinstance(y, float) and abs(x - y) <= rel * max(abs(x), abs(y)):
                near.append(entry)
            else:
                diffs.append(entry)
    return total, diffs, near


def main(argv: list[str]) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("before", type=Path)
    parser.add_argument("after", type=Path)
    parser.add_argument("--rel", type=float, default=0.0)
    args = parser.parse_args(argv)
    bad = False
    for path in sorted(args.before.rglob("*.xlsx")):
        other = args.after / path.relative_to(args.before)
        if not other.exists():
            print(f"{path.relative_to(args.before)}: missing after")
            bad = True
            continue
        total, diffs, near = compare(path, other, args.rel)
        print(f"{path.relative_to(args.before)}: {total} cells (formulas and values), {len(diffs)} different, "
              f"{len(near)} within rel {args.rel:g}")
        for d in (diffs + near)[:10]:
            print("   ", d)
        bad |= bool(diffs)
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
