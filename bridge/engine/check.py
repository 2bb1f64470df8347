"""What ``trueband check`` computes: a workbook read, nothing written, its likely mistakes listed.

:func:`check_workbook` loads the workbook's formulas as :func:`~.recalc.recalculate` does and
lists, group by group, the cells that use trueband functions, unknown function names (with a
suggestion only for a really close name), standard functions and table references the engine does
not evaluate, calls with too few or too many arguments, quoted words that are not one of an
option's words, references outside the used range of their sheet, and formulas that cannot be read.

A group is a block of cells whose formulas have one shape: the same functions, operators and
references written relative to their cell (R1C1 form), with only their constants (numbers, quoted
words) free to differ. A filled-down column is one group, and so is the column of the Items sheet,
where each row passes its item's number (``ITEM_SD(data, 1)``, ``ITEM_SD(data, 2)`` …), and the
block of ICC cells that differ only in their words (``"oneway"``, ``"lower"`` …). Quoted words that
are not one of an option's choices are still named run by run.
"""

from __future__ import annotations

import ast
import dataclasses

from ..formulas.standard_functions import name_findings, structured_reference
from ..formulas.names import registered_name
from ..formulas.text import call_findings, choice_findings
from ..workbook.cells import MAX_COLUMN, MAX_ROW, column_letters
from ..workbook.package import open_workbook_package
from .model import load_model

__all__ = ["CheckFindings", "CellGroup", "check_workbook", "formula_groups"]

#: What ``check`` says of a cell with a structured (table) reference, which the formula reader cannot read.
TABLE_REFERENCE = "structured table reference (Table[Column]): not evaluated by trueband"


@dataclasses.dataclass
class CheckFindings:
    """What ``trueband check`` found: each list holds (where, what) pairs.

    ``not_evaluated`` (standard functions and table references trueband does not evaluate) is listed
    but is not a mistake of the workbook, so it does not make :attr:`ok` false.
    """

    registered: list[tuple[str, str]] = dataclasses.field(default_factory=list)
    unknown: list[tuple[str, str]] = dataclasses.field(default_factory=list)
    not_evaluated: list[tuple[str, str]] = dataclasses.field(default_factory=list)
    argument_counts: list[tuple[str, str]] = dataclasses.field(default_factory=list)
    choices: list[tuple[str, str]] = dataclasses.field(default_factory=list)
    outside: list[tuple[str, str]] = dataclasses.field(default_factory=list)
    unreadable: list[tuple[str, str]] = dataclasses.field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not (self.unknown or self.argument_counts or self.choices or self.outside or self.unreadable)

    def lines(self) -> list[str]:
        out = [f"trueband function cells: {len(self.registered)} group(s)"]
        out += [f"  {where}  {what}" for where, what in self.registered]
        for title, items in (("unknown functions", self.unknown),
                             ("not evaluated by trueband (not counted as problems)", self.not_evaluated),
                             ("argument-count mistakes", self.argument_counts),
                             ("words that are not one of an option's choices", self.choices),
                             ("references outside the used range", self.outside),
                             ("formulas that cannot be read", self.unreadable)):
            if items:
                out.append(f"{title}: {len(items)}")
                out += [f"  {where}  {what}" for where, what in items]
        out.append("no problems found" if self.ok else "problems found (listed above)")
        return out


@dataclasses.dataclass(frozen=True)
class CellGroup:
    """A block of cells (rows ``first..last`` of columns ``col..last_col``) whose formulas have one shape."""

    sheet: str
    col: int
    last_col: int
    first: int
    last: int
    runs: tuple  # the runs it joins; the first one's functions and references stand for all

    @property
    def compiled(self):
        return self.runs[0].compiled

    @property
    def where(self) -> str:
        return _where(self.sheet, self.first, self.col, self.last, self.last_col)


def _where(sheet: str, first: int, col: int, last: int, last_col: int) -> str:
    top = f"{column_letters(col)}{first}"
    if (first, col) == (last, last_col):
        return f"{sheet}!{top}"
    return f"{sheet}!{top}:{column_letters(last_col)}{last}"


def _shape(node) -> tuple:
    """A compiled tree with its constants left out (their kind kept): what the cells of a group share."""
    if node.kind == "lit":
        return ("lit", type(node.value).__name__)
    if node.kind == "ref":
        return ("ref", node.ref)
    if node.kind == "empty":
        return ("empty",)
    return (node.kind, node.name, tuple(_shape(a) for a in node.args))


def _join(groups: list[CellGroup], order, fits) -> list[CellGroup]:
    """``groups`` sorted by ``order``, each joined to the one before it when ``fits(before, group)``."""
    out: list[CellGroup] = []
    for group in sorted(groups, key=order):
        before = out[-1] if out else None
        if before is not None and before.sheet == group.sheet and fits(before, group) and \
                _shape(before.compiled.tree) == _shape(group.compiled.tree):
            out[-1] = dataclasses.replace(before, last=max(before.last, group.last), last_col=group.last_col,
                                          runs=before.runs + group.runs)
        else:
            out.append(group)
    return out


def formula_groups(runs) -> list[CellGroup]:
    """The runs of a model joined into groups, in reading order: first down each column (adjacent rows of one
    shape), then across (side-by-side blocks over the same rows, of one shape). An array formula stays alone."""
    sheet_order: dict[str, int] = {}
    for run in runs:
        sheet_order.setdefault(run.sheet, len(sheet_order))
    single = [CellGroup(r.sheet, r.col, r.col, r.first, r.last, (r,)) for r in runs if r.array_ref is not None]
    groups = [CellGroup(r.sheet, r.col, r.col, r.first, r.last, (r,)) for r in runs if r.array_ref is None]
    groups = _join(groups, lambda g: (sheet_order[g.sheet], g.col, g.first),
                   lambda a, b: a.col == b.col and b.first == a.last + 1)
    groups = _join(groups, lambda g: (sheet_order[g.sheet], g.first, g.last, g.col),
                   lambda a, b: (a.first, a.last) == (b.first, b.last) and b.col == a.last_col + 1)
    return sorted(groups + single, key=lambda g: (sheet_order[g.sheet], g.first, g.col))


def _formula_of(message: str) -> str | None:
    """The formula text inside the reader's "cannot read the formula '…': reason" message, or None."""
    prefix = "cannot read the formula "
    if not message.startswith(prefix):
        return None
    rest = message[len(prefix):]
    end = rest.find(": ")
    while end != -1:
        try:
            text = ast.literal_eval(rest[:end])
        except (ValueError, SyntaxError):
            end = rest.find(": ", end + 1)
            continue
        return text if isinstance(text, str) else None
    return None


def _outside(model, group: CellGroup) -> list[str]:
    found = []
    for ref in group.compiled.refs:
        target = ref.sheet or group.sheet
        canonical = model.store.canonical(target)
        if canonical is None:
            found.append(f"refers to a sheet that does not exist: {target!r}")
            continue
        full = (ref.r1_abs and ref.r2_abs and ref.r1 == 1 and ref.r2 == MAX_ROW) or \
            (ref.c1_abs and ref.c2_abs and ref.c1 == 1 and ref.c2 == MAX_COLUMN)
        if full:
            continue
        a1, a2 = ref.area(group.first, group.col), ref.area(group.last, group.last_col)
        area = (min(a1[0], a2[0]), min(a1[1], a2[1]), max(a1[2], a2[2]), max(a1[3], a2[3]))
        used = model.used.get(canonical)
        if used is None or area[0] < used[0] or area[1] < used[1] or area[2] > used[2] or area[3] > used[3]:
            span = "empty sheet" if used is None else \
                f"{column_letters(used[1])}{used[0]}:{column_letters(used[3])}{used[2]}"
            text = (f"{column_letters(area[1])}{area[0]}" if area[:2] == area[2:] else
                    f"{column_letters(area[1])}{area[0]}:{column_letters(area[3])}{area[2]}")
            found.append(f"reads {target}!{text}, outside the used range {span}")
    return found


def check_workbook(src) -> CheckFindings:
    """Read a workbook and list registered-function cells and likely mistakes (see ``trueband check``)."""
    findings = CheckFindings()
    with open_workbook_package(src) as package:
        model = load_model(package)
    for group in formula_groups(model.runs):
        where, tree = group.where, group.compiled.tree
        names = sorted({registered_name(n) for n in group.compiled.functions if registered_name(n)})
        if names:
            findings.registered.append((where, ", ".join(names)))
        not_evaluated, unknown = name_findings(tree)
        findings.unknown.extend((where, text) for text in unknown)
        findings.not_evaluated.extend((where, text) for text in not_evaluated)
        findings.argument_counts.extend((where, text) for text in call_findings(tree)[1])
        for run in group.runs:  # the words differ from run to run: each is named where it is
            run_where = _where(run.sheet, run.first, run.col, run.last, run.col)
            findings.choices.extend((run_where, text) for text in choice_findings(run.compiled.tree))
        findings.outside.extend((where, text) for text in _outside(model, group))
    for (sheet, row, col), message in model.unreadable.items():
        where = f"{sheet}!{column_letters(col)}{row}"
        formula = _formula_of(message)
        if formula is not None and structured_reference(formula):
            findings.not_evaluated.append((where, TABLE_REFERENCE))
        else:
            findings.unreadable.append((where, message))
    return findings
