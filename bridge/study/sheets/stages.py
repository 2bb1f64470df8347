"""Stages: adverse impact at each stage of the selection process and over the whole process.

A person reaches a stage when coded yes at every stage before it (everyone with a group label reaches the
first); the pass rate of a stage is among those who reached it. The whole process is hired ÷ applied (the
hired column, or the last stage when there is none). Each component is examined on its own: an acceptable
bottom line does not excuse a stage with adverse impact (Connecticut v. Teal, 1982).
"""

from __future__ import annotations

import dataclasses

import numpy as np

from ..context import Expr, Ref, StudyContext, area, cell
from ..words import CAUTION, STAGES_CAUTION
from .bands import BandsLayout
from .impact import Impact, ImpactTable, count_guards, unless_reference
from .setup import SetupSheet

__all__ = ["Stages", "write", "SHEET"]

SHEET = "Stages"

_HEAD = ("Stage", "Group", "Reached the stage", "Passed", "Pass rate", "Impact ratio", "Impact ratio, lower limit",
         "Impact ratio, upper limit", "Below four-fifths?", "z: gap in standard deviations", "Fisher exact p",
         "Small numbers?")


@dataclasses.dataclass(frozen=True)
class Stages:
    """The lowest stage-level impact ratio of the first column, or None without stage columns."""

    lowest: Ref | None = None


def write(ctx: StudyContext, setup: SetupSheet, impact: Impact, bands: BandsLayout) -> Stages:
    d = ctx.data
    stages = d.impact.stages if d.impact is not None else ()
    if not stages or not impact.tables:
        return Stages()
    g = ctx.sheet(SHEET)
    g.widths.update({1: 26, 2: 16, **{c: 13 for c in range(3, 13)}})
    g.set(1, 1, "Adverse impact at each stage of the selection process", "title")
    row = 2 + g.para(2, 1, CAUTION, "caution")
    row += g.para(row, 1, STAGES_CAUTION, "caution", width=150)
    row += g.para(row, 1, "A person reaches a stage when coded yes at every stage before it (everyone with a group "
                          "label reaches the first); a stage's pass rate is among those who reached it. The whole "
                          "process is hired ÷ applied" + (" (the hired column)." if d.hired is not None else
                                                          " (passed every stage: there is no hired column)."),
                  width=150) + 1
    flags = [np.array([c is True for c in st.codes], dtype=bool) for st in stages]
    steps = [(st.header, [bands.column(bands.extra[f"stage:{j}"]) for j in range(k)],
              bands.column(bands.extra[f"stage:{k}"]), flags[:k], flags[k]) for k, st in enumerate(stages)]
    if d.hired is not None:
        final, final_flag = bands.hired, np.asarray(d.hired, dtype=bool)
    else:
        final, final_flag = bands.column(bands.extra[f"stage:{len(stages) - 1}"]), flags[-1]
    lowest = None
    for t in impact.tables:
        g.set(row, 1, f"{t.demographic.header}", "heading")
        g.set(row, 2, "Reference group (the Impact sheet's cell)")
        ctx.link(g, row, 5, t.reference_cell)
        for c, h in enumerate(_HEAD, start=1):
            g.set(row + 1, c, h, "header")
        r = row + 2
        whole = ("Whole process (hired ÷ applied)", [] if d.hired is not None else
                 [bands.column(bands.extra[f"stage:{j}"]) for j in range(len(stages) - 1)], final,
                 [] if d.hired is not None else flags[:-1], final_flag)
        for label, before, stage, before_flags, stage_flag in [*steps, whole]:
            r = _block(ctx, g, r, t, label, before, stage, before_flags, stage_flag, setup)
        row = r + 2
    return Stages(lowest)


def _block(ctx, g, r: int, t: ImpactTable, label: str, before: list[Ref], stage: Ref, before_flags, stage_flag,
           setup: SetupSheet) -> int:
    """The rows of one stage for every group of ``t``, from row ``r``; returns the next free row."""
    labels = np.array([x if x is not None else "" for x in t.demographic.groups], dtype=object)
    reached_mask = np.ones(len(labels), dtype=bool)
    for f in before_flags:
        reached_mask &= f
    counts = {}
    for name in t.names:
        member = (labels == name) & reached_mask
        counts[name] = (int((member & stage_flag).sum()), int(member.sum()))
    conditions = "".join(f",{{b{j}}},1" for j in range(len(before)))
    extra = {f"b{j}": ref for j, ref in enumerate(before)}
    written = {}
    for i, name in enumerate(t.names):
        row = r + i
        g.set(row, 1, label if i == 0 else "")
        g.set(row, 2, name)
        number = t.demographic.numbers[name]
        reached = ctx.expression(g, row, 3, "COUNTIFS({groups},{number}" + conditions + ")",
                                 lambda v=counts[name][1]: v, style="count", groups=t.numbers, number=number,
                                 **extra)
        passed = ctx.expression(g, row, 4, "COUNTIFS({groups},{number}" + conditions + ",{stage},1)",
                                lambda v=counts[name][0]: v, style="count", groups=t.numbers, number=number,
                                stage=stage, **extra)
        ctx.formula(g, row, 5, "SELECTION_RATE", passed, reached, style="coef")
        written[name] = (passed, reached)
    # the reference group's counts: its row of this block, found by the name in the Impact sheet's cell
    last = r + len(t.names) - 1
    lookup = "INDEX({column},MATCH({reference},{names},0))"
    places = dict(reference=t.reference_cell, names=area(SHEET, 2, r, 2, last).fixed())
    ref_passed = Expr(ctx.text(lookup, SHEET, column=area(SHEET, 4, r, 4, last).fixed(), **places),
                      written[t.reference][0].value)
    ref_reached = Expr(ctx.text(lookup, SHEET, column=area(SHEET, 3, r, 3, last).fixed(), **places),
                       written[t.reference][1].value)
    for i, name in enumerate(t.names):
        row = r + i
        four = (*written[name], ref_passed, ref_reached)
        for c, function, extra_args, style in ((6, "IMPACT_RATIO", (), "coef"),
                                               (7, "IMPACT_RATIO_CI", ("lower", setup.confidence), "coef"),
                                               (8, "IMPACT_RATIO_CI", ("upper", setup.confidence), "coef"),
                                               (9, "FOUR_FIFTHS", (), None), (10, "IMPACT_Z", (), "coef"),
                                               (11, "IMPACT_FISHER", (), "p"), (12, "IMPACT_SMALL_NUMBERS", (), None)):
            unless_reference(ctx, g, row, c, function, *four, *extra_args, group=cell(SHEET, row, 2).local(),
                             reference=t.reference_cell, is_reference=name == t.reference,
                             label="reference group" if c == 6 else "", style=style,
                             wrap='IF({},"yes","no")' if function in ("FOUR_FIFTHS", "IMPACT_SMALL_NUMBERS") else "{}",
                             guards=count_guards(function, (extra_args or (None,))[0], chosen="passed the stage",
                                                 people="people reaching the stage"),
                             places=dict(zip(("fs", "fa", "rs", "ra"), four)))
    return r + len(t.names) + 1
