"""The study's sheets, one module each: ``write(ctx, <what it needs>) -> <the handles it publishes>``.

The order of the sheets is in these signatures (see :func:`trueband.bridge.study.build.plan`); what crosses
sheets is a frozen dataclass returned by the sheet that makes it.
"""

from . import bands, data_copy, impact, items, notes, raters, reliability, scored_items, setup, summary, utility
from . import validity
from . import combined, content, cut_score, cuts, dif, distractors, fairness, groups, judges, predictors, stages, strata

__all__ = ["bands", "data_copy", "impact", "items", "notes", "raters", "reliability", "scored_items", "setup",
           "summary", "utility", "validity", "strata", "cuts", "groups", "stages", "combined", "dif", "fairness",
           "predictors", "content", "cut_score", "distractors", "judges"]
