"""Notes: methods, references, the data, cautions, the problems found and what is not computable."""

from __future__ import annotations

import datetime

from trueband.funcs import __version__, lookup
from trueband.funcs.errors import UnknownFunctionError

from ..context import StudyContext
from ..words import CAUTION, LIVE_REFERENCE_WORDS

__all__ = ["write", "FUNCTIONS_USED"]

SHEET = "Notes"

#: The registered functions the study uses, in the order Notes lists their references.
FUNCTIONS_USED = ("CRONBACH_ALPHA", "ALPHA_CI", "KR20", "SPLIT_HALF", "OMEGA", "SEM", "SED", "BAND_WIDTH",
                  "SCORE_CI", "SCORE_BAND", "ITEM_DIFFICULTY", "ITEM_SD", "ITEM_TOTAL", "ALPHA_IF_DELETED", "ICC",
                  "KRIPPENDORFF_ALPHA", "COHEN_KAPPA", "R_CI", "R_PVALUE", "DISATTENUATE", "RANGE_CORRECT",
                  "OPERATIONAL_VALIDITY", "RANGE_CORRECT_INDIRECT", "MAX_VALIDITY", "SELECTION_RATE", "IMPACT_RATIO",
                  "FOUR_FIFTHS", "IMPACT_Z", "IMPACT_FISHER", "IMPACT_EXTRA_SELECTIONS", "TAYLOR_RUSSELL", "NAYLOR_SHINE",
                  "BCG_UTILITY",
                  # several predictors, fairness and item bias (Combined, Fairness, DIF)
                  "COMPOSITE_RELIABILITY", "COMPOSITE_VALIDITY", "MULTIPLE_R", "ADJUSTED_R2", "CROSS_VALIDITY",
                  "INCREMENTAL_R2", "COHENS_D", "COMPOSITE_D", "PREDICTION_SLOPE_P", "PREDICTION_INTERCEPT_P",
                  "PREDICTION_GAP", "DIF_MH_DELTA", "DIF_MH_P", "DIF_MH_CLASS", "DIF_LR_P", "DIF_LR_R2",
                  "DIF_LR_CLASS")
#: The adverse-impact functions of the Impact, Strata, Cuts, Stages and Groups sheets.
FUNCTIONS_USED += ("IMPACT_RATIO_CI", "IMPACT_ODDS_RATIO", "IMPACT_FLIP", "IMPACT_SMALL_NUMBERS",
                   "POOLED_ODDS_RATIO", "POOLED_IMPACT_P", "POOLED_EXACT_P", "POOLED_HOMOGENEITY_P", "COHENS_D_CI")
#: The restricted group's reliability, the retest gain and the live criterion list (issue 20).
FUNCTIONS_USED += ("ALPHA_AMONG", "RESTRICTED_RELIABILITY", "RETEST_GAIN", "RETEST_SELECTION", "NTH_NUMBER_ROW")
#: The sliding band beside the Bands rows.
FUNCTIONS_USED += ("BAND_FLOOR",)

CONVENTIONS = (
    "A person's score is the sum of their item scores (a blank item counts 0); a person with no item "
    "answered has no score. The item statistics use only people who answered every item (listwise "
    "deletion).",
    "Item statistics are those of the scores after reverse keying (minimum + maximum of the item scale − "
    "response for the reverse-keyed items); the flags of 0/1 items use the proportion correct, those of "
    "rating-scale items the mean's place on the scale and the standard deviation.",
    "Standard deviations use the n − 1 denominator (STDEV). Intervals are two-sided at the confidence on the "
    "Setup sheet.",
    "Range restriction: the restricted group is the people with a criterion value; the unrestricted group "
    "is every applicant with a score.",
    "Group labels that differ only in letter case or spacing ('Group A', ' group a') are one group; a "
    "blank group label puts the person in no group. Labels are matched through a group number on the Bands "
    "sheet, so a label such as '<40' is counted as written.",
    "Adverse impact compares each group's selection rate at the cut with the reference group's rate. The "
    "four-fifths rule of thumb is that of the Uniform Guidelines, 29 CFR 1607.4(D); z is the pooled "
    "two-proportion z test (positive when the group's rate is lower); Fisher p is two-sided.",
    "Impact with several demographic columns: one table per column, each with its own reference group (given "
    "in the setup, else the group with the highest selection rate at the cut). The impact ratio's interval is "
    "the log method (no 0.5 added to zero cells); the flip count uses Fisher's exact test at 0.05; the "
    "small-numbers flag uses groups under 30 applicants (common practice) and expected counts under 5 "
    "(Cochran, 1954). Strata: Mantel–Haenszel odds ratio with the Robins–Breslow–Greenland interval, the "
    "Cochran–Mantel–Haenszel test with the ½ continuity correction, the exact conditional test and the "
    "Breslow–Day test (Tarone's correction); a pooled figure is not reported as a headline when the Breslow–Day "
    "p is below 0.05.",
    LIVE_REFERENCE_WORDS,
    "Several predictors: each further predictor (a 'predictor' block of the Setup sheet) has its own settings, "
    "Reliability, Items, Validity and Bands sheets; Impact and Utility are the first predictor's. On Combined, the "
    "composite is the sum of the raw scores (unit weights) or the least-squares combination (regression weights); "
    "its validity uses the observed validities with the applicants' SDs and intercorrelations, the multiple "
    "correlation only the people with every score and a criterion value. The composite d takes unit weights on "
    "standardised scores and the mean intercorrelation of all applicants.",
    "Fairness: the people with a score and a criterion value, in groups with at least 20 of them (common "
    "practice); the reference group is the one named on Setup, else the largest. Fairness and DIF: one block per "
    "demographic column, each against that column's reference group. DIF: 0/1 items, groups with at "
    "least 100 people who answered every item (common practice), matched on the total score including the item.",
    "Fairness readings (on the Fairness sheet, linked from the Summary): a p value below 1 − the confidence level "
    "counts as a difference detected, slopes first, then intercepts (Lautenschlager & Mendoza 1986); a difference "
    "not detected is not shown to be absent, since these tests have little power in local samples (Aguinis, "
    "Culpepper & Pierce 2010).",
)
#: What the numbers do not support (issue 20): the rules of the Validity, Utility and Reliability sheets.
CONVENTIONS += (
    "Indirect range restriction (Hunter, Schmidt & Le 2006) is shown only when the test reliability it implies among "
    "the people with a criterion value is above 0 and not below the lower confidence limit of their own alpha "
    "(this tool's rule); corrected validities' intervals are the observed limits corrected the same way, inputs "
    "taken as fixed. Utility's base rate is the share of the hires reaching the success threshold unless an "
    "applicant base rate is given on Setup. Retesters are called a selected group when at least 80% scored below "
    "the cut at the first sitting or their first-sitting mean lies at least 0.5 SD from all applicants'.",
)


def write(ctx: StudyContext, impact=None) -> None:
    """Written last: it lists the notes and the cells not computable that every other sheet recorded; with
    ``impact`` (the Impact sheet's tables), each column's reference group as the Impact sheet's cell says now."""
    g = ctx.sheet(SHEET)
    g.widths.update({1: 120})
    d = ctx.data
    lines: list[tuple[str, str | None]] = [
        ("Notes: methods, references, data and cautions", "title"),
        ("Cautions", "heading"),
        (CAUTION, "caution"),
        ("Validity evidence from one local study is one line of evidence; a small criterion sample gives wide "
         "intervals, and corrections rest on the reliability and applicant-SD inputs stated on the sheets.",
         "wrap"),
        ("The data", "heading"),
        (f"Source: {d.path.name}, sheet '{d.sheet}', {d.n} rows of candidates "
         f"({len(d.item_columns)} item columns, {len(d.rating_columns)} rating columns).", "wrap"),
        (f"Built by trueband {__version__} on {datetime.date.today().isoformat()}; the values were computed by "
         f"trueband's recalculation and are stored with the formulas.", "wrap"),
    ]
    lines += [(n, "wrap") for n in ctx.notes]
    lines += _reference_lines(ctx, impact)
    if d.problems:
        lines.append(("Problems in the data (check these cells)", "heading"))
        lines += [(n, "wrap") for n in d.problems]
    lines.append(("Conventions", "heading"))
    lines += [(text, "wrap") for text in CONVENTIONS + _cut_conventions(ctx)]
    lines.append(("Methods and references", "heading"))
    for name in FUNCTIONS_USED + _cut_functions(ctx):
        try:
            spec = lookup(name)
            lines.append((f"{name}: {spec.description} — {spec.reference}", "wrap"))
        except UnknownFunctionError:
            lines.append((f"{name}: not available in this installation", "na"))
    lines.append(("Criterion reliability default 0.52: Viswesvaran, C., Ones, D. S. & Schmidt, F. L. (1996). "
                  "Comparative analysis of the reliability of job performance ratings. Journal of Applied "
                  "Psychology 81, 557-574.", "wrap"))
    if ctx.not_computable:
        lines.append(("Not computable here", "heading"))
        for sheet, coordinate, reason in ctx.not_computable:
            lines.append((f"{sheet}!{coordinate}: {reason}", "wrap"))
    row = 1
    for text, style in lines:
        if style in ("wrap", "caution"):
            row += g.para(row, 1, text, style)
        else:
            g.set(row, 1, text, style)
            row += 1


def _cut_functions(ctx: StudyContext) -> tuple[str, ...]:
    """The functions of the cut-score evidence sheets this study has (Cut score, Standard setting, Content)."""
    from . import content, cut_score, distractors, judges

    return tuple(name for module in (distractors, cut_score, judges, content) if module.SHEET in ctx.grids
                 for name in module.FUNCTIONS)


def _cut_conventions(ctx: StudyContext) -> tuple[str, ...]:
    """The conventions of the cut-score evidence sheets this study has."""
    from . import content, cut_score, distractors, judges

    return tuple(text for module in (distractors, cut_score, judges, content) if module.SHEET in ctx.grids
                 for text in module.CONVENTIONS)


def _reference_lines(ctx: StudyContext, impact) -> list[tuple[str, str | None]]:
    """Per demographic column: its reference group, read live from the Impact sheet's cell and the words beside
    it (the default, or a group chosen there), so that the line stays true after an edit."""
    lines: list[tuple[str, str | None]] = []
    for t in getattr(impact, "tables", ()) or ():
        if t.reference_cell is None or t.how is None:
            continue
        lines.append((f"Reference group for impact by {t.demographic.header!r} (the Impact sheet's cell; edit it "
                      f"there and recalculate):", "wrap"))
        lines.append(("=" + ctx.text('{reference}&" "&{how}', SHEET, reference=t.reference_cell, how=t.how), None))
    return lines
