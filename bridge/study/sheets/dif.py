"""DIF: item bias of 0/1 items between groups (Mantel–Haenszel and logistic regression), and the flags on Items.

For each demographic column (:func:`.fairness.demographic_columns`) and each group with enough people who
answered every item, against the reference group, one row per item: the Mantel–Haenszel common odds ratio,
MH D-DIF (−2.35 ln α), χ² and p, the ETS category A/B/C (Holland & Thayer 1988; Zwick 2012), and the
logistic-regression DIF of Swaminathan & Rogers (1990): the 2-df test, Nagelkerke ΔR² and the category under
each published convention (Zumbo & Thomas 1997; Jodoin & Gierl 2001). The Items sheet gets a column per
demographic column whose DIF is computed (a column without enough people gets none: the DIF sheet says why),
its header naming the column, with each item's worst MH category over that column's focal groups. The cells of
the first column keep their keys (``dif_B_3_delta``); those of the k-th are keyed ``dif_colK_B_3_delta``; the
flags on Items are keyed by their column, not by their place: ``dif_flag_3`` (item 3, the first column),
``dif_flag_col2_3`` (the second column), whichever Items column they land in.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from ..context import UNCHECKED, Ref, StudyContext, area, sheet_title
from ..words import CAUTION, DIF_CAUTION, DIF_SIZES
from . import items as items_sheet
from .fairness import demographic_columns, reference_of

__all__ = ["Dif", "DifColumn", "write", "MIN_GROUP", "flag_header"]

SHEET = "DIF"
#: People with every item answered each compared group needs (common practice: below this the MH and
#: logistic statistics are too unstable to categorise; operational programmes use hundreds, Zwick 2012).
MIN_GROUP = 100
#: The Items sheet's column for the DIF flag.
ITEMS_COLUMN = 7

_COLUMNS = (("MH common odds ratio", "coef"), ("MH D-DIF (−2.35 ln α)", "coef"), ("MH χ² (1 df)", "coef"),
            ("MH p", "p"), ("ETS category (MH)", None), ("Logistic 2-df p", "p"), ("Nagelkerke ΔR²", "coef"),
            ("Category, Zumbo–Thomas (ΔR² .13/.26)", None), ("Category, Jodoin–Gierl (ΔR² .035/.070)", None))


@dataclasses.dataclass(frozen=True)
class DifColumn:
    """What the DIF sheet found for one demographic column."""

    header: str
    key: str                # the column's part of its cells' keys: "" for the first, "col2_"...
    reference: str | None   # the reference group compared with (None when not computed)
    classes: dict           # focal group name -> the items' ETS category cells, in item order ({}: not computed)
    flags: Ref | None = None    # the Items column of each item's worst category over the focal groups
    reason: Ref | None = None   # the DIF cell saying why the column is not compared (when it is not)
    counts_row: int | None = None   # the DIF sheet's row of the count of items in category C (B below it)
    #: the counts of items whose worst category is C and B (cells of the DIF sheet, SUMPRODUCT over ``flags``)
    count_c: Ref | None = None
    count_b: Ref | None = None


@dataclasses.dataclass(frozen=True)
class Dif:
    """Per focal group name: the ETS category cells of the items, in item order (empty when not computed)."""

    classes: dict
    #: the same per further demographic column (its header -> focal group name -> cells)
    others: dict = dataclasses.field(default_factory=dict)
    #: every demographic column in order, computed or not
    columns: tuple = ()


def write(ctx: StudyContext, predictor) -> Dif:
    """``predictor``: a :class:`.predictors.Predictor` (its item range and group numbers)."""
    d, s = ctx.data, ctx.setup
    columns = demographic_columns(ctx, predictor)
    if not d.binary_items or not columns or predictor.rel.items is None:
        return Dif({})
    g = ctx.sheet(SHEET)
    g.widths.update({1: 20, **{c: 14 for c in range(2, 11)}})
    g.set(1, 1, f"Item bias (DIF) of {s.test_name}: 0/1 items, people matched on the total score", "title")
    row = 2 + g.para(2, 1, CAUTION, "caution")
    row += g.para(row, 1, DIF_CAUTION, "caution")
    row += 1 + g.para(row, 1, DIF_SIZES.format(minimum=MIN_GROUP))
    complete = ~np.isnan(d.items).any(axis=1)
    item_values = predictor.rel.items.value
    if isinstance(item_values, np.ndarray):
        item_values = item_values.view()
        item_values.flags.writeable = False
    items_ref = predictor.rel.items.with_value(item_values)
    found: list = []
    for column in columns:
        row, done = _column(ctx, g, row, items_ref, column, complete)
        found.append(done)
    found = _flags(ctx, found)
    return Dif(found[0].classes, {c.header: c.classes for c in found[1:]}, tuple(found))


def _column(ctx: StudyContext, g, row: int, items_ref, column, complete) -> tuple[int, DifColumn]:
    """The tables of one demographic column from ``row``; returns the next free row and what it found (per
    focal group, the items' ETS category cells)."""
    numbers = column.numbers
    # read-only arrays, as the recalculation passes them: the tables are then counted once for all the checks
    codes = np.array([[np.nan if numbers.get(x) is None else numbers[x]] for x in column.labels], dtype=float)
    codes.flags.writeable = False
    groups_ref = column.codes.with_value(codes)
    counts = {name: int(sum(1 for i, x in enumerate(column.labels) if x == name and complete[i])) for name in numbers}
    g.set(row, 1, f"Groups of column {column.header!r}", "heading")
    row += 1
    for name in numbers:
        g.set(row, 1, name)
        g.set(row, 2, counts[name], "count")
        g.set(row, 3, "people with every item answered" + ("" if counts[name] >= MIN_GROUP else
                                                             f"; fewer than {MIN_GROUP}: not compared"))
        row += 1
    enough = [n for n in numbers if counts[n] >= MIN_GROUP]
    reference = reference_of(column.reference, counts, enough)
    if reference is None or len(enough) < 2:
        reason = ctx.not_computable_at(g, row + 1, 1, f"DIF needs at least two groups with {MIN_GROUP} or more "
                                                      f"people who answered every item (column {column.header!r})",
                                       key="dif" + ("_" + column.key[:-1] if column.key else ""))
        return row + 3, DifColumn(column.header, column.key, None, {}, reason=reason)
    g.set(row + 1, 1, f"Reference group of {column.header!r}")
    g.set(row + 1, 2, reference, "header")
    counts_row = row + 2  # the counts of flagged items, written with the flags (:func:`_counts`)
    row += 5
    out = {}
    for name in enough:
        if name != reference:
            row, out[name] = _table(ctx, g, row, items_ref, groups_ref, column, name, reference)
    return row, DifColumn(column.header, column.key, reference, out, counts_row=counts_row)


def _table(ctx: StudyContext, g, row: int, items, groups, column, name: str, reference: str) -> tuple[int, list]:
    """One focal group's table, an item a row; returns the next free row and the items' ETS category cells."""
    d, numbers = ctx.data, column.numbers
    g.set(row, 1, f"{column.header}: focal group {name} (reference {reference}); negative D-DIF: the item is harder "
                  f"for {name}", "heading")
    g.set(row + 1, 1, "Item", "header")
    for c, (h, _) in enumerate(_COLUMNS, start=2):
        g.set(row + 1, c, h, "header")
    classes = []
    for j, col in enumerate(d.item_columns):
        r = row + 2 + j
        g.set(r, 1, d.header[col])
        args = (items, groups, j + 1, numbers[name], numbers[reference])
        key = f"dif_{column.key}{name}_{j + 1}"
        opts = dict(checked=ctx.full_checks)
        delta = ctx.formula(g, r, 3, "DIF_MH_DELTA", *args, style="coef", key=key + "_delta", **opts)
        ctx.expression(g, r, 2, "EXP(-{delta}/2.35)", None, style="coef", delta=delta)
        p = ctx.formula(g, r, 5, "DIF_MH_P", *args, style="p", key=key + "_mh_p", **opts)
        ctx.expression(g, r, 4, "CHIINV({p},1)", None, style="coef", p=p)
        classes.append(ctx.formula(g, r, 6, "DIF_MH_CLASS", *args, key=key + "_mh_class", **opts))
        ctx.formula(g, r, 7, "DIF_LR_P", *args, style="p", key=key + "_lr_p", **opts)
        ctx.formula(g, r, 8, "DIF_LR_R2", *args, style="coef", key=key + "_lr_r2", **opts)
        for c, convention in ((9, "Zumbo-Thomas"), (10, "Jodoin-Gierl")):
            ctx.formula(g, r, c, "DIF_LR_CLASS", *args, convention, key=f"{key}_lr_{convention.lower()}", **opts)
    return row + 3 + len(d.item_columns), classes


def flag_header(header: str) -> str:
    """The Items header of the DIF flags of demographic column ``header``."""
    return f"DIF by column {header!r} (worst ETS category over its focal groups; see DIF)"


def _flags(ctx: StudyContext, found: list) -> list:
    """Each item's worst ETS category over the focal groups of each demographic column, a column of the Items
    sheet per computed demographic column, its header naming the column and its cells keyed by it; returns
    ``found`` with each computed column's flags."""
    g = ctx.grids.get(sheet_title(items_sheet.SHEET))
    if g is None:
        return found
    out, col, first, m = [], ITEMS_COLUMN, items_sheet.FIRST_ROW, len(ctx.data.item_columns)
    for column in found:
        if not column.classes:
            out.append(column)
            continue
        g.set(first - 1, col, flag_header(column.header), "header")
        g.widths[col] = 24
        values = [_flag(ctx, g, first + j, col, f"dif_flag_{column.key}{j + 1}",
                        [cells[j] for cells in column.classes.values()]) for j in range(m)]
        flags = area(items_sheet.SHEET, col, first, col, first + m - 1, value=values)
        out.append(_counts(ctx, dataclasses.replace(column, flags=flags)))
        col += 1
    return out


def _counts(ctx: StudyContext, column: DifColumn) -> DifColumn:
    """On the DIF sheet, the counts of items whose worst category over ``column``'s focal groups is C and B
    (over its flags on Items)."""
    g, r, values = ctx.grids[sheet_title(SHEET)], column.counts_row, column.flags.value
    known = all(v in ("A", "B", "C: review", None) for v in values)
    got = {}
    for k, (label, word) in enumerate((("C, for review", "C: review"), ("B", "B"))):
        g.set(r + k, 1, f"Items in category {word[0]}")
        g.set(r + k, 3, f"items whose worst category over the focal groups of {column.header!r} is {label} (the "
                        f"Items sheet's flags)")
        # SUMPRODUCT, not COUNTIF: a flag in error makes the count an error rather than leaving it out unseen
        got[word] = ctx.expression(g, r + k, 2, "SUMPRODUCT(({flags}={word})*1)",
                                   (lambda w=word: sum(v == w for v in values)) if known else None, style="count",
                                   key=f"dif_{column.key}count_{word[0].lower()}", flags=column.flags, word=word)
    return dataclasses.replace(column, count_c=got["C: review"], count_b=got["B"])


def _flag(ctx: StudyContext, g, r: int, col: int, key: str, classes: list):
    """One item's worst category over ``classes`` (its ETS category cells, one per focal group); its value."""
    cells = [c for c in classes if not isinstance(c.value, Exception)]
    if not cells:
        g.set(r, col, "see DIF", "na")
        ctx.name(key, Ref(g.title, r, col, titled=True))
        return None
    got = [c.value for c in cells]
    worst = UNCHECKED if any(v not in ("A", "B", "C") for v in got) else (
        "C: review" if "C" in got else "B" if "B" in got else "A")
    places = {f"c{k}": ref for k, ref in enumerate(cells)}
    ctx.expression(g, r, col, f'IF({_any_of("C", len(cells))},"C: review",IF({_any_of("B", len(cells))},"B","A"))',
                   (lambda: worst) if worst is not UNCHECKED else None, key=key, **places)
    return worst


def _any_of(letter: str, k: int) -> str:
    """Formula text: any of the cells ``{c0}``... ``{c<k-1>}`` holds ``letter``."""
    return "OR(" + ",".join(f'{{c{m}}}="{letter}"' for m in range(k)) + ")"
