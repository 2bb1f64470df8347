"""Items: item analysis (difficulty or mean, spread, corrected item–total r, alpha if deleted) and flags."""

from __future__ import annotations

import numpy as np

from .. import charts
from ..context import Ref, StudyContext, area, cell
from .reliability import Reliability
from .scored_items import SCORED_SHEET
from .setup import SetupSheet

__all__ = ["write"]

SHEET = "Items"
FIRST_ROW = 7  # the first item's row


#: The flag of an item whose corrected item–total r is negative (issue 19: a mis-keyed item showed only "weak
#: discrimination"); shown besides that flag.
NEGATIVE_FLAG = "negative item–total r: check the key"


def _flag_formula(ctx: StudyContext, r: int, binary: bool, alpha: Ref) -> str:
    """Row ``r``'s flags: every threshold (rows 2 to 5, column F and G) the item's statistics cross, joined by
    "; " (each flag adds "; " and its words; MID drops the first "; "), an empty text when none applies."""
    places = dict(mean=cell(SHEET, r, 2), sd=cell(SHEET, r, 3), total=cell(SHEET, r, 4),
                  deleted=cell(SHEET, r, 5), alpha=alpha.qualified(), weak=cell(SHEET, 2, 6).fixed(),
                  low=cell(SHEET, 3, 6).fixed(), high=cell(SHEET, 4, 6).fixed(), bottom=cell(SHEET, 5, 6).fixed(),
                  top=cell(SHEET, 5, 7).fixed())
    flags = [("{total}<{weak}", "weak discrimination"), ("{total}<0", NEGATIVE_FLAG)]
    if binary:
        flags += [("{mean}<{low}", "very hard"), ("{mean}>{high}", "very easy")]
    else:
        span = "({top}-{bottom})"
        flags += [("({mean}-{bottom})/" + span + "<{low}", "mean near the bottom of the scale"),
                  ("({top}-{mean})/" + span + "<{low}", "mean near the top of the scale"),
                  ("{sd}<{high}", "little spread")]
    flags.append(("{deleted}>{alpha}", "alpha rises without it"))
    template = "=MID(" + "&".join(f'IF({test},"; {words}","")' for test, words in flags) + ",3,400)"
    return ctx.text(template, SHEET, **places)


def _thresholds(ctx: StudyContext, g, setup: SetupSheet, binary: bool) -> str:
    """The editable thresholds of the flags (rows 2 to 5); returns the heading of the mean column."""
    d = ctx.data
    g.set(2, 1, "Flag an item when its corrected item–total correlation is below", "label")
    g.set(2, 6, 0.2, "input_coef")
    if binary:
        g.set(3, 1, "or fewer than this proportion answer it correctly", "label")
        g.set(3, 6, 0.2, "input_coef")
        g.set(4, 1, "or more than this proportion answer it correctly", "label")
        g.set(4, 6, 0.9, "input_coef")
        return "Difficulty (proportion correct)"
    lo, hi = d.item_scale
    g.set(3, 1, "or its mean lies within this share of the scale's range from either end", "label")
    g.set(3, 6, 0.1, "input_coef")
    g.set(4, 1, "or its standard deviation is below (scale points)", "label")
    g.set(4, 6, round((hi - lo) / 8, 4), "input_coef")
    given = "from Setup" if d.item_scale_given else "the lowest and highest response in the data"
    g.set(5, 1, f"Item scale: lowest and highest response ({given})", "label")
    if d.item_scale_given:
        g.set(5, 6, "=" + setup.item_min.address(SHEET), "score")
        g.set(5, 7, "=" + setup.item_max.address(SHEET), "score")
    else:
        g.set(5, 6, lo, "input")
        g.set(5, 7, hi, "input")
    return "Mean item score"


def write(ctx: StudyContext, setup: SetupSheet, rel: Reliability) -> None:
    g = ctx.sheet(SHEET)
    g.widths.update({1: 18, 2: 16, 3: 14, 4: 16, 5: 16, 6: 50})  # 50: room for several flags
    d = ctx.data
    g.set(1, 1, "Item analysis", "title")
    if d.items is None:
        ctx.not_computable_at(g, 3, 1, "no item columns were given")
        return
    x = d.items
    binary = d.binary_items
    mean_head = _thresholds(ctx, g, setup, binary)
    head = ("Item", mean_head, "Standard deviation", "Corrected item–total r", "Alpha if deleted", "Flag")
    for c, h in enumerate(head, start=1):
        g.set(6, c, h, "header")
    first = FIRST_ROW
    complete = x[~np.isnan(x).any(axis=1)]
    if complete.shape[0] >= 2:
        item_var = complete.var(axis=0)
        rest_var = (complete.sum(axis=1, keepdims=True) - complete).var(axis=0)
        suspect = (item_var <= 1e-12 * max(1.0, float(item_var.max()))) | (rest_var <= 1e-12)
    else:
        suspect = np.ones(x.shape[1], dtype=bool)
    reverse = set(d.reverse_items)
    for j in range(x.shape[1]):
        r = first + j
        name = d.header[d.item_columns[j]]
        g.set(r, 1, name + (" (reversed)" if j in reverse else ""))
        # with large data only the items numpy finds degenerate are checked by calling the function
        checked = ctx.full_checks or bool(suspect[j])
        statistics = [ctx.formula(g, r, c, function, rel.items, j + 1, checked=checked, style="coef",
                                  key=f"item{j + 1}_{part}")
                      for c, function, part in ((2, "ITEM_DIFFICULTY", "difficulty"), (3, "ITEM_SD", "sd"),
                                                (4, "ITEM_TOTAL", "total"), (5, "ALPHA_IF_DELETED", "aid"))]
        ok = not any(isinstance(s.value, Exception) for s in statistics)
        if ok and isinstance(rel.alpha.value, float):
            g.set(r, 6, _flag_formula(ctx, r, binary, rel.alpha))
        else:
            g.set(r, 6, "see the statistics to the left", "na")
    last = first + x.shape[1] - 1
    scale = (0.0, 1.0) if binary else d.item_scale
    g.charts.append((charts.item_map(charts.area(area(SHEET, 2, first, 2, last)),
                                     charts.area(area(SHEET, 4, first, 4, last)),
                                     binary=binary, scale=scale),
                     "H6"))  # beside the table: below it, a page break would cut it in two
    if binary:
        text = ("Difficulty is the proportion answering the item correctly; the corrected item–total r "
                "correlates the item with the total of the other items.")
    else:
        text = ("The items are rating-scale (polytomous) items: the mean and standard deviation describe where "
                "the answers lie on the scale and how much they spread; the corrected item–total r correlates "
                "the item with the total of the other items.")
    if reverse:
        text += (f" Reverse-keyed items are scored minimum + maximum − response (scale {d.item_scale[0]:g} to "
                 f"{d.item_scale[1]:g}; the scores are on the '{SCORED_SHEET}' sheet) before every statistic.")
    g.para(first + x.shape[1] + 1, 1, text + " Flags are prompts for review by a test developer, not verdicts; "
                                             "the thresholds above are common practice and can be edited.")
