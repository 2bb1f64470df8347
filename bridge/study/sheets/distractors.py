"""Options: per item and option, the share choosing it (everyone, upper and lower 27%), the option–rest
point-biserial, the discrimination index D, and every flag that applies (written when the answers are raw).

The flags are formulas over the cells beside them, so a corrected key (on the Answers sheet) updates them on
recalculation: a distractor nobody chose; a distractor correlating positively with the rest of the test, or
chosen more by the upper group than the lower (check the key); a negative corrected item–total correlation
(check the key); an item whose deletion raises alpha. Every flag that applies is shown, not only the first.
"""

from __future__ import annotations

import dataclasses

from ..context import Ref, StudyContext, area, cell
from ..setup_answers import ANSWERS_SHEET
from .reliability import Reliability

__all__ = ["Options", "SHEET", "FUNCTIONS", "write"]

SHEET = "Options"
#: The registered functions this sheet uses, for Notes.
FUNCTIONS = ("OPTION_SHARE", "OPTION_REST_R", "DISCRIMINATION_INDEX", "ITEM_TOTAL", "ALPHA_IF_DELETED")
FRACTION = 0.27   # Kelley (1939)
#: How the sheet computes, for Notes.
CONVENTIONS = (
    "Options sheet: answers are compared as text, trimmed and in capitals, with the key in the first row of the "
    "Answers sheet. Shares count a blank answer in the denominator (an omission is a choice of no option); the "
    "upper and lower groups are the 27% with the highest and lowest number correct, ties at a group's edge "
    "sharing its places. D, the item-total r and alpha without the item use the Scored items sheet, where a "
    "blank answer is unanswered (0 in the total, and the person left out of the item statistics).",)
_HEAD = ("Item", "Option", "Keyed?", "Share choosing it", "Upper 27%", "Lower 27%", "Option–rest r",
         "Option flags", "D (upper − lower)", "Corrected item–total r", "Alpha without the item", "Item flags")

#: What each flag says (the formulas and the build-time check use the same words). No flag text ends in a
#: space: a spreadsheet app may drop a trailing space when it shows or exports text, so the flags are joined
#: by single spaces inside TRIM.
NOBODY = "nobody chose distractor "
POSITIVE = " correlates positively with the rest of the test: check the key;"
UPPER = " is chosen more by the upper group than the lower: check the key;"
NEGATIVE = "corrected item-total r is negative: check the key;"
ALPHA = "alpha rises without this item;"


@dataclasses.dataclass(frozen=True)
class Options:
    flagged: Ref   # how many items have at least one flag


def write(ctx: StudyContext, rel: Reliability) -> Options | None:
    """The Options sheet, or None when the items are not raw answers with a key."""
    d = ctx.data
    if d.answer_key is None:
        return None
    g = ctx.sheet(SHEET)
    g.widths.update({1: 10, 2: 8, 3: 8, 4: 10, 5: 10, 6: 10, 7: 11, 8: 44, 9: 10, 10: 11, 11: 11, 12: 60})
    g.set(1, 1, "Options: how each answer option worked", "title")
    row = 3 + g.para(2, 1, "Shares, correlations and flags are statistical indicators for a person to review "
                           "with the item's content; a flag asks for a look at the item and its key, it does not "
                           "prove a fault. Upper and lower groups: the 27% of candidates with the highest and "
                           "lowest number correct (Kelley 1939), ties at the edge sharing the places.", "caution")
    for c, h in enumerate(_HEAD, start=1):
        g.set(row, c, h, "header")
    k = len(d.item_columns)
    last = d.n + 1
    table = [list(d.answer_key)] + d.raw_answers.tolist()
    responses = area(ANSWERS_SHEET, 2, 1, k + 1, last, value=table).qualified()
    alpha = rel.alpha
    r = row + 1
    item_flag_cells = []
    for j in range(k):
        options = _options(d, j)
        first = r
        g.set(r, 1, d.header[d.item_columns[j]])
        option_flags = []
        for option in options:
            g.set(r, 2, option)
            opt = cell(SHEET, r, 2, value=option)
            keyed = option == d.answer_key[j]
            g.set(r, 3, "key" if keyed else "")
            share, upper, lower = (ctx.formula(g, r, c, "OPTION_SHARE", responses, j + 1, opt, part, FRACTION,
                                               checked=ctx.full_checks, style="coef")
                                   for c, part in ((4, "all"), (5, "upper"), (6, "lower")))
            rest = ctx.formula(g, r, 7, "OPTION_REST_R", responses, j + 1, opt, checked=ctx.full_checks,
                               style="coef")
            if not keyed:
                option_flags.append(_option_flag(ctx, g, r, opt, share, upper, lower, rest))
            r += 1
        scored = rel.items
        ctx.formula(g, first, 9, "DISCRIMINATION_INDEX", scored, j + 1, FRACTION, checked=ctx.full_checks,
                    style="coef", key=f"discrimination_{j + 1}")
        total_r = ctx.formula(g, first, 10, "ITEM_TOTAL", scored, j + 1, checked=ctx.full_checks, style="coef")
        without = ctx.formula(g, first, 11, "ALPHA_IF_DELETED", scored, j + 1, checked=ctx.full_checks,
                              style="coef")
        item_flag_cells.append(_item_flag(ctx, g, first, total_r, without, alpha, option_flags, j))
    flagged = ctx.expression(g, r + 1, 12, "SUMPRODUCT((LEN({flags})>0)*1)",
                             lambda: sum(1 for f in item_flag_cells if isinstance(f.value, str) and f.value),
                             style="count", key="items_flagged", flags=area(SHEET, 12, row + 1, 12, r - 1))
    g.set(r + 1, 1, "Items with at least one flag")
    g.para(r + 3, 1, "D: the proportion correct in the upper group minus that in the lower group. Option–rest r: "
                     "the point-biserial of choosing the option with the number correct on the other items (for "
                     "the key, the corrected item–total r). A distractor should draw more of the lower group and "
                     "correlate negatively with the rest of the test.")
    return Options(flagged)


def _options(d, j: int) -> list[str]:
    """The options of item j: as offered (key sheet row 3), else the key and every answer given."""
    if d.answer_options and d.answer_options[j]:
        return list(d.answer_options[j])
    seen = {a for a in d.raw_answers[:, j] if a is not None}
    return sorted(seen | {d.answer_key[j]})


def _number(ref: Ref) -> float:
    """What N() gives for the cell: its number, 0 for text (a figure not computable)."""
    return ref.value if isinstance(ref.value, (int, float)) and not isinstance(ref.value, bool) else 0.0


def _joined(text: str) -> str:
    """What TRIM gives: no leading or trailing spaces, single spaces inside."""
    return " ".join(part for part in text.split(" ") if part)


def _option_flag(ctx: StudyContext, g, r: int, opt: Ref, share: Ref, upper: Ref, lower: Ref, rest: Ref) -> Ref:
    def expected():
        text = ""
        if isinstance(share.value, float) and share.value == 0:
            text += NOBODY + opt.value + ";"
        if _number(rest) > 0:
            text += " " + opt.value + POSITIVE
        if _number(upper) > _number(lower):
            text += " " + opt.value + UPPER
        return _joined(text)

    template = ('TRIM(IF({share}=0,{nobody}&{opt}&";","")&IF(N({rest})>0," "&{opt}&{positive},"")'
                '&IF(N({upper})>N({lower})," "&{opt}&{up},""))')
    return ctx.expression(g, r, 8, template, expected, share=share, opt=opt, rest=rest, upper=upper, lower=lower,
                          nobody=NOBODY, positive=POSITIVE, up=UPPER)


def _item_flag(ctx: StudyContext, g, r: int, total_r: Ref, without: Ref, alpha: Ref, option_flags: list[Ref],
               j: int) -> Ref:
    def expected():
        text = NEGATIVE if _number(total_r) < 0 else ""
        if _number(without) > _number(alpha):
            text += " " + ALPHA
        return _joined(text + "".join(" " + f.value for f in option_flags if isinstance(f.value, str)))

    places = {f"o{i}": f for i, f in enumerate(option_flags)}
    template = ('TRIM(IF(N({total})<0,{negative},"")&IF(N({without})>N({alpha})," "&{rises},"")'
                + "".join(f'&" "&{{o{i}}}' for i in range(len(option_flags))) + ")")
    return ctx.expression(g, r, 12, template, expected, key=f"item_flags_{j + 1}", total=total_r, without=without,
                          alpha=alpha, negative=NEGATIVE, rises=ALPHA, **places)
