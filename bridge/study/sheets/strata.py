"""Strata: adverse impact within sites, years or job groups, and pooled across them (the Mantel–Haenszel family).

For each demographic column and each group compared with its reference group: one row per stratum (the four
counts at the cut, the impact ratio, odds ratio and Fisher's p within it), then the Mantel–Haenszel common odds
ratio with its interval, the Cochran–Mantel–Haenszel test (continuity corrected), the exact conditional test
and the Breslow–Day test of homogeneity. When the odds ratios differ between strata the sheet says one pooled
figure is not supported and shows the strata instead of a headline.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from ..context import Ref, StudyContext, area, cell
from ..words import CAUTION, LIVE_REFERENCE_WORDS, POOLING_REFUSED
from .bands import BandsLayout
from .impact import SHEET as IMPACT_SHEET, Impact, ImpactTable
from .setup import SetupSheet

__all__ = ["Strata", "write", "SHEET", "HOMOGENEITY_ALPHA"]

SHEET = "Strata"
#: The Breslow–Day p below which one pooled figure is not shown as a headline (common practice: 0.05).
HOMOGENEITY_ALPHA = 0.05

_HEAD = ("Stratum", "Group selected", "Group applicants", "Reference selected", "Reference applicants",
         "Impact ratio", "Odds ratio of selection", "Fisher exact p")


@dataclasses.dataclass(frozen=True)
class Strata:
    """The pooled figures of the first comparison (the headline), or None without a stratum column."""

    pooled_odds_ratio: Ref | None = None
    homogeneity_p: Ref | None = None
    verdict: Ref | None = None
    headline: Ref | None = None     # the pooled odds ratio, or why one pooled figure is not supported


def write(ctx: StudyContext, setup: SetupSheet, impact: Impact, bands: BandsLayout) -> Strata:
    d = ctx.data
    stratum = d.impact.stratum if d.impact is not None else None
    if stratum is None:
        return Strata()
    g = ctx.sheet(SHEET)
    g.widths.update({1: 24, 2: 12, 3: 12, 4: 12, 5: 12, 6: 12, 7: 12, 8: 12, 9: 12})
    g.set(1, 1, f"Adverse impact within and across strata ({stratum.header})", "title")
    row = 2 + g.para(2, 1, CAUTION, "caution")
    row += g.para(row, 1, f"Each stratum of {stratum.header!r} is a table of its own: the people of one stratum are "
                          f"compared only with each other, and the Mantel–Haenszel figures pool the strata without "
                          f"adding them together. Selected = score at or above the cut on Setup. Strata where one "
                          f"group has no applicants, or where nobody or everybody was selected, carry no "
                          f"information and are left out of the pooled figures.", width=150) + 1
    names = list(stratum.tally.names)
    if len(names) < 2:
        ctx.not_computable_at(g, row, 1, f"column {stratum.header!r} holds {len(names)} stratum label(s); pooling "
                                         f"needs at least two strata", key="pooled_odds_ratio")
        return Strata()
    strata_col = bands.column(bands.extra["stratum"])
    first_result: Strata | None = None
    row += g.para(row, 1, LIVE_REFERENCE_WORDS, width=150) + 1
    for t in impact.tables:
        focal_groups = [k for k in t.names if k != t.reference]
        for j, focal in enumerate(focal_groups, start=1):
            result, row = _comparison(ctx, g, row, t, j, focal, stratum, strata_col, bands, setup,
                                      key=None if first_result is not None else "")
            first_result = first_result or result
    return first_result or Strata()


def _counts(ctx: StudyContext, t: ImpactTable, focal: str, stratum, cut: float) -> np.ndarray:
    """Per stratum: focal selected, focal applicants, reference selected, reference applicants (people with a
    score), as the sheet's COUNTIFS count them."""
    scores = ctx.data.scores
    has = ~np.isnan(scores)
    chosen = has & (scores >= cut)
    groups = np.array([x if x is not None else "" for x in t.demographic.groups], dtype=object)
    strata = np.array([x if x is not None else "" for x in stratum.groups], dtype=object)
    out = np.zeros((len(stratum.tally.names), 4), dtype=np.int64)
    for i, s in enumerate(stratum.tally.names):
        here = has & (strata == s)
        for j, name in enumerate((focal, t.reference)):
            member = here & (groups == name)
            out[i, 2 * j] = int((member & chosen).sum())
            out[i, 2 * j + 1] = int(member.sum())
    return out


def _groups(ctx, g, row, t: ImpactTable, j: int, focal: str) -> tuple[Ref, Ref]:
    """The heading of the ``j``-th comparison and, below it, its groups' names and numbers (the group's, the
    reference group's), read from the Impact sheet's reference cell; returns the two number cells."""
    g.set(row, 1, f"{t.demographic.header}: comparison {j} of {len(t.names) - 1}", "heading")
    names_on_impact = area(IMPACT_SHEET, 1, t.first, 1, t.last)
    g.set(row + 1, 1, "Group")
    ctx.expression(g, row + 1, 2, "INDEX({names},{number})", lambda: focal, names=names_on_impact,
                   number=cell(SHEET, row + 1, 6).fixed())
    g.set(row + 1, 3, "compared with")
    ctx.link(g, row + 1, 4, t.reference_cell)
    g.set(row + 1, 5, "Group numbers (Bands)")
    # the group's number: the j-th of the groups, skipping the reference group's (the MATCH beside it)
    ref_number = ctx.expression(g, row + 1, 7, "MATCH({reference},{names},0)",
                                lambda: t.demographic.numbers[t.reference], style="count",
                                reference=t.reference_cell, names=names_on_impact).fixed()
    focal_number = ctx.expression(g, row + 1, 6, "{j}+({j}>={ref})", lambda: t.demographic.numbers[focal],
                                  style="count", j=j, ref=ref_number).fixed()
    return focal_number, ref_number


def _comparison(ctx, g, row, t: ImpactTable, j: int, focal: str, stratum, strata_col: Ref, bands: BandsLayout,
                setup: SetupSheet, key: str | None):
    """The ``j``-th group other than the reference group (as the Impact sheet's reference cell names it now;
    ``focal`` at build time) against the reference group, stratum by stratum, then pooled; returns (Strata,
    the next row)."""
    prefix = f"{t.demographic.header}:{focal}:"
    focal_number, ref_number = _groups(ctx, g, row, t, j, focal)
    row += 1
    for c, h in enumerate(_HEAD, start=1):
        g.set(row + 1, c, h, "header")
    counts = _counts(ctx, t, focal, stratum, setup.cut)
    first = row + 2
    names = list(stratum.tally.names)
    for i, s in enumerate(names):
        r = first + i
        g.set(r, 1, s)
        refs = []
        for k, (number, what) in enumerate(((focal_number, "selected"), (focal_number, "applicants"),
                                            (ref_number, "selected"), (ref_number, "applicants"))):
            condition = "1" if what == "selected" else '">=0"'
            refs.append(ctx.expression(
                g, r, 2 + k, "COUNTIFS({groups},{number},{strata},{stratum},{selected}," + condition + ")",
                lambda v=int(counts[i, k]): v, style="count", groups=t.numbers, number=number,
                strata=strata_col, stratum=stratum.numbers[s], selected=bands.selected))
        for c, function, style in ((6, "IMPACT_RATIO", "coef"), (7, "IMPACT_ODDS_RATIO", "coef"),
                                   (8, "IMPACT_FISHER", "p")):
            ctx.formula(g, r, c, function, *refs, style=style,
                        before=None if function == "IMPACT_FISHER" else setup.passes)
    last = first + len(names) - 1
    g.set(last + 1, 1, "All strata added together")
    for c in range(2, 6):
        g.set(last + 1, c, ctx.text("=SUM({x})", SHEET, x=area(SHEET, c, first, c, last)), "count")
    table = area(SHEET, 2, first, 5, last, value=counts.tolist())
    at = last + 3
    figures = (("Mantel–Haenszel common odds ratio (group over reference)", "POOLED_ODDS_RATIO", ("estimate",
                setup.confidence), "coef", "pooled_odds_ratio"),
               ("  lower limit", "POOLED_ODDS_RATIO", ("lower", setup.confidence), "coef", "pooled_or_lower"),
               ("  upper limit", "POOLED_ODDS_RATIO", ("upper", setup.confidence), "coef", "pooled_or_upper"),
               ("Cochran–Mantel–Haenszel p (continuity corrected)", "POOLED_IMPACT_P", (), "p", "pooled_p"),
               ("Exact conditional p (two-sided)", "POOLED_EXACT_P", (), "p", "pooled_exact_p"),
               ("Breslow–Day p (do the strata's odds ratios agree?)", "POOLED_HOMOGENEITY_P", (), "p",
                "homogeneity_p"))
    written = {}
    for k, (label, function, extra, style, name) in enumerate(figures):
        g.set(at + k, 1, label)
        written[name] = ctx.formula(g, at + k, 2, function, table, *extra, style=style, checked=ctx.full_checks or
                                    function != "POOLED_EXACT_P",
                                    key=(name if key == "" else None) or f"{prefix}{name}")
    verdict_row = at + len(figures)
    g.set(verdict_row, 1, "One pooled figure supported?")
    homogeneity = written["homogeneity_p"]
    verdict = None
    if isinstance(homogeneity.value, float):
        refused = homogeneity.value < HOMOGENEITY_ALPHA
        verdict = ctx.expression(g, verdict_row, 2, 'IF({p}<{alpha},"no: read the strata","yes")',
                                 lambda: "no: read the strata" if refused else "yes", p=homogeneity,
                                 alpha=HOMOGENEITY_ALPHA, key=f"{prefix}pooling_supported" if key is None
                                 else "pooling_supported")
        pooled = written["pooled_odds_ratio"]
        g.set(verdict_row + 1, 1, "Pooled odds ratio to report")
        if isinstance(pooled.value, float):
            headline = ctx.expression(
                g, verdict_row + 1, 2, 'IF({p}<{alpha},"not supported: the strata differ",{pooled})',
                lambda: "not supported: the strata differ" if refused else pooled.value, style="coef",
                p=homogeneity, alpha=HOMOGENEITY_ALPHA, pooled=pooled,
                key=f"{prefix}pooled_headline" if key is None else "pooled_headline")
        else:
            headline = ctx.not_computable_at(g, verdict_row + 1, 2, pooled.value.message)
        verdict_row += 1
        if refused:
            verdict_row += g.para(verdict_row + 1, 1, POOLING_REFUSED, "caution", width=150)
    else:
        headline = ctx.not_computable_at(g, verdict_row, 2, "the homogeneity test is not computable (see above)")
    return Strata(written["pooled_odds_ratio"], homogeneity, verdict, headline), verdict_row + 3
