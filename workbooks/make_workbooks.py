"""Regenerate the demo and the templates in this folder: ``python workbooks/make_workbooks.py``.

Writes ``workbooks/demo/`` exactly as ``trueband demo workbooks/demo`` does (the invented
Osterfell Harbour Logistics data, its validation study, the filled scoring and adverse-impact
sheets, and the empty templates under ``templates/``), replacing what was there.
"""

from __future__ import annotations

import shutil
import sys
from pathlib import Path

from trueband.bridge.study.demo_folder import write_demo


def main() -> int:
    target = Path(__file__).resolve().parent / "demo"
    if target.exists():
        shutil.rmtree(target)
    result, paths = write_demo(target)
    for path in paths.values():
        print(path.relative_to(target.parent))
    report = result.recalc_report
    return 0 if report is None or report.ok else 1


if __name__ == "__main__":
    sys.exit(main())
