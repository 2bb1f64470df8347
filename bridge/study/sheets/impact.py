"""Impact: adverse impact at the cut score, one table per demographic column (selection rates, impact ratios
with their intervals, odds ratios, z, Fisher's exact p, extra selections to reach four-fifths, the flip count,
the small-numbers caution), an overview of the lowest ratios, and the score distribution."""

from __future__ import annotations

import dataclasses
import inspect
from typing import Callable, Mapping

import numpy as np
from openpyxl.utils import get_column_letter

from trueband.funcs import call
from trueband.funcs.impact import tally_groups
from trueband.funcs.impact_intervals import impact_flip

from .. import charts
from ..context import Expr, Ref, StudyContext, area, cell
from ..setup import SetupError
from ..setup_impact import Demographic
from ..words import (CAUTION, NOT_COMPUTABLE, EXTRA_SELECTIONS_WORDS, FLIP_WORDS, IMPACT_Z_WORDS, RATIO_INTERVAL_WORDS,
                     REFERENCE_BY_RATE, REFERENCE_CHOSEN, REFERENCE_EDITED, REFERENCE_GIVEN, SMALL_NUMBERS_WORDS)
from .bands import BandsLayout
from .reliability import Reliability
from .setup import SetupSheet

__all__ = ["Impact", "ImpactTable", "write", "reference_group", "HEAD", "TESTS_HEAD"]

SHEET = "Impact"
DISTRIBUTION_ROW, DISTRIBUTION_COL = 5, 20   # the score distribution's heading (columns T:Y, not printed)

#: The table's columns, from A (the rates, the ratio and its interval).
HEAD = ("Group", "Applicants", "Selected", "Selection rate", "Impact ratio (rate ÷ reference rate)",
        "Below four-fifths?", "Four-fifths of the highest rate", "Impact ratio, lower limit",
        "Impact ratio, upper limit")
#: The columns of the second table of the same groups, under the first (the tests and the further figures): one
#: table of both would be wider than a landscape page at 70% (issue 20).
TESTS_HEAD = ("Group", "z: gap in standard deviations", "Fisher exact p", "Extra selections to reach four-fifths",
              "Odds ratio of selection", "Selections that flip the exact test", "Small numbers?")
#: Column of the four-fifths line (the rates chart's second series).
FOUR_FIFTHS_COL = HEAD.index("Four-fifths of the highest rate") + 1
#: Rows from the first table's last row to the second table's header (the lowest ratio, the count below
#: four-fifths and an empty row between them).
TESTS_OFFSET = 6


@dataclasses.dataclass(frozen=True)
class ImpactTable:
    """One demographic column's table: its groups, reference group and where its figures are."""

    demographic: Demographic
    numbers: Ref                    # the Bands column of its group numbers
    reference: str
    names: tuple[str, ...]
    counts: Mapping[str, tuple[int, int]]   # group -> (selected, applicants) at the cut
    ratios: Mapping[str, Ref]       # focal group -> its impact ratio
    min_ratio: Ref
    n_below: Ref | None
    header_row: int
    first: int
    last: int
    key_prefix: str                 # "" for the first column, else "<column>:"
    rates: Mapping[str, Ref] = dataclasses.field(default_factory=dict)   # group -> its selection-rate cell
    #: the reference group's input cell (its value: the group at build time); the other sheets read the
    #: reference group through it, so an edit there reaches them on recalculation
    reference_cell: Ref | None = None
    #: beside the reference cell: how the group there was chosen (live: the default, or a choice made there)
    how: Ref | None = None
    #: the last row of the table's second part (the tests of the same groups, under the first)
    end: int = 0


@dataclasses.dataclass(frozen=True)
class Impact:
    min_ratio: Ref                     # the lowest impact ratio (over every demographic column)
    n_below: Ref | None = None         # comparisons below four-fifths
    where: Ref | None = None           # the group and column of the lowest ratio (text)
    tables: tuple[ImpactTable, ...] = ()
    rates: tuple = ()                  # (group, its selection-rate cell) of the first column's table


def write(ctx: StudyContext, setup: SetupSheet, rel: Reliability, bands: BandsLayout) -> Impact:
    g = ctx.sheet(SHEET)
    g.widths.update({1: 22, 2: 13, 3: 13, 4: 13, 5: 15, 6: 15, 7: 13, 8: 12, 9: 12})
    d = ctx.data
    g.set(1, 1, "Adverse impact at the cut score", "title")
    cut_row = 2 + g.para(2, 1, CAUTION, "caution")
    cut = cell(SHEET, cut_row, 2).fixed()
    g.set(cut_row, 1, "Cut score (from Setup)")
    g.set(cut_row, 2, "=" + setup.cut_cell.address(SHEET), "score")
    g.set(cut_row + 1, 1, "Selected = score at or above the cut")
    demographics = list(d.impact.demographics) if d.impact is not None else []
    several = len(demographics) > 1
    row = cut_row + (5 if several else 3)
    tables: list[ImpactTable] = []
    reason = "no group column was given"
    for k, demo in enumerate(demographics):
        numbers = bands.group_numbers_range if k == 0 else bands.column(bands.extra[f"group:{k}"])
        prefix = "" if k == 0 else f"{demo.header}:"
        if several:
            g.set(row - 2, 1, f"Demographic column: {demo.header}", "heading")
        groups = list(demo.tally.names)
        if len(groups) < 2:
            only = f"only one group ({groups[0]!r})" if groups else "no group labels"
            reason = f"column {demo.header!r} on sheet '{d.sheet}' holds {only}; impact compares groups"
            if several:
                ctx.not_computable_at(g, row, 1, reason, key=f"{prefix}min_ratio")
                row += 5
            continue
        table = _table(ctx, g, row, demo, numbers, bands.selected, prefix, setup)
        tables.append(table)
        row = _table_notes(g, table.end + 2, demo, numbers) + 4
    if not tables:
        min_ratio = ctx.not_computable_at(g, row, 1, reason if not several else "no demographic column holds "
                                          "two groups", key="min_ratio")
        _distribution(ctx, g, row + 3, setup, rel, cut)
        return Impact(min_ratio)
    at = row - 2
    g.set(at, 1, "What the figures mean", "heading")
    for text in (IMPACT_Z_WORDS, RATIO_INTERVAL_WORDS, EXTRA_SELECTIONS_WORDS, FLIP_WORDS, SMALL_NUMBERS_WORDS):
        at += g.para(at + 1, 1, text, width=150)
    min_ratio, n_below, where, at = _overview(ctx, g, at + 3, tables)
    first = tables[0]
    chart_row = at + 2
    g.charts.append((charts.selection_rates(charts.area(area(SHEET, 1, first.first, 1, first.last)),
                                            charts.area(area(SHEET, 4, first.header_row, 4, first.last)),
                                            charts.area(area(SHEET, FOUR_FIFTHS_COL, first.header_row,
                                                             FOUR_FIFTHS_COL, first.last))),
                     f"A{chart_row}"))
    g.charts[-1][0].width = 11.5
    # beside the rates chart, on the same page
    _distribution(ctx, g, chart_row, setup, rel, cut, anchor_col="E")
    return Impact(min_ratio, n_below, where, tuple(tables), rates=tuple(tables[0].rates.items()))


def _counts_at_cut(ctx: StudyContext, demo: Demographic, cut: float) -> dict[str, tuple[int, int]]:
    """Group -> (selected, applicants) among people with a score, counted as the Python functions count."""
    scores = ctx.data.scores
    has_score = ~np.isnan(scores)
    selected = has_score & (scores >= cut)
    scored = np.flatnonzero(has_score)
    tally = tally_groups([demo.groups[i] for i in scored], [bool(selected[i]) for i in scored])
    return {name: (tally.selected.get(name, 0), tally.applicants.get(name, 0)) for name in demo.tally.names}


def _table(ctx: StudyContext, g, row: int, demo: Demographic, numbers: Ref, selected_flags: Ref, prefix: str,
           setup: SetupSheet) -> ImpactTable:
    """The table of groups of one column from ``row`` (the reference group above it)."""
    groups = list(demo.tally.names)
    counts = _counts_at_cut(ctx, demo, setup.cut)
    reference, how = reference_group(ctx, demo, counts)
    g.set(row - 1, 1, "Reference group (edit to compare with another)")
    g.set(row - 1, 3, reference, "input")
    for c, h in enumerate(HEAD, start=1):
        g.set(row, c, h, "header")
    first, last = row + 1, row + len(groups)
    rates: dict[str, Ref] = {}
    places = dict(name=cell(SHEET, row - 1, 3).fixed(), names=area(SHEET, 1, first, 1, last).fixed())
    lookup = "INDEX({column},MATCH({name},{names},0))"
    ref_sel, ref_app = counts[reference]
    ref_sel = Expr(ctx.text(lookup, SHEET, column=area(SHEET, 3, first, 3, last).fixed(), **places), ref_sel)
    ref_app = Expr(ctx.text(lookup, SHEET, column=area(SHEET, 2, first, 2, last).fixed(), **places), ref_app)
    # a name that is not one of the groups would leave every comparison #N/A: say so beside the cell
    ctx.expression(g, row - 1, 10, 'IF(ISNA(MATCH({name},{names},0)),"' + NOT_A_GROUP + '","")', lambda: "",
                   **places)
    how = _how_chosen(ctx, g, row - 1, demo, reference, how, places, first, last)
    ratios: dict[str, Ref] = {}
    flags: dict[str, Ref] = {}
    for i, name in enumerate(groups):
        r = first + i
        focal_selected, focal_applicants = counts[name]
        g.set(r, 1, name)
        number = demo.numbers[name]
        applicants = ctx.expression(g, r, 2, 'COUNTIFS({groups},{number},{selected},">=0")',
                                    lambda n=focal_applicants: n, style="count", groups=numbers, number=number,
                                    selected=selected_flags)
        chosen = ctx.expression(g, r, 3, "COUNTIFS({groups},{number},{selected},1)", lambda n=focal_selected: n,
                                style="count", groups=numbers, number=number, selected=selected_flags)
        rates[name] = ctx.formula(g, r, 4, "SELECTION_RATE", chosen, applicants, style="coef", key=f"{prefix}rate_{name}")
        g.set(r, FOUR_FIFTHS_COL, ctx.text("=0.8*MAX({rates})", SHEET, rates=area(SHEET, 4, first, 4, last).fixed()),
              "coef")
        four = (chosen, applicants, ref_sel, ref_app)
        tests_row = last + TESTS_OFFSET + 1 + i   # the group's row of the second table
        g.set(tests_row, 1, name)
        for c, function, extra, style in _FIGURES:
            # every row has the same formulas: the row of the reference group (the one named in the reference
            # cell now, not when the study was built) shows that it is the reference instead of figures
            at = r if c > 0 else tests_row
            written = unless_reference(
                ctx, g, at, abs(c), function, *four, *extra(setup), group=cell(SHEET, at, 1).local(),
                reference=places["name"], is_reference=name == reference,
                label="reference group" if c in (5, -2) else "",
                # Fisher's p and the small-numbers flag are defined when nobody passes; the rest are not
                before=None if function in ("IMPACT_FISHER", "IMPACT_SMALL_NUMBERS") else setup.passes,
                # shown as yes/no: spreadsheet apps show a stored TRUE/FALSE of a function they do not
                # know as an error, while stored text shows as it is
                wrap='IF({},"yes","no")' if function in ("FOUR_FIFTHS", "IMPACT_SMALL_NUMBERS") else "{}",
                style=style, key=_key(prefix, function, extra(setup), name),
                guards=count_guards(function, (extra(setup) or (None,))[0]), places=dict(zip(_FOUR, four)))
            if name == reference:
                continue
            if function == "IMPACT_RATIO":
                ratios[name] = written
            elif function == "FOUR_FIFTHS":
                flags[name] = written
    g.set(last + TESTS_OFFSET - 1, 1, f"Tests and further figures of the same groups ({demo.header})", "heading")
    for c, h in enumerate(TESTS_HEAD, start=1):
        g.set(last + TESTS_OFFSET, c, h, "header")
    min_ratio, n_below = _lowest(ctx, g, last, first, groups, reference, ratios, demo.header, setup)
    if n_below is not None:
        n_below = n_below.with_value(sum(1 for f in flags.values() if f.value is True))
    return ImpactTable(demo, numbers, reference, tuple(groups), counts, ratios, min_ratio, n_below, row, first,
                       last, prefix, rates, cell(SHEET, row - 1, 3, value=reference, name="the reference group"), how,
                       end=last + TESTS_OFFSET + len(groups))


def _how_chosen(ctx: StudyContext, g, r: int, demo: Demographic, reference: str, how: str, places: dict,
                first: int, last: int) -> Ref:
    """Beside the reference cell, live: whether it holds the default (the setup's group, else a group with the
    highest selection rate at the cut) or a group chosen there; empty when it names no group (said beside)."""
    found = "ISNA(MATCH({name},{names},0))"
    if demo.reference is not None:   # the setup's group: its label in column A
        given = cell(SHEET, first + list(demo.tally.names).index(reference), 1).fixed()
        template = ('IF({name}={given},"' + REFERENCE_GIVEN + '",IF(' + found + ',"","' + REFERENCE_EDITED
                    + '"&{given}&")"))')
        return ctx.expression(g, r, 4, template, lambda: how, given=given, **places)
    template = ("IF(" + found + ',"",IF(INDEX({rates},MATCH({name},{names},0))=MAX({rates}),"' + REFERENCE_BY_RATE
                + '","' + REFERENCE_CHOSEN + '"))')
    return ctx.expression(g, r, 4, template, lambda: how, rates=area(SHEET, 4, first, 4, last).fixed(), **places)


def unless_reference(ctx: StudyContext, g, r: int, c: int, function: str, *args, group: Ref, reference: Ref,
                     is_reference: bool, label: str, before=None, wrap: str = "{}", style: str | None = None,
                     key: str | None = None, guards: tuple = (), places: Mapping | None = None) -> Ref:
    """Write ``=IF(group=reference,"label",IF(<guard>,"not computable: <reason>",...<wrap of function(args)>))``:
    one formula shape for every group's row, so that editing the reference group on Impact moves the label, the
    figures and the reasons a figure is not computable with it. ``guards``: see :func:`guarded_call`.
    ``is_reference`` says whether the row is the reference group's at build time."""
    inner, check = guarded_call(ctx, g, function, *args, before=before, wrap=wrap, guards=guards, places=places)
    text = "=" + ctx.text('IF({group}={reference},"' + label + '",', g.title, group=group, reference=reference) \
        + inner + ")"
    # the build-time reference row is not named (its figures are the label until the reference changes)
    return ctx.put(g, r, c, text, (lambda: label) if is_reference else check, style=style,
                   key=None if is_reference else key)


def guarded_call(ctx: StudyContext, g, function: str, *args, before=None, wrap: str = "{}", guards: tuple = (),
                 places: Mapping | None = None) -> tuple[str, Callable]:
    """``IF(<guard>,"not computable: <reason>",...<wrap of function(args)>)`` (no ``=``) and its build-time check.
    ``guards``: (condition template on ``places``, the same condition in Python on their values, the reason in
    words), tested in order, live in the formula and at build time alike."""
    inner = wrap.format(ctx.call_text(function, args, g.title))
    for template, _, reason in reversed(guards):
        inner = ctx.text("IF(" + template + ',"' + NOT_COMPUTABLE + reason + '",', g.title, **places) + inner + ")"

    def check():
        if guards:
            # the values as stored (an exception for a cell not computable): a guard reads only what the
            # guards before it leave defined, as the formula's IFs do
            values = {k: getattr(v, "value", v) for k, v in places.items()}
            for _, holds, reason in guards:
                if holds(**values):
                    return NOT_COMPUTABLE + reason
        if before is not None:
            before()
        return call(function, *(ctx.value(a) for a in args))
    return inner, check


def count_guards(function: str, part: str | None = None, *, chosen: str = "is selected",
                 people: str = "applicants with a score") -> tuple:
    """The live guards of a comparison figure on the four counts {fs}, {fa} (the group's chosen and people), {rs},
    {ra} (the reference group's): when one holds the figure is not defined, and the sheet says why in words.
    ``chosen`` and ``people``: the sheet's words for them (Stages: passed, reached the stage)."""
    guards = [("{fa}=0", lambda fs, fa, rs, ra: fa == 0, f"the group has no {people}"),
              ("{ra}=0", lambda fs, fa, rs, ra: ra == 0, f"the reference group has no {people}")]
    if function in ("IMPACT_RATIO", "FOUR_FIFTHS", "IMPACT_EXTRA_SELECTIONS", "IMPACT_RATIO_CI",
                    "IMPACT_ODDS_RATIO"):
        guards.append(("{rs}=0", lambda fs, fa, rs, ra: rs == 0,
                       f"nobody in the reference group {chosen}, so a ratio to its rate (0) is undefined"))
    if function == "IMPACT_FLIP":
        # IMPACT_FLIP's rule: a verdict that is not significant flips only if removing the group's selections
        # (down to none) makes it significant; the function finds none when even none selected is not
        guards.append((f"AND(IMPACT_FISHER({{fs}},{{fa}},{{rs}},{{ra}})>={FLIP_ALPHA},"
                       f"IMPACT_FISHER(0,{{fa}},{{rs}},{{ra}})>={FLIP_ALPHA})",
                       lambda fs, fa, rs, ra: min(call("IMPACT_FISHER", fs, fa, rs, ra),
                                                  call("IMPACT_FISHER", 0, fa, rs, ra)) >= FLIP_ALPHA,
                       f"the exact test is not significant at {FLIP_ALPHA} and stays so even with nobody of the "
                       f"group {chosen.removeprefix('is ')}, so no number of selections flips it"))
    if function == "IMPACT_Z":
        guards += [("{fs}+{rs}=0", lambda fs, fa, rs, ra: fs + rs == 0,
                    f"nobody in either group {chosen}, so z is undefined"),
                   ("{fs}+{rs}={fa}+{ra}", lambda fs, fa, rs, ra: fs + rs == fa + ra,
                    f"everybody in both groups {chosen}, so z is undefined")]
    if function == "IMPACT_RATIO_CI":
        guards.append(("AND({fs}={fa},{rs}={ra})", lambda fs, fa, rs, ra: fs == fa and rs == ra,
                       f"everybody in both groups {chosen}, so the interval has no width"))
        if part == "upper":
            guards.append(("{fs}=0", lambda fs, fa, rs, ra: fs == 0,
                           f"nobody in the group {chosen}, so the upper limit is infinite"))
    if function == "IMPACT_ODDS_RATIO":
        guards.append(("{fs}={fa}", lambda fs, fa, rs, ra: fs == fa,
                       f"everybody in the group {chosen}, so its odds are infinite"))
    return tuple(guards)


def _key(prefix: str, function: str, extra: tuple, name: str) -> str:
    part = f"_{extra[0]}" if extra and isinstance(extra[0], str) else ""
    return f"{prefix}{function.lower()}{part}_{name}"


#: The significance level of the flip count (IMPACT_FLIP's default, which the sheet uses).
FLIP_ALPHA = inspect.signature(impact_flip).parameters["alpha"].default

#: The four counts' places in the guards' conditions (see :func:`count_guards`).
_FOUR = ("fs", "fa", "rs", "ra")

#: Beside the reference cell when it names no group of the table.
NOT_A_GROUP = "not one of the groups below: type a label of column A as written there"

#: (column, function, the arguments after the four counts, style) of each comparison's figures; a negative column
#: is in the second table (TESTS_HEAD), under the first
_FIGURES = ((5, "IMPACT_RATIO", lambda s: (), "coef"), (6, "FOUR_FIFTHS", lambda s: (), None),
            (8, "IMPACT_RATIO_CI", lambda s: ("lower", s.confidence), "coef"),
            (9, "IMPACT_RATIO_CI", lambda s: ("upper", s.confidence), "coef"),
            (-2, "IMPACT_Z", lambda s: (), "coef"), (-3, "IMPACT_FISHER", lambda s: (), "p"),
            (-4, "IMPACT_EXTRA_SELECTIONS", lambda s: (), "count"),
            (-5, "IMPACT_ODDS_RATIO", lambda s: (), "coef"), (-6, "IMPACT_FLIP", lambda s: (), "count"),
            (-7, "IMPACT_SMALL_NUMBERS", lambda s: (), None))


#: The lowest of ``{ratios}``: the words ``missing`` when more than ``words`` of them are words (a ratio not
#: computable is words; a table's range also holds the reference group's label), else MIN, which passes an error
#: among them on. Not COUNT or ISNUMBER: they skip an error (OpenFormula, Excel and LibreOffice alike), so in an
#: app without trueband's functions (ratio cells #NAME?) the sheet said "not computable", which is not what
#: happened. The cells after it (its group, the lowest of all columns) test ISTEXT, not ISNUMBER, likewise.
LOWEST = 'IF(SUMPRODUCT(ISTEXT({{ratios}})*1)>{words},"{missing}",MIN({{ratios}}))'

#: The lowest ratio of a table (or of every column) when one of its ratios is not computable.
RATIO_MISSING = "an impact ratio of this table is not computable (see the table)"
RATIO_MISSING_ALL = "an impact ratio is not computable (see the tables above)"


def _lowest(ctx, g, last, first, groups, reference, ratios, column, setup) -> tuple[Ref, Ref]:
    """The lowest ratio of one table and how many of its groups fall below four-fifths, below the table: live, so
    that a reference group for which a ratio is not computable (or no longer is) shows so after recalculation."""
    g.set(last + 2, 1, "Lowest impact ratio")
    values = [ratios[k].value for k in groups if k != reference]
    missing = NOT_COMPUTABLE + RATIO_MISSING
    min_ratio = ctx.expression(
        g, last + 2, 5, LOWEST.format(words=1, missing=missing),
        lambda: min(values) if all(isinstance(x, float) for x in values) else missing, style="coef",
        key=f"{column}:min_ratio", ratios=area(SHEET, 5, first, 5, last))
    g.set(last + 3, 1, "Groups below four-fifths")
    below = ctx.expression(g, last + 3, 5, 'COUNTIF({flags},"yes")', None, style="count",
                           key=f"{column}:n_below", flags=area(SHEET, 6, first, 6, last))
    return min_ratio, below


def reference_group(ctx: StudyContext, demo: Demographic, counts: dict[str, tuple[int, int]]) -> tuple[str, str]:
    """The group others are compared with (as given, matched as the groups are; else the highest rate), and how
    it was chosen, in words for the sheet."""
    d = ctx.data
    groups = list(demo.tally.names)
    if demo.reference is not None:
        reference = demo.tally.name(demo.reference)
        if reference is None:
            raise SetupError(f"{demo.where or 'reference group'}: no group {demo.reference!r} in column "
                             f"{demo.header!r} on sheet '{d.sheet}' (groups: {', '.join(groups)})")
        return reference, "(as given in the setup)"
    rates = {k: (sel / app if app else 0.0) for k, (sel, app) in counts.items()}
    reference = max(groups, key=lambda k: (rates[k], counts[k][1]))
    return reference, REFERENCE_BY_RATE


def _overview(ctx: StudyContext, g, at: int, tables: list[ImpactTable]):
    """The lowest ratio of every column, the lowest overall with its group and column, and how many comparisons
    fall below four-fifths (live formulas: they follow the reference cells); returns (lowest, below, where, the
    next free row)."""
    g.set(at, 1, "The lowest impact ratios", "heading")
    for c, h in enumerate(("Demographic column", "Lowest impact ratio", "Its group", "Comparisons below "
                           "four-fifths", "Comparisons"), start=1):
        g.set(at + 1, c, h, "header")
    first = at + 2
    for i, t in enumerate(tables):
        r = first + i
        g.set(r, 1, t.demographic.header)
        ratio = ctx.link(g, r, 2, t.min_ratio, style="coef")
        lowest = ""
        if isinstance(t.min_ratio.value, float):
            lowest = min((k for k in t.names if k != t.reference), key=lambda k: t.ratios[k].value)
        ctx.expression(g, r, 3, 'IF(ISTEXT({ratio}),"",INDEX({names},MATCH({ratio},{ratios},0)))',
                       lambda k=lowest: k, names=area(SHEET, 1, t.first, 1, t.last), ratio=ratio,
                       ratios=area(SHEET, 5, t.first, 5, t.last))
        ctx.link(g, r, 4, t.n_below, style="count")
        g.set(r, 5, len(t.names) - 1, "count")
    last = first + len(tables) - 1
    total = last + 1
    g.set(total, 1, "All columns", "heading")
    computable = [t for t in tables if isinstance(t.min_ratio.value, float)]
    missing = NOT_COMPUTABLE + RATIO_MISSING_ALL
    ratios = area(SHEET, 2, first, 2, last)
    low = ctx.expression(g, total, 2, LOWEST.format(words=0, missing=missing),
                         lambda: min(t.min_ratio.value for t in computable) if len(computable) == len(tables)
                         else missing, style="coef", key="min_ratio", ratios=ratios)
    where_text = ""
    if len(computable) == len(tables):
        best = min(computable, key=lambda t: t.min_ratio.value)
        lowest_group = min((k for k in best.names if k != best.reference), key=lambda k: best.ratios[k].value)
        where_text = f"{lowest_group} ({best.demographic.header})"
    where = ctx.expression(g, total, 3, 'IF(ISTEXT({low}),"",INDEX({groups},MATCH({low},{ratios},0))&" ("&INDEX('
                                        '{columns},MATCH({low},{ratios},0))&")")', lambda: where_text,
                           key="min_ratio_where", groups=area(SHEET, 3, first, 3, last), low=low, ratios=ratios,
                           columns=area(SHEET, 1, first, 1, last))
    below = ctx.expression(g, total, 4, "SUM({below})", None, style="count", key="n_below",
                           below=area(SHEET, 4, first, 4, last))
    g.set(total, 5, ctx.text("=SUM({n})", SHEET, n=area(SHEET, 5, first, 5, last)), "count")
    return low, below, where, total + 2


def _table_notes(g, at: int, demo: Demographic, numbers: Ref) -> int:
    """How the table counts, which labels were merged, and how many are blank, from row ``at``; the next row."""
    at += g.para(at, 1, f"Applicants and Selected count the rows of the Bands sheet by group number (Bands column "
                        f"{get_column_letter(numbers.col)}: group 1 is the first row of this table, and so on); "
                        f"people with a blank {demo.header!r} are in no group.", width=150)
    merged = [f"{', '.join(repr(x) for x in raw)} counted as {name!r}"
              for name, raw in demo.tally.merged.items()]
    if merged:
        at += g.para(at, 1, "Labels that differ only in letter case or spacing are one group: "
                            + "; ".join(merged) + ".", width=150)
    if demo.tally.blank:
        at += g.para(at, 1, f"{demo.tally.blank} row(s) have a blank {demo.header!r} (listed on Notes).", width=150)
    return at


def _distribution(ctx: StudyContext, g, chart_row: int, setup: SetupSheet, rel: Reliability, cut: Ref,
                  anchor_col: str = "A") -> None:
    """The score distribution table (columns L:Q, not printed) and its chart at ``chart_row``."""
    scores = ctx.data.scores
    scores = scores[~np.isnan(scores)]
    row, c0 = DISTRIBUTION_ROW, DISTRIBUTION_COL
    g.set(row, c0, "Score distribution (the data of the chart)", "heading")
    for c, h in enumerate(("Score", "from", "below (upper end, not included)", "Below the cut",
                           "At or above the cut"), start=c0):
        g.set(row + 1, c, h, "header")
    for c in range(c0, c0 + 5):
        g.widths[c] = 12
    lo, hi = float(scores.min()), float(scores.max())
    integer = bool(np.all(scores == np.round(scores))) and hi - lo <= 120
    if integer:
        edges = [(v, v + 1.0, f"{v:g}") for v in np.arange(lo, hi + 1)]
    else:
        width = (hi - lo) / 25 if hi > lo else 1.0
        edges = [(lo + j * width, lo + (j + 1) * width + (width * 1e-9 if j == 24 else 0.0),
                  f"{lo + j * width:.4g}–{lo + (j + 1) * width:.4g}") for j in range(25)]
    first = row + 2
    g.set(row + 1, c0 + 5, "Scoring at least 'from'", "header")
    g.set(row - 1, c0, "Applicants at or above the cut")
    g.set(row - 1, c0 + 3, ctx.text('=COUNTIF({scores},">="&{cut})', SHEET, scores=rel.scores, cut=cut), "count")
    # one count per bin edge (counts of "at least x"); a bin is the difference of two: one pass
    # over the scores per edge instead of four
    for j, (a, b, label) in enumerate(edges):
        r = first + j
        places = dict(start=cell(SHEET, r, c0 + 1), end=cell(SHEET, r, c0 + 2), below=cell(SHEET, r, c0 + 3),
                      at_least=cell(SHEET, r, c0 + 5), cut=cut, scores=rel.scores,
                      next=cell(SHEET, r + 1, c0 + 5) if j < len(edges) - 1 else 0,
                      at_cut=cell(SHEET, row - 1, c0 + 3).fixed())
        g.set(r, c0, label)
        g.set(r, c0 + 1, float(a))
        g.set(r, c0 + 2, float(b))
        g.set(r, c0 + 3, ctx.text("=IF({end}<={cut},{at_least}-{next},IF({start}>={cut},0,{at_least}-{at_cut}))",
                                  SHEET, **places), "count")
        g.set(r, c0 + 4, ctx.text("={at_least}-{next}-{below}", SHEET, **places), "count")
        g.set(r, c0 + 5, ctx.text('=COUNTIF({scores},">="&{start})', SHEET, **places), "count")
    last = first + len(edges) - 1
    g.charts.append((charts.score_distribution(charts.area(area(SHEET, c0, first, c0, last)),
                                               charts.area(area(SHEET, c0 + 3, row + 1, c0 + 3, last)),
                                               charts.area(area(SHEET, c0 + 4, row + 1, c0 + 4, last)),
                                               cut_text=f"cut at {setup.cut:g}"), f"{anchor_col}{chart_row}"))
    g.charts[-1][0].width = 14
    g.print_area = f"A1:O{chart_row + 21}"
