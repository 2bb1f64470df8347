"""Cut score: measurement error and decision accuracy at the cut, and the pass rate by group (the sliding band is
on the Bands sheet, :func:`.bands.sliding_band`).

Written when the Setup names a cut score (the median cut the study falls back on is no one's decision).
"""

from __future__ import annotations

import dataclasses

import numpy as np

from trueband.funcs.errors import InsufficientDataError

from ..context import Expr, Ref, StudyContext, area
from ..words import CUT_SCORE_CAUTION, MODELS_NOTE, SLIDING_BAND_ON_BANDS
from .impact import Impact
from .reliability import Reliability
from .setup import SetupSheet

__all__ = ["CutScore", "SHEET", "FUNCTIONS", "write"]

SHEET = "Cut score"
#: The registered functions this sheet uses, for Notes.
FUNCTIONS = ("CSEM_BINOMIAL", "KR21", "DECISION_CONSISTENCY_BB", "CLASSIFICATION_ACCURACY_BB",
             "DECISION_CONSISTENCY", "CLASSIFICATION_ACCURACY")
#: How the sheet computes, for Notes.
CONVENTIONS = (
    "Cut score sheet: a candidate passes at or above the cut. Beta-binomial model: the SD with denominator n, the "
    "cut rounded up to a whole number of items, a true score passing at or above that cut as a proportion of the "
    "items (Hanson & Brennan 1990). Normal model: the SD with denominator n − 1 and, for whole-number scores, a "
    "pass at the cut − 0.5. The sliding band (Bands sheet) uses the reliability and confidence of the Reliability "
    "and Setup sheets.",)

_NOT_NUMBER_CORRECT = ("the beta-binomial model and Lord's binomial error need number-correct scores of "
                       "right/wrong (0/1) items")


@dataclasses.dataclass(frozen=True)
class CutScore:
    """The headline cells: consistency and accuracy of the decisions at the cut (beta-binomial when the items are
    0/1, else the normal approximation), and the CSEM at the cut."""

    agreement: Ref
    kappa: Ref
    accuracy: Ref
    false_pass: Ref
    false_fail: Ref
    csem: Ref | None


def write(ctx: StudyContext, setup: SetupSheet, rel: Reliability, impact: Impact) -> CutScore | None:
    """The Cut score sheet, or None when the Setup names no cut score."""
    if ctx.setup.cut is None:
        return None
    g = ctx.sheet(SHEET)
    g.widths.update({1: 62, 2: 16, 3: 16, 4: 16, 5: 40})
    d = ctx.data
    scores = d.scores[~np.isnan(d.scores)]
    g.set(1, 1, "The cut score: measurement error and decision accuracy", "title")
    row = 3 + g.para(2, 1, CUT_SCORE_CAUTION, "caution")
    g.set(row, 1, "Cut score (from Setup): a candidate passes at or above it")
    cut = ctx.link(g, row, 2, setup.cut_cell, style="score", key="cut_score_cut").with_value(setup.cut, "the cut")
    g.set(row + 1, 1, "Mean score")
    mean = ctx.formula(g, row + 1, 2, "AVERAGE", rel.scores, check=lambda: float(scores.mean()), style="score")
    g.set(row + 2, 1, "Standard deviation (n − 1), from Reliability")
    sd = _named(ctx.link(g, row + 2, 2, rel.sd, style="score"), "the standard deviation")
    g.set(row + 3, 1, "Standard deviation (n, as the beta-binomial model takes it)")
    sd_n = ctx.formula(g, row + 3, 2, "STDEVP", rel.scores, check=lambda: _sd_n(scores), style="score")
    g.set(row + 4, 1, "Reliability used (from Reliability)")
    reliability = _named(ctx.link(g, row + 4, 2, rel.reliability, style="coef"), "the reliability")
    g.set(row + 5, 1, "Pass rate at the cut, everyone with a score")
    ctx.expression(g, row + 5, 2, 'COUNTIF({scores},">="&{cut})/COUNT({scores})',
                   lambda: float((scores >= setup.cut).mean()), style="pct", key="pass_rate", scores=rel.scores,
                   cut=cut)
    row += 7
    binary = d.binary_items and d.total is None
    g.set(row, 1, "Measurement error at the cut", "heading")
    g.set(row + 1, 1, "SEM of the whole score scale (from Reliability)")
    ctx.link(g, row + 1, 2, rel.sem, style="coef")
    labels = ("Number of items (right/wrong)", "Variance of scores (n)", "KR-21",
              "Conditional SEM at the cut, Lord's binomial error √(c(n − c)/(n − 1))",
              "Conditional SEM at the cut, Keats' adjustment to the reliability used")
    for k, label in enumerate(labels, start=2):
        g.set(row + k, 1, label)
    if binary:
        # the item headers of the data copy: COLUMNS of another sheet's range is not computed by every engine
        headers = area(d.sheet, d.item_columns[0] + 1, 1, d.item_columns[-1] + 1, 1)
        n_items = ctx.formula(g, row + 2, 2, "COUNTA", headers, check=lambda: d.items.shape[1], style="count")
        variance = ctx.formula(g, row + 3, 2, "VARP", rel.scores, check=lambda: float(scores.var()), style="coef")
        kr21 = ctx.formula(g, row + 4, 2, "KR_21", n_items, mean, variance, style="coef", key="kr21")
        csem = ctx.formula(g, row + 5, 2, "CSEM_BINOMIAL", cut, n_items, style="coef", key="csem_lord")
        ctx.formula(g, row + 6, 2, "CSEM_BINOMIAL", cut, n_items, reliability, kr21, style="coef", key="csem_keats")
    else:
        n_items = None
        for k, key in ((2, None), (3, None), (4, "kr21"), (5, "csem_lord"), (6, "csem_keats")):
            ctx.not_computable_at(g, row + k, 2, _NOT_NUMBER_CORRECT, key=key)
        csem = None
    g.para(row + 7, 1, "The SEM is an average over the score scale; the conditional SEM is the error of a score at "
                       "the cut itself (Lord 1955; Keats 1957), what the testing Standards ask for near a cut.")
    row += 9
    figures, row = _decisions(ctx, g, row, setup, mean, sd, sd_n, reliability, cut, n_items, binary)
    row = _by_group(ctx, g, row, impact)
    g.para(row + 1, 1, SLIDING_BAND_ON_BANDS)
    return dataclasses.replace(figures, csem=csem)


def _named(ref: Ref, name: str) -> Ref:
    """``ref`` named for the messages of the figures that need it ("it needs the reliability, ...")."""
    return dataclasses.replace(ref, name=name)


def _sd_n(scores: np.ndarray) -> float:
    if scores.size < 2 or np.ptp(scores) == 0:
        raise InsufficientDataError("the scores do not vary")
    return float(scores.std())


def _decisions(ctx: StudyContext, g, row: int, setup: SetupSheet, mean: Ref, sd: Ref, sd_n: Ref, reliability: Ref,
               cut: Ref, n_items: Ref | None, binary: bool) -> tuple[CutScore, int]:
    """The table of decision consistency and accuracy from ``row``: beta-binomial (B), normal (C); and the next
    free row."""
    d = ctx.data
    g.set(row, 1, "Decisions at the cut", "heading")
    for c, h in ((2, "Beta-binomial (headline)"), (3, "Normal approximation (quick screen)")):
        g.set(row, c, h, "header")
    g.set(row + 1, 1, "Cut as a whole number of items (the lowest passing score)")
    whole = bool(np.all(d.scores[~np.isnan(d.scores)] == np.round(d.scores[~np.isnan(d.scores)])))
    continuity = Expr("TRUE" if whole else "FALSE", whole)
    if binary:
        cut_items = ctx.formula(g, row + 1, 2, "ROUNDUP", cut, 0, check=lambda: float(np.ceil(setup.cut)),
                                style="count")
    else:
        cut_items = ctx.not_computable_at(g, row + 1, 2, _NOT_NUMBER_CORRECT)
    parts = (("Decision consistency: the same decision on two sittings", "DECISION_CONSISTENCY", "agreement",
              "agreement"),
             ("Kappa of that consistency (beyond chance)", "DECISION_CONSISTENCY", "kappa", "kappa"),
             ("Classification accuracy: observed decision = true-score decision", "CLASSIFICATION_ACCURACY",
              "accuracy", "accuracy"),
             ("False passes: pass, with a true score below the cut", "CLASSIFICATION_ACCURACY", "false_pass",
              "false_pass"),
             ("False fails: fail, with a true score at or above the cut", "CLASSIFICATION_ACCURACY", "false_fail",
              "false_fail"))
    headline = {}
    for k, (label, function, part, key) in enumerate(parts, start=2):
        r = row + k
        g.set(r, 1, label)
        normal = ctx.formula(g, r, 3, function, mean, sd, reliability, cut, part, continuity, before=setup.passes,
                             style="coef", key=f"{key}_normal")
        if binary:
            headline[key] = ctx.formula(g, r, 2, function + "_BB", mean, sd_n, n_items, cut_items, part,
                                        before=setup.passes, style="coef", key=f"{key}_bb")
        else:
            ctx.not_computable_at(g, r, 2, _NOT_NUMBER_CORRECT, key=f"{key}_bb")
            headline[key] = normal
    used = g.para(row + 7, 1, MODELS_NOTE + (" The normal model here passes whole-number scores at the cut − 0.5 "
                                             "(continuity)." if whole else ""))
    return CutScore(csem=None, **headline), row + 8 + used


def _by_group(ctx: StudyContext, g, row: int, impact: Impact) -> int:
    """The pass rate of each group at the cut, linked to the Impact sheet; returns the next free row."""
    g.set(row, 1, "Pass rate by group at the cut (from the Impact sheet)", "heading")
    if not impact.rates:
        why = impact.min_ratio.value.message if isinstance(impact.min_ratio.value, Exception) else "no groups"
        ctx.not_computable_at(g, row + 1, 2, why)
        return row + 3
    for k, (name, rate) in enumerate(impact.rates, start=1):
        g.set(row + k, 1, name)
        ctx.link(g, row + k, 2, rate, style="pct")
    row += len(impact.rates) + 1
    row += g.para(row, 1, "Impact ratios, tests and the four-fifths comparison are on the Impact sheet; a pass "
                          "rate that differs by group is a reason to look further, not a finding by itself.")
    return row + 1
