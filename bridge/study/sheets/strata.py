"""Strata: adverse impact within sites, years or job groups, and pooled across them (the Mantel–Haenszel family).

For each demographic column and each group compared with its reference group: one row per stratum (the four
counts at the cut, the impact ratio, odds ratio and Fisher's p within it), then the Mantel–Haenszel common odds
ratio with its interval, the Cochran–Mantel–Haenszel test (continuity corrected), the exact conditional test
and the Breslow–Day test of homogeneity. When the odds ratios differ between strata the sheet says one pooled
figure is not supported and shows the strata instead of a headline.
"""

from __future__ import annotations

import dataclasses
import textwrap

import numpy as np

from trueband.funcs import call
from trueband.funcs.impact_pooled import EXACT_POOLED_MAX_TABLES

from ..context import Ref, StudyContext, area, cell
from ..words import CAUTION, EXACT_TOO_LARGE, LIVE_REFERENCE_WORDS, NOT_COMPUTABLE, POOLING_REFUSED
from .bands import BandsLayout
from .impact import SHEET as IMPACT_SHEET, Impact, ImpactTable, count_guards, guarded_call
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
            # the same live guards as the Impact sheet's (a stratum where the reference group, as the reference
            # cell names it now, has no applicants or nobody selected says so in words)
            text, check = guarded_call(ctx, g, function, *refs, guards=count_guards(function),
                                       places=dict(zip(_FOUR, refs)),
                                       before=None if function == "IMPACT_FISHER" else setup.passes)
            ctx.put(g, r, c, "=" + text, check, style=style)
    last = first + len(names) - 1
    g.set(last + 1, 1, "All strata added together")
    for c in range(2, 6):
        g.set(last + 1, c, ctx.text("=SUM({x})", SHEET, x=area(SHEET, c, first, c, last)), "count")
    columns = {name: area(SHEET, 2 + k, first, 2 + k, last) for k, name in enumerate(_FOUR)}
    g.set(last + 2, 1, "Strata carrying information")
    ctx.expression(g, last + 2, 2, _INFORMATIVE, lambda: int(_informative(counts).sum()), style="count", **columns)
    g.set(last + 2, 3, f"of {len(names)} (both groups have applicants; some but not all of them selected)")
    written = _pooled(ctx, g, last + 3, area(SHEET, 2, first, 5, last, value=counts.tolist()), counts, columns,
                      setup, prefix, key)
    return _verdict(ctx, g, last + 3 + len(_POOLED), written, prefix, key)


#: The four counts of a stratum's row, in the order of its columns (the Impact sheet's guard places).
_FOUR = ("fs", "fa", "rs", "ra")

#: How many strata carry information for the pooled figures (the functions' own rule: both groups have
#: applicants, and somebody but not everybody of the two is selected).
_INFORMATIVE = "SUMPRODUCT(({fa}>0)*({ra}>0)*({fs}+{rs}>0)*({fa}-{fs}+{ra}-{rs}>0))"


def _informative(counts: np.ndarray) -> np.ndarray:
    fs, fa, rs, ra = counts.T
    return (fa > 0) & (ra > 0) & (fs + rs > 0) & (fa - fs + ra - rs > 0)


#: The live guards of the pooled figures: (condition template on the strata's count columns, the condition in
#: Python on the counts, the reason in words).
_NO_INFORMATION = (
    _INFORMATIVE + "=0", lambda n: not _informative(n).any(),
    "no stratum carries information: in each, one of the two groups has no applicants (a stratum where a group "
    "has no applicants carries none for the Mantel–Haenszel figures), or nobody or everybody is selected")
_NO_DISCORDANT = (
    "SUMPRODUCT(({fa}-{fs})*{rs})=0", lambda n: not ((n[:, 1] - n[:, 0]) * n[:, 2]).any(),
    "in every stratum that carries information everybody of the group is selected or nobody of the reference "
    "group is (the sum of b·c/n is 0), so the pooled odds ratio is undefined")
_ZERO_ODDS = (
    "SUMPRODUCT({fs}*({ra}-{rs}))=0", lambda n: not (n[:, 0] * (n[:, 3] - n[:, 2])).any(),
    "nobody of the group is selected in any stratum where somebody of the reference group is not (the sum of "
    "a·d/n is 0): the pooled odds ratio is 0")
_TOO_FEW = (
    _INFORMATIVE + "<2", lambda n: _informative(n).sum() < 2,
    "the homogeneity test needs at least 2 strata that carry information (a stratum where one group has no "
    "applicants, or where nobody or everybody is selected, carries none)")

#: (label, function, its arguments after the strata, style, name, guards) of the pooled figures.
_POOLED = (
    ("Mantel–Haenszel common odds ratio (group over reference)", "POOLED_ODDS_RATIO", ("estimate",), "coef",
     "pooled_odds_ratio", (_NO_INFORMATION, _NO_DISCORDANT)),
    ("  lower limit", "POOLED_ODDS_RATIO", ("lower",), "coef", "pooled_or_lower", (_NO_INFORMATION, _NO_DISCORDANT)),
    ("  upper limit", "POOLED_ODDS_RATIO", ("upper",), "coef", "pooled_or_upper",
     (_NO_INFORMATION, _NO_DISCORDANT, (_ZERO_ODDS[0], _ZERO_ODDS[1], _ZERO_ODDS[2] + ", so its interval has no "
                                        "finite upper limit"))),
    ("Cochran–Mantel–Haenszel p (continuity corrected)", "POOLED_IMPACT_P", (), "p", "pooled_p",
     (_NO_INFORMATION,)),
    ("Exact conditional p (two-sided)", "POOLED_EXACT_P", (), "p", "pooled_exact_p", (_NO_INFORMATION,)),
    ("Breslow–Day p (do the strata's odds ratios agree?)", "POOLED_HOMOGENEITY_P", (), "p", "homogeneity_p",
     (_NO_INFORMATION, _TOO_FEW, _NO_DISCORDANT, (_ZERO_ODDS[0], _ZERO_ODDS[1], _ZERO_ODDS[2] + ", so no table "
                                                  "shares it and the test is undefined"))),
)


def _pooled(ctx, g, at: int, table: Ref, counts: np.ndarray, columns: dict, setup: SetupSheet, prefix: str,
            key: str | None) -> dict[str, Ref]:
    """The pooled figures from row ``at``, each behind live guards on the strata's counts (so that switching the
    reference group on Impact turns a figure into the reason it is not computable, and back)."""
    written = {}
    for k, (label, function, extra, style, name, guards) in enumerate(_POOLED):
        g.set(at + k, 1, label)
        extra = extra + (setup.confidence,) if extra else ()
        live = tuple((template, lambda n=counts, holds=holds, **_: bool(holds(n)), reason)
                     for template, holds, reason in guards)
        if function == "POOLED_EXACT_P":
            text, check = _exact_p(ctx, g, table, counts, columns)
        else:
            text, check = guarded_call(ctx, g, function, table, *extra, guards=live, places=columns)
        written[name] = ctx.put(g, at + k, 2, "=" + text, check, style=style,
                                key=(name if key == "" else None) or f"{prefix}{name}")
    return written


#: How many tables the exact conditional test would enumerate, live on the strata's count columns: over the
#: strata that carry information, the focal-selected count's range max(0, m1 - n0) .. min(n1, m1) (n1 = {fa},
#: n0 = {ra}, m1 = {fs}+{rs}), as POOLED_EXACT_P counts it (MIN and MAX of two arrays written with ABS).
_EXACT_TABLES = ("SUMPRODUCT(({fa}>0)*({ra}>0)*({fs}+{rs}>0)*({fa}-{fs}+{ra}-{rs}>0)"
                 "*(({fa}+{fs}+{rs}-ABS({fa}-{fs}-{rs}))/2-({fs}+{rs}-{ra}+ABS({fs}+{rs}-{ra}))/2+1))")


def _exact_tables(counts: np.ndarray) -> int:
    fs, fa, rs, ra = counts.T
    sizes = np.minimum(fa, fs + rs) - np.maximum(0, fs + rs - ra) + 1
    return int(sizes[_informative(counts)].sum())


def _exact_p(ctx, g, table: Ref, counts: np.ndarray, columns: dict):
    """The exact conditional p's formula (no ``=``) and its build-time check, behind live guards on the strata's
    counts: no stratum carries information; the strata are too large for the test, said with their count of
    possible tables against the limit (so that editing the data and recalculating updates the reason, or gives
    the p value back). Without the full checks the p value itself is left to the recalculation."""
    limit = EXACT_POOLED_MAX_TABLES
    head, tail = EXACT_TOO_LARGE
    text = ctx.text("IF(" + _NO_INFORMATION[0] + ',"' + NOT_COMPUTABLE + _NO_INFORMATION[2] + '",IF('
                    + _EXACT_TABLES + ">" + str(limit) + ',"' + NOT_COMPUTABLE + head + '"&TEXT(' + _EXACT_TABLES
                    + ',"#,##0")&"' + tail.format(limit=limit) + '",', g.title, **columns) \
        + ctx.call_text("POOLED_EXACT_P", (table,), g.title) + "))"
    tables = _exact_tables(counts)
    if _NO_INFORMATION[1](counts):
        return text, lambda: NOT_COMPUTABLE + _NO_INFORMATION[2]
    if tables > limit:
        return text, lambda: NOT_COMPUTABLE + head + f"{tables:,}" + tail.format(limit=limit)
    return text, (lambda: call("POOLED_EXACT_P", ctx.value(table))) if ctx.full_checks else None


def _verdict(ctx, g, row: int, written: dict[str, Ref], prefix: str, key: str | None):
    """Whether one pooled figure is supported, the figure to report and, when the strata's odds ratios differ,
    why none is: live formulas on the Breslow–Day p; returns (Strata, the next row)."""
    p, pooled = written["homogeneity_p"], written["pooled_odds_ratio"]
    alpha = HOMOGENEITY_ALPHA
    untested = NOT_COMPUTABLE + "the homogeneity test is not computable (see above)"
    value = p.value if isinstance(p.value, float) else None
    refused = value is not None and value < alpha
    g.set(row, 1, "One pooled figure supported?")
    verdict = ctx.expression(
        g, row, 2, 'IF(ISNUMBER({p}),IF({p}<{alpha},"no: read the strata","yes"),{untested})',
        lambda: untested if value is None else "no: read the strata" if refused else "yes", p=p, alpha=alpha,
        untested=untested, key=f"{prefix}pooling_supported" if key is None else "pooling_supported")
    g.set(row + 1, 1, "Pooled odds ratio to report")
    missing = NOT_COMPUTABLE + "the pooled odds ratio is not computable (see above)"
    headline = ctx.expression(
        g, row + 1, 2, 'IF(ISNUMBER({p}),IF({p}<{alpha},"not supported: the strata differ",IF(ISNUMBER({pooled}),'
                       '{pooled},{missing})),{untested})',
        lambda: (untested if value is None else "not supported: the strata differ" if refused
                 else pooled.value if isinstance(pooled.value, float) else missing),
        style="coef", p=p, alpha=alpha, pooled=pooled, missing=missing, untested=untested,
        key=f"{prefix}pooled_headline" if key is None else "pooled_headline")
    # the refusal (Simpson's paradox) shows, live, only while the Breslow–Day p is below the level
    lines = textwrap.wrap(POOLING_REFUSED, 150)
    for k, line in enumerate(lines):
        ctx.expression(g, row + 2 + k, 1, 'IF(ISNUMBER({p}),IF({p}<{alpha},{line},""),"")',
                       lambda line=line: line if refused else "", style="caution", p=p, alpha=alpha, line=line)
    return Strata(pooled, p, verdict, headline), row + 2 + len(lines) + 2
