"""Standard setting: how the cut was set, from the judges' sheet of the data workbook.

Written when the Setup names a judges' sheet. Each block of that sheet (Angoff, Nedelsky, Ebel, Hofstee, Beuk,
candidate judgments) is copied here as inputs, and each method's cut is a formula over the copy; the top of the
sheet says which method set the study's cut, by how many judges, the SEM-adjusted cut, and leaves a marked
place for the rationale only a person can write.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from trueband.funcs.errors import InsufficientDataError

from ..context import Ref, StudyContext, area, cell
from ..setup_cut import METHODS, Block
from ..words import RATIONALE_PLACE, STANDARD_SETTING_CAUTION
from .bands import BandsLayout
from .reliability import Reliability
from .setup import SetupSheet

__all__ = ["StandardSetting", "SHEET", "FUNCTIONS", "write"]

SHEET = "Standard setting"
#: The registered functions this sheet uses, for Notes.
FUNCTIONS = ("ANGOFF_CUT", "ANGOFF_SE", "NEDELSKY_CUT", "EBEL_CUT", "HOFSTEE_CUT", "BEUK_CUT",
             "CONTRASTING_GROUPS_CUT", "BORDERLINE_CUT")
_SUMMARY_ROWS = 16   # the blocks start below the summary
#: How the sheet computes, for Notes.
CONVENTIONS = (
    "Standard setting sheet: cuts are on the raw-score scale and are not rounded (rounding, and in which "
    "direction, is a policy decision). Judges' blocks ignore all-blank rows and columns and refuse any other "
    "blank; Hofstee's judgments are averaged over the judges; the candidates' scores are looked up by applicant "
    "id on the Bands sheet.",)


@dataclasses.dataclass(frozen=True)
class StandardSetting:
    method_cut: Ref | None       # the cut of the method named on Setup
    adjusted_cut: Ref | None     # that cut minus k SEM
    cuts: tuple = ()             # (method key, its cut cell) for every block given


def write(ctx: StudyContext, setup: SetupSheet, rel: Reliability, layout: BandsLayout) -> StandardSetting | None:
    """The Standard setting sheet, or None when the Setup names no judges' sheet."""
    j = ctx.data.judgments
    if j is None:
        return None
    g = ctx.sheet(SHEET)
    g.widths.update({1: 46, 2: 14, 3: 14, 4: 14, 5: 14, 6: 14, 7: 14})
    g.set(1, 1, "How the cut was set: standard setting", "title")
    top = 3 + g.para(2, 1, STANDARD_SETTING_CAUTION, "caution")
    row = top + _SUMMARY_ROWS
    cuts: dict[str, tuple[Ref, Ref | None]] = {}   # method -> (cut, number of judges, when the sheet has it)
    scores = rel.scores.with_value(ctx.data.scores, name="the scores")
    writers = (("angoff", _angoff), ("nedelsky", _nedelsky), ("ebel counts", _ebel), ("hofstee", _hofstee),
               ("beuk", _beuk), ("candidate judgments", _candidates))
    for key, writer in writers:
        if key in j.blocks:
            row = writer(ctx, g, row, j.blocks, scores, layout, cuts) + 1
    method_cut, adjusted = _summary(ctx, g, top, j, cuts, rel, setup)
    return StandardSetting(method_cut, adjusted, tuple((k, v[0]) for k, v in cuts.items()))


def _summary(ctx: StudyContext, g, row: int, j, cuts: dict, rel: Reliability, setup: SetupSheet):
    g.set(row, 1, "The cut and how it was set", "heading")
    method = j.method
    g.set(row + 1, 1, "Method used to set the cut (Setup: standard setting method)")
    g.set(row + 2, 1, "Number of judges")
    g.set(row + 3, 1, "Cut that method gives")
    if method is None:
        g.set(row + 1, 2, "not stated: name it on the Setup sheet ('standard setting method')", "na")
        method_cut = None
    else:
        g.set(row + 1, 2, METHODS[method])
        found = cuts.get("angoff" if method == "yes/no angoff" else method)
        if found is None:
            method_cut = ctx.not_computable_at(g, row + 3, 2, f"the judges' sheet has no block for {METHODS[method]}",
                                               key="method_cut")
        else:
            if found[1] is None:
                g.set(row + 2, 2, "not recorded on the judges' sheet for this method (a consensus grid)")
            else:
                ctx.link(g, row + 2, 2, found[1], style="count", key="n_judges")
            method_cut = ctx.link(g, row + 3, 2, found[0], style="score", key="method_cut")
    g.set(row + 4, 1, "SEM (from Reliability)")
    sem = ctx.link(g, row + 4, 2, rel.sem, style="coef")
    k = ctx.setup.sem_adjustment if ctx.setup.sem_adjustment is not None else 1.0
    g.set(row + 5, 1, "k: how many SEMs the cut is lowered by (Setup: sem adjustment)")
    g.set(row + 5, 2, k, "input")
    k_cell = cell(SHEET, row + 5, 2, value=k, name="k").fixed()
    g.set(row + 6, 1, "SEM-adjusted cut: the method's cut − k × SEM")
    adjusted = None
    if method_cut is not None:
        def adjusted_check():
            return ctx.value(method_cut) - k * ctx.value(sem)

        adjusted = ctx.expression(g, row + 6, 2, "{cut}-{k}*{sem}", adjusted_check, style="score",
                                  key="adjusted_cut", cut=method_cut, k=k_cell, sem=sem)
    else:
        ctx.not_computable_at(g, row + 6, 2, "no method is named, so there is no method cut to adjust")
    g.set(row + 7, 1, "Chance that a candidate whose true score is at the cut reaches the adjusted cut")
    ctx.formula(g, row + 7, 2, "NORMSDIST", k_cell, check=lambda: _normal_cdf(k), style="pct")
    # no value of k in the text: k is an input cell, and a number typed here would go stale when it is edited
    g.para(row + 8, 1, "Why lower the cut by k SEM: under a normal error model a candidate whose true score is "
                       "exactly at the method's cut scores at or above the cut − k SEM with the chance shown; "
                       "lowering the cut trades fewer false fails for more false passes, and is a policy choice to "
                       "be stated in the rationale below (k = 0 leaves the cut as the method gives it).")
    g.set(row + 10, 1, "Cut the study uses (from Setup)")
    ctx.link(g, row + 10, 2, setup.cut_cell, style="score")
    g.para(row + 11, 1, RATIONALE_PLACE, "caution")
    for r in range(row + 13, row + 16):
        g.set(r, 1, "", "input")
    ctx.notes.append("Standard setting: the rationale for the method, the judges and the cut is left for a person "
                     "to write on the Standard setting sheet (the shaded cells with a dashed border below RATIONALE).")
    return method_cut, adjusted


def _normal_cdf(x: float) -> float:
    from math import erf, sqrt
    return 0.5 * (1.0 + erf(x / sqrt(2.0)))


def _copy(g, row: int, block: Block, title: str, what: str) -> tuple[int, int, int, np.ndarray]:
    """Write a block as inputs from ``row``: (first row, last row, last column, its values with nan for blanks)."""
    g.set(row, 1, title, "heading")
    row += g.para(row + 1, 1, what) + 1
    for c, h in enumerate(block.header, start=1):
        g.set(row, c, h, "header")
    width = len(block.header) - 1
    values = np.array([[np.nan if x is None else x for x in v[:width]] + [np.nan] * (width - len(v[:width]))
                       for v in block.values], dtype=float)
    for i, (label, v) in enumerate(zip(block.labels, values)):
        g.set(row + 1 + i, 1, label)
        for c, x in enumerate(v, start=2):
            if not np.isnan(x):
                g.set(row + 1 + i, c, float(x), "input")
    return row + 1, row + len(block.values), width + 1, values


def _judge_count(ctx: StudyContext, g, r: int, header_row: int, last_col: int, n: int) -> Ref:
    g.set(r, 1, "Judges")
    return ctx.formula(g, r, 2, "COUNTA", area(SHEET, 2, header_row, last_col, header_row), check=lambda: n,
                       style="count")


def _angoff(ctx, g, row, blocks, scores, layout, cuts) -> int:
    first, last, last_col, x = _copy(g, row, blocks["angoff"], "Angoff", "Each judge's probability that a "
                                     "minimally competent candidate answers each item correctly (1/0: yes/no).")
    yes_no = bool(np.isin(x[~np.isnan(x)], (0.0, 1.0)).all())
    matrix = area(SHEET, 2, first, last_col, last, value=x)
    r = last + 1
    g.set(r, 1, "Judge's cut (sum over the items)")
    for c in range(2, last_col + 1):
        col = x[:, c - 2]
        ctx.formula(g, r, c, "SUM", area(SHEET, c, first, c, last), check=lambda v=col: float(np.nansum(v)),
                    style="score")
    judges = _judge_count(ctx, g, r + 1, first - 1, last_col, x.shape[1])
    g.set(r + 2, 1, "Judges' spread: SD of the judges' cuts")
    ctx.formula(g, r + 2, 2, "STDEV", area(SHEET, 2, r, last_col, r), check=lambda: _sd(np.nansum(x, axis=0)),
                style="score", key="angoff_judges_sd")
    g.set(r + 3, 1, "Angoff cut (" + ("yes/no judgments" if yes_no else "modified: probabilities") + ")")
    cut = ctx.formula(g, r + 3, 2, "ANGOFF_CUT", matrix, style="score", key="angoff_cut")
    g.set(r + 4, 1, "Standard error of the Angoff cut (judges' SD / √judges)")
    ctx.formula(g, r + 4, 2, "ANGOFF_SE", matrix, style="score", key="angoff_se")
    cuts["angoff"] = (cut, judges)
    return r + 5


def _sd(values: np.ndarray) -> float:
    if values.size < 2:
        raise InsufficientDataError("one judge: no spread")
    return float(np.std(values, ddof=1))


def _nedelsky(ctx, g, row, blocks, scores, layout, cuts) -> int:
    first, last, last_col, x = _copy(g, row, blocks["nedelsky"], "Nedelsky", "Each judge's number of options "
                                     "left per item after striking those a minimally competent candidate rules out.")
    r = last + 1
    judges = _judge_count(ctx, g, r, first - 1, last_col, x.shape[1])
    g.set(r + 1, 1, "Nedelsky cut (mean over judges of Σ 1/options left)")
    cut = ctx.formula(g, r + 1, 2, "NEDELSKY_CUT", area(SHEET, 2, first, last_col, last, value=x), style="score",
                      key="nedelsky_cut")
    cuts["nedelsky"] = (cut, judges)
    return r + 2


def _ebel(ctx, g, row, blocks, scores, layout, cuts) -> int:
    first, last, last_col, n = _copy(g, row, blocks["ebel counts"], "Ebel: number of items",
                                     "Items per relevance (rows) and difficulty (columns) category.")
    counts = area(SHEET, 2, first, last_col, last, value=n)
    r = last + 1
    if "ebel proportions" not in blocks:
        g.set(r, 1, "Ebel cut")
        cuts["ebel"] = (ctx.not_computable_at(g, r, 2, "the judges' sheet has no 'Ebel proportions' block",
                                              key="ebel_cut"), None)
        return r + 1
    first_p, last_p, last_col_p, p = _copy(g, r + 1, blocks["ebel proportions"], "Ebel: judged proportion correct",
                                           "The proportion of each category's items a minimally competent "
                                           "candidate answers correctly.")
    r = last_p + 1
    g.set(r, 1, "Ebel cut (Σ items × judged proportion)")
    cut = ctx.formula(g, r, 2, "EBEL_CUT", counts, area(SHEET, 2, first_p, last_col_p, last_p, value=p),
                      style="score", key="ebel_cut")
    g.set(r + 1, 1, "Judges")
    g.set(r + 1, 2, "a consensus grid: the number of judges is in the record, not here")
    cuts["ebel"] = (cut, None)
    return r + 2


def _means(ctx, g, r: int, first: int, last: int, x: np.ndarray) -> list[Ref]:
    g.set(r, 1, "Mean over judges")
    out = []
    for c in range(2, x.shape[1] + 2):
        col = x[:, c - 2]

        def check(v=col):
            if np.isnan(v).any():
                raise InsufficientDataError("a judge left this column blank")
            return float(v.mean())

        out.append(ctx.formula(g, r, c, "AVERAGE", area(SHEET, c, first, c, last), check=check, style="coef"))
    return out


def _hofstee(ctx, g, row, blocks, scores, layout, cuts) -> int:
    first, last, last_col, x = _copy(g, row, blocks["hofstee"], "Hofstee", "Each judge's lowest and highest "
                                     "acceptable cut and lowest and highest acceptable fail rate (0 to 1).")
    r = last + 1
    if x.shape[1] < 4:
        cuts["hofstee"] = (ctx.not_computable_at(g, r, 2, "the Hofstee block needs four columns after the judge",
                                                 key="hofstee_cut"), None)
        return r + 1
    means = _means(ctx, g, r, first, last, x[:, :4])
    g.set(r + 1, 1, "Judges")
    judges = ctx.formula(g, r + 1, 2, "COUNTA", area(SHEET, 1, first, 1, last), check=lambda: x.shape[0],
                         style="count")
    g.set(r + 2, 1, "Hofstee cut (the judges' line meets the observed fail rate)")
    cut = ctx.formula(g, r + 2, 2, "HOFSTEE_CUT", scores, *means, style="score", key="hofstee_cut")
    cuts["hofstee"] = (cut, judges)
    return r + 3


def _beuk(ctx, g, row, blocks, scores, layout, cuts) -> int:
    first, last, last_col, x = _copy(g, row, blocks["beuk"], "Beuk", "Each judge's cut and the pass rate (0 to 1) "
                                     "the judge expects at it.")
    r = last + 1
    g.set(r, 1, "Judges")
    judges = ctx.formula(g, r, 2, "COUNTA", area(SHEET, 1, first, 1, last), check=lambda: x.shape[0],
                         style="count")
    g.set(r + 1, 1, "Beuk cut (the judges' line meets the observed pass rate)")
    cut = ctx.formula(g, r + 1, 2, "BEUK_CUT", scores, area(SHEET, 2, first, 2, last, value=x[:, 0]),
                      area(SHEET, 3, first, 3, last, value=x[:, 1] if x.shape[1] > 1 else x[:, 0]),
                      style="score", key="beuk_cut")
    cuts["beuk"] = (cut, judges)
    return r + 2


def _candidates(ctx, g, row, blocks, scores, layout, cuts) -> int:
    """Contrasting groups and borderline group from the judges' view of candidates they know."""
    block = blocks["candidate judgments"]
    first, last, last_col, x = _copy(g, row, block, "Contrasting groups and borderline group",
                                     "Candidates the judges know, judged (without their scores) qualified or not "
                                     "(1/0) and borderline or not (1/0); their scores come from the Bands sheet.")
    d = ctx.data
    by_id = {str(i).strip().lower(): s for i, s in zip(d.ids, d.scores)}
    score_col = last_col + 1
    g.set(first - 1, score_col, "Score (from Bands)", "header")
    found = np.full(len(block.labels), np.nan)
    for i, label in enumerate(block.labels):
        r = first + i
        value = by_id.get(str(label).strip().lower())
        if value is None or np.isnan(value):
            d.problems.append(f"sheet '{ctx.data.judgments.sheet}', candidate judgments: applicant {label!r} has "
                              f"no score in the data; left out of the contrasting and borderline groups")
            continue
        found[i] = value
        ctx.expression(g, r, score_col, "INDEX({scores},MATCH({id},{ids},0))", lambda v=value: float(v),
                       style="score", scores=layout.scores, id=cell(SHEET, r, 1), ids=layout.column(1))
    score_range = area(SHEET, score_col, first, score_col, last, value=found)
    r = last + 1
    g.set(r, 1, "Candidates judged")
    judged = ctx.formula(g, r, 2, "COUNT", score_range, check=lambda: int((~np.isnan(found)).sum()), style="count")
    g.set(r + 1, 1, "Contrasting-groups cut (fewest misclassified)")
    g.set(r + 2, 1, "Borderline-group cut (median score of the borderline)")
    if x.shape[1] < 2:
        for k, key in ((1, "contrasting groups"), (2, "borderline group")):
            cuts[key] = (ctx.not_computable_at(g, r + k, 2, "the block needs a Qualified and a Borderline column",
                                               key=key.replace(" ", "_") + "_cut"), judged)
        return r + 3
    cuts["contrasting groups"] = (ctx.formula(g, r + 1, 2, "CONTRASTING_GROUPS_CUT", score_range,
                                              area(SHEET, 2, first, 2, last, value=x[:, 0]), style="score",
                                              key="contrasting_groups_cut"), judged)
    cuts["borderline group"] = (ctx.formula(g, r + 2, 2, "BORDERLINE_CUT", score_range,
                                            area(SHEET, 3, first, 3, last, value=x[:, 1]), style="score",
                                            key="borderline_group_cut"), judged)
    return r + 3
