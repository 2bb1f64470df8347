"""Notes: methods, references, the data, cautions, the problems found and what is not computable."""

from __future__ import annotations

import datetime

from trueband.funcs import __version__, lookup
from trueband.funcs.errors import UnknownFunctionError

from ..context import StudyContext
from ..words import CAUTION

__all__ = ["write", "FUNCTIONS_USED"]

SHEET = "Notes"

#: The registered functions the study uses, in the order Notes lists their references.
FUNCTIONS_USED = ("CRONBACH_ALPHA", "ALPHA_CI", "KR20", "SPLIT_HALF", "OMEGA", "SEM", "SED", "BAND_WIDTH",
                  "SCORE_CI", "SCORE_BAND", "ITEM_DIFFICULTY", "ITEM_SD", "ITEM_TOTAL", "ALPHA_IF_DELETED", "ICC",
                  "KRIPPENDORFF_ALPHA", "COHEN_KAPPA", "R_CI", "R_PVALUE", "DISATTENUATE", "RANGE_CORRECT",
                  "OPERATIONAL_VALIDITY", "RANGE_CORRECT_INDIRECT", "MAX_VALIDITY", "SELECTION_RATE", "IMPACT_RATIO",
                  "FOUR_FIFTHS", "IMPACT_Z", "IMPACT_FISHER", "IMPACT_SHORTFALL", "TAYLOR_RUSSELL", "NAYLOR_SHINE",
                  "BCG_UTILITY")

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
)


def write(ctx: StudyContext) -> None:
    """Written last: it lists the notes and the cells not computable that every other sheet recorded."""
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
