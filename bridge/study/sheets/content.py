"""Content: Lawshe's content validity ratio per item from the experts' ratings, its critical value, and the CVI.

Written when the Setup names a content ratings sheet. The ratings are copied below the figures (as inputs a person
may correct), in tables of at most :data:`EXPERTS_PER_TABLE` experts so that each prints across a page, and every
figure is a formula over that copy.
"""

from __future__ import annotations

import dataclasses
import math

from trueband.funcs import call
from trueband.funcs.errors import InsufficientDataError, TruebandError

from ..context import Ref, StudyContext, area, cell
from ..words import CONTENT_CAUTION

__all__ = ["Content", "SHEET", "FUNCTIONS", "write"]

SHEET = "Content"
#: The registered functions this sheet uses, for Notes.
FUNCTIONS = ("CVR", "CVR_CRITICAL")
_FIRST_RATING_COL = 2   # column B: the copy of the ratings, in tables below the figures
#: How the sheet computes, for Notes.
CONVENTIONS = (
    "Content sheet: N is the number of experts who rated the item (a blank rating is left out); the critical "
    "value is one-tailed at the significance level on the sheet; the content validity index is the mean CVR of "
    "the items that reach it (Lawshe 1975).",)


@dataclasses.dataclass(frozen=True)
class Content:
    n_items: Ref
    n_pass: Ref
    cvi: Ref


def write(ctx: StudyContext) -> Content | None:
    """The Content sheet, or None when the Setup names no content ratings sheet."""
    ratings = ctx.data.content_ratings
    if ratings is None:
        return None
    g = ctx.sheet(SHEET)
    g.widths.update({1: 30, 2: 10, 3: 11, 4: 10, 5: 14, 6: 10})
    method = (ctx.setup.content_critical or "exact").strip().lower()
    g.set(1, 1, "Content evidence: subject-matter experts' ratings of the items", "title")
    row = 3 + g.para(2, 1, CONTENT_CAUTION, "caution")
    g.set(row, 1, "Significance level (one-tailed) of the critical value")
    g.set(row, 2, 0.05, "input")
    alpha = cell(SHEET, row, 2, value=0.05, name="alpha").fixed()
    g.set(row + 1, 1, "Critical value method")
    g.set(row + 1, 2, "exact" if method == "exact" else "normal", "input")
    method_cell = cell(SHEET, row + 1, 2, value=method).fixed()
    g.set(row + 1, 3, "exact: binomial (Ayre & Scally 2014); normal: the approximation of Wilson, Pan & "
                      "Schumsky 2012, labelled as such")
    head = row + 3
    labels = ("Item (from sheet '" + ratings.sheet + "')", "Experts rating", "Rated essential", "CVR",
              "Critical CVR (" + ("exact binomial" if method == "exact" else "normal approximation") + ")",
              "Passes?")
    for c, h in enumerate(labels, start=1):
        g.set(head, c, h, "header")
    first, last = head + 1, head + len(ratings.items)
    passes = _passing(ratings, method)
    row = last + 2
    g.set(row, 1, "Items rated")
    n_items = ctx.formula(g, row, 2, "COUNTA", area(SHEET, 1, first, 1, last), check=lambda: len(ratings.items),
                          style="count", key="content_items")
    g.set(row + 1, 1, "Items whose CVR reaches the critical value")
    n_pass = ctx.expression(g, row + 1, 2, 'COUNTIF({flags},"yes")', lambda: sum(passes), style="count",
                            key="content_pass", flags=area(SHEET, 6, first, 6, last))
    g.set(row + 2, 1, "Content validity index (CVI): mean CVR of the items that pass")
    cvr_values = _cvrs(ratings)
    kept = [c for c, ok in zip(cvr_values, passes) if ok]
    rated = [c for c in cvr_values if not math.isnan(c)]

    def mean_cvr():
        if not rated:
            raise InsufficientDataError("no item has a rating")
        return sum(rated) / len(rated)

    if kept:
        cvi = ctx.expression(g, row + 2, 2, 'AVERAGEIF({flags},"yes",{cvrs})', lambda: sum(kept) / len(kept),
                             style="coef", key="cvi", flags=area(SHEET, 6, first, 6, last),
                             cvrs=area(SHEET, 4, first, 4, last))
    else:
        cvi = ctx.not_computable_at(g, row + 2, 2, "no item reaches the critical value", key="cvi")
    g.set(row + 3, 1, "Mean CVR of every item rated")
    ctx.formula(g, row + 3, 2, "AVERAGE", area(SHEET, 4, first, 4, last),
                check=mean_cvr, style="coef", key="cvr_mean")
    row += 5 + g.para(row + 5, 1, "CVR = (nₑ − N/2)/(N/2), with nₑ the experts rating the item essential and N "
                       "the experts rating it (Lawshe 1975). An item passes when its CVR reaches the critical value, "
                       "the CVR of the fewest essential ratings that chance (each expert saying essential with probability "
                       "one half) reaches with probability at most the significance level. The CVI is the mean CVR "
                       "of the items kept (Lawshe 1975). Ratings other than essential, useful or not necessary "
                       "were left out and are listed on Notes.")
    copies = _ratings_tables(g, row + 1, ratings)
    _item_rows(ctx, g, first, ratings, alpha, method_cell, copies)
    return Content(n_items=n_items, n_pass=n_pass, cvi=cvi)


#: Experts per table of the ratings' copy: a table of more would not fit across a landscape page at 70% (column
#: A's item labels and up to eight ratings such as "not necessary"; issue 20).
EXPERTS_PER_TABLE = 8


def _ratings_tables(g, at: int, ratings) -> list[tuple[int, int, int]]:
    """The experts' ratings copied as inputs, below the figures from row ``at``: one table of the items' rows per
    :data:`EXPERTS_PER_TABLE` experts (stacked, so each prints across a page); returns each table's (first item
    row, first column, last column)."""
    g.set(at, 1, "The experts' ratings (a copy: correct a rating here and recalculate; the table above follows)",
          "heading")
    tables, row = [], at + 1
    experts = list(ratings.experts)
    for start in range(0, len(experts), EXPERTS_PER_TABLE):
        group = experts[start:start + EXPERTS_PER_TABLE]
        g.set(row, 1, "Item", "header")
        for j, expert in enumerate(group):
            g.set(row, _FIRST_RATING_COL + j, expert, "header")
            g.widths[_FIRST_RATING_COL + j] = max(g.widths.get(_FIRST_RATING_COL + j, 0), 12)
        for i, (item, values) in enumerate(zip(ratings.items, ratings.ratings)):
            g.set(row + 1 + i, 1, item)
            for j, value in enumerate(values[start:start + len(group)]):
                if value is not None:
                    g.set(row + 1 + i, _FIRST_RATING_COL + j, value, "input")
        tables.append((row + 1, _FIRST_RATING_COL, _FIRST_RATING_COL + len(group) - 1))
        row += len(ratings.items) + 2
    return tables


def _item_rows(ctx: StudyContext, g, first: int, ratings, alpha: Ref, method_cell: Ref, copies) -> None:
    """One row per item from ``first``: experts rating, essential count, CVR, critical CVR, passes; each over the
    item's row of every table of the ratings' copy (``copies``, from :func:`_ratings_tables`)."""
    for i, values in enumerate(ratings.ratings):
        r = first + i
        g.set(r, 1, ratings.items[i])
        given = [v for v in values if v is not None]
        rows = [area(SHEET, c1, top + i, c2, top + i) for top, c1, c2 in copies]
        panel = ctx.formula(g, r, 2, "COUNTA", *rows, check=lambda n=len(given): n, style="count")
        places = {f"r{k}": x for k, x in enumerate(rows)}
        essential = ctx.expression(g, r, 3, "+".join(f'COUNTIF({{r{k}}},"essential")' for k in range(len(rows))),
                                   lambda n=given.count("essential"): n, style="count", **places)
        cvr = ctx.formula(g, r, 4, "CVR", essential, panel, style="coef", key=f"cvr_{i + 1}")
        critical = ctx.formula(g, r, 5, "CVR_CRITICAL", panel, alpha, method_cell, style="coef")
        if isinstance(cvr.value, float) and isinstance(critical.value, float):
            ctx.expression(g, r, 6, 'IF({cvr}>={critical},"yes","no")',
                           lambda a=cvr.value, b=critical.value: "yes" if a >= b else "no", cvr=cvr,
                           critical=critical)
        else:
            ctx.not_computable_at(g, r, 6, "no critical value for this panel (see column E)")


def _cvrs(ratings) -> list[float]:
    out = []
    for values in ratings.ratings:
        given = [v for v in values if v is not None]
        n = len(given)
        out.append((given.count("essential") - n / 2) / (n / 2) if n else float("nan"))
    return out


def _passing(ratings, method: str) -> list[bool]:
    """Whether each item passes, as the sheet's formulas decide it (the registered functions, called here)."""
    out = []
    for values in ratings.ratings:
        given = [v for v in values if v is not None]
        try:
            out.append(call("CVR", given.count("essential"), len(given))
                       >= call("CVR_CRITICAL", len(given), 0.05, method))
        except TruebandError:
            out.append(False)
    return out
