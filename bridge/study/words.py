"""Fixed wording of the validation study, kept apart from the builder so the command line loads it cheaply."""

from __future__ import annotations

from trueband.funcs.cautions import CAUTION  # the one general caution, shared by every way in

__all__ = ["CAUTION", "NOT_COMPUTABLE"]

#: What a study cell shows, before the reason, when its figure cannot be computed from the data.
NOT_COMPUTABLE = "not computable: "

# ---------------------------------------------------------------- the cut-score evidence (Cut score, Standard
# setting and Content sheets)

#: Above the figures of the Cut score sheet.
CUT_SCORE_CAUTION = (
    "These figures describe how precisely the test sorts people at the cut; they are statistical indicators "
    "under stated models, not legal findings. They do not show that the cut is job-related or that it is set "
    "at the right level: that rests on the standard-setting record and the validity evidence.")

#: Beside the two models of decision accuracy.
MODELS_NOTE = (
    "Headline: the beta-binomial model (Huynh 1976; Hanson & Brennan 1990), suited to number-correct scores on "
    "right/wrong items. Quick screen: the bivariate-normal approximation (Peng & Subkoviak 1980), which needs only "
    "the mean, SD and reliability but treats the scores as continuous and unbounded; where the two differ, "
    "report the beta-binomial figure.")

#: Below the sliding band.
SLIDING_BAND_CAUTION = (
    "A sliding band starts at the highest score still in contention; its floor is that score minus the band "
    "width. As the top scorers are chosen the top, and with it the floor, moves down. Choosing within a band "
    "by anything other than the score is a policy decision, not a neutral one: preferring a group within a band "
    "can itself be challenged, and in the US adjusting scores or cut-offs by race, colour, religion, sex or "
    "national origin is unlawful (Civil Rights Act of 1991, section 106, 42 U.S.C. 2000e-2(l)).")

#: On the Standard setting sheet.
STANDARD_SETTING_CAUTION = (
    "The cuts below are what each method's arithmetic gives from the judges' ratings; a method does not make a "
    "cut defensible by itself. The record must show who the judges were, how they were trained, what they were "
    "told about the minimally competent candidate and why this cut was chosen (Uniform Guidelines, 29 CFR "
    "1607.5(H) and 1607.15(B)).")

#: The marked place for the reasons only a person can give.
RATIONALE_PLACE = ("RATIONALE (to be written by the person responsible, not by trueband): why this method, "
                   "these judges and this cut; what the SEM adjustment, if any, is meant to achieve.")

#: On the Content sheet.
CONTENT_CAUTION = (
    "The content validity ratio shows how many subject-matter experts rated an item essential to the job; it "
    "is evidence about the items' content, not about how well the scores predict performance, and it rests on "
    "a job analysis the ratings must be linked to. A small panel cannot reach the critical value at all.")
