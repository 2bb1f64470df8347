"""Combined: several predictors together (written only when the study has more than one).

Intercorrelations; the composite's reliability (Mosier 1943) and validity for unit and regression weights;
the multiple correlation from the raw scores with its adjusted and cross-validated R² (Browne 1975); each
predictor's increment over the others (ΔR² and its F test); the composite's subgroup difference (Sackett &
Ellingson 1997) and its predicted impact ratio at the cut. The raw scores side by side are on the long sheet
``Combined scores`` (one row per person, the rows of Bands), so every range holds a person per row; the criterion
is Bands' column and each group's d reads the whole score column beside the group numbers (``SUBGROUP_D``).
"""

from __future__ import annotations

import dataclasses

import numpy as np

from trueband.funcs.errors import InsufficientDataError

from ..context import Ref, StudyContext, area, cell, fill_row, formula_text
from ..words import CAUTION, COMBINED_CAUTION

__all__ = ["Combined", "write", "SCORES_SHEET"]

SHEET = "Combined"
SCORES_SHEET = "Combined scores"
MIN_GROUP = 2  # people a group needs for its d (COHENS_D's minimum)


@dataclasses.dataclass(frozen=True)
class Combined:
    """Headline cells (``None`` when the study has one predictor)."""

    multiple_r: Ref | None = None
    cross_validity: Ref | None = None
    composite_validity: Ref | None = None
    composite_reliability: Ref | None = None


def write(ctx: StudyContext, predictors: list) -> Combined:
    if len(predictors) < 2:
        return Combined()
    d = ctx.data
    k = len(predictors)
    g = ctx.sheet(SHEET)
    g.widths.update({1: 50, **{c: 16 for c in range(2, 3 + k + 4)}})
    g.set(1, 1, "Predictors combined: " + ", ".join(p.name for p in predictors), "title")
    row = 2 + g.para(2, 1, CAUTION, "caution")
    row += 1 + g.para(row, 1, COMBINED_CAUTION, "caution")
    cols = _scores_sheet(ctx, predictors)
    row, table = _predictors_table(ctx, g, row, predictors, cols)
    row, reliability, validity = _composite(ctx, g, row, table)
    multiple_r = cross = None
    if d.criterion is not None:
        row, multiple_r, cross = _regression(ctx, g, row, predictors, cols)
    _subgroups(ctx, g, row, predictors, cols, table)
    return Combined(multiple_r=multiple_r, cross_validity=cross, composite_validity=validity,
                    composite_reliability=reliability)


def _scores_sheet(ctx: StudyContext, predictors: list) -> dict:
    """The long sheet ``Combined scores``: group number, each predictor's score, then the scores again (so that
    every predictor's "others" are side by side for the regression functions). Returns its ranges; the criterion
    is Bands' own column (no copy), and each group's d reads the score columns beside the group numbers
    (SUBGROUP_D), so no per-group copy of any score is written."""
    d = ctx.data
    k, last = len(predictors), d.n + 1
    first = predictors[0]
    # predictor i's "others" are the columns after it, then the first ones again: the last predictor's others
    # are the first k - 1 columns themselves, so only the first k - 2 are written again
    header = ["Group number", *[p.name for p in predictors], *[f"{p.name} (again)" for p in predictors[:k - 2]]]
    score_col = {i: 2 + i for i in range(k)}
    codes = [first.layout.group_numbers.get(x) for x in d.groups]

    def col(c, value):
        return area(SCORES_SHEET, c, 2, c, last, value=value)

    def text(template, **places):
        return formula_text(template, SCORES_SHEET, **places)

    here = {c: cell(SCORES_SHEET, None, c) for c in range(1, len(header) + 1)}
    templates: list = [None]
    for p in predictors:
        templates.append(text('=IF(COUNT({x})=1,{x},"")', x=dataclasses.replace(
            p.scores, row=None, last_row=None, last_col=None).qualified_relative()))
    for i in range(k - 2):
        templates.append(text("={x}", x=here[score_col[i]]))

    def rows():
        for i in range(d.n):
            r = i + 2
            yield [codes[i]] + [fill_row(t, r) for t in templates[1:]]

    ctx.long_sheets.append((SCORES_SHEET, header, (12, 12), rows, len(header)))
    criterion = first.layout.criterion.with_value(d.criterion) if d.criterion is not None else None
    out = {"groups": col(1, codes), "criterion": criterion,
           "scores": [col(score_col[i], p.data.scores) for i, p in enumerate(predictors)]}
    all_scores = [p.data.scores for p in predictors]
    out["block"] = area(SCORES_SHEET, 2, 2, 1 + k, last, value=np.column_stack(all_scores))
    doubled = all_scores + all_scores[:-1]
    out["others"] = [area(SCORES_SHEET, 3 + i, 2, 1 + i + k, last, value=np.column_stack(doubled[i + 1:i + k]))
                     for i in range(k - 1)]
    out["others"].append(area(SCORES_SHEET, 2, 2, k, last, value=np.column_stack(all_scores[:-1])))
    return out


def _predictors_table(ctx, g, row, predictors, cols):
    """Each predictor's SD, reliability and observed validity (links), and the intercorrelations."""
    k = len(predictors)
    head = ("Predictor", "SD of scores (all applicants)", "Reliability used", "Observed validity r")
    for c, h in enumerate(head, start=1):
        g.set(row, c, h, "header")
    for i, p in enumerate(predictors):
        r = row + 1 + i
        g.set(r, 1, p.name)
        ctx.link(g, r, 2, p.rel.sd, style="coef")
        ctx.link(g, r, 3, p.rel.reliability, style="coef")
        ctx.link(g, r, 4, p.validity.r, style="coef")
    first, last = row + 1, row + k
    rel_values = ([_value(p.rel.sd) for p in predictors], [_value(p.rel.reliability) for p in predictors],
                  [_value(p.validity.r) for p in predictors])
    sds, rels, validities = (area(SHEET, c, first, c, last, value=_vector(v)).with_value(_vector(v), name=what)
                             for c, v, what in zip((2, 3, 4), rel_values, ("every predictor's SD",
                                                                          "every predictor's reliability",
                                                                          "every predictor's observed validity")))
    row = last + 2
    g.set(row, 1, "Intercorrelations (all applicants with both scores)", "heading")
    for i, p in enumerate(predictors):
        g.set(row, 2 + i, p.name, "header")
    matrix = np.eye(k)
    for i, p in enumerate(predictors):
        r = row + 1 + i
        g.set(r, 1, p.name)
        for j in range(k):
            if i == j:
                g.set(r, 2 + j, 1, "coef")
                continue
            a, b = predictors[i].data.scores, predictors[j].data.scores
            both = ~np.isnan(a) & ~np.isnan(b)
            if both.sum() >= 3 and np.std(a[both]) > 0 and np.std(b[both]) > 0:
                matrix[i, j] = float(np.corrcoef(a[both], b[both])[0, 1])
            else:
                matrix[i, j] = np.nan
            ctx.formula(g, r, 2 + j, "CORREL", cols["scores"][i], cols["scores"][j], style="coef",
                        check=lambda v=matrix[i, j]: _correlation(v), key=f"combined_r_{i + 1}_{j + 1}")
    corr = area(SHEET, 2, row + 1, 1 + k, row + k).with_value(None if np.isnan(matrix).any() else matrix,
                                                              name="every intercorrelation")
    return row + k + 2, dict(sds=sds, rels=rels, validities=validities, corr=corr, matrix=matrix, k=k)


def _value(ref: Ref):
    return ref.value if isinstance(ref.value, float) else None


def _vector(values):
    return None if any(v is None for v in values) else values


def _correlation(value: float) -> float:
    if not np.isfinite(value):
        raise InsufficientDataError("fewer than 3 people have both scores, or a score does not vary")
    return value


def _composite(ctx, g, row, t):
    """The composite's reliability and validity, unit and regression weights."""
    k = t["k"]
    g.set(row, 1, "The composite (sum of the predictors' raw scores)", "heading")
    g.set(row, 2, "Unit weights", "header")
    g.set(row, 3, "Regression weights", "header")
    places = [_maybe(t["sds"]), _maybe(t["rels"]), _maybe(t["validities"]), _maybe(t["corr"])]
    sds, rels, validities, corr = places
    g.set(row + 1, 1, "Regression weight of each predictor's raw score (β / SD)")
    beta = _beta(t)
    for i in range(k):
        if isinstance(beta, Exception):
            ctx.not_computable_at(g, row + 1, 4 + i, beta.message)
            continue
        text = "INDEX(MMULT(MINVERSE({corr}),{validities}),{i})/INDEX({sds},{i})"
        ctx.expression(g, row + 1, 4 + i, text, lambda v=beta[i]: v, style="coef", corr=corr,
                       validities=validities, sds=sds, i=i + 1)
    g.set(row, 4, "Raw-score regression weights, in predictor order", "header")
    w_range = area(SHEET, 4, row + 1, 3 + k, row + 1)
    g.set(row + 2, 1, "Composite reliability (Mosier 1943)")
    reliability = ctx.formula(g, row + 2, 2, "COMPOSITE_RELIABILITY", sds, rels, corr, style="coef",
                              key="composite_reliability")
    ctx.formula(g, row + 2, 3, "COMPOSITE_RELIABILITY", sds, rels, corr, w_range.with_value(beta), style="coef",
                key="composite_reliability_regression")
    g.set(row + 3, 1, "Composite validity (from the observed validities and the intercorrelations)")
    validity = ctx.formula(g, row + 3, 2, "COMPOSITE_VALIDITY", sds, validities, corr, style="coef",
                           key="composite_validity")
    ctx.formula(g, row + 3, 3, "COMPOSITE_VALIDITY", sds, validities, corr, "regression", style="coef",
                key="composite_validity_regression")
    g.para(row + 4, 1, "The validities come from the people with a criterion value, the SDs and intercorrelations "
                       "from all applicants; the multiple correlation below uses only the people with every score "
                       "and a criterion value.")
    return row + 6, reliability, validity


def _maybe(ref: Ref) -> Ref:
    return ref if ref.value is not None else ref.with_value(InsufficientDataError(f"{ref.name} is not computable"))


def _beta(t):
    """Raw-score regression weights β / SD, for the check of the regression-weighted reliability."""
    v, sds, m = t["validities"].value, t["sds"].value, t["matrix"]
    if v is None or sds is None or np.isnan(m).any():
        return InsufficientDataError("the regression weights need every validity, SD and intercorrelation")
    try:
        return (np.linalg.solve(m, np.asarray(v, float)) / np.asarray(sds, float)).tolist()
    except np.linalg.LinAlgError:
        return InsufficientDataError("the intercorrelations are singular")


def _regression(ctx, g, row, predictors, cols):
    """Multiple R, its shrinkage estimates, and each predictor's increment over the others."""
    d = ctx.data
    k = len(predictors)
    x = np.column_stack([p.data.scores for p in predictors])
    complete = ~np.isnan(d.criterion) & ~np.isnan(x).any(axis=1)
    n = int(complete.sum())
    g.set(row, 1, "Regression of the criterion on the predictors (people with every score and a criterion value)",
          "heading")
    g.set(row + 1, 1, "People with every score and a criterion value")
    isnumber = "*".join(f"ISNUMBER({{s{i}}})" for i in range(k))
    n_ref = ctx.expression(g, row + 1, 2, "SUMPRODUCT(ISNUMBER({c})*" + isnumber + ")", lambda: n, style="count",
                           key="combined_n", c=cols["criterion"], **{f"s{i}": s for i, s in enumerate(cols["scores"])})
    g.set(row + 2, 1, "Multiple correlation R (least-squares weights)")
    multiple_r = ctx.formula(g, row + 2, 2, "MULTIPLE_R", cols["criterion"], cols["block"], style="coef",
                             key="multiple_r")
    g.set(row + 3, 1, "R²")
    r2 = ctx.expression(g, row + 3, 2, "{r}^2", lambda: ctx.value(multiple_r) ** 2, style="coef", key="r2",
                        r=multiple_r)
    g.set(row + 4, 1, "Adjusted R² (Ezekiel/Wherry: the population's R²)")
    ctx.formula(g, row + 4, 2, "ADJUSTED_R2", r2, n_ref, k, style="coef", key="adjusted_r2")
    g.set(row + 5, 1, "Cross-validated R² (Browne 1975: these weights in new people)")
    cross = ctx.formula(g, row + 5, 2, "CROSS_VALIDITY", r2, n_ref, k, style="coef", key="cross_validity")
    r = row + 7
    for c, h in enumerate(("Incremental validity over the other predictors", "ΔR²", "F", "p"), start=1):
        g.set(r, c, h, "header")
    for i, p in enumerate(predictors):
        g.set(r + 1 + i, 1, p.name)
        for c, part in ((2, "delta_r2"), (3, "f"), (4, "p")):
            ctx.formula(g, r + 1 + i, c, "INCREMENTAL_R2", cols["criterion"], cols["others"][i], cols["scores"][i],
                        part, style="p" if part == "p" else "coef", key=f"incremental_{part}_{i + 1}")
    return r + k + 2, multiple_r, cross


def _subgroups(ctx, g, row, predictors, cols, t) -> None:
    """Each group's d on each predictor, the composite's d and its predicted impact ratio at the first cut."""
    first = predictors[0]
    numbers = first.layout.group_numbers
    k = len(predictors)
    g.set(row, 1, "Subgroup differences (Sackett & Ellingson 1997)", "heading")
    if len(numbers) < 2:
        ctx.not_computable_at(g, row + 1, 1, "needs a group column with at least two groups", key="composite_d")
        return
    d = ctx.data
    counts = {name: sum(1 for x in d.groups if x == name) for name in numbers}
    reference = ctx.setup.reference_group
    from trueband.funcs.impact import group_key

    reference = next((n for n in numbers if reference and group_key(n) == group_key(reference)),
                     max(numbers, key=lambda n: counts[n]))
    g.set(row + 1, 1, "Reference group (d is its mean minus the group's, in pooled SDs)")
    g.set(row + 1, 2, reference, "header")
    g.set(row + 2, 1, "Mean intercorrelation of the predictors")
    m = t["matrix"]
    mean_r = ctx.expression(g, row + 2, 2, "(SUM({corr})-{k})/({k}*({k}-1))",
                            lambda: float((np.nansum(m) - k) / (k * (k - 1))), style="coef", corr=t["corr"], k=k)
    selected = first.bands.layout.selected
    scores = first.data.scores
    in_ref = np.array([x == reference for x in d.groups]) & ~np.isnan(scores)
    chosen, applicants = int((scores[in_ref] >= first.setup.cut).sum()), int(in_ref.sum())
    g.set(row + 3, 1, f"Selection rate of {reference} at the cut of {first.name} (Impact's count)")
    rate = ctx.expression(g, row + 3, 2, 'COUNTIFS({groups},{n},{sel},1)/COUNTIFS({groups},{n},{sel},">=0")',
                          lambda: chosen / applicants, style="coef", groups=first.group_numbers,
                          n=numbers[reference], sel=selected)
    r = row + 5
    head = ["Group", *[f"d, {p.name}" for p in predictors], "Composite d", "Predicted impact ratio"]
    for c, h in enumerate(head, start=1):
        g.set(r, c, h, "header")
    for name in numbers:
        if name == reference or counts[name] < MIN_GROUP:
            continue
        r += 1
        g.set(r, 1, name)
        each = [ctx.formula(g, r, 2 + i, "SUBGROUP_D", cols["scores"][i], cols["groups"], numbers[reference],
                            numbers[name], style="coef", key=f"d_{i + 1}_{name}") for i in range(k)]
        ds = area(SHEET, 2, r, 1 + k, r, value=[x.value for x in each])
        if not all(isinstance(x.value, float) for x in each):
            ds = ds.with_value(InsufficientDataError("a predictor's d is not computable"))
        composite_d = ctx.formula(g, r, 2 + k, "COMPOSITE_D", ds, mean_r, style="coef", key=f"composite_d_{name}")
        ctx.expression(g, r, 3 + k, "(1-NORMSDIST(NORMSINV(1-{p})+{d}))/{p}", _impact_check(ctx, rate, composite_d),
                       style="coef", key=f"composite_impact_{name}", p=rate, d=composite_d)
    g.para(r + 2, 1, "The predicted impact ratio assumes normal composite scores with equal spread in both groups, "
                     "a cut that selects the reference group's share shown above, and unit weights on standardised "
                     "scores; it indicates what combining the predictors may do, not what a selection will show.")


def _impact_check(ctx, rate, composite_d):
    def check():
        from scipy.stats import norm

        p, dc = ctx.value(rate), ctx.value(composite_d)
        if not 0 < p < 1:
            raise InsufficientDataError("the reference group's selection rate is 0 or 1 at the cut")
        return float(norm.sf(norm.isf(p) + dc) / p)
    return check
