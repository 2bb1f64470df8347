"""Summary: the headline figures, each a link to the cell of the sheet that computes it."""

from __future__ import annotations

from trueband.funcs.errors import TruebandError

from ..context import Ref, StudyContext, cell
from ..words import CAUTION, FORMULAS_OR_VALUES, NOT_COMPUTABLE
from .impact import Impact
from .raters import Raters
from .reliability import Reliability
from .setup import SetupSheet
from .strata import Strata
from .utility import Utility, validity_caution
from .validity import Validity
from .summary_fairness import fairness_rows

__all__ = ["write"]

SHEET = "Summary"


def write(ctx: StudyContext, setup: SetupSheet, rel: Reliability, raters: Raters, validity: Validity,
          impact: Impact, utility: Utility, strata: Strata | None = None, combined=None, *, cut_score=None,
          standard=None, content=None, options=None, bias=()) -> None:
    g = ctx.sheet(SHEET)
    g.landscape = True
    g.widths.update({1: 62, 2: 16, 3: 16, 4: 16})
    s, d = ctx.setup, ctx.data
    who = " — ".join(x for x in (s.organisation, s.job_title) if x)
    g.set(1, 1, f"Validation study: {s.test_name}" + (f" ({who})" if who else ""), "title")
    first_row = 3 + g.para(2, 1, CAUTION, "caution")
    # (label, key, figure, style, interval or beside); a heading has no figure and no style
    rows: list[tuple] = [
        ("The people", None, None, "", None),
        ("Applicants with a test score", "n_scored", rel.n_scored, "count", None),
        ("People with a job-performance value", "n_criterion", validity.n_criterion, "count", None),
        ("Is the test consistent?", None, None, "", None),
        ("Reliability (coefficient alpha)", "alpha", rel.alpha, "coef",
         (("alpha_lower", rel.alpha_lower), ("alpha_upper", rel.alpha_upper))),
        ("Standard error of measurement, in score points", "sem", rel.sem, "coef", None),
        ("Scores closer than this are not reliably different (band width)", "band_width", rel.band_width, "coef",
         None),
        ("Do the interviewers agree?", None, None, "", None),
        ("Agreement of the mean panel rating, ICC(A,k)", "icc_agreement_average", raters.icc_agreement_average,
         "coef", None),
        ("Does the score predict job performance?", None, None, "", None),
        ("Observed validity (correlation with the criterion)", "r", validity.r, "coef",
         (("r_lower", validity.r_lower), ("r_upper", validity.r_upper))),
        ("p value of the observed validity", "r_p", validity.r_p, "p", None),
        ("Operational validity (criterion unreliability and range restriction corrected)", "operational",
         validity.operational, "coef", None),
        ("Does the cut screen out a group?", None, None, "", None),
        ("Cut score", "cut", setup.cut_cell, "score", None),
        ("Lowest impact ratio (below 0.80 fails the four-fifths rule of thumb)", "min_ratio", impact.min_ratio,
         "coef", None),
        *([("Its group (and demographic column)", "min_ratio_where", impact.where, None, None),
           ("Comparisons below four-fifths (Impact lists each)", "n_below", impact.n_below, "count", None)]
          if impact.where is not None else []),
        *([("Pooled over strata: Mantel–Haenszel odds ratio of selection (first comparison on Strata)",
            "pooled_headline", strata.headline, "coef", None)] if strata is not None and strata.headline is not None
          else []),
        ("What is the test worth?", None, None, "", None),
        ("Success rate among those selected (Taylor–Russell)", "taylor_russell", utility.taylor_russell, "pct",
         utility.base_rate),
        ("Money gain from one year's hires (Brogden–Cronbach–Gleser; inputs on Utility)", "bcg", utility.bcg,
         "money", None),
    ]
    if combined is not None and combined.multiple_r is not None:  # several predictors (the Combined sheet)
        rows += [("Do the predictors together predict better?", None, None, "", None),
                 ("Multiple correlation of the predictors with the criterion", "multiple_r", combined.multiple_r,
                  "coef", None),
                 ("Cross-validated R² (Browne): what the weights explain in new people", "cross_validity",
                  combined.cross_validity, "coef", None)]
    rows += fairness_rows(bias)  # per demographic column: Fairness's readings, DIF's counts (summary_fairness.py)
    rows += _cut_rows(cut_score, standard, content, options)
    r = first_row
    for label, key, figure, style, extra in rows:
        if key is None:
            g.set(r, 1, label, "heading")
            r += 1
            if label == "What is the test worth?":
                r += _validity_caution(ctx, g, r, validity)
            continue
        g.set(r, 1, label)
        if key == "cut":
            g.set(r, 2, "=" + figure.address(SHEET), "score")
            ctx.name("cut", cell(SHEET, r, 2))
        elif figure is not None:
            _figure(ctx, g, r, 2, key, figure, style)
            if isinstance(extra, tuple):
                for col, (extra_key, extra_figure) in zip((3, 4), extra):
                    if extra_figure is not None:
                        _figure(ctx, g, r, col, extra_key, extra_figure, style)
                g.set(r, 5, f"{s.confidence:.0%} interval")
            elif extra is not None:
                g.set(r, 3, "=" + extra.qualified_relative().address(SHEET), style)
                g.set(r, 4, f"(base rate: {utility.base_rate_words})")
        else:
            ctx.not_computable_at(g, r, 2, "not part of this study (see Notes)")
        r += 1
    r += 1 + g.para(r + 1, 1, FORMULAS_OR_VALUES)  # true of a recalc --values copy too (issue 20)
    if d.problems:
        g.para(r + 1, 1, f"{len(d.problems)} problem(s) were found in the data (values outside the item scale, "
                         f"duplicate ids, blank groups and the like); the Notes sheet lists each cell.", "caution")


def _validity_caution(ctx: StudyContext, g, r: int, validity: Validity) -> int:
    """A live line saying that local validity is not established when the observed validity's interval includes
    0 (empty text otherwise), above the utility figures; the rows it takes."""
    return validity_caution(ctx, g, r, validity, "validity_not_established")


def _figure(ctx: StudyContext, g, r: int, c: int, key: str, figure: Ref, style: str) -> None:
    """A link to ``figure``, or why it is not computable."""
    if isinstance(figure.value, TruebandError):
        g.set(r, c, NOT_COMPUTABLE + figure.value.message, "na")
    else:
        g.set(r, c, "=" + figure.qualified_relative().address(SHEET), style)
    ctx.name(f"summary_{key}", cell(SHEET, r, c))


def _cut_rows(cut_score, standard, content, options=None) -> list[tuple]:
    """The headline rows of the cut-score evidence (Options, Cut score, Standard setting, Content), when the study
    has them."""
    rows: list[tuple] = []
    if options is not None:
        rows.append(("Do the answer options work?", None, None, "", None))
        rows.append(("Items with at least one flag on the Options sheet (check the key first)", "items_flagged",
                     options.flagged, "count", None))
    if cut_score is not None or standard is not None:
        rows.append(("Is the cut score defensible?", None, None, "", None))
    if standard is not None and standard.method_cut is not None:
        rows.append(("Cut given by the standard-setting method (Standard setting sheet)", "method_cut",
                     standard.method_cut, "score", None))
        rows.append(("The same cut lowered by k SEM (k and its rationale on that sheet)", "adjusted_cut",
                     standard.adjusted_cut, "score", None))
    if cut_score is not None:
        rows.append(("Decision consistency at the cut: same decision on two sittings", "decision_consistency",
                     cut_score.agreement, "coef", None))
        rows.append(("Classification accuracy at the cut (observed against true pass/fail)",
                     "classification_accuracy", cut_score.accuracy, "coef", None))
        if cut_score.csem is not None:
            rows.append(("Conditional SEM at the cut (Lord's binomial error)", "csem", cut_score.csem, "coef", None))
    if content is not None:
        rows.append(("Do experts judge the items essential to the job?", None, None, "", None))
        rows.append(("Items whose content validity ratio reaches the critical value", "content_pass", content.n_pass,
                     "count", None))
        rows.append(("Content validity index (mean CVR of those items)", "cvi", content.cvi, "coef", None))
    return rows
