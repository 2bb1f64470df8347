"""Fixed wording of the validation study, kept apart from the builder so the command line loads it cheaply."""

from __future__ import annotations

from trueband.funcs.cautions import CAUTION  # the one general caution, shared by every way in

__all__ = ["CAUTION", "NOT_COMPUTABLE"]

#: What a study cell shows, before the reason, when its figure cannot be computed from the data.
NOT_COMPUTABLE = "not computable: "

# ---------------------------------------------------------------- fairness, item bias and combined predictors

__all__ += ["FAIRNESS_CAUTION", "FAIRNESS_READING", "DIF_CAUTION", "DIF_SIZES", "COMBINED_CAUTION"]

#: Above the Fairness sheet's figures (Aguinis, Culpepper & Pierce 2010, J. Applied Psychology 95, 648-680).
FAIRNESS_CAUTION = (
    "These tests have little power in samples of the size of most local studies (Aguinis, Culpepper & Pierce "
    "2010): a slope or intercept difference that is not significant here does not show that the score predicts "
    "alike for the groups, only that this sample cannot tell. Read the lines, their intervals and the gap at the "
    "cut, not the p values alone; differential prediction is one piece of fairness evidence, not a legal finding.")

#: Below the lines: how the step-down tests are read (Lautenschlager & Mendoza 1986).
FAIRNESS_READING = (
    "Reading the steps: first the slopes; when they differ, the lines cross and the gap at the cut is the figure "
    "to read. When the slopes do not differ detectably, the intercept test asks whether one group's line lies "
    "above the other's. A positive gap means the common line predicts a higher criterion for that group's people "
    "at the cut than their own line does (over-prediction); a negative gap, under-prediction. The criterion "
    "itself may be measured unfairly: these tests take it as given.")

#: Above the DIF sheet's figures.
DIF_CAUTION = (
    "A DIF flag says that people of two groups with the same total score answer an item differently more often "
    "than chance explains. It is a reason to have the item's content reviewed, not a finding that the item is "
    "biased; an item without a flag is not thereby shown to be fair, since these tests have little power in "
    "small groups.")

#: The group sizes the DIF sheet states (Zwick 2012, ETS RR-12-08, reviews the sizes used in practice).
DIF_SIZES = (
    "Group sizes: the study compares a group only when it has at least {minimum} people with every item answered "
    "(and so does the reference group). Operational DIF programmes use a few hundred people per group or more "
    "(Zwick 2012); below that the categories are rough and a C or B item deserves review rather than removal.")

#: Above the Combined sheet's figures.
COMBINED_CAUTION = (
    "Figures for the predictors combined rest on the people who have every predictor's score and a criterion "
    "value. Regression weights fitted in one sample predict less well in the next (the cross-validated R² "
    "estimates how much less); the composite's subgroup difference and impact ratio assume normal scores with "
    "equal spread in the groups and are indicators, not a prediction of any actual selection.")
