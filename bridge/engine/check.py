"""What ``trueband check`` computes: a workbook read, nothing written, its likely mistakes listed.

:func:`check_workbook` loads the workbook's formulas as :func:`~.recalc.recalculate` does and
lists, run by run (a run is a filled-down group of formulas), the cells that use trueband
functions, unknown function names (with a suggestion), calls with too few or too many arguments,
references outside the used range of their sheet, and formulas that cannot be read.
"""

from __future__ import annotations

import dataclasses

from ..formulas.names import registered_name
from ..formulas.text import call_findings
from ..workbook.cells import MAX_COLUMN, MAX_ROW, column_letters
from ..workbook.package import open_workbook_package
from .graph import Run
from .model import load_model

__all__ = ["CheckFindings", "check_workbook"]


@dataclasses.dataclass
class CheckFindings:
    """What ``trueband check`` found: each list holds (where, what) pairs."""

    registered: list[tuple[str, str]] = dataclasses.field(default_factory=list)
    unknown: list[tuple[str, str]] = dataclasses.field(default_factory=list)
    argument_counts: list[tuple[str, str]] = dataclasses.field(default_factory=list)
    outside: list[tuple[str, str]] = dataclasses.field(default_factory=list)
    unreadable: list[tuple[str, str]] = dataclasses.field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not (self.unknown or self.argument_counts or self.outside or self.unreadable)

    def lines(self) -> list[str]:
        out = [f"trueband function cells: {len(self.registered)} group(s)"]
        out += [f"  {where}  {what}" for where, what in self.registered]
        for title, items in (("unknown functions", self.unknown), ("argument-count mistakes", self.argument_counts),
                             ("references outside the used range", self.outside),
                             ("formulas that cannot be read", self.unreadable)):
            if items:
                out.append(f"{title}: {len(items)}")
                out += [f"  {where}  {what}" for where, what in items]
        out.append("no problems found" if self.ok else "problems found (listed above)")
        return out


def _run_where(run: Run) -> str:
    first = f"{column_letters(run.col)}{run.first}"
    if run.size == 1:
        return f"{run.sheet}!{first}"
    return f"{run.sheet}!{first}:{column_letters(run.col)}{run.last}"


def check_workbook(src) -> CheckFindings:
    """Read a workbook and list registered-function cells and likely mistakes (see ``trueband check``)."""
    findings = CheckFindings()
    with open_workbook_package(src) as package:
        model = load_model(package)
    for run in model.runs:
        where = _run_where(run)
        names = sorted({registered_name(n) for n in run.compiled.functions if registered_name(n)})
        if names:
            findings.registered.append((where, ", ".join(names)))
        unknown, counts = call_findings(run.compiled.tree)
        findings.unknown.extend((where, text) for text in unknown)
        findings.argument_counts.extend((where, text) for text in counts)
        for ref in run.compiled.refs:
            target = ref.sheet or run.sheet
            canonical = model.store.canonical(target)
            if canonical is None:
                findings.outside.append((where, f"refers to a sheet that does not exist: {target!r}"))
                continue
            full = (ref.r1_abs and ref.r2_abs and ref.r1 == 1 and ref.r2 == MAX_ROW) or \
                (ref.c1_abs and ref.c2_abs and ref.c1 == 1 and ref.c2 == MAX_COLUMN)
            if full:
                continue
            a1 = ref.area(run.first, run.col)
            a2 = ref.area(run.last, run.col)
            area = (min(a1[0], a2[0]), min(a1[1], a2[1]), max(a1[2], a2[2]), max(a1[3], a2[3]))
            used = model.used.get(canonical)
            if used is None or area[0] < used[0] or area[1] < used[1] or area[2] > used[2] or area[3] > used[3]:
                span = "empty sheet" if used is None else \
                    f"{column_letters(used[1])}{used[0]}:{column_letters(used[3])}{used[2]}"
                text = (f"{column_letters(area[1])}{area[0]}" if area[:2] == area[2:] else
                        f"{column_letters(area[1])}{area[0]}:{column_letters(area[3])}{area[2]}")
                findings.outside.append((where, f"reads {target}!{text}, outside the used range {span}"))
    for (sheet, row, col), message in model.unreadable.items():
        findings.unreadable.append((f"{sheet}!{column_letters(col)}{row}", message))
    return findings
